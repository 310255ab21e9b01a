//! One recording of a batch: read, measure, decide, and format its record,
//! history row and CSV row on a worker thread; and whether a decision is
//! settled without the refinement.

use super::record::{csv_row, frequency_method};
use crate::acceptance::decision::{Decision, DecisionInput, Verdict};
use crate::acceptance::history::{RecordingContext, Row};
use crate::acceptance::spec::Spec;
use crate::app::options::Refinement;
use crate::base::error::Result;
use crate::base::estimate::Estimate;
use crate::base::hash::sha256_hex;
use crate::base::time::UtcTime;
use crate::base::units::TensionUnit;
use crate::fitting::pipeline;
use crate::report;
use crate::report::batch::BatchEntry;
use crate::signal::recording::{self, ChannelChoice};
use std::cell::RefCell;
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicU64, Ordering};
use std::time::Instant;

/// Where the batch writes.
#[derive(Debug, Clone)]
pub struct InspectOptions {
    /// Folder for `inspect.csv`, `inspect.jsonl` and the batch report.
    pub out: PathBuf,
    /// History database (None: no history).
    pub history: Option<PathBuf>,
    /// Station name.
    pub station: Option<String>,
    /// Operator name.
    pub operator: Option<String>,
    /// Show a progress bar, when standard error is a terminal.
    pub progress: bool,
    /// How much of the damped-sinusoid refinement the batch spends.
    pub refinement: Refinement,
}

/// A decision is settled when it stays the same with the tension (and the
/// anisotropy, where measured) moved this many of the fit's own standard
/// uncertainties either way ([`Refinement::NearLimits`]). The refined and
/// the FFT-peak tensions of one recording differ by about one fit
/// uncertainty (the FFT fit's carries a Type B term for its peak method),
/// and the guard band w = k·u changes by less than k fit uncertainties;
/// 10 leaves a wide margin over both with k = 2.
pub const NEAR_LIMIT_FIT_U: f64 = 10.0;

/// Whether `m`'s decision under `spec` is settled ([`Refinement::NearLimits`]):
/// the specification sets no unevenness limit, and the measurement has a
/// tension, is decided (not "not measured"), and keeps its decision when
/// the tension, and the anisotropy if any, move by [`NEAR_LIMIT_FIT_U`]
/// of their fit uncertainties either way.
pub fn decision_is_settled(spec: &Spec, m: &pipeline::Measurement) -> bool {
    // Unevenness comes from split pairs, which only the refinement
    // resolves below the FFT's resolution: a limit on it always refines.
    if spec.limits.max_unevenness_percent.is_some() {
        return false;
    }
    let input = spec.decision_input(m);
    let base = spec.decide(m).decision;
    if matches!(base, Decision::NotMeasured { .. }) {
        return false;
    }
    let (Some(t), Some(fit_t)) = (input.tension, m.tension) else {
        return false;
    };
    let same = |inp: &DecisionInput| {
        crate::acceptance::decision::decide(inp, &spec.limits, &spec.rule)
            .decision
            .name()
            == base.name()
    };
    // The decision with one input moved by ±step.
    let holds = |shift: &dyn Fn(&mut DecisionInput, f64), step: f64| {
        [-step, step].iter().all(|&d| {
            let mut inp = input.clone();
            shift(&mut inp, d);
            same(&inp)
        })
    };
    let moved = |e: Estimate, d: f64| {
        Some(Estimate {
            value: e.value + d,
            ..e
        })
    };
    let tension_ok = holds(
        &|inp, d| inp.tension = moved(t, d),
        NEAR_LIMIT_FIT_U * fit_t.standard_uncertainty,
    );
    let anisotropy_ok = input.anisotropy_percent.is_none_or(|a| {
        holds(
            &|inp, d| inp.anisotropy_percent = moved(a, d),
            NEAR_LIMIT_FIT_U * a.standard_uncertainty,
        )
    });
    tension_ok && anisotropy_ok
}

