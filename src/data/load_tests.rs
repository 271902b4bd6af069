//! The loader against the row-at-a-time loader it replaced (`reference`): on any input, the
//! same data set or the same error, whatever the size of the parts and the number of
//! threads. All data here is invented for the tests.

use std::sync::OnceLock;

use proptest::prelude::*;

use super::load::read_in_parts;
use super::stream::{stream_in_windows, Streamed};
use super::{reference, sha256_hex, DataSet, LoadError, LoadOptions, Values};

/// Part sizes tried: one byte (a part per record), a few records, the real size.
const PART_SIZES: [usize; 4] = [1, 7, 64, 1 << 20];

/// Window sizes tried when streaming: one byte (every window grows to a record), a few
/// records, more than the small inputs.
const WINDOW_SIZES: [usize; 3] = [1, 40, 4096];

/// How the stream reader ended.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Way {
    Read,
    Whole,
    Again,
}

/// Loads `bytes` through the stream reader, then as its caller does: whole when handed
/// back. Checks the fingerprint of a streamed file and the bytes of one handed back whole.
fn streamed(
    bytes: &[u8],
    opts: &LoadOptions,
    window: usize,
    part: usize,
) -> (Result<DataSet, LoadError>, Way) {
    let mut reader = bytes;
    let len = u64::try_from(bytes.len()).ok();
    let got = stream_in_windows(&mut reader, len, opts, window, part)
        .unwrap_or_else(|e| panic!("reading from memory: {e}"));
    match got {
        Streamed::Read { set, sha256 } => {
            assert_eq!(sha256, sha256_hex(bytes), "fingerprint of the stream");
            (Ok(set), Way::Read)
        }
        Streamed::Whole(whole) => {
            assert_eq!(whole, bytes, "bytes handed back");
            (read_in_parts(&whole, opts, part), Way::Whole)
        }
        Streamed::Again => (read_in_parts(bytes, opts, part), Way::Again),
    }
}

fn pool(threads: usize) -> &'static rayon::ThreadPool {
    static POOLS: OnceLock<Vec<rayon::ThreadPool>> = OnceLock::new();
    let pools = POOLS.get_or_init(|| {
        [1, 2, 3]
            .iter()
            .map(|&n| {
                rayon::ThreadPoolBuilder::new()
                    .num_threads(n)
                    .build()
                    .unwrap_or_else(|e| panic!("thread pool: {e}"))
            })
            .collect()
    });
    pools
        .get(threads - 1)
        .unwrap_or_else(|| panic!("no pool of {threads} threads"))
}

/// The data sets are the same, cell for cell (NaN equal to NaN, numbers bit for bit).
fn same_set(a: &DataSet, b: &DataSet) -> Result<(), String> {
    if a.name != b.name || a.row_numbers != b.row_numbers || a.columns.len() != b.columns.len() {
        return Err(format!(
            "shape: {:?} {:?} vs {:?} {:?}",
            a.name, a.row_numbers, b.name, b.row_numbers
        ));
    }
    for (x, y) in a.columns.iter().zip(&b.columns) {
        if x.name != y.name {
            return Err(format!("names {} vs {}", x.name, y.name));
        }
        let bits = |v: &[f64]| v.iter().map(|f| f.to_bits()).collect::<Vec<_>>();
        match (&x.values, &y.values) {
            (Values::Numeric(p), Values::Numeric(q)) if bits(p) == bits(q) => {}
            (Values::Text(p), Values::Text(q)) if p == q => {}
            _ => {
                return Err(format!(
                    "column {}: {:?} vs {:?}",
                    x.name, x.values, y.values
                ))
            }
        }
        let exact = |c: &super::Column| {
            c.exact
                .as_ref()
                .map(|e| (e.offset.to_bits(), bits(&e.residuals)))
        };
        if exact(x) != exact(y) {
            return Err(format!("exact residuals of {}", x.name));
        }
    }
    Ok(())
}

fn same(a: &Result<DataSet, LoadError>, b: &Result<DataSet, LoadError>) -> Result<(), String> {
    match (a, b) {
        (Ok(x), Ok(y)) => same_set(x, y),
        (Err(x), Err(y)) if x == y => Ok(()),
        _ => Err(format!("{a:?}\n   vs\n{b:?}")),
    }
}

