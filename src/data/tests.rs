//! Tests for the data module. All data here is invented for the tests.

use super::*;

fn opts() -> LoadOptions {
    LoadOptions {
        name: "t".to_owned(),
        ..LoadOptions::default()
    }
}

fn load(text: &str) -> Result<DataSet, LoadError> {
    read_delimited(text.as_bytes(), &opts())
}

fn ok(text: &str) -> DataSet {
    match load(text) {
        Ok(d) => d,
        Err(e) => panic!("unexpected load error: {e}"),
    }
}

fn err(bytes: &[u8]) -> LoadError {
    match read_delimited(bytes, &opts()) {
        Ok(d) => panic!("expected an error, loaded {d:?}"),
        Err(e) => e,
    }
}

fn nums(d: &DataSet, name: &str) -> Vec<f64> {
    match d.column(name).map(|c| &c.values) {
        Some(Values::Numeric(v)) => v.to_vec(),
        other => panic!("{name} not numeric: {other:?}"),
    }
}

fn texts(d: &DataSet, name: &str) -> Vec<Option<String>> {
    match d.column(name).map(|c| &c.values) {
        Some(Values::Text(v)) => v.to_vec(),
        other => panic!("{name} not text: {other:?}"),
    }
}

fn s(x: &str) -> Option<String> {
    Some(x.to_owned())
}

// ---- loading and types ----

#[test]
fn numeric_and_text_columns() {
    let d = ok("y,group,x\n1.5,A,2\n-3,B,.5\n4e2,A,5.\n");
    assert_eq!(d.name, "t");
    assert_eq!(d.n_rows(), 3);
    assert_eq!(nums(&d, "y"), vec![1.5, -3.0, 400.0]);
    assert_eq!(nums(&d, "x"), vec![2.0, 0.5, 5.0]);
    assert_eq!(texts(&d, "group"), vec![s("A"), s("B"), s("A")]);
    assert_eq!(d.row_numbers.to_vec(), vec![2, 3, 4]);
    assert_eq!(d.column("group").map(Column::kind_name), Some("text"));
    assert_eq!(d.column("y").map(Column::kind_name), Some("numeric"));
}

#[test]
fn cells_and_names_are_trimmed() {
    let d = ok(" y \t, g\n  1 ,\t a b \n2,c\n");
    assert_eq!(nums(&d, "y"), vec![1.0, 2.0]);
    assert_eq!(texts(&d, "g"), vec![s("a b"), s("c")]);
}

#[test]
fn empty_cells_and_markers_are_missing() {
    let o = LoadOptions {
        missing: vec!["NA".to_owned(), " -99 ".to_owned()],
        ..opts()
    };
    let d = read_delimited(b"y,g\n1,A\n,\nNA,NA\n-99,B\n", &o).unwrap_or_else(|e| panic!("{e}"));
    let y = nums(&d, "y");
    assert_eq!(y.first(), Some(&1.0));
    assert!(y.iter().skip(1).all(|v| v.is_nan()));
    assert_eq!(texts(&d, "g"), vec![s("A"), None, None, s("B")]);
    let col = d.column("y").unwrap_or_else(|| panic!("no y"));
    assert_eq!(col.missing_count(), 3);
    assert_eq!(d.missing_count(col), 3);
    assert!(col.is_missing(1));
    assert!(!col.is_missing(0));
    assert!(col.is_missing(99));
}

#[test]
fn all_missing_column_is_numeric() {
    let d = ok("y,e\n1,\n2, \n");
    assert_eq!(d.column("e").map(Column::kind_name), Some("numeric"));
    assert_eq!(d.column("e").map(Column::missing_count), Some(2));
}

#[test]
fn column_turning_text_keeps_earlier_cells_verbatim() {
    let d = ok("id,v\n1,1.50\n2,\n3,007\n4,x\n5,2\n");
    assert_eq!(
        texts(&d, "v"),
        vec![s("1.50"), None, s("007"), s("x"), s("2")]
    );
    assert_eq!(nums(&d, "id"), vec![1.0, 2.0, 3.0, 4.0, 5.0]);
}

#[test]
fn hex_and_words_make_text() {
    let d = ok("a,b\n0x1F,1\n2,nope\n");
    assert_eq!(texts(&d, "a"), vec![s("0x1F"), s("2")]);
    assert_eq!(texts(&d, "b"), vec![s("1"), s("nope")]);
}

#[test]
fn number_like_cells_among_text_are_text() {
    let d = ok("a\n3,5\nabc\n".replace("3,5", "\"3,5\"").as_str());
    assert_eq!(texts(&d, "a"), vec![s("3,5"), s("abc")]);
}

#[test]
fn utf8_bom_is_skipped() {
    let mut bytes = b"\xEF\xBB\xBF".to_vec();
    bytes.extend_from_slice(b"y,x\n1,2\n");
    let d = read_delimited(&bytes, &opts()).unwrap_or_else(|e| panic!("{e}"));
    assert_eq!(d.columns.first().map(|c| c.name.as_str()), Some("y"));
}

#[test]
fn tsv_with_quotes() {
    let o = LoadOptions {
        delimiter: b'\t',
        ..opts()
    };
    let d = read_delimited(b"y\tlabel\n1\t\"a\tb\"\n2\t\"say \"\"hi\"\"\"\n", &o)
        .unwrap_or_else(|e| panic!("{e}"));
    assert_eq!(texts(&d, "label"), vec![s("a\tb"), s("say \"hi\"")]);
}

