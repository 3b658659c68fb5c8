//! `rolloff`: the command-line companion, built from the same core as the page.
//!
//! ```text
//! rolloff design LINK [--format text|json|bom|spice]
//! rolloff sweep  LINK [--from HZ] [--to HZ] [--points N] [--ideal]
//! rolloff spread LINK [--runs N] [--seed S] [--format text|json]
//! rolloff plot   LINK [--kind magnitude|phase|delay|step|poles|noise|levels|impedance] [--out FILE.svg]
//! ```
//! Exit status: 0 success; 2 bad input (one line on stderr naming the key or flag and what it
//! accepts); 1 any other failure.

use std::io::Write;
use std::process::ExitCode;

fn main() -> ExitCode {
    let args: Vec<String> = std::env::args().skip(1).collect();
    let mut out = std::io::stdout().lock();
    let mut err = std::io::stderr().lock();
    let code = rolloff::cli::run(&args, &mut out, &mut err);
    let _ = out.flush();
    ExitCode::from(code)
}
