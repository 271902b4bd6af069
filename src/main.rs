//! The covey command line: parse arguments, call the library, print its
//! report, and turn its verdict into an exit code.

use std::io::Write;
use std::ops::ControlFlow;
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
        #[arg(long, value_name = "DIR", conflicts_with = "in_place", value_parser = parse_output)]
        out: Option<PathBuf>,
        /// Also write every table as JSON to this file (one document only).
        #[arg(long, value_name = "PATH", value_parser = parse_output)]
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
        /// The address of a database a document reads with `load database NAME` (repeatable;
        /// never written anywhere).
        #[arg(long = "database", value_name = "NAME=URL", value_parser = parse_database)]
        database: Vec<(String, String)>,
    },
    /// Write a starter procedure document with a small invented data set.
    New {
        /// Name of the folder and the document to create.
        name: String,
    },
    /// Run a language server for editors, on standard input and output.
    Lsp {
        /// Let `load` read files outside each document's folder.
        #[arg(long)]
        allow_outside: bool,
        /// Accepted for editors that pass it; standard input and output are always used.
        #[arg(long, hide = true)]
        stdio: bool,
    },
    /// Tell whether the renderings on disk are current (exit 0) or stale (exit 1).
    Check {
        /// Documents, or folders of documents (*.md).
        #[arg(required = true)]
        paths: Vec<PathBuf>,
        /// Folder the renderings were written to, if not beside each source.
        #[arg(long, value_name = "DIR", value_parser = parse_output)]
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
        /// The address of a database a document reads with `load database NAME` (repeatable;
        /// never written anywhere).
        #[arg(long = "database", value_name = "NAME=URL", value_parser = parse_database)]
        database: Vec<(String, String)>,
    },
}

/// The path of `--out` or `--json`. covey writes files only, never a stream: `-`, which
/// commonly means standard output, would otherwise become a file or a folder named `-`.
fn parse_output(s: &str) -> Result<PathBuf, String> {
    if s == "-" {
        return Err(
            "covey writes its outputs to files, not to standard output; name a file \
                    or folder (`./-` for one named `-`)"
                .to_string(),
        );
    }
    Ok(PathBuf::from(s))
}

/// `NAME=VALUE` of `--set`.
fn parse_setting(s: &str) -> Result<(String, String), String> {
    match s.split_once('=') {
        Some((n, v)) if !n.trim().is_empty() => Ok((n.trim().to_string(), v.to_string())),
        _ => Err(format!("expected NAME=VALUE, found `{s}`")),
    }
}

/// `NAME=URL` of `--database`. The error never repeats the address, which may hold a password.
fn parse_database(s: &str) -> Result<(String, String), String> {
    match s.split_once('=') {
        Some((n, v)) if !n.trim().is_empty() && !v.trim().is_empty() => {
            Ok((n.trim().to_string(), v.trim().to_string()))
        }
        _ => Err("expected NAME=URL, such as lab=postgresql://analyst@localhost/lab".to_string()),
    }
}

/// The two standard streams, written without ever panicking: the first
/// failed write is remembered and nothing more is written to that stream.
#[derive(Default)]
struct Console {
    out_failed: Option<std::io::Error>,
    err_failed: Option<std::io::Error>,
}

impl Console {
    /// A line on stdout; Break when it could not be written.
    fn out(&mut self, line: &str) -> ControlFlow<()> {
        put(&mut std::io::stdout().lock(), line, &mut self.out_failed)
    }

    /// A line on stderr; Break when it could not be written.
    fn err(&mut self, line: &str) -> ControlFlow<()> {
        put(&mut std::io::stderr().lock(), line, &mut self.err_failed)
    }

    /// The exit code: the command's own, unless a message could not be
    /// written for another reason than a reader that went away (a closed
    /// pipe is a normal end, as in `covey new p | head -0`; a full disk is
    /// an error, exit 2).
    fn exit(mut self, code: u8) -> ExitCode {
        let lost = |e: &Option<std::io::Error>| {
            e.as_ref()
                .is_some_and(|e| e.kind() != std::io::ErrorKind::BrokenPipe)
        };
        if lost(&self.out_failed) {
            if let Some(e) = self.out_failed.take() {
                let _ = self.err(&format!("covey: cannot write to standard output: {e}"));
            }
            return ExitCode::from(2);
        }
        if lost(&self.err_failed) {
            return ExitCode::from(2);
        }
        ExitCode::from(code)
    }
}