#[test]
fn quoted_newline_keeps_row_numbers() {
    let d = ok("y,note\n1,\"two\nlines\"\n2,b\n");
    assert_eq!(d.row_numbers.to_vec(), vec![2, 4]);
    assert_eq!(texts(&d, "note"), vec![s("two\nlines"), s("b")]);
}

#[test]
fn crlf_and_blank_lines() {
    let d = ok("y,x\r\n1,2\r\n\r\n3,4\r\n");
    assert_eq!(nums(&d, "y"), vec![1.0, 3.0]);
    assert_eq!(d.row_numbers.to_vec(), vec![2, 4]);
}

#[test]
fn no_trailing_newline() {
    let d = ok("y\n1\n2");
    assert_eq!(nums(&d, "y"), vec![1.0, 2.0]);
}

// ---- errors: each variant, with line and column in the message ----

#[test]
fn error_empty_file() {
    assert_eq!(err(b""), LoadError::Empty);
    assert_eq!(err(b" \n\n"), LoadError::Empty);
    assert_eq!(err(b"\xEF\xBB\xBF"), LoadError::Empty);
    assert!(LoadError::Empty.to_string().contains("empty"));
}

#[test]
fn error_utf16_bom() {
    for bytes in [&b"\xFF\xFEy\0,\0"[..], &b"\xFE\xFF\0y"[..]] {
        let e = err(bytes);
        assert_eq!(e, LoadError::Utf16Bom);
        assert!(e.to_string().contains("UTF-8"));
    }
}

#[test]
fn error_bad_delimiter() {
    let o = LoadOptions {
        delimiter: b'"',
        ..opts()
    };
    let e = read_delimited(b"a\n1\n", &o).err();
    assert_eq!(e, Some(LoadError::BadDelimiter { delimiter: b'"' }));
}

#[test]
fn error_nul_byte() {
    let e = err(b"y,x\n1,2\n3,\x004\n");
    assert_eq!(e, LoadError::NulByte { line: 3 });
    assert!(e.to_string().contains("line 3"));
}

#[test]
fn error_line_too_long() {
    let mut bytes = b"y\n1\n".to_vec();
    bytes.extend(std::iter::repeat_n(b'7', MAX_LINE_BYTES + 1));
    bytes.push(b'\n');
    let e = err(&bytes);
    assert_eq!(
        e,
        LoadError::LineTooLong {
            line: 3,
            limit: MAX_LINE_BYTES
        }
    );
    let m = e.to_string();
    assert!(m.contains("line 3") && m.contains("1048576"));
}

#[test]
fn error_line_too_long_in_header_and_quoted_field() {
    let mut bytes = vec![b'h'; MAX_LINE_BYTES + 1];
    bytes.extend_from_slice(b"\n1\n");
    assert!(matches!(
        err(&bytes),
        LoadError::LineTooLong { line: 1, .. }
    ));
    let mut bytes = b"y,x\n1,2\n3,\"a\n".to_vec();
    bytes.extend(std::iter::repeat_n(b'q', MAX_LINE_BYTES + 1));
    bytes.extend_from_slice(b"\"\n");
    assert!(matches!(
        err(&bytes),
        LoadError::LineTooLong { line: 4, .. }
    ));
    // Exactly at the limit is accepted.
    let mut bytes = b"y\n".to_vec();
    bytes.extend(std::iter::repeat_n(b'7', MAX_LINE_BYTES));
    assert!(read_delimited(&bytes, &opts())
        .is_err_and(|e| matches!(e, LoadError::RefusedNumber { .. })));
}

#[test]
fn error_unterminated_quote() {
    let e = err(b"y,x\n1,2\n3,\"open\n4,5\n");
    assert_eq!(e, LoadError::UnterminatedQuote { line: 3 });
    assert!(e.to_string().contains("line 3"));
    // A quote in the middle of an unquoted field is literal, not an opening quote.
    let d = ok("y,x\n1,ab\"c\n");
    assert_eq!(texts(&d, "x"), vec![s("ab\"c")]);
}

#[test]
fn open_quote_is_reported_before_what_it_causes() {
    // The open quote swallows the rest of the file, so the row looks short; the quote is the cause.
    let e = err(b"y,x,z\n1,\"open,2\n3,4,5\n");
    assert_eq!(e, LoadError::UnterminatedQuote { line: 2 });
    let e = err(b"\"y,x\n1,2\n");
    assert_eq!(e, LoadError::UnterminatedQuote { line: 1 });
    // Closed quotes with escaped quotes inside are fine.
    let d = ok("y,x\n1,\"a \"\"q\"\" b\"\n");
    assert_eq!(texts(&d, "x"), vec![s("a \"q\" b")]);
}

#[test]
fn text_after_closing_quote_continues_field() {
    let d = ok("y,x\n1,\"abc\"def\n2,\"\"\n");
    assert_eq!(texts(&d, "x"), vec![s("abcdef"), None]);
}

#[test]
fn crlf_line_numbers_in_errors() {
    let e = err(b"y,x\r\n1,2\r\n\r\n3\r\n");
    assert_eq!(
        e,
        LoadError::RaggedRow {
            line: 4,
            expected: 2,
            found: 1
        }
    );
}

#[test]
fn bare_cr_lines_are_not_one_long_line() {
    let mut bytes = b"y\r".to_vec();
    while bytes.len() <= MAX_LINE_BYTES + 10 {
        bytes.extend_from_slice(b"12\r");
    }
    let d = read_delimited(&bytes, &opts()).unwrap_or_else(|e| panic!("{e}"));
    assert!(d.n_rows() > 1000);
}

