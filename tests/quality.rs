//! Translation quality: metrics against sacrebleu, the language model against hand-worked
//! Kneser-Ney values and an independent ARPA query, the decoder against independent rescoring
//! and exhaustive search.

use std::collections::HashMap;
use std::path::{Path, PathBuf};
use std::process::Command;

use baler::decode::{DecodeSettings, Decoder, Weights};
use baler::evaluate::CorpusStats;
use baler::lm::{self, BuildOptions, LanguageModel};

use crate::util::{baler, baler_ok, s};

fn write(dir: &Path, name: &str, lines: &[&str]) -> PathBuf {
    let p = dir.join(name);
    let mut text = lines.join("\n");
    text.push('\n');
    std::fs::write(&p, text).unwrap();
    p
}

/// `baler evaluate --json` on two files: (BLEU, chrF).
fn evaluate(hyp: &Path, reference: &Path) -> (f64, f64) {
    let out = baler_ok(&["evaluate", s(hyp), "--reference", s(reference), "--json"]);
    let v: serde_json::Value = serde_json::from_str(out.trim()).unwrap();
    let sys = &v["systems"][0];
    (sys["bleu"].as_f64().unwrap(), sys["chrf"].as_f64().unwrap())
}

/// sacrebleu's corpus BLEU (tokenize="none", smooth_method="none") and chrF, computed live
/// when python3 can import sacrebleu (`.ci/run` installs it).
fn sacrebleu_live(hyp: &Path, reference: &Path) -> Option<(f64, f64)> {
    let script = "import sys, sacrebleu\n\
        h = open(sys.argv[1], encoding='utf-8').read().split('\\n')[:-1]\n\
        r = open(sys.argv[2], encoding='utf-8').read().split('\\n')[:-1]\n\
        b = sacrebleu.corpus_bleu(h, [r], tokenize='none', smooth_method='none')\n\
        c = sacrebleu.corpus_chrf(h, [r])\n\
        print(repr(b.score), repr(c.score))\n";
    let out = Command::new("python3")
        .args(["-c", script, s(hyp), s(reference)])
        .output()
        .ok()?;
    if !out.status.success() {
        eprintln!("sacrebleu not importable; stored values only");
        return None;
    }
    let text = String::from_utf8(out.stdout).ok()?;
    let mut it = text.split_whitespace().map(|x| x.parse::<f64>().unwrap());
    Some((it.next()?, it.next()?))
}

// Reference values from sacrebleu 2.6.0 (PyPI), `corpus_bleu(hyps, [refs], tokenize="none",
// smooth_method="none").score` and `corpus_chrf(hyps, [refs]).score` (defaults: character
// 6-grams, β = 2). baler's BLEU is Papineni et al.'s, unsmoothed, hence smooth_method="none"
// (sacrebleu's default "exp" smoothing differs only when some n-gram order has no match:
// 13.43 instead of 0 in the second case).
#[test]
fn bleu_and_chrf_equal_sacrebleu_on_edge_cases() {
    let dir = tempfile::tempdir().unwrap();
    #[allow(clippy::type_complexity)]
    let cases: [(&str, &[&str], &[&str], f64, f64); 3] = [
        (
            "an empty hypothesis line",
            &[
                "the pier is closed today",
                "",
                "a ferry leaves the harbour at noon",
            ],
            &[
                "the pier is closed",
                "the gate is open",
                "the ferry leaves the harbour at noon",
            ],
            59.17606269910581,
            75.55523307016986,
        ),
        (
            "no 4-gram matches",
            &["pier closed the is", "gate the open is"],
            &["the pier is closed", "the gate is open"],
            0.0,
            44.95855995855995,
        ),
        (
            "hypotheses longer than the references",
            &[
                "the ferry leaves the harbour at noon every day of the week",
                "the gate is open to all boats now",
            ],
            &["the ferry leaves the harbour at noon", "the gate is open"],
            45.52900717094679,
            86.31015689461307,
        ),
    ];
    for (what, hyps, refs, bleu, chrf) in cases {
        let h = write(dir.path(), "h.txt", hyps);
        let r = write(dir.path(), "r.txt", refs);
        let (b, c) = evaluate(&h, &r);
        assert!(
            (b - bleu).abs() < 0.01,
            "{what}: BLEU {b}, sacrebleu {bleu}"
        );
        assert!(
            (c - chrf).abs() < 0.01,
            "{what}: chrF {c}, sacrebleu {chrf}"
        );
        if let Some((lb, lc)) = sacrebleu_live(&h, &r) {
            assert!(
                (b - lb).abs() < 0.01 && (c - lc).abs() < 0.01,
                "{what}: live sacrebleu"
            );
        }
    }
}

/// The real corpus (../shared/data, see its README), unpacked once per test run.
fn real_corpus() -> Option<PathBuf> {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let archive = ["../shared/data", "../../shared/data"]
        .iter()
        .map(|d| root.join(d).join("catalogs-en-fr.tar.zst"))
        .find(|p| p.exists())?;
    let dir = std::env::temp_dir().join(format!("baler-quality-{}", std::process::id()));
    if !dir.join("test.fr").exists() {
        std::fs::create_dir_all(&dir).unwrap();
        let status = Command::new("sh")
            .arg("-c")
            .arg(format!(
                "zstd -dc '{}' | tar -x -C '{}'",
                archive.display(),
                dir.display()
            ))
            .status()
            .ok()?;
        assert!(status.success(), "unpacking {}", archive.display());
    }
    Some(dir)
}

