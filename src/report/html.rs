//! A rendered document as one self-contained HTML page.

/// The HTML page of a rendered document: `markdown` is the rendering,
/// `figures` the (relative path, SVG) pairs it links.
pub fn page(title: &str, markdown: &str, figures: &[(String, String)]) -> String {
    let _ = figures;
    let mut options = comrak::Options::default();
    options.extension.table = true;
    let body = comrak::markdown_to_html(markdown, &options);
    format!(
        "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n<title>{}</title>\n</head>\n<body>\n{body}</body>\n</html>\n",
        super::markdown::escape(title)
    )
}
