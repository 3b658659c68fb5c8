//! Fuzzed links: the command line never panics, and bad input exits 2 with one line on stderr.
//!
//! 10,000+ links are built from a seeded generator: random bytes, real keys with random and
//! hostile values (markup, huge and tiny numbers, NaN spellings, separators), truncations and
//! percent-escapes. Each goes through `rolloff::cli::run` in-process; a panic fails the test with
//! the offending link. Fuzzed version-1 links (with the limits' v1 names) must read and design
//! exactly like their version-2 rewrites (README, "Version 1 links"). The page's path
//! (`rolloff::app::evaluate`, every figure and every download of a composed model) and
//! `rolloff plot` take fuzzed links too: no panic, and `plot` exits 0, 1 or 2 only.

use rolloff::cli;
use rolloff::plot::PlotKind;
use std::panic;

/// A small deterministic generator (SplitMix64) so failures reproduce from the printed link.
struct Gen(u64);

impl Gen {
    fn next(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }
    fn below(&mut self, n: usize) -> usize {
        (self.next() % n as u64) as usize
    }
    fn pick<'a>(&mut self, items: &[&'a str]) -> &'a str {
        items[self.below(items.len())]
    }
}

/// Every key the link reads, and one it does not.
///
/// The keys are taken in the order of the version-1 key list, so that the seeded runs below
/// explore the same links as they did before the key table was reordered (and a link that once
/// passed keeps being tried); keys added since come last.
fn keys() -> Vec<&'static str> {
    const V1_ORDER: [&str; 44] = [
        "v",
        "resp",
        "family",
        "order",
        "fc",
        "bw",
        "ripple",
        "passedge",
        "passloss",
        "stopedge",
        "stopdepth",
        "margin",
        "gain",
        "topo",
        "rser",
        "cser",
        "rtol",
        "ctol",
        "gbw",
        "a0",
        "rout",
        "vnoise",
        "inoise",
        "slew",
        "rlevel",
        "cratio",
        "rratio",
        "round",
        "set",
        "tolset",
        "stageorder",
        "runs",
        "seed",
        "dist",
        "sigmas",
        "vin",
        "swing",
        "drift",
        "noiseband",
        "span",
        "fsample",
        "adcbits",
        "fsignal",
        "title",
    ];
    let mut keys: Vec<&'static str> = V1_ORDER
        .iter()
        .copied()
        .filter(|k| rolloff::link::KEYS.contains(k))
        .collect();
    keys.extend(rolloff::link::KEYS.iter().filter(|k| !V1_ORDER.contains(k)));
    keys.push("zzz");
    keys
}

const VALUES: &[&str] = &[
    "1",
    "2",
    "0",
    "-1",
    "20",
    "21",
    "4",
    "7",
    "1k",
    "4k7",
    "2n2",
    "1R5",
    "10µ",
    "1e308",
    "1e-308",
    "NaN",
    "inf",
    "-inf",
    "ideal",
    "",
    "lp",
    "hp",
    "bp",
    "butterworth",
    "chebyshev",
    "bessel",
    "linkwitz-riley",
    "critical",
    "split",
    "pass",
    "stop",
    "sk",
    "mfb",
    "e6",
    "e12",
    "e24",
    "e96",
    "e192",
    "exact",
    "nearest",
    "search",
    "1k,2k",
    "2k,1k",
    "500,5k",
    "1,2,3",
    "R1:4k7",
    "C1:0",
    "R9:1k,C9:1n",
    "<script>alert(1)</script>",
    "\"><img src=x onerror=alert(1)>",
    "%00",
    "%ZZ",
    "q-up",
    "q-down",
    "3,1,2",
    "gauss",
    "uniform",
    "0.5",
    "3",
    "60",
    "100",
    "1M",
    "10G",
    "0.001",
    "999999999999",
    "1e3k",
    ",",
    ",,",
    "1,",
    "🙂",
    "k",
    "1..2",
];

/// The README's "Version 1 links" mapping, v1 name → v2 name.
const RENAMES: [(&str, &str); 4] = [
    ("fpass", "passedge"),
    ("apass", "passloss"),
    ("fstop", "stopedge"),
    ("astop", "stopdepth"),
];

/// Every key by its version-1 name (the four limits renamed back).
fn v1_keys() -> Vec<&'static str> {
    rolloff::link::KEYS
        .iter()
        .map(|k| {
            RENAMES
                .iter()
                .find(|(_, new)| new == k)
                .map(|(old, _)| *old)
                .unwrap_or(k)
        })
        .collect()
}

