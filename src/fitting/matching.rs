//! Mode matching: which measured partial is which predicted mode.
//!
//! No starting guess is needed from the user. Each hypothesis fixes the
//! wave speed c by pairing one of the strongest or lowest partials with one
//! of the lowest predicted lines; partials are then assigned to their
//! nearest line (in cents), c is re-estimated from the assignment, and the
//! two steps repeat until the assignment stops changing.
//!
//! Hypotheses are ranked by the log-likelihood of the measured partial
//! frequencies under a mixture model, relative to "every partial is
//! spurious". In cents, each partial is spurious with probability π
//! ([`SPURIOUS_FRACTION`], uniform over the searched band of B cents) or
//! one of the predicted lines in the band, line k with prior weight w_k
//! proportional to its expected coupling κ_k at the tap and pickup points,
//! and then normal about it with the scatter s = [`MATCH_SCATTER_CENTS`]:
//!
//! ln L = Σ_i ln[ π/B + (1 − π) Σ_k w_k·N(r_ik; s) ] − N·ln(π/B).
//!
//! Each isolated, coupled line below the [`LOW_MODES`]-th assigned partial
//! that shows no partial adds ln(1 − p·κ), p = [`DETECTION_PROBABILITY`]:
//! the low modes of a tap are always there, and a hypothesis that
//! predicts low lines nobody sees (a wave speed halved, whose (1,1) sits
//! an octave below the real fundamental) pays for them.
//!
//! A hypothesis that predicts many lines (half the true wave speed, say)
//! spreads its weight thin, so chance coincidences in a crowded spectrum
//! earn little; one that predicts few lines explains few partials. This
//! is the standard finite-mixture likelihood (G. McLachlan and D. Peel,
//! "Finite Mixture Models", Wiley 2000, ch. 1) with a uniform outlier
//! component.
//!
//! Two hypotheses with different c whose scores differ by less than
//! [`AMBIGUITY_MARGIN`] (a likelihood ratio of about 7) are reported as
//! ambiguous rather than one being picked silently.

use crate::physics::membrane::ModeLine;
use crate::signal::partials::Partial;
use serde::Serialize;

/// Scatter of measured partials about the model allowed in matching, cents.
pub const MATCH_SCATTER_CENTS: f64 = 15.0;
/// A partial further than this from every line is not assigned, cents.
pub const MATCH_GATE_CENTS: f64 = 50.0;
/// Probability that an isolated low line with full coupling shows a partial.
pub const DETECTION_PROBABILITY: f64 = 0.6;
/// Missing lines are counted up to the frequency of this many assigned
/// partials (the low modes, which a tap should always show).
pub const LOW_MODES: usize = 5;
/// Lines further than this many scatters from a partial are left out of
/// its mixture density (their terms are below e^(−6)).
pub const SCORE_REACH_SCATTERS: f64 = 3.5;
/// Prior probability that a partial is spurious (noise, rattle, hum).
pub const SPURIOUS_FRACTION: f64 = 0.2;
/// Score margin (natural-log units) under which two hypotheses are ambiguous.
pub const AMBIGUITY_MARGIN: f64 = 2.0;
/// Partials tried as the anchor of a hypothesis (strongest and lowest).
pub const ANCHOR_PARTIALS: usize = 6;
/// A partial seeds hypotheses as one of the lowest only when it stands
/// within this many dB of the strongest (the partial finder's own range
/// for the low partials it keeps, so that every kept low partial can seed).
pub const ANCHOR_RANGE_DB: f64 = crate::signal::partials::LOW_PARTIALS_RANGE_DB;

/// The lowest frequency a hypothesis is anchored on: the lowest partial
/// within [`ANCHOR_RANGE_DB`] of the strongest. The lines a search needs
/// reach from the lowest lines at this frequency up to the highest
/// partial; a hypothesis seeded on one of the strongest partials lower
/// still (more than 30 dB below the top, which the strongest few rarely
/// are) may find too few lines and is then not scored.
pub fn anchor_floor_hz(partials: &[Partial]) -> Option<f64> {
    let top = partials
        .iter()
        .map(|p| p.level_db)
        .fold(f64::NEG_INFINITY, f64::max);
    partials
        .iter()
        .filter(|p| p.level_db >= top - ANCHOR_RANGE_DB)
        .map(|p| p.frequency_hz)
        .min_by(f64::total_cmp)
}