#[test]
fn bleu_and_chrf_equal_sacrebleu_on_the_real_corpus() {
    let Some(dir) = real_corpus() else {
        eprintln!("real corpus not found beside the project; skipped");
        return;
    };
    // The English side scored as if it were a French hypothesis: real text, partial overlap
    // (placeholders, option names, numbers). sacrebleu 2.6.0: BLEU 17.866076316062692,
    // chrF 31.808287278254728.
    let (b, c) = evaluate(&dir.join("test.en"), &dir.join("test.fr"));
    assert!((b - 17.866076316062692).abs() < 0.01, "BLEU {b}");
    assert!((c - 31.808287278254728).abs() < 0.01, "chrF {c}");
    // A damaged copy of the reference (every fourth token dropped), checked live.
    let reference = std::fs::read_to_string(dir.join("test.fr")).unwrap();
    let damaged: Vec<String> = reference
        .lines()
        .map(|l| {
            l.split(' ')
                .enumerate()
                .filter(|(i, _)| i % 4 != 3)
                .map(|(_, t)| t)
                .collect::<Vec<_>>()
                .join(" ")
        })
        .collect();
    let tmp = tempfile::tempdir().unwrap();
    let refs: Vec<&str> = reference.lines().collect();
    let hyps: Vec<&str> = damaged.iter().map(String::as_str).collect();
    let h = write(tmp.path(), "h.txt", &hyps);
    let r = write(tmp.path(), "r.txt", &refs);
    let (b, c) = evaluate(&h, &r);
    if let Some((lb, lc)) = sacrebleu_live(&h, &r) {
        assert!((b - lb).abs() < 0.01, "BLEU {b}, sacrebleu {lb}");
        assert!((c - lc).abs() < 0.01, "chrF {c}, sacrebleu {lc}");
    }
}

#[test]
fn bootstrap_prefers_the_better_system() {
    let refs: Vec<String> = (0..60)
        .map(|i| format!("w{i} x{i} y{i} z{i} v{i}"))
        .collect();
    let worse: Vec<String> = (0..60).map(|i| format!("w{i} x{i} q y{i} z{i}")).collect();
    let a = CorpusStats::new(&worse, &refs);
    let b = CorpusStats::new(&refs, &refs);
    let r = baler::evaluate::paired_bootstrap(&a, &b, 300, 7);
    assert!(r.bleu_delta.0 > 0.0 && r.bleu_p < 0.01, "{r:?}");
    let r = baler::evaluate::paired_bootstrap(&b, &a, 300, 7);
    assert!(r.bleu_delta.1 < 0.0 && r.bleu_p > 0.99, "{r:?}");
}

fn build_lm(dir: &Path, lines: &[&str], order: usize) -> LanguageModel {
    let text = lines.join("\n") + "\n";
    let path = dir.join("m.balm");
    let opts = BuildOptions {
        order,
        ..BuildOptions::default()
    };
    lm::build(text.as_bytes(), "corpus", &opts)
        .unwrap()
        .write(&path)
        .unwrap();
    LanguageModel::open(&path).unwrap()
}

