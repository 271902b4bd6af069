//! The HTML page: user text is escaped, nothing is fetched from elsewhere,
//! figures are inline, and a real browser draws a readable page (when one is
//! installed; CI installs it, and without one outside CI the browser tests are
//! reported as ignored, with the reason: see `src/build.rs`).

use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

use covey::pipeline::{self, RunOptions};
use covey::report::html::page;
use covey::world::{FsWorld, MemoryWorld};

/// A column, levels and a response name made of everything HTML treats
/// specially.
const HOSTILE_DATA: &str = "\"<script>alert(1)</script>\",x,\"y & \"\"z\"\"\"\n\
\"Wren & \"\"Alder\"\"\",1.0,2.1\n\
\"Wren & \"\"Alder\"\"\",2.0,3.2\n\
\"Wren & \"\"Alder\"\"\",3.0,3.9\n\
<b>bold</b>,1.5,4.4\n\
<b>bold</b>,2.5,5.1\n\
<b>bold</b>,3.5,6.3\n\
O'Brien <img src=x onerror=alert(2)>,1.0,3.0\n\
O'Brien <img src=x onerror=alert(2)>,2.0,4.1\n\
O'Brien <img src=x onerror=alert(2)>,3.0,4.8\n";

const HOSTILE_DOC: &str = "# Names that look like markup\n\
\n\
Prose with raw HTML: <b onclick=\"alert(3)\">bold</b>, a [bad link](javascript:alert(4)) \
and a [good link](https://example.org/covey-notes).\n\
\n\
<script>alert('prose')</script>\n\
\n\
```covey\n\
load \"d.csv\" as d\n\
factor \"<script>alert(1)</script>\"\n\
show d\n\
model m: \"y & \\\"z\\\"\" on \"<script>alert(1)</script>\" + x\n\
table means m for \"<script>alert(1)</script>\"\n\
```\n";

/// The user's own link in [`HOSTILE_DOC`], the only address the page may hold.
const USER_LINK: &str = "https://example.org/covey-notes";

/// A figure as covey's plotting code could draw it, with the things the
/// sanitiser must remove added by hand.
fn hand_made_svg() -> String {
    let mut svg = String::from(
        "<svg width=\"480\" height=\"300\" viewBox=\"0 0 480 300\" \
         xmlns=\"http://www.w3.org/2000/svg\" onload=\"alert(5)\">\n\
         <script>alert(6)</script>\n\
         <rect x=\"0\" y=\"0\" width=\"480\" height=\"300\" fill=\"#FFFFFF\"/>\n\
         <line x1=\"50\" y1=\"260\" x2=\"460\" y2=\"260\" stroke=\"#000000\"/>\n\
         <line x1=\"50\" y1=\"20\" x2=\"50\" y2=\"260\" stroke=\"#000000\"/>\n\
         <image href=\"https://example.com/tracker.png\" width=\"1\" height=\"1\"/>\n",
    );
    for i in 0..24 {
        let x = 60.0 + 16.0 * f64::from(i);
        let y = 240.0 - 7.0 * f64::from(i) - 18.0 * f64::from(i % 3);
        let colour = ["#1B6A8F", "#B5522B", "#3F7F3A"][i as usize % 3];
        svg.push_str(&format!(
            "<circle cx=\"{x}\" cy=\"{y}\" r=\"4\" fill=\"{colour}\" onmouseover=\"alert(7)\"/>\n"
        ));
    }
    svg.push_str(
        "<text x=\"240\" y=\"290\" text-anchor=\"middle\" font-family=\"sans-serif\" \
         font-size=\"14\">start weight &amp; final weight</text>\n</svg>\n",
    );
    svg
}

