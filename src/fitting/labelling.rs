//! Labelling: which partial is which mode. Each model labels with its own
//! dispersion: the isotropic membrane on its lines (and, for a rectangle
//! whose entered sides do not label well, over a narrow grid of aspect
//! ratios), the biaxial membrane over a grid of tension ratios, the plate
//! over a grid of stiffness; the biaxial and plate labels are then
//! iterated against their own fits ([`relabel`]).

use crate::base::warning::Warning;
use crate::fitting::fit::{self, FitModel, Observation};
use crate::fitting::lines::{ensemble_for, matching_factor, matching_lines};
use crate::fitting::matching::{self, Matching};
use crate::fitting::measurement::FitOptions;
use crate::physics::membrane::{ModeLine, Shape};
use crate::physics::panel::Panel;
use crate::signal::partials::Partial;

/// Crowded modes are left out only when at least this many isolated remain
/// (and the entered sides label well only with at least this many modes).
pub const MIN_ISOLATED_MODES: usize = 4;

/// The labelling stage's outcome.
#[derive(Debug, Clone)]
pub struct Labelled {
    /// The lines the partials are labelled against (factor g at unit wave
    /// speed), after air loading, calibration and the model's search.
    pub lines: Vec<ModeLine>,
    /// The labelling, when any hypothesis explained the partials.
    pub matching: Option<Matching>,
    /// Modes the calibration has no factor for (never fitted).
    pub uncalibrated: Vec<(u32, u32)>,
}

/// Labels the partials with the model of `opts`, pushing a warning when a
/// search ends at the edge of its range or the line cap leaves partials
/// unlabelled.
pub fn label(
    parts: &[Partial],
    panel: &Panel,
    opts: &FitOptions,
    warnings: &mut Vec<Warning>,
) -> Labelled {
    let (f_lo, f_hi) = parts.iter().fold((f64::INFINITY, 0.0f64), |(lo, hi), p| {
        (lo.min(p.frequency_hz), hi.max(p.frequency_hz))
    });
    // Lines are needed from the lowest anchored partial up (a weak peak
    // below it is labelled if a line is there, but seeds no hypothesis).
    let f_lo = matching::anchor_floor_hz(parts).unwrap_or(f_lo);
    let f_ratio = f_hi / f_lo;
    let (lines, uncalibrated) = candidate_lines(parts, panel, opts, f_ratio);
    let band = (opts.analysis.min_frequency_hz, f_hi.max(1.0));
    let (lines, matching) = search(parts, panel, opts, lines, f_ratio, band, warnings);
    let (lines, matching) = relabel_for_model(parts, panel, opts.model, lines, matching);
    line_cap_warning(panel, &lines, matching.as_ref(), (f_hi, f_ratio), warnings);
    Labelled {
        lines,
        matching,
        uncalibrated,
    }
}

/// The ideal lines over the partials' range, air-loaded for `--model air`
/// and corrected by the calibration, with the modes it does not cover.
fn candidate_lines(
    parts: &[Partial],
    panel: &Panel,
    opts: &FitOptions,
    f_ratio: f64,
) -> (Vec<ModeLine>, Vec<(u32, u32)>) {
    let lines = if parts.is_empty() {
        Vec::new()
    } else {
        matching_lines(panel, f_ratio)
    };
    let lines = match (opts.model, panel.areal_density) {
        (FitModel::AirLoaded, Some(s)) => crate::physics::airload::loaded_lines(&lines, s.0),
        _ => lines,
    };
    match &opts.calibration {
        Some(cal) => cal.calibration.apply(&lines),
        None => (lines, Vec::new()),
    }
}

