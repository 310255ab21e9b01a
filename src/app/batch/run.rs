//! `inspect` over a list of files (decided in parallel chunks, written in
//! order) and `inspect --watch` over a folder.

use super::decide::{decide_one, Counters, InspectOptions, Item, StageTiming};
use super::inputs::{wav_listing, Signature};
use super::record::{batch_line, station_line};
use super::signals::{signal_name, stop_requested, STOP_POLL};
use super::writer::{progress_bar, Writer, FLUSH_EVERY};
use crate::acceptance::spec::Spec;
use crate::app::commands::Outcome;
use crate::app::options::WatchOptions;
use crate::base::error::{Result, TonusError};
use crate::report;
use rayon::prelude::*;
use std::collections::{HashMap, HashSet};
use std::path::PathBuf;
use std::sync::atomic::{AtomicU64, Ordering};
use std::time::Instant;

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
