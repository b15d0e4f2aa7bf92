//! Fuzzes the CSV profile reader: the first two bytes choose the options (delimiter,
//! decimal mark, defect policies), the rest is the file. A profile that scans must stream
//! and agree with its in-memory copy; an error must name the line. Any broken invariant
//! aborts, so that libFuzzer keeps the input.
#![no_main]

use libfuzzer_sys::fuzz_target;

#[path = "../../tests/robust/mod.rs"]
mod robust;

fuzz_target!(|data: &[u8]| {
    let (a, b, body) = match data {
        [a, b, rest @ ..] => (*a, *b, rest),
        _ => (0, 0, data),
    };
    if let Err(e) = robust::check_csv(body, &robust::options_from(a, b)) {
        panic!("{e}");
    }
});
