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

use crate::util::{bin as baler, repo as manifest_path};

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
    run(baler()
        .arg("pack")
        .arg(input)
        .arg("-o")
        .arg(output)
        .arg("-q")
        .args(options));
}

fn dump(table: &Path) -> Vec<u8> {
    run(baler().arg("dump").arg(table))
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

/// Number of source blocks, from the block index's length (bale-format.md, section 5.5).
fn block_count(table: &Path) -> usize {
    let file = std::fs::read(table).unwrap();
    section(&file, 7).expect("a block index").1 / 16 - 1
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
    let dir = tempfile::tempdir().unwrap();
    let input = fixture();
    // (pack options, blocks expected of the 10 sources)
    let layouts = [
        ("--compression none", 1),
        ("--compression none --bits f32", 1),
        (
            "--compression none --bits 12 --block-sources 2 --group-targets 3",
            5,
        ),
        ("--compression none --bits 3 --block-sources 3", 4),
        ("", 1),
        ("--bits f32 --block-sources 2 --group-targets 1", 5),
        ("--bits 1 --block-sources 1 --group-targets 2", 10),
        ("--bits 12 --block-sources 4", 3),
    ];
    for (k, (options, blocks)) in layouts.into_iter().enumerate() {
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

/// A larger generated table (alignments, counts, 16-bit and f32 codes, many blocks and target
/// groups) through the rANS coder: the reference reader's independent decoder agrees.
#[test]
fn reference_reader_equals_dump_on_coded_blocks_and_groups() {
    let test = "reference_reader_equals_dump_on_coded_blocks_and_groups";
    if !require("python3", test) {
        return;
    }
    let dir = tempfile::tempdir().unwrap();
    let input = dir.path().join("generated.tsv");
    std::fs::write(&input, generated_table(600)).unwrap();
    for options in [
        &["--block-sources", "2", "--group-targets", "5"][..],
        &["--block-sources", "64", "--bits", "16"][..],
        &[
            "--block-sources",
            "7",
            "--bits",
            "f32",
            "--group-targets",
            "64",
        ][..],
    ] {
        let table = dir.path().join("generated.bale");
        pack(&input, &table, options);
        let file = std::fs::read(&table).unwrap();
        assert!(
            section(&file, 4).is_some(),
            "{options:?}: rANS models present"
        );
        let text = assert_same_dump(&table, &input, &format!("pack {options:?}"));
        assert!(text.lines().count() > 600 + 3, "{options:?}");
    }
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

    // Out of order, or one short, the list fails the cross-check against the decoded keys.
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
    assert!(String::from_utf8_lossy(&out.stderr).contains("differ from the given ones"));
    std::fs::write(&list, shuffled[1..].join("\n") + "\n").unwrap();
    fails(
        Command::new("python3")
            .arg(&script)
            .arg(&table)
            .arg("--sources")
            .arg(&list),
    );
}

/// Writes to `damaged` a copy of the packed fixture `good` with one bit flipped in the middle
/// of section `kind`, and asserts that the reference reader refuses it with an error containing
/// `message`.
fn assert_reference_names_damaged_section(good: &[u8], kind: u32, message: &str, damaged: &Path) {
    let (offset, length) = section(good, kind).expect("section present");
    let mut bad = good.to_vec();
    bad[offset + length / 2] ^= 0x10;
    std::fs::write(damaged, &bad).unwrap();
    let out = fails(&mut reference(damaged, &fixture()));
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(stderr.contains(message), "{message}: {stderr}");
}

#[test]
fn reference_reader_verifies_every_checksum() {
    if !require("python3", "reference_reader_verifies_every_checksum") {
        return;
    }
    let dir = tempfile::tempdir().unwrap();
    let table = dir.path().join("t.bale");
    pack(&fixture(), &table, &[]);
    let good = std::fs::read(&table).unwrap();
    // One flipped bit in the middle of each section, then in the section table. The two large
    // sections are checked block by block and group by group (bale-format.md, section 6).
    let names = [
        (1, "the metadata section fails its checksum"),
        (2, "the codebooks section fails its checksum"),
        (3, "the vocabulary section fails its checksum"),
        (4, "the models section fails its checksum"),
        (5, "the target-index section fails its checksum"),
        (6, "target group 0 fails its checksum"),
        (7, "the block-index section fails its checksum"),
        (8, "the block-keys section fails its checksum"),
        (9, "block 0 fails its checksum"),
    ];
    let damaged = dir.path().join("damaged.bale");
    for (kind, message) in names {
        assert_reference_names_damaged_section(&good, kind, message, &damaged);
    }
    let mut bad = good.clone();
    bad[24 + 8] ^= 0x01; // the first entry's offset
    std::fs::write(&damaged, &bad).unwrap();
    let out = fails(&mut reference(&damaged, &fixture()));
    assert!(String::from_utf8_lossy(&out.stderr).contains("section table fail their checksum"));
}

/// Tables in the `direct` layout (bale-format.md, section 12): the reference reader decodes
/// every record, checks every chunk, every hash slot (FNV-1a 64 as specified there, computed
/// independently in Python) and prefix flag, and equals `baler dump`; the same table in the
/// compact layout dumps identically.
#[test]
fn reference_reader_equals_dump_on_direct_tables() {
    if !require("python3", "reference_reader_equals_dump_on_direct_tables") {
        return;
    }
    let dir = tempfile::tempdir().unwrap();
    let generated = dir.path().join("generated.tsv");
    std::fs::write(&generated, generated_table(600)).unwrap();
    for (input, options) in [
        (fixture(), &[][..]),
        (fixture(), &["--bits", "f32"][..]),
        (generated.clone(), &["--bits", "16"][..]),
        (generated.clone(), &["--bits", "3"][..]),
    ] {
        let table = dir.path().join("direct.bale");
        let mut args = vec!["--layout", "direct"];
        args.extend_from_slice(options);
        pack(&input, &table, &args);
        let file = std::fs::read(&table).unwrap();
        assert_eq!(u16::from_le_bytes([file[10], file[11]]), 1, "version 2.1");
        assert!(section(&file, 10).is_some() && section(&file, 9).is_none());
        let text = assert_same_dump(&table, &input, &format!("pack {args:?}"));
        let compact = dir.path().join("compact.bale");
        pack(&input, &compact, options);
        assert!(
            dump(&compact) == text.as_bytes(),
            "{args:?}: layouts dump differently"
        );
        run(baler().args(["inspect", "--verify"]).arg(&table));
    }
}

#[test]
fn reference_reader_verifies_every_chunk_of_a_direct_table() {
    if !require(
        "python3",
        "reference_reader_verifies_every_chunk_of_a_direct_table",
    ) {
        return;
    }
    let dir = tempfile::tempdir().unwrap();
    let table = dir.path().join("t.bale");
    pack(&fixture(), &table, &["--layout", "direct"]);
    let good = std::fs::read(&table).unwrap();
    let names = [
        (1, "the metadata section fails its checksum"),
        (2, "the codebooks section fails its checksum"),
        (3, "the vocabulary section fails its checksum"),
        (13, "the chunks section fails its checksum"),
        (10, "hash chunk 0 fails its checksum"),
        (11, "records chunk 0 fails its checksum"),
        (12, "text chunk 0 fails its checksum"),
    ];
    let damaged = dir.path().join("damaged.bale");
    for (kind, message) in names {
        assert_reference_names_damaged_section(&good, kind, message, &damaged);
        // baler's own reader names the same chunk on a plain dump (no --verify), or for the
        // hash, which a dump does not read, on a lookup.
        if [10, 11, 12].contains(&kind) {
            let mut command = baler();
            match kind {
                10 => command.arg("lookup").arg(&damaged).arg("el muelle"),
                _ => command.arg("dump").arg(&damaged),
            };
            let out = command.output().unwrap();
            let stderr = String::from_utf8_lossy(&out.stderr);
            assert!(
                !out.status.success() && stderr.contains(message),
                "{stderr}"
            );
        }
    }
}

/// The frozen files of format 2.1 (`tests/data/spec/compat/2.1/README.md`, the direct layout)
/// still read the same, with baler's reader and with the reference reader.
#[test]
fn compatibility_files_of_format_2_1_still_read() {
    assert_frozen_files_still_read(
        "tests/data/spec/compat/2.1",
        &[
            ("harbour-8bit-direct", "harbour.tsv"),
            ("generated-16bit-direct", "generated.tsv"),
        ],
    );
}

/// The frozen files of format 1.0 (`tests/data/spec/compat/1.0/README.md`) are refused with a
/// message that says how to repack them (format 2.0 keeps no 1.0 reader).
#[test]
fn compatibility_files_of_format_1_0_are_refused_with_how_to_repack() {
    let dir = manifest_path("tests/data/spec/compat/1.0");
    for name in [
        "harbour-8bit-zstd",
        "harbour-f32-none",
        "generated-4bit-dictionary",
    ] {
        let table = dir.join(format!("{name}.bale"));
        let out = baler().arg("dump").arg(&table).output().unwrap();
        assert!(!out.status.success(), "{name}");
        let stderr = String::from_utf8_lossy(&out.stderr);
        assert!(
            stderr.contains("packed format 1.0") && stderr.contains("repack"),
            "{name}: {stderr}"
        );
    }
}

/// The frozen files of format 2.0 (`tests/data/spec/compat/2.0/README.md`) still read the same,
/// with baler's reader and with the reference reader.
#[test]
fn compatibility_files_of_format_2_0_still_read() {
    assert_frozen_files_still_read(
        "tests/data/spec/compat/2.0",
        &[
            ("harbour-8bit-rans", "harbour.tsv"),
            ("harbour-f32-none", "harbour.tsv"),
            ("generated-16bit-rans", "generated.tsv"),
        ],
    );
}

/// Checks each frozen table `(name, input)` of the compatibility folder `folder` (relative to the
/// crate): `baler dump` of `name.bale` reproduces `name.dump.tsv` byte for byte, `inspect
/// --verify` accepts it, and (where python3 is present) the reference reader, given the table
/// and its source `input`, prints the same dump.
fn assert_frozen_files_still_read(folder: &str, cases: &[(&str, &str)]) {
    let dir = manifest_path(folder);
    let python = require("python3", "the reference-reader part of this test");
    for &(name, input) in cases {
        let table = dir.join(format!("{name}.bale"));
        let expected = std::fs::read(dir.join(format!("{name}.dump.tsv"))).unwrap();
        assert!(!expected.is_empty());
        assert!(
            dump(&table) == expected,
            "{name}: baler dump no longer reproduces the frozen dump"
        );
        run(baler().args(["inspect", "--verify"]).arg(&table));
        if python {
            let got = run(&mut reference(&table, &dir.join(input)));
            assert!(
                got == expected,
                "{name}: the reference reader differs from the frozen dump"
            );
        }
    }
}

/// The frozen files of format 2.2 (`tests/data/spec/compat/2.2/README.md`, with resume points
/// in the block-skips and group-skips sections) read the same with baler's reader and the
/// reference reader, which checks every resume point against its stream; a lookup of every
/// source, which resumes at those points, gives the frozen dump's options.
#[test]
fn compatibility_files_of_format_2_2_still_read() {
    let dir = manifest_path("tests/data/spec/compat/2.2");
    let python = require("python3", "the reference-reader part of this test");
    let name = "generated-8bit-rans";
    let table = dir.join(format!("{name}.bale"));
    let expected = std::fs::read(dir.join(format!("{name}.dump.tsv"))).unwrap();
    assert!(dump(&table) == expected, "{name}: baler dump differs");
    run(baler().args(["inspect", "--verify"]).arg(&table));
    let opened = baler::Table::open(&table).unwrap();
    assert_eq!(opened.minor_version(), 2);
    let text = String::from_utf8(expected.clone()).unwrap();
    let mut rows = text.lines().filter(|l| !l.starts_with('#')).skip(1);
    let mut seen = 0;
    for source in opened.source_phrases() {
        let source = source.unwrap();
        for o in opened.lookup(&source).unwrap().iter() {
            let row = rows.next().unwrap();
            let mut cols = row.split('\t');
            assert_eq!(cols.next(), Some(source.as_str()));
            assert_eq!(cols.next(), Some(o.target()), "{source}");
            seen += 1;
        }
    }
    assert_eq!(seen, opened.pairs());
    if python {
        let got = run(&mut reference(&table, &dir.join("generated.tsv")));
        assert!(got == expected, "{name}: the reference reader differs");
    }
}
