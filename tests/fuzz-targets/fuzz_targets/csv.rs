//! The CSV loader on arbitrary bytes: a data set or a load error, never a panic.
#![no_main]

use libfuzzer_sys::fuzz_target;

fuzz_target!(|bytes: &[u8]| {
    let opts = covey::data::LoadOptions {
        name: "fuzz".into(),
        delimiter: b',',
        missing: vec!["NA".into()],
        decimal_comma: false,
    };
    let _ = covey::data::read_delimited(bytes, &opts);
});
