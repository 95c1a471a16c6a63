//! Packing, lookup, dump and inspect: round trips, damaged files, command-line behaviour.

use std::collections::BTreeMap;

use baler::format::Layout;
use baler::pack::{pack_tsv, PackOptions};
use baler::table::{Header, PhrasePair, TsvWriter};
use baler::Table;
use proptest::prelude::*;
use proptest::strategy::ValueTree;

use crate::util::{baler, baler_ok, s};

/// A random table: schema, metadata and unique (source, target) pairs.
#[derive(Clone, Debug)]
struct RandomTable {
    header: Header,
    pairs: Vec<PhrasePair>,
}

impl RandomTable {
    fn tsv(&self) -> String {
        let mut w = TsvWriter::new(Vec::new(), &self.header).unwrap();
        for p in &self.pairs {
            w.write_pair(p).unwrap();
        }
        String::from_utf8(w.into_inner()).unwrap()
    }
}

const WORDS: &[&str] = &[
    "a", "b", "c", "dd", "eé", "f", "gg", "h", "über", "kai", "лес", "x",
];

fn phrase() -> impl Strategy<Value = String> {
    prop::collection::vec(prop::sample::select(WORDS), 1..4).prop_map(|w| w.join(" "))
}

fn random_table() -> impl Strategy<Value = RandomTable> {
    let schema = (
        0usize..4,
        prop::collection::vec(any::<bool>(), 6),
        any::<bool>(),
    );
    (
        schema,
        prop::collection::btree_map((phrase(), phrase()), any::<u64>(), 1..120),
    )
        .prop_map(|((n_scores, count_mask, alignment), keys)| {
            let mut header = Header::default();
            let names = ["p_t_given_s", "p_s_given_t", "lex_t_given_s", "weight"];
            header.schema.scores = names[..n_scores].iter().map(|s| s.to_string()).collect();
            header.schema.counts = baler::table::CountColumn::ALL
                .into_iter()
                .zip(count_mask)
                .filter_map(|(c, keep)| keep.then_some(c))
                .collect();
            header.schema.alignment = alignment;
            header.metadata.set("sentence_pairs", "1000");
            let pairs = keys
                .into_iter()
                .map(|((source, target), seed)| {
                    let sl = source.split(' ').count() as u16;
                    let tl = target.split(' ').count() as u16;
                    let mut x = seed;
                    let mut next = || {
                        x = x
                            .wrapping_mul(6364136223846793005)
                            .wrapping_add(1442695040888963407);
                        x >> 11
                    };
                    let scores = (0..n_scores)
                        .map(|c| {
                            let u = (next() % 1_000_000 + 1) as f64 / 1_000_000.0;
                            if c == 3 {
                                u * 10.0 - 5.0
                            } else {
                                u
                            }
                        })
                        .collect();
                    let counts = header.schema.counts.iter().map(|_| next() % 5000).collect();
                    let links = if alignment {
                        (0..sl)
                            .map(|i| (i, (next() % u64::from(tl)) as u16))
                            .collect()
                    } else {
                        Vec::new()
                    };
                    PhrasePair {
                        source,
                        target,
                        alignment: links,
                        scores,
                        counts,
                    }
                })
                .collect();
            RandomTable { header, pairs }
        })
}

fn by_key(pairs: impl IntoIterator<Item = PhrasePair>) -> BTreeMap<(String, String), PhrasePair> {
    pairs
        .into_iter()
        .map(|p| ((p.source.clone(), p.target.clone()), p))
        .collect()
}

fn pack(table: &RandomTable, options: &PackOptions) -> (tempfile::TempDir, Table) {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("t.bale");
    pack_tsv(table.tsv().as_bytes(), "t.tsv", &path, options).unwrap();
    let packed = Table::open(&path).unwrap();
    (dir, packed)
}

