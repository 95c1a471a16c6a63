//! `baler prune`: the Fisher test against stored reference values, and the filters end to end.

use std::path::{Path, PathBuf};

use baler::prune::fisher::neg_ln_p;

use crate::util::{repo, s, write};

fn data(name: &str) -> PathBuf {
    repo("tests/data").join(name)
}

struct Reference {
    case: (u64, u64, u64, u64),
    scipy: Option<f64>,
    mpmath: f64,
}

/// tests/data/fisher_reference.tsv, written by tests/data/fisher_reference.py (scipy 1.17.1
/// `scipy.stats.hypergeom.logsf` and an mpmath 1.4.1 tail sum at 60 digits; see its header).
fn reference() -> Vec<Reference> {
    let text = std::fs::read_to_string(data("fisher_reference.tsv")).unwrap();
    let mut rows = Vec::new();
    for line in text.lines().filter(|l| !l.starts_with('#')).skip(1) {
        let f: Vec<&str> = line.split('\t').collect();
        let n = |i: usize| f[i].parse::<u64>().unwrap();
        rows.push(Reference {
            case: (n(0), n(1), n(2), n(3)),
            scipy: f[4].parse::<f64>().ok().filter(|v| v.is_finite()),
            mpmath: f[5].parse().unwrap(),
        });
    }
    assert!(rows.len() >= 50);
    rows
}

fn relative(a: f64, b: f64) -> f64 {
    (a - b).abs() / b.abs().max(1e-300)
}

#[test]
fn fisher_matches_mpmath_tail_sums() {
    // Source: mpmath 1.4.1 at 60 digits (and exact integer sums for the smaller cases), stored.
    let mut worst = 0.0f64;
    for r in reference() {
        let (c, s, t, n) = r.case;
        let got = neg_ln_p(c, s, t, n).unwrap();
        worst = worst.max(relative(got, r.mpmath));
        assert!(
            relative(got, r.mpmath) <= 1e-12,
            "{:?}: {got} vs mpmath {}",
            r.case,
            r.mpmath
        );
    }
    eprintln!("largest relative difference from mpmath: {worst:e}");
}

#[test]
fn fisher_matches_scipy_where_scipy_is_accurate() {
    // Source: scipy 1.17.1 scipy.stats.hypergeom.logsf(cooc-1, N, df_source, df_target).
    // scipy's own value strays from the 60-digit sum by more than 1e-9 in a few cases (up to
    // 1.7e-7 at (60, 100000, 60000, 10^8)); those are checked against mpmath above, and we
    // check here that they are the only ones where we differ from scipy.
    let (mut compared, mut worst) = (0, 0.0f64);
    for r in reference() {
        let Some(scipy) = r.scipy else { continue };
        let (c, s, t, n) = r.case;
        let got = neg_ln_p(c, s, t, n).unwrap();
        let scipy_error = relative(scipy, r.mpmath);
        if scipy_error <= 1e-10 {
            assert!(
                relative(got, scipy) <= 1e-9,
                "{:?}: {got} vs scipy {scipy}",
                r.case
            );
            compared += 1;
            worst = worst.max(relative(got, scipy));
        } else {
            assert!(relative(got, r.mpmath) < scipy_error, "{:?}", r.case);
        }
    }
    assert!(compared >= 40, "{compared}");
    eprintln!("{compared} cases compared with scipy; largest relative difference {worst:e}");
}

#[test]
fn one_one_one_is_ln_n() {
    // Johnson, Martin, Foster and Kuhn (2007): a 1-1-1 pair has p = 1/N.
    for n in [
        2u64,
        10,
        68_000,
        1_000_000,
        10_000_000,
        100_000_000,
        1_000_000_000,
    ] {
        let got = neg_ln_p(1, 1, 1, n).unwrap();
        let ln_n = (n as f64).ln();
        assert!(
            (got - ln_n).abs() <= 8.0 * f64::EPSILON * ln_n,
            "{n}: {got} vs {ln_n}"
        );
        // and the documented ε leaves it on the right side of both thresholds
        let eps = baler::prune::EPSILON;
        assert!(got < ln_n + eps && got >= ln_n - eps);
    }
}

// ---- the command line ----

/// Runs `baler` with `args`, standard input closed.
fn baler(args: &[&str]) -> std::process::Output {
    crate::util::baler_in(args, None)
}

