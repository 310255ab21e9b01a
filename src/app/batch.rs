//! `inspect`: decide a batch of recordings against a specification, in
//! parallel, with a record of every decision; and `inspect --watch`, the
//! station mode that decides each recording as it lands in a folder.
//!
//! Each recording is read, fitted with the specification's panel and
//! decided by its rule ([`crate::acceptance::decision`]). A file that cannot be read or
//! fitted becomes a row with its error; the batch goes on.
//!
//! # Outputs and crash safety
//!
//! - Every decision goes into the SQLite history as soon as it is made
//!   (each row its own transaction, so a crash keeps every completed row).
//! - `inspect.csv` and `inspect.jsonl` grow in private spool files
//!   ([`report::batch::Spool`]) and are published atomically (copy,
//!   rename) after every [`FLUSH_EVERY`] recordings but at most once per
//!   [`FLUSH_INTERVAL`], and at the end; in watch mode after every
//!   recording. They are never half written, and memory does not grow
//!   with the batch.
//! - The batch report (`batch-report.md`, `batch-report.html` and its
//!   pictures, [`report::batch`]) is written at the end.
//!
//! # Parallelism
//!
//! Recordings are decided in chunks of [`FLUSH_EVERY`] on the rayon pool by
//! a compute thread, one chunk ahead of the calling thread, which writes
//! the history rows and outputs in batch order. Each rayon thread keeps its
//! own FFT planner.
//!
//! # Watch mode
//!
//! The folder is listed every poll interval. Files already there when the
//! watch starts are left alone. A new file counts as landed when its name
//! ends in `.wav`, `.flac`, `.aif`, `.aiff` or `.aifc` (any case) and its size (non-zero) and modification time
//! are the same in two consecutive polls. Writers should write under
//! another name (`NAME.wav.part`, `NAME.tmp`) and rename to `NAME.wav`
//! when done, which is atomic on one file system; the stability test
//! covers copies that do not.
//!
//! # Stopping: SIGINT and SIGTERM
//!
//! With [`stop_on_signals`] installed (the binary does so for `inspect`),
//! the first SIGINT (Ctrl-C) or SIGTERM asks the batch to stop: no new
//! recording is started, the recordings in flight are decided and
//! recorded, the CSV and JSON Lines files are published, and the batch
//! report of everything decided is written, saying that the run was
//! interrupted and how many recordings of how many were decided. The exit
//! status is then 128 + the signal number (130 for SIGINT, 143 for
//! SIGTERM), whatever the decisions, so that a script never takes a cut
//! batch for a whole one; the decisions themselves are in the outputs. A
//! batch whose every recording was decided before the signal came exits
//! as usual. A second signal ends the process at once (status 128 + the
//! signal): the history keeps every row already committed, and the CSV,
//! JSON Lines and report are as last published.
//!
//! CSV columns: `file,sha256,time,tension_n_per_m,tension_u_n_per_m,
//! expanded_u_n_per_m,wave_speed_m_per_s,wave_speed_u_m_per_s,modes_used,
//! rms_residual_cents,grade,decision,rule,margin_n_per_m,reasons,error,
//! anisotropy_percent,anisotropy_u_percent,unevenness_percent,
//! unevenness_u_percent,calibration_sha256` — the anisotropy (biaxial
//! model, 100·(Tx − Ty)/((Tx + Ty)/2)) and the unevenness (the spread
//! 2|ε| from resolved split pairs, circle or square panel) with their
//! standard uncertainties in percent, empty when not measured; the
//! SHA-256 of the specification's calibration file, empty without one.

use crate::acceptance::decision::{Decision, DecisionInput};
use crate::acceptance::history::{History, RecordingContext, Row};
use crate::acceptance::spec::Spec;
use crate::app::commands::Outcome;
use crate::app::options::{Refinement, WatchOptions};
use crate::base::error::{Result, TonusError};
use crate::base::estimate::Estimate;
use crate::base::hash::sha256_hex;
use crate::base::time::UtcTime;
use crate::base::units::TensionUnit;
use crate::fitting::pipeline;
use crate::report;
use crate::report::batch::{BatchEntry, BatchSummary, Spool};
use crate::signal::recording::{self, ChannelChoice};
use indicatif::{ProgressBar, ProgressStyle};
use rayon::prelude::*;
use std::cell::RefCell;
use std::collections::{HashMap, HashSet};
use std::io::IsTerminal;
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicI32, AtomicU64, Ordering};
use std::time::{Duration, Instant, SystemTime};

