//! Tests of the batch report.

use super::chart_style::spread_labels;
use super::*;

#[test]
fn close_labels_keep_their_order_and_spread_about_their_lines() {
    let out = spread_labels(
        vec![(0, 100, 'a'), (0, 40, 'b'), (0, 104, 'c'), (0, 108, 'd')],
        16,
    );
    let ys: Vec<(i32, char)> = out.iter().map(|l| (l.1, l.2)).collect();
    // b stands alone; a, c, d (wanted 100, 104, 108) centre on 104.
    assert_eq!(ys, vec![(40, 'b'), (88, 'a'), (104, 'c'), (120, 'd')]);
}

#[test]
fn base64_matches_the_rfc_4648_test_vectors() {
    // RFC 4648 §10.
    let cases = [
        ("", ""),
        ("f", "Zg=="),
        ("fo", "Zm8="),
        ("foo", "Zm9v"),
        ("foob", "Zm9vYg=="),
        ("fooba", "Zm9vYmE="),
        ("foobar", "Zm9vYmFy"),
    ];
    for (plain, coded) in cases {
        assert_eq!(base64(plain.as_bytes()), coded, "{plain:?}");
    }
    assert_eq!(base64(&[0xfb, 0xff, 0xfe]), "+//+");
}

fn entry(file: &str, decision: &str, t: Option<f64>) -> BatchEntry {
    BatchEntry {
        file: file.into(),
        decision: decision.into(),
        tension_n_per_m: t,
        tension_u_n_per_m: t.map(|_| 20.0),
        expanded_u_n_per_m: t.map(|_| 40.0),
        margin_n_per_m: t.map(|t| (t - 1800.0).min(2200.0 - t)),
        nearest_limit: t.map(|t| {
            if t < 2000.0 {
                "lower".into()
            } else {
                "upper".into()
            }
        }),
        grade: Some("sound".into()),
        reason: (decision == "error").then(|| "not a WAV file".into()),
        ..Default::default()
    }
}

fn summary(entries: Vec<BatchEntry>) -> BatchSummary {
    BatchSummary {
        spec_name: "screen | test".into(),
        spec_version: "1".into(),
        spec_sha256: "ab".repeat(32),
        model: "isotropic".into(),
        rule: "guarded".into(),
        rule_description: "guarded acceptance".into(),
        coverage_factor: 2.0,
        nominal_n_per_m: 2000.0,
        lower_n_per_m: 1800.0,
        upper_n_per_m: 2200.0,
        generated: "2026-12-02T00:00:00Z".into(),
        entries,
        ..Default::default()
    }
}

#[test]
fn report_lists_decisions_statistics_and_the_unmeasured() {
    let mut e = vec![
        entry("a.wav", "pass", Some(2000.0)),
        entry("b.wav", "fail", Some(1500.0)),
        entry("c.wav", "indeterminate", Some(1810.0)),
        entry("d.wav", "error", None),
    ];
    e.push(BatchEntry {
        reason: Some("grade doubtful".into()),
        ..entry("e.wav", "not_measured", None)
    });
    let s = summary(e);
    let dir = tempfile::tempdir().unwrap();
    let written = write_batch_report(dir.path(), &s).unwrap();
    let md = std::fs::read_to_string(dir.path().join(MARKDOWN_NAME)).unwrap();
    // The tally, the statistics on the three measured values only,
    // and both unmeasured recordings with their reasons.
    assert!(
        md.contains("| pass | 1 |") && md.contains("| fail | 1 |"),
        "{md}"
    );
    assert!(md.contains("| **all** | **5** |"));
    assert!(
        md.contains("3 measured recordings; mean 1770.0 N/m"),
        "{md}"
    );
    assert!(md.contains("not a WAV file") && md.contains("grade doubtful"));
    assert!(md.contains("Cpk") && md.contains("min(USL − μ, μ − LSL)/(3σ̂)"));
    assert!(md.contains("does not measure anisotropy"));
    // A `|` in a name does not break the table.
    assert!(md.contains("screen | test"));
    let html = std::fs::read_to_string(dir.path().join(HTML_NAME)).unwrap();
    assert!(html.contains("data:image/png;base64,iVBORw0KGgo"));
    assert!(!html.contains("src=\"batch-"), "pictures are embedded");
    for name in [HISTOGRAM_NAME, RUN_CHART_NAME] {
        let p = dir.path().join(name);
        assert!(written.contains(&p));
        let bytes = std::fs::read(&p).unwrap();
        assert_eq!(&bytes[1..4], b"PNG");
        // Width and height from the IHDR chunk.
        let w = u32::from_be_bytes(bytes[16..20].try_into().unwrap());
        assert_eq!(w, PICTURE_WIDTH_PX);
    }
    assert!(!dir.path().join(ANISOTROPY_NAME).exists());
}

