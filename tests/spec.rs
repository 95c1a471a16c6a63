//! The packed format checked from outside the crate.
//!
//! * `format-spec/reference_reader.py`, an independent reader written from
//!   `format-spec/bale-format.md` with Python's standard library only, must reproduce
//!   `baler dump` byte for byte on tables packed every way (quantized and f32 scores, one block
//!   and many, raw and zstd blocks, with and without a zstd dictionary).
//! * A stored block, cut out of the file by that reader, must decompress with the reference
//!   `zstd` command-line tool into the very bytes the same table stores raw when packed with
//!   `--compression none`: blocks are standard zstd frames (RFC 8878).
//!
//! The inputs are invented for these tests: `tests/data/spec/harbour.tsv` and a generated table.
//! Without `python3` (or, for the zstd checks, without `zstd`) a test says so on stderr and
//! returns; CI installs both.

use std::collections::BTreeSet;
use std::fmt::Write as _;
use std::path::{Path, PathBuf};
use std::process::{Command, Output};

fn manifest_path(relative: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join(relative)
}

fn fixture() -> PathBuf {
    manifest_path("tests/data/spec/harbour.tsv")
}

fn available(program: &str) -> bool {
    Command::new(program)
        .arg("--version")
        .output()
        .is_ok_and(|o| o.status.success())
}

/// Whether `program` can run; otherwise prints why the calling test stops.
fn require(program: &str, test: &str) -> bool {
    let ok = available(program);
    if !ok {
        eprintln!("skipping {test}: `{program}` is not installed (CI installs it)");
    }
    ok
}

fn run(command: &mut Command) -> Vec<u8> {
    let out = command.output().expect("the command starts");
    assert!(
        out.status.success(),
        "{command:?} failed with {}:\n{}",
        out.status,
        String::from_utf8_lossy(&out.stderr)
    );
    out.stdout
}

fn pack(input: &Path, output: &Path, options: &[&str]) {
    run(Command::new(env!("CARGO_BIN_EXE_baler"))
        .arg("pack")
        .arg(input)
        .arg("-o")
        .arg(output)
        .arg("-q")
        .args(options));
}

fn dump(table: &Path) -> Vec<u8> {
    run(Command::new(env!("CARGO_BIN_EXE_baler"))
        .arg("dump")
        .arg(table))
}

/// The reference reader's command, reading `table` with the sources taken from the packed TSV.
fn reference(table: &Path, packed_tsv: &Path) -> Command {
    let mut c = Command::new("python3");
    c.arg(manifest_path("format-spec/reference_reader.py"))
        .arg(table)
        .arg("--sources-from-tsv")
        .arg(packed_tsv);
    c
}

