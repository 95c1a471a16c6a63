//! Score quantization by one-dimensional k-means (Lloyd's algorithm).
//!
//! Decoders add log scores, so for a column whose values are all positive the codebook is fitted
//! to the natural logarithms of the values and error is measured in the log domain; columns with
//! zero or negative values are fitted to the values themselves. A column with no more distinct
//! values than codebook entries is stored exactly.
//!
//! Fitting runs on a weighted list of distinct values (prefix sums make each Lloyd iteration
//! O(k log n)); initial centres sit at weighted quantiles. Encoding picks the nearest centre in
//! the fitted domain by binary search over the midpoints between centres.

use crate::format::domain;

/// The most distinct values kept when sampling a column for fitting.
pub const DEFAULT_SAMPLE_SIZE: usize = 1 << 18;

/// A fitted codebook for one score column (the unit test `fit_encode_decode` shows a use).
#[derive(Clone, Debug, PartialEq)]
pub struct Codebook {
    domain: u8,
    centres: Vec<f64>,
    values: Vec<f64>,
    midpoints: Vec<f64>,
    /// The values are the column's distinct values themselves (no rounding at all).
    exact: bool,
}

impl Codebook {
    /// Fits at most `2^bits` centres to `samples` (which must be finite).
    pub fn fit(samples: &[f64], bits: u8) -> Codebook {
        assert!((1..=16).contains(&bits), "bits must be in 1..=16");
        let domain = if !samples.is_empty() && samples.iter().all(|&v| v > 0.0) {
            domain::LOG
        } else {
            domain::LINEAR
        };
        let mut xs: Vec<f64> = samples.iter().map(|&v| to_domain(domain, v)).collect();
        xs.sort_by(f64::total_cmp);
        let mut points: Vec<(f64, f64)> = Vec::new();
        for x in xs {
            match points.last_mut() {
                Some((last, w)) if *last == x => *w += 1.0,
                _ => points.push((x, 1.0)),
            }
        }
        let k = 1usize << bits;
        // Negative zero is stored as zero (it would otherwise share a code with zero).
        let mut values: Vec<f64> = samples.iter().map(|&v| v + 0.0).collect();
        values.sort_by(f64::total_cmp);
        values.dedup();
        if values.len() <= k {
            // Few distinct values: store them exactly (not as exp(ln(v)), which may differ in
            // the last bit), and encode by exact search in the values themselves.
            if values.is_empty() {
                values.push(0.0); // an empty column still has a one-entry codebook
            }
            let mut book = Codebook::from_values(domain, values);
            book.exact = true;
            return book;
        }
        Codebook::from_centres(domain, lloyd(&points, k))
    }

    /// A codebook from centres in `domain` (ascending, deduplicated here).
    pub fn from_centres(domain: u8, mut centres: Vec<f64>) -> Codebook {
        centres.sort_by(f64::total_cmp);
        centres.dedup();
        if centres.is_empty() {
            centres.push(to_domain(domain, 1.0));
        }
        let values = centres.iter().map(|&c| from_domain(domain, c)).collect();
        Codebook::assemble(domain, centres, values)
    }

    /// Builds the codebook of a stored file: `values` are the decoded (linear) values.
    pub fn from_values(domain: u8, values: Vec<f64>) -> Codebook {
        let centres: Vec<f64> = values.iter().map(|&v| to_domain(domain, v)).collect();
        Codebook::assemble(domain, centres, values)
    }

    fn assemble(domain: u8, centres: Vec<f64>, values: Vec<f64>) -> Codebook {
        let midpoints = centres_midpoints(&centres);
        Codebook {
            domain,
            centres,
            values,
            midpoints,
            exact: false,
        }
    }

    /// The number of entries.
    pub fn len(&self) -> usize {
        self.values.len()
    }

    /// Whether the codebook has no entries (never true for fitted codebooks).
    pub fn is_empty(&self) -> bool {
        self.values.is_empty()
    }

