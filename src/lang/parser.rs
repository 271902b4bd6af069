//! From the text of a covey block to [`Statement`]s, one line at a time.

use pest::iterators::Pair;
use pest::Parser;
use pest_derive::Parser;

use super::ast::*;

/// Powers a term may take: x^1 is x itself, and a polynomial beyond degree 10 is not a
/// model anyone fits on purpose (its coefficients are determined to a few digits at best).
const MIN_POWER: u32 = 2;
const MAX_POWER: u32 = 10;
/// How many characters of an unexpected word a syntax error quotes.
const FOUND_CHARS: usize = 40;

#[derive(Parser)]
#[grammar = "../grammar/covey.pest"]
struct CoveyParser;

/// A statement that does not follow the grammar.
#[derive(Debug, Clone, PartialEq)]
pub struct SyntaxError {
    /// Where in the Markdown document the parser gave up.
    pub span: Span,
    /// What was expected there, in plain words.
    pub message: String,
}

/// Parses one line of a covey block. `offset` is the byte offset of the
/// line's start in the Markdown document and `line_no` its 1-based number;
/// spans in the result are document offsets. A blank or comment-only line
/// gives `Ok(None)`.
pub fn parse_line(
    text: &str,
    offset: usize,
    line_no: usize,
) -> Result<Option<Statement>, SyntaxError> {
    parse_line_with(text, offset, line_no, &Params::new())
}

/// Parameter values by name, for `@NAME` references.
pub type Params = std::collections::BTreeMap<String, Literal>;

/// [`parse_line`] with the document's parameters, so that `@NAME`
/// references resolve (an unknown one is a syntax error at the reference).
pub fn parse_line_with(
    text: &str,
    offset: usize,
    line_no: usize,
    params: &Params,
) -> Result<Option<Statement>, SyntaxError> {
    // A line's own CRLF ending is not part of `text`, so a carriage return here is a lone one:
    // Markdown (and the user's editor) ends a line there, covey's lines end at LF. Said as what
    // it is, rather than as a character the grammar did not expect.
    if let Some(at) = text.find('\r') {
        // An empty span at the end of the line the carriage return ends: the messages count it
        // as a line ending, and a span over it would reach into the next line.
        return Err(SyntaxError {
            span: Span {
                start: offset + at,
                end: offset + at,
            },
            message: "a carriage return alone (CR, as in files from old Mac systems) ends a line \
                      here, and covey reads lines ended by LF or CRLF; save the document with \
                      LF or CRLF line endings"
                .to_string(),
        });
    }
    let mut pairs =
        CoveyParser::parse(Rule::line, text).map_err(|e| syntax_error(&e, text, offset))?;
    let Some(line) = pairs.next() else {
        return Ok(None);
    };
    let Some(stmt) = line.into_inner().find(|p| p.as_rule() != Rule::EOI) else {
        return Ok(None);
    };
    let b = Builder { offset, params };
    let span = b.span(&stmt);
    let kind = b.statement(stmt)?;
    Ok(Some(Statement {
        kind,
        span,
        line: line_no,
        text: text[span.start - offset..span.end - offset]
            .trim()
            .to_string(),
    }))
}

/// What the grammar accepts right after `prefix`, the start of a line of a block: the rules the
/// parser tried at its end, in the order it tried them (the end of the line among them when
/// the line may stop there). `None` when the prefix does not parse up to its end (a syntax error
/// earlier on, or a comment). The language server completes from this, so that what it offers
/// is what the grammar accepts and nothing is listed twice.
pub fn expected_after(prefix: &str) -> Option<Vec<Rule>> {
    // A control character no rule accepts (the grammar's whitespace is space and tab): the parse
    // stops at it, with what it tried there.
    let probe = format!("{prefix}\u{1}");
    let e = CoveyParser::parse(Rule::line, &probe).err()?;
    let pos = match e.location {
        pest::error::InputLocation::Pos(p) => p,
        pest::error::InputLocation::Span((s, _)) => s,
    };
    match e.variant {
        pest::error::ErrorVariant::ParsingError { positives, .. } if pos == prefix.len() => {
            Some(positives)
        }
        _ => None,
    }
}

/// Whether the whole of `text` is one `rule` of the grammar (a keyword rule and its word, say).
pub fn is_whole(rule: Rule, text: &str) -> bool {
    CoveyParser::parse(rule, text)
        .ok()
        .and_then(|mut p| p.next())
        .is_some_and(|p| p.as_str().len() == text.len())
}

fn syntax_error(e: &pest::error::Error<Rule>, text: &str, offset: usize) -> SyntaxError {
    use pest::error::{ErrorVariant, InputLocation};
    let pos = match e.location {
        InputLocation::Pos(p) => p,
        InputLocation::Span((s, _)) => s,
    };
    // Point at the whole offending word, not just its first byte.
    let rest = &text[pos.min(text.len())..];
    // At least one whole character (a leading space such as U+00A0 is
    // several bytes), so the span and the quoted word end on a boundary.
    let word_len = match rest.char_indices().find(|(_, c)| c.is_whitespace()) {
        Some((0, c)) => c.len_utf8(),
        Some((i, _)) => i,
        None => rest.len(),
    };
    let span = Span {
        start: offset + pos,
        end: offset + pos + word_len,
    };
    let found = if rest.trim().is_empty() {
        "the end of the line".to_string()
    } else {
        // A word is quoted whole up to a few dozen characters: a line of a million brackets
        // is not repeated in the message.
        let word = rest.get(..word_len).unwrap_or(rest);
        match word.char_indices().nth(FOUND_CHARS) {
            Some((cut, _)) => format!("`{}…`", word.get(..cut).unwrap_or(word)),
            None => crate::report::markdown::code(word).to_string(),
        }
    };
    let message = match &e.variant {
        ErrorVariant::ParsingError { positives, .. } => {
            // The words of earlier versions (`table pairs`, `adjust`) still parse, to be told
            // what replaced them, but are never offered as what may come next.
            let current = positives
                .iter()
                .filter(|r| !matches!(r, Rule::kw_pairs | Rule::kw_adjust | Rule::old_pairs_table));
            let mut wanted: Vec<&str> = current.map(|r| describe(*r)).collect();
            // After `load`: a path, or `database NAME`, said as one thing.
            if positives.contains(&Rule::kw_database) && positives.contains(&Rule::text) {
                wanted = vec![
                    "the data file's path in double quotes (or a parameter, or `database NAME`)",
                ];
            }
            wanted.sort_unstable();
            wanted.dedup();
            let word = rest.get(..word_len).unwrap_or(rest);
            if pos == 0 || text[..pos].trim().is_empty() {
                format!(
                    "this line does not start with a statement (found {found}); a statement starts with {}{}",
                    join_or(STATEMENT_WORDS),
                    suggestion(word, STATEMENT_WORDS)
                )
            } else if wanted.is_empty() {
                format!("unexpected {found}")
            } else {
                let mut words: Vec<&str> = wanted
                    .iter()
                    .filter_map(|w| w.strip_prefix('`')?.strip_suffix('`'))
                    .filter(|w| !w.contains([' ', '`']))
                    .collect();
                if positives.contains(&Rule::plot_kind) {
                    words.extend(PLOT_KINDS);
                }
                format!(
                    "expected {}, found {found}{}",
                    join_or(&wanted),
                    form_hint(word, &text[..pos], &words)
                        .unwrap_or_else(|| suggestion(word, &words))
                )
            }
        }
        ErrorVariant::CustomError { message } => message.clone(),
    };
    SyntaxError { span, message }
}

