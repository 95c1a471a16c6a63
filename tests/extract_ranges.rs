//! The distributed form of `baler extract` (as the Spark driver in `spark/` runs it): corpus
//! partitions by line (`--lines`), counts split by source key range (`shard --split-keys`),
//! one merge per range (`merge --target-totals`), tallies per partition and range, one attach
//! per range, ranges concatenated. The reference is the one-machine `baler extract` (itself
//! checked against worked examples and reference implementations in tests/extract.rs).

use std::path::{Path, PathBuf};
use std::process::Output;

use baler::extract::corpus::CorpusPaths;
use baler::extract::synthetic::SyntheticCorpus;

use crate::util::{baler_ok, command, corpus_options, entries, s, write};

fn corpus(dir: &Path, n: u64) -> CorpusPaths {
    SyntheticCorpus {
        sentence_pairs: n,
        mean_length: 12,
        vocabulary: 300,
        variant: 11,
    }
    .write(dir, "quay", "")
    .unwrap()
}

/// [`corpus_options`] naming the files of `paths`, as owned strings.
fn corpus_args(paths: &CorpusPaths) -> Vec<String> {
    let alignment = paths.alignment.as_ref().unwrap();
    corpus_options(&paths.source, &paths.target, alignment)
        .map(String::from)
        .to_vec()
}

/// Runs `baler extract shard -q --source S --target T --alignment A --lines LINES EXTRA... -o
/// OUT` over the files `[S, T, A]`; returns the process output, success not asserted.
fn shard_lines(files: [&Path; 3], lines: &str, extra: &[&str], out: &Path) -> Output {
    let [source, target, alignment] = files;
    let args = [
        &["extract", "shard", "-q"][..],
        &corpus_options(source, target, alignment),
        &["--lines", lines],
        extra,
        &["-o", s(out)],
    ]
    .concat();
    command(&args).output().unwrap()
}

fn run(args: &[String]) -> String {
    let refs: Vec<&str> = args.iter().map(String::as_str).collect();
    baler_ok(&refs)
}

/// Runs the whole distributed job by hand; returns the concatenated table.
fn distributed(
    dir: &Path,
    paths: &CorpusPaths,
    lines: &[&str],
    keys: &[&str],
    tag: &str,
) -> Vec<u8> {
    let keys_file = write(
        dir,
        &format!("{tag}.keys"),
        &format!("{}\n", keys.join("\n")),
    );
    let keys_file = if keys.is_empty() {
        write(dir, &format!("{tag}.keys"), "")
    } else {
        keys_file
    };
    let ranges = keys.len() + 1;
    let prefixes: Vec<PathBuf> = (0..lines.len())
        .map(|p| dir.join(format!("{tag}-part{p}")))
        .collect();
    for (p, range) in lines.iter().enumerate() {
        let mut args: Vec<String> = vec!["extract".into(), "shard".into(), "-q".into()];
        args.extend(corpus_args(paths));
        args.extend(["--lines".into(), range.to_string()]);
        args.extend(["--split-keys".into(), s(&keys_file).into()]);
        args.extend(["-o".into(), s(&prefixes[p]).into()]);
        run(&args);
    }
    let mut table = Vec::new();
    for r in 0..ranges {
        let merged = dir.join(format!("{tag}-merged{r}.tsv"));
        let index = dir.join(format!("{tag}-merged{r}.index"));
        let mut args: Vec<String> = vec!["extract".into(), "merge".into(), "-q".into()];
        for prefix in &prefixes {
            args.push(format!("{}.{r:04}.run", s(prefix)));
        }
        args.push("--target-totals".into());
        for prefix in &prefixes {
            args.push(format!("{}.targets.run", s(prefix)));
        }
        args.extend(["-o".into(), s(&merged).into()]);
        args.extend(["--index".into(), s(&index).into()]);
        run(&args);
        let mut tallies = Vec::new();
        for (p, range) in lines.iter().enumerate() {
            let tally = dir.join(format!("{tag}-tally{r}-{p}"));
            run(&[
                "extract".into(),
                "tally".into(),
                "-q".into(),
                "--index".into(),
                s(&index).into(),
                "--source".into(),
                s(&paths.source).into(),
                "--target".into(),
                s(&paths.target).into(),
                "--lines".into(),
                range.to_string(),
                "-o".into(),
                s(&tally).into(),
            ]);
            tallies.push(tally);
        }
        let out = dir.join(format!("{tag}-final{r}.tsv"));
        let mut args: Vec<String> = vec![
            "extract".into(),
            "attach".into(),
            "--table".into(),
            s(&merged).into(),
        ];
        args.extend(tallies.iter().map(|t| s(t).to_string()));
        args.extend(["-o".into(), s(&out).into()]);
        run(&args);
        let text = std::fs::read(&out).unwrap();
        if r == 0 {
            table.extend_from_slice(&text);
        } else {
            // Past the metadata ('#' lines) and the column header.
            let mut rest = text.as_slice();
            loop {
                let end = rest.iter().position(|&b| b == b'\n').unwrap() + 1;
                let header = !rest.starts_with(b"#");
                rest = &rest[end..];
                if header {
                    break;
                }
            }
            table.extend_from_slice(rest);
        }
    }
    table
}

