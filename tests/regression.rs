//! One test per reliability defect found by using baler as a new user would (issue 8), named
//! after it. Each failed on the version before the fix; they drive the command line only, so
//! `BALER_UNDER_TEST=/path/to/old/baler cargo test regression` shows them failing there.

use std::io::{Read, Write};
use std::path::{Path, PathBuf};
use std::process::{Child, Stdio};
use std::time::{Duration, Instant};

use crate::util::{baler, baler_ok, command, corpus_options, entries, repo, s, stderr, write};

/// A small table whose sources are out of byte order.
const UNSORTED: &str = "source\ttarget\tp_t_given_s\n\
    velero\tsailing ship\t0.6\n\
    velero\tsailboat\t0.3\n\
    ancla\tanchor\t0.9\n\
    ancla\tanchorage\t0.1\n";

/// A small table sorted by source, with counts for the significance test.
const COUNTED: &str = "# sentence_pairs=1000\n\
    source\ttarget\tp_t_given_s\tp_s_given_t\tcooc\tdf_source\tdf_target\tcount\tcount_source\tcount_target\n\
    el faro\tthe lighthouse\t0.8\t0.9\t40\t42\t41\t40\t42\t41\n\
    el faro\tthe rock\t0.2\t0.1\t1\t42\t1\t1\t42\t1\n\
    el muelle\tthe pier\t0.75\t0.5\t30\t40\t31\t30\t40\t31\n\
    el muelle\tthe quay\t0.25\t0.5\t10\t40\t12\t10\t40\t12\n";

fn tempdir() -> tempfile::TempDir {
    tempfile::tempdir().unwrap()
}

/// A fresh temporary folder holding a `baler synth` table of `pairs` phrase pairs as `name`,
/// and that file's path.
fn synthetic_table(name: &str, pairs: u32) -> (tempfile::TempDir, PathBuf) {
    let dir = tempdir();
    let path = dir.path().join(name);
    baler_ok(&["synth", "--pairs", &pairs.to_string(), "-o", s(&path)]);
    (dir, path)
}

/// Runs `baler COMMAND INPUT -o OUT -q OPTIONS...`, asserting success.
fn run_quiet(command: &str, input: &Path, out: &Path, options: &[&str]) {
    baler_ok(&[&[command, s(input), "-o", s(out), "-q"][..], options].concat());
}

/// A fresh temporary folder holding [`COUNTED`] as `c.tsv`, and that file's path.
fn counted_table() -> (tempfile::TempDir, PathBuf) {
    let dir = tempdir();
    let path = write(dir.path(), "c.tsv", COUNTED);
    (dir, path)
}

/// Waits for `child` up to `limit`; `None` (and the child killed) when it is still running.
fn wait_at_most(child: &mut Child, limit: Duration) -> Option<std::process::ExitStatus> {
    let start = Instant::now();
    while start.elapsed() < limit {
        if let Some(status) = child.try_wait().unwrap() {
            return Some(status);
        }
        std::thread::sleep(Duration::from_millis(10));
    }
    let _ = child.kill();
    let _ = child.wait();
    None
}

#[test]
fn defect_01_prune_to_stdout_never_restarts_a_written_stream() {
    let dir = tempdir();
    let input = write(dir.path(), "u.tsv", UNSORTED);
    let out = baler(&["prune", s(&input), "-o", "-", "--top-k", "1", "-q"], None);
    assert!(out.status.success(), "{}", stderr(&out));
    let text = String::from_utf8(out.stdout).unwrap();
    assert_eq!(
        text,
        "# pruned_with=--top-k 1 --by p_t_given_s\nsource\ttarget\tp_t_given_s\n\
         ancla\tanchor\t0.9\nvelero\tsailing ship\t0.6\n"
    );
    // and the stream packs
    let packed = dir.path().join("x.bale");
    let out = baler(&["pack", "-", "-o", s(&packed), "-q"], Some(&text));
    assert!(out.status.success(), "{}", stderr(&out));
}

