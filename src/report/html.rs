//! A rendered document as one self-contained HTML page.
//!
//! comrak turns the rendered Markdown into HTML with its safe defaults: raw
//! HTML in the document is omitted (it never becomes live markup) and links
//! with dangerous schemes (`javascript:` and the like) lose their target.
//! Three things differ from comrak's own output, through a node formatter of
//! ours:
//!
//! * an image whose source is one of the document's figures becomes that
//!   figure's SVG, inline and sanitised ([`sanitise_svg`]), so the page needs
//!   no file beside it;
//! * any other image, unless it is held inline in the page (a `data:` image),
//!   becomes a link to it: the page loads nothing from elsewhere, and its
//!   content policy allows inline images only;
//! * inline code holding a long unbroken token (a SHA-256 hash) is marked,
//!   so the style sheet lets it break anywhere instead of pushing the page
//!   wider than the screen;
//! * every table sits in a wrapper that scrolls sideways when the table is
//!   wider than the screen;
//! * covey's region markers become sections, so the page can set generated
//!   output apart from the author's prose.
//!
//! The style sheet is inline and covey's own; the page has no scripts and
//! loads nothing from anywhere.

use std::fmt::{self, Write};

use comrak::html::{format_document_with_formatter, format_node_default, ChildRendering, Context};
use comrak::nodes::{AstNode, NodeValue};
use comrak::options::Plugins;

use crate::document::{OUTPUT_BEGIN, OUTPUT_END, PROVENANCE_BEGIN, PROVENANCE_END};

/// The HTML page of a rendered document: `markdown` is the rendering,
/// `figures` the (relative path, SVG) pairs it links. YAML front matter is
/// left out of the page; the page's title is the front matter's `title`
/// ([`crate::document::front_matter::title`]), else the text of the
/// document's first heading, else `name` (the document's file name).
pub fn page(name: &str, markdown: &str, figures: &[(String, String)]) -> String {
    use crate::document::front_matter;
    let (yaml, markdown) = match front_matter::front_matter(markdown) {
        Some((yaml, end)) => (Some(yaml), markdown.get(end..).unwrap_or("")),
        None => (None, markdown),
    };
    let (body, heading) = body(markdown, figures);
    let title = yaml
        .and_then(front_matter::title)
        .or(heading)
        .unwrap_or_else(|| name.to_string());
    format!(
        "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n\
         <meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n\
         <meta http-equiv=\"Content-Security-Policy\" content=\"{POLICY}\">\n\
         <meta name=\"generator\" content=\"covey {}\">\n\
         <title>{}</title>\n<style>\n{STYLE}</style>\n</head>\n<body>\n<main>\n{body}</main>\n</body>\n</html>\n",
        env!("CARGO_PKG_VERSION"),
        escape(&crate::report::visible::visible(&title))
    )
}

/// The page's content security policy, a second line of defence behind the
/// escaping: no scripts, frames, plugins, fonts or fetches at all; the inline
/// style sheet; images only when held in the page itself (`data:`).
const POLICY: &str = "default-src 'none'; style-src 'unsafe-inline'; img-src data:; \
                      base-uri 'none'; form-action 'none'";

/// The body of the page: the Markdown as HTML, with figures inline; and the
/// text of the first heading, if there is one with any text.
fn body(markdown: &str, figures: &[(String, String)]) -> (String, Option<String>) {
    let options = options();
    let arena = comrak::Arena::new();
    let root = comrak::parse_document(&arena, markdown, &options);
    images_to_links(&arena, root, figures);
    let heading = root
        .descendants()
        .filter(|n| matches!(n.data().value, NodeValue::Heading(_)))
        .map(|n| alt_text(n).split_whitespace().collect::<Vec<_>>().join(" "))
        .find(|t| !t.is_empty());
    let mut out = String::new();
    let state = State {
        figures,
        region: None,
    };
    let plugins = Plugins::default();
    let html = match format_document_with_formatter(
        root,
        &options,
        &mut out,
        &plugins,
        format_node,
        state,
    ) {
        Ok(_) => out,
        // Writing into a String cannot fail, and neither can our formatter;
        // should comrak ever report an error, the reader still gets the
        // text, escaped.
        Err(fmt::Error) => format!("<pre>{}</pre>\n", escape(markdown)),
    };
    (html, heading)
}

