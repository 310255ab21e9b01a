//! The Markdown report of one fit.

use super::json::CAUTION;
use super::text::pm;
use crate::base::units::TensionUnit;
use crate::fitting::measurement::Measurement;
use std::fmt::Write;
use std::path::Path;

/// The report text; `picture` is the spectrum PNG's file name, if drawn.
pub fn fit_report(
    file: &Path,
    m: &Measurement,
    unit: TensionUnit,
    picture: Option<&str>,
) -> String {
    let mut s = String::new();
    summary(&mut s, file, m, unit);
    axes_and_budget(&mut s, m, unit);
    if let Some(p) = picture {
        let _ = writeln!(s, "![spectrum with predicted modes]({p})\n");
    }
    mode_tables(&mut s, m);
    taps(&mut s, m);
    closing(&mut s, m);
    s
}

/// The title and the summary table, with the diagnosis if any.
fn summary(s: &mut String, file: &Path, m: &Measurement, unit: TensionUnit) {
    let name = file
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_default();
    let _ = writeln!(s, "# Tension record: {name}\n");
    let _ = writeln!(s, "| item | value |\n|---|---|");
    let _ = writeln!(
        s,
        "| recording | `{}` ({:.2} s at {:.0} Hz) |",
        file.display(),
        m.duration_s,
        m.analysis.sample_rate_hz
    );
    let _ = writeln!(s, "| membrane | {} |", m.panel.describe());
    match m.panel.areal_density {
        Some(d) => {
            let _ = writeln!(s, "| areal density | {:.4} kg/m² |", d.0);
        }
        None => {
            let _ = writeln!(s, "| areal density | not given (relative result only) |");
        }
    }
    let _ = writeln!(
        s,
        "| tap | onset {:.3} s, {:.0} ms analysed{} |",
        m.analysis.tap.onset_s,
        m.analysis.tap.span_s * 1e3,
        if m.analysis.tap.further_taps_s.is_empty() {
            String::new()
        } else {
            format!(
                ", {} further tap(s) not analysed",
                m.analysis.tap.further_taps_s.len()
            )
        }
    );
    if let Some(t) = m.tension {
        let k = unit.newtons_per_meter();
        if m.diagnosis.is_some() {
            let _ = writeln!(
                s,
                "| tension | not a measurement: the model does not fit (see *Diagnosis*); the fit gave {} |",
                pm(t.value / k, t.standard_uncertainty / k, unit.symbol())
            );
        } else {
            let _ = writeln!(
                s,
                "| **tension** | **{}** (standard uncertainty, k = 1) |",
                pm(t.value / k, t.standard_uncertainty / k, unit.symbol())
            );
        }
    }
    if let Some(t) = m.tension_over_density {
        let _ = writeln!(
            s,
            "| T/σ | {} |",
            pm(t.value, t.standard_uncertainty, "m²/s²")
        );
    }
    if let Some(f) = &m.fit {
        let _ = writeln!(
            s,
            "| wave speed | {} |",
            pm(f.wave_speed.value, f.wave_speed.standard_uncertainty, "m/s")
        );
        if let Some(h) = f.effective_height_m {
            let _ = writeln!(
                s,
                "| effective height | {} |",
                pm(h.value * 1e3, h.standard_uncertainty * 1e3, "mm")
            );
        }
        let _ = writeln!(
            s,
            "| rms residual | {:.2} cents over {} modes |",
            f.rms_residual_cents, f.n_used
        );
    }
    let _ = writeln!(
        s,
        "| **quality** | **{}**{} |\n",
        m.quality.grade.name(),
        if m.quality.reasons.is_empty() {
            String::new()
        } else {
            format!(": {}", m.quality.reasons.join("; "))
        }
    );
    if let Some(d) = &m.diagnosis {
        let _ = writeln!(s, "**Diagnosis**: {}\n", d.sentence());
    }
}

