//! The textual form of scores, shared by every writer so that outputs are byte-identical.

use std::fmt::Write;

/// 2^22: a value in the positional range times this is whole when its exact decimal expansion
/// is short enough for a tie between two shortest forms.
const TIE_FREE: f64 = 4_194_304.0;

/// Appends `value` in the shortest form that reads back to the same `f64`.
///
/// Values whose magnitude is at least 1e-4 and below 1e15 (and zero) are written positionally
/// (`0.25`, `3`, `-1.5`); others in exponent form (`1.5e-7`, `2e20`). The digits are the
/// shortest that round-trip, as produced by Rust's float formatting (and by Python's `repr`).
///
/// # Examples
/// ```
/// let mut s = String::new();
/// for v in [0.25, 1.0, 3.0e-7, 0.0001, 1e15] {
///     baler::table::format_score(&mut s, v);
///     s.push(' ');
/// }
/// assert_eq!(s, "0.25 1 3e-7 0.0001 1e15 ");
/// ```
pub fn format_score(out: &mut String, value: f64) {
    let magnitude = value.abs();
    if (1e-4..1e15).contains(&magnitude) && (magnitude * TIE_FREE).fract() != 0.0 {
        // zmij finds the same shortest round-trip digits as Rust's formatting, several times
        // faster, except where two candidates are equally close (then it rounds the half up,
        // Rust to even). That needs an exact decimal expansion of at most 18 digits, so at
        // most 21 digits after the point in this range: a multiple of 2^-21. Those go to
        // Rust's formatting (checked against it in the tests). In this range zmij writes
        // positionally, as Rust does.
        let mut buffer = zmij::Buffer::new();
        out.push_str(buffer.format_finite(value));
    } else if value.fract() == 0.0 && (1.0..1e15).contains(&magnitude) {
        if value < 0.0 {
            out.push('-');
        }
        out.push_str(itoa::Buffer::new().format(magnitude as u64));
    } else if value == 0.0 || (1e-4..1e15).contains(&magnitude) {
        let _ = write!(out, "{value}");
    } else {
        let _ = write!(out, "{value:e}");
    }
}

/// Appends the decimal digits of `value`.
///
/// # Examples
/// ```
/// let mut s = String::from("n=");
/// baler::table::format_count(&mut s, 1234);
/// assert_eq!(s, "n=1234");
/// ```
pub fn format_count(out: &mut String, value: u64) {
    out.push_str(itoa::Buffer::new().format(value));
}
