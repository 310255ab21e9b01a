//! `tonus inspect` and `tonus history` through the binary: decisions on
//! both sides of the limits, bad specifications, concurrent writers.

use std::path::{Path, PathBuf};
use std::process::Command;

fn tonus(args: &[&str]) -> std::process::Output {
    Command::new(env!("CARGO_BIN_EXE_tonus"))
        .args(args)
        .output()
        .expect("tonus runs")
}

const SPEC: &str = r#"[spec]
name = "test-screen"
version = "1"
[panel]
shape = "rect"
width = "500mm"
height = "400mm"
areal-density = "40g/m2"
areal-density-u = "0.4g/m2"
tap-at = "0.3,0.35"
model = "isotropic"
[limits]
nominal-tension = "2000N/m"
lower-tension = "1800N/m"
upper-tension = "2200N/m"
[decision]
rule = "RULE"
"#;

fn make(dir: &Path, name: &str, tension: &str) -> PathBuf {
    let p = dir.join(name);
    let o = tonus(&[
        "synth",
        "--width",
        "500mm",
        "--height",
        "400mm",
        "--areal-density",
        "40g/m2",
        "--tap-at",
        "0.3,0.35",
        "--tension",
        tension,
        "--snr",
        "35",
        "--length",
        "1s",
        "-o",
        p.to_str().unwrap(),
    ]);
    assert!(o.status.success());
    p
}

fn spec(dir: &Path, rule: &str) -> PathBuf {
    let p = dir.join(format!("{rule}.spec.toml"));
    std::fs::write(&p, SPEC.replace("RULE", rule)).unwrap();
    p
}

#[test]
fn decisions_on_both_sides_of_the_limits() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    // σ known to 1 %: u(T) ≈ 20 N/m, U = 40 N/m at k = 2.
    let files = [
        make(d, "a-2000.wav", "2000N/m"),
        make(d, "b-1500.wav", "1500N/m"),
        make(d, "c-1810.wav", "1810N/m"),
        make(d, "d-2190.wav", "2190N/m"),
    ];
    let expect = |rule: &str, want: [&str; 4]| {
        let out = d.join(format!("out-{rule}"));
        let s = spec(d, rule);
        let mut args = vec![
            "inspect",
            "--spec",
            s.to_str().unwrap(),
            "--out",
            out.to_str().unwrap(),
            "--no-history",
        ];
        for f in &files {
            args.push(f.to_str().unwrap());
        }
        let o = tonus(&args);
        assert_eq!(
            o.status.code(),
            Some(1),
            "{}",
            String::from_utf8_lossy(&o.stderr)
        );
        let mut r = csv::Reader::from_path(out.join("inspect.csv")).unwrap();
        let got: Vec<String> = r.records().map(|x| x.unwrap()[11].to_string()).collect();
        assert_eq!(got, want, "{rule}");
        let jsonl = std::fs::read_to_string(out.join("inspect.jsonl")).unwrap();
        assert_eq!(jsonl.lines().count(), 4);
    };
    // Simple acceptance: inside the limits passes. Guarded: 1810 and 2190
    // lie within U of a limit, so they cannot be decided.
    expect("simple", ["pass", "fail", "pass", "pass"]);
    expect(
        "guarded",
        ["pass", "fail", "indeterminate", "indeterminate"],
    );
}

#[test]
fn all_pass_exits_zero_and_history_is_kept() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let f = make(d, "good.wav", "2000N/m");
    let s = spec(d, "simple");
    let db = d.join("h.sqlite");
    // Two inspect processes at once write the same database.
    let run = |out: PathBuf| {
        Command::new(env!("CARGO_BIN_EXE_tonus"))
            .args([
                "inspect",
                "--spec",
                s.to_str().unwrap(),
                "--history",
                db.to_str().unwrap(),
                "--out",
                out.to_str().unwrap(),
                f.to_str().unwrap(),
                f.to_str().unwrap(),
                f.to_str().unwrap(),
            ])
            .stderr(std::process::Stdio::piped())
            .spawn()
            .unwrap()
    };
    let (a, b) = (run(d.join("out-a")), run(d.join("out-b")));
    let (a, b) = (a.wait_with_output().unwrap(), b.wait_with_output().unwrap());
    assert_eq!(
        a.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&a.stderr)
    );
    assert_eq!(
        b.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&b.stderr)
    );
    let o = tonus(&["history", "--db", db.to_str().unwrap()]);
    let text = String::from_utf8_lossy(&o.stdout);
    assert!(text.contains("6 rows"), "{text}");
    let csv_path = d.join("export.csv");
    let o = tonus(&[
        "history",
        "--db",
        db.to_str().unwrap(),
        "--decision",
        "pass",
        "--csv",
        csv_path.to_str().unwrap(),
    ]);
    assert!(o.status.success());
    assert_eq!(
        csv::Reader::from_path(&csv_path).unwrap().records().count(),
        6
    );
}

#[test]
fn bad_specification_names_the_key() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let f = make(d, "x.wav", "2000N/m");
    let cases = [
        (
            SPEC.replace("RULE", "simple")
                .replace("lower-tension = \"1800N/m\"\n", ""),
            "lower-tension",
        ),
        (
            SPEC.replace("RULE", "simple")
                .replace("\"1800N/m\"", "\"1800\""),
            "lower-tension",
        ),
        (
            SPEC.replace("RULE", "simple")
                .replace("\"1800N/m\"", "\"2500N/m\""),
            "lower-tension",
        ),
    ];
    for (text, key) in cases {
        let s = d.join("bad.spec.toml");
        std::fs::write(&s, text).unwrap();
        let o = tonus(&[
            "inspect",
            "--spec",
            s.to_str().unwrap(),
            "--no-history",
            "--out",
            d.join("o").to_str().unwrap(),
            f.to_str().unwrap(),
        ]);
        let err = String::from_utf8_lossy(&o.stderr);
        assert_eq!(o.status.code(), Some(2), "{err}");
        assert!(err.contains(key) && err.contains("line"), "{err}");
        assert!(!err.contains("panicked"));
    }
}
