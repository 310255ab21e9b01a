//! One library function per subcommand: each takes validated values and
//! returns what to print and the exit status. `main` only prints.
//!
//! Exit status: 0 — done, fit sound or fair; 1 — fit doubtful or unfit
//! (or, for `demo`, some recording not fitted); 2 — an error (bad input,
//! bad flags), printed on one line.

use crate::base::error::{Result, TonusError};
use crate::base::units::{self, KgPerM2, TensionUnit};
use crate::fitting::measurement::{FitOptions, Measurement};
use crate::fitting::pipeline;
use crate::fitting::quality::Grade;
use crate::physics::membrane;
use crate::physics::panel::{Panel, PanelSpec};
use crate::physics::synth::{self, SynthConfig};
use crate::report;
use crate::signal::partials::{self, AnalysisConfig};
use crate::signal::recording::{self, ChannelChoice};
use serde_json::json;
use std::path::{Path, PathBuf};

/// What a command prints and how it exits.
#[derive(Debug)]
pub struct Outcome {
    /// Text for standard output.
    pub stdout: String,
    /// Lines for standard error (warnings).
    pub stderr: String,
    /// Exit status.
    pub exit: u8,
}

/// Exit status for a measurement's grade.
pub fn exit_for(grade: Grade) -> u8 {
    match grade {
        Grade::Sound | Grade::Fair => 0,
        Grade::Doubtful | Grade::Unfit => 1,
    }
}

/// `tonus partials`.
///
/// # Errors
/// Unreadable or unusable recording.
pub fn partials(
    path: &Path,
    channel: ChannelChoice,
    cfg: &AnalysisConfig,
    as_json: bool,
) -> Result<Outcome> {
    let rec = recording::read_wav(path, channel)?;
    let a = partials::analyse(&rec, cfg)?;
    let stdout = if as_json {
        format!(
            "{}\n",
            serde_json::to_string_pretty(&report::json::partials_record(path, &a))
                .unwrap_or_default()
        )
    } else {
        report::text::partials_table(path, &a)
    };
    Ok(Outcome {
        stdout,
        stderr: String::new(),
        exit: 0,
    })
}

/// How `fit` presents its result.
#[derive(Debug, Clone)]
pub struct OutputOptions {
    /// Unit for printed tensions.
    pub unit: TensionUnit,
    /// One JSON object instead of the table.
    pub as_json: bool,
    /// Folder for report, JSON, CSV and PNG.
    pub out: Option<PathBuf>,
    /// Draw the PNG.
    pub picture: bool,
}

/// `tonus fit`.
///
/// # Errors
/// Unreadable recording, impossible model request, unwritable output folder.
pub fn fit(
    path: &Path,
    channel: ChannelChoice,
    panel: &Panel,
    opts: &FitOptions,
    output: &OutputOptions,
) -> Result<Outcome> {
    let OutputOptions {
        unit,
        as_json,
        out,
        picture,
    } = output.clone();
    let out = out.as_deref();
    let m = measure_file(path, channel, panel, opts)?;
    let mut stdout = if as_json {
        format!(
            "{}\n",
            serde_json::to_string_pretty(&report::json::fit_record(path, &m, unit))
                .unwrap_or_default()
        )
    } else {
        report::text::fit_table(path, &m, unit)
    };
    if let Some(dir) = out {
        let written = report::write_fit_outputs(dir, path, &m, unit, picture)?;
        if !as_json {
            stdout.push_str(&format!(
                "written: {}\n",
                written
                    .iter()
                    .map(|p| p.display().to_string())
                    .collect::<Vec<_>>()
                    .join(", ")
            ));
        }
    }
    Ok(Outcome {
        stdout,
        stderr: String::new(),
        exit: exit_for(m.quality.grade),
    })
}

/// Most taps of one file that are fitted one by one (the time bound of a
/// recording whatever its length: a tap is about 10–50 ms of fitting).
pub const MAX_TAPS_FITTED: usize = 8;