/// The rest of a finished child's standard error (captured by [`command`]).
fn read_stderr(child: &mut Child) -> String {
    let mut err = String::new();
    child
        .stderr
        .take()
        .expect("stderr captured")
        .read_to_string(&mut err)
        .unwrap();
    err
}

/// Starts `args`, waits until `ready` holds, interrupts it with `signal`, and returns its
/// exit code and stderr.
fn interrupt(args: &[&str], signal: &str, ready: impl Fn() -> bool) -> (Option<i32>, String) {
    let mut child = command(args).stdin(Stdio::null()).spawn().unwrap();
    let start = Instant::now();
    while !ready() {
        assert!(
            child.try_wait().unwrap().is_none(),
            "finished before it could be interrupted; give it more work"
        );
        assert!(start.elapsed() < Duration::from_secs(60), "never got ready");
        std::thread::sleep(Duration::from_millis(5));
    }
    let sent = std::process::Command::new("kill")
        .args([signal, &child.id().to_string()])
        .status()
        .unwrap();
    assert!(sent.success());
    let status = wait_at_most(&mut child, Duration::from_secs(30)).expect("it stops");
    let err = read_stderr(&mut child);
    (status.code(), err)
}

/// Makes the empty folders `dir/temp` (for `--temp-dir`) and `dir/out` (for the output) an
/// interrupted run must leave empty; returns their paths.
fn empty_temp_and_out_dirs(dir: &Path) -> (PathBuf, PathBuf) {
    let temp = dir.join("temp");
    let out_dir = dir.join("out");
    std::fs::create_dir_all(&temp).unwrap();
    std::fs::create_dir_all(&out_dir).unwrap();
    (temp, out_dir)
}

#[test]
fn defect_02_interrupted_runs_remove_partial_outputs_and_temporary_files() {
    let (dir, big) = synthetic_table("big.tsv", 400_000);
    // pack: interrupted while its temporary files exist
    let (temp, out_dir) = empty_temp_and_out_dirs(dir.path());
    let packed = out_dir.join("big.bale");
    let (code, err) = interrupt(
        &[
            "pack",
            s(&big),
            "-o",
            s(&packed),
            "--temp-dir",
            s(&temp),
            "-q",
        ],
        "-INT",
        || !entries(&temp).is_empty(),
    );
    assert_eq!(code, Some(130), "{err}");
    assert_eq!(err.lines().count(), 1, "{err}");
    assert!(err.contains("interrupted"), "{err}");
    assert_eq!(entries(&temp), Vec::<String>::new());
    assert_eq!(entries(&out_dir), Vec::<String>::new());
    // prune: interrupted (SIGTERM) while writing its partial output
    let pruned = out_dir.join("pruned.tsv");
    let (code, err) = interrupt(
        &["prune", s(&big), "-o", s(&pruned), "--top-k", "1", "-q"],
        "-TERM",
        || !entries(&out_dir).is_empty(),
    );
    assert_eq!(code, Some(130), "{err}");
    assert_eq!(entries(&out_dir), Vec::<String>::new());
}

