//! The terminal table.

use crate::base::estimate::Estimate;
use crate::base::units::{sig, TensionUnit};
use crate::fitting::measurement::Measurement;
use crate::signal::partials::PartialAnalysis;
use std::fmt::Write;
use std::path::Path;

fn opt(v: Option<f64>, digits: usize) -> String {
    v.map(|x| sig(x, digits)).unwrap_or_else(|| "–".into())
}

/// The partial table.
pub fn partials_table(file: &Path, a: &PartialAnalysis) -> String {
    let mut s = String::new();
    let _ = writeln!(
        s,
        "{}  tap at {:.3} s, {:.0} ms analysed, {} partials",
        file.display(),
        a.tap.onset_s,
        a.tap.span_s * 1e3,
        a.partials.len()
    );
    let _ = writeln!(
        s,
        "{:>11} {:>9} {:>9} {:>9} {:>8} {:>9} {:>8} {:>8}",
        "freq [Hz]", "u [Hz]", "CRLB [Hz]", "level[dB]", "SNR[dB]", "decay dB/s", "T60 [s]", "Q"
    );
    for p in &a.partials {
        let _ = writeln!(
            s,
            "{:>11.3} {:>9} {:>9} {:>9.1} {:>8.1} {:>9} {:>8} {:>8}",
            p.frequency_hz,
            opt(p.frequency_u_hz, 2),
            opt(p.crlb_hz, 2),
            p.level_db,
            p.snr_db,
            opt(p.decay_rate_db_per_s, 3),
            opt(p.t60_s, 3),
            opt(p.q, 3)
        );
        if let Some(pair) = &p.pair {
            let _ = writeln!(s, "{}", pair_line(pair));
        }
    }
    for h in &a.hum {
        let _ = writeln!(
            s,
            "{:>11.3}  hum ({} × {:.0} Hz), set aside",
            h.partial.frequency_hz, h.harmonic, h.mains_hz
        );
    }
    for w in &a.warnings {
        let _ = writeln!(s, "warning: {w}");
    }
    s
}

/// One indented line describing a split pair.
pub fn pair_line(pair: &crate::signal::partials::SplitPair) -> String {
    format!(
        "{:>13}split pair: {} and {}, splitting {} ({}), T60 {} s and {} s",
        "",
        pm(pair.lower.frequency_hz, pair.lower.frequency_u_hz, "Hz"),
        pm(pair.upper.frequency_hz, pair.upper.frequency_u_hz, "Hz"),
        pm(pair.splitting_hz, pair.splitting_u_hz, "Hz"),
        pm(pair.splitting_cents, pair.splitting_u_cents, "cents"),
        sig(pair.lower.t60_s, 3),
        sig(pair.upper.t60_s, 3)
    )
}

/// Formats an estimate as "value ± u unit".
pub fn pm(value: f64, u: f64, unit: &str) -> String {
    // Two significant digits of the uncertainty fix the decimals.
    let decimals = if u > 0.0 {
        (1 - u.log10().floor() as i32).max(0) as usize
    } else {
        3
    };
    format!("{value:.decimals$} ± {u:.decimals$} {unit}")
}

/// The fit summary and mode table.
pub fn fit_table(file: &Path, m: &Measurement, unit: TensionUnit) -> String {
    let mut s = String::new();
    let _ = writeln!(s, "{} — {}", file.display(), m.panel.describe());
    match (&m.fit, m.tension, m.tension_over_density) {
        (Some(_), t, Some(_)) => {
            tension_lines(&mut s, m, t, unit);
            fit_lines(&mut s, m);
        }
        _ => {
            let _ = writeln!(s, "tension      – (no fit)");
        }
    }
    outcome_lines(&mut s, m);
    s
}