/// Runs `baler prune INPUT -o OUT OPTIONS...`, standard input closed; returns the process
/// output (success not asserted).
fn prune(input: &str, out: &str, options: &[&str]) -> std::process::Output {
    baler(&[&["prune", input, "-o", out][..], options].concat())
}

struct Dir(tempfile::TempDir);

impl Dir {
    fn new() -> Dir {
        Dir(tempfile::tempdir().unwrap())
    }
    /// A fresh folder holding [`HARBOUR`] as `t.tsv`, and that file's path.
    fn with_harbour() -> (Dir, String) {
        let dir = Dir::new();
        let input = dir.write("t.tsv", HARBOUR);
        (dir, input)
    }
    fn write(&self, name: &str, text: &str) -> String {
        s(&write(self.0.path(), name, text)).to_string()
    }
    fn path(&self, name: &str) -> String {
        self.0.path().join(name).to_string_lossy().into_owned()
    }
    fn read(&self, name: &str) -> String {
        std::fs::read_to_string(self.0.path().join(name)).unwrap()
    }
}

/// Runs `baler prune INPUT -o out.tsv ARGS...`, asserts success, returns (source, target) rows.
fn prune_rows(dir: &Dir, input: &str, args: &[&str]) -> Vec<(String, String)> {
    let out = dir.path("out.tsv");
    let run = prune(input, &out, &[&["-q"][..], args].concat());
    assert!(
        run.status.success(),
        "{}",
        String::from_utf8_lossy(&run.stderr)
    );
    rows(&dir.read("out.tsv"))
}

fn rows(text: &str) -> Vec<(String, String)> {
    text.lines()
        .filter(|l| !l.starts_with('#'))
        .skip(1)
        .map(|l| {
            let mut f = l.split('\t');
            (f.next().unwrap().to_string(), f.next().unwrap().to_string())
        })
        .collect()
}

fn pairs(list: &[(&str, &str)]) -> Vec<(String, String)> {
    list.iter()
        .map(|(s, t)| (s.to_string(), t.to_string()))
        .collect()
}

/// A table at N sentence pairs with pairs of known small counts. Values worked by hand from
/// the hypergeometric tail: 1-1-1 gives p = 1/N (Johnson et al. 2007); 1-1-2 and 1-2-1 give
/// p = 2/N; 1-2-2 gives p = (4N−6)/(N(N−1)); 2-2-2 gives p = 1/C(N,2).
fn small_count_table(n: u64) -> String {
    let mut t = format!("# sentence_pairs={n}\nsource\ttarget\tcooc\tdf_source\tdf_target\n");
    for (s, tg, c, ds, dt) in [
        ("a", "one-one-one", 1, 1, 1),
        ("a", "one-one-two", 1, 1, 2),
        ("b", "one-one-one", 1, 1, 1),
        ("b", "two-two-two", 2, 2, 2),
        ("c", "one-two-one", 1, 2, 1),
        ("c", "one-two-two", 1, 2, 2),
        ("d", "one-one-one", 1, 1, 1),
    ] {
        t.push_str(&format!("{s}\t{tg}\t{c}\t{ds}\t{dt}\n"));
    }
    t
}

#[test]
fn alpha_plus_epsilon_removes_exactly_the_one_one_one_pairs() {
    for n in [68_000u64, 10_000_000, 100_000_000, 1_000_000_000] {
        let dir = Dir::new();
        let input = dir.write("t.tsv", &small_count_table(n));
        // below ln N: 1-1-2, 1-2-1 (ln N − ln 2) and 1-2-2 (≈ ln N − ln 4); above: 2-2-2
        let plus = prune_rows(&dir, &input, &["--significance", "alpha+epsilon"]);
        assert_eq!(plus, pairs(&[("b", "two-two-two")]), "N={n}");
        let minus = prune_rows(&dir, &input, &["--significance", "alpha-epsilon"]);
        assert_eq!(
            minus,
            pairs(&[
                ("a", "one-one-one"),
                ("b", "one-one-one"),
                ("b", "two-two-two"),
                ("d", "one-one-one")
            ]),
            "N={n}"
        );
    }
}