#[test]
fn defect_03_closed_pipe_is_success_and_full_disk_an_error() {
    let dir = tempdir();
    let table = dir.path().join("t.bale");
    let tsv = write(dir.path(), "t.tsv", COUNTED);
    baler_ok(&["pack", s(&tsv), "-o", s(&table), "-q"]);
    let text = write(dir.path(), "text.txt", "the lighthouse\nthe pier\n");
    let model = dir.path().join("m.balm");
    baler_ok(&[
        "lm",
        "build",
        s(&text),
        "-o",
        s(&model),
        "--order",
        "2",
        "-q",
    ]);
    let test = write(dir.path(), "test.txt", "el faro\nel muelle\n");
    for args in [
        vec!["inspect", s(&table)],
        vec!["inspect", s(&table), "--verify"],
        vec!["inspect", s(&table), "--json"],
        vec!["dump", s(&table)],
        vec!["lookup", s(&table), "el faro", "el muelle"],
        // every other command that writes to standard output
        vec!["prune", s(&tsv), "-o", "-", "--top-k", "1", "-q"],
        vec![
            "compare",
            s(&table),
            s(&table),
            "--test",
            s(&test),
            "--json",
        ],
        vec!["evaluate", s(&text), "--reference", s(&text)],
        vec!["lm", "score", s(&model)],
        vec!["synth", "--pairs", "20000", "-o", "-", "-q"],
        vec![
            "translate",
            s(&table),
            "--lm",
            s(&model),
            "--input",
            s(&test),
            "-q",
        ],
    ] {
        // closed pipe: the reader is gone before the first write
        let mut child = command(&args).stdin(Stdio::null()).spawn().unwrap();
        drop(child.stdout.take());
        let status = wait_at_most(&mut child, Duration::from_secs(30)).unwrap();
        let err = read_stderr(&mut child);
        assert_eq!(status.code(), Some(0), "{args:?} into a closed pipe: {err}");
        assert!(!err.contains("panicked"), "{err}");
        // full disk
        let full = std::fs::OpenOptions::new()
            .write(true)
            .open("/dev/full")
            .unwrap();
        let out = command(&args).stdout(full).output().unwrap();
        assert_eq!(out.status.code(), Some(2), "{args:?} into /dev/full");
        assert!(
            stderr(&out).contains("No space left on device"),
            "{args:?}: {}",
            stderr(&out)
        );
        assert!(!stderr(&out).contains("panicked"), "{}", stderr(&out));
    }
}

#[test]
fn defect_06_pruned_with_records_everything_prune_did() {
    let (dir, input) = counted_table();
    let out = dir.path().join("p.tsv");
    run_quiet(
        "prune",
        &input,
        &out,
        &[
            "--significance",
            "3",
            "--phrase-counts",
            "--annotate",
            "--renormalize",
            "p_t_given_s",
        ],
    );
    let text = std::fs::read_to_string(&out).unwrap();
    let line = text
        .lines()
        .find(|l| l.starts_with("# pruned_with="))
        .unwrap();
    assert_eq!(
        line,
        "# pruned_with=--significance 3 --phrase-counts --annotate --renormalize p_t_given_s"
    );
    // corpus counts name the corpus
    let src = write(dir.path(), "s.txt", "el faro\nel muelle\n");
    let tgt = write(dir.path(), "t.txt", "the lighthouse\nthe pier\n");
    let plain = write(
        dir.path(),
        "plain.tsv",
        "source\ttarget\tp_t_given_s\nel faro\tthe lighthouse\t1\n",
    );
    let text = prune_annotated_with_corpus(&plain, &src, &tgt, &out);
    assert!(
        text.contains(&format!(
            "# pruned_with=--source {} --target {} --annotate\n",
            s(&src),
            s(&tgt)
        )),
        "{text}"
    );
}

/// Runs `baler prune TABLE -o OUT -q --annotate --source SRC --target TGT` (phrase counts taken
/// from the corpus `src`/`tgt`) and returns the table it wrote to `out`.
fn prune_annotated_with_corpus(table: &Path, src: &Path, tgt: &Path, out: &Path) -> String {
    baler_ok(&[
        "prune",
        s(table),
        "-o",
        s(out),
        "-q",
        "--annotate",
        "--source",
        s(src),
        "--target",
        s(tgt),
    ]);
    std::fs::read_to_string(out).unwrap()
}

fn inspect_json(table: &Path) -> serde_json::Value {
    serde_json::from_str(&baler_ok(&["inspect", "--json", s(table)])).unwrap()
}

fn provenance(report: &serde_json::Value, key: &str) -> Option<String> {
    report["meta"]["provenance"]
        .as_array()
        .unwrap()
        .iter()
        .find(|kv| kv[0] == key)
        .map(|kv| kv[1].as_str().unwrap().to_string())
}

