//! The JSON record of one fit (schema `tonus.fit/1`).
//!
//! Fields (units in the key or in a `unit` member):
//! - `schema`, `tonus_version`, `file`, `sample_rate_hz`, `duration_s`
//! - `tap`: `onset_s`, `span_s`, `further_taps_s`
//! - `panel`: `shape`, `width_m`/`height_m` or `diameter_m`, `areal_density_kg_per_m2` (null if not given), `tap_at`, `pickup_at`
//! - `model`: `isotropic` or `free_aspect`
//! - `tension`: {`value`, `unit` "N/m", `standard_uncertainty`} or null without areal density;
//!   `tension_in_unit` the same in the unit asked with `--tension-unit`
//! - `tension_over_density` {`value`, `unit` "m2/s2", `standard_uncertainty`}
//! - `wave_speed` {`value`, `unit` "m/s", `standard_uncertainty`}
//! - `effective_height` {`value`, `unit` "m", `standard_uncertainty`} or null
//! - `modes`: [{`m`, `n`, `labels`, `predicted_hz`, `measured_hz`, `measured_u_hz`, `crlb_hz`, `residual_cents`, `level_db`, `snr_db`, `t60_s`, `decay_rate_db_per_s`, `method` (`fft_peak`/`damped_fit`), `degeneracy`, `pair` (null or a split pair, as in the partial record), `outlier`, `crowded`, `alternatives`}]
//! - `missing_modes`: [{`labels`, `predicted_hz`, `coupling`}]
//! - `unmatched_partials`: [{`frequency_hz`, `level_db`, `snr_db`, `t60_s`}]
//! - `hum`: [{`frequency_hz`, `mains_hz`, `harmonic`}]
//! - `rms_residual_cents`, `quality` {`grade`, `reasons`}
//! - `diagnosis` (when the grade is doubtful or unfit, else null):
//!   {`fundamental_hz`, `overtone_ratios`, `models`: [{`model`, `rms_cents`,
//!   `nearest_ratios`}] closest first, `closest_model`, `statement`}
//! - `fit`: {`modes_used`, `dof`, `iterations`, `stop_reason`, `uncertainty_method`}
//! - `matching`: {`hypotheses`, `ambiguous`, `rival_wave_speed_m_per_s`}
//! - `budget` (GUM): {`tension_n_per_m`, `rows`: [{`source`, `estimate`, `standard_uncertainty`, `sensitivity`, `contribution_n_per_m`}], `combined_standard_uncertainty_n_per_m`, `coverage_factor`, `expanded_uncertainty_n_per_m`} or null without areal density
//! - `biaxial` (model biaxial): {`tension_x`, `tension_y` (N/m, {value, standard_uncertainty}), `tx_over_sigma`, `ty_over_sigma` (m²/s²), `ratio`, `anisotropy_percent`, `correlation`, `swapped` [Tx, Ty] of the relabelled solution, `axis` {`verdict` determined/not_determined, `log10_likelihood_ratio`, `swapped_from_matcher`, `modes_used`, `detail`}} or null
//! - `plate` (model stiff): {`t_over_sigma` (m²/s²), `d_over_sigma` (m⁴/s²), `tension` (N/m), `bending_stiffness` (N·m), `correlation`, `youngs_modulus` (Pa, {value, standard_uncertainty}, with thickness and Poisson's ratio), …} or null
//! - `taps` (several taps in the file): {`taps`: [{`onset_s`, `value`, `grade`, `modes`, `kept`, `reason`}], `combined` {value, standard_uncertainty}, `repeatability`, `unit`} or null
//! - `calibration` (with `--calibration`): {`file`, `created`, `reference_tension_n_per_m`, `reference_tension_u_n_per_m`, `term` {`u_rel_reference`, `u_rel_factors`, `modes`}, `not_calibrated` \[labels\]} or null; modes carry `uncalibrated`
//! - `evenness`: uneven tension from resolved split pairs (circle, square panel): {`epsilon_pct`, `epsilon_u_pct`, `spread_pct`, `pairs_used`, `birge_ratio`, `per_pair` [{`labels`, `epsilon_pct`, `epsilon_u_pct`}], `higher_order` [{`m`, `n`, `split_pct`, `split_u_pct`, `pattern_order`, `pattern_amplitude_pct`, `significant`}], `skipped`, `method`} or null when no pair was resolved
//! - `identifiability`: {`parameters` [names, log parameters], `modes`, `rank`, `condition_number` (null if infinite), `singular_values`, `correlation` (matrix), `max_condition`, `identifiable`} or null without a fit
//! - `warnings`: [{`kind`, `message`, …}]
//! - `caution`: the safety note.
//!
//! The partial record (`tonus partials --json`, schema `tonus.partials/1`)
//! lists each partial as {`frequency_hz`, `level_db`, `snr_db`,
//! `prominence_db`, `decay_rate_db_per_s`, `t60_s`, `q`, `method`,
//! `frequency_u_hz`, `crlb_hz`, `decay_rate_u_db_per_s`, `amplitude`,
//! `pair`}, where `pair` is null or {`lower`, `upper` (each
//! {`frequency_hz`, `frequency_u_hz`, `crlb_hz`, `decay_rate_db_per_s`,
//! `t60_s`, `level_db`}), `splitting_hz`, `splitting_u_hz`,
//! `splitting_cents`, `splitting_u_cents`}.