/// Loads `bytes` both ways, with every part size and 1 to 3 threads; panics on a difference.
/// With a given part size the results must be identical to the byte whatever the threads.
fn check(bytes: &[u8], opts: &LoadOptions) {
    let want = reference::read_delimited(bytes, opts);
    for part in PART_SIZES {
        let one = pool(1).install(|| read_in_parts(bytes, opts, part));
        if let Err(e) = same(&want, &one) {
            panic!(
                "part size {part} differs on {:?}:\n{e}",
                String::from_utf8_lossy(bytes)
            );
        }
        for threads in [2, 3] {
            let more = pool(threads).install(|| read_in_parts(bytes, opts, part));
            assert_eq!(
                format!("{one:?}"),
                format!("{more:?}"),
                "{threads} threads, part size {part}"
            );
        }
    }
    for window in WINDOW_SIZES {
        for (threads, part) in [(1, 7), (2, 1), (3, 64)] {
            let (got, way) = pool(threads).install(|| streamed(bytes, opts, window, part));
            if let Err(e) = same(&want, &got) {
                panic!(
                    "streamed ({way:?}) in windows of {window}, parts of {part}, differs on {:?}:\n{e}",
                    String::from_utf8_lossy(bytes)
                );
            }
        }
    }
}

/// The way the stream reader takes on `bytes` in windows smaller than the tests' files,
/// checking that it is the same with other part sizes and thread counts.
fn way(bytes: &[u8]) -> Way {
    let ways: Vec<Way> = [(1, 7), (2, 64), (3, 1)]
        .into_iter()
        .map(|(threads, part)| pool(threads).install(|| streamed(bytes, &opts(), 1000, part).1))
        .collect();
    assert!(ways.windows(2).all(|w| w[0] == w[1]), "{ways:?}");
    ways[0]
}

fn opts() -> LoadOptions {
    LoadOptions {
        name: "t".to_owned(),
        ..LoadOptions::default()
    }
}

/// Bytes that make delimited text interesting: structure, numbers, words, padding, a
/// marker, text that is not UTF-8, and near-miss numbers.
const PIECES: [&[u8]; 24] = [
    b",",
    b",",
    b",",
    b"\n",
    b"\n",
    b"\r\n",
    b"\r",
    b"\"",
    b"\"\"",
    b" ",
    b"\t",
    b"1",
    b"2.5",
    b"-3",
    b"1e3",
    b"x",
    b"A",
    b"NA",
    b"1,5",
    b"\xc3\xa9",
    b"\xff",
    b"1000000.25",
    b";",
    b".",
];

fn text_of(pieces: &[usize], header: bool) -> Vec<u8> {
    let mut out: Vec<u8> = if header {
        b"a,b,c\n".to_vec()
    } else {
        Vec::new()
    };
    for &i in pieces {
        out.extend_from_slice(PIECES.get(i % PIECES.len()).copied().unwrap_or_default());
    }
    out
}

/// Unnamed columns (left out when they hold no value, refused when they do), the same by
/// every way of reading.
#[test]
fn unnamed_columns_every_way() {
    let mut trailing = b"g,y,\n".to_vec();
    for i in 0..400 {
        trailing.extend_from_slice(format!("{},{}.5,\n", ["A", "B"][i % 2], i).as_bytes());
    }
    check(&trailing, &opts());
    let mut late = trailing.clone();
    late.extend_from_slice(b"C,1,late\n");
    check(&late, &opts());
    let mut late_number = trailing.clone();
    late_number.extend_from_slice(b"C,1,7\n");
    check(&late_number, &opts());
    check(b"a,,b\n1,,2\n3,x,4\n", &opts());
    check(b"a,,b\n1,NA,2\n", &opts());
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 1500, failure_persistence: None, ..ProptestConfig::default() })]

    #[test]
    fn same_as_the_row_at_a_time_loader(
        pieces in proptest::collection::vec(0usize..PIECES.len(), 0..120),
        header in any::<bool>(),
        tab in any::<bool>(),
        marker in any::<bool>(),
    ) {
        let o = LoadOptions {
            delimiter: if tab { b'\t' } else { b',' },
            missing: if marker { vec!["NA".to_owned(), String::new()] } else { Vec::new() },
            ..opts()
        };
        check(&text_of(&pieces, header), &o);
    }

    #[test]
    fn same_on_rows_of_three_cells(
        cells in proptest::collection::vec(0usize..PIECES.len(), 0..90),
    ) {
        // Mostly well-formed rows, so that more inputs load and their values are compared.
        let mut bytes = b"a,b,c\n".to_vec();
        for (i, c) in cells.iter().enumerate() {
            let piece = PIECES.get(*c).copied().unwrap_or_default();
            let structural = matches!(piece, b"," | b"\n" | b"\r\n" | b"\r");
            if !structural {
                bytes.extend_from_slice(piece);
            }
            bytes.extend_from_slice(if i % 3 == 2 { b"\n" } else { b"," });
        }
        check(&bytes, &opts());
    }
}