/// Recordings decided together, and between two publications of the CSV
/// and JSON Lines files.
pub const FLUSH_EVERY: usize = 64;
/// Shortest time between two publications of the CSV and JSON Lines files
/// during a batch (each publication copies the whole file).
pub const FLUSH_INTERVAL: Duration = Duration::from_secs(1);
/// The signal that asked the batch to stop (0: none yet).
static STOP_SIGNAL: AtomicI32 = AtomicI32::new(0);

/// Slice of the watch mode's wait between two listings, so that a stop
/// request is seen within this time.
const STOP_POLL: Duration = Duration::from_millis(50);

extern "C" fn on_stop_signal(sig: libc::c_int) {
    // Only async-signal-safe work here: an atomic swap, and `_exit` on
    // the second signal.
    if STOP_SIGNAL.swap(sig, Ordering::SeqCst) != 0 {
        // SAFETY: `_exit` is async-signal-safe and ends the process
        // without running destructors or atexit handlers.
        unsafe { libc::_exit(128 + sig) };
    }
}

/// Makes SIGINT and SIGTERM a graceful stop of [`inspect`] and [`watch`]
/// (see the module notes): the first one sets a flag the batch polls, a
/// second one ends the process at once.
///
/// # Errors
/// [`TonusError::Io`] when the handler cannot be installed.
pub fn stop_on_signals() -> Result<()> {
    for sig in [libc::SIGINT, libc::SIGTERM] {
        // SAFETY: the action is zero-initialised (a valid `sigaction`),
        // its mask emptied with `sigemptyset`, and the handler only does
        // async-signal-safe work.
        let rc = unsafe {
            let mut sa: libc::sigaction = std::mem::zeroed();
            sa.sa_sigaction = on_stop_signal as extern "C" fn(libc::c_int) as libc::sighandler_t;
            libc::sigemptyset(&mut sa.sa_mask);
            sa.sa_flags = libc::SA_RESTART;
            libc::sigaction(sig, &sa, std::ptr::null_mut())
        };
        if rc != 0 {
            return Err(TonusError::Io {
                path: PathBuf::from("signal handler"),
                reason: format!(
                    "cannot install the handler for signal {sig}: {}",
                    std::io::Error::last_os_error()
                ),
            });
        }
    }
    Ok(())
}

/// The signal that asked for a stop, if any.
fn stop_requested() -> Option<i32> {
    match STOP_SIGNAL.load(Ordering::SeqCst) {
        0 => None,
        s => Some(s),
    }
}

/// The usual name of a stop signal.
fn signal_name(sig: i32) -> String {
    match sig {
        libc::SIGINT => "SIGINT".into(),
        libc::SIGTERM => "SIGTERM".into(),
        other => format!("signal {other}"),
    }
}

/// Exit status of a batch cut short by signal `sig`: 128 + sig (the
/// shell's convention; 130 for SIGINT).
fn interrupted_exit(sig: i32) -> u8 {
    u8::try_from(128 + sig).unwrap_or(130)
}

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

/// Expands folders into their recordings (sorted): the files named `.wav`,
/// `.flac`, `.aif`, `.aiff` or `.aifc` ([`RECORDING_EXTENSIONS`]); files are kept as
/// given.
///
/// # Errors
/// A path that does not exist, a folder that cannot be listed or holds no
/// recording, and an input list that holds no recording at all.
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
                .filter(|x| is_audio_name(x))
                .collect();
            if v.is_empty() {
                return Err(TonusError::Io {
                    path: p.clone(),
                    reason: "a folder with no .wav recording in it (nor .flac, .aif, .aiff or .aifc); give recordings or folders that hold them".into(),
                });
            }
            v.sort();
            out.extend(v);
        } else {
            out.push(p.clone());
        }
    }
    if out.is_empty() {
        return Err(TonusError::Io {
            path: inputs.first().cloned().unwrap_or_default(),
            reason: "no .wav recording there; give recordings or folders that hold them".into(),
        });
    }
    Ok(out)
}

/// File name endings taken as recordings when a folder is scanned or
/// watched (any case). The content decides the format when the file is
/// read ([`recording::read_audio`]).
pub const RECORDING_EXTENSIONS: [&str; 5] = ["wav", "flac", "aif", "aiff", "aifc"];

