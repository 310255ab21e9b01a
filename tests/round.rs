//! `tonus round` through the binary on synthetic rounds of taps (issue 13).
//!
//! The recordings come from `tonus synth --tap-angles`, which shares the
//! fitter's physics (members at f₀·√(1 ± ε/2), amplitudes cos/sin of the
//! tap angle from θ₀): these tests check that the round recovers what the
//! synthesiser put in, through segmentation, fitting, pair resolution and
//! the orientation fit, with noise and uneven tap strengths. The angle
//! model itself is checked against a computation that does not share it in
//! `tests/round_disk.rs`. The taps land a few degrees off their lugs, as a
//! hand places them.

use serde_json::Value;
use std::io::Write;
use std::path::{Path, PathBuf};
use std::process::{Command, Output, Stdio};

fn tonus() -> Command {
    Command::new(env!("CARGO_BIN_EXE_tonus"))
}

const HEAD: [&str; 4] = ["--diameter", "14in", "--areal-density", "0.26kg/m2"];

/// Synthesises a round of `taps` taps near `lugs` lugs (lug 1 at 0°,
/// clockwise), ε = `skew` (e.g. "2%", or None for an even head) along
/// `theta0` degrees, 30 dB SNR, tap strengths within ±3 dB.
fn synth_round(
    dir: &Path,
    name: &str,
    lugs: usize,
    taps: usize,
    skew: Option<&str>,
    theta0: f64,
    seed: u64,
) -> PathBuf {
    let path = dir.join(name);
    // Taps a few degrees off the lugs (−3°, +2°, +1°, −2°, …).
    let jitter = [-3.0, 2.0, 1.0, -2.0, 3.0, 0.0, -1.0, 2.5, -2.5, 1.5];
    let angles: Vec<String> = (0..taps)
        .map(|j| {
            format!(
                "{}",
                -(360.0 / lugs as f64) * j as f64 + jitter[j % jitter.len()]
            )
        })
        .collect();
    let length = format!("{}s", 0.3 + 1.3 * taps as f64 + 1.0);
    let mut cmd = tonus();
    cmd.arg("synth")
        .args(HEAD)
        .args([
            "--tension",
            "3000N/m",
            "--tap-at",
            "0.6",
            "--snr",
            "30",
            "--tap-spread",
            "3",
        ])
        .args([
            "--tap-interval",
            "1.3s",
            "--pre-roll",
            "0.3s",
            "--length",
            &length,
        ])
        .arg(format!("--tap-angles={}", angles.join(",")))
        .args(["--seed", &seed.to_string(), "-o"])
        .arg(&path);
    if let Some(s) = skew {
        cmd.args(["--tension-skew", s, "--skew-angle", &theta0.to_string()]);
    }
    let out = cmd.output().unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    path
}

fn round_json(args: &[&str], file: &Path) -> (Output, Option<Value>) {
    let out = tonus()
        .arg("round")
        .arg(file)
        .args(HEAD)
        .args(args)
        .arg("--json")
        .output()
        .unwrap();
    let v = serde_json::from_slice(&out.stdout).ok();
    (out, v)
}

fn angle_diff(a: f64, b: f64, period: f64) -> f64 {
    (a - b + period / 2.0).rem_euclid(period) - period / 2.0
}

