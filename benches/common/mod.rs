//! Shared set-up for the table benches: a generated table, its packed file, and the in-memory
//! `HashMap` baseline holding the same options.

#![allow(dead_code)]

use std::collections::HashMap;
use std::path::PathBuf;

use baler::synth::{Generator, SynthOptions};
use baler::table::{Header, PhrasePair};

/// The baseline: source phrase to its options (target text and scores), as a decoder that keeps
/// the table in memory would hold it.
pub type Baseline = HashMap<String, Vec<(String, Vec<f32>)>>;

/// Pairs to generate: `BALER_BENCH_PAIRS` or 200 000.
pub fn bench_pairs() -> u64 {
    std::env::var("BALER_BENCH_PAIRS")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(200_000)
}

/// A generated table (four scores, no counts or alignment).
pub fn generate(pairs: u64) -> (Header, Vec<PhrasePair>) {
    let mut generator = Generator::new(&SynthOptions {
        pairs,
        ..Default::default()
    })
    .expect("valid options");
    let header = generator.header();
    let mut out = Vec::with_capacity(pairs as usize);
    let mut pair = PhrasePair::default();
    while generator.next_into(&mut pair) {
        out.push(pair.clone());
    }
    (header, out)
}

/// The same table as a `HashMap`, options in the packed file's order.
pub fn baseline(pairs: &[PhrasePair]) -> Baseline {
    let mut map: Baseline = HashMap::new();
    for p in pairs {
        let scores = p.scores.iter().map(|&s| s as f32).collect();
        map.entry(p.source.clone())
            .or_default()
            .push((p.target.clone(), scores));
    }
    for options in map.values_mut() {
        options.sort_by(|a, b| b.1[0].total_cmp(&a.1[0]).then_with(|| a.0.cmp(&b.0)));
    }
    map
}

/// Packs the table with default options into a temporary directory.
pub fn pack(
    header: &Header,
    pairs: &[PhrasePair],
    options: &baler::pack::PackOptions,
) -> (tempfile::TempDir, PathBuf) {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("bench.bale");
    baler::pack::pack_pairs(header, pairs.iter().cloned().map(Ok), &path, options).unwrap();
    (dir, path)
}

/// A deterministic shuffle (splitmix64), so every run asks the same questions.
pub fn shuffled<T: Clone>(items: &[T], n: usize, seed: u64) -> Vec<T> {
    let mut state = seed;
    let mut next = || {
        state = state.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = state;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    };
    (0..n)
        .map(|_| items[(next() % items.len() as u64) as usize].clone())
        .collect()
}

/// Sentences of `len` tokens built from the words of source phrases, so spans hit often.
pub fn sentences(pairs: &[PhrasePair], count: usize, len: usize) -> Vec<Vec<String>> {
    let sources: Vec<&str> = {
        let mut s: Vec<&str> = pairs.iter().map(|p| p.source.as_str()).collect();
        s.dedup();
        s
    };
    let picks = shuffled(&sources, count * len, 7);
    picks
        .chunks(len)
        .map(|chunk| {
            chunk
                .iter()
                .flat_map(|s| s.split(' '))
                .take(len)
                .map(str::to_string)
                .collect()
        })
        .collect()
}

/// The baseline's version of `Table::spans`: every sub-phrase up to `max_len` looked up.
pub fn baseline_spans(map: &Baseline, tokens: &[&str], max_len: usize, key: &mut String) -> usize {
    let mut found = 0;
    for start in 0..tokens.len() {
        key.clear();
        for (k, token) in tokens[start..].iter().take(max_len).enumerate() {
            if k > 0 {
                key.push(' ');
            }
            key.push_str(token);
            if let Some(options) = map.get(key.as_str()) {
                found += touch_baseline(options);
            }
        }
    }
    found
}

/// Reads every option the way a decoder would (target text and every score).
pub fn touch_baseline(options: &[(String, Vec<f32>)]) -> usize {
    let mut n = 0;
    for (target, scores) in options {
        n += target.len();
        for s in scores {
            n += (s.to_bits() & 1) as usize;
        }
    }
    n
}

/// The same for packed options.
pub fn touch_packed(options: &baler::read::Options) -> usize {
    let mut n = 0;
    for o in options.iter() {
        n += o.target().len();
        for s in o.scores() {
            n += (s.to_bits() & 1) as usize;
        }
    }
    n
}