/// The text a reader sees: tags removed, character references decoded.
/// Enough HTML for covey's pages, not a general parser.
fn visible_text(html: &str) -> String {
    let mut text = String::new();
    let mut rest = html;
    while let Some(lt) = rest.find('<') {
        text.push_str(&rest[..lt]);
        rest = &rest[lt..];
        let end = if rest.starts_with("<!--") {
            rest.find("-->").map(|e| e + 3)
        } else {
            rest.find('>').map(|e| e + 1)
        };
        rest = &rest[end.unwrap_or(rest.len())..];
    }
    text.push_str(rest);
    decode_references(&text)
}

fn decode_references(text: &str) -> String {
    let mut out = String::new();
    let mut rest = text;
    while let Some(amp) = rest.find('&') {
        out.push_str(&rest[..amp]);
        rest = &rest[amp..];
        let Some(semi) = rest.find(';').filter(|&s| s <= 10) else {
            out.push('&');
            rest = &rest[1..];
            continue;
        };
        let name = &rest[1..semi];
        let decoded = match name {
            "amp" => Some('&'),
            "lt" => Some('<'),
            "gt" => Some('>'),
            "quot" => Some('"'),
            "apos" => Some('\''),
            _ => {
                if let Some(hex) = name.strip_prefix("#x").or_else(|| name.strip_prefix("#X")) {
                    u32::from_str_radix(hex, 16).ok().and_then(char::from_u32)
                } else if let Some(dec) = name.strip_prefix('#') {
                    dec.parse().ok().and_then(char::from_u32)
                } else {
                    None
                }
            }
        };
        match decoded {
            Some(c) => {
                out.push(c);
                rest = &rest[semi + 1..];
            }
            None => {
                out.push('&');
                rest = &rest[1..];
            }
        }
    }
    out.push_str(rest);
    out
}

/// The hostile document, run and turned into a page.
fn hostile_page() -> String {
    let world = MemoryWorld::new().with("d.csv", HOSTILE_DATA.as_bytes());
    // The page's title comes from the front matter.
    let doc = format!("---\ntitle: '<script>alert(8)</script> & \"title\"'\n---\n{HOSTILE_DOC}");
    let run = pipeline::run(&doc, "doc.md", &world, RunOptions::default())
        .unwrap_or_else(|e| panic!("document does not run: {:?}", e.errors));
    assert!(!run.failed(), "statements failed: {:?}", run.errors);
    page("doc.md", &run.rendered, &run.figures)
}

#[test]
fn user_strings_are_escaped_and_stay_visible() {
    let html = hostile_page();
    let lower = html.to_ascii_lowercase();
    assert!(!lower.contains("<script"), "a live script element:\n{html}");
    assert!(!lower.contains("<img"), "a live image element:\n{html}");
    assert!(
        !lower.contains("<b>") && !lower.contains("<b "),
        "live <b>:\n{html}"
    );
    assert!(!lower.contains("onclick"), "raw HTML of the prose survived");
    assert!(
        !lower.contains("javascript:"),
        "a javascript: link survived"
    );
    assert!(
        html.contains(
            "<title>&lt;script&gt;alert(8)&lt;/script&gt; &amp; &quot;title&quot;</title>"
        ),
        "title not escaped:\n{html}"
    );

    let text = visible_text(&html);
    for shown in [
        "<script>alert(1)</script>",
        "y & \"z\"",
        "Wren & \"Alder\"",
        "<b>bold</b>",
        "O'Brien <img src=x onerror=alert(2)>",
    ] {
        assert!(text.contains(shown), "{shown:?} is not visible in:\n{text}");
    }
    // The prose's own raw HTML is dropped, as comrak's safe mode does.
    assert!(!text.contains("alert('prose')"));
    assert!(!text.contains("alert(3)"));
}

#[test]
fn covey_regions_become_balanced_sections() {
    let html = hostile_page();
    assert!(html.contains("<section class=\"covey-provenance\">"));
    assert!(html.contains("<section class=\"covey-output\">"));
    assert_eq!(
        html.matches("<section").count(),
        html.matches("</section>").count()
    );
    assert!(!html.contains("covey:output"), "a marker leaked as text");
    // Tables sit in their scrolling wrapper, numbers aligned right.
    assert!(html.contains("<div class=\"table-scroll\">\n<table>"));
    assert!(html.contains("<td align=\"right\">"));
    // The input's SHA-256 may break anywhere rather than widen the page.
    assert!(html.contains("<code class=\"unbroken\">f88b9"), "{html}");
}

