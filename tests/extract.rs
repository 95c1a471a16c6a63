//! `baler extract`: phrase-pair extraction, scores and sentence-level counts.

use std::collections::{BTreeMap, BTreeSet, HashMap};
use std::path::{Path, PathBuf};

use baler::extract::corpus::CorpusPaths;
use baler::extract::phrases::{PhraseFinder, PhraseLimits, SpanPair};
use baler::extract::synthetic::SyntheticCorpus;
use baler::table::{CountColumn, TsvReader};
use proptest::prelude::*;

use crate::util::{bin as baler, corpus_options, repo, write};

fn fast_pairs(ns: usize, nt: usize, links: &[(u16, u16)], limits: PhraseLimits) -> Vec<SpanPair> {
    let mut found = Vec::new();
    PhraseFinder::default().find(ns, nt, links, limits, |p| found.push(p));
    found
}

/// Every source span × every target span, consistency tested directly from the definition:
/// at least one link inside the box, and no link with exactly one end inside it; without
/// unaligned edges, every edge word of both spans must be aligned.
fn brute_force(
    ns: usize,
    nt: usize,
    links: &[(u16, u16)],
    limits: PhraseLimits,
) -> BTreeSet<SpanPair> {
    let links: Vec<(usize, usize)> = links
        .iter()
        .map(|&(i, j)| (usize::from(i), usize::from(j)))
        .collect();
    let s_aligned = |i: usize| links.iter().any(|l| l.0 == i);
    let t_aligned = |j: usize| links.iter().any(|l| l.1 == j);
    let mut out = BTreeSet::new();
    for s1 in 0..ns {
        for s2 in s1..ns {
            for t1 in 0..nt {
                for t2 in t1..nt {
                    if s2 - s1 + 1 > limits.max_length || t2 - t1 + 1 > limits.max_length {
                        continue;
                    }
                    let in_s = |i: usize| (s1..=s2).contains(&i);
                    let in_t = |j: usize| (t1..=t2).contains(&j);
                    let inside = links.iter().any(|&(i, j)| in_s(i) && in_t(j));
                    let leaves = links.iter().any(|&(i, j)| in_s(i) != in_t(j));
                    let tight = s_aligned(s1) && s_aligned(s2) && t_aligned(t1) && t_aligned(t2);
                    if inside && !leaves && (limits.unaligned_edges || tight) {
                        out.insert(SpanPair {
                            source_start: s1,
                            source_end: s2 + 1,
                            target_start: t1,
                            target_end: t2 + 1,
                        });
                    }
                }
            }
        }
    }
    out
}

/// Sentence pair and alignment as printed in Koehn, *Statistical Machine Translation*
/// (Cambridge University Press, 2010), section 5.2 on phrase extraction (from memory). The
/// 24 consistent pairs below were derived by hand from the definition of consistency; as far
/// as I recall (from memory) they are the list the book gives for this example.
#[test]
fn textbook_example_yields_exactly_its_phrase_pairs() {
    let source: Vec<&str> = "michael geht davon aus , dass er im haus bleibt"
        .split(' ')
        .collect();
    let target: Vec<&str> = "michael assumes that he will stay in the house"
        .split(' ')
        .collect();
    let links: Vec<(u16, u16)> = [
        (0, 0),
        (1, 1),
        (2, 1),
        (3, 1),
        (5, 2),
        (6, 3),
        (7, 6),
        (7, 7),
        (8, 8),
        (9, 4),
        (9, 5),
    ]
    .to_vec();
    let expected: BTreeSet<(&str, &str)> = [
        ("michael", "michael"),
        ("michael geht davon aus", "michael assumes"),
        ("michael geht davon aus ,", "michael assumes"),
        ("michael geht davon aus , dass", "michael assumes that"),
        (
            "michael geht davon aus , dass er",
            "michael assumes that he",
        ),
        (
            "michael geht davon aus , dass er im haus bleibt",
            "michael assumes that he will stay in the house",
        ),
        ("geht davon aus", "assumes"),
        ("geht davon aus ,", "assumes"),
        ("geht davon aus , dass", "assumes that"),
        ("geht davon aus , dass er", "assumes that he"),
        (
            "geht davon aus , dass er im haus bleibt",
            "assumes that he will stay in the house",
        ),
        ("dass", "that"),
        (", dass", "that"),
        ("dass er", "that he"),
        (", dass er", "that he"),
        ("dass er im haus bleibt", "that he will stay in the house"),
        (", dass er im haus bleibt", "that he will stay in the house"),
        ("er", "he"),
        ("er im haus bleibt", "he will stay in the house"),
        ("im", "in the"),
        ("im haus", "in the house"),
        ("im haus bleibt", "will stay in the house"),
        ("haus", "house"),
        ("bleibt", "will stay"),
    ]
    .into_iter()
    .collect();
    let limits = PhraseLimits {
        max_length: 10,
        unaligned_edges: true,
    };
    let found = fast_pairs(source.len(), target.len(), &links, limits);
    let as_text: Vec<(String, String)> = found
        .iter()
        .map(|p| {
            (
                source[p.source_start..p.source_end].join(" "),
                target[p.target_start..p.target_end].join(" "),
            )
        })
        .collect();
    assert_eq!(as_text.len(), expected.len(), "no pair twice, none missing");
    let got: BTreeSet<(&str, &str)> = as_text
        .iter()
        .map(|(s, t)| (s.as_str(), t.as_str()))
        .collect();
    assert_eq!(got, expected);
    // With the default limit of 7 tokens the two 9- and 10-token pairs drop out.
    let short = fast_pairs(source.len(), target.len(), &links, PhraseLimits::default());
    assert_eq!(short.len(), 22);
    // Without unaligned edges the comma never starts or ends a source phrase.
    let tight = fast_pairs(
        source.len(),
        target.len(),
        &links,
        PhraseLimits {
            max_length: 10,
            unaligned_edges: false,
        },
    );
    assert_eq!(tight.len(), 24 - 5); // the five pairs with a comma at an edge
}

