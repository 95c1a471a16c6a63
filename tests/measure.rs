//! `baler compare`, `baler sweep`, `baler build` and the measures behind them.

use std::path::{Path, PathBuf};
use std::sync::OnceLock;

use baler::measure::{
    compare, coverage, reachability, source_agreement, CompareOptions, MeasuredTable,
};
use baler::prune::{Filter, PruneOptions, Pruner, Ranking, Threshold};
use baler::table::{PhrasePair, TsvReader, TsvWriter};
use proptest::prelude::*;

use crate::util::{baler_in as run, ok_in as ok, repo, s};

const LN_2: f64 = std::f64::consts::LN_2;

fn words(text: &str) -> Vec<String> {
    text.split_whitespace().map(String::from).collect()
}

fn tsv(text: &str) -> MeasuredTable {
    MeasuredTable::from_tsv(text.as_bytes(), "t.tsv", "p_t_given_s").unwrap()
}

// ---- divergence and retained mass ----------------------------------------------------------

/// Jensen-Shannon divergences (natural log) from scipy 1.14.1 with numpy 2.2.6:
/// `scipy.spatial.distance.jensenshannon(p, q) ** 2` (the function returns the distance, the
/// square root of the divergence; its default base is e). Values stored here.
const SCIPY_JS: [(&[f64], &[f64], f64); 4] = [
    (&[0.75, 0.25], &[1.0, 0.0], 0.09560258894703255),
    (
        &[0.5, 0.3, 0.2, 0.0],
        &[0.0, 0.2, 0.5, 0.3],
        0.3154999078027912,
    ),
    (
        &[0.1, 0.2, 0.3, 0.4],
        &[0.4, 0.3, 0.2, 0.1],
        0.1064401352862232,
    ),
    (&[0.6, 0.4, 0.0], &[0.5, 0.0, 0.5], 0.31419209939778303),
];

fn named(probabilities: &[f64]) -> Vec<(String, f64)> {
    probabilities
        .iter()
        .enumerate()
        .filter(|(_, &p)| p > 0.0)
        .map(|(i, &p)| (format!("target {i}"), p))
        .collect()
}

fn agreement(base: &[(String, f64)], other: &[(String, f64)]) -> baler::measure::SourceAgreement {
    let a: Vec<(&str, f64)> = base.iter().map(|(t, p)| (t.as_str(), *p)).collect();
    let b: Vec<(&str, f64)> = other.iter().map(|(t, p)| (t.as_str(), *p)).collect();
    source_agreement(&a, &b)
}

#[test]
fn divergence_matches_scipy_jensen_shannon() {
    for (p, q, expected) in SCIPY_JS {
        let got = agreement(&named(p), &named(q)).divergence;
        assert!(
            (got - expected).abs() < 1e-12,
            "{p:?} vs {q:?}: {got} vs scipy {expected}"
        );
    }
}

#[test]
fn divergence_and_mass_by_hand() {
    // p = (1/2, 1/2), q = (1, 0): m = (3/4, 1/4);
    // KL(p‖m) = ½ ln(2/3) + ½ ln 2 = ½ ln(4/3), KL(q‖m) = ln(4/3); JS = ¾ ln(4/3).
    let base = named(&[0.5, 0.5]);
    let a = agreement(&base, &named(&[1.0, 0.0]));
    assert!((a.divergence - 0.75 * (4.0f64 / 3.0).ln()).abs() < 1e-15);
    assert_eq!(a.retained_mass, 0.5);
    // disjoint supports: JS reaches its maximum ln 2 (a standard property of the divergence)
    let b = agreement(&named(&[1.0, 0.0]), &named(&[0.0, 1.0]));
    assert!((b.divergence - LN_2).abs() < 1e-15);
    assert_eq!(b.retained_mass, 0.0);
    // a source that lost every option
    let c = agreement(&base, &[]);
    assert_eq!((c.retained_mass, c.divergence), (0.0, LN_2));
    // unnormalized base values are normalized first: (2, 1, 1) is (½, ¼, ¼); keeping the
    // first two retains ¾
    let d = agreement(&named(&[2.0, 1.0, 1.0]), &named(&[0.5, 0.25, 0.0]));
    assert!((d.retained_mass - 0.75).abs() < 1e-15);
    // the same distribution, listed in another order, scaled: no divergence
    let e = agreement(
        &named(&[0.2, 0.8]),
        &[("target 1".into(), 8.0), ("target 0".into(), 2.0)],
    );
    assert!(e.divergence.abs() < 1e-16 && (e.retained_mass - 1.0).abs() < 1e-15);
}

