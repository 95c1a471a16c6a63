//! Extraction benchmarks, each next to a baseline measured in the same run:
//!
//! * `phrases/*`: the span-growing extractor against the brute-force enumeration of every
//!   source span × target span, on the same synthetic sentence pairs (25 tokens);
//! * `pipeline/*`: the whole one-machine path on a synthetic corpus with 1 and 2 threads.
//!
//! `cargo bench --bench extract -- --write-corpus DIR N` writes a synthetic corpus of `N`
//! sentence pairs into `DIR` instead (used by `benches/extract.sh`).

use std::time::Duration;

use baler::extract::corpus::{CorpusOptions, CorpusReader, SentencePair};
use baler::extract::phrases::{PhraseFinder, PhraseLimits};
use baler::extract::synthetic::SyntheticCorpus;
use baler::extract::ExtractOptions;
use baler::pipeline::extract_file;
use criterion::{black_box, BenchmarkId, Criterion, Throughput};

fn sentence_pairs(n: u64) -> (tempfile::TempDir, Vec<SentencePair>) {
    let dir = tempfile::tempdir().unwrap();
    let paths = SyntheticCorpus {
        sentence_pairs: n,
        ..Default::default()
    }
    .write(dir.path(), "bench", "")
    .unwrap();
    let mut reader = CorpusReader::open(&paths, CorpusOptions::default()).unwrap();
    let mut pairs = Vec::new();
    let mut pair = SentencePair::default();
    while reader.next_pair(&mut pair).unwrap() {
        pairs.push(pair.clone());
    }
    (dir, pairs)
}

/// Every span pair, consistency tested directly: the baseline the extractor must beat.
fn brute_force(pair: &SentencePair, max: usize) -> usize {
    let (ns, nt) = (pair.source_len(), pair.target_len());
    let mut found = 0;
    for s1 in 0..ns {
        for s2 in s1..ns.min(s1 + max) {
            for t1 in 0..nt {
                for t2 in t1..nt.min(t1 + max) {
                    let mut inside = false;
                    let mut leaves = false;
                    for &(i, j) in &pair.links {
                        let a = (s1..=s2).contains(&usize::from(i));
                        let b = (t1..=t2).contains(&usize::from(j));
                        inside |= a && b;
                        leaves |= a != b;
                    }
                    found += usize::from(inside && !leaves);
                }
            }
        }
    }
    found
}

fn phrases(c: &mut Criterion) {
    let (_dir, pairs) = sentence_pairs(200);
    let limits = PhraseLimits::default();
    let mut group = c.benchmark_group("phrases");
    group.throughput(Throughput::Elements(pairs.len() as u64));
    group.bench_function("span_growing", |b| {
        let mut finder = PhraseFinder::default();
        b.iter(|| {
            let mut n = 0usize;
            for p in &pairs {
                finder.find(p.source_len(), p.target_len(), &p.links, limits, |_| n += 1);
            }
            black_box(n)
        })
    });
    group.bench_function("brute_force_baseline", |b| {
        b.iter(|| black_box(pairs.iter().map(|p| brute_force(p, 7)).sum::<usize>()))
    });
    group.finish();
}

fn pipeline(c: &mut Criterion) {
    let dir = tempfile::tempdir().unwrap();
    let n = 10_000;
    let paths = SyntheticCorpus {
        sentence_pairs: n,
        ..Default::default()
    }
    .write(dir.path(), "bench", "")
    .unwrap();
    let mut group = c.benchmark_group("pipeline");
    group.sample_size(10);
    group.measurement_time(Duration::from_secs(20));
    group.throughput(Throughput::Elements(n));
    for threads in [1, 2] {
        group.bench_with_input(
            BenchmarkId::new("extract_10k_sentence_pairs", threads),
            &threads,
            |b, &threads| {
                let mut options = ExtractOptions::default();
                options.shard.threads = threads;
                options.shard.memory = 512 << 20;
                let out = dir.path().join("table.tsv.zst");
                b.iter(|| extract_file(&paths, &options, &out).unwrap())
            },
        );
    }
    group.finish();
}

fn main() {
    let args: Vec<String> = std::env::args().collect();
    if let Some(k) = args.iter().position(|a| a == "--write-corpus") {
        let dir = std::path::PathBuf::from(&args[k + 1]);
        let n: u64 = args[k + 2].parse().expect("sentence pair count");
        std::fs::create_dir_all(&dir).unwrap();
        SyntheticCorpus {
            sentence_pairs: n,
            ..Default::default()
        }
        .write(&dir, &format!("synthetic-{n}"), "")
        .unwrap();
        return;
    }
    let mut c = Criterion::default().configure_from_args();
    phrases(&mut c);
    pipeline(&mut c);
    c.final_summary();
}