/// Every address in `html` with the user's own link taken out.
fn addresses_left(html: &str, allowed: &[&str]) -> Vec<String> {
    let mut rest = html.to_string();
    for a in allowed {
        rest = rest.replace(a, "");
    }
    let lower = rest.to_ascii_lowercase();
    let mut found = Vec::new();
    for scheme in [
        "http://", "https://", "//fonts.", "url(", "@import", "<link", "<script",
    ] {
        for (i, _) in lower.match_indices(scheme) {
            let end = (i + 60).min(lower.len());
            found.push(lower.get(i..end).unwrap_or(scheme).to_string());
        }
    }
    found
}

#[test]
fn page_makes_no_requests_of_its_own() {
    let figure = ("doc.figures/block1-1.svg".to_string(), hand_made_svg());
    let md = format!(
        "{}\n**A figure**\n\n![points](doc.figures/block1-1.svg)\n",
        covey::pipeline::run(
            HOSTILE_DOC,
            "doc.md",
            &MemoryWorld::new().with("d.csv", HOSTILE_DATA.as_bytes()),
            RunOptions::default()
        )
        .map(|r| r.rendered)
        .unwrap_or_else(|e| panic!("{:?}", e.errors))
    );
    let html = page("doc.md", &md, &[figure]);
    assert!(html.contains(&format!("href=\"{USER_LINK}\"")));
    let left = addresses_left(&html, &[USER_LINK]);
    assert!(left.is_empty(), "the page refers elsewhere: {left:?}");
    // Nothing else may load: no src attribute at all (the figure is inline;
    // user text never holds a bare quote, escaping turns it into `&quot;`).
    assert!(
        !html.contains(" src=\"") && !html.contains(" src='"),
        "a src attribute:\n{html}"
    );
}

#[test]
fn figures_are_inline_and_sanitised() {
    let svg = hand_made_svg();
    let figures = vec![("doc.figures/block2-1.svg".to_string(), svg)];
    let md = "# Figures\n\n**Final weight against starting weight**\n\n\
              ![Final weight *against* `start_kg` & \"more\"](doc.figures/block2-1.svg)\n\n\
              An image the run did not draw becomes a link: ![other](other.svg)\n";
    let html = page("Figures", md, &figures);
    assert_eq!(html.matches("<svg").count(), 1, "{html}");
    assert!(html.contains("<circle cx=\"60\" cy=\"240\" r=\"4\" fill=\"#1B6A8F\"/>"));
    assert!(html.contains("start weight &amp; final weight"));
    assert!(html.contains(
        "<span class=\"figure\" role=\"img\" aria-label=\"Final weight against start_kg &amp; &quot;more&quot;\">"
    ));
    assert!(
        !html.contains("doc.figures/block2-1.svg"),
        "the link stayed"
    );
    assert!(html.contains("<a href=\"other.svg\">other</a>"), "{html}");
    assert!(!html.contains("<img"), "{html}");
    let lower = html.to_ascii_lowercase();
    for gone in [
        "<script",
        "onload",
        "onmouseover",
        "alert(",
        "tracker.png",
        "xmlns",
    ] {
        assert!(!lower.contains(gone), "{gone} survived");
    }
    // Without figures there is no SVG.
    assert!(!page("x", "text\n", &[]).contains("<svg"));
}

#[test]
fn page_has_covey_style_and_no_script() {
    let html = page("t", "| a | b |\n| :-- | --: |\n| x | 1.5 |\n", &[]);
    for needed in [
        "<meta name=\"viewport\"",
        "font-variant-numeric: tabular-nums",
        "@media print",
        "break-inside: avoid",
        "@media (max-width: 600px)",
        "overflow-x: auto",
        "max-width: 46rem",
    ] {
        assert!(html.contains(needed), "missing {needed:?}");
    }
    assert!(!html.to_ascii_lowercase().contains("<script"));
}