/// The model's own search for the labelling.
fn search(
    parts: &[Partial],
    panel: &Panel,
    opts: &FitOptions,
    lines: Vec<ModeLine>,
    f_ratio: f64,
    band: (f64, f64),
    warnings: &mut Vec<Warning>,
) -> (Vec<ModeLine>, Option<Matching>) {
    let full = (matching::ANCHOR_PARTIALS, matching::ANCHOR_LINES);
    let Shape::Rectangle { width, height } = panel.shape else {
        let m = match_on(parts, &lines, panel, band, full);
        return (lines, m);
    };
    let (lx, ly) = (width.0, height.0);
    match opts.model {
        // Biaxial tension: the labels come from the best of the isotropic
        // hypotheses of a grid of tension ratios (each is an isotropic
        // rectangle of another aspect), then relabelled against the
        // biaxial model itself, since the ratio moves the pure-m and pure-n
        // modes apart by more than the matching gate.
        FitModel::Biaxial if !parts.is_empty() => {
            let grid = RatioGrid {
                max_ratio: BIAXIAL_MAX_RATIO,
                step: BIAXIAL_RATIO_STEP,
                prior_at_one: None,
            };
            let (l, m, edge) = biaxial_search(parts, panel, lx, ly, f_ratio, band, grid);
            if edge {
                warnings.push(Warning::SearchLimit {
                    detail: format!(
                        "the best tension ratio Tx/Ty lies at the end of the searched range 1/{BIAXIAL_MAX_RATIO} to {BIAXIAL_MAX_RATIO}; the panel may be more anisotropic than tonus searches"
                    ),
                });
            }
            (l, m)
        }
        FitModel::Stiff if !parts.is_empty() => {
            let (l, m, edge) = plate_search(parts, panel, &lines, lx, ly, band);
            if edge {
                warnings.push(Warning::SearchLimit {
                    detail: format!(
                        "the best D·k₁₁²/T lies at the top of the searched range (up to {PLATE_MAX_BETA}); the panel may be stiffer than tonus searches"
                    ),
                });
            }
            (l, m)
        }
        FitModel::Isotropic if !parts.is_empty() && opts.calibration.is_none() => {
            aspect_search(parts, panel, opts, lines, f_ratio, band)
        }
        _ => {
            let m = match_on(parts, &lines, panel, band, full);
            (lines, m)
        }
    }
}

/// An isotropic rectangle: the labels come from the best of a narrow grid
/// of aspect ratios (a side may be entered wrong, which moves the pure-m
/// and pure-n modes apart like unequal tension), then stand on the entered
/// sides' lines for the fit, whose aspect check says whether the sides
/// agree. The grid runs only when the entered sides do not label well
/// ([`entered_sides_suffice`]).
fn aspect_search(
    parts: &[Partial],
    panel: &Panel,
    opts: &FitOptions,
    lines: Vec<ModeLine>,
    f_ratio: f64,
    band: (f64, f64),
) -> (Vec<ModeLine>, Option<Matching>) {
    let Shape::Rectangle { width, height } = panel.shape else {
        unreachable!("the aspect search is called for rectangles only");
    };
    let full = (matching::ANCHOR_PARTIALS, matching::ANCHOR_LINES);
    let m0 = match_on(parts, &lines, panel, band, full);
    if !opts.aspect_search
        || m0
            .as_ref()
            .is_some_and(|m| entered_sides_suffice(m, parts, &lines, (width.0, height.0), band.0))
    {
        return (lines, m0);
    }
    let grid = RatioGrid {
        max_ratio: ASPECT_SEARCH_MAX_RATIO,
        step: ASPECT_SEARCH_STEP,
        prior_at_one: Some(ENTERED_SIDES_PRIOR),
    };
    let (l, m, _) = biaxial_search(parts, panel, width.0, height.0, f_ratio, band, grid);
    let entered: Vec<ModeLine> = l
        .into_iter()
        .map(|line| {
            let (mm, nn) = line.labels[0];
            ModeLine {
                factor: crate::physics::membrane::rect_mode_frequency_hz(
                    width.0, height.0, 1.0, mm, nn,
                ),
                ..line
            }
        })
        .collect();
    (entered, m)
}

/// The biaxial and plate labels, iterated against their own fits.
fn relabel_for_model(
    parts: &[Partial],
    panel: &Panel,
    model: FitModel,
    lines: Vec<ModeLine>,
    matching: Option<Matching>,
) -> (Vec<ModeLine>, Option<Matching>) {
    match (model, matching, panel.shape) {
        (FitModel::Biaxial, Some(m), _) => {
            let (l, mm) = relabel(parts, &lines, m, biaxial_predictor);
            (l, Some(mm))
        }
        (FitModel::Stiff, Some(m), Shape::Rectangle { width, height }) => {
            let (l, mm) = relabel(parts, &lines, m, |o| plate_predictor(o, width.0, height.0));
            (l, Some(mm))
        }
        (_, other, _) => (lines, other),
    }
}