/// Whether an image's address names the figure drawn at `path`: as covey links it
/// (percent-encoded), or as written by hand.
fn is_figure(url: &str, path: &str) -> bool {
    url == crate::report::markdown::destination(path) || url == path
}

/// Turns every image that is neither one of the run's figures nor held in the page (an image
/// `data:` address that comrak lets through) into a link to the same address, with the image's
/// description as its text (the address itself when there is none): a reader can still follow
/// it, and the page fetches nothing.
fn images_to_links<'a>(
    arena: &'a comrak::Arena<'a>,
    root: &'a AstNode<'a>,
    figures: &[(String, String)],
) {
    for node in root.descendants() {
        let link = match &node.data().value {
            NodeValue::Image(link) => link.clone(),
            _ => continue,
        };
        let figure = figures.iter().any(|(path, _)| is_figure(&link.url, path));
        let inline = link.url.starts_with("data:image/") && !comrak::html::dangerous_url(&link.url);
        if figure || inline {
            continue;
        }
        let url = link.url.clone();
        node.data_mut().value = NodeValue::Link(link);
        if node.first_child().is_none() {
            let text = arena.alloc(AstNode::from(NodeValue::Text(url.into())));
            node.append(text);
        }
    }
}

/// comrak's options: GitHub tables (covey's results are tables), everything
/// else at comrak's defaults, which keep raw HTML out (`render.unsafe` off).
fn options() -> comrak::Options<'static> {
    let mut options = comrak::Options::default();
    options.extension.table = true;
    options
}

/// What the formatter carries through the document.
struct State<'f> {
    figures: &'f [(String, String)],
    /// The covey region open at the top level, if any.
    region: Option<Region>,
}

/// A region of generated text.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Region {
    Output,
    Provenance,
}

impl Region {
    fn class(self) -> &'static str {
        match self {
            Region::Output => "covey-output",
            Region::Provenance => "covey-provenance",
        }
    }
}

/// What a top-level HTML block is, if it is one of covey's markers.
fn marker(literal: &str) -> Option<(Region, bool)> {
    match literal.trim() {
        OUTPUT_BEGIN => Some((Region::Output, true)),
        OUTPUT_END => Some((Region::Output, false)),
        PROVENANCE_BEGIN => Some((Region::Provenance, true)),
        PROVENANCE_END => Some((Region::Provenance, false)),
        _ => None,
    }
}

