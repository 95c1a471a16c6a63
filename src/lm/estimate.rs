//! Training within a memory budget: n-gram counts that spill to sorted runs and merge, adjusted
//! counts from a second sorted stream, and estimation over the model's own arrays.
//!
//! The stages and what each holds in memory (B is the budget):
//!
//! 1. **Counting.** The vocabulary, plus one hash table of n-gram counts (all orders; a key's
//!    order is its number of 21-bit word slots, since no training n-gram holds word 0). Before the
//!    table would grow past B/2 (old and new table together while it rehashes, vocabulary
//!    included) its counts go to an [`ExternalSorter`] of budget B/4, which sorts and spills them
//!    as runs in the temporary directory.
//! 2. **Adjusted counts.** The runs merge into one stream in (order, n-gram) order, equal keys
//!    summed. Each distinct n-gram g = v·s adds one continuation record for its suffix s; g keeps
//!    its raw count when it is of the highest order or starts with `<s>`. These records go to a
//!    second sorter (budget B/4), so summing them gives every adjusted count, in (order, n-gram)
//!    order. The first merge also gives the exact number of entries per order, so the memory
//!    the model itself needs is checked against B here, before anything of that size exists.
//! 3. **Layout.** The adjusted stream fills the model's final arrays (word, child range, and the
//!    count in the cell that later holds the probability) and the count-of-counts per order.
//! 4. **Estimation.** Discounts from the count-of-counts, then the probabilities order by order
//!    over the arrays: each context's children are contiguous, and each entry's lower-order
//!    probability is found through its parent's suffix link. Working set: the linear
//!    probabilities and suffix links of two neighbouring orders.
//!
//! The result is the same, byte for byte, whatever the budget: only where the counts wait
//! (memory or runs) depends on it.

use std::io::BufRead;
use std::mem::size_of;

use rustc_hash::FxHashMap;

use super::{discounts, pack, BuildOptions, Estimated, BOS, EOS, ID_BITS, MAX_ORDER, MAX_WORDS};
use super::{RESERVED, UNK};
use crate::error::{Error, Result};
use crate::files;
use crate::format::lm::OrderArrays;
use crate::sort::{ExternalSorter, SortedRecords};

const WORD_MASK: u128 = (1 << ID_BITS) - 1;
/// Bytes of one hash-table slot: key, count and control byte.
const SLOT_BYTES: u64 = size_of::<(u128, u32)>() as u64 + 1;
/// Bytes a word costs while counting: its spelling in the word list and as the id table's key,
/// each with a `String` header and allocator overhead, plus the id and the table's slot.
const WORD_BYTES_COUNTING: u64 = 2 * 48 + 16;
/// Bytes a word costs once counting is done (the word list only).
const WORD_BYTES_KEPT: u64 = 48;

/// Bytes of a hash table that holds `capacity` entries before it grows (7/8 load).
fn table_bytes(capacity: usize) -> u64 {
    if capacity == 0 {
        return 0;
    }
    (capacity as u64 * 8 / 7 + 1).next_power_of_two() * SLOT_BYTES
}

/// The order of a packed n-gram key: its number of 21-bit word slots.
fn order_of(key: u128) -> usize {
    (128 - key.leading_zeros() as usize).div_ceil(ID_BITS as usize)
}

/// Bytes of a packed key of order `n` in a sort record.
fn key_len(n: usize) -> usize {
    (n * ID_BITS as usize).div_ceil(8)
}

/// A sort record key: the order, then the packed n-gram big-endian in its shortest width, so
/// that byte order is (order, n-gram) order.
fn record_key(n: usize, key: u128, buf: &mut [u8; 17]) -> &[u8] {
    let len = key_len(n);
    buf[0] = n as u8;
    buf[1..1 + len].copy_from_slice(&key.to_be_bytes()[16 - len..]);
    &buf[..1 + len]
}

fn human(bytes: u64) -> String {
    if bytes >= 1 << 20 {
        format!("{:.1} MiB", bytes as f64 / (1u64 << 20) as f64)
    } else {
        format!("{:.1} KiB", bytes as f64 / 1024.0)
    }
}

fn damaged(what: &'static str, reason: String) -> Error {
    Error::DamagedTemporary { what, reason }
}

/// A summed record decoded: `(order, n-gram, count)`.
fn decode(key: &[u8], count: u64, what: &'static str) -> Result<(usize, u128, u32)> {
    let n = usize::from(key[0]);
    if n == 0 || n > MAX_ORDER || key.len() != 1 + key_len(n) {
        return Err(damaged(
            what,
            format!("a record key of {} bytes", key.len()),
        ));
    }
    let mut be = [0u8; 16];
    be[16 - key_len(n)..].copy_from_slice(&key[1..]);
    let count = u32::try_from(count).map_err(|_| {
        Error::Unsupported(format!(
            "an n-gram occurs {count} times, more than the model's counts hold ({})",
            u32::MAX
        ))
    })?;
    Ok((n, u128::from_be_bytes(be), count))
}