fn alignment_strategy() -> impl Strategy<Value = (usize, usize, Vec<(u16, u16)>, PhraseLimits)> {
    (1usize..9, 1usize..9, 1usize..6, any::<bool>()).prop_flat_map(|(ns, nt, max, edges)| {
        let link = (0..ns as u16, 0..nt as u16);
        (
            Just(ns),
            Just(nt),
            prop::collection::vec(link, 0..(ns * nt).min(14)),
            Just(PhraseLimits {
                max_length: max,
                unaligned_edges: edges,
            }),
        )
    })
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(5000))]

    /// The fast extractor agrees with the brute-force checker on random small alignments.
    #[test]
    fn extractor_matches_brute_force((ns, nt, links, limits) in alignment_strategy()) {
        let fast = fast_pairs(ns, nt, &links, limits);
        let set: BTreeSet<SpanPair> = fast.iter().copied().collect();
        prop_assert_eq!(set.len(), fast.len(), "a pair was emitted twice");
        prop_assert_eq!(set, brute_force(ns, nt, &links, limits));
    }
}

struct Table {
    text: String,
    rows: Vec<baler::table::PhrasePair>,
    header: baler::table::Header,
}

fn read_table(path: &Path) -> Table {
    let text = std::fs::read_to_string(path).unwrap();
    let mut reader = TsvReader::new(text.as_bytes(), path.display().to_string()).unwrap();
    let header = reader.header().clone();
    let rows = reader.by_ref().map(|r| r.unwrap()).collect();
    Table { text, rows, header }
}

fn count(table: &Table, row: &baler::table::PhrasePair, c: CountColumn) -> u64 {
    row.counts[table.header.schema.count_index(c).unwrap()]
}

fn score(table: &Table, row: &baler::table::PhrasePair, name: &str) -> f64 {
    row.scores[table.header.schema.score_index(name).unwrap()]
}

/// Lexical weights of Koehn, Och and Marcu (2003), checked by hand on a three-sentence corpus.
/// The phrase pair "geht nicht davon aus" / "does not assume" follows the lexical-weighting
/// illustration of Koehn's textbook (from memory); the word probabilities are worked out by
/// hand below, with this crate's NULL convention (unaligned occurrences count in the
/// denominator).
#[test]
fn lexical_weights_match_hand_computation() {
    let dir = tempfile::tempdir().unwrap();
    let src = write(
        dir.path(),
        "s",
        "geht nicht davon aus\ner geht nicht\nnicht aus ja\n",
    );
    let tgt = write(
        dir.path(),
        "t",
        "does not assume\nhe does not go\nreally not out\n",
    );
    let ali = write(dir.path(), "a", "0-2 1-1 3-2\n0-0 1-3 2-2\n0-1 1-2\n");
    let out = dir.path().join("table.tsv");
    let status = extract_files(&["-q"], &src, &tgt, &ali, &out).status;
    assert!(status.success());
    let table = read_table(&out);
    let row = table
        .rows
        .iter()
        .find(|r| r.source == "geht nicht davon aus" && r.target == "does not assume")
        .expect("pair extracted");
    assert_eq!(row.alignment, [(0, 2), (1, 1), (3, 2)]);
    // Word counts: geht-assume 1, geht-go 1, aus-assume 1, aus-out 1, nicht-not 3, er-he 1,
    // NULL-does 2, NULL-really 1, davon-NULL 1, ja-NULL 1.
    // lex(t|s) = w(does|NULL) · w(not|nicht) · ½(w(assume|geht) + w(assume|aus))
    //          = 2/3 · 3/3 · ½(1/2 + 1/2) = 1/3
    let lex_t = score(&table, row, "lex_t_given_s");
    assert!((lex_t - 1.0 / 3.0).abs() < 1e-12, "{lex_t}");
    // lex(s|t) = w(geht|assume) · w(nicht|not) · w(davon|NULL) · w(aus|assume)
    //          = 1/2 · 3/3 · 1/2 · 1/2 = 1/8
    let lex_s = score(&table, row, "lex_s_given_t");
    assert!((lex_s - 0.125).abs() < 1e-12, "{lex_s}");
    // A single word: lex(t|s) = w(go|geht) = 1/2, lex(s|t) = w(geht|go) = 1/1.
    let row = table
        .rows
        .iter()
        .find(|r| r.source == "geht" && r.target == "go")
        .unwrap();
    assert_eq!(score(&table, row, "lex_t_given_s"), 0.5);
    assert_eq!(score(&table, row, "lex_s_given_t"), 1.0);
}