/// The issue's requirement: θ₀ within 5° at ε = 2 % and 30 dB SNR for 6,
/// 8 and 10 lugs, and every lug's deviation within 2u of the truth
/// ε·cos 2(φ − θ₀) (its mean over equally spaced lugs is zero).
#[test]
fn issue_13_direction_and_lug_deviations_for_6_8_10_lugs() {
    let dir = tempfile::tempdir().unwrap();
    for (lugs, theta0, seed) in [(6usize, 31.0, 11u64), (8, 77.0, 12), (10, 124.0, 13)] {
        let file = synth_round(
            dir.path(),
            &format!("r{lugs}.wav"),
            lugs,
            lugs,
            Some("2%"),
            theta0,
            seed,
        );
        let (out, v) = round_json(&["--lugs", &lugs.to_string()], &file);
        assert!(
            out.status.success(),
            "{}",
            String::from_utf8_lossy(&out.stderr)
        );
        let v = v.unwrap();
        let o2 = v["pattern"]["orders"]
            .as_array()
            .unwrap()
            .iter()
            .find(|o| o["order"] == 2)
            .unwrap_or_else(|| panic!("{lugs} lugs: no order 2 in {v}"));
        let eps = o2["amplitude_pct"].as_f64().unwrap();
        let th = o2["angle_deg"].as_f64().unwrap();
        let th_u = o2["angle_u_deg"].as_f64().unwrap();
        eprintln!("{lugs} lugs: ε = {eps:.3} %, θ₀ = {th:.2} ± {th_u:.2}° (truth {theta0}°)");
        assert!((eps - 2.0).abs() < 0.1, "{lugs} lugs: ε {eps}");
        assert!(
            angle_diff(th, theta0, 180.0).abs() < 5.0,
            "{lugs} lugs: θ₀ {th}"
        );
        let devs = v["advice"]["lugs"].as_array().unwrap();
        assert_eq!(devs.len(), lugs);
        for d in devs {
            let phi = d["angle_deg"].as_f64().unwrap();
            let got = d["deviation_pct"].as_f64().unwrap();
            let u = d["deviation_u_pct"].as_f64().unwrap();
            let truth = 2.0 * (2.0 * (phi - theta0)).to_radians().cos();
            assert!(
                (got - truth).abs() <= 2.0 * u,
                "{lugs} lugs, lug at {phi}°: {got:.3} ± {u:.3} % against {truth:.3} %"
            );
        }
        // The output says which orders it cannot see.
        assert!(v["odd_orders"]
            .as_str()
            .unwrap()
            .contains("cannot see them"));
        let nd: Vec<u64> = v["pattern"]["not_determined"]
            .as_array()
            .unwrap()
            .iter()
            .map(|q| q[0].as_u64().unwrap())
            .collect();
        assert!(nd.contains(&1) && nd.contains(&3), "{nd:?}");
    }
}

/// An even head splits no pair: "unevenness not measurable from these
/// taps", no pattern, no lug advice.
#[test]
fn issue_13_even_head_reports_no_pattern() {
    let dir = tempfile::tempdir().unwrap();
    let file = synth_round(dir.path(), "even.wav", 8, 8, None, 0.0, 21);
    let (out, v) = round_json(&["--lugs", "8"], &file);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let v = v.unwrap();
    assert!(v["pattern"]["orders"].as_array().unwrap().is_empty(), "{v}");
    assert!(v["pattern"]["lugs"].is_null());
    assert!(v["advice"]["lugs"].as_array().unwrap().is_empty());
    assert!(v["pattern"]["not_measurable"]
        .as_str()
        .unwrap()
        .starts_with("unevenness not measurable from these taps"));
    // The text says so too, with the caution.
    let text = tonus()
        .arg("round")
        .arg(&file)
        .args(HEAD)
        .args(["--lugs", "8"])
        .output()
        .unwrap();
    let t = String::from_utf8_lossy(&text.stdout);
    assert!(
        t.contains("unevenness not measurable from these taps"),
        "{t}"
    );
    assert!(t.contains("maker's rating") && t.contains("ear"), "{t}");
}

/// One tap missing: an error that says how many were found, exit 2,
/// nothing written.
#[test]
fn issue_13_missing_tap_is_an_error() {
    let dir = tempfile::tempdir().unwrap();
    let file = synth_round(dir.path(), "seven.wav", 8, 7, Some("2%"), 40.0, 31);
    let out_dir = dir.path().join("out");
    let out = tonus()
        .arg("round")
        .arg(&file)
        .args(HEAD)
        .args(["--lugs", "8", "--out"])
        .arg(&out_dir)
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(err.lines().count(), 1, "{err}");
    assert!(err.contains("found 7 tap(s), expected 8"), "{err}");
    assert!(!out_dir.exists());
}