/// Round trip: every pair comes back with exact counts and alignment, and scores within the
/// quantization error the file itself reports.
fn check_round_trip(table: &RandomTable, options: &PackOptions) {
    let (_dir, packed) = pack(table, options);
    assert_eq!(packed.header(), &table.header);
    let back: Vec<PhrasePair> = packed.pairs_iter().collect::<baler::Result<_>>().unwrap();
    assert_eq!(back.len(), table.pairs.len());
    let original = by_key(table.pairs.clone());
    let quant = &packed.meta().quantization;
    for p in &back {
        let o = &original[&(p.source.clone(), p.target.clone())];
        assert_eq!((&p.alignment, &p.counts), (&o.alignment, &o.counts));
        for (c, (&got, &want)) in p.scores.iter().zip(&o.scores).enumerate() {
            match options.bits {
                None => assert_eq!(got, f64::from(want as f32)),
                Some(_) => {
                    let err = if quant[c].domain == "log" {
                        (got.ln() - want.ln()).abs()
                    } else {
                        (got - want).abs()
                    };
                    assert!(
                        err <= quant[c].max_error * (1.0 + 1e-9) + 1e-12,
                        "{err} > {}",
                        quant[c].max_error
                    );
                }
            }
        }
    }
    // Every source found by lookup, with options in the documented order.
    let order = packed
        .schema()
        .score_index("p_t_given_s")
        .or((!packed.schema().scores.is_empty()).then_some(0));
    let mut sources: Vec<&str> = table.pairs.iter().map(|p| p.source.as_str()).collect();
    sources.dedup();
    for source in sources {
        let options = packed.lookup(source).unwrap();
        let want: Vec<&PhrasePair> = table.pairs.iter().filter(|p| p.source == source).collect();
        assert_eq!(options.len(), want.len());
        if let Some(c) = order {
            let scores: Vec<f64> = options.iter().map(|o| o.scores()[c]).collect();
            assert!(scores.windows(2).all(|w| w[0] >= w[1]), "{scores:?}");
        }
    }
    assert!(packed.lookup("zz top").unwrap().is_empty());
    packed.verify().unwrap();
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 48, ..ProptestConfig::default() })]

    #[test]
    fn round_trip_quantized(table in random_table(), bits in 1u8..=16, block in 1u32..20) {
        check_round_trip(&table, &PackOptions { bits: Some(bits), sources_per_block: block, ..Default::default() });
    }

    #[test]
    fn round_trip_direct(table in random_table(), bits in prop::option::of(1u8..=16)) {
        check_round_trip(&table, &PackOptions { bits, layout: Layout::Direct, ..Default::default() });
    }

    #[test]
    fn round_trip_f32_uncompressed(table in random_table(), block in 1u32..5) {
        check_round_trip(&table, &PackOptions {
            bits: None,
            sources_per_block: block,
            compression: baler::format::Compression::None,
            ..Default::default()
        });
    }

    /// Spans agree with looking up every sub-phrase one by one, in either layout; both layouts
    /// give the same spans.
    #[test]
    fn spans_match_single_lookups(table in random_table(), sentence in prop::collection::vec(prop::sample::select(WORDS), 0..12), direct in any::<bool>()) {
        let layout = if direct { Layout::Direct } else { Layout::Compact };
        let (_dir, packed) = pack(&table, &PackOptions { layout, ..Default::default() });
        let spans = packed.spans(&sentence, 3).unwrap();
        let mut expected = Vec::new();
        for start in 0..sentence.len() {
            for end in start + 1..=(start + 3).min(sentence.len()) {
                let phrase = sentence[start..end].join(" ");
                let options = packed.lookup(&phrase).unwrap();
                if !options.is_empty() {
                    expected.push((start, end, options.iter().map(|o| o.target().to_string()).collect::<Vec<_>>()));
                }
            }
        }
        let got: Vec<_> = spans.iter().map(|s| (s.start, s.end, s.options.iter().map(|o| o.target().to_string()).collect::<Vec<_>>())).collect();
        prop_assert_eq!(&got, &expected);
        let other = if direct { Layout::Compact } else { Layout::Direct };
        let (_dir2, packed2) = pack(&table, &PackOptions { layout: other, ..Default::default() });
        let spans2 = packed2.spans(&sentence, 3).unwrap();
        let got2: Vec<_> = spans2.iter().map(|s| (s.start, s.end, s.options.iter().map(|o| o.target().to_string()).collect::<Vec<_>>())).collect();
        prop_assert_eq!(got2, expected);
    }
}

