//! One floating-point result on every platform (DEVELOPERS.md, "Invariants"): no file in `src/`
//! calls an elementary function of std (`x.ln()`, `x.powf(y)`, `f64::exp` …), a transcendental
//! method of num-complex (`z.norm()`, `z.arg()`, `Complex64::from_polar` …) or a fused
//! multiply-add; they all go through `rolloff::fmath`, which calls the libm crate on both targets.
//! std's methods call glibc natively and Rust's bundled libm under wasm, which differ in the last
//! bits, so the page's downloads would no longer be the command line's bytes.
//!
//! A text scan, so it needs no clippy component; `clippy.toml` states the same rule for
//! `cargo clippy` and also catches num-complex's `sqrt`, `exp`, `ln` and `powf`, whose names
//! this scan cannot tell from f64's exact `sqrt` or from `fmath::exp`.

use std::fs;
use std::path::{Path, PathBuf};

/// Methods whose std (f64, f32) or num-complex form is platform maths.
const METHODS: [&str; 33] = [
    "sin", "cos", "tan", "asin", "acos", "atan", "atan2", "sinh", "cosh", "tanh", "asinh", "acosh",
    "atanh", "exp", "exp2", "exp_m1", "ln", "log", "log10", "log2", "ln_1p", "powf", "powi",
    "powc", "cbrt", "hypot", "sin_cos", "norm", "arg", "to_polar", "cis", "expf", "mul_add",
];

/// Types whose associated functions, named as a path (`f64::exp`, `Complex64::from_polar`), are
/// the same platform maths.
const TYPES: [&str; 4] = ["f64", "f32", "Complex64", "Complex"];

/// Every `.rs` file under `dir`.
fn rust_files(dir: &Path) -> Vec<PathBuf> {
    let mut out = Vec::new();
    let mut stack = vec![dir.to_path_buf()];
    while let Some(dir) = stack.pop() {
        for entry in fs::read_dir(&dir).into_iter().flatten().flatten() {
            let path = entry.path();
            if path.is_dir() {
                stack.push(path);
            } else if path.extension().and_then(|e| e.to_str()) == Some("rs") {
                out.push(path);
            }
        }
    }
    out.sort();
    out
}

/// The code of a line: what precedes a `//` comment (a line comment or a doc line is empty).
fn code_of(line: &str) -> &str {
    match line.find("//") {
        Some(i) => &line[..i],
        None => line,
    }
}

fn is_word(c: char) -> bool {
    c.is_alphanumeric() || c == '_'
}

/// The forbidden calls on one line of code: `.name(` method calls and `Type::name` paths.
fn forbidden_on(code: &str) -> Vec<String> {
    let mut found = Vec::new();
    for name in METHODS {
        let call = format!(".{name}(");
        if code.contains(&call) {
            found.push(call);
        }
        for ty in TYPES {
            let path = format!("{ty}::{name}");
            for (at, _) in code.match_indices(&path) {
                let before_ok = !code[..at].chars().next_back().is_some_and(is_word);
                let after_ok = !code[at + path.len()..].chars().next().is_some_and(is_word);
                if before_ok && after_ok {
                    found.push(path.clone());
                }
            }
        }
    }
    for path in [
        "Complex64::from_polar",
        "Complex::from_polar",
        "Complex64::cis(",
    ] {
        if code.contains(path) {
            found.push(path.to_string());
        }
    }
    found
}

/// Identity of the rule: the scan finds what it is meant to find (so a passing scan of `src/`
/// means something) and leaves the allowed forms alone.
#[test]
fn the_scan_recognizes_platform_maths() {
    assert_eq!(forbidden_on("let y = (x / 2.0).ln();"), [".ln("]);
    assert_eq!(forbidden_on("z.norm().log10()"), [".log10(", ".norm("]);
    assert_eq!(forbidden_on("v.iter().map(f64::exp)"), ["f64::exp"]);
    assert_eq!(
        forbidden_on("Complex64::from_polar(r, t)"),
        ["Complex64::from_polar"]
    );
    assert_eq!(forbidden_on("a.mul_add(b, c)"), [".mul_add("]);
    // Allowed: fmath's functions, exact IEEE operations, constants, and words that only
    // contain a forbidden name.
    assert!(forbidden_on("fmath::ln(fmath::cnorm(z)) + x.sqrt().abs()").is_empty());
    assert!(forbidden_on("std::f64::consts::LN_10 * f64::EPSILON").is_empty());
    assert!(forbidden_on("lo.exp_ms(); f64::expected; cli.args()").is_empty());
    assert_eq!(code_of("x.min(y) // x.ln() is slower"), "x.min(y) ");
}

/// The rule itself, over every file of `src/` (production code and unit tests alike, so a unit
/// test's expected value is computed as the code computes it) except `fmath.rs`, the one place
/// that calls libm.
#[test]
fn no_platform_maths_in_src() {
    let src = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("src");
    let files = rust_files(&src);
    assert!(files.len() > 40, "found only {} files in src/", files.len());
    let mut offences = Vec::new();
    for path in &files {
        if path.ends_with("fmath.rs") {
            continue;
        }
        let text = fs::read_to_string(path).unwrap_or_default();
        for (n, line) in text.lines().enumerate() {
            for call in forbidden_on(code_of(line)) {
                let rel = path.strip_prefix(&src).unwrap_or(path).display();
                offences.push(format!("src/{rel}:{}: {call} (use crate::fmath)", n + 1));
            }
        }
    }
    assert!(
        offences.is_empty(),
        "platform maths in src/:\n{}",
        offences.join("\n")
    );
}