/// The line cap (Weyl's law, `Shape::factor_cap`) bounds the work; says so
/// when the chosen labelling's wave speed leaves partials above the last
/// line predicted. `top` is (highest partial Hz, highest over lowest).
fn line_cap_warning(
    panel: &Panel,
    lines: &[ModeLine],
    matching: Option<&Matching>,
    (f_hi, f_ratio): (f64, f64),
    warnings: &mut Vec<Warning>,
) {
    let (Some(m), Some(top)) = (matching, lines.last()) else {
        return;
    };
    let c = m.wave_speed_m_per_s;
    if c * top.factor < f_hi * 0.999 && matching_factor(panel, f_ratio) > panel.shape.factor_cap() {
        warnings.push(Warning::SearchLimit {
            detail: format!(
                "partials above {:.0} Hz lie beyond the {} lines predicted (the bound on the work per recording) and were not labelled",
                c * top.factor,
                lines.len()
            ),
        });
    }
}

/// Upper ends of the relabelling bands, in multiples of the lowest
/// assigned partial.
const RELABEL_BANDS: [f64; 6] = [3.0, 4.0, 6.0, 9.0, 14.0, f64::INFINITY];

/// A model's prediction f(m, n) in Hz, refitted from observations.
type Predictor = Box<dyn Fn(u32, u32) -> f64>;

/// Iterates assignment and a model fit whose modes no longer follow the
/// isotropic pattern (biaxial tension splits the (m,n)/(n,m) pairs and
/// moves pure-m and pure-n modes apart; stiffness raises the high modes):
/// every label of every line becomes its own line at the frequency the
/// current fit predicts, partials are reassigned to the nearest, and the
/// model refitted, over a band of partials that grows from the lowest
/// modes to all of them.
fn relabel(
    parts: &[Partial],
    lines: &[ModeLine],
    m: Matching,
    refit: impl Fn(&[Observation]) -> Option<Predictor>,
) -> (Vec<ModeLine>, Matching) {
    let c_ref = m.wave_speed_m_per_s;
    let mut current_lines: Vec<ModeLine> = lines.to_vec();
    let mut current = m;
    let f_low = current
        .assignments
        .first()
        .map(|a| parts[a.partial].frequency_hz)
        .unwrap_or(0.0);
    // The band grows from the low modes, which the isotropic start labels
    // best, to all of them.
    for growth in RELABEL_BANDS {
        let obs: Vec<Observation> = current
            .assignments
            .iter()
            .filter(|a| parts[a.partial].frequency_hz <= f_low * growth)
            .map(|a| Observation {
                frequency_hz: parts[a.partial].frequency_hz,
                factor: current_lines[a.line].factor,
                mode: current_lines[a.line].labels[0],
            })
            .collect();
        let Some(predict) = refit(&obs) else {
            break;
        };
        let mut split: Vec<ModeLine> = lines
            .iter()
            .flat_map(|l| {
                l.labels.iter().map(|&(mm, nn)| ModeLine {
                    labels: vec![(mm, nn)],
                    factor: predict(mm, nn) / c_ref,
                    degeneracy: 1,
                    coupling: l.coupling,
                })
            })
            .collect();
        split.sort_by(|x, y| x.factor.total_cmp(&y.factor));
        let assignments = matching::assign(parts, &split, c_ref);
        let mut used = vec![false; parts.len()];
        for a in &assignments {
            used[a.partial] = true;
        }
        current = Matching {
            wave_speed_m_per_s: c_ref,
            unmatched: (0..parts.len()).filter(|&i| !used[i]).collect(),
            assignments,
            missing: Vec::new(),
            // The rival was a rival of the isotropic start; the relabelled
            // fit answers to its own residuals.
            rival: None,
            ..current
        };
        current_lines = split;
    }
    (current_lines, current)
}

/// Largest tension ratio Tx/Ty (and smallest, its inverse) the biaxial
/// search tries: ±100 % anisotropy (one axis three times the other), beyond
/// any mesh or film stretched for use; a best ratio at either end of the
/// grid is reported as a search limit.
pub const BIAXIAL_MAX_RATIO: f64 = 3.0;

/// Residual rms (cents, over every assigned partial) under which the
/// entered sides' labelling is taken without the aspect search: the
/// matcher's middle scatter scale ([`matching::SCATTER_SCALES_CENTS`]). A
/// side entered 3 % wrong moves the pure-m or pure-n modes by about 25
/// cents, and a labelling forced onto the wrong sides scatters by more, so
/// either sends the recording to the search; a panel whose modes sit on
/// the entered sides' lines (the usual case on a line, where the frame is
/// known) is spared its cost (a grid of 23 aspect ratios, about 40 ms).
pub const ASPECT_SEARCH_TRIGGER_CENTS: f64 = 5.0;