/// Interpolated modified Kneser-Ney (Chen & Goodman 1998, eqs. 17 and 26), worked by hand on a
/// six-sentence corpus for a bigram model.
///
/// Corpus: "d a" / "d" / "a b b" / "d b" / "a b" / "b". With <s> and </s> added:
/// bigram counts: <s> a 2, <s> b 1, <s> d 3, a </s> 1, a b 2, b </s> 4, b b 1, d </s> 1,
/// d a 1, d b 1.
/// Bigram count-of-counts n1..n4 = 6, 2, 1, 1: Y = 6/(6+2·2) = 0.6; D1 = 1 − 2·0.6·2/6 = 0.6;
/// D2 = 2 − 3·0.6·1/2 = 1.1; D3+ = 3 − 4·0.6·1/1 = 0.6.
/// Unigram continuation counts N1+(•w) (distinct left neighbours): d 1 {<s>}, a 2 {<s>, d},
/// b 4 {<s>, a, b, d}, </s> 3 {a, b, d}; total 10; count-of-counts 1, 1, 1, 1: Y = 1/3,
/// D1 = 1/3, D2 = 1, D3+ = 5/3.
/// Unigram back-off mass γ = (1/3·1 + 1·1 + 5/3·2)/10 = 7/15, spread uniformly over the five
/// predictable words (<unk>, </s>, d, a, b): p(b) = (4 − 5/3)/10 + 7/75 = 49/150,
/// p(a) = 29/150, p(d) = 24/150, p(</s>) = 34/150, p(<unk>) = 14/150.
#[test]
fn kneser_ney_matches_hand_worked_values() {
    let dir = tempfile::tempdir().unwrap();
    let model = build_lm(dir.path(), &["d a", "d", "a b b", "d b", "a b", "b"], 2);
    let id = |w: &str| model.id(w);
    let p = |ctx: &[&str], w: &str| {
        let ctx: Vec<u32> = ctx.iter().map(|c| id(c)).collect();
        10f64.powf(f64::from(model.log10_prob(&ctx, id(w))))
    };
    let close = |got: f64, want: f64, what: &str| {
        assert!(
            (got - want).abs() < 1e-6 * want.max(1e-3),
            "{what}: {got} vs {want}"
        )
    };
    close(p(&[], "b"), 49.0 / 150.0, "p(b)");
    close(p(&[], "a"), 29.0 / 150.0, "p(a)");
    close(p(&[], "d"), 24.0 / 150.0, "p(d)");
    close(p(&[], "</s>"), 34.0 / 150.0, "p(</s>)");
    close(p(&[], "harbour"), 14.0 / 150.0, "p(<unk>)");
    // Context a: a </s> 1, a b 2; total 3; γ(a) = (0.6·1 + 1.1·1)/3.
    let g_a = 1.7 / 3.0;
    close(
        p(&["a"], "b"),
        (2.0 - 1.1) / 3.0 + g_a * 49.0 / 150.0,
        "p(b|a)",
    );
    close(
        p(&["a"], "</s>"),
        (1.0 - 0.6) / 3.0 + g_a * 34.0 / 150.0,
        "p(</s>|a)",
    );
    close(p(&["a"], "d"), g_a * 24.0 / 150.0, "p(d|a), unseen");
    // Context <s>: a 2, b 1, d 3; total 6; γ = (0.6 + 1.1 + 0.6)/6.
    close(
        p(&["<s>"], "d"),
        (3.0 - 0.6) / 6.0 + 2.3 / 6.0 * 24.0 / 150.0,
        "p(d|<s>)",
    );
    // Context b: </s> 4, b 1; total 5; γ = (0.6 + 0.6)/5.
    close(
        p(&["b"], "</s>"),
        (4.0 - 0.6) / 5.0 + 1.2 / 5.0 * 34.0 / 150.0,
        "p(</s>|b)",
    );
    // Context d: </s> 1, a 1, b 1; total 3; γ = 3·0.6/3.
    close(p(&["d"], "b"), 0.4 / 3.0 + 0.6 * 49.0 / 150.0, "p(b|d)");
    // A whole sentence: log10 p(d|<s>) p(b|d) p(</s>|b).
    let want = (p(&["<s>"], "d") * p(&["d"], "b") * p(&["b"], "</s>")).log10();
    let got = model.score_sentence(&["d", "b"]).log10_prob;
    assert!((got - want).abs() < 1e-5);
}

/// A deterministic pseudo-text with repeated structure, for property checks.
fn pseudo_text(lines: usize) -> Vec<String> {
    let words = [
        "ferry", "pier", "tide", "gate", "opens", "closes", "at", "noon", "the", "a", "boat",
        "harbour", "late", "early", "dock", "crane",
    ];
    let mut x: u64 = 0x2545_f491_4f6c_dd1d;
    (0..lines)
        .map(|_| {
            x ^= x << 13;
            x ^= x >> 7;
            x ^= x << 17;
            let len = 1 + (x % 9) as usize;
            (0..len)
                .map(|k| words[((x >> (4 * k)) as usize + k * k) % words.len()])
                .collect::<Vec<_>>()
                .join(" ")
        })
        .collect()
}

#[test]
fn probabilities_sum_to_one_over_the_vocabulary() {
    let dir = tempfile::tempdir().unwrap();
    let text = pseudo_text(400);
    let lines: Vec<&str> = text.iter().map(String::as_str).collect();
    let model = build_lm(dir.path(), &lines, 4);
    let contexts: Vec<Vec<&str>> = vec![
        vec![],
        vec!["<s>"],
        vec!["the"],
        vec!["<s>", "the", "ferry"],
        vec!["ferry", "opens", "at"],
        vec!["noon", "noon", "noon"],
        vec!["unseen", "words", "here"],
        lines[3].split(' ').collect(),
        lines[17].split(' ').collect(),
    ];
    for ctx in contexts {
        let ids: Vec<u32> = ctx.iter().map(|w| model.id(w)).collect();
        let total: f64 = (0..model.vocab_len() as u32)
            .filter(|&w| w != lm::BOS)
            .map(|w| 10f64.powf(f64::from(model.log10_prob(&ids, w))))
            .sum();
        assert!(
            (total - 1.0).abs() < 1e-4,
            "context {ctx:?} sums to {total}"
        );
    }
}

/// An ARPA back-off query written from the format's definition: log10 p(w | h) is the
/// n-gram's own log10 probability when `h w` is listed, otherwise the back-off weight of `h`
/// (0 when `h` is not listed) plus log10 p(w | h without its first word).
struct Arpa {
    probs: HashMap<String, f64>,
    backoffs: HashMap<String, f64>,
    order: usize,
}