#[test]
fn ranges_concatenated_are_the_one_machine_table() {
    let dir = tempfile::tempdir().unwrap();
    let paths = corpus(dir.path(), 900);
    let one = dir.path().join("one.tsv");
    let mut args: Vec<String> = vec!["extract".into(), "-q".into()];
    args.extend(corpus_args(&paths));
    args.extend(["-o".into(), s(&one).into()]);
    run(&args);
    let expected = std::fs::read(&one).unwrap();
    // Several partitions (one with identical bounds to another's length, one past nothing)
    // and several key splits, including keys that fall between and inside the sources.
    for (tag, lines, keys) in [
        ("a", vec!["1-"], vec![]),
        ("b", vec!["1-300", "301-600", "601-"], vec!["m", "t"]),
        (
            "c",
            vec!["1-1", "2-450", "451-"],
            vec!["a", "ka", "ka ka", "zz"],
        ),
        ("d", vec!["1-899", "900-", "5000-"], vec!["p"]),
    ] {
        let table = distributed(dir.path(), &paths, &lines, &keys, tag);
        assert!(
            table == expected,
            "partitions {lines:?}, split keys {keys:?}: the table differs"
        );
    }
}

/// Writes `dir/quay.bad.align`, a copy of the alignment file `alignment` whose line `number`
/// (from 1) is replaced by `bad`; returns its path.
fn alignment_with_bad_line(dir: &Path, alignment: &Path, number: usize, bad: &str) -> PathBuf {
    let text = std::fs::read_to_string(alignment).unwrap();
    let broken: String = text
        .lines()
        .enumerate()
        .map(|(i, l)| {
            if i + 1 == number {
                format!("{bad}\n")
            } else {
                format!("{l}\n")
            }
        })
        .collect();
    write(dir, "quay.bad.align", &broken)
}

#[test]
fn a_partition_reports_the_corpus_file_and_its_own_line() {
    let dir = tempfile::tempdir().unwrap();
    let paths = corpus(dir.path(), 60);
    let alignment = paths.alignment.clone().unwrap();
    let bad = alignment_with_bad_line(dir.path(), &alignment, 42, "0-0 4x2");
    let keys = write(dir.path(), "keys", "m\n");
    let shard = |lines: &str| {
        shard_lines(
            [&paths.source, &paths.target, &bad],
            lines,
            &["--split-keys", s(&keys)],
            &dir.path().join("part"),
        )
    };
    // The partition holding line 42 names the file and line 42, not its 12th line.
    let o = shard("31-45");
    assert_eq!(o.status.code(), Some(2));
    let stderr = String::from_utf8_lossy(&o.stderr);
    assert!(
        stderr.contains(&format!("{}:42: malformed link \"4x2\"", s(&bad))),
        "{stderr}"
    );
    assert!(
        !entries(dir.path()).iter().any(|e| e.starts_with("part")),
        "{:?}",
        entries(dir.path())
    );
    // A partition before it does not read it; one after it passes over it unchecked.
    for lines in ["1-41", "43-"] {
        let o = shard(lines);
        assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    }
    // Files of different lengths: only the partition open at the end sees it.
    let short = write(
        dir.path(),
        "quay.short",
        &std::fs::read_to_string(&paths.target)
            .unwrap()
            .lines()
            .take(59)
            .map(|l| format!("{l}\n"))
            .collect::<String>(),
    );
    let o = shard_lines(
        [&paths.source, &short, &alignment],
        "31-",
        &[],
        &dir.path().join("short.run"),
    );
    assert_eq!(o.status.code(), Some(2));
    let stderr = String::from_utf8_lossy(&o.stderr);
    assert!(stderr.contains(":60: line counts differ"), "{stderr}");
}