/// The words a statement starts with, in the order the README introduces them.
const STATEMENT_WORDS: &[&str] = &[
    "load", "missing", "use", "factor", "keep", "show", "label", "compute", "model", "table",
    "check", "plot", "unit", "param", "require", "report", "plan",
];

/// The kinds of figure, as `plot_kind` in the grammar spells them.
const PLOT_KINDS: &[&str] = &[
    "lines",
    "residuals",
    "quantiles",
    "means",
    "influence",
    "groups",
    "interaction",
];

/// "; did you mean `load`?" when the word the parser stopped at is a likely misspelling of one
/// of `words` (a few letters swapped, left out or doubled), and nothing otherwise.
/// A word of three letters or more that begins exactly one of `words` counts as that word cut
/// short (`coef` for `coefficients`).
fn suggestion(found: &str, words: &[&str]) -> String {
    let lower = found.to_lowercase();
    let mut starts = words
        .iter()
        .filter(|w| lower.chars().count() >= 3 && w.starts_with(lower.as_str()));
    let cut_short = match (starts.next(), starts.next()) {
        (Some(w), None) => Some(*w),
        _ => None,
    };
    let near = crate::diagnostic::closest(found, words)
        .or(cut_short)
        .filter(|w| !w.eq_ignore_ascii_case(found));
    match near {
        Some(w) => format!("; did you mean {w}?", w = crate::report::markdown::code(w)),
        None => String::new(),
    }
}

/// A hint for a word written in another notation's habit (`y ~ x`, `a * b`, `a:b`), or for a
/// keyword read as a name because the name before it is missing (`table differences for g m`:
/// `for` taken for the model's name, and `for` expected again at `g`).
fn form_hint(found: &str, before: &str, words: &[&str]) -> Option<String> {
    if found.starts_with('~') && words.contains(&"on") {
        return Some(
            "; covey writes a model as `model NAME: RESPONSE on TERM + TERM`, with `on` between \
             the response and the terms"
                .to_string(),
        );
    }
    if (found.starts_with('*') || found.starts_with(':')) && words.contains(&"+") {
        return Some(
            "; an interaction is written `A by B`, and its main effects are terms of their own \
             (`A + B + A by B`)"
                .to_string(),
        );
    }
    let last = before.split_whitespace().last()?;
    if words.contains(&last) {
        return Some(format!(
            "; {} before it was read as a name: is a name missing before {}?",
            crate::report::markdown::code(last),
            crate::report::markdown::code(last)
        ));
    }
    None
}

fn join_or(items: &[&str]) -> String {
    match items {
        [] => String::new(),
        [one] => (*one).to_string(),
        [rest @ .., last] => format!("{} or {last}", rest.join(", ")),
    }
}

/// Plain words for what a grammar rule stands for, used in syntax errors.
fn describe(rule: Rule) -> &'static str {
    match rule {
        Rule::string => "a double-quoted text",
        Rule::ident => "a name",
        Rule::name => "a column name",
        Rule::number => "a number",
        Rule::integer => "a whole number",
        Rule::value | Rule::value_list => "a value (number, word or quoted text)",
        Rule::compare_op => "a comparison (==, !=, <, <=, >, >=)",
        Rule::condition
        | Rule::conjunction
        | Rule::negation
        | Rule::primary
        | Rule::comparison
        | Rule::membership => "a condition such as `dose > 2` or `group in (A, B)`",
        Rule::terms | Rule::term | Rule::part | Rule::transformed | Rule::powered => {
            "a model term (a column, `A by B`, `x^2`, `log(x)` or `sqrt(x)`)"
        }
        Rule::transform => "`log` or `sqrt`",
        Rule::response => "a response column, or `log(y)` or `sqrt(y)`",
        Rule::expr | Rule::product | Rule::signed | Rule::raised | Rule::atom => {
            "an expression (numbers, columns, + - * / ^, parentheses, log, log10, exp, sqrt, abs, mean, sd)"
        }
        Rule::call | Rule::function => "a function: log, log10, exp, sqrt or abs",
        Rule::column_call | Rule::aggregate => "`mean(COLUMN)` or `sd(COLUMN)`",
        Rule::minus => "`-`",
        Rule::times => "`*`",
        Rule::divide => "`/`",
        Rule::load_clause
        | Rule::load_sheet
        | Rule::load_table
        | Rule::load_query
        | Rule::load_separator
        | Rule::load_decimal
        | Rule::load_as => {
            "a clause of load (sheet, table, query, separator, decimal or as)"
        }
        Rule::kw_sheet => "`sheet`",
        Rule::kw_query => "`query`",
        Rule::kw_separator => "`separator`",
        Rule::kw_tab => "`tab` or a quoted separator",
        Rule::kw_decimal => "`decimal`",
        Rule::kw_database => "`database`",
        Rule::kw_compute => "`compute`",
        Rule::kw_label => "`label`",
        Rule::load_database_stmt => "`load database NAME query \"SQL\"`",
        Rule::compute_stmt => "`compute NAME = EXPRESSION`",
        Rule::label_stmt => "`label rows by COLUMN`",
        Rule::ss_type => "1, 2 or 3",
        Rule::correction_method => "tukey, holm, bonferroni, sidak, dunnett or none",
        Rule::correction_opt => "`correction` and a method (tukey, holm, bonferroni, sidak, dunnett, none)",
        Rule::versus_opt => "`versus` and the control level",
        Rule::side => "`above` or `below`",
        Rule::robust_opt | Rule::kw_robust => "`robust`",
        Rule::weights_opt => "`weights` and a column of weights",
        Rule::anova_type => "`type` and 1, 2 or 3",
        Rule::kw_differences => "`differences`",
        Rule::kw_within | Rule::within_opt => "`within` and a factor",
        Rule::kw_correction => "`correction`",
        Rule::kw_versus => "`versus`",
        Rule::setting | Rule::at_clause => "a setting such as `x = 20`",
        Rule::EOI => "the end of the line",
        Rule::statement
        | Rule::load_stmt
        | Rule::missing_stmt
        | Rule::use_stmt
        | Rule::factor_stmt
        | Rule::keep_stmt
        | Rule::show_stmt
        | Rule::model_stmt
        | Rule::table_stmt
        | Rule::check_stmt
        | Rule::plot_stmt
        | Rule::unit_stmt => "load, missing, use, factor, keep, show, model, table, check, plot or unit",
        Rule::summary_table
        | Rule::fit_table
        | Rule::coefficients_table
        | Rule::anova_table
        | Rule::compare_table
        | Rule::means_table
        | Rule::differences_table
        | Rule::old_pairs_table
        | Rule::slopes_table
        | Rule::contrast_table
        | Rule::regions_table => {
            "a table kind (summary, fit, coefficients, anova, compare, means, differences, slopes, contrast, regions)"
        }
        Rule::no_intercept => "`without intercept`",
        Rule::colon => "`:`",
        Rule::comma => "`,`",
        Rule::plus => "`+`",
        Rule::caret => "`^`",
        Rule::equals => "`=`",
        Rule::open => "`(`",
        Rule::close => "`)`",
        Rule::level_opt => "`level` and a confidence level such as 0.99",
        Rule::alpha_opt => "`alpha` and a significance level such as 0.05",
        Rule::kw_load => "`load`",
        Rule::kw_as => "`as`",
        Rule::kw_missing => "`missing`",
        Rule::kw_use => "`use`",
        Rule::kw_factor => "`factor`",
        Rule::kw_levels => "`levels`",
        Rule::kw_keep => "`keep`",
        Rule::kw_where => "`where`",
        Rule::kw_show => "`show`",
        Rule::kw_or => "`or`",
        Rule::kw_and => "`and`",
        Rule::kw_not => "`not`",
        Rule::kw_in => "`in`",
        Rule::kw_model => "`model`",
        Rule::kw_on => "`on`",
        Rule::kw_by => "`by`",
        Rule::kw_without => "`without`",
        Rule::kw_intercept => "`intercept`",
        Rule::kw_table => "`table`",
        Rule::kw_summary => "`summary`",
        Rule::kw_fit => "`fit`",
        Rule::kw_coefficients => "`coefficients`",
        Rule::kw_anova => "`anova`",
        Rule::kw_type => "`type`",
        Rule::kw_compare => "`compare`",
        Rule::kw_means => "`means`",
        Rule::kw_for => "`for`",
        Rule::kw_at => "`at`",
        Rule::kw_pairs => "`pairs`",
        Rule::kw_adjust => "`adjust`",
        Rule::kw_slopes => "`slopes`",
        Rule::kw_of => "`of`",
        Rule::kw_contrast => "`contrast`",
        Rule::kw_weights => "`weights`",
        Rule::kw_regions => "`regions`",
        Rule::kw_between => "`between`",
        Rule::kw_level => "`level`",
        Rule::kw_alpha => "`alpha`",
        Rule::kw_check => "`check`",
        Rule::kw_plot => "`plot`",
        Rule::kw_unit => "`unit`",
        Rule::kw_param => "`param`",
        Rule::kw_require => "`require`",
        Rule::kw_equal => "`equal`",
        Rule::kw_normality => "`normality`",
        Rule::kw_rows => "`rows`",
        Rule::kw_per => "`per`",
        Rule::kw_balance => "`balance`",
        Rule::kw_report => "`report`",
        Rule::kw_term => "`term`",
        Rule::param_ref => "a parameter such as `@alpha`",
        Rule::text => "a double-quoted text or a parameter",
        Rule::num => "a number or a parameter",
        Rule::require_stmt
        | Rule::require_slopes
        | Rule::require_normality
        | Rule::require_rows
        | Rule::require_balance => {
            "a gate: `equal slopes M for F`, `normality M`, `N rows per F` or `balance X by F`"
        }
        Rule::report_stmt
        | Rule::report_term
        | Rule::report_difference
        | Rule::report_old_pairs => "`term NAME` or `differences F between A and B`",
        Rule::plot_kind => {
            "a figure kind (lines, residuals, quantiles, means, influence, groups, interaction)"
        }
        Rule::kw_plan => "`plan`",
        Rule::kw_groups => "`groups`",
        Rule::kw_ratio => "`ratio`",
        Rule::kw_with => "`with`",
        Rule::kw_covariates => "`covariates`",
        Rule::kw_explaining => "`explaining`",
        Rule::kw_effect => "`effect`",
        Rule::kw_detectable => "`detectable`",
        Rule::kw_f => "`f`",
        Rule::kw_sd => "`sd`",
        Rule::kw_power => "`power`",
        Rule::kw_n => "`n`",
        Rule::kw_from => "`from`",
        Rule::kw_upper => "`upper`",
        Rule::kw_to => "`to`",
        Rule::kw_r2 => "`r2`",
        Rule::plan_stmt => "`plan NAME for K groups ... effect ...`",
        Rule::plan_ratio => "`in ratio` and relative sizes such as 2:1:1",
        Rule::plan_covariates => "`with C covariates`",
        Rule::plan_given | Rule::plan_detectable => {
            "an effect: `f F`, `means M1, M2, ...` or `detectable`"
        }
        Rule::plan_f => "`f` and an effect size",
        Rule::plan_means => "`means` and the group means",
        Rule::plan_sd => "`sd` and the SD within groups",
        Rule::plan_power => "`power` and a target power such as 0.9",
        Rule::plan_n => "`n` and a number per group",
        Rule::plan_pilot => "`from` and a pilot model",
        Rule::plot_power_stmt => "`plot power PLAN`",
        Rule::power_lines => "`by f` or `by r2` and a list of values",
        _ => "more text",
    }
}

