//! The textual form of scores, shared by every writer so that outputs are byte-identical.

use std::fmt::Write;

/// 2^29: a value times this is whole when its exact decimal expansion may be short enough
/// (18 significant digits or fewer) for two shortest forms to tie.
const TIE_FREE: f64 = 536_870_912.0;

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
    let positional = value == 0.0 || (1e-4..1e15).contains(&magnitude);
    // zmij writes the shortest round-trip digits as Rust's formatting does, several times
    // faster, and in the same layout where its layout (positional from 1e-5 to 1e16) agrees
    // with this one. The digits differ only where two shortest forms are equally close (zmij
    // rounds the half up, Rust to even), which needs an exact expansion of at most 18
    // significant digits: a multiple of 2^-29 in this range. For those, zmij's form is still
    // Rust's when it has at most 15 significant digits, as no other form that short lies
    // within the value's rounding interval. Everything else goes to Rust's formatting; a test
    // checks both agree.
    if value != 0.0 && (positional || magnitude < 1e-5) && value.is_finite() {
        let mut buffer = zmij::Buffer::new();
        let text = buffer.format_finite(value);
        if (magnitude * TIE_FREE).fract() != 0.0 || significant_digits(text) <= 15 {
            out.push_str(text.strip_suffix(".0").unwrap_or(text));
            return;
        }
    }
    if positional {
        let _ = write!(out, "{value}");
    } else {
        let _ = write!(out, "{value:e}");
    }
}

/// The digits of a formatted number from its first non-zero digit to the exponent (trailing
/// zeros counted: an overestimate is safe where this is used).
fn significant_digits(text: &str) -> usize {
    let mantissa = text.split('e').next().unwrap_or(text);
    mantissa
        .bytes()
        .filter(u8::is_ascii_digit)
        .skip_while(|&b| b == b'0')
        .count()
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