/// Lines tried as the anchor of a hypothesis (lowest).
pub const ANCHOR_LINES: usize = 10;
/// Coupling below which a line is expected to be weak or absent.
pub const WEAK_COUPLING: f64 = 0.15;

/// One partial assigned to one line.
#[derive(Debug, Clone, Serialize)]
pub struct Assignment {
    /// Index into the partial list.
    pub partial: usize,
    /// Index into the line list.
    pub line: usize,
    /// ln(f_measured / (c·g)) × 1200/ln 2, cents.
    pub residual_cents: f64,
    /// Other lines within the matching scatter of this partial: labels
    /// that would explain it as well.
    pub alternatives: Vec<usize>,
}

/// The chosen labelling and how sure it is.
#[derive(Debug, Clone, Serialize)]
pub struct Matching {
    /// Wave speed of the hypothesis, m/s.
    pub wave_speed_m_per_s: f64,
    /// The assignments, sorted by partial frequency.
    pub assignments: Vec<Assignment>,
    /// Partials left unassigned (indices).
    pub unmatched: Vec<usize>,
    /// Lines in the matched band that should be visible but have no partial.
    pub missing: Vec<usize>,
    /// Score of the hypothesis.
    pub score: f64,
    /// The runner-up with a different wave speed, if it is within the
    /// ambiguity margin: (wave speed m/s, score, number assigned).
    pub rival: Option<(f64, f64, usize)>,
    /// Hypotheses examined.
    pub hypotheses: usize,
}

impl Matching {
    /// True when a rival explains the data almost equally well.
    pub fn is_ambiguous(&self) -> bool {
        self.rival.is_some()
    }
}

use crate::base::estimate::CENTS_PER_LN;

fn cents(f: f64, pred: f64) -> f64 {
    CENTS_PER_LN * (f / pred).ln()
}

/// Matches partials (any order) to lines (sorted by factor).
/// Returns None with fewer than one partial or no line.
pub fn match_modes(
    partials: &[Partial],
    lines: &[ModeLine],
    band_hz: (f64, f64),
) -> Option<Matching> {
    match_modes_with(partials, lines, band_hz, ANCHOR_PARTIALS, ANCHOR_LINES)
}

/// As [`match_modes`], with the wave-speed hypotheses seeded from
/// `anchor_partials` strongest and as many lowest partials, each taken as
/// one of the `anchor_lines` lowest lines: fewer anchors cost less and may
/// miss the true hypothesis on a poor spectrum (a quick survey, to be
/// followed by the full search where it points).
pub fn match_modes_with(
    partials: &[Partial],
    lines: &[ModeLine],
    band_hz: (f64, f64),
    anchor_partials: usize,
    anchor_lines: usize,
) -> Option<Matching> {
    match_modes_in(
        partials,
        lines,
        band_hz,
        (anchor_partials, anchor_lines),
        None,
    )
}