/// What `tonus fit` measures on one recording file, before any output:
/// read, measure, and with several taps, fit each and combine them. The
/// corpus scorecard ([`crate::app::scorecard`]) calls this too, so both run
/// the same code path.
///
/// # Errors
/// Unreadable recording, impossible model request, unidentifiable fit.
pub fn measure_file(
    path: &Path,
    channel: ChannelChoice,
    panel: &Panel,
    opts: &FitOptions,
) -> Result<Measurement> {
    let rec = recording::read_wav(path, channel)?;
    let mut m = pipeline::measure(&rec, panel, opts)?;
    if !m.analysis.tap.further_taps_s.is_empty() {
        // Several taps: fit each, combine the good ones.
        let sr = rec.sample_rate_hz;
        let mut onsets = vec![m.analysis.tap.onset_sample];
        onsets.extend(
            m.analysis
                .tap
                .further_taps_s
                .iter()
                .map(|t| (t * sr).round() as usize),
        );
        // Each tap is a fit of its own: at most MAX_TAPS_FITTED are, so a
        // long file of many taps keeps a time bound; the rest are named.
        if onsets.len() > MAX_TAPS_FITTED {
            m.warnings.push(crate::base::warning::Warning::SearchLimit {
                detail: format!(
                    "the file holds {} taps; the first {MAX_TAPS_FITTED} were fitted, the rest (from {:.3} s) were not; record a few taps per file",
                    onsets.len(),
                    onsets[MAX_TAPS_FITTED] as f64 / sr
                ),
            });
            onsets.truncate(MAX_TAPS_FITTED);
        }
        let (_, series) = crate::fitting::pipeline::measure_taps(&rec, &onsets, panel, opts)?;
        m.taps = Some(series);
    }
    Ok(m)
}

/// `tonus calibrate`: fits each reference recording (labelled with the
/// model in `opts`), forms the per-mode factors against the ideal
/// membrane at the known tension (N/m, with its standard uncertainty) and
/// writes the calibration file atomically.
///
/// # Errors
/// Unreadable recordings, a panel without areal density, no fitted mode,
/// an unwritable output.
pub fn calibrate(
    paths: &[PathBuf],
    channel: ChannelChoice,
    panel: &Panel,
    opts: &FitOptions,
    tension: (f64, f64),
    out: &Path,
) -> Result<Outcome> {
    let sigma = panel.areal_density.ok_or_else(|| {
        TonusError::Panel(
            "calibrate needs --areal-density: the factors compare with the ideal membrane at the known tension".into(),
        )
    })?;
    let mut refs = Vec::new();
    let mut stderr = String::new();
    for path in paths {
        let bytes = std::fs::read(path).map_err(|e| TonusError::Io {
            path: path.clone(),
            reason: e.to_string(),
        })?;
        let rec = recording::read_wav(path, channel)?;
        let m = pipeline::measure(&rec, panel, opts)?;
        let modes: Vec<(u32, u32, f64)> = m
            .modes
            .iter()
            .filter(|r| !r.outlier && !r.crowded)
            .map(|r| (r.m, r.n, r.measured_hz))
            .collect();
        if m.quality.grade == Grade::Unfit || modes.is_empty() {
            return Err(TonusError::NoFit(format!(
                "calibrate: {} could not be fitted ({}); check the recording, the geometry and --model",
                path.display(),
                m.quality.reasons.join("; ")
            )));
        }
        for w in &m.warnings {
            stderr.push_str(&format!("warning: {}: {w}\n", path.display()));
        }
        refs.push(crate::fitting::calibration::Reference {
            file: path.clone(),
            sha256: crate::base::hash::sha256_hex(&bytes),
            modes,
        });
    }
    let label_model = match opts.model {
        crate::fitting::fit::FitModel::AirLoaded => "air",
        _ => "isotropic",
    };
    let cal = crate::fitting::calibration::Calibration::from_references(
        panel.shape,
        sigma.0,
        tension.0,
        tension.1,
        &refs,
        label_model,
    )?;
    crate::base::files::write_atomic(out, cal.to_toml().as_bytes())?;
    let mut stdout = format!(
        "{} — {} reference recording(s) at {} ± {} N/m, {} modes\n{:<10} {:>10} {:>10} {:>6}\n",
        panel.describe(),
        refs.len(),
        units::sig(tension.0, 5),
        units::sig(tension.1, 3),
        cal.modes.len(),
        "mode",
        "factor",
        "u (k=1)",
        "refs"
    );
    for f in &cal.modes {
        stdout.push_str(&format!(
            "{:<10} {:>10.5} {:>10.5} {:>6}\n",
            format!("({},{})", f.m, f.n),
            f.factor,
            f.u,
            f.recordings
        ));
    }
    stdout.push_str(&format!("written: {}\n", out.display()));
    Ok(Outcome {
        stdout,
        stderr,
        exit: 0,
    })
}

