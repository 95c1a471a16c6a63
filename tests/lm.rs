//! `lm build` within a memory budget: counts that spill to sorted runs and merge give the same
//! model, byte for byte, as counts held in memory; a budget too small for the model's arrays is
//! a clear error. (The probabilities themselves are checked against hand-worked Kneser-Ney
//! values, sums to one and an independent ARPA reader in tests/quality.rs.)

use std::path::Path;

use baler::lm::{self, BuildOptions};

use crate::util::{baler, baler_ok, entries, s, write};

/// Invented text (a harbour's shipping notices) with a skewed word distribution, so that many
/// n-grams repeat and many occur once, as in real text.
fn notices(lines: usize) -> String {
    let stems = [
        "ferry", "pier", "tide", "gate", "crane", "dock", "buoy", "quay", "barge", "hull", "mast",
        "rope", "cargo", "berth", "lock", "wharf",
    ];
    let ends = ["", "s", "ed", "ing", "er", "ward", "line", "yard"];
    let mut x: u64 = 0x9e37_79b9_7f4a_7c15;
    let mut next = move || {
        x ^= x << 13;
        x ^= x >> 7;
        x ^= x << 17;
        x
    };
    let mut text = String::new();
    for _ in 0..lines {
        let len = 2 + (next() % 11) as usize;
        for k in 0..len {
            let r = next();
            // Frequent words (small indices) far more often than rare ones.
            let stem = stems[((r % 16) * (r >> 8) % 16 / (1 + (r >> 16) % 4)) as usize % 16];
            let end = ends[((r >> 24) % 8 * ((r >> 28) % 8) / 7) as usize];
            if k > 0 {
                text.push(' ');
            }
            text.push_str(stem);
            text.push_str(end);
        }
        text.push('\n');
    }
    text
}

fn options(order: usize, memory: u64) -> BuildOptions {
    BuildOptions {
        order,
        memory,
        ..BuildOptions::default()
    }
}

#[test]
fn spilled_counts_give_the_same_model_as_counts_in_memory() {
    let text = notices(3000);
    // Budgets small enough to flush the counts many times, large enough for each model's arrays.
    let budgets: [(usize, &[u64]); 4] = [
        (1, &[48 << 10]),
        (2, &[320 << 10, 512 << 10]),
        (3, &[320 << 10, 1 << 20]),
        (5, &[1200 << 10, 2 << 20]),
    ];
    for (order, memories) in budgets {
        let roomy = lm::build(text.as_bytes(), "notices", &options(order, 1 << 30)).unwrap();
        assert_eq!(
            roomy.flushes, 0,
            "order {order}: the default budget holds everything"
        );
        let want = roomy.to_bytes();
        for &memory in memories {
            let tight = lm::build(text.as_bytes(), "notices", &options(order, memory)).unwrap();
            assert!(
                tight.flushes >= 4,
                "order {order}, {memory} bytes: only {} flushes",
                tight.flushes
            );
            assert!(
                tight.to_bytes() == want,
                "order {order}: the model built within {memory} bytes differs"
            );
            assert_eq!(tight.discounts, roomy.discounts);
        }
    }
}

#[test]
fn lm_build_spills_into_the_temporary_directory_and_cleans_it() {
    let dir = tempfile::tempdir().unwrap();
    let text = write(dir.path(), "notices.txt", &notices(3000));
    let temp = dir.path().join("spill");
    std::fs::create_dir(&temp).unwrap();
    let build = |memory: &str, name: &str| -> String {
        let model = dir.path().join(format!("{name}.balm"));
        let arpa = dir.path().join(format!("{name}.arpa"));
        let out = baler(
            &[
                "lm",
                "build",
                s(&text),
                "-o",
                s(&model),
                "--arpa",
                s(&arpa),
                "--order",
                "4",
                "--memory",
                memory,
                "--temp-dir",
                s(&temp),
            ],
            None,
        );
        let err = String::from_utf8_lossy(&out.stderr).into_owned();
        assert!(out.status.success(), "{err}");
        err
    };
    let roomy = build("1G", "roomy");
    let tight = build("768K", "tight");
    assert!(roomy.contains("counts spilled 0 times"), "{roomy}");
    assert!(!tight.contains("counts spilled 0 times"), "{tight}");
    let read = |name: &str| std::fs::read(dir.path().join(name)).unwrap();
    assert!(read("roomy.balm") == read("tight.balm"));
    assert!(read("roomy.arpa") == read("tight.arpa"));
    assert!(
        entries(&temp).is_empty(),
        "left behind: {:?}",
        entries(&temp)
    );
}

fn check_too_small(dir: &Path, memory: &str, expect: &[&str]) {
    let text = write(dir, "notices.txt", &notices(2000));
    let model = dir.join("m.balm");
    let out = baler(
        &["lm", "build", s(&text), "-o", s(&model), "--memory", memory],
        None,
    );
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{err}");
    for e in expect {
        assert!(err.contains(e), "{e:?} missing from: {err}");
    }
    assert!(!model.exists(), "a partial model was left");
}

#[test]
fn a_budget_too_small_for_the_model_is_a_clear_error() {
    let dir = tempfile::tempdir().unwrap();
    // Enough for the vocabulary, not for the arrays: the message names the budget and the need.
    check_too_small(
        dir.path(),
        "160K",
        &[
            "--memory",
            "budget of 160.0 KiB (163840 bytes)",
            "raise --memory to at least",
        ],
    );
    // Not even enough for the vocabulary.
    check_too_small(
        dir.path(),
        "4K",
        &["--memory", "vocabulary", "(4096 bytes)"],
    );
    // With the size the message asks for, the build succeeds.
    let text = dir.path().join("notices.txt");
    let out = baler(
        &[
            "lm",
            "build",
            s(&text),
            "-o",
            s(&dir.path().join("m.balm")),
            "--memory",
            "160K",
        ],
        None,
    );
    let err = String::from_utf8_lossy(&out.stderr);
    let least: u64 = err
        .split("at least ")
        .nth(1)
        .and_then(|t| t.split(" (").nth(1))
        .and_then(|t| t.split(' ').next())
        .and_then(|t| t.parse().ok())
        .unwrap_or_else(|| panic!("no size in {err}"));
    baler_ok(&[
        "lm",
        "build",
        s(&text),
        "-o",
        s(&dir.path().join("m.balm")),
        "--memory",
        &least.to_string(),
        "-q",
    ]);
}
