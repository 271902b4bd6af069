//! covey renders analyses of covariance kept as Markdown documents.
//!
//! The public entry points are [`render`] and [`check`]; the rest of the
//! crate is public so that tests and benchmarks can reach each stage:
//! [`document`] (Markdown in and out), [`lang`] (the covey language),
//! [`session`] (the interpreter), [`data`], [`model`] and [`stats`] (the
//! numbers), [`report`] (tables, Markdown, JSON), [`world`] (file access).

pub mod data;
pub mod diagnostic;
pub mod document;
pub mod files;
pub mod lang;
pub mod lsp;
pub mod model;
pub mod parallel;
pub mod pipeline;
pub mod plot;
pub mod report;
pub mod session;
pub mod starter;
pub mod stats;
pub mod world;

mod commands;
mod watch;

pub use commands::{
    check, prepare, render, CheckOptions, Prepared, RenderOptions, Report, Verdict,
};
pub use watch::watch;