/// The packed sample of [`pack_sample`] and what the damage cases ask of it, built once and
/// shared by every case (building it per case cost most of these tests' time).
struct Sample {
    bytes: Vec<u8>,
    /// Byte ranges covered by a checksum: header fields, section table, every section.
    checksummed: Vec<std::ops::Range<usize>>,
    /// End of the last section (zero padding may follow).
    data_end: usize,
}

fn sample(layout: Layout) -> &'static Sample {
    static COMPACT: std::sync::OnceLock<Sample> = std::sync::OnceLock::new();
    static DIRECT: std::sync::OnceLock<Sample> = std::sync::OnceLock::new();
    let cell = match layout {
        Layout::Compact => &COMPACT,
        Layout::Direct => &DIRECT,
    };
    cell.get_or_init(|| {
        let bytes = pack_sample(layout);
        let table = Table::from_bytes(bytes.clone()).unwrap();
        let sections = table.section_sizes();
        let entries =
            baler::format::FILE_HEADER_LEN + sections.len() * baler::format::SECTION_ENTRY_LEN;
        let mut checksummed = vec![0..16, baler::format::FILE_HEADER_LEN..entries];
        checksummed.extend(
            sections
                .iter()
                .map(|s| s.offset as usize..(s.offset + s.length) as usize),
        );
        let data_end = sections.iter().map(|s| s.offset + s.length).max().unwrap() as usize;
        Sample {
            bytes,
            checksummed,
            data_end,
        }
    })
}

/// A table with every kind of column, packed into several small blocks (compact) or into
/// several chunks (direct: the table is made large enough).
fn pack_sample(layout: Layout) -> Vec<u8> {
    let mut runner = proptest::test_runner::TestRunner::deterministic();
    let mut table = random_table().new_tree(&mut runner).unwrap().current();
    while table.pairs.len() < 60
        || table.header.schema.scores.is_empty()
        || !table.header.schema.alignment
    {
        table = random_table().new_tree(&mut runner).unwrap().current();
    }
    if layout == Layout::Direct {
        // Four times the pairs (copies with a distinct first word), so that the records span
        // several checksummed chunks.
        let copies: Vec<PhrasePair> = (0..3)
            .flat_map(|k| {
                table.pairs.iter().map(move |p| PhrasePair {
                    source: format!("n{k} {}", p.source),
                    ..p.clone()
                })
            })
            .collect();
        table.pairs.extend(copies);
    }
    table.header.schema.counts = baler::table::CountColumn::ALL.to_vec();
    for p in &mut table.pairs {
        p.counts = vec![3, 4, 5, 1, 2, 2];
    }
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("sample.bale");
    let options = PackOptions {
        sources_per_block: 3,
        layout,
        ..Default::default()
    };
    pack_tsv(table.tsv().as_bytes(), "t.tsv", &path, &options).unwrap();
    std::fs::read(&path).unwrap()
}

/// Everything a reader does with a file; must return (Ok or Err), never panic or hang.
fn exercise(bytes: Vec<u8>) -> Result<(), String> {
    let table = Table::from_bytes(bytes).map_err(|e| e.to_string())?;
    let mut first_error = None;
    for pair in table.pairs_iter() {
        if let Err(e) = pair {
            first_error.get_or_insert(e.to_string());
            break;
        }
    }
    for phrase in WORDS.iter().chain(["a b", "b c d", "лес x"].iter()) {
        if let Err(e) = table.lookup(phrase) {
            first_error.get_or_insert(e.to_string());
        }
    }
    if let Err(e) = table.spans(WORDS, 4) {
        first_error.get_or_insert(e.to_string());
    }
    let verified = table.verify().map_err(|e| e.to_string());
    match (first_error, verified) {
        (_, Err(e)) => Err(e),
        (Some(e), Ok(_)) => panic!("verify passed but a read failed: {e}"),
        (None, Ok(_)) => Ok(()),
    }
}

