//! Criterion benches for `baler build`'s and `baler sweep`'s inner steps, each beside its
//! baseline (ratios printed by benches/measure.sh):
//!
//! * prune → pack through a channel (`pipeline::prune_and_pack`, what build and sweep do)
//!   against prune to a temporary TSV file and pack that file (what the stages do by hand);
//! * a held-out coverage pass over a packed table (index walk per start, `Table::spans`)
//!   against the same table loaded from TSV into a `HashMap` (one hash lookup per span).

use std::path::Path;

use criterion::{criterion_group, criterion_main, Criterion, Throughput};

use baler::measure::{coverage, MeasuredTable};
use baler::pipeline::{prune_and_pack, prune_file, Packing};
use baler::prune::{Filter, PruneOptions, Ranking};
use baler::synth::{Generator, SynthOptions};
use baler::table::{PhrasePair, TsvWriter};

/// Pairs of the synthetic table: `BALER_BENCH_PAIRS` or 200 000.
fn pairs() -> u64 {
    std::env::var("BALER_BENCH_PAIRS")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(200_000)
}

/// A synthetic table sorted by source, written as TSV.
fn synthetic_tsv(path: &Path, n: u64) {
    let mut generator = Generator::new(&SynthOptions {
        pairs: n,
        ..Default::default()
    })
    .expect("valid options");
    let header = generator.header();
    let mut all = Vec::with_capacity(n as usize);
    let mut pair = PhrasePair::default();
    while generator.next_into(&mut pair) {
        all.push(pair.clone());
    }
    all.sort_by(|a, b| a.source.cmp(&b.source));
    let file = std::io::BufWriter::new(std::fs::File::create(path).unwrap());
    let mut writer = TsvWriter::new(file, &header).unwrap();
    for p in &all {
        writer.write_pair(p).unwrap();
    }
}

fn prune_then_pack(c: &mut Criterion) {
    let dir = tempfile::tempdir().unwrap();
    let n = pairs();
    let input = dir.path().join("in.tsv");
    synthetic_tsv(&input, n);
    let prune = PruneOptions {
        filters: vec![Filter::TopK {
            k: 5,
            by: Ranking::default(),
        }],
        ..Default::default()
    };
    let mut packing = Packing::default();
    packing.resources.threads = 1;
    let pack = packing.options(None);
    let mut group = c.benchmark_group("measure_prune_pack");
    group.throughput(Throughput::Elements(n));
    group.sample_size(10);
    let out = dir.path().join("out.bale");
    group.bench_function("channel", |b| {
        b.iter(|| prune_and_pack(&input, &out, &prune, &packing).unwrap())
    });
    let temp = dir.path().join("pruned.tsv");
    group.bench_function("temp_file", |b| {
        b.iter(|| {
            prune_file(&input, &temp, &prune, &packing).unwrap();
            let reader = baler::files::open_input(&temp).unwrap();
            baler::pack::pack_tsv(reader, "pruned.tsv", &out, &pack).unwrap()
        })
    });
    group.finish();
}

fn coverage_pass(c: &mut Criterion) {
    let dir = tempfile::tempdir().unwrap();
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let extracted = dir.path().join("toolshed.tsv");
    let paths = baler::extract::corpus::CorpusPaths {
        source: root.join("demo-data/toolshed.en"),
        target: root.join("demo-data/toolshed.es"),
        alignment: Some(root.join("demo-data/toolshed.align")),
    };
    let mut options = baler::extract::ExtractOptions::default();
    options.shard.threads = 1;
    baler::pipeline::extract_file(&paths, &options, &extracted).unwrap();
    let packed = dir.path().join("toolshed.bale");
    let reader = baler::files::open_input(&extracted).unwrap();
    baler::pack::pack_tsv(reader, "toolshed.tsv", &packed, &Default::default()).unwrap();
    let test = baler::measure::read_text(&root.join("demo-data/toolshed.test.en")).unwrap();
    let tokens: u64 = test.iter().map(|s| s.len() as u64).sum();
    let loaded = MeasuredTable::open(&extracted, "p_t_given_s").unwrap();
    let mapped = MeasuredTable::open(&packed, "p_t_given_s").unwrap();
    let mut group = c.benchmark_group("measure_coverage");
    group.throughput(Throughput::Elements(tokens));
    group.bench_function("packed", |b| {
        b.iter(|| coverage(&mapped, &test, 7).unwrap())
    });
    group.bench_function("tsv_in_memory", |b| {
        b.iter(|| coverage(&loaded, &test, 7).unwrap())
    });
    group.finish();
}

criterion_group!(benches, prune_then_pack, coverage_pass);
criterion_main!(benches);