/// Seconds spent in each stage of a batch; the parallel stages are summed
/// over threads.
#[derive(Debug, Clone, Copy, Default)]
pub struct StageTiming {
    /// Reading the file and its SHA-256 (parallel).
    pub read_s: f64,
    /// Decoding the recording (parallel).
    pub decode_s: f64,
    /// The measurement: partials, matching, fit, grade (parallel).
    pub measure_s: f64,
    /// Deciding and formatting the JSON record, the history row and the
    /// CSV row (parallel).
    pub record_s: f64,
    /// History inserts (writer thread).
    pub history_s: f64,
    /// Publishing the CSV and JSON Lines files (writer thread).
    pub flush_s: f64,
    /// The batch report.
    pub report_s: f64,
    /// The whole call.
    pub wall_s: f64,
}

/// One recording's outcome, formatted on the worker thread.
pub(super) struct Item {
    pub(super) row: Option<Row>,
    pub(super) csv_row: Vec<u8>,
    pub(super) json_line: String,
    pub(super) entry: BatchEntry,
}

thread_local! {
    /// One FFT planner per thread: plans are cached by length, and every
    /// recording of a batch has about the same length.
    static PLANNER: RefCell<realfft::RealFftPlanner<f64>> = RefCell::new(realfft::RealFftPlanner::new());
}

/// Nanosecond counters behind [`StageTiming`]'s parallel stages.
#[derive(Default)]
pub(super) struct Counters {
    pub(super) read_ns: AtomicU64,
    pub(super) decode_ns: AtomicU64,
    pub(super) measure_ns: AtomicU64,
    pub(super) record_ns: AtomicU64,
}

fn add_elapsed(counter: &AtomicU64, since: Instant) {
    let ns = u64::try_from(since.elapsed().as_nanos()).unwrap_or(u64::MAX);
    counter.fetch_add(ns, Ordering::Relaxed);
}

pub(super) fn decide_one(
    spec: &Spec,
    file: &Path,
    opts: &InspectOptions,
    counters: &Counters,
) -> Item {
    let t0 = Instant::now();
    // One clock read stamps the CSV row and the history row alike.
    let time = UtcTime::now();
    let bytes = std::fs::read(file);
    let sha = bytes.as_ref().map(|b| sha256_hex(b)).unwrap_or_default();
    drop(bytes);
    add_elapsed(&counters.read_ns, t0);
    let t1 = Instant::now();
    let result = (|| -> Result<(Row, serde_json::Value, BatchEntry)> {
        let rec = recording::read_audio(file, ChannelChoice::MixDown);
        add_elapsed(&counters.decode_ns, t1);
        let rec = rec?;
        let t2 = Instant::now();
        let (m, refined) = measure(spec, &rec, opts.refinement);
        add_elapsed(&counters.measure_ns, t2);
        let m = m?;
        let t3 = Instant::now();
        let verdict = spec.decide(&m);
        let record = json_record(spec, file, &m, &verdict, &sha, refined);
        let ctx = RecordingContext {
            recording_sha256: sha.clone(),
            recording_path: file.display().to_string(),
            station: opts.station.clone(),
            operator: opts.operator.clone(),
        };
        let mut row = Row::from_decision(&ctx, spec, &m, &verdict, record.to_string());
        row.time = time;
        let entry = batch_entry(spec, file, &m, &verdict, refined);
        add_elapsed(&counters.record_ns, t3);
        Ok((row, record, entry))
    })();
    match result {
        Ok((row, json, entry)) => Item {
            csv_row: csv_row(&sha, time, Some(&row), &json, None),
            row: Some(row),
            json_line: json.to_string(),
            entry,
        },
        Err(e) => {
            let json =
                serde_json::json!({"file": file.display().to_string(), "error": e.to_string()});
            let entry = BatchEntry {
                file: file.display().to_string(),
                decision: "error".into(),
                reason: Some(e.to_string()),
                ..Default::default()
            };
            Item {
                row: None,
                csv_row: csv_row(&sha, time, None, &json, Some(&e.to_string())),
                json_line: json.to_string(),
                entry,
            }
        }
    }
}

