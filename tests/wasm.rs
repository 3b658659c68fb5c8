//! The core under wasm computes what it computes natively: for every compared link
//! (`tests/wasm_common`), the design (stage f0/Q/gain, every part value), the built response at
//! every plot frequency, the parts list and SPICE texts and a 1500-run tolerance study are computed
//! in headless Chromium and compared with the native values that `tests/wasm_reference.rs` wrote
//! into `target/wasm-reference.json` (run it first; `./build.sh test` does).
//!
//! Tolerance: texts, part values and run counts exactly; other numbers to 1e-9 relative. The wasm
//! build's libm and the native one may differ in the last bit of a transcendental function, which
//! derived quantities can carry well above one ulp but nowhere near 1e-9.
#![cfg(target_arch = "wasm32")]

mod wasm_common;

use serde_json::Value;
use wasm_bindgen_test::{wasm_bindgen_test, wasm_bindgen_test_configure};
use wasm_common::{compare, values, LINKS};

wasm_bindgen_test_configure!(run_in_browser);

const NATIVE: &str = include_str!(concat!(
    env!("CARGO_MANIFEST_DIR"),
    "/target/wasm-reference.json"
));

fn native() -> Vec<Value> {
    serde_json::from_str(NATIVE).unwrap_or_else(|e| {
        panic!("target/wasm-reference.json is not readable ({e}): run cargo test --test wasm_reference")
    })
}

#[wasm_bindgen_test]
fn designs_and_studies_under_wasm_equal_the_native_results() {
    let reference = native();
    assert_eq!(
        reference.len(),
        LINKS.len(),
        "the reference file is for another set of links"
    );
    for (link, expected) in LINKS.iter().zip(&reference) {
        let got = values(link);
        // Texts that must match to the byte.
        for key in ["summary", "bom", "spice"] {
            assert_eq!(got[key], expected[key], "{key} differs for {link}");
        }
        assert_eq!(
            got["stages"].as_array().map(Vec::len),
            expected["stages"].as_array().map(Vec::len)
        );
        assert_eq!(
            got["study"]["n_pass"], expected["study"]["n_pass"],
            "yield count for {link}"
        );
        if let Err(difference) = compare(expected, &got, 1e-9, "values") {
            panic!("{link}: {difference}");
        }
    }
}

#[wasm_bindgen_test]
fn part_values_are_identical_to_the_bit() {
    // E-series values come from exact table arithmetic: no libm function is involved, so the
    // boards must be the same to the last bit.
    for (link, expected) in LINKS.iter().zip(native()) {
        let got = values(link);
        for (a, b) in got["stages"]
            .as_array()
            .into_iter()
            .flatten()
            .zip(expected["stages"].as_array().into_iter().flatten())
        {
            assert_eq!(a["parts"], b["parts"], "parts differ for {link}");
        }
    }
}
