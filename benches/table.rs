//! Criterion benches of the packed table, each beside the in-memory `HashMap` of the same table
//! built in the same run: pack throughput (against building the map), single-phrase lookups of
//! hits (random order, every option decoded) and misses, cold lookups (every 20th source in byte
//! order, each once, on a freshly opened table: what `baler lookup` of a phrase list does), all
//! spans of 25-token sentences, and open time. `BALER_BENCH_PAIRS` sets the table size (default
//! 200 000); `BALER_BENCH_TABLE=t.bale` adds the cold lookups on that table (for instance the
//! real en-fr table, where issue 8 measures them against the 1.0 reader; see
//! `benches/lookup_vs_base.sh`).

mod common;

use std::hint::black_box;

use baler::pack::PackOptions;
use baler::read::Options;
use baler::Table;
use criterion::{criterion_group, criterion_main, BatchSize, Criterion, Throughput};

fn benches(c: &mut Criterion) {
    let n = common::bench_pairs();
    let (header, pairs) = common::generate(n);
    let map = common::baseline(&pairs);
    let options = PackOptions::default();
    let (_dir, path) = common::pack(&header, &pairs, &options);
    let table = Table::open(&path).unwrap();

    let mut g = c.benchmark_group("pack");
    g.sample_size(10);
    g.throughput(Throughput::Elements(n));
    g.bench_function("baler_pack", |b| {
        b.iter_batched(
            || tempfile::tempdir().unwrap(),
            |dir| {
                let out = dir.path().join("t.bale");
                baler::pack::pack_pairs(&header, pairs.iter().cloned().map(Ok), &out, &options)
                    .unwrap();
            },
            BatchSize::PerIteration,
        )
    });
    g.bench_function("hashmap_build", |b| {
        b.iter(|| black_box(common::baseline(&pairs)).len())
    });
    g.finish();

    let mut sources: Vec<String> = pairs.iter().map(|p| p.source.clone()).collect();
    sources.dedup();
    let hits = common::shuffled(&sources, 10_000, 1);
    let misses: Vec<String> = hits.iter().map(|s| format!("{s} zq")).collect();

    for (name, queries) in [("hits", &hits), ("misses", &misses)] {
        let mut g = c.benchmark_group(format!("lookup_{name}"));
        g.throughput(Throughput::Elements(queries.len() as u64));
        g.bench_function("baler", |b| {
            let mut options = Options::default();
            b.iter(|| {
                let mut n = 0;
                for q in queries.iter() {
                    table.lookup_into(q, &mut options).unwrap();
                    n += common::touch_packed(&options);
                }
                black_box(n)
            })
        });
        g.bench_function("hashmap", |b| {
            b.iter(|| {
                let mut n = 0;
                for q in queries.iter() {
                    if let Some(options) = map.get(q.as_str()) {
                        n += common::touch_baseline(options);
                    }
                }
                black_box(n)
            })
        });
        g.finish();
    }

    // Cold lookups: each phrase once, on a table opened for the iteration (its caches empty).
    let cold: Vec<String> = sources.iter().step_by(20).cloned().collect();
    let mut g = c.benchmark_group("lookup_cold");
    g.throughput(Throughput::Elements(cold.len() as u64));
    g.bench_function("baler", |b| {
        b.iter_batched(
            || Table::open(&path).unwrap(),
            |table| cold_lookups(&table, &cold),
            BatchSize::PerIteration,
        )
    });
    g.bench_function("hashmap", |b| {
        b.iter(|| {
            let mut n = 0;
            for q in cold.iter() {
                if let Some(options) = map.get(q.as_str()) {
                    n += common::touch_baseline(options);
                }
            }
            black_box(n)
        })
    });
    if let Some(file) = std::env::var_os("BALER_BENCH_TABLE") {
        let file = std::path::PathBuf::from(file);
        let phrases: Vec<String> = Table::open(&file)
            .unwrap()
            .source_phrases()
            .step_by(20)
            .take(20_000)
            .map(Result::unwrap)
            .collect();
        g.throughput(Throughput::Elements(phrases.len() as u64));
        g.bench_function("baler_file", |b| {
            b.iter_batched(
                || Table::open(&file).unwrap(),
                |table| cold_lookups(&table, &phrases),
                BatchSize::PerIteration,
            )
        });
    }
    g.finish();

    let sentences = common::sentences(&pairs, 200, 25);
    let sentences: Vec<Vec<&str>> = sentences
        .iter()
        .map(|s| s.iter().map(String::as_str).collect())
        .collect();
    let mut g = c.benchmark_group("spans_25_tokens");
    g.throughput(Throughput::Elements(sentences.len() as u64));
    g.bench_function("baler", |b| {
        b.iter(|| {
            let mut n = 0;
            for s in &sentences {
                for span in table.spans(s, 7).unwrap() {
                    n += common::touch_packed(&span.options);
                }
            }
            black_box(n)
        })
    });
    g.bench_function("hashmap", |b| {
        let mut key = String::new();
        b.iter(|| {
            let mut n = 0;
            for s in &sentences {
                n += common::baseline_spans(&map, s, 7, &mut key);
            }
            black_box(n)
        })
    });
    g.finish();

    let mut g = c.benchmark_group("open");
    g.bench_function("baler", |b| {
        b.iter(|| black_box(Table::open(&path).unwrap()).pairs())
    });
    g.finish();
}

criterion_group!(table_benches, benches);
criterion_main!(table_benches);

/// Looks every phrase up once, touching every option.
fn cold_lookups(table: &Table, phrases: &[String]) -> usize {
    let mut options = Options::default();
    let mut n = 0;
    for q in phrases {
        table.lookup_into(q, &mut options).unwrap();
        n += common::touch_packed(&options);
    }
    black_box(n)
}
