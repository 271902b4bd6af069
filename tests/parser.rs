//! The grammar: every statement form parses to the expected tree, and every
//! kind of syntax error is reported at the right column with plain words.

use covey::lang::*;

fn parse(text: &str) -> StatementKind {
    match parse_line(text, 0, 1) {
        Ok(Some(s)) => s.kind,
        Ok(None) => panic!("no statement in {text:?}"),
        Err(e) => panic!("{text:?} did not parse: {}", e.message),
    }
}

fn error(text: &str) -> SyntaxError {
    match parse_line(text, 100, 7) {
        Err(e) => e,
        Ok(s) => panic!("{text:?} parsed but should not: {s:?}"),
    }
}

#[test]
fn blank_and_comment_lines_are_no_statement() {
    assert_eq!(parse_line("", 0, 1), Ok(None));
    assert_eq!(parse_line("   \t", 0, 1), Ok(None));
    assert_eq!(parse_line("# a comment", 0, 1), Ok(None));
}

#[test]
fn load_with_and_without_name() {
    match parse(r#"load "data/pens.csv" as pens   # the pens"#) {
        StatementKind::Load { path, name, .. } => {
            assert_eq!(path.value, "data/pens.csv");
            assert_eq!(name.map(|n| n.value).as_deref(), Some("pens"));
        }
        k => panic!("{k:?}"),
    }
    match parse(r#"load "a \"quoted\" name.csv""#) {
        StatementKind::Load { path, name, .. } => {
            assert_eq!(path.value, r#"a "quoted" name.csv"#);
            assert!(name.is_none());
        }
        k => panic!("{k:?}"),
    }
}

#[test]
fn missing_markers() {
    assert_eq!(
        parse(r#"missing "NA", ".""#),
        StatementKind::Missing {
            markers: vec!["NA".into(), ".".into()]
        }
    );
}

#[test]
fn use_and_show() {
    assert!(matches!(parse("use pens"), StatementKind::Use { name } if name.value == "pens"));
    assert!(matches!(parse("show"), StatementKind::Show { name: None }));
    assert!(
        matches!(parse("show pens"), StatementKind::Show { name: Some(n) } if n.value == "pens")
    );
}

#[test]
fn factor_with_levels_of_every_spelling() {
    match parse(r#"factor "feed type" levels barley, 2, "maize+soy""#) {
        StatementKind::Factor { column, levels } => {
            assert_eq!(column.value, "feed type");
            let l: Vec<String> = levels
                .unwrap_or_default()
                .into_iter()
                .map(|s| s.value)
                .collect();
            assert_eq!(l, ["barley", "2", "maize+soy"]);
        }
        k => panic!("{k:?}"),
    }
    assert!(matches!(
        parse("factor ration"),
        StatementKind::Factor { levels: None, .. }
    ));
}

#[test]
fn keep_conditions_nest_with_precedence() {
    // `and` binds tighter than `or`; `not` tighter than both.
    match parse("keep where dose >= 2 and not group in (A, B) or site == \"north\"") {
        StatementKind::Keep {
            condition: Condition::Or(parts),
        } => {
            assert_eq!(parts.len(), 2);
            match &parts[0] {
                Condition::And(a) => {
                    assert!(
                        matches!(&a[0], Condition::Compare { op: CompareOp::Ge, value, .. } if value.value == Literal::Number(2.0, "2".into()))
                    );
                    assert!(
                        matches!(&a[1], Condition::Not(inner) if matches!(**inner, Condition::In { .. }))
                    );
                }
                c => panic!("{c:?}"),
            }
        }
        k => panic!("{k:?}"),
    }
    assert!(matches!(
        parse("keep where (a < 1 or a > 5)"),
        StatementKind::Keep {
            condition: Condition::Or(_)
        }
    ));
}

#[test]
fn model_terms() {
    match parse("model m: \"final weight\" on ration + start + ration by start + start^2 + log(dose) + sqrt(age) without intercept") {
        StatementKind::Model(m) => {
            assert_eq!(m.name.value, "m");
            assert_eq!(m.response.value, "final weight");
            assert!(!m.intercept);
            let shapes: Vec<Vec<(String, TransformDecl)>> = m
                .terms
                .iter()
                .map(|t| t.parts.iter().map(|p| (p.column.value.clone(), p.transform)).collect())
                .collect();
            assert_eq!(shapes[0], [("ration".to_string(), TransformDecl::None)]);
            assert_eq!(shapes[2].len(), 2);
            assert_eq!(shapes[3], [("start".to_string(), TransformDecl::Power(2))]);
            assert_eq!(shapes[4], [("dose".to_string(), TransformDecl::Log)]);
            assert_eq!(shapes[5], [("age".to_string(), TransformDecl::Sqrt)]);
        }
        k => panic!("{k:?}"),
    }
    match parse("model m: y on a by b by x") {
        StatementKind::Model(m) => {
            assert!(m.intercept);
            assert_eq!(m.terms.len(), 1);
            assert_eq!(m.terms[0].parts.len(), 3);
        }
        k => panic!("{k:?}"),
    }
}

#[test]
fn keywords_are_whole_words() {
    // A column called `bytes` is not `by` followed by `tes`.
    match parse("model m: y on x + bytes") {
        StatementKind::Model(m) => assert_eq!(m.terms[1].parts[0].column.value, "bytes"),
        k => panic!("{k:?}"),
    }
    match parse("table summary format by forest") {
        StatementKind::Table(TableRequest::Summary { column, by }) => {
            assert_eq!(column.value, "format");
            assert_eq!(by.map(|b| b.value).as_deref(), Some("forest"));
        }
        k => panic!("{k:?}"),
    }
}

#[test]
fn every_table_form() {
    use TableRequest as T;
    let t = |s: &str| match parse(s) {
        StatementKind::Table(t) => t,
        k => panic!("{k:?}"),
    };
    assert!(matches!(t("table summary y"), T::Summary { by: None, .. }));
    assert!(matches!(t("table fit m"), T::Fit { .. }));
    assert!(
        matches!(t("table coefficients m level 0.99"), T::Coefficients { level: Some(l), .. } if l.value == 0.99)
    );
    assert!(matches!(
        t("table anova m"),
        T::Anova {
            kind: SsKind::Partial,
            ..
        }
    ));
    assert!(matches!(
        t("table anova m type 1"),
        T::Anova {
            kind: SsKind::Sequential,
            ..
        }
    ));
    assert!(matches!(
        t("table anova m type 3"),
        T::Anova {
            kind: SsKind::Marginal,
            ..
        }
    ));
    assert!(
        matches!(t("table compare small, big"), T::Compare { first, second } if first.value == "small" && second.value == "big")
    );
    match t("table means m for ration at start = 12.5, age = 3 level 0.9") {
        T::Means { at, level, .. } => {
            assert_eq!(at.len(), 2);
            assert_eq!(at[0].value, 12.5);
            assert_eq!(level.map(|l| l.value), Some(0.9));
        }
        r => panic!("{r:?}"),
    }
    match t("table differences m for ration") {
        T::Differences {
            correction: None,
            versus: None,
            within: None,
            robust: false,
            ..
        } => {}
        r => panic!("{r:?}"),
    }
    // Optional clauses in any order.
    for text in [
        "table differences m for ration correction holm level 0.9 at start = 12",
        "table differences m for ration level 0.9 at start = 12 correction holm",
        "table differences m for ration at start = 12 correction holm level 0.9",
    ] {
        match t(text) {
            T::Differences {
                correction: Some(c),
                level: Some(l),
                at,
                ..
            } => {
                assert_eq!(c.value, Correction::Holm, "{text}");
                assert_eq!(l.value, 0.9, "{text}");
                assert_eq!(at.len(), 1, "{text}");
            }
            r => panic!("{text}: {r:?}"),
        }
    }
    // `within B` is a clause like the others: the README's form `versus LEVEL [above|below]
    // [within B]` and `at ... within B` were once refused (the grammar wanted it right after
    // `for F`).
    for text in [
        "table differences m for ration within sex versus barley above correction dunnett robust",
        "table differences m for ration versus barley above within sex correction dunnett robust",
        "table differences m for ration robust correction dunnett versus barley above within sex",
    ] {
        match t(text) {
            T::Differences {
                within: Some(w),
                versus: Some(v),
                correction: Some(c),
                robust: true,
                ..
            } => {
                assert_eq!(w.value, "sex", "{text}");
                assert_eq!(v.control.value, "barley", "{text}");
                assert_eq!(v.side, Side::Above, "{text}");
                assert_eq!(c.value, Correction::Dunnett, "{text}");
            }
            r => panic!("{text}: {r:?}"),
        }
    }
    match t("table differences m for ration at start = 12 within sex") {
        T::Differences {
            within: Some(w),
            at,
            ..
        } => {
            assert_eq!(w.value, "sex");
            assert_eq!(at.len(), 1);
        }
        r => panic!("{r:?}"),
    }
    match t("table differences m for ration robust versus \"maize+soy\" below") {
        T::Differences {
            versus: Some(v),
            robust: true,
            ..
        } => {
            assert_eq!(v.control.value, "maize+soy");
            assert_eq!(v.side, Side::Below);
        }
        r => panic!("{r:?}"),
    }
    match t("table means m for ration by sex robust level 0.9") {
        T::Means {
            by: Some(b),
            robust: true,
            level: Some(l),
            ..
        } => {
            assert_eq!(b.value, "sex");
            assert_eq!(l.value, 0.9);
        }
        r => panic!("{r:?}"),
    }
    assert!(matches!(
        t("table coefficients m robust level 0.9"),
        T::Coefficients {
            robust: true,
            level: Some(_),
            ..
        }
    ));
    assert!(matches!(
        t("table anova m robust type 3"),
        T::Anova {
            robust: true,
            kind: SsKind::Marginal,
            ..
        }
    ));
    assert!(matches!(
        t("table contrast m for ration weights 1, -1, 0 robust"),
        T::Contrast { robust: true, .. }
    ));
    assert!(matches!(
        t("table slopes m for ration"),
        T::Slopes {
            covariate: None,
            ..
        }
    ));
    assert!(
        matches!(t("table slopes m of start for ration"), T::Slopes { covariate: Some(c), .. } if c.value == "start")
    );
    assert!(
        matches!(t("table contrast m for ration weights 1, -0.5, -0.5"), T::Contrast { weights, .. } if weights.value == vec![1.0, -0.5, -0.5])
    );
    match t("table regions m of start for ration between barley and \"maize+soy\" alpha 0.01") {
        T::Regions {
            between: Some((a, b)),
            alpha,
            ..
        } => {
            assert_eq!(
                (a.value.as_str(), b.value.as_str()),
                ("barley", "maize+soy")
            );
            assert_eq!(alpha.map(|a| a.value), Some(0.01));
        }
        r => panic!("{r:?}"),
    }
}

#[test]
fn old_words_name_the_new_ones() {
    let e = error("table pairs m for ration");
    assert!(e.message.contains("table differences"), "{}", e.message);
    let e = error("table differences m for ration adjust holm");
    assert!(e.message.contains("`correction holm`"), "{}", e.message);
    let e = error("report m pairs ration between a and b");
    assert!(e.message.contains("differences"), "{}", e.message);
    let e = error("table differences m for ration level 0.9 level 0.8");
    assert!(e.message.contains("given twice"), "{}", e.message);
    let e = error("model m: y on x weights w weights v");
    assert!(e.message.contains("given twice"), "{}", e.message);
}

#[test]
fn weights_alpha_interaction_and_report_forms() {
    match parse("model m: y on g + x weights area") {
        StatementKind::Model(d) => {
            assert!(d.intercept);
            assert_eq!(d.weights.map(|w| w.value).as_deref(), Some("area"));
        }
        k => panic!("{k:?}"),
    }
    for text in [
        "model m: y on g + x weights area without intercept",
        "model m: y on g + x without intercept weights area",
    ] {
        match parse(text) {
            StatementKind::Model(d) => {
                assert!(!d.intercept, "{text}");
                assert_eq!(d.weights.map(|w| w.value).as_deref(), Some("area"));
            }
            k => panic!("{k:?}"),
        }
    }
    match parse("check m alpha 0.01") {
        StatementKind::Check { alpha: Some(a), .. } => assert_eq!(a.value, 0.01),
        k => panic!("{k:?}"),
    }
    assert!(matches!(
        parse("check m"),
        StatementKind::Check { alpha: None, .. }
    ));
    match parse("plot interaction m for ration by sex") {
        StatementKind::Plot {
            kind: PlotKind::Interaction,
            factor: Some(first),
            by: Some(second),
            ..
        } => {
            assert_eq!(first.value, "ration");
            assert_eq!(second.value, "sex");
        }
        k => panic!("{k:?}"),
    }
    match parse("report m differences ration between barley and maize correction holm") {
        StatementKind::Report(ReportRequest::Difference {
            correction: Some(c),
            ..
        }) => assert_eq!(c.value, Correction::Holm),
        k => panic!("{k:?}"),
    }
}

#[test]
fn spans_are_document_offsets() {
    let s = parse_line("table summary weight by ration", 1000, 42)
        .ok()
        .flatten();
    let Some(s) = s else { panic!("no statement") };
    assert_eq!(s.line, 42);
    assert_eq!(s.span.start, 1000);
    match s.kind {
        StatementKind::Table(TableRequest::Summary { column, .. }) => {
            assert_eq!(
                column.span,
                Span {
                    start: 1014,
                    end: 1020
                }
            );
        }
        k => panic!("{k:?}"),
    }
}

// ---- errors: each says what was expected, at the right place.

#[test]
fn unknown_statement() {
    let e = error("fit m: y on x");
    assert_eq!(e.span.start, 100);
    assert!(
        e.message.contains("does not start with a statement"),
        "{}",
        e.message
    );
    assert!(e.message.contains("load"), "{}", e.message);
}

#[test]
fn unquoted_path() {
    let e = error("load data.csv");
    assert_eq!(e.span.start, 105);
    assert!(e.message.contains("path in double quotes"), "{}", e.message);
}

#[test]
fn unterminated_string() {
    let e = error("load \"data.csv");
    assert!(e.message.contains("path in double quotes"), "{}", e.message);
}

#[test]
fn missing_response_separator() {
    let e = error("model m y on x");
    assert_eq!(e.span.start, 108);
    assert!(e.message.contains("expected `:`"), "{}", e.message);
}

#[test]
fn formula_with_tilde_is_refused() {
    let e = error("model m: y ~ x");
    assert!(e.message.contains("`on`"), "{}", e.message);
}

#[test]
fn other_notations_and_missing_names_get_the_form() {
    let e = error("model m: y ~ x");
    assert!(
        e.message.contains("`model NAME: RESPONSE on TERM + TERM`"),
        "{}",
        e.message
    );
    for line in ["model m: y on a + x + a * x", "model m: y on a + x + a:x"] {
        let e = error(line);
        assert!(
            e.message.contains("written `A by B`"),
            "{line}: {}",
            e.message
        );
    }
    // `for` is taken for the model's name, and then `for` is wanted at `g`.
    let e = error("table differences for g m");
    assert_eq!(e.span.start, 100 + "table differences for ".len());
    assert!(
        e.message
            .contains("`for` before it was read as a name: is a name missing before `for`?"),
        "{}",
        e.message
    );
}

#[test]
fn dangling_plus() {
    let e = error("model m: y on x +");
    assert!(e.message.contains("model term"), "{}", e.message);
    assert!(e.message.contains("end of the line"), "{}", e.message);
}

#[test]
fn bad_power() {
    assert!(matches!(
        parse("model m: y on x + x^2 + x^10"),
        StatementKind::Model(_)
    ));
    let e = error("model m: y on x^11");
    assert!(e.message.contains("from 2 to 10"), "{}", e.message);
    let e = error("model m: y on x^1");
    assert!(e.message.contains("from 2 to 10"), "{}", e.message);
}

#[test]
fn bad_anova_type() {
    let e = error("table anova m type 4");
    assert!(e.message.contains("1, 2 or 3"), "{}", e.message);
}

#[test]
fn unknown_table_kind() {
    let e = error("table medians m");
    assert!(
        e.message.contains("`summary`") && e.message.contains("found `medians`"),
        "{}",
        e.message
    );
}

#[test]
fn unknown_adjustment() {
    let e = error("table differences m for g correction scheffe");
    assert!(e.message.contains("tukey"), "{}", e.message);
}

#[test]
fn bad_condition() {
    let e = error("keep where dose >> 2");
    assert!(e.message.contains("value"), "{}", e.message);
    let e = error("keep where");
    assert!(e.message.contains("condition"), "{}", e.message);
}

#[test]
fn trailing_words() {
    let e = error("table fit m extra");
    assert!(e.message.contains("end of the line"), "{}", e.message);
    assert_eq!(e.span.start, 112);
}

#[test]
fn empty_levels_list() {
    let e = error("factor g levels");
    assert!(e.message.contains("value"), "{}", e.message);
}

// ---- planning: `plan` and `plot power`.

fn plan(text: &str) -> PlanDecl {
    match parse(text) {
        StatementKind::Plan(p) => p,
        k => panic!("{k:?}"),
    }
}

#[test]
fn plan_for_a_sample_size() {
    let p = plan("plan main for 3 groups with 1 covariate explaining 0.5 effect f 0.25 power 0.9");
    assert_eq!(p.name.value, "main");
    assert_eq!(p.groups.value, 3.0);
    assert_eq!(p.covariates.map(|c| c.value), Some(1.0));
    assert_eq!(p.r_squared.map(|r| r.value), Some(0.5));
    assert!(matches!(p.effect, PlanEffect::F(effect) if effect.value == 0.25));
    assert_eq!(p.power.map(|v| v.value), Some(0.9));
    assert!(p.n.is_none() && p.alpha.is_none() && p.pilot.is_none() && p.ratio.is_none());
}

#[test]
fn plan_for_the_power_of_given_means() {
    let p = plan("plan small for 3 groups effect means 30, 31.5, 33 sd 2.4 alpha 0.01 n 20");
    match &p.effect {
        PlanEffect::Means { means, sd } => {
            assert_eq!(means.value, vec![30.0, 31.5, 33.0]);
            assert_eq!(sd.as_ref().map(|s| s.value), Some(2.4));
            // The list's span covers the numbers, from the first to the last.
            assert_eq!(means.span.end - means.span.start, "30, 31.5, 33".len());
        }
        e => panic!("{e:?}"),
    }
    assert_eq!(p.alpha.map(|a| a.value), Some(0.01));
    assert_eq!(p.n.map(|n| n.value), Some(20.0));
    assert!(p.power.is_none());
}

#[test]
fn plan_for_the_detectable_effect_with_a_ratio_and_a_pilot() {
    let p = plan(
        "plan reach for 3 groups in ratio 2:1:1 with 2 covariates effect detectable n 12 power 0.8 from pilot upper 0.8",
    );
    assert_eq!(p.ratio.map(|r| r.value), Some(vec![2.0, 1.0, 1.0]));
    assert_eq!(p.covariates.map(|c| c.value), Some(2.0));
    assert!(p.r_squared.is_none());
    assert!(matches!(p.effect, PlanEffect::Detectable { sd: None }));
    assert_eq!(p.n.map(|n| n.value), Some(12.0));
    assert_eq!(p.power.map(|v| v.value), Some(0.8));
    assert_eq!(p.pilot.map(|m| m.value).as_deref(), Some("pilot"));
    assert_eq!(p.upper.map(|u| u.value), Some(0.8));
    // Means without an SD, from a pilot; `covariate` or `covariates`.
    let p = plan("plan m for 2 groups with 1 covariates effect means 1, 2 power 0.9 from pilot");
    assert!(matches!(p.effect, PlanEffect::Means { sd: None, .. }));
}

#[test]
fn plan_numbers_may_be_parameters() {
    let mut params = Params::new();
    params.insert("power".into(), Literal::Number(0.85, "0.85".into()));
    params.insert("k".into(), Literal::Number(4.0, "4".into()));
    let s = parse_line_with(
        "plan p for @k groups effect f 0.3 alpha 0.05 power @power",
        0,
        1,
        &params,
    );
    match s.map(|s| s.map(|s| s.kind)) {
        Ok(Some(StatementKind::Plan(p))) => {
            assert_eq!(p.groups.value, 4.0);
            assert_eq!(p.power.map(|v| v.value), Some(0.85));
        }
        other => panic!("{other:?}"),
    }
}

#[test]
fn plot_power_forms() {
    match parse("plot power main") {
        StatementKind::PowerPlot { plan, lines, to } => {
            assert_eq!(plan.value, "main");
            assert!(lines.is_none() && to.is_none());
        }
        k => panic!("{k:?}"),
    }
    match parse("plot power main by f 0.1, 0.25, 0.4 to 80") {
        StatementKind::PowerPlot { lines, to, .. } => {
            assert!(
                matches!(lines, Some(PowerLines::Effects(v)) if v.value == vec![0.1, 0.25, 0.4])
            );
            assert_eq!(to.map(|limit| limit.value), Some(80.0));
        }
        k => panic!("{k:?}"),
    }
    match parse("plot power main by r2 0, 0.5") {
        StatementKind::PowerPlot { lines, .. } => {
            assert!(matches!(lines, Some(PowerLines::RSquared(v)) if v.value == vec![0.0, 0.5]));
        }
        k => panic!("{k:?}"),
    }
}

#[test]
fn plan_errors_name_what_is_missing() {
    // A given effect needs a goal.
    let e = error("plan p for 3 groups effect f 0.25");
    assert!(
        e.message.contains("`power`") && e.message.contains("`n`"),
        "{}",
        e.message
    );
    // The detectable effect needs both n and power, in that order.
    let e = error("plan p for 3 groups effect detectable power 0.8");
    assert!(e.message.contains("`n`"), "{}", e.message);
    let e = error("plan p for 3 groups effect detectable n 10");
    assert!(e.message.contains("`power`"), "{}", e.message);
    assert!(e.message.contains("end of the line"), "{}", e.message);
    // One mean is no comparison.
    let e = error("plan p for 3 groups effect means 4 sd 1 power 0.8");
    assert!(e.message.contains("`,`"), "{}", e.message);
    // No effect at all.
    let e = error("plan p for 3 groups power 0.8");
    assert!(e.message.contains("`effect`"), "{}", e.message);
    // `upper` only after `from`.
    let e = error("plan p for 2 groups effect f 0.3 power 0.8 upper 0.8");
    assert!(e.message.contains("`from`"), "{}", e.message);
    // A ratio is written with colons.
    let e = error("plan p for 2 groups in ratio 2, 1 effect f 0.3 power 0.8");
    assert!(e.message.contains("`:`"), "{}", e.message);
}

#[test]
fn plot_power_errors() {
    let e = error("plot power");
    assert!(e.message.contains("a name"), "{}", e.message);
    let e = error("plot power main by g 1");
    assert!(
        e.message.contains("`f`") && e.message.contains("`r2`"),
        "{}",
        e.message
    );
    let e = error("plot powr main");
    assert!(e.message.contains("`power`"), "{}", e.message);
}

#[test]
fn balance_gate_with_and_without_a_model() {
    match parse("require balance start_kg by ration alpha 0.1") {
        StatementKind::Require(Gate::Balance {
            covariate,
            factor,
            model,
            alpha,
        }) => {
            assert_eq!(
                (covariate.value.as_str(), factor.value.as_str()),
                ("start_kg", "ration")
            );
            assert!(model.is_none());
            assert_eq!(alpha.map(|a| a.value), Some(0.1));
        }
        other => panic!("{other:?}"),
    }
    match parse("require balance start_kg by ration in parallel") {
        StatementKind::Require(Gate::Balance { model, alpha, .. }) => {
            assert_eq!(model.map(|m| m.value), Some("parallel".to_string()));
            assert!(alpha.is_none());
        }
        other => panic!("{other:?}"),
    }
}