/// Builds AST nodes from pest pairs, turning line offsets into document
/// offsets.
struct Builder<'p> {
    offset: usize,
    params: &'p Params,
}

fn is_keyword(rule: Rule) -> bool {
    matches!(
        rule,
        Rule::kw_load
            | Rule::kw_as
            | Rule::kw_missing
            | Rule::kw_use
            | Rule::kw_factor
            | Rule::kw_levels
            | Rule::kw_keep
            | Rule::kw_where
            | Rule::kw_show
            | Rule::kw_or
            | Rule::kw_and
            | Rule::kw_not
            | Rule::kw_in
            | Rule::kw_model
            | Rule::kw_on
            | Rule::kw_by
            | Rule::kw_without
            | Rule::kw_intercept
            | Rule::kw_table
            | Rule::kw_summary
            | Rule::kw_fit
            | Rule::kw_coefficients
            | Rule::kw_anova
            | Rule::kw_type
            | Rule::kw_compare
            | Rule::kw_means
            | Rule::kw_for
            | Rule::kw_at
            | Rule::kw_pairs
            | Rule::kw_differences
            | Rule::kw_within
            | Rule::kw_correction
            | Rule::kw_versus
            | Rule::kw_robust
            | Rule::kw_adjust
            | Rule::kw_slopes
            | Rule::kw_of
            | Rule::kw_contrast
            | Rule::kw_weights
            | Rule::kw_regions
            | Rule::kw_between
            | Rule::kw_level
            | Rule::kw_alpha
            | Rule::kw_check
            | Rule::kw_plot
            | Rule::kw_unit
            | Rule::kw_param
            | Rule::kw_require
            | Rule::kw_equal
            | Rule::kw_normality
            | Rule::kw_rows
            | Rule::kw_per
            | Rule::kw_balance
            | Rule::kw_report
            | Rule::kw_term
            | Rule::kw_plan
            | Rule::kw_groups
            | Rule::kw_ratio
            | Rule::kw_with
            | Rule::kw_covariates
            | Rule::kw_explaining
            | Rule::kw_effect
            | Rule::kw_detectable
            | Rule::kw_f
            | Rule::kw_sd
            | Rule::kw_power
            | Rule::kw_n
            | Rule::kw_from
            | Rule::kw_upper
            | Rule::kw_to
            | Rule::kw_r2
            | Rule::kw_sheet
            | Rule::kw_query
            | Rule::kw_separator
            | Rule::kw_decimal
            | Rule::kw_database
            | Rule::kw_compute
            | Rule::kw_label
    )
}