fn is_audio_name(p: &Path) -> bool {
    p.extension().is_some_and(|e| {
        RECORDING_EXTENSIONS
            .iter()
            .any(|x| e.eq_ignore_ascii_case(x))
    })
}

/// One recording's outcome, formatted on the worker thread.
struct Item {
    row: Option<Row>,
    csv_row: Vec<u8>,
    json_line: String,
    entry: BatchEntry,
}

thread_local! {
    /// One FFT planner per thread: plans are cached by length, and every
    /// recording of a batch has about the same length.
    static PLANNER: RefCell<realfft::RealFftPlanner<f64>> = RefCell::new(realfft::RealFftPlanner::new());
}

/// Nanosecond counters behind [`StageTiming`]'s parallel stages.
#[derive(Default)]
struct Counters {
    read_ns: AtomicU64,
    decode_ns: AtomicU64,
    measure_ns: AtomicU64,
    record_ns: AtomicU64,
}

fn add_elapsed(counter: &AtomicU64, since: Instant) {
    let ns = u64::try_from(since.elapsed().as_nanos()).unwrap_or(u64::MAX);
    counter.fetch_add(ns, Ordering::Relaxed);
}

fn decide_one(spec: &Spec, file: &Path, opts: &InspectOptions, counters: &Counters) -> Item {
    let t0 = Instant::now();
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
            PLANNER.with(|p| pipeline::measure_with(&rec, &panel, &fit_opts, &mut p.borrow_mut()))
        };
        let mut refined = opts.refinement == Refinement::Always;
        let mut m = measure(refined);
        if opts.refinement == Refinement::NearLimits {
            if let Ok(first) = &m {
                if !decision_is_settled(spec, first) {
                    refined = true;
                    m = measure(true);
                }
            }
        }
        add_elapsed(&counters.measure_ns, t2);
        let m = m?;
        let t3 = Instant::now();
        let verdict = spec.decide(&m);
        let mut record = report::json::fit_record(file, &m, TensionUnit::NewtonPerMeter);
        if let serde_json::Value::Object(o) = &mut record {
            o.insert(
                "decision".into(),
                serde_json::to_value(&verdict).unwrap_or_default(),
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
                serde_json::Value::String(sha.clone()),
            );
            o.insert(
                "frequency_method".into(),
                serde_json::Value::String(frequency_method(refined).into()),
            );
        }
        let ctx = RecordingContext {
            recording_sha256: sha.clone(),
            recording_path: file.display().to_string(),
            station: opts.station.clone(),
            operator: opts.operator.clone(),
        };
        let row = Row::from_decision(&ctx, spec, &m, &verdict, record.to_string());
        let input = spec.decision_input(&m);
        let entry = BatchEntry {
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
        };
        add_elapsed(&counters.record_ns, t3);
        Ok((row, record, entry))
    })();
    let item = match result {
        Ok((row, json, entry)) => {
            let csv_row = csv_row(&sha, time, Some(&row), &json, None);
            Item {
                row: Some(row),
                csv_row,
                json_line: json.to_string(),
                entry,
            }
        }
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
    };
    item
}

/// The line printed for each recording of a batch.
fn batch_line(e: &BatchEntry) -> String {
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
fn frequency_method(refined: bool) -> &'static str {
    if refined {
        "refined"
    } else {
        "fft_peaks"
    }
}