#[test]
fn error_non_utf8_cell_and_header() {
    let e = err(b"y,name\n1,ok\n2,caf\xE9\n");
    assert_eq!(
        e,
        LoadError::NonUtf8 {
            line: 3,
            column: 2,
            name: Some("name".to_owned())
        }
    );
    let m = e.to_string();
    assert!(m.contains("line 3") && m.contains("column 2") && m.contains("`name`"));
    let e = err(b"y,\xFFx\n1,2\n");
    assert_eq!(
        e,
        LoadError::NonUtf8 {
            line: 1,
            column: 2,
            name: None
        }
    );
    let m = e.to_string();
    assert!(m.contains("line 1") && m.contains("column 2"));
}

#[test]
fn error_empty_column_names() {
    // Unnamed columns that hold values: the earliest value is named.
    let e = err(b"y, ,x,\n1,,3,4\n5,2,3,\n");
    assert_eq!(
        e,
        LoadError::UnnamedColumnHolds {
            header: 1,
            positions: vec![2, 4],
            line: 2,
            column: 4,
            text: "4".to_owned(),
        }
    );
    let m = e.to_string();
    assert!(
        m.contains(
            "the header (line 1) gives no name to column 2 and 4, but line 2 holds `4` in column 4"
        ),
        "{m}"
    );
    // A header that names no column at all.
    assert_eq!(
        err(b" ,\n1,2\n"),
        LoadError::EmptyColumnName {
            line: 1,
            positions: vec![1, 2]
        }
    );
}

#[test]
fn an_unnamed_column_without_values_is_left_out() {
    // Every line ends with the separator, as some exports write it.
    let d = ok("g,y,\nA,1.5,\nB,2,\n");
    let names: Vec<&str> = d.columns.iter().map(|c| c.name.as_str()).collect();
    assert_eq!(names, ["g", "y"]);
    assert_eq!(nums(&d, "y"), [1.5, 2.0]);
    // In the middle too, blank and padded cells included, with CRLF line ends.
    let d = ok("g, ,y\r\nA,,1\r\nB,  ,2\r\n");
    assert_eq!(d.columns.len(), 2);
    assert_eq!(unnamed_columns(b"g, ,y\r\nA,,1\r\n", b','), [2]);
    assert_eq!(unnamed_columns(b"\xEF\xBB\xBFg,y,\n", b','), [3]);
    // A declared marker is no value; an undeclared one is.
    let o = LoadOptions {
        missing: vec!["NA".to_owned()],
        ..opts()
    };
    let d = read_delimited(b"g,y,\nA,1,NA\nB,2,\n", &o).unwrap_or_else(|e| panic!("{e}"));
    assert_eq!(d.columns.len(), 2);
    assert!(matches!(
        err(b"g,y,\nA,1,\nB,2,NA\n"),
        LoadError::UnnamedColumnHolds { line: 3, column: 3, ref text, .. } if text == "NA"
    ));
    // A text found after numbers is named at the number, the earliest value.
    assert!(matches!(
        err(b"g,y,\nA,1,\nB,2,7\nC,3,x\n"),
        LoadError::UnnamedColumnHolds { line: 3, ref text, .. } if text == "7"
    ));
    // A name used twice is still refused beside an unnamed column.
    assert!(matches!(
        err(b"a,,a\n1,,2\n"),
        LoadError::DuplicateColumnName { .. }
    ));
}

#[test]
fn quoted_decimal_commas_load_with_decimal_comma_and_comma_separator() {
    let o = LoadOptions {
        decimal_comma: true,
        ..opts()
    };
    let d =
        read_delimited(b"g,y\nA,\"1,5\"\nB,\"-2,25\"\nC,3\n", &o).unwrap_or_else(|e| panic!("{e}"));
    assert_eq!(nums(&d, "y"), [1.5, -2.25, 3.0]);
    // Unquoted, the comma separates fields: a ragged row.
    assert!(matches!(
        read_delimited(b"g,y\nA,1,5\n", &o),
        Err(LoadError::RaggedRow { line: 2, .. })
    ));
}

#[test]
fn error_duplicate_column_names() {
    let e = err(b"a,b,Y,b\n1,2,3,4\n");
    assert_eq!(
        e,
        LoadError::DuplicateColumnName {
            line: 1,
            name: "b".to_owned(),
            positions: vec![2, 4]
        }
    );
    let m = e.to_string();
    assert!(m.contains("line 1") && m.contains("columns 2 and 4") && m.contains("`b`"));
    // Case matters: y and Y are different names.
    assert!(load("y,Y\n1,2\n").is_ok());
}

#[test]
fn error_header_only() {
    let e = err(b"y,x\n");
    assert_eq!(e, LoadError::NoDataRows { line: 1 });
    assert!(e.to_string().contains("line 1"));
}

#[test]
fn error_ragged_row() {
    let e = err(b"y,x\n1,2\n3\n");
    assert_eq!(
        e,
        LoadError::RaggedRow {
            line: 3,
            expected: 2,
            found: 1
        }
    );
    let m = e.to_string();
    assert!(m.contains("line 3") && m.contains("1 fields") && m.contains("has 2"));
}

