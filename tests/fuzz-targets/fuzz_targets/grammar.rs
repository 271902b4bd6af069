//! The grammar on arbitrary lines: a statement or a syntax error, never a panic.
#![no_main]

use libfuzzer_sys::fuzz_target;

fuzz_target!(|line: &str| {
    if !line.contains('\n') {
        let _ = covey::lang::parse_line(line, 0, 1);
    }
});