#[test]
fn averages_over_sources_and_test_occurrences() {
    let base = tsv("source\ttarget\tp_t_given_s\n\
                    a\tx\t0.5\na\ty\t0.5\nb\tz\t1\nc\tw\t1\n");
    let other = tsv("source\ttarget\tp_t_given_s\na\tx\t0.5\nb\tz\t1\n");
    let test = vec![words("a b a"), words("c")];
    let r = compare(
        &base,
        &[&other],
        Some(&test),
        None,
        &CompareOptions::default(),
    )
    .unwrap();
    let g = &r.tables[1].agreement;
    // per source: a keeps ½, b keeps 1, c keeps 0 → mean ½
    assert_eq!((g.sources, g.sources_emptied), (3, 1));
    assert!((g.retained_mass - 0.5).abs() < 1e-15);
    // a has JS f(½) = ln 2 + ½(½ ln ½ − (3/2) ln(3/2)), b 0, c ln 2
    let f = LN_2 + 0.5 * (0.5 * 0.5f64.ln() - 1.5 * 1.5f64.ln());
    assert!((g.divergence - (f + LN_2) / 3.0).abs() < 1e-15);
    // weighted by test occurrences a:2, b:1, c:1
    assert!((g.test_retained_mass.unwrap() - (2.0 * 0.5 + 1.0) / 4.0).abs() < 1e-15);
    assert!((g.test_divergence.unwrap() - (2.0 * f + LN_2) / 4.0).abs() < 1e-15);
    // the base against itself
    let own = &r.tables[0].agreement;
    assert_eq!((own.retained_mass, own.divergence), (1.0, 0.0));
    // sizes: options 2, 1, 1 → median 1, mean 4/3
    let size = &r.tables[0].size;
    assert_eq!((size.pairs, size.sources, size.options_max), (4, 3, 2));
    assert_eq!(size.options_median, 1.0);
    assert!((size.options_mean - 4.0 / 3.0).abs() < 1e-15);
}

// ---- coverage and reachability --------------------------------------------------------------

#[test]
fn coverage_and_segmentation_by_hand() {
    let table = tsv("source\ttarget\tp_t_given_s\n\
                     the\tel\t1\nthe red\tel rojo\t1\nred saw\tsierra roja\t1\nsaw\tsierra\t1\n\
                     the red saw blade\tla hoja de la sierra roja\t1\n");
    let test = vec![
        words("the red saw cuts"),
        words("the red saw blade"),
        words(""),
    ];
    let c = coverage(&table, &test, 4).unwrap();
    assert_eq!((c.sentences, c.tokens), (3, 8));
    // "cuts" is the only uncovered token
    assert_eq!(c.tokens_covered, 7);
    // unigrams: the, saw (twice each) of 8; bigrams: "the red", "red saw" (twice each) of 6;
    // trigrams: none of 4; 4-grams: "the red saw blade" of 2
    let found: Vec<(u64, u64)> = c
        .spans_by_length
        .iter()
        .map(|x| (x.found, x.spans))
        .collect();
    assert_eq!(found, [(4, 8), (4, 6), (0, 4), (1, 2)]);
    // greedy longest match: [the red] [saw] [cuts] | [the red saw blade] → 4 segments
    assert_eq!(c.segments, 4);
    assert_eq!(c.mean_segment_length, 2.0);
    // with spans of at most 2 tokens the second sentence needs [the red] [saw] [blade]
    let short = coverage(&table, &test, 2).unwrap();
    assert_eq!(short.segments, 6);
}

#[test]
fn reachability_by_hand() {
    let table = tsv("source\ttarget\tp_t_given_s\n\
                     the saw\tla sierra\t0.9\nthe saw\tel serrucho\t0.1\nis sharp\testá afilada\t1\n");
    let test = vec![words("the saw is sharp"), words("the saw")];
    let reference = vec![words("la sierra está afilada"), words("una sierra")];
    let r = reachability(&table, &test, &reference, 7).unwrap();
    let got: Vec<(u64, u64)> = r.by_order.iter().map(|o| (o.reachable, o.ngrams)).collect();
    // sentence 1: unigrams all 4; bigrams "la sierra", "está afilada" but not "sierra está";
    // no trigram or 4-gram crosses two targets. Sentence 2: "sierra" only.
    assert_eq!(got, [(5, 6), (2, 4), (0, 2), (0, 1)]);
    assert!((r.share - 7.0 / 13.0).abs() < 1e-15);
}

