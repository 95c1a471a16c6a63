//! Ranking the options of a source for the top-k filter.

use crate::error::{Error, Result};
use crate::table::{CountColumn, PhrasePair, Schema};

/// How the top-k filter ranks the options of a source phrase, best first.
///
/// Either one column (`p_t_given_s`), ranked by its value, or a log-linear combination
/// `COLUMN=WEIGHT,COLUMN=WEIGHT,...` ranked by `Σ weight · ln(value)` (a value of 0 gives −∞).
/// Columns may be scores or counts. Among options with equal rank, the one whose target sorts
/// first in byte order wins, so the result does not depend on the input order.
///
/// # Examples
/// ```
/// use baler::prune::Ranking;
/// let single = Ranking::parse("p_t_given_s").unwrap();
/// assert_eq!(single.describe(), "p_t_given_s");
/// let mix = Ranking::parse("p_t_given_s=1,lex_t_given_s=0.5").unwrap();
/// assert_eq!(mix.terms().len(), 2);
/// assert!(Ranking::parse("p_t_given_s=x").is_err());
/// ```
#[derive(Clone, Debug, PartialEq)]
pub struct Ranking {
    terms: Vec<(String, f64)>,
    log_linear: bool,
}

impl Default for Ranking {
    /// Ranking by `p_t_given_s`.
    fn default() -> Ranking {
        Ranking {
            terms: vec![("p_t_given_s".into(), 1.0)],
            log_linear: false,
        }
    }
}

impl Ranking {
    /// Parses `COLUMN` or `COLUMN=WEIGHT[,COLUMN=WEIGHT...]`.
    pub fn parse(text: &str) -> Result<Ranking> {
        let bad = |why: &str| Error::invalid("--by", format!("{text:?}: {why}"));
        if !text.contains('=') {
            if text.is_empty() || text.contains(',') {
                return Err(bad("expected COLUMN or COLUMN=WEIGHT,COLUMN=WEIGHT"));
            }
            return Ok(Ranking {
                terms: vec![(text.to_string(), 1.0)],
                log_linear: false,
            });
        }
        let mut terms = Vec::new();
        for part in text.split(',') {
            let (column, weight) = part
                .split_once('=')
                .ok_or_else(|| bad("every term needs COLUMN=WEIGHT"))?;
            let weight: f64 = weight
                .trim()
                .parse()
                .ok()
                .filter(|w: &f64| w.is_finite())
                .ok_or_else(|| bad("a weight is not a number"))?;
            if column.is_empty() {
                return Err(bad("empty column name"));
            }
            terms.push((column.to_string(), weight));
        }
        Ok(Ranking {
            terms,
            log_linear: true,
        })
    }

    /// The columns and weights.
    pub fn terms(&self) -> &[(String, f64)] {
        &self.terms
    }

    /// The ranking as it would be given to `--by`.
    pub fn describe(&self) -> String {
        if !self.log_linear {
            return self.terms[0].0.clone();
        }
        let parts: Vec<String> = self.terms.iter().map(|(c, w)| format!("{c}={w}")).collect();
        parts.join(",")
    }

    pub(crate) fn resolve(&self, schema: &Schema) -> Result<ResolvedRanking> {
        let mut columns = Vec::new();
        for (name, weight) in &self.terms {
            columns.push((Column::resolve(schema, name, "--by")?, *weight));
        }
        Ok(ResolvedRanking {
            columns,
            log_linear: self.log_linear,
        })
    }
}

/// A column of a record: a score or a count.
#[derive(Clone, Copy, Debug)]
pub(crate) enum Column {
    Score(usize),
    Count(usize),
}

