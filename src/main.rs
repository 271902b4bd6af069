//! The covey command line: parse arguments, call the library, print its
//! report, and turn its verdict into an exit code.

use std::io::Write;
use std::path::PathBuf;
use std::process::ExitCode;

use clap::{Parser, Subcommand};
use covey::{CheckOptions, RenderOptions, Verdict};

/// Render analyses of covariance kept as Markdown documents.
#[derive(Parser)]
#[command(name = "covey", version, about, long_about = None)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand)]
enum Command {
    /// Run every covey block of the documents and write their renderings.
    Render {
        /// Documents, or folders of documents (*.md).
        #[arg(required = true)]
        paths: Vec<PathBuf>,
        /// Write the results into each source document, between covey's markers.
        #[arg(long)]
        in_place: bool,
        /// Folder for the rendered documents (default: beside each source).
        #[arg(long, value_name = "DIR", conflicts_with = "in_place")]
        out: Option<PathBuf>,
        /// Also write every table as JSON to this file (one document only).
        #[arg(long, value_name = "PATH")]
        json: Option<PathBuf>,
        /// Go on with the remaining blocks after a statement fails.
        #[arg(long)]
        keep_going: bool,
        /// Let `load` read files outside the document's folder.
        #[arg(long)]
        allow_outside: bool,
        /// Also write a self-contained HTML page beside each rendering.
        #[arg(long)]
        html: bool,
        /// Give a parameter a value for this run (repeatable).
        #[arg(long = "set", value_name = "NAME=VALUE", value_parser = parse_setting)]
        set: Vec<(String, String)>,
        /// Render past a failed gate; the failure is marked at the top of the document.
        #[arg(long)]
        override_gates: bool,
        /// Keep running: re-render when a document or a data file it loads changes.
        #[arg(long)]
        watch: bool,
    },
    /// Write a starter procedure document with a small invented data set.
    New {
        /// Name of the folder and the document to create.
        name: String,
    },
    /// Tell whether the renderings on disk are current (exit 0) or stale (exit 1).
    Check {
        /// Documents, or folders of documents (*.md).
        #[arg(required = true)]
        paths: Vec<PathBuf>,
        /// Folder the renderings were written to, if not beside each source.
        #[arg(long, value_name = "DIR")]
        out: Option<PathBuf>,
        /// Let `load` read files outside the document's folder.
        #[arg(long)]
        allow_outside: bool,
        /// The parameter values the renderings were made with (repeatable).
        #[arg(long = "set", value_name = "NAME=VALUE", value_parser = parse_setting)]
        set: Vec<(String, String)>,
        /// The renderings were made with --override-gates.
        #[arg(long)]
        override_gates: bool,
    },
}

/// `NAME=VALUE` of `--set`.
fn parse_setting(s: &str) -> Result<(String, String), String> {
    match s.split_once('=') {
        Some((n, v)) if !n.trim().is_empty() => Ok((n.trim().to_string(), v.to_string())),
        _ => Err(format!("expected NAME=VALUE, found `{s}`")),
    }
}

fn main() -> ExitCode {
    if let Err(e) = covey::parallel::configure() {
        use std::io::Write;
        let _ = writeln!(std::io::stderr(), "covey: {e}");
        return ExitCode::from(2);
    }
    let cli = match Cli::try_parse() {
        Ok(c) => c,
        Err(e) => {
            let _ = e.print();
            return ExitCode::from(if e.use_stderr() { 2 } else { 0 });
        }
    };
    let report = match cli.command {
        Command::Render {
            paths,
            in_place,
            out,
            json,
            keep_going,
            allow_outside,
            html,
            set,
            override_gates,
            watch,
        } => {
            let opts = RenderOptions {
                in_place,
                out_dir: out,
                json,
                keep_going,
                allow_outside,
                html,
                params: set,
                override_gates,
            };
            if watch {
                let mut say = |line: &str| eprintln!("{line}");
                covey::watch(
                    &paths,
                    &opts,
                    std::time::Duration::from_millis(500),
                    None,
                    &mut say,
                )
            } else {
                covey::render(&paths, &opts)
            }
        }
        Command::New { name } => match covey::starter::create(std::path::Path::new("."), &name) {
            Ok(doc) => {
                println!(
                    "wrote {} and its example data; render it with: covey render {}",
                    doc.display(),
                    doc.display()
                );
                return ExitCode::SUCCESS;
            }
            Err(e) => {
                eprintln!("{e}");
                return ExitCode::from(2);
            }
        },
        Command::Check {
            paths,
            out,
            allow_outside,
            set,
            override_gates,
        } => covey::check(
            &paths,
            &CheckOptions {
                out_dir: out,
                allow_outside,
                params: set,
                override_gates,
            },
        ),
    };
    let mut err = std::io::stderr().lock();
    for line in &report.lines {
        // A closed stderr is not worth a panic.
        if writeln!(err, "{line}").is_err() {
            break;
        }
    }
    ExitCode::from(match report.verdict {
        Verdict::Ok => 0,
        Verdict::Stale => 1,
        Verdict::Failed => 2,
    })
}
