//! Symbol coding of blocks: a static-model rANS coder and its plain-byte counterpart.
//!
//! Every block and target group is a sequence of *symbols*, each drawn with a model id that the
//! decoder knows from what it has decoded so far. Two kinds of symbol exist:
//!
//! - a **byte** (0..=255) under a model;
//! - a **number** (`u64`): its *class* (a byte under a model) followed by `extra` raw bits.
//!   Values below 16 are their own class; a value with `nb >= 5` significant bits has class
//!   `16 + (nb - 5) * 4 + t`, where `t` is the two bits below the leading one, followed by the
//!   `nb - 3` low bits, high chunk first, in chunks of at most 8 bits.
//!
//! Coding `rans` writes the symbols through a byte-renormalizing rANS coder with 12-bit
//! frequencies (one table of 256 frequencies per model, stored once in the models section);
//! coding `none` writes bytes as they are and numbers as LEB128 varints, with no models.
//!
//! The rANS state is 32 bits, kept in `[2^23, 2^31)`. The stream starts with the final encoder
//! state, big-endian; decoding a symbol with start `s` and frequency `f` from state `x` takes
//! `slot = x & 4095`, `x = f * (x >> 12) + slot - s`, then reads bytes `x = (x << 8) | b` while
//! `x < 2^23`. A stream is complete when its bytes are used up and the state is back at `2^23`.

use super::varint::{read_varint, write_varint};

/// Bits of frequency precision.
pub const PROB_BITS: u32 = 12;
/// Sum of every model's frequencies.
pub const PROB_SCALE: u32 = 1 << PROB_BITS;
/// Lower bound of the normalized rANS state.
pub const RANS_L: u32 = 1 << 23;

/// The class of a number and its extra bits `(class, extra value, extra bit count)`.
#[inline]
pub fn number_class(v: u64) -> (u8, u64, u32) {
    if v < 16 {
        return (v as u8, 0, 0);
    }
    let nb = 64 - v.leading_zeros();
    let top = (v >> (nb - 3)) & 3;
    let extra_bits = nb - 3;
    let extra = v & ((1u64 << extra_bits) - 1);
    ((16 + (nb - 5) * 4 + top as u32) as u8, extra, extra_bits)
}

/// Inverse of [`number_class`]'s class: `(leading value, extra bit count)`; `None` for classes
/// no number has.
#[inline]
pub fn class_base(class: u8) -> Option<(u64, u32)> {
    if class < 16 {
        return Some((u64::from(class), 0));
    }
    let c = u32::from(class) - 16;
    let nb = c / 4 + 5;
    if nb > 64 {
        return None;
    }
    let top = u64::from(c % 4);
    Some(((4 | top) << (nb - 3), nb - 3))
}

/// Where a writer sends symbols.
pub trait SymbolSink {
    /// A byte under `model`.
    fn byte(&mut self, model: usize, b: u8);
    /// A number under `model` (its class; extra bits are model-free).
    fn number(&mut self, model: usize, v: u64);
    /// Marks the start of source `rank`'s options (a place decoding may resume at).
    fn mark(&mut self, _rank: usize) {}
}

/// Where a reader takes symbols from; `None` means the stream is malformed.
pub trait SymbolSource {
    /// A byte under `model`.
    fn byte(&mut self, model: usize) -> Option<u8>;
    /// A number under `model`.
    fn number(&mut self, model: usize) -> Option<u64>;
    /// Whether the stream ended exactly where it should.
    fn finished(&self) -> bool;
    /// Continues decoding from a recorded resume point (decoder `state` at byte `pos`); false
    /// when this coding has no such points or the point lies outside the stream.
    fn resume(&mut self, _state: u32, _pos: usize) -> bool {
        false
    }
}

/// Plain coding: bytes as they are, numbers as varints.
#[derive(Default)]
pub struct PlainSink {
    /// The stream so far.
    pub out: Vec<u8>,
}

