//! The command line: argument reading, the three commands and their exit status.
//!
//! [`run`] takes the arguments and two writers so that tests (and the fuzzer) drive it in-process.
//! Exit status: 0 success; 2 bad input, with one line on stderr naming the key or flag and what
//! it accepts; 1 any other failure.
//!
//! Every message that quotes the user's text quotes it through [`link::quoted`] (control
//! characters escaped as `\u{1b}`, values past 60 characters cut), and every line written to
//! stderr passes [`link::escape_controls`] last, so nothing a link carries reaches the terminal
//! as a control sequence.

use crate::link::{self, quoted, LinkReport};
use crate::pipeline::{self, Design};
use std::fmt::Write as _;
use std::io::Write;

/// What went wrong, and so which exit status to give.
#[derive(Debug)]
enum Failure {
    /// Bad input: exit 2.
    Input(String),
    /// Anything else: exit 1.
    Other(String),
}

impl From<crate::error::InputError> for Failure {
    fn from(e: crate::error::InputError) -> Self {
        Failure::Input(e.to_string())
    }
}

const USAGE: &str = "usage:
  rolloff design LINK [--format text|json|bom|spice]
  rolloff sweep  LINK [--from HZ] [--to HZ] [--points N] [--ideal]
  rolloff spread LINK [--runs N] [--seed S] [--format text|json]
  rolloff plot   LINK [--kind magnitude|phase|delay|step|poles|impedance|noise|levels] [--out FILE.svg]
LINK is a Rolloff query string or a whole URL (quote it in the shell).";

/// Runs one command line. Returns the exit status.
pub fn run(args: &[String], out: &mut dyn Write, err: &mut dyn Write) -> u8 {
    match dispatch(args, out, err) {
        Ok(()) => 0,
        Err(Failure::Input(message)) => {
            let _ = writeln!(err, "rolloff: {}", guarded(&message));
            2
        }
        Err(Failure::Other(message)) => {
            let _ = writeln!(err, "rolloff: {}", guarded(&message));
            1
        }
    }
}

/// A message as it goes to stderr: its lines kept (the usage text has several), every control
/// character inside a line escaped.
fn guarded(message: &str) -> String {
    message
        .lines()
        .map(link::escape_controls)
        .collect::<Vec<_>>()
        .join("\n")
}

/// How a link looks, for the message that refuses an argument without one known key.
const LINK_SHAPE: &str = "a link is a query string of key=value pairs such as \
    '?v=2&order=4&fc=1k' (or a whole page URL); the keys are listed in the README, \"Link keys\"";

/// The flags a command accepts, read into one place.
#[derive(Debug, Default)]
struct Flags {
    link: Option<String>,
    format: Option<String>,
    from_hz: Option<f64>,
    to_hz: Option<f64>,
    points: Option<usize>,
    ideal: bool,
    runs: Option<usize>,
    seed: Option<u64>,
    kind: Option<String>,
    out: Option<String>,
}

fn dispatch(args: &[String], out: &mut dyn Write, err: &mut dyn Write) -> Result<(), Failure> {
    let Some(command) = args.first() else {
        return Err(Failure::Input(format!("no command given\n{USAGE}")));
    };
    match command.as_str() {
        "-h" | "--help" | "help" => {
            writeln!(out, "{USAGE}").map_err(io_failure)?;
            return Ok(());
        }
        "-V" | "--version" => {
            writeln!(out, "rolloff {}", env!("CARGO_PKG_VERSION")).map_err(io_failure)?;
            return Ok(());
        }
        _ => {}
    }
    let flags = read_flags(command, &args[1..])?;
    let Some(link_text) = flags.link.clone() else {
        return Err(Failure::Input(format!(
            "{command}: LINK is missing\n{USAGE}"
        )));
    };
    let report = link::parse(&link_text);
    check_link(&link_text, &report, err)?;
    let given = link_keys(&link_text);
    let outcome = match command.as_str() {
        "design" => cmd_design(&report, &flags, out),
        "sweep" => cmd_sweep(&report, &flags, out),
        "spread" => cmd_spread(&report, &flags, out),
        "plot" => cmd_plot(&report, &flags, out),
        other => Err(Failure::Input(format!(
            "{} is not a command; use design, sweep, spread or plot",
            quoted(other)
        ))),
    };
    outcome.map_err(|failure| name_the_lever(failure, &given))
}

