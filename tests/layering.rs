//! The layering of the crate, stated as absences (DEVELOPERS.md, "Layers") and checked on the
//! `crate::` paths of the production code (unit tests — `tests.rs` files and everything after a
//! file's `#[cfg(test)]` — may reach further, e.g. to the reference solver).

use std::collections::{BTreeMap, BTreeSet};
use std::fs;
use std::path::{Path, PathBuf};

fn src_dir() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("src")
}

/// Every source file with its module path (`analysis::built`, `app`, `link` …).
fn modules() -> Vec<(String, PathBuf)> {
    let mut out = Vec::new();
    let mut stack = vec![src_dir()];
    while let Some(dir) = stack.pop() {
        for entry in fs::read_dir(&dir).into_iter().flatten().flatten() {
            let path = entry.path();
            if path.is_dir() {
                stack.push(path);
                continue;
            }
            if path.extension().and_then(|e| e.to_str()) != Some("rs") {
                continue;
            }
            let rel = path.strip_prefix(src_dir()).unwrap_or(&path);
            let mut parts: Vec<String> = rel
                .iter()
                .map(|p| p.to_string_lossy().trim_end_matches(".rs").to_string())
                .collect();
            if parts.last().is_some_and(|p| p == "mod") {
                parts.pop();
            }
            let name = parts.join("::");
            if name == "lib" || name == "main" || parts.last().is_some_and(|p| p == "tests") {
                continue;
            }
            out.push((name, path));
        }
    }
    out.sort();
    out
}

/// The production text of a file: without comment lines and without its `#[cfg(test)]` tail.
fn production_code(path: &Path) -> String {
    let text = fs::read_to_string(path).unwrap_or_default();
    let text = match text.find("#[cfg(test)]") {
        Some(i) => &text[..i],
        None => &text,
    };
    text.lines()
        .filter(|l| !l.trim_start().starts_with("//"))
        .collect::<Vec<_>>()
        .join("\n")
}

/// The modules a file names through `crate::` paths (including `use crate::{a, b::c}` groups),
/// resolved to the longest module path that exists.
fn imports(code: &str, known: &BTreeSet<String>) -> BTreeSet<String> {
    let mut found = BTreeSet::new();
    let mut paths = Vec::new();
    let mut rest = code;
    while let Some(i) = rest.find("crate::") {
        rest = &rest[i + "crate::".len()..];
        if let Some(group) = rest.strip_prefix('{') {
            let end = group.find('}').unwrap_or(group.len());
            for item in group[..end].split(',') {
                paths.push(item.trim().to_string());
            }
        } else {
            let end = rest
                .find(|c: char| !(c.is_alphanumeric() || c == '_' || c == ':'))
                .unwrap_or(rest.len());
            paths.push(rest[..end].to_string());
        }
    }
    for path in paths {
        let segments: Vec<&str> = path.split("::").filter(|s| !s.is_empty()).collect();
        for n in (1..=segments.len()).rev() {
            let candidate = segments[..n].join("::");
            if known.contains(&candidate) {
                found.insert(candidate);
                break;
            }
        }
    }
    found
}

fn graph() -> BTreeMap<String, BTreeSet<String>> {
    let mods = modules();
    let known: BTreeSet<String> = mods.iter().map(|(m, _)| m.clone()).collect();
    mods.iter()
        .map(|(name, path)| {
            let mut deps = imports(&production_code(path), &known);
            deps.remove(name);
            (name.clone(), deps)
        })
        .collect()
}

fn top(module: &str) -> &str {
    module.split("::").next().unwrap_or(module)
}

/// The modules `module` reaches that match one of `banned` (a module or its children).
fn breaches(
    graph: &BTreeMap<String, BTreeSet<String>>,
    from: &[&str],
    banned: &[&str],
) -> Vec<String> {
    let mut out = Vec::new();
    for (module, deps) in graph {
        if !from.contains(&top(module)) {
            continue;
        }
        for dep in deps {
            if banned.contains(&top(dep)) {
                out.push(format!("{module} → {dep}"));
            }
        }
    }
    out
}