/// Runs `baler extract ARGS... --source SOURCE --target TARGET --alignment ALIGNMENT -o OUT`
/// (`args` may start with a step such as `shard`); returns its output, success not asserted.
fn extract_files(
    args: &[&str],
    source: &Path,
    target: &Path,
    alignment: &Path,
    out: &Path,
) -> std::process::Output {
    baler()
        .arg("extract")
        .args(args)
        .args(corpus_options(source, target, alignment))
        .arg("-o")
        .arg(out)
        .output()
        .unwrap()
}

fn run_extract(paths: &CorpusPaths, out: &Path, extra: &[&str]) -> std::process::Output {
    let o = extract_files(
        extra,
        &paths.source,
        &paths.target,
        paths.alignment.as_ref().unwrap(),
        out,
    );
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    o
}

fn small_corpus(dir: &Path, n: u64) -> CorpusPaths {
    SyntheticCorpus {
        sentence_pairs: n,
        mean_length: 12,
        vocabulary: 300,
        variant: 7,
    }
    .write(dir, "harbour", "")
    .unwrap()
}

/// A fresh temporary folder holding [`small_corpus`] of 2000 sentence pairs and its extraction
/// with one thread into `name` (compressed when `name` ends in `.zst`): the corpus and the
/// bytes of that extraction, the reference other runs are compared with.
fn corpus_and_one_thread_extraction(name: &str) -> (tempfile::TempDir, CorpusPaths, Vec<u8>) {
    let dir = tempfile::tempdir().unwrap();
    let paths = small_corpus(dir.path(), 2000);
    let reference = dir.path().join(name);
    run_extract(&paths, &reference, &["-q", "--threads", "1"]);
    let expected = std::fs::read(&reference).unwrap();
    (dir, paths, expected)
}

/// Relative frequencies: p(t|s) sums to 1 over each source's options, p(s|t) over each
/// target's, and every value equals count / count_source (count_target).
#[test]
fn probabilities_are_relative_frequencies() {
    let dir = tempfile::tempdir().unwrap();
    let paths = small_corpus(dir.path(), 300);
    let out = dir.path().join("t.tsv");
    run_extract(&paths, &out, &["-q"]);
    let table = read_table(&out);
    assert!(table.rows.len() > 1000);
    let mut by_source: HashMap<&str, (f64, u64)> = HashMap::new();
    let mut by_target: HashMap<&str, (f64, u64)> = HashMap::new();
    for r in &table.rows {
        let c = count(&table, r, CountColumn::Count);
        let cs = count(&table, r, CountColumn::CountSource);
        let ct = count(&table, r, CountColumn::CountTarget);
        assert_eq!(score(&table, r, "p_t_given_s"), c as f64 / cs as f64);
        assert_eq!(score(&table, r, "p_s_given_t"), c as f64 / ct as f64);
        let e = by_source.entry(&r.source).or_default();
        e.0 += score(&table, r, "p_t_given_s");
        e.1 += c;
        assert!(count(&table, r, CountColumn::Cooc) >= 1);
        let e = by_target.entry(&r.target).or_default();
        e.0 += score(&table, r, "p_s_given_t");
        e.1 += c;
    }
    for r in &table.rows {
        assert_eq!(
            by_source[r.source.as_str()].1,
            count(&table, r, CountColumn::CountSource)
        );
        assert_eq!(
            by_target[r.target.as_str()].1,
            count(&table, r, CountColumn::CountTarget)
        );
    }
    for (s, (sum, _)) in by_source {
        assert!((sum - 1.0).abs() < 1e-9, "{s}: {sum}");
    }
    for (t, (sum, _)) in by_target {
        assert!((sum - 1.0).abs() < 1e-9, "{t}: {sum}");
    }
    // Sorted by source then target, byte order.
    for w in table.rows.windows(2) {
        assert!(
            (w[0].source.as_bytes(), w[0].target.as_bytes())
                < (w[1].source.as_bytes(), w[1].target.as_bytes())
        );
    }
    assert_eq!(table.header.metadata.sentence_pairs(), Some(300));
}