/// Whether the matcher's labelling `m` on the entered sides (`lines`,
/// `sides` = (Lx, Ly)) can stand without the aspect search: at least
/// [`MIN_ISOLATED_MODES`] assigned partials within
/// [`ASPECT_SEARCH_TRIGGER_CENTS`] rms, no rival labelling, no
/// significant disagreement with the entered aspect ratio beyond
/// [`crate::fitting::aspect::DOUBTFUL_ASPECT_FRACTION`], the lowest line (when in
/// the band `band_low_hz` up) assigned, and at most one
/// silent line in the band for every four assigned (a labelling forced onto wrong sides can sit on its lines by
/// taking a far lower wave speed, whose dense lines catch every partial
/// and leave many low lines silent).
fn entered_sides_suffice(
    m: &Matching,
    parts: &[Partial],
    lines: &[ModeLine],
    sides: (f64, f64),
    band_low_hz: f64,
) -> bool {
    let n = m.assignments.len();
    if n < MIN_ISOLATED_MODES || m.is_ambiguous() || m.missing.len() * 4 > n {
        return false;
    }
    let rms = (m
        .assignments
        .iter()
        .map(|a| a.residual_cents * a.residual_cents)
        .sum::<f64>()
        / n as f64)
        .sqrt();
    if rms > ASPECT_SEARCH_TRIGGER_CENTS {
        return false;
    }
    // The lowest mode sounds wherever the panel is tapped (no nodal line
    // inside); a labelling that leaves it silent took the wrong wave speed.
    let lowest_in_band = lines
        .first()
        .is_some_and(|l| m.wave_speed_m_per_s * l.factor >= band_low_hz);
    if lowest_in_band && !m.assignments.iter().any(|a| a.line == 0) {
        return false;
    }
    // And the modes, outliers and all, show no significant disagreement
    // with the entered aspect ratio ([`crate::fitting::aspect::check`]): a labelling
    // forced onto a wrong side can scatter little and still contradict it.
    let obs: Vec<Observation> = m
        .assignments
        .iter()
        .map(|a| Observation {
            frequency_hz: parts[a.partial].frequency_hz,
            factor: lines[a.line].factor,
            mode: lines[a.line].labels[0],
        })
        .collect();
    crate::fitting::aspect::check(&obs, sides.0, sides.1)
        .is_none_or(|c| c.warning(sides.0, sides.1).is_none())
}

/// A geometric grid of tension (or aspect) ratios for [`biaxial_search`]:
/// from 1/`max_ratio` to `max_ratio` in factors of `step`, with the prior
/// probability `prior_at_one` for the ratio 1 (None: every ratio alike).
#[derive(Debug, Clone, Copy)]
struct RatioGrid {
    max_ratio: f64,
    step: f64,
    prior_at_one: Option<f64>,
}

/// Largest ratio (Lx/Lx_entered)⁻² the isotropic rectangle's labelling
/// tries, and its inverse: a side entered up to about 8 % wrong still
/// labels right (and the aspect check then says so).
pub const ASPECT_SEARCH_MAX_RATIO: f64 = 1.17;

/// Step of the aspect search in (Lx_entered/Lx)²: pure-m and pure-n
/// modes move by at most ¼·ln(step) against each other between grid
/// points, about 6 cents, within the matcher's middle scatter scale.
pub const ASPECT_SEARCH_STEP: f64 = 1.015;

/// Prior probability that the sides were entered right, in the isotropic
/// rectangle's aspect search: most are, so another aspect ratio must
/// explain the partials clearly better (by ln(0.9·2K/0.1) nats, K grid
/// ratios either side: about 6 with K = 11) to take the labels.
pub const ENTERED_SIDES_PRIOR: f64 = 0.9;

/// Step of the biaxial search in the tension ratio: pure-m and pure-n
/// modes move by half the step against each other, about 17 cents, within
/// the matching gate of the nearest grid ratio.
pub const BIAXIAL_RATIO_STEP: f64 = 1.04;