/// Feeds `bytes` to `tonus round -` in pieces with pauses; returns its output.
fn pipe(bytes: &[u8], args: &[&str]) -> Output {
    let mut child = tonus()
        .args(["round", "-"])
        .args(HEAD)
        .args(args)
        .stdin(Stdio::piped())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    let mut stdin = child.stdin.take().unwrap();
    let writer = {
        let bytes = bytes.to_vec();
        std::thread::spawn(move || {
            // Pieces of odd sizes, as a recorder's periods arrive.
            for piece in bytes.chunks(48_013) {
                if stdin.write_all(piece).is_err() {
                    break;
                }
                std::thread::sleep(std::time::Duration::from_millis(15));
            }
        })
    };
    let out = child.wait_with_output().unwrap();
    writer.join().unwrap();
    out
}

/// The same audio through standard input — a WAV header stream and the
/// same samples as raw PCM — gives the same decisions as the file.
#[test]
fn issue_13_stream_decides_as_the_file() {
    let dir = tempfile::tempdir().unwrap();
    let file = synth_round(dir.path(), "live.wav", 6, 6, Some("2%"), 63.0, 41);
    let (out, v) = round_json(&["--lugs", "6"], &file);
    assert!(out.status.success());
    let from_file = v.unwrap();
    let wav = std::fs::read(&file).unwrap();
    let streamed = pipe(&wav, &["--lugs", "6", "--json"]);
    assert!(
        streamed.status.success(),
        "{}",
        String::from_utf8_lossy(&streamed.stderr)
    );
    let from_stream: Value = serde_json::from_slice(&streamed.stdout).unwrap();
    // The data chunk of a 16-bit mono file made by tonus starts at 44.
    let data = wav.windows(4).position(|w| w == b"data").unwrap() + 8;
    let raw = pipe(
        &wav[data..],
        &[
            "--lugs",
            "6",
            "--json",
            "--pcm-rate",
            "48000",
            "--pcm-format",
            "s16",
        ],
    );
    assert!(
        raw.status.success(),
        "{}",
        String::from_utf8_lossy(&raw.stderr)
    );
    let from_raw: Value = serde_json::from_slice(&raw.stdout).unwrap();
    for other in [&from_stream, &from_raw] {
        assert_eq!(other["advice"]["steps"], from_file["advice"]["steps"]);
        assert_eq!(other["advice"]["summary"], from_file["advice"]["summary"]);
        let states = |v: &Value| -> Vec<Value> {
            v["advice"]["lugs"]
                .as_array()
                .unwrap()
                .iter()
                .map(|l| l["state"].clone())
                .collect()
        };
        assert_eq!(states(other), states(&from_file));
        // Numbers agree to rounding: the file is read with its DC taken
        // out, the stream is not, and each cut takes its own out.
        let num = |v: &Value, p: &str| v.pointer(p).and_then(Value::as_f64).unwrap();
        for p in [
            "/mean/value",
            "/pattern/orders/0/angle_deg",
            "/pattern/orders/0/amplitude_pct",
        ] {
            let (a, b) = (num(other, p), num(&from_file, p));
            assert!((a - b).abs() <= 1e-6 * a.abs().max(1.0), "{p}: {a} vs {b}");
        }
        let onsets = |v: &Value| -> Vec<f64> {
            v["taps"]
                .as_array()
                .unwrap()
                .iter()
                .map(|t| t["onset_s"].as_f64().unwrap())
                .collect()
        };
        assert_eq!(onsets(other), onsets(&from_file));
    }
}

