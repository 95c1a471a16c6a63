//! Synthetic word-aligned corpora for benchmarks and tests.
//!
//! Source words are drawn from a Zipfian distribution (exponent 1) over an invented
//! vocabulary. Each source word becomes one target word (most often its usual translation,
//! sometimes one of a few alternatives), two target words, or nothing; a few unaligned target
//! words are inserted; and neighbouring target words are sometimes swapped, so that the
//! alignments have the local reorderings, many-to-one links and unaligned words of real ones.
//! The output is a function of the settings alone.

use std::io::Write;
use std::path::Path;

use super::corpus::CorpusPaths;
use crate::error::{Error, Result};
use crate::files::Output;

/// Shape of a synthetic corpus.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct SyntheticCorpus {
    /// Sentence pairs to write.
    pub sentence_pairs: u64,
    /// Mean source sentence length in tokens (lengths are uniform within ±40%).
    pub mean_length: u32,
    /// Source (and target) vocabulary size.
    pub vocabulary: u32,
    /// Selects one of many corpora with the same shape.
    pub variant: u64,
}

impl Default for SyntheticCorpus {
    fn default() -> Self {
        SyntheticCorpus {
            sentence_pairs: 1000,
            mean_length: 25,
            vocabulary: 50_000,
            variant: 1,
        }
    }
}

/// A small, fast pseudo-random generator (SplitMix64).
#[derive(Clone, Debug)]
pub struct SplitMix(u64);

impl SplitMix {
    /// A generator started from `state`.
    pub fn new(state: u64) -> SplitMix {
        SplitMix(state)
    }

    /// The next 64 random bits.
    pub fn next_u64(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9e37_79b9_7f4a_7c15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
        z ^ (z >> 31)
    }

    /// A uniform number in `0..n` (n > 0).
    pub fn below(&mut self, n: u64) -> u64 {
        ((u128::from(self.next_u64()) * u128::from(n)) >> 64) as u64
    }

    /// A uniform number in `[0, 1)`.
    pub fn unit(&mut self) -> f64 {
        (self.next_u64() >> 11) as f64 / (1u64 << 53) as f64
    }
}

const SYLLABLES: [&str; 16] = [
    "ka", "lo", "mi", "ne", "ru", "sa", "te", "vo", "da", "fi", "go", "hu", "pe", "zi", "bo", "ye",
];

fn word(prefix: &str, mut id: u32, out: &mut String) {
    out.push_str(prefix);
    loop {
        out.push_str(SYLLABLES[(id % 16) as usize]);
        id /= 16;
        if id == 0 {
            break;
        }
    }
}

fn mix(a: u64, b: u64) -> u64 {
    SplitMix::new(a.wrapping_mul(0x2545_f491_4f6c_dd1d) ^ b).next_u64()
}

impl SyntheticCorpus {
    /// Writes `<stem>.src`, `<stem>.tgt` and `<stem>.align` into `dir` (with `suffix`
    /// appended to each name, e.g. `.zst`) and returns their paths.
    ///
    /// # Examples
    /// ```
    /// use baler::extract::synthetic::SyntheticCorpus;
    /// let dir = tempfile::tempdir().unwrap();
    /// let shape = SyntheticCorpus { sentence_pairs: 50, ..Default::default() };
    /// let paths = shape.write(dir.path(), "bench", "").unwrap();
    /// let text = std::fs::read_to_string(&paths.source).unwrap();
    /// assert_eq!(text.lines().count(), 50);
    /// ```
    pub fn write(&self, dir: &Path, stem: &str, suffix: &str) -> Result<CorpusPaths> {
        if self.vocabulary < 2 || self.mean_length == 0 {
            return Err(Error::invalid(
                "synthetic corpus",
                "needs a vocabulary of at least 2 and a positive mean length",
            ));
        }
        let paths = CorpusPaths {
            source: dir.join(format!("{stem}.src{suffix}")),
            target: dir.join(format!("{stem}.tgt{suffix}")),
            alignment: Some(dir.join(format!("{stem}.align{suffix}"))),
        };
        let mut outs = [
            Output::create(&paths.source)?,
            Output::create(&paths.target)?,
            Output::create(paths.alignment.as_ref().expect("set above"))?,
        ];
        let mut lines = [String::new(), String::new(), String::new()];
        let mut generator = Generator::new(*self);
        for _ in 0..self.sentence_pairs {
            generator.sentence_pair(&mut lines);
            for (out, (line, path)) in outs.iter_mut().zip(lines.iter().zip([
                &paths.source,
                &paths.target,
                paths.alignment.as_ref().unwrap(),
            ])) {
                out.write_all(line.as_bytes())
                    .map_err(|e| Error::io(path, "writing", e))?;
            }
        }
        for out in outs {
            out.commit()?;
        }
        Ok(paths)
    }
}