/// comrak's node formatter, with figures inlined, tables wrapped and covey's
/// markers turned into sections; every other node as comrak renders it.
fn format_node<'a>(
    context: &mut Context<State<'_>>,
    node: &'a AstNode<'a>,
    entering: bool,
) -> Result<ChildRendering, fmt::Error> {
    enum Kind {
        Figure(usize),
        LongCode(String),
        Table,
        Marker(Region, bool),
        Document,
        Other,
    }
    let kind = {
        let data = node.data();
        match &data.value {
            NodeValue::Image(link) => context
                .user
                .figures
                .iter()
                .position(|(path, _)| is_figure(&link.url, path))
                .map_or(Kind::Other, Kind::Figure),
            NodeValue::Table(_) => Kind::Table,
            NodeValue::Code(code) if has_long_token(&code.literal) => {
                Kind::LongCode(code.literal.clone())
            }
            NodeValue::HtmlBlock(block)
                if node
                    .parent()
                    .is_some_and(|p| matches!(p.data().value, NodeValue::Document)) =>
            {
                marker(&block.literal).map_or(Kind::Other, |(r, begin)| Kind::Marker(r, begin))
            }
            NodeValue::Document => Kind::Document,
            _ => Kind::Other,
        }
    };
    match kind {
        Kind::Figure(i) => {
            if entering {
                let svg = context
                    .user
                    .figures
                    .get(i)
                    .map_or("", |(_, svg)| svg.as_str());
                let html = format!(
                    "<span class=\"figure\" role=\"img\" aria-label=\"{}\">{}</span>",
                    escape(&alt_text(node)),
                    sanitise_svg(svg)
                );
                context.write_str(&html)?;
            }
            Ok(ChildRendering::Skip)
        }
        Kind::LongCode(literal) => {
            if entering {
                let html = format!("<code class=\"unbroken\">{}</code>", escape(&literal));
                context.write_str(&html)?;
            }
            Ok(ChildRendering::Skip)
        }
        Kind::Table => {
            if entering {
                context.cr()?;
                context.write_str("<div class=\"table-scroll\">")?;
                format_node_default(context, node, entering)
            } else {
                let r = format_node_default(context, node, entering)?;
                context.write_str("</div>\n")?;
                Ok(r)
            }
        }
        Kind::Marker(region, begin) => {
            if entering {
                match (context.user.region, begin) {
                    (None, true) => {
                        context.cr()?;
                        context.write_str(&format!("<section class=\"{}\">\n", region.class()))?;
                        context.user.region = Some(region);
                    }
                    (Some(open), false) if open == region => {
                        context.cr()?;
                        context.write_str("</section>\n")?;
                        context.user.region = None;
                    }
                    // A stray marker (the pipeline never writes one) is a
                    // comment and shows nothing.
                    _ => {}
                }
            }
            Ok(ChildRendering::Skip)
        }
        Kind::Document => {
            let r = format_node_default(context, node, entering)?;
            if !entering && context.user.region.take().is_some() {
                context.cr()?;
                context.write_str("</section>\n")?;
            }
            Ok(r)
        }
        Kind::Other => format_node_default(context, node, entering),
    }
}

/// The length from which a run of characters without a space counts as a
/// long token: a SHA-256 hash has 64, while names and paths in covey's
/// documents are mostly far shorter than this.
const LONG_TOKEN: usize = 40;

/// Whether `text` holds a run of at least [`LONG_TOKEN`] characters without
/// whitespace.
fn has_long_token(text: &str) -> bool {
    text.split_whitespace()
        .any(|word| word.chars().count() >= LONG_TOKEN)
}

/// The alternative text of an image node: the text of its description (and
/// the text of any other node: a heading's, for the page title).
fn alt_text<'a>(node: &'a AstNode<'a>) -> String {
    let mut alt = String::new();
    for d in node.descendants() {
        match &d.data().value {
            NodeValue::Text(t) => alt.push_str(t),
            NodeValue::Code(c) => alt.push_str(&c.literal),
            NodeValue::SoftBreak | NodeValue::LineBreak => alt.push(' '),
            _ => {}
        }
    }
    alt
}

/// Text escaped for HTML, in element content and in quoted attribute values.
pub fn escape(text: &str) -> String {
    let mut out = String::with_capacity(text.len() + 8);
    for c in text.chars() {
        match c {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&#39;"),
            c => out.push(c),
        }
    }
    out
}

/// Elements dropped with everything inside them: scripts; `foreignObject`,
/// which can hold any HTML; and style sheets, which inside an inline SVG
/// would restyle the whole page and could fetch from elsewhere.
const DROPPED_ELEMENTS: [&str; 3] = ["script", "foreignobject", "style"];

