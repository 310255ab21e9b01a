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

/// Lines a child printed, tagged "out" or "err".
type Lines = mpsc::Receiver<(&'static str, String)>;

/// Starts `inspect --watch inbox` with `spec`, a 170 s timeout, a 50 ms
/// poll and `extra` flags, and returns once it says it is watching
/// (bounded wait): (child, its lines, the lines seen so far).
fn start_watch(spec: &Path, inbox: &Path, extra: &[&str]) -> (Child, Lines, Vec<String>) {
    let mut child = Command::new(env!("CARGO_BIN_EXE_tonus"))
        .args(["inspect", "--spec", spec.to_str().unwrap(), "--watch"])
        .arg(inbox)
        .args(["--watch-timeout", "170s", "--watch-interval", "50ms"])
        .args(extra)
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
    (child, rx, seen)
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
    let (mut child, rx, mut seen) = start_watch(
        &s,
        &inbox,
        &[
            "--watch-limit",
            "1",
            "--station",
            "bench-3",
            "--out",
            out.to_str().unwrap(),
            "--history",
            db.to_str().unwrap(),
        ],
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
    // The tension as a number: synthesised at 2000 N/m, read within
    // 0.05 % (a 12 ms fit of a clean synthetic panel; the corpus and the
    // fit tests hold the accuracy itself).
    let t: f64 = line
        .split("T = ")
        .nth(1)
        .and_then(|s| s.split(" N/m").next())
        .and_then(|s| s.trim().parse().ok())
        .unwrap_or_else(|| panic!("no `T = … N/m` in {line}"));
    assert!((t - 2000.0).abs() <= 1.0, "T = {t} in {line}");
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

/// Recordings in the batches that are stopped part-way.
const BIG_BATCH: usize = 1500;

/// Starts `inspect` on [`BIG_BATCH`] links to one recording (guarded
/// rule, history in `d/h.sqlite`, outputs in `d/out`) and returns once
/// its first history row is in (bounded wait): (child, out, db).
fn start_big_batch(d: &Path, stderr: Stdio) -> (Child, PathBuf, PathBuf) {
    let one = make(d, "one.wav", "2000N/m");
    let batch = d.join("batch");
    std::fs::create_dir(&batch).unwrap();
    for i in 0..BIG_BATCH {
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
        .stderr(stderr)
        .spawn()
        .unwrap();
    let deadline = Instant::now() + PATIENCE;
    while history_rows(&db) == 0 {
        assert!(
            Instant::now() < deadline,
            "no history row within {PATIENCE:?}"
        );
        assert!(child.try_wait().unwrap().is_none(), "tonus ended early");
        std::thread::sleep(Duration::from_millis(10));
    }
    (child, out, db)
}

#[test]
fn killed_mid_batch_keeps_every_completed_row() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let (mut child, out, db) = start_big_batch(d, Stdio::null());
    // Kill once the CSV and JSON Lines have been published at least once
    // (every 64 rows or a second), so that what was published is checked
    // whole, not skipped because it did not exist yet.
    let csv_path = out.join("inspect.csv");
    let jsonl = out.join("inspect.jsonl");
    let deadline = Instant::now() + PATIENCE;
    while !(csv_path.exists() && jsonl.exists()) {
        assert!(
            Instant::now() < deadline,
            "no publication within {PATIENCE:?}"
        );
        assert!(child.try_wait().unwrap().is_none(), "tonus ended early");
        std::thread::sleep(Duration::from_millis(5));
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
    let h = tonus::acceptance::history::History::open(&db).unwrap();
    let rows = h
        .query(&tonus::acceptance::history::Filter::default())
        .unwrap();
    assert!(!rows.is_empty());
    assert!(
        rows.len() < BIG_BATCH,
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

    // The CSV and JSON Lines files: complete as of their last publication
    // (every row whole, 22 columns, at most the rows the history holds).
    let mut r = csv::Reader::from_path(&csv_path).unwrap();
    assert_eq!(r.headers().unwrap().len(), 22);
    let recs: Vec<csv::StringRecord> = r.records().map(|x| x.unwrap()).collect();
    assert!(!recs.is_empty(), "a published CSV holds rows");
    assert!(recs.len() <= rows.len());
    for rec in &recs {
        assert_eq!(rec.len(), 22);
        assert_eq!(&rec[11], "pass");
    }
    let text = std::fs::read_to_string(&jsonl).unwrap();
    assert!(text.ends_with('\n'), "the JSON Lines end with a whole line");
    let n_lines = text.lines().count();
    assert!(n_lines >= 1 && n_lines <= rows.len(), "{n_lines} lines");
    for line in text.lines() {
        let v: serde_json::Value = serde_json::from_str(line).unwrap();
        assert_eq!(v["decision"]["decision"], "pass");
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

/// (decision, frequency method) of every row of an inspect.csv, in order.
fn decisions_and_methods(csv_path: &Path) -> Vec<(String, String)> {
    let mut r = csv::Reader::from_path(csv_path).unwrap();
    let h = r.headers().unwrap().clone();
    let col = |name: &str| h.iter().position(|x| x == name).unwrap();
    let (d, m) = (col("decision"), col("frequency_method"));
    r.records()
        .map(|x| {
            let x = x.unwrap();
            (x[d].to_string(), x[m].to_string())
        })
        .collect()
}

#[test]
fn refinement_near_limits_issue5() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    // Guarded rule, u(T) ≈ 1 % of T from σ: the lower acceptance limit
    // L + 2·u(T) lies where T·(1 − 0.02) = 1800 N/m, near 1836.7 N/m. A
    // tap at 1837 N/m sits within a fraction of a newton of it, far inside
    // ten fit uncertainties (about 0.4 N/m each); one at 2000 N/m is
    // settled.
    let files = [
        make(d, "a-2000.wav", "2000N/m"),
        make(d, "b-1837.wav", "1837N/m"),
    ];
    let s = spec(d, "guarded");
    let run = |extra: &[&str], tag: &str| {
        let out = d.join(format!("out-{tag}"));
        let mut args = vec![
            "inspect",
            "--spec",
            s.to_str().unwrap(),
            "--out",
            out.to_str().unwrap(),
            "--no-history",
        ];
        args.extend_from_slice(extra);
        for f in &files {
            args.push(f.to_str().unwrap());
        }
        let o = tonus(&args);
        assert!(
            matches!(o.status.code(), Some(0 | 1)),
            "{}",
            String::from_utf8_lossy(&o.stderr)
        );
        decisions_and_methods(&out.join("inspect.csv"))
    };
    let default = run(&[], "default");
    let always = run(&["--refine", "always"], "always");
    let never = run(&["--refine", "never"], "never");
    let methods = |v: &[(String, String)]| v.iter().map(|x| x.1.clone()).collect::<Vec<_>>();
    assert_eq!(methods(&default), ["fft_peaks", "refined"]);
    assert_eq!(methods(&always), ["refined", "refined"]);
    assert_eq!(methods(&never), ["fft_peaks", "fft_peaks"]);
    // The batch report says how many were refined.
    let md = std::fs::read_to_string(d.join("out-default").join("batch-report.md")).unwrap();
    assert!(md.contains("1 of 2 measured recordings refined"), "{md}");
    // The settled recording's decision is the one refining gives.
    assert_eq!(default[0].0, "pass");
    for (a, b) in default.iter().zip(&always) {
        assert_eq!(a.0, b.0);
    }
    // --peaks-only is --refine never, and the two cannot be combined.
    assert_eq!(
        methods(&run(&["--peaks-only"], "peaks")),
        ["fft_peaks", "fft_peaks"]
    );
    let o = tonus(&[
        "inspect",
        "--spec",
        s.to_str().unwrap(),
        "--peaks-only",
        "--refine",
        "always",
        files[0].to_str().unwrap(),
    ]);
    assert_eq!(o.status.code(), Some(2));
}

/// A synthetic 500 × 400 mm screen with Tx = `tx` and Ty = `ty` (N/m).
fn make_biaxial(dir: &Path, name: &str, tx: f64, ty: f64) -> PathBuf {
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
        &format!("{tx}N/m"),
        "--tension-y",
        &format!("{ty}N/m"),
        "--snr",
        "35",
        "--length",
        "1s",
        "-o",
        p.to_str().unwrap(),
    ]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    p
}

/// Runs `inspect` without history; returns the exit code and the CSV rows
/// as (header → value) maps.
fn inspect_rows(
    spec: &Path,
    out: &Path,
    files: &[PathBuf],
    history: Option<&Path>,
) -> (i32, Vec<std::collections::HashMap<String, String>>) {
    let mut cmd = Command::new(env!("CARGO_BIN_EXE_tonus"));
    cmd.arg("inspect")
        .arg("--spec")
        .arg(spec)
        .arg("--out")
        .arg(out);
    match history {
        Some(h) => cmd.arg("--history").arg(h),
        None => cmd.arg("--no-history"),
    };
    let o = cmd.args(files).output().unwrap();
    let code = o.status.code().unwrap_or(-1);
    assert!(
        code == 0 || code == 1,
        "{}",
        String::from_utf8_lossy(&o.stderr)
    );
    let mut r = csv::Reader::from_path(out.join("inspect.csv")).unwrap();
    let headers = r.headers().unwrap().clone();
    let rows = r
        .records()
        .map(|rec| {
            let rec = rec.unwrap();
            headers
                .iter()
                .zip(rec.iter())
                .map(|(h, v)| (h.to_string(), v.to_string()))
                .collect()
        })
        .collect();
    (code, rows)
}

const BIAXIAL_SPEC: &str = r#"[spec]
name = "test-mesh"
version = "1"
[panel]
shape = "rect"
width = "500mm"
height = "400mm"
areal-density = "40g/m2"
areal-density-u = "0.4g/m2"
tap-at = "0.3,0.35"
model = "biaxial"
[limits]
nominal-tension = "2000N/m"
lower-tension = "1800N/m"
upper-tension = "2200N/m"
max-anisotropy-percent = LIMIT
[decision]
rule = "RULE"
"#;

#[test]
fn biaxial_spec_decides_anisotropy_on_both_sides_of_the_limit() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    // Anisotropy 100·(Tx − Ty)/((Tx + Ty)/2): 0 %, about −5 %, −9.5 %.
    let files = [
        make_biaxial(d, "a-even.wav", 2000.0, 2000.0),
        make_biaxial(d, "b-near.wav", 2000.0, 2102.5),
        make_biaxial(d, "c-uneven.wav", 2000.0, 2200.0),
    ];
    let spec = |rule: &str, limit: &str| {
        let p = d.join(format!("mesh-{rule}-{limit}.spec.toml"));
        std::fs::write(
            &p,
            BIAXIAL_SPEC.replace("RULE", rule).replace("LIMIT", limit),
        )
        .unwrap();
        p
    };
    let num = |row: &std::collections::HashMap<String, String>, k: &str| -> f64 {
        row[k].parse().unwrap_or_else(|_| panic!("{k}: {row:?}"))
    };
    let db = d.join("h.sqlite");
    let out = d.join("out-simple");
    let (code, rows) = inspect_rows(&spec("simple", "5"), &out, &files[..], Some(&db));
    assert_eq!(code, 1);
    let decisions: Vec<&str> = rows.iter().map(|r| r["decision"].as_str()).collect();
    // The mean tensions (2000, 2051, 2100 N/m) are all inside the limits:
    // only the anisotropy fails the third.
    assert_eq!(decisions[0], "pass", "{rows:?}");
    assert_eq!(decisions[2], "fail", "{rows:?}");
    assert!(rows[2]["reasons"].contains("anisotropy"), "{rows:?}");
    let truth = [0.0, -200.0 * 102.5 / 4102.5, -200.0 * 200.0 / 4200.0];
    for (row, a) in rows.iter().zip(truth) {
        let (v, u) = (
            num(row, "anisotropy_percent"),
            num(row, "anisotropy_u_percent"),
        );
        assert!(u > 0.0 && u < 0.3, "{row:?}");
        assert!((v - a).abs() < 0.3, "{v} against {a}: {row:?}");
        assert_eq!(row["unevenness_percent"], "", "{row:?}");
    }
    // The JSON record carries the judgement with its own guard band.
    let jsonl = std::fs::read_to_string(out.join("inspect.jsonl")).unwrap();
    let recs: Vec<serde_json::Value> = jsonl
        .lines()
        .map(|l| serde_json::from_str(l).unwrap())
        .collect();
    assert_eq!(recs[2]["decision"]["anisotropy"]["decision"], "fail");
    assert_eq!(recs[2]["decision"]["anisotropy"]["limit_percent"], 5.0);
    assert_eq!(recs[2]["spec"]["model"], "biaxial");
    // The history keeps the anisotropy.
    let h = tonus::acceptance::history::History::open(&db).unwrap();
    let stored = h
        .query(&tonus::acceptance::history::Filter::default())
        .unwrap();
    assert_eq!(stored.len(), 3);
    // Rows are stored as decided; recordings run in parallel, so find the
    // third by its path.
    let third = stored
        .iter()
        .find(|s| s.row.recording_path.ends_with("c-uneven.wav"))
        .unwrap();
    assert!(
        (third.row.anisotropy_percent.unwrap() - num(&rows[2], "anisotropy_percent")).abs() < 1e-3
    );
    // The report draws the distribution against the limit.
    let md = std::fs::read_to_string(out.join("batch-report.md")).unwrap();
    assert!(md.contains("Limit |a| ≤ 5 %"), "{md}");
    assert!(md.contains("1 beyond it"), "{md}");
    let png = std::fs::read(out.join("batch-anisotropy.png")).unwrap();
    assert_eq!(&png[..8], b"\x89PNG\r\n\x1a\n");

    // Guarded, with the limit set at the near screen's own measured |a|:
    // it lies within the guard band k·u of the limit, so it cannot be
    // decided; the even screen still passes and the uneven one fails.
    let near = num(&rows[1], "anisotropy_percent").abs();
    let limit = format!("{near:.3}");
    let (_, rows) = inspect_rows(
        &spec("guarded", &limit),
        &d.join("out-guarded"),
        &files,
        None,
    );
    let decisions: Vec<&str> = rows.iter().map(|r| r["decision"].as_str()).collect();
    assert_eq!(decisions, ["pass", "indeterminate", "fail"], "{rows:?}");
    assert!(
        rows[1]["reasons"].contains("within the guard band")
            && rows[1]["reasons"].contains("anisotropy"),
        "{rows:?}"
    );
    // Under the simple rule a limit a little above and below it decides.
    let above = format!("{:.3}", near + 0.05);
    let below = format!("{:.3}", near - 0.05);
    let (_, rows) = inspect_rows(
        &spec("simple", &above),
        &d.join("out-above"),
        &files[1..2],
        None,
    );
    assert_eq!(rows[0]["decision"], "pass", "{rows:?}");
    let (_, rows) = inspect_rows(
        &spec("simple", &below),
        &d.join("out-below"),
        &files[1..2],
        None,
    );
    assert_eq!(rows[0]["decision"], "fail", "{rows:?}");
}

/// A synthetic 14 in head of the drum-head example specification
/// (0.19 mm film at 1390 kg/m³, air-loaded), tapped off the axes.
fn make_head(dir: &Path, name: &str, skew: Option<&str>) -> PathBuf {
    let p = dir.join(name);
    let mut args = vec![
        "synth",
        "--shape",
        "circle",
        "--diameter",
        "14in",
        "--thickness",
        "0.19mm",
        "--density",
        "1390kg/m3",
        "--tap-at",
        "0.6,30",
        "--air",
        "--tension",
        "3000N/m",
        "--snr",
        "30",
        "--length",
        "2s",
        "-o",
        p.to_str().unwrap(),
    ];
    if let Some(s) = skew {
        args.extend_from_slice(&["--tension-skew", s]);
    }
    let o = tonus(&args);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    p
}

fn example_spec(name: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("specs")
        .join(name)
}

#[test]
fn unevenness_limit_on_a_synthetic_head_with_and_without_skew() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    // ε = 2 %: the spread 2ε = 4 % is over the example's 2 % limit.
    let files = [
        make_head(d, "even.wav", None),
        make_head(d, "skewed.wav", Some("2%")),
    ];
    let out = d.join("out");
    let (code, rows) = inspect_rows(&example_spec("drumhead-14in.spec.toml"), &out, &files, None);
    assert_eq!(code, 1);
    // The even head resolves no pair: decided on its tension, and said so.
    assert_eq!(rows[0]["decision"], "pass", "{rows:?}");
    assert_eq!(rows[0]["unevenness_percent"], "");
    assert!(
        rows[0]["reasons"].contains("evenness not measurable: no split pair resolved"),
        "{rows:?}"
    );
    // The skewed head: same tension, uneven beyond the limit.
    assert_eq!(rows[1]["decision"], "fail", "{rows:?}");
    let s: f64 = rows[1]["unevenness_percent"].parse().unwrap();
    let u: f64 = rows[1]["unevenness_u_percent"].parse().unwrap();
    assert!((s - 4.0).abs() < 0.5, "{s}");
    assert!(u > 0.0 && u < 0.5, "{u}");
    for row in &rows {
        let t: f64 = row["tension_n_per_m"].parse().unwrap();
        assert!((t / 3000.0 - 1.0).abs() < 0.01, "{row:?}");
    }
    assert!(rows[1]["reasons"].contains("unevenness |"), "{rows:?}");
    let md = std::fs::read_to_string(out.join("batch-report.md")).unwrap();
    assert!(md.contains("Limit 2 % (red line)"), "{md}");
    // A head far more uneven (ε = 3.2 %) fails: its (1,1) pair's members
    // are fitted together, so the pair is evaluated.
    let worse = make_head(d, "worse.wav", Some("3.2%"));
    let (_, rows) = inspect_rows(
        &example_spec("drumhead-14in.spec.toml"),
        &d.join("out-worse"),
        &[worse],
        None,
    );
    assert_eq!(rows[0]["decision"], "fail", "{rows:?}");
    let s: f64 = rows[0]["unevenness_percent"].parse().unwrap();
    assert!((s - 6.4).abs() < 0.5, "{s}");
    assert!(
        md.contains("1 measured recording(s) resolved no split pair"),
        "{md}"
    );
    assert!(out.join("batch-unevenness.png").exists());
}

#[test]
fn bad_model_limit_and_calibration_name_the_key_and_line() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let f = make(d, "x.wav", "2000N/m");
    let head = std::fs::read_to_string(example_spec("drumhead-14in.spec.toml")).unwrap();
    let line_of =
        |text: &str, prefix: &str| text.lines().position(|l| l.starts_with(prefix)).unwrap() + 1;
    std::fs::write(
        d.join("broken.calibration.toml"),
        "schema = \"tonus.calibration\"\nversion = 1\n",
    )
    .unwrap();
    let biaxial_circle = head.replace("model = \"air\"", "model = \"biaxial\"");
    let aniso_isotropic = SPEC
        .replace("RULE", "simple")
        .replace("[decision]", "max-anisotropy-percent = 5\n[decision]");
    let missing_cal = head.replace(
        "model = \"air\"",
        "model = \"isotropic\"\ncalibration = \"none.calibration.toml\"",
    );
    let broken_cal = head.replace(
        "model = \"air\"",
        "model = \"isotropic\"\ncalibration = \"broken.calibration.toml\"",
    );
    let cases = [
        (&biaxial_circle, "model", "does not apply to a circle"),
        (
            &aniso_isotropic,
            "max-anisotropy-percent",
            "does not measure anisotropy",
        ),
        (&missing_cal, "calibration", "cannot read"),
        (&broken_cal, "calibration", "not a usable calibration file"),
    ];
    for (text, key, what) in cases {
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
        let line = line_of(text, key);
        assert!(
            err.contains(&format!("line {line}: key '{key}'")) && err.contains(what),
            "{key}: {err}"
        );
        assert_eq!(err.trim().lines().count(), 1, "{err}");
        assert!(!err.contains("panicked"));
        assert!(!d.join("o").join("inspect.csv").exists(), "nothing written");
    }
}

/// Sends `sig` to a child process.
fn signal(child: &Child, sig: i32) {
    let pid = i32::try_from(child.id()).unwrap();
    // SAFETY: kill(2) on the pid of our own child, which has not been
    // waited for yet, so the pid cannot have been reused.
    let rc = unsafe { libc::kill(pid, sig) };
    assert_eq!(rc, 0, "kill failed");
}

#[test]
fn ctrl_c_ends_a_watch_with_the_report() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let inbox = d.join("inbox");
    std::fs::create_dir(&inbox).unwrap();
    let s = spec(d, "guarded");
    let out = d.join("out");
    // No limit: only the signal (or, if it is lost, the timeout) ends it.
    let (mut child, rx, mut seen) = start_watch(
        &s,
        &inbox,
        &["--no-history", "--out", out.to_str().unwrap()],
    );
    make(&inbox, "new.wav", "2000N/m");
    wait_for_line(&rx, "out", |l| l.contains("new.wav"), PATIENCE, &mut seen);
    signal(&child, libc::SIGINT);
    let status = wait_bounded(&mut child, PATIENCE);
    let note = wait_for_line(
        &rx,
        "err",
        |l| l.starts_with("watch ended"),
        PATIENCE,
        &mut seen,
    );
    assert_eq!(status.code(), Some(130), "{seen:#?}");
    assert!(
        note.contains("stopped by SIGINT") && note.contains("1 recording(s) decided"),
        "{note}"
    );
    let md = std::fs::read_to_string(out.join("batch-report.md")).unwrap();
    assert!(md.contains("interrupted by SIGINT"), "{md}");
    assert!(md.contains("the watch ended after 1 recording(s)"), "{md}");
    assert!(md.contains("| pass | 1 |"), "{md}");
    assert!(out.join("batch-report.html").exists());
    let rows = csv::Reader::from_path(out.join("inspect.csv"))
        .unwrap()
        .records()
        .count();
    assert_eq!(rows, 1);
}

#[test]
fn ctrl_c_mid_batch_finishes_in_flight_and_writes_the_report() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let (mut child, out, db) = start_big_batch(d, Stdio::piped());
    signal(&child, libc::SIGINT);
    let status = wait_bounded(&mut child, PATIENCE);
    let mut err = String::new();
    std::io::Read::read_to_string(&mut child.stderr.take().unwrap(), &mut err).unwrap();
    assert_eq!(status.code(), Some(130), "{err}");
    let stored = history_rows(&db) as usize;
    assert!(
        stored < BIG_BATCH,
        "the batch finished before the signal; make it larger"
    );
    // Every decided recording is in the history, the CSV, the JSON Lines
    // and the report, whole, and nothing else.
    let recs: Vec<csv::StringRecord> = csv::Reader::from_path(out.join("inspect.csv"))
        .unwrap()
        .records()
        .map(|r| r.unwrap())
        .collect();
    assert_eq!(recs.len(), stored);
    assert!(recs.iter().all(|r| r.len() == 22 && &r[11] == "pass"));
    let jsonl = std::fs::read_to_string(out.join("inspect.jsonl")).unwrap();
    assert_eq!(jsonl.lines().count(), stored);
    let md = std::fs::read_to_string(out.join("batch-report.md")).unwrap();
    assert!(md.contains("interrupted by SIGINT"), "{md}");
    assert!(
        md.contains(&format!("{stored} of {BIG_BATCH} recordings were decided")),
        "{md}"
    );
    assert!(md.contains(&format!("| pass | {stored} |")), "{md}");
    assert!(
        err.contains(&format!("{stored} of {BIG_BATCH} recording(s) decided")),
        "{err}"
    );
    for e in std::fs::read_dir(&out).unwrap() {
        let name = e.unwrap().file_name().to_string_lossy().into_owned();
        assert!(!name.contains(".part"), "{name}");
    }
}

/// A folder given with no recording in it is a usage error even beside
/// good recordings: it would otherwise vanish from the batch, and a run
/// with a mistyped folder could exit 0. Nothing is written.
#[test]
fn an_empty_folder_among_the_inputs_is_an_error() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let good = make(d, "good.wav", "2000N/m");
    let empty = d.join("line-3.wav.d");
    std::fs::create_dir(&empty).unwrap();
    let s = spec(d, "simple");
    let out = d.join("out");
    let o = tonus(&[
        "inspect",
        "--spec",
        s.to_str().unwrap(),
        "--out",
        out.to_str().unwrap(),
        "--no-history",
        good.to_str().unwrap(),
        empty.to_str().unwrap(),
    ]);
    assert_eq!(o.status.code(), Some(2));
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(err.contains("no .wav recording"), "{err}");
    assert_eq!(err.trim().lines().count(), 1, "{err}");
    assert!(!out.exists());
}
