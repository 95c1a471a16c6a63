//! A generator of phrase tables with realistic sentence-level counts, for the prune benches.
//!
//! Shape (a model, not data): source phrases are Zipf-distributed over a corpus of N sentence
//! pairs (`df_source ≈ N/20 / rank`, so most sources occur in one or a few sentence pairs);
//! a source has `1 + min(df_source, Geometric)` options (up to 60); each target's `df_target`
//! is drawn log-uniformly between 1 and N/20, at least `cooc`; `cooc` is skewed towards 1
//! (`⌈min(df) · u³⌉`). Sources are emitted in byte order, so the table is grouped.

#![allow(dead_code)]

use baler::table::{CountColumn, Header, PhrasePair};

/// splitmix64: small, fast and good enough for synthetic data.
pub struct Rng(u64);

impl Rng {
    pub fn new(seed: u64) -> Rng {
        Rng(seed)
    }
    pub fn next_u64(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }
    /// Uniform in [0, 1).
    pub fn unit(&mut self) -> f64 {
        (self.next_u64() >> 11) as f64 / (1u64 << 53) as f64
    }
}

pub const SENTENCE_PAIRS: u64 = 1_000_000;

pub fn header() -> Header {
    let mut h = Header::default();
    h.metadata.set("sentence_pairs", SENTENCE_PAIRS.to_string());
    h.schema.scores = vec!["p_t_given_s".into(), "lex_t_given_s".into()];
    h.schema.counts = vec![
        CountColumn::Cooc,
        CountColumn::DfSource,
        CountColumn::DfTarget,
    ];
    h
}

/// Calls `f` with `pairs` generated pairs, grouped by source in byte order.
pub fn generate(pairs: usize, seed: u64, mut f: impl FnMut(PhrasePair)) {
    let n = SENTENCE_PAIRS;
    let top = (n / 20) as f64;
    let mut rng = Rng::new(seed);
    let mut made = 0;
    let mut rank = 0u64;
    while made < pairs {
        rank += 1;
        let df_source = ((top / rank as f64) as u64).clamp(1, n);
        // geometric number of extra options, mean 4
        let mut extra = 0;
        while extra < 59 && rng.unit() < 0.8 {
            extra += 1;
        }
        let options = (1 + extra.min(df_source as usize * 3)).min(pairs - made);
        // fixed-width rank keeps sources in byte order
        let source = format!("s{rank:09} w{}", rank % 97);
        let mut remaining = 1.0;
        for k in 0..options {
            let u = rng.unit();
            let df_target_draw = (top.ln() * rng.unit()).exp() as u64;
            let cooc = ((df_source as f64 * u * u * u).ceil() as u64).clamp(1, df_source);
            let df_target = df_target_draw.max(cooc).min(n - df_source + cooc);
            let p = if k + 1 == options {
                remaining
            } else {
                remaining * 0.5
            };
            remaining -= p;
            f(PhrasePair {
                source: source.clone(),
                target: format!("t{} x{}", df_target_draw, k),
                alignment: Vec::new(),
                scores: vec![p, 0.5 * p + 0.01],
                counts: vec![cooc, df_source, df_target],
            });
        }
        made += options;
    }
}
