//! The report's text, section by section, as Markdown; the HTML page is
//! made from the same text.

use std::fmt::Write as _;

use crate::acceptance::stats;

use super::pictures::Pictures;
use super::summary::*;

/// The NIST e-Handbook (§6.1.6) asks for about this many values before a
/// capability index means much; fewer get a note.
pub(super) const CAPABILITY_MIN_N: usize = 50;

/// Capability figures for the report: (Cp/Cpk with σ̂ = MR̄/d₂, Pp/Ppk
/// with σ = s).
pub(super) fn capabilities(
    values: &[f64],
    s: &BatchSummary,
) -> (Option<stats::Capability>, Option<stats::Capability>) {
    (
        stats::capability(
            values,
            s.lower_n_per_m,
            s.upper_n_per_m,
            stats::SigmaMethod::MovingRange,
        ),
        stats::capability(
            values,
            s.lower_n_per_m,
            s.upper_n_per_m,
            stats::SigmaMethod::Overall,
        ),
    )
}

pub(super) fn opt(v: Option<f64>, digits: usize) -> String {
    v.filter(|x| x.is_finite())
        .map(|x| format!("{x:.digits$}"))
        .unwrap_or_else(|| "–".into())
}

/// A table row of cells.
pub(super) fn cells_row(out: &mut String, cells: &[String]) {
    out.push('|');
    for c in cells {
        let _ = write!(out, " {} |", c.replace('|', "\\|"));
    }
    out.push('\n');
}

/// The report's sections, as (heading, Markdown body). The HTML page is
/// made from the same text so the two never disagree.
pub(super) fn sections(s: &BatchSummary, pics: &Pictures) -> Vec<(String, String)> {
    let pts = measured(s);
    let values: Vec<f64> = pts.iter().filter_map(|(_, e)| e.tension_n_per_m).collect();
    [
        ("The batch at a glance", glance(s)),
        ("Spread of the fitted tension", spread(&values, pics)),
        ("Tension in recording order", run_chart(&pts, &values, pics)),
        ("Capability against the limits", capability(s, &values)),
        ("Anisotropy", anisotropy(s, pics)),
        ("Unevenness", unevenness(s, &pts, pics)),
        ("Recordings not measured", not_measured(s)),
        ("Every recording", every_recording(s)),
    ]
    .into_iter()
    .map(|(heading, body)| (heading.to_string(), body))
    .collect()
}

/// What was decided, by which rule.
fn glance(s: &BatchSummary) -> String {
    let mut b = String::new();
    if let Some(i) = &s.interrupted {
        let _ = writeln!(
            b,
            "**The run was interrupted by {}**: {}. The report covers the recordings decided before the stop.\n",
            i.signal,
            match i.total {
                Some(t) => format!(
                    "{} of {t} recordings were decided, {} were not",
                    i.decided,
                    t.saturating_sub(i.decided)
                ),
                None => format!(
                    "the watch ended after {} recording(s); files that landed later were not decided",
                    i.decided
                ),
            }
        );
    }
    let _ = writeln!(
        b,
        "Specification **{}** version {} (SHA-256 `{}`), model {}, decided by the **{}** rule: {}",
        s.spec_name,
        s.spec_version,
        short_hash(&s.spec_sha256),
        s.model,
        s.rule,
        s.rule_description
    );
    let _ = writeln!(
        b,
        "\nLimits: L = {:.1} N/m, H = {:.1} N/m, nominal {:.1} N/m; expanded uncertainty with k = {}.{}{}{}",
        s.lower_n_per_m,
        s.upper_n_per_m,
        s.nominal_n_per_m,
        s.coverage_factor,
        s.max_anisotropy_percent
            .map(|a| format!(" Largest anisotropy {a} %."))
            .unwrap_or_default(),
        s.max_unevenness_percent
            .map(|a| format!(" Largest unevenness {a} %."))
            .unwrap_or_default(),
        s.calibration
            .as_ref()
            .map(|c| format!(" Calibration `{c}`."))
            .unwrap_or_default()
    );
    let _ = writeln!(
        b,
        "\nMade {}{}{}.\n",
        s.generated,
        s.station
            .as_ref()
            .map(|x| format!(", station {x}"))
            .unwrap_or_default(),
        s.operator
            .as_ref()
            .map(|x| format!(", operator {x}"))
            .unwrap_or_default()
    );
    let measured = s.entries.iter().filter(|e| e.measured()).count();
    let refined = s
        .entries
        .iter()
        .filter(|e| e.measured() && e.refined)
        .count();
    let _ = writeln!(
        b,
        "Partial frequencies: {refined} of {measured} measured recordings refined by the damped-sinusoid fit, the others from the FFT peaks (`frequency_method` in `inspect.csv`).\n"
    );
    b.push_str("| decision | recordings |\n|---|---:|\n");
    for (d, n) in tally(s) {
        let _ = writeln!(b, "| {} | {n} |", decision_label(d));
    }
    let _ = writeln!(b, "| **all** | **{}** |", s.entries.len());
    b
}