/// As [`match_modes_with`] (anchors as (partials, lines)); with
/// `ensemble` (the couplings of the first lines at many possible tap and
/// pickup points, [`crate::physics::membrane::Shape::excitation_ensemble`]) the
/// low lines' presence is scored by [`pattern_log_likelihood`], averaged
/// over where the tap may have been, instead of by each line's own
/// coupling: the tap point is then not needed.
pub fn match_modes_in(
    partials: &[Partial],
    lines: &[ModeLine],
    band_hz: (f64, f64),
    anchors: (usize, usize),
    ensemble: Option<&[Vec<f64>]>,
) -> Option<Matching> {
    let (anchor_partials, anchor_lines) = anchors;
    if partials.is_empty() || lines.is_empty() {
        return None;
    }
    let band_cents = cents(band_hz.1.max(band_hz.0 * 2.0), band_hz.0.max(1.0)).max(1200.0);
    let mut by_level: Vec<usize> = (0..partials.len()).collect();
    by_level.sort_by(|&a, &b| partials[b].level_db.total_cmp(&partials[a].level_db));
    let mut by_freq: Vec<usize> = (0..partials.len()).collect();
    by_freq.sort_by(|&a, &b| {
        partials[a]
            .frequency_hz
            .total_cmp(&partials[b].frequency_hz)
    });
    let mut anchors: Vec<usize> = by_level.iter().take(anchor_partials).copied().collect();
    // The lowest partials that stand within ANCHOR_RANGE_DB of the
    // strongest ([`anchor_floor_hz`]): a weak low peak is labelled if it
    // is a mode, but seeding hypotheses on it (as the fundamental of a far
    // slower wave) would need far more lines.
    let top_level = by_level.first().map_or(0.0, |&i| partials[i].level_db);
    for &i in by_freq
        .iter()
        .filter(|&&i| partials[i].level_db >= top_level - ANCHOR_RANGE_DB)
        .take(anchor_partials)
    {
        if !anchors.contains(&i) {
            anchors.push(i);
        }
    }
    let mut seeds: Vec<f64> = Vec::new();
    for &i in &anchors {
        for line in lines.iter().take(anchor_lines) {
            seeds.push(partials[i].frequency_hz / line.factor);
        }
    }
    let spacing = line_spacing_cents(lines, band_cents);
    let mut coupling_prefix = Vec::with_capacity(lines.len() + 1);
    coupling_prefix.push(0.0);
    for l in lines {
        coupling_prefix.push(coupling_prefix.last().copied().unwrap_or(0.0) + l.coupling);
    }
    let ctx = ScoreContext {
        spacing: &spacing,
        ln_f: partials.iter().map(|p| p.frequency_hz.ln()).collect(),
        ln_factor: lines.iter().map(|l| l.factor.ln()).collect(),
        coupling_prefix,
        band_cents,
        f_low: band_hz.0.max(1.0),
        f_high: by_freq
            .last()
            .map(|&i| partials[i].frequency_hz * 1.02)
            .unwrap_or(band_hz.1),
        ensemble,
    };
    let mut results: Vec<Matching> = Vec::new();
    // The refinement depends on the seed only through its first
    // assignment (when that is not empty): seeds that start alike end
    // alike and are run once.
    let mut started: std::collections::HashSet<Vec<(usize, usize)>> = Default::default();
    for c0 in seeds {
        let first = assign_logs(&ctx.ln_f, &ctx.ln_factor, lines, c0.ln());
        if !first.is_empty() && !started.insert(first.iter().map(|a| (a.partial, a.line)).collect())
        {
            continue;
        }
        let m = refine(partials, lines, first, c0, &ctx);
        // Keep one result per distinct wave speed (within a cent).
        if let Some(same) = results
            .iter_mut()
            .find(|r| cents(r.wave_speed_m_per_s, m.wave_speed_m_per_s).abs() < 1.0)
        {
            if m.score > same.score {
                *same = m;
            }
        } else {
            results.push(m);
        }
    }
    let hypotheses = results.len();
    results.sort_by(|a, b| b.score.total_cmp(&a.score));
    let mut best = results.first()?.clone();
    best.hypotheses = hypotheses;
    add_alternatives(
        &mut best.assignments,
        &ctx.ln_f,
        &ctx.ln_factor,
        best.wave_speed_m_per_s.ln(),
    );
    best.rival = results
        .iter()
        .skip(1)
        .find(|r| {
            cents(r.wave_speed_m_per_s, best.wave_speed_m_per_s).abs() > 2.0 * MATCH_SCATTER_CENTS
                && !r.assignments.is_empty()
        })
        .filter(|r| best.score - r.score < AMBIGUITY_MARGIN)
        .map(|r| (r.wave_speed_m_per_s, r.score, r.assignments.len()));
    Some(best)
}

/// Alternating assignment and re-estimation of c from a seed.
fn refine(
    partials: &[Partial],
    lines: &[ModeLine],
    assignments: Vec<Assignment>,
    c0: f64,
    ctx: &ScoreContext,
) -> Matching {
    let mut c = c0;
    let mut assignments = assignments;
    for _ in 0..6 {
        if assignments.is_empty() {
            break;
        }
        // ln c = mean of ln(f/g) over the assignment.
        let mean = assignments
            .iter()
            .map(|a| ctx.ln_f[a.partial] - ctx.ln_factor[a.line])
            .sum::<f64>()
            / assignments.len() as f64;
        let c_new = mean.exp();
        let next = assign_logs(&ctx.ln_f, &ctx.ln_factor, lines, mean);
        let same = next.len() == assignments.len()
            && next
                .iter()
                .zip(&assignments)
                .all(|(a, b)| a.partial == b.partial && a.line == b.line);
        c = c_new;
        assignments = next;
        if same {
            break;
        }
    }
    score(partials, lines, c, assignments, ctx)
}

/// What the score needs besides the hypothesis.
struct ScoreContext<'a> {
    spacing: &'a [f64],
    /// ln f of each partial.
    ln_f: Vec<f64>,
    ln_factor: Vec<f64>,
    coupling_prefix: Vec<f64>,
    band_cents: f64,
    f_low: f64,
    f_high: f64,
    /// Couplings of the first lines at possible (tap, pickup) pairs.
    ensemble: Option<&'a [Vec<f64>]>,
}

