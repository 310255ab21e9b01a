//! The writer thread's side of a batch: history rows, the CSV and JSON
//! Lines spools and their publication, the batch report at the end.

use super::decide::{InspectOptions, Item, StageTiming};
use super::record::{csv_record, CSV_HEADER};
use super::signals::interrupted_exit;
use crate::acceptance::decision::Decision;
use crate::acceptance::history::History;
use crate::acceptance::spec::Spec;
use crate::base::error::{Result, TonusError};
use crate::base::time::UtcTime;
use crate::report;
use crate::report::batch::{BatchEntry, BatchSummary, Spool};
use indicatif::{ProgressBar, ProgressStyle};
use std::io::IsTerminal;
use std::time::{Duration, Instant};

/// Recordings decided together, and between two publications of the CSV
/// and JSON Lines files.
pub const FLUSH_EVERY: usize = 64;

/// Shortest time between two publications of the CSV and JSON Lines files
/// during a batch (each publication copies the whole file).
pub const FLUSH_INTERVAL: Duration = Duration::from_secs(1);

/// The calling thread's side of a batch: history, outputs, summary.
pub(super) struct Writer<'a> {
    pub(super) spec: &'a Spec,
    pub(super) opts: &'a InspectOptions,
    pub(super) history: Option<History>,
    pub(super) csv: Spool,
    pub(super) jsonl: Spool,
    pub(super) entries: Vec<BatchEntry>,
    pub(super) all_pass: bool,
    pub(super) unpublished: usize,
    pub(super) last_publish: Instant,
    pub(super) timing: StageTiming,
}

impl<'a> Writer<'a> {
    pub(super) fn open(spec: &'a Spec, opts: &'a InspectOptions) -> Result<Writer<'a>> {
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
    pub(super) fn take(&mut self, it: Item) -> Result<&BatchEntry> {
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
    pub(super) fn publish(&mut self, force: bool) -> Result<()> {
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
    pub(super) fn finish(
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

pub(super) fn progress_bar(len: usize, wanted: bool) -> ProgressBar {
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