#[test]
fn defect_07_prune_keeps_the_input_tables_packing_and_provenance() {
    let (dir, tsv) = counted_table();
    let f32 = dir.path().join("f32.bale");
    run_quiet(
        "pack",
        &tsv,
        &f32,
        &["--bits", "f32", "--block-sources", "4"],
    );
    let pruned = dir.path().join("pruned.bale");
    baler_ok(&["prune", s(&f32), "-o", s(&pruned), "-q", "--top-k", "1"]);
    let report = inspect_json(&pruned);
    for q in report["meta"]["quantization"].as_array().unwrap() {
        assert_eq!(q["storage"], "f32", "{q}");
    }
    assert_eq!(report["meta"]["sources_per_block"], 4);
    assert_eq!(
        provenance(&report, "previous.input").as_deref(),
        Some(s(&tsv))
    );
    assert_eq!(provenance(&report, "previous.bits").as_deref(), Some("f32"));
    // the pack settings are accepted where a .bale is written, and win
    let six = dir.path().join("six.bale");
    run_quiet("prune", &f32, &six, &["--top-k", "1", "--bits", "6"]);
    let report = inspect_json(&six);
    for q in report["meta"]["quantization"].as_array().unwrap() {
        assert_eq!(
            (q["storage"].as_str(), q["bits"].as_u64()),
            (Some("codebook"), Some(6))
        );
    }
}

#[test]
fn defect_08_a_leading_byte_order_mark_is_skipped() {
    let dir = tempdir();
    let tsv = write(dir.path(), "bom.tsv", &format!("\u{feff}{UNSORTED}"));
    let packed = dir.path().join("bom.bale");
    baler_ok(&["pack", s(&tsv), "-o", s(&packed), "-q"]);
    assert!(baler_ok(&["lookup", s(&packed), "ancla"]).contains("anchorage"));
    // a corpus's first token is not glued to the mark: both sentence pairs count
    let table = write(
        dir.path(),
        "t.tsv",
        "source\ttarget\tp_t_given_s\nel faro\tthe lighthouse\t1\n",
    );
    let src = write(dir.path(), "s.txt", "\u{feff}el faro\nel faro\n");
    let tgt = write(
        dir.path(),
        "t.txt",
        "\u{feff}the lighthouse\nthe lighthouse\n",
    );
    let out = dir.path().join("o.tsv");
    let text = prune_annotated_with_corpus(&table, &src, &tgt, &out);
    let row = text.lines().last().unwrap();
    assert!(row.ends_with("\t2\t2\t2"), "{text}");
}

#[test]
fn defect_09_an_output_that_is_an_input_is_refused() {
    let dir = tempdir();
    let tsv = write(dir.path(), "p.tsv", UNSORTED);
    let other_name = dir.path().join("q.tsv");
    std::fs::hard_link(&tsv, &other_name).unwrap();
    for output in [s(&tsv).to_string(), s(&other_name).to_string()] {
        let out = baler(&["pack", s(&tsv), "-o", &output, "-q"], None);
        assert_eq!(out.status.code(), Some(2));
        assert!(stderr(&out).contains("same file"), "{}", stderr(&out));
        assert_eq!(std::fs::read_to_string(&tsv).unwrap(), UNSORTED);
    }
    let out = baler(
        &["prune", s(&tsv), "-o", s(&other_name), "--top-k", "1"],
        None,
    );
    assert_eq!(out.status.code(), Some(2));
    assert_eq!(std::fs::read_to_string(&tsv).unwrap(), UNSORTED);
    let table = dir.path().join("d.bale");
    baler_ok(&["pack", s(&tsv), "-o", s(&table), "-q"]);
    let before = std::fs::read(&table).unwrap();
    let out = baler(&["dump", s(&table), "-o", s(&table)], None);
    assert_eq!(out.status.code(), Some(2));
    assert_eq!(std::fs::read(&table).unwrap(), before);
}

/// Asserts that the running `baler ARGS` `child` stops within 20 seconds, before reading
/// `reading` (it is killed otherwise), with exit code 2 and an error naming `out.tsv`.
fn assert_refused_at_once_naming_out_tsv(child: &mut Child, args: &[&str], reading: &str) {
    let status = wait_at_most(child, Duration::from_secs(20))
        .unwrap_or_else(|| panic!("it stops at once instead of reading {reading}"));
    assert_eq!(status.code(), Some(2), "{args:?}");
    let err = read_stderr(child);
    assert!(err.contains("out.tsv"), "{err}");
}

