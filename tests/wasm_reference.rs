//! The native half of the wasm comparison: computes the compared values of every link natively and
//! writes them to `target/wasm-reference.json`, which `tests/wasm.rs` compiles in and checks in
//! headless Chromium (`./build.sh test` runs this first). It also checks here, natively, the two
//! properties that make the comparison meaningful: the values are reproducible, and the tolerance
//! study does not depend on how its runs are cut into chunks.
#![cfg(not(target_arch = "wasm32"))]

mod wasm_common;

use rolloff::app as page;
use serde_json::Value;
use wasm_common::{compare, values, LINKS, RUNS, SEED};

#[test]
fn native_values_for_the_wasm_comparison() {
    let all: Vec<Value> = LINKS.iter().map(|link| values(link)).collect();
    for value in &all {
        assert!(
            value.get("errors").is_none(),
            "a compared link must design: {value}"
        );
    }
    // Computing twice gives the same numbers to the last bit (no hidden state, no time seed).
    let again: Vec<Value> = LINKS.iter().map(|link| values(link)).collect();
    assert_eq!(all, again, "the compared values are not reproducible");
    let path = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("target/wasm-reference.json");
    let text = serde_json::to_string(&all).unwrap_or_default();
    std::fs::write(&path, text).unwrap_or_else(|e| panic!("cannot write {}: {e}", path.display()));
}

#[test]
fn the_study_does_not_depend_on_how_runs_are_chunked() {
    // One chunk of all runs against the uneven chunks of `values`: the same summary to the bit.
    let link = LINKS[2];
    let model = page::evaluate(&format!("{link}&runs={RUNS}&seed={SEED}"))
        .model
        .unwrap_or_else(|| panic!("the strain-gauge demo designs"));
    let mut whole = model.start_study().unwrap_or_else(|e| panic!("{e}"));
    whole.step(RUNS);
    let whole = whole.finish();
    let chunked = values(link);
    let yield_whole = whole.yield_fraction;
    let mean = whole.passband_gain_db.mean;
    let study = &chunked["study"];
    assert_eq!(study["runs"], RUNS);
    assert_eq!(study["yield"].as_f64(), yield_whole);
    assert_eq!(study["gain_mean_db"].as_f64(), Some(mean));
    // The comparison helper itself must catch a difference.
    let mut other = chunked.clone();
    other["study"]["gain_mean_db"] = Value::from(mean + 1e-6);
    assert!(compare(&chunked, &other, 1e-9, "values").is_err());
}