/// Source tokens, target tokens, links.
type AlignedPair<'a> = (Vec<&'a str>, Vec<&'a str>, Vec<(u16, u16)>);

fn contains(sentence: &[&str], phrase: &[&str]) -> bool {
    sentence.windows(phrase.len()).any(|w| w == phrase)
}

/// cooc, df_source and df_target against a direct count over the corpus (every row, every
/// sentence pair, contiguous token sequences), and count against a direct count of the
/// extractor's pairs per sentence pair.
#[test]
fn sentence_level_counts_are_exact() {
    check_sentence_level_counts(&["-q"]);
}

/// The same direct counts when a budget far below the corpus's needs splits the job into
/// source ranges processed one after another (the range-partitioned path).
#[test]
fn sentence_level_counts_are_exact_in_source_ranges() {
    let stderr = check_sentence_level_counts(&["--memory", "64K", "--threads", "2"]);
    assert!(counting_passes(&stderr) > 1, "{stderr}");
}

/// The number of counting passes (source ranges) in `baler extract`'s summary.
fn counting_passes(stderr: &str) -> u64 {
    stderr
        .split("; ")
        .find_map(|part| part.strip_suffix(" counting pass(es)"))
        .and_then(|n| n.parse().ok())
        .expect("summary names the counting passes")
}

/// Runs the extraction with `extra` and checks its counts; returns its standard error.
fn check_sentence_level_counts(extra: &[&str]) -> String {
    let dir = tempfile::tempdir().unwrap();
    let paths = small_corpus(dir.path(), 120);
    let out = dir.path().join("t.tsv");
    let mut args = vec!["--max-length", "4"];
    args.extend_from_slice(extra);
    let o = run_extract(&paths, &out, &args);
    let table = read_table(&out);
    let read = |p: &Path| std::fs::read_to_string(p).unwrap();
    let src = read(&paths.source);
    let tgt = read(&paths.target);
    let ali = read(paths.alignment.as_ref().unwrap());
    let corpus: Vec<AlignedPair> = src
        .lines()
        .zip(tgt.lines())
        .zip(ali.lines())
        .map(|((s, t), a)| {
            let mut links = Vec::new();
            baler::extract::corpus::parse_links(
                a,
                s.split(' ').count(),
                t.split(' ').count(),
                false,
                &mut links,
            )
            .unwrap();
            (s.split(' ').collect(), t.split(' ').collect(), links)
        })
        .collect();
    let mut counts: BTreeMap<(String, String), u64> = BTreeMap::new();
    let limits = PhraseLimits {
        max_length: 4,
        unaligned_edges: true,
    };
    for (s, t, links) in &corpus {
        for p in brute_force(s.len(), t.len(), links, limits) {
            *counts
                .entry((
                    s[p.source_start..p.source_end].join(" "),
                    t[p.target_start..p.target_end].join(" "),
                ))
                .or_default() += 1;
        }
    }
    assert_eq!(table.rows.len(), counts.len());
    for r in &table.rows {
        assert_eq!(
            count(&table, r, CountColumn::Count),
            counts[&(r.source.clone(), r.target.clone())]
        );
        let sp: Vec<&str> = r.source.split(' ').collect();
        let tp: Vec<&str> = r.target.split(' ').collect();
        let (mut cooc, mut dfs, mut dft) = (0, 0, 0);
        for (s, t, _) in &corpus {
            let (a, b) = (contains(s, &sp), contains(t, &tp));
            dfs += u64::from(a);
            dft += u64::from(b);
            cooc += u64::from(a && b);
        }
        assert_eq!(
            count(&table, r, CountColumn::Cooc),
            cooc,
            "{} / {}",
            r.source,
            r.target
        );
        assert_eq!(count(&table, r, CountColumn::DfSource), dfs, "{}", r.source);
        assert_eq!(count(&table, r, CountColumn::DfTarget), dft, "{}", r.target);
    }
    String::from_utf8_lossy(&o.stderr).into_owned()
}

