//! One recording from samples to a fitted tension, as named stages:
//! check the inputs → measure the partials → label them
//! ([`labelling`]) → refine the labelled partials ([`refining`]) → fit the
//! model ([`model_fit`]) → check what the modes can determine
//! ([`identifiability`]) → settle the aspect, the biaxial axis and the
//! residuals ([`settle`]) → build the mode table ([`rows`]) → the tension,
//! its budget and the checks ([`checks`]) → grade ([`quality`]). Takes
//! values, returns a [`Measurement`].

use crate::base::error::{Result, TonusError};
use crate::base::warning::Warning;
use crate::fitting::biaxial::Biaxial;
use crate::fitting::fit::{FitModel, FitResult};
use crate::fitting::identifiability::{self, Identifiability};
use crate::fitting::labelling::{self, Labelled};
use crate::fitting::matching::Matching;
use crate::fitting::plate_fit::PlateFit;
use crate::fitting::rows::{self, MissingMode, ModeRow};
use crate::fitting::{checks, model_fit, quality, refining, settle, taps};
use crate::physics::membrane::{ModeLine, Shape};
use crate::physics::panel::Panel;
use crate::signal::partials::{self, AnalysisConfig, PartialAnalysis};
use crate::signal::recording::Recording;
use realfft::RealFftPlanner;

// The entry point's input and output, where its callers look for them.
pub use crate::fitting::measurement::{FitOptions, Measurement};

/// Measures one recording.
///
/// # Errors
/// When the options do not suit the panel, the recording cannot be
/// analysed, or the modes cannot determine the model.
pub fn measure(rec: &Recording, panel: &Panel, opts: &FitOptions) -> Result<Measurement> {
    let mut planner = RealFftPlanner::new();
    measure_with(rec, panel, opts, &mut planner)
}

/// As [`measure`], reusing an FFT planner.
pub fn measure_with(
    rec: &Recording,
    panel: &Panel,
    opts: &FitOptions,
    planner: &mut RealFftPlanner<f64>,
) -> Result<Measurement> {
    check_inputs(panel, opts)?;
    // The FFT peaks label the modes (refinement comes after matching).
    let coarse = AnalysisConfig {
        refine: false,
        ..opts.analysis.clone()
    };
    let mut analysis = partials::analyse_with(rec, &coarse, planner)?;
    let mut warnings = analysis.warnings.clone();
    let Labelled {
        mut lines,
        mut matching,
        uncalibrated,
    } = labelling::label(&analysis.partials, panel, opts, &mut warnings);
    let mut fitted = Fitted::default();
    let mut unmatched: Vec<usize> = (0..analysis.partials.len()).collect();
    if let Some(m) = matching.as_mut() {
        let mut stage = Stage {
            rec,
            panel,
            opts,
            warnings: &mut warnings,
        };
        fitted = stage.fit_matched(&mut analysis, &mut lines, m, &uncalibrated, planner)?;
        unmatched = m.unmatched.clone();
        ambiguity_warning(m, &mut warnings);
    }
    if let Some(f) = &fitted.fit {
        if let Some(w) = quality::systematic_trend(&fitted.modes, f) {
            warnings.push(w);
        }
    }
    let (tension, tension_over_density) = checks::tension(fitted.fit.as_ref(), panel);
    let (budget, calibration_term) =
        checks::tension_budget(fitted.fit.as_ref(), tension, panel, &fitted.modes, opts);
    checks::snr_warning(&fitted.modes, &mut warnings);
    let strong_unexplained = checks::strong_unexplained(&analysis.partials, &unmatched);
    if let Some(f) = &fitted.fit {
        let min_hz = opts.analysis.min_frequency_hz;
        checks::lowest_mode_checks(
            f,
            &lines,
            &fitted.modes,
            &analysis.partials,
            min_hz,
            &mut warnings,
        );
    }
    let q = quality::grade(
        fitted.fit.as_ref(),
        matching.as_ref(),
        &fitted.modes,
        &warnings,
        rec.clipped_fraction,
        &strong_unexplained,
    );
    let diagnosis = if q.grade >= quality::Grade::Doubtful {
        let sigma = panel.areal_density.map(|s| s.0);
        crate::fitting::diagnosis::diagnose(&analysis.partials, &panel.shape, sigma)
    } else {
        None
    };
    Ok(Measurement {
        panel: panel.clone(),
        evenness: checks::evenness_of(panel, &fitted.modes),
        diagnosis,
        calibration: applied_calibration(opts, calibration_term, &fitted.not_calibrated),
        analysis,
        lines,
        matching,
        fit: fitted.fit,
        tension,
        tension_over_density,
        modes: fitted.modes,
        missing: fitted.missing,
        unmatched,
        quality: q,
        warnings,
        budget,
        biaxial: fitted.biaxial,
        plate: fitted.plate,
        taps: None,
        duration_s: rec.duration_s(),
        identifiability: fitted.identifiability,
    })
}