#[test]
fn annotation_and_stats_report_what_was_removed() {
    let dir = Dir::new();
    let input = dir.write("t.tsv", &small_count_table(10_000_000));
    let stats = dir.path("stats.json");
    let out = dir.path("out.tsv");
    let run = prune(
        &input,
        &out,
        &[
            "--significance",
            "alpha+epsilon",
            "--annotate",
            "--stats",
            &stats,
        ],
    );
    assert!(run.status.success());
    let text = dir.read("out.tsv");
    assert!(text.contains("source\ttarget\tneg_ln_p\tcooc\tdf_source\tdf_target\n"));
    let line = text.lines().last().unwrap();
    let v: f64 = line.split('\t').nth(2).unwrap().parse().unwrap();
    let n = 1e7f64;
    let want = (n * (n - 1.0) / 2.0).ln(); // 2-2-2: p = 1/C(N,2)
    assert!((v - want).abs() < 1e-12 * want, "{v} vs {want}");
    let json: serde_json::Value = serde_json::from_str(&dir.read("stats.json")).unwrap();
    let f = &json["filters"][0];
    assert_eq!(f["pairs_before"], 7);
    assert_eq!(f["pairs_after"], 1);
    assert_eq!(f["sources_before"], 4);
    assert_eq!(f["sources_after"], 1);
    assert_eq!(f["sources_emptied"], 3);
    assert_eq!(
        f["sources_emptied_sample"],
        serde_json::json!(["a", "c", "d"])
    );
    assert_eq!(f["neg_ln_p"]["one_one_one"], 3);
    assert_eq!(f["neg_ln_p"]["pairs"], 7);
    // ln 10^7 = 16.1: three 1-1-1 pairs in bin 16, 1-1-2 and 1-2-1 in 15, 1-2-2 in 14
    let bins = f["neg_ln_p"]["counts"].as_array().unwrap();
    assert_eq!(
        (bins[14].as_u64(), bins[15].as_u64(), bins[16].as_u64()),
        (Some(1), Some(2), Some(3))
    );
    assert_eq!(json["sources_lost_all"], 3);
    let summary = String::from_utf8_lossy(&run.stderr);
    assert!(summary.contains("pairs 7 -> 1"), "{summary}");
}

const HARBOUR: &str = "# sentence_pairs=1000\n\
source\ttarget\tp_t_given_s\tlex_t_given_s\tcount\tcooc\tdf_source\tdf_target\n\
el faro\tthe lighthouse\t0.2\t0.5\t40\t40\t42\t41\n\
el faro\tthe rock\t0.8\t0.1\t1\t1\t42\t1\n\
puerto\tport\t0.3\t0.4\t5\t30\t31\t33\n\
puerto\tharbour\t0.3\t0.6\t5\t29\t31\t30\n\
puerto\tthe port\t0.3\t0.2\t4\t25\t31\t50\n\
puerto\tharbor\t0.1\t0.9\t2\t20\t31\t21\n";

#[test]
fn filters_run_in_command_line_order() {
    let (dir, input) = Dir::with_harbour();
    // significance first: "the rock" (1 of 1000, p = 42/1000) goes, then the lighthouse is best
    let a = prune_rows(&dir, &input, &["--significance", "10", "--top-k", "1"]);
    // top-k first keeps "the rock", which the significance test then removes
    let b = prune_rows(&dir, &input, &["--top-k", "1", "--significance", "10"]);
    assert_eq!(
        a,
        pairs(&[("el faro", "the lighthouse"), ("puerto", "harbour")])
    );
    assert_eq!(b, pairs(&[("puerto", "harbour")]));
}

#[test]
fn top_k_ties_go_to_the_target_first_in_byte_order() {
    // hand-worked: puerto's options rank port = harbour = the port (0.3) > harbor (0.1); with
    // k = 2 the tie at 0.3 is broken by byte order: "harbour" < "port" < "the port"
    let (dir, input) = Dir::with_harbour();
    let got = prune_rows(&dir, &input, &["--top-k", "2", "--by", "p_t_given_s"]);
    assert_eq!(
        got,
        pairs(&[
            ("el faro", "the lighthouse"),
            ("el faro", "the rock"),
            ("puerto", "port"),
            ("puerto", "harbour")
        ])
    );
    for (by, kept) in [
        // log-linear: ln p + ln lex: port ln .12, harbour ln .18, the port ln .06, harbor ln .09
        (
            "p_t_given_s=1,lex_t_given_s=1",
            [("puerto", "port"), ("puerto", "harbour")],
        ),
        // weights matter: with lex weighted 3, harbor (ln .1 + 3 ln .9) beats port
        // (ln .3 + 3 ln .4)
        (
            "p_t_given_s=1,lex_t_given_s=3",
            [("puerto", "harbour"), ("puerto", "harbor")],
        ),
    ] {
        let got = prune_rows(&dir, &input, &["--top-k", "2", "--by", by]);
        assert_eq!(&got[2..], &pairs(&kept)[..], "--by {by}");
    }
}