    /// [`domain::LOG`] or [`domain::LINEAR`].
    pub fn domain(&self) -> u8 {
        self.domain
    }

    /// Decoded values, ascending, indexed by code.
    pub fn values(&self) -> &[f64] {
        &self.values
    }

    /// The code of the centre nearest to `value` in the fitted domain.
    pub fn encode(&self, value: f64) -> u16 {
        if self.exact {
            let value = value + 0.0;
            let i = self.values.partition_point(|&v| v < value);
            let nearer_below = i == self.values.len()
                || (i > 0 && value - self.values[i - 1] <= self.values[i] - value);
            return if nearer_below { i - 1 } else { i } as u16;
        }
        let x = to_domain(self.domain, value);
        self.midpoints.partition_point(|&m| m < x) as u16
    }

    /// The value a code stands for.
    pub fn decode(&self, code: u16) -> f64 {
        self.values[usize::from(code)]
    }

    /// The error of representing `value` by its code, in the fitted domain.
    pub fn error(&self, value: f64) -> f64 {
        self.error_of(self.encode(value), value)
    }

    /// The error of representing `value` by `code`, in the fitted domain.
    pub fn error_of(&self, code: u16, value: f64) -> f64 {
        (self.centres[usize::from(code)] - to_domain(self.domain, value)).abs()
    }
}

fn centres_midpoints(centres: &[f64]) -> Vec<f64> {
    centres
        .windows(2)
        .map(|w| w[0] + (w[1] - w[0]) / 2.0)
        .collect()
}

/// Maps a value into a fitting domain.
pub fn to_domain(domain: u8, value: f64) -> f64 {
    if domain == domain::LOG {
        value.ln()
    } else {
        value
    }
}

fn from_domain(domain: u8, x: f64) -> f64 {
    if domain == domain::LOG {
        x.exp()
    } else {
        x
    }
}

/// Weighted 1-D k-means on sorted distinct `points` (value, weight), `k < points.len()`.
fn lloyd(points: &[(f64, f64)], k: usize) -> Vec<f64> {
    let n = points.len();
    let mut cw = Vec::with_capacity(n + 1); // prefix sums of weights
    let mut cwx = Vec::with_capacity(n + 1); // prefix sums of weight * value
    cw.push(0.0);
    cwx.push(0.0);
    for &(x, w) in points {
        cw.push(cw.last().unwrap() + w);
        cwx.push(cwx.last().unwrap() + w * x);
    }
    let total = cw[n];
    // Initial centres: half at weighted quantiles (dense regions get more centres), half spread
    // evenly over the range (isolated values are not swallowed); Lloyd then refines both.
    let (lo, hi) = (points[0].0, points[n - 1].0);
    let quantiles = k / 2;
    let mut centres: Vec<f64> = (0..quantiles)
        .map(|i| {
            let target = total * (i as f64 + 0.5) / quantiles as f64;
            let idx = cw.partition_point(|&c| c <= target).clamp(1, n) - 1;
            points[idx].0
        })
        .collect();
    let even = k - quantiles;
    centres.extend((0..even).map(|i| lo + (hi - lo) * (i as f64 + 0.5) / even as f64));
    centres.sort_by(f64::total_cmp);
    centres.dedup();
    for _ in 0..500 {
        let mids = centres_midpoints(&centres);
        let mut moved = 0.0f64;
        let mut lo = 0;
        for (c, centre) in centres.iter_mut().enumerate() {
            let hi = if c < mids.len() {
                lo + points[lo..].partition_point(|p| p.0 < mids[c])
            } else {
                n
            };
            let w = cw[hi] - cw[lo];
            if w > 0.0 {
                let mean = (cwx[hi] - cwx[lo]) / w;
                moved = moved.max((mean - *centre).abs());
                *centre = mean;
            }
            lo = hi;
        }
        centres.sort_by(f64::total_cmp);
        if moved < 1e-12 {
            break;
        }
    }
    centres
}

