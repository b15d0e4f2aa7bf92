//! Fuzzes the scenario parser and validator (`Scenario::from_str`), and prepares studies
//! with synthetic profiles. Errors must name a line or a key.
#![no_main]

use libfuzzer_sys::fuzz_target;

#[path = "../../tests/robust/mod.rs"]
mod robust;

fuzz_target!(|data: &[u8]| {
    let text = String::from_utf8_lossy(data);
    if let Err(e) = robust::check_scenario(&text) {
        panic!("{e}");
    }
});