#[test]
fn rankings_pair_with_top_k_filters_in_order() {
    let (dir, input) = Dir::with_harbour();
    // first --top-k 3 by lex (drops "the port"), then --top-k 1 by p: harbour (tie with port,
    // byte order) for puerto
    let got = prune_rows(
        &dir,
        &input,
        &[
            "--top-k",
            "3",
            "--top-k",
            "1",
            "--by",
            "lex_t_given_s",
            "--by",
            "p_t_given_s",
        ],
    );
    assert_eq!(
        got,
        pairs(&[("el faro", "the rock"), ("puerto", "harbour")])
    );
    let out = dir.path("x.tsv");
    let run = prune(
        &input,
        &out,
        &["--top-k", "1", "--by", "count", "--by", "cooc"],
    );
    assert_eq!(run.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&run.stderr).contains("2 rankings for 1 --top-k"));
}

#[test]
fn compressed_input_and_output() {
    use std::io::Write;
    let dir = Dir::new();
    let gz = dir.path("t.tsv.gz");
    let mut enc = flate2::write::GzEncoder::new(
        std::fs::File::create(&gz).unwrap(),
        flate2::Compression::default(),
    );
    enc.write_all(HARBOUR.as_bytes()).unwrap();
    enc.finish().unwrap();
    let out = dir.path("out.tsv.zst");
    let run = prune(&gz, &out, &["-q", "--min", "count=40"]);
    assert!(
        run.status.success(),
        "{}",
        String::from_utf8_lossy(&run.stderr)
    );
    let text =
        String::from_utf8(zstd::decode_all(std::fs::File::open(&out).unwrap()).unwrap()).unwrap();
    assert_eq!(rows(&text), pairs(&[("el faro", "the lighthouse")]));
}

#[test]
fn thresholds_are_inclusive_bounds_on_scores_and_counts() {
    let (dir, input) = Dir::with_harbour();
    let got = prune_rows(
        &dir,
        &input,
        &["--min", "p_t_given_s=0.3", "--max", "count=5"],
    );
    assert_eq!(
        got,
        pairs(&[
            ("el faro", "the rock"),
            ("puerto", "port"),
            ("puerto", "harbour"),
            ("puerto", "the port")
        ])
    );
    let got = prune_rows(&dir, &input, &["--min", "count=40"]);
    assert_eq!(got, pairs(&[("el faro", "the lighthouse")]));
    let run = prune(&input, &dir.path("x.tsv"), &["--min", "p_s_given_t=0.1"]);
    assert_eq!(run.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&run.stderr).contains("no column \"p_s_given_t\""));
}

#[test]
fn renormalize_only_when_asked() {
    let (dir, input) = Dir::with_harbour();
    let out = dir.path("out.tsv");
    let run = prune(
        &input,
        &out,
        &["-q", "--top-k", "1", "--renormalize", "p_t_given_s"],
    );
    assert!(run.status.success());
    let text = dir.read("out.tsv");
    assert!(
        text.contains("el faro\tthe rock\t1\t0.1\t1\t1\t42\t1\n"),
        "{text}"
    );
    assert!(
        text.contains("puerto\tharbour\t1\t0.6\t5\t29\t31\t30\n"),
        "{text}"
    );
    let plain = prune_rows(&dir, &input, &["--top-k", "1"]);
    assert_eq!(plain.len(), 2);
    assert!(dir.read("out.tsv").contains("el faro\tthe rock\t0.8\t"));
}