/// A deterministic reservoir sample of a column's values, for fitting.
#[derive(Clone, Debug)]
pub struct Reservoir {
    capacity: usize,
    seen: u64,
    items: Vec<f64>,
    state: u64,
    extremes: [f64; 2],
}

impl Reservoir {
    /// Keeps at most `capacity` values, each value seen having the same chance.
    pub fn new(capacity: usize) -> Reservoir {
        Reservoir {
            capacity: capacity.max(1),
            seen: 0,
            items: Vec::new(),
            state: 0x9E37_79B9_7F4A_7C15,
            extremes: [0.0; 2],
        }
    }

    /// Offers one value.
    pub fn push(&mut self, value: f64) {
        self.seen += 1;
        // The extremes always take part in fitting, so the codebook spans the whole column.
        if self.seen == 1 {
            self.extremes = [value, value];
        } else {
            self.extremes[0] = self.extremes[0].min(value);
            self.extremes[1] = self.extremes[1].max(value);
        }
        if self.items.len() < self.capacity {
            self.items.push(value);
            return;
        }
        // splitmix64 step: a fixed sequence, so packing is reproducible.
        self.state = self.state.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.state;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^= z >> 31;
        let j = z % self.seen;
        if (j as usize) < self.capacity {
            self.items[j as usize] = value;
        }
    }

    /// The sampled values, plus the smallest and largest value seen.
    pub fn values(&self) -> Vec<f64> {
        let mut v = self.items.clone();
        if self.seen > 0 {
            v.extend_from_slice(&self.extremes);
        }
        v
    }
}

#[cfg(test)]
mod tests {

    #[test]
    fn fit_encode_decode() {
        let values: Vec<f64> = (1..=1000).map(|i| i as f64 / 1000.0).collect();
        let book = Codebook::fit(&values, 4);
        assert_eq!(book.len(), 16);
        let code = book.encode(0.5);
        let back = book.decode(code);
        assert!((back.ln() - 0.5f64.ln()).abs() < 0.1);
    }

    use super::*;

    #[test]
    fn exact_when_few_distinct_values() {
        let v = [0.5, 0.25, 0.5, 1.0];
        let book = Codebook::fit(&v, 2);
        for x in v {
            assert_eq!(book.decode(book.encode(x)), x);
        }
    }

    #[test]
    fn lloyd_on_two_clusters_finds_their_means() {
        // Two tight clusters in the log domain; with one bit the centres are their means.
        let mut v = Vec::new();
        for i in 0..100 {
            v.push((-(1.0 + i as f64 * 1e-4)).exp());
            v.push((-(5.0 + i as f64 * 1e-4)).exp());
        }
        let book = Codebook::fit(&v, 1);
        let logs: Vec<f64> = book.values().iter().map(|x| x.ln()).collect();
        assert!((logs[0] + 5.00495).abs() < 1e-9, "{logs:?}");
        assert!((logs[1] + 1.00495).abs() < 1e-9, "{logs:?}");
    }

    #[test]
    fn more_bits_never_hurt_much() {
        let v: Vec<f64> = (1..5000)
            .map(|i| 1.0 / (1.0 + (i as f64).powf(1.3)))
            .collect();
        let mut last = f64::INFINITY;
        for bits in [2, 4, 6, 8, 10] {
            let book = Codebook::fit(&v, bits);
            let rms =
                (v.iter().map(|&x| book.error(x).powi(2)).sum::<f64>() / v.len() as f64).sqrt();
            assert!(rms < last, "bits {bits}: {rms} !< {last}");
            last = rms;
        }
        assert!(last < 0.01, "rms at 10 bits: {last}");
    }

    #[test]
    fn linear_domain_for_non_positive_columns() {
        let v = [-1.0, 0.0, 2.0, 3.0, 4.0, 5.0];
        let book = Codebook::fit(&v, 1);
        assert_eq!(book.domain(), domain::LINEAR);
        assert_eq!(book.len(), 2);
    }
}