/// The text of the page's `<title>`, decoded.
fn page_title(html: &str) -> String {
    let inner = html
        .split_once("<title>")
        .and_then(|(_, t)| t.split_once("</title>"))
        .map_or("", |(t, _)| t);
    decode_references(inner)
}

/// A rendered document with YAML front matter: the front matter stays in the Markdown (it is
/// the author's) and is left out of the page, whose title is the front matter's `title`;
/// without one, the document's first heading; without either, the file name.
#[test]
fn front_matter_is_left_out_of_the_page_and_titles_it() {
    let data = "g,x,y\na,1,2.0\na,2,2.9\nb,1,3.1\nb,2,4.2\nb,3,4.8\na,3,4.1\n";
    let world = MemoryWorld::new().with("d.csv", data.as_bytes().to_vec());
    let block = "```covey\nload \"d.csv\"\nfactor g\nmodel m: y on g + x\n```\n";
    let run = |doc: &str| {
        let run = pipeline::run(doc, "trial.md", &world, RunOptions::default())
            .unwrap_or_else(|u| panic!("{}", u.errors.join("\n")));
        assert!(run.errors.is_empty(), "{}", run.errors.join("\n"));
        (
            run.rendered.clone(),
            page("trial.md", &run.rendered, &run.figures),
        )
    };

    let doc = format!(
        "---\ntitle: 'Oven trial: week 3 & 4'\nauthor: Invented Person\ntags: [ovens]\n---\n\n# Loaves by oven\n\n{block}"
    );
    let (rendered, html) = run(&doc);
    assert!(
        rendered.starts_with("---\ntitle: 'Oven trial"),
        "{rendered}"
    );
    assert_eq!(page_title(&html), "Oven trial: week 3 & 4");
    let text = visible_text(&html);
    assert!(
        !text.contains("Invented Person") && !text.contains("tags"),
        "{text}"
    );
    assert!(!html.contains("<hr"), "the closing delimiter became a rule");
    assert!(
        !html.contains("<h2>title"),
        "the front matter became a heading"
    );
    assert!(text.contains("Loaves by oven") && text.contains("Rendered by covey"));

    let doc = format!("---\nauthor: Invented Person\n---\n\n## Loaves by *oven*\n\n{block}");
    let (_, html) = run(&doc);
    assert_eq!(page_title(&html), "Loaves by oven");
    assert!(!visible_text(&html).contains("Invented Person"));

    let (_, html) = run(&format!("No heading here.\n\n{block}"));
    assert_eq!(page_title(&html), "trial.md");
}

// ------------------------------------------------------------ the browser

/// Where the browser is expected (`BROWSER` in `src/build.rs`, which marks the browser tests
/// as ignored, with the reason, when it is missing outside CI).
const CHROMIUM: &str = "/usr/bin/chromium";

/// Fails a browser test with the reason when there is no browser: under CI, which must install
/// one; or when the browser was removed after the tests were built (they are built again at
/// the next `cargo test`, and then report themselves ignored).
fn require_browser() {
    if Path::new(CHROMIUM).exists() {
        return;
    }
    if std::env::var_os("CI").is_some() {
        panic!("{CHROMIUM} is missing: CI must install it (see .ci/run)");
    }
    panic!(
        "{CHROMIUM} is missing, though it was there when the tests were built: run `cargo test` \
         again (the tests are then built again and report the browser tests as ignored)"
    );
}

/// How long a screenshot may take before the browser is killed.
const BROWSER_TIMEOUT: Duration = Duration::from_secs(60);

/// The least share of pixels that must differ from white for a screenshot
/// to count as a drawn page: a page of text and tables covers several
/// percent; a blank or failed page covers none.
const MIN_INK_SHARE: f64 = 0.01;

