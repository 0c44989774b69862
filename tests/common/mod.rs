//! Helpers shared by the integration tests that drive the real binary.

use std::io::Write;
use std::process::{Command, Output, Stdio};

/// Runs `cmd` with `input` on its stdin (closed at its end) and its
/// stdout and stderr captured.
pub fn run_piped(mut cmd: Command, input: &[u8]) -> Output {
    let mut child = cmd
        .stdin(Stdio::piped())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("spawn");
    child
        .stdin
        .take()
        .expect("stdin")
        .write_all(input)
        .expect("write");
    child.wait_with_output().expect("wait")
}