/// Whether byte `position` of the sample is covered by a checksum.
fn checksummed(layout: Layout, position: usize) -> bool {
    sample(layout)
        .checksummed
        .iter()
        .any(|r| r.contains(&position))
}

/// Mutated-file cases: `BALER_FUZZ_CASES` (CI runs a longer smoke), else 400.
fn fuzz_cases() -> u32 {
    std::env::var("BALER_FUZZ_CASES")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(400)
}

proptest! {
    #![proptest_config(ProptestConfig { cases: fuzz_cases(), ..ProptestConfig::default() })]

    /// Mutated files, in either layout: reported, never a panic; any change to checksummed
    /// bytes is detected.
    #[test]
    fn damaged_files_are_reported(position in any::<prop::sample::Index>(), flip in 1u8..=255, direct in any::<bool>()) {
        let layout = if direct { Layout::Direct } else { Layout::Compact };
        let mut bytes = sample(layout).bytes.clone();
        let i = position.index(bytes.len());
        bytes[i] ^= flip;
        let outcome = exercise(bytes);
        if checksummed(layout, i) {
            prop_assert!(outcome.is_err(), "a change at byte {} went unnoticed", i);
        }
    }

    /// Truncated files are reported at open.
    #[test]
    fn truncated_files_are_reported(cut in any::<prop::sample::Index>(), direct in any::<bool>()) {
        let layout = if direct { Layout::Direct } else { Layout::Compact };
        // Cutting only the zero padding after the last section leaves a valid file.
        let n = cut.index(sample(layout).data_end);
        prop_assert!(Table::from_bytes(sample(layout).bytes[..n].to_vec()).is_err());
    }
}

#[test]
fn undamaged_sample_passes_every_check() {
    exercise(sample(Layout::Compact).bytes.clone()).unwrap();
    exercise(sample(Layout::Direct).bytes.clone()).unwrap();
}

/// In a direct table, one flipped bit in any byte of the hash, records or text is reported by
/// the first lookup, span walk or iteration that reads it, as corrupt data naming the section
/// and chunk, before any answer is given (no `verify` needed): every byte of those sections is
/// flipped in turn and every source looked up, and each read either errs or agrees with the
/// undamaged table.
#[test]
fn direct_reads_never_answer_from_damaged_bytes() {
    let good_bytes = sample(Layout::Direct).bytes.clone();
    let good = Table::from_bytes(good_bytes.clone()).unwrap();
    let sources: Vec<String> = good.source_phrases().collect::<baler::Result<_>>().unwrap();
    // A source's options, then every span of its words (which walks its prefix keys).
    let answer = |t: &Table, s: &str| -> baler::Result<Vec<(String, Vec<f64>)>> {
        let mut got: Vec<(String, Vec<f64>)> = t
            .lookup(s)?
            .iter()
            .map(|o| (o.target().to_string(), o.scores().to_vec()))
            .collect();
        let words: Vec<&str> = s.split(' ').collect();
        for span in t.spans(&words, 7)? {
            got.push((format!("{}..{}", span.start, span.end), Vec::new()));
            for o in span.options.iter() {
                got.push((o.target().to_string(), vec![o.score(0).unwrap_or(-1.0)]));
            }
        }
        Ok(got)
    };
    let want: Vec<_> = sources.iter().map(|s| answer(&good, s).unwrap()).collect();
    let mut reported = 0;
    for s in good.section_sizes() {
        if !matches!(s.kind.name(), "hash" | "records" | "text") {
            continue;
        }
        for i in (s.offset..s.offset + s.length).step_by(7) {
            let mut bytes = good_bytes.clone();
            bytes[i as usize] ^= 0x04;
            let bad = Table::from_bytes(bytes).unwrap();
            let mut failed = false;
            for (source, want) in sources.iter().zip(&want) {
                match answer(&bad, source) {
                    Ok(got) => assert_eq!(&got, want, "byte {i} of {}", s.kind.name()),
                    Err(e) => {
                        let text = e.to_string();
                        assert!(
                            text.contains("chunk") && text.contains("<memory>"),
                            "{text}"
                        );
                        failed = true;
                    }
                }
            }
            // Every byte belongs to a slot, a record (a source's or a prefix key's) or a
            // source's text, so a chunk of it is read by these lookups and span walks.
            reported += usize::from(failed);
            assert!(failed, "byte {i} of {} was never reported", s.kind.name());
        }
    }
    assert!(reported > 100);
}