/// Local spacing of the lines that can show a partial (coupling at least
/// [`WEAK_COUPLING`]), in cents: half the interval between a line's two
/// neighbours, or the interval to the one neighbour at an end, capped at
/// the band.
fn line_spacing_cents(lines: &[ModeLine], band_cents: f64) -> Vec<f64> {
    let live: Vec<f64> = lines
        .iter()
        .filter(|l| l.coupling >= WEAK_COUPLING)
        .map(|l| l.factor)
        .collect();
    lines
        .iter()
        .map(|line| {
            let g = line.factor;
            // `live` is sorted like `lines`: find the neighbours by bisection.
            let lo = live.partition_point(|&f| f < g * (1.0 - 1e-9));
            let hi = live.partition_point(|&f| f <= g * (1.0 + 1e-9));
            let prev = lo.checked_sub(1).map(|i| live[i]);
            let next = live.get(hi).copied();
            let d = match (prev, next) {
                (Some(p), Some(n)) => 0.5 * cents(n, p),
                (Some(p), None) => cents(g, p),
                (None, Some(n)) => cents(n, g),
                (None, None) => band_cents,
            };
            d.min(band_cents)
        })
        .collect()
}

/// Nearest-line assignment at wave speed c. A line takes at most one
/// partial per physical mode it stands for (a split pair takes two); the
/// closest partials win.
/// Nearest-line assignment at wave speed c (alternatives included).
pub(crate) fn assign(partials: &[Partial], lines: &[ModeLine], c: f64) -> Vec<Assignment> {
    let ln_f: Vec<f64> = partials.iter().map(|p| p.frequency_hz.ln()).collect();
    let ln_g: Vec<f64> = lines.iter().map(|l| l.factor.ln()).collect();
    let mut out = assign_logs(&ln_f, &ln_g, lines, c.ln());
    add_alternatives(&mut out, &ln_f, &ln_g, c.ln());
    out
}

/// The assignment of [`assign`] without the alternatives, on the natural
/// logarithms of the partial frequencies and line factors (a residual in
/// cents is then a difference, with no logarithm per pair).
fn assign_logs(ln_f: &[f64], ln_g: &[f64], lines: &[ModeLine], ln_c: f64) -> Vec<Assignment> {
    // (|residual|, partial, line, residual cents) of each partial's
    // nearest line within the gate.
    let mut cands: Vec<(f64, usize, usize, f64)> = Vec::with_capacity(ln_f.len());
    // The partials come in rising frequency almost always, so each search
    // for the first line at or above lg gallops on from the last one.
    let mut k = 0usize;
    for (i, &lf) in ln_f.iter().enumerate() {
        let lg = lf - ln_c;
        k = first_at_or_above(ln_g, lg, k);
        let mut best: Option<(usize, f64)> = None;
        for (j, &x) in ln_g
            .iter()
            .enumerate()
            .take((k + 1).min(lines.len()))
            .skip(k.saturating_sub(1))
        {
            let r = CENTS_PER_LN * (lg - x);
            if best.is_none_or(|(_, br)| r.abs() < br.abs()) {
                best = Some((j, r));
            }
        }
        if let Some((j, r)) = best {
            let gate = if lines[j].coupling < WEAK_COUPLING {
                MATCH_SCATTER_CENTS
            } else {
                MATCH_GATE_CENTS
            };
            if r.abs() <= gate {
                cands.push((r.abs(), i, j, r));
            }
        }
    }
    // Each line takes at most its degeneracy of partials, the closest
    // (ties to the lower partial). Candidates claim only their nearest
    // line, so this is decided line by line; and for partials in rising
    // frequency (as the analysis gives them) the nearest line rises too,
    // so the claims on one line are consecutive and no sort is needed.
    let sorted = ln_f.windows(2).all(|w| w[0] <= w[1]);
    if !sorted {
        cands.sort_unstable_by(|a, b| a.2.cmp(&b.2).then(a.1.cmp(&b.1)));
    }
    let mut out = Vec::with_capacity(cands.len());
    let mut start = 0;
    while start < cands.len() {
        let line = cands[start].2;
        let end = start + cands[start..].iter().take_while(|c| c.2 == line).count();
        let cap = lines[line].degeneracy.max(1);
        let mut keep: Vec<usize> = (start..end).collect();
        if keep.len() > cap {
            keep.sort_unstable_by(|&a, &b| {
                cands[a]
                    .0
                    .total_cmp(&cands[b].0)
                    .then(cands[a].1.cmp(&cands[b].1))
            });
            keep.truncate(cap);
            keep.sort_unstable();
        }
        for i in keep {
            let (_, partial, line, r) = cands[i];
            out.push(Assignment {
                partial,
                line,
                residual_cents: r,
                alternatives: Vec::new(),
            });
        }
        start = end;
    }
    if !sorted {
        out.sort_unstable_by(|a, b| {
            ln_f[a.partial]
                .total_cmp(&ln_f[b.partial])
                .then(a.partial.cmp(&b.partial))
        });
    }
    out
}