/// The spread of the fitted tension.
fn spread(values: &[f64], pics: &Pictures) -> String {
    let mut b = String::new();
    if pics.has(HISTOGRAM_NAME) {
        let _ = writeln!(
            b,
            "![Fitted tension against the limits]({HISTOGRAM_NAME})\n"
        );
        let _ = writeln!(
            b,
            "{} measured recordings; mean {} N/m, sample standard deviation s = {} N/m, range {} … {} N/m. About √n bins, with edges on the limits; the red lines are the limits L and H.",
            values.len(),
            opt(stats::mean(values), 1),
            opt(stats::std_dev(values), 2),
            opt(values.iter().copied().reduce(f64::min), 1),
            opt(values.iter().copied().reduce(f64::max), 1)
        );
    } else {
        b.push_str("No recording was measured, so there is no spread to show.\n");
    }
    b
}

/// The individuals chart and its signals.
fn run_chart(pts: &[(usize, &BatchEntry)], values: &[f64], pics: &Pictures) -> String {
    let mut b = String::new();
    match stats::individuals_chart(values) {
        Some(c) => {
            if pics.has(RUN_CHART_NAME) {
                let _ = writeln!(b, "![Individuals chart of the tension]({RUN_CHART_NAME})\n");
            }
            let _ = writeln!(
                b,
                "Individuals chart (NIST/SEMATECH e-Handbook of Statistical Methods §6.3.2.2), measured recordings in batch order: moving ranges MRᵢ = |xᵢ − xᵢ₋₁|, centre x̄ = {:.2} N/m, MR̄ = {:.2} N/m, σ̂ = MR̄/d₂ = {:.2} N/m (d₂ = {}), control limits x̄ ± 3σ̂ = {:.2} … {:.2} N/m; moving-range limit D₄·MR̄ = {:.2} N/m (D₄ = {}). The limits are computed from this batch (a phase I chart).\n",
                c.centre,
                c.average_moving_range,
                c.sigma,
                stats::D2_N2,
                c.lcl,
                c.ucl,
                c.moving_range_ucl,
                stats::D4_N2
            );
            if c.out_of_control.is_empty() {
                b.push_str("No point is outside the control limits.\n");
            } else {
                let _ = writeln!(
                    b,
                    "{} points signal (outside x̄ ± 3σ̂, or a moving range above D₄·MR̄):\n",
                    c.out_of_control.len()
                );
                for &k in c.out_of_control.iter().take(30) {
                    let (pos, e) = pts[k];
                    let p = &c.points[k];
                    let _ = writeln!(
                        b,
                        "- #{pos} `{}`: {:.1} N/m{}{}",
                        e.file,
                        p.value,
                        if p.above_ucl || p.below_lcl {
                            " (outside the control limits)"
                        } else {
                            ""
                        },
                        if p.moving_range_above_ucl {
                            " (jump from the previous recording)"
                        } else {
                            ""
                        }
                    );
                }
                if c.out_of_control.len() > 30 {
                    let _ = writeln!(b, "- … and {} more", c.out_of_control.len() - 30);
                }
            }
        }
        None => b.push_str("Fewer than two measured recordings: no control chart.\n"),
    }
    b
}

