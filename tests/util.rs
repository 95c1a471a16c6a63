//! Helpers shared by the integration tests: running the binary, temporary directories.
//!
//! `BALER_UNDER_TEST=/path/to/baler` runs the command-line tests against another build (for
//! instance to see a regression test fail on an older version); the default is this crate's.

use std::path::{Path, PathBuf};
use std::process::{Command, Output, Stdio};

/// The binary under test.
pub fn baler_bin() -> PathBuf {
    std::env::var_os("BALER_UNDER_TEST")
        .map(PathBuf::from)
        .unwrap_or_else(|| PathBuf::from(env!("CARGO_BIN_EXE_baler")))
}

/// A plain `baler` command (the binary under test), to add arguments to.
pub fn bin() -> Command {
    Command::new(baler_bin())
}

/// A `baler` command with `args`, its output captured.
pub fn command(args: &[&str]) -> Command {
    let mut cmd = Command::new(baler_bin());
    cmd.args(args).stdout(Stdio::piped()).stderr(Stdio::piped());
    cmd
}

/// Runs `baler` with `args`, feeding `stdin`; returns the process output.
pub fn baler(args: &[&str], stdin: Option<&str>) -> Output {
    let mut cmd = command(args);
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

/// Runs `baler` with `args` in the folder `dir` (this process's when `None`), standard input
/// closed; returns the process output.
pub fn baler_in(args: &[&str], dir: Option<&Path>) -> Output {
    let mut cmd = command(args);
    cmd.stdin(Stdio::null());
    if let Some(d) = dir {
        cmd.current_dir(d);
    }
    cmd.output().expect("baler runs")
}

/// [`baler_in`], asserting success; returns standard output.
pub fn ok_in(args: &[&str], dir: Option<&Path>) -> String {
    let out = baler_in(args, dir);
    assert!(
        out.status.success(),
        "baler {args:?} failed: {}",
        stderr(&out)
    );
    String::from_utf8(out.stdout).unwrap()
}

/// A process's standard error as text.
pub fn stderr(out: &Output) -> String {
    String::from_utf8_lossy(&out.stderr).into_owned()
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

/// The options naming a word-aligned corpus: `--source SOURCE --target TARGET --alignment
/// ALIGNMENT`.
pub fn corpus_options<'a>(source: &'a Path, target: &'a Path, alignment: &'a Path) -> [&'a str; 6] {
    [
        "--source",
        s(source),
        "--target",
        s(target),
        "--alignment",
        s(alignment),
    ]
}

/// A file of the repository.
pub fn repo(path: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join(path)
}

/// Writes `text` to `dir/name` and returns the path.
pub fn write(dir: &Path, name: &str, text: &str) -> PathBuf {
    let path = dir.join(name);
    std::fs::write(&path, text).unwrap();
    path
}

/// The names in `dir`, sorted.
pub fn entries(dir: &Path) -> Vec<String> {
    let mut names: Vec<String> = std::fs::read_dir(dir)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    names.sort();
    names
}

/// Writes each recipe text to `dir/badN.toml` and asserts that `baler build` refuses it: exit
/// code 2, an error at `badN.toml:LINE:` that contains the case's needle, and no
/// `dir/out.bale` written.
pub fn assert_bad_recipes(dir: &Path, cases: &[(String, u32, &str)]) {
    for (i, (text, line, needle)) in cases.iter().enumerate() {
        let path = write(dir, &format!("bad{i}.toml"), text);
        let out = baler_in(&["build", s(&path), "--quiet"], Some(dir));
        assert_eq!(out.status.code(), Some(2), "case {i}");
        let err = stderr(&out);
        assert!(
            err.contains(&format!("bad{i}.toml:{line}:")),
            "case {i}: {err}"
        );
        assert!(err.contains(needle), "case {i}: {err}");
        assert!(!dir.join("out.bale").exists(), "case {i}");
    }
}