/// The first index k with `sorted[k] >= x` (`sorted.len()` if none), found
/// by galloping from `hint` in either direction and bisecting the last
/// stride: O(log distance) from the hint, and the same answer as
/// `partition_point(|&v| v < x)` for any hint.
fn first_at_or_above(sorted: &[f64], x: f64, hint: usize) -> usize {
    let n = sorted.len();
    let hint = hint.min(n);
    let (mut lo, mut hi);
    if hint < n && sorted[hint] < x {
        // Answer above hint: gallop up.
        lo = hint + 1;
        let mut step = 1;
        hi = lo;
        while hi < n && sorted[hi] < x {
            lo = hi + 1;
            hi = (hi + step).min(n);
            step *= 2;
        }
    } else {
        // Answer at or below hint: gallop down.
        hi = hint;
        let mut step = 1;
        lo = hint;
        while lo > 0 && sorted[lo - 1] >= x {
            hi = lo - 1;
            lo = lo.saturating_sub(step);
            step *= 2;
        }
    }
    // Invariant: answer in lo..=hi.
    lo + sorted[lo..hi].partition_point(|&v| v < x)
}

/// Fills in each assignment's alternatives: the other lines within the
/// matching scatter of its partial.
fn add_alternatives(assignments: &mut [Assignment], ln_f: &[f64], ln_g: &[f64], ln_c: f64) {
    for a in assignments {
        let lg = ln_f[a.partial] - ln_c;
        let near = |j: usize| (CENTS_PER_LN * (lg - ln_g[j])).abs() < MATCH_SCATTER_CENTS;
        a.alternatives.clear();
        let mut lo = a.line;
        while lo > 0 && near(lo - 1) {
            lo -= 1;
            a.alternatives.push(lo);
        }
        let mut hi = a.line + 1;
        while hi < ln_g.len() && near(hi) {
            a.alternatives.push(hi);
            hi += 1;
        }
    }
}