#[test]
fn table_is_send_and_sync() {
    fn assert_send_sync<T: Send + Sync>() {}
    assert_send_sync::<Table>();
}

#[test]
fn cli_pack_lookup_dump_inspect() {
    let dir = tempfile::tempdir().unwrap();
    let tsv = dir.path().join("t.tsv");
    // Unsorted input with metadata, alignment and counts.
    std::fs::write(
        &tsv,
        "# sentence_pairs=40\nsource\ttarget\talignment\tp_t_given_s\tcount\n\
         la nave\tthe ship\t0-0 1-1\t0.25\t1\nel barco\tthe boat\t0-0 1-1\t0.5\t2\n\
         el barco\tthe ship\t0-0 1-1\t0.5\t2\nla nave\tthe vessel\t0-0 1-1\t0.75\t3\n",
    )
    .unwrap();
    let bale = dir.path().join("t.bale");
    baler_ok(&["pack", s(&tsv), "-o", s(&bale), "-q"]);
    let dumped = baler_ok(&["dump", s(&bale)]);
    assert_eq!(
        dumped,
        "# sentence_pairs=40\nsource\ttarget\talignment\tp_t_given_s\tcount\n\
         el barco\tthe boat\t0-0 1-1\t0.5\t2\nel barco\tthe ship\t0-0 1-1\t0.5\t2\n\
         la nave\tthe vessel\t0-0 1-1\t0.75\t3\nla nave\tthe ship\t0-0 1-1\t0.25\t1\n"
    );
    let out = baler(&["lookup", s(&bale), "la nave", "el mar"], None);
    assert_eq!(out.status.code(), Some(0));
    let stdout = String::from_utf8(out.stdout).unwrap();
    assert_eq!(stdout.lines().count(), 4, "{stdout}"); // metadata, header, two options
    assert!(
        stdout
            .lines()
            .nth(2)
            .unwrap()
            .starts_with("la nave\tthe vessel\t"),
        "{stdout}"
    );
    assert!(String::from_utf8_lossy(&out.stderr).contains("1 of 2 phrases not in the table"));
    let out = baler(&["lookup", s(&bale)], Some("el mar\n"));
    assert_eq!(out.status.code(), Some(1));
    let out = baler(&["lookup", s(&bale)], Some("el barco\n"));
    assert_eq!(String::from_utf8(out.stdout).unwrap().lines().count(), 4);
    let report = baler_ok(&["inspect", "--verify", s(&bale)]);
    assert!(report.contains("pairs      4"), "{report}");
    assert!(report.contains("all good"), "{report}");
    // Dump to a file: same text; compressed by extension.
    let back = dir.path().join("back.tsv.zst");
    baler_ok(&["dump", s(&bale), "-o", s(&back)]);
    let text = std::io::read_to_string(baler::files::open_input(&back).unwrap()).unwrap();
    assert_eq!(text, dumped);
}

