//! Criterion benches for significance filtering: the memoized Fisher test against computing
//! every tail, and the whole filter pipeline over in-memory pairs (no parsing).

mod prune_gen;

use criterion::{criterion_group, criterion_main, BatchSize, Criterion, Throughput};

use baler::prune::fisher::{neg_ln_p, FisherTest};
use baler::prune::{Filter, PruneOptions, Pruner, Threshold};
use baler::table::PhrasePair;

const PAIRS: usize = 200_000;

fn table() -> Vec<PhrasePair> {
    let mut v = Vec::with_capacity(PAIRS);
    prune_gen::generate(PAIRS, 7, |p| v.push(p));
    v
}

fn significance(c: &mut Criterion) {
    let pairs = table();
    let triples: Vec<(u64, u64, u64)> = pairs
        .iter()
        .map(|p| (p.counts[0], p.counts[1], p.counts[2]))
        .collect();
    let n = prune_gen::SENTENCE_PAIRS;
    let threshold = Threshold::AlphaPlusEpsilon.value(n);
    let mut group = c.benchmark_group("significance");
    group.throughput(Throughput::Elements(PAIRS as u64));
    group.sample_size(10);
    group.bench_function("fisher_memoized", |b| {
        b.iter(|| {
            let mut test = FisherTest::new(n);
            triples
                .iter()
                .filter(|&&(c, s, t)| test.neg_ln_p(c, s, t).unwrap() >= threshold)
                .count()
        })
    });
    group.bench_function("fisher_every_tail", |b| {
        b.iter(|| {
            triples
                .iter()
                .filter(|&&(c, s, t)| neg_ln_p(c, s, t, n).unwrap() >= threshold)
                .count()
        })
    });
    let header = prune_gen::header();
    let options = PruneOptions {
        filters: vec![Filter::Significance(Threshold::AlphaPlusEpsilon)],
        ..Default::default()
    };
    // the pairs kept by a pruner with `options` over a fresh copy of the input
    let pipeline = |b: &mut criterion::Bencher, options: &PruneOptions| {
        b.iter_batched(
            || pairs.clone(),
            |input| {
                let mut pruner = Pruner::new(&header, "bench", options).unwrap();
                let mut kept = 0u64;
                pruner
                    .run(input.into_iter().map(|p| Ok((p, 0))), |_| {
                        kept += 1;
                        Ok(())
                    })
                    .unwrap();
                kept
            },
            BatchSize::LargeInput,
        )
    };
    group.bench_function("pipeline_significance", |b| pipeline(b, &options));
    let copy = PruneOptions::default();
    group.bench_function("pipeline_no_filter", |b| pipeline(b, &copy));
    group.finish();
}

criterion_group!(benches, significance);
criterion_main!(benches);