/// The tension along the two axes (biaxial) and the GUM budget.
fn axes_and_budget(s: &mut String, m: &Measurement, unit: TensionUnit) {
    if let Some(b) = &m.biaxial {
        let k = unit.newtons_per_meter();
        let _ = writeln!(s, "## Tension along the two axes\n");
        if let (Some(tx), Some(ty)) = (b.tension_x, b.tension_y) {
            let _ = writeln!(
                s,
                "- along the width (x): **{}**",
                pm(tx.value / k, tx.standard_uncertainty / k, unit.symbol())
            );
            let _ = writeln!(
                s,
                "- along the height (y): **{}**",
                pm(ty.value / k, ty.standard_uncertainty / k, unit.symbol())
            );
        }
        let _ = writeln!(
            s,
            "- Tx/Ty = {}, anisotropy {}, correlation of Tx and Ty {:.2}\n- one tap cannot tell the axes apart by itself: relabelling every (m,n) as (n,m) gives Tx = {:.1}, Ty = {:.1} (same units as σ·c²) and fits equally well\n",
            pm(b.ratio.value, b.ratio.standard_uncertainty, ""),
            pm(b.anisotropy_percent.value, b.anisotropy_percent.standard_uncertainty, "%"),
            b.correlation,
            b.swapped.0 / k,
            b.swapped.1 / k
        );
    }
    if let Some(b) = &m.budget {
        let _ = writeln!(s, "## Uncertainty budget (GUM)\n");
        let _ = writeln!(s, "| input | estimate | standard uncertainty | sensitivity | contribution N/m |\n|---|---|---|---|---:|");
        for r in &b.rows {
            let _ = writeln!(
                s,
                "| {} | {} | {} | {} | {:.4} |",
                r.source, r.estimate, r.standard_uncertainty, r.sensitivity, r.contribution_n_per_m
            );
        }
        let _ = writeln!(
            s,
            "| **combined** | {:.4} N/m | **u_c = {:.4} N/m** | | |\n\nExpanded uncertainty U = k·u_c = **{:.3} N/m** (k = {}, about 95 % coverage). Law of propagation of uncertainty, JCGM 100:2008 eq. 10, inputs uncorrelated.\n",
            b.tension_n_per_m,
            b.combined_standard_uncertainty_n_per_m,
            b.expanded_uncertainty_n_per_m,
            b.coverage_factor
        );
    }
}

/// The matched and missing modes, the unexplained partials and the hum.
fn mode_tables(s: &mut String, m: &Measurement) {
    if !m.modes.is_empty() {
        let _ = writeln!(s, "## Matched modes\n");
        let _ = writeln!(s, "| mode | predicted Hz | measured Hz | u Hz | CRLB Hz | residual cents | level dB | SNR dB | decay dB/s | T60 s | note |\n|---|---:|---:|---:|---:|---:|---:|---:|---:|---:|---|");
        for r in &m.modes {
            let mut note = Vec::new();
            if r.outlier {
                note.push("outlier, not fitted".to_string());
            }
            if r.crowded {
                note.push("crowded by a neighbouring line, not fitted".to_string());
            }
            if !r.alternatives.is_empty() {
                note.push(format!("or {}", r.alternatives.join(", ")));
            }
            if let Some(p) = &r.pair {
                note.push(format!(
                    "split pair {:.3} and {:.3} Hz, splitting {:.3} ± {:.3} Hz ({:.2} ± {:.2} cents)",
                    p.lower.frequency_hz,
                    p.upper.frequency_hz,
                    p.splitting_hz,
                    p.splitting_u_hz,
                    p.splitting_cents,
                    p.splitting_u_cents
                ));
            }
            let small = |v: Option<f64>| {
                v.map(|x| crate::base::units::sig(x, 2))
                    .unwrap_or_else(|| "–".into())
            };
            let _ = writeln!(
                s,
                "| {} | {:.2} | {:.3} | {} | {} | {:+.2} | {:.1} | {:.1} | {} | {} | {} |",
                r.labels,
                r.predicted_hz,
                r.measured_hz,
                small(r.measured_u_hz),
                small(r.crlb_hz),
                r.residual_cents,
                r.level_db,
                r.snr_db,
                r.decay_rate_db_per_s
                    .map(|t| format!("{t:.1}"))
                    .unwrap_or_else(|| "–".into()),
                r.t60_s
                    .map(|t| format!("{t:.3}"))
                    .unwrap_or_else(|| "–".into()),
                note.join("; ")
            );
        }
        let _ = writeln!(s);
    }
    if !m.missing.is_empty() {
        let _ = writeln!(s, "## Predicted modes without a partial\n");
        let list: Vec<String> = m
            .missing
            .iter()
            .take(20)
            .map(|x| format!("{} at {:.1} Hz", x.labels, x.predicted_hz))
            .collect();
        let _ = writeln!(
            s,
            "{}{}\n",
            list.join(", "),
            if m.missing.len() > 20 { ", …" } else { "" }
        );
    }
    if !m.unmatched.is_empty() {
        let _ = writeln!(s, "## Partials not explained by the model\n");
        for &i in &m.unmatched {
            let p = &m.analysis.partials[i];
            let _ = writeln!(
                s,
                "- {:.2} Hz, {:.1} dB, SNR {:.1} dB",
                p.frequency_hz, p.level_db, p.snr_db
            );
        }
        let _ = writeln!(s);
    }
    if !m.analysis.hum.is_empty() {
        let _ = writeln!(s, "## Mains hum set aside\n");
        for h in &m.analysis.hum {
            let _ = writeln!(
                s,
                "- {:.2} Hz ({} × {:.0} Hz)",
                h.partial.frequency_hz, h.harmonic, h.mains_hz
            );
        }
        let _ = writeln!(s);
    }
}