fn refused(text: &str) -> (LoadError, String) {
    let file = format!("id,y\n1,2.5\n2,\"{text}\"\n3,4\n");
    let e = err(file.as_bytes());
    let m = e.to_string();
    assert!(m.contains("line 3"), "{m}");
    assert!(m.contains("column 2"), "{m}");
    assert!(m.contains("`y`"), "{m}");
    (e, m)
}

#[test]
fn error_refused_numbers_with_suggestions() {
    let cases = [
        (
            "3,5",
            Suggestion::DecimalComma,
            "load it with decimal \",\"",
        ),
        (
            "1.234,5",
            Suggestion::DecimalComma,
            "load it with decimal \",\"",
        ),
        (
            "1,234.5",
            Suggestion::ThousandsSeparator,
            "remove thousands",
        ),
        ("1 234", Suggestion::ThousandsSeparator, "remove thousands"),
        ("1,234", Suggestion::AmbiguousComma, "remove thousands"),
        ("NaN", Suggestion::NonFiniteText, "missing \"NaN\""),
        ("-Inf", Suggestion::NonFiniteText, "missing \"-Inf\""),
        ("infinity", Suggestion::NonFiniteText, "empty cell"),
        ("NA", Suggestion::MissingMarker, "missing \"NA\""),
        ("1e400", Suggestion::OutOfRange, "rescale"),
        // Notations a copied table brings: the typographic minus, underscores between
        // thousands (both would otherwise make the column text without a word).
        (
            "\u{2212}3.5",
            Suggestion::TypographicMinus,
            "hyphen-minus of the keyboard (-3)",
        ),
        ("\u{2212}1e3", Suggestion::TypographicMinus, "hyphen-minus"),
        ("1_000", Suggestion::ThousandsSeparator, "remove thousands"),
        (
            "12_345.5",
            Suggestion::ThousandsSeparator,
            "remove thousands",
        ),
    ];
    for (text, suggestion, advice) in cases {
        let (e, m) = refused(text);
        assert_eq!(
            e,
            LoadError::RefusedNumber {
                line: 3,
                column: 2,
                name: "y".to_owned(),
                text: text.to_owned(),
                suggestion
            }
        );
        assert!(m.contains(advice), "{m}");
    }
}

#[test]
fn refused_number_reports_earliest_cell() {
    let e = err(b"a,b\n1,NaN\n3,4\nInf,5\n");
    assert!(matches!(
        e,
        LoadError::RefusedNumber {
            line: 2,
            column: 2,
            ..
        }
    ));
}

#[test]
fn declared_marker_avoids_refusal() {
    let o = LoadOptions {
        missing: vec!["NaN".to_owned()],
        ..opts()
    };
    let d = read_delimited(b"y\n1\nNaN\n", &o).unwrap_or_else(|e| panic!("{e}"));
    assert_eq!(d.column("y").map(Column::missing_count), Some(1));
}

#[test]
fn malformed_message_names_line() {
    let m = LoadError::Malformed { line: 7 }.to_string();
    assert!(m.contains("line 7"));
}

// ---- numbers ----

#[test]
fn parse_number_plain_forms() {
    for (t, v) in [
        ("1", 1.0),
        ("-2.5", -2.5),
        ("+3", 3.0),
        (".5", 0.5),
        ("5.", 5.0),
        ("1e3", 1000.0),
        ("1E-2", 0.01),
        (" 7 ", 7.0),
        ("1e-400", 0.0),
        // 2^53 and 2^60 are doubles; with a point, a value is a measurement, held as its
        // nearest double.
        ("9007199254740992", 9007199254740992.0),
        ("1152921504606846976", 1152921504606846976.0),
        ("9007199254740993.0", 9007199254740992.0),
    ] {
        assert_eq!(parse_number(t), NumberParse::Number(v), "{t}");
    }
    for t in [
        "",
        "abc",
        "0x10",
        "1e",
        "e5",
        "12:30",
        "1.2.3",
        "2020-01-02",
        "1,2,3",
        "5%",
        // A whole number beyond 2^53 that no double holds is an identifier's digits.
        "9007199254740993",
        "-9007199254740993",
        "123456789012345678901234567890123456789012",
    ] {
        assert_eq!(parse_number(t), NumberParse::NotNumber, "{t}");
    }
}

#[test]
fn parse_number_near_misses() {
    use Suggestion::*;
    for (t, sug) in [
        ("3,5", DecimalComma),
        ("-0,25", DecimalComma),
        ("0,500", DecimalComma),
        ("1 234,5", DecimalComma),
        ("1.234.567,89", DecimalComma),
        ("1,234,567", ThousandsSeparator),
        ("1,234.5", ThousandsSeparator),
        ("1.234.567", ThousandsSeparator),
        ("1 234 567.5", ThousandsSeparator),
        ("1'234", ThousandsSeparator),
        ("1\u{a0}234", ThousandsSeparator),
        ("12,345", AmbiguousComma),
        ("nan", NonFiniteText),
        ("+inf", NonFiniteText),
        ("-Infinity", NonFiniteText),
        ("N/A", MissingMarker),
        (".", MissingMarker),
        ("-", MissingMarker),
        ("1e400", OutOfRange),
        ("-1.8e308", OutOfRange),
    ] {
        assert_eq!(parse_number(t), NumberParse::Suspicious(sug), "{t}");
    }
}

