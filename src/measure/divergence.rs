//! Retained probability mass and the divergence of a pruned conditional distribution.

/// How one source phrase's options in a pruned table relate to those in the base.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct SourceAgreement {
    /// Σ of the base's normalized p(t|s) over the targets the other table kept, in [0, 1].
    pub retained_mass: f64,
    /// Jensen–Shannon divergence in nats between the base's and the other table's
    /// distributions, each normalized over its own options, in [0, ln 2].
    pub divergence: f64,
}

/// Compares the options of one source phrase: `base` and `other` are (target, p(t|s)) lists.
///
/// Each side is first normalized to sum to 1 over its own options (a side whose values are all
/// zero or not finite is taken as uniform). The retained mass is the base's normalized
/// probability of the targets `other` still has. The divergence is
///
/// JS(p, q) = ½ KL(p ‖ m) + ½ KL(q ‖ m),  m = ½ (p + q),
///
/// with p the base's and q the other table's normalized distribution (so a pruned table's
/// values are compared renormalized over the targets it kept). It is 0 exactly when the two
/// agree, at most ln 2, and finite when targets were dropped, where KL(p ‖ q) would be
/// infinite. A source that lost every option has divergence ln 2, the value for disjoint
/// supports, and retained mass 0. When `other` keeps a subset of the base's targets with the
/// base's values, both depend only on the retained mass r: JS = ln 2 + ½ (r ln r − (1+r) ln(1+r)),
/// which falls as r rises, so nested pruning never lowers it.
///
/// # Examples
/// ```
/// use baler::measure::source_agreement;
/// let base = [("the pier", 0.75), ("the quay", 0.25)];
/// let same = source_agreement(&base, &base);
/// assert_eq!((same.retained_mass, same.divergence), (1.0, 0.0));
/// let pruned = source_agreement(&base, &[("the pier", 0.75)]);
/// assert_eq!(pruned.retained_mass, 0.75);
/// let r: f64 = 0.75;
/// let expected = 2f64.ln() + 0.5 * (r * r.ln() - (1.0 + r) * (1.0 + r).ln());
/// assert!((pruned.divergence - expected).abs() < 1e-15);
/// let emptied = source_agreement(&base, &[]);
/// assert_eq!((emptied.retained_mass, emptied.divergence), (0.0, 2f64.ln()));
/// ```
pub fn source_agreement(base: &[(&str, f64)], other: &[(&str, f64)]) -> SourceAgreement {
    if other.is_empty() {
        return SourceAgreement {
            retained_mass: if base.is_empty() { 1.0 } else { 0.0 },
            divergence: if base.is_empty() {
                0.0
            } else {
                std::f64::consts::LN_2
            },
        };
    }
    if base.is_empty() {
        return SourceAgreement {
            retained_mass: 1.0,
            divergence: std::f64::consts::LN_2,
        };
    }
    let p = normalized(base);
    let q = normalized(other);
    // merge the two target lists in target order
    let mut a: Vec<(&str, f64)> = base.iter().map(|x| x.0).zip(p).collect();
    let mut b: Vec<(&str, f64)> = other.iter().map(|x| x.0).zip(q).collect();
    a.sort_by(|x, y| x.0.cmp(y.0));
    b.sort_by(|x, y| x.0.cmp(y.0));
    let (mut i, mut j) = (0, 0);
    let mut retained = 0.0;
    let mut sum = 0.0;
    let term = |x: f64, y: f64| {
        if x > 0.0 {
            x * (2.0 * x / (x + y)).ln()
        } else {
            0.0
        }
    };
    while i < a.len() || j < b.len() {
        let order = match (a.get(i), b.get(j)) {
            (Some(x), Some(y)) => x.0.cmp(y.0),
            (Some(_), None) => std::cmp::Ordering::Less,
            _ => std::cmp::Ordering::Greater,
        };
        let (pv, qv) = match order {
            std::cmp::Ordering::Less => {
                i += 1;
                (a[i - 1].1, 0.0)
            }
            std::cmp::Ordering::Greater => {
                j += 1;
                (0.0, b[j - 1].1)
            }
            std::cmp::Ordering::Equal => {
                i += 1;
                j += 1;
                retained += a[i - 1].1;
                (a[i - 1].1, b[j - 1].1)
            }
        };
        sum += term(pv, qv) + term(qv, pv);
    }
    SourceAgreement {
        retained_mass: retained.min(1.0),
        divergence: (0.5 * sum).clamp(0.0, std::f64::consts::LN_2),
    }
}

fn normalized(options: &[(&str, f64)]) -> Vec<f64> {
    let clean = |v: f64| if v.is_finite() && v > 0.0 { v } else { 0.0 };
    let total: f64 = options.iter().map(|o| clean(o.1)).sum();
    if total > 0.0 {
        options.iter().map(|o| clean(o.1) / total).collect()
    } else {
        vec![1.0 / options.len() as f64; options.len()]
    }
}
