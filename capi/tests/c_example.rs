//! The C example `examples/lookup.c`, compiled with the system C compiler against libbaler
//! (shared and static), must print what `baler lookup` prints on the demo table, and must run
//! clean under valgrind's memcheck (no leaks, no invalid reads), corrupted tables included,
//! which must come back as error codes.

use std::path::{Path, PathBuf};
use std::process::{Command, Output};
use std::sync::OnceLock;

/// The demo corpus's phrases looked up: frequent ones, rare ones and misses.
const PHRASES: &[&str] = &[
    "the cordless drill",
    "please",
    "the workshop",
    "a spaceship",
    ".",
    "the",
    "return the drill",
    "of the",
    "clean the",
    "can i borrow the",
    "will be ready",
    "no such phrase here",
];

fn workspace() -> &'static Path {
    Path::new(concat!(env!("CARGO_MANIFEST_DIR"), "/.."))
}

/// Builds libbaler and the baler CLI in this test's profile once; returns the profile folder
/// (e.g. `target/release`).
fn built() -> &'static Path {
    static DIR: OnceLock<PathBuf> = OnceLock::new();
    DIR.get_or_init(|| {
        let exe = std::env::current_exe().unwrap();
        let profile_dir = exe.parent().unwrap().parent().unwrap().to_path_buf();
        let mut cargo = Command::new(env!("CARGO"));
        cargo.current_dir(workspace()).args([
            "build",
            "--quiet",
            "-p",
            "baler",
            "-p",
            "baler-capi",
        ]);
        if profile_dir.file_name().is_some_and(|n| n == "release") {
            cargo.arg("--release");
        }
        let status = cargo.status().expect("cargo runs");
        assert!(status.success(), "building libbaler failed");
        profile_dir
    })
}

struct Fixture {
    dir: tempfile::TempDir,
    table: PathBuf,
    shared: PathBuf,
    static_: PathBuf,
}

fn fixture() -> &'static Fixture {
    static F: OnceLock<Fixture> = OnceLock::new();
    F.get_or_init(|| {
        let lib = built();
        let dir = tempfile::tempdir().unwrap();
        let table = dir.path().join("toolshed.bale");
        let packed = Command::new(lib.join("baler"))
            .arg("pack")
            .arg(workspace().join("demo-data/toolshed.tsv"))
            .arg("-o")
            .arg(&table)
            .args(["--bits", "8", "--compression", "rans"])
            .output()
            .unwrap();
        assert!(packed.status.success(), "{packed:?}");
        let cc = std::env::var("CC").unwrap_or_else(|_| "cc".into());
        let compile = |out: &Path, link: &[&std::ffi::OsStr]| {
            let o = Command::new(&cc)
                .args(["-std=c11", "-Wall", "-Wextra", "-Werror", "-g", "-O1"])
                .arg("-I")
                .arg(workspace().join("include"))
                .arg(workspace().join("examples/lookup.c"))
                .args(link)
                .arg("-o")
                .arg(out)
                .output()
                .expect("the system C compiler (cc) runs");
            assert!(
                o.status.success(),
                "compiling examples/lookup.c failed:\n{}",
                String::from_utf8_lossy(&o.stderr)
            );
        };
        let shared = dir.path().join("lookup");
        let l = lib.as_os_str().to_owned();
        let mut rpath = std::ffi::OsString::from("-Wl,-rpath,");
        rpath.push(&l);
        compile(&shared, &["-L".as_ref(), &l, "-lbaler".as_ref(), &rpath]);
        let static_ = dir.path().join("lookup-static");
        let archive = lib.join("libbaler.a");
        compile(
            &static_,
            &[
                archive.as_os_str(),
                "-lpthread".as_ref(),
                "-ldl".as_ref(),
                "-lm".as_ref(),
            ],
        );
        Fixture {
            dir,
            table,
            shared,
            static_,
        }
    })
}

fn run(program: &Path, args: &[&std::ffi::OsStr]) -> Output {
    Command::new(program).args(args).output().unwrap()
}