impl Arpa {
    fn parse(text: &str) -> Arpa {
        let mut a = Arpa {
            probs: HashMap::new(),
            backoffs: HashMap::new(),
            order: 0,
        };
        let mut section = 0;
        for line in text.lines() {
            if let Some(rest) = line.strip_prefix("ngram ") {
                a.order = a
                    .order
                    .max(rest.split('=').next().unwrap().parse().unwrap());
            } else if line.starts_with('\\') && line.ends_with("-grams:") {
                section = line[1..line.len() - 7].parse().unwrap();
            } else if section > 0 && !line.is_empty() && !line.starts_with('\\') {
                let f: Vec<&str> = line.split('\t').collect();
                let key = f[1].to_string();
                assert_eq!(key.split(' ').count(), section);
                a.probs.insert(key.clone(), f[0].parse().unwrap());
                if let Some(bo) = f.get(2) {
                    a.backoffs.insert(key, bo.parse().unwrap());
                }
            }
        }
        a
    }

    fn prob(&self, history: &[&str], w: &str) -> f64 {
        let key = history
            .iter()
            .chain(std::iter::once(&w))
            .copied()
            .collect::<Vec<_>>()
            .join(" ");
        if let Some(&p) = self.probs.get(&key) {
            return p;
        }
        if history.is_empty() {
            return self.probs["<unk>"];
        }
        let bo = self
            .backoffs
            .get(&history.join(" "))
            .copied()
            .unwrap_or(0.0);
        bo + self.prob(&history[1..], w)
    }

    fn sentence(&self, words: &[&str]) -> f64 {
        let mut seq = vec!["<s>"];
        let mut total = 0.0;
        for w in words.iter().copied().chain(std::iter::once("</s>")) {
            let w = if self.probs.contains_key(w) {
                w
            } else {
                "<unk>"
            };
            let start = seq.len().saturating_sub(self.order - 1);
            total += self.prob(&seq[start..], w);
            seq.push(w);
        }
        total
    }
}

#[test]
fn arpa_export_scores_like_the_model() {
    let dir = tempfile::tempdir().unwrap();
    let text = pseudo_text(300);
    let lines: Vec<&str> = text.iter().map(String::as_str).collect();
    let train = write(dir.path(), "train.txt", &lines);
    let model = dir.path().join("m.balm");
    let arpa = dir.path().join("m.arpa");
    baler_ok(&[
        "lm",
        "build",
        s(&train),
        "-o",
        s(&model),
        "--order",
        "3",
        "--arpa",
        s(&arpa),
        "-q",
    ]);
    let test: Vec<String> = pseudo_text(340)[300..]
        .iter()
        .cloned()
        .chain(["the ferry leaves the unknown quay".to_string()])
        .collect();
    let test_text = test.join("\n") + "\n";
    let out = baler(&["lm", "score", s(&model)], Some(&test_text));
    assert!(out.status.success());
    let scored: Vec<f64> = String::from_utf8(out.stdout)
        .unwrap()
        .lines()
        .filter(|l| !l.starts_with('#'))
        .map(|l| l.split('\t').next().unwrap().parse().unwrap())
        .collect();
    let arpa = Arpa::parse(&std::fs::read_to_string(&arpa).unwrap());
    assert_eq!(arpa.order, 3);
    assert_eq!(scored.len(), test.len());
    for (line, got) in test.iter().zip(&scored) {
        let words: Vec<&str> = line.split(' ').collect();
        let want = arpa.sentence(&words);
        assert!(
            (got - want).abs() < 2e-3,
            "{line}: lm score {got}, ARPA query {want}"
        );
    }
}

/// One phrase of a segmentation: source start, end, target.
type Piece = (usize, usize, String);
/// A sentence's explained score and segmentation.
type Explained = (f64, Vec<Piece>);
/// Scores a segmentation.
type Scorer<'a> = dyn Fn(&[Piece]) -> f64 + 'a;

/// A small table and LM for decoder checks: several competing segmentations and orders.
struct Setup {
    _dir: tempfile::TempDir,
    table: PathBuf,
    lm: PathBuf,
}

fn decoder_setup(rows: &[&str]) -> Setup {
    let dir = tempfile::tempdir().unwrap();
    let mut tsv = String::from("source\ttarget\tp_t_given_s\tp_s_given_t\n");
    for r in rows {
        tsv.push_str(r);
        tsv.push('\n');
    }
    let table = dir.path().join("t.bale");
    let opts = baler::pack::PackOptions {
        bits: None,
        ..Default::default()
    };
    baler::pack::pack_tsv(tsv.as_bytes(), "t.tsv", &table, &opts).unwrap();
    let text = pseudo_text(300);
    let lines: Vec<&str> = text.iter().map(String::as_str).collect();
    let train = write(dir.path(), "lm.txt", &lines);
    let lm = dir.path().join("m.balm");
    baler_ok(&["lm", "build", s(&train), "-o", s(&lm), "--order", "3", "-q"]);
    Setup {
        _dir: dir,
        table,
        lm,
    }
}

impl Setup {
    /// Runs `baler translate TABLE --lm LM OPTIONS...` on the set-up's table and model, with
    /// `input` on standard input; returns the process output.
    fn translate(&self, options: &[&str], input: &str) -> std::process::Output {
        let args = [
            &["translate", s(&self.table), "--lm", s(&self.lm)][..],
            options,
        ]
        .concat();
        baler(&args, Some(input))
    }

