//! Strict filters: a `keep where` that compares a column with a value it cannot hold is an
//! error that names what it can hold, rather than a filter that quietly keeps no row; and a
//! `missing` statement that comes after the `load` it was meant for says so.

use covey::pipeline::{self, RunOptions};
use covey::world::MemoryWorld;

const PENS: &[u8] = include_bytes!("fixtures/data/pens.csv");

/// The rendering and the terminal's errors of a document on `data/pens.csv`, every block run.
fn run(body: &str) -> (String, String) {
    let doc = format!("# Filters\n\n```covey\n{body}```\n");
    let world = MemoryWorld::new().with("data/pens.csv", PENS.to_vec());
    let opts = RunOptions {
        keep_going: true,
        ..RunOptions::default()
    };
    let run = pipeline::run(&doc, "filters.md", &world, opts)
        .unwrap_or_else(|u| panic!("{}", u.errors.join("\n")));
    (run.rendered, run.errors.join("\n"))
}

const LOAD: &str = "missing \"NA\"\nload \"data/pens.csv\" as pens\n";

#[test]
fn a_value_that_is_not_a_level_is_an_error_with_the_levels() {
    let (_, errors) = run(&format!(
        "{LOAD}factor diet\nkeep where diet == \"Control\"\n"
    ));
    assert!(
        errors.contains("filters.md:7:20: error: `Control` is not a level of factor `diet`"),
        "{errors}"
    );
    assert!(
        errors.contains("did you mean `control`?")
            && errors.contains("its levels are `control`, `low`, `high`"),
        "{errors}"
    );
    // The same in a list, and in a text column not (yet) declared a factor.
    let (_, errors) = run(&format!(
        "{LOAD}keep where barn in (east, \"North\")\nkeep where barn != \"West\"\n"
    ));
    assert!(
        errors.contains("no row of data set `pens` has `North` in `barn`"),
        "{errors}"
    );
    assert!(errors.contains("its values are `east`, `west`"), "{errors}");
    assert!(errors.contains("did you mean `west`?"), "{errors}");
}

#[test]
fn a_numeric_column_compared_with_text_is_an_error_even_on_no_rows() {
    // The first filter keeps no row; the second compares a number with text, which is an
    // error whether or not a row is left to compare.
    let (rendered, errors) = run(&format!(
        "{LOAD}keep where start_kg > 1000\nkeep where final_kg > \"abc\"\nkeep where final_kg < \"30\"\n"
    ));
    assert!(rendered.contains("No rows are left."), "{rendered}");
    assert!(
        errors.contains("error: `final_kg` is numeric, so it is compared with a number"),
        "{errors}"
    );
    assert!(
        errors.contains("write the number without quotes: 30"),
        "{errors}"
    );
}

#[test]
fn filters_with_known_values_still_keep_their_rows() {
    let (rendered, errors) = run(&format!(
        "{LOAD}factor diet\nkeep where diet != control and barn in (east, west) and start_kg > 0\n"
    ));
    assert!(errors.is_empty(), "{errors}");
    assert!(
        rendered.contains("Kept 24 of 36 rows of `pens`"),
        "{rendered}"
    );
}

#[test]
fn a_missing_marker_after_its_load_says_before_load() {
    // Without `missing "NA"`, the load refuses the marker and says where the statement goes.
    let (rendered, errors) = run("load \"data/pens.csv\" as pens\nmissing \"NA\"\n");
    assert!(
        errors.contains("declare the marker with `missing \"NA\"` before `load`"),
        "{errors}"
    );
    assert!(
        rendered.contains(
            "**Warning:** `load \"data/pens.csv\"` above stopped at `NA`: `missing` applies only \
             to files loaded after it, so give it before `load`."
        ),
        "{rendered}"
    );
    // A marker a loaded data set holds as text, declared after the load.
    let (rendered, _) = run(&format!("{LOAD}missing \"east\"\n"));
    assert!(
        rendered.contains(
            "**Warning:** data set `pens`, loaded above, holds `east` as text in column `barn`"
        ),
        "{rendered}"
    );
    // Before the load: no warning.
    let (rendered, _) = run(LOAD);
    assert!(!rendered.contains("**Warning:**"), "{rendered}");
}