#[test]
fn packed_and_tsv_tables_measure_alike() {
    let dir = tempfile::tempdir().unwrap();
    let text = "source\ttarget\tp_t_given_s\n\
                la broca\tthe drill bit\t0.625\nla broca\tthe bit\t0.375\nafilada\tsharp\t1\n";
    let packed = dir.path().join("t.bale");
    let options = baler::pack::PackOptions {
        bits: None,
        ..Default::default()
    };
    baler::pack::pack_tsv(text.as_bytes(), "t.tsv", &packed, &options).unwrap();
    // found by its magic bytes, whatever the name
    let renamed = dir.path().join("t.table");
    std::fs::copy(&packed, &renamed).unwrap();
    let a = tsv(text);
    let b = MeasuredTable::open(&renamed, "p_t_given_s").unwrap();
    assert!(b.is_packed());
    let test = vec![words("la broca afilada")];
    let r = compare(&a, &[&b], Some(&test), None, &CompareOptions::default()).unwrap();
    let (x, y) = (&r.tables[0], &r.tables[1]);
    assert_eq!(x.coverage, y.coverage);
    assert_eq!(
        (x.size.pairs, x.size.sources),
        (y.size.pairs, y.size.sources)
    );
    // these values are exact in f32, so nothing diverges
    assert_eq!(y.agreement.divergence, 0.0);
    // with a reference the packed table's spans come with their targets: same coverage
    let reference = vec![words("the sharp drill bit")];
    let r = compare(
        &a,
        &[&b],
        Some(&test),
        Some(&reference),
        &CompareOptions::default(),
    )
    .unwrap();
    assert_eq!(r.tables[0].coverage, r.tables[1].coverage);
    assert_eq!(r.tables[0].reachability, r.tables[1].reachability);
    // "the", "sharp", "drill", "bit", "drill bit" of 4 + 3 + 2 + 1 n-grams
    let reach = r.tables[1].reachability.as_ref().unwrap();
    assert_eq!(
        (reach.by_order[0].reachable, reach.by_order[1].reachable),
        (4, 1)
    );
}

// ---- the demo data --------------------------------------------------------------------------

/// The demo corpus extracted once per test run (sorted by source, as extraction writes it).
fn demo_pairs() -> &'static (baler::table::Header, Vec<PhrasePair>) {
    static PAIRS: OnceLock<(baler::table::Header, Vec<PhrasePair>)> = OnceLock::new();
    PAIRS.get_or_init(|| {
        let dir = tempfile::tempdir().unwrap();
        let out = dir.path().join("toolshed.tsv");
        let paths = baler::extract::corpus::CorpusPaths {
            source: repo("demo-data/toolshed.en"),
            target: repo("demo-data/toolshed.es"),
            alignment: Some(repo("demo-data/toolshed.align")),
        };
        let mut options = baler::extract::ExtractOptions::default();
        options.shard.threads = 1;
        options.shard.progress = false;
        baler::pipeline::extract_file(&paths, &options, &out).unwrap();
        let mut reader = TsvReader::new(baler::files::open_input(&out).unwrap(), "demo").unwrap();
        let header = reader.header().clone();
        let mut pairs = Vec::new();
        let mut pair = PhrasePair::default();
        while reader.read_into(&mut pair).unwrap() {
            pairs.push(pair.clone());
        }
        (header, pairs)
    })
}

fn table_of(header: &baler::table::Header, pairs: &[PhrasePair]) -> MeasuredTable {
    let mut writer = TsvWriter::new(Vec::new(), header).unwrap();
    for p in pairs {
        writer.write_pair(p).unwrap();
    }
    let bytes = writer.into_inner();
    MeasuredTable::from_tsv(bytes.as_slice(), "demo", "p_t_given_s").unwrap()
}

fn pruned(filters: Vec<Filter>) -> MeasuredTable {
    let (header, pairs) = demo_pairs();
    let options = PruneOptions {
        filters,
        ..Default::default()
    };
    let mut pruner = Pruner::new(header, "demo", &options).unwrap();
    let mut kept = Vec::new();
    pruner
        .run(pairs.iter().cloned().map(|p| Ok((p, 0))), |p| {
            kept.push(p.clone());
            Ok(())
        })
        .unwrap();
    table_of(pruner.header(), &kept)
}

fn demo_test() -> Vec<Vec<String>> {
    baler::measure::read_text(&repo("demo-data/toolshed.test.en")).unwrap()
}

#[test]
fn unpruned_demo_table_has_no_divergence() {
    let (header, pairs) = demo_pairs();
    let base = table_of(header, pairs);
    let same = pruned(vec![]);
    let r = compare(
        &base,
        &[&same],
        Some(&demo_test()),
        None,
        &Default::default(),
    )
    .unwrap();
    let g = &r.tables[1].agreement;
    assert_eq!(
        (g.divergence, g.retained_mass, g.sources_emptied),
        (0.0, 1.0, 0)
    );
    assert_eq!(g.test_divergence, Some(0.0));
    // the significance threshold 0 keeps everything too
    let all = pruned(vec![Filter::Significance(Threshold::Value(0.0))]);
    let r = compare(&base, &[&all], None, None, &Default::default()).unwrap();
    assert_eq!(r.tables[1].agreement.divergence, 0.0);
}

