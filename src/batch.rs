//! `inspect`: decide a batch of recordings against a specification, in
//! parallel, with a record of every decision.
//!
//! Each recording is read, fitted with the specification's panel and
//! decided by its rule ([`crate::decision`]). A file that cannot be read or
//! fitted becomes a row with its error; the batch goes on. Every decision
//! goes into the SQLite history as soon as it is made (each row its own
//! transaction, so a crash keeps every completed row). The CSV table and
//! the JSON Lines file are written atomically (temporary file, rename)
//! every [`FLUSH_EVERY`] recordings and at the end, so they are never half
//! written and never lag far behind the history.
//!
//! CSV columns: `file,sha256,time,tension_n_per_m,tension_u_n_per_m,
//! expanded_u_n_per_m,wave_speed_m_per_s,wave_speed_u_m_per_s,modes_used,
//! rms_residual_cents,grade,decision,rule,margin_n_per_m,reasons,error`.

use crate::commands::Outcome;
use crate::decision::Decision;
use crate::error::{Result, TonusError};
use crate::history::{History, RecordingContext, Row, UtcTime};
use crate::pipeline;
use crate::recording::{self, ChannelChoice};
use crate::report;
use crate::spec::{sha256_hex, Spec};
use crate::units::TensionUnit;
use rayon::prelude::*;
use std::path::{Path, PathBuf};

/// Recordings between two rewrites of the CSV and JSON Lines files.
pub const FLUSH_EVERY: usize = 64;

/// Where the batch writes.
#[derive(Debug, Clone)]
pub struct InspectOptions {
    /// Folder for `inspect.csv` and `inspect.jsonl`.
    pub out: PathBuf,
    /// History database (None: no history).
    pub history: Option<PathBuf>,
    /// Station name.
    pub station: Option<String>,
    /// Operator name.
    pub operator: Option<String>,
}

/// Expands folders into their `.wav` files (sorted); files are kept as
/// given.
///
/// # Errors
/// A path that does not exist.
pub fn expand_inputs(inputs: &[PathBuf]) -> Result<Vec<PathBuf>> {
    let mut out = Vec::new();
    for p in inputs {
        if p.is_dir() {
            let mut v: Vec<PathBuf> = std::fs::read_dir(p)
                .map_err(|e| TonusError::Io {
                    path: p.clone(),
                    reason: e.to_string(),
                })?
                .filter_map(|e| e.ok().map(|e| e.path()))
                .filter(|x| x.extension().is_some_and(|e| e.eq_ignore_ascii_case("wav")))
                .collect();
            v.sort();
            out.extend(v);
        } else {
            out.push(p.clone());
        }
    }
    Ok(out)
}

/// One recording's outcome.
struct Item {
    file: PathBuf,
    sha: String,
    time: UtcTime,
    row: Option<Row>,
    json: serde_json::Value,
    error: Option<String>,
    line: String,
}