/// The meaningful children of a pair: keywords dropped.
fn children(pair: Pair<'_, Rule>) -> Vec<Pair<'_, Rule>> {
    pair.into_inner()
        .filter(|p| !is_keyword(p.as_rule()) && !is_punctuation(p.as_rule()))
        .collect()
}

fn is_punctuation(rule: Rule) -> bool {
    matches!(
        rule,
        Rule::colon
            | Rule::comma
            | Rule::plus
            | Rule::caret
            | Rule::minus
            | Rule::times
            | Rule::divide
            | Rule::equals
            | Rule::open
            | Rule::close
    )
}

impl Builder<'_> {
    fn span(&self, pair: &Pair<'_, Rule>) -> Span {
        let s = pair.as_span();
        Span {
            start: self.offset + s.start(),
            end: self.offset + s.end(),
        }
    }

    fn error(&self, pair: &Pair<'_, Rule>, message: String) -> SyntaxError {
        SyntaxError {
            span: self.span(pair),
            message,
        }
    }

    fn statement(&self, pair: Pair<'_, Rule>) -> Result<StatementKind, SyntaxError> {
        let rule = pair.as_rule();
        let pair_kids: Vec<Pair<'_, Rule>> = pair.clone().into_inner().collect();
        let mut kids = children(pair).into_iter();
        Ok(match rule {
            Rule::load_stmt => {
                let path = self.string(next(&mut kids)?)?;
                let mut clauses = LoadClauses::default();
                let mut name = None;
                for clause in kids {
                    let Some(c) = clause.into_inner().next() else {
                        continue;
                    };
                    let rule = c.as_rule();
                    let word = c
                        .as_str()
                        .split_whitespace()
                        .next()
                        .unwrap_or("")
                        .to_string();
                    let at = c.clone();
                    let value = next(&mut children(c).into_iter());
                    let slot = match rule {
                        Rule::load_sheet => &mut clauses.sheet,
                        Rule::load_table => &mut clauses.table,
                        Rule::load_query => &mut clauses.query,
                        Rule::load_separator => &mut clauses.separator,
                        Rule::load_decimal => &mut clauses.decimal,
                        _ => &mut name,
                    };
                    if slot.is_some() {
                        return Err(self.error(
                            &at,
                            format!(
                                "{word} is given twice; give it once",
                                word = crate::report::markdown::code(&word)
                            ),
                        ));
                    }
                    *slot = Some(match (rule, value) {
                        (Rule::load_as, Ok(v)) => self.ident(v),
                        (Rule::load_table, Ok(v)) => self.name(v),
                        (Rule::load_separator, Ok(v)) if v.as_rule() == Rule::kw_tab => Spanned {
                            value: "\t".into(),
                            span: self.span(&v),
                        },
                        (_, Ok(v)) => self.string(v)?,
                        (_, Err(e)) => return Err(e),
                    });
                }
                StatementKind::Load {
                    path,
                    name,
                    clauses,
                }
            }
            Rule::load_database_stmt => {
                let database = self.ident(next(&mut kids)?);
                let mut query = None;
                let mut name = None;
                for clause in kids {
                    let rule = clause.as_rule();
                    let word = clause
                        .as_str()
                        .split_whitespace()
                        .next()
                        .unwrap_or("")
                        .to_string();
                    let at = clause.clone();
                    let v = next(&mut children(clause).into_iter())?;
                    let value = if rule == Rule::load_as {
                        self.ident(v)
                    } else {
                        self.string(v)?
                    };
                    let slot = if rule == Rule::load_as {
                        &mut name
                    } else {
                        &mut query
                    };
                    if slot.is_some() {
                        return Err(self.error(
                            &at,
                            format!(
                                "{word} is given twice; give it once",
                                word = crate::report::markdown::code(&word)
                            ),
                        ));
                    }
                    *slot = Some(value);
                }
                let query = query.ok_or_else(|| SyntaxError {
                    span: database.span,
                    message: format!(
                        "a database is read by a query: write `load database {} query \"SELECT ...\"`",
                        database.value
                    ),
                })?;
                StatementKind::LoadDatabase {
                    database,
                    query,
                    name,
                }
            }
            Rule::compute_stmt => {
                let column = self.name(next(&mut kids)?);
                let expr = self.expr(next(&mut kids)?)?;
                StatementKind::Compute { column, expr }
            }
            Rule::label_stmt => StatementKind::LabelRows {
                column: self.name(next(&mut kids)?),
            },
            Rule::missing_stmt => StatementKind::Missing {
                markers: kids
                    .map(|p| self.string(p).map(|s| s.value))
                    .collect::<Result<_, _>>()?,
            },
            Rule::use_stmt => StatementKind::Use {
                name: self.ident(next(&mut kids)?),
            },
            Rule::factor_stmt => {
                let column = self.name(next(&mut kids)?);
                let levels = kids
                    .next()
                    .map(|list| {
                        children(list)
                            .into_iter()
                            .map(|v| {
                                let span = self.span(&v);
                                Ok(Spanned {
                                    value: self.literal(v)?.as_text().to_string(),
                                    span,
                                })
                            })
                            .collect::<Result<Vec<_>, SyntaxError>>()
                    })
                    .transpose()?;
                StatementKind::Factor { column, levels }
            }
            Rule::keep_stmt => StatementKind::Keep {
                condition: self.condition(next(&mut kids)?)?,
            },
            Rule::show_stmt => StatementKind::Show {
                name: kids.next().map(|p| self.ident(p)),
            },
            Rule::model_stmt => StatementKind::Model(self.model(kids)?),
            Rule::table_stmt => StatementKind::Table(self.table(next(&mut kids)?)?),
            Rule::param_stmt => {
                let name = self.ident(next(&mut kids)?);
                let v = next(&mut kids)?;
                let default = self.literal(v)?;
                StatementKind::Param {
                    value: self
                        .params
                        .get(&name.value)
                        .cloned()
                        .unwrap_or(default.clone()),
                    name,
                    default,
                }
            }
            Rule::require_stmt => StatementKind::Require(self.gate(next(&mut kids)?)?),
            Rule::report_stmt => {
                let model = self.ident(next(&mut kids)?);
                let what = next(&mut kids)?;
                let wrule = what.as_rule();
                let parts = children(what.clone());
                let find = |r: Rule| parts.iter().find(|p| p.as_rule() == r).cloned();
                let names: Vec<Pair<'_, Rule>> = parts
                    .iter()
                    .filter(|p| matches!(p.as_rule(), Rule::name | Rule::value))
                    .cloned()
                    .collect();
                let text_of = |p: Option<&Pair<'_, Rule>>| -> Result<Spanned<String>, SyntaxError> {
                    let p = p.cloned().ok_or_else(missing_part)?;
                    Ok(Spanned {
                        span: self.span(&p),
                        value: self.literal(p)?.as_text().to_string(),
                    })
                };
                if wrule == Rule::report_old_pairs {
                    return Err(self.error(
                        &what,
                        "`report M pairs` is now `report M differences F between A and B [correction METHOD]`".into(),
                    ));
                }
                if let Some(old) = find(Rule::old_adjust) {
                    return Err(old_adjust_error(self, &old));
                }
                StatementKind::Report(if wrule == Rule::report_term {
                    ReportRequest::Term {
                        model,
                        term: self.name(names.first().cloned().ok_or_else(missing_part)?),
                        kind: ss_kind_of(
                            find(Rule::ss_type)
                                .map(|p| p.as_str().to_string())
                                .as_deref(),
                        ),
                    }
                } else {
                    once(self, &parts, &[Rule::correction_opt])?;
                    ReportRequest::Difference {
                        model,
                        factor: self.name(names.first().cloned().ok_or_else(missing_part)?),
                        first: text_of(names.get(1))?,
                        second: text_of(names.get(2))?,
                        correction: find(Rule::correction_opt)
                            .map(|p| self.correction(p))
                            .transpose()?,
                    }
                })
            }
            Rule::check_stmt => StatementKind::Check {
                model: self.ident(next(&mut kids)?),
                alpha: kids.next().map(|p| self.option_number(p)).transpose()?,
            },
            Rule::unit_stmt => StatementKind::Unit {
                column: self.name(next(&mut kids)?),
                unit: self.string(next(&mut kids)?)?,
            },
            Rule::plot_stmt => {
                // `of` and `for` are dropped as keywords: tell the two
                // optional names apart by the keyword before each.
                let mut covariate = None;
                let mut factor = None;
                let mut by = None;
                let mut kind = PlotKind::Lines;
                let mut model = None;
                let mut after: Option<Rule> = None;
                let all: Vec<Pair<'_, Rule>> = pair_kids;
                for p in all {
                    match p.as_rule() {
                        Rule::kw_of | Rule::kw_for | Rule::kw_by => after = Some(p.as_rule()),
                        Rule::plot_kind => {
                            kind = match p.as_str() {
                                "residuals" => PlotKind::Residuals,
                                "quantiles" => PlotKind::Quantiles,
                                "means" => PlotKind::Means,
                                "influence" => PlotKind::Influence,
                                "groups" => PlotKind::Groups,
                                "interaction" => PlotKind::Interaction,
                                _ => PlotKind::Lines,
                            }
                        }
                        Rule::ident if model.is_none() => model = Some(self.ident(p)),
                        Rule::name => match after {
                            Some(Rule::kw_of) => covariate = Some(self.name(p)),
                            Some(Rule::kw_by) => by = Some(self.name(p)),
                            _ => factor = Some(self.name(p)),
                        },
                        _ => {}
                    }
                }
                StatementKind::Plot {
                    kind,
                    model: model.ok_or_else(missing_part)?,
                    covariate,
                    factor,
                    by,
                }
            }
            Rule::plan_stmt => StatementKind::Plan(self.plan(pair_kids)?),
            Rule::plot_power_stmt => self.power_plot(pair_kids)?,
            _ => unreachable_rule(rule)?,
        })
    }

    /// A number with its place.
    fn spanned_number(&self, pair: &Pair<'_, Rule>) -> Result<Spanned<f64>, SyntaxError> {
        Ok(Spanned {
            value: self.number(pair)?,
            span: self.span(pair),
        })
    }

    /// The numbers among a pair's children, as one list spanning from the first to the last.
    fn number_list(&self, pair: Pair<'_, Rule>) -> Result<Spanned<Vec<f64>>, SyntaxError> {
        let numbers: Vec<Pair<'_, Rule>> = pair
            .into_inner()
            .filter(|p| p.as_rule() == Rule::num)
            .collect();
        let value = numbers
            .iter()
            .map(|p| self.number(p))
            .collect::<Result<Vec<f64>, _>>()?;
        let span = match (numbers.first(), numbers.last()) {
            (Some(a), Some(b)) => Span {
                start: self.span(a).start,
                end: self.span(b).end,
            },
            _ => Span::default(),
        };
        Ok(Spanned { value, span })
    }

    /// The first child of `pair` that is a number.
    fn first_number(&self, pair: Pair<'_, Rule>) -> Result<Spanned<f64>, SyntaxError> {
        let n = pair
            .into_inner()
            .find(|p| p.as_rule() == Rule::num)
            .ok_or_else(missing_part)?;
        self.spanned_number(&n)
    }

    /// `plan NAME for K groups ...`, from the statement's parts.
    fn plan(&self, parts: Vec<Pair<'_, Rule>>) -> Result<PlanDecl, SyntaxError> {
        let mut name = None;
        let mut groups = None;
        let mut ratio = None;
        let mut covariates = None;
        let mut r_squared = None;
        let mut effect = None;
        let mut alpha = None;
        let mut power = None;
        let mut n = None;
        let mut pilot = None;
        let mut upper = None;
        for p in parts {
            match p.as_rule() {
                Rule::ident => name = Some(self.ident(p)),
                Rule::num => groups = Some(self.spanned_number(&p)?),
                Rule::plan_ratio => ratio = Some(self.number_list(p)?),
                Rule::plan_covariates => {
                    let nums: Vec<Pair<'_, Rule>> = p
                        .into_inner()
                        .filter(|q| q.as_rule() == Rule::num)
                        .collect();
                    covariates = nums.first().map(|q| self.spanned_number(q)).transpose()?;
                    r_squared = nums.get(1).map(|q| self.spanned_number(q)).transpose()?;
                }
                Rule::plan_given | Rule::plan_detectable => {
                    let detectable = p.as_rule() == Rule::plan_detectable;
                    let mut sd = None;
                    let mut given = None;
                    for q in p.into_inner() {
                        match q.as_rule() {
                            Rule::plan_f => given = Some(PlanEffect::F(self.first_number(q)?)),
                            Rule::plan_means => {
                                let mut means_sd = None;
                                let numbers = self.number_list(q.clone())?;
                                if let Some(s) =
                                    q.into_inner().find(|r| r.as_rule() == Rule::plan_sd)
                                {
                                    means_sd = Some(self.first_number(s)?);
                                }
                                given = Some(PlanEffect::Means {
                                    means: numbers,
                                    sd: means_sd,
                                });
                            }
                            Rule::plan_sd => sd = Some(self.first_number(q)?),
                            Rule::alpha_opt => alpha = Some(self.option_number(q)?),
                            Rule::plan_power => power = Some(self.first_number(q)?),
                            Rule::plan_n => n = Some(self.first_number(q)?),
                            _ => {}
                        }
                    }
                    effect = if detectable {
                        Some(PlanEffect::Detectable { sd })
                    } else {
                        given
                    };
                }
                Rule::plan_pilot => {
                    for q in p.into_inner() {
                        match q.as_rule() {
                            Rule::ident => pilot = Some(self.ident(q)),
                            Rule::num => upper = Some(self.spanned_number(&q)?),
                            _ => {}
                        }
                    }
                }
                _ => {}
            }
        }
        Ok(PlanDecl {
            name: name.ok_or_else(missing_part)?,
            groups: groups.ok_or_else(missing_part)?,
            ratio,
            covariates,
            r_squared,
            effect: effect.ok_or_else(missing_part)?,
            alpha,
            power,
            n,
            pilot,
            upper,
        })
    }

    /// `plot power PLAN [by f ... | by r2 ...] [to N]`, from the statement's parts.
    fn power_plot(&self, parts: Vec<Pair<'_, Rule>>) -> Result<StatementKind, SyntaxError> {
        let mut plan = None;
        let mut lines = None;
        let mut to = None;
        for p in parts {
            match p.as_rule() {
                Rule::ident => plan = Some(self.ident(p)),
                Rule::num => to = Some(self.spanned_number(&p)?),
                Rule::power_lines => {
                    let by_f = p.clone().into_inner().any(|q| q.as_rule() == Rule::kw_f);
                    let values = self.number_list(p)?;
                    lines = Some(if by_f {
                        PowerLines::Effects(values)
                    } else {
                        PowerLines::RSquared(values)
                    });
                }
                _ => {}
            }
        }
        Ok(StatementKind::PowerPlot {
            plan: plan.ok_or_else(missing_part)?,
            lines,
            to,
        })
    }

    fn model<'a>(
        &self,
        mut kids: impl Iterator<Item = Pair<'a, Rule>>,
    ) -> Result<ModelDecl, SyntaxError> {
        let name = self.ident(next(&mut kids)?);
        let response_pair = next(&mut kids)?;
        let (response, response_transform) = match response_pair.clone().into_inner().next() {
            Some(p) if p.as_rule() == Rule::transformed => {
                let mut k = children(p).into_iter();
                let f = next(&mut k)?;
                let t = if f.as_str() == "log" {
                    TransformDecl::Log
                } else {
                    TransformDecl::Sqrt
                };
                (self.name(next(&mut k)?), t)
            }
            Some(p) => (self.name(p), TransformDecl::None),
            None => (self.name(response_pair), TransformDecl::None),
        };
        let terms_pair = next(&mut kids)?;
        let mut terms = Vec::new();
        for term in children(terms_pair) {
            let span = self.span(&term);
            let mut parts = Vec::new();
            for part in children(term) {
                parts.push(self.part(part)?);
            }
            terms.push(TermDecl { parts, span });
        }
        let rest: Vec<Pair<'a, Rule>> = kids.collect();
        once(self, &rest, &[Rule::no_intercept, Rule::weights_opt])?;
        let intercept = !rest.iter().any(|p| p.as_rule() == Rule::no_intercept);
        let weights = rest
            .iter()
            .find(|p| p.as_rule() == Rule::weights_opt)
            .map(|p| next(&mut children(p.clone()).into_iter()).map(|n| self.name(n)))
            .transpose()?;
        Ok(ModelDecl {
            name,
            response,
            response_transform,
            terms,
            intercept,
            weights,
        })
    }

    /// An expression of `compute`: sums of products of signed powers of atoms.
    fn expr(&self, pair: Pair<'_, Rule>) -> Result<Expr, SyntaxError> {
        let span = self.span(&pair);
        let rule = pair.as_rule();
        match rule {
            Rule::number | Rule::param_ref => {
                return Ok(Expr {
                    kind: ExprKind::Number(self.number(&pair)?),
                    span,
                })
            }
            Rule::name => {
                return Ok(Expr {
                    kind: ExprKind::Column(self.name(pair).value),
                    span,
                })
            }
            _ => {}
        }
        let all: Vec<Pair<'_, Rule>> = pair.into_inner().collect();
        match rule {
            Rule::expr | Rule::product => {
                let mut items = all.into_iter();
                let mut acc = self.expr(next(&mut items)?)?;
                while let Some(op) = items.next() {
                    let right = self.expr(next(&mut items)?)?;
                    let op = match op.as_rule() {
                        Rule::plus => BinaryOp::Add,
                        Rule::minus => BinaryOp::Subtract,
                        Rule::times => BinaryOp::Multiply,
                        _ => BinaryOp::Divide,
                    };
                    let span = Span {
                        start: acc.span.start,
                        end: right.span.end,
                    };
                    acc = Expr {
                        kind: ExprKind::Binary(op, Box::new(acc), Box::new(right)),
                        span,
                    };
                }
                Ok(acc)
            }
            Rule::signed => {
                let mut items = all.into_iter();
                let first = next(&mut items)?;
                if first.as_rule() == Rule::minus {
                    let inner = self.expr(next(&mut items)?)?;
                    Ok(Expr {
                        kind: ExprKind::Negate(Box::new(inner)),
                        span,
                    })
                } else {
                    self.expr(first)
                }
            }
            Rule::raised => {
                let mut items = all.into_iter().filter(|p| p.as_rule() != Rule::caret);
                let base = self.expr(next(&mut items)?)?;
                match items.next() {
                    Some(e) => Ok(Expr {
                        kind: ExprKind::Binary(
                            BinaryOp::Power,
                            Box::new(base),
                            Box::new(self.expr(e)?),
                        ),
                        span,
                    }),
                    None => Ok(base),
                }
            }
            Rule::atom => {
                let inner = all
                    .into_iter()
                    .find(|p| !is_punctuation(p.as_rule()))
                    .ok_or_else(missing_part)?;
                self.expr(inner)
            }
            Rule::call => {
                let mut items = all.into_iter().filter(|p| !is_punctuation(p.as_rule()));
                let f = match next(&mut items)?.as_str() {
                    "log10" => Function::Log10,
                    "log" => Function::Log,
                    "exp" => Function::Exp,
                    "sqrt" => Function::Sqrt,
                    _ => Function::Abs,
                };
                let arg = self.expr(next(&mut items)?)?;
                Ok(Expr {
                    kind: ExprKind::Call(f, Box::new(arg)),
                    span,
                })
            }
            Rule::column_call => {
                let mut items = all.into_iter().filter(|p| !is_punctuation(p.as_rule()));
                let a = if next(&mut items)?.as_str() == "mean" {
                    Aggregate::Mean
                } else {
                    Aggregate::Sd
                };
                let column = self.name(next(&mut items)?);
                Ok(Expr {
                    kind: ExprKind::Aggregate(a, column),
                    span,
                })
            }
            r => unreachable_rule(r),
        }
    }

    fn part(&self, pair: Pair<'_, Rule>) -> Result<PartDecl, SyntaxError> {
        let span = self.span(&pair);
        let inner = next(&mut children(pair).into_iter())?;
        match inner.as_rule() {
            Rule::name => Ok(PartDecl {
                column: self.name(inner),
                transform: TransformDecl::None,
                span,
            }),
            Rule::transformed => {
                let mut k = children(inner).into_iter();
                let f = next(&mut k)?;
                let transform = if f.as_str() == "log" {
                    TransformDecl::Log
                } else {
                    TransformDecl::Sqrt
                };
                Ok(PartDecl {
                    column: self.name(next(&mut k)?),
                    transform,
                    span,
                })
            }
            Rule::powered => {
                let mut k = children(inner).into_iter();
                let column = self.name(next(&mut k)?);
                let power_pair = next(&mut k)?;
                let power: u32 = power_pair
                    .as_str()
                    .parse()
                    .ok()
                    .filter(|p| (MIN_POWER..=MAX_POWER).contains(p))
                    .ok_or_else(|| {
                        self.error(
                            &power_pair,
                            format!("a power must be a whole number from {MIN_POWER} to {MAX_POWER} (write `x^2`, `x^3`, ..., `x^10`)"),
                        )
                    })?;
                Ok(PartDecl {
                    column,
                    transform: TransformDecl::Power(power),
                    span,
                })
            }
            r => unreachable_rule(r),
        }
    }

    fn table(&self, pair: Pair<'_, Rule>) -> Result<TableRequest, SyntaxError> {
        let rule = pair.as_rule();
        let pair_span = pair.clone();
        let kids = children(pair);
        // Optional clauses can appear in any subset; pick them out by rule.
        let find = |r: Rule| kids.iter().find(|p| p.as_rule() == r).cloned();
        let plain: Vec<Pair<'_, Rule>> = kids
            .iter()
            .filter(|p| matches!(p.as_rule(), Rule::ident | Rule::name | Rule::value))
            .cloned()
            .collect();
        let first_ident = || -> Result<Spanned<String>, SyntaxError> {
            let p = plain.first().cloned().ok_or_else(missing_part)?;
            Ok(self.ident(p))
        };
        if rule == Rule::old_pairs_table {
            return Err(SyntaxError {
                span: Span {
                    start: self.span(&pair_span).start,
                    end: self.span(&pair_span).start + "pairs".len(),
                },
                message: "`table pairs` is now `table differences M for F [at ...] [correction METHOD] [level L]`".into(),
            });
        }
        if let Some(old) = find(Rule::old_adjust) {
            return Err(old_adjust_error(self, &old));
        }
        once(
            self,
            &kids,
            &[
                Rule::level_opt,
                Rule::at_clause,
                Rule::robust_opt,
                Rule::anova_type,
                Rule::correction_opt,
                Rule::versus_opt,
                Rule::within_opt,
            ],
        )?;
        let robust = find(Rule::robust_opt).is_some();
        let level = find(Rule::level_opt)
            .map(|p| self.option_number(p))
            .transpose()?;
        let at = match find(Rule::at_clause) {
            Some(p) => self.settings(p)?,
            None => Vec::new(),
        };
        Ok(match rule {
            Rule::summary_table => TableRequest::Summary {
                column: self.name(plain.first().cloned().ok_or_else(missing_part)?),
                by: plain.get(1).cloned().map(|p| self.name(p)),
            },
            Rule::fit_table => TableRequest::Fit {
                model: first_ident()?,
            },
            Rule::coefficients_table => TableRequest::Coefficients {
                model: first_ident()?,
                level,
                robust,
            },
            Rule::anova_table => TableRequest::Anova {
                model: first_ident()?,
                kind: ss_kind_of(
                    find(Rule::anova_type)
                        .and_then(|p| p.into_inner().find(|q| q.as_rule() == Rule::ss_type))
                        .map(|p| p.as_str().to_string())
                        .as_deref(),
                ),
                robust,
            },
            Rule::compare_table => TableRequest::Compare {
                first: first_ident()?,
                second: self.ident(plain.get(1).cloned().ok_or_else(missing_part)?),
            },
            Rule::means_table => TableRequest::Means {
                model: first_ident()?,
                factor: self.name(plain.get(1).cloned().ok_or_else(missing_part)?),
                by: plain.get(2).cloned().map(|p| self.name(p)),
                at,
                level,
                robust,
            },
            Rule::differences_table => {
                let versus = match find(Rule::versus_opt) {
                    Some(v) => {
                        let mut control = None;
                        let mut side = Side::Both;
                        for q in v.into_inner() {
                            match q.as_rule() {
                                Rule::value => {
                                    control = Some(Spanned {
                                        span: self.span(&q),
                                        value: self.literal(q)?.as_text().to_string(),
                                    })
                                }
                                Rule::side if q.as_str() == "above" => side = Side::Above,
                                Rule::side => side = Side::Below,
                                _ => {}
                            }
                        }
                        Some(Versus {
                            control: control.ok_or_else(missing_part)?,
                            side,
                        })
                    }
                    None => None,
                };
                TableRequest::Differences {
                    model: first_ident()?,
                    factor: self.name(plain.get(1).cloned().ok_or_else(missing_part)?),
                    within: find(Rule::within_opt)
                        .and_then(|w| w.into_inner().find(|q| q.as_rule() == Rule::name))
                        .map(|p| self.name(p)),
                    at,
                    correction: find(Rule::correction_opt)
                        .map(|p| self.correction(p))
                        .transpose()?,
                    level,
                    versus,
                    robust,
                }
            }
            Rule::slopes_table => {
                let (covariate, factor) = if plain.len() >= 3 {
                    (
                        Some(self.name(plain[1].clone())),
                        self.name(plain[2].clone()),
                    )
                } else {
                    (
                        None,
                        self.name(plain.get(1).cloned().ok_or_else(missing_part)?),
                    )
                };
                TableRequest::Slopes {
                    model: first_ident()?,
                    covariate,
                    factor,
                    level,
                }
            }
            Rule::contrast_table => {
                let numbers: Vec<Pair<'_, Rule>> = kids
                    .iter()
                    .filter(|p| p.as_rule() == Rule::num)
                    .cloned()
                    .collect();
                let weights = numbers
                    .iter()
                    .map(|p| self.number(p))
                    .collect::<Result<Vec<f64>, _>>()?;
                let span = match (numbers.first(), numbers.last()) {
                    (Some(a), Some(b)) => Span {
                        start: self.span(a).start,
                        end: self.span(b).end,
                    },
                    _ => Span::default(),
                };
                TableRequest::Contrast {
                    model: first_ident()?,
                    factor: self.name(plain.get(1).cloned().ok_or_else(missing_part)?),
                    weights: Spanned {
                        value: weights,
                        span,
                    },
                    at,
                    level,
                    robust,
                }
            }
            Rule::regions_table => {
                let between = match (plain.get(3), plain.get(4)) {
                    (Some(a), Some(b)) => {
                        let text = |p: &Pair<'_, Rule>| -> Result<Spanned<String>, SyntaxError> {
                            Ok(Spanned {
                                value: self.literal(p.clone())?.as_text().to_string(),
                                span: self.span(p),
                            })
                        };
                        Some((text(a)?, text(b)?))
                    }
                    _ => None,
                };
                TableRequest::Regions {
                    model: first_ident()?,
                    covariate: self.name(plain.get(1).cloned().ok_or_else(missing_part)?),
                    factor: self.name(plain.get(2).cloned().ok_or_else(missing_part)?),
                    between,
                    alpha: find(Rule::alpha_opt)
                        .map(|p| self.option_number(p))
                        .transpose()?,
                }
            }
            r => unreachable_rule(r)?,
        })
    }

    fn gate(&self, pair: Pair<'_, Rule>) -> Result<Gate, SyntaxError> {
        let rule = pair.as_rule();
        let kids = children(pair);
        let alpha = kids
            .iter()
            .find(|p| p.as_rule() == Rule::alpha_opt)
            .cloned()
            .map(|p| self.option_number(p))
            .transpose()?;
        let names: Vec<Pair<'_, Rule>> = kids
            .iter()
            .filter(|p| matches!(p.as_rule(), Rule::name | Rule::ident))
            .cloned()
            .collect();
        let name_at = |i: usize| -> Result<Spanned<String>, SyntaxError> {
            Ok(self.name(names.get(i).cloned().ok_or_else(missing_part)?))
        };
        Ok(match rule {
            Rule::require_slopes => Gate::EqualSlopes {
                model: name_at(0)?,
                factor: name_at(1)?,
                covariate: names.get(2).cloned().map(|p| self.name(p)),
                alpha,
            },
            Rule::require_normality => Gate::Normality {
                model: name_at(0)?,
                alpha,
            },
            Rule::require_rows => {
                let n = kids
                    .iter()
                    .find(|p| p.as_rule() == Rule::num)
                    .cloned()
                    .ok_or_else(missing_part)?;
                Gate::RowsPerLevel {
                    min: Spanned {
                        value: self.number(&n)?,
                        span: self.span(&n),
                    },
                    factor: name_at(0)?,
                }
            }
            Rule::require_balance => Gate::Balance {
                covariate: name_at(0)?,
                factor: name_at(1)?,
                model: names.get(2).cloned().map(|p| self.name(p)),
                alpha,
            },
            r => unreachable_rule(r)?,
        })
    }

    fn settings(&self, pair: Pair<'_, Rule>) -> Result<Vec<Setting>, SyntaxError> {
        children(pair)
            .into_iter()
            .map(|s| {
                let mut k = children(s).into_iter();
                let column = self.name(next(&mut k)?);
                let value = self.number(&next(&mut k)?)?;
                Ok(Setting { column, value })
            })
            .collect()
    }

    fn option_number(&self, pair: Pair<'_, Rule>) -> Result<Spanned<f64>, SyntaxError> {
        let n = next(&mut children(pair).into_iter())?;
        Ok(Spanned {
            value: self.number(&n)?,
            span: self.span(&n),
        })
    }

    fn condition(&self, pair: Pair<'_, Rule>) -> Result<Condition, SyntaxError> {
        let rule = pair.as_rule();
        let kids = children(pair);
        match rule {
            Rule::condition | Rule::conjunction => {
                let mut parts = kids
                    .into_iter()
                    .map(|k| self.condition(k))
                    .collect::<Result<Vec<_>, _>>()?;
                if parts.len() == 1 {
                    return parts.pop().ok_or_else(missing_part);
                }
                Ok(if rule == Rule::condition {
                    Condition::Or(parts)
                } else {
                    Condition::And(parts)
                })
            }
            Rule::negation => {
                // `not` was dropped as a keyword: a negation with a negation
                // inside means the word was there.
                let inner = kids.into_iter().next().ok_or_else(missing_part)?;
                if inner.as_rule() == Rule::negation {
                    Ok(Condition::Not(Box::new(self.condition(inner)?)))
                } else {
                    self.condition(inner)
                }
            }
            Rule::primary => self.condition(kids.into_iter().next().ok_or_else(missing_part)?),
            Rule::comparison => {
                let mut k = kids.into_iter();
                let column = self.name(next(&mut k)?);
                let op = match next(&mut k)?.as_str() {
                    "==" => CompareOp::Eq,
                    "!=" => CompareOp::Ne,
                    "<" => CompareOp::Lt,
                    "<=" => CompareOp::Le,
                    ">" => CompareOp::Gt,
                    _ => CompareOp::Ge,
                };
                let v = next(&mut k)?;
                let span = self.span(&v);
                Ok(Condition::Compare {
                    column,
                    op,
                    value: Spanned {
                        value: self.literal(v)?,
                        span,
                    },
                })
            }
            Rule::membership => {
                let mut k = kids.into_iter();
                let column = self.name(next(&mut k)?);
                let values = children(next(&mut k)?)
                    .into_iter()
                    .map(|v| {
                        let span = self.span(&v);
                        Ok(Spanned {
                            value: self.literal(v)?,
                            span,
                        })
                    })
                    .collect::<Result<Vec<_>, SyntaxError>>()?;
                Ok(Condition::In { column, values })
            }
            r => unreachable_rule(r),
        }
    }

    /// The value of `@NAME`, or an error at the reference.
    fn param(&self, pair: &Pair<'_, Rule>) -> Result<Literal, SyntaxError> {
        let name = pair.as_str().trim_start_matches('@');
        self.params.get(name).cloned().ok_or_else(|| {
            let known: Vec<&str> = self.params.keys().map(String::as_str).collect();
            self.error(
                pair,
                if known.is_empty() {
                    format!("there is no parameter `{name}`; declare it with `param {name} = VALUE`")
                } else {
                    format!(
                        "there is no parameter `{name}` (the document declares {}); declare it with `param {name} = VALUE`",
                        known.join(", ")
                    )
                },
            )
        })
    }

    fn literal(&self, pair: Pair<'_, Rule>) -> Result<Literal, SyntaxError> {
        let inner = if pair.as_rule() == Rule::value {
            pair.into_inner().next()
        } else {
            Some(pair)
        };
        Ok(match inner {
            Some(p) if p.as_rule() == Rule::param_ref => self.param(&p)?,
            Some(p) if p.as_rule() == Rule::number => {
                let text = p.as_str().to_string();
                match text.parse::<f64>() {
                    Ok(v) if v.is_finite() => Literal::Number(v, text),
                    _ => Literal::Text(text),
                }
            }
            Some(p) if p.as_rule() == Rule::string => Literal::Text(unescape(p.as_str())),
            Some(p) => Literal::Text(p.as_str().to_string()),
            None => Literal::Text(String::new()),
        })
    }

    fn number(&self, pair: &Pair<'_, Rule>) -> Result<f64, SyntaxError> {
        if pair.as_rule() == Rule::num {
            let inner = pair.clone().into_inner().next().ok_or_else(missing_part)?;
            return self.number(&inner);
        }
        if pair.as_rule() == Rule::param_ref {
            return match self.param(pair)? {
                Literal::Number(v, _) => Ok(v),
                Literal::Text(t) => Err(self.error(
                    pair,
                    format!(
                        "parameter {} holds the text \"{t}\", but a number is needed here",
                        crate::report::markdown::code(pair.as_str().trim_start_matches('@'))
                    ),
                )),
            };
        }
        match pair.as_str().parse::<f64>() {
            Ok(v) if v.is_finite() => Ok(v),
            _ => Err(self.error(
                pair,
                format!(
                    "{} is not a finite number",
                    crate::report::markdown::code(pair.as_str())
                ),
            )),
        }
    }

    /// A quoted text, or a parameter used in its place.
    fn string(&self, pair: Pair<'_, Rule>) -> Result<Spanned<String>, SyntaxError> {
        let span = self.span(&pair);
        let inner = if pair.as_rule() == Rule::text {
            pair.into_inner().next().ok_or_else(missing_part)?
        } else {
            pair
        };
        let value = if inner.as_rule() == Rule::param_ref {
            self.param(&inner)?.as_text().to_string()
        } else {
            unescape(inner.as_str())
        };
        Ok(Spanned { span, value })
    }

    fn ident(&self, pair: Pair<'_, Rule>) -> Spanned<String> {
        Spanned {
            span: self.span(&pair),
            value: pair.as_str().to_string(),
        }
    }

    /// A column name: a bare word or a quoted string.
    fn name(&self, pair: Pair<'_, Rule>) -> Spanned<String> {
        let span = self.span(&pair);
        let inner = if pair.as_rule() == Rule::name {
            pair.into_inner().next()
        } else {
            Some(pair)
        };
        let value = match inner {
            Some(p) if p.as_rule() == Rule::string => unescape(p.as_str()),
            Some(p) => p.as_str().to_string(),
            None => String::new(),
        };
        Spanned { value, span }
    }
}