struct Generator {
    shape: SyntheticCorpus,
    rng: SplitMix,
    cumulative: Vec<f64>,
    source: Vec<u32>,
    target: Vec<(u32, Option<usize>)>,
}

impl Generator {
    fn new(shape: SyntheticCorpus) -> Generator {
        let mut total = 0.0;
        let cumulative = (1..=shape.vocabulary)
            .map(|r| {
                total += 1.0 / f64::from(r);
                total
            })
            .collect();
        Generator {
            shape,
            rng: SplitMix::new(shape.variant),
            cumulative,
            source: Vec::new(),
            target: Vec::new(),
        }
    }

    fn zipf(&mut self) -> u32 {
        let total = *self.cumulative.last().expect("vocabulary is not empty");
        let x = self.rng.unit() * total;
        self.cumulative.partition_point(|&c| c <= x) as u32
    }

    fn translation(&mut self, f: u32) -> u32 {
        let v = u64::from(self.shape.vocabulary);
        let r = self.rng.unit();
        if r < 0.7 {
            f // the usual translation shares the source word's rank
        } else {
            let alternative = 1 + self.rng.below(3);
            (mix(u64::from(f), alternative) % v) as u32
        }
    }

    fn sentence_pair(&mut self, lines: &mut [String; 3]) {
        let mean = f64::from(self.shape.mean_length);
        let low = (mean * 0.6).round().max(1.0) as u64;
        let high = (mean * 1.4).round().max(low as f64) as u64;
        let n = (low + self.rng.below(high - low + 1)) as usize;
        self.source.clear();
        for _ in 0..n {
            let w = self.zipf();
            self.source.push(w);
        }
        self.target.clear();
        for i in 0..n {
            let f = self.source[i];
            let r = self.rng.unit();
            if r < 0.08 {
                continue; // unaligned source word
            }
            let e = self.translation(f);
            self.target.push((e, Some(i)));
            if r > 0.92 {
                let e2 = (mix(u64::from(f), 7) % u64::from(self.shape.vocabulary)) as u32;
                self.target.push((e2, Some(i))); // one-to-two
            }
            if self.rng.unit() < 0.04 {
                let filler = self.zipf() % 50; // unaligned target words are frequent ones
                self.target.push((filler, None));
            }
        }
        if self.target.is_empty() {
            self.target.push((self.source[0], Some(0)));
        }
        // Local reordering: swap neighbours now and then.
        let mut k = 0;
        while k + 1 < self.target.len() {
            if self.rng.unit() < 0.12 {
                self.target.swap(k, k + 1);
                k += 2;
            } else {
                k += 1;
            }
        }
        for line in lines.iter_mut() {
            line.clear();
        }
        for (i, &f) in self.source.iter().enumerate() {
            if i > 0 {
                lines[0].push(' ');
            }
            word("", f, &mut lines[0]);
        }
        let mut first_link = true;
        for (j, &(e, link)) in self.target.iter().enumerate() {
            if j > 0 {
                lines[1].push(' ');
            }
            word("w", e, &mut lines[1]);
            if let Some(i) = link {
                if !first_link {
                    lines[2].push(' ');
                }
                first_link = false;
                use std::fmt::Write as _;
                let _ = write!(lines[2], "{i}-{j}");
            }
        }
        for line in lines.iter_mut() {
            line.push('\n');
        }
    }
}
