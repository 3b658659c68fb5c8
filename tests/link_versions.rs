//! Link format versions: version-1 links keep opening and design exactly what their version-2
//! rewrites design; both faces refuse a newer version.
//!
//! Source of every expected value: the README's "Version 1 links" paragraph. A version-1 link
//! names the limits `fpass`, `apass`, `fstop`, `astop`; version 2 names them `passedge`,
//! `passloss`, `stopedge`, `stopdepth`; every other key is the same; a version-1 link opens and is
//! written back as version 2.

use rolloff::cli;
use rolloff::link;
use std::collections::BTreeSet;

/// The README's mapping, v1 name → v2 name.
const RENAMES: [(&str, &str); 4] = [
    ("fpass", "passedge"),
    ("apass", "passloss"),
    ("fstop", "stopedge"),
    ("astop", "stopdepth"),
];

fn run(args: &[&str]) -> (u8, String, String) {
    let args: Vec<String> = args.iter().map(|s| s.to_string()).collect();
    let (mut out, mut err) = (Vec::new(), Vec::new());
    let code = cli::run(&args, &mut out, &mut err);
    (
        code,
        String::from_utf8_lossy(&out).into_owned(),
        String::from_utf8_lossy(&err).into_owned(),
    )
}

/// The design JSON with the echoed link taken out, which is the one field allowed to differ.
fn without_link(json: &str) -> String {
    json.lines()
        .filter(|l| !l.starts_with("  \"link\": "))
        .collect::<Vec<_>>()
        .join("\n")
}

/// Every version-1 link written in the tests (integration tests and the unit tests in src/) and
/// the README (each link ends at a quote, a backtick, a space or the end of the line).
fn v1_links_in_the_repository() -> Vec<String> {
    let root = env!("CARGO_MANIFEST_DIR");
    let mut files = vec![format!("{root}/README.md")];
    let mut dirs = vec![format!("{root}/tests"), format!("{root}/src")];
    while let Some(dir) = dirs.pop() {
        let Ok(entries) = std::fs::read_dir(&dir) else {
            continue;
        };
        for entry in entries.flatten() {
            let path = entry.path();
            if path.is_dir() {
                dirs.push(path.to_string_lossy().into_owned());
            } else if path.extension().is_some_and(|e| e == "rs") {
                files.push(path.to_string_lossy().into_owned());
            }
        }
    }
    let mut links = BTreeSet::new();
    for file in files {
        let text = std::fs::read_to_string(&file).unwrap_or_default();
        let mut rest = text.as_str();
        while let Some(at) = rest.find("v=1&") {
            let tail = &rest[at..];
            let end = tail
                .find(|c: char| matches!(c, '"' | '`' | ' ' | '\n' | '\'' | ')'))
                .unwrap_or(tail.len());
            links.insert(format!("?{}", &tail[..end]));
            rest = &tail[end..];
        }
    }
    links.into_iter().collect()
}

#[test]
fn every_version_1_link_in_the_repository_designs_like_its_version_2_rewrite() {
    let links = v1_links_in_the_repository();
    // The test sources and the README's "Version 1 links" paragraph hold several dozen.
    assert!(links.len() > 50, "only {} v1 links found", links.len());
    let mut n_compared = 0;
    for v1 in &links {
        let report = link::parse(v1);
        if !report.errors.is_empty() {
            // A bad value falls back to its default; there is no whole link to rewrite.
            continue;
        }
        let v2 = link::to_query(&report.state);
        assert!(v2.starts_with("?v=2&"), "{v1} → {v2}");
        for (old, _) in RENAMES {
            assert!(!v2.contains(&format!("&{old}=")), "{v1} → {v2}");
        }
        let (code_1, out_1, err_1) = run(&["design", v1, "--format", "json"]);
        let (code_2, out_2, err_2) = run(&["design", &v2, "--format", "json"]);
        assert_eq!(code_1, code_2, "{v1} → {v2}: {err_1} / {err_2}");
        if code_1 == 0 {
            assert_eq!(without_link(&out_1), without_link(&out_2), "{v1} → {v2}");
            // The JSON echoes the rewrite for both, so an import restores a version-2 link.
            let echoed: serde_json::Value = serde_json::from_str(&out_1).expect("JSON");
            assert_eq!(echoed["link"], v2.as_str(), "{v1}");
            n_compared += 1;
        } else {
            // The same design error, on the same key (the last line; the first may warn).
            assert_eq!(err_1.lines().last(), err_2.lines().last(), "{v1} → {v2}");
        }
    }
    assert!(n_compared > 30, "only {n_compared} designs compared");
}