/// The taps of a file of several taps.
fn taps(s: &mut String, m: &Measurement) {
    if let Some(t) = &m.taps {
        let _ = writeln!(
            s,
            "## Taps\n\n| onset s | value | grade | kept | reason |\n|---:|---|---|---|---|"
        );
        for tap in &t.taps {
            let _ = writeln!(
                s,
                "| {:.3} | {} | {} | {} | {} |",
                tap.onset_s,
                tap.value
                    .map(|v| pm(v.value, v.standard_uncertainty, t.unit))
                    .unwrap_or_else(|| "–".into()),
                tap.grade.name(),
                if tap.kept { "yes" } else { "no" },
                tap.reason.clone().unwrap_or_default()
            );
        }
        if let Some(c) = t.combined {
            let _ = writeln!(
                s,
                "\nCombined (inverse-variance weighted, uncertainty at least the repeatability s/√n): **{}**; repeatability s = {}.\n",
                pm(c.value, c.standard_uncertainty, t.unit),
                t.repeatability.map(|r| format!("{r:.3} {}", t.unit)).unwrap_or_else(|| "–".into())
            );
        }
    }
}

/// Warnings, method and the caution.
fn closing(s: &mut String, m: &Measurement) {
    let _ = writeln!(s, "## Warnings\n");
    if m.warnings.is_empty() {
        let _ = writeln!(s, "None.\n");
    } else {
        for w in &m.warnings {
            let _ = writeln!(s, "- {w}");
        }
        let _ = writeln!(s);
    }
    let _ = writeln!(s, "## Method\n");
    if let Some(f) = &m.fit {
        let _ = writeln!(
            s,
            "Ideal membrane with fixed edges; wave speed fitted by least squares in log frequency ({}). Uncertainty: {}. {} hypotheses examined for the mode labels. T = σ·c².\n",
            f.stop_reason,
            f.uncertainty_method,
            m.matching.as_ref().map(|x| x.hypotheses).unwrap_or(0)
        );
    }
    let _ = writeln!(
        s,
        "The ideal model leaves out bending stiffness, air loading and uneven tension; on light films in air the ideal-membrane tension can be far too low. The uncertainty above is the fit's statistical part only: the areal density and dimensions add their own.\n"
    );
    let _ = writeln!(s, "## Caution\n\n{CAUTION}");
}