impl SymbolSink for PlainSink {
    #[inline]
    fn byte(&mut self, _model: usize, b: u8) {
        self.out.push(b);
    }
    #[inline]
    fn number(&mut self, _model: usize, v: u64) {
        write_varint(&mut self.out, v);
    }
}

/// Reads a plain-coded stream.
pub struct PlainSource<'a> {
    data: &'a [u8],
    pos: usize,
}

impl<'a> PlainSource<'a> {
    /// Reads `data` from its start.
    pub fn new(data: &'a [u8]) -> PlainSource<'a> {
        PlainSource { data, pos: 0 }
    }
}

impl SymbolSource for PlainSource<'_> {
    #[inline]
    fn byte(&mut self, _model: usize) -> Option<u8> {
        let b = *self.data.get(self.pos)?;
        self.pos += 1;
        Some(b)
    }
    #[inline]
    fn number(&mut self, _model: usize) -> Option<u64> {
        read_varint(self.data, &mut self.pos)
    }
    fn finished(&self) -> bool {
        self.pos == self.data.len()
    }
}

/// Counts symbols per model (the first pass of entropy coding).
pub struct Counter {
    /// `counts[model][symbol]`.
    pub counts: Vec<[u64; 256]>,
    /// Extra (model-free) bits seen per model.
    pub extra_bits: Vec<u64>,
}

impl Counter {
    /// A counter for `models` models.
    pub fn new(models: usize) -> Counter {
        Counter {
            counts: vec![[0; 256]; models],
            extra_bits: vec![0; models],
        }
    }
}

impl SymbolSink for Counter {
    #[inline]
    fn byte(&mut self, model: usize, b: u8) {
        self.counts[model][usize::from(b)] += 1;
    }
    #[inline]
    fn number(&mut self, model: usize, v: u64) {
        let (class, _, bits) = number_class(v);
        self.counts[model][usize::from(class)] += 1;
        self.extra_bits[model] += u64::from(bits);
    }
}

/// Static models: per model 256 frequencies summing to [`PROB_SCALE`] (all zero for a model no
/// symbol used), with cumulative starts and a slot-to-symbol table for decoding.
#[derive(Clone, Debug)]
pub struct Models {
    freq: Vec<[u16; 256]>,
    start: Vec<[u16; 256]>,
    /// Per model, the symbol of each slot (4 KiB); empty for a model no symbol used.
    slots: Vec<Box<[u8]>>,
    /// Per model, per symbol, its frequency (low 16 bits) and start (high 16 bits): one load
    /// after the slot's, from a 1 KiB table.
    pairs: Vec<Box<[u32]>>,
}

/// Bytes one model takes in the models section (256 little-endian `u16` frequencies).
pub const MODEL_BYTES: usize = 512;

impl Models {
    /// Normalizes counted symbols into frequencies: every used symbol gets at least 1.
    pub fn from_counts(counts: &[[u64; 256]]) -> Models {
        let freq = counts.iter().map(normalize).collect::<Vec<_>>();
        Models::from_freq(freq).expect("normalized frequencies are valid")
    }

    fn from_freq(freq: Vec<[u16; 256]>) -> Result<Models, String> {
        let mut start = Vec::with_capacity(freq.len());
        let mut slots = Vec::with_capacity(freq.len());
        let mut pairs = Vec::with_capacity(freq.len());
        for (m, f) in freq.iter().enumerate() {
            let total: u32 = f.iter().map(|&x| u32::from(x)).sum();
            let mut s = [0u16; 256];
            if total == 0 {
                start.push(s);
                slots.push(Box::default());
                pairs.push(Box::default());
                continue;
            }
            if total != PROB_SCALE {
                return Err(format!(
                    "model {m}'s frequencies sum to {total}, not {PROB_SCALE}"
                ));
            }
            let mut table = vec![0u8; PROB_SCALE as usize].into_boxed_slice();
            let mut pair = vec![0u32; 256].into_boxed_slice();
            let mut acc = 0u32;
            for sym in 0..256 {
                s[sym] = acc as u16;
                let n = u32::from(f[sym]);
                table[acc as usize..(acc + n) as usize].fill(sym as u8);
                pair[sym] = n | (acc << 16);
                acc += n;
            }
            start.push(s);
            slots.push(table);
            pairs.push(pair);
        }
        Ok(Models {
            freq,
            start,
            slots,
            pairs,
        })
    }