#[test]
fn defect_10_an_unwritable_output_is_found_before_the_work() {
    // The input never ends: only a check made before reading it can finish the run.
    let dir = tempdir();
    let missing = dir.path().join("no/such/dir/out.tsv");
    for args in [
        vec!["prune", "-", "-o", s(&missing), "--top-k", "1"],
        vec!["pack", "-", "-o", s(&missing)],
    ] {
        let mut child = command(&args).stdin(Stdio::piped()).spawn().unwrap();
        let mut stdin = child.stdin.take().unwrap();
        let _ = stdin.write_all(b"source\ttarget\n"); // it may have stopped already
        assert_refused_at_once_naming_out_tsv(&mut child, &args, "the input");
        drop(stdin);
    }
}

#[test]
fn defect_11_messages_name_the_directories_and_files_the_user_gave() {
    let dir = tempdir();
    let tsv = write(dir.path(), "p.tsv", UNSORTED);
    let nowhere = dir.path().join("no-such-temp");
    let out = baler(
        &[
            "pack",
            s(&tsv),
            "-o",
            s(&dir.path().join("x.bale")),
            "--temp-dir",
            s(&nowhere),
        ],
        None,
    );
    assert_eq!(out.status.code(), Some(2));
    assert!(stderr(&out).contains(s(&nowhere)), "{}", stderr(&out));
    let out = baler(
        &["pack", s(&tsv), "-o", s(&dir.path().join("missing/x.bale"))],
        None,
    );
    assert_eq!(out.status.code(), Some(2));
    assert!(stderr(&out).contains("x.bale"), "{}", stderr(&out));
    assert!(!stderr(&out).contains(".baler-partial"), "{}", stderr(&out));
}

#[test]
fn defect_12_pack_repacks_a_packed_table() {
    let (dir, tsv) = counted_table();
    let first = dir.path().join("a.bale");
    let second = dir.path().join("b.bale");
    baler_ok(&["pack", s(&tsv), "-o", s(&first), "-q", "--bits", "f32"]);
    run_quiet("pack", &first, &second, &["--block-sources", "2"]);
    assert_eq!(
        baler_ok(&["dump", s(&first)]),
        baler_ok(&["dump", s(&second)])
    );
    let report = inspect_json(&second);
    assert_eq!(report["meta"]["sources_per_block"], 2);
    assert_eq!(provenance(&report, "bits").as_deref(), Some("f32"));
}

#[test]
fn defect_14_lookup_header_best_misses_and_whitespace() {
    let (dir, tsv) = counted_table();
    let table = dir.path().join("t.bale");
    baler_ok(&["pack", s(&tsv), "-o", s(&table), "-q"]);
    let misses = dir.path().join("misses.txt");
    let out = baler(
        &[
            "lookup",
            s(&table),
            "--no-header",
            "--best",
            "1",
            "--misses",
            s(&misses),
            "  el   faro ",
            "un barco",
            "el\tmuelle",
            "la grua",
        ],
        None,
    );
    assert!(out.status.success(), "{}", stderr(&out));
    let text = String::from_utf8(out.stdout).unwrap();
    let rows: Vec<Vec<&str>> = text.lines().map(|l| l.split('\t').collect()).collect();
    assert_eq!(rows.len(), 2, "{text}");
    assert_eq!(rows[0][..2], ["el faro", "the lighthouse"]);
    assert_eq!(rows[1][..2], ["el muelle", "the pier"]);
    assert_eq!(
        std::fs::read_to_string(&misses).unwrap(),
        "un barco\nla grua\n"
    );
}

