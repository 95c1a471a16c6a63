//! Fitting the decoder's weights on a development set by coordinate ascent: one weight at a
//! time, a grid line search that re-decodes the development set at each point and keeps the
//! point with the highest corpus BLEU; the step halves after every round. A simpler relative of
//! minimum error rate training (Och 2003), which searches the same lines exactly over n-best
//! lists instead of re-decoding.

use crate::decode::{translate_all, DecodeSettings, Decoder, Weights};
use crate::error::Result;
use crate::evaluate::CorpusStats;
use crate::lm::LanguageModel;
use crate::read::Table;

/// Settings of [`coordinate_ascent`].
#[derive(Clone, Debug)]
pub struct TuneSettings {
    /// Rounds over all weights.
    pub rounds: usize,
    /// First step, relative to a weight's magnitude (at least `min_step` absolute).
    pub step: f64,
    /// Smallest absolute step.
    pub min_step: f64,
    /// Decoding threads (0: every core).
    pub threads: usize,
    /// Search settings used while tuning.
    pub search: DecodeSettings,
}

impl Default for TuneSettings {
    fn default() -> Self {
        TuneSettings {
            rounds: 2,
            step: 0.5,
            min_step: 0.05,
            threads: 0,
            search: DecodeSettings {
                beam: 30,
                ..DecodeSettings::default()
            },
        }
    }
}

/// One evaluated point of the search.
#[derive(Clone, Debug)]
pub struct Trial {
    /// The feature whose weight was moved (empty for the start point).
    pub feature: String,
    /// The weight tried.
    pub value: f64,
    /// Development BLEU at that point.
    pub bleu: f64,
}

/// The result of tuning.
#[derive(Clone, Debug)]
pub struct Tuned {
    /// The best weights found.
    pub weights: Weights,
    /// Development BLEU of the start weights.
    pub start_bleu: f64,
    /// Development BLEU of the best weights.
    pub bleu: f64,
    /// Every point evaluated, in order.
    pub trials: Vec<Trial>,
}

fn dev_bleu(
    table: &Table,
    lm: &LanguageModel,
    weights: &Weights,
    settings: &TuneSettings,
    source: &[String],
    reference: &[String],
) -> Result<f64> {
    let decoder = Decoder::new(table, lm, weights.clone(), settings.search.clone());
    let out = translate_all(&decoder, source, settings.threads, false)?;
    let hyps: Vec<&str> = out.iter().map(|t| t.text.as_str()).collect();
    Ok(CorpusStats::new(&hyps, reference).scores().0.score)
}

/// Coordinate ascent on development BLEU from `start`. Features with weight 0 in `start` that
/// are not among the defaults of the table's scored columns stay fixed.
pub fn coordinate_ascent(
    table: &Table,
    lm: &LanguageModel,
    start: Weights,
    source: &[String],
    reference: &[String],
    settings: &TuneSettings,
    mut progress: impl FnMut(&Trial),
) -> Result<Tuned> {
    let mut best = start.clone();
    let start_bleu = dev_bleu(table, lm, &best, settings, source, reference)?;
    let mut best_bleu = start_bleu;
    let mut trials = vec![Trial {
        feature: String::new(),
        value: 0.0,
        bleu: start_bleu,
    }];
    progress(&trials[0]);
    let features: Vec<String> = start
        .values
        .iter()
        .filter(|(_, &w)| w != 0.0)
        .map(|(k, _)| k.clone())
        .collect();
    let mut step = settings.step;
    for _ in 0..settings.rounds {
        for f in &features {
            let current = best.get(f);
            let delta = (current.abs() * step).max(settings.min_step);
            for k in [-2.0, -1.0, 1.0, 2.0] {
                let value = current + k * delta;
                let mut w = best.clone();
                w.values.insert(f.clone(), value);
                let bleu = dev_bleu(table, lm, &w, settings, source, reference)?;
                let trial = Trial {
                    feature: f.clone(),
                    value,
                    bleu,
                };
                progress(&trial);
                trials.push(trial);
                if bleu > best_bleu + 1e-9 {
                    best_bleu = bleu;
                    best = w;
                }
            }
        }
        step /= 2.0;
    }
    Ok(Tuned {
        weights: best,
        start_bleu,
        bleu: best_bleu,
        trials,
    })
}
