//! Invented vocabularies: syllable-built pseudo-words with Zipfian frequencies, and an O(1)
//! sampler over them.

use std::collections::HashSet;

use rand_xoshiro::rand_core::{RngCore, SeedableRng};
use rand_xoshiro::Xoshiro256PlusPlus;

/// Walker's alias method (in Vose's construction): draws index `i` with probability
/// `weights[i] / sum(weights)` from one 64-bit random number.
///
/// # Examples
/// ```
/// use baler::synth::AliasTable;
/// use rand_xoshiro::{rand_core::SeedableRng, Xoshiro256PlusPlus};
/// let table = AliasTable::new(&[3.0, 1.0, 0.0]);
/// let mut rng = Xoshiro256PlusPlus::seed_from_u64(5);
/// let mut hits = [0u32; 3];
/// for _ in 0..4000 {
///     hits[table.sample(&mut rng) as usize] += 1;
/// }
/// assert_eq!(hits[2], 0);
/// assert!((2800..3200).contains(&hits[0]), "{hits:?}");
/// ```
#[derive(Clone, Debug)]
pub struct AliasTable {
    /// Keep column `i` when the low 32 random bits are below this; else take `alias[i]`.
    threshold: Vec<u32>,
    alias: Vec<u32>,
}

impl AliasTable {
    /// Builds the table. Weights must be finite and non-negative with a positive sum, and
    /// there may be at most `u32::MAX` of them.
    ///
    /// # Panics
    /// On weights that break those conditions (a programming error: callers build them).
    pub fn new(weights: &[f64]) -> AliasTable {
        let n = weights.len();
        assert!(
            n > 0 && n < u32::MAX as usize,
            "alias table needs 1..2^32 weights"
        );
        let total: f64 = weights.iter().sum();
        assert!(
            total > 0.0 && total.is_finite() && weights.iter().all(|&w| w >= 0.0),
            "alias weights must be non-negative with a positive finite sum"
        );
        let mut scaled: Vec<f64> = weights.iter().map(|&w| w * n as f64 / total).collect();
        let mut alias: Vec<u32> = (0..n as u32).collect();
        let mut threshold = vec![u32::MAX; n];
        let (mut small, mut large): (Vec<usize>, Vec<usize>) =
            (0..n).partition(|&i| scaled[i] < 1.0);
        while let (Some(&s), Some(&l)) = (small.last(), large.last()) {
            small.pop();
            threshold[s] = to_threshold(scaled[s]);
            alias[s] = l as u32;
            scaled[l] -= 1.0 - scaled[s];
            if scaled[l] < 1.0 {
                large.pop();
                small.push(l);
            }
        }
        // Whatever is left has probability 1 up to rounding: always keep it.
        AliasTable { threshold, alias }
    }

    /// The number of weights.
    pub fn len(&self) -> usize {
        self.threshold.len()
    }

    /// Always false: a table has at least one weight.
    pub fn is_empty(&self) -> bool {
        self.threshold.is_empty()
    }

    /// Draws one index.
    #[inline]
    pub fn sample(&self, rng: &mut impl RngCore) -> u32 {
        let x = rng.next_u64();
        let column = (((x >> 32) * self.threshold.len() as u64) >> 32) as usize;
        if (x as u32) < self.threshold[column] {
            column as u32
        } else {
            self.alias[column]
        }
    }
}

fn to_threshold(p: f64) -> u32 {
    (p * 4294967296.0).clamp(0.0, u32::MAX as f64) as u32
}

/// The probabilities `p(r) = (r + 1)^-s / H` of a Zipf law over `n` ranks (0-based).
///
/// # Examples
/// ```
/// let p = baler::synth::zipf_probabilities(4, 1.0);
/// let h = 1.0 + 1.0 / 2.0 + 1.0 / 3.0 + 1.0 / 4.0;
/// assert!((p[0] - 1.0 / h).abs() < 1e-15 && (p[3] - 0.25 / h).abs() < 1e-15);
/// ```
pub fn zipf_probabilities(n: usize, exponent: f64) -> Vec<f64> {
    let mut p: Vec<f64> = (0..n).map(|r| ((r + 1) as f64).powf(-exponent)).collect();
    let total: f64 = p.iter().sum();
    p.iter_mut().for_each(|x| *x /= total);
    p
}