/// Refuses options that do not suit the panel.
fn check_inputs(panel: &Panel, opts: &FitOptions) -> Result<()> {
    let rectangle = matches!(panel.shape, Shape::Rectangle { .. });
    let refuse = |why: &str| Err(TonusError::Panel(why.into()));
    if opts.model == FitModel::AirLoaded && panel.areal_density.is_none() {
        return refuse("--model air needs --areal-density (air loading depends on it)");
    }
    if opts.model == FitModel::Stiff && !rectangle {
        return refuse(
            "--model stiff is the simply supported rectangular plate; it needs a rectangle",
        );
    }
    if opts.model == FitModel::Biaxial && !rectangle {
        return refuse("--model biaxial needs a rectangle; for uneven tension on a circle, resolved mode pairs are needed");
    }
    if opts.model == FitModel::FreeAspect && !rectangle {
        return refuse("--free-aspect needs a rectangle; a circle has no aspect ratio");
    }
    if let Some(cal) = &opts.calibration {
        if opts.model != FitModel::Isotropic {
            return refuse("--calibration corrects the ideal isotropic membrane; leave out --model (the factors already hold air loading and supports)");
        }
        cal.calibration.check_panel(panel, &cal.path)?;
    }
    Ok(())
}

/// What the stages after labelling produce.
#[derive(Default)]
struct Fitted {
    fit: Option<FitResult>,
    plate: Option<PlateFit>,
    identifiability: Option<Identifiability>,
    biaxial: Option<Biaxial>,
    modes: Vec<ModeRow>,
    missing: Vec<MissingMode>,
    /// Labels of the matched modes the calibration has no factor for.
    not_calibrated: Vec<String>,
}

/// The context the stages after labelling share.
struct Stage<'a> {
    rec: &'a Recording,
    panel: &'a Panel,
    opts: &'a FitOptions,
    warnings: &'a mut Vec<Warning>,
}

impl Stage<'_> {
    /// Refine → fit → identifiability → settle → mode table, for a
    /// recording whose partials were labelled.
    fn fit_matched(
        &mut self,
        analysis: &mut PartialAnalysis,
        lines: &mut [ModeLine],
        m: &mut Matching,
        uncalibrated: &[(u32, u32)],
        planner: &mut RealFftPlanner<f64>,
    ) -> Result<Fitted> {
        let (panel, opts) = (self.panel, self.opts);
        let mut prep = refining::prepare(self.rec, analysis, lines, m, uncalibrated, opts, planner);
        let parts = &analysis.partials;
        let (mut fit, plate) = model_fit::fit_model(&prep.fit_obs, panel, opts, self.warnings);
        let mut out = Fitted {
            plate,
            ..Fitted::default()
        };
        if let Some(f) = fit.as_mut() {
            out.identifiability = Some(self.identifiable(&prep.fit_obs, f)?);
            if let (FitModel::Isotropic, None, Shape::Rectangle { width, height }) =
                (opts.model, &opts.calibration, panel.shape)
            {
                let sides = (width.0, height.0);
                settle::check_aspect(f, &prep, lines, m, parts, sides, self.warnings);
            }
            if opts.model == FitModel::AirLoaded {
                f.model = FitModel::AirLoaded;
            }
            if opts.model == FitModel::Biaxial {
                out.biaxial = settle::settle_axis(f, &mut prep, lines, m, parts, panel);
            }
            settle::residuals(f, &prep);
            out.modes = rows::mode_rows(f, m, lines, parts, uncalibrated);
            rows::pair_warnings(&out.modes, self.warnings);
            out.missing = rows::missing_modes(f, m, lines, &out.modes, self.warnings);
        }
        out.not_calibrated = rows::not_calibrated(&out.modes);
        if !out.not_calibrated.is_empty() {
            self.warnings.push(Warning::NotCalibrated {
                labels: out.not_calibrated.clone(),
            });
        }
        out.fit = fit;
        Ok(out)
    }

    /// What the kept modes can determine; refuses what they cannot.
    fn identifiable(
        &self,
        fit_obs: &[crate::fitting::fit::Observation],
        f: &FitResult,
    ) -> Result<Identifiability> {
        let kept: Vec<crate::fitting::fit::Observation> = (0..fit_obs.len())
            .filter(|i| !f.outliers.contains(i))
            .map(|i| fit_obs[i].clone())
            .collect();
        let id = identifiability::for_fit(self.opts.model, &kept, f);
        match id.refusal() {
            Some(why) => Err(TonusError::NotIdentifiable(format!(
                "{}: {why}",
                self.rec.path.display()
            ))),
            None => Ok(id),
        }
    }
}