use crate::base::estimate::Estimate;
use crate::base::units::TensionUnit;
use crate::fitting::measurement::Measurement;
use crate::physics::membrane::Shape;
use crate::signal::partials::{Partial, PartialAnalysis};
use serde_json::{json, Value};
use std::path::Path;

/// Schema name and version of the fit record.
pub const SCHEMA: &str = "tonus.fit/1";
/// Schema name and version of the partial record.
pub const PARTIALS_SCHEMA: &str = "tonus.partials/1";
/// The caution carried in every record and report.
pub const CAUTION: &str = "Stay within the maker's tension rating for the membrane and frame; tension in small steps and re-measure. Tap gently and keep ears away from the surface.";

fn est(e: Option<Estimate>, unit: &str, scale: f64) -> Value {
    match e {
        Some(e) => json!({
            "value": e.value / scale,
            "unit": unit,
            "standard_uncertainty": e.standard_uncertainty / scale,
        }),
        None => Value::Null,
    }
}

/// JSON of one partial.
pub fn partial_json(p: &Partial) -> Value {
    json!({
        "frequency_hz": p.frequency_hz,
        "level_db": p.level_db,
        "snr_db": p.snr_db,
        "prominence_db": p.prominence_db,
        "decay_rate_db_per_s": p.decay_rate_db_per_s,
        "t60_s": p.t60_s,
        "q": p.q,
        "method": p.method,
        "frequency_u_hz": p.frequency_u_hz,
        "crlb_hz": p.crlb_hz,
        "decay_rate_u_db_per_s": p.decay_rate_u_db_per_s,
        "amplitude": p.amplitude,
        "pair": p.pair,
    })
}

fn tap_json(a: &PartialAnalysis) -> Value {
    json!({
        "onset_found": a.tap.onset_found,
        "onset_s": a.tap.onset_s,
        "span_s": a.tap.span_s,
        "further_taps_s": a.tap.further_taps_s,
    })
}

fn warnings_json(ws: &[crate::base::warning::Warning]) -> Value {
    Value::Array(
        ws.iter()
            .map(|w| {
                let mut v = serde_json::to_value(w).unwrap_or(Value::Null);
                if let Value::Object(o) = &mut v {
                    o.insert("message".into(), Value::String(w.to_string()));
                }
                v
            })
            .collect(),
    )
}

/// The partial record (`tonus partials --json`).
pub fn partials_record(file: &Path, a: &PartialAnalysis) -> Value {
    json!({
        "schema": PARTIALS_SCHEMA,
        "tonus_version": env!("CARGO_PKG_VERSION"),
        "file": file.display().to_string(),
        "sample_rate_hz": a.sample_rate_hz,
        "tap": tap_json(a),
        "partials": a.partials.iter().map(partial_json).collect::<Vec<_>>(),
        "hum": a.hum.iter().map(|h| json!({
            "frequency_hz": h.partial.frequency_hz, "mains_hz": h.mains_hz, "harmonic": h.harmonic,
        })).collect::<Vec<_>>(),
        "warnings": warnings_json(&a.warnings),
    })
}