/// Measures a recording with the specification's panel and model, on its
/// FFT peaks or refined as `refinement` says; also returns whether the
/// result is refined.
fn measure(
    spec: &Spec,
    rec: &recording::Recording,
    refinement: Refinement,
) -> (Result<pipeline::Measurement>, bool) {
    let panel = spec.panel();
    let measure = |refine: bool| {
        let fit_opts = pipeline::FitOptions {
            model: spec.model.fit_model(),
            analysis: crate::signal::partials::AnalysisConfig {
                refine,
                ..Default::default()
            },
            calibration: spec.calibration.clone(),
            aspect_search: true,
        };
        PLANNER.with(|p| pipeline::measure_with(rec, &panel, &fit_opts, &mut p.borrow_mut()))
    };
    let refined = refinement == Refinement::Always;
    let m = measure(refined);
    match &m {
        Ok(first) if refinement == Refinement::NearLimits && !decision_is_settled(spec, first) => {
            (measure(true), true)
        }
        _ => (m, refined),
    }
}

/// The JSON record of a decided recording: the fit record with the
/// decision, the specification, the recording's SHA-256 and the frequency
/// method.
fn json_record(
    spec: &Spec,
    file: &Path,
    m: &pipeline::Measurement,
    verdict: &Verdict,
    sha: &str,
    refined: bool,
) -> serde_json::Value {
    let mut record = report::json::fit_record(file, m, TensionUnit::NewtonPerMeter);
    if let serde_json::Value::Object(o) = &mut record {
        o.insert(
            "decision".into(),
            serde_json::to_value(verdict).unwrap_or_default(),
        );
        o.insert(
            "spec".into(),
            serde_json::json!({
                "name": spec.name,
                "version": spec.version,
                "sha256": spec.hash,
                "model": spec.model.name(),
                "calibration": spec.calibration.as_ref().map(|c| serde_json::json!({
                    "file": c.path.display().to_string(),
                    "sha256": spec.calibration_sha256,
                })),
            }),
        );
        o.insert(
            "recording_sha256".into(),
            serde_json::Value::String(sha.to_string()),
        );
        o.insert(
            "frequency_method".into(),
            serde_json::Value::String(frequency_method(refined).into()),
        );
    }
    record
}

/// The batch report's entry of a decided recording.
fn batch_entry(
    spec: &Spec,
    file: &Path,
    m: &pipeline::Measurement,
    verdict: &Verdict,
    refined: bool,
) -> BatchEntry {
    let input = spec.decision_input(m);
    BatchEntry {
        refined,
        file: file.display().to_string(),
        decision: verdict.decision.name().to_string(),
        tension_n_per_m: input.tension.map(|t| t.value),
        tension_u_n_per_m: input.tension.map(|t| t.standard_uncertainty),
        expanded_u_n_per_m: verdict.expanded_uncertainty_n_per_m,
        margin_n_per_m: verdict.margin.map(|mg| mg.n_per_m),
        nearest_limit: verdict
            .margin
            .map(|mg| format!("{:?}", mg.nearest_limit).to_lowercase()),
        anisotropy_percent: input.anisotropy_percent.map(|a| a.value),
        anisotropy_u_percent: input.anisotropy_percent.map(|a| a.standard_uncertainty),
        unevenness_percent: input.unevenness_percent.map(|e| e.value),
        unevenness_u_percent: input.unevenness_percent.map(|e| e.standard_uncertainty),
        anisotropy_decision: verdict.anisotropy.as_ref().map(|j| j.decision.to_string()),
        unevenness_decision: verdict.unevenness.as_ref().map(|j| j.decision.to_string()),
        grade: Some(m.quality.grade.name().to_string()),
        reason: match &verdict.decision {
            Decision::NotMeasured { reason } => Some(reason.clone()),
            _ => None,
        },
    }
}
