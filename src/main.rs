//! `rolloff`: the command-line companion.
fn main() {}