/// Rows `y,x,g,note` like the benchmark's, with `edit` applied to each row's cells.
fn rows(n: usize, edit: impl Fn(usize, &mut [String; 4])) -> Vec<u8> {
    let mut out = b"y,x,g,note\n".to_vec();
    for i in 0..n {
        let mut cells = [
            format!("{}.{:03}", 10 + i % 70, (i * 37) % 1000),
            format!("{}.5", i % 50),
            ["A", "B", "C", "D"][i % 4].to_owned(),
            format!("r{i}"),
        ];
        edit(i, &mut cells);
        out.extend_from_slice(cells.join(",").as_bytes());
        out.push(b'\n');
    }
    out
}

#[test]
fn columns_turning_text_in_later_parts_keep_every_cell() {
    // Column y turns text at row 700, x at row 1900: with small parts, in a later part and
    // a later batch than the first rows.
    let bytes = rows(2000, |i, c| {
        if i == 700 {
            c[0] = "seven hundred".to_owned();
        }
        if i == 1900 {
            c[1] = "n/a?".to_owned();
        }
        if i % 11 == 0 {
            c[1] = String::new();
        }
    });
    check(&bytes, &opts());
    // Their earlier cells must be read again as text: the stream reader hands the file back.
    assert_eq!(way(&bytes), Way::Again);
    for part in [1, 100, 4096] {
        let d = read_in_parts(&bytes, &opts(), part).unwrap_or_else(|e| panic!("{e}"));
        let y = d.column("y").map(|c| &c.values);
        let Some(Values::Text(y)) = y else {
            panic!("y is not text: {y:?}");
        };
        assert_eq!(y.get(0), Some("10.000"));
        assert_eq!(y.get(700), Some("seven hundred"));
        assert_eq!(y.get(1999), Some("49.963"));
    }
}

#[test]
fn errors_in_later_parts_name_their_lines() {
    let ragged = rows(3000, |i, c| {
        if i == 2500 {
            c[3] = "a,b".to_owned();
        }
    });
    let refused = rows(3000, |i, c| {
        if i == 2100 {
            c[1] = "1,5".to_owned();
        }
        if i == 2900 {
            c[0] = "NA".to_owned();
        }
    });
    let non_utf8 = {
        let mut b = rows(3000, |_, _| {});
        let at = b.len() - 40;
        if let Some(x) = b.get_mut(at) {
            *x = 0xff;
        }
        b
    };
    for bytes in [&ragged, &refused, &non_utf8] {
        check(bytes, &opts());
        assert_eq!(way(bytes), Way::Again);
    }
    let e = read_in_parts(&ragged, &opts(), 64).err();
    assert_eq!(
        e,
        Some(LoadError::RaggedRow {
            line: 2502,
            expected: 4,
            found: 5
        })
    );
}

#[test]
fn quoted_fields_across_part_boundaries() {
    let bytes = rows(1500, |i, c| match i % 5 {
        0 => c[3] = format!("\"line\nbreak {i}\""),
        1 => c[3] = format!("\"say \"\"{i}\"\"\""),
        2 => c[2] = "\"B\"".to_owned(),
        3 => c[3] = format!("x\"{i}"),
        _ => {}
    });
    check(&bytes, &opts());
    assert_eq!(way(&bytes), Way::Read);
    let d = read_in_parts(&bytes, &opts(), 50).unwrap_or_else(|e| panic!("{e}"));
    assert_eq!(d.n_rows(), 1500);
    // Each quoted line break moves the later rows down a line.
    assert_eq!(d.row_numbers.last(), Some(1501 + 300));
}