#[test]
fn cli_errors_name_file_and_line_and_leave_nothing() {
    let dir = tempfile::tempdir().unwrap();
    let tsv = dir.path().join("bad.tsv");
    let bale = dir.path().join("bad.bale");
    std::fs::write(&tsv, "source\ttarget\tp\na\tb\t0.5\nc\td\tnope\n").unwrap();
    let out = baler(&["pack", s(&tsv), "-o", s(&bale), "-q"], None);
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(
        err.contains("bad.tsv:3:") && err.contains("not a number"),
        "{err}"
    );
    assert!(!bale.exists());
    assert_eq!(
        std::fs::read_dir(dir.path()).unwrap().count(),
        1,
        "a temporary file was left behind"
    );

    std::fs::write(
        &tsv,
        "source\ttarget\tp\na\tb\t0.5\nc\td\t0.1\na\tb\t0.25\n",
    )
    .unwrap();
    let out = baler(&["pack", s(&tsv), "-o", s(&bale), "-q"], None);
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(
        err.contains("bad.tsv:4:") && err.contains("appears twice (lines 2 and 4)"),
        "{err}"
    );

    let out = baler(&["pack", s(&tsv), "-o", s(&bale), "--bits", "17"], None);
    assert_eq!(out.status.code(), Some(2));

    std::fs::write(&bale, b"not a table at all").unwrap();
    let out = baler(&["dump", s(&bale)], None);
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("not a baler table"));
}

#[test]
fn packing_is_deterministic_and_sort_spills_agree() {
    let mut runner = proptest::test_runner::TestRunner::deterministic();
    let table = (0..20)
        .map(|_| random_table().new_tree(&mut runner).unwrap().current())
        .max_by_key(|t| t.pairs.len())
        .unwrap();
    let dir = tempfile::tempdir().unwrap();
    let mut files = Vec::new();
    for (i, (memory, threads)) in [(1u64 << 30, 1), (1, 2), (4096, 0)].into_iter().enumerate() {
        let path = dir.path().join(format!("{i}.bale"));
        let options = PackOptions {
            memory,
            threads,
            ..Default::default()
        };
        pack_tsv(table.tsv().as_bytes(), "t.tsv", &path, &options).unwrap();
        files.push(std::fs::read(&path).unwrap());
    }
    assert!(
        files.windows(2).all(|w| w[0] == w[1]),
        "output depends on memory budget or threads"
    );
}

/// Writing to a device writes through it: renaming a finished file over `/dev/null` would
/// replace the device for every process on the machine.
#[cfg(unix)]
#[test]
fn output_to_a_device_leaves_the_device_in_place() {
    use std::os::unix::fs::FileTypeExt;
    let dir = tempfile::tempdir().unwrap();
    let tsv = dir.path().join("t.tsv");
    std::fs::write(&tsv, "source\ttarget\np\tq\n").unwrap();
    baler_ok(&["pack", s(&tsv), "-o", "/dev/null", "-q"]);
    let bale = dir.path().join("t.bale");
    baler_ok(&["pack", s(&tsv), "-o", s(&bale), "-q"]);
    baler_ok(&["dump", s(&bale), "-o", "/dev/null"]);
    assert!(std::fs::metadata("/dev/null")
        .unwrap()
        .file_type()
        .is_char_device());
    use std::os::unix::fs::PermissionsExt;
    assert_eq!(
        std::fs::metadata(&bale).unwrap().permissions().mode() & 0o777,
        0o644
    );
}

/// Round trip of the shipped demo table (every score and count column, alignments): pack, read
/// back, compare within the error the file reports; the default and the f32 layouts.
#[test]
fn demo_table_round_trips() {
    let path = crate::util::repo("demo-data/toolshed.tsv");
    let reader =
        baler::table::TsvReader::new(baler::files::open_input(&path).unwrap(), "toolshed.tsv")
            .unwrap();
    let header = reader.header().clone();
    let pairs: Vec<PhrasePair> = reader.collect::<baler::Result<_>>().unwrap();
    assert!(pairs.len() > 5000 && header.schema.alignment && header.schema.counts.len() == 6);
    let table = RandomTable { header, pairs };
    check_round_trip(&table, &PackOptions::default());
    check_round_trip(
        &table,
        &PackOptions {
            bits: None,
            ..Default::default()
        },
    );
}