fn measured(base: &MeasuredTable, table: &MeasuredTable) -> (f64, f64) {
    let r = compare(base, &[table], None, None, &Default::default()).unwrap();
    let g = &r.tables[1].agreement;
    (g.divergence, g.retained_mass)
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 6, ..ProptestConfig::default() })]

    /// Tighter significance thresholds keep subsets, so the divergence from the unpruned
    /// table never falls and the retained mass never rises.
    #[test]
    fn divergence_grows_as_significance_tightens(
        mut thresholds in proptest::collection::vec(0.0f64..30.0, 2..5)
    ) {
        thresholds.sort_by(f64::total_cmp);
        let (header, pairs) = demo_pairs();
        let base = table_of(header, pairs);
        let mut last = (0.0, 1.0);
        for t in thresholds {
            let now = measured(&base, &pruned(vec![Filter::Significance(Threshold::Value(t))]));
            prop_assert!(now.0 >= last.0 - 1e-12, "threshold {t}: divergence {} < {}", now.0, last.0);
            prop_assert!(now.1 <= last.1 + 1e-12, "threshold {t}: mass {} > {}", now.1, last.1);
            last = now;
        }
    }

    /// The same for top-k as k falls.
    #[test]
    fn divergence_grows_as_top_k_shrinks(mut ks in proptest::collection::vec(1usize..6, 2..5)) {
        ks.sort_unstable_by(|a, b| b.cmp(a));
        let (header, pairs) = demo_pairs();
        let base = table_of(header, pairs);
        let mut last = (0.0, 1.0);
        for k in ks {
            let now = measured(&base, &pruned(vec![Filter::TopK { k, by: Ranking::default() }]));
            prop_assert!(now.0 >= last.0 - 1e-12, "k {k}: divergence {} < {}", now.0, last.0);
            prop_assert!(now.1 <= last.1 + 1e-12);
            last = now;
        }
    }
}

#[test]
fn demo_thresholds_strictly_raise_the_divergence() {
    // the named thresholds of the demo: each removes pairs the previous kept
    let (header, pairs) = demo_pairs();
    let base = table_of(header, pairs);
    let mut last = -1.0;
    for t in [
        Threshold::Value(0.0),
        Threshold::AlphaMinusEpsilon,
        Threshold::AlphaPlusEpsilon,
        Threshold::Value(20.0),
    ] {
        let (d, _) = measured(&base, &pruned(vec![Filter::Significance(t)]));
        assert!(d > last, "{t:?}: {d} after {last}");
        last = d;
    }
}

// ---- the command line -------------------------------------------------------------------------

fn demo_tsv(dir: &Path) -> PathBuf {
    let (header, pairs) = demo_pairs();
    let path = dir.join("toolshed.tsv");
    let mut writer = TsvWriter::new(std::fs::File::create(&path).unwrap(), header).unwrap();
    for p in pairs {
        writer.write_pair(p).unwrap();
    }
    path
}

#[test]
fn sweep_writes_one_labelled_point_per_setting() {
    let dir = tempfile::tempdir().unwrap();
    let input = demo_tsv(dir.path());
    let out = dir.path().join("sweep");
    let test = repo("demo-data/toolshed.test.en");
    let reference = repo("demo-data/toolshed.test.es");
    ok(
        &[
            "sweep",
            s(&input),
            "--test",
            s(&test),
            "--reference",
            s(&reference),
            "--vary",
            "significance=alpha-epsilon,alpha+epsilon",
            "--vary",
            "bits=4,8,f32",
            "-o",
            s(&out),
            "--quiet",
        ],
        None,
    );
    let labels: Vec<String> = ["alpha-epsilon", "alpha+epsilon"]
        .iter()
        .flat_map(|t| ["4", "8", "f32"].map(|b| format!("significance={t} bits={b}")))
        .collect();
    // the SVG parses as XML; each of its two panels has one circle per setting and the labels
    let svg = std::fs::read_to_string(out.join("sweep.svg")).unwrap();
    let doc = roxmltree::Document::parse(&svg).expect("well-formed XML");
    assert_eq!(doc.root_element().tag_name().name(), "svg");
    let circles = doc
        .descendants()
        .filter(|n| n.has_tag_name("circle"))
        .count();
    assert_eq!(circles, 2 * labels.len());
    let texts: Vec<String> = doc
        .descendants()
        .filter(|n| n.has_tag_name("text"))
        .filter_map(|n| n.text().map(|t| t.trim().to_string()))
        .collect();
    for label in &labels {
        assert_eq!(texts.iter().filter(|t| *t == label).count(), 2, "{label}");
    }
    // the CSV: a header and one row per setting, in grid order, with the packed files
    let csv = std::fs::read_to_string(out.join("sweep.csv")).unwrap();
    let rows: Vec<Vec<&str>> = csv.lines().map(|l| l.split(',').collect()).collect();
    assert_eq!(rows.len(), 1 + labels.len());
    assert_eq!(&rows[0][..4], ["setting", "table", "file_bytes", "pairs"]);
    let bytes = rows[0].iter().position(|c| *c == "file_bytes").unwrap();
    let divergence = rows[0].iter().position(|c| *c == "divergence").unwrap();
    for (row, label) in rows[1..].iter().zip(&labels) {
        assert_eq!(row.len(), rows[0].len());
        assert_eq!(row[0], label);
        let file = Path::new(row[1]);
        assert_eq!(
            std::fs::metadata(file).unwrap().len(),
            row[bytes].parse::<u64>().unwrap()
        );
        assert!(baler::Table::open(file).is_ok());
        let d: f64 = row[divergence].parse().unwrap();
        assert!((0.0..=LN_2).contains(&d));
    }
    // fewer bits, smaller files at the same threshold
    let size = |i: usize| rows[i][bytes].parse::<u64>().unwrap();
    assert!(size(1) < size(2) && size(2) < size(3));
}