#[test]
fn a_quote_left_open_in_a_large_file_is_found() {
    let mut bytes = rows(3000, |_, _| {});
    bytes.extend_from_slice(b"1,2,\"A,open\n5,6,B,x\n");
    check(&bytes, &opts());
    assert_eq!(way(&bytes), Way::Again);
    assert_eq!(
        read_in_parts(&bytes, &opts(), 64).err(),
        Some(LoadError::UnterminatedQuote { line: 3002 })
    );
}

#[test]
fn unique_texts_and_long_numbers_across_parts() {
    let bytes = rows(3000, |i, c| {
        c[0] = format!("1000000000{}.{}", i % 10, i % 7);
        c[3] = format!("a much longer unique label number {i}");
    });
    check(&bytes, &opts());
    assert_eq!(way(&bytes), Way::Again);
    let d = read_in_parts(&bytes, &opts(), 128).unwrap_or_else(|e| panic!("{e}"));
    assert!(d.column("y").and_then(|c| c.exact.as_ref()).is_some());
}

#[test]
fn crlf_bare_cr_and_blank_lines_across_parts() {
    let mut bytes = b"y,g\r\n".to_vec();
    for i in 0..2000 {
        let end: &[u8] = match i % 4 {
            0 => b"\r\n",
            1 => b"\r",
            2 => b"\n\n\r\n",
            _ => b"\n",
        };
        bytes.extend_from_slice(format!("{i},g{}", i % 3).as_bytes());
        bytes.extend_from_slice(end);
    }
    check(&bytes, &opts());
    assert_eq!(way(&bytes), Way::Read);
}

#[test]
fn usual_files_are_streamed_and_unusual_ones_read_whole() {
    let plain = rows(3000, |i, c| {
        if i % 13 == 0 {
            c[1] = String::new();
        }
    });
    check(&plain, &opts());
    assert_eq!(way(&plain), Way::Read);
    let mut bom = b"\xEF\xBB\xBF".to_vec();
    bom.extend_from_slice(&plain);
    check(&bom, &opts());
    assert_eq!(way(&bom), Way::Read);
    // A NUL byte far into the file, a file of blank lines after its header.
    let mut nul = plain.clone();
    if let Some(b) = nul.get_mut(50_000) {
        *b = 0;
    }
    let blank = [b"a,b\n".as_slice(), &[b'\n'; 3000]].concat();
    for bytes in [&nul, &blank] {
        check(bytes, &opts());
        assert_eq!(way(bytes), Way::Again);
    }
    // A header longer than the window grows it (to the whole file here).
    let wide = [vec![b'h'; 2000], b",k\n1,2\n".to_vec()].concat();
    check(&wide, &opts());
    assert_eq!(streamed(&wide, &opts(), 64, 64).1, Way::Whole);
    // A file no larger than the window comes back whole.
    assert_eq!(streamed(&plain, &opts(), plain.len() + 1, 64).1, Way::Whole);
}

#[test]
fn quoted_cells_keep_their_spaces_in_every_reader() {
    // Rows of a text column holding `" a "`, `"a"`, an unquoted ` a ` (trimmed: `a`) and a
    // quoted blank (missing), with a numeric column whose quoted padded number still reads
    // as a number; enough rows for the stream reader to take them a window at a time.
    let mut bytes = b"g,x\n".to_vec();
    for i in 0..3000 {
        let g: &[u8] = match i % 4 {
            0 => b"\" a \"",
            1 => b"\"a\"",
            2 => b" a ",
            _ => b"\" \"",
        };
        bytes.extend_from_slice(g);
        bytes.extend_from_slice(format!(",\" {i}.5 \"\n").as_bytes());
    }
    check(&bytes, &opts());
    // Streamed, not handed back (with parts of a record or two, a part of blanks alone types
    // the column as numbers and hands the file back, as for any column).
    assert_eq!(streamed(&bytes, &opts(), 1000, 64).1, Way::Read);
    let set = read_in_parts(&bytes, &opts(), 1 << 20).unwrap_or_else(|e| panic!("{e}"));
    let Some(Values::Text(g)) = set.columns.first().map(|c| &c.values) else {
        panic!("g is not text");
    };
    let shown: Vec<Option<&str>> = (0..4).map(|r| g.get(r)).collect();
    assert_eq!(shown, vec![Some(" a "), Some("a"), Some("a"), None]);
    assert!(matches!(
        set.columns.get(1).map(|c| &c.values),
        Some(Values::Numeric(x)) if x.first() == Some(&0.5)
    ));
}