    /// The models section.
    pub fn encode(&self) -> Vec<u8> {
        let mut out = Vec::with_capacity(self.freq.len() * MODEL_BYTES);
        for f in &self.freq {
            for &x in f {
                out.extend_from_slice(&x.to_le_bytes());
            }
        }
        out
    }

    /// Parses a models section holding `models` models.
    pub fn decode(b: &[u8], models: usize) -> Result<Models, String> {
        if b.len() != models * MODEL_BYTES {
            return Err(format!(
                "the models section holds {} bytes; {models} models need {}",
                b.len(),
                models * MODEL_BYTES
            ));
        }
        let freq = b
            .chunks_exact(MODEL_BYTES)
            .map(|m| {
                let mut f = [0u16; 256];
                for (i, c) in m.chunks_exact(2).enumerate() {
                    f[i] = u16::from_le_bytes([c[0], c[1]]);
                }
                f
            })
            .collect();
        Models::from_freq(freq)
    }

    /// Number of models.
    pub fn len(&self) -> usize {
        self.freq.len()
    }

    /// Whether there are none.
    pub fn is_empty(&self) -> bool {
        self.freq.is_empty()
    }

    /// Cost in bits of coding `sym` under `model` (for size reports).
    pub fn cost_bits(&self, model: usize, sym: u8) -> f64 {
        let f = f64::from(self.freq[model][usize::from(sym)]).max(1.0);
        f64::from(PROB_BITS) - f.log2()
    }
}

/// Scales counts to frequencies summing to [`PROB_SCALE`], each used symbol at least 1.
fn normalize(counts: &[u64; 256]) -> [u16; 256] {
    let mut f = [0u16; 256];
    let total: u64 = counts.iter().sum();
    if total == 0 {
        return f;
    }
    let mut sum = 0i64;
    for (i, &c) in counts.iter().enumerate() {
        if c > 0 {
            let scaled = ((c as u128 * u128::from(PROB_SCALE)) / u128::from(total)) as u64;
            f[i] = scaled.clamp(1, u64::from(PROB_SCALE)) as u16;
            sum += i64::from(f[i]);
        }
    }
    // Fix the total by adjusting the largest frequencies (never below 1).
    let target = i64::from(PROB_SCALE);
    while sum != target {
        let (i, _) = f
            .iter()
            .enumerate()
            .filter(|(_, &x)| sum < target || x > 1)
            .max_by_key(|(_, &x)| x)
            .expect("some symbol can move");
        if sum < target {
            f[i] += 1;
            sum += 1;
        } else {
            f[i] -= 1;
            sum -= 1;
        }
    }
    f
}

/// rANS encoding: symbols are queued forward and coded backward at [`RansSink::finish`].
pub struct RansSink<'m> {
    models: &'m Models,
    /// `(start, freq)` per coded symbol, in forward order.
    queue: Vec<(u16, u16)>,
    /// Marked places: queue length and source rank.
    marks: Vec<(usize, usize)>,
    /// After [`RansSink::finish`]: per marked place, the source rank, the byte position in
    /// the stream and the decoder state there.
    pub resume_points: Vec<(usize, usize, u32)>,
}