/// How far (per channel, 0-255) a pixel must be from white to count as ink;
/// more than anti-aliasing noise on a white background.
const INK_THRESHOLD: u8 = 24;

/// A realistic page: the worked example, run from disk, with a figure added
/// (the worked example draws none yet).
fn worked_page() -> String {
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("worked");
    let path = dir.join("rations.md");
    let text = std::fs::read_to_string(&path).unwrap_or_else(|e| panic!("{}: {e}", path.display()));
    let world = FsWorld::new(&dir, false);
    let run = pipeline::run(&text, "rations.md", &world, RunOptions::default())
        .unwrap_or_else(|e| panic!("worked example does not run: {:?}", e.errors));
    let mut figures = run.figures.clone();
    figures.push(("rations.figures/extra-1.svg".to_string(), hand_made_svg()));
    let md = format!(
        "{}\n## A figure\n\n**Points drawn by hand for this test**\n\n![Points](rations.figures/extra-1.svg)\n",
        run.rendered
    );
    page("rations.md", &md, &figures)
}

/// Runs the browser for a screenshot of `html_file` at `size`; returns the
/// PNG's path.
fn screenshot(work: &Path, html_file: &Path, size: &str, name: &str) -> PathBuf {
    let png = work.join(format!("{name}.png"));
    let profile = work.join(format!("profile-{name}"));
    let _ = std::fs::remove_dir_all(&profile);
    let log = work.join(format!("{name}.log"));
    let log_file = std::fs::File::create(&log).unwrap_or_else(|e| panic!("{e}"));
    let mut child = Command::new(CHROMIUM)
        .args([
            "--headless",
            "--no-sandbox",
            "--disable-gpu",
            "--disable-quic",
            "--no-first-run",
            "--disable-background-networking",
            "--disable-component-update",
            "--disable-sync",
        ])
        .arg(format!("--user-data-dir={}", profile.display()))
        .arg(format!("--screenshot={}", png.display()))
        .arg(format!("--window-size={size}"))
        .arg(format!("file://{}", html_file.display()))
        .stdin(Stdio::null())
        .stdout(Stdio::null())
        .stderr(Stdio::from(log_file))
        .spawn()
        .unwrap_or_else(|e| panic!("cannot start {CHROMIUM}: {e}"));
    let started = Instant::now();
    let status = loop {
        match child.try_wait() {
            Ok(Some(status)) => break status,
            Ok(None) if started.elapsed() > BROWSER_TIMEOUT => {
                let _ = child.kill();
                let _ = child.wait();
                panic!(
                    "the browser took over {BROWSER_TIMEOUT:?}; see {}",
                    log.display()
                );
            }
            Ok(None) => std::thread::sleep(Duration::from_millis(100)),
            Err(e) => panic!("waiting for the browser: {e}"),
        }
    };
    let _ = std::fs::remove_dir_all(&profile);
    assert!(
        status.success() && png.exists(),
        "the browser failed ({status}):\n{}",
        std::fs::read_to_string(&log).unwrap_or_default()
    );
    png
}

/// The share of pixels that differ from white, and the image's size.
fn ink_share(png_path: &Path) -> (f64, u32, u32) {
    let file = std::fs::File::open(png_path).unwrap_or_else(|e| panic!("{e}"));
    let mut decoder = png::Decoder::new(std::io::BufReader::new(file));
    decoder.set_transformations(png::Transformations::EXPAND | png::Transformations::STRIP_16);
    let mut reader = decoder
        .read_info()
        .unwrap_or_else(|e| panic!("{}: not a PNG: {e}", png_path.display()));
    let mut buf = vec![0; reader.output_buffer_size()];
    let info = reader
        .next_frame(&mut buf)
        .unwrap_or_else(|e| panic!("{}: cannot decode: {e}", png_path.display()));
    let channels = info.color_type.samples();
    let pixels = &buf[..info.buffer_size()];
    let colour_channels = channels.min(3);
    let mut ink = 0usize;
    let mut total = 0usize;
    for px in pixels.chunks_exact(channels) {
        total += 1;
        if px[..colour_channels]
            .iter()
            .any(|&c| 255 - c > INK_THRESHOLD)
        {
            ink += 1;
        }
    }
    (ink as f64 / total.max(1) as f64, info.width, info.height)
}