/// A compressed output's bytes, not only its text, do not depend on the number of threads or
/// on the budget (zstd compresses on a worker thread of its own, whose count is fixed).
#[test]
fn compressed_output_is_identical_across_threads() {
    let (dir, paths, expected) = corpus_and_one_thread_extraction("one.tsv.zst");
    for (name, extra) in [
        ("two.tsv.zst", vec!["-q", "--threads", "2"]),
        (
            "ranges.tsv.zst",
            vec!["-q", "--threads", "2", "--memory", "300K"],
        ),
    ] {
        let out = dir.path().join(name);
        run_extract(&paths, &out, &extra);
        assert!(std::fs::read(&out).unwrap() == expected, "{name} differs");
    }
    // And it is the plain output, compressed.
    let plain = dir.path().join("plain.tsv");
    run_extract(&paths, &plain, &["-q"]);
    let text = zstd::decode_all(&expected[..]).unwrap();
    assert!(text == std::fs::read(&plain).unwrap());
}

/// The output does not depend on the number of threads, on memory budgets small enough to
/// force spills and chunked counting, or on running the map and reduce steps by hand over
/// shards.
#[test]
fn output_is_identical_across_threads_budgets_and_shards() {
    let (dir, paths, expected) = corpus_and_one_thread_extraction("one.tsv");
    for (name, extra) in [
        ("two.tsv", vec!["--threads", "2"]),
        ("three.tsv", vec!["--threads", "3", "--memory", "1M"]),
        ("ranges1.tsv", vec!["--threads", "1", "--memory", "200K"]),
        ("ranges2.tsv", vec!["--threads", "2", "--memory", "300K"]),
    ] {
        let out = dir.path().join(name);
        let o = run_extract(&paths, &out, &extra);
        assert!(std::fs::read(&out).unwrap() == expected, "{name} differs");
        if name != "two.tsv" {
            // The small budgets must really have split the job into source ranges.
            let stderr = String::from_utf8_lossy(&o.stderr);
            assert!(counting_passes(&stderr) > 1, "{stderr}");
        }
    }
    // With a discount, small budgets take the map/reduce path (chunked counting).
    let discounted = dir.path().join("gt-resident.tsv");
    run_extract(&paths, &discounted, &["-q", "--discount", "good-turing"]);
    let out = dir.path().join("gt-spilled.tsv");
    let o = run_extract(
        &paths,
        &out,
        &[
            "--discount",
            "good-turing",
            "--memory",
            "1M",
            "--threads",
            "2",
        ],
    );
    assert!(std::fs::read(&out).unwrap() == std::fs::read(&discounted).unwrap());
    assert!(counting_passes(&String::from_utf8_lossy(&o.stderr)) > 1);
    // Map/reduce by hand: split the corpus into three shards.
    let read = |p: &Path| std::fs::read_to_string(p).unwrap();
    let files = [
        read(&paths.source),
        read(&paths.target),
        read(paths.alignment.as_ref().unwrap()),
    ];
    let mut runs = Vec::new();
    let mut shards = Vec::new();
    for k in 0..3 {
        let part = |text: &str| -> String {
            text.lines()
                .enumerate()
                .filter(|(i, _)| i * 3 / 2000 == k)
                .map(|(_, l)| format!("{l}\n"))
                .collect()
        };
        let s = write(dir.path(), &format!("s{k}"), &part(&files[0]));
        let t = write(dir.path(), &format!("t{k}"), &part(&files[1]));
        let a = write(dir.path(), &format!("a{k}"), &part(&files[2]));
        let run = dir.path().join(format!("shard{k}.run"));
        let o = extract_files(&["shard", "-q"], &s, &t, &a, &run);
        assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
        runs.push(run);
        shards.push((s, t));
    }
    let merged = dir.path().join("merged.tsv.zst");
    let index = dir.path().join("merged.index");
    let o = baler()
        .args(["extract", "merge", "-q"])
        .args(&runs)
        .arg("-o")
        .arg(&merged)
        .arg("--index")
        .arg(&index)
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let mut tallies = Vec::new();
    for (k, (s, t)) in shards.iter().enumerate() {
        let tally = dir.path().join(format!("shard{k}.tally"));
        let o = baler()
            .args(["extract", "tally", "-q", "--index"])
            .arg(&index)
            .arg("--source")
            .arg(s)
            .arg("--target")
            .arg(t)
            .arg("-o")
            .arg(&tally)
            .output()
            .unwrap();
        assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
        tallies.push(tally);
    }
    let out = dir.path().join("sharded.tsv");
    let o = baler()
        .args(["extract", "attach", "--table"])
        .arg(&merged)
        .args(&tallies)
        .arg("-o")
        .arg(&out)
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    assert!(
        std::fs::read(&out).unwrap() == expected,
        "sharded run differs"
    );
    // A missing shard's tally is caught by the sentence count.
    let o = baler()
        .args(["extract", "attach", "--table"])
        .arg(&merged)
        .args(&tallies[..2])
        .arg("-o")
        .arg(dir.path().join("incomplete.tsv"))
        .output()
        .unwrap();
    assert_eq!(o.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&o.stderr).contains("sentence_pairs="));
    assert!(!dir.path().join("incomplete.tsv").exists());
}

