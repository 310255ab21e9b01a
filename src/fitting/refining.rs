//! Refining: once the FFT peaks have labelled the modes, the partials that
//! enter the fit are measured again by the damped-sinusoid fit, FFT-resolved
//! split pairs are joined on their line, and the observations for the fit
//! are chosen (crowded modes and modes the calibration lacks left out).

use crate::fitting::fit::Observation;
use crate::fitting::labelling::MIN_ISOLATED_MODES;
use crate::fitting::matching::{self, Matching, WEAK_COUPLING};
use crate::fitting::measurement::FitOptions;
use crate::physics::membrane::ModeLine;
use crate::signal::partials::{self, PartialAnalysis};
use crate::signal::recording::Recording;
use realfft::RealFftPlanner;

/// A line closer than this many resolution widths (1/span) to another
/// coupled line is crowded.
pub const CROWDED_RESOLUTIONS: f64 = 4.0;

/// The observations of a labelled recording, one per assignment, and which
/// of them the fit uses.
#[derive(Debug, Clone)]
pub struct Prepared {
    /// One observation per assignment of the matching, in its order.
    pub obs: Vec<Observation>,
    /// Per observation: the calibration has no factor for its mode.
    pub uncalibrated: Vec<bool>,
    /// Indices into `obs` of the observations the fit uses.
    pub fit_idx: Vec<usize>,
    /// The observations the fit uses (`obs` at `fit_idx`).
    pub fit_obs: Vec<Observation>,
}

/// Joins resolved pairs, refines the chosen partials and picks the fit's
/// observations. `uncalibrated` lists the modes without a calibration
/// factor.
pub fn prepare(
    rec: &Recording,
    analysis: &mut PartialAnalysis,
    lines: &[ModeLine],
    m: &mut Matching,
    uncalibrated: &[(u32, u32)],
    opts: &FitOptions,
    planner: &mut RealFftPlanner<f64>,
) -> Prepared {
    // Members of a split pair that the FFT already separated: the second
    // member joins the first on their one degenerate line.
    let partners = pair_partners(&analysis.partials, lines, m);
    let crowded = crowded(analysis.tap.span_s, lines, m);
    // The FFT peaks labelled the modes; the damped-sinusoid refinement
    // (about a millisecond a band) is spent on the isolated modes that
    // enter the fit and on every FFT-resolved pair, whose two members are
    // fitted together (the evenness needs each member's uncertainty).
    if opts.analysis.refine {
        let chosen: Vec<usize> = m
            .assignments
            .iter()
            .zip(&crowded)
            .filter(|(_, &c)| !c)
            .map(|(a, _)| a.partial)
            // A member the pair's joint fit could not place is fitted on
            // its own (the joint fit comes first; members it placed are
            // skipped).
            .chain(partners.iter().flat_map(|&(p, q)| [p, q]))
            .collect();
        partials::refine(
            rec,
            analysis,
            &chosen,
            &partners,
            partials::FIT_PENCIL_SAMPLES,
            planner,
        );
    }
    for &(keep, absorbed) in &partners {
        partials::merge_pair(&mut analysis.partials, keep, absorbed);
    }
    pairs_on_single_lines(analysis, lines, m);
    let parts = &analysis.partials;
    let obs: Vec<Observation> = m
        .assignments
        .iter()
        .map(|a| Observation {
            frequency_hz: parts[a.partial].frequency_hz,
            factor: lines[a.line].factor,
            mode: lines[a.line].labels[0],
        })
        .collect();
    // Modes the calibration has no factor for are never fitted.
    let uncal: Vec<bool> = obs.iter().map(|o| uncalibrated.contains(&o.mode)).collect();
    let isolated: Vec<usize> = (0..obs.len())
        .filter(|&i| !crowded[i] && !uncal[i])
        .collect();
    let fit_idx: Vec<usize> = if isolated.len() >= MIN_ISOLATED_MODES {
        isolated
    } else {
        (0..obs.len()).filter(|&i| !uncal[i]).collect()
    };
    let fit_obs: Vec<Observation> = fit_idx.iter().map(|&i| obs[i].clone()).collect();
    Prepared {
        obs,
        uncalibrated: uncal,
        fit_idx,
        fit_obs,
    }
}