fn decide_one(spec: &Spec, file: &Path, opts: &InspectOptions) -> Item {
    let time = UtcTime::now();
    let bytes = std::fs::read(file);
    let sha = bytes.as_ref().map(|b| sha256_hex(b)).unwrap_or_default();
    let result = (|| -> Result<(Row, serde_json::Value, String)> {
        let rec = recording::read_wav(file, ChannelChoice::MixDown)?;
        let panel = spec.panel();
        let fit_opts = pipeline::FitOptions {
            model: spec.model.fit_model(),
            analysis: Default::default(),
            calibration: None,
        };
        let m = pipeline::measure(&rec, &panel, &fit_opts)?;
        let verdict = spec.decide(&m);
        let mut record = report::json::fit_record(file, &m, TensionUnit::NewtonPerMeter);
        if let serde_json::Value::Object(o) = &mut record {
            o.insert(
                "decision".into(),
                serde_json::to_value(&verdict).unwrap_or_default(),
            );
            o.insert("spec".into(), serde_json::json!({"name": spec.name, "version": spec.version, "sha256": spec.hash}));
            o.insert(
                "recording_sha256".into(),
                serde_json::Value::String(sha.clone()),
            );
        }
        let ctx = RecordingContext {
            recording_sha256: sha.clone(),
            recording_path: file.display().to_string(),
            station: opts.station.clone(),
            operator: opts.operator.clone(),
        };
        let row = Row::from_decision(&ctx, spec, &m, &verdict, record.to_string());
        let t = m
            .tension
            .map(|t| format!("{:.1} N/m", t.value))
            .unwrap_or_else(|| "–".into());
        let margin = verdict
            .margin
            .as_ref()
            .map(|mg| {
                format!(
                    "margin {:+.1} N/m to the {} limit",
                    mg.n_per_m,
                    format!("{:?}", mg.nearest_limit).to_lowercase()
                )
            })
            .unwrap_or_default();
        let line = format!(
            "{:<14} {:<30} {:>12}  {}",
            verdict.decision.name().to_uppercase(),
            file.display(),
            t,
            margin
        );
        Ok((row, record, line))
    })();
    match result {
        Ok((row, json, line)) => Item {
            file: file.to_path_buf(),
            sha,
            time,
            row: Some(row),
            json,
            error: None,
            line,
        },
        Err(e) => Item {
            file: file.to_path_buf(),
            sha,
            time,
            row: None,
            json: serde_json::json!({"file": file.display().to_string(), "error": e.to_string()}),
            error: Some(e.to_string()),
            line: format!("{:<14} {:<30} {}", "ERROR", file.display(), e),
        },
    }
}

fn csv_text(items: &[Item]) -> Result<String> {
    let mut w = csv::Writer::from_writer(Vec::new());
    let err = |e: csv::Error| TonusError::Write {
        path: PathBuf::from("inspect.csv"),
        reason: e.to_string(),
    };
    w.write_record([
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
    ])
    .map_err(err)?;
    let f = |v: Option<f64>| v.map(|x| format!("{x:.4}")).unwrap_or_default();
    for it in items {
        let r = it.row.as_ref();
        let d = &it.json["decision"];
        w.write_record([
            it.file.display().to_string(),
            it.sha.clone(),
            it.time.to_rfc3339(),
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
            it.error.clone().unwrap_or_default(),
        ])
        .map_err(err)?;
    }
    let bytes = w.into_inner().map_err(|e| TonusError::Write {
        path: PathBuf::from("inspect.csv"),
        reason: e.to_string(),
    })?;
    Ok(String::from_utf8_lossy(&bytes).into_owned())
}

fn flush(out: &Path, items: &[Item]) -> Result<()> {
    report::write_atomic(&out.join("inspect.csv"), csv_text(items)?.as_bytes())?;
    let mut lines = String::new();
    for it in items {
        lines.push_str(&it.json.to_string());
        lines.push('\n');
    }
    report::write_atomic(&out.join("inspect.jsonl"), lines.as_bytes())
}

/// Decides every recording; exit 0 if all pass, 1 otherwise.
///
/// # Errors
/// An unusable output folder or history database (a bad recording is a
/// row, not an error).
pub fn inspect(spec: &Spec, files: &[PathBuf], opts: &InspectOptions) -> Result<Outcome> {
    std::fs::create_dir_all(&opts.out).map_err(|e| TonusError::Write {
        path: opts.out.clone(),
        reason: e.to_string(),
    })?;
    let mut history = opts.history.as_deref().map(History::open).transpose()?;
    let mut items: Vec<Item> = Vec::with_capacity(files.len());
    let mut stdout = String::new();
    let mut all_pass = true;
    for chunk in files.chunks(FLUSH_EVERY) {
        let done: Vec<Item> = chunk
            .par_iter()
            .map(|f| decide_one(spec, f, opts))
            .collect();
        for it in done {
            if let (Some(h), Some(row)) = (history.as_mut(), it.row.as_ref()) {
                h.insert(row)?;
            }
            let pass = it
                .row
                .as_ref()
                .is_some_and(|r| r.decision == Decision::Pass.name());
            all_pass &= pass;
            stdout.push_str(&it.line);
            stdout.push('\n');
            items.push(it);
        }
        flush(&opts.out, &items)?;
    }
    Ok(Outcome {
        stdout,
        stderr: String::new(),
        exit: if all_pass { 0 } else { 1 },
    })
}