/// A link of up to three real keys (by `names`) with values from the hostile list, after
/// `prefix` (few keys, so that many links are valid and have a rewrite).
fn keyed_link(g: &mut Gen, prefix: &str, names: &[&str]) -> String {
    let n = g.below(4);
    let mut link = String::from(prefix);
    for i in 0..n {
        if i > 0 || !prefix.ends_with('?') {
            link.push('&');
        }
        link.push_str(g.pick(names));
        link.push('=');
        link.push_str(g.pick(VALUES));
    }
    link
}

/// A version-1 link: `v=1` and the v1 names, with the limits given more often than chance so
/// that many links carry a mask.
fn random_v1_link(g: &mut Gen) -> String {
    let mut link = String::from("?v=1");
    // A few keys only: most hostile values are refused, and a refused link has no rewrite.
    for _ in 0..g.below(4) {
        link.push('&');
        link.push_str(g.pick(&v1_keys()));
        link.push('=');
        link.push_str(g.pick(VALUES));
    }
    if g.below(2) == 0 {
        let limits = [
            "fpass=1k&fstop=3k&astop=40",
            "fpass=1k&apass=0.5&fstop=2k&astop=30",
            "resp=hp&fpass=1k&fstop=250&astop=35",
            "resp=bp&fpass=2k,20k&fstop=400,100k&astop=30&apass=2",
        ];
        link.push('&');
        link.push_str(g.pick(&limits));
    }
    link
}

fn random_link(g: &mut Gen) -> String {
    match g.below(4) {
        // Raw random bytes, printable and not: alone they name no key and are refused as not a
        // link (exit 2); after a known key half of the time, so that junk beside a real key is
        // read too (a warning for each unknown key, the design from the rest).
        0 => {
            let n = g.below(60);
            let junk: String = (0..n)
                .map(|_| char::from_u32(g.below(0x2FF) as u32).unwrap_or('?'))
                .collect();
            if g.below(2) == 0 {
                format!("order=4&{junk}")
            } else {
                junk
            }
        }
        // Real keys with values from the hostile list, or a mangled one.
        _ => {
            let n = 1 + g.below(10);
            let mut link = String::from(if g.below(2) == 0 {
                "?"
            } else {
                "https://x.invalid/p/?"
            });
            for i in 0..n {
                if i > 0 {
                    link.push('&');
                }
                link.push_str(g.pick(&keys()));
                link.push('=');
                let value = g.pick(VALUES);
                if g.below(5) == 0 && !value.is_empty() {
                    let cut = g.below(value.len());
                    link.push_str(value.get(..cut).unwrap_or(value));
                } else {
                    link.push_str(value);
                }
            }
            link
        }
    }
}

fn run(args: &[String]) -> (u8, String, String) {
    let mut out = Vec::new();
    let mut err = Vec::new();
    let code = cli::run(args, &mut out, &mut err);
    (
        code,
        String::from_utf8_lossy(&out).into_owned(),
        String::from_utf8_lossy(&err).into_owned(),
    )
}

#[test]
fn ten_thousand_fuzzed_links_never_panic() {
    let mut g = Gen(0x5EED_2026);
    let commands: &[&[&str]] = &[
        &["design"],
        &["design", "--format", "json"],
        &["design", "--format", "bom"],
        &["design", "--format", "spice"],
        &["sweep", "--points", "20"],
        &["spread", "--runs", "20"],
    ];
    let mut n_bad = 0;
    let mut n_good = 0;
    for i in 0..10_000 {
        let link = random_link(&mut g);
        let command = commands[i % commands.len()];
        let mut args: Vec<String> = vec![command[0].to_string(), link.clone()];
        args.extend(command[1..].iter().map(|s| s.to_string()));
        let outcome = panic::catch_unwind(|| run(&args));
        let (code, out, err) = outcome.unwrap_or_else(|_| panic!("panic on {args:?}"));
        // ECMA-48: a control character reaching the terminal is a command to it. Messages quote
        // the link escaped, and the outputs carry none (CSV and SPICE end lines with CR LF).
        let raw = |t: &str| t.chars().any(|c| c.is_control() && c != '\n' && c != '\r');
        assert!(
            !raw(&err),
            "raw control character on stderr for {args:?}: {err:?}"
        );
        match code {
            0 => {
                n_good += 1;
                assert!(!out.is_empty(), "exit 0 with no output for {args:?}");
                assert!(
                    !raw(&out),
                    "exit 0 printing a raw control character for {args:?}"
                );
            }
            2 => {
                n_bad += 1;
                let lines: Vec<&str> = err.lines().filter(|l| !l.contains("warning:")).collect();
                assert_eq!(
                    lines.len(),
                    1,
                    "exit 2 must give one line on stderr for {args:?}: {err:?}"
                );
                assert!(
                    lines[0].starts_with("rolloff: ") && lines[0].len() > 12,
                    "unclear message {err:?}"
                );
            }
            other => panic!("exit {other} for {args:?}: {err}"),
        }
    }
    // The generator must exercise both paths, or the test proves little.
    assert!(n_bad > 1000 && n_good > 500, "good {n_good}, bad {n_bad}");
}

