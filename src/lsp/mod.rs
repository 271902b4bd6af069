//! `covey lsp`: a language server (the Language Server Protocol, over standard input and output)
//! for Markdown documents with covey blocks. It acts only inside covey blocks and live
//! references `@[...]`:
//!
//! * diagnostics as you type ([`analysis`]): every syntax error `covey render` would report, at
//!   its place and in its words (the same document reader and parser), and the errors that need
//!   no computation: unknown columns, levels, models, data sets and parameters, a table that
//!   needs a factor or covariate the model lacks, a reference to a table the document never
//!   computes;
//! * completion ([`complete`]) from the grammar and the data;
//! * hover ([`hover`]), go to definition and document symbols ([`navigate`]).
//!
//! Data files are read by the renderer's own `load`, through its confined file access, on a
//! thread of their own, and kept by fingerprint ([`data`]). The server writes no file, runs no
//! program and uses no network; no model is fitted.

pub mod analysis;
pub mod complete;
pub mod data;
pub mod grammar;
pub mod hover;
pub mod names;
pub mod navigate;
pub mod position;
pub mod references;
mod server;
pub mod transport;

use std::path::Path;

pub use server::{file_path, serve, Ending, Options, DEBOUNCE_MS};

/// Runs the server on standard input and output until the editor ends the session; `Ok` with
/// how it ended, or why it stopped.
pub fn run_stdio(options: &Options) -> Result<Ending, String> {
    let (connection, threads) =
        transport::connect(std::io::BufReader::new(std::io::stdin()), std::io::stdout());
    // On an error the thread reading standard input may still be waiting for input: the
    // process ends without it.
    let ending = serve(&connection, options)?;
    // After `exit` the reader has stopped; the writer stops once the connection is dropped,
    // having written every answer.
    drop(connection);
    threads.join_writer();
    Ok(ending)
}

/// Checks documents as the server does, reading data files at once: for tests and the latency
/// benchmark.
pub struct Checker {
    cache: data::DataCache,
}

impl Checker {
    /// A checker whose `load` may read outside a document's folder when `allow_outside`.
    pub fn new(allow_outside: bool) -> Checker {
        Checker {
            cache: data::DataCache::immediate(allow_outside),
        }
    }

    /// One check of `text`, the document at `path`.
    pub fn check(&mut self, text: &str, path: &Path) -> analysis::Analysis {
        analysis::analyze(text, Some(path), &mut self.cache)
    }

    /// What may be written at byte `at` of the checked document.
    pub fn complete(&mut self, a: &analysis::Analysis, at: usize) -> Option<complete::Completion> {
        complete::complete(a, &mut self.cache, at)
    }

    /// What a hover at byte `at` shows.
    pub fn hover(&mut self, a: &analysis::Analysis, at: usize) -> Option<hover::Shown> {
        hover::hover(a, &mut self.cache, at)
    }

    /// Where the name at byte `at` is declared.
    pub fn definition(&mut self, a: &analysis::Analysis, at: usize) -> Option<crate::lang::Span> {
        navigate::definition(a, &mut self.cache, at)
    }
}
