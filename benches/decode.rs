//! Criterion benches for translation: the stack decoder beside the greedy longest-match
//! baseline over the same packed table (the ratio is the price of search), and language model
//! scoring. Data: the demo table and corpus under `demo-data/` (English → Spanish); the real
//! corpus is measured by `benches/quality.sh`.

use std::path::Path;

use criterion::{criterion_group, criterion_main, Criterion, Throughput};

use baler::decode::{DecodeSettings, Decoder, Weights};
use baler::lm::{self, LanguageModel};

fn lines(path: &Path) -> Vec<String> {
    std::fs::read_to_string(path)
        .unwrap()
        .lines()
        .map(String::from)
        .collect()
}

fn bench(c: &mut Criterion) {
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("demo-data");
    let dir = tempfile::tempdir().unwrap();
    let table_path = dir.path().join("toolshed.bale");
    let tsv = std::fs::read(root.join("toolshed.tsv")).unwrap();
    baler::pack::pack_tsv(&tsv[..], "toolshed.tsv", &table_path, &Default::default()).unwrap();
    let lm_path = dir.path().join("es.balm");
    let text = std::fs::read(root.join("toolshed.es")).unwrap();
    lm::build(&text[..], "toolshed.es", &Default::default())
        .unwrap()
        .write(&lm_path)
        .unwrap();
    let table = baler::Table::open(&table_path).unwrap();
    let model = LanguageModel::open(&lm_path).unwrap();
    let decoder = Decoder::new(
        &table,
        &model,
        Weights::defaults(table.schema()),
        DecodeSettings::default(),
    );
    let test = lines(&root.join("toolshed.test.en"));
    let mut group = c.benchmark_group("translate");
    group.throughput(Throughput::Elements(test.len() as u64));
    group.bench_function("stack decoder", |b| {
        b.iter(|| {
            for s in &test {
                std::hint::black_box(decoder.translate(s).unwrap());
            }
        })
    });
    group.bench_function("greedy baseline", |b| {
        b.iter(|| {
            for s in &test {
                std::hint::black_box(decoder.greedy(s).unwrap());
            }
        })
    });
    group.finish();
    let reference = lines(&root.join("toolshed.test.es"));
    let words: usize = reference.iter().map(|l| l.split(' ').count() + 1).sum();
    let mut group = c.benchmark_group("language model");
    group.throughput(Throughput::Elements(words as u64));
    group.bench_function("score test references", |b| {
        b.iter(|| {
            for s in &reference {
                let w: Vec<&str> = s.split(' ').collect();
                std::hint::black_box(model.score_sentence(&w));
            }
        })
    });
    group.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);