#[test]
fn markup_in_every_key_is_refused_or_ignored_never_echoed_as_markup() {
    let hostile = "<script>alert(1)</script>";
    let link: String = keys()
        .iter()
        .map(|k| format!("{k}={}", hostile))
        .collect::<Vec<_>>()
        .join("&");
    let (code, _out, err) = run(&["design".to_string(), format!("?{link}")]);
    assert_eq!(code, 2, "{err}");
    // Standard error is plain text: one line that names the key it refused.
    let lines: Vec<&str> = err.lines().filter(|l| !l.contains("warning:")).collect();
    assert_eq!(lines.len(), 1, "{err}");
    assert!(
        keys()
            .iter()
            .any(|k| lines[0].starts_with(&format!("rolloff: {k}: "))),
        "the message names a key: {err}"
    );
    // The one key that takes free text, `title`, is accepted; no figure may carry it as markup.
    let titled = "?v=2&title=%3Cscript%3Ealert(1)%3C%2Fscript%3E";
    for kind in PlotKind::ALL {
        let (code, out, err) = run(&[
            "plot".to_string(),
            titled.to_string(),
            "--kind".into(),
            kind.key().into(),
        ]);
        assert_eq!(code, 0, "{kind:?}: {err}");
        assert!(out.contains("<svg"), "{kind:?}: not an SVG");
        assert!(
            !out.contains("<script"),
            "{kind:?}: the title is markup in the SVG"
        );
    }
}

/// The page's path on a fuzzed link: `app::evaluate`, and for a composed model every figure
/// and every download. Returns whether a model was composed.
fn through_the_page(link: &str) -> bool {
    let evaluation = rolloff::app::evaluate(link);
    let Some(model) = evaluation.model else {
        assert!(
            evaluation.refused || !evaluation.view.errors.is_empty(),
            "{link}: no model, yet no error and not refused"
        );
        return false;
    };
    for kind in PlotKind::ALL {
        let _ = model.figure(kind);
    }
    for download in ["json", "bom", "spice"] {
        // A download may refuse a board (an error value), but never panics; the JSON and the
        // parts list always come out.
        let result = model.export(download);
        if download != "spice" {
            let text = result.unwrap_or_else(|e| panic!("{link}: {download}: {e}"));
            assert!(!text.is_empty(), "{link}: empty {download}");
        }
    }
    true
}

#[test]
fn fuzzed_links_through_the_page_never_panic() {
    // Half the links from the hostile generator, half version-2 links of a few keys (which
    // compose more often), so both the error views and the figures are exercised. The page
    // falls back to the default for a bad key, so most links compose.
    let mut g = Gen(0x9A6E_2026);
    let names = rolloff::link::KEYS.to_vec();
    let (mut n_models, mut n_without) = (0, 0);
    for i in 0..240 {
        let link = if i % 2 == 0 {
            random_link(&mut g)
        } else {
            keyed_link(&mut g, "?v=2", &names)
        };
        let outcome = panic::catch_unwind(|| through_the_page(&link));
        match outcome {
            Ok(true) => n_models += 1,
            Ok(false) => n_without += 1,
            Err(_) => panic!("panic on the page's path for {link:?}"),
        }
    }
    assert!(
        n_models > 100 && n_without > 5,
        "models {n_models}, without {n_without}"
    );
}