fn expect_error(dir: &Path, src: &str, tgt: &str, ali: &str, extra: &[&str], needles: &[&str]) {
    let s = write(dir, "err.src", src);
    let t = write(dir, "err.tgt", tgt);
    let a = write(dir, "err.align", ali);
    let out = dir.join("err.tsv");
    let o = extract_files(&[&["-q"][..], extra].concat(), &s, &t, &a, &out);
    let stderr = String::from_utf8_lossy(&o.stderr);
    assert_eq!(o.status.code(), Some(2), "{stderr}");
    for n in needles {
        assert!(stderr.contains(n), "{stderr:?} lacks {n:?}");
    }
    assert!(!out.exists(), "nothing may be written on error");
}

#[test]
fn bad_input_names_file_line_and_reason() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    expect_error(
        d,
        "a b\nc d\n",
        "x y\n",
        "0-0\n1-1\n",
        &[],
        &["err.src:2", "line counts differ", "err.tgt has 1 lines"],
    );
    expect_error(
        d,
        "a b\nc d\n",
        "x y\nz w\n",
        "0-0\n1-2\n",
        &[],
        &["err.align:2", "target index 2", "2-token target"],
    );
    expect_error(
        d,
        "a b\n",
        "x y\n",
        "0-0 1=1\n",
        &[],
        &["err.align:1", "malformed link \"1=1\""],
    );
    // Valid as source-target, but target index 2 is out of range when read target-first.
    expect_error(
        d,
        "a b c\n",
        "x y\n",
        "0-0 2-1\n",
        &["--links-target-first"],
        &["err.align:1", "target index 2", "past the end"],
    );
    expect_error(d, "a\0b\n", "x\n", "0-0\n", &[], &["err.src:1", "NUL"]);
}

#[test]
fn skipped_sentence_pairs_are_counted_and_reversed_links_read() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let s = write(d, "s", "el muelle\n\na b c d\nla grúa\n");
    let t = write(d, "t", "the pier\nthe quay\nw x y z\nthe crane\n");
    let a = write(d, "a", "0-0 1-1\n\n0-0\n1-1 0-0\n");
    let out = d.join("t.tsv");
    let o = extract_files(&["--max-sentence-length", "3"], &s, &t, &a, &out);
    assert!(o.status.success());
    let stderr = String::from_utf8_lossy(&o.stderr);
    assert!(
        stderr.contains(
            "4 lines read, 2 sentence pairs kept, 2 skipped (1 empty, 1 over the length limit)"
        ),
        "{stderr}"
    );
    let table = read_table(&out);
    assert_eq!(table.header.metadata.sentence_pairs(), Some(2));
    // Links written target-first: "1-0" means target 1, source 0.
    let a2 = write(d, "a2", "1-1 0-0\n\n0-0\n0-1 1-0\n");
    let s2 = write(d, "s2", "el muelle\n\na b c d\ngrúa la\n");
    let out2 = d.join("t2.tsv");
    let o = extract_files(
        &["-q", "--links-target-first", "--max-sentence-length", "3"],
        &s2,
        &t,
        &a2,
        &out2,
    );
    assert!(o.status.success());
    let table2 = read_table(&out2);
    assert!(table2.rows.iter().any(|r| r.source == "grúa la"
        && r.target == "the crane"
        && r.alignment == [(0, 1), (1, 0)]));
    assert!(table.text.contains("la grúa\tthe crane\t0-0 1-1\t"));
}

/// Good-Turing lowers the probability of rare pairs and keeps `count` exact; Kneser-Ney
/// stays a proper distribution once the redistributed mass is counted.
#[test]
fn discounting_is_applied_behind_a_flag() {
    let dir = tempfile::tempdir().unwrap();
    let paths = small_corpus(dir.path(), 300);
    let plain = dir.path().join("plain.tsv");
    let gt = dir.path().join("gt.tsv");
    let kn = dir.path().join("kn.tsv");
    run_extract(&paths, &plain, &["-q"]);
    run_extract(&paths, &gt, &["-q", "--discount", "good-turing"]);
    run_extract(&paths, &kn, &["-q", "--discount", "kneser-ney"]);
    let (plain, gt, kn) = (read_table(&plain), read_table(&gt), read_table(&kn));
    assert_eq!(plain.rows.len(), gt.rows.len());
    let mut lowered = 0;
    for (p, g) in plain.rows.iter().zip(&gt.rows) {
        assert_eq!(p.counts, g.counts);
        let (a, b) = (
            score(&plain, p, "p_t_given_s"),
            score(&gt, g, "p_t_given_s"),
        );
        assert!(b <= a);
        lowered += usize::from(b < a);
    }
    assert!(lowered > plain.rows.len() / 4, "{lowered}");
    let mut sums: HashMap<&str, f64> = HashMap::new();
    for r in &kn.rows {
        *sums.entry(&r.source).or_default() += score(&kn, r, "p_t_given_s");
    }
    assert!(sums.values().all(|&s| s < 1.0 + 1e-9 && s > 0.0));
    assert!(kn.text.contains("# discount=kneser-ney"));
}

