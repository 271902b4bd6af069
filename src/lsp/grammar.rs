//! What the grammar allows, read from the grammar itself so that the language server cannot fall
//! behind it: the words that may come next on a line (from the parser's own expectations at that
//! point, see [`crate::lang::parser::expected_after`]), and what each of those rules may start
//! with (read from `grammar/covey.pest` with pest's own grammar reader). A statement, clause,
//! table kind or figure kind added to the grammar is offered without a change here.

use std::collections::BTreeMap;
use std::sync::OnceLock;

use pest_meta::ast::Expr;

use crate::lang::parser::{expected_after, Rule};

/// The grammar the parser is generated from.
const GRAMMAR: &str = include_str!("../../grammar/covey.pest");

/// Rules whose text the writer chooses (a name, a value, a number): completion fills them from
/// the document and its data rather than from the grammar.
pub const SLOTS: &[&str] = &[
    "ident",
    "name",
    "value",
    "string",
    "number",
    "integer",
    "param_ref",
];

/// What may come next on a line.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Token {
    /// A word of the language (`by`, `table`, `tukey`).
    Word(String),
    /// Punctuation (`:`, `,`, `(`).
    Punct(String),
    /// Something the writer chooses: one of [`SLOTS`].
    Slot(&'static str),
}

/// The grammar's rules by name.
struct Grammar {
    rules: BTreeMap<String, Expr>,
}

fn grammar() -> &'static Grammar {
    static G: OnceLock<Grammar> = OnceLock::new();
    G.get_or_init(|| {
        // The grammar compiled into the parser, so it reads; should it not, completion offers
        // no words rather than failing.
        let rules = pest_meta::parser::parse(pest_meta::parser::Rule::grammar_rules, GRAMMAR)
            .ok()
            .and_then(|pairs| pest_meta::parser::consume_rules(pairs).ok())
            .unwrap_or_default();
        Grammar {
            rules: rules.into_iter().map(|r| (r.name, r.expr)).collect(),
        }
    })
}

/// What may come first in `rule`, in the grammar's order, each once.
pub fn first(rule: &str) -> Vec<Token> {
    let g = grammar();
    let mut out = Vec::new();
    let mut visiting = Vec::new();
    first_of_rule(g, rule, &mut out, &mut visiting);
    out
}

/// What the grammar accepts after `prefix`, the start of a line: every token that may come
/// first in the rules the parser tried there, in the order it tried them. `None` when the prefix
/// has a syntax error (or ends in a comment). The end of the line is left out.
pub fn next_tokens(prefix: &str) -> Option<Vec<Token>> {
    let rules = expected_after(prefix)?;
    let mut out: Vec<Token> = Vec::new();
    for r in rules {
        if r == Rule::EOI {
            continue;
        }
        for t in first(&rule_name(r)) {
            if !out.contains(&t) {
                out.push(t);
            }
        }
    }
    Some(out)
}

/// The words a line may start with: the first words of every statement.
pub fn statement_words() -> Vec<String> {
    words(&first("statement"))
}

/// The words of the tokens, in order.
pub fn words(tokens: &[Token]) -> Vec<String> {
    tokens
        .iter()
        .filter_map(|t| match t {
            Token::Word(w) => Some(w.clone()),
            _ => None,
        })
        .collect()
}

/// Every keyword of the grammar: the word of each `kw_` rule.
pub fn keywords() -> Vec<String> {
    let g = grammar();
    let mut out: Vec<String> = Vec::new();
    for name in g.rules.keys().filter(|n| n.starts_with("kw_")) {
        for w in words(&first(name)) {
            if !out.contains(&w) {
                out.push(w);
            }
        }
    }
    out
}

/// The name a rule has in the grammar.
pub fn rule_name(rule: Rule) -> String {
    format!("{rule:?}")
}

/// Adds what `rule` may start with to `out`; returns whether it may match nothing.
fn first_of_rule(
    g: &Grammar,
    rule: &str,
    out: &mut Vec<Token>,
    visiting: &mut Vec<String>,
) -> bool {
    if let Some(slot) = SLOTS.iter().find(|s| **s == rule) {
        push(out, Token::Slot(slot));
        return false;
    }
    if visiting.iter().any(|v| v == rule) {
        return false;
    }
    let Some(expr) = g.rules.get(rule) else {
        // A built-in rule: nothing to offer. The start of the input takes none; the others
        // (ASCII_DIGIT, ANY, EOI...) stand for input.
        return rule == "SOI";
    };
    visiting.push(rule.to_string());
    let nullable = first_of_expr(g, expr, out, visiting);
    visiting.pop();
    nullable
}

