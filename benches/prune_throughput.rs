//! Significance-filtering throughput on a large generated table, next to baselines measured in
//! the same run; prints medians of several trials and ratios.
//!
//! ```text
//! cargo bench --bench prune_throughput -- [--pairs 5000000] [--file-pairs 2000000] [--trials 5]
//! ```
//!
//! Pure filtering (pairs already in memory, one core):
//!
//!   * `memo`      FisherTest over the count triples (the memoized -ln p and the comparison)
//!   * `no memo`   `neg_ln_p` computed for every pair (on 200 000 pairs spread over the table)
//!   * `pipeline`  `Pruner` with `--significance alpha+epsilon`, grouping included
//!   * `copy`      `Pruner` with no filter (the grouping and hand-off alone)
//!
//! End to end (the release binary on a TSV file, parsing and writing included):
//!
//!   * `baler prune --significance alpha+epsilon` against `baler prune` with no filter, and
//!     the peak RSS of both at two table sizes (memory independent of size when grouped).

mod prune_gen;

use std::io::Write;
use std::process::Command;
use std::time::Instant;

use baler::prune::fisher::{neg_ln_p, FisherTest};
use baler::prune::{Filter, PruneOptions, Pruner, Threshold};
use baler::table::{PhrasePair, TsvWriter};

fn median(mut v: Vec<f64>) -> f64 {
    v.sort_by(f64::total_cmp);
    v[v.len() / 2]
}

fn arg(name: &str, default: usize) -> usize {
    let args: Vec<String> = std::env::args().collect();
    args.iter()
        .position(|a| a == name)
        .and_then(|i| args.get(i + 1))
        .and_then(|v| v.parse().ok())
        .unwrap_or(default)
}

fn rate(pairs: usize, seconds: f64) -> String {
    format!("{:>7.2} M pairs/s", pairs as f64 / seconds / 1e6)
}

fn run_pruner(pairs: Vec<PhrasePair>, options: &PruneOptions) -> (f64, u64, u64) {
    let header = prune_gen::header();
    let mut pruner = Pruner::new(&header, "bench", options).unwrap();
    let mut kept = 0u64;
    let start = Instant::now();
    pruner
        .run(pairs.into_iter().map(|p| Ok((p, 0))), |_| {
            kept += 1;
            Ok(())
        })
        .unwrap();
    (
        start.elapsed().as_secs_f64(),
        kept,
        pruner.stats().memo_hits,
    )
}

/// Runs the binary under /usr/bin/time; returns (seconds, peak RSS in KiB).
fn timed(args: &[&str]) -> (f64, u64) {
    let start = Instant::now();
    let out = Command::new("/usr/bin/time")
        .arg("-f")
        .arg("%M")
        .arg(env!("CARGO_BIN_EXE_baler"))
        .args(args)
        .output()
        .expect("run baler under /usr/bin/time");
    let seconds = start.elapsed().as_secs_f64();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let stderr = String::from_utf8_lossy(&out.stderr);
    let rss = stderr
        .lines()
        .last()
        .and_then(|l| l.trim().parse().ok())
        .unwrap_or(0);
    (seconds, rss)
}

fn write_tsv(path: &std::path::Path, pairs: usize) {
    let file = std::io::BufWriter::with_capacity(1 << 20, std::fs::File::create(path).unwrap());
    let mut w = TsvWriter::new(file, &prune_gen::header()).unwrap();
    prune_gen::generate(pairs, 11, |p| w.write_pair(&p).unwrap());
    w.into_inner().flush().unwrap();
}