#[test]
fn defect_15_recipes_are_documented_and_self_contained() {
    // --help points to documentation that exists
    let help = baler_ok(&["build", "--help"]);
    assert!(help.contains("docs/recipe.md"), "{help}");
    let doc = std::fs::read_to_string(repo("docs/recipe.md")).unwrap();
    for key in [
        "[corpus]",
        "[[filter]]",
        "significance",
        "relative_entropy",
        "block_sources",
        "[output]",
    ] {
        assert!(doc.contains(key), "docs/recipe.md lacks {key}");
    }
    // outputs resolve against the recipe's folder; significance takes a number and
    // relative_entropy a string, as on the command line
    let dir = tempdir();
    let data = dir.path().join("recipes");
    std::fs::create_dir(&data).unwrap();
    for name in ["toolshed.en", "toolshed.es", "toolshed.align"] {
        std::fs::copy(repo(&format!("demo-data/{name}")), data.join(name)).unwrap();
    }
    let recipe = write(
        &data,
        "r.toml",
        "[corpus]\nsource = \"toolshed.en\"\ntarget = \"toolshed.es\"\n\
         alignment = \"toolshed.align\"\n\
         [[filter]]\nsignificance = 2\n\
         [[filter]]\nrelative_entropy = \"-1e9\"\n\
         [output]\ntable = \"out/t.bale\"\n",
    );
    let elsewhere = tempdir();
    let out = command(&["build", s(&recipe), "--quiet"])
        .current_dir(elsewhere.path())
        .output()
        .unwrap();
    assert!(out.status.success(), "{}", stderr(&out));
    assert!(data.join("out/t.bale").exists());
    assert_eq!(entries(elsewhere.path()), Vec::<String>::new());
}

#[test]
fn recipe_pack_values_are_checked_by_the_registry_before_work() {
    let dir = tempdir();
    let recipe = write(
        dir.path(),
        "r.toml",
        "[corpus]\nsource = \"a.en\"\ntarget = \"a.es\"\nalignment = \"a.align\"\n\
         [pack]\nblock_sources = 0\n[output]\ntable = \"t.bale\"\n",
    );
    let out = baler(&["build", s(&recipe), "--quiet"], None);
    assert_eq!(out.status.code(), Some(2));
    let err = stderr(&out);
    assert!(err.contains("r.toml:6:"), "{err}");
    assert!(err.contains("block_sources"), "{err}");
}

/// Peak resident memory of a run in KiB, from `/usr/bin/time -f %M` (GNU time).
fn peak_kib(args: &[&str]) -> u64 {
    let out = std::process::Command::new("/usr/bin/time")
        .arg("-f")
        .arg("peak %M")
        .arg(crate::util::baler_bin())
        .args(args)
        .output()
        .expect("GNU time at /usr/bin/time");
    let err = stderr(&out);
    assert!(out.status.success(), "{args:?}: {err}");
    let line = err.lines().rev().find(|l| l.starts_with("peak ")).unwrap();
    line[5..].trim().parse().unwrap()
}

#[test]
fn defect_13_relative_entropy_pruning_respects_the_memory_budget() {
    let (dir, table) = synthetic_table("t.tsv", 200_000);
    let roomy = dir.path().join("roomy.tsv");
    let tight = dir.path().join("tight.tsv");
    let common = ["--relative-entropy", "0", "-q"];
    baler_ok(
        &[
            &["prune", s(&table), "-o", s(&roomy), "--memory", "2G"][..],
            &common,
        ]
        .concat(),
    );
    let peak = peak_kib(
        &[
            &["prune", s(&table), "-o", s(&tight), "--memory", "64M"][..],
            &common,
        ]
        .concat(),
    );
    assert!(peak <= 64 << 10, "peak {peak} KiB over the 64 MiB budget");
    assert_eq!(
        std::fs::read(&roomy).unwrap(),
        std::fs::read(&tight).unwrap()
    );
    // a budget too small for the index is a clear error, not a larger footprint
    let out = baler(
        &[
            &["prune", s(&table), "-o", s(&tight), "--memory", "1M"][..],
            &common,
        ]
        .concat(),
        None,
    );
    assert_eq!(out.status.code(), Some(2));
    assert!(stderr(&out).contains("memory"), "{}", stderr(&out));
}