/// Round trip of a generated table with counts and alignments, in small blocks.
#[test]
fn generated_table_round_trips() {
    let options = baler::synth::SynthOptions {
        pairs: 20_000,
        counts: true,
        alignment: true,
        ..Default::default()
    };
    let mut generator = baler::synth::Generator::new(&options).unwrap();
    let header = generator.header();
    let mut pairs = Vec::new();
    let mut pair = PhrasePair::default();
    while generator.next_into(&mut pair) {
        pairs.push(pair.clone());
    }
    let table = RandomTable { header, pairs };
    check_round_trip(
        &table,
        &PackOptions {
            sources_per_block: 4,
            ..Default::default()
        },
    );
}

/// Resume points (format 2.2, block skips and group skips) whose checksums were recomputed
/// after a change still have to agree with their streams: `verify` decodes every block and
/// group again from each point and reports the one that disagrees (spec section 10), and
/// reads through a forged point end in an error or an answer, never a panic.
#[test]
fn forged_resume_points_fail_verify() {
    use baler::format::SECTION_ENTRY_LEN as ENTRY;
    use baler::format::{table_checksum, SectionEntry, SectionKind, FILE_HEADER_LEN};
    // 40 sources of 12 options each over 480 distinct targets: blocks of 16 sources hold
    // resume points, and full target groups hold theirs.
    let mut tsv = String::from("source\ttarget\tp_t_given_s\n");
    for s in 0..40 {
        for t in 0..12 {
            tsv.push_str(&format!("s{s:02} x\tt{s} y{t}\t0.{:02}\n", 10 + t));
        }
    }
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("t.bale");
    pack_tsv(tsv.as_bytes(), "t.tsv", &path, &PackOptions::default()).unwrap();
    let bytes = std::fs::read(&path).unwrap();
    let table = Table::from_bytes(bytes.clone()).unwrap();
    assert_eq!(table.minor_version(), 2);
    table.verify().unwrap();
    for (kind, first_point) in [
        (SectionKind::BlockSkips, 2 * 4 + 3),
        (SectionKind::GroupSkips, 0),
    ] {
        let count = u32::from_le_bytes(bytes[12..16].try_into().unwrap()) as usize;
        let i = (0..count)
            .find(|&i| {
                let at = FILE_HEADER_LEN + i * ENTRY;
                SectionEntry::decode(&bytes[at..at + ENTRY]).kind == kind as u32
            })
            .expect("the table has the section");
        let at = FILE_HEADER_LEN + i * ENTRY;
        let mut entry = SectionEntry::decode(&bytes[at..at + ENTRY]);
        let mut forged = bytes.clone();
        // The first point's state, one higher: still a valid state, at the wrong place.
        let p = entry.offset as usize + first_point;
        let state = u32::from_le_bytes(forged[p..p + 4].try_into().unwrap());
        assert!(state >= 1 << 23, "{kind:?} has a point where expected");
        forged[p..p + 4].copy_from_slice(&(state + 1).to_le_bytes());
        let section = &forged[entry.offset as usize..(entry.offset + entry.length) as usize];
        entry.crc32 = crc32fast::hash(section);
        forged[at..at + ENTRY].copy_from_slice(&entry.encode());
        let end = FILE_HEADER_LEN + count * ENTRY;
        let crc = table_checksum(&forged[..16], &forged[FILE_HEADER_LEN..end]);
        forged[16..20].copy_from_slice(&crc.to_le_bytes());
        let table = Table::from_bytes(forged).unwrap();
        let err = table.verify().unwrap_err().to_string();
        assert!(err.contains("resume point"), "{kind:?}: {err}");
        for s in 0..40 {
            let _ = table.lookup(&format!("s{s:02} x"));
        }
    }
}