#[test]
fn a_range_merge_refuses_missing_totals_and_discounts() {
    let dir = tempfile::tempdir().unwrap();
    let paths = corpus(dir.path(), 80);
    let keys = write(dir.path(), "keys", "m\n");
    for (p, lines) in ["1-40", "41-"].iter().enumerate() {
        let mut args: Vec<String> = vec!["extract".into(), "shard".into(), "-q".into()];
        args.extend(corpus_args(&paths));
        args.extend(["--lines".into(), lines.to_string()]);
        args.extend(["--split-keys".into(), s(&keys).into()]);
        args.extend(["-o".into(), s(&dir.path().join(format!("p{p}"))).into()]);
        run(&args);
    }
    let merge = |totals: &[&str], extra: &[&str]| {
        let mut args = vec![
            "extract".to_string(),
            "merge".into(),
            "-q".into(),
            s(&dir.path().join("p0.0001.run")).into(),
            s(&dir.path().join("p1.0001.run")).into(),
            "--target-totals".into(),
        ];
        args.extend(totals.iter().map(|t| s(&dir.path().join(t)).to_string()));
        args.extend(extra.iter().map(|e| e.to_string()));
        args.extend(["-o".into(), s(&dir.path().join("m.tsv")).into()]);
        let refs: Vec<&str> = args.iter().map(String::as_str).collect();
        command(&refs).output().unwrap()
    };
    let o = merge(&["p0.targets.run"], &[]);
    assert_eq!(o.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&o.stderr).contains("not the same ones"));
    let o = merge(
        &["p0.targets.run", "p1.targets.run"],
        &["--discount", "good-turing"],
    );
    assert_eq!(o.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&o.stderr).contains("--discount none only"));
    assert!(!dir.path().join("m.tsv").exists());
    let o = merge(&["p0.targets.run", "p1.targets.run"], &[]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    // Split keys out of order are an error naming the key file's line.
    let bad_keys = write(dir.path(), "bad-keys", "m\nb\n");
    let mut args: Vec<String> = vec!["extract".into(), "shard".into(), "-q".into()];
    args.extend(corpus_args(&paths));
    args.extend(["--split-keys".into(), s(&bad_keys).into()]);
    args.extend(["-o".into(), s(&dir.path().join("q")).into()]);
    let refs: Vec<&str> = args.iter().map(String::as_str).collect();
    let o = command(&refs).output().unwrap();
    assert_eq!(o.status.code(), Some(2));
    assert!(
        String::from_utf8_lossy(&o.stderr).contains("bad-keys:2: split keys must be strictly"),
        "{}",
        String::from_utf8_lossy(&o.stderr)
    );
}

/// Byte offset where 1-based line `line` begins in `path`.
fn line_start(path: &Path, line: usize) -> u64 {
    let text = std::fs::read(path).unwrap();
    let mut offset = 0;
    for _ in 1..line {
        offset += text[offset..].iter().position(|&b| b == b'\n').unwrap() + 1;
    }
    offset as u64
}

#[test]
fn start_bytes_skip_the_reading_not_the_line_numbers() {
    let dir = tempfile::tempdir().unwrap();
    let paths = corpus(dir.path(), 120);
    let alignment = paths.alignment.clone().unwrap();
    let offsets = |files: &[&Path], line: usize| -> String {
        files
            .iter()
            .map(|f| line_start(f, line).to_string())
            .collect::<Vec<_>>()
            .join(",")
    };
    let all = [
        paths.source.as_path(),
        paths.target.as_path(),
        alignment.as_path(),
    ];
    // The same partition read by seeking and by passing over the lines: the same run.
    let shard = |out: &str, extra: &[&str]| shard_lines(all, "41-80", extra, &dir.path().join(out));
    assert!(shard("passed.run", &[]).status.success());
    let seek = offsets(&all, 41);
    let o = shard("sought.run", &["--start-bytes", &seek]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    assert!(
        std::fs::read(dir.path().join("passed.run")).unwrap()
            == std::fs::read(dir.path().join("sought.run")).unwrap()
    );
    // Tallies of the partition likewise (source and target offsets only).
    let one = dir.path().join("one.tsv");
    let index = dir.path().join("one.index");
    baler_ok(&[
        "extract",
        "merge",
        "-q",
        s(&dir.path().join("passed.run")),
        "-o",
        s(&one),
        "--index",
        s(&index),
    ]);
    let tally = |out: &str, extra: &[&str]| {
        let mut args = vec![
            "extract",
            "tally",
            "-q",
            "--index",
            s(&index),
            "--source",
            s(&paths.source),
            "--target",
            s(&paths.target),
            "--lines",
            "41-80",
        ];
        args.extend_from_slice(extra);
        let out = dir.path().join(out);
        args.extend(["-o", s(&out)]);
        baler_ok(&args);
        std::fs::read(out).unwrap()
    };
    let seek2 = offsets(&all[..2], 41);
    assert!(tally("passed.tally", &[]) == tally("sought.tally", &["--start-bytes", &seek2]));
    // An offset inside a line is refused; an alignment offset is required when extracting.
    let inside = format!("{},{},{}", line_start(&paths.source, 41) + 1, 0, 0);
    let o = shard("bad.run", &["--start-bytes", &inside]);
    assert_eq!(o.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&o.stderr).contains("does not begin a line"));
    let o = shard("bad.run", &["--start-bytes", &seek2]);
    assert_eq!(o.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&o.stderr).contains("alignment file's offset"));
    // Errors keep the files' own line numbers when seeking.
    let bad = alignment_with_bad_line(dir.path(), &alignment, 57, "1-1 x");
    let bad_seek = offsets(&[&paths.source, &paths.target, &bad], 41);
    let o = shard_lines(
        [&paths.source, &paths.target, &bad],
        "41-80",
        &["--start-bytes", &bad_seek],
        &dir.path().join("bad2.run"),
    );
    assert_eq!(o.status.code(), Some(2));
    let stderr = String::from_utf8_lossy(&o.stderr);
    assert!(
        stderr.contains(&format!("{}:57: malformed link", s(&bad))),
        "{stderr}"
    );
}