/// The merged output of a sorter, with equal keys summed: `(order, n-gram, count)` in order.
struct Summed {
    records: SortedRecords,
    key: Vec<u8>,
    count: u64,
    pending: bool,
    what: &'static str,
}

impl Summed {
    fn new(records: SortedRecords, what: &'static str) -> Summed {
        Summed {
            records,
            key: Vec::with_capacity(17),
            count: 0,
            pending: false,
            what,
        }
    }

    fn next(&mut self) -> Result<Option<(usize, u128, u32)>> {
        loop {
            let Some((key, value)) = self.records.next_record()? else {
                if !self.pending {
                    return Ok(None);
                }
                self.pending = false;
                return decode(&self.key, self.count, self.what).map(Some);
            };
            let Ok(bytes) = <[u8; 4]>::try_from(value) else {
                return Err(damaged(
                    self.what,
                    format!("a count of {} bytes", value.len()),
                ));
            };
            let count = u64::from(u32::from_le_bytes(bytes));
            if self.pending && key == self.key.as_slice() {
                self.count += count;
                continue;
            }
            let done = if self.pending {
                Some(decode(&self.key, self.count, self.what)?)
            } else {
                None
            };
            self.key.clear();
            self.key.extend_from_slice(key);
            self.count = count;
            self.pending = true;
            if done.is_some() {
                return Ok(done);
            }
        }
    }
}

/// What counting leaves: the vocabulary and the raw counts as sorted runs.
struct Counted {
    vocab: Vec<String>,
    raw: SortedRecords,
    sentences: u64,
    tokens: u64,
    flushes: u64,
}

/// Stage 1: reads the text, numbers its words and counts every n-gram of the padded sentences,
/// flushing the counts to the sorter whenever the table would outgrow its share.
fn count(
    mut input: impl BufRead,
    name: &str,
    options: &BuildOptions,
    mut sorter: ExternalSorter,
) -> Result<Counted> {
    let order = options.order;
    let share = options.memory / 2;
    let mut ids: FxHashMap<String, u32> = FxHashMap::default();
    let mut vocab: Vec<String> = RESERVED.iter().map(|s| s.to_string()).collect();
    for (i, w) in RESERVED.iter().enumerate() {
        ids.insert(w.to_string(), i as u32);
    }
    let mut vocab_bytes = vocab.len() as u64 * WORD_BYTES_COUNTING;
    let mut counts: FxHashMap<u128, u32> = FxHashMap::default();
    let mut flushes = 0u64;
    let mut buf = [0u8; 17];
    let mut flush = |counts: &mut FxHashMap<u128, u32>| -> Result<()> {
        for (key, c) in counts.drain() {
            sorter.push(record_key(order_of(key), key, &mut buf), &c.to_le_bytes())?;
        }
        Ok(())
    };
    let (mut sentences, mut tokens) = (0u64, 0u64);
    let mut sentence: Vec<u32> = Vec::new();
    let mut line = String::new();
    while files::read_line(&mut input, &mut line, name, sentences + 1)? {
        sentences += 1;
        sentence.clear();
        sentence.push(BOS);
        for t in crate::evaluate::tokens(&line) {
            if RESERVED.contains(&t) {
                return Err(Error::input(
                    name,
                    sentences,
                    format!("the token {t:?} is reserved for the model's own use"),
                ));
            }
            let id = match ids.get(t) {
                Some(&id) => id,
                None => {
                    if vocab.len() >= MAX_WORDS {
                        return Err(Error::input(
                            name,
                            sentences,
                            format!("more than {MAX_WORDS} distinct words"),
                        ));
                    }
                    vocab_bytes += 2 * t.len() as u64 + WORD_BYTES_COUNTING;
                    if vocab_bytes > share {
                        return Err(Error::invalid(
                            "--memory",
                            format!(
                                "the vocabulary of {name} ({} words at line {sentences}) needs \
                                 about {} while counting, more than half the budget of {} \
                                 ({} bytes); raise --memory",
                                vocab.len() + 1,
                                human(vocab_bytes),
                                human(options.memory),
                                options.memory
                            ),
                        ));
                    }
                    let id = vocab.len() as u32;
                    ids.insert(t.to_string(), id);
                    vocab.push(t.to_string());
                    id
                }
            };
            sentence.push(id);
            tokens += 1;
        }
        sentence.push(EOS);
        for n in 1..=order {
            for g in sentence.windows(n) {
                let key = pack(g);
                if counts.len() == counts.capacity() && !counts.contains_key(&key) {
                    // The insert would grow the table; old and new coexist while it rehashes.
                    let now = table_bytes(counts.capacity());
                    let grown = if now == 0 { 4 * SLOT_BYTES } else { 2 * now };
                    if now + grown + vocab_bytes > share && !counts.is_empty() {
                        flush(&mut counts)?;
                        flushes += 1;
                    }
                }
                let slot = counts.entry(key).or_insert(0);
                *slot = slot.checked_add(1).ok_or_else(|| {
                    Error::input(
                        name,
                        sentences,
                        format!("an n-gram occurs more than {} times", u32::MAX),
                    )
                })?;
            }
        }
    }
    flush(&mut counts)?;
    drop(counts);
    drop(ids);
    vocab.shrink_to_fit();
    let raw = sorter.finish()?;
    Ok(Counted {
        vocab,
        raw,
        sentences,
        tokens,
        flushes,
    })
}

