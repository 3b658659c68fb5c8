//! Running ngspice on our own SPICE export, shared by the ngspice tests: the exported netlist
//! without its analysis cards (optionally with another input source), one batch run in a
//! scratch folder, and the `wrdata` files read back as rows of numbers.
#![allow(dead_code)]

use std::path::{Path, PathBuf};
use std::process::Command;

/// The exported `netlist` without its `.ac`, `.print` and `.end` cards; with `source`, the
/// input source line (`V1 in 0 …`) is replaced by it.
pub fn body(netlist: &str, source: Option<&str>) -> String {
    let mut out = String::new();
    for line in netlist.lines() {
        let lower = line.to_ascii_lowercase();
        if lower.starts_with(".ac")
            || lower.starts_with(".print")
            || lower.starts_with(".end") && !lower.starts_with(".ends")
        {
            continue;
        }
        match source {
            Some(src) if lower.starts_with("v1 in 0") => out.push_str(src),
            _ => out.push_str(line),
        }
        out.push('\n');
    }
    out
}

/// A fresh scratch folder for one run, named after the test and the case.
pub fn scratch(test: &str, name: &str) -> PathBuf {
    let dir = std::env::temp_dir().join(format!("rolloff-{test}-{}-{name}", std::process::id()));
    std::fs::create_dir_all(&dir).expect("temp dir");
    dir
}

/// Runs `body` with the `.control` block `control` in batch mode inside `dir`; returns
/// ngspice's log (stdout and stderr). ngspice missing is a failure that says how to install it.
pub fn run(dir: &Path, body: &str, control: &str) -> String {
    let cir = dir.join("board.cir");
    std::fs::write(&cir, format!("{body}.control\n{control}\n.endc\n.end\n"))
        .expect("write netlist");
    let out = Command::new("ngspice")
        .arg("-b")
        .arg(&cir)
        .current_dir(dir)
        .output()
        .unwrap_or_else(|e| {
            panic!("ngspice is not installed ({e}); install it with `apt-get install -y ngspice`")
        });
    String::from_utf8_lossy(&out.stdout).to_string() + &String::from_utf8_lossy(&out.stderr)
}

/// The rows of a `wrdata` file as numbers (lines that are not all numbers are skipped).
pub fn rows(text: &str) -> Vec<Vec<f64>> {
    text.lines()
        .filter_map(|line| {
            line.split_whitespace()
                .map(|c| c.parse::<f64>())
                .collect::<Result<Vec<f64>, _>>()
                .ok()
                .filter(|row| !row.is_empty())
        })
        .collect()
}
