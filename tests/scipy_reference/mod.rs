//! Reading the committed scipy.signal reference data (`tests/reference/*.json`), shared by the
//! synthesis tests: the file with its scipy version checked, its lists, and root sets compared
//! without regard to order.
#![allow(dead_code)]

use num_complex::Complex64;
use serde_json::Value;

/// The reference file `tests/reference/{name}`, which must record its scipy version; a missing
/// file fails with the command that makes it (`generator`).
pub fn load(name: &str, generator: &str) -> Value {
    let path = format!("{}/tests/reference/{name}", env!("CARGO_MANIFEST_DIR"));
    let text = std::fs::read_to_string(&path).unwrap_or_else(|e| {
        panic!("cannot read {path} ({e}); regenerate it with {generator} (needs pip install scipy numpy)")
    });
    let data: Value = serde_json::from_str(&text).expect("reference JSON parses");
    assert!(
        data["scipy_version"].as_str().is_some(),
        "reference data must record the scipy version"
    );
    data
}

/// A list of `[re, im]` pairs.
pub fn complex_list(v: &Value) -> Vec<Complex64> {
    v.as_array()
        .expect("array of [re, im]")
        .iter()
        .map(|p| Complex64::new(p[0].as_f64().unwrap(), p[1].as_f64().unwrap()))
        .collect()
}

/// A list of numbers.
pub fn f64_list(v: &Value) -> Vec<f64> {
    v.as_array()
        .expect("array of numbers")
        .iter()
        .map(|x| x.as_f64().unwrap())
        .collect()
}

/// Largest relative distance between two root sets matched one to one (each reference root to
/// its nearest unused root of ours), so that the comparison does not depend on ordering; a
/// reference root at the origin is compared in absolute terms.
pub fn set_error(ours: &[Complex64], reference: &[Complex64]) -> f64 {
    assert_eq!(ours.len(), reference.len(), "root count");
    let mut used = vec![false; ours.len()];
    let mut worst = 0.0f64;
    for r in reference {
        let (idx, dist) = ours
            .iter()
            .enumerate()
            .filter(|(i, _)| !used[*i])
            .map(|(i, p)| (i, (p - r).norm()))
            .min_by(|a, b| a.1.total_cmp(&b.1))
            .expect("an unused root");
        used[idx] = true;
        let scale = r.norm();
        worst = worst.max(if scale > 0.0 { dist / scale } else { dist });
    }
    worst
}