#[test]
fn sweep_rejects_unknown_options_and_values() {
    let dir = tempfile::tempdir().unwrap();
    let input = demo_tsv(dir.path());
    let test = repo("demo-data/toolshed.test.en");
    for (vary, needle) in [
        ("colour=red", "not an option"),
        ("top-k=3,lots", "whole number"),
        ("bits=17", "1..16"),
    ] {
        let out = run(
            &[
                "sweep",
                s(&input),
                "--test",
                s(&test),
                "--vary",
                vary,
                "-o",
                s(dir.path()),
            ],
            None,
        );
        assert_eq!(out.status.code(), Some(2));
        let err = String::from_utf8_lossy(&out.stderr);
        assert!(err.contains(needle), "{vary}: {err}");
    }
}

#[test]
fn compare_prints_text_json_and_csv() {
    let dir = tempfile::tempdir().unwrap();
    let input = demo_tsv(dir.path());
    let pruned = dir.path().join("pruned.bale");
    ok(
        &[
            "prune",
            s(&input),
            "-o",
            s(&pruned),
            "--significance",
            "alpha+epsilon",
            "--quiet",
        ],
        None,
    );
    let top = dir.path().join("top1.tsv");
    ok(
        &["prune", s(&input), "-o", s(&top), "--top-k", "1", "--quiet"],
        None,
    );
    let test = repo("demo-data/toolshed.test.en");
    let reference = repo("demo-data/toolshed.test.es");
    let common = [
        "compare",
        s(&input),
        s(&pruned),
        s(&top),
        "--test",
        s(&test),
        "--reference",
        s(&reference),
    ];
    let text = ok(&common, None);
    for needle in [
        "toolshed.tsv (base)",
        "pruned.bale",
        "retained mass",
        "token coverage",
        "reachable 4",
    ] {
        assert!(text.contains(needle), "{needle}: {text}");
    }
    let json: serde_json::Value =
        serde_json::from_str(&ok(&[&common[..], &["--json"]].concat(), None)).unwrap();
    let tables = json["tables"].as_array().unwrap();
    assert_eq!(tables.len(), 3);
    assert_eq!(tables[0]["agreement"]["divergence"], 0.0);
    let pairs = |i: usize| tables[i]["size"]["pairs"].as_u64().unwrap();
    assert!(pairs(1) < pairs(0) && pairs(2) < pairs(0));
    assert_eq!(
        tables[1]["reachability"]["by_order"]
            .as_array()
            .unwrap()
            .len(),
        4
    );
    let csv = ok(&[&common[..], &["--csv"]].concat(), None);
    let rows: Vec<Vec<&str>> = csv.lines().map(|l| l.split(',').collect()).collect();
    assert_eq!(rows.len(), 4);
    assert!(rows.iter().all(|r| r.len() == rows[0].len()));
    let coverage = rows[0].iter().position(|c| *c == "token_coverage").unwrap();
    for row in &rows[1..] {
        let v: f64 = row[coverage].parse().unwrap();
        assert!((0.0..=1.0).contains(&v));
    }
    // a reference of the wrong length names the file
    let short = dir.path().join("short.es");
    std::fs::write(&short, "una línea\n").unwrap();
    let out = run(
        &[
            "compare",
            s(&input),
            s(&top),
            "--test",
            s(&test),
            "--reference",
            s(&short),
        ],
        None,
    );
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(err.contains("short.es:2:"), "{err}");
}