    /// [`Setup::translate`], asserting success; returns the translations (standard output).
    fn translated(&self, options: &[&str], input: &str) -> String {
        let out = self.translate(options, input);
        assert!(out.status.success());
        String::from_utf8(out.stdout).unwrap()
    }
}

const ROWS: &[&str] = &[
    "le\tthe\t0.7\t0.6",
    "le\ta\t0.2\t0.3",
    "bac\tferry\t0.6\t0.5",
    "bac\tboat\t0.3\t0.4",
    "le bac\tthe ferry\t0.5\t0.7",
    "part\tleaves\t0.5\t0.5",
    "part\topens\t0.2\t0.1",
    "tôt\tearly\t0.8\t0.9",
    "bac part\tferry opens\t0.3\t0.2",
    "part tôt\tearly opens\t0.2\t0.3",
    "quai\tpier\t0.9\t0.8",
    "au quai\tat the pier\t0.6\t0.5",
    "au\tat\t0.7\t0.6",
];

/// The model score of a segmentation, computed here from the table (looked up by phrase) and
/// the model's n-gram probabilities, following the feature definitions of `baler::decode`.
fn rescore(
    table: &baler::Table,
    model: &LanguageModel,
    weights: &Weights,
    source: &[&str],
    segments: &[Piece],
) -> f64 {
    let mut score = 0.0;
    let mut last_end = 0usize;
    let mut history = vec![lm::BOS];
    for (start, end, target) in segments {
        let phrase = source[*start..*end].join(" ");
        let options = table.lookup(&phrase).unwrap();
        match options.iter().find(|o| o.target() == target) {
            Some(o) => {
                for name in ["p_t_given_s", "p_s_given_t"] {
                    score += weights.get(&format!("table.{name}"))
                        * o.score_by_name(name).unwrap().max(1e-10).ln();
                }
            }
            None => {
                assert_eq!(end - start, 1, "only single words are copied");
                assert_eq!(&source[*start], target);
                score += weights.get("copied");
            }
        }
        score += weights.get("phrases");
        score -= weights.get("jump") * start.abs_diff(last_end) as f64;
        last_end = *end;
        for w in target.split(' ') {
            let id = model.id(w);
            score += weights.get("words");
            score += weights.get("lm")
                * f64::from(model.log10_prob(&history, id))
                * std::f64::consts::LN_10;
            history.push(id);
        }
    }
    score
        + weights.get("lm")
            * f64::from(model.log10_prob(&history, lm::EOS))
            * std::f64::consts::LN_10
}

fn parse_explain(stderr: &str) -> Vec<Explained> {
    let mut out: Vec<Explained> = Vec::new();
    for line in stderr.lines() {
        if let Some(rest) = line.strip_prefix("sentence ") {
            let score = rest.split("model score ").nth(1).unwrap().parse().unwrap();
            out.push((score, Vec::new()));
        } else if let Some(rest) = line.strip_prefix("  [") {
            let (range, target) = rest.split_once(") ").unwrap();
            let (a, b) = range.split_once(',').unwrap();
            let target = target.trim_end_matches("  (copied)").to_string();
            out.last_mut()
                .unwrap()
                .1
                .push((a.parse().unwrap(), b.parse().unwrap(), target));
        }
    }
    out
}

#[test]
fn explained_score_equals_an_independent_rescoring() {
    let setup = decoder_setup(ROWS);
    let sources = [
        "le bac part tôt",
        "le bac part au quai",
        "bac le tôt part",
        "le navire part",
        "quai au le bac",
    ];
    let input = sources.join("\n") + "\n";
    let weights_file = setup.table.with_extension("weights");
    std::fs::write(
        &weights_file,
        "table.p_t_given_s = 0.3\ntable.p_s_given_t = 0.2\nlm = 0.4\nwords = 0.5\n\
         phrases = -0.3\njump = 0.25\ncopied = -2\n",
    )
    .unwrap();
    let out = setup.translate(
        &["--weights", s(&weights_file), "--explain", "--threads", "2"],
        &input,
    );
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let explained = parse_explain(&String::from_utf8_lossy(&out.stderr));
    let hyps: Vec<String> = String::from_utf8(out.stdout)
        .unwrap()
        .lines()
        .map(String::from)
        .collect();
    assert_eq!(explained.len(), sources.len());
    let table = baler::Table::open(&setup.table).unwrap();
    let model = LanguageModel::open(&setup.lm).unwrap();
    let weights = Weights::read(&weights_file, Weights::defaults(table.schema())).unwrap();
    for ((source, (score, segments)), hyp) in sources.iter().zip(&explained).zip(&hyps) {
        let words: Vec<&str> = source.split(' ').collect();
        let text: Vec<&str> = segments.iter().map(|s| s.2.as_str()).collect();
        assert_eq!(&text.join(" "), hyp, "output in input order");
        let want = rescore(&table, &model, &weights, &words, segments);
        assert!(
            (score - want).abs() < 1e-3,
            "{source}: explained {score}, rescored {want}"
        );
    }
}