/// Which invented language a vocabulary imitates: the two sides get different sounds.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub(crate) enum Side {
    Source,
    Target,
}

/// Punctuation tokens and the frequency rank each takes, shared by both sides, as in text where
/// the comma and the full stop are among the most frequent tokens.
pub(crate) const PUNCTUATION: [(usize, &str); 9] = [
    (1, ","),
    (2, "."),
    (9, "?"),
    (30, ":"),
    (45, "\""),
    (70, "("),
    (71, ")"),
    (120, "!"),
    (200, ";"),
];

/// Smallest vocabulary the generator accepts (it must hold every punctuation rank).
pub const MIN_WORDS: u32 = 1000;

const SOURCE_ONSETS: [&str; 24] = [
    "", "", "b", "d", "f", "g", "h", "k", "l", "m", "n", "p", "r", "s", "t", "v", "w", "st", "tr",
    "pl", "gr", "sh", "th", "ch",
];
const SOURCE_NUCLEI: [&str; 9] = ["a", "e", "i", "o", "u", "ea", "ou", "ai", "y"];
const SOURCE_CODAS: [&str; 12] = ["", "", "", "n", "r", "s", "t", "l", "nd", "st", "ng", "ck"];
const TARGET_ONSETS: [&str; 22] = [
    "", "", "b", "c", "d", "f", "g", "j", "l", "ll", "m", "n", "ñ", "p", "qu", "r", "rr", "s", "t",
    "v", "z", "br",
];
const TARGET_NUCLEI: [&str; 11] = ["a", "e", "i", "o", "u", "á", "é", "ó", "ie", "ue", "ü"];
const TARGET_CODAS: [&str; 8] = ["", "", "", "n", "s", "r", "l", "z"];

/// Longest word stored inline in its record.
const INLINE: usize = 15;

/// Everything about one word, in one 32-byte record so that a lookup touches one cache line.
#[derive(Clone, Copy)]
#[repr(C, align(32))]
struct Entry {
    /// Length in byte 0, then the bytes; words longer than [`INLINE`] bytes have 255 there,
    /// their offset into `long` in bytes 1..9 and their length in byte 9.
    text: [u8; 16],
    probability: f64,
    rank: u32,
    /// For source words: the first translation (set by the generator).
    translation: u32,
}

/// One column of the alias table, with word ids in place of ranks.
#[derive(Clone, Copy)]
struct Draw {
    threshold: u32,
    keep: u32,
    alias: u32,
}

/// An invented vocabulary. Word ids follow the byte order of the words, so comparing ids
/// compares the words, and phrases of ids sort like their space-joined text (every byte of a
/// word is above the space).
pub(crate) struct Vocabulary {
    entries: Vec<Entry>,
    long: String,
    id_of_rank: Vec<u32>,
    /// Alias tables over the [`HEAD`] most frequent ranks and over the rest: most draws hit
    /// the small head table, which stays in cache.
    head: Vec<Draw>,
    tail: Vec<Draw>,
    /// Draw from `head` when a random u64 is below this (the head's probability mass).
    head_threshold: u64,
}

/// Ranks in the head alias table.
const HEAD: usize = 4096;

