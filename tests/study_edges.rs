//! The tolerance study's band edges of an equiripple board move with the parts; they do not jump.
//!
//! A Chebyshev board's ripple-band edge is where the response last leaves the ripple band. When
//! the parts lower the ripple peak next to the edge below the ripple level, a reading of "the
//! highest frequency still at the level" would jump back to an earlier ripple, a quarter of the
//! band away; the study follows the peak instead (`tolerance::kernel`).
//!
//! Source of the bound (physics of the parts): with 1 % resistors and 5 % capacitors at 3σ, each
//! stage's f0 ∝ 1/√(R1·R2·C1·C2) has σ ≈ ½·√(2·(1/3 %)² + 2·(5/3 %)²) ≈ 1.2 % (the study prints
//! the same per stage). An edge that moves with the stages stays within a few σ of its nominal;
//! 10 % (8σ) away can only be a jump.

use std::process::Command;

fn spread(link: &str) -> serde_json::Value {
    let out = Command::new(env!("CARGO_BIN_EXE_rolloff"))
        .args(["spread", link, "--runs", "2000", "--format", "json"])
        .output()
        .expect("rolloff runs");
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    serde_json::from_slice(&out.stdout).expect("spread JSON")
}

#[test]
fn chebyshev_edges_move_with_the_parts_and_do_not_jump_to_an_earlier_ripple() {
    for (link, side) in [
        (
            "?v=2&resp=lp&family=chebyshev&ripple=1&order=6&fc=1k&rtol=1&ctol=5",
            "Upper",
        ),
        (
            "?v=2&resp=hp&family=chebyshev&ripple=1&order=6&fc=1k&rtol=1&ctol=5",
            "Lower",
        ),
        (
            "?v=2&resp=lp&family=chebyshev&ripple=0.5&order=8&fc=10k&rtol=1&ctol=5&topo=mfb",
            "Upper",
        ),
    ] {
        let s = spread(link);
        let cut = s["cutoffs"]
            .as_array()
            .expect("cutoffs")
            .iter()
            .find(|c| c["side"] == side)
            .expect("the edge");
        let hz = &cut["hz"];
        let (nominal, min, max, sd) = (
            hz["nominal"].as_f64().unwrap(),
            hz["min"].as_f64().unwrap(),
            hz["max"].as_f64().unwrap(),
            hz["std_dev"].as_f64().unwrap(),
        );
        assert_eq!(hz["n_missing"], 0, "{link}: every run has its edge");
        assert!(
            min > 0.9 * nominal && max < 1.1 * nominal,
            "{link}: {side} edge from {min} to {max} Hz around {nominal} Hz (a jump)"
        );
        assert!(
            sd < 0.02 * nominal,
            "{link}: {side} edge σ {sd} Hz; the stages move by about 1.2 %"
        );
    }
}
