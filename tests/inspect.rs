//! `tonus inspect` and `tonus history` through the binary: decisions on
//! both sides of the limits, bad specifications, concurrent writers, the
//! watch mode, a process killed mid-batch, the batch report.

use std::io::BufRead;
use std::path::{Path, PathBuf};
use std::process::{Child, Command, Stdio};
use std::sync::mpsc;
use std::time::{Duration, Instant};

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

/// Generous bound for anything a test waits for: far above what a loaded
/// two-core machine needs, so it only ends a test that would hang.
const PATIENCE: Duration = Duration::from_secs(180);

/// Waits for `child` to exit within `limit` (polling, bounded); kills it
/// and fails the test otherwise.
fn wait_bounded(child: &mut Child, limit: Duration) -> std::process::ExitStatus {
    let deadline = Instant::now() + limit;
    loop {
        if let Some(status) = child.try_wait().expect("try_wait") {
            return status;
        }
        if Instant::now() > deadline {
            let _ = child.kill();
            let _ = child.wait();
            panic!("tonus did not finish within {limit:?}");
        }
        std::thread::sleep(Duration::from_millis(20));
    }
}

/// Forwards each line of a child's stream into a channel, tagged.
fn forward<R: std::io::Read + Send + 'static>(
    r: R,
    tag: &'static str,
    tx: mpsc::Sender<(&'static str, String)>,
) {
    std::thread::spawn(move || {
        for line in std::io::BufReader::new(r).lines().map_while(|l| l.ok()) {
            if tx.send((tag, line)).is_err() {
                break;
            }
        }
    });
}

/// Receives lines until one from `tag` satisfies `want`, within `limit`.
fn wait_for_line(
    rx: &mpsc::Receiver<(&'static str, String)>,
    tag: &str,
    want: impl Fn(&str) -> bool,
    limit: Duration,
    seen: &mut Vec<String>,
) -> String {
    let deadline = Instant::now() + limit;
    loop {
        let left = deadline.saturating_duration_since(Instant::now());
        match rx.recv_timeout(left) {
            Ok((t, line)) => {
                seen.push(format!("{t}: {line}"));
                if t == tag && want(&line) {
                    return line;
                }
            }
            Err(e) => panic!("no matching {tag} line ({e:?}); got {seen:#?}"),
        }
    }
}

#[test]
fn watch_decides_a_recording_dropped_into_the_folder() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let inbox = d.join("inbox");
    std::fs::create_dir(&inbox).unwrap();
    // Already there when the watch starts: left alone (it would fail).
    make(&inbox, "old.wav", "1500N/m");
    let s = spec(d, "guarded");
    let out = d.join("out");
    let db = d.join("h.sqlite");
    let mut child = Command::new(env!("CARGO_BIN_EXE_tonus"))
        .args(["inspect", "--spec", s.to_str().unwrap(), "--watch"])
        .arg(&inbox)
        .args(["--watch-limit", "1", "--watch-timeout", "170s"])
        .args(["--watch-interval", "50ms", "--station", "bench-3", "--out"])
        .arg(&out)
        .arg("--history")
        .arg(&db)
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    let (tx, rx) = mpsc::channel();
    forward(child.stdout.take().unwrap(), "out", tx.clone());
    forward(child.stderr.take().unwrap(), "err", tx);
    let mut seen = Vec::new();
    wait_for_line(
        &rx,
        "err",
        |l| l.starts_with("watching"),
        PATIENCE,
        &mut seen,
    );
    // `tonus synth` writes under a temporary name and renames: the file
    // lands whole, as a recorder following the documented convention would.
    make(&inbox, "new.wav", "2000N/m");
    let line = wait_for_line(&rx, "out", |l| l.contains("new.wav"), PATIENCE, &mut seen);
    let status = wait_bounded(&mut child, PATIENCE);
    assert_eq!(status.code(), Some(0), "{seen:#?}");
    // One big line: the decision framed, the tension, the margin.
    assert!(line.starts_with("======"), "{line}");
    assert!(line.contains(" PASS "), "{line}");
    assert!(
        line.contains("T = 2000.0 N/m") || line.contains("T = 1999.9 N/m"),
        "{line}"
    );
    assert!(line.contains("margin +"), "{line}");
    assert!(!seen.iter().any(|l| l.contains("old.wav")), "{seen:#?}");
    // The history row.
    let export = d.join("export.csv");
    let o = tonus(&[
        "history",
        "--db",
        db.to_str().unwrap(),
        "--csv",
        export.to_str().unwrap(),
    ]);
    assert!(o.status.success());
    let mut r = csv::Reader::from_path(&export).unwrap();
    let headers = r.headers().unwrap().clone();
    let rows: Vec<csv::StringRecord> = r.records().map(|x| x.unwrap()).collect();
    assert_eq!(rows.len(), 1);
    let col = |name: &str| headers.iter().position(|h| h == name).unwrap();
    assert!(rows[0][col("recording_path")].ends_with("new.wav"));
    assert_eq!(&rows[0][col("decision")], "pass");
    assert_eq!(&rows[0][col("station")], "bench-3");
    // The CSV table and the batch report.
    let table = csv::Reader::from_path(out.join("inspect.csv"))
        .unwrap()
        .records()
        .count();
    assert_eq!(table, 1);
    let md = std::fs::read_to_string(out.join("batch-report.md")).unwrap();
    assert!(md.contains("| pass | 1 |"), "{md}");
}