const CSV_HEADER: [&str; 22] = [
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

fn csv_record(fields: &[String]) -> Vec<u8> {
    let mut w = csv::WriterBuilder::new()
        .has_headers(false)
        .from_writer(Vec::new());
    // Writing to memory cannot fail; an empty row would show as such.
    let _ = w.write_record(fields);
    w.into_inner().unwrap_or_default()
}

fn csv_row(
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

/// The calling thread's side of a batch: history, outputs, summary.
struct Writer<'a> {
    spec: &'a Spec,
    opts: &'a InspectOptions,
    history: Option<History>,
    csv: Spool,
    jsonl: Spool,
    entries: Vec<BatchEntry>,
    all_pass: bool,
    unpublished: usize,
    last_publish: Instant,
    timing: StageTiming,
}

impl<'a> Writer<'a> {
    fn open(spec: &'a Spec, opts: &'a InspectOptions) -> Result<Writer<'a>> {
        std::fs::create_dir_all(&opts.out).map_err(|e| TonusError::Write {
            path: opts.out.clone(),
            reason: e.to_string(),
        })?;
        let history = opts.history.as_deref().map(History::open).transpose()?;
        Ok(Writer {
            spec,
            opts,
            history,
            csv: Spool::create(
                &opts.out.join("inspect.csv"),
                &csv_record(&CSV_HEADER.map(String::from)),
            )?,
            jsonl: Spool::create(&opts.out.join("inspect.jsonl"), b"")?,
            entries: Vec::new(),
            all_pass: true,
            unpublished: 0,
            last_publish: Instant::now(),
            timing: StageTiming::default(),
        })
    }

    /// Records one decided recording; returns its entry.
    fn take(&mut self, it: Item) -> Result<&BatchEntry> {
        if let (Some(h), Some(row)) = (self.history.as_mut(), it.row.as_ref()) {
            let t = Instant::now();
            h.insert(row)?;
            self.timing.history_s += t.elapsed().as_secs_f64();
        }
        self.all_pass &= it.entry.decision == Decision::Pass.name();
        self.csv.append(&it.csv_row)?;
        self.jsonl.append(it.json_line.as_bytes())?;
        self.jsonl.append(b"\n")?;
        self.unpublished += 1;
        self.entries.push(it.entry);
        Ok(&self.entries[self.entries.len() - 1])
    }

    /// Publishes the CSV and JSON Lines files when `force`, or when enough
    /// rows and time have gone by.
    fn publish(&mut self, force: bool) -> Result<()> {
        let due = self.unpublished >= FLUSH_EVERY && self.last_publish.elapsed() >= FLUSH_INTERVAL;
        if self.unpublished == 0 || !(force || due) {
            return Ok(());
        }
        let t = Instant::now();
        self.csv.publish()?;
        self.jsonl.publish()?;
        self.timing.flush_s += t.elapsed().as_secs_f64();
        self.unpublished = 0;
        self.last_publish = Instant::now();
        Ok(())
    }

    /// Last publication, the batch report; the exit status (128 + the
    /// signal when `interrupted`).
    fn finish(
        mut self,
        interrupted: Option<report::batch::Interruption>,
    ) -> Result<(u8, StageTiming)> {
        let t = Instant::now();
        self.csv.finish()?;
        self.jsonl.finish()?;
        self.timing.flush_s += t.elapsed().as_secs_f64();
        let t = Instant::now();
        let exit = match &interrupted {
            Some(i) => interrupted_exit(i.signal_number),
            None if self.all_pass => 0,
            None => 1,
        };
        let mut summary = summary(self.spec, self.opts, std::mem::take(&mut self.entries));
        summary.interrupted = interrupted;
        report::batch::write_batch_report(&self.opts.out, &summary)?;
        self.timing.report_s = t.elapsed().as_secs_f64();
        Ok((exit, self.timing))
    }
}

fn summary(spec: &Spec, opts: &InspectOptions, entries: Vec<BatchEntry>) -> BatchSummary {
    BatchSummary {
        spec_name: spec.name.clone(),
        spec_version: spec.version.clone(),
        spec_sha256: spec.hash.clone(),
        model: spec.model.name().to_string(),
        rule: spec.rule.rule.name().to_string(),
        rule_description: spec.rule.rule.description().to_string(),
        coverage_factor: spec.rule.coverage_factor,
        nominal_n_per_m: spec.limits.nominal_n_per_m,
        lower_n_per_m: spec.limits.lower_n_per_m,
        upper_n_per_m: spec.limits.upper_n_per_m,
        max_anisotropy_percent: spec.limits.max_anisotropy_percent,
        max_unevenness_percent: spec.limits.max_unevenness_percent,
        calibration: spec.calibration.as_ref().map(|c| {
            format!(
                "{} (SHA-256 {})",
                c.path.display(),
                spec.calibration_sha256.as_deref().unwrap_or("")
            )
        }),
        interrupted: None,
        unevenness_applies: spec.unevenness_applies(),
        generated: UtcTime::now().to_rfc3339(),
        station: opts.station.clone(),
        operator: opts.operator.clone(),
        entries,
    }
}

fn progress_bar(len: usize, wanted: bool) -> ProgressBar {
    if !(wanted && std::io::stderr().is_terminal()) {
        return ProgressBar::hidden();
    }
    let bar = ProgressBar::new(len as u64);
    // `{wide_bar}` takes what the terminal leaves, so the bar never wraps;
    // the rate in whole recordings per second.
    let style =
        ProgressStyle::with_template("{wide_bar} {pos}/{len} recordings  {rate}  {eta} left")
            .unwrap_or_else(|_| ProgressStyle::default_bar())
            .with_key(
                "rate",
                |state: &indicatif::ProgressState, w: &mut dyn std::fmt::Write| {
                    let _ = write!(w, "{:.0}/s", state.per_sec());
                },
            );
    bar.set_style(style);
    bar
}