#[test]
#[cfg_attr(
    no_browser,
    ignore = "no browser: /usr/bin/chromium was missing when the tests were built (install chromium to run it)"
)]
fn a_browser_draws_the_page() {
    require_browser();
    let work = Path::new(env!("CARGO_TARGET_TMPDIR")).join("html-browser");
    let _ = std::fs::remove_dir_all(&work);
    std::fs::create_dir_all(&work).unwrap_or_else(|e| panic!("{e}"));

    let html_file = work.join("rations.rendered.html");
    std::fs::write(&html_file, worked_page()).unwrap_or_else(|e| panic!("{e}"));
    let hostile_file = work.join("hostile.html");
    std::fs::write(&hostile_file, hostile_page()).unwrap_or_else(|e| panic!("{e}"));

    for (file, size, name) in [
        (&html_file, "1000,1400", "wide"),
        (&html_file, "390,844", "narrow"),
        (&hostile_file, "1000,1400", "hostile"),
    ] {
        let png = screenshot(&work, file, size, name);
        let (share, w, h) = ink_share(&png);
        let (want_w, want_h) = size.split_once(',').unwrap_or_default();
        assert_eq!(
            (w.to_string(), h.to_string()),
            (want_w.to_string(), want_h.to_string())
        );
        assert!(
            share >= MIN_INK_SHARE,
            "{name} screenshot {} looks blank: {:.2}% of pixels differ from white",
            png.display(),
            share * 100.0
        );
        eprintln!("{name}: {} ({:.1}% ink)", png.display(), share * 100.0);
    }
}

/// Every worked document, rendered with its figures, opens in the browser
/// and shows content at a reading width.
#[test]
#[cfg_attr(
    no_browser,
    ignore = "no browser: /usr/bin/chromium was missing when the tests were built (install chromium to run it)"
)]
fn every_worked_document_opens_in_the_browser() {
    require_browser();
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("worked");
    let work = Path::new(env!("CARGO_TARGET_TMPDIR")).join("html-worked");
    let _ = std::fs::remove_dir_all(&work);
    std::fs::create_dir_all(&work).unwrap_or_else(|e| panic!("{e}"));
    let mut docs: Vec<_> = std::fs::read_dir(&dir)
        .map(|d| d.filter_map(|e| e.ok().map(|e| e.path())).collect())
        .unwrap_or_default();
    docs.retain(|p| {
        let n = p.to_string_lossy();
        n.ends_with(".md") && !n.ends_with(".rendered.md")
    });
    docs.sort();
    assert!(docs.len() >= 4, "the worked documents are missing");
    for doc in docs {
        let name = doc
            .file_name()
            .map(|n| n.to_string_lossy().into_owned())
            .unwrap_or_default();
        let text =
            std::fs::read_to_string(&doc).unwrap_or_else(|e| panic!("{}: {e}", doc.display()));
        let world = FsWorld::new(&dir, false);
        let run = pipeline::run(&text, &name, &world, RunOptions::default())
            .unwrap_or_else(|e| panic!("{name} does not run: {:?}", e.errors));
        assert!(run.errors.is_empty(), "{name}: {:?}", run.errors);
        let html = page(&name, &run.rendered, &run.figures);
        assert!(
            run.figures.is_empty() || html.contains("<svg"),
            "{name}: figures are inline"
        );
        let file = work.join(format!("{name}.html"));
        std::fs::write(&file, html).unwrap_or_else(|e| panic!("{e}"));
        let png = screenshot(&work, &file, "1000,1400", &name.replace('.', "-"));
        let (share, _, _) = ink_share(&png);
        assert!(
            share >= MIN_INK_SHARE,
            "{name} looks blank: {:.2}%",
            share * 100.0
        );
    }
}