#[test]
fn format_number_shortest() {
    assert_eq!(format_number(1.0), "1");
    assert_eq!(format_number(2.5), "2.5");
    assert_eq!(format_number(-0.0), "0");
    assert_eq!(format_number(0.1 + 0.2), "0.30000000000000004");
    assert_eq!(format_number(1e300), "1e300");
    assert_eq!(format_number(1.5e-7), "1.5e-7");
    assert_eq!(format_number(123456.0), "123456");
    assert_eq!(format_number(f64::NAN), "");
}

#[test]
fn first_non_number_finds_row() {
    let v = vec![s("1"), None, s("2.5"), s("n/a"), s("x")];
    assert_eq!(first_non_number(&v), Some((3, "n/a")));
    assert_eq!(first_non_number(&[s("1"), None]), None);
}

// ---- data set helpers ----

#[test]
fn display_values() {
    let d = ok("y,g\n1.25,A\n,\n3,B\n");
    let y = d.column("y").unwrap_or_else(|| panic!("no y"));
    assert_eq!(y.display_value(0), "1.25");
    assert_eq!(y.display_value(1), "");
    assert_eq!(y.display_value(2), "3");
    assert_eq!(y.display_value(9), "");
    let g = d.column("g").unwrap_or_else(|| panic!("no g"));
    assert_eq!(g.display_value(0), "A");
    assert_eq!(g.display_value(1), "");
}

#[test]
fn filter_keeps_row_numbers() {
    let d = ok("y,g\n1,A\n2,B\n3,A\n4,C\n");
    let f = d.filter(&[true, false, true]);
    assert_eq!(f.row_numbers.to_vec(), vec![2, 4]);
    assert_eq!(nums(&f, "y"), vec![1.0, 3.0]);
    assert_eq!(texts(&f, "g"), vec![s("A"), s("A")]);
    assert_eq!(f.n_rows(), 2);
}

#[test]
fn closest_names() {
    let d = ok("weight,dose,group,x\n1,2,A,3\n");
    assert_eq!(d.closest_name("Dose"), Some("dose"));
    assert_eq!(d.closest_name("weigth"), Some("weight"));
    assert_eq!(d.closest_name("grp"), Some("group"));
    assert_eq!(d.closest_name("temperature"), None);
    assert_eq!(d.closest_name("y"), None);
    assert_eq!(d.closest_name("X"), Some("x"));
}

#[test]
fn column_mut_changes_column() {
    let mut d = ok("y,g\n1,A\n2,B\n");
    let g = d.column("g").cloned().unwrap_or_else(|| panic!("no g"));
    let f = make_factor(&g, None).unwrap_or_else(|e| panic!("{e}"));
    if let Some(c) = d.column_mut("g") {
        c.values = Values::Factor(f);
    }
    assert_eq!(d.column("g").map(Column::kind_name), Some("factor"));
    assert_eq!(
        d.column("g").map(|c| c.display_value(1)),
        Some("B".to_owned())
    );
    assert!(d.column_mut("nope").is_none());
}

#[test]
fn sha256_known_values() {
    // FIPS 180-2 Appendix B.1 example ("abc") and the empty-message digest.
    assert_eq!(
        sha256_hex(b"abc"),
        "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"
    );
    assert_eq!(
        sha256_hex(b""),
        "e3b0c44298fc1c149afbf4c8996fb92427ae41e4649b934ca495991b7852b855"
    );
}

// ---- factors ----

fn text_col(cells: &[Option<&str>]) -> Column {
    Column {
        name: "g".to_owned(),
        values: Values::Text(
            cells
                .iter()
                .map(|c| c.map(str::to_owned))
                .collect::<Vec<_>>()
                .into(),
        ),
        exact: None,
    }
}

fn strings(v: &[&str]) -> Vec<String> {
    v.iter().map(|x| (*x).to_owned()).collect()
}

#[test]
fn factor_first_appearance() {
    let c = text_col(&[Some("b"), Some("a"), None, Some("b"), Some("c")]);
    let f = make_factor(&c, None).unwrap_or_else(|e| panic!("{e}"));
    assert_eq!(f.levels, strings(&["b", "a", "c"]));
    assert_eq!(levels_of(&f), [Some(0), Some(1), None, Some(0), Some(2)]);
    assert_eq!(f.order, LevelOrder::FirstAppearance);
    assert_eq!(f.counts(), vec![2, 1, 1]);
}

#[test]
fn factor_from_numeric_codes() {
    let c = Column {
        name: "dose".to_owned(),
        values: Values::Numeric(vec![2.0, 1.0, f64::NAN, 2.5, -0.0, 0.0, 1.0].into()),
        exact: None,
    };
    let f = make_factor(&c, None).unwrap_or_else(|e| panic!("{e}"));
    assert_eq!(f.levels, strings(&["2", "1", "2.5", "0"]));
    assert_eq!(
        levels_of(&f),
        [Some(0), Some(1), None, Some(2), Some(3), Some(3), Some(1)]
    );
    let declared = strings(&["1.0", "2", "2.5", "0", "7"]);
    let f = make_factor(&c, Some(&declared)).unwrap_or_else(|e| panic!("{e}"));
    assert_eq!(f.levels, declared);
    assert_eq!(f.codes.first().map(|c| c.get()), Some(Some(1)));
    assert_eq!(f.codes.get(1).map(|c| c.get()), Some(Some(0)));
    assert_eq!(unused_levels(&f), vec!["7"]);
}