impl Vocabulary {
    /// `words` pseudo-words with Zipf exponent `exponent`; deterministic in `seed`.
    pub(crate) fn new(side: Side, words: usize, exponent: f64, seed: u64) -> Vocabulary {
        let mut rng = Xoshiro256PlusPlus::seed_from_u64(seed);
        let mut by_rank: Vec<String> = Vec::with_capacity(words);
        // Words seen so far, by 64-bit hash: a collision only makes us draw another word.
        let mut seen: HashSet<u64> = HashSet::with_capacity(words);
        let hash = |w: &str| w.bytes().fold(0x5eed, |h, b| mix(h ^ u64::from(b)));
        let mut punctuation = PUNCTUATION.iter().peekable();
        for rank in 0..words {
            if let Some(&&(r, p)) = punctuation.peek() {
                if r == rank {
                    punctuation.next();
                    seen.insert(hash(p));
                    by_rank.push(p.to_string());
                    continue;
                }
            }
            loop {
                let word = pseudo_word(side, rank, &mut rng);
                if seen.insert(hash(&word)) {
                    by_rank.push(word);
                    break;
                }
            }
        }
        let mut order: Vec<u32> = (0..words as u32).collect();
        order.sort_unstable_by(|&a, &b| by_rank[a as usize].cmp(&by_rank[b as usize]));
        let mut id_of_rank = vec![0u32; words];
        for (id, &rank) in order.iter().enumerate() {
            id_of_rank[rank as usize] = id as u32;
        }
        let probability = zipf_probabilities(words, exponent);
        let mut long = String::new();
        let mut entries = Vec::with_capacity(words);
        for &rank in &order {
            let word = by_rank[rank as usize].as_bytes();
            let mut text = [0u8; 16];
            if word.len() <= INLINE {
                text[0] = word.len() as u8;
                text[1..=word.len()].copy_from_slice(word);
            } else {
                assert!(word.len() < 256, "pseudo-words are short");
                text[0] = 255;
                text[1..9].copy_from_slice(&(long.len() as u64).to_le_bytes());
                text[9] = word.len() as u8;
                long.push_str(&by_rank[rank as usize]);
            }
            entries.push(Entry {
                text,
                probability: probability[rank as usize],
                rank,
                translation: 0,
            });
        }
        let split = HEAD.min(words - 1);
        let draws = |ranks: &[f64], first: usize| -> Vec<Draw> {
            let table = AliasTable::new(ranks);
            (0..ranks.len())
                .map(|k| Draw {
                    threshold: table.threshold[k],
                    keep: id_of_rank[first + k],
                    alias: id_of_rank[first + table.alias[k] as usize],
                })
                .collect()
        };
        let head = draws(&probability[..split], 0);
        let tail = draws(&probability[split..], split);
        let head_mass: f64 = probability[..split].iter().sum();
        let head_threshold = (head_mass * 18446744073709551616.0).min(u64::MAX as f64) as u64;
        Vocabulary {
            entries,
            long,
            id_of_rank,
            head,
            tail,
            head_threshold,
        }
    }

    pub(crate) fn len(&self) -> usize {
        self.entries.len()
    }

    pub(crate) fn word(&self, id: u32) -> &str {
        let text = &self.entries[id as usize].text;
        let len = text[0] as usize;
        if len <= INLINE {
            std::str::from_utf8(&text[1..=len]).expect("stored words are UTF-8")
        } else {
            let mut offset = [0u8; 8];
            offset.copy_from_slice(&text[1..9]);
            let start = u64::from_le_bytes(offset) as usize;
            &self.long[start..start + text[9] as usize]
        }
    }

    #[inline]
    pub(crate) fn rank(&self, id: u32) -> usize {
        self.entries[id as usize].rank as usize
    }

    #[inline]
    pub(crate) fn id(&self, rank: usize) -> u32 {
        self.id_of_rank[rank]
    }

    /// Zipf probability of the word with this id.
    #[inline]
    pub(crate) fn probability(&self, id: u32) -> f64 {
        self.entries[id as usize].probability
    }

    /// The first translation recorded for `id`.
    #[inline]
    pub(crate) fn translation(&self, id: u32) -> u32 {
        self.entries[id as usize].translation
    }

    pub(crate) fn set_translation(&mut self, id: u32, translation: u32) {
        self.entries[id as usize].translation = translation;
    }

    /// Draws a word id with its Zipf probability.
    #[inline]
    pub(crate) fn sample(&self, rng: &mut impl RngCore) -> u32 {
        let table = if rng.next_u64() < self.head_threshold {
            &self.head
        } else {
            &self.tail
        };
        let x = rng.next_u64();
        let column = (((x >> 32) * table.len() as u64) >> 32) as usize;
        let draw = table[column];
        if (x as u32) < draw.threshold {
            draw.keep
        } else {
            draw.alias
        }
    }