/// `tonus modes`: the line table for a tension, or the tension (or wave
/// speed) that puts the fundamental at a target frequency.
///
/// # Errors
/// A tension without areal density.
pub fn modes(
    panel: &Panel,
    tension: Option<&str>,
    fundamental: Option<&str>,
    count: usize,
    unit: TensionUnit,
    as_json: bool,
) -> Result<Outcome> {
    let g1 = panel.shape.fundamental_factor();
    let density = panel.areal_density;
    let (c, tension_n_per_m) = match (tension, fundamental) {
        (Some(t), None) => {
            let t = units::parse_tension("--tension", t)?;
            let s = density.ok_or_else(|| {
                TonusError::Panel("--tension needs --areal-density to give frequencies".into())
            })?;
            (membrane::wave_speed(t, s).0, Some(t.0))
        }
        (None, Some(f)) => {
            let f = units::parse_frequency("--fundamental", f)?;
            let c = f.0 / g1;
            (c, density.map(|s: KgPerM2| s.0 * c * c))
        }
        _ => return Err(TonusError::Panel(
            "give --tension (for the mode table) or --fundamental (for the tension that gives it)"
                .into(),
        )),
    };
    let count = count.clamp(1, 200);
    // Enough lines: grow the factor range until `count` lines are in.
    let mut g_max = g1 * 3.0;
    let mut lines = panel.shape.lines(g_max, panel.tap, panel.pickup);
    while lines.len() < count && g_max < g1 * 200.0 {
        g_max *= 1.5;
        lines = panel.shape.lines(g_max, panel.tap, panel.pickup);
    }
    lines.truncate(count);
    let k = unit.newtons_per_meter();
    let stdout = if as_json {
        let v = json!({
            "schema": "tonus.modes/1",
            "panel": panel.describe(),
            "wave_speed": {"value": c, "unit": "m/s"},
            "tension": tension_n_per_m.map(|t| json!({"value": t / k, "unit": unit.symbol()})),
            "lines": lines.iter().map(|l| json!({
                "labels": l.label_text(),
                "m": l.labels[0].0, "n": l.labels[0].1,
                "frequency_hz": c * l.factor,
                "ratio_to_fundamental": l.factor / g1,
                "degeneracy": l.degeneracy,
                "coupling": l.coupling,
            })).collect::<Vec<_>>(),
            "caution": report::json::CAUTION,
        });
        format!("{}\n", serde_json::to_string_pretty(&v).unwrap_or_default())
    } else {
        let mut s = format!("{} — wave speed {:.3} m/s", panel.describe(), c);
        match tension_n_per_m {
            Some(t) => s.push_str(&format!(
                ", tension {} {}\n",
                units::sig(t / k, 5),
                unit.symbol()
            )),
            None => s.push_str(" (give --areal-density for the tension)\n"),
        }
        s.push_str(&format!(
            "{:<16} {:>11} {:>8} {:>9}\n",
            "mode", "freq [Hz]", "ratio", "coupling"
        ));
        for l in &lines {
            s.push_str(&format!(
                "{:<16} {:>11.2} {:>8.4} {:>9.2}\n",
                l.label_text(),
                c * l.factor,
                l.factor / g1,
                l.coupling
            ));
        }
        if fundamental.is_some() {
            s.push_str(&format!("caution: {}\n", report::json::CAUTION));
        }
        s
    };
    Ok(Outcome {
        stdout,
        stderr: String::new(),
        exit: 0,
    })
}

