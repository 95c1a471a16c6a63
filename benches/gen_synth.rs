//! Synthetic-table generation throughput, next to the cost of formatting the same pairs.
//!
//! * `generate`: pairs produced by `baler::synth::Generator` (no output).
//! * `format_only`: the same pairs, built beforehand, written by `TsvWriter` to a sink: the
//!   floor that any TSV writer of this table pays.
//! * `generate_and_format`: both, on one thread, as `write_tsv` does.
//!
//! The ratio `generate_and_format / format_only` is what generation adds to writing.

use std::io;

use baler::synth::{Generator, SynthOptions};
use baler::table::{PhrasePair, TsvWriter};
use criterion::{criterion_group, criterion_main, BatchSize, Criterion, Throughput};

const PAIRS: u64 = 100_000;

fn options() -> SynthOptions {
    SynthOptions {
        pairs: PAIRS,
        seed: 5,
        ..SynthOptions::default()
    }
}

fn bench(c: &mut Criterion) {
    let options = options();
    let mut group = c.benchmark_group("synth");
    group.throughput(Throughput::Elements(PAIRS));
    group.sample_size(10);

    group.bench_function("generate", |b| {
        b.iter_batched(
            || Generator::new(&options).unwrap(),
            |mut generator| {
                let mut pair = PhrasePair::default();
                let mut n = 0u64;
                while generator.next_into(&mut pair) {
                    n += pair.target.len() as u64;
                }
                n
            },
            BatchSize::PerIteration,
        )
    });

    let prebuilt: Vec<PhrasePair> = Generator::new(&options).unwrap().collect();
    let header = options.header();
    group.bench_function("format_only", |b| {
        b.iter(|| {
            let mut writer = TsvWriter::new(io::sink(), &header).unwrap();
            for pair in &prebuilt {
                writer.write_pair(pair).unwrap();
            }
        })
    });

    group.bench_function("generate_and_format", |b| {
        b.iter_batched(
            || Generator::new(&options).unwrap(),
            |generator| baler::synth::write_tsv(generator, io::sink()).unwrap(),
            BatchSize::PerIteration,
        )
    });
    group.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);
