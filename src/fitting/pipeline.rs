//! One recording from samples to a fitted tension: partials → lines →
//! matching → fit → quality. Takes values, returns a [`Measurement`].

use crate::base::error::{Result, TonusError};
use crate::base::estimate::Estimate;
use crate::base::warning::Warning;
use crate::fitting::fit::{self, FitModel, FitResult, Observation};
use crate::fitting::matching::{self, Matching, WEAK_COUPLING};
use crate::fitting::quality::{self, Quality};
use crate::physics::membrane::{ModeLine, Shape};
use crate::physics::panel::Panel;
use crate::signal::partials::{self, AnalysisConfig, PartialAnalysis};
use crate::signal::recording::Recording;
use realfft::RealFftPlanner;
use serde::Serialize;

/// A line closer than this many resolution widths (1/span) to another
/// coupled line is crowded.
pub const CROWDED_RESOLUTIONS: f64 = 4.0;
/// Crowded modes are left out only when at least this many isolated remain.
pub const MIN_ISOLATED_MODES: usize = 4;

/// Options of a fit.
#[derive(Debug, Clone)]
pub struct FitOptions {
    /// What to fit.
    pub model: FitModel,
    /// Partial finder settings.
    pub analysis: AnalysisConfig,
    /// Per-mode correction factors to fit against ([`crate::fitting::calibration`]).
    pub calibration: Option<std::sync::Arc<crate::fitting::calibration::Loaded>>,
    /// Run the isotropic rectangle's aspect search when the entered
    /// sides' labelling is not good enough (true); false for the further
    /// taps of one file, which are labelled on the entered sides alone so
    /// that a file of many short taps keeps its time bound (their spans
    /// are short, their peaks coarse, and the first tap has searched).
    pub aspect_search: bool,
}

impl Default for FitOptions {
    fn default() -> Self {
        FitOptions {
            model: FitModel::Isotropic,
            analysis: AnalysisConfig::default(),
            calibration: None,
            aspect_search: true,
        }
    }
}

/// One matched mode in the result.
#[derive(Debug, Clone, Serialize)]
pub struct ModeRow {
    /// First label's m.
    pub m: u32,
    /// First label's n.
    pub n: u32,
    /// All labels of the line, e.g. "(1,2)/(2,1)".
    pub labels: String,
    /// Predicted frequency at the fitted wave speed, Hz.
    pub predicted_hz: f64,
    /// Measured frequency, Hz.
    pub measured_hz: f64,
    /// ln(measured/predicted) in cents.
    pub residual_cents: f64,
    /// Partial level, dB re full-scale sine.
    pub level_db: f64,
    /// Partial SNR, dB.
    pub snr_db: f64,
    /// Partial T60, s.
    pub t60_s: Option<f64>,
    /// Standard uncertainty of the measured frequency, Hz (damped-sinusoid
    /// fit; None for an FFT-peak value).
    pub measured_u_hz: Option<f64>,
    /// Cramér–Rao bound of the measured frequency, Hz.
    pub crlb_hz: Option<f64>,
    /// Level decay rate, dB/s.
    pub decay_rate_db_per_s: Option<f64>,
    /// How the frequency was measured.
    pub method: crate::signal::partials::FrequencyMethod,
    /// Modes sharing the line (2 for a degenerate pair).
    pub degeneracy: usize,
    /// The split pair on this line, when the partial was resolved into
    /// two; the measured frequency is then their mean.
    pub pair: Option<crate::signal::partials::SplitPair>,
    /// Left out of the fit as an outlier.
    pub outlier: bool,
    /// Left out of the fit because a neighbouring line shares its peak.
    pub crowded: bool,
    /// Left out of the fit because the calibration has no factor for it.
    pub uncalibrated: bool,
    /// Other labels that fit this partial about as well.
    pub alternatives: Vec<String>,
}

/// A predicted line that should be visible but has no partial.
#[derive(Debug, Clone, Serialize)]
pub struct MissingMode {
    /// Labels.
    pub labels: String,
    /// Predicted frequency, Hz.
    pub predicted_hz: f64,
    /// Expected coupling at tap and pickup, 0..1.
    pub coupling: f64,
}