/// `tonus synth`.
///
/// # Errors
/// Impossible settings or an unwritable output.
pub fn synth(cfg: &SynthConfig, output: &Path, bits: u16, float: bool) -> Result<Outcome> {
    let x = synth::synthesise(cfg)?;
    recording::write_wav(output, &x, cfg.sample_rate_hz, bits, float)?;
    let c = membrane::wave_speed(cfg.tension, cfg.areal_density).0;
    let g1 = cfg.shape.fundamental_factor();
    let f1 = if cfg.air_loaded {
        c * g1 * crate::physics::airload::loading_factor(g1, cfg.areal_density.0)
    } else {
        c * g1
    };
    Ok(Outcome {
        stdout: format!(
            "{}: {:.2} s at {} Hz, fundamental {:.2} Hz, SNR {} dB\n",
            output.display(),
            cfg.duration_s,
            cfg.sample_rate_hz,
            f1,
            cfg.snr_db
        ),
        stderr: String::new(),
        exit: 0,
    })
}

/// `tonus history`: lists (or exports) stored decisions.
///
/// # Errors
/// An unreadable database, a malformed time or decision name.
pub fn history(
    db: &Path,
    filter: &crate::acceptance::history::Filter,
    csv_out: Option<&Path>,
) -> Result<Outcome> {
    if !db.exists() {
        return Err(TonusError::Io {
            path: db.to_path_buf(),
            reason: "no history database there; run tonus inspect first or pass --db".into(),
        });
    }
    let h = crate::acceptance::history::History::open(db)?;
    if let Some(out) = csv_out {
        let mut buf = Vec::new();
        let n = h.export_csv(filter, &mut buf)?;
        crate::base::files::write_atomic(out, &buf)?;
        return Ok(Outcome {
            stdout: format!("{n} rows written to {}\n", out.display()),
            stderr: String::new(),
            exit: 0,
        });
    }
    let rows = h.query(filter)?;
    let mut stdout = format!(
        "{:<25} {:<14} {:>12} {:<24} {}\n",
        "time", "decision", "tension N/m", "spec", "recording"
    );
    for r in &rows {
        stdout.push_str(&format!(
            "{:<25} {:<14} {:>12} {:<24} {}\n",
            r.row.time.to_rfc3339(),
            r.row.decision,
            r.row
                .tension_n_per_m
                .map(|t| format!("{t:.1}"))
                .unwrap_or_else(|| "–".into()),
            format!("{} v{}", r.row.spec_name, r.row.spec_version),
            r.row.recording_path
        ));
    }
    stdout.push_str(&format!("{} rows\n", rows.len()));
    Ok(Outcome {
        stdout,
        stderr: String::new(),
        exit: 0,
    })
}