/// An error that names a key the link does not set (its default, or a value the design worked
/// out, is what failed): the message says so and what the user can change, since changing a key
/// they never typed is not the obvious move.
fn name_the_lever(failure: Failure, given: &[String]) -> Failure {
    let Failure::Input(message) = failure else {
        return failure;
    };
    let Some((key, _)) = message.split_once(": ") else {
        return Failure::Input(message);
    };
    let Some(i) = link::KEYS.iter().position(|k| *k == key) else {
        return Failure::Input(message);
    };
    let set = given
        .iter()
        .any(|g| *g == link::KEYS[i] || *g == link::V1_KEYS[i]);
    if set {
        return Failure::Input(message);
    }
    Failure::Input(format!(
        "{message} ({key} is not in the link: the value that failed is its default or one the \
         design worked out from the other keys; change those keys, or set {key} yourself)"
    ))
}

fn io_failure(e: std::io::Error) -> Failure {
    Failure::Other(format!("cannot write output: {e}"))
}

/// Reads the flags of `command`; a flag the command does not take, or a bad value, is bad input.
fn read_flags(command: &str, rest: &[String]) -> Result<Flags, Failure> {
    use lexopt::prelude::*;
    let allowed: &[&str] = match command {
        "design" => &["format"],
        "sweep" => &["from", "to", "points", "ideal"],
        "spread" => &["runs", "seed", "format"],
        "plot" => &["kind", "out"],
        other => {
            return Err(Failure::Input(format!(
                "{} is not a command; use design, sweep, spread or plot",
                quoted(other)
            )))
        }
    };
    let mut flags = Flags::default();
    let mut parser = lexopt::Parser::from_args(rest.iter().cloned());
    loop {
        let arg = parser
            .next()
            .map_err(|e| Failure::Input(quoted(&e.to_string())))?;
        let Some(arg) = arg else { break };
        match arg {
            Long(name) if allowed.contains(&name) => {
                let name = name.to_string();
                if name == "ideal" {
                    flags.ideal = true;
                    continue;
                }
                let value = parser
                    .value()
                    .map_err(|e| Failure::Input(format!("--{name}: {}", quoted(&e.to_string()))))?;
                let value = value
                    .into_string()
                    .map_err(|_| Failure::Input(format!("--{name}: not valid text")))?;
                set_flag(&mut flags, &name, &value)?;
            }
            Long(name) => {
                return Err(Failure::Input(format!(
                    "--{} is not a flag of '{command}'; it takes {}",
                    quoted(name).trim_matches('\''),
                    allowed
                        .iter()
                        .map(|a| format!("--{a}"))
                        .collect::<Vec<_>>()
                        .join(", ")
                )))
            }
            Short(c) => {
                return Err(Failure::Input(format!(
                    "-{} is not a flag of '{command}'",
                    quoted(&c.to_string()).trim_matches('\'')
                )))
            }
            Value(v) if flags.link.is_none() => {
                flags.link = Some(
                    v.into_string()
                        .map_err(|_| Failure::Input("LINK: not valid text".into()))?,
                );
            }
            Value(v) => {
                return Err(Failure::Input(format!(
                    "unexpected argument {}; give one LINK",
                    quoted(&v.to_string_lossy())
                )))
            }
        }
    }
    Ok(flags)
}