/// An SVG made fit to sit inside the page. covey draws its figures itself,
/// so this is a guard, not a filter for hostile input: it drops comments,
/// processing instructions and declarations, the elements in
/// [`DROPPED_ELEMENTS`], event handler attributes (`on...`), links that leave
/// the figure (`href`, `xlink:href` or `src` not starting with `#`), style
/// attributes that load something (`url(` other than `url(#`), and the
/// `xmlns` declarations an HTML parser ignores. Everything else is copied
/// exactly: text and attribute values are already escaped in an SVG file.
pub fn sanitise_svg(svg: &str) -> String {
    let mut out = String::with_capacity(svg.len());
    let mut rest = svg;
    // The element being dropped and how deeply it nests in itself.
    let mut dropping: Option<(String, usize)> = None;
    while let Some(lt) = rest.find('<') {
        let (text, tail) = rest.split_at(lt);
        if dropping.is_none() {
            out.push_str(text);
        }
        if let Some(after) = skip_special(tail) {
            rest = after;
            continue;
        }
        let Some((tag, after)) = Tag::parse(tail) else {
            // A lone `<` is text.
            if dropping.is_none() {
                out.push_str("&lt;");
            }
            rest = tail.get(1..).unwrap_or("");
            continue;
        };
        rest = after;
        let name = tag.local_name();
        if let Some((dropped, depth)) = &mut dropping {
            if name == *dropped && !tag.self_closing {
                if tag.closing {
                    *depth -= 1;
                } else {
                    *depth += 1;
                }
                if *depth == 0 {
                    dropping = None;
                }
            }
            continue;
        }
        if DROPPED_ELEMENTS.contains(&name.as_str()) {
            if !tag.closing && !tag.self_closing {
                dropping = Some((name, 1));
            }
            continue;
        }
        tag.write(&mut out);
    }
    if dropping.is_none() {
        out.push_str(rest);
    }
    out
}

/// Skips a comment, a processing instruction, a CDATA section or a
/// declaration at the start of `tail`; returns what follows it.
fn skip_special(tail: &str) -> Option<&str> {
    let (start, end) = if tail.starts_with("<!--") {
        ("<!--", "-->")
    } else if tail.starts_with("<![CDATA[") {
        ("<![CDATA[", "]]>")
    } else if tail.starts_with("<?") {
        ("<?", ">")
    } else if tail.starts_with("<!") {
        ("<!", ">")
    } else {
        return None;
    };
    let body = tail.get(start.len()..).unwrap_or("");
    Some(
        body.find(end)
            .and_then(|e| body.get(e + end.len()..))
            .unwrap_or(""),
    )
}

/// A start or end tag of the SVG, as written.
struct Tag<'s> {
    closing: bool,
    self_closing: bool,
    name: &'s str,
    /// Attributes as (name, value with its quote character).
    attributes: Vec<(&'s str, Option<(&'s str, char)>)>,
}

impl<'s> Tag<'s> {
    /// Reads the tag at the start of `s` (which starts with `<`); returns it
    /// and the text after it, or `None` when `s` does not start a tag.
    fn parse(s: &'s str) -> Option<(Tag<'s>, &'s str)> {
        let mut rest = s.strip_prefix('<')?;
        let closing = rest.starts_with('/');
        if closing {
            rest = rest.get(1..)?;
        }
        let name_len = rest
            .find(|c: char| !(c.is_ascii_alphanumeric() || matches!(c, ':' | '_' | '-' | '.')))
            .unwrap_or(rest.len());
        if name_len == 0 || !rest.starts_with(|c: char| c.is_ascii_alphabetic()) {
            return None;
        }
        let (name, mut rest) = rest.split_at(name_len);
        let mut attributes = Vec::new();
        loop {
            rest = rest.trim_start();
            if let Some(after) = rest.strip_prefix("/>") {
                let tag = Tag {
                    closing,
                    self_closing: true,
                    name,
                    attributes,
                };
                return Some((tag, after));
            }
            if let Some(after) = rest.strip_prefix('>') {
                let tag = Tag {
                    closing,
                    self_closing: false,
                    name,
                    attributes,
                };
                return Some((tag, after));
            }
            if let Some(after) = rest.strip_prefix('/') {
                rest = after;
                continue;
            }
            let len = rest
                .find(|c: char| c.is_whitespace() || matches!(c, '=' | '>' | '/' | '"' | '\''))
                .unwrap_or(rest.len());
            if len == 0 {
                // A quote where a name should be: not a tag we can read.
                return None;
            }
            let (attr, after) = rest.split_at(len);
            rest = after.trim_start();
            let Some(after_eq) = rest.strip_prefix('=') else {
                attributes.push((attr, None));
                continue;
            };
            rest = after_eq.trim_start();
            let quote = rest.chars().next()?;
            if quote == '"' || quote == '\'' {
                let inner = rest.get(1..)?;
                let end = inner.find(quote)?;
                attributes.push((attr, Some((inner.get(..end)?, quote))));
                rest = inner.get(end + 1..)?;
            } else {
                let end = rest
                    .find(|c: char| c.is_whitespace() || c == '>')
                    .unwrap_or(rest.len());
                let (value, after) = rest.split_at(end);
                attributes.push((attr, Some((value, '"'))));
                rest = after;
            }
        }
    }