/// A stream that ends inside a round: an error naming how far it got.
#[test]
fn issue_13_stream_ending_inside_a_round() {
    let dir = tempfile::tempdir().unwrap();
    let file = synth_round(dir.path(), "short.wav", 6, 4, Some("2%"), 10.0, 51);
    let out = pipe(&std::fs::read(&file).unwrap(), &["--lugs", "6"]);
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(
        err.contains("the stream ended after 4 of 6 taps of round 1"),
        "{err}"
    );
    // Each tap was decided and printed as it came.
    assert_eq!(
        String::from_utf8_lossy(&out.stdout).matches("lug ").count(),
        4
    );
}

/// A stream with no tap in it (one second of raw silence, and three stray
/// bytes): an error that says nothing was heard, not a silent exit 0.
#[test]
fn issue_13_stream_without_a_tap_is_an_error() {
    let mut silence = vec![0u8; 2 * 48_000];
    silence.extend_from_slice(b"abc");
    let out = pipe(
        &silence,
        &["--lugs", "6", "--pcm-rate", "48000", "--pcm-format", "s16"],
    );
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(err.lines().count(), 1, "{err}");
    assert!(err.contains("no tap heard (1.0 s of audio)"), "{err}");
    assert!(out.stdout.is_empty());
}

/// Bad input: one line saying what is wrong and what to do, exit 2, no
/// panic.
#[test]
fn issue_13_bad_input_is_one_line() {
    let dir = tempfile::tempdir().unwrap();
    let file = synth_round(dir.path(), "ok.wav", 6, 6, Some("2%"), 10.0, 61);
    let f = file.to_str().unwrap();
    let cases: Vec<(Vec<&str>, &str)> = vec![
        (
            vec!["round", f, "--diameter", "14in", "--lugs", "2"],
            "--lugs",
        ),
        (
            vec![
                "round",
                f,
                "--diameter",
                "14in",
                "--lugs",
                "6",
                "--tolerance",
                "1",
            ],
            "--tolerance",
        ),
        (
            vec![
                "round",
                f,
                "--diameter",
                "14in",
                "--lugs",
                "6",
                "--direction",
                "up",
            ],
            "--direction",
        ),
        (
            vec![
                "round", f, "--width", "400mm", "--height", "300mm", "--lugs", "6",
            ],
            "circular head",
        ),
        (
            vec![
                "round",
                f,
                "--diameter",
                "14in",
                "--lugs",
                "6",
                "--peaks-only",
            ],
            "--peaks-only",
        ),
        (
            vec!["round", f, f, "--diameter", "14in", "--lugs", "6"],
            "2 recordings for 6 lugs",
        ),
    ];
    for (args, want) in cases {
        let out = tonus().args(&args).output().unwrap();
        assert_eq!(out.status.code(), Some(2), "{args:?}");
        let err = String::from_utf8_lossy(&out.stderr);
        assert_eq!(err.lines().count(), 1, "{args:?}: {err}");
        assert!(
            err.starts_with("tonus: ") && err.contains(want),
            "{args:?}: {err}"
        );
    }
    // Noise on standard input instead of a WAV stream.
    let out = pipe(b"this is not audio at all, just text", &["--lugs", "6"]);
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(err.lines().count(), 1, "{err}");
    assert!(
        err.contains("does not begin with a WAV header") && err.contains("--pcm-rate"),
        "{err}"
    );
}

