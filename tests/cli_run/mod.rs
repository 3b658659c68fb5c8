//! Running the `rolloff` binary as a script would, shared by the command-line tests.
#![allow(dead_code)]

use std::process::Command;

/// Runs `rolloff ARGS`; returns the exit status (−1 when killed by a signal), stdout and stderr.
pub fn rolloff(args: &[&str]) -> (i32, String, String) {
    let output = Command::new(env!("CARGO_BIN_EXE_rolloff"))
        .args(args)
        .output()
        .expect("the rolloff binary runs");
    (
        output.status.code().unwrap_or(-1),
        String::from_utf8_lossy(&output.stdout).into_owned(),
        String::from_utf8_lossy(&output.stderr).into_owned(),
    )
}
