//! Tests of the history store.

use super::*;

fn row(i: usize, spec: &str, decision: &str, t_ms: i64) -> Row {
    Row {
        recording_sha256: format!("{i:064x}"),
        recording_path: format!("taps/{i}.wav"),
        time: UtcTime(t_ms),
        station: Some("line 2".into()),
        operator: if i.is_multiple_of(2) {
            Some("A. N. Other".into())
        } else {
            None
        },
        spec_name: spec.into(),
        spec_version: "3".into(),
        spec_sha256: "ab".repeat(32),
        tension_n_per_m: Some(2000.0 + i as f64 * 0.25),
        tension_u_n_per_m: Some(12.5),
        wave_speed_m_per_s: Some(223.6),
        wave_speed_u_m_per_s: Some(0.02),
        modes_used: Some(16),
        rms_residual_cents: Some(0.34),
        grade: "sound".into(),
        decision: decision.into(),
        rule: "guarded".into(),
        reasons: vec![format!("reason, with \"quotes\" {i}")],
        record_json: format!("{{\"i\":{i}}}"),
        anisotropy_percent: Some(1.5 - i as f64),
        anisotropy_u_percent: Some(0.25),
        unevenness_percent: None,
        unevenness_u_percent: None,
        calibration_sha256: (i % 2 == 1).then(|| "cd".repeat(32)),
    }
}

#[test]
fn round_trip_insert_query_export() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("history.sqlite");
    let mut h = History::open(&path).unwrap();
    let rows = [
        row(0, "screen-a", "pass", 1_000),
        row(1, "screen-a", "fail", 2_000),
        row(2, "panel-b", "pass", 3_000),
        row(3, "screen-a", "indeterminate", 4_000),
    ];
    let mut nulls = row(4, "panel-b", "not_measured", 5_000);
    nulls.tension_n_per_m = None;
    nulls.tension_u_n_per_m = None;
    nulls.modes_used = None;
    nulls.station = None;
    nulls.operator = None;
    nulls.reasons = vec![];
    let mut ids = Vec::new();
    for r in rows.iter().chain([&nulls]) {
        ids.push(h.insert(r).unwrap());
    }
    assert!(ids.windows(2).all(|w| w[0] < w[1]));
    drop(h);
    // Reopen: the rows are on disk and the schema is not recreated.
    let h = History::open(&path).unwrap();
    let all = h.query(&Filter::default()).unwrap();
    assert_eq!(all.len(), 5);
    for (s, r) in all.iter().zip(rows.iter().chain([&nulls])) {
        assert_eq!(&s.row, r);
    }
    let a = h
        .query(&Filter {
            spec_name: Some("screen-a".into()),
            ..Default::default()
        })
        .unwrap();
    assert_eq!(a.len(), 3);
    let passes = h
        .query(&Filter {
            decision: Some("pass".into()),
            ..Default::default()
        })
        .unwrap();
    assert_eq!(
        passes.iter().map(|s| s.id).collect::<Vec<_>>(),
        vec![ids[0], ids[2]]
    );
    let window = h
        .query(&Filter {
            since: Some(UtcTime(2_000)),
            until: Some(UtcTime(4_000)),
            spec_name: Some("screen-a".into()),
            ..Default::default()
        })
        .unwrap();
    assert_eq!(window.len(), 1);
    assert_eq!(window[0].row.decision, "fail");

    let mut csv_out = Vec::new();
    let n = h.export_csv(&Filter::default(), &mut csv_out).unwrap();
    assert_eq!(n, 5);
    let mut rd = csv::Reader::from_reader(csv_out.as_slice());
    let header: Vec<String> = rd.headers().unwrap().iter().map(String::from).collect();
    assert_eq!(header, CSV_HEADER.to_vec());
    let recs: Vec<csv::StringRecord> = rd.records().map(|r| r.unwrap()).collect();
    assert_eq!(recs.len(), 5);
    assert_eq!(&recs[0][1], "1970-01-01T00:00:01.000Z");
    assert_eq!(&recs[1][9], "2000.25");
    assert_eq!(&recs[1][18], "reason, with \"quotes\" 1");
    assert_eq!(&recs[4][9], "");
    assert_eq!(&recs[4][16], "not_measured");
    assert_eq!(h.count().unwrap(), 5);
}