/// The table shipped in demo-data/ is exactly what `baler extract` makes of the demo corpus
/// (invented data: this guards the shipped file against drift, it is not an outside reference).
#[test]
fn shipped_demo_table_is_the_extraction_of_the_demo_corpus() {
    let root = repo("demo-data");
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("toolshed.tsv");
    let run = extract_files(
        &["--quiet"],
        &root.join("toolshed.en"),
        &root.join("toolshed.es"),
        &root.join("toolshed.align"),
        &out,
    );
    assert!(
        run.status.success(),
        "{}",
        String::from_utf8_lossy(&run.stderr)
    );
    let made = std::fs::read_to_string(&out).unwrap();
    let shipped = std::fs::read_to_string(root.join("toolshed.tsv")).unwrap();
    assert!(
        made == shipped,
        "demo-data/toolshed.tsv differs from a fresh extraction"
    );
}

/// The table is sorted by the bytes of source, then target (the interchange format's order),
/// also when a word holds a control byte after its first byte: there, comparing word by word
/// and comparing the joined text disagree ("x\u{1}" sorts before "x y" as text), and the
/// in-memory path must not take its word-order shortcut.
#[test]
fn rows_follow_byte_order_with_control_bytes_inside_words() {
    let dir = tempfile::tempdir().unwrap();
    let paths = CorpusPaths {
        source: write(dir.path(), "s", "x y\nx\u{1}\n\u{7}x y\nx y x\u{1}\n"),
        target: write(dir.path(), "t", "p q\np\u{2}\nr p q\np q p\u{2}\n"),
        alignment: Some(write(
            dir.path(),
            "a",
            "0-0 1-1\n0-0\n0-1 1-2\n0-0 1-1 2-2\n",
        )),
    };
    let out = dir.path().join("table.tsv");
    run_extract(&paths, &out, &["-q"]);
    let text = std::fs::read_to_string(&out).unwrap();
    let keys: Vec<Vec<u8>> = text
        .lines()
        .filter(|l| !l.starts_with('#'))
        .skip(1)
        .map(|l| {
            let mut f = l.split('\t');
            let (s, t) = (f.next().unwrap(), f.next().unwrap());
            [s.as_bytes(), &[0], t.as_bytes()].concat()
        })
        .collect();
    assert!(keys.iter().any(|k| k.starts_with(b"x\x01\0")), "{text}");
    assert!(keys.iter().any(|k| k.starts_with(b"x y\0")), "{text}");
    assert!(keys.windows(2).all(|w| w[0] < w[1]), "{text}");
}

fn extract_step(args: &[&str], paths: &[&Path]) -> std::process::Output {
    let mut c = baler();
    c.arg("extract").args(args);
    for p in paths {
        c.arg(p);
    }
    c.output().unwrap()
}

/// `extract shard` over `paths` into `dir/a.run`, asserted to succeed.
fn shard_run(dir: &Path, paths: &CorpusPaths) -> PathBuf {
    let run = dir.join("a.run");
    let o = extract_files(
        &["shard", "-q"],
        &paths.source,
        &paths.target,
        paths.alignment.as_ref().unwrap(),
        &run,
    );
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    run
}

/// A fresh temporary folder holding [`small_corpus`] of `n` sentence pairs and its
/// [`shard_run`] `a.run`: the corpus and the run's path.
fn sharded_small_corpus(n: u64) -> (tempfile::TempDir, CorpusPaths, PathBuf) {
    let dir = tempfile::tempdir().unwrap();
    let paths = small_corpus(dir.path(), n);
    let run = shard_run(dir.path(), &paths);
    (dir, paths, run)
}

/// Asserts that the step whose output is `o` failed with an error containing `needle` and
/// left nothing at its output path `out`.
fn assert_refused_without_output(o: &std::process::Output, needle: &str, out: &Path) {
    assert!(!o.status.success());
    assert!(
        String::from_utf8_lossy(&o.stderr).contains(needle),
        "{}",
        String::from_utf8_lossy(&o.stderr)
    );
    assert!(!out.exists());
}