/// A small word-aligned corpus of harbour sentences: source, target and alignment files.
fn harbour_corpus(dir: &Path) -> [std::path::PathBuf; 3] {
    [
        write(dir, "h.src", "el faro\nel muelle\n"),
        write(dir, "h.tgt", "the lighthouse\nthe pier\n"),
        write(dir, "h.align", "0-0 1-1\n0-0 1-1\n"),
    ]
}

#[test]
fn defect_09_extract_refuses_an_output_that_is_an_input() {
    let dir = tempdir();
    let [src, tgt, align] = harbour_corpus(dir.path());
    let other_name = dir.path().join("links.txt");
    std::fs::hard_link(&align, &other_name).unwrap();
    let corpus = [&corpus_options(&src, &tgt, &align)[..], &["-q"]].concat();
    for (step, output) in [(None, &other_name), (Some("shard"), &src)] {
        let before = std::fs::read(output).unwrap();
        let mut args = vec!["extract"];
        args.extend(step);
        args.extend(&corpus);
        args.extend(["-o", s(output)]);
        let out = baler(&args, None);
        assert_eq!(out.status.code(), Some(2), "{args:?}");
        assert!(stderr(&out).contains("same file"), "{}", stderr(&out));
        assert_eq!(std::fs::read(output).unwrap(), before, "{args:?}");
    }
    // the reduce steps: a merged table written over its own count run
    let run = dir.path().join("h.run");
    let mut args = vec!["extract", "shard"];
    args.extend(&corpus);
    args.extend(["-o", s(&run)]);
    baler_ok(&args);
    let before = std::fs::read(&run).unwrap();
    let out = baler(&["extract", "merge", s(&run), "-o", s(&run), "-q"], None);
    assert_eq!(out.status.code(), Some(2), "{}", stderr(&out));
    assert_eq!(std::fs::read(&run).unwrap(), before);
}

#[cfg(unix)]
#[test]
fn defect_10_extract_finds_an_unwritable_output_before_the_work() {
    // The source is a named pipe nobody writes to: opening it blocks, so only a check made
    // before reading the corpus can finish the run.
    let dir = tempdir();
    let [_, tgt, align] = harbour_corpus(dir.path());
    let fifo = dir.path().join("never.src");
    let made = std::process::Command::new("mkfifo")
        .arg(&fifo)
        .status()
        .unwrap();
    assert!(made.success());
    let missing = dir.path().join("no/such/dir/out.tsv");
    for step in [None, Some("shard")] {
        let mut args = vec!["extract"];
        args.extend(step);
        args.extend([
            "--source",
            s(&fifo),
            "--target",
            s(&tgt),
            "--alignment",
            s(&align),
            "-o",
            s(&missing),
            "-q",
        ]);
        let mut child = command(&args).stdin(Stdio::null()).spawn().unwrap();
        assert_refused_at_once_naming_out_tsv(&mut child, &args, "the corpus");
    }
}

#[test]
fn defect_02_interrupted_extract_removes_its_temporary_files() {
    let dir = tempdir();
    let corpus = baler::extract::synthetic::SyntheticCorpus {
        sentence_pairs: 200_000,
        mean_length: 20,
        vocabulary: 5000,
        variant: 3,
    }
    .write(dir.path(), "harbour", "")
    .unwrap();
    let (temp, out_dir) = empty_temp_and_out_dirs(dir.path());
    let table = out_dir.join("table.tsv");
    let (code, err) = interrupt(
        &[
            "extract",
            "--source",
            s(&corpus.source),
            "--target",
            s(&corpus.target),
            "--alignment",
            s(corpus.alignment.as_ref().unwrap()),
            "-o",
            s(&table),
            "--memory",
            "16M",
            "--threads",
            "1",
            "--temp-dir",
            s(&temp),
            "-q",
        ],
        "-INT",
        // interrupted once its spilled runs exist inside the temporary directory
        || {
            std::fs::read_dir(&temp)
                .unwrap()
                .flatten()
                .any(|d| std::fs::read_dir(d.path()).is_ok_and(|mut r| r.next().is_some()))
        },
    );
    assert_eq!(code, Some(130), "{err}");
    assert!(err.contains("interrupted"), "{err}");
    assert_eq!(entries(&temp), Vec::<String>::new());
    assert_eq!(entries(&out_dir), Vec::<String>::new());
}