/// Every segmentation and order within the distortion limit, each span with every option
/// (and a copy where no single-word option exists): the best model score.
fn exhaustive_best(
    table: &baler::Table,
    model: &LanguageModel,
    weights: &Weights,
    words: &[&str],
    limit: usize,
) -> f64 {
    let n = words.len();
    let mut phrases: Vec<Piece> = Vec::new();
    for i in 0..n {
        let mut single = false;
        for j in i + 1..=n {
            if let Ok(options) = table.lookup(&words[i..j].join(" ")) {
                single |= j == i + 1 && !options.is_empty();
                for o in options.iter() {
                    phrases.push((i, j, o.target().to_string()));
                }
            }
        }
        if !single {
            phrases.push((i, i + 1, words[i].to_string()));
        }
    }
    fn walk(
        phrases: &[Piece],
        covered: &mut Vec<bool>,
        path: &mut Vec<Piece>,
        last_end: usize,
        limit: usize,
        best: &mut f64,
        score: &Scorer<'_>,
    ) {
        if covered.iter().all(|&c| c) {
            *best = best.max(score(path));
            return;
        }
        for p in phrases {
            if p.0.abs_diff(last_end) > limit || covered[p.0..p.1].iter().any(|&c| c) {
                continue;
            }
            covered[p.0..p.1].iter_mut().for_each(|c| *c = true);
            path.push(p.clone());
            walk(phrases, covered, path, p.1, limit, best, score);
            path.pop();
            covered[p.0..p.1].iter_mut().for_each(|c| *c = false);
        }
    }
    let mut best = f64::NEG_INFINITY;
    let score = |path: &[Piece]| rescore(table, model, weights, words, path);
    walk(
        &phrases,
        &mut vec![false; n],
        &mut Vec::new(),
        0,
        limit,
        &mut best,
        &score,
    );
    best
}

#[test]
fn wide_beam_finds_the_exhaustive_optimum() {
    let setup = decoder_setup(ROWS);
    let table = baler::Table::open(&setup.table).unwrap();
    let model = LanguageModel::open(&setup.lm).unwrap();
    let mut weights = Weights::defaults(table.schema());
    weights.values.insert("jump".into(), 0.1);
    for limit in [1, 2, 6] {
        let settings = DecodeSettings {
            beam: 100_000,
            options_per_span: 1000,
            distortion_limit: limit,
            threshold: f64::INFINITY,
            ..DecodeSettings::default()
        };
        let decoder = Decoder::new(&table, &model, weights.clone(), settings);
        for source in [
            "le bac part tôt",
            "tôt part bac le",
            "au quai le bac part",
            "le x bac",
        ] {
            let words: Vec<&str> = source.split(' ').collect();
            let got = decoder.translate(source).unwrap();
            let best = exhaustive_best(&table, &model, &weights, &words, limit);
            assert!(
                got.score >= best - 1e-6,
                "{source} (limit {limit}): decoder {}, exhaustive {best}",
                got.score
            );
            assert!(
                got.score <= best + 1e-6,
                "{source}: decoder beats exhaustive search?"
            );
        }
    }
}

#[test]
fn a_single_path_table_gives_that_path() {
    let setup = decoder_setup(&["la\tthe\t1\t1", "marée\ttide\t1\t1", "monte\trises\t1\t1"]);
    assert_eq!(
        setup.translated(&["--distortion-limit", "0"], "la marée monte\nmonte la\n"),
        "the tide rises\nrises the\n"
    );
}

#[test]
fn greedy_baseline_takes_the_longest_match_and_best_option() {
    let setup = decoder_setup(ROWS);
    assert_eq!(
        setup.translated(&["--greedy"], "le bac part tôt\nle navire au quai\n"),
        "the ferry early opens\nthe navire at the pier\n"
    );
}

#[test]
fn damaged_model_is_reported_not_trusted() {
    let dir = tempfile::tempdir().unwrap();
    let model = build_lm(dir.path(), &["the ferry", "the pier"], 3);
    let path = model.path().to_path_buf();
    drop(model);
    let mut bytes = std::fs::read(&path).unwrap();
    let mid = bytes.len() / 2;
    bytes[mid] ^= 0x40;
    let bad = dir.path().join("bad.balm");
    std::fs::write(&bad, &bytes).unwrap();
    let out = baler(&["lm", "score", s(&bad)], None);
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(
        err.contains("bad.balm") && err.contains("checksum"),
        "{err}"
    );
    let short = dir.path().join("short.balm");
    std::fs::write(&short, &bytes[..20]).unwrap();
    let out = baler(&["lm", "score", s(&short)], None);
    assert_eq!(out.status.code(), Some(2));
}

#[test]
fn keep_test_phrases_keeps_only_sources_in_the_text() {
    let dir = tempfile::tempdir().unwrap();
    let mut tsv = String::from("source\ttarget\tp_t_given_s\tp_s_given_t\n");
    for r in ROWS {
        tsv.push_str(r);
        tsv.push('\n');
    }
    let input = dir.path().join("t.tsv");
    std::fs::write(&input, tsv).unwrap();
    let test = write(dir.path(), "test.src", &["le bac part", "au quai"]);
    let out = dir.path().join("kept.tsv");
    baler_ok(&[
        "prune",
        s(&input),
        "--keep-test-phrases",
        s(&test),
        "-o",
        s(&out),
        "-q",
    ]);
    let mut sources: Vec<String> = std::fs::read_to_string(&out)
        .unwrap()
        .lines()
        .skip_while(|l| l.starts_with('#'))
        .skip(1)
        .map(|l| l.split('\t').next().unwrap().to_string())
        .collect();
    sources.dedup();
    assert_eq!(
        sources,
        ["au", "au quai", "bac", "bac part", "le", "le bac", "part", "quai"]
    );
}