/// Per assignment: a partial whose line has a coupled neighbour closer
/// than [`CROWDED_RESOLUTIONS`] resolution widths (1/span) shares its peak
/// with that neighbour; its frequency is pulled, so it is left out of the
/// fit whenever enough isolated modes remain.
fn crowded(span_s: f64, lines: &[ModeLine], m: &Matching) -> Vec<bool> {
    let span_s = span_s.max(1e-3);
    let c0 = m.wave_speed_m_per_s;
    m.assignments
        .iter()
        .map(|a| {
            let f = c0 * lines[a.line].factor;
            let near = lines.iter().enumerate().any(|(j, l)| {
                j != a.line
                    && l.coupling >= WEAK_COUPLING
                    && (c0 * l.factor - f).abs() < CROWDED_RESOLUTIONS / span_s
            });
            near || !a.alternatives.is_empty()
        })
        .collect()
}

/// A pair on a line of one mode is two modes (or a beating) in one peak,
/// not a split degenerate mode: its mean belongs to neither, so the member
/// nearer the line stands for the mode.
fn pairs_on_single_lines(analysis: &mut PartialAnalysis, lines: &[ModeLine], m: &Matching) {
    let c0 = m.wave_speed_m_per_s;
    for asg in &m.assignments {
        let line = &lines[asg.line];
        let p = &mut analysis.partials[asg.partial];
        if let (1, Some(pair)) = (line.degeneracy, p.pair) {
            let f_line = c0 * line.factor;
            let near = if (pair.lower.frequency_hz - f_line).abs()
                <= (pair.upper.frequency_hz - f_line).abs()
            {
                pair.lower
            } else {
                pair.upper
            };
            p.frequency_hz = near.frequency_hz;
            p.frequency_u_hz = Some(near.frequency_u_hz);
            p.crlb_hz = Some(near.crlb_hz);
        }
    }
}

/// FFT-resolved split pairs: for each line of two or more modes, the
/// partials within [`matching::MATCH_GATE_CENTS`] of it (at the matched
/// wave speed) and nearer to it than to any other coupled line, either
/// assigned to it or left unmatched. When there are two or more, the two
/// strongest are a pair, when their mean lies on the line within
/// [`matching::MATCH_SCATTER_CENTS`]: the first keeps the assignment, the second is
/// taken out of the assignments and the unmatched list. Returns the
/// (kept, absorbed) partial indices.
fn pair_partners(
    parts: &[partials::Partial],
    lines: &[ModeLine],
    m: &mut Matching,
) -> Vec<(usize, usize)> {
    let c0 = m.wave_speed_m_per_s;
    let cents = |f: f64, g: f64| crate::base::estimate::CENTS_PER_LN * (f / (c0 * g)).ln();
    let nearest_line = |f: f64| {
        lines
            .iter()
            .enumerate()
            .filter(|(_, l)| l.coupling >= WEAK_COUPLING)
            .min_by(|a, b| {
                cents(f, a.1.factor)
                    .abs()
                    .total_cmp(&cents(f, b.1.factor).abs())
            })
            .map(|(j, _)| j)
    };
    let mut out = Vec::new();
    for (j, line) in lines.iter().enumerate() {
        if line.degeneracy < 2 {
            continue;
        }
        let mut cands: Vec<usize> = m
            .assignments
            .iter()
            .filter(|a| a.line == j)
            .map(|a| a.partial)
            .chain(m.unmatched.iter().copied())
            .filter(|&i| {
                let f = parts[i].frequency_hz;
                cents(f, line.factor).abs() <= matching::MATCH_GATE_CENTS
                    && nearest_line(f) == Some(j)
            })
            .collect();
        if cands.len() < 2 {
            continue;
        }
        cands.sort_by(|&a, &b| parts[b].level_db.total_cmp(&parts[a].level_db));
        let (p, q) = (cands[0], cands[1]);
        // A split pair's members lie about the unsplit frequency (to first
        // order symmetrically, `evenness`): their mean must sit on the
        // line within the matching scatter, or the second partial is some
        // other peak that happens to be near.
        let mean_cents = 0.5
            * (cents(parts[p].frequency_hz, line.factor)
                + cents(parts[q].frequency_hz, line.factor));
        if mean_cents.abs() > matching::MATCH_SCATTER_CENTS {
            continue;
        }
        // The kept member holds this line's assignment.
        let kept = match m
            .assignments
            .iter_mut()
            .find(|a| a.line == j && (a.partial == p || a.partial == q))
        {
            Some(a) => {
                a.partial = p;
                p
            }
            None => continue,
        };
        m.assignments.retain(|a| !(a.line == j && a.partial == q));
        m.assignments
            .dedup_by(|a, b| a.line == b.line && a.partial == b.partial);
        m.unmatched.retain(|&i| i != q && i != p);
        out.push((kept, q));
    }
    out
}
