//! The synthetic-table generator (`baler::synth`, `baler synth`) and the shipped demo corpus.

use std::collections::HashMap;
use std::path::{Path, PathBuf};
use std::process::Command;

use baler::synth::{
    occupancy, zipf_probabilities, AliasTable, Generator, ShapeStats, SynthOptions,
};
use baler::table::{CountColumn, PhrasePair, TsvReader};
use rand_xoshiro::rand_core::{RngCore, SeedableRng};
use rand_xoshiro::Xoshiro256PlusPlus;

use crate::util::{bin as baler, repo};

fn small(pairs: u64) -> SynthOptions {
    SynthOptions {
        pairs,
        seed: 11,
        counts: true,
        alignment: true,
        source_words: 20_000,
        target_words: 30_000,
        ..SynthOptions::default()
    }
}

fn tsv(options: &SynthOptions) -> Vec<u8> {
    baler::synth::write_tsv(Generator::new(options).unwrap(), Vec::new()).unwrap()
}

fn read_back(bytes: &[u8]) -> (baler::table::Header, Vec<PhrasePair>) {
    let reader = TsvReader::new(bytes, "synthetic.tsv").unwrap();
    let header = reader.header().clone();
    let pairs = reader.map(|p| p.unwrap()).collect();
    (header, pairs)
}

#[test]
fn same_options_give_identical_bytes_and_other_seeds_differ() {
    let options = small(30_000);
    let a = tsv(&options);
    assert_eq!(a, tsv(&options));
    let b = tsv(&SynthOptions {
        seed: 12,
        ..options
    });
    assert_ne!(a, b);
}

#[test]
fn exact_number_of_pairs() {
    for pairs in [0, 1, 7, 1000, 54_321] {
        let n = Generator::new(&small(pairs)).unwrap().count() as u64;
        assert_eq!(n, pairs);
    }
}

#[test]
fn sorted_by_source_then_target_in_byte_order_without_duplicates() {
    let (_, pairs) = read_back(&tsv(&small(120_000)));
    assert_eq!(pairs.len(), 120_000);
    for w in pairs.windows(2) {
        let (a, b) = (&w[0], &w[1]);
        let order = a
            .source
            .as_bytes()
            .cmp(b.source.as_bytes())
            .then(a.target.as_bytes().cmp(b.target.as_bytes()));
        assert!(
            order.is_lt(),
            "{:?} {:?} before {:?} {:?}",
            a.source,
            a.target,
            b.source,
            b.target
        );
    }
}

#[test]
fn schema_and_metadata() {
    let (header, pairs) = read_back(&tsv(&small(5000)));
    let schema = &header.schema;
    assert_eq!(
        schema.scores,
        [
            "p_t_given_s",
            "p_s_given_t",
            "lex_t_given_s",
            "lex_s_given_t"
        ]
    );
    assert_eq!(schema.counts, CountColumn::ALL);
    assert!(schema.alignment);
    assert_eq!(header.metadata.sentence_pairs(), Some(1000));
    assert_eq!(header.metadata.get("seed"), Some("11"));
    for p in &pairs {
        let (s, t) = (p.source.split(' ').count(), p.target.split(' ').count());
        assert!((1..=7).contains(&s) && (1..=7).contains(&t), "{p:?}");
        assert!(!p.alignment.is_empty(), "every pair has a link: {p:?}");
        assert!(p.scores.iter().all(|&x| x > 0.0 && x <= 1.0), "{p:?}");
    }

    let plain = read_back(&tsv(&SynthOptions {
        counts: false,
        alignment: false,
        ..small(100)
    }));
    assert!(plain.0.schema.counts.is_empty() && !plain.0.schema.alignment);
    assert_eq!(plain.0.metadata.sentence_pairs(), None);
    assert_eq!(plain.1.len(), 100);
}

#[test]
fn max_length_bounds_both_sides() {
    let options = SynthOptions {
        max_length: 3,
        ..small(20_000)
    };
    let (_, pairs) = read_back(&tsv(&options));
    assert_eq!(pairs.len(), 20_000);
    let longest = pairs
        .iter()
        .map(|p| p.source.split(' ').count().max(p.target.split(' ').count()))
        .max();
    assert_eq!(longest, Some(3));
}