#[test]
fn watch_refuses_a_missing_folder_and_a_zero_limit() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let s = spec(d, "simple");
    let missing = d.join("no-such-folder");
    let o = tonus(&[
        "inspect",
        "--spec",
        s.to_str().unwrap(),
        "--no-history",
        "--watch",
        missing.to_str().unwrap(),
        "--watch-timeout",
        "1s",
    ]);
    let err = String::from_utf8_lossy(&o.stderr);
    assert_eq!(o.status.code(), Some(2), "{err}");
    assert!(
        err.contains("no-such-folder") && err.contains("--watch"),
        "{err}"
    );
    let o = tonus(&[
        "inspect",
        "--spec",
        s.to_str().unwrap(),
        "--no-history",
        "--watch",
        d.to_str().unwrap(),
        "--watch-limit",
        "0",
    ]);
    let err = String::from_utf8_lossy(&o.stderr);
    assert_eq!(o.status.code(), Some(2), "{err}");
    assert!(err.contains("--watch-limit"), "{err}");
    assert!(!err.contains("panicked"));
}

/// Rows in the history, read without writing (0 before it exists).
fn history_rows(db: &Path) -> i64 {
    let flags = rusqlite::OpenFlags::SQLITE_OPEN_READ_ONLY;
    rusqlite::Connection::open_with_flags(db, flags)
        .and_then(|c| c.query_row("SELECT count(*) FROM decisions", [], |r| r.get(0)))
        .unwrap_or(0)
}