#[test]
fn a_version_2_link_with_an_old_name_lists_it_as_unknown() {
    let report = link::parse("?v=2&order=4&fc=1k&fpass=800");
    assert!(report.errors.is_empty(), "{:?}", report.errors);
    assert_eq!(report.unknown_keys, ["fpass"]);
    assert_eq!(report.state.requirement.mask, None);
    // Command line: a warning on stderr, and the design goes on.
    let (code, out, err) = run(&["design", "?v=2&order=4&fc=1k&fpass=800"]);
    assert_eq!(code, 0, "{err}");
    assert!(!out.is_empty());
    assert!(err.contains("'fpass'") && err.contains("warning"), "{err}");
    // Page: listed as ignored.
    let page = rolloff::app::evaluate("?v=2&order=4&fc=1k&fpass=800");
    assert!(page.model.is_some());
    assert!(
        page.view.ignored.iter().any(|s| s.contains("fpass")),
        "{:?}",
        page.view.ignored
    );
}

#[test]
fn a_version_1_link_is_written_back_as_version_2() {
    let v1 = "?v=1&title=Hydrophone+band&resp=bp&family=butterworth&fpass=2k,20k&apass=1&fstop=400,100k&astop=30&topo=mfb";
    let written = link::to_query(&link::parse(v1).state);
    assert_eq!(
        written,
        "?v=2&title=Hydrophone%20band&resp=bp&family=butterworth&passedge=2k,20k&passloss=1&stopedge=400,100k&stopdepth=30&topo=mfb"
    );
    let (code, out, err) = run(&["design", v1, "--format", "json"]);
    assert_eq!(code, 0, "{err}");
    let json: serde_json::Value = serde_json::from_str(&out).expect("JSON");
    assert_eq!(json["link"], written.as_str());
}

#[test]
fn a_newer_version_is_refused_on_both_faces() {
    for query in [
        "?v=3&order=4&fc=1k",
        "?v=3&passedge=1k&stopedge=2k&stopdepth=40",
    ] {
        let (code, out, err) = run(&["design", query]);
        assert_eq!(code, 2, "{query}: {err}");
        assert!(out.is_empty());
        assert_eq!(err.lines().count(), 1, "{err}");
        assert!(err.contains("v=3") && err.contains("newer"), "{err}");
        let page = rolloff::app::evaluate(query);
        assert!(page.refused && page.model.is_none(), "{query}");
        assert!(page.view.errors.iter().any(|e| e.key == "v"), "{query}");
    }
}

#[test]
fn a_link_without_version_naming_old_limits_is_read_as_version_1_with_a_note() {
    let old = "?resp=lp&fpass=1k&fstop=3k&astop=40";
    let (code, out, err) = run(&["design", old, "--format", "json"]);
    assert_eq!(code, 0, "{err}");
    assert!(err.contains("version-1"), "{err}");
    let (_, out_v2, _) = run(&[
        "design",
        "?v=2&passedge=1k&stopedge=3k&stopdepth=40",
        "--format",
        "json",
    ]);
    assert_eq!(without_link(&out), without_link(&out_v2));
    let page = rolloff::app::evaluate(old);
    assert!(
        page.view.ignored.iter().any(|s| s.contains("version-1")),
        "{:?}",
        page.view.ignored
    );
}