#[test]
fn counts_and_scores_are_mutually_consistent() {
    let options = small(100_000);
    let n = options.sentence_pairs();
    let (header, pairs) = read_back(&tsv(&options));
    let col = |c| header.schema.count_index(c).unwrap();
    let (count, count_source, count_target) = (
        col(CountColumn::Count),
        col(CountColumn::CountSource),
        col(CountColumn::CountTarget),
    );
    let (cooc, df_source, df_target) = (
        col(CountColumn::Cooc),
        col(CountColumn::DfSource),
        col(CountColumn::DfTarget),
    );
    let mut per_target: HashMap<&str, (u64, u64)> = HashMap::new();
    let mut per_source: HashMap<&str, (u64, u64, f64)> = HashMap::new();
    for p in &pairs {
        let c = &p.counts;
        assert!(c[count] >= 1, "{p:?}");
        assert!(c[count] <= c[count_source].min(c[count_target]), "{p:?}");
        assert!(
            c[cooc] >= 1 && c[cooc] <= c[df_source].min(c[df_target]),
            "{p:?}"
        );
        assert!(
            c[df_source] <= c[count_source] && c[df_source] <= n,
            "{p:?}"
        );
        assert!(
            c[df_target] <= c[count_target] && c[df_target] <= n,
            "{p:?}"
        );
        // Scores are the relative frequencies of the counts, exactly.
        assert_eq!(
            p.scores[0],
            c[count] as f64 / c[count_source] as f64,
            "{p:?}"
        );
        assert_eq!(
            p.scores[1],
            c[count] as f64 / c[count_target] as f64,
            "{p:?}"
        );
        // A phrase's own counts are the same on every row it appears in.
        let t = per_target
            .entry(&p.target)
            .or_insert((c[count_target], c[df_target]));
        assert_eq!(*t, (c[count_target], c[df_target]), "{p:?}");
        let s = per_source
            .entry(&p.source)
            .or_insert((c[count_source], c[df_source], 0.0));
        assert_eq!((s.0, s.1), (c[count_source], c[df_source]), "{p:?}");
        s.2 += p.scores[0];
    }
    for (source, (_, _, mass)) in per_source {
        assert!(
            mass <= 1.0 + 1e-9,
            "p_t_given_s of {source:?} sums to {mass}"
        );
    }
}

/// Least-squares slope of log frequency against log rank over ranks `from..to` (1-based).
fn zipf_slope(mut frequencies: Vec<u64>, from: usize, to: usize) -> f64 {
    frequencies.sort_unstable_by(|a, b| b.cmp(a));
    let points: Vec<(f64, f64)> = (from..to)
        .map(|r| ((r as f64).ln(), (frequencies[r - 1] as f64).ln()))
        .collect();
    let n = points.len() as f64;
    let (mx, my) = (
        points.iter().map(|p| p.0).sum::<f64>() / n,
        points.iter().map(|p| p.1).sum::<f64>() / n,
    );
    let sxy: f64 = points.iter().map(|p| (p.0 - mx) * (p.1 - my)).sum();
    let sxx: f64 = points.iter().map(|p| (p.0 - mx).powi(2)).sum();
    sxy / sxx
}

/// The shape a real phrase table has (common practice, from experience with tables extracted
/// from parallel text; the numbers are ranges from memory, not from one source): word
/// frequencies follow Zipf's law with an exponent near 1; most source phrases have one or two
/// options, frequent words hundreds; phrases of every length up to the limit, short ones more
/// common; target phrases shared across sources.
#[test]
fn shape_is_realistic_at_moderate_size() {
    let options = SynthOptions {
        counts: false,
        alignment: false,
        ..small(300_000)
    };
    let mut stats = ShapeStats::new();
    let mut source_tokens: HashMap<String, u64> = HashMap::new();
    let mut target_tokens: HashMap<String, u64> = HashMap::new();
    for pair in Generator::new(&options).unwrap() {
        stats.add(&pair);
        for w in pair.source.split(' ') {
            *source_tokens.entry(w.to_string()).or_default() += 1;
        }
        for w in pair.target.split(' ') {
            *target_tokens.entry(w.to_string()).or_default() += 1;
        }
    }
    eprintln!("{stats}");
    let source_slope = zipf_slope(source_tokens.values().copied().collect(), 10, 5000);
    let target_slope = zipf_slope(target_tokens.values().copied().collect(), 10, 5000);
    eprintln!("zipf slopes: source {source_slope:.3}, target {target_slope:.3}");
    assert!((-1.25..=-0.75).contains(&source_slope), "{source_slope}");
    assert!((-1.25..=-0.75).contains(&target_slope), "{target_slope}");

    // Options per source: long-tailed.
    let histogram = stats.options_histogram();
    let single = histogram[0] as f64 / stats.sources() as f64;
    assert!(
        (0.5..0.85).contains(&single),
        "share of one-option sources {single}"
    );
    assert!(
        stats.max_options() >= 100,
        "max options {}",
        stats.max_options()
    );
    assert!(
        (1.5..4.0).contains(&stats.mean_options()),
        "{}",
        stats.mean_options()
    );
    let tail: u64 = histogram.iter().skip(4).sum(); // sources with 16 or more options
    assert!(tail > 100, "{histogram:?}");

    // Lengths: all of 1..=7, the short half more common than the long end.
    let lengths = stats.source_lengths();
    assert_eq!(lengths.len(), 8, "{lengths:?}");
    assert!(lengths[1..].iter().all(|&n| n > 0), "{lengths:?}");
    assert!(
        lengths[1] + lengths[2] > 3 * (lengths[6] + lengths[7]),
        "{lengths:?}"
    );
    let targets = stats.target_lengths();
    assert!(
        targets[1] + targets[2] > 3 * (targets[6] + targets[7]),
        "{targets:?}"
    );

    // Shared targets: fewer distinct targets than pairs, and frequent ones reused widely.
    let distinct = stats.distinct_targets() as f64 / stats.pairs() as f64;
    assert!(distinct < 0.9, "distinct targets per pair {distinct}");

    // Pseudo-words of realistic length: a few characters for frequent words, longer rare ones.
    let mean_chars = |counts: &HashMap<String, u64>| {
        let (chars, n) = counts.iter().fold((0u64, 0u64), |(c, n), (w, &f)| {
            (c + f * w.chars().count() as u64, n + f)
        });
        chars as f64 / n as f64
    };
    let (s, t) = (mean_chars(&source_tokens), mean_chars(&target_tokens));
    assert!(
        (3.0..8.0).contains(&s) && (3.0..8.0).contains(&t),
        "{s} {t}"
    );
}