/// One order's arrays while the model is built; `cells` holds the adjusted count of each entry
/// until estimation replaces it with the bits of its log10 probability.
struct Level {
    words: Vec<u32>,
    cells: Vec<u32>,
    backoffs: Vec<f32>,
    children: Vec<u32>,
}

/// Bytes of the model's arrays (the final [`OrderArrays`]) for `entries` per order, order 1
/// being the vocabulary.
fn arrays_bytes(entries: &[u64]) -> u64 {
    let top = entries.len();
    entries
        .iter()
        .enumerate()
        .map(|(i, &e)| {
            let words = if i == 0 { 0 } else { 4 * e };
            let inner = if i + 1 < top { 4 * e + 4 * (e + 1) } else { 0 };
            words + 4 * e + inner
        })
        .sum()
}

/// Bytes the estimation holds beside the arrays, at its peak: linear probabilities (f64) and
/// suffix links (u32) of the order being estimated and the one below.
fn estimation_bytes(entries: &[u64]) -> u64 {
    let top = entries.len();
    let mut peak = if top > 1 { 8 * entries[0] } else { 0 };
    for n in 2..=top {
        let below = entries[n - 2];
        let here = entries[n - 1];
        let mut b = 8 * below + if n >= 3 { 4 * below } else { 0 };
        if n < top {
            b += 12 * here;
        }
        peak = peak.max(b);
    }
    peak
}

/// Trains a model within `options.memory`; see the module documentation.
pub(super) fn build(input: impl BufRead, name: &str, options: &BuildOptions) -> Result<Estimated> {
    let order = options.order;
    let budget = options.memory;
    let sorter_budget = usize::try_from(budget / 4).unwrap_or(usize::MAX);
    let temp = options.temp_dir.clone();

    // Stage 1: counts, flushed to sorted runs.
    let counted = count(
        input,
        name,
        options,
        ExternalSorter::new(sorter_budget, temp.clone())?,
    )?;
    let v = counted.vocab.len();
    let vocab_bytes: u64 = counted
        .vocab
        .iter()
        .map(|w| w.len() as u64 + WORD_BYTES_KEPT)
        .sum();

    // Stage 2: raw counts merged; continuation records and kept raw counts to a second sorter.
    let mut entries = vec![0u64; order];
    entries[0] = v as u64;
    let mut adjusted = ExternalSorter::new(sorter_budget, temp)?;
    {
        let mut raw = Summed::new(counted.raw, "n-gram count run");
        let mut buf = [0u8; 17];
        while let Some((n, g, c)) = raw.next()? {
            if n > order {
                return Err(Error::Internal(
                    "an n-gram longer than the order was counted",
                ));
            }
            if n >= 2 {
                entries[n - 1] += 1;
            }
            let first = (g >> (ID_BITS as usize * (n - 1))) as u32;
            if (n == order || first == BOS) && !(n == 1 && first == BOS) {
                adjusted.push(record_key(n, g, &mut buf), &c.to_le_bytes())?;
            }
            if n >= 2 {
                let suffix = g & ((1u128 << (ID_BITS as usize * (n - 1))) - 1);
                adjusted.push(record_key(n - 1, suffix, &mut buf), &1u32.to_le_bytes())?;
            }
        }
    }

    // What must be in memory from here on, checked before any of it is allocated.
    let arrays = arrays_bytes(&entries);
    let layout_peak = vocab_bytes + arrays + sorter_budget as u64;
    let estimate_peak = vocab_bytes + arrays + estimation_bytes(&entries);
    if layout_peak.max(estimate_peak) > budget {
        // The merge buffer is a quarter of the budget, so the layout needs 4/3 of the rest.
        let least = ((vocab_bytes + arrays) * 4).div_ceil(3).max(estimate_peak);
        let total: u64 = entries.iter().sum();
        return Err(Error::invalid(
            "--memory",
            format!(
                "the order-{order} model of {name} has {total} entries ({v} words); its arrays \
                 need {} in memory and, with the vocabulary and the working set of estimation \
                 and merging, {} in all, more than the budget of {} ({budget} bytes); raise \
                 --memory to at least {} ({least} bytes) or lower --order",
                human(arrays),
                human(layout_peak.max(estimate_peak)),
                human(budget),
                human(least)
            ),
        ));
    }

    // Stage 3: the adjusted counts fill the arrays.
    let mut levels = lay_out(
        Summed::new(adjusted.finish()?, "adjusted count run"),
        &entries,
    )?;

    // Stage 4: discounts, then probabilities order by order.
    let mut disc = Vec::with_capacity(order);
    for level in &levels {
        let mut coc = [0u64; 4];
        for &c in &level.cells {
            if (1..=4).contains(&c) {
                coc[c as usize - 1] += 1;
            }
        }
        disc.push(discounts(coc));
    }
    estimate(&mut levels, &disc)?;

    let orders = levels
        .into_iter()
        .map(|l| OrderArrays {
            words: l.words,
            probs: l.cells.into_iter().map(f32::from_bits).collect(),
            backoffs: l.backoffs,
            children: l.children,
        })
        .collect();
    Ok(Estimated {
        vocab: counted.vocab,
        orders,
        discounts: disc,
        sentences: counted.sentences,
        tokens: counted.tokens,
        flushes: counted.flushes,
    })
}