/// A recipe on the demo data with a `[quality]` table: `baler build` reports BLEU and chrF of
/// the packed table equal to decoding the held-out set by hand (`baler translate`) and scoring
/// it with `baler evaluate` (whose BLEU and chrF are checked against sacrebleu above).
#[test]
fn build_recipes_report_bleu_and_chrf() {
    let (dir, lm) = demo_lm_in_tempdir();
    let data = |n: &str| crate::util::repo(&format!("demo-data/{n}"));
    let head = format!(
        "[corpus]\nsource = \"{}\"\ntarget = \"{}\"\nalignment = \"{}\"\n\
         [[filter]]\nsignificance = \"alpha+epsilon\"\n\
         [output]\ntable = \"out.bale\"\nreport = \"report.json\"\n",
        s(&data("toolshed.en")),
        s(&data("toolshed.es")),
        s(&data("toolshed.align"))
    );
    let held_out = format!(
        "[held_out]\nsource = \"{}\"\nreference = \"{}\"\n",
        s(&data("toolshed.test.en")),
        s(&data("toolshed.test.es"))
    );
    let recipe = crate::util::write(
        dir.path(),
        "r.toml",
        &format!("{head}{held_out}[quality]\nlm = \"es.balm\"\n"),
    );
    let text = baler_ok(&["build", s(&recipe), "--quiet"]);
    assert!(text.contains("translation quality"), "{text}");
    let report: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.path().join("report.json")).unwrap())
            .unwrap();
    let tables = report["quality"]["tables"].as_array().unwrap();
    assert_eq!(tables.len(), 2, "{report}");
    let packed = &tables[1][1];
    let hyp = dir.path().join("hyp.es");
    baler_ok(&[
        "translate",
        s(&dir.path().join("out.bale")),
        "--lm",
        s(&lm),
        "--input",
        s(&data("toolshed.test.en")),
        "-o",
        s(&hyp),
    ]);
    let (bleu, chrf) = evaluate(&hyp, &data("toolshed.test.es"));
    assert!(
        (packed["bleu"].as_f64().unwrap() - bleu).abs() < 0.01,
        "{report} {bleu}"
    );
    assert!(
        (packed["chrf"].as_f64().unwrap() - chrf).abs() < 0.01,
        "{report} {chrf}"
    );
    assert!(bleu > 0.0);

    // checked before any work, at the recipe's line
    let cases = [
        (
            format!("{head}[quality]\nlm = \"es.balm\"\n"),
            10,
            "reference",
        ),
        (
            format!("{head}{held_out}[quality]\nlm = \"missing.balm\"\n"),
            14,
            "missing.balm",
        ),
        (
            format!("{head}{held_out}[quality]\nlm = \"es.balm\"\nlanguage = \"es\"\n"),
            15,
            "unknown field",
        ),
    ];
    std::fs::remove_file(dir.path().join("out.bale")).unwrap();
    crate::util::assert_bad_recipes(dir.path(), &cases);
}

/// A CSV text (CRLF or LF lines, no quoted commas in these files) as header → column index
/// and rows.
fn read_csv(path: &Path) -> (HashMap<String, usize>, Vec<Vec<String>>) {
    let text = std::fs::read_to_string(path).unwrap();
    let mut lines = text.lines().map(|l| {
        l.trim_end_matches('\r')
            .split(',')
            .map(str::to_string)
            .collect::<Vec<_>>()
    });
    let header = lines.next().unwrap();
    let index = header
        .iter()
        .enumerate()
        .map(|(i, n)| (n.clone(), i))
        .collect();
    (index, lines.collect())
}

/// A fresh temporary folder holding `es.balm`, the language model `baler lm build` makes of
/// `demo-data/toolshed.es`, and that model's path.
fn demo_lm_in_tempdir() -> (tempfile::TempDir, PathBuf) {
    let dir = tempfile::tempdir().unwrap();
    let lm = dir.path().join("es.balm");
    let text = crate::util::repo("demo-data/toolshed.es");
    baler_ok(&["lm", "build", s(&text), "-o", s(&lm), "-q"]);
    (dir, lm)
}

/// Asserts that each CSV row's `bleu` and `chrf` are within 0.01 of decoding its `table` by
/// hand with `lm` and scoring it ([`translate_and_evaluate`]); returns those BLEUs in row
/// order.
fn assert_quality_columns_match_hand_decoding(
    dir: &Path,
    lm: &Path,
    col: &HashMap<String, usize>,
    rows: &[Vec<String>],
) -> Vec<f64> {
    let mut bleus = Vec::new();
    for row in rows {
        let table = PathBuf::from(&row[col["table"]]);
        let (bleu, chrf) = translate_and_evaluate(dir, &table, lm);
        let got: f64 = row[col["bleu"]].parse().unwrap();
        assert!((got - bleu).abs() < 0.01, "{row:?}: {got} vs {bleu}");
        let got: f64 = row[col["chrf"]].parse().unwrap();
        assert!((got - chrf).abs() < 0.01, "{row:?}: {got} vs {chrf}");
        bleus.push(bleu);
    }
    bleus
}