    /// The element's name without a namespace prefix, in lower case.
    fn local_name(&self) -> String {
        local(self.name).to_ascii_lowercase()
    }

    /// Writes the tag with the attributes that may stay.
    fn write(&self, out: &mut String) {
        out.push('<');
        if self.closing {
            out.push('/');
        }
        out.push_str(self.name);
        for (name, value) in &self.attributes {
            if !keep_attribute(name, value.map(|(v, _)| v)) {
                continue;
            }
            out.push(' ');
            out.push_str(name);
            if let Some((v, quote)) = value {
                out.push('=');
                out.push(*quote);
                if *quote == '"' {
                    out.push_str(&v.replace('"', "&quot;"));
                } else {
                    out.push_str(v);
                }
                out.push(*quote);
            }
        }
        out.push_str(if self.self_closing { "/>" } else { ">" });
    }
}

/// A name without its namespace prefix.
fn local(name: &str) -> &str {
    name.rsplit(':').next().unwrap_or(name)
}

/// Whether an attribute of an SVG element may stay (see [`sanitise_svg`]).
fn keep_attribute(name: &str, value: Option<&str>) -> bool {
    let lower = name.to_ascii_lowercase();
    let local = local(&lower);
    if local.starts_with("on") || lower == "xmlns" || lower.starts_with("xmlns:") {
        return false;
    }
    let value = value.unwrap_or("").trim().to_ascii_lowercase();
    if matches!(local, "href" | "src") {
        return value.starts_with('#');
    }
    if local == "style" {
        return !value.replace("url(#", "").contains("url(");
    }
    true
}

