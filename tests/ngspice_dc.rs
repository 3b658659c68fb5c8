//! The board's DC errors (`analysis.dc`) against ngspice's operating point of our own export.
//!
//! Source: ngspice (the Debian package `ngspice`, version 39 on the build machine) in batch mode,
//! running `op` on the netlist of `rolloff design LINK --format spice`
//! (`rolloff::export::spice::netlist`) without its `.ac` card. With `vos` or `ib` set, the
//! export's op-amp subcircuit carries a DC source `Vos` in series with its non-inverting input and
//! a DC current `Ib` drawn from each input, so `.op`'s `v(out)` is the board's output offset.
//! The checks and their tolerances:
//!
//! - **Offset** (`analysis.dc.offset_v`) on eleven links of our own (Sallen-Key and multiple
//!   feedback; low-pass, high-pass and band-pass; gain, unity and attenuation; odd orders with
//!   a first-order stage; the generic op amp, one without output resistance and an ideal one): equal
//!   to ngspice's `v(out)` within 2 % (the bound; measured on ngspice 39, printing 12
//!   digits: within 2e-11 relative on every link).
//! - **Worst case** (`analysis.dc.worst_v`) on two boards of two op amps: the largest |v(out)| of
//!   ngspice over all 16 sign combinations of each op amp's `vos` and `ib` (each op amp given its
//!   own copy of the subcircuit), within 2 % (measured: 1e-11).
//! - **Balancing resistors** (`analysis.dc.balance`): with only `ib` set, ngspice's `v(out)` with
//!   each suggested resistor put in series with its input is below 1 % of the offset without them
//!   (the resistors cancel the bias-current shares, exactly in the shared linear model; measured:
//!   below 1e-11 of it).
//!
//! When ngspice is missing the test fails and says what to install.

use rolloff::analysis::dc::{board_dc, DcErrors, Pin};
use rolloff::export::spice::{self, AcSweep};
use rolloff::pipeline::Design;

mod ngspice_deck;

/// Our own scenarios (invented for these tests), with what each exercises.
const LINKS: [&str; 11] = [
    // Unity-gain Sallen-Key low-pass, two followers: the bias currents flow through the series
    // resistors into the non-inverting inputs.
    "?v=2&order=4&fc=1k&topo=sk&vos=1m&ib=100n",
    // Multiple-feedback low-pass with 20 dB of gain (inverting): the offset is amplified by the
    // noise gain, the inverting input's bias current flows through the feedback resistor.
    "?v=2&order=2&fc=1k&topo=mfb&gain=20&vos=-2m&ib=50n",
    // Sallen-Key low-pass with 12 dB of gain (non-inverting gain resistors), a negative ib.
    "?v=2&order=4&fc=500&topo=sk&gain=12&vos=1m&ib=-200n",
    // Sallen-Key attenuating by 12 dB (the input divider).
    "?v=2&order=4&fc=1k&gain=-12&vos=1m&ib=100n",
    // Multiple feedback, odd order (a first-order stage), attenuating by 6 dB.
    "?v=2&order=3&fc=2k&topo=mfb&gain=-6&vos=500u&ib=1u",
    // Sallen-Key high-pass: the capacitors block the input; only the op amps' own errors remain.
    "?v=2&resp=hp&order=4&fc=100&vos=1m&ib=100n",
    // Multiple-feedback Bessel high-pass, odd order.
    "?v=2&resp=hp&order=3&fc=300&topo=mfb&family=bessel&vos=1m&ib=100n",
    // Multiple-feedback band-pass: each stage blocks the offset of the one before it.
    "?v=2&resp=bp&order=4&fc=1k&bw=500&topo=mfb&vos=2m&ib=10n",
    // An ideal op amp (exported with A0 = 1e12) with offset and bias current.
    "?v=2&order=2&fc=1k&topo=mfb&gain=20&a0=ideal&gbw=ideal&rout=0&vos=1m&ib=100n",
    // No output resistance: the followers' inverting inputs sit on ideal outputs.
    "?v=2&order=4&fc=1k&rout=0&vos=1m&ib=1u",
    // A low DC gain (60 dB), where the finite A0 moves the offset visibly.
    "?v=2&order=4&fc=1k&topo=mfb&gain=6&a0=60&vos=3m&ib=300n",
];

