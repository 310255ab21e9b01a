//! The text of one recording's outcome: the line printed for it and its
//! CSV row.

use crate::acceptance::history::Row;
use crate::base::time::UtcTime;
use crate::report::batch::BatchEntry;
use std::path::Path;

/// The line printed for each recording of a batch.
pub(super) fn batch_line(e: &BatchEntry) -> String {
    if e.decision == "error" {
        return format!(
            "{:<14} {:<30} {}",
            "ERROR",
            e.file,
            e.reason.as_deref().unwrap_or("")
        );
    }
    let t = e
        .tension_n_per_m
        .map(|t| format!("{t:.1} N/m"))
        .unwrap_or_else(|| "–".into());
    let margin = match (e.margin_n_per_m, &e.nearest_limit) {
        (Some(m), Some(side)) => format!("margin {m:+.1} N/m to the {side} limit"),
        _ => String::new(),
    };
    format!(
        "{:<14} {:<30} {:>12}  {}{}",
        e.decision.to_uppercase(),
        e.file,
        t,
        margin,
        limit_notes(e)
    )
}

/// The anisotropy and unevenness judgements that did not pass, for the
/// printed lines ("; anisotropy +9.10 % fails its limit"): without them a
/// recording failed on its anisotropy would show only a comfortable
/// tension margin.
fn limit_notes(e: &BatchEntry) -> String {
    let mut out = String::new();
    let mut note = |what: &str, v: Option<f64>, d: &Option<String>| {
        if let (Some(v), Some(d)) = (v, d.as_deref()) {
            if d != "pass" {
                let verb = if d == "fail" {
                    "fails"
                } else {
                    "is indeterminate at"
                };
                out.push_str(&format!("; {what} {v:+.2} % {verb} its limit"));
            }
        }
    };
    note("anisotropy", e.anisotropy_percent, &e.anisotropy_decision);
    note("unevenness", e.unevenness_percent, &e.unevenness_decision);
    out
}

/// The one big line of the watch mode: the decision framed so that it
/// reads from across the room, the tension, the margin, the file.
pub fn station_line(e: &BatchEntry) -> String {
    let word = match e.decision.as_str() {
        "not_measured" => "NOT MEASURED".to_string(),
        other => other.to_uppercase(),
    };
    let framed = format!("{:=^20}", format!(" {word} "));
    let file = Path::new(&e.file)
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_else(|| e.file.clone());
    match (e.tension_n_per_m, e.margin_n_per_m, &e.nearest_limit) {
        (Some(t), Some(m), Some(side)) if e.decision != "not_measured" => {
            format!(
                "{framed}  T = {t:.1} N/m  margin {m:+.1} N/m to the {side} limit{}  {file}",
                limit_notes(e)
            )
        }
        _ => format!(
            "{framed}  {}  {file}",
            e.reason.as_deref().unwrap_or("no decision")
        ),
    }
}

/// The `frequency_method` of a record: `refined` (damped-sinusoid fits
/// of the modes) or `fft_peaks` (sub-bin FFT peaks only).
pub(super) fn frequency_method(refined: bool) -> &'static str {
    if refined {
        "refined"
    } else {
        "fft_peaks"
    }
}

pub(super) const CSV_HEADER: [&str; 22] = [
    "file",
    "sha256",
    "time",
    "tension_n_per_m",
    "tension_u_n_per_m",
    "expanded_u_n_per_m",
    "wave_speed_m_per_s",
    "wave_speed_u_m_per_s",
    "modes_used",
    "rms_residual_cents",
    "grade",
    "decision",
    "rule",
    "margin_n_per_m",
    "reasons",
    "error",
    "anisotropy_percent",
    "anisotropy_u_percent",
    "unevenness_percent",
    "unevenness_u_percent",
    "calibration_sha256",
    "frequency_method",
];

pub(super) fn csv_record(fields: &[String]) -> Vec<u8> {
    let mut w = csv::WriterBuilder::new()
        .has_headers(false)
        .from_writer(Vec::new());
    // Writing to memory cannot fail; an empty row would show as such.
    let _ = w.write_record(fields);
    w.into_inner().unwrap_or_default()
}

pub(super) fn csv_row(
    sha: &str,
    time: UtcTime,
    r: Option<&Row>,
    json: &serde_json::Value,
    error: Option<&str>,
) -> Vec<u8> {
    let d = &json["decision"];
    let f = |v: Option<f64>| v.map(|x| format!("{x:.4}")).unwrap_or_default();
    let fields = [
        json["file"].as_str().unwrap_or_default().to_string(),
        sha.to_string(),
        time.to_rfc3339(),
        f(r.and_then(|r| r.tension_n_per_m)),
        f(r.and_then(|r| r.tension_u_n_per_m)),
        f(d["expanded_uncertainty_n_per_m"].as_f64()),
        f(r.and_then(|r| r.wave_speed_m_per_s)),
        f(r.and_then(|r| r.wave_speed_u_m_per_s)),
        r.and_then(|r| r.modes_used)
            .map(|m| m.to_string())
            .unwrap_or_default(),
        f(r.and_then(|r| r.rms_residual_cents)),
        r.map(|r| r.grade.clone()).unwrap_or_default(),
        r.map(|r| r.decision.clone())
            .unwrap_or_else(|| "error".into()),
        r.map(|r| r.rule.clone()).unwrap_or_default(),
        f(d["margin"]["n_per_m"].as_f64()),
        r.map(|r| r.reasons.join("; ")).unwrap_or_default(),
        error.unwrap_or_default().to_string(),
        f(r.and_then(|r| r.anisotropy_percent)),
        f(r.and_then(|r| r.anisotropy_u_percent)),
        f(r.and_then(|r| r.unevenness_percent)),
        f(r.and_then(|r| r.unevenness_u_percent)),
        r.and_then(|r| r.calibration_sha256.clone())
            .unwrap_or_default(),
        json["frequency_method"]
            .as_str()
            .unwrap_or_default()
            .to_string(),
    ];
    csv_record(&fields)
}
#[cfg(test)]
mod tests {
    use super::*;

    fn entry(decision: &str, aniso: Option<(&str, f64)>) -> BatchEntry {
        BatchEntry {
            file: "m.wav".into(),
            decision: decision.into(),
            tension_n_per_m: Some(1983.5),
            margin_n_per_m: Some(183.5),
            nearest_limit: Some("lower".into()),
            anisotropy_percent: aniso.map(|a| a.1),
            anisotropy_decision: aniso.map(|a| a.0.to_string()),
            ..Default::default()
        }
    }

    #[test]
    fn lines_name_a_failed_anisotropy() {
        let failed = entry("fail", Some(("fail", 9.0955)));
        assert!(
            batch_line(&failed).ends_with("; anisotropy +9.10 % fails its limit"),
            "{}",
            batch_line(&failed)
        );
        assert!(station_line(&failed).contains("; anisotropy +9.10 % fails its limit"));
        let near = entry("indeterminate", Some(("indeterminate", -4.99)));
        assert!(batch_line(&near).contains("anisotropy -4.99 % is indeterminate at its limit"));
        // A passed judgement, or none, adds nothing.
        for e in [entry("pass", Some(("pass", 1.0))), entry("pass", None)] {
            assert!(!batch_line(&e).contains("anisotropy"), "{}", batch_line(&e));
        }
    }
}