fn ss_kind_of(word: Option<&str>) -> SsKind {
    match word {
        Some("1") => SsKind::Sequential,
        Some("3") => SsKind::Marginal,
        _ => SsKind::Partial,
    }
}

impl Builder<'_> {
    /// `correction METHOD` with its place.
    fn correction(&self, pair: Pair<'_, Rule>) -> Result<Spanned<Correction>, SyntaxError> {
        let m = pair
            .into_inner()
            .find(|p| p.as_rule() == Rule::correction_method)
            .ok_or_else(missing_part)?;
        let value = match m.as_str() {
            "holm" => Correction::Holm,
            "bonferroni" => Correction::Bonferroni,
            "sidak" => Correction::Sidak,
            "dunnett" => Correction::Dunnett,
            "none" => Correction::None,
            _ => Correction::Tukey,
        };
        Ok(Spanned {
            value,
            span: self.span(&m),
        })
    }
}

/// The clause word of earlier versions, `adjust`, names the one that replaced it.
fn old_adjust_error(b: &Builder<'_>, old: &Pair<'_, Rule>) -> SyntaxError {
    let method = old
        .clone()
        .into_inner()
        .find(|p| p.as_rule() == Rule::ident)
        .map_or("METHOD".to_string(), |p| p.as_str().to_string());
    b.error(
        old,
        format!("the clause `adjust` is now `correction`: write `correction {method}`"),
    )
}