/// The core: everything from the requirement to the analysed board.
const CORE: &[&str] = &[
    "analysis",
    "board",
    "choices",
    "design",
    "error",
    "eseries",
    "mna",
    "netlist",
    "opamp",
    "order",
    "prototype",
    "response",
    "section",
    "sections",
    "spec",
    "topology",
    "transform",
    "units",
];

#[test]
fn nothing_below_the_composer_reads_the_link_or_the_faces() {
    let g = graph();
    let found = breaches(
        &g,
        CORE,
        &[
            "link",
            "pipeline",
            "app",
            "export",
            "plot",
            "schematic",
            "cli",
            "wasm",
            "canvas",
        ],
    );
    assert!(found.is_empty(), "the core reaches up: {found:#?}");
}

#[test]
fn the_analyses_never_use_the_reference_solver() {
    // The dense nodal analysis (`mna`) is the independent reference of the tests and the
    // diagnosis of a singular board (in the composer); the analyses solve with the banded solver.
    let g = graph();
    let found = breaches(&g, &["analysis"], &["mna"]);
    assert!(found.is_empty(), "{found:#?}");
}

#[test]
fn only_the_faces_import_the_plots() {
    let g = graph();
    let faces = ["app", "cli", "wasm", "canvas", "plot", "schematic"];
    let from: Vec<&str> = g
        .keys()
        .map(|m| top(m))
        .filter(|m| !faces.contains(m))
        .collect();
    let found = breaches(&g, &from, &["plot", "schematic", "canvas"]);
    assert!(found.is_empty(), "{found:#?}");
}

#[test]
fn the_link_is_read_only_by_the_composer_and_the_faces() {
    let g = graph();
    let readers = ["link", "pipeline", "app", "export", "cli", "wasm"];
    let from: Vec<&str> = g
        .keys()
        .map(|m| top(m))
        .filter(|m| !readers.contains(m))
        .collect();
    let found = breaches(&g, &from, &["link"]);
    assert!(found.is_empty(), "{found:#?}");
}

#[test]
fn no_import_circles() {
    // A circle between a module and its own children is a module's inside (mod.rs and its
    // files); any other circle means a shared type lives in the wrong place.
    let g = graph();
    let related =
        |a: &str, b: &str| a.starts_with(&format!("{b}::")) || b.starts_with(&format!("{a}::"));
    let mut circles = Vec::new();
    for start in g.keys() {
        // Depth-first search for a path back to `start`.
        let mut stack: Vec<(String, Vec<String>)> = vec![(start.clone(), vec![start.clone()])];
        let mut seen = BTreeSet::new();
        while let Some((node, path)) = stack.pop() {
            for dep in g.get(&node).into_iter().flatten() {
                if related(&node, dep) {
                    continue;
                }
                if dep == start {
                    let mut circle = path.clone();
                    circle.push(start.clone());
                    circles.push(circle.join(" → "));
                } else if seen.insert(dep.clone()) {
                    let mut next = path.clone();
                    next.push(dep.clone());
                    stack.push((dep.clone(), next));
                }
            }
        }
    }
    circles.sort();
    circles.dedup();
    assert!(circles.is_empty(), "import circles: {circles:#?}");
}

#[test]
fn no_production_file_is_too_big_to_live_in() {
    // About 700 lines of production code a file (tests and tables aside), so a newcomer can read
    // a room in one sitting.
    let mut big = Vec::new();
    for (name, path) in modules() {
        let lines = production_code(&path).lines().count();
        if lines > 760 {
            big.push(format!("{name}: {lines} lines"));
        }
    }
    assert!(big.is_empty(), "{big:#?}");
}

#[test]
fn the_checks_see_the_crate() {
    // The scanner must find the modules and their imports, or every check above passes vacuously.
    let g = graph();
    assert!(g.len() > 30, "{} modules", g.len());
    assert!(g["pipeline"].contains("board"), "{:?}", g["pipeline"]);
    assert!(g["app"].contains("pipeline"), "{:?}", g["app"]);
}