/// The tension with its budget, and what the model adds to it (plate,
/// biaxial, calibration).
fn tension_lines(s: &mut String, m: &Measurement, t: Option<Estimate>, unit: TensionUnit) {
    if let Some(t) = t {
        let k = unit.newtons_per_meter();
        let _ = writeln!(
            s,
            "tension      {}  (k = 1){}",
            pm(t.value / k, t.standard_uncertainty / k, unit.symbol()),
            if m.diagnosis.is_some() {
                "  — not a measurement: the model does not fit (see diagnosis)"
            } else {
                ""
            }
        );
    } else {
        let _ = writeln!(s, "tension      – (give --areal-density to get N/m)");
    }
    if let Some(b) = &m.budget {
        let k = unit.newtons_per_meter();
        let _ = writeln!(
            s,
            "  with inputs {} (u_c, GUM);  U = {} {} (k = {})",
            pm(
                b.tension_n_per_m / k,
                b.combined_standard_uncertainty_n_per_m / k,
                unit.symbol()
            ),
            crate::base::units::sig(b.expanded_uncertainty_n_per_m / k, 3),
            unit.symbol(),
            b.coverage_factor
        );
    }
    if let Some(p) = &m.plate {
        if let Some(d) = p.bending_stiffness {
            let _ = writeln!(
                s,
                "  bending stiffness D = {}  (correlation with T {:.2})",
                pm(d.value, d.standard_uncertainty, "N·m"),
                p.correlation
            );
        }
        if let Some(e) = p.youngs_modulus {
            let _ = writeln!(
                s,
                "  Young's modulus E = {}  (E = 12·D·(1 − ν²)/h³)",
                pm(e.value / 1e9, e.standard_uncertainty / 1e9, "GPa")
            );
        }
    }
    if let Some(b) = &m.biaxial {
        let k = unit.newtons_per_meter();
        if let (Some(tx), Some(ty)) = (b.tension_x, b.tension_y) {
            let _ = writeln!(
                s,
                "  along x      {}\n  along y      {}",
                pm(tx.value / k, tx.standard_uncertainty / k, unit.symbol()),
                pm(ty.value / k, ty.standard_uncertainty / k, unit.symbol())
            );
        }
        let _ = writeln!(
            s,
            "  Tx/Ty        {}  anisotropy {}  correlation {:.2}",
            pm(b.ratio.value, b.ratio.standard_uncertainty, ""),
            pm(
                b.anisotropy_percent.value,
                b.anisotropy_percent.standard_uncertainty,
                "%"
            ),
            b.correlation
        );
        if let Some(a) = &b.axis {
            let _ = writeln!(s, "  {}", a.detail);
        }
    }
    if let Some(c) = &m.calibration {
        let _ = writeln!(
            s,
            "  calibrated   {} (reference {} ± {} N/m, made {})",
            c.file,
            crate::base::units::sig(c.reference_tension_n_per_m, 5),
            crate::base::units::sig(c.reference_tension_u_n_per_m, 3),
            c.created
        );
    }
}

/// T/σ, the wave speed, the fit, the evenness and the identifiability.
fn fit_lines(s: &mut String, m: &Measurement) {
    let (Some(f), Some(tod)) = (&m.fit, m.tension_over_density) else {
        return;
    };
    let _ = writeln!(
        s,
        "T/σ          {}",
        pm(tod.value, tod.standard_uncertainty, "m²/s²")
    );
    let _ = writeln!(
        s,
        "wave speed   {}",
        pm(f.wave_speed.value, f.wave_speed.standard_uncertainty, "m/s")
    );
    if let Some(h) = f.effective_height_m {
        let _ = writeln!(
            s,
            "eff. height  {}",
            pm(h.value * 1e3, h.standard_uncertainty * 1e3, "mm")
        );
    }
    let _ = writeln!(
        s,
        "fit          {} modes, rms residual {:.2} cents, {}",
        f.n_used, f.rms_residual_cents, f.uncertainty_method
    );
    if let Some(e) = &m.evenness {
        let _ = writeln!(
            s,
            "evenness     ε = {} (tightest direction {:.2} % above the slackest), from {} split pair(s)",
            pm(e.epsilon_pct, e.epsilon_u_pct, "%"),
            e.spread_pct,
            e.pairs_used
        );
        for h in e.higher_order.iter().filter(|h| h.significant) {
            let _ = writeln!(
                s,
                "             ({},{}) pair split {} : a cos({}θ) pattern (lug spacing) in the tension",
                h.m,
                h.n,
                pm(h.split_pct, h.split_u_pct, "%"),
                h.pattern_order
            );
        }
    }
    if let Some(id) = &m.identifiability {
        let mut corr = Vec::new();
        for a in 0..id.parameters.len() {
            for b in a + 1..id.parameters.len() {
                corr.push(format!(
                    "fit correlation r({}, {}) = {:.3}",
                    id.parameters[a], id.parameters[b], id.correlation[a][b]
                ));
            }
        }
        let _ = writeln!(
            s,
            "identifiable rank {} of {}, condition number {} (limit {:.0e}){}",
            id.rank,
            id.parameters.len(),
            sig(id.condition_number, 3),
            id.max_condition,
            if corr.is_empty() {
                String::new()
            } else {
                format!(", {}", corr.join(", "))
            }
        );
    }
}