#[test]
fn anisotropy_is_drawn_when_the_model_gives_it() {
    let e: Vec<BatchEntry> = (0..20)
        .map(|i| BatchEntry {
            anisotropy_percent: Some(-3.0 + 0.3 * i as f64),
            anisotropy_u_percent: Some(0.1),
            ..entry(&format!("m{i}.wav"), "pass", Some(1950.0 + 5.0 * i as f64))
        })
        .collect();
    let mut s = summary(e);
    s.model = "biaxial".into();
    s.max_anisotropy_percent = Some(5.0);
    let dir = tempfile::tempdir().unwrap();
    write_batch_report(dir.path(), &s).unwrap();
    assert!(dir.path().join(ANISOTROPY_NAME).exists());
    let md = std::fs::read_to_string(dir.path().join(MARKDOWN_NAME)).unwrap();
    assert!(
        md.contains("Anisotropy 100·(Tx − Ty)/((Tx + Ty)/2) of 20 recordings"),
        "{md}"
    );
    assert!(md.contains("Only 20 measured recordings"));
    assert!(md.contains("Limit |a| ≤ 5 %"), "{md}");
}

#[test]
fn unevenness_and_an_interruption_are_reported() {
    let mut e: Vec<BatchEntry> = (0..12)
        .map(|i| BatchEntry {
            unevenness_percent: Some(0.5 + 0.25 * i as f64),
            unevenness_u_percent: Some(0.2),
            unevenness_decision: Some(if i < 8 { "pass" } else { "fail" }.into()),
            ..entry(&format!("h{i}.wav"), "pass", Some(2000.0))
        })
        .collect();
    e.push(entry("even.wav", "pass", Some(2010.0)));
    let mut s = summary(e);
    s.max_unevenness_percent = Some(2.5);
    s.unevenness_applies = true;
    s.interrupted = Some(Interruption {
        signal: "SIGINT".into(),
        signal_number: 2,
        decided: 13,
        total: Some(40),
    });
    let dir = tempfile::tempdir().unwrap();
    write_batch_report(dir.path(), &s).unwrap();
    assert!(dir.path().join(UNEVENNESS_NAME).exists());
    let md = std::fs::read_to_string(dir.path().join(MARKDOWN_NAME)).unwrap();
    assert!(md.contains("interrupted by SIGINT"), "{md}");
    assert!(
        md.contains("13 of 40 recordings were decided, 27 were not"),
        "{md}"
    );
    assert!(md.contains("of 12 recordings: mean 1.88 %"), "{md}");
    assert!(md.contains("8 within the limit, 4 beyond it"), "{md}");
    assert!(
        md.contains("1 measured recording(s) resolved no split pair"),
        "{md}"
    );
}

#[test]
fn nothing_measured_still_makes_a_report() {
    let s = summary(vec![entry("x.wav", "error", None)]);
    let dir = tempfile::tempdir().unwrap();
    write_batch_report(dir.path(), &s).unwrap();
    let md = std::fs::read_to_string(dir.path().join(MARKDOWN_NAME)).unwrap();
    assert!(md.contains("No recording was measured"));
    assert!(md.contains("no control chart"));
    assert!(!dir.path().join(HISTOGRAM_NAME).exists());
}

#[test]
fn spool_publishes_whole_files() {
    let dir = tempfile::tempdir().unwrap();
    let p = dir.path().join("rows.csv");
    let mut s = Spool::create(&p, b"a,b\n").unwrap();
    s.append(b"1,2\n").unwrap();
    assert!(!p.exists(), "nothing published yet");
    s.publish().unwrap();
    assert_eq!(std::fs::read_to_string(&p).unwrap(), "a,b\n1,2\n");
    s.append(b"3,4\n").unwrap();
    assert_eq!(std::fs::read_to_string(&p).unwrap(), "a,b\n1,2\n");
    s.finish().unwrap();
    assert_eq!(std::fs::read_to_string(&p).unwrap(), "a,b\n1,2\n3,4\n");
    let left: Vec<_> = std::fs::read_dir(dir.path()).unwrap().collect();
    assert_eq!(left.len(), 1, "no spool or temporary file left");
}