impl<'m> RansSink<'m> {
    /// An encoder using `models`.
    pub fn new(models: &'m Models) -> RansSink<'m> {
        RansSink {
            models,
            queue: Vec::new(),
            marks: Vec::new(),
            resume_points: Vec::new(),
        }
    }

    #[inline]
    fn push(&mut self, model: usize, sym: u8) {
        let f = self.models.freq[model][usize::from(sym)];
        debug_assert!(f > 0, "symbol {sym} unused by model {model}");
        self.queue
            .push((self.models.start[model][usize::from(sym)], f));
    }

    #[inline]
    fn push_bits(&mut self, mut bits: u32, value: u64) {
        while bits > 0 {
            let k = bits.min(8);
            bits -= k;
            let chunk = (value >> bits) & ((1 << k) - 1);
            let f = (PROB_SCALE >> k) as u16;
            self.queue.push(((chunk as u16) * f, f));
        }
    }

    /// Codes the queued symbols into `out` (cleared first), and the marked places into
    /// [`RansSink::resume_points`]; the sink is empty afterwards.
    ///
    /// Symbols are coded last to first, so the state after coding symbol `q` is the decoder's
    /// state before decoding it, and the bytes written so far are the ones the decoder has
    /// still to read.
    pub fn finish(&mut self, out: &mut Vec<u8>) {
        out.clear();
        self.resume_points.clear();
        let mut x: u32 = RANS_L;
        let mut marks = self.marks.iter().rev().peekable();
        while let Some(&&(q, rank)) = marks.peek() {
            if q < self.queue.len() {
                break;
            }
            self.resume_points.push((rank, 0, x));
            marks.next();
        }
        for (q, &(start, freq)) in self.queue.iter().enumerate().rev() {
            let (start, freq) = (u32::from(start), u32::from(freq));
            let x_max = ((RANS_L >> PROB_BITS) << 8) * freq;
            while x >= x_max {
                out.push(x as u8);
                x >>= 8;
            }
            x = ((x / freq) << PROB_BITS) + (x % freq) + start;
            while let Some(&&(m, rank)) = marks.peek() {
                if m != q {
                    break;
                }
                self.resume_points.push((rank, out.len(), x));
                marks.next();
            }
        }
        let written = out.len();
        for p in &mut self.resume_points {
            p.1 = 4 + written - p.1;
        }
        self.resume_points.reverse();
        out.extend_from_slice(&x.to_le_bytes());
        out.reverse();
        self.queue.clear();
        self.marks.clear();
    }
}

impl SymbolSink for RansSink<'_> {
    #[inline]
    fn byte(&mut self, model: usize, b: u8) {
        self.push(model, b);
    }
    #[inline]
    fn number(&mut self, model: usize, v: u64) {
        let (class, extra, bits) = number_class(v);
        self.push(model, class);
        self.push_bits(bits, extra);
    }
    fn mark(&mut self, rank: usize) {
        self.marks.push((self.queue.len(), rank));
    }
}

/// rANS decoding of one stream.
pub struct RansSource<'a> {
    models: &'a Models,
    data: &'a [u8],
    pos: usize,
    x: u32,
}