#[test]
fn build_matches_the_stages_run_by_hand() {
    let dir = tempfile::tempdir().unwrap();
    // The recipe and its inputs copied into a folder of their own: every path of a recipe is
    // relative to its folder, so the outputs land in dir/demo-out wherever the build runs.
    let data = dir.path().join("demo-data");
    std::fs::create_dir(&data).unwrap();
    for name in [
        "toolshed.recipe.toml",
        "toolshed.en",
        "toolshed.es",
        "toolshed.align",
        "toolshed.test.en",
        "toolshed.test.es",
    ] {
        std::fs::copy(repo(&format!("demo-data/{name}")), data.join(name)).unwrap();
    }
    let recipe = data.join("toolshed.recipe.toml");
    // the recipe's [quality] reads the language model run-demo.sh builds first
    let lm = dir.path().join("demo-out/toolshed.es.balm");
    std::fs::create_dir(dir.path().join("demo-out")).unwrap();
    ok(
        &[
            "lm",
            "build",
            s(&data.join("toolshed.es")),
            "-o",
            s(&lm),
            "-q",
        ],
        None,
    );
    let elsewhere = tempfile::tempdir().unwrap();
    let report = ok(&["build", s(&recipe), "--quiet"], Some(elsewhere.path()));
    assert!(report.contains("toolshed.bale"), "{report}");
    assert!(report.contains("translation quality"), "{report}");
    assert!(report.contains("reachable"), "{report}");
    let built = dir.path().join("demo-out/toolshed.bale");
    // by hand: extract → prune → pack, with the recipe's options
    let hand = dir.path().join("hand");
    std::fs::create_dir(&hand).unwrap();
    let (raw, kept, packed) = (hand.join("x.tsv"), hand.join("p.tsv"), hand.join("h.bale"));
    ok(
        &[
            "extract",
            "--source",
            s(&repo("demo-data/toolshed.en")),
            "--target",
            s(&repo("demo-data/toolshed.es")),
            "--alignment",
            s(&repo("demo-data/toolshed.align")),
            "-o",
            s(&raw),
            "--quiet",
        ],
        None,
    );
    ok(
        &[
            "prune",
            s(&raw),
            "-o",
            s(&kept),
            "--significance",
            "alpha+epsilon",
            "--top-k",
            "20",
            "--by",
            "p_t_given_s",
            "--quiet",
        ],
        None,
    );
    ok(&["pack", s(&kept), "-o", s(&packed), "--quiet"], None);
    let a = ok(&["dump", s(&built)], None);
    let b = ok(&["dump", s(&packed)], None);
    assert!(a.lines().count() > 100);
    assert_eq!(a, b);
    // the kept unpruned table is what extraction writes
    assert_eq!(
        std::fs::read(dir.path().join("demo-out/toolshed.tsv")).unwrap(),
        std::fs::read(&raw).unwrap()
    );
    // the recipe and the tool version are in the provenance
    let table = baler::Table::open(&built).unwrap();
    let provenance = &table.meta().provenance;
    let get = |k: &str| {
        provenance
            .iter()
            .find(|(key, _)| key == k)
            .map(|(_, v)| v.clone())
    };
    assert_eq!(
        get("recipe"),
        Some(std::fs::read_to_string(&recipe).unwrap())
    );
    assert_eq!(
        get("built_by"),
        Some(format!("baler build {}", env!("CARGO_PKG_VERSION")))
    );
    // the other outputs of the recipe
    let stats: serde_json::Value = serde_json::from_slice(
        &std::fs::read(dir.path().join("demo-out/prune-stats.json")).unwrap(),
    )
    .unwrap();
    assert_eq!(stats["pairs_out"].as_u64(), Some(table.pairs()));
    let json: serde_json::Value =
        serde_json::from_slice(&std::fs::read(dir.path().join("demo-out/report.json")).unwrap())
            .unwrap();
    assert_eq!(json["tables"].as_array().unwrap().len(), 2);
}

#[test]
fn bad_recipes_name_file_line_and_reason() {
    let dir = tempfile::tempdir().unwrap();
    let head = format!(
        "[corpus]\nsource = \"{}\"\ntarget = \"{}\"\nalignment = \"{}\"\n",
        s(&repo("demo-data/toolshed.en")),
        s(&repo("demo-data/toolshed.es")),
        s(&repo("demo-data/toolshed.align"))
    );
    let tail = "[output]\ntable = \"out.bale\"\n";
    let cases = [
        (
            format!("{head}[[filter]]\ntop_k = \"many\"\n{tail}"),
            6,
            "invalid type",
        ),
        (
            format!("{head}[[filter]]\nsignificance = \"beta\"\n{tail}"),
            5,
            "alpha+epsilon",
        ),
        (
            format!("{head}[[filter]]\ntop_k = 3\nmin = \"count=2\"\n{tail}"),
            5,
            "exactly one",
        ),
        (format!("{head}[pack]\nbits = 40\n{tail}"), 6, "1..16"),
        (
            format!("{head}[extract]\nmax_lenght = 3\n{tail}"),
            6,
            "unknown field",
        ),
        (format!("{head}[output\n"), 5, ""),
        (
            format!("{head}[extract]\ndiscount = \"lots\"\n{tail}"),
            6,
            "good-turing",
        ),
    ];
    crate::util::assert_bad_recipes(dir.path(), &cases);
}

