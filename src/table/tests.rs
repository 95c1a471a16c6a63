use super::*;

fn read_all(text: &str) -> Result<Vec<PhrasePair>> {
    TsvReader::new(text.as_bytes(), "t.tsv")?.collect()
}

#[test]
fn canonical_column_order_and_round_trip() {
    let text = "# sentence_pairs=10\n# origin=x\ncount\ttarget\tp\tsource\talignment\tcooc\n\
                3\tthe pier\t0.5\tel muelle\t0-0 1-1\t2\n";
    let mut r = TsvReader::new(text.as_bytes(), "t.tsv").unwrap();
    let header = r.header().clone();
    assert_eq!(
        header.schema.counts,
        [CountColumn::Count, CountColumn::Cooc]
    );
    let pair = r.next().unwrap().unwrap();
    assert_eq!(pair.counts, [3, 2]);
    assert_eq!(pair.alignment, [(0, 0), (1, 1)]);
    let mut w = TsvWriter::new(Vec::new(), &header).unwrap();
    w.write_pair(&pair).unwrap();
    let out = String::from_utf8(w.into_inner()).unwrap();
    assert_eq!(
        out,
        "# sentence_pairs=10\n# origin=x\nsource\ttarget\talignment\tp\tcount\tcooc\n\
         el muelle\tthe pier\t0-0 1-1\t0.5\t3\t2\n"
    );
}

#[test]
fn errors_name_file_line_and_reason() {
    let cases = [
        ("source\ttarget\n a\tb\n", "2", "single spaces"),
        ("source\ttarget\tp\na\tb\n", "2", "expected 3"),
        ("source\ttarget\tp\na\tb\tx\n", "2", "not a number"),
        (
            "source\ttarget\tcount\na\tb\t-1\n",
            "2",
            "non-negative integer",
        ),
        ("source\ttarget\talignment\na\tb\t0-1\n", "2", "bad link"),
        ("source\ttarget\talignment\na\tb\t0_0\n", "2", "bad link"),
        ("source\tp\na\t1\n", "1", "required column \"target\""),
        ("source\ttarget\n\tb\n", "2", "empty source"),
        ("# a=b\n", "2", "missing header"),
        ("# nothing\n", "1", "key=value"),
        ("source\ttarget\tp\na\tb\tNaN\n", "2", "finite"),
    ];
    for (text, line, reason) in cases {
        let err = read_all(text).unwrap_err().to_string();
        assert!(err.starts_with(&format!("t.tsv:{line}: ")), "{err}");
        assert!(err.contains(reason), "{err} lacks {reason}");
    }
}

#[test]
fn score_format_reads_back_exactly() {
    for v in [
        0.1,
        1.0 / 3.0,
        2.5e-9,
        123456.789,
        1e300,
        f64::MIN_POSITIVE,
        0.0,
    ] {
        let mut s = String::new();
        format_score(&mut s, v);
        assert_eq!(s.parse::<f64>().unwrap(), v, "{s}");
    }
}

/// The reference is Rust's own float formatting (`{}` and `{:e}`), which the writer used before
/// it formatted through zmij: every value must come out byte for byte the same.
fn score_as_rust_formats_it(v: f64) -> String {
    if v == 0.0 || (1e-4..1e15).contains(&v.abs()) {
        format!("{v}")
    } else {
        format!("{v:e}")
    }
}

#[test]
fn score_format_matches_rust_formatting() {
    use rand_xoshiro::rand_core::{RngCore, SeedableRng};
    let mut rng = rand_xoshiro::Xoshiro256PlusPlus::seed_from_u64(20_261_203);
    let mut values = vec![
        0.0,
        -0.0,
        1.0,
        1e-4,
        1e15,
        0.5,
        1e14,
        123.0,
        f64::NAN,
        f64::INFINITY,
    ];
    for edge in [1e-4f64, 1e15, 1e-5, 1.0] {
        values.push(f64::from_bits(edge.to_bits() - 1));
        values.push(f64::from_bits(edge.to_bits() + 1));
    }
    // Short exact expansions, where two shortest forms can tie.
    for k in 0..60 {
        for _ in 0..2000 {
            let m = rng.next_u64() >> (rng.next_u32() % 64);
            values.push(m as f64 / 2f64.powi(k));
        }
    }
    // Ratios of counts, as the table's probabilities are.
    for n in 1..400u32 {
        for k in 1..=n {
            values.push(f64::from(k) / f64::from(n));
        }
    }
    // Products of ratios, as lexical weights are, and arbitrary finite doubles.
    for _ in 0..300_000 {
        let a = (rng.next_u32() % 1000 + 1) as f64 / (rng.next_u32() % 5000 + 1) as f64;
        let b = (rng.next_u32() % 1000 + 1) as f64 / (rng.next_u32() % 5000 + 1) as f64;
        values.push(a * b);
        values.push(a * b * a * b * a);
        values.push(f64::from_bits(rng.next_u64()));
        // Uniform in [0, 1) with every mantissa bit random.
        values.push((rng.next_u64() >> 11) as f64 / (1u64 << 53) as f64);
    }
    let mut got = String::new();
    for v in values {
        got.clear();
        format_score(&mut got, v);
        assert_eq!(got, score_as_rust_formats_it(v), "bits {:#x}", v.to_bits());
    }
}