/// The entry of order `depth + 1` under entry `node` of order `depth` with word `w`.
fn child(levels: &[Level], depth: usize, node: usize, w: u32) -> Option<usize> {
    let ch = &levels[depth - 1].children;
    let (lo, hi) = (ch[node] as usize, ch[node + 1] as usize);
    levels[depth].words[lo..hi]
        .binary_search(&w)
        .ok()
        .map(|i| lo + i)
}

/// The entry of order `n` for the packed n-gram `key`, through the finished orders below.
fn find(levels: &[Level], n: usize, key: u128) -> Option<usize> {
    let mut node = ((key >> (ID_BITS as usize * (n - 1))) & WORD_MASK) as usize;
    if node >= levels[0].cells.len() {
        return None;
    }
    for depth in 1..n {
        let w = ((key >> (ID_BITS as usize * (n - 1 - depth))) & WORD_MASK) as u32;
        node = child(levels, depth, node, w)?;
    }
    Some(node)
}

/// Turns the counts of children per parent into child start offsets.
fn close_children(children: &mut [u32]) {
    for i in 1..children.len() {
        children[i] += children[i - 1];
    }
}

/// Stage 3: the adjusted counts, in (order, n-gram) order, fill each order's arrays.
fn lay_out(mut adjusted: Summed, entries: &[u64]) -> Result<Vec<Level>> {
    let top = entries.len();
    let mut levels: Vec<Level> = entries
        .iter()
        .enumerate()
        .map(|(i, &e)| {
            let e = e as usize;
            let inner = i + 1 < top;
            Level {
                words: if i == 0 {
                    Vec::new()
                } else {
                    Vec::with_capacity(e)
                },
                cells: if i == 0 {
                    vec![0; e]
                } else {
                    Vec::with_capacity(e)
                },
                backoffs: if inner { vec![0.0; e] } else { Vec::new() },
                children: if inner { vec![0; e + 1] } else { Vec::new() },
            }
        })
        .collect();
    let missing = || Error::Internal("an n-gram's context is missing from the order below");
    // Orders whose entries are complete, so their parents' child offsets can be closed.
    let mut closed = 1;
    let mut last: Option<(u128, usize)> = None;
    while let Some((n, g, c)) = adjusted.next()? {
        if n < closed || n > top || c == 0 {
            return Err(Error::Internal("adjusted counts out of order"));
        }
        while closed < n {
            // Every entry of order `closed` is in: close its parents' offsets.
            if closed >= 2 {
                close_children(&mut levels[closed - 2].children);
            }
            closed += 1;
            last = None;
        }
        if n == 1 {
            let id = g as usize;
            if id >= levels[0].cells.len() || id == UNK as usize || id == BOS as usize {
                return Err(Error::Internal("a unigram outside the vocabulary"));
            }
            levels[0].cells[id] = c;
            continue;
        }
        let ctx = g >> ID_BITS;
        let parent = match last {
            Some((k, p)) if k == ctx => p,
            _ => find(&levels, n - 1, ctx).ok_or_else(missing)?,
        };
        last = Some((ctx, parent));
        levels[n - 2].children[parent + 1] += 1;
        let level = &mut levels[n - 1];
        if level.words.len() as u64 == entries[n - 1] {
            return Err(Error::Internal("more adjusted counts than n-grams"));
        }
        level.words.push((g & WORD_MASK) as u32);
        level.cells.push(c);
    }
    while closed <= top {
        if closed >= 2 {
            close_children(&mut levels[closed - 2].children);
        }
        closed += 1;
    }
    for (i, l) in levels.iter().enumerate().skip(1) {
        if l.cells.len() as u64 != entries[i] {
            return Err(Error::Internal("fewer adjusted counts than n-grams"));
        }
    }
    Ok(levels)
}