/// The biaxial labelling's start: with Tx/Ty = ρ the frequencies are
/// those of an isotropic rectangle of width Lx/√ρ, since
/// f² = (Ty/σ)·((√ρ·m/Lx)² + (n/Ly)²)/4, so the isotropic matcher runs on
/// that rectangle's lines
/// for every ρ of a geometric grid from 1/[`BIAXIAL_MAX_RATIO`] to
/// [`BIAXIAL_MAX_RATIO`] (ρ = 1 included) — a quick survey with fewer
/// seeds, then the full search at the best ρ and its neighbours — and the
/// best-scoring hypothesis is kept, with its lines. On a square, ρ and 1/ρ explain the same
/// frequencies with swapped labels: the axis tie-break decides later.
fn biaxial_search(
    parts: &[Partial],
    panel: &Panel,
    lx: f64,
    ly: f64,
    f_ratio: f64,
    band: (f64, f64),
    grid: RatioGrid,
) -> (Vec<ModeLine>, Option<Matching>, bool) {
    let RatioGrid {
        max_ratio,
        step,
        prior_at_one,
    } = grid;
    let steps = (max_ratio.ln() / step.ln()).ceil() as i32;
    // The log prior of each grid ratio: uniform, or (for the aspect
    // search) probability p₀ that the entered sides are right and the rest
    // shared by the other ratios, so that another aspect must explain the
    // partials better by ln(p₀·2K/(1 − p₀)) to be chosen.
    let log_prior = |k: i32| match prior_at_one {
        None => 0.0,
        Some(p0) if k == 0 => p0.ln(),
        Some(p0) => ((1.0 - p0) / (2 * steps) as f64).ln(),
    };
    let lines_at = |k: i32| {
        let rho = step.powi(k);
        let p = Panel {
            shape: Shape::Rectangle {
                width: crate::base::units::Meters(lx / rho.sqrt()),
                height: crate::base::units::Meters(ly),
            },
            ..panel.clone()
        };
        matching_lines(&p, f_ratio)
    };
    // The aspect search surveys with the full seeds (the quick ones missed
    // the true wave speed on a long strip), and always also tries the
    // entered sides in full.
    let (survey, always) = match prior_at_one {
        Some(_) => ((matching::ANCHOR_PARTIALS, matching::ANCHOR_LINES), Some(0)),
        None => (BIAXIAL_SURVEY_ANCHORS, None),
    };
    match grid_search(
        parts,
        panel,
        band,
        -steps..=steps,
        lines_at,
        survey,
        log_prior,
        always,
    ) {
        Some((l, m, k0)) => (l, Some(m), k0.abs() == steps),
        None => (Vec::new(), None, false),
    }
}

/// The survey-then-search shared by the model searches: every grid point
/// k of `ks` (lines `lines_at(k)`) is matched with the `survey` anchors
/// and scored with its `log_prior`; the best point (ties to the smaller
/// |k|) and its two neighbours, and `always` if given, are matched with
/// the full anchors, and the best of those is kept. Returns its lines,
/// matching and the surveyed best point k₀ (None when nothing matched).
#[allow(clippy::too_many_arguments)]
fn grid_search(
    parts: &[Partial],
    panel: &Panel,
    band: (f64, f64),
    ks: std::ops::RangeInclusive<i32>,
    lines_at: impl Fn(i32) -> Vec<ModeLine>,
    survey: (usize, usize),
    log_prior: impl Fn(i32) -> f64,
    always: Option<i32>,
) -> Option<(Vec<ModeLine>, Matching, i32)> {
    let (lo, hi) = (*ks.start(), *ks.end());
    let (k0, _) = ks
        .filter_map(|k| {
            let m = match_on(parts, &lines_at(k), panel, band, survey)?;
            Some((k, m.score + log_prior(k)))
        })
        .max_by(|a, b| a.1.total_cmp(&b.1).then(b.0.abs().cmp(&a.0.abs())))?;
    let mut full: Vec<i32> = ((k0 - 1).max(lo)..=(k0 + 1).min(hi)).collect();
    if let Some(k) = always.filter(|k| !full.contains(k)) {
        full.push(k);
    }
    let mut best: Option<(Vec<ModeLine>, Matching, f64)> = None;
    for k in full {
        let lines = lines_at(k);
        let anchors = (matching::ANCHOR_PARTIALS, matching::ANCHOR_LINES);
        if let Some(m) = match_on(parts, &lines, panel, band, anchors) {
            let score = m.score + log_prior(k);
            if best.as_ref().is_none_or(|(_, _, b)| score > *b) {
                best = Some((lines, m, score));
            }
        }
    }
    best.map(|(l, m, _)| (l, m, k0))
}

/// The matcher on `lines` with the given anchors, the low lines' presence
/// scored over the excitation ensemble when the tap point is not given
/// ([`ensemble_for`]).
fn match_on(
    parts: &[Partial],
    lines: &[ModeLine],
    panel: &Panel,
    band: (f64, f64),
    anchors: (usize, usize),
) -> Option<Matching> {
    let ens = ensemble_for(panel, lines);
    matching::match_modes_in(parts, lines, band, anchors, ens.as_deref())
}