/// The report: Markdown with the picture beside the table, HTML with the
/// picture embedded, JSON, and a PNG of the declared size; every report
/// carries the caution.
#[test]
fn issue_13_report_files() {
    let dir = tempfile::tempdir().unwrap();
    let file = synth_round(dir.path(), "rep.wav", 8, 8, Some("2%"), 20.0, 71);
    let out_dir = dir.path().join("out");
    let out = tonus()
        .arg("round")
        .arg(&file)
        .args(HEAD)
        .args(["--lugs", "8", "--out"])
        .arg(&out_dir)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let md = std::fs::read_to_string(out_dir.join("rep.round.md")).unwrap();
    assert!(md.contains("![") && md.contains("rep.round.png") && md.contains("| lug |"));
    assert!(md.contains("maker's rating") && md.contains("ear"));
    let html = std::fs::read_to_string(out_dir.join("rep.round.html")).unwrap();
    assert!(html.contains("data:image/png;base64,") && html.contains("maker's rating"));
    let png = std::fs::read(out_dir.join("rep.round.png")).unwrap();
    assert_eq!(&png[1..4], b"PNG");
    let w = u32::from_be_bytes([png[16], png[17], png[18], png[19]]);
    let h = u32::from_be_bytes([png[20], png[21], png[22], png[23]]);
    assert_eq!((w, h), (900, 900));
    let v: Value =
        serde_json::from_slice(&std::fs::read(out_dir.join("rep.round.json")).unwrap()).unwrap();
    assert_eq!(v["schema"], "tonus.round/1");
    // No temporary file is left beside the outputs.
    let names: Vec<String> = std::fs::read_dir(&out_dir)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    assert!(names.iter().all(|n| !n.contains(".part")), "{names:?}");
}

/// One recording per lug, in lug order, gives the direction as one
/// recording of the whole round does.
#[test]
fn issue_13_one_file_per_lug() {
    let dir = tempfile::tempdir().unwrap();
    let mut files = Vec::new();
    for j in 0..6 {
        let path = dir.path().join(format!("lug{}.wav", j + 1));
        let angle = -60.0 * j as f64 + [2.0, -1.0, 3.0, -2.0, 1.0, 0.0][j];
        let out = tonus()
            .arg("synth")
            .args(HEAD)
            .args([
                "--tension",
                "3000N/m",
                "--snr",
                "30",
                "--length",
                "1.6s",
                "--pre-roll",
                "0.3s",
            ])
            .arg(format!("--tap-at=0.6,{angle}"))
            .args([
                "--tension-skew",
                "2%",
                "--skew-angle",
                "50",
                "--seed",
                &(80 + j).to_string(),
                "-o",
            ])
            .arg(&path)
            .output()
            .unwrap();
        assert!(
            out.status.success(),
            "{}",
            String::from_utf8_lossy(&out.stderr)
        );
        files.push(path);
    }
    let out = tonus()
        .arg("round")
        .args(&files)
        .args(HEAD)
        .args(["--lugs", "6", "--json"])
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let v: Value = serde_json::from_slice(&out.stdout).unwrap();
    let th = v["pattern"]["orders"][0]["angle_deg"].as_f64().unwrap();
    eprintln!("one file per lug: θ₀ = {th:.2}° (truth 50°)");
    assert!(angle_diff(th, 50.0, 180.0).abs() < 5.0, "{v}");
    assert_eq!(v["taps"].as_array().unwrap().len(), 6);
}

/// Two rounds in one stream: two results, the second's onsets counted
/// from the start of the stream, each direction within 5°.
#[test]
fn issue_13_stream_of_two_rounds() {
    let dir = tempfile::tempdir().unwrap();
    let file = synth_round(dir.path(), "two.wav", 6, 12, Some("2%"), 70.0, 9);
    let out = pipe(&std::fs::read(&file).unwrap(), &["--lugs", "6", "--json"]);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let rounds: Vec<Value> = String::from_utf8_lossy(&out.stdout)
        .lines()
        .map(|l| serde_json::from_str(l).unwrap())
        .collect();
    assert_eq!(rounds.len(), 2);
    for (k, v) in rounds.iter().enumerate() {
        let th = v["pattern"]["orders"][0]["angle_deg"].as_f64().unwrap();
        assert!(
            angle_diff(th, 70.0, 180.0).abs() < 5.0,
            "round {}: {th}",
            k + 1
        );
        let first = v["taps"][0]["onset_s"].as_f64().unwrap();
        // Taps 1.3 s apart after 0.3 s: round 2 starts at 0.3 + 6·1.3 s.
        let want = 0.3 + 6.0 * 1.3 * k as f64;
        assert!(
            (first - want).abs() < 0.02,
            "round {}: onset {first}",
            k + 1
        );
    }
}