/// Stage 4: interpolated probabilities and back-off weights, written over the counts.
fn estimate(levels: &mut [Level], disc: &[[f64; 3]]) -> Result<()> {
    let top = levels.len();
    let d_of = |n: usize, c: u32| -> f64 {
        match c {
            0 => 0.0,
            1 => disc[n - 1][0],
            2 => disc[n - 1][1],
            _ => disc[n - 1][2],
        }
    };
    // Unigrams, interpolated with the uniform distribution over every word but <s>.
    let v = levels[0].cells.len();
    let mut lower: Vec<f64> = Vec::with_capacity(if top > 1 { v } else { 0 });
    {
        let cells = &mut levels[0].cells;
        let mut total = 0.0f64;
        let mut kinds = [0u64; 3];
        for &c in cells.iter() {
            if c > 0 {
                total += f64::from(c);
                kinds[(c.min(3) - 1) as usize] += 1;
            }
        }
        let mass: f64 = (0..3).map(|k| disc[0][k] * kinds[k] as f64).sum();
        let gamma = if total > 0.0 { mass / total } else { 1.0 };
        let uniform = 1.0 / (v - 1) as f64;
        for (id, cell) in cells.iter_mut().enumerate() {
            if id == BOS as usize {
                *cell = (-99.0f32).to_bits(); // <s>: never predicted
                if top > 1 {
                    lower.push(0.0);
                }
                continue;
            }
            let c = *cell;
            let p = if total > 0.0 {
                (f64::from(c) - d_of(1, c)).max(0.0) / total + gamma * uniform
            } else {
                uniform
            };
            *cell = (p.log10() as f32).to_bits();
            if top > 1 {
                lower.push(p);
            }
        }
    }
    // suffix[i]: the entry of order n − 2 that is the suffix of entry i of order n − 1.
    let mut suffix: Vec<u32> = Vec::new();
    for n in 2..=top {
        let inner = n < top;
        let e = levels[n - 1].cells.len();
        let mut probs: Vec<f64> = Vec::with_capacity(if inner { e } else { 0 });
        let mut links: Vec<u32> = Vec::with_capacity(if inner { e } else { 0 });
        // Taken out while the orders below and above are read and written; put back after.
        let children = std::mem::take(&mut levels[n - 2].children);
        for (p, span) in children.windows(2).enumerate() {
            let (lo, hi) = (span[0] as usize, span[1] as usize);
            if lo == hi {
                continue;
            }
            let (mut total, mut kinds) = (0.0, [0u64; 3]);
            for &c in &levels[n - 1].cells[lo..hi] {
                total += f64::from(c);
                kinds[(c.min(3) - 1) as usize] += 1;
            }
            let mass: f64 = (0..3).map(|k| disc[n - 1][k] * kinds[k] as f64).sum();
            let gamma = mass / total;
            levels[n - 2].backoffs[p] = gamma.log10() as f32;
            for i in lo..hi {
                let w = levels[n - 1].words[i];
                // The suffix of (context, w) is w under the context's own suffix.
                let s = if n == 2 {
                    Some(w as usize)
                } else {
                    child(levels, n - 2, suffix[p] as usize, w)
                };
                let s = s.ok_or(Error::Internal("the suffix of an n-gram is missing"))?;
                let c = levels[n - 1].cells[i];
                let prob = (f64::from(c) - d_of(n, c)) / total + gamma * lower[s];
                levels[n - 1].cells[i] = (prob.log10() as f32).to_bits();
                if inner {
                    probs.push(prob);
                    links.push(s as u32);
                }
            }
        }
        levels[n - 2].children = children;
        lower = probs;
        suffix = links;
    }
    Ok(())
}