fn set_flag(flags: &mut Flags, name: &str, value: &str) -> Result<(), Failure> {
    // The sweep's bounds pass the link's one frequency check, over the span the analyses cover.
    let frequency = |v: &str| {
        let what = if name == "from" {
            "the sweep start"
        } else {
            "the sweep end"
        };
        link::check_frequency(v, link::ANALYSIS_HZ, what)
            .map_err(|message| Failure::Input(format!("--{name}: {message}")))
    };
    match name {
        "format" => flags.format = Some(value.to_string()),
        "kind" => flags.kind = Some(value.to_string()),
        "out" => flags.out = Some(value.to_string()),
        "from" => flags.from_hz = Some(frequency(value)?),
        "to" => flags.to_hz = Some(frequency(value)?),
        "points" => {
            flags.points = Some(
                value
                    .trim()
                    .parse::<usize>()
                    .ok()
                    .filter(|n| (2..=100_000).contains(n))
                    .ok_or_else(|| {
                        Failure::Input(format!(
                            "--points: {} is not accepted; a whole number from 2 to 100000",
                            quoted(value)
                        ))
                    })?,
            )
        }
        "runs" => {
            flags.runs = Some(
                value
                    .trim()
                    .parse::<usize>()
                    .ok()
                    .filter(|n| (1..=100_000).contains(n))
                    .ok_or_else(|| {
                        Failure::Input(format!(
                            "--runs: {} is not accepted; a whole number from 1 to 100000",
                            quoted(value)
                        ))
                    })?,
            )
        }
        "seed" => {
            flags.seed = Some(value.trim().parse::<u64>().map_err(|_| {
                Failure::Input(format!(
                    "--seed: {} is not accepted; a whole number from 0 to {}",
                    quoted(value),
                    u64::MAX
                ))
            })?)
        }
        _ => {
            return Err(Failure::Other(format!(
                "flag --{name} is accepted but not handled"
            )))
        }
    }
    Ok(())
}

/// The distinct keys of a link's query, as typed (a repeated key counts once, as the reader
/// keeps its last value).
fn link_keys(link_text: &str) -> Vec<String> {
    let mut keys: Vec<String> = Vec::new();
    for (key, value) in form_urlencoded::parse(link::query_of(link_text).as_bytes()) {
        if key.is_empty() && value.is_empty() {
            continue;
        }
        if !keys.iter().any(|k| *k == key) {
            keys.push(key.into_owned());
        }
    }
    keys
}

/// The command line is strict: any bad key is refused, and so is an argument in which no key
/// this version knows appears (a file name or `-` is not a link; read as one it would design the
/// default filter); unknown keys beside known ones, and notes, are warnings.
fn check_link(link_text: &str, report: &LinkReport, err: &mut dyn Write) -> Result<(), Failure> {
    let n_known = link_keys(link_text)
        .len()
        .saturating_sub(report.unknown_keys.len());
    if n_known == 0 {
        return Err(Failure::Input(format!(
            "LINK: {} has no link key this version knows; {LINK_SHAPE}",
            quoted(link_text)
        )));
    }
    if let Some(first) = report
        .errors
        .iter()
        .find(|e| e.key == "v")
        .or(report.errors.first())
    {
        return Err(Failure::Input(first.to_string()));
    }
    for key in &report.unknown_keys {
        let _ = writeln!(
            err,
            "rolloff: warning: link key {} is not known to this version; ignored",
            quoted(key)
        );
    }
    for note in &report.notes {
        let _ = writeln!(err, "rolloff: warning: {}", link::escape_controls(note));
    }
    Ok(())
}