/// Capability indices against the limits.
fn capability(s: &BatchSummary, values: &[f64]) -> String {
    let mut b = String::new();
    let (within, overall) = capabilities(values, s);
    b.push_str("Formulas after the NIST/SEMATECH e-Handbook §6.1.6, with USL = H and LSL = L:\n\n");
    b.push_str("- Cp = (USL − LSL)/(6σ̂), Cpk = min(USL − μ, μ − LSL)/(3σ̂) with the short-term σ̂ = MR̄/d₂ from the moving ranges;\n");
    b.push_str("- Pp = (USL − LSL)/(6s), Ppk = min(USL − μ, μ − LSL)/(3s) with the overall sample standard deviation s.\n\n");
    match (within, overall) {
        (Some(w), Some(o)) => {
            b.push_str(
                "| index | value | μ [N/m] | σ [N/m] | σ from |\n|---|---:|---:|---:|---|\n",
            );
            let _ = writeln!(
                b,
                "| Cp | {} | {:.2} | {:.3} | MR̄/d₂ |",
                opt(w.cp, 3),
                w.mean,
                w.sigma
            );
            let _ = writeln!(
                b,
                "| Cpk | {} | {:.2} | {:.3} | MR̄/d₂ |",
                opt(w.cpk, 3),
                w.mean,
                w.sigma
            );
            let _ = writeln!(
                b,
                "| Pp | {} | {:.2} | {:.3} | s |",
                opt(o.cp, 3),
                o.mean,
                o.sigma
            );
            let _ = writeln!(
                b,
                "| Ppk | {} | {:.2} | {:.3} | s |",
                opt(o.cpk, 3),
                o.mean,
                o.sigma
            );
            if w.n < CAPABILITY_MIN_N {
                let _ = writeln!(
                    b,
                    "\nOnly {} measured recordings: the handbook asks for about {CAPABILITY_MIN_N} before an index means much.",
                    w.n
                );
            }
        }
        _ => b.push_str("Fewer than two measured recordings: no capability index.\n"),
    }
    b
}

/// The anisotropy distribution and its judgements.
fn anisotropy(s: &BatchSummary, pics: &Pictures) -> String {
    let mut b = String::new();
    let aniso: Vec<&BatchEntry> = s
        .entries
        .iter()
        .filter(|e| e.measured() && e.anisotropy_percent.is_some())
        .collect();
    if aniso.is_empty() {
        let _ = writeln!(
            b,
            "The {} model does not measure anisotropy (only `biaxial` does, on rectangles), so there is no anisotropy distribution for this batch.",
            s.model
        );
    } else {
        if pics.has(ANISOTROPY_NAME) {
            let _ = writeln!(b, "![Anisotropy distribution]({ANISOTROPY_NAME})\n");
        }
        let a: Vec<f64> = aniso.iter().filter_map(|e| e.anisotropy_percent).collect();
        let _ = writeln!(
            b,
            "Anisotropy 100·(Tx − Ty)/((Tx + Ty)/2) of {} recordings: mean {} %, s = {} %, range {} … {} %; typical standard uncertainty {} %.",
            a.len(),
            opt(stats::mean(&a), 2),
            opt(stats::std_dev(&a), 2),
            opt(a.iter().copied().reduce(f64::min), 2),
            opt(a.iter().copied().reduce(f64::max), 2),
            opt(median(aniso.iter().filter_map(|e| e.anisotropy_u_percent)), 2)
        );
        match s.max_anisotropy_percent {
            Some(m) => {
                let _ = writeln!(
                    b,
                    "\nLimit |a| ≤ {m} % (red lines at ±{m} %), judged under the {} rule with each recording's own uncertainty: {}.",
                    s.rule,
                    judgement_tally(aniso.iter().filter_map(|e| e.anisotropy_decision.as_deref()))
                );
            }
            None => b.push_str("\nThe specification sets no anisotropy limit.\n"),
        }
    }
    b
}

/// The unevenness distribution, its judgements and the recordings without a split pair.
fn unevenness(s: &BatchSummary, pts: &[(usize, &BatchEntry)], pics: &Pictures) -> String {
    let mut b = String::new();
    let uneven: Vec<&BatchEntry> = s
        .entries
        .iter()
        .filter(|e| e.measured() && e.unevenness_percent.is_some())
        .collect();
    let unresolved = pts.len() - uneven.len();
    if uneven.is_empty() && !s.unevenness_applies {
        let _ = writeln!(
            b,
            "The unevenness is read from split mode pairs of a circle or a square panel measured with the isotropic or air model; it does not apply to this specification{}.",
            if s.model == "biaxial" {
                " (the anisotropy above is its measure of uneven tension)"
            } else {
                ""
            }
        );
    } else if uneven.is_empty() {
        let _ = writeln!(
            b,
            "No measured recording resolved a split mode pair, so there is no unevenness distribution for this batch (the unevenness is read from split pairs of a circle or a square panel).{}",
            s.max_unevenness_percent
                .map(|m| format!(" The limit {m} % could not be applied: those recordings were decided on the tension alone, with the reason \"evenness not measurable: no split pair resolved\"."))
                .unwrap_or_default()
        );
    } else {
        if pics.has(UNEVENNESS_NAME) {
            let _ = writeln!(b, "![Unevenness distribution]({UNEVENNESS_NAME})\n");
        }
        let a: Vec<f64> = uneven.iter().filter_map(|e| e.unevenness_percent).collect();
        let _ = writeln!(
            b,
            "Unevenness, the spread 2|ε| of the principal tensions (tightest over slackest direction, minus one, to first order), of {} recordings: mean {} %, s = {} %, range {} … {} %; typical standard uncertainty {} %.",
            a.len(),
            opt(stats::mean(&a), 2),
            opt(stats::std_dev(&a), 2),
            opt(a.iter().copied().reduce(f64::min), 2),
            opt(a.iter().copied().reduce(f64::max), 2),
            opt(median(uneven.iter().filter_map(|e| e.unevenness_u_percent)), 2)
        );
        if let Some(m) = s.max_unevenness_percent {
            let _ = writeln!(
                b,
                "\nLimit {m} % (red line), judged under the {} rule with each recording's own uncertainty: {}.",
                s.rule,
                judgement_tally(uneven.iter().filter_map(|e| e.unevenness_decision.as_deref()))
            );
        }
        if unresolved > 0 {
            let _ = writeln!(
                b,
                "\n{unresolved} measured recording(s) resolved no split pair: evenness not measurable{}.",
                if s.max_unevenness_percent.is_some() {
                    ", decided on the tension alone"
                } else {
                    ""
                }
            );
        }
    }
    b
}

