//! The textual form of scores, shared by every writer so that outputs are byte-identical.

use std::fmt::Write;

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
    if value == 0.0 || (1e-4..1e15).contains(&magnitude) {
        let _ = write!(out, "{value}");
    } else {
        let _ = write!(out, "{value:e}");
    }
}