/// Adds what `expr` may start with to `out`; returns whether it may match nothing.
fn first_of_expr(
    g: &Grammar,
    expr: &Expr,
    out: &mut Vec<Token>,
    visiting: &mut Vec<String>,
) -> bool {
    match expr {
        Expr::Str(s) | Expr::Insens(s) => {
            if s.is_empty() {
                return true;
            }
            let word = s.chars().all(|c| c.is_alphanumeric() || c == '_');
            push(
                out,
                if word {
                    Token::Word(s.clone())
                } else {
                    Token::Punct(s.clone())
                },
            );
            false
        }
        Expr::Ident(name) => first_of_rule(g, name, out, visiting),
        Expr::Seq(a, b) => first_of_expr(g, a, out, visiting) && first_of_expr(g, b, out, visiting),
        Expr::Choice(a, b) => {
            let na = first_of_expr(g, a, out, visiting);
            let nb = first_of_expr(g, b, out, visiting);
            na || nb
        }
        Expr::Opt(e) | Expr::Rep(e) | Expr::RepMax(e, _) => {
            first_of_expr(g, e, out, visiting);
            true
        }
        Expr::RepOnce(e) | Expr::Push(e) => first_of_expr(g, e, out, visiting),
        Expr::RepExact(e, n) | Expr::RepMin(e, n) | Expr::RepMinMax(e, n, _) => {
            let nullable = first_of_expr(g, e, out, visiting);
            nullable || *n == 0
        }
        Expr::PosPred(_) | Expr::NegPred(_) => true,
        Expr::Range(..) | Expr::Skip(_) | Expr::PeekSlice(..) => false,
        // Tags and pushed literals, which pest_meta has with its grammar extras: the covey
        // grammar uses none.
        #[allow(unreachable_patterns)]
        _ => false,
    }
}

fn push(out: &mut Vec<Token>, t: Token) {
    if !out.contains(&t) {
        out.push(t);
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn every_keyword_rule_is_its_word() {
        // Completion offers a keyword by the words its rule matches; each `kw_` rule of the
        // parser must match its own name's word (and may take another form of it, as
        // `kw_covariates` takes `covariate`), each as a whole word.
        for rule in Rule::all_rules() {
            let name = rule_name(*rule);
            if let Some(word) = name.strip_prefix("kw_") {
                let offered = words(&first(&name));
                assert!(offered.contains(&word.to_string()), "{name}: {offered:?}");
                for w in &offered {
                    assert!(crate::lang::parser::is_whole(*rule, w), "{name}: {w}");
                }
            }
        }
        assert!(keywords().len() > 40);
    }

    #[test]
    fn statement_words_come_from_the_grammar() {
        assert_eq!(
            words(&next_tokens("").unwrap_or_default()),
            statement_words()
        );
        let w = statement_words();
        for s in ["load", "model", "table", "require", "report", "param"] {
            assert!(w.contains(&s.to_string()), "{w:?}");
        }
        assert!(!w.contains(&"by".to_string()));
    }

    #[test]
    fn next_words_follow_the_grammar_order() {
        let after = |p: &str| words(&next_tokens(p).unwrap_or_default());
        assert_eq!(
            after("table means m for g "),
            ["by", "at", "robust", "level"].map(String::from)
        );
        assert_eq!(
            after("table differences m for g correction "),
            ["tukey", "holm", "bonferroni", "sidak", "dunnett", "none"].map(String::from)
        );
        assert_eq!(
            after("model m: y on x "),
            ["by", "without", "weights"].map(String::from)
        );
        assert!(after("table ").contains(&"regions".to_string()));
        assert!(after("plot ").contains(&"influence".to_string()));
        // A prefix with an error earlier on offers nothing.
        assert_eq!(next_tokens("tabel means "), None);
        assert!(next_tokens("table means ")
            .unwrap_or_default()
            .contains(&Token::Slot("ident")));
    }
}