    /// Appends the words of `ids` separated by single spaces.
    pub(crate) fn render(&self, ids: &[u32], out: &mut String) {
        for (k, &id) in ids.iter().enumerate() {
            if k > 0 {
                out.push(' ');
            }
            out.push_str(self.word(id));
        }
    }
}

fn pick(list: &[&'static str], b: u64) -> &'static str {
    list[(b % list.len() as u64) as usize]
}

/// One pseudo-word: frequent ranks get short words (one syllable), rare ones up to five.
fn pseudo_word(side: Side, rank: usize, rng: &mut impl RngCore) -> String {
    let (onsets, nuclei, codas): (&[&'static str], &[&'static str], &[&'static str]) = match side {
        Side::Source => (&SOURCE_ONSETS, &SOURCE_NUCLEI, &SOURCE_CODAS),
        Side::Target => (&TARGET_ONSETS, &TARGET_NUCLEI, &TARGET_CODAS),
    };
    let r = rng.next_u64();
    let jitter = (r & 0xffff) as f64 / 65536.0;
    let syllables = (1.0 + 0.42 * ((rank + 1) as f64).log10() + 1.2 * jitter - 0.5)
        .round()
        .clamp(1.0, 5.0) as usize;
    let mut word = String::new();
    let mut bits = rng.next_u64();
    for k in 0..syllables {
        if k > 0 && k % 3 == 0 {
            bits = rng.next_u64();
        }
        let onset = pick(onsets, bits & 0xff);
        // A word never starts with a bare vowel cluster twice in a row: keep onsets for
        // later syllables so words stay pronounceable.
        let onset = if k > 0 && onset.is_empty() {
            onsets[2]
        } else {
            onset
        };
        word.push_str(onset);
        word.push_str(pick(nuclei, (bits >> 8) & 0xff));
        if k + 1 == syllables || (bits >> 16) & 3 == 0 {
            word.push_str(pick(codas, (bits >> 18) & 0xff));
        }
        bits >>= 21;
    }
    word
}

/// A 64-bit mixing function (the SplitMix64 finaliser), for per-word facts that must be the
/// same wherever the word occurs.
#[inline]
pub(crate) fn mix(mut z: u64) -> u64 {
    z = z.wrapping_add(0x9e37_79b9_7f4a_7c15);
    z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
    z ^ (z >> 31)
}

/// A uniform number in [0, 1) from the top 53 bits of `x`.
#[inline]
pub(crate) fn unit(x: u64) -> f64 {
    (x >> 11) as f64 * (1.0 / 9007199254740992.0)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ids_follow_byte_order_and_words_are_distinct() {
        let v = Vocabulary::new(Side::Target, 5000, 1.0, 3);
        for id in 1..v.len() as u32 {
            assert!(
                v.word(id - 1) < v.word(id),
                "{} !< {}",
                v.word(id - 1),
                v.word(id)
            );
        }
        for id in 0..v.len() as u32 {
            let w = v.word(id);
            assert!(!w.is_empty() && w.bytes().all(|b| b > b' '), "{w:?}");
            assert_eq!(v.id(v.rank(id)), id);
        }
        assert_eq!(v.word(v.id(1)), ",");
        assert_eq!(v.word(v.id(2)), ".");
    }

    #[test]
    fn frequent_words_are_shorter() {
        let v = Vocabulary::new(Side::Source, 20000, 1.0, 9);
        let mean = |ranks: std::ops::Range<usize>| {
            let n = ranks.len() as f64;
            ranks
                .map(|r| v.word(v.id(r)).chars().count() as f64)
                .sum::<f64>()
                / n
        };
        let (top, tail) = (mean(0..100), mean(10000..20000));
        assert!(top + 1.5 < tail, "top {top} tail {tail}");
        assert!(
            (2.0..6.0).contains(&top) && (6.0..12.0).contains(&tail),
            "{top} {tail}"
        );
    }
}