/// Decides every recording, printing one line each through `emit` (in
/// batch order, as they are decided); exit 0 if all pass, 1 otherwise,
/// 128 + the signal when stopped by SIGINT or SIGTERM before every
/// recording was decided (see the module notes).
///
/// # Errors
/// An unusable output folder or history database (a bad recording is a
/// row, not an error).
pub fn inspect(
    spec: &Spec,
    files: &[PathBuf],
    opts: &InspectOptions,
    emit: &mut dyn FnMut(&str),
) -> Result<Outcome> {
    inspect_timed(spec, files, opts, emit).map(|(o, _)| o)
}

/// As [`inspect`], with the time spent in each stage.
///
/// # Errors
/// As [`inspect`].
pub fn inspect_timed(
    spec: &Spec,
    files: &[PathBuf],
    opts: &InspectOptions,
    emit: &mut dyn FnMut(&str),
) -> Result<(Outcome, StageTiming)> {
    let start = Instant::now();
    let mut writer = Writer::open(spec, opts)?;
    let bar = progress_bar(files.len(), opts.progress);
    let counters = Counters::default();
    std::thread::scope(|scope| -> Result<()> {
        let (tx, rx) = std::sync::mpsc::sync_channel::<Vec<Item>>(1);
        let (bar_w, counters) = (&bar, &counters);
        scope.spawn(move || {
            for chunk in files.chunks(FLUSH_EVERY) {
                if stop_requested().is_some() {
                    return;
                }
                // After a stop request no recording is started; those in
                // flight are finished and recorded.
                let items: Vec<Item> = chunk
                    .par_iter()
                    .filter_map(|f| {
                        if stop_requested().is_some() {
                            return None;
                        }
                        let it = decide_one(spec, f, opts, counters);
                        bar_w.inc(1);
                        Some(it)
                    })
                    .collect();
                // The writer stopped on an error: stop deciding.
                if tx.send(items).is_err() {
                    return;
                }
            }
        });
        for items in rx {
            for it in items {
                let line = writer.take(it).map(batch_line)?;
                bar.suspend(|| emit(&line));
            }
            writer.publish(false)?;
        }
        Ok(())
    })?;
    bar.finish_and_clear();
    let decided = writer.entries.len();
    let interrupted = stop_requested()
        .filter(|_| decided < files.len())
        .map(|sig| report::batch::Interruption {
            signal: signal_name(sig),
            signal_number: sig,
            decided,
            total: Some(files.len()),
        });
    let stderr = interrupted
        .as_ref()
        .map(|i| {
            format!(
                "inspect interrupted by {}: {} of {} recording(s) decided; outputs and report in {}\n",
                i.signal,
                decided,
                files.len(),
                opts.out.display()
            )
        })
        .unwrap_or_default();
    let (exit, mut timing) = writer.finish(interrupted)?;
    timing.read_s = counters.read_ns.load(Ordering::Relaxed) as f64 * 1e-9;
    let secs = |c: &AtomicU64| c.load(Ordering::Relaxed) as f64 * 1e-9;
    timing.decode_s = secs(&counters.decode_ns);
    timing.measure_s = secs(&counters.measure_ns);
    timing.record_s = secs(&counters.record_ns);
    timing.wall_s = start.elapsed().as_secs_f64();
    Ok((
        Outcome {
            stdout: String::new(),
            stderr,
            exit,
        },
        timing,
    ))
}

/// Size and modification time of a file, for the landing test.
type Signature = (u64, Option<SystemTime>);

/// The recordings (`.wav`, `.flac`, `.aif`, `.aiff`, `.aifc`) in `dir` with their
/// signatures, sorted by name.
fn wav_listing(dir: &Path) -> Result<Vec<(PathBuf, Signature)>> {
    let rd = std::fs::read_dir(dir).map_err(|e| TonusError::Io {
        path: dir.to_path_buf(),
        reason: format!("cannot list the watched folder: {e}"),
    })?;
    let mut v: Vec<(PathBuf, Signature)> = rd
        .filter_map(|e| e.ok())
        .filter(|e| is_audio_name(&e.path()))
        .filter_map(|e| {
            let md = e.metadata().ok()?;
            md.is_file()
                .then(|| (e.path(), (md.len(), md.modified().ok())))
        })
        .collect();
    v.sort();
    Ok(v)
}