#[test]
fn factor_declared_order_and_unused() {
    let c = text_col(&[Some("b"), Some("a"), Some("b")]);
    let declared = strings(&["a", "b", "z"]);
    let f = make_factor(&c, Some(&declared)).unwrap_or_else(|e| panic!("{e}"));
    assert_eq!(f.levels, declared);
    assert_eq!(levels_of(&f), [Some(1), Some(0), Some(1)]);
    assert_eq!(f.order, LevelOrder::Declared);
    assert_eq!(unused_levels(&f), vec!["z"]);
}

#[test]
fn factor_relevel_existing_factor() {
    let c = text_col(&[Some("b"), Some("a")]);
    let f = make_factor(&c, None).unwrap_or_else(|e| panic!("{e}"));
    let fc = Column {
        name: "g".to_owned(),
        values: Values::Factor(f),
        exact: None,
    };
    let declared = strings(&["a", "b"]);
    let g = make_factor(&fc, Some(&declared)).unwrap_or_else(|e| panic!("{e}"));
    assert_eq!(levels_of(&g), [Some(1), Some(0)]);
    let same = make_factor(&fc, None).unwrap_or_else(|e| panic!("{e}"));
    assert_eq!(same.levels, strings(&["b", "a"]));
}

#[test]
fn factor_error_undeclared_level() {
    let d = ok("y,g\n1,a\n2,b\n3,q\n4,q\n");
    let c = d.column("g").cloned().unwrap_or_else(|| panic!("no g"));
    let declared = strings(&["a", "b"]);
    let e = d.factor(&c, Some(&declared)).err();
    assert_eq!(
        e,
        Some(FactorError::UndeclaredLevel {
            column: "g".to_owned(),
            value: "q".to_owned(),
            row: 2,
            line: Some(4)
        })
    );
    let m = e.map(|e| e.to_string()).unwrap_or_default();
    assert!(m.contains("`q`") && m.contains("line 4") && m.contains("`g`"));
    let bare = make_factor(&c, Some(&declared))
        .err()
        .map(|e| e.to_string());
    assert!(bare.unwrap_or_default().contains("data row 3"));
}

#[test]
fn factor_error_too_few_levels() {
    let c = text_col(&[Some("a"), None, Some("a")]);
    let e = make_factor(&c, None).err();
    assert_eq!(
        e,
        Some(FactorError::TooFewLevels {
            column: "g".to_owned(),
            found: strings(&["a"])
        })
    );
    assert!(e.map(|e| e.to_string()).unwrap_or_default().contains("`a`"));
    let none = text_col(&[None, None]);
    let declared = strings(&["a", "b"]);
    assert!(matches!(
        make_factor(&none, Some(&declared)),
        Err(FactorError::TooFewLevels { .. })
    ));
}

#[test]
fn factor_error_duplicate_declared() {
    let c = text_col(&[Some("a"), Some("b")]);
    let e = make_factor(&c, Some(&strings(&["a", "b", "a"]))).err();
    assert!(
        matches!(e, Some(FactorError::DuplicateDeclaredLevel { ref level, .. }) if level == "a")
    );
    let n = Column {
        name: "d".to_owned(),
        values: Values::Numeric(vec![1.0, 2.0].into()),
        exact: None,
    };
    let e = make_factor(&n, Some(&strings(&["1", "1.0", "2"]))).err();
    assert!(matches!(
        e,
        Some(FactorError::DuplicateDeclaredLevel { .. })
    ));
    let m = FactorError::TooManyLevels {
        column: "id".to_owned(),
        row: Some(10_000),
        line: Some(10_002),
    }
    .to_string();
    assert!(m.contains("`id`") && m.contains("line 10002"), "{m}");
}

#[test]
fn a_factor_stops_at_its_level_limit() {
    // One more distinct value than the limit: refused, naming the row where it appears.
    let n = MAX_FACTOR_LEVELS + 1;
    let values: Vec<f64> = (0..n).map(|i| i as f64).chain([0.0, 1.0]).collect();
    let col = Column {
        name: "id".to_owned(),
        values: Values::Numeric(values.into()),
        exact: None,
    };
    let e = make_factor(&col, None).err();
    assert!(
        matches!(e, Some(FactorError::TooManyLevels { row: Some(r), .. }) if r == MAX_FACTOR_LEVELS),
        "{e:?}"
    );
    // At the limit it is a factor.
    let values: Vec<f64> = (0..MAX_FACTOR_LEVELS).map(|i| i as f64).collect();
    let col = Column {
        name: "id".to_owned(),
        values: Values::Numeric(values.into()),
        exact: None,
    };
    assert_eq!(
        make_factor(&col, None).map(|f| f.levels.len()).ok(),
        Some(MAX_FACTOR_LEVELS)
    );
    // Declared levels past the limit are refused too.
    let declared: Vec<String> = (0..=MAX_FACTOR_LEVELS).map(|i| i.to_string()).collect();
    let e = make_factor(&col, Some(&declared)).err();
    assert!(
        matches!(e, Some(FactorError::TooManyLevels { row: None, .. })),
        "{e:?}"
    );
}

// ---- no panics on any input ----

/// A small deterministic generator (xorshift64*, Vigna 2016) so the loop needs no dependency.
fn xorshift(state: &mut u64) -> u64 {
    *state ^= *state >> 12;
    *state ^= *state << 25;
    *state ^= *state >> 27;
    state.wrapping_mul(0x2545_F491_4F6C_DD1D)
}