fn score(
    partials: &[Partial],
    lines: &[ModeLine],
    c: f64,
    assignments: Vec<Assignment>,
    ctx: &ScoreContext,
) -> Matching {
    let s = MATCH_SCATTER_CENTS;
    // Prior weights: the coupling of the lines in the band, summed by
    // prefix sums over the sorted line list.
    let ln_c = c.ln();
    let lo_band = ctx
        .ln_factor
        .partition_point(|&lg| lg < ctx.f_low.ln() - ln_c);
    let hi_band = ctx
        .ln_factor
        .partition_point(|&lg| lg <= ctx.f_high.ln() - ln_c);
    let weight_sum = ctx.coupling_prefix[hi_band] - ctx.coupling_prefix[lo_band];
    // A hypothesis whose band runs past the last generated line cannot be
    // scored fairly (its weights would be spread over too few lines).
    let truncated = lines.last().is_some_and(|l| c * l.factor < ctx.f_high);
    let spurious = SPURIOUS_FRACTION / ctx.band_cents;
    let reach = SCORE_REACH_SCATTERS * s / CENTS_PER_LN;
    let mut total = 0.0;
    for &lf in &ctx.ln_f {
        let lg = lf - ln_c;
        let mut mode_density = 0.0;
        if weight_sum > 0.0 {
            // Lines beyond SCORE_REACH_SCATTERS·s contribute below e^(−6).
            let from = ctx
                .ln_factor
                .partition_point(|&x| x < lg - reach)
                .max(lo_band);
            let to = ctx
                .ln_factor
                .partition_point(|&x| x <= lg + reach)
                .min(hi_band);
            for (line, &lf) in lines[from..to].iter().zip(&ctx.ln_factor[from..to]) {
                let k = line.coupling;
                if k > 0.0 {
                    let r = CENTS_PER_LN * (lg - lf);
                    mode_density += k / weight_sum * scatter_density(r);
                }
            }
        }
        total += (1.0 + (1.0 - SPURIOUS_FRACTION) * mode_density / spurious).ln();
    }
    let mut matched_lines: Vec<usize> = assignments.iter().map(|a| a.line).collect();
    matched_lines.sort_unstable();
    let top = assignments
        .iter()
        .map(|a| partials[a.partial].frequency_hz)
        .fold(0.0, f64::max);
    let low_top = assignments
        .get(LOW_MODES.min(assignments.len()).saturating_sub(1))
        .map(|a| partials[a.partial].frequency_hz)
        .unwrap_or(0.0);
    let mut missing = Vec::new();
    for (j, l) in lines.iter().enumerate() {
        let f = c * l.factor;
        if f > top * (1.0 + 1e-9) {
            break;
        }
        if matched_lines.binary_search(&j).is_err()
            && ctx.spacing[j] >= 2.0 * s
            && l.coupling >= WEAK_COUPLING
        {
            missing.push(j);
            if f <= low_top * (1.0 + 1e-9) && ctx.ensemble.is_none() {
                total += (1.0 - DETECTION_PROBABILITY * l.coupling).ln();
            }
        }
    }
    if let Some(ens) = ctx.ensemble {
        // The isolated lines up to the low modes' top: which show a
        // partial and which do not.
        let n_ens = ens.first().map_or(0, Vec::len);
        let low: Vec<(usize, bool)> = (0..lines.len().min(n_ens))
            .take_while(|&j| c * lines[j].factor <= low_top * (1.0 + 1e-9))
            .filter(|&j| ctx.spacing[j] >= 2.0 * s)
            .map(|j| (j, matched_lines.binary_search(&j).is_ok()))
            .collect();
        // Lines past the ensemble's reach count as missing at full
        // coupling: a hypothesis this crowded at the bottom is wrong.
        let beyond = (n_ens..lines.len())
            .take_while(|&j| c * lines[j].factor <= low_top * (1.0 + 1e-9))
            .filter(|&j| matched_lines.binary_search(&j).is_err())
            .count();
        total += pattern_log_likelihood(ens, &low)
            + beyond as f64 * (1.0 - ENSEMBLE_DETECTION_PROBABILITY).ln();
    }
    let assigned: Vec<bool> = {
        let mut v = vec![false; partials.len()];
        for a in &assignments {
            v[a.partial] = true;
        }
        v
    };
    let unmatched = (0..partials.len()).filter(|&i| !assigned[i]).collect();
    Matching {
        wave_speed_m_per_s: c,
        assignments,
        unmatched,
        missing,
        score: if truncated { f64::NEG_INFINITY } else { total },
        rival: None,
        hypotheses: 0,
    }
}

/// Scales (cents) of the residual density [`scatter_density`]: how far a
/// real membrane's partials sit from the model is not known beforehand
/// (an FFT peak is good to a cent or two; air loading and stiffness move
/// modes by tens of cents), so the density averages normal densities
/// over a log-spaced grid of scales up to [`MATCH_SCATTER_CENTS`], a
/// discrete log-uniform prior on the scale.
pub const SCATTER_SCALES_CENTS: [f64; 3] = [1.5, 5.0, MATCH_SCATTER_CENTS];

/// The density of a residual r (cents) about its line: the mean of the
/// normal densities with the scales of [`SCATTER_SCALES_CENTS`]. An exact
/// match weighs about ten times a match at the edge of the broad scale,
/// so a labelling whose partials sit on its lines beats one that merely
/// comes near them.
pub fn scatter_density(r: f64) -> f64 {
    // exp(−r²/2s²) for s = 15, 5 and 1.5 cents is e, e⁹ and e¹⁰⁰ with
    // e = exp(−r²/450): one exponential where three would do the same.
    const NORM: f64 = 0.398_942_280_401_432_7; // 1/√(2π)
    let e15 = (-r * r / 450.0).exp();
    let mut sum = e15 / 15.0;
    if r.abs() < 40.0 {
        // Beyond 40 cents the narrower terms add less than 2e-12 of the
        // broad one (3·e⁸ with e = exp(−1600/450)).
        let e5 = e15.powi(9);
        sum += e5 / 5.0 + e5.powi(11) * e15 / 1.5;
    }
    sum * NORM / 3.0
}