/// covey's style sheet: a serif body at a reading width, sans-serif
/// headings, tables ruled lightly with tabular digits, generated output set
/// off by a rule at its left, a print layout that keeps tables and figures
/// whole, and a narrow-screen layout where wide tables scroll.
const STYLE: &str = r#":root {
  --ink: #1e2226;
  --muted: #5d656d;
  --rule: #d8dce0;
  --hairline: #eceef1;
  --accent: #7b4a2a;
  --paper-tint: #f7f5f1;
  --code-tint: #f3f1ed;
  --link: #1d5b86;
}
html { background: #fff; }
body {
  margin: 0 auto;
  max-width: 46rem;
  padding: 2.5rem 1.5rem 4rem;
  color: var(--ink);
  font-family: Charter, "Bitstream Charter", "Sitka Text", Cambria, Georgia, "DejaVu Serif", serif;
  font-size: 1.0625rem;
  line-height: 1.6;
  -webkit-text-size-adjust: 100%;
  text-size-adjust: 100%;
}
h1, h2, h3, h4, h5, h6, th, .covey-output::before {
  font-family: "Avenir Next", "Segoe UI", "Helvetica Neue", "DejaVu Sans", Arial, sans-serif;
}
h1 {
  font-size: 1.85rem;
  line-height: 1.25;
  margin: 1.75rem 0 1.25rem;
  padding-bottom: 0.5rem;
  border-bottom: 3px double var(--accent);
}
h2 { font-size: 1.35rem; line-height: 1.3; margin: 2.5rem 0 0.75rem; color: var(--accent); }
h3 { font-size: 1.12rem; margin: 2rem 0 0.5rem; }
h4, h5, h6 { font-size: 1rem; margin: 1.5rem 0 0.5rem; }
p, ul, ol, blockquote { margin: 0.8rem 0; }
a { color: var(--link); text-underline-offset: 0.15em; }
blockquote { margin-left: 0; padding-left: 1rem; border-left: 3px solid var(--rule); color: var(--muted); }
hr { border: 0; border-top: 1px solid var(--rule); margin: 2rem 0; }
code, pre {
  font-family: "DejaVu Sans Mono", Menlo, Consolas, "Liberation Mono", monospace;
}
code { font-size: 0.86em; background: var(--code-tint); padding: 0.05em 0.3em; border-radius: 3px; }
pre {
  background: var(--code-tint);
  padding: 0.75rem 1rem;
  overflow-x: auto;
  border-radius: 4px;
  line-height: 1.45;
}
pre code { font-size: 0.85rem; background: none; padding: 0; }
pre:has(> code.language-covey) { border-left: 3px solid var(--accent); }
.covey-provenance {
  font-size: 0.88rem;
  color: var(--muted);
  background: var(--paper-tint);
  border-radius: 4px;
  padding: 0.25rem 1rem;
  margin: 0 0 2rem;
}
.covey-output {
  border-left: 2px solid var(--rule);
  padding-left: 1rem;
  margin: 0.5rem 0 1.75rem;
}
.covey-output::before {
  content: "output";
  display: block;
  padding-top: 0.25rem;
  font-size: 0.7rem;
  font-weight: 600;
  letter-spacing: 0.1em;
  text-transform: uppercase;
  color: var(--muted);
}
.table-scroll { overflow-x: auto; margin: 0.6rem 0 1.25rem; }
table {
  border-collapse: collapse;
  font-size: 0.92rem;
  line-height: 1.35;
  font-variant-numeric: tabular-nums lining-nums;
  border-top: 1.5px solid var(--ink);
  border-bottom: 1.5px solid var(--ink);
}
th, td { padding: 0.3rem 0.75rem; text-align: left; vertical-align: baseline; }
th { font-size: 0.85rem; font-weight: 600; vertical-align: bottom; border-bottom: 1px solid var(--ink); }
tbody tr + tr td { border-top: 1px solid var(--hairline); }
th[align="right"], td[align="right"] { text-align: right; }
td[align="right"] { white-space: nowrap; }
th[align="center"], td[align="center"] { text-align: center; }
main { overflow-wrap: break-word; }
code.unbroken { overflow-wrap: anywhere; }
.figure { display: block; margin: 0.75rem 0 1.5rem; }
.figure svg { display: block; max-width: 100%; height: auto; margin: 0 auto; }
img { max-width: 100%; height: auto; }
@media (max-width: 600px) {
  body { padding: 1.25rem 0.9rem 3rem; font-size: 1rem; line-height: 1.55; }
  h1 { font-size: 1.45rem; }
  h2 { font-size: 1.2rem; margin-top: 2rem; }
  .covey-output { padding-left: 0.6rem; }
  .table-scroll { overflow-x: auto; -webkit-overflow-scrolling: touch; }
  table { font-size: 0.85rem; }
  th, td { padding: 0.25rem 0.5rem; }
  td code.unbroken { overflow-wrap: normal; }
  pre { padding: 0.6rem 0.7rem; }
}
@page { margin: 18mm 16mm; }
@media print {
  body { max-width: none; padding: 0; font-size: 10.5pt; color: #000; }
  a { color: inherit; }
  .table-scroll { overflow: visible; }
  table, .figure, pre, blockquote { break-inside: avoid; page-break-inside: avoid; }
  h1, h2, h3, h4 { break-after: avoid; page-break-after: avoid; }
  thead { display: table-header-group; }
  tr { break-inside: avoid; page-break-inside: avoid; }
  .covey-provenance { background: none; border: 1px solid var(--rule); }
}
"#;

#[cfg(test)]
mod tests {
    use super::*;

    /// The text between `<title>` and `</title>`, and the body.
    fn title_and_body(html: &str) -> (&str, &str) {
        let title = html
            .split_once("<title>")
            .and_then(|(_, t)| t.split_once("</title>"))
            .map_or("", |(t, _)| t);
        let body = html.split_once("<main>").map_or("", |(_, b)| b);
        (title, body)
    }

    #[test]
    fn front_matter_is_left_out_and_gives_the_title() {
        let md =
            "---\ntitle: \"Oven <trial> & co\"\nauthor: A. Baker\n---\n\n# Heading one\n\nText.\n";
        let html = page("doc.md", md, &[]);
        let (title, body) = title_and_body(&html);
        assert_eq!(title, "Oven &lt;trial&gt; &amp; co");
        assert!(!body.contains("<hr"), "{body}");
        assert!(
            !body.contains("author") && !body.contains("title:"),
            "{body}"
        );
        assert!(body.contains("<h1>Heading one</h1>"), "{body}");

        // No title in the front matter: the first heading's text, code spans and all.
        let md = "---\nauthor: A. Baker\n---\nIntro.\n\n## The `oven` *trial*\n\n# Later\n";
        let html = page("doc.md", md, &[]);
        assert_eq!(title_and_body(&html).0, "The oven trial");
        assert!(!title_and_body(&html).1.contains("author"));

        // Neither: the file name.
        let html = page("doc.md", "Just text.\n", &[]);
        assert_eq!(title_and_body(&html).0, "doc.md");
        // A rule and a heading later in the document are not front matter.
        let html = page("doc.md", "Text.\n\n---\ntitle: x\n---\n", &[]);
        assert!(title_and_body(&html).1.contains("<hr"));
    }

    #[test]
    fn svg_loses_scripts_handlers_and_outside_links() {
        let svg = "<?xml version=\"1.0\"?><!-- made by hand -->\
            <svg xmlns=\"http://www.w3.org/2000/svg\" width=\"10\" onload=\"alert(1)\">\
            <script>alert(2)</script><SCRIPT/>\
            <a href=\"https://example.org\" xlink:href='#here'><text x=\"1\">a &amp; b</text></a>\
            <rect style=\"fill:url(http://x)\" onClick='x()' fill=\"red\"/></svg>";
        let clean = sanitise_svg(svg);
        assert_eq!(
            clean,
            "<svg width=\"10\"><a xlink:href='#here'><text x=\"1\">a &amp; b</text></a>\
             <rect fill=\"red\"/></svg>"
        );
    }

    #[test]
    fn svg_nested_dropped_elements_and_broken_tags() {
        let svg = "<svg><foreignObject><foreignObject>x</foreignObject>y</foreignObject>\
                   <g>1 < 2</g><text a=\"unclosed></svg>";
        let clean = sanitise_svg(svg);
        assert_eq!(clean, "<svg><g>1 &lt; 2</g>&lt;text a=\"unclosed></svg>");
    }

    #[test]
    fn svg_of_any_text_does_not_panic() {
        for s in [
            "<", "<<", "<a", "<a b", "<a b=", "<a b='", "</", "<!--", "<!", "<?", "é<é>é",
        ] {
            let _ = sanitise_svg(s);
        }
    }
}