fn compose(link: &str) -> Design {
    let report = rolloff::link::parse(link);
    assert!(report.errors.is_empty(), "{link}: {:?}", report.errors);
    rolloff::pipeline::compose(&report.state).unwrap_or_else(|e| panic!("{link}: {e}"))
}

fn dc_of(design: &Design, link: &str) -> DcErrors {
    board_dc(&design.board).unwrap_or_else(|e| panic!("{link}: {e}"))
}

/// The exported netlist without its analysis cards and `.end`.
fn body(design: &Design) -> String {
    let netlist = spice::netlist(&design.board, &AcSweep::default()).expect("exports");
    ngspice_deck::body(&netlist, None)
}

/// ngspice's `.op` value of `v(out)` for `body`.
fn op_out(body: &str, name: &str) -> f64 {
    let dir = ngspice_deck::scratch("ngspice-dc", name);
    let log = ngspice_deck::run(&dir, body, "option numdgt=12\nop\nprint v(out)");
    log.lines()
        .find_map(|line| {
            let rest = line.trim().strip_prefix("v(out)")?;
            rest.trim().strip_prefix('=')?.trim().parse::<f64>().ok()
        })
        .unwrap_or_else(|| panic!("no v(out) in ngspice's log:\n{log}\n{body}"))
}

fn close(ours: f64, theirs: f64, rel: f64) -> bool {
    (ours - theirs).abs() <= rel * theirs.abs().max(ours.abs()) + 1e-12
}

#[test]
fn offset_equals_ngspice_operating_point() {
    for (i, link) in LINKS.iter().enumerate() {
        let design = compose(link);
        let dc = dc_of(&design, link);
        assert!(dc.modelled, "{link}");
        let theirs = op_out(&body(&design), &format!("offset{i}"));
        // Source: ngspice .op on our own export, 2 % (the acceptance bound).
        assert!(
            close(dc.offset_v, theirs, 0.02),
            "{link}: offset {} V, ngspice .op on our own export {theirs} V",
            dc.offset_v
        );
        // The design JSON's figure is this one (one analysis plan).
        let json = rolloff::export::json::design_value(&design);
        let in_json = json["analysis"]["dc"]["offset_v"]
            .as_f64()
            .expect("offset_v");
        assert!(close(in_json, dc.offset_v, 1e-8), "{link}: JSON {in_json}");
        // The offset is the sum of the shares (the board is linear in them).
        let sum: f64 = dc.sources.iter().map(|s| s.share_v).sum();
        assert!(close(sum, dc.offset_v, 1e-9), "{link}: shares sum to {sum}");
    }
}

/// The body with each op amp `XU…` given its own copy of the subcircuit, with its offset and bias
/// current multiplied by `signs[k] = (vos sign, ib sign)`.
fn with_signs(body: &str, vos_v: f64, ib_a: f64, signs: &[(f64, f64)]) -> String {
    let start = body.find(".subckt rolloff_opamp").expect("subcircuit");
    let end =
        body.find(".ends rolloff_opamp").expect("subcircuit end") + ".ends rolloff_opamp\n".len();
    let subckt = &body[start..end];
    let mut out = String::new();
    let mut k = 0;
    for line in body[..start].lines().chain(body[end..].lines()) {
        if line.starts_with("XU") && line.ends_with(" rolloff_opamp") {
            out.push_str(&format!("{line}_{k}\n"));
            k += 1;
        } else {
            out.push_str(line);
            out.push('\n');
        }
    }
    assert_eq!(k, signs.len(), "one sign pair per op amp:\n{body}");
    for (k, (s_vos, s_ib)) in signs.iter().enumerate() {
        for line in subckt.lines() {
            let line = if line.starts_with("Vos ") {
                format!("Vos inq inp DC {:e}", s_vos * vos_v)
            } else if line.starts_with("Ibp ") {
                format!("Ibp inp 0 DC {:e}", s_ib * ib_a)
            } else if line.starts_with("Ibn ") {
                format!("Ibn inn 0 DC {:e}", s_ib * ib_a)
            } else {
                line.replace("rolloff_opamp", &format!("rolloff_opamp_{k}"))
            };
            out.push_str(&line);
            out.push('\n');
        }
    }
    out
}