/// Warns when another labelling explains the partials almost as well.
fn ambiguity_warning(m: &Matching, warnings: &mut Vec<Warning>) {
    if let Some((c_rival, _, n_rival)) = m.rival {
        warnings.push(Warning::Ambiguous {
            detail: format!(
                "a labelling with wave speed {:.2} m/s ({} modes) explains the partials almost as well as {:.2} m/s",
                c_rival,
                n_rival,
                m.wave_speed_m_per_s
            ),
        });
    }
}

/// The calibration as applied, for the record.
fn applied_calibration(
    opts: &FitOptions,
    term: Option<crate::fitting::calibration::CalibrationTerm>,
    not_calibrated: &[String],
) -> Option<crate::fitting::calibration::Applied> {
    opts.calibration
        .as_ref()
        .map(|c| crate::fitting::calibration::Applied {
            file: c.path.display().to_string(),
            created: c.calibration.created.clone(),
            reference_tension_n_per_m: c.calibration.reference_tension_n_per_m,
            reference_tension_u_n_per_m: c.calibration.reference_tension_u_n_per_m,
            term,
            not_calibrated: not_calibrated.to_vec(),
        })
}

/// Cuts `rec` at the given onsets (samples, ascending, the first one the
/// first tap) and fits each tap.
///
/// # Errors
/// As [`measure`].
pub fn measure_taps(
    rec: &Recording,
    onsets: &[usize],
    panel: &Panel,
    opts: &FitOptions,
) -> Result<(Vec<Measurement>, taps::TapSeries)> {
    let sr = rec.sample_rate_hz;
    let first = onsets.first().copied().unwrap_or(0);
    let bg_len = ((taps::BACKGROUND_S * sr) as usize).min(first);
    let background = &rec.samples[first - bg_len..first];
    let guard = (taps::GUARD_S * sr) as usize;
    let mut measurements = Vec::new();
    let mut taps = Vec::new();
    for (i, &on) in onsets.iter().enumerate() {
        let end = onsets
            .get(i + 1)
            .map(|&n| n.saturating_sub(guard))
            .unwrap_or(rec.samples.len())
            .max(on + 1);
        let mut samples = background.to_vec();
        samples.extend_from_slice(&rec.samples[on..end]);
        let mut cut = Recording::from_samples(&rec.path, samples, sr);
        cut.clipped_fraction = rec.clipped_fraction;
        let further = FitOptions {
            aspect_search: false,
            ..opts.clone()
        };
        let m = measure(&cut, panel, &further)?;
        let value = m.tension.or(m.tension_over_density);
        taps.push(taps::TapResult {
            onset_s: on as f64 / sr,
            value,
            grade: m.quality.grade,
            modes: m.fit.as_ref().map(|f| f.n_used).unwrap_or(0),
            kept: true,
            reason: None,
        });
        measurements.push(m);
    }
    let unit = if panel.areal_density.is_some() {
        "N/m"
    } else {
        "m2/s2"
    };
    let series = taps::combine(taps, unit);
    Ok((measurements, series))
}