/// Pearson's chi-square goodness-of-fit test of the alias sampler against the Zipf law, with
/// the critical value from the `statrs` crate (its `ChiSquared` inverse CDF).
#[test]
fn alias_sampler_matches_zipf_law_by_chi_square() {
    use statrs::distribution::{ChiSquared, ContinuousCDF};
    let n = 50;
    let p = zipf_probabilities(n, 1.0);
    let table = AliasTable::new(&p);
    let mut rng = Xoshiro256PlusPlus::seed_from_u64(99);
    let draws = 400_000u32;
    // Pearson's statistic of `draws` samples of `table` against the Zipf probabilities p
    let chi_square = |table: &AliasTable, rng: &mut Xoshiro256PlusPlus| -> f64 {
        let mut observed = vec![0u32; n];
        for _ in 0..draws {
            observed[table.sample(rng) as usize] += 1;
        }
        observed
            .iter()
            .zip(&p)
            .map(|(&o, &p)| {
                let e = p * f64::from(draws);
                (f64::from(o) - e).powi(2) / e
            })
            .sum()
    };
    let statistic = chi_square(&table, &mut rng);
    let critical = ChiSquared::new((n - 1) as f64).unwrap().inverse_cdf(0.999);
    assert!(statistic < critical, "chi-square {statistic} >= {critical}");
    // And it can fail: a sampler off by a little on the top rank is caught.
    let mut skewed = p.clone();
    skewed[0] *= 1.05;
    let table = AliasTable::new(&skewed);
    let statistic = chi_square(&table, &mut rng);
    assert!(
        statistic > critical,
        "skewed sampler not detected: {statistic}"
    );
}

/// The occupancy expectation (expected number of occupied cells when `c` balls fall uniformly
/// into `N` cells) against a worked example, the birthday problem, 23 people and 365 days:
/// 365 (1 - (364/365)^23) = 22.32 distinct birthdays; and against a simulation.
#[test]
fn occupancy_matches_birthday_example_and_simulation() {
    assert_eq!(occupancy(23, 365), 22);
    let mut rng = Xoshiro256PlusPlus::seed_from_u64(4);
    for (balls, cells) in [(40u64, 100u64), (300, 100), (1000, 5000)] {
        let trials = 2000;
        let mut total = 0u64;
        let mut seen = vec![false; cells as usize];
        for _ in 0..trials {
            seen.iter_mut().for_each(|s| *s = false);
            for _ in 0..balls {
                seen[(rng.next_u64() % cells) as usize] = true;
            }
            total += seen.iter().filter(|&&s| s).count() as u64;
        }
        let simulated = total as f64 / trials as f64;
        let formula = occupancy(balls, cells) as f64;
        assert!(
            (simulated - formula).abs() <= 1.0,
            "{balls} in {cells}: {simulated} vs {formula}"
        );
    }
}