#[test]
fn worst_case_is_the_largest_offset_over_signs() {
    let links = [
        "?v=2&order=4&fc=500&topo=sk&gain=12&vos=1m&ib=-200n",
        "?v=2&order=4&fc=1k&topo=mfb&gain=6&a0=60&vos=3m&ib=300n",
    ];
    for (i, link) in links.iter().enumerate() {
        let design = compose(link);
        let dc = dc_of(&design, link);
        let body = body(&design);
        let n_opamps = dc.sources.len() / 3;
        assert_eq!(n_opamps, 2, "{link}: a board of two op amps");
        let mut largest: f64 = 0.0;
        for combo in 0..16u32 {
            let sign = |bit: u32| if combo & (1 << bit) != 0 { -1.0 } else { 1.0 };
            let signs = [(sign(0), sign(1)), (sign(2), sign(3))];
            let deck = with_signs(&body, dc.vos_v, dc.ib_a, &signs);
            largest = largest.max(op_out(&deck, &format!("worst{i}-{combo}")).abs());
        }
        // Source: ngspice .op on our own export, each of the 16 sign combinations, 2 %.
        assert!(
            close(dc.worst_v, largest, 0.02),
            "{link}: worst case {} V, ngspice .op on our own export over signs {largest} V",
            dc.worst_v
        );
        assert!(dc.worst_v >= dc.offset_v.abs(), "{link}");
    }
}

/// The body with a resistor of `ohm` in series with the pin of op amp `reference`.
fn with_balance(body: &str, reference: &str, pin: Pin, ohm: f64) -> String {
    let prefix = format!("X{reference} ");
    let mut out = String::new();
    for line in body.lines() {
        if let Some(rest) = line.strip_prefix(&prefix) {
            let mut nodes: Vec<&str> = rest.split_whitespace().collect();
            let idx = match pin {
                Pin::Plus => 0,
                Pin::Minus => 1,
            };
            let node = nodes[idx].to_string();
            let new_node = format!("bal_{reference}");
            nodes[idx] = &new_node;
            out.push_str(&format!("{prefix}{}\n", nodes.join(" ")));
            out.push_str(&format!("Rbal_{reference} {node} {new_node} {ohm:e}\n"));
        } else {
            out.push_str(line);
            out.push('\n');
        }
    }
    out
}

#[test]
fn balancing_resistors_cancel_the_bias_current_offset() {
    let links = [
        // Followers: the resistor goes in the inverting input (the feedback path).
        "?v=2&order=4&fc=1k&topo=sk&ib=100n",
        // Multiple feedback: the resistor goes from the grounded non-inverting input.
        "?v=2&order=4&fc=1k&topo=mfb&gain=20&ib=100n",
        // Sallen-Key with gain resistors.
        "?v=2&order=4&fc=500&topo=sk&gain=12&ib=-200n",
    ];
    for (i, link) in links.iter().enumerate() {
        let design = compose(link);
        let dc = dc_of(&design, link);
        assert_eq!(
            dc.balance.len() * 3,
            dc.sources.len(),
            "{link}: every op amp balanced"
        );
        let mut deck = body(&design);
        let before = op_out(&deck, &format!("unbalanced{i}"));
        for b in &dc.balance {
            deck = with_balance(&deck, &b.reference, b.pin, b.ohm);
        }
        let after = op_out(&deck, &format!("balanced{i}"));
        // Source: ngspice .op on our own export with the suggested resistors added.
        assert!(
            after.abs() <= 0.01 * before.abs(),
            "{link}: {before} V without the resistors, {after} V with them\n{deck}"
        );
        let nulled: f64 = dc.balance.iter().map(|b| b.nulls_v).sum();
        assert!(
            close(nulled, before, 0.02),
            "{link}: nulls {nulled} V of {before} V"
        );
    }
}