/// Decodes the demo test set with `table` (`baler translate`) and scores it with `baler
/// evaluate`, whose BLEU and chrF are checked against sacrebleu above.
fn translate_and_evaluate(dir: &Path, table: &Path, lm: &Path) -> (f64, f64) {
    let data = |n: &str| crate::util::repo(&format!("demo-data/{n}"));
    let hyp = dir.join("hyp.es");
    baler_ok(&[
        "translate",
        s(table),
        "--lm",
        s(lm),
        "--input",
        s(&data("toolshed.test.en")),
        "-o",
        s(&hyp),
    ]);
    evaluate(&hyp, &data("toolshed.test.es"))
}

/// `sweep --lm`: `sweep.csv` gets `bleu` and `chrf` columns equal to decoding each setting's
/// table by hand and scoring it; the base is packed once (`base.bale`) and plotted as the
/// reference; `--plot` refuses, before any work, a figure the sweep will not measure.
#[test]
fn sweep_adds_bleu_and_chrf_columns() {
    let (dir, lm) = demo_lm_in_tempdir();
    let data = |n: &str| crate::util::repo(&format!("demo-data/{n}"));
    let out = dir.path().join("sweep");
    let (table, test, reference) = (
        data("toolshed.tsv"),
        data("toolshed.test.en"),
        data("toolshed.test.es"),
    );
    let common = [
        "sweep",
        s(&table),
        "--test",
        s(&test),
        "--reference",
        s(&reference),
        "--vary",
        "significance=alpha-epsilon,alpha+epsilon",
        "-o",
        s(&out),
    ];
    let text = baler_ok(&[&common[..], &["--lm", s(&lm), "--plot", "bleu,chrf,mass"]].concat());
    assert!(text.contains("ΔBLEU"), "{text}");
    let (col, rows) = read_csv(&out.join("sweep.csv"));
    assert_eq!(rows.len(), 2);
    let bleus = assert_quality_columns_match_hand_decoding(dir.path(), &lm, &col, &rows);
    let (base_bleu, _) = translate_and_evaluate(dir.path(), &out.join("base.bale"), &lm);
    for (row, bleu) in rows.iter().zip(&bleus) {
        let delta: f64 = row[col["bleu_delta"]].parse().unwrap();
        assert!((delta - (bleu - base_bleu)).abs() < 0.01, "{row:?}");
        let (lo, hi): (f64, f64) = (
            row[col["bleu_delta_low"]].parse().unwrap(),
            row[col["bleu_delta_high"]].parse().unwrap(),
        );
        assert!(lo <= hi, "{row:?}");
    }
    let svg = std::fs::read_to_string(out.join("sweep.svg")).unwrap();
    for title in [
        "Size against BLEU",
        "Size against chrF",
        "Size against retained mass",
    ] {
        assert!(svg.contains(title), "{title}");
    }

    // BLEU cannot be plotted without a language model: refused before any table is written
    let refused = dir.path().join("refused");
    let mut args = common.to_vec();
    let last = args.len() - 1;
    args[last] = s(&refused);
    let o = baler(&[&args[..], &["--plot", "bleu"]].concat(), None);
    assert_eq!(o.status.code(), Some(2));
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(err.contains("--plot") && err.contains("--lm"), "{err}");
    assert!(!refused.exists());
}

/// `compare --lm --csv` carries BLEU and chrF per table and the difference from the base.
#[test]
fn compare_csv_has_quality_columns() {
    let (dir, lm) = demo_lm_in_tempdir();
    let data = |n: &str| crate::util::repo(&format!("demo-data/{n}"));
    let base = dir.path().join("base.bale");
    let pruned = dir.path().join("pruned.bale");
    baler_ok(&["pack", s(&data("toolshed.tsv")), "-o", s(&base), "-q"]);
    baler_ok(&[
        "prune",
        s(&base),
        "-o",
        s(&pruned),
        "--significance",
        "alpha+epsilon",
        "-q",
    ]);
    let csv = dir.path().join("compare.csv");
    let text = baler_ok(&[
        "compare",
        s(&base),
        s(&pruned),
        "--test",
        s(&data("toolshed.test.en")),
        "--reference",
        s(&data("toolshed.test.es")),
        "--lm",
        s(&lm),
        "--csv",
    ]);
    std::fs::write(&csv, text).unwrap();
    let (col, rows) = read_csv(&csv);
    let measured = assert_quality_columns_match_hand_decoding(dir.path(), &lm, &col, &rows);
    assert_eq!(rows[0][col["bleu_delta"]], "", "the base has no difference");
    let delta: f64 = rows[1][col["bleu_delta"]].parse().unwrap();
    assert!((delta - (measured[1] - measured[0])).abs() < 0.01);
    let share: f64 = rows[1][col["share_better"]].parse().unwrap();
    assert!((0.0..=1.0).contains(&share));
}