#[test]
fn fuzzed_plots_exit_0_1_or_2_and_never_panic() {
    let mut g = Gen(0x0B10_7777);
    let kinds: Vec<&str> = PlotKind::ALL
        .iter()
        .map(|k| k.key())
        .chain(["", "<svg>", "Magnitude", "poles,step"])
        .collect();
    let out_dir = std::env::temp_dir().join(format!("rolloff-fuzz-plot-{}", std::process::id()));
    std::fs::create_dir_all(&out_dir).expect("temp dir");
    let good_path = out_dir.join("plot.svg").display().to_string();
    let bad_path = out_dir
        .join("no-such-dir")
        .join("plot.svg")
        .display()
        .to_string();
    let names = rolloff::link::KEYS.to_vec();
    let mut counts = [0usize; 3];
    for i in 0..150 {
        let link = if i % 2 == 0 {
            random_link(&mut g)
        } else {
            keyed_link(&mut g, "?v=2", &names)
        };
        let mut args = vec!["plot".to_string(), link.clone()];
        if g.below(4) != 0 {
            args.extend(["--kind".to_string(), g.pick(&kinds).to_string()]);
        }
        let to_file = match g.below(6) {
            0 => Some(good_path.clone()),
            1 => Some(bad_path.clone()),
            _ => None,
        };
        if let Some(path) = &to_file {
            args.extend(["--out".to_string(), path.clone()]);
        }
        let _ = std::fs::remove_file(&good_path);
        let (code, out, err) =
            panic::catch_unwind(|| run(&args)).unwrap_or_else(|_| panic!("panic on {args:?}"));
        match code {
            0 => {
                let svg = match &to_file {
                    Some(path) => std::fs::read_to_string(path)
                        .unwrap_or_else(|e| panic!("exit 0 but no {path} ({e}) for {args:?}")),
                    None => out,
                };
                assert!(
                    svg.starts_with("<svg") || svg.starts_with("<?xml"),
                    "exit 0 without an SVG for {args:?}"
                );
            }
            1 | 2 => {
                let lines: Vec<&str> = err.lines().filter(|l| !l.contains("warning:")).collect();
                assert!(
                    lines.len() == 1 && lines[0].starts_with("rolloff: "),
                    "exit {code} must give one line on stderr for {args:?}: {err:?}"
                );
            }
            other => panic!("exit {other} for {args:?}: {err}"),
        }
        counts[code as usize] += 1;
    }
    let _ = std::fs::remove_dir_all(&out_dir);
    // Exit 1 comes from the unwritable --out path (when the link itself is good).
    assert!(
        counts[0] > 20 && counts[1] > 0 && counts[2] > 20,
        "exits 0/1/2: {counts:?}"
    );
}

#[test]
fn written_links_read_back_to_the_same_state() {
    // link::to_query is the writer behind the page's address bar and the JSON's `link` field:
    // whatever a valid link says must survive being written and read again.
    let mut g = Gen(0xC0FF_EE00);
    let mut n_checked = 0;
    for _ in 0..20_000 {
        let link = random_link(&mut g);
        let report = rolloff::link::parse(&link);
        if !report.errors.is_empty() {
            continue;
        }
        let written = rolloff::link::to_query(&report.state);
        let again = rolloff::link::parse(&written);
        assert!(
            again.errors.is_empty(),
            "{link} → {written}: {:?}",
            again.errors
        );
        assert_eq!(again.state, report.state, "{link} → {written}");
        n_checked += 1;
    }
    assert!(
        n_checked > 2000,
        "only {n_checked} valid links were generated"
    );
}