/// Probability that a line with full coupling shows a partial, in the
/// pattern likelihood over an unknown tap.
pub const ENSEMBLE_DETECTION_PROBABILITY: f64 = 0.9;
/// Coupling at which a line's detection probability reaches 63 % of
/// [`ENSEMBLE_DETECTION_PROBABILITY`]: −20 dB below its best excitation.
pub const DETECTION_COUPLING_SCALE: f64 = 0.1;
/// Probability that a line with no coupling still shows a partial (a tap
/// is never exactly on a node, and other peaks may sit there).
pub const NODAL_DETECTION_PROBABILITY: f64 = 0.02;

/// The log-likelihood of which low lines show a partial when the tap and
/// pickup points are unknown, averaged over the possible points:
/// ln (1/E)·Σ_e Π_k P(seen_k | κ_ek), with P(seen | κ) =
/// ε + (p − ε)·(1 − e^(−κ/κ₀)) ([`NODAL_DETECTION_PROBABILITY`],
/// [`ENSEMBLE_DETECTION_PROBABILITY`], [`DETECTION_COUPLING_SCALE`]).
/// A tap at the centre silences every mode with a nodal line through it
/// at once; averaging over the points keeps such patterns likely, where
/// counting each silent line alone would reject the true labelling.
/// `low` holds (line index, seen).
pub fn pattern_log_likelihood(ensemble: &[Vec<f64>], low: &[(usize, bool)]) -> f64 {
    if ensemble.is_empty() || low.is_empty() {
        return 0.0;
    }
    let (p, eps, k0) = (
        ENSEMBLE_DETECTION_PROBABILITY,
        NODAL_DETECTION_PROBABILITY,
        DETECTION_COUPLING_SCALE,
    );
    let lls: Vec<f64> = ensemble
        .iter()
        .map(|kappa| {
            low.iter()
                .map(|&(j, seen)| {
                    let q = eps + (p - eps) * (1.0 - (-kappa[j] / k0).exp());
                    if seen {
                        q.ln()
                    } else {
                        (1.0 - q).ln()
                    }
                })
                .sum::<f64>()
        })
        .collect();
    let top = lls.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    top + (lls.iter().map(|l| (l - top).exp()).sum::<f64>() / lls.len() as f64).ln()
}

#[cfg(test)]
mod tests {

    #[test]
    fn a_silent_family_is_likely_when_some_tap_explains_it() {
        // Two tap points: one couples every line, one silences lines 1
        // and 3. Lines 1 and 3 silent is likely (the second point explains
        // it); lines 0 and 2 silent with 1 and 3 sounding is not.
        let ens = vec![vec![1.0, 1.0, 1.0, 1.0], vec![1.0, 0.0, 1.0, 0.0]];
        let family = pattern_log_likelihood(&ens, &[(0, true), (1, false), (2, true), (3, false)]);
        let odd = pattern_log_likelihood(&ens, &[(0, false), (1, true), (2, false), (3, true)]);
        assert!(family > odd + 4.0, "{family} vs {odd}");
        // Counting each silent line alone (the first point) would give
        // 2·ln(0.1) + 2·ln(0.9); the ensemble does far better.
        let alone = 2.0 * (1.0 - 0.9f64 * (1.0 - (-10.0f64).exp()) - 0.02 * (-10.0f64).exp()).ln();
        assert!(family > alone + 1.0, "{family} vs {alone}");
        assert_eq!(pattern_log_likelihood(&ens, &[]), 0.0);
    }

    use super::*;

    #[test]
    fn galloping_search_equals_bisection_from_any_hint() {
        let v: Vec<f64> = (0..200).map(|i| (i / 3) as f64 * 0.5).collect();
        for xi in -3..140 {
            let x = xi as f64 * 0.25;
            let want = v.partition_point(|&a| a < x);
            for hint in [0, 1, 7, 50, 99, 150, 199, 200, 500] {
                assert_eq!(first_at_or_above(&v, x, hint), want, "x {x} hint {hint}");
            }
        }
        assert_eq!(first_at_or_above(&[], 1.0, 3), 0);
    }
    use crate::base::units::Meters;
    use crate::physics::membrane::{Point, Shape};

    fn partial(f: f64, level: f64) -> Partial {
        Partial {
            frequency_hz: f,
            level_db: level,
            snr_db: 30.0,
            prominence_db: 20.0,
            decay_rate_db_per_s: Some(50.0),
            t60_s: Some(1.2),
            q: None,
            ..Partial::default()
        }
    }

