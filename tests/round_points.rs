//! `tonus round --points` through the binary: taps at several points of a
//! synthetic square mesh (issue 13, item 3).
//!
//! The recordings come from `tonus synth --tension-y --tap-at`, which
//! shares the fitter's physics (the biaxial mode frequencies and the mode
//! shapes at the tap point that set each partial's level): these tests are
//! a consistency check of the chain — one recording per point, the biaxial
//! fit at each tap's own point, the axis evidence summed in one
//! orientation, Tx and Ty combined — not of the physics.

use serde_json::Value;
use std::path::{Path, PathBuf};
use std::process::{Command, Output};

fn tonus() -> Command {
    Command::new(env!("CARGO_BIN_EXE_tonus"))
}

const MESH: [&str; 6] = [
    "--width",
    "400mm",
    "--height",
    "400mm",
    "--areal-density",
    "40g/m2",
];

/// Off-diagonal tap points (fractions of width and height).
const POINTS: [&str; 4] = ["0.3,0.2", "0.7,0.35", "0.25,0.65", "0.6,0.8"];

/// One synthetic tap per point, 30 dB SNR, seeds differing by tap.
fn synth_taps(dir: &Path, tag: &str, tx: &str, ty: &str, points: &[&str]) -> Vec<PathBuf> {
    points
        .iter()
        .enumerate()
        .map(|(k, p)| {
            let path = dir.join(format!("{tag}-{k}.wav"));
            let seed = (11 + k).to_string();
            let out = tonus()
                .arg("synth")
                .args(MESH)
                .args(["--tension", tx, "--tension-y", ty, "--tap-at", p])
                .args(["--snr", "30", "--seed", &seed, "-o"])
                .arg(&path)
                .output()
                .unwrap();
            assert!(
                out.status.success(),
                "{}",
                String::from_utf8_lossy(&out.stderr)
            );
            path
        })
        .collect()
}

fn round_points(files: &[PathBuf], points: &[&str]) -> Output {
    tonus()
        .arg("round")
        .args(files)
        .args(MESH)
        .args(["--points", &points.join(" "), "--json"])
        .output()
        .unwrap()
}

fn result(out: &Output) -> Value {
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let j: Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(j["schema"], "tonus.round-points/1");
    assert!(j["caution"].as_str().unwrap().contains("never tension"));
    j["result"].clone()
}

/// (value, u) of `c[key]`.
fn est(c: &Value, key: &str) -> (f64, f64) {
    (
        c[key]["value"].as_f64().unwrap(),
        c[key]["standard_uncertainty"].as_f64().unwrap(),
    )
}

fn check_panel(tx: f64, ty: f64) {
    let dir = tempfile::tempdir().unwrap();
    let files = synth_taps(
        dir.path(),
        "mesh",
        &format!("{tx}N/m"),
        &format!("{ty}N/m"),
        &POINTS,
    );
    let r = result(&round_points(&files, &POINTS));
    eprintln!(
        "Tx {tx} Ty {ty}: verdict {} sum {} agree {}/{} x {:?} y {:?} anisotropy {:?}",
        r["verdict"],
        r["log10_lr_sum"],
        r["agreeing"],
        r["used"],
        est(&r["chosen"], "tension_x"),
        est(&r["chosen"], "tension_y"),
        est(&r["chosen"], "anisotropy_percent")
    );
    assert_eq!(r["verdict"], "determined");
    assert_eq!(r["used"], 4);
    assert_eq!(r["agreeing"], 4);
    assert!(r["other"].is_null(), "a determined axis gives one solution");
    let (x, ux) = est(&r["chosen"], "tension_x");
    let (y, uy) = est(&r["chosen"], "tension_y");
    assert!((x - tx).abs() <= 2.0 * ux, "Tx {x} ± {ux}, truth {tx}");
    assert!((y - ty).abs() <= 2.0 * uy, "Ty {y} ± {uy}, truth {ty}");
    let (a, ua) = est(&r["chosen"], "anisotropy_percent");
    let truth = 200.0 * (tx - ty) / (tx + ty);
    assert!(
        (a - truth).abs() <= 2.0 * ua.max(0.01),
        "{a} ± {ua}, {truth}"
    );
}

#[test]
fn taps_off_the_diagonal_fix_the_axis_and_the_tensions() {
    check_panel(2100.0, 1900.0);
}

#[test]
fn the_exchanged_panel_gives_the_exchanged_answer() {
    check_panel(1900.0, 2100.0);
}

#[test]
fn taps_on_the_diagonal_leave_the_axis_open_and_give_both_solutions() {
    let dir = tempfile::tempdir().unwrap();
    let pts = ["0.3,0.3", "0.6,0.6"];
    let files = synth_taps(dir.path(), "diag", "2100N/m", "1900N/m", &pts);
    let r = result(&round_points(&files, &pts));
    assert_eq!(r["verdict"], "not_determined");
    let (x1, _) = est(&r["chosen"], "tension_x");
    let (x2, _) = est(&r["other"], "tension_x");
    let (lo, hi) = (x1.min(x2), x1.max(x2));
    assert!(
        (lo - 1900.0).abs() < 5.0 && (hi - 2100.0).abs() < 5.0,
        "{x1} {x2}"
    );
    // The text says so.
    let out = tonus()
        .arg("round")
        .args(&files)
        .args(MESH)
        .args(["--points", &pts.join(" ")])
        .output()
        .unwrap();
    let text = String::from_utf8_lossy(&out.stdout);
    assert!(text.contains("axis         not determined"), "{text}");
    assert!(text.contains("the other ("), "{text}");
    assert!(text.contains("Caution: never tension"), "{text}");
}

#[test]
fn a_points_count_that_does_not_match_the_taps_is_a_one_line_error() {
    let dir = tempfile::tempdir().unwrap();
    let files = synth_taps(dir.path(), "few", "2100N/m", "1900N/m", &POINTS[..3]);
    // Three recordings for four points.
    let out = round_points(&files, &POINTS);
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(err.trim().lines().count(), 1, "{err}");
    assert!(err.contains("3 recordings for 4 points"), "{err}");
    assert!(out.stdout.is_empty());
    // One recording (one tap) for four points.
    let out = round_points(&files[..1], &POINTS);
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(err.trim().lines().count(), 1, "{err}");
    assert!(err.contains("found 1 tap(s), expected 4"), "{err}");
    // --points and --lugs together are refused.
    let out = tonus()
        .arg("round")
        .args(&files)
        .args(MESH)
        .args(["--points", "0.3,0.2 0.7,0.35 0.25,0.65", "--lugs", "3"])
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
}