/// Quality, diagnosis, the mode table, unexplained partials, taps and
/// warnings.
fn outcome_lines(s: &mut String, m: &Measurement) {
    let _ = writeln!(
        s,
        "quality      {}{}",
        m.quality.grade.name(),
        if m.quality.reasons.is_empty() {
            String::new()
        } else {
            format!(": {}", m.quality.reasons.join("; "))
        }
    );
    if let Some(d) = &m.diagnosis {
        let _ = writeln!(s, "diagnosis    {}", d.sentence());
    }
    if !m.modes.is_empty() {
        let _ = writeln!(s);
        let _ = writeln!(
            s,
            "{:<13} {:>10} {:>10} {:>8} {:>8} {:>7} {:>6} {:>7}",
            "mode", "pred [Hz]", "meas [Hz]", "u [Hz]", "cents", "dB", "SNR", "T60 [s]"
        );
        for r in &m.modes {
            let _ = writeln!(
                s,
                "{:<13} {:>10.2} {:>10.2} {:>8} {:>8.2} {:>7.1} {:>6.1} {:>7}{}",
                r.labels,
                r.predicted_hz,
                r.measured_hz,
                opt(r.measured_u_hz, 2),
                r.residual_cents,
                r.level_db,
                r.snr_db,
                opt(r.t60_s, 3),
                if r.outlier {
                    "  outlier, not fitted"
                } else if r.uncalibrated {
                    "  not in the calibration, not fitted"
                } else if r.crowded {
                    "  crowded, not fitted"
                } else {
                    ""
                }
            );
            if let Some(pair) = &r.pair {
                let _ = writeln!(s, "{}", pair_line(pair));
            }
        }
    }
    if !m.unmatched.is_empty() {
        let list: Vec<String> = m
            .unmatched
            .iter()
            .map(|&i| format!("{:.1}", m.analysis.partials[i].frequency_hz))
            .collect();
        let _ = writeln!(s, "unmatched partials [Hz]: {}", list.join(", "));
    }
    if let Some(t) = &m.taps {
        let _ = writeln!(s, "\ntaps ({} found):", t.taps.len());
        for tap in &t.taps {
            let _ = writeln!(
                s,
                "  at {:>7.3} s  {:>26}  {:<9} {}",
                tap.onset_s,
                tap.value
                    .map(|v| pm(v.value, v.standard_uncertainty, t.unit))
                    .unwrap_or_else(|| "–".into()),
                tap.grade.name(),
                tap.reason
                    .as_deref()
                    .map(|r| format!("left out: {r}"))
                    .unwrap_or_default()
            );
        }
        if let Some(c) = t.combined {
            let _ = writeln!(
                s,
                "  combined     {}  repeatability (s) {}",
                pm(c.value, c.standard_uncertainty, t.unit),
                t.repeatability
                    .map(|r| format!("{} {}", crate::base::units::sig(r, 3), t.unit))
                    .unwrap_or_else(|| "–".into())
            );
        }
    }
    for w in &m.warnings {
        let _ = writeln!(s, "warning: {w}");
    }
}