#[test]
fn fuzzed_version_1_links_design_like_their_version_2_rewrites() {
    // Source: README "Version 1 links" — a v1 link means what its v2 rewrite means. Every valid
    // fuzzed v1 link must read to the same state as its rewrite (so every view designs the
    // same), and a sample goes through the command line's design JSON, which must be
    // byte-identical apart from the echoed link.
    let mut g = Gen(0x0001_0002);
    let (mut n_states, mut n_designs, mut n_masks) = (0, 0, 0);
    for i in 0..6_000 {
        let v1 = random_v1_link(&mut g);
        let report = rolloff::link::parse(&v1);
        if !report.errors.is_empty() {
            continue;
        }
        let v2 = rolloff::link::to_query(&report.state);
        assert!(v2.starts_with("?v=2&"), "{v1} → {v2}");
        let again = rolloff::link::parse(&v2);
        assert!(
            again.errors.is_empty() && again.unknown_keys.is_empty(),
            "{v1} → {v2}: {again:?}"
        );
        assert_eq!(again.state, report.state, "{v1} → {v2}");
        n_states += 1;
        n_masks += usize::from(report.state.requirement.mask.is_some());
        if i % 20 == 0 {
            let design = |link: &str| {
                let (code, out, err) = run(&[
                    "design".to_string(),
                    link.to_string(),
                    "--format".into(),
                    "json".into(),
                ]);
                let out: Vec<String> = out
                    .lines()
                    .filter(|l| !l.starts_with("  \"link\": "))
                    .map(String::from)
                    .collect();
                (code, out, err.lines().last().map(String::from))
            };
            let (c1, o1, e1) = design(&v1);
            let (c2, o2, e2) = design(&v2);
            assert_eq!((c1, &o1), (c2, &o2), "{v1} → {v2}");
            if c1 != 0 {
                assert_eq!(e1, e2, "{v1} → {v2}");
            }
            n_designs += 1;
        }
    }
    assert!(
        n_states > 1500 && n_masks > 500 && n_designs > 50,
        "states {n_states}, masks {n_masks}, designs {n_designs}"
    );
}

#[test]
fn fuzzed_version_2_links_survive_writing_and_reading() {
    // The writer's invariant (DEVELOPERS.md): to_query → parse gives the same state, for links
    // that say `v=2` and use the current names.
    let mut g = Gen(0x0002_0002);
    let mut n_checked = 0;
    // A second `v` after the prefix would make it another version's link (`v=2&passloss=0.5&v=1`
    // reads `passloss` as unknown), so `v` is not drawn here.
    let names: Vec<&str> = rolloff::link::KEYS
        .iter()
        .copied()
        .filter(|k| *k != "v")
        .collect();
    for _ in 0..10_000 {
        let link = keyed_link(&mut g, "?v=2", &names);
        let report = rolloff::link::parse(&link);
        if !report.errors.is_empty() {
            continue;
        }
        assert!(
            report.unknown_keys.is_empty(),
            "{link}: {:?}",
            report.unknown_keys
        );
        let written = rolloff::link::to_query(&report.state);
        let again = rolloff::link::parse(&written);
        assert!(again.errors.is_empty(), "{link} → {written}: {again:?}");
        assert_eq!(again.state, report.state, "{link} → {written}");
        assert_eq!(
            rolloff::link::to_query(&again.state),
            written,
            "{link}: written twice"
        );
        n_checked += 1;
    }
    assert!(
        n_checked > 2000,
        "only {n_checked} valid links were generated"
    );
}

/// How many links [`fuzzed_links_through_every_command_with_a_report`] runs: the environment
/// variable `ROLLOFF_FUZZ_LINKS` when it holds a whole number, else a count CI can afford.
///
/// `ROLLOFF_FUZZ_LINKS=1000000 nice -n 19 cargo test --release --test cli_fuzz every_command
/// -- --nocapture` is the long run; it prints a progress line every 50,000 links.
fn fuzz_link_count() -> usize {
    const CI_LINKS: usize = 1_200;
    std::env::var("ROLLOFF_FUZZ_LINKS")
        .ok()
        .and_then(|v| v.trim().replace('_', "").parse::<usize>().ok())
        .unwrap_or(CI_LINKS)
}

/// One slow call: its time, its command line.
struct SlowCall {
    seconds: f64,
    args: Vec<String>,
}

/// The five slowest calls seen so far, slowest first.
fn note_slow(slowest: &mut Vec<SlowCall>, seconds: f64, args: &[String]) {
    const KEEP: usize = 5;
    if slowest.len() == KEEP && slowest[KEEP - 1].seconds >= seconds {
        return;
    }
    let at = slowest
        .iter()
        .position(|s| s.seconds < seconds)
        .unwrap_or(slowest.len());
    slowest.insert(
        at,
        SlowCall {
            seconds,
            args: args.to_vec(),
        },
    );
    slowest.truncate(KEEP);
}