#[test]
fn relative_entropy_of_a_small_table() {
    // Hand-worked (see baler::prune::entropy):
    //   la casa → the house: p = 0.6, p' = p(the|la)·p(house|casa) = 0.8·0.7 = 0.56,
    //     D = 0.6·ln(0.6/0.56) = 0.041395...
    //   la casa azul → the blue house: p' = p(the|la)·p(blue house|casa azul) = 0.8·0.5 = 0.4,
    //     D = 0.4·ln(0.4/0.4) = 0
    //   casa azul → blue house: only the reordered composition exists, p' = 0, D = +∞
    //   la casa → home, and one-word sources: no composition, D = +∞
    let table = "source\ttarget\tp_t_given_s\n\
        azul\tblue\t0.9\n\
        casa\thouse\t0.7\n\
        casa azul\tblue house\t0.5\n\
        la\tthe\t0.8\n\
        la casa\tthe house\t0.6\n\
        la casa\thome\t0.3\n\
        la casa azul\tthe blue house\t0.4\n";
    let dir = Dir::new();
    let input = dir.write("t.tsv", table);
    let all = rows(table);
    let without = |gone: &[&str]| -> Vec<(String, String)> {
        all.iter()
            .filter(|(_, t)| !gone.contains(&t.as_str()))
            .cloned()
            .collect()
    };
    assert_eq!(
        prune_rows(&dir, &input, &["--relative-entropy", "-0.001"]),
        all
    );
    assert_eq!(
        prune_rows(&dir, &input, &["--relative-entropy", "0.0001"]),
        without(&["the blue house"])
    );
    assert_eq!(
        prune_rows(&dir, &input, &["--relative-entropy", "0.0413"]),
        without(&["the blue house"])
    );
    assert_eq!(
        prune_rows(&dir, &input, &["--relative-entropy", "0.0414"]),
        without(&["the blue house", "the house"])
    );
    let d = baler::prune::entropy::divergence(0.6, 0.8 * 0.7);
    assert!((d - 0.041_395_722_9).abs() < 1e-9, "{d}");
}

#[test]
fn unsorted_input_is_sorted_first_with_the_same_result() {
    let dir = Dir::new();
    let sorted = dir.write("sorted.tsv", HARBOUR);
    let mut lines: Vec<&str> = HARBOUR.lines().collect();
    let body = lines.split_off(2);
    let mut shuffled = lines.join("\n") + "\n";
    for i in [3, 0, 5, 2, 4, 1] {
        shuffled.push_str(body[i]);
        shuffled.push('\n');
    }
    let unsorted = dir.write("unsorted.tsv", &shuffled);
    let args = ["--significance", "10", "--min", "p_t_given_s=0.3"];
    let a = prune_rows(&dir, &sorted, &args);
    let b = prune_rows(&dir, &unsorted, &args);
    // the options of a source keep their input order
    assert_eq!(
        a,
        pairs(&[
            ("puerto", "port"),
            ("puerto", "harbour"),
            ("puerto", "the port")
        ])
    );
    assert_eq!(
        b,
        pairs(&[
            ("puerto", "harbour"),
            ("puerto", "port"),
            ("puerto", "the port")
        ])
    );
    // tiny memory budget: spills runs to disk
    let c = prune_rows(&dir, &unsorted, &[&args[..], &["--memory", "1"]].concat());
    assert_eq!(b, c);
}

#[test]
fn stdin_input_and_stdout_output() {
    let (_dir, input) = Dir::with_harbour();
    let run = crate::util::bin()
        .args(["prune", "-", "-o", "-", "-q", "--top-k", "1"])
        .stdin(std::fs::File::open(&input).unwrap())
        .output()
        .unwrap();
    assert!(run.status.success());
    let got = rows(&String::from_utf8(run.stdout).unwrap());
    // the three options at 0.3 tie; "harbour" sorts first
    assert_eq!(
        got,
        pairs(&[("el faro", "the rock"), ("puerto", "harbour")])
    );
}

#[test]
fn impossible_counts_are_an_error_naming_file_and_line() {
    let dir = Dir::new();
    let bad = HARBOUR.replace(
        "puerto\tharbor\t0.1\t0.9\t2\t20\t31\t21",
        "puerto\tharbor\t0.1\t0.9\t2\t22\t31\t21",
    );
    let input = dir.write("bad.tsv", &bad);
    let out = dir.path("out.tsv");
    let run = prune(&input, &out, &["--significance", "10"]);
    assert_eq!(run.status.code(), Some(2));
    let err = String::from_utf8_lossy(&run.stderr);
    assert!(
        err.contains("bad.tsv:8: cooc is larger than df_source or df_target"),
        "{err}"
    );
    assert!(!Path::new(&out).exists());
}