/// `baler lookup` on `phrases`, without its `# key=value` metadata lines.
fn cli_lookup(phrases: &[String]) -> String {
    let f = fixture();
    let out = Command::new(built().join("baler"))
        .arg("lookup")
        .arg(&f.table)
        .args(phrases)
        .output()
        .unwrap();
    assert!(out.status.code().is_some_and(|c| c <= 1), "{out:?}");
    String::from_utf8(out.stdout)
        .unwrap()
        .lines()
        .filter(|l| !l.starts_with('#'))
        .map(|l| format!("{l}\n"))
        .collect()
}

fn stdout_of(out: &Output) -> String {
    assert_eq!(
        out.status.code(),
        Some(0),
        "the example failed: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    String::from_utf8(out.stdout.clone()).unwrap()
}

fn os(s: &str) -> &std::ffi::OsStr {
    s.as_ref()
}

#[test]
fn c_example_prints_what_baler_lookup_prints() {
    let f = fixture();
    let phrases: Vec<String> = PHRASES.iter().map(|s| s.to_string()).collect();
    let expected = cli_lookup(&phrases);
    assert!(
        expected.lines().count() > 20,
        "the phrases should find options"
    );
    for (program, bytes) in [(&f.shared, false), (&f.static_, false), (&f.shared, true)] {
        let mut args: Vec<&std::ffi::OsStr> = Vec::new();
        if bytes {
            args.push(os("--bytes"));
        }
        args.push(f.table.as_os_str());
        args.extend(PHRASES.iter().map(|p| os(p)));
        assert_eq!(
            stdout_of(&run(program, &args)),
            expected,
            "{program:?} {bytes}"
        );
    }
}

/// The sentences of the demo's held-out set.
fn sentences(n: usize) -> Vec<String> {
    std::fs::read_to_string(workspace().join("demo-data/toolshed.test.en"))
        .unwrap()
        .lines()
        .take(n)
        .map(str::to_string)
        .collect()
}

#[test]
fn c_example_spans_equal_baler_lookup_of_every_sub_phrase() {
    let f = fixture();
    let sentences = sentences(12);
    let mut sub_phrases = Vec::new();
    for s in &sentences {
        let tokens: Vec<&str> = s.split(' ').filter(|t| !t.is_empty()).collect();
        for start in 0..tokens.len() {
            for end in start + 1..=(start + 7).min(tokens.len()) {
                sub_phrases.push(tokens[start..end].join(" "));
            }
        }
    }
    let expected = cli_lookup(&sub_phrases);
    assert!(expected.lines().count() > 50);
    let mut args = vec![f.table.as_os_str(), os("--spans")];
    args.extend(sentences.iter().map(|s| os(s)));
    assert_eq!(stdout_of(&run(&f.shared, &args)), expected);
}

/// Damaged copies of the demo table, each with whether opening it must fail: truncations, a
/// broken magic, flipped bytes in checked regions (header, section table, metadata) and
/// spread over the file, an empty file.
fn corrupted_tables() -> Vec<(PathBuf, bool)> {
    let f = fixture();
    let good = std::fs::read(&f.table).unwrap();
    let mut out = Vec::new();
    let mut write = |name: String, bytes: Vec<u8>, must_fail_open: bool| {
        let path = f.dir.path().join(name);
        std::fs::write(&path, bytes).unwrap();
        out.push((path, must_fail_open));
    };
    write("empty.bale".into(), Vec::new(), true);
    // Cuts inside the header, the section table and the sections (the last few bytes of a
    // file may be alignment padding, which no lookup reads).
    for cut in [7, 40, good.len() / 3, good.len() - 16] {
        write(format!("cut-{cut}.bale"), good[..cut].to_vec(), true);
    }
    for at in [0, 12, 60, 300] {
        let mut flipped = good.clone();
        flipped[at] ^= 0x5a;
        write(format!("flip-{at}.bale"), flipped, true);
    }
    // Flips in the bulk of the file: each must be an error code (at open or at lookup) or,
    // where a flip lands in bytes these lookups do not read, a clean run; never a crash or a
    // bad read.
    for k in 1..6 {
        let mut flipped = good.clone();
        let at = good.len() * k / 6;
        flipped[at] ^= 0x5a;
        write(format!("flip-{at}.bale"), flipped, false);
    }
    out
}

fn valgrind(args: &[&std::ffi::OsStr]) -> Output {
    Command::new("valgrind")
        .args([
            "--quiet",
            "--error-exitcode=99",
            "--leak-check=full",
            "--show-leak-kinds=definite,indirect,possible",
            "--errors-for-leak-kinds=definite,indirect,possible",
        ])
        .args(args)
        .output()
        .expect("valgrind runs (Debian package `valgrind`; .ci/run installs it)")
}

fn assert_clean(out: &Output, what: &str) {
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert_ne!(
        out.status.code(),
        Some(99),
        "valgrind found errors in {what}:\n{stderr}"
    );
    assert!(
        !stderr.contains("=="),
        "valgrind reported on {what}:\n{stderr}"
    );
}

#[test]
fn c_example_is_clean_under_valgrind() {
    let f = fixture();
    let sentences = sentences(3);
    let mut args = vec![f.shared.as_os_str(), f.table.as_os_str()];
    args.extend(PHRASES.iter().map(|p| os(p)));
    let out = valgrind(&args);
    assert_clean(&out, "lookups");
    assert_eq!(out.status.code(), Some(0));

    let mut args = vec![
        f.static_.as_os_str(),
        os("--bytes"),
        f.table.as_os_str(),
        os("--spans"),
    ];
    args.extend(sentences.iter().map(|s| os(s)));
    let out = valgrind(&args);
    assert_clean(&out, "spans on a table opened from bytes");
    assert_eq!(out.status.code(), Some(0));
}

#[test]
fn corrupted_tables_are_error_codes_and_clean_under_valgrind() {
    let f = fixture();
    let sentence = sentences(1).remove(0);
    let missing = f.dir.path().join("no-such-table.bale");
    let out = run(&f.shared, &[missing.as_os_str(), os("please")]);
    assert_eq!(out.status.code(), Some(2));
    assert!(
        String::from_utf8_lossy(&out.stderr).contains("status 3"),
        "{out:?}"
    );
    for (k, (path, must_fail_open)) in corrupted_tables().into_iter().enumerate() {
        // Every other file through the caller-owned buffer.
        let mut args = vec![f.shared.as_os_str()];
        if k % 2 == 1 {
            args.push(os("--bytes"));
        }
        args.push(path.as_os_str());
        args.extend(["please", "the workshop", "the cordless drill", "--spans"].map(os));
        args.push(os(&sentence));
        let out = valgrind(&args);
        let what = format!("{}", path.display());
        assert_clean(&out, &what);
        let stderr = String::from_utf8_lossy(&out.stderr);
        if must_fail_open {
            assert_eq!(out.status.code(), Some(2), "{what}: {stderr}");
            assert!(
                stderr.contains("opening the table failed with status 4"),
                "{what}: {stderr}"
            );
        } else {
            assert!(matches!(out.status.code(), Some(0..=2)), "{what}: {out:?}");
            if out.status.code() == Some(2) {
                assert!(stderr.contains("status 4"), "{what}: {stderr}");
            }
        }
    }
}

#[test]
fn one_table_shared_by_c_threads_agrees_with_one_thread() {
    let f = fixture();
    let program = f.dir.path().join("threads");
    let o = Command::new(std::env::var("CC").unwrap_or_else(|_| "cc".into()))
        .args(["-std=c11", "-Wall", "-Wextra", "-Werror", "-O1", "-pthread"])
        .arg("-I")
        .arg(workspace().join("include"))
        .arg(workspace().join("capi/tests/threads.c"))
        .arg("-L")
        .arg(built())
        .arg("-lbaler")
        .arg(format!("-Wl,-rpath,{}", built().display()))
        .arg("-o")
        .arg(&program)
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let mut args = vec![f.table.as_os_str()];
    args.extend(PHRASES.iter().map(|p| os(p)));
    let out = run(&program, &args);
    assert_eq!(stdout_of(&out), "threads agree\n");
}