fn fails(command: &mut Command) -> Output {
    let out = command.output().expect("the command starts");
    assert_eq!(
        out.status.code(),
        Some(2),
        "{command:?} should fail with status 2; stderr: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    out
}

/// Asserts that the reference reader's TSV equals `baler dump`'s, showing the first difference.
fn assert_same_dump(table: &Path, packed_tsv: &Path, what: &str) -> String {
    let expected = dump(table);
    let got = run(&mut reference(table, packed_tsv));
    if got != expected {
        let (e, g) = (
            String::from_utf8_lossy(&expected),
            String::from_utf8_lossy(&got),
        );
        let line = e.lines().zip(g.lines()).position(|(a, b)| a != b);
        panic!(
            "{what}: the reference reader differs from `baler dump` (first differing line {line:?})\n\
             baler dump:\n{e}\nreference reader:\n{g}"
        );
    }
    String::from_utf8(expected).expect("the dump is UTF-8")
}

/// `(kind, offset, length)` of every section-table entry (layout: bale-format.md, section 4).
fn sections(file: &[u8]) -> Vec<(u32, usize, usize)> {
    let le32 = |at: usize| u32::from_le_bytes(file[at..at + 4].try_into().unwrap());
    let le64 = |at: usize| u64::from_le_bytes(file[at..at + 8].try_into().unwrap()) as usize;
    (0..le32(12) as usize)
        .map(|i| {
            let at = 24 + 32 * i;
            (le32(at), le64(at + 8), le64(at + 16))
        })
        .collect()
}

fn section(file: &[u8], kind: u32) -> Option<(usize, usize)> {
    sections(file)
        .into_iter()
        .find(|&(k, _, _)| k == kind)
        .map(|(_, offset, length)| (offset, length))
}

/// Number of option blocks, from the block index's length (bale-format.md, section 5.6).
fn block_count(table: &Path) -> usize {
    let file = std::fs::read(table).unwrap();
    section(&file, 6).expect("a block index").1 / 8 - 1
}

/// A deterministic generated table of `sources` source phrases with 1..=5 options each, word
/// alignments, three scores and two counts: enough blocks to train a zstd dictionary.
fn generated_table(sources: usize) -> String {
    const WORDS: [&str; 24] = [
        "barco", "muelle", "grúa", "carga", "puerto", "ferry", "horario", "salida", "llegada",
        "andén", "billete", "niebla", "marea", "faro", "boya", "ancla", "vela", "remo", "bahía",
        "costa", "isla", "rumbo", "señal", "港",
    ];
    let mut state = 0x2545_F491_4F6C_DD1Du64;
    let mut next = move |n: u64| {
        // xorshift64: a fixed, platform-independent sequence.
        state ^= state << 13;
        state ^= state >> 7;
        state ^= state << 17;
        state % n
    };
    let mut text = String::from(
        "# sentence_pairs=5000\n# note=generated for the format test\n\
         source\ttarget\talignment\tp_t_given_s\tlex_t_given_s\tpenalty\tcount\tdf_source\n",
    );
    let mut seen = BTreeSet::new();
    while seen.len() < sources {
        let len = 1 + next(3) as usize;
        let source: Vec<&str> = (0..len).map(|_| WORDS[next(24) as usize]).collect();
        let source = source.join(" ");
        if !seen.insert(source.clone()) {
            continue;
        }
        let mut targets = BTreeSet::new();
        for _ in 0..1 + next(5) {
            let tlen = 1 + next(4) as usize;
            let target: Vec<String> = (0..tlen).map(|_| format!("w{}", next(40))).collect();
            let target = target.join(" ");
            if !targets.insert(target.clone()) {
                continue;
            }
            let links: Vec<String> = (0..next(4))
                .map(|_| format!("{}-{}", next(len as u64), next(tlen as u64)))
                .collect();
            let p = (1 + next(1000)) as f64 / 1000.0;
            let lex = (1 + next(1 << 20)) as f64 / (1u64 << 30) as f64;
            let penalty = -(next(50) as f64) / 4.0;
            let _ = writeln!(
                text,
                "{source}\t{target}\t{}\t{p}\t{lex}\t{penalty}\t{}\t{}",
                links.join(" "),
                1 + next(100_000),
                next(1 << 40)
            );
        }
    }
    text
}

#[test]
fn reference_reader_equals_dump_on_every_layout() {
    if !require("python3", "reference_reader_equals_dump_on_every_layout") {
        return;
    }
    let has_zstd = require("zstd", "the zstd layouts of this test");
    let dir = tempfile::tempdir().unwrap();
    let input = fixture();
    // (pack options, blocks expected of the 10 sources, zstd blocks)
    let layouts = [
        ("--compression none", 1, false),
        ("--compression none --bits f32", 1, false),
        ("--compression none --bits 12 --block-sources 2", 5, false),
        ("--compression none --bits 3 --block-sources 3", 4, false),
        ("", 1, true),
        ("--bits f32 --block-sources 2", 5, true),
        ("--bits 1 --block-sources 1", 10, true),
    ];
    for (k, (options, blocks, zstd)) in layouts.into_iter().enumerate() {
        if zstd && !has_zstd {
            continue;
        }
        let options: Vec<&str> = options.split_whitespace().collect();
        let table = dir.path().join(format!("layout{k}.bale"));
        pack(&input, &table, &options);
        assert_eq!(block_count(&table), blocks, "blocks of {options:?}");
        let text = assert_same_dump(&table, &input, &format!("pack {options:?}"));
        // The comparison is not between two empty or truncated outputs: both hold the
        // metadata lines, the canonical header and all 18 pairs.
        let lines: Vec<&str> = text.lines().collect();
        assert_eq!(lines.len(), 2 + 1 + 18, "{options:?}:\n{text}");
        assert_eq!(lines[0], "# sentence_pairs=1240");
        assert!(lines[1].starts_with("# corpus=ferry timetable notices"));
        assert_eq!(
            lines[2],
            "source\ttarget\talignment\tp_t_given_s\tp_s_given_t\tlex_t_given_s\tpenalty\t\
             count\tcount_source\tcooc"
        );
        if options.contains(&"12") {
            // Few distinct values per column: stored exactly, so the dump shows the number forms
            // of section 9 at their boundaries; negative zero is stored as zero (section 5.2).
            assert!(!text.contains("\t-0\t"), "{text}");
            for number in ["1e15", "9.9999e-5", "0.0001", "1e-22", "5e-324", "2.5e-6"] {
                assert!(text.contains(&format!("\t{number}\t")), "{number}:\n{text}");
            }
        }
        if options.contains(&"f32") {
            // 0.1 in binary32 is 13421773 / 2^27 (IEEE 754 round to nearest); widened to f64
            // its shortest digits are 0.10000000149011612.
            assert_eq!(f64::from(0.1f32), 13421773.0 / 134217728.0);
            assert!(text.contains("\t0.10000000149011612\t"), "{text}");
            // The binary32 values of 153.37198 and 946.85748 lie exactly halfway between two
            // 17-digit decimals (…765625): the format takes the larger magnitude (section 9),
            // where Python's repr would take the even digit.
            assert!(text.contains("\t-153.37197875976563\t"), "{text}");
            assert!(text.contains("\t946.8574829101563\t"), "{text}");
        }
    }
}

#[test]
fn reference_reader_equals_dump_with_a_trained_dictionary() {
    let test = "reference_reader_equals_dump_with_a_trained_dictionary";
    if !require("python3", test) || !require("zstd", test) {
        return;
    }
    let dir = tempfile::tempdir().unwrap();
    let input = dir.path().join("generated.tsv");
    std::fs::write(&input, generated_table(600)).unwrap();
    for options in [
        &["--block-sources", "2", "--dictionary-size", "1K"][..],
        &[
            "--block-sources",
            "5",
            "--dictionary-size",
            "2K",
            "--bits",
            "16",
        ][..],
    ] {
        let table = dir.path().join("generated.bale");
        pack(&input, &table, options);
        let dictionary = dir.path().join("dictionary");
        let _ = std::fs::remove_file(&dictionary);
        run(reference(&table, &input)
            .arg("--dictionary-out")
            .arg(&dictionary)
            .arg("-o")
            .arg(dir.path().join("reference.tsv")));
        let bytes = std::fs::read(&dictionary).unwrap_or_else(|_| {
            panic!("{options:?}: the packer trained no dictionary, so this test checks none")
        });
        // A zstd dictionary starts with the magic number 0xEC30A437, little-endian
        // (RFC 8878, section 5).
        assert_eq!(bytes[..4], [0x37, 0xA4, 0x30, 0xEC], "{options:?}");
        let text = assert_same_dump(&table, &input, &format!("pack {options:?}"));
        assert!(text.lines().count() > 600 + 3, "{options:?}");
    }
}

/// RFC 8878: a stored block is a standard zstd frame; the reference CLI decompresses it, with
/// the file's dictionary, into the raw block that `--compression none` stores.
#[test]
fn zstd_cli_decompresses_stored_blocks() {
    let test = "zstd_cli_decompresses_stored_blocks";
    if !require("python3", test) || !require("zstd", test) {
        return;
    }
    let dir = tempfile::tempdir().unwrap();
    let input = dir.path().join("generated.tsv");
    std::fs::write(&input, generated_table(400)).unwrap();
    let compressed = dir.path().join("zstd.bale");
    let raw = dir.path().join("raw.bale");
    let common = ["--block-sources", "2", "--bits", "6"];
    pack(
        &input,
        &compressed,
        &[&common[..], &["--dictionary-size", "1K"]].concat(),
    );
    pack(
        &input,
        &raw,
        &[&common[..], &["--compression", "none"]].concat(),
    );
    let dictionary = dir.path().join("dictionary");
    for block in ["0", "117", "199"] {
        let frame = dir.path().join(format!("block{block}.zst"));
        let expected = dir.path().join(format!("block{block}.raw"));
        run(reference(&compressed, &input)
            .args(["--extract-block", block])
            .arg(&frame)
            .arg("--dictionary-out")
            .arg(&dictionary)
            .arg("-o")
            .arg(dir.path().join("a.tsv")));
        run(reference(&raw, &input)
            .args(["--extract-block", block])
            .arg(&expected)
            .arg("-o")
            .arg(dir.path().join("b.tsv")));
        assert!(dictionary.exists(), "the packer trained no dictionary");
        let decompressed = dir.path().join(format!("block{block}.out"));
        run(Command::new("zstd")
            .args(["-d", "-q", "-f", "-D"])
            .arg(&dictionary)
            .arg(&frame)
            .arg("-o")
            .arg(&decompressed));
        let want = std::fs::read(&expected).unwrap();
        assert!(!want.is_empty());
        assert_eq!(
            std::fs::read(&decompressed).unwrap(),
            want,
            "block {block} decompressed by the zstd CLI differs from the raw block"
        );
        // Without the dictionary the frame cannot be decoded: it really depends on it.
        let without = Command::new("zstd")
            .args(["-d", "-q", "-f", "-c"])
            .arg(&frame)
            .output()
            .unwrap();
        assert!(
            !without.status.success(),
            "block {block} decoded without its dictionary"
        );
    }

    // A table too small to train a dictionary: its one frame decompresses on its own.
    let small = dir.path().join("small.bale");
    let small_raw = dir.path().join("small-raw.bale");
    pack(&fixture(), &small, &[]);
    pack(&fixture(), &small_raw, &["--compression", "none"]);
    let frame = dir.path().join("small.zst");
    let expected = dir.path().join("small.raw");
    let dictionary = dir.path().join("small-dictionary");
    run(reference(&small, &fixture())
        .args(["--extract-block", "0"])
        .arg(&frame)
        .arg("--dictionary-out")
        .arg(&dictionary));
    run(reference(&small_raw, &fixture())
        .args(["--extract-block", "0"])
        .arg(&expected));
    assert!(
        !dictionary.exists(),
        "a dictionary was trained on one block"
    );
    let out = run(Command::new("zstd").args(["-d", "-q", "-c"]).arg(&frame));
    assert_eq!(out, std::fs::read(&expected).unwrap());
}

#[test]
fn reference_reader_takes_a_source_list_in_byte_order() {
    if !require(
        "python3",
        "reference_reader_takes_a_source_list_in_byte_order",
    ) {
        return;
    }
    let dir = tempfile::tempdir().unwrap();
    let input = dir.path().join("generated.tsv");
    let text = generated_table(300);
    std::fs::write(&input, &text).unwrap();
    let table = dir.path().join("t.bale");
    pack(
        &input,
        &table,
        &["--compression", "none", "--block-sources", "7"],
    );
    // The sources in UTF-8 byte order (BTreeSet<String> orders by bytes), taken from the input.
    let sources: BTreeSet<&str> = text
        .lines()
        .skip(3)
        .map(|l| l.split('\t').next().unwrap())
        .collect();
    assert_eq!(sources.len(), 300);
    let list = dir.path().join("sources.txt");
    let joined: String = sources.iter().map(|s| format!("{s}\n")).collect();
    std::fs::write(&list, &joined).unwrap();
    let script = manifest_path("format-spec/reference_reader.py");
    let got = run(Command::new("python3")
        .arg(&script)
        .arg(&table)
        .arg("--sources")
        .arg(&list));
    let expected = dump(&table);
    assert_eq!(got, expected);
    // The same list on standard input.
    let mut child = Command::new("python3")
        .arg(&script)
        .arg(&table)
        .args(["--sources", "-"])
        .stdin(std::process::Stdio::piped())
        .stdout(std::process::Stdio::piped())
        .spawn()
        .unwrap();
    std::io::Write::write_all(&mut child.stdin.take().unwrap(), joined.as_bytes()).unwrap();
    let out = child.wait_with_output().unwrap();
    assert!(out.status.success());
    assert_eq!(out.stdout, expected);

    // Out of order, or one short, the list is refused rather than misattributed.
    let mut shuffled: Vec<&str> = sources.iter().copied().collect();
    shuffled.swap(10, 11);
    std::fs::write(&list, shuffled.join("\n") + "\n").unwrap();
    let out = fails(
        Command::new("python3")
            .arg(&script)
            .arg(&table)
            .arg("--sources")
            .arg(&list),
    );
    assert!(String::from_utf8_lossy(&out.stderr).contains("byte order"));
    std::fs::write(&list, shuffled[1..].join("\n") + "\n").unwrap();
    fails(
        Command::new("python3")
            .arg(&script)
            .arg(&table)
            .arg("--sources")
            .arg(&list),
    );
}

#[test]
fn reference_reader_verifies_every_checksum() {
    if !require("python3", "reference_reader_verifies_every_checksum") {
        return;
    }
    let dir = tempfile::tempdir().unwrap();
    let table = dir.path().join("t.bale");
    pack(&fixture(), &table, &["--compression", "none"]);
    let good = std::fs::read(&table).unwrap();
    // One flipped bit in the middle of each section, then in the section table.
    let names = [
        (1, "metadata"),
        (2, "codebooks"),
        (3, "vocabulary"),
        (4, "targets"),
        (5, "source-index"),
        (6, "block-index"),
        (7, "options"),
    ];
    let damaged = dir.path().join("damaged.bale");
    for (kind, name) in names {
        let (offset, length) = section(&good, kind).expect("section present");
        let mut bad = good.clone();
        bad[offset + length / 2] ^= 0x10;
        std::fs::write(&damaged, &bad).unwrap();
        let out = fails(&mut reference(&damaged, &fixture()));
        let stderr = String::from_utf8_lossy(&out.stderr);
        assert!(
            stderr.contains(&format!("the {name} section fails its checksum")),
            "{name}: {stderr}"
        );
    }
    let mut bad = good.clone();
    bad[24 + 8] ^= 0x01; // the first entry's offset
    std::fs::write(&damaged, &bad).unwrap();
    let out = fails(&mut reference(&damaged, &fixture()));
    assert!(String::from_utf8_lossy(&out.stderr).contains("section table fail their checksum"));
}

/// The frozen files of format 1.0 (`tests/data/spec/compat/1.0/README.md`) still read the same,
/// with baler's reader and with the reference reader.
#[test]
fn compatibility_files_of_format_1_0_still_read() {
    let dir = manifest_path("tests/data/spec/compat/1.0");
    let cases = [
        ("harbour-8bit-zstd", "harbour.tsv", true),
        ("harbour-f32-none", "harbour.tsv", false),
        ("generated-4bit-dictionary", "generated.tsv", true),
    ];
    let python = require("python3", "the reference-reader part of this test");
    let zstd = require(
        "zstd",
        "the zstd files of this test's reference-reader part",
    );
    for (name, input, compressed) in cases {
        let table = dir.join(format!("{name}.bale"));
        let expected = std::fs::read(dir.join(format!("{name}.dump.tsv"))).unwrap();
        assert!(!expected.is_empty());
        assert!(
            dump(&table) == expected,
            "{name}: baler dump no longer reproduces the frozen dump"
        );
        run(Command::new(env!("CARGO_BIN_EXE_baler"))
            .args(["inspect", "--verify"])
            .arg(&table));
        if python && (zstd || !compressed) {
            let got = run(&mut reference(&table, &dir.join(input)));
            assert!(
                got == expected,
                "{name}: the reference reader differs from the frozen dump"
            );
        }
    }
}