#[test]
fn missing_sentence_counts_need_the_corpus_or_an_explicit_fallback() {
    let dir = Dir::new();
    let table = "source\ttarget\tcount\tcount_source\tcount_target\n\
        barco\tboat\t3\t4\t3\n\
        barco\tship\t1\t4\t1\n\
        el\tthe\t20\t20\t20\n";
    let input = dir.write("t.tsv", table);
    let out = dir.path("out.tsv");
    let run = prune(&input, &out, &["--significance", "3"]);
    assert_eq!(run.status.code(), Some(2));
    let err = String::from_utf8_lossy(&run.stderr);
    assert!(
        err.contains("--phrase-counts") && err.contains("--source/--target"),
        "{err}"
    );
    let run = prune(
        &input,
        &out,
        &["--significance", "3", "--phrase-counts", "--annotate"],
    );
    assert!(run.status.success());
    let err = String::from_utf8_lossy(&run.stderr);
    assert!(
        err.contains("warning") && err.contains("approximation"),
        "{err}"
    );
    // N = 3 + 1 + 20 = 24 occurrences; barco/ship: p = 4/24, -ln p = ln 6 < 3
    let text = dir.read("out.tsv");
    assert!(!text.contains("barco\tship"), "{text}");
    let v: f64 = text
        .lines()
        .find(|l| l.starts_with("barco\tboat"))
        .unwrap()
        .split('\t')
        .nth(2)
        .unwrap()
        .parse()
        .unwrap();
    assert!((v - neg_ln_p(3, 4, 3, 24).unwrap()).abs() < 1e-15);
}

#[test]
fn sentence_counts_from_the_corpus() {
    // Counted by hand over the four sentence pairs below.
    let dir = Dir::new();
    let source = dir.write(
        "es.txt",
        "el faro\nel faro y el puerto\nel puerto\nun barco\n",
    );
    let target = dir.write(
        "en.txt",
        "the lighthouse\nthe lighthouse and the port\nthe port\na boat\n",
    );
    let table = dir.write(
        "t.tsv",
        "source\ttarget\tp_t_given_s\n\
         barco\tboat\t1\n\
         el\tthe\t0.9\n\
         el faro\tthe lighthouse\t1\n\
         el puerto\tthe port\t1\n",
    );
    let out = dir.path("out.tsv");
    let run = prune(
        &table,
        &out,
        &["-q", "--annotate", "--source", &source, "--target", &target],
    );
    assert!(
        run.status.success(),
        "{}",
        String::from_utf8_lossy(&run.stderr)
    );
    let text = dir.read("out.tsv");
    // The provenance names the corpus and the annotation (a regression test of its own covers
    // why: `# pruned_with` used to leave them out).
    assert!(text.starts_with(&format!(
        "# sentence_pairs=4\n# pruned_with=--source {source} --target {target} --annotate\n\
         source\ttarget\tp_t_given_s\tneg_ln_p\tcooc\tdf_source\tdf_target\n"
    )));
    let fields: Vec<Vec<&str>> = text
        .lines()
        .skip(3)
        .map(|l| l.split('\t').collect())
        .collect();
    let expected = [
        // barco/boat: 1-1-1 in 4 sentence pairs, p = 1/4
        ("barco", "1 1 1", 4f64.ln()),
        // el/the: 3 of 4 sentence pairs each, together in 3: p = P(X = 3) = 1/C(4,3)
        ("el", "3 3 3", 4f64.ln()),
        // 2-2-2 in 4 sentence pairs: p = 1/C(4,2)
        ("el faro", "2 2 2", 6f64.ln()),
        ("el puerto", "2 2 2", 6f64.ln()),
    ];
    assert_eq!(fields.len(), expected.len());
    for (f, (source, counts, v)) in fields.iter().zip(expected) {
        assert_eq!(
            (f[0], f[4..].join(" ").as_str()),
            (source, counts),
            "{text}"
        );
        let got: f64 = f[3].parse().unwrap();
        assert!((got - v).abs() < 1e-14, "{source}: {got} vs {v}");
    }
    // mismatched corpus sides are an error naming the shorter one
    let short = dir.write("short.txt", "the lighthouse\n");
    let run = prune(
        &table,
        &out,
        &["--annotate", "--source", &source, "--target", &short],
    );
    assert_eq!(run.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&run.stderr).contains("short.txt:2: ends after 1 lines"));
}

#[test]
fn packed_output_and_input_round_trip() {
    let (dir, input) = Dir::with_harbour();
    let packed = dir.path("t.bale");
    let run = prune(&input, &packed, &["-q", "--significance", "10"]);
    assert!(
        run.status.success(),
        "{}",
        String::from_utf8_lossy(&run.stderr)
    );
    let got = prune_rows(&dir, &packed, &["--top-k", "1"]);
    assert_eq!(
        got,
        pairs(&[("el faro", "the lighthouse"), ("puerto", "harbour")])
    );
}
