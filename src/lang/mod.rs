//! The covey language: the pest grammar in grammar/covey.pest, the syntax
//! tree, and the parser that turns a block's lines into statements.

pub mod ast;
pub mod parser;

pub use ast::*;
pub use parser::{parse_line, parse_line_with, Params, SyntaxError};

/// Parses every line of a block. `lines` yields each line's text (without its
/// line ending), its byte offset in the document and its 1-based line number.
/// All syntax errors of the block are returned, not just the first.
pub fn parse_block<'a>(
    lines: impl IntoIterator<Item = (&'a str, usize, usize)>,
) -> Result<Vec<Statement>, Vec<SyntaxError>> {
    parse_block_with(lines, &Params::new())
}

/// [`parse_block`] with the document's parameters in force.
pub fn parse_block_with<'a>(
    lines: impl IntoIterator<Item = (&'a str, usize, usize)>,
    params: &Params,
) -> Result<Vec<Statement>, Vec<SyntaxError>> {
    let mut statements = Vec::new();
    let mut errors = Vec::new();
    for (text, offset, line_no) in lines {
        match parse_line_with(text, offset, line_no, params) {
            Ok(Some(s)) => statements.push(s),
            Ok(None) => {}
            Err(e) => errors.push(e),
        }
    }
    if errors.is_empty() {
        Ok(statements)
    } else {
        Err(errors)
    }
}