#[test]
fn random_bytes_never_panic() {
    const ALPHABET: &[u8] = b"\",\t\n\r ab1.5e-+,\"\x00\xff\xef\xbb\xbfNaN";
    let mut st = 0x9E37_79B9_7F4A_7C15u64;
    for _ in 0..20_000 {
        let len = usize::try_from(xorshift(&mut st) % 64).unwrap_or(0);
        let bytes: Vec<u8> = (0..len)
            .map(|_| {
                let r = xorshift(&mut st);
                if r % 4 == 0 {
                    (r >> 8) as u8
                } else {
                    let i = usize::try_from((r >> 8) % ALPHABET.len() as u64).unwrap_or(0);
                    ALPHABET.get(i).copied().unwrap_or(b'x')
                }
            })
            .collect();
        if let Ok(d) = read_delimited(&bytes, &opts()) {
            check_loaded(&d);
        }
    }
}

/// Invariants of any successful load.
fn check_loaded(d: &DataSet) {
    assert!(d.n_rows() > 0);
    for c in &d.columns {
        assert_eq!(c.len(), d.n_rows());
        for r in 0..c.len() {
            let _ = c.display_value(r);
        }
        if let Values::Numeric(v) = &c.values {
            assert!(v.iter().all(|x| x.is_nan() || x.is_finite()));
        }
        let _ = make_factor(c, None);
        let _ = d.closest_name(&c.name);
    }
    let keep: Vec<bool> = (0..d.n_rows()).map(|i| i % 2 == 0).collect();
    let f = d.filter(&keep);
    assert_eq!(f.n_rows(), d.n_rows().div_ceil(2));
}

mod prop {
    use super::*;
    use proptest::prelude::*;

    proptest! {
        #[test]
        fn arbitrary_bytes_never_panic(bytes in proptest::collection::vec(any::<u8>(), 0..200)) {
            if let Ok(d) = read_delimited(&bytes, &opts()) {
                check_loaded(&d);
            }
        }

        #[test]
        fn csvish_text_never_panics(text in "[a-c0-9.,;\"\t \n\r-]{0,120}") {
            if let Ok(d) = read_delimited(text.as_bytes(), &opts()) {
                check_loaded(&d);
            }
            let tsv = LoadOptions { delimiter: b'\t', ..opts() };
            let _ = read_delimited(text.as_bytes(), &tsv);
        }

        #[test]
        fn parse_number_never_panics(text in "\\PC{0,20}") {
            let _ = parse_number(&text);
        }

        #[test]
        fn numbers_round_trip(x in any::<f64>()) {
            if x.is_finite() {
                let t = format_number(x);
                prop_assert_eq!(parse_number(&t), NumberParse::Number(x + 0.0));
            }
        }
    }
}

fn exact(d: &DataSet, name: &str) -> Option<ExactValues> {
    d.column(name).and_then(|c| c.exact.as_deref().cloned())
}

/// NaN-aware equality of two vectors, bit for bit.
fn same_bits(a: &[f64], b: &[f64]) -> bool {
    a.len() == b.len() && a.iter().zip(b).all(|(x, y)| x.to_bits() == y.to_bits())
}

#[test]
fn long_cells_keep_an_exact_offset() {
    // Values in the style of the NIST StRD ANOVA sets SmLs07-09 (invented rows).
    let d = ok("g,y,z\na,1000000000000.4,1\nb,,2\nc,999999999999.9,3\nd,1000000000001.25,4\n");
    let e = exact(&d, "y").unwrap_or_else(|| panic!("no exact values for y"));
    assert_eq!(e.offset, 1e12);
    let want: Vec<f64> = ["0.4", "NaN", "-0.1", "1.25"]
        .iter()
        .map(|t| t.parse::<f64>().unwrap_or(f64::NAN))
        .collect();
    assert!(same_bits(&e.residuals, &want), "{:?}", e.residuals);
    // The values stay the nearest doubles of the cells.
    assert!(same_bits(
        &nums(&d, "y"),
        &[1000000000000.4, f64::NAN, 999999999999.9, 1000000000001.25]
    ));
    // Short cells need no offset.
    assert_eq!(exact(&d, "z"), None);
    assert_eq!(exact(&d, "g"), None);
}

#[test]
fn exact_offset_needs_plain_cells_and_a_small_integer_part() {
    // Exponent notation anywhere in the column: none.
    assert_eq!(exact(&ok("y\n1000000000000.4\n1e12\n"), "y"), None);
    // Integer part of the first value beyond 2^53: none.
    assert_eq!(exact(&ok("y\n90071992547409930.5\n1\n"), "y"), None);
    // First value below 1 in size: a zero offset gains nothing.
    assert_eq!(exact(&ok("y\n0.5\n1000000000000.4\n"), "y"), None);
    // A column that turns text has none.
    assert_eq!(exact(&ok("y\n1000000000000.4\nabc\n"), "y"), None);
    // Missing markers are missing in the residuals too; the first value is negative.
    let mut o = opts();
    o.missing = vec!["NA".to_owned()];
    let d = read_delimited(b"y\nNA\n-1000000000000.4\n-1000000000000.5\n", &o)
        .unwrap_or_else(|e| panic!("{e}"));
    let e = exact(&d, "y").unwrap_or_else(|| panic!("no exact values"));
    assert_eq!(e.offset, -1e12);
    assert!(same_bits(&e.residuals, &[f64::NAN, -0.4, -0.5]));
}