    #[test]
    fn rectangle_with_missing_modes_and_spurious_peaks() {
        let shape = Shape::Rectangle {
            width: Meters(0.4),
            height: Meters(0.3),
        };
        let c = 98.0;
        let tap = Point {
            u: 0.5,
            v: Some(0.31),
        };
        let lines = shape.lines(3000.0 / c, Some(tap), None);
        // Every line with coupling except the even-m family (tap at x/Lx =
        // 0.5), plus two spurious peaks.
        let truth: Vec<usize> = (0..lines.len())
            .filter(|&j| lines[j].coupling > 0.2)
            .take(12)
            .collect();
        let mut ps: Vec<Partial> = truth
            .iter()
            .map(|&j| partial(lines[j].factor * c * (1.0 + 0.0004), -20.0))
            .collect();
        ps.push(partial(333.0, -25.0));
        ps.push(partial(1234.0, -35.0));
        let m = match_modes(&ps, &lines, (20.0, 3000.0)).unwrap();
        assert!(
            (m.wave_speed_m_per_s / c - 1.0004).abs() < 1e-3,
            "{}",
            m.wave_speed_m_per_s
        );
        // Each true partial on its own line. Lines are dense at 1.2 kHz
        // (about 15 cents apart), so a spurious peak there may also find a
        // line; the fit's outlier test deals with it.
        for (i, &j) in truth.iter().enumerate() {
            let a = m.assignments.iter().find(|a| a.partial == i).unwrap();
            assert_eq!(a.line, j);
        }
        assert!(m.unmatched.contains(&12), "333 Hz lies between lines");
        assert!(!m.is_ambiguous());
    }

    #[test]
    fn circle_without_fundamental() {
        let shape = Shape::Circle {
            radius: Meters(0.178),
        };
        let c = 120.0;
        let lines = shape.lines(4000.0 / c, None, None);
        let ps: Vec<Partial> = lines
            .iter()
            .skip(1)
            .take(10)
            .map(|l| partial(l.factor * c, -20.0))
            .collect();
        let m = match_modes(&ps, &lines, (20.0, 4000.0)).unwrap();
        assert!((m.wave_speed_m_per_s / c - 1.0).abs() < 1e-6);
        assert_eq!(m.assignments[0].line, 1);
    }

    #[test]
    fn a_single_partial_is_ambiguous() {
        // One partial fits any line: the labelling cannot be decided.
        let shape = Shape::Rectangle {
            width: Meters(0.4),
            height: Meters(0.4),
        };
        let lines = shape.lines(50.0, None, None);
        let m = match_modes(&[partial(250.0, -10.0)], &lines, (20.0, 1000.0)).unwrap();
        assert!(m.is_ambiguous(), "score {} hyps {}", m.score, m.hypotheses);
    }

    #[test]
    fn octave_pair_on_a_square_is_the_fundamental_and_2_2() {
        // f(2,2) = 2·f(1,1); the alternative (1,2)&(2,4) at a lower wave
        // speed predicts many lines that are not there.
        let shape = Shape::Rectangle {
            width: Meters(0.4),
            height: Meters(0.4),
        };
        let lines = shape.lines(50.0, None, None);
        let c = 100.0;
        let f11 = lines[0].factor * c;
        let ps = vec![partial(f11, -10.0), partial(2.0 * f11, -12.0)];
        let m = match_modes(&ps, &lines, (20.0, 1000.0)).unwrap();
        assert!((m.wave_speed_m_per_s / c - 1.0).abs() < 1e-9);
        assert_eq!(lines[m.assignments[1].line].labels, vec![(2, 2)]);
    }
}

#[cfg(test)]
mod scatter_tests {
    use super::*;

    /// The fast form equals the plain mean of the three normal densities
    /// to 1e-11 relative (rounding, and the narrow terms dropped beyond
    /// 40 cents).
    #[test]
    fn scatter_density_equals_the_mean_of_three_normals() {
        for i in 0..400 {
            let r = -60.0 + 0.3 * i as f64;
            let plain = SCATTER_SCALES_CENTS
                .iter()
                .map(|&s| {
                    (-r * r / (2.0 * s * s)).exp() / (s * (2.0 * std::f64::consts::PI).sqrt())
                })
                .sum::<f64>()
                / 3.0;
            let fast = scatter_density(r);
            assert!(
                (fast - plain).abs() <= 1e-11 * plain,
                "r {r}: {fast} vs {plain}"
            );
        }
    }
}