impl Column {
    pub(crate) fn resolve(schema: &Schema, name: &str, option: &str) -> Result<Column> {
        if let Some(i) = schema.score_index(name) {
            return Ok(Column::Score(i));
        }
        if let Some(i) = CountColumn::from_name(name).and_then(|c| schema.count_index(c)) {
            return Ok(Column::Count(i));
        }
        let mut known: Vec<String> = schema.scores.clone();
        known.extend(schema.counts.iter().map(|c| c.name().to_string()));
        Err(Error::invalid(
            option,
            format!(
                "the table has no column {name:?} (its score and count columns: {})",
                if known.is_empty() {
                    "none".to_string()
                } else {
                    known.join(", ")
                }
            ),
        ))
    }

    pub(crate) fn value(self, pair: &PhrasePair) -> f64 {
        match self {
            Column::Score(i) => pair.scores[i],
            Column::Count(i) => pair.counts[i] as f64,
        }
    }
}

pub(crate) struct ResolvedRanking {
    columns: Vec<(Column, f64)>,
    log_linear: bool,
}

impl ResolvedRanking {
    fn key(&self, pair: &PhrasePair) -> f64 {
        if !self.log_linear {
            return self.columns[0].0.value(pair);
        }
        self.columns
            .iter()
            .map(|&(c, w)| {
                let v = c.value(pair);
                if w == 0.0 {
                    0.0
                } else if v > 0.0 {
                    w * v.ln()
                } else {
                    // ln 0 = −∞, weighted: −∞ for a positive weight, +∞ for a negative one
                    -w.signum() * f64::INFINITY
                }
            })
            .sum::<f64>()
    }

    /// Keeps the best `k` of `group`; the survivors keep their input order.
    pub(crate) fn keep_top<T>(
        &self,
        group: &mut Vec<T>,
        k: usize,
        pair: impl Fn(&T) -> &PhrasePair,
    ) {
        if group.len() <= k {
            return;
        }
        let mut order: Vec<(f64, usize)> = group
            .iter()
            .enumerate()
            .map(|(i, t)| {
                let key = self.key(pair(t));
                // +∞ − ∞ in a log-linear sum ranks last
                (if key.is_nan() { f64::NEG_INFINITY } else { key }, i)
            })
            .collect();
        order.sort_by(|a, b| {
            b.0.total_cmp(&a.0).then_with(|| {
                pair(&group[a.1])
                    .target
                    .as_bytes()
                    .cmp(pair(&group[b.1]).target.as_bytes())
            })
        });
        let mut keep = vec![false; group.len()];
        for &(_, i) in &order[..k] {
            keep[i] = true;
        }
        let mut i = 0;
        group.retain(|_| {
            i += 1;
            keep[i - 1]
        });
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn pair(target: String, p: f64) -> PhrasePair {
        PhrasePair {
            source: "s".into(),
            target,
            scores: vec![p],
            ..Default::default()
        }
    }

    proptest::proptest! {
        /// The survivors are the k first by (score descending, target ascending), in input
        /// order, whatever the input order.
        #[test]
        fn keeps_the_k_best_in_input_order(
            options in proptest::collection::vec((0u8..6, 0u8..4), 1..12),
            k in 1usize..6,
            rotate in 0usize..12,
        ) {
            let schema = Schema { scores: vec!["p_t_given_s".into()], ..Default::default() };
            let ranking = Ranking::default().resolve(&schema).unwrap();
            let mut group: Vec<PhrasePair> = options
                .iter()
                .enumerate()
                .map(|(i, &(t, p))| pair(format!("t{t}-{i}"), f64::from(p) / 4.0))
                .collect();
            let n = group.len();
            group.rotate_left(rotate % n);
            let input = group.clone();
            ranking.keep_top(&mut group, k, |p| p);
            let mut best = input.clone();
            best.sort_by(|a, b| b.scores[0].total_cmp(&a.scores[0]).then(a.target.cmp(&b.target)));
            best.truncate(k);
            let expected: Vec<&PhrasePair> = input.iter().filter(|p| best.contains(p)).collect();
            let got: Vec<&PhrasePair> = group.iter().collect();
            proptest::prop_assert_eq!(got, expected);
        }
    }
}
