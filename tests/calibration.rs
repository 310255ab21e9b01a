//! Calibration through the binary (issue 4): a synthetic air-loaded head
//! (`tonus synth --air`, whose mode ratios are shifted by the fixed
//! pattern of `tonus::physics::airload`) calibrated at one tension and measured at
//! another recovers the second tension within 1 % with the ideal model and
//! the calibration, while the ideal model alone is far off.

use std::path::Path;
use std::process::{Command, Output};

fn tonus(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_tonus"))
        .args(args)
        .output()
        .expect("the tonus binary runs")
}

const HEAD: [&str; 6] = [
    "--diameter",
    "14in",
    "--areal-density",
    "0.26kg/m2",
    "--tap-at",
    "0.6,20",
];

fn synth(dir: &Path, name: &str, tension: &str, seed: &str) -> String {
    let out = dir.join(name).to_str().unwrap().to_string();
    let mut args = vec!["synth", "--air", "--tension", tension, "--seed", seed];
    args.extend_from_slice(&HEAD);
    args.extend_from_slice(&["-o", &out]);
    let o = tonus(&args);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    out
}

fn fit_json(args: &[&str]) -> serde_json::Value {
    let mut all = vec!["fit", "--json"];
    all.extend_from_slice(args);
    let o = tonus(&all);
    let out = String::from_utf8_lossy(&o.stdout);
    assert!(
        o.status.code().is_some_and(|c| c <= 1),
        "{}",
        String::from_utf8_lossy(&o.stderr)
    );
    serde_json::from_str(&out).unwrap()
}

#[test]
fn issue_4_air_loaded_head_calibrated_at_one_tension_measured_at_another() {
    let dir = tempfile::tempdir().unwrap();
    let r1 = synth(dir.path(), "ref1.wav", "3000N/m", "1");
    let r2 = synth(dir.path(), "ref2.wav", "3000N/m", "2");
    let unknown = synth(dir.path(), "unknown.wav", "4000N/m", "3");
    let cal = dir.path().join("head.cal.toml");
    let cal_s = cal.to_str().unwrap();
    let mut args = vec![
        "calibrate",
        &r1,
        &r2,
        "--tension",
        "3000N/m",
        "--tension-u",
        "15N/m",
        "--model",
        "air",
        "--out",
        cal_s,
    ];
    args.extend_from_slice(&HEAD);
    let o = tonus(&args);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let text = std::fs::read_to_string(&cal).unwrap();
    assert!(text.contains("schema = \"tonus.calibration\""));
    assert_eq!(text.matches("[[source]]").count(), 2);
    assert_eq!(text.matches("sha256 = ").count(), 2);
    assert!(!dir.path().join("head.cal.toml.part").exists());

    // The ideal model alone: the air-loaded pattern is mislabelled or the
    // tension far low.
    let mut plain = vec![unknown.as_str()];
    plain.extend_from_slice(&HEAD);
    let ideal = fit_json(&plain);
    let t_ideal = ideal["tension"]["value"].as_f64().unwrap();
    assert!((t_ideal / 4000.0 - 1.0).abs() > 0.1, "{t_ideal}");

    let mut with = plain.clone();
    with.extend_from_slice(&["--calibration", cal_s]);
    let j = fit_json(&with);
    let t = j["tension"]["value"].as_f64().unwrap();
    assert!((t / 4000.0 - 1.0).abs() < 0.01, "calibrated tension {t}");
    // The budget carries the calibration: the reference's 0.5 % is the
    // largest part, σ and the diameter cancel.
    let rows = j["budget"]["rows"].as_array().unwrap();
    let reference = rows
        .iter()
        .find(|r| r["source"].as_str().unwrap().contains("reference tension"))
        .expect("calibration row");
    let c = reference["contribution_n_per_m"].as_f64().unwrap();
    assert!((c / (0.005 * t) - 1.0).abs() < 1e-6, "{c}");
    let uc = j["budget"]["combined_standard_uncertainty_n_per_m"]
        .as_f64()
        .unwrap();
    assert!((t - 4000.0).abs() < 2.0 * uc, "{t} ± {uc}");
    assert!(j["calibration"]["term"]["modes"].as_u64().unwrap() >= 10);

    // Another geometry is refused in one line, exit 2.
    let o = tonus(&[
        "fit",
        &unknown,
        "--diameter",
        "13in",
        "--areal-density",
        "0.26kg/m2",
        "--calibration",
        cal_s,
    ]);
    assert_eq!(o.status.code(), Some(2));
    let err = String::from_utf8_lossy(&o.stderr);
    assert_eq!(err.lines().count(), 1, "{err}");
    assert!(
        err.contains("calibration") && err.contains("330.2 mm"),
        "{err}"
    );

    // A damaged file is refused by name.
    let bad = dir.path().join("bad.toml");
    std::fs::write(&bad, text.replace("tonus.calibration", "other")).unwrap();
    let mut b = plain.clone();
    let bad_s = bad.to_str().unwrap().to_string();
    b.extend_from_slice(&["--calibration", &bad_s]);
    let mut all = vec!["fit"];
    all.extend_from_slice(&b);
    let o = tonus(&all);
    assert_eq!(o.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&o.stderr).contains("schema"));
}