/// `tonus demo`: fits every WAV in `dir` with its `NAME.panel.toml` and
/// writes the reports, a summary CSV and an index into `out`. A file that
/// fails becomes a row with its error; the others are still written.
///
/// # Errors
/// Unreadable recordings folder or unwritable output folder.
pub fn demo(dir: &Path, out: &Path) -> Result<Outcome> {
    let mut wavs: Vec<PathBuf> = std::fs::read_dir(dir)
        .map_err(|e| TonusError::Io {
            path: dir.to_path_buf(),
            reason: format!("{e}; run tonus demo from the project folder or pass --recordings"),
        })?
        .filter_map(|e| e.ok().map(|e| e.path()))
        .filter(|p| p.extension().is_some_and(|x| x.eq_ignore_ascii_case("wav")))
        .collect();
    wavs.sort();
    if wavs.is_empty() {
        return Err(TonusError::NoFit(format!(
            "{} holds no .wav files",
            dir.display()
        )));
    }
    let unit = TensionUnit::NewtonPerMeter;
    let mut results: Vec<(String, Option<Measurement>, Option<String>)> = Vec::new();
    let mut stdout = String::new();
    let mut stderr = String::new();
    for wav in &wavs {
        let name = wav
            .file_name()
            .map(|n| n.to_string_lossy().into_owned())
            .unwrap_or_default();
        let panel_file = wav.with_extension("panel.toml");
        let outcome = (|| -> Result<Measurement> {
            let spec = PanelSpec::from_file(&panel_file)?;
            let panel = Panel::from_spec(&spec)?;
            let rec = recording::read_wav(wav, ChannelChoice::MixDown)?;
            let opts = crate::app::options::fit_options(
                false,
                spec.model.as_deref(),
                &crate::app::cli::InputArgs::default(),
            )?;
            let m = pipeline::measure(&rec, &panel, &opts)?;
            report::write_fit_outputs(out, wav, &m, unit, true)?;
            Ok(m)
        })();
        match outcome {
            Ok(m) => {
                stdout.push_str(&format!(
                    "{:<28} {:>24}  {}\n",
                    name,
                    m.tension
                        .map(|t| report::text::pm(t.value, t.standard_uncertainty, "N/m"))
                        .unwrap_or_else(|| "–".into()),
                    m.quality.grade.name()
                ));
                results.push((name, Some(m), None));
            }
            Err(e) => {
                stderr.push_str(&format!("error: {e}\n"));
                stdout.push_str(&format!("{name:<28} {:>24}  error\n", "–"));
                results.push((name, None, Some(e.to_string())));
            }
        }
    }
    let rows: Vec<(String, Option<&Measurement>, Option<String>)> = results
        .iter()
        .map(|(n, m, e)| (n.clone(), m.as_ref(), e.clone()))
        .collect();
    let table = report::csv::summary_csv(&rows).map_err(|e| TonusError::Write {
        path: out.join("summary.csv"),
        reason: e.to_string(),
    })?;
    crate::base::files::write_atomic(&out.join("summary.csv"), table.as_bytes())?;
    let mut index = String::from("# Demo reports\n\nWritten by `tonus demo` from the recordings in `demo-recordings/`.\n\n| recording | tension | quality | report |\n|---|---|---|---|\n");
    for (name, m, e) in &results {
        let stem = Path::new(name)
            .file_stem()
            .map(|s| s.to_string_lossy().into_owned())
            .unwrap_or_default();
        match m {
            Some(m) => index.push_str(&format!(
                "| {name} | {} | {} | [{stem}.report.md]({stem}.report.md) |\n",
                m.tension
                    .map(|t| report::text::pm(t.value, t.standard_uncertainty, "N/m"))
                    .unwrap_or_else(|| "–".into()),
                m.quality.grade.name()
            )),
            None => index.push_str(&format!(
                "| {name} | – | error: {} | – |\n",
                e.clone().unwrap_or_default()
            )),
        }
    }
    index.push_str(&format!("\n{}\n", report::json::CAUTION));
    crate::base::files::write_atomic(&out.join("README.md"), index.as_bytes())?;
    let failed = results
        .iter()
        .any(|(_, m, _)| m.as_ref().is_none_or(|m| exit_for(m.quality.grade) != 0));
    Ok(Outcome {
        stdout,
        stderr,
        exit: if failed { 1 } else { 0 },
    })
}