#[test]
fn filter_keeps_exact_residuals_in_step() {
    let d = ok("y\n1000000000000.4\n1000000000000.3\n1000000000000.5\n");
    let f = d.filter(&[true, false, true]);
    let e = exact(&f, "y").unwrap_or_else(|| panic!("no exact values"));
    assert_eq!(e.offset, 1e12);
    assert!(same_bits(&e.residuals, &[0.4, 0.5]));
    assert_eq!(nums(&f, "y").len(), 2);
}

/// A text column of `rows` rows whose distinct texts are coded in another order than they
/// first appear ("z" has code 0 but first appears in the second block of rows), with
/// missing cells.
fn blocked_text_col(rows: usize) -> Column {
    let mut t = TextValues::with_capacity(rows);
    let codes: Vec<u32> = ["z", "b", "a", "q"]
        .iter()
        .map(|s| t.add_text(s).unwrap_or(TextValues::MISSING))
        .collect();
    for r in 0..rows {
        let code = match r {
            100_000 | 120_001 => codes[0],
            150_000 => codes[3],
            _ if r % 7 == 3 => TextValues::MISSING,
            _ if r % 3 == 0 => codes[1],
            _ => codes[2],
        };
        t.push_code(code);
    }
    Column {
        name: "g".to_owned(),
        values: Values::Text(t),
        exact: None,
    }
}

#[test]
fn large_text_factor_matches_row_by_row_coding() {
    let rows = 200_000;
    let c = blocked_text_col(rows);
    let Values::Text(t) = &c.values else {
        panic!("not text")
    };
    // Expected, one row at a time: levels in order of first appearance.
    let mut levels: Vec<String> = Vec::new();
    let mut expected: Vec<Option<u32>> = Vec::new();
    for r in 0..rows {
        expected.push(t.get(r).map(|s| {
            let at = levels.iter().position(|l| l == s).unwrap_or_else(|| {
                levels.push(s.to_owned());
                levels.len() - 1
            });
            at as u32
        }));
    }
    let f = make_factor(&c, None).unwrap_or_else(|e| panic!("{e}"));
    assert_eq!(f.levels, strings(&["b", "a", "z", "q"]));
    assert_eq!(levels_of(&f), expected[..]);
    assert_eq!(
        f.counts().iter().sum::<usize>(),
        expected.iter().flatten().count()
    );

    let declared = strings(&["q", "a", "b", "z"]);
    let f = make_factor(&c, Some(&declared)).unwrap_or_else(|e| panic!("{e}"));
    assert_eq!(f.codes.get(100_000).map(|c| c.get()), Some(Some(3)));
    assert_eq!(f.codes.get(150_000).map(|c| c.get()), Some(Some(0)));
    assert_eq!(f.codes.get(3).map(|c| c.get()), Some(None));

    // Two undeclared texts: the error names the one on the earlier row.
    let e = make_factor(&c, Some(&strings(&["a", "b"]))).err();
    assert_eq!(
        e,
        Some(FactorError::UndeclaredLevel {
            column: "g".to_owned(),
            value: "z".to_owned(),
            row: 100_000,
            line: None
        })
    );
}

#[test]
fn taking_a_factor_gives_the_made_one_and_leaves_the_column_on_an_error() {
    let rows = 200_000;
    let original = blocked_text_col(rows);
    let declared = strings(&["q", "a", "b", "z"]);
    for levels in [None, Some(&declared[..])] {
        let expected = make_factor(&original, levels).unwrap_or_else(|e| panic!("{e}"));
        let mut c = original.clone();
        let taken = take_factor(&mut c, levels).unwrap_or_else(|e| panic!("{e}"));
        assert_eq!(taken, expected);
        // The rows went with the factor.
        assert_eq!(c.len(), 0);
    }
    // Errors: the same as making the factor, and the column untouched.
    let mut few = TextValues::with_capacity(rows);
    let a = few.add_text("a").unwrap_or(TextValues::MISSING);
    few.add_text("never").unwrap_or(TextValues::MISSING);
    for r in 0..rows {
        few.push_code(if r % 5 == 0 { TextValues::MISSING } else { a });
    }
    let one_level = Column {
        name: "g".to_owned(),
        values: Values::Text(few),
        exact: None,
    };
    let undeclared = strings(&["a", "b"]);
    for (col, levels) in [(&original, Some(&undeclared[..])), (&one_level, None)] {
        let expected = make_factor(col, levels).err();
        assert!(expected.is_some());
        let mut c = col.clone();
        assert_eq!(take_factor(&mut c, levels).err(), expected);
        assert_eq!(&c, col);
    }
}

/// A factor's codes as level indices (`None` for missing).
fn levels_of(f: &super::Factor) -> Vec<Option<u32>> {
    f.codes.iter().map(|c| c.get()).collect()
}

#[test]
fn other_notations_that_are_not_numbers_stay_text() {
    // A typographic minus before a word, underscores not grouping thousands, and
    // hexadecimal (an identifier as often as a number) are texts, as any label is.
    for text in ["\u{2212}x", "1_0", "0x10", "a_000"] {
        let d = ok(&format!("g,y\nA,1\nB,{text}\n"));
        assert_eq!(
            texts(&d, "y"),
            [Some("1".to_owned()), Some(text.to_owned())]
        );
    }
}

#[test]
fn a_cell_not_utf8_under_no_name_says_so() {
    let m = err(b"g,y,\nA,1,\xff\n").to_string();
    assert!(
        m.contains("line 2, column 3 (no name in the header) holds bytes that are not valid UTF-8"),
        "{m}"
    );
}