#[test]
fn sweep_sorts_unsorted_input_once_and_varies_bounds() {
    let dir = tempfile::tempdir().unwrap();
    let input = dir.path().join("shuffled.tsv");
    // sources out of byte order and not grouped
    std::fs::write(
        &input,
        "source\ttarget\tp_t_given_s\tcount\n\
         sierra\tsaw\t0.7\t7\nbroca\tbit\t0.6\t3\nsierra\thacksaw\t0.3\t3\nbroca\tdrill bit\t0.4\t2\n",
    )
    .unwrap();
    let test = dir.path().join("test.txt");
    std::fs::write(&test, "la sierra\nuna broca\n").unwrap();
    let out = dir.path().join("sweep");
    ok(
        &[
            "sweep",
            s(&input),
            "--test",
            s(&test),
            "--vary",
            "min=count=1,count=3,count=5",
            "-o",
            s(&out),
            "--quiet",
        ],
        None,
    );
    let csv = std::fs::read_to_string(out.join("sweep.csv")).unwrap();
    let rows: Vec<Vec<&str>> = csv.lines().map(|l| l.split(',').collect()).collect();
    let pairs = rows[0].iter().position(|c| *c == "pairs").unwrap();
    let kept: Vec<&str> = rows[1..].iter().map(|r| r[pairs]).collect();
    assert_eq!(kept, ["4", "3", "1"]);
    assert_eq!(rows[1][0], "min=count=1");
    // the sorted copy was temporary
    let mut names: Vec<String> = std::fs::read_dir(&out)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    names.sort();
    assert_eq!(
        names,
        [
            "setting-01.bale",
            "setting-02.bale",
            "setting-03.bale",
            "sweep.csv",
            "sweep.svg"
        ]
    );
    // one panel without a reference: one circle per setting
    let svg = std::fs::read_to_string(out.join("sweep.svg")).unwrap();
    let doc = roxmltree::Document::parse(&svg).unwrap();
    assert_eq!(
        doc.descendants()
            .filter(|n| n.has_tag_name("circle"))
            .count(),
        3
    );
}

#[test]
fn build_without_a_held_out_set_reports_sizes_and_divergence() {
    let dir = tempfile::tempdir().unwrap();
    let recipe = dir.path().join("r.toml");
    let corpus = |name: &str| s(&repo(&format!("demo-data/{name}"))).to_string();
    std::fs::write(
        &recipe,
        format!(
            "[corpus]\nsource = \"{}\"\ntarget = \"{}\"\nalignment = \"{}\"\n\
             [[filter]]\ntop_k = 1\n[pack]\nbits = \"f32\"\n[output]\ntable = \"out/t.bale\"\n",
            corpus("toolshed.en"),
            corpus("toolshed.es"),
            corpus("toolshed.align")
        ),
    )
    .unwrap();
    let csv = ok(&["build", s(&recipe), "--csv", "--quiet"], Some(dir.path()));
    let rows: Vec<Vec<&str>> = csv.lines().map(|l| l.split(',').collect()).collect();
    assert_eq!(rows.len(), 3);
    assert_eq!(rows[1][0], "extracted (not kept)");
    assert!(!rows[0].contains(&"token_coverage"));
    let divergence = rows[0].iter().position(|c| *c == "divergence").unwrap();
    assert!(rows[2][divergence].parse::<f64>().unwrap() > 0.0);
    // only the table is left behind
    let left: Vec<_> = std::fs::read_dir(dir.path().join("out")).unwrap().collect();
    assert_eq!(left.len(), 1);
}