/// The full result for one recording.
#[derive(Debug, Clone)]
pub struct Measurement {
    /// The panel as given.
    pub panel: Panel,
    /// Partials and spectrum.
    pub analysis: PartialAnalysis,
    /// Predicted lines used for matching (at unit wave speed: factor g).
    pub lines: Vec<ModeLine>,
    /// Matching outcome.
    pub matching: Option<Matching>,
    /// Fit outcome.
    pub fit: Option<FitResult>,
    /// Tension T = σ·c², N/m, when σ is known.
    pub tension: Option<Estimate>,
    /// T/σ = c², m²/s².
    pub tension_over_density: Option<Estimate>,
    /// Matched modes.
    pub modes: Vec<ModeRow>,
    /// Expected-but-missing lines within the matched band.
    pub missing: Vec<MissingMode>,
    /// Indices of partials not assigned to any mode.
    pub unmatched: Vec<usize>,
    /// Grade and reasons.
    pub quality: Quality,
    /// All warnings.
    pub warnings: Vec<Warning>,
    /// Recording duration, s.
    pub duration_s: f64,
    /// Uncertainty budget of the tension (GUM), when σ is known.
    pub budget: Option<crate::fitting::budget::Budget>,
    /// Tensions along the two axes, for the biaxial model.
    pub biaxial: Option<crate::fitting::biaxial::Biaxial>,
    /// Tension and bending stiffness, for the plate model.
    pub plate: Option<crate::fitting::plate_fit::PlateFit>,
    /// Every tap of a recording with several, combined (set by
    /// [`crate::fitting::taps::measure_taps`] callers).
    pub taps: Option<crate::fitting::taps::TapSeries>,
    /// The calibration applied, if any.
    pub calibration: Option<crate::fitting::calibration::Applied>,
    /// Rank, condition and correlations of the fit's Jacobian.
    pub identifiability: Option<crate::fitting::identifiability::Identifiability>,
    /// Uneven tension from the resolved split pairs (circle, or square
    /// panel), when any pair was resolved.
    pub evenness: Option<crate::physics::evenness::Evenness>,
    /// What the recording shows when the fit is doubtful or unfit: the
    /// fundamental, the overtone ratios, the closest model.
    pub diagnosis: Option<crate::fitting::diagnosis::Diagnosis>,
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

/// Uneven tension from the split pairs on degenerate lines: on a circle
/// every resolved (m ≥ 1) pair, on a square panel the (m,n)/(n,m) pairs
/// ([`crate::physics::evenness`]). Outliers are left out.
fn evenness_of(panel: &Panel, modes: &[ModeRow]) -> Option<crate::physics::evenness::Evenness> {
    let pairs: Vec<crate::physics::evenness::PairInput> = modes
        .iter()
        .filter(|r| r.degeneracy >= 2 && !r.outlier)
        .filter_map(|r| {
            let p = r.pair?;
            Some(crate::physics::evenness::PairInput::new(
                r.m,
                r.n,
                p.lower.frequency_hz,
                p.lower.frequency_u_hz,
                p.upper.frequency_hz,
                p.upper.frequency_u_hz,
            ))
        })
        .collect();
    if pairs.is_empty() {
        return None;
    }
    match panel.shape {
        Shape::Circle { .. } => crate::physics::evenness::circle_evenness(&pairs),
        Shape::Rectangle { width, height } if (width.0 - height.0).abs() < 1e-9 * width.0 => {
            crate::physics::evenness::square_evenness(&pairs)
        }
        Shape::Rectangle { .. } => None,
    }
}

/// Predicted lines for a panel up to at least `g_max`, from a small
/// process-wide cache: a batch of recordings of one panel type asks for the
/// same lines again and again (circle lines cost Bessel evaluations). The
/// range is rounded up to a power of 1.25 times the fundamental factor so
/// that nearby requests share an entry.
fn cached_lines(panel: &Panel, g_max: f64) -> Vec<ModeLine> {
    with_cached_lines(panel, g_max, |lines| lines.to_vec())
}

/// Calls `f` on the cached lines of [`cached_lines`] without copying them.
fn with_cached_lines<R>(panel: &Panel, g_max: f64, f: impl FnOnce(&[ModeLine]) -> R) -> R {
    use std::collections::HashMap;
    use std::sync::{Mutex, OnceLock};
    type Key = (String, i32);
    static CACHE: OnceLock<Mutex<HashMap<Key, Vec<ModeLine>>>> = OnceLock::new();
    let g1 = panel.shape.fundamental_factor();
    let step = (g_max / g1).max(1.0).ln() / 1.25f64.ln();
    let bucket = step.ceil() as i32;
    let g_bucket = g1 * 1.25f64.powi(bucket);
    let key = (
        format!("{:?}|{:?}|{:?}", panel.shape, panel.tap, panel.pickup),
        bucket,
    );
    let cache = CACHE.get_or_init(|| Mutex::new(HashMap::new()));
    if let Some(hit) = cache.lock().unwrap_or_else(|e| e.into_inner()).get(&key) {
        return f(hit);
    }
    let lines = panel.shape.lines(g_bucket, panel.tap, panel.pickup);
    let out = f(&lines);
    let mut guard = cache.lock().unwrap_or_else(|e| e.into_inner());
    if guard.len() > 64 {
        guard.clear();
    }
    guard.insert(key, lines);
    out
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
    parts: &[crate::signal::partials::Partial],
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

/// Lines whose presence or absence the matcher weighs against the
/// possible tap points ([`matching::pattern_log_likelihood`]).
pub const ENSEMBLE_LINES: usize = 64;

/// The excitation ensemble of the first [`ENSEMBLE_LINES`] lines when
/// the tap point is not given (with it, each line's own coupling serves).
fn ensemble_for(panel: &Panel, lines: &[ModeLine]) -> Option<Vec<Vec<f64>>> {
    match panel.tap {
        Some(_) => None,
        None => Some(panel.shape.excitation_ensemble(lines, ENSEMBLE_LINES)),
    }
}

/// Lines far enough up that the lowest partial may be any of the first
/// few lines: g_max = g(ANCHOR_LINES-th line) · `f_ratio` (the highest
/// partial over the lowest). The factors do not depend on the tap, so the
/// cache serves here.
fn matching_lines(panel: &Panel, f_ratio: f64) -> Vec<ModeLine> {
    cached_lines(panel, matching_factor(panel, f_ratio))
}

/// The largest frequency factor [`matching_lines`] asks for.
fn matching_factor(panel: &Panel, f_ratio: f64) -> f64 {
    let g_probe = panel.shape.fundamental_factor() * 6.0;
    let g_anchor = with_cached_lines(panel, g_probe, |all| {
        let below = all.partition_point(|l| l.factor <= g_probe * (1.0 + 1e-12));
        all[..below]
            .get(matching::ANCHOR_LINES.min(below).max(1) - 1)
            .map(|l| l.factor)
    })
    .unwrap_or(panel.shape.fundamental_factor());
    g_anchor * f_ratio * 1.05
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
    parts: &[crate::signal::partials::Partial],
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
    parts: &[crate::signal::partials::Partial],
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
    parts: &[crate::signal::partials::Partial],
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
    parts: &[crate::signal::partials::Partial],
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
    parts: &[crate::signal::partials::Partial],
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

/// The axis evidence for a biaxial labelling ([`crate::fitting::biaxial::axis_log10_lr`]):
/// swapped when the levels favour the swap decisively, not determined when
/// they cannot tell or the tap point is unknown.
fn axis_tie_break(
    levels: &[crate::fitting::biaxial::LevelObs],
    panel: &Panel,
) -> crate::fitting::biaxial::AxisEvidence {
    use crate::fitting::biaxial::{AxisEvidence, AxisVerdict, DECISIVE_LOG10_LR};
    let Some(tap) = panel.tap else {
        return AxisEvidence {
            verdict: AxisVerdict::NotDetermined,
            log10_likelihood_ratio: 0.0,
            swapped_from_matcher: false,
            modes_used: levels.len(),
            detail: "axis not determined: the tap point is not given (--tap-at); the swapped solution is reported beside".into(),
        };
    };
    let lr = crate::fitting::biaxial::axis_log10_lr(levels, &panel.shape, tap, panel.pickup);
    let swap = lr < -DECISIVE_LOG10_LR;
    let lr_reported = if swap { -lr } else { lr };
    if lr_reported > DECISIVE_LOG10_LR {
        AxisEvidence {
            verdict: AxisVerdict::Determined,
            log10_likelihood_ratio: lr_reported,
            swapped_from_matcher: swap,
            modes_used: levels.len(),
            detail: format!(
                "axis determined by the partial levels at the tap and pickup points: likelihood ratio 10^{lr_reported:.1} : 1 against the swapped labelling"
            ),
        }
    } else {
        AxisEvidence {
            verdict: AxisVerdict::NotDetermined,
            log10_likelihood_ratio: lr,
            swapped_from_matcher: false,
            modes_used: levels.len(),
            detail: format!(
                "axis not determined: the partial levels favour neither labelling (likelihood ratio 10^{lr:.1} : 1); tap off the diagonal or give a known axis, the swapped solution is reported beside"
            ),
        }
    }
}

/// Analyses a recording and fits the panel's model to it.
///
/// # Errors
/// Only for impossible requests (a free aspect ratio on a circle); a
/// recording with nothing to fit gives a measurement graded unfit.
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
    if opts.model == FitModel::AirLoaded && panel.areal_density.is_none() {
        return Err(TonusError::Panel(
            "--model air needs --areal-density (air loading depends on it)".into(),
        ));
    }
    if opts.model == FitModel::Stiff && !matches!(panel.shape, Shape::Rectangle { .. }) {
        return Err(TonusError::Panel(
            "--model stiff is the simply supported rectangular plate; it needs a rectangle".into(),
        ));
    }
    if opts.model == FitModel::Biaxial && !matches!(panel.shape, Shape::Rectangle { .. }) {
        return Err(TonusError::Panel(
            "--model biaxial needs a rectangle; for uneven tension on a circle, resolved mode pairs are needed".into(),
        ));
    }
    if opts.model == FitModel::FreeAspect && !matches!(panel.shape, Shape::Rectangle { .. }) {
        return Err(TonusError::Panel(
            "--free-aspect needs a rectangle; a circle has no aspect ratio".into(),
        ));
    }
    if let Some(cal) = &opts.calibration {
        if opts.model != FitModel::Isotropic {
            return Err(TonusError::Panel(
                "--calibration corrects the ideal isotropic membrane; leave out --model (the factors already hold air loading and supports)".into(),
            ));
        }
        cal.calibration.check_panel(panel, &cal.path)?;
    }
    // The FFT peaks label the modes (refinement comes after matching).
    let coarse = AnalysisConfig {
        refine: false,
        ..opts.analysis.clone()
    };
    let mut analysis = partials::analyse_with(rec, &coarse, planner)?;
    let mut warnings = analysis.warnings.clone();
    let parts = &analysis.partials;
    let (f_lo, f_hi) = parts.iter().fold((f64::INFINITY, 0.0f64), |(lo, hi), p| {
        (lo.min(p.frequency_hz), hi.max(p.frequency_hz))
    });
    // Lines are needed from the lowest anchored partial up (a weak peak
    // below it is labelled if a line is there, but seeds no hypothesis).
    let f_lo = matching::anchor_floor_hz(parts).unwrap_or(f_lo);
    let lines = if parts.is_empty() {
        Vec::new()
    } else {
        matching_lines(panel, f_hi / f_lo)
    };
    let lines = match (opts.model, panel.areal_density) {
        (FitModel::AirLoaded, Some(s)) => crate::physics::airload::loaded_lines(&lines, s.0),
        _ => lines,
    };
    let (lines, uncalibrated) = match &opts.calibration {
        Some(cal) => cal.calibration.apply(&lines),
        None => (lines, Vec::new()),
    };
    let band = (opts.analysis.min_frequency_hz, f_hi.max(1.0));
    // Biaxial tension: the labels come from the best of the isotropic
    // hypotheses of a grid of tension ratios (each is an isotropic
    // rectangle of another aspect), then relabelled against the biaxial
    // model itself, since the ratio moves the pure-m and pure-n modes apart
    // by more than the matching gate.
    let (lines, matching) = match (opts.model, panel.shape) {
        (FitModel::Biaxial, Shape::Rectangle { width, height }) if !parts.is_empty() => {
            let (l, m, edge) = biaxial_search(
                parts,
                panel,
                width.0,
                height.0,
                f_hi / f_lo,
                band,
                RatioGrid {
                    max_ratio: BIAXIAL_MAX_RATIO,
                    step: BIAXIAL_RATIO_STEP,
                    prior_at_one: None,
                },
            );
            if edge {
                warnings.push(Warning::SearchLimit {
                    detail: format!(
                        "the best tension ratio Tx/Ty lies at the end of the searched range 1/{BIAXIAL_MAX_RATIO} to {BIAXIAL_MAX_RATIO}; the panel may be more anisotropic than tonus searches"
                    ),
                });
            }
            (l, m)
        }
        (FitModel::Stiff, Shape::Rectangle { width, height }) if !parts.is_empty() => {
            let (l, m, edge) = plate_search(parts, panel, &lines, width.0, height.0, band);
            if edge {
                warnings.push(Warning::SearchLimit {
                    detail: format!(
                        "the best D·k₁₁²/T lies at the top of the searched range (up to {PLATE_MAX_BETA}); the panel may be stiffer than tonus searches"
                    ),
                });
            }
            (l, m)
        }
        // An isotropic rectangle: the labels come from the best of a
        // narrow grid of aspect ratios (a side may be entered wrong, which
        // moves the pure-m and pure-n modes apart like unequal tension),
        // then stand on the entered sides' lines for the fit, whose aspect
        // check says whether the sides agree.
        (FitModel::Isotropic, Shape::Rectangle { width, height })
            if !parts.is_empty() && opts.calibration.is_none() =>
        {
            let full = (matching::ANCHOR_PARTIALS, matching::ANCHOR_LINES);
            let m0 = match_on(parts, &lines, panel, band, full);
            if !opts.aspect_search
                || m0.as_ref().is_some_and(|m| {
                    entered_sides_suffice(m, parts, &lines, (width.0, height.0), band.0)
                })
            {
                (lines, m0)
            } else {
                let (l, m, _) = biaxial_search(
                    parts,
                    panel,
                    width.0,
                    height.0,
                    f_hi / f_lo,
                    band,
                    RatioGrid {
                        max_ratio: ASPECT_SEARCH_MAX_RATIO,
                        step: ASPECT_SEARCH_STEP,
                        prior_at_one: Some(ENTERED_SIDES_PRIOR),
                    },
                );
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
        }
        _ => {
            let full = (matching::ANCHOR_PARTIALS, matching::ANCHOR_LINES);
            let m = match_on(parts, &lines, panel, band, full);
            (lines, m)
        }
    };
    let (mut lines, mut matching) = match (opts.model, matching, panel.shape) {
        (FitModel::Biaxial, Some(m), _) => {
            let (l, mm) = relabel(parts, &lines, m, biaxial_predictor);
            (l, Some(mm))
        }
        (FitModel::Stiff, Some(m), Shape::Rectangle { width, height }) => {
            let (l, mm) = relabel(parts, &lines, m, |o| plate_predictor(o, width.0, height.0));
            (l, Some(mm))
        }
        (_, other, _) => (lines, other),
    };
    // The line cap (Weyl's law, `Shape::factor_cap`) bounds the work; say
    // so when the chosen labelling's wave speed leaves partials above the
    // last line predicted.
    if let (Some(m), Some(top)) = (&matching, lines.last()) {
        let c = m.wave_speed_m_per_s;
        if c * top.factor < f_hi * 0.999
            && matching_factor(panel, f_hi / f_lo) > panel.shape.factor_cap()
        {
            warnings.push(Warning::SearchLimit {
                detail: format!(
                    "partials above {:.0} Hz lie beyond the {} lines predicted (the bound on the work per recording) and were not labelled",
                    c * top.factor,
                    lines.len()
                ),
            });
        }
    }
    let mut fit_result = None;
    let mut identifiability = None;
    let mut biaxial: Option<crate::fitting::biaxial::Biaxial> = None;
    let mut plate: Option<crate::fitting::plate_fit::PlateFit> = None;
    let mut modes = Vec::new();
    let mut missing = Vec::new();
    let mut unmatched: Vec<usize> = (0..parts.len()).collect();
    // Members of a split pair that the FFT already separated: the second
    // member joins the first on their one degenerate line.
    let partners = match matching.as_mut() {
        Some(m) => pair_partners(parts, &lines, m),
        None => Vec::new(),
    };
    if let Some(m) = &matching {
        // A partial whose line has a coupled neighbour closer than
        // CROWDED_RESOLUTIONS resolution widths (1/span) shares its peak
        // with that neighbour; its frequency is pulled, so it is left out of
        // the fit whenever enough isolated modes remain.
        let span_s = analysis.tap.span_s.max(1e-3);
        let c0 = m.wave_speed_m_per_s;
        let crowded: Vec<bool> = m
            .assignments
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
            .collect();
        // The FFT peaks labelled the modes; the damped-sinusoid refinement
        // (about a millisecond a band) is spent on the isolated modes that
        // enter the fit and on every FFT-resolved pair, whose two members
        // are fitted together (the evenness needs each member's
        // uncertainty).
        if opts.analysis.refine {
            let chosen: Vec<usize> = m
                .assignments
                .iter()
                .zip(&crowded)
                .filter(|(_, &c)| !c)
                .map(|(a, _)| a.partial)
                // A member the pair's joint fit could not place is fitted
                // on its own (the joint fit comes first; members it placed
                // are skipped).
                .chain(partners.iter().flat_map(|&(p, q)| [p, q]))
                .collect();
            partials::refine(
                rec,
                &mut analysis,
                &chosen,
                &partners,
                partials::FIT_PENCIL_SAMPLES,
                planner,
            );
        }
        for &(keep, absorbed) in &partners {
            partials::merge_pair(&mut analysis.partials, keep, absorbed);
        }
        // A pair on a line of one mode is two modes (or a beating) in one
        // peak, not a split degenerate mode: its mean belongs to neither,
        // so the member nearer the line stands for the mode.
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
        let parts = &analysis.partials;
        let mut obs: Vec<Observation> = m
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
        fit_result = match (opts.model, panel.shape) {
            (FitModel::FreeAspect | FitModel::Biaxial, Shape::Rectangle { width, .. }) => {
                fit::fit_free_aspect(&fit_obs, width.0).or_else(|| fit::fit_isotropic(&fit_obs))
            }
            (FitModel::Stiff, Shape::Rectangle { width, height }) => {
                let pairs: Vec<(f64, f64)> = fit_obs
                    .iter()
                    .map(|o| {
                        (
                            o.frequency_hz,
                            crate::physics::plate::k_squared(width.0, height.0, o.mode.0, o.mode.1),
                        )
                    })
                    .collect();
                plate = crate::fitting::plate_fit::fit(&pairs, panel.areal_density.map(|s| s.0));
                // Outliers as for the membrane: residuals beyond
                // OUTLIER_MADS scaled MADs leave the fit, which is redone.
                let mut plate_outliers: Vec<usize> = Vec::new();
                if let Some(pf) = &plate {
                    let r: Vec<f64> = pf
                        .residuals_cents
                        .iter()
                        .map(|c| c / crate::base::estimate::CENTS_PER_LN)
                        .collect();
                    let keep = fit::inliers(&r);
                    if keep.len() < pairs.len() {
                        let kept: Vec<(f64, f64)> = keep.iter().map(|&i| pairs[i]).collect();
                        if let Some(refit) =
                            crate::fitting::plate_fit::fit(&kept, panel.areal_density.map(|s| s.0))
                        {
                            plate = Some(refit);
                            plate_outliers =
                                (0..pairs.len()).filter(|i| !keep.contains(i)).collect();
                        }
                    }
                }
                if let Some(neg) = plate.as_ref().and_then(|pf| pf.negative_d_over_sigma) {
                    if neg.value < -2.0 * neg.standard_uncertainty {
                        warnings.push(Warning::ModelMisfit {
                            detail: format!(
                                "the free fit puts the bending stiffness below zero (D/σ = {:.3e} ± {:.1e} m⁴/s²); the plate model does not fit, D is held at 0",
                                neg.value, neg.standard_uncertainty
                            ),
                        });
                    }
                }
                let n_plate = pairs.len() - plate_outliers.len();
                // Young's modulus where thickness and ν are given; D's
                // uncertainty includes σ's (D = σ·(D/σ)).
                if let (Some(pf), Some(mat), Some(s)) =
                    (plate.as_mut(), panel.plate_material, panel.areal_density)
                {
                    let q = pf.d_over_sigma;
                    let u_rel_sigma = panel.areal_density_u.map(|u| u.0 / s.0).unwrap_or(0.0);
                    let d = Estimate {
                        value: s.0 * q.value,
                        standard_uncertainty: (s.0 * q.value).abs()
                            * ((q.standard_uncertainty / q.value).powi(2) + u_rel_sigma.powi(2))
                                .sqrt(),
                    };
                    if d.value > 0.0 {
                        pf.youngs_modulus = Some(crate::physics::plate::youngs_modulus(d, &mat));
                    }
                }
                match &plate {
                    Some(pf) => fit::fit_isotropic(&fit_obs).map(|mut f| {
                        f.model = FitModel::Stiff;
                        f.wave_speed = crate::base::estimate::Estimate {
                            value: pf.t_over_sigma.value.max(0.0).sqrt(),
                            standard_uncertainty: 0.5 * pf.t_over_sigma.standard_uncertainty
                                / pf.t_over_sigma.value.abs().sqrt().max(1e-300),
                        };
                        f.plate = Some((pf.t_over_sigma.value, pf.d_over_sigma.value, width.0, height.0));
                        f.rms_residual_cents = pf.rms_residual_cents;
                        f.outliers = plate_outliers.clone();
                        f.n_used = n_plate;
                        f.dof = n_plate.saturating_sub(2);
                        f.iterations = pf.iterations;
                        f.stop_reason = pf.stop_reason.clone();
                        f.uncertainty_method = format!(
                            "s²(JᵀJ)⁻¹, {} modes, 2 parameters (Type A), with {} cents for the frequency method",
                            fit_obs.len(),
                            fit::METHOD_CENTS
                        );
                        f
                    }),
                    None => fit::fit_isotropic(&fit_obs),
                }
            }
            _ => fit::fit_isotropic(&fit_obs),
        };
        // What the kept modes can determine; refuse what they cannot.
        if let Some(f) = &fit_result {
            let kept: Vec<Observation> = (0..fit_obs.len())
                .filter(|i| !f.outliers.contains(i))
                .map(|i| fit_obs[i].clone())
                .collect();
            let id = crate::fitting::identifiability::for_fit(opts.model, &kept, f);
            if let Some(why) = id.refusal() {
                return Err(TonusError::NotIdentifiable(format!(
                    "{}: {why}",
                    rec.path.display()
                )));
            }
            identifiability = Some(id);
        }
        // An isotropic rectangle: do the modes agree with the sides?
        if let (FitModel::Isotropic, None, Some(f), Shape::Rectangle { width, height }) = (
            opts.model,
            &opts.calibration,
            fit_result.as_mut(),
            panel.shape,
        ) {
            // A split pair on a line of two modes ((m,n)/(n,m) of a
            // square) enters as its two members, the lower as the mode
            // with more half-waves along x: one consistent choice, since
            // the swapped one only exchanges the roles of the sides.
            let mut kept: Vec<Observation> = Vec::new();
            let outlier_obs: Vec<usize> = f.outliers.iter().map(|&k| fit_idx[k]).collect();
            for i in (0..obs.len()).filter(|i| !outlier_obs.contains(i) && !uncal[*i]) {
                let line = &lines[m.assignments[i].line];
                let pair = parts[m.assignments[i].partial].pair;
                match (pair, line.labels.as_slice()) {
                    (Some(pr), [a, b]) if a.0 != b.0 => {
                        let (hi_m, lo_m) = if a.0 > b.0 { (*a, *b) } else { (*b, *a) };
                        for (fhz, mode) in
                            [(pr.lower.frequency_hz, hi_m), (pr.upper.frequency_hz, lo_m)]
                        {
                            kept.push(Observation {
                                frequency_hz: fhz,
                                factor: crate::physics::membrane::rect_mode_frequency_hz(
                                    width.0, height.0, 1.0, mode.0, mode.1,
                                ),
                                mode,
                            });
                        }
                    }
                    _ => kept.push(obs[i].clone()),
                }
            }
            if let Some(check) = crate::fitting::aspect::check(&kept, width.0, height.0) {
                check.widen(f);
                if let Some(w) = check.warning(width.0, height.0) {
                    warnings.push(w);
                }
            }
        }
        // Residuals for every assignment, outliers in its numbering.
        if let Some(f) = fit_result.as_mut() {
            if opts.model == FitModel::AirLoaded {
                f.model = FitModel::AirLoaded;
            }
            if let (FitModel::Biaxial, Some((mut p, mut cov)), Shape::Rectangle { width, height }) =
                (opts.model, f.two_term, panel.shape)
            {
                // Axis tie-break: the swap (m,n) → (n,m) with A ↔ B fits the
                // frequencies equally; the levels at the tap and pickup
                // points may tell the two apart.
                let levels: Vec<crate::fitting::biaxial::LevelObs> = fit_idx
                    .iter()
                    .enumerate()
                    .filter(|(k, _)| !f.outliers.contains(k))
                    .map(|(_, &i)| crate::fitting::biaxial::LevelObs {
                        mode: obs[i].mode,
                        frequency_hz: obs[i].frequency_hz,
                        level_db: parts[m.assignments[i].partial].level_db,
                    })
                    .collect();
                let axis = axis_tie_break(&levels, panel);
                if axis.swapped_from_matcher {
                    p = [p[1], p[0]];
                    cov = [cov[2], cov[1], cov[0]];
                    f.two_term = Some((p, cov));
                    for o in obs.iter_mut() {
                        o.mode = (o.mode.1, o.mode.0);
                    }
                    for l in lines.iter_mut() {
                        for lab in l.labels.iter_mut() {
                            *lab = (lab.1, lab.0);
                        }
                    }
                }
                let b = crate::fitting::biaxial::from_two_term(p, cov, width.0, height.0, None);
                f.model = FitModel::Biaxial;
                f.effective_height_m = None;
                // The isotropic equivalent: c² = mean of Tx/σ and Ty/σ.
                let c2 = 0.5 * (b.tx_over_sigma.value + b.ty_over_sigma.value);
                let u_c2 = 0.5
                    * (b.tx_over_sigma.standard_uncertainty.powi(2)
                        + b.ty_over_sigma.standard_uncertainty.powi(2)
                        + 2.0
                            * b.correlation
                            * b.tx_over_sigma.standard_uncertainty
                            * b.ty_over_sigma.standard_uncertainty)
                        .max(0.0)
                        .sqrt();
                f.wave_speed = crate::base::estimate::Estimate {
                    value: c2.sqrt(),
                    standard_uncertainty: 0.5 * u_c2 / c2.sqrt(),
                };
                let mut full = crate::fitting::biaxial::from_two_term(
                    p,
                    cov,
                    width.0,
                    height.0,
                    panel.areal_density.map(|s| s.0),
                );
                full.axis = Some(axis);
                biaxial = Some(full);
            }
            let fr: &FitResult = f;
            f.residuals_cents = obs
                .iter()
                .map(|o| {
                    crate::base::estimate::CENTS_PER_LN
                        * (o.frequency_hz / fit::predicted_hz(fr, o.factor, o.mode)).ln()
                })
                .collect();
            f.outliers = f.outliers.iter().map(|&k| fit_idx[k]).collect();
            f.left_out_crowded = (0..obs.len()).filter(|i| !fit_idx.contains(i)).collect();
        }
        if let Some(f) = &fit_result {
            let c = f.wave_speed.value;
            for (i, a) in m.assignments.iter().enumerate() {
                let line = &lines[a.line];
                let p = &parts[a.partial];
                let predicted = fit::predicted_hz(f, line.factor, line.labels[0]);
                modes.push(ModeRow {
                    m: line.labels[0].0,
                    n: line.labels[0].1,
                    labels: line.label_text(),
                    predicted_hz: predicted,
                    measured_hz: p.frequency_hz,
                    residual_cents: f.residuals_cents[i],
                    level_db: p.level_db,
                    snr_db: p.snr_db,
                    t60_s: p.t60_s,
                    measured_u_hz: p.frequency_u_hz,
                    crlb_hz: p.crlb_hz,
                    decay_rate_db_per_s: p.decay_rate_db_per_s,
                    method: p.method,
                    degeneracy: line.degeneracy,
                    pair: p.pair,
                    outlier: f.outliers.contains(&i),
                    crowded: f.left_out_crowded.contains(&i)
                        && !uncalibrated.contains(&line.labels[0]),
                    uncalibrated: uncalibrated.contains(&line.labels[0]),
                    alternatives: a
                        .alternatives
                        .iter()
                        .map(|&j| lines[j].label_text())
                        .collect(),
                });
            }
            for r in &modes {
                if let (Some(pair), 1) = (r.pair, r.degeneracy) {
                    warnings.push(Warning::PairOnSingleMode {
                        labels: r.labels.clone(),
                        frequencies_hz: (pair.lower.frequency_hz, pair.upper.frequency_hz),
                    });
                }
            }
            let third = modes
                .get(2)
                .or(modes.last())
                .map(|r| r.measured_hz)
                .unwrap_or(0.0);
            for &j in &m.missing {
                let predicted = c * lines[j].factor;
                missing.push(MissingMode {
                    labels: lines[j].label_text(),
                    predicted_hz: predicted,
                    coupling: lines[j].coupling,
                });
                // A strongly coupled line among the lowest modes with no
                // partial deserves a warning; higher up, weak modes are
                // normal.
                if predicted < third && lines[j].coupling >= 2.0 * WEAK_COUPLING {
                    warnings.push(Warning::ModeWithoutPeak {
                        labels: lines[j].label_text(),
                        predicted_hz: predicted,
                    });
                }
            }
        }
        let not_calibrated: Vec<String> = modes
            .iter()
            .filter(|r| r.uncalibrated)
            .map(|r| r.labels.clone())
            .collect();
        if !not_calibrated.is_empty() {
            warnings.push(Warning::NotCalibrated {
                labels: not_calibrated,
            });
        }
        unmatched = m.unmatched.clone();
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
    if let Some(f) = &fit_result {
        if let Some(w) = quality::systematic_trend(&modes, f) {
            warnings.push(w);
        }
    }
    let (tension, tension_over_density) = match &fit_result {
        Some(f) => {
            let c = f.wave_speed;
            let t_over = Estimate {
                value: c.value * c.value,
                standard_uncertainty: 2.0 * c.value * c.standard_uncertainty,
            };
            let t = panel.areal_density.map(|s| Estimate {
                value: s.0 * t_over.value,
                standard_uncertainty: s.0 * t_over.standard_uncertainty,
            });
            (t, Some(t_over))
        }
        None => (None, None),
    };
    let mut calibration_term = None;
    let budget = match (&fit_result, tension, panel.areal_density) {
        (Some(f), Some(t), Some(s))
            if matches!(f.model, FitModel::Isotropic | FitModel::AirLoaded) =>
        {
            let used: Vec<usize> = (0..modes.len())
                .filter(|&i| !modes[i].outlier && !modes[i].crowded && !modes[i].uncalibrated)
                .collect();
            let labels: Vec<(u32, u32)> = used.iter().map(|&i| (modes[i].m, modes[i].n)).collect();
            // With a calibration the budget sees f/r against the ideal lines.
            let freqs: Vec<f64> = used
                .iter()
                .map(|&i| {
                    let r = opts
                        .calibration
                        .as_ref()
                        .and_then(|c| c.calibration.factor(modes[i].m, modes[i].n))
                        .map(|f| f.factor)
                        .unwrap_or(1.0);
                    modes[i].measured_hz / r
                })
                .collect();
            calibration_term = opts
                .calibration
                .as_ref()
                .map(|c| c.calibration.term(&labels));
            Some(crate::fitting::budget::budget(
                &crate::fitting::budget::BudgetInputs {
                    shape: panel.shape,
                    sigma: s.0,
                    u_sigma: panel.areal_density_u.map(|u| u.0),
                    u_size: panel.size_u.map(|u| u.0),
                    air_loaded: f.model == FitModel::AirLoaded,
                    frequencies_hz: &freqs,
                    modes: &labels,
                    u_fit: t.standard_uncertainty,
                    calibration: calibration_term,
                },
            ))
        }
        _ => None,
    };
    let median_snr = {
        let mut s: Vec<f64> = modes.iter().map(|m| m.snr_db).collect();
        s.sort_by(f64::total_cmp);
        s.get(s.len() / 2).copied()
    };
    if let Some(snr) = median_snr {
        if snr < quality::LOW_SNR_DB {
            warnings.push(Warning::LowSnr { median_snr_db: snr });
        }
    }
    // The strongest partials the labelling leaves unexplained: (frequency,
    // whether it is the very strongest).
    let strong_unexplained: Vec<(f64, bool)> = {
        let parts = &analysis.partials;
        let mut by_level: Vec<usize> = (0..parts.len()).collect();
        by_level.sort_by(|&a, &b| parts[b].level_db.total_cmp(&parts[a].level_db));
        by_level
            .iter()
            .take(quality::STRONG_PARTIALS)
            .enumerate()
            .filter(|(_, i)| unmatched.contains(i))
            .map(|(rank, &i)| (parts[i].frequency_hz, rank == 0))
            .collect()
    };
    // Nothing in a membrane sounds below its lowest mode: a fundamental
    // (the lowest partial near the strongest) well below the fitted lowest
    // mode says the labelling or the model is wrong.
    if let (Some(f), Some(f0)) = (
        &fit_result,
        crate::fitting::diagnosis::fundamental(&analysis.partials),
    ) {
        let lowest = lines
            .iter()
            .map(|l| (fit::predicted_hz(f, l.factor, l.labels[0]), l))
            .min_by(|a, b| a.0.total_cmp(&b.0));
        if let Some((f_low, line)) = lowest {
            // The lowest mode has no nodal line inside the membrane, so
            // every tap and pickup off the edge sound it: a fit whose
            // lowest mode has no partial, with the fundamental far above
            // it, has the wrong wave speed.
            let lowest_matched = modes.iter().any(|r| r.labels == line.label_text());
            let above = crate::base::estimate::CENTS_PER_LN * (f0 / f_low).ln();
            if !lowest_matched && above > 200.0 && f_low >= opts.analysis.min_frequency_hz {
                warnings.push(Warning::ModelMisfit {
                    detail: format!(
                        "the fitted lowest mode {} at {f_low:.1} Hz, which any tap off the edge sounds, has no partial, and the fundamental is at {f0:.1} Hz; the labelling or the model is wrong",
                        line.label_text()
                    ),
                });
            }
            let below = crate::base::estimate::CENTS_PER_LN * (f_low / f0).ln();
            if below > matching::MATCH_GATE_CENTS {
                warnings.push(Warning::ModelMisfit {
                    detail: format!(
                        "the fundamental at {f0:.1} Hz (the lowest partial within {} dB of the strongest) lies below the fitted lowest mode {} at {f_low:.1} Hz, where a membrane has nothing to sound; the labelling or the model is wrong",
                        crate::fitting::diagnosis::FUNDAMENTAL_WITHIN_DB,
                        line.label_text()
                    ),
                });
            }
        }
    }
    let q = quality::grade(
        fit_result.as_ref(),
        matching.as_ref(),
        &modes,
        &warnings,
        rec.clipped_fraction,
        &strong_unexplained,
    );
    let not_calibrated_rows: Vec<String> = modes
        .iter()
        .filter(|r| r.uncalibrated)
        .map(|r| r.labels.clone())
        .collect();
    let evenness = evenness_of(panel, &modes);
    let diagnosis = if q.grade >= quality::Grade::Doubtful {
        crate::fitting::diagnosis::diagnose(
            &analysis.partials,
            &panel.shape,
            panel.areal_density.map(|s| s.0),
        )
    } else {
        None
    };
    Ok(Measurement {
        panel: panel.clone(),
        evenness,
        diagnosis,
        analysis,
        lines,
        matching,
        fit: fit_result,
        tension,
        tension_over_density,
        modes,
        missing,
        unmatched,
        quality: q,
        warnings,
        budget,
        biaxial,
        plate,
        taps: None,
        duration_s: rec.duration_s(),
        identifiability,
        calibration: opts
            .calibration
            .as_ref()
            .map(|c| crate::fitting::calibration::Applied {
                file: c.path.display().to_string(),
                created: c.calibration.created.clone(),
                reference_tension_n_per_m: c.calibration.reference_tension_n_per_m,
                reference_tension_u_n_per_m: c.calibration.reference_tension_u_n_per_m,
                term: calibration_term,
                not_calibrated: not_calibrated_rows,
            }),
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Levels of a square tapped at x = Lx/2 but labelled the swapped way
    /// ((2,1) for a partial that is really (1,2)): the tie-break swaps.
    #[test]
    fn tie_break_swaps_a_wrong_labelling() {
        let spec = crate::physics::panel::PanelSpec {
            width: Some("400mm".into()),
            height: Some("400mm".into()),
            tap_at: Some("0.5,0.31".into()),
            ..Default::default()
        };
        let panel = Panel::from_spec(&spec).unwrap();
        let tap = panel.tap.unwrap();
        let levels: Vec<crate::fitting::biaxial::LevelObs> =
            [(1, 1), (1, 2), (3, 1), (3, 2), (1, 3)]
                .iter()
                .map(|&(m, n)| {
                    let c = panel.shape.mode_shape(m, n, tap).abs();
                    // Reported with the swapped labels.
                    crate::fitting::biaxial::LevelObs {
                        mode: (n, m),
                        frequency_hz: 150.0 * ((m * m + n * n) as f64).sqrt(),
                        level_db: 20.0 * c.log10() - 30.0,
                    }
                })
                .collect();
        let ev = axis_tie_break(&levels, &panel);
        assert!(ev.swapped_from_matcher);
        assert_eq!(ev.verdict, crate::fitting::biaxial::AxisVerdict::Determined);
        assert!(ev.log10_likelihood_ratio > crate::fitting::biaxial::DECISIVE_LOG10_LR);
    }
}