/// The fit record.
pub fn fit_record(file: &Path, m: &Measurement, unit: TensionUnit) -> Value {
    let panel = match m.panel.shape {
        Shape::Rectangle { width, height } => json!({
            "shape": "rectangle", "width_m": width.0, "height_m": height.0,
        }),
        Shape::Circle { radius } => json!({ "shape": "circle", "diameter_m": 2.0 * radius.0 }),
    };
    let mut panel = panel;
    if let Value::Object(o) = &mut panel {
        o.insert(
            "areal_density_kg_per_m2".into(),
            m.panel
                .areal_density
                .map(|s| json!(s.0))
                .unwrap_or(Value::Null),
        );
        o.insert(
            "tap_at".into(),
            serde_json::to_value(m.panel.tap).unwrap_or(Value::Null),
        );
        o.insert(
            "pickup_at".into(),
            serde_json::to_value(m.panel.pickup).unwrap_or(Value::Null),
        );
    }
    let fit = m.fit.as_ref();
    json!({
        "schema": SCHEMA,
        "tonus_version": env!("CARGO_PKG_VERSION"),
        "file": file.display().to_string(),
        "sample_rate_hz": m.analysis.sample_rate_hz,
        "duration_s": m.duration_s,
        "tap": tap_json(&m.analysis),
        "panel": panel,
        "model": fit.map(|f| serde_json::to_value(f.model).unwrap_or(Value::Null)),
        "tension": est(m.tension, "N/m", 1.0),
        "tension_in_unit": est(m.tension, unit.symbol(), unit.newtons_per_meter()),
        "tension_over_density": est(m.tension_over_density, "m2/s2", 1.0),
        "wave_speed": est(fit.map(|f| f.wave_speed), "m/s", 1.0),
        "effective_height": est(fit.and_then(|f| f.effective_height_m), "m", 1.0),
        "modes": serde_json::to_value(&m.modes).unwrap_or(Value::Null),
        "missing_modes": serde_json::to_value(&m.missing).unwrap_or(Value::Null),
        "unmatched_partials": m.unmatched.iter().map(|&i| {
            let p = &m.analysis.partials[i];
            json!({"frequency_hz": p.frequency_hz, "level_db": p.level_db, "snr_db": p.snr_db, "t60_s": p.t60_s})
        }).collect::<Vec<_>>(),
        "hum": m.analysis.hum.iter().map(|h| json!({
            "frequency_hz": h.partial.frequency_hz, "mains_hz": h.mains_hz, "harmonic": h.harmonic,
        })).collect::<Vec<_>>(),
        "rms_residual_cents": fit.map(|f| f.rms_residual_cents),
        "quality": { "grade": m.quality.grade.name(), "reasons": m.quality.reasons },
        "diagnosis": m.diagnosis.as_ref().map(|d| json!({
            "fundamental_hz": d.fundamental_hz,
            "overtone_ratios": d.overtone_ratios,
            "models": d.models,
            "closest_model": d.closest(),
            "statement": d.sentence(),
        })),
        "fit": fit.map(|f| json!({
            "modes_used": f.n_used, "dof": f.dof, "iterations": f.iterations,
            "stop_reason": f.stop_reason, "uncertainty_method": f.uncertainty_method,
            "outliers": f.outliers,
        })),
        "matching": m.matching.as_ref().map(|x| json!({
            "hypotheses": x.hypotheses,
            "ambiguous": x.is_ambiguous(),
            "rival_wave_speed_m_per_s": x.rival.map(|r| r.0),
        })),
        "budget": serde_json::to_value(&m.budget).unwrap_or(Value::Null),
        "taps": serde_json::to_value(&m.taps).unwrap_or(Value::Null),
        "biaxial": serde_json::to_value(&m.biaxial).unwrap_or(Value::Null),
        "plate": serde_json::to_value(&m.plate).unwrap_or(Value::Null),
        "calibration": serde_json::to_value(&m.calibration).unwrap_or(Value::Null),
        "identifiability": serde_json::to_value(&m.identifiability).unwrap_or(Value::Null),
        "evenness": serde_json::to_value(&m.evenness).unwrap_or(Value::Null),
        "warnings": warnings_json(&m.warnings),
        "caution": CAUTION,
    })
}