impl<'a> RansSource<'a> {
    /// Starts decoding `data`; `None` if it is too short to hold a state.
    pub fn new(models: &'a Models, data: &'a [u8]) -> Option<RansSource<'a>> {
        let head: [u8; 4] = data.get(..4)?.try_into().ok()?;
        let x = u32::from_be_bytes(head);
        if x < RANS_L {
            return None;
        }
        Some(RansSource {
            models,
            data,
            pos: 4,
            x,
        })
    }

    #[inline]
    fn renormalize(&mut self) -> Option<()> {
        // A decoding step leaves the state at 2^11 or more, so two bytes always suffice.
        if self.x < RANS_L {
            if let Some(&[a, b]) = self.data.get(self.pos..self.pos + 2).map(|s| s as &[u8]) {
                if self.x < RANS_L >> 8 {
                    self.x = (self.x << 16) | (u32::from(a) << 8) | u32::from(b);
                    self.pos += 2;
                } else {
                    self.x = (self.x << 8) | u32::from(a);
                    self.pos += 1;
                }
            } else {
                while self.x < RANS_L {
                    let b = *self.data.get(self.pos)?;
                    self.pos += 1;
                    self.x = (self.x << 8) | u32::from(b);
                }
            }
        }
        Some(())
    }

    #[inline]
    fn symbol(&mut self, model: usize) -> Option<u8> {
        let table = self.models.slots.get(model)?;
        let slot = self.x & (PROB_SCALE - 1);
        let sym = *table.get(slot as usize)?;
        let e = self.models.pairs[model][usize::from(sym)];
        self.x = (e & 0xffff) * (self.x >> PROB_BITS) + slot - (e >> 16);
        self.renormalize()?;
        Some(sym)
    }

    #[inline]
    fn bits(&mut self, mut bits: u32) -> Option<u64> {
        let mut v = 0u64;
        while bits > 0 {
            let k = bits.min(8);
            bits -= k;
            let slot = self.x & (PROB_SCALE - 1);
            let chunk = slot >> (PROB_BITS - k);
            let f = PROB_SCALE >> k;
            self.x = f * (self.x >> PROB_BITS) + slot - chunk * f;
            self.renormalize()?;
            v = (v << k) | u64::from(chunk);
        }
        Some(v)
    }
}

impl SymbolSource for RansSource<'_> {
    #[inline]
    fn byte(&mut self, model: usize) -> Option<u8> {
        self.symbol(model)
    }
    #[inline]
    fn number(&mut self, model: usize) -> Option<u64> {
        let class = self.symbol(model)?;
        if class < 16 {
            return Some(u64::from(class));
        }
        let (base, bits) = class_base(class)?;
        Some(base | self.bits(bits)?)
    }
    fn finished(&self) -> bool {
        self.pos == self.data.len() && self.x == RANS_L
    }
    fn resume(&mut self, state: u32, pos: usize) -> bool {
        if state < RANS_L || pos < 4 || pos > self.data.len() {
            return false;
        }
        self.x = state;
        self.pos = pos;
        true
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn number_classes_round_trip() {
        for v in (0..5000u64).chain([u64::MAX, 1 << 40, (1 << 33) + 7, 65535, 65536]) {
            let (c, extra, bits) = number_class(v);
            let (base, b) = class_base(c).unwrap();
            assert_eq!(b, bits);
            assert_eq!(base | extra, v, "value {v}");
        }
    }

    #[test]
    fn rans_round_trips_mixed_symbols() {
        let mut counter = Counter::new(2);
        let symbols: Vec<(usize, u64)> = (0..3000u64)
            .map(|i| ((i % 2) as usize, (i * i * 7919) % (1 + i % 700)))
            .collect();
        for &(m, v) in &symbols {
            if m == 0 {
                counter.byte(0, v as u8);
            } else {
                counter.number(1, v);
            }
        }
        let models = Models::from_counts(&counter.counts);
        let models = Models::decode(&models.encode(), 2).unwrap();
        let mut sink = RansSink::new(&models);
        for &(m, v) in &symbols {
            if m == 0 {
                sink.byte(0, v as u8);
            } else {
                sink.number(1, v);
            }
        }
        let mut out = Vec::new();
        sink.finish(&mut out);
        let mut src = RansSource::new(&models, &out).unwrap();
        for &(m, v) in &symbols {
            let got = if m == 0 {
                u64::from(src.byte(0).unwrap())
            } else {
                src.number(1).unwrap()
            };
            assert_eq!(got, if m == 0 { v as u8 as u64 } else { v });
        }
        assert!(src.finished());
    }

    #[test]
    fn frequencies_sum_to_the_scale_and_keep_rare_symbols() {
        let mut c = [0u64; 256];
        c[0] = 1_000_000_000;
        for x in c.iter_mut().skip(1) {
            *x = 1;
        }
        let f = normalize(&c);
        assert_eq!(f.iter().map(|&x| u32::from(x)).sum::<u32>(), PROB_SCALE);
        assert!(f.iter().all(|&x| x >= 1));
    }
}