/// The merged table, its index and the tally of one shard: `merge run -o dir/m.tsv --index
/// dir/m.index`, then `tally` into `dir/a.tally`, each asserted to succeed.
struct Reduced {
    table: PathBuf,
    index: PathBuf,
    tally: PathBuf,
}

fn merge_and_tally(dir: &Path, paths: &CorpusPaths, run: &Path) -> Reduced {
    let r = Reduced {
        table: dir.join("m.tsv"),
        index: dir.join("m.index"),
        tally: dir.join("a.tally"),
    };
    let (tb, ix, ty) = (
        r.table.to_str().unwrap(),
        r.index.to_str().unwrap(),
        r.tally.to_str().unwrap(),
    );
    let o = extract_step(&["merge", "-q", "-o", tb, "--index", ix], &[run]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let (s, t) = (
        paths.source.to_str().unwrap(),
        paths.target.to_str().unwrap(),
    );
    let o = extract_step(
        &[
            "tally", "-q", "--index", ix, "--source", s, "--target", t, "-o", ty,
        ],
        &[],
    );
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    r
}

/// Defect 5 of the reliability review: `merge a.run a.run` doubled every count. A run records
/// the identity of its corpus shard, and a shard given twice is refused.
#[test]
fn defect5_merge_refuses_a_repeated_run() {
    let (dir, _paths, run) = sharded_small_corpus(50);
    let merged = dir.path().join("m.tsv");
    let o = extract_step(
        &["merge", "-q", "-o", merged.to_str().unwrap()],
        &[&run, &run],
    );
    assert_refused_without_output(&o, "repeats corpus shard", &merged);
}

/// Defect 5 of the reliability review: `attach` accepted the same tally twice (rows with
/// count 2 and cooc 0). A tally records its shard's identity, and a repeat is refused.
#[test]
fn defect5_attach_refuses_a_repeated_tally() {
    let (dir, paths, run) = sharded_small_corpus(50);
    let Reduced { table, tally, .. } = merge_and_tally(dir.path(), &paths, &run);
    let out = dir.path().join("final.tsv");
    let o = extract_step(
        &[
            "attach",
            "--table",
            table.to_str().unwrap(),
            "-o",
            out.to_str().unwrap(),
        ],
        &[&tally, &tally],
    );
    assert_refused_without_output(&o, "counts the same corpus shard", &out);
}

/// Defect 4 of the reliability review: `extract tally --index <damaged index>` panicked or
/// silently wrote wrong counts. Every intermediate (count run, phrase index, tally) carries a
/// checksum verified on read: each damaged copy is a clear error (exit 2), never a panic.
#[test]
fn defect4_damaged_intermediates_are_errors() {
    let (dir, paths, run) = sharded_small_corpus(200);
    let (s, t) = (
        paths.source.to_str().unwrap(),
        paths.target.to_str().unwrap(),
    );
    let Reduced {
        table,
        index,
        tally,
    } = merge_and_tally(dir.path(), &paths, &run);
    let tb = table.to_str().unwrap();
    let tally_args = |index: &str, out: &str| {
        let v = [
            "tally", "-q", "--index", index, "--source", s, "--target", t, "-o", out,
        ];
        v.map(String::from)
    };
    let damaged = dir.path().join("damaged");
    let out = dir.path().join("out");
    for (file, kind) in [(&run, "run"), (&index, "index"), (&tally, "tally")] {
        let bytes = std::fs::read(file).unwrap();
        for k in 0..20 {
            let mut copy = bytes.clone();
            let at = 5 + k * (bytes.len() - 6) / 20;
            copy[at] ^= 0x5A;
            std::fs::write(&damaged, &copy).unwrap();
            let d = damaged.to_str().unwrap();
            let o = match kind {
                "run" => extract_step(&["merge", "-q", "-o", out.to_str().unwrap()], &[&damaged]),
                "index" => baler()
                    .arg("extract")
                    .args(tally_args(d, out.to_str().unwrap()))
                    .output()
                    .unwrap(),
                _ => extract_step(
                    &["attach", "--table", tb, "-o", out.to_str().unwrap()],
                    &[&damaged],
                ),
            };
            let stderr = String::from_utf8_lossy(&o.stderr);
            assert_eq!(o.status.code(), Some(2), "{kind} damaged at {at}: {stderr}");
            assert!(
                stderr.contains("damaged") || stderr.contains("not zstd"),
                "{stderr}"
            );
            assert!(!out.exists(), "{kind} damaged at {at} left an output");
        }
    }
}