/// An error at the second of any optional clause (among `rules`) given twice.
fn once(b: &Builder<'_>, kids: &[Pair<'_, Rule>], rules: &[Rule]) -> Result<(), SyntaxError> {
    for r in rules {
        if let Some(second) = kids.iter().filter(|p| p.as_rule() == *r).nth(1) {
            let word = second.as_str().split_whitespace().next().unwrap_or("");
            return Err(b.error(
                second,
                format!(
                    "the clause {word} is given twice; keep one",
                    word = crate::report::markdown::code(word)
                ),
            ));
        }
    }
    Ok(())
}

/// The text of a double-quoted string without its quotes and escapes.
fn unescape(quoted: &str) -> String {
    let inner = quoted
        .strip_prefix('"')
        .and_then(|s| s.strip_suffix('"'))
        .unwrap_or(quoted);
    let mut out = String::with_capacity(inner.len());
    let mut chars = inner.chars();
    while let Some(c) = chars.next() {
        if c == '\\' {
            if let Some(n) = chars.next() {
                out.push(n);
            }
        } else {
            out.push(c);
        }
    }
    out
}

fn next<'a>(it: &mut impl Iterator<Item = Pair<'a, Rule>>) -> Result<Pair<'a, Rule>, SyntaxError> {
    it.next().ok_or_else(missing_part)
}

/// The grammar guarantees the shapes the builder reads; should the two ever
/// disagree, the user gets an error instead of a panic.
fn missing_part() -> SyntaxError {
    SyntaxError {
        span: Span::default(),
        message: "internal error: the statement's parts are not where the grammar puts them (please report this)".into(),
    }
}

fn unreachable_rule<T>(rule: Rule) -> Result<T, SyntaxError> {
    Err(SyntaxError {
        span: Span::default(),
        message: format!("internal error: unexpected grammar rule {rule:?} (please report this)"),
    })
}