/// Station mode: decides each recording that lands in `w.dir` (see the
/// module notes), printing [`station_line`] through `emit` and status notes
/// through `note`, until `w.limit` recordings or `w.timeout` (forever if
/// neither). Appends to the history; the CSV and JSON Lines files are
/// published after every recording; the batch report of what was decided
/// is written when the watch ends. Exit 0 if every recording passed (or
/// none landed), 1 otherwise; 128 + the signal when stopped by SIGINT
/// (Ctrl-C) or SIGTERM, after the recording in flight is recorded and the
/// report written (see the module notes).
///
/// # Errors
/// A folder that does not exist or cannot be listed; an unusable output
/// folder or history.
pub fn watch(
    spec: &Spec,
    opts: &InspectOptions,
    w: &WatchOptions,
    emit: &mut dyn FnMut(&str),
    note: &mut dyn FnMut(&str),
) -> Result<Outcome> {
    if !w.dir.is_dir() {
        return Err(TonusError::Io {
            path: w.dir.clone(),
            reason: "--watch needs an existing folder".into(),
        });
    }
    let start = Instant::now();
    let mut writer = Writer::open(spec, opts)?;
    let mut done: HashSet<PathBuf> = wav_listing(&w.dir)?.into_iter().map(|(p, _)| p).collect();
    let mut seen: HashMap<PathBuf, Signature> = HashMap::new();
    let counters = Counters::default();
    note(&format!(
        "watching {} every {} ms for {} ({} recording(s) already there are left alone){}",
        w.dir.display(),
        w.interval.as_millis(),
        spec.spec_label(),
        done.len(),
        match (w.limit, w.timeout) {
            (Some(n), Some(t)) =>
                format!("; stops after {n} recording(s) or {} s", t.as_secs_f64()),
            (Some(n), None) => format!("; stops after {n} recording(s)"),
            (None, Some(t)) => format!("; stops after {} s", t.as_secs_f64()),
            (None, None) => "; stop with Ctrl-C (the report is written)".into(),
        }
    ));
    let mut decided = 0usize;
    let stop_reason = loop {
        if let Some(sig) = stop_requested() {
            break format!("stopped by {}", signal_name(sig));
        }
        if w.limit.is_some_and(|n| decided >= n) {
            break "limit reached".to_string();
        }
        let remaining = match w.timeout {
            Some(t) => match t.checked_sub(start.elapsed()) {
                Some(r) if !r.is_zero() => Some(r),
                _ => break "time is up".to_string(),
            },
            None => None,
        };
        // Wait in short slices so that a stop request is seen promptly;
        // the wait is bounded by the poll interval.
        let wait_until = Instant::now() + remaining.map_or(w.interval, |r| r.min(w.interval));
        while stop_requested().is_none() {
            let left = wait_until.saturating_duration_since(Instant::now());
            if left.is_zero() {
                break;
            }
            std::thread::sleep(left.min(STOP_POLL));
        }
        if stop_requested().is_some() {
            continue;
        }
        let listing = wav_listing(&w.dir)?;
        let present: HashSet<&PathBuf> = listing.iter().map(|(p, _)| p).collect();
        seen.retain(|p, _| present.contains(p));
        for (path, sig) in &listing {
            if stop_requested().is_some() {
                break;
            }
            if done.contains(path) || w.limit.is_some_and(|n| decided >= n) {
                continue;
            }
            let landed = sig.0 > 0 && seen.get(path) == Some(sig);
            if !landed {
                seen.insert(path.clone(), *sig);
                continue;
            }
            seen.remove(path);
            done.insert(path.clone());
            let it = decide_one(spec, path, opts, &counters);
            let line = writer.take(it).map(station_line)?;
            writer.publish(true)?;
            emit(&line);
            decided += 1;
        }
    };
    let interrupted = stop_requested().map(|sig| report::batch::Interruption {
        signal: signal_name(sig),
        signal_number: sig,
        decided,
        total: None,
    });
    let (exit, _) = writer.finish(interrupted)?;
    note(&format!(
        "watch ended ({stop_reason}): {decided} recording(s) decided; report in {}",
        opts.out.join(report::batch::HTML_NAME).display()
    ));
    Ok(Outcome {
        stdout: String::new(),
        stderr: String::new(),
        exit,
    })
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