/// `--column` picks the score column retained mass and divergence read. By hand: source `a`
/// keeps `x` only; normalized over `a`'s options, p_t_given_s gives `x` r = ½ and p_s_given_t
/// r = 1 / (1 + ¼) = 0.8; with nested pruning JS = ln 2 + ½ (r ln r − (1+r) ln(1+r)) (see
/// `source_agreement`). `b` is unchanged (0), so the means are halved.
#[test]
fn column_flag_measures_the_named_score() {
    let dir = tempfile::tempdir().unwrap();
    let header = "source\ttarget\tp_t_given_s\tp_s_given_t\n";
    let base = dir.path().join("base.tsv");
    let other = dir.path().join("other.tsv");
    let test = dir.path().join("test.txt");
    std::fs::write(
        &base,
        format!("{header}a\tx\t0.5\t1\na\ty\t0.5\t0.25\nb\tz\t1\t1\n"),
    )
    .unwrap();
    std::fs::write(&other, format!("{header}a\tx\t0.5\t1\nb\tz\t1\t1\n")).unwrap();
    std::fs::write(&test, "a b\n").unwrap();
    let js = |r: f64| LN_2 + 0.5 * (r * r.ln() - (1.0 + r) * (1.0 + r).ln());
    for (column, r) in [
        (None, 0.5),
        (Some("p_t_given_s"), 0.5),
        (Some("p_s_given_t"), 0.8),
    ] {
        let mut args = vec!["compare", s(&base), s(&other), "--test", s(&test), "--json"];
        if let Some(c) = column {
            args.extend(["--column", c]);
        }
        let v: serde_json::Value = serde_json::from_str(&ok(&args, None)).unwrap();
        assert_eq!(v["column"], column.unwrap_or("p_t_given_s"));
        let g = &v["tables"][1]["agreement"];
        let mass = g["retained_mass"].as_f64().unwrap();
        let divergence = g["divergence"].as_f64().unwrap();
        assert!((mass - (r + 1.0) / 2.0).abs() < 1e-12, "{column:?}: {mass}");
        assert!(
            (divergence - js(r) / 2.0).abs() < 1e-12,
            "{column:?}: {divergence}"
        );
    }
    let out = run(
        &[
            "compare",
            s(&base),
            s(&other),
            "--test",
            s(&test),
            "--column",
            "colour",
        ],
        None,
    );
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("colour"));

    // sweep: the CSV's divergence follows the column too
    let swept = dir.path().join("sweep");
    ok(
        &[
            "sweep",
            s(&base),
            "--test",
            s(&test),
            "--vary",
            "top-k=1",
            "--column",
            "p_s_given_t",
            "-o",
            s(&swept),
            "-q",
        ],
        None,
    );
    let csv = std::fs::read_to_string(swept.join("sweep.csv")).unwrap();
    let mut lines = csv.lines();
    let names: Vec<&str> = lines.next().unwrap().split(',').collect();
    let row: Vec<&str> = lines.next().unwrap().split(',').collect();
    let at = |n: &str| {
        row[names.iter().position(|x| *x == n).unwrap()]
            .parse::<f64>()
            .unwrap()
    };
    // top-k 1 by p_t_given_s keeps the first of a's tied options, x: r = 0.8 again
    assert!((at("divergence") - js(0.8) / 2.0).abs() < 1e-12, "{csv}");
}

/// `--json` on every report: each prints one JSON document on standard output, with the
/// figures the readable report shows.
#[test]
fn every_report_prints_json() {
    let dir = tempfile::tempdir().unwrap();
    let input = demo_tsv(dir.path());
    let test = repo("demo-data/toolshed.test.en");
    let reference = repo("demo-data/toolshed.test.es");
    let table = dir.path().join("t.bale");
    ok(&["pack", s(&input), "-o", s(&table), "-q"], None);
    let model = dir.path().join("m.balm");
    ok(
        &[
            "lm",
            "build",
            s(&reference),
            "-o",
            s(&model),
            "--order",
            "2",
            "-q",
        ],
        None,
    );
    let sweep_dir = dir.path().join("sweep");
    let json = |args: &[&str]| -> serde_json::Value {
        let text = ok(args, None);
        serde_json::from_str(&text).unwrap_or_else(|e| panic!("{args:?}: {e}\n{text}"))
    };
    let v = json(&["inspect", s(&table), "--json"]);
    assert!(v["meta"]["pairs"].as_u64().unwrap() > 0, "{v}");
    let v = json(&[
        "compare",
        s(&table),
        s(&table),
        "--test",
        s(&test),
        "--json",
    ]);
    assert_eq!(v["tables"].as_array().unwrap().len(), 2, "{v}");
    let v = json(&[
        "sweep",
        s(&input),
        "--test",
        s(&test),
        "--vary",
        "top-k=1,2",
        "-o",
        s(&sweep_dir),
        "--json",
    ]);
    assert_eq!(v["settings"].as_array().unwrap().len(), 2, "{v}");
    assert_eq!(v["settings"][0]["label"], "top-k=1");
    let v = json(&[
        "evaluate",
        s(&reference),
        "--reference",
        s(&reference),
        "--json",
    ]);
    assert!(v.is_array() || v.is_object(), "{v}");
    let out = crate::util::baler(
        &["lm", "score", s(&model), "--json"],
        Some("the saw\nthe drill bit\n"),
    );
    assert!(out.status.success(), "{}", crate::util::stderr(&out));
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(v["sentences"], 2, "{v}");
    assert_eq!(v["per_sentence"].as_array().unwrap().len(), 2, "{v}");
    assert!(v["perplexity"].as_f64().unwrap() > 1.0, "{v}");
}