#[test]
fn two_writer_threads_lose_nothing() {
    const PER_THREAD: usize = 200;
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("history.sqlite");
    let barrier = std::sync::Arc::new(std::sync::Barrier::new(2));
    let handles: Vec<_> = (0..2)
        .map(|t| {
            let path = path.clone();
            let barrier = barrier.clone();
            std::thread::spawn(move || {
                // Both open at the same moment, creating the schema
                // concurrently, then insert interleaved.
                barrier.wait();
                let mut h = History::open(&path).unwrap();
                for i in 0..PER_THREAD {
                    let k = t * PER_THREAD + i;
                    h.insert(&row(k, &format!("thread-{t}"), "pass", k as i64))
                        .unwrap();
                }
            })
        })
        .collect();
    for h in handles {
        h.join().unwrap();
    }
    let h = History::open(&path).unwrap();
    let all = h.query(&Filter::default()).unwrap();
    assert_eq!(all.len(), 2 * PER_THREAD);
    let mut seen: Vec<String> = all.iter().map(|s| s.row.recording_sha256.clone()).collect();
    seen.sort();
    seen.dedup();
    assert_eq!(seen.len(), 2 * PER_THREAD);
    for t in 0..2 {
        let mine = h
            .query(&Filter {
                spec_name: Some(format!("thread-{t}")),
                ..Default::default()
            })
            .unwrap();
        assert_eq!(mine.len(), PER_THREAD);
    }
}

/// The version 1 table, as tonus wrote it before the anisotropy,
/// unevenness and calibration columns.
const SCHEMA_V1: &str = "
CREATE TABLE decisions (
id INTEGER PRIMARY KEY AUTOINCREMENT,
recording_sha256 TEXT NOT NULL,
recording_path TEXT NOT NULL,
time_utc TEXT NOT NULL,
time_unix_ms INTEGER NOT NULL,
station TEXT,
operator TEXT,
spec_name TEXT NOT NULL,
spec_version TEXT NOT NULL,
spec_sha256 TEXT NOT NULL,
tension_n_per_m REAL,
tension_u_n_per_m REAL,
wave_speed_m_per_s REAL,
wave_speed_u_m_per_s REAL,
modes_used INTEGER,
rms_residual_cents REAL,
grade TEXT NOT NULL,
decision TEXT NOT NULL,
rule TEXT NOT NULL,
reasons TEXT NOT NULL,
record_json TEXT NOT NULL
);
PRAGMA user_version = 1;
INSERT INTO decisions (recording_sha256, recording_path, time_utc, time_unix_ms, spec_name,
spec_version, spec_sha256, tension_n_per_m, grade, decision, rule, reasons, record_json)
VALUES ('aa', 'old.wav', '2025-03-01T08:00:00.000Z', 1740816000000, 'screen', '1', 'bb',
2000.5, 'sound', 'pass', 'guarded', '[\"old reason\"]', '{}');
";

#[test]
fn a_version_1_history_opens_and_gains_the_new_columns() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("old.sqlite");
    {
        let conn = Connection::open(&path).unwrap();
        conn.execute_batch(SCHEMA_V1).unwrap();
    }
    let mut h = History::open(&path).unwrap();
    let version: i64 = h
        .conn
        .query_row("PRAGMA user_version", [], |r| r.get(0))
        .unwrap();
    assert_eq!(version, SCHEMA_VERSION);
    // The old row is whole, its new fields empty.
    let all = h.query(&Filter::default()).unwrap();
    assert_eq!(all.len(), 1);
    let old = &all[0].row;
    assert_eq!(old.recording_path, "old.wav");
    assert_eq!(old.tension_n_per_m, Some(2000.5));
    assert_eq!(old.reasons, vec!["old reason".to_string()]);
    assert_eq!(old.anisotropy_percent, None);
    assert_eq!(old.calibration_sha256, None);
    // New rows carry the new columns.
    let new = row(1, "screen", "fail", 1_740_816_000_001);
    h.insert(&new).unwrap();
    drop(h);
    // Opening again does not add the columns twice.
    let h = History::open(&path).unwrap();
    let all = h.query(&Filter::default()).unwrap();
    assert_eq!(all.len(), 2);
    assert_eq!(all[1].row, new);
    let mut out = Vec::new();
    h.export_csv(&Filter::default(), &mut out).unwrap();
    let text = String::from_utf8(out).unwrap();
    assert!(text.lines().next().unwrap().ends_with("calibration_sha256"));
    assert!(text.contains(&"cd".repeat(32)), "{text}");
    // A newer file is refused, naming the versions.
    h.conn
        .pragma_update(None, "user_version", SCHEMA_VERSION + 1)
        .unwrap();
    drop(h);
    let e = History::open(&path).unwrap_err().to_string();
    assert!(e.contains("newer than this tonus"), "{e}");
}

#[test]
fn not_a_database_is_an_error() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("junk.sqlite");
    std::fs::write(
        &path,
        b"this is not an SQLite database at all, just text......",
    )
    .unwrap();
    let e = History::open(&path).unwrap_err();
    assert!(e.to_string().contains("junk.sqlite"), "{e}");
}
