//! The open validation corpus (`../shared/corpus/synthetic`, an
//! independent modal synthesis that tonus did not make, with the truth
//! beside each recording) scored through `tonus fit`'s code path, without
//! the tap point and with it, against the targets of the issue "Right on
//! recordings tonus did not make" (issue 11). `TONUS_CORPUS=DIR` points
//! elsewhere; a missing corpus fails the test rather than skipping it.

use std::path::PathBuf;
use std::process::Command;
use tonus::app::scorecard::{self, CaseScore, Expect, Scorecard};

fn corpus_dir() -> PathBuf {
    let dir = std::env::var_os("TONUS_CORPUS")
        .map(PathBuf::from)
        .unwrap_or_else(|| {
            PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("../shared/corpus/synthetic")
        });
    assert!(
        dir.join("easy_rect_01/truth.json").is_file(),
        "the validation corpus is not at {} (set TONUS_CORPUS)",
        dir.display()
    );
    dir
}

/// Targets per category: (median |e| %, p90 |e| %).
fn targets(category: &str) -> (f64, f64) {
    match category {
        "stiff" => (0.1, 0.3),
        "hard_rect" | "hard_circle" => (0.05, 0.3),
        _ => (0.05, 0.2),
    }
}

fn check_targets(card: &Scorecard) {
    let scored: Vec<&CaseScore> = card
        .cases
        .iter()
        .filter(|c| c.expect == Expect::Result)
        .collect();
    assert_eq!(scored.len(), 51, "the corpus holds 51 scored recordings");
    for row in card.table() {
        if row.category == "bad_input" || row.category == "all scored" {
            continue;
        }
        let (med, p90) = targets(&row.category);
        let m = row.median_abs_error_pct.expect("a median");
        let p = row.p90_abs_error_pct.expect("a p90");
        assert!(m <= med, "{}: median |e| {m:.3} % > {med} %", row.category);
        assert!(p <= p90, "{}: p90 |e| {p:.3} % > {p90} %", row.category);
    }
    let flagged = scored.iter().filter(|c| c.flagged()).count();
    assert!(
        flagged <= 2,
        "{flagged} recordings graded doubtful or unfit"
    );
    let bad: Vec<&str> = card
        .wrong_unflagged()
        .iter()
        .map(|c| c.id.as_str())
        .collect();
    assert!(bad.is_empty(), "wrong and graded sound or fair: {bad:?}");
    let all = scorecard::figures("all", &scored);
    let recall = all.recall.0 as f64 / all.recall.1 as f64;
    assert!(recall >= 0.9, "recall {recall:.3}");
    let coverage = all.within_2u.0 as f64 / all.within_2u.1 as f64;
    assert!(
        (0.85..=0.99).contains(&coverage),
        "±2u coverage {coverage:.3} outside 0.85..0.99"
    );
    let errors: Vec<&CaseScore> = card
        .cases
        .iter()
        .filter(|c| c.expect != Expect::Result)
        .collect();
    assert_eq!(errors.len(), 8, "eight bad inputs");
    for c in errors {
        assert!(c.error_ok(), "{}: {:?}", c.id, c.message);
    }
}

#[test]
fn issue_11_corpus_targets_without_the_tap_point() {
    let card = scorecard::run(&corpus_dir(), false).expect("the corpus runs");
    println!("{}", card.render(true));
    check_targets(&card);
}

#[test]
fn issue_11_corpus_targets_with_the_tap_point() {
    let card = scorecard::run(&corpus_dir(), true).expect("the corpus runs");
    println!("{}", card.render(true));
    check_targets(&card);
}

/// The bad inputs through the binary: a one-line error on standard
/// error, a non-zero exit (2), no panic and nothing on standard output.
#[test]
fn issue_11_bad_inputs_are_one_line_errors() {
    let dir = corpus_dir();
    let mut seen = 0;
    for entry in std::fs::read_dir(&dir).expect("corpus folder") {
        let case = entry.expect("entry").path();
        let name = case.file_name().unwrap().to_string_lossy().into_owned();
        if !name.starts_with("bad_") || name == "bad_truncated_data" {
            continue;
        }
        seen += 1;
        let out = Command::new(env!("CARGO_BIN_EXE_tonus"))
            .args(["fit", "--width", "400mm", "--height", "300mm"])
            .args(["--areal-density", "0.26kg/m2"])
            .arg(case.join("rec.wav"))
            .output()
            .expect("tonus runs");
        let stderr = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(2), "{name}: {stderr}");
        assert_eq!(stderr.trim().lines().count(), 1, "{name}: {stderr}");
        assert!(!stderr.contains("panicked"), "{name}: {stderr}");
        assert!(out.stdout.is_empty(), "{name}");
    }
    assert_eq!(seen, 7, "seven bad inputs that must be refused");
}

/// A side entered wrong (3 % and 4 %): every isotropic rectangle of the
/// corpus is graded doubtful, with the effective side named, and its
/// stated uncertainty covers the tension error (|z| ≤ 2.5, all but at most
/// one per run). Circles cannot be checked this way: a diameter only
/// scales the tension.
#[test]
fn issue_11_a_side_entered_wrong_is_caught() {
    let dir = corpus_dir();
    for scale in [(1.0, 0.97), (1.04, 1.0)] {
        let card = scorecard::run_scaled(&dir, false, scale).expect("the corpus runs");
        let rects: Vec<&CaseScore> = card
            .cases
            .iter()
            .filter(|c| c.expect == Expect::Result)
            .filter(|c| {
                let truth = std::fs::read_to_string(dir.join(&c.id).join("truth.json")).unwrap();
                truth.contains("\"shape\": \"rect\"") && truth.contains("\"model\": \"iso\"")
            })
            .collect();
        assert!(rects.len() >= 20, "{} isotropic rectangles", rects.len());
        for c in &rects {
            assert!(c.flagged(), "{scale:?} {}: graded {:?}", c.id, c.grade);
        }
        let uncovered: Vec<String> = rects
            .iter()
            .filter(|c| c.z.is_none_or(|z| z.abs() > 2.5))
            .map(|c| format!("{} z {:?}", c.id, c.z))
            .collect();
        assert!(uncovered.len() <= 1, "{scale:?}: {uncovered:?}");
    }
}