#[test]
fn killed_mid_batch_keeps_every_completed_row() {
    const BATCH: usize = 1500;
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let one = make(d, "one.wav", "2000N/m");
    let batch = d.join("batch");
    std::fs::create_dir(&batch).unwrap();
    for i in 0..BATCH {
        let p = batch.join(format!("r{i:04}.wav"));
        if std::fs::hard_link(&one, &p).is_err() {
            std::fs::copy(&one, &p).unwrap();
        }
    }
    let s = spec(d, "guarded");
    let out = d.join("out");
    let db = d.join("h.sqlite");
    let mut child = Command::new(env!("CARGO_BIN_EXE_tonus"))
        .args(["inspect", "--spec", s.to_str().unwrap(), "--out"])
        .arg(&out)
        .arg("--history")
        .arg(&db)
        .arg(&batch)
        .stdout(Stdio::null())
        .stderr(Stdio::null())
        .spawn()
        .unwrap();
    // Kill as soon as the first rows are in (bounded wait).
    let deadline = Instant::now() + PATIENCE;
    while history_rows(&db) == 0 {
        assert!(
            Instant::now() < deadline,
            "no history row within {PATIENCE:?}"
        );
        assert!(child.try_wait().unwrap().is_none(), "tonus ended early");
        std::thread::sleep(Duration::from_millis(10));
    }
    child.kill().unwrap();
    let status = child.wait().unwrap();
    assert!(!status.success(), "killed, not finished");

    // The database opens, is consistent, and every row is whole.
    let conn = rusqlite::Connection::open(&db).unwrap();
    let check: String = conn
        .query_row("PRAGMA integrity_check", [], |r| r.get(0))
        .unwrap();
    assert_eq!(check, "ok");
    drop(conn);
    let h = tonus::history::History::open(&db).unwrap();
    let rows = h.query(&tonus::history::Filter::default()).unwrap();
    assert!(!rows.is_empty());
    assert!(
        rows.len() < BATCH,
        "the batch finished before the kill; make it larger"
    );
    for r in &rows {
        let r = &r.row;
        assert_eq!(r.recording_sha256.len(), 64);
        assert!(r.recording_path.contains("batch"));
        assert_eq!(r.decision, "pass");
        assert!((r.tension_n_per_m.unwrap() - 2000.0).abs() < 2.0);
        let json: serde_json::Value = serde_json::from_str(&r.record_json).unwrap();
        assert_eq!(json["decision"]["decision"], "pass");
    }

    // The CSV and JSON Lines files: absent, or complete as of a publish.
    let csv_path = out.join("inspect.csv");
    if csv_path.exists() {
        let mut r = csv::Reader::from_path(&csv_path).unwrap();
        assert_eq!(r.headers().unwrap().len(), 21);
        let recs: Vec<csv::StringRecord> = r.records().map(|x| x.unwrap()).collect();
        assert!(recs.len() <= rows.len());
        for rec in &recs {
            assert_eq!(rec.len(), 21);
            assert_eq!(&rec[11], "pass");
        }
    }
    let jsonl = out.join("inspect.jsonl");
    if jsonl.exists() {
        let text = std::fs::read_to_string(&jsonl).unwrap();
        assert!(text.is_empty() || text.ends_with('\n'));
        assert!(text.lines().count() <= rows.len());
        for line in text.lines() {
            let v: serde_json::Value = serde_json::from_str(line).unwrap();
            assert_eq!(v["decision"]["decision"], "pass");
        }
    }
}

#[test]
fn batch_report_is_written_beside_the_table() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let a = make(d, "a.wav", "2000N/m");
    let b = make(d, "b.wav", "1500N/m");
    let junk = d.join("junk.wav");
    std::fs::write(&junk, b"not a recording").unwrap();
    let s = spec(d, "guarded");
    let out = d.join("out");
    let o = tonus(&[
        "inspect",
        "--spec",
        s.to_str().unwrap(),
        "--no-history",
        "--out",
        out.to_str().unwrap(),
        a.to_str().unwrap(),
        b.to_str().unwrap(),
        junk.to_str().unwrap(),
    ]);
    assert_eq!(o.status.code(), Some(1));
    let md = std::fs::read_to_string(out.join("batch-report.md")).unwrap();
    assert!(
        md.contains("| pass | 1 |") && md.contains("| fail | 1 |"),
        "{md}"
    );
    assert!(
        md.contains("junk.wav") && md.contains("not a readable WAV"),
        "{md}"
    );
    assert!(md.contains("Cp = (USL − LSL)/(6σ̂)"));
    let html = std::fs::read_to_string(out.join("batch-report.html")).unwrap();
    assert!(html.contains("data:image/png;base64,"));
    for png in ["batch-tension-spread.png", "batch-tension-run.png"] {
        let bytes = std::fs::read(out.join(png)).unwrap();
        assert_eq!(&bytes[..8], b"\x89PNG\r\n\x1a\n", "{png}");
    }
    // No spool or temporary file is left behind.
    for e in std::fs::read_dir(&out).unwrap() {
        let name = e.unwrap().file_name().to_string_lossy().into_owned();
        assert!(!name.contains(".part"), "{name}");
    }
}