/// Largest D·k₁₁²/T the plate search tries: the (1,1) mode's bending
/// term four times its tension term, a plate-dominated panel.
pub const PLATE_MAX_BETA: f64 = 4.0;

/// Smallest nonzero β of the plate search's geometric grid (β = 0, the
/// membrane, is tried as well).
pub const PLATE_MIN_BETA: f64 = 0.005;

/// Ratio between neighbouring β of the grid: a mode with k² = q·k₁₁²
/// moves against the fundamental by ½·ln(step)·(βq/(1+βq) − β/(1+β)) in
/// ln f, under 70 cents for any q, which the relabelling that follows
/// takes up.
pub const PLATE_BETA_STEP: f64 = 1.08;

/// The plate's labelling start: for a fixed β = D·k₁₁²/T the prestressed
/// plate's frequencies are f = c·g_β(m,n) with c² = T/σ and
/// g_β = (k/2π)·√(1 + β·k²/k₁₁²), a one-parameter scale family like the
/// membrane's, so the matcher runs on those lines for β = 0 and a geometric grid
/// from [`PLATE_MIN_BETA`] to [`PLATE_MAX_BETA`]: a quick survey, then the
/// full search at the best β and its neighbours. Returns the lines, the
/// matching and whether the best β lies at the grid's top.
fn plate_search(
    parts: &[Partial],
    panel: &Panel,
    iso_lines: &[ModeLine],
    lx: f64,
    ly: f64,
    band: (f64, f64),
) -> (Vec<ModeLine>, Option<Matching>, bool) {
    let steps = ((PLATE_MAX_BETA / PLATE_MIN_BETA).ln() / PLATE_BETA_STEP.ln()).ceil() as i32;
    let beta_at = |k: i32| {
        if k == 0 {
            0.0
        } else {
            PLATE_MIN_BETA * PLATE_BETA_STEP.powi(k - 1)
        }
    };
    let k11 = crate::physics::plate::k_squared(lx, ly, 1, 1);
    let lines_at = |k: i32| -> Vec<ModeLine> {
        let beta = beta_at(k);
        let mut out: Vec<ModeLine> = iso_lines
            .iter()
            .map(|l| {
                let (m, n) = l.labels[0];
                let k2 = crate::physics::plate::k_squared(lx, ly, m, n);
                ModeLine {
                    factor: k2.sqrt() / (2.0 * std::f64::consts::PI)
                        * (1.0 + beta * k2 / k11).sqrt(),
                    ..l.clone()
                }
            })
            .collect();
        out.sort_by(|a, b| a.factor.total_cmp(&b.factor));
        out
    };
    match grid_search(
        parts,
        panel,
        band,
        0..=steps,
        lines_at,
        BIAXIAL_SURVEY_ANCHORS,
        |_| 0.0,
        None,
    ) {
        Some((l, m, k0)) => (l, Some(m), k0 == steps),
        None => (Vec::new(), None, false),
    }
}

/// Anchors (partials, lines) of the biaxial search's quick survey of the
/// ratio grid ([`matching::match_modes_with`]): the three strongest and
/// three lowest partials as any of the six lowest lines, a quarter of the
/// full search's seeds.
pub const BIAXIAL_SURVEY_ANCHORS: (usize, usize) = (3, 6);

/// The biaxial predictor: f² = A·m² + B·n² from the two-term fit.
fn biaxial_predictor(obs: &[Observation]) -> Option<Predictor> {
    let (p, _) = fit::fit_free_aspect(obs, 1.0)?.two_term?;
    let (a, b) = (p[0].exp(), p[1].exp());
    Some(Box::new(move |m, n| {
        (a * (m as f64).powi(2) + b * (n as f64).powi(2)).sqrt()
    }))
}

/// The prestressed-plate predictor for a rectangle of sides lx, ly.
fn plate_predictor(obs: &[Observation], lx: f64, ly: f64) -> Option<Predictor> {
    let pairs: Vec<(f64, f64)> = obs
        .iter()
        .map(|o| {
            (
                o.frequency_hz,
                crate::physics::plate::k_squared(lx, ly, o.mode.0, o.mode.1),
            )
        })
        .collect();
    let f = crate::fitting::plate_fit::fit(&pairs, None)?;
    let (p, q) = (f.t_over_sigma.value, f.d_over_sigma.value);
    Some(Box::new(move |m, n| {
        crate::physics::plate::frequency_hz(p, q, crate::physics::plate::k_squared(lx, ly, m, n))
    }))
}