#[test]
fn fuzzed_links_through_every_command_with_a_report() {
    // The hostile generator and the few-key v2 links of the tests above, each link through one
    // command in turn: design in every format, sweep, spread with few runs and plot of every
    // kind, all at cheap settings. A panic is counted (with its command line) rather than
    // stopping the run, so a long run reports every one; the test then fails if any was seen.
    // Exit rules (the module doc): 0 with output; 2 (bad input) and 1 (any other failure) with
    // one `rolloff: ` line on stderr besides warnings.
    let n_links = fuzz_link_count();
    let mut g = Gen(0x1EE7_2026);
    let names = rolloff::link::KEYS.to_vec();
    let mut commands: Vec<Vec<String>> = vec![
        vec!["design".into()],
        vec!["design".into(), "--format".into(), "json".into()],
        vec!["design".into(), "--format".into(), "bom".into()],
        vec!["design".into(), "--format".into(), "spice".into()],
        vec!["sweep".into(), "--points".into(), "12".into()],
        vec!["spread".into(), "--runs".into(), "8".into()],
    ];
    for kind in PlotKind::ALL {
        commands.push(vec!["plot".into(), "--kind".into(), kind.key().into()]);
    }
    // Exit counts per command (0, 1, 2, other), panics and broken rules with examples.
    let mut exits = vec![[0usize; 4]; commands.len()];
    let mut panics: Vec<Vec<String>> = Vec::new();
    let mut n_panics = 0usize;
    let mut broken: Vec<String> = Vec::new();
    let mut n_broken = 0usize;
    let mut slowest: Vec<SlowCall> = Vec::new();
    let started = std::time::Instant::now();
    // The panic hook would print every caught panic; the report lists them instead.
    let hook = panic::take_hook();
    panic::set_hook(Box::new(|_| {}));
    for i in 0..n_links {
        let link = if i % 2 == 0 {
            random_link(&mut g)
        } else {
            keyed_link(&mut g, "?v=2", &names)
        };
        let c_idx = i % commands.len();
        let command = &commands[c_idx];
        let mut args: Vec<String> = vec![command[0].clone(), link];
        args.extend(command[1..].iter().cloned());
        let call_started = std::time::Instant::now();
        let outcome = panic::catch_unwind(|| run(&args));
        note_slow(&mut slowest, call_started.elapsed().as_secs_f64(), &args);
        let Ok((code, out, err)) = outcome else {
            n_panics += 1;
            if panics.len() < 20 {
                panics.push(args);
            }
            continue;
        };
        exits[c_idx][usize::from(code).min(3)] += 1;
        let lines: Vec<&str> = err.lines().filter(|l| !l.contains("warning:")).collect();
        let rule_kept = match code {
            0 => !out.is_empty(),
            1 | 2 => lines.len() == 1 && lines[0].starts_with("rolloff: ") && lines[0].len() > 12,
            _ => false,
        };
        if !rule_kept {
            n_broken += 1;
            if broken.len() < 20 {
                broken.push(format!("exit {code} for {args:?}: {err:?}"));
            }
        }
        if n_links > 100_000 && (i + 1) % 50_000 == 0 {
            let elapsed = started.elapsed().as_secs_f64();
            eprintln!(
                "fuzz progress: {} links in {elapsed:.0} s ({:.0} links/s), {n_panics} panics",
                i + 1,
                (i + 1) as f64 / elapsed
            );
        }
    }
    panic::set_hook(hook);
    let elapsed = started.elapsed().as_secs_f64();
    eprintln!(
        "fuzz report: {n_links} links in {elapsed:.1} s ({:.0} links/s); panics {n_panics}; \
         broken exit rules {n_broken}",
        n_links as f64 / elapsed.max(1e-9)
    );
    eprintln!("exit counts (0 / 1 / 2 / other) per command:");
    for (command, counts) in commands.iter().zip(&exits) {
        eprintln!(
            "  {:<28} {:>8} {:>8} {:>8} {:>8}",
            command.join(" "),
            counts[0],
            counts[1],
            counts[2],
            counts[3]
        );
    }
    eprintln!("slowest calls:");
    for call in &slowest {
        eprintln!("  {:>9.1} ms  {:?}", call.seconds * 1e3, call.args);
    }
    for args in &panics {
        eprintln!("panic: {args:?}");
    }
    for line in &broken {
        eprintln!("broken: {line}");
    }
    assert_eq!(n_panics, 0, "panics on {panics:?}");
    assert_eq!(n_broken, 0, "exit rules broken: {broken:?}");
    // The generator must reach both the designs and the refusals of every command, or the run
    // proves little.
    for (command, counts) in commands.iter().zip(&exits) {
        assert!(
            counts[0] > 0 && counts[2] > 0,
            "{command:?}: exits {counts:?} miss a success or a refusal"
        );
    }
}