fn put(stream: &mut dyn Write, line: &str, failed: &mut Option<std::io::Error>) -> ControlFlow<()> {
    if failed.is_some() {
        return ControlFlow::Break(());
    }
    // A name the user gave (a document's, a data file's) may hold characters a terminal would
    // obey or hide; they are written as `<U+XXXX>`, as in the renderings.
    let line = covey::report::visible::visible_except(line, &['\n', '\t']);
    match writeln!(stream, "{line}").and_then(|()| stream.flush()) {
        Ok(()) => ControlFlow::Continue(()),
        Err(e) => {
            *failed = Some(e);
            ControlFlow::Break(())
        }
    }
}

fn main() -> ExitCode {
    let mut console = Console::default();
    if let Err(e) = covey::parallel::configure() {
        let _ = console.err(&format!("covey: {e}"));
        return console.exit(2);
    }
    let cli = match Cli::try_parse() {
        Ok(c) => c,
        Err(e) => {
            let code = if e.use_stderr() { 2 } else { 0 };
            if let Err(failed) = e.print() {
                if e.use_stderr() {
                    console.err_failed = Some(failed);
                } else {
                    console.out_failed = Some(failed);
                }
            }
            return console.exit(code);
        }
    };
    let code = run(cli.command, &mut console);
    console.exit(code)
}

/// Runs one command, telling `console` what happened; returns the exit code.
fn run(command: Command, console: &mut Console) -> u8 {
    let report = match command {
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
            database,
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
                databases: covey::data::database::Databases::new(database),
            };
            if watch {
                // Every line is said as it comes; a closed stderr ends the watch.
                let report = covey::watch(
                    &paths,
                    &opts,
                    std::time::Duration::from_millis(WATCH_INTERVAL_MS),
                    None,
                    &mut |line: &str| console.err(line),
                    &stderr_gone,
                );
                return code(report.verdict);
            }
            covey::render(&paths, &opts)
        }
        Command::New { name } => match covey::starter::create(std::path::Path::new("."), &name) {
            Ok(doc) => {
                let _ = console.out(&format!(
                    "wrote {} and its example data; render it with: covey render {}",
                    doc.display(),
                    doc.display()
                ));
                return 0;
            }
            Err(e) => {
                let _ = console.err(&e.to_string());
                return 2;
            }
        },
        Command::Lsp { allow_outside, .. } => {
            let opts = covey::lsp::Options {
                allow_outside,
                ..covey::lsp::Options::default()
            };
            return match covey::lsp::run_stdio(&opts) {
                Ok(covey::lsp::Ending::Clean) => 0,
                // The protocol's exit code for `exit` without `shutdown`.
                Ok(covey::lsp::Ending::ExitWithoutShutdown) => 1,
                Err(e) => {
                    let _ = console.err(&format!("covey lsp: {e}"));
                    2
                }
            };
        }
        Command::Check {
            paths,
            out,
            allow_outside,
            set,
            override_gates,
            database,
        } => covey::check(
            &paths,
            &CheckOptions {
                out_dir: out,
                allow_outside,
                params: set,
                override_gates,
                databases: covey::data::database::Databases::new(database),
            },
        ),
    };
    for line in &report.lines {
        if console.err(line).is_break() {
            break;
        }
    }
    code(report.verdict)
}

/// Whether standard error leads to a reader that has gone (a pipe or socket
/// whose other end is closed, a terminal that hung up), found without writing
/// to it, so that an idle watch ends too. A stream closed before covey started
/// (`2>&-`) is not gone: the standard library opens `/dev/null` in its place,
/// and a watch told to be silent goes on rendering.
#[cfg(unix)]
fn stderr_gone() -> bool {
    use rustix::event::{poll, PollFd, PollFlags, Timespec};
    let err = std::io::stderr();
    let mut fds = [PollFd::new(&err, PollFlags::OUT)];
    let now = Timespec {
        tv_sec: 0,
        tv_nsec: 0,
    };
    match poll(&mut fds, Some(&now)) {
        Ok(n) if n > 0 => fds[0].revents().intersects(PollFlags::ERR | PollFlags::HUP),
        _ => false,
    }
}

#[cfg(not(unix))]
fn stderr_gone() -> bool {
    false
}

/// How often `--watch` looks at the files (a few `stat` calls each time).
const WATCH_INTERVAL_MS: u64 = 300;

fn code(verdict: Verdict) -> u8 {
    match verdict {
        Verdict::Ok => 0,
        Verdict::Stale => 1,
        Verdict::Failed => 2,
    }
}