/// The recordings that were not measured, with their reasons.
fn not_measured(s: &BatchSummary) -> String {
    let mut b = String::new();
    let missing: Vec<(usize, &BatchEntry)> = s
        .entries
        .iter()
        .enumerate()
        .filter(|(_, e)| !e.measured())
        .map(|(i, e)| (i + 1, e))
        .collect();
    if missing.is_empty() {
        b.push_str("Every recording was measured.\n");
    } else {
        b.push_str("| # | recording | status | reason |\n|---:|---|---|---|\n");
        for (i, e) in missing {
            cells_row(
                &mut b,
                &[
                    i.to_string(),
                    format!("`{}`", e.file),
                    decision_label(&e.decision).to_string(),
                    e.reason.clone().unwrap_or_else(|| "–".into()),
                ],
            );
        }
    }
    b
}

/// Every recording's decision.
fn every_recording(s: &BatchSummary) -> String {
    let mut b = String::new();
    b.push_str("Tension ± u (k = 1, fit and areal density), U = k·u, margin to the nearest limit (positive inside).\n\n");
    b.push_str("| # | recording | decision | tension [N/m] | U [N/m] | margin [N/m] | grade |\n|---:|---|---|---:|---:|---:|---|\n");
    for (i, e) in s.entries.iter().enumerate() {
        let t = match (e.tension_n_per_m, e.tension_u_n_per_m) {
            (Some(t), Some(u)) => format!("{t:.1} ± {u:.1}"),
            (Some(t), None) => format!("{t:.1}"),
            _ => "–".into(),
        };
        let margin = match (e.margin_n_per_m, &e.nearest_limit) {
            (Some(m), Some(side)) => format!("{m:+.1} ({side})"),
            (Some(m), None) => format!("{m:+.1}"),
            _ => "–".into(),
        };
        cells_row(
            &mut b,
            &[
                (i + 1).to_string(),
                format!("`{}`", e.file),
                decision_label(&e.decision).to_string(),
                t,
                opt(e.expanded_u_n_per_m, 1),
                margin,
                e.grade.clone().unwrap_or_else(|| "–".into()),
            ],
        );
    }
    b
}

/// Median of some values (None when there are none).
pub(super) fn median(values: impl Iterator<Item = f64>) -> Option<f64> {
    let mut v: Vec<f64> = values.filter(|x| x.is_finite()).collect();
    if v.is_empty() {
        return None;
    }
    v.sort_by(f64::total_cmp);
    let n = v.len();
    Some(if n % 2 == 1 {
        v[n / 2]
    } else {
        0.5 * (v[n / 2 - 1] + v[n / 2])
    })
}

/// "12 within the limit, 3 beyond it, 2 in the guard band".
pub(super) fn judgement_tally<'a>(decisions: impl Iterator<Item = &'a str>) -> String {
    let (mut pass, mut fail, mut band) = (0, 0, 0);
    for d in decisions {
        match d {
            "pass" => pass += 1,
            "fail" => fail += 1,
            _ => band += 1,
        }
    }
    format!("{pass} within the limit, {fail} beyond it, {band} in the guard band (indeterminate)")
}

pub(super) fn short_hash(h: &str) -> String {
    h.chars().take(12).collect()
}