fn format_choice<'a>(flags: &'a Flags, allowed: &[&'a str]) -> Result<&'a str, Failure> {
    let format = flags.format.as_deref().unwrap_or("text");
    if allowed.contains(&format) {
        Ok(format)
    } else {
        Err(Failure::Input(format!(
            "--format: {} is not accepted; use {}",
            quoted(format),
            allowed.join(", ")
        )))
    }
}

fn compose(report: &LinkReport) -> Result<Design, Failure> {
    pipeline::compose(&report.state).map_err(Failure::from)
}

fn cmd_design(report: &LinkReport, flags: &Flags, out: &mut dyn Write) -> Result<(), Failure> {
    let format = format_choice(flags, &["text", "json", "bom", "spice"])?;
    let design = compose(report)?;
    let text = match format {
        "json" => crate::export::json::design_json(&design),
        "bom" => crate::export::bom::csv(&design.board, &pipeline::bom_tolerances(&design)),
        "spice" => crate::export::spice::netlist(&design.board, &pipeline::spice_sweep(&design))?,
        _ => crate::export::text::design_text(&design),
    };
    out.write_all(text.as_bytes()).map_err(io_failure)
}

fn cmd_sweep(report: &LinkReport, flags: &Flags, out: &mut dyn Write) -> Result<(), Failure> {
    let design = compose(report)?;
    let (default_from, default_to) = design.span_hz;
    let from = flags.from_hz.unwrap_or(default_from);
    let to = flags.to_hz.unwrap_or(default_to);
    if from >= to {
        return Err(Failure::Input(format!(
            "--from: {from} Hz is not below --to {to} Hz"
        )));
    }
    let points = flags.points.unwrap_or(200);
    let rows = pipeline::sweep(&design, from, to, points, flags.ideal).map_err(Failure::Other)?;
    let mut text = String::with_capacity(96 * (rows.len() + 1));
    text.push_str("freq_hz,gain_db,phase_deg,delay_s\n");
    for row in rows {
        // Written into the one buffer (a String's fmt::Write does not fail).
        let _ = writeln!(
            text,
            "{},{},{},{}",
            row.freq_hz, row.gain_db, row.phase_deg, row.delay_s
        );
    }
    out.write_all(text.as_bytes()).map_err(io_failure)
}

fn cmd_spread(report: &LinkReport, flags: &Flags, out: &mut dyn Write) -> Result<(), Failure> {
    let format = format_choice(flags, &["text", "json"])?;
    let mut state = report.state.clone();
    if let Some(runs) = flags.runs {
        state.study.runs = runs;
    }
    if let Some(seed) = flags.seed {
        state.study.seed = seed;
    }
    let design = pipeline::compose(&state)?;
    let spread = pipeline::spread(&design).map_err(|e| {
        Failure::Other(format!(
            "the tolerance study could not be computed for this board ({e}); `rolloff design` \
             still shows the design and its other figures"
        ))
    })?;
    let text = match format {
        "json" => crate::export::json::spread_json(&design, &spread),
        _ => crate::export::text::spread_text(&design, &spread),
    };
    out.write_all(text.as_bytes()).map_err(io_failure)
}

/// Writes one of the page's figures as SVG (light theme), to `--out` or standard output.
fn cmd_plot(report: &LinkReport, flags: &Flags, out: &mut dyn Write) -> Result<(), Failure> {
    use crate::plot::{PlotKind, Theme};
    let name = flags.kind.as_deref().unwrap_or("magnitude");
    let Some(kind) = PlotKind::from_key(name) else {
        let names: Vec<&str> = PlotKind::ALL.iter().map(|k| k.key()).collect();
        return Err(Failure::Input(format!(
            "--kind: {} is not accepted; use one of {}",
            quoted(name),
            names.join(", ")
        )));
    };
    let model = crate::app::compose(&report.state)?;
    let svg = crate::plot::render_svg(&model.figure(kind), 960, 540, Theme::Light)
        .map_err(|e| Failure::Other(e.to_string()))?;
    match &flags.out {
        Some(path) => std::fs::write(path, svg)
            .map_err(|e| Failure::Other(format!("cannot write {path}: {e}"))),
        None => out.write_all(svg.as_bytes()).map_err(io_failure),
    }
}