/// Issue 8, "one sentence-level counter": `extract` and `prune --source/--target` counted
/// sentence pairs and tokens differently (an empty line made N 3 for one and 4 for the
/// other; a no-break space split a token for one only). Both must agree with extraction:
/// the same N, and the same cooc, df_source and df_target on every row.
#[test]
fn sentence_counts_of_extract_and_prune_agree() {
    let dir = tempdir();
    let src = write(
        dir.path(),
        "c.src",
        "el faro\nel muelle\n\nel faro y el muelle\nmuelle 10\u{a0}km\n",
    );
    let tgt = write(
        dir.path(),
        "c.tgt",
        "the lighthouse\nthe pier\nthe quay\nthe lighthouse and the pier\npier 10\u{a0}km\n",
    );
    let align = write(
        dir.path(),
        "c.align",
        "0-0 1-1\n0-0 1-1\n\n0-0 1-1 2-2 3-3 4-4\n0-0 1-1\n",
    );
    let corpus = corpus_options(&src, &tgt, &align);
    let (full, run, merged, pruned) = (
        dir.path().join("full.tsv"),
        dir.path().join("c.run"),
        dir.path().join("merged.tsv"),
        dir.path().join("pruned.tsv"),
    );
    let mut args = vec!["extract", "-q", "-o", s(&full)];
    args.extend(corpus);
    baler_ok(&args);
    let mut args = vec!["extract", "shard", "-q", "-o", s(&run)];
    args.extend(corpus);
    baler_ok(&args);
    baler_ok(&["extract", "merge", "-q", s(&run), "-o", s(&merged)]);
    // A threshold every pair passes: the counts are taken from the corpus and written.
    baler_ok(&[
        "prune",
        s(&merged),
        "--source",
        s(&src),
        "--target",
        s(&tgt),
        "--significance",
        "0",
        "-o",
        s(&pruned),
    ]);
    let read = |p: &Path| std::fs::read_to_string(p).unwrap();
    let (full, pruned) = (read(&full), read(&pruned));
    let n = |t: &str| {
        t.lines()
            .find(|l| l.starts_with("# sentence_pairs="))
            .map(str::to_owned)
    };
    assert_eq!(n(&full).as_deref(), Some("# sentence_pairs=4"), "{full}");
    assert_eq!(n(&pruned), n(&full), "{pruned}");
    let rows = |t: &str| -> Vec<String> {
        t.lines()
            .filter(|l| !l.starts_with('#'))
            .map(str::to_owned)
            .collect()
    };
    assert_eq!(rows(&pruned), rows(&full));
}

/// Issue 8, "one settings registry": `extract` took its own `--threads` (0 refused) and
/// `--memory` (default 2G); its steps now take the shared flags, where 0 threads means every
/// core, with the same output.
#[test]
fn extract_takes_the_shared_resource_flags() {
    let dir = tempdir();
    let [src, tgt, align] = harbour_corpus(dir.path());
    let corpus = corpus_options(&src, &tgt, &align);
    let mut outputs = Vec::new();
    for threads in ["0", "1"] {
        let out = dir.path().join(format!("t{threads}.tsv"));
        let mut args = vec!["extract", "-q", "--threads", threads, "-o", s(&out)];
        args.extend(corpus);
        baler_ok(&args);
        outputs.push(std::fs::read(&out).unwrap());
    }
    assert_eq!(outputs[0], outputs[1]);
    let run = dir.path().join("h.run");
    let mut args = vec!["extract", "shard", "-q", "--threads", "0", "-o", s(&run)];
    args.extend(corpus);
    baler_ok(&args);
    let help = baler_ok(&["extract", "--help"]);
    assert!(help.contains("[default: 1G]"), "{help}");
}
