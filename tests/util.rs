//! Helpers shared by the integration tests: running the binary, temporary directories.

use std::path::Path;
use std::process::{Command, Output, Stdio};

/// Runs `baler` with `args`, feeding `stdin`; returns the process output.
pub fn baler(args: &[&str], stdin: Option<&str>) -> Output {
    let mut cmd = Command::new(env!("CARGO_BIN_EXE_baler"));
    cmd.args(args).stdout(Stdio::piped()).stderr(Stdio::piped());
    cmd.stdin(if stdin.is_some() {
        Stdio::piped()
    } else {
        Stdio::null()
    });
    let mut child = cmd.spawn().expect("baler runs");
    if let Some(text) = stdin {
        use std::io::Write;
        child
            .stdin
            .take()
            .unwrap()
            .write_all(text.as_bytes())
            .unwrap();
    }
    child.wait_with_output().unwrap()
}

/// Runs `baler` and asserts success; returns standard output.
pub fn baler_ok(args: &[&str]) -> String {
    let out = baler(args, None);
    assert!(
        out.status.success(),
        "baler {args:?} failed: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    String::from_utf8(out.stdout).unwrap()
}

/// The path as a `&str` (test paths are UTF-8).
pub fn s(p: &Path) -> &str {
    p.to_str().unwrap()
}