fn main() {
    if std::env::args().any(|a| a == "--list") {
        return; // cargo bench --list
    }
    let n_pairs = arg("--pairs", 5_000_000);
    let file_pairs = arg("--file-pairs", 2_000_000);
    let trials = arg("--trials", 5).max(1);
    let total = prune_gen::SENTENCE_PAIRS;
    let threshold = Threshold::AlphaPlusEpsilon.value(total);

    let mut pairs = Vec::with_capacity(n_pairs);
    prune_gen::generate(n_pairs, 7, |p| pairs.push(p));
    let triples: Vec<(u64, u64, u64)> = pairs
        .iter()
        .map(|p| (p.counts[0], p.counts[1], p.counts[2]))
        .collect();
    let distinct = {
        let mut t = triples.clone();
        t.sort_unstable();
        t.dedup();
        t.len()
    };
    println!(
        "table: {n_pairs} generated pairs, N = {total}, {distinct} distinct count triples; \
         {trials} trials, medians"
    );

    let (mut memo, mut plain, mut pipeline, mut copy) = (vec![], vec![], vec![], vec![]);
    let (mut hits, mut kept_memo, mut kept_pipeline, mut pipeline_hits) = (0, 0, 0, 0);
    // every k-th triple, so that the sample has the table's mix of counts
    let stride = (triples.len() / 200_000).max(1);
    let sampled: Vec<(u64, u64, u64)> = triples.iter().step_by(stride).copied().collect();
    let sample = sampled.len();
    let sig = PruneOptions {
        filters: vec![Filter::Significance(Threshold::AlphaPlusEpsilon)],
        ..Default::default()
    };
    for _ in 0..trials {
        let start = Instant::now();
        let mut test = FisherTest::new(total);
        kept_memo = triples
            .iter()
            .filter(|&&(c, s, t)| test.neg_ln_p(c, s, t).unwrap() >= threshold)
            .count();
        memo.push(start.elapsed().as_secs_f64());
        hits = test.hits();

        let start = Instant::now();
        let kept = sampled
            .iter()
            .filter(|&&(c, s, t)| neg_ln_p(c, s, t, total).unwrap() >= threshold)
            .count();
        plain.push(start.elapsed().as_secs_f64());
        std::hint::black_box(kept);

        let (t, k, h) = run_pruner(pairs.clone(), &sig);
        pipeline.push(t);
        kept_pipeline = k;
        pipeline_hits = h;
        let (t, _, _) = run_pruner(pairs.clone(), &PruneOptions::default());
        copy.push(t);
    }
    assert_eq!(kept_memo as u64, kept_pipeline);
    let (memo, plain, pipeline, copy) =
        (median(memo), median(plain), median(pipeline), median(copy));
    println!("pure filtering, one core (alpha+epsilon keeps {kept_memo} of {n_pairs}):");
    println!(
        "  memo      {}   memo hit rate {:.4}",
        rate(n_pairs, memo),
        hits as f64 / n_pairs as f64
    );
    println!("  no memo   {}", rate(sample, plain));
    println!(
        "  pipeline  {}   memo hit rate {:.4}",
        rate(n_pairs, pipeline),
        pipeline_hits as f64 / n_pairs as f64
    );
    println!("  copy      {}", rate(n_pairs, copy));
    println!(
        "  ratios: memo / no memo = {:.1}x; pipeline time / copy time = {:.2}",
        (n_pairs as f64 / memo) / (sample as f64 / plain),
        pipeline / copy
    );
    drop(pairs);
    drop(triples);

    let dir = tempfile::tempdir().unwrap();
    let mut rss = Vec::new();
    for (label, size) in [("small", file_pairs / 10), ("large", file_pairs)] {
        let input = dir.path().join(format!("{label}.tsv"));
        write_tsv(&input, size);
        let bytes = std::fs::metadata(&input).unwrap().len();
        let out = dir.path().join("out.tsv");
        let (i, o) = (input.to_str().unwrap(), out.to_str().unwrap());
        let (mut ts, mut tc) = (vec![], vec![]);
        let (mut rs, mut rc) = (0, 0);
        for _ in 0..trials.min(3) {
            let (t, r) = timed(&["prune", i, "-o", o, "-q", "--significance", "alpha+epsilon"]);
            ts.push(t);
            rs = rs.max(r);
            let (t, r) = timed(&["prune", i, "-o", o, "-q"]);
            tc.push(t);
            rc = rc.max(r);
        }
        let (ts, tc) = (median(ts), median(tc));
        println!(
            "end to end, {label} file: {size} pairs, {:.0} MB TSV:",
            bytes as f64 / 1e6
        );
        println!(
            "  prune --significance  {}   peak RSS {:>6} KiB",
            rate(size, ts),
            rs
        );
        println!(
            "  prune (copy)          {}   peak RSS {:>6} KiB",
            rate(size, tc),
            rc
        );
        println!("  ratio significance time / copy time = {:.2}", ts / tc);
        rss.push(rs);
    }
    println!(
        "peak RSS large / small (10x the pairs) = {:.2}",
        rss[1] as f64 / rss[0].max(1) as f64
    );
}
