//! What the wasm test compares with the native build: the same quantities computed by the same
//! core functions for the same links, serialized as JSON. `tests/wasm_reference.rs` writes them
//! natively into `target/wasm-reference.json`; `tests/wasm.rs` recomputes them in headless
//! Chromium and compares.

use rolloff::app as page;
use serde_json::{json, Value};

/// The links compared: the README's demo scenarios and a few more shapes (band-pass, high-pass,
/// odd order, a part typed over, uniform tolerances).
pub const LINKS: [&str; 5] = [
    "v=2&title=Geophone+front+end&fsample=2k&adcbits=24&fsignal=200&family=butterworth&topo=mfb",
    "v=2&title=Hydrophone+band&resp=bp&family=butterworth&passedge=2k,20k&passloss=1&stopedge=400,100k&stopdepth=30&topo=mfb",
    "v=1&title=Strain+gauge+band+limit&resp=lp&family=bessel&order=4&fc=10&gain=20",
    "v=1&resp=hp&family=chebyshev&ripple=1&order=5&fc=300&topo=mfb&set=R2:4k7&dist=uniform",
    "v=1&resp=lp&family=critical&order=3&fc=2k5&gbw=10M&rser=e24&cser=e6",
];

/// Runs and seed of the compared tolerance study (the link's own runs are overridden so the
/// comparison stays quick in a debug wasm build).
pub const RUNS: usize = 1500;
/// Seed of the compared tolerance study.
pub const SEED: u64 = 20240611;

/// The compared values of one link.
pub fn values(link: &str) -> Value {
    let query = format!("{link}&runs={RUNS}&seed={SEED}");
    let evaluation = page::evaluate(&query);
    let Some(model) = evaluation.model else {
        return json!({ "link": link, "errors": format!("{:?}", evaluation.view.errors) });
    };
    let board = &model.design.board;
    let stages: Vec<Value> = board
        .stages
        .iter()
        .map(|s| {
            json!({
                "f0_hz": s.section.f0_hz,
                "q": s.section.q,
                "achieved_f0_hz": s.achieved_f0_hz,
                "achieved_q": s.achieved_q,
                "achieved_gain": s.achieved_gain,
                "parts": s.netlist.parts.iter().map(|p| json!([p.reference, p.value])).collect::<Vec<_>>(),
            })
        })
        .collect();
    let built = model.data.built.clone().unwrap_or_default();
    let mut study = match model.start_study() {
        Ok(study) => study,
        Err(e) => return json!({ "link": link, "errors": e.message }),
    };
    // Chunks of uneven size: the draws do not depend on how the runs are cut.
    let mut chunk = 1;
    while !study.is_done() {
        study.step(chunk);
        chunk = chunk * 3 + 1;
    }
    let summary = study.finish();
    json!({
        "link": link,
        "summary": model.view.summary,
        "stages": stages,
        "gain_db": built.gain_db,
        "phase_deg": built.phase_deg,
        "bom": model.export("bom").unwrap_or_default(),
        "spice": model.export("spice").unwrap_or_default(),
        "study": {
            "runs": summary.runs,
            "yield": summary.yield_fraction,
            "n_pass": summary.n_pass,
            "cutoffs": summary.cutoffs.iter().map(|c| c.hz.percentiles.iter().map(|p| p.value).collect::<Vec<_>>()).collect::<Vec<_>>(),
            "gain_mean_db": summary.passband_gain_db.mean,
            "envelope_p95_db": summary.envelope.percentiles.last().map(|c| c.db.clone()),
        },
    })
}

/// Compares two value trees: strings, booleans and nulls exactly; numbers to `relative` (or
/// `relative` absolute near zero). Returns the first difference.
pub fn compare(native: &Value, wasm: &Value, relative: f64, path: &str) -> Result<(), String> {
    match (native, wasm) {
        (Value::Number(a), Value::Number(b)) => {
            let (a, b) = (
                a.as_f64().unwrap_or(f64::NAN),
                b.as_f64().unwrap_or(f64::NAN),
            );
            let scale = a.abs().max(b.abs()).max(1.0);
            if a == b || (a - b).abs() <= relative * scale {
                Ok(())
            } else {
                Err(format!("{path}: native {a}, wasm {b}"))
            }
        }
        (Value::Array(a), Value::Array(b)) => {
            if a.len() != b.len() {
                return Err(format!(
                    "{path}: native has {} items, wasm {}",
                    a.len(),
                    b.len()
                ));
            }
            for (i, (x, y)) in a.iter().zip(b).enumerate() {
                compare(x, y, relative, &format!("{path}[{i}]"))?;
            }
            Ok(())
        }
        (Value::Object(a), Value::Object(b)) => {
            let keys_a: Vec<&String> = a.keys().collect();
            let keys_b: Vec<&String> = b.keys().collect();
            if keys_a != keys_b {
                return Err(format!("{path}: keys {keys_a:?} against {keys_b:?}"));
            }
            for (key, x) in a {
                compare(x, &b[key], relative, &format!("{path}.{key}"))?;
            }
            Ok(())
        }
        (a, b) if a == b => Ok(()),
        (a, b) => Err(format!("{path}: native {a}, wasm {b}")),
    }
}