#[test]
fn cli_writes_a_compressed_table_that_reads_back() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("bench.tsv.zst");
    let out = baler()
        .args([
            "synth",
            "--pairs",
            "5k",
            "--seed",
            "3",
            "--counts",
            "--alignment",
        ])
        .args([
            "--source-words",
            "2000",
            "--target-words",
            "3000",
            "--stats",
            "-o",
        ])
        .arg(&path)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(stderr.contains("wrote 5000 pairs"), "{stderr}");
    assert!(stderr.contains("distinct targets"), "{stderr}");
    let input = baler::files::open_input(&path).unwrap();
    let reader = TsvReader::new(input, "bench.tsv.zst").unwrap();
    assert_eq!(reader.header().metadata.sentence_pairs(), Some(1000));
    let pairs: Vec<PhrasePair> = reader.map(|p| p.unwrap()).collect();
    assert_eq!(pairs.len(), 5000);

    // Same flags through the library give the same table.
    let library = tsv(&SynthOptions {
        pairs: 5000,
        seed: 3,
        counts: true,
        alignment: true,
        source_words: 2000,
        target_words: 3000,
        ..SynthOptions::default()
    });
    let mut from_cli = Vec::new();
    std::io::Read::read_to_end(&mut baler::files::open_input(&path).unwrap(), &mut from_cli)
        .unwrap();
    assert_eq!(from_cli, library);
}

#[test]
fn cli_rejects_bad_options_and_writes_nothing() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("never.tsv");
    for (flag, value) in [
        ("--source-words", "10"),
        ("--max-length", "0"),
        ("--zipf-exponent", "9"),
    ] {
        let out = baler()
            .args(["synth", "--pairs", "100", flag, value, "-o"])
            .arg(&path)
            .output()
            .unwrap();
        assert_eq!(out.status.code(), Some(2), "{flag}");
        let stderr = String::from_utf8_lossy(&out.stderr);
        assert!(stderr.contains(flag), "{flag}: {stderr}");
    }
    // A directory (like a device or a pipe) is not replaced by the output.
    let out = baler()
        .args(["synth", "--pairs", "10", "-o"])
        .arg(dir.path())
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("not a regular file"));
    assert!(dir.path().is_dir());
    let out = baler()
        .args(["synth", "--pairs", "lots", "-o"])
        .arg(&path)
        .output()
        .unwrap();
    assert!(!out.status.success());
    assert!(!path.exists());
    assert_eq!(std::fs::read_dir(dir.path()).unwrap().count(), 0);
}

fn demo_data() -> PathBuf {
    repo("demo-data")
}

fn lines(path: &Path) -> Vec<String> {
    let text = std::fs::read_to_string(path).unwrap_or_else(|e| panic!("{path:?}: {e}"));
    assert!(text.ends_with('\n'), "{path:?} lacks a final newline");
    text.lines().map(str::to_string).collect()
}

/// The demo corpus: parallel lines, tokens separated by single spaces, every alignment link
/// (`i-j`, 0-based) inside its sentence pair, held-out English sentences absent from training.
#[test]
fn demo_corpus_is_well_formed() {
    let dir = demo_data();
    let mut train_english = std::collections::HashSet::new();
    for (stem, expected) in [("toolshed", 500), ("toolshed.test", 50)] {
        let en = lines(&dir.join(format!("{stem}.en")));
        let es = lines(&dir.join(format!("{stem}.es")));
        let align = lines(&dir.join(format!("{stem}.align")));
        assert_eq!(
            (en.len(), es.len(), align.len()),
            (expected, expected, expected)
        );
        for (k, ((e, s), a)) in en.iter().zip(&es).zip(&align).enumerate() {
            let line = k + 1;
            for text in [e, s, a] {
                assert!(!text.is_empty(), "{stem} line {line}: empty");
                assert!(
                    !text.starts_with(' ') && !text.ends_with(' ') && !text.contains("  "),
                    "{stem} line {line}: spacing"
                );
            }
            assert_eq!(
                e.to_lowercase(),
                *e,
                "{stem}.en line {line} not lower-cased"
            );
            assert_eq!(
                s.to_lowercase(),
                *s,
                "{stem}.es line {line} not lower-cased"
            );
            let mut links = Vec::new();
            baler::table::parse_alignment(a, e, s, &mut links)
                .unwrap_or_else(|r| panic!("{stem}.align line {line}: {r}"));
            if stem == "toolshed" {
                train_english.insert(e.clone());
            } else {
                assert!(
                    !train_english.contains(e),
                    "held-out line {line} is in training"
                );
            }
        }
    }
}

/// The committed corpus is what the generator script makes (when Python is installed).
#[test]
fn demo_corpus_is_up_to_date_with_its_generator() {
    let script = demo_data().join("make_toolshed.py");
    match Command::new("python3").arg(&script).arg("--check").output() {
        Ok(out) => assert!(
            out.status.success(),
            "{}",
            String::from_utf8_lossy(&out.stderr)
        ),
        Err(e) => eprintln!("python3 not runnable ({e}); generator check skipped"),
    }
}
