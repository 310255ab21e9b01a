//! Acceptance decisions on a measured tension, with its measurement
//! uncertainty taken into account by a stated decision rule.
//!
//! # Conventions
//!
//! - Tensions are in N/m; `u` is a standard uncertainty (k = 1); the
//!   expanded uncertainty is U = k·u with the rule's coverage factor k
//!   (2 by default, about 95 % coverage for a normal distribution).
//! - The tolerance interval is [L, H] = [`lower`, `upper`] of [`Limits`];
//!   both ends belong to it.
//! - **Simple acceptance** ("shared risk", guard band w = 0; ILAC-G8:09/2019
//!   §4.2.1, JCGM 106:2012 §8.2): pass when L ≤ x ≤ H, else fail. At a
//!   measured value on a limit the chance that the true value is outside
//!   is up to 50 %; the consumer and the producer share that risk.
//! - **Guarded acceptance** (guard band w = U = k·u; ILAC-G8:09/2019 §4.2.3
//!   "non-binary statement with guard band", JCGM 106:2012 §8.3.2, ISO
//!   14253-1:2017): pass when L + w ≤ x ≤ H − w (the acceptance interval);
//!   fail when x < L − w or x > H + w; anything between is
//!   [`Decision::Indeterminate`]. ILAC-G8 calls the part of that band inside
//!   the tolerance "conditional pass" and the part outside "conditional
//!   fail"; the verdict's reasons say which. With w = U and k = 2 the
//!   specific risk of a false accept is below about 2.5 % (ILAC-G8 §4.2.2).
//! - A measurement without a tension, with a non-finite value or
//!   uncertainty, or graded below the limits' `min_quality`, is
//!   [`Decision::NotMeasured`] with the reason — never a pass.
//! - An optional anisotropy limit |a| ≤ a_max (percent, biaxial model) and
//!   an optional unevenness limit s ≤ s_max (percent, the spread 2|ε| of
//!   [`crate::physics::evenness::Evenness::spread_pct`]) are each judged under the
//!   same rule with their own uncertainty (guard band k·u of that
//!   quantity); the verdict is the worst of the judgements (fail before
//!   indeterminate before pass). A limited anisotropy that was not
//!   measured makes the recording [`Decision::NotMeasured`] (the model
//!   always measures it when the fit succeeds). A limited unevenness that
//!   could not be measured — no split pair resolved — does not: the
//!   decision rests on the tension (and anisotropy) alone and the reasons
//!   say "evenness not measurable: no split pair resolved". An even head
//!   leaves its (1,n) pairs unsplit, so refusing those would refuse every
//!   good head; the reason keeps the gap visible in every record. But a
//!   pair that was found and could not be evaluated
//!   ([`DecisionInput::unevenness_problem`]) is evidence of unevenness of
//!   unknown size: that recording is [`Decision::NotMeasured`].
//! - The margin is the signed distance from the measured tension to the
//!   nearest tolerance limit: positive inside the tolerance, negative
//!   outside; also given as a percentage of the tolerance width H − L.

use crate::base::estimate::Estimate;
use crate::fitting::quality::Grade;
use serde::Serialize;

/// Default coverage factor k for the expanded uncertainty U = k·u
/// (about 95 % for a normal distribution; ILAC-G8:09/2019 §4.2.2).
pub const DEFAULT_COVERAGE_FACTOR: f64 = 2.0;

/// Which decision rule is applied.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Rule {
    /// Simple acceptance, shared risk: guard band w = 0.
    Simple,
    /// Guarded acceptance: guard band w = U = k·u on both sides of each
    /// limit; values within it are indeterminate.
    Guarded,
}

impl Rule {
    /// The name used in specification files and reports: `simple` or
    /// `guarded`.
    pub fn name(self) -> &'static str {
        match self {
            Rule::Simple => "simple",
            Rule::Guarded => "guarded",
        }
    }

    /// Parses `simple` or `guarded`.
    pub fn from_name(name: &str) -> Option<Rule> {
        match name {
            "simple" => Some(Rule::Simple),
            "guarded" => Some(Rule::Guarded),
            _ => None,
        }
    }

    /// A one-line description with its source, for reports.
    pub fn description(self) -> &'static str {
        match self {
            Rule::Simple => {
                "simple acceptance, shared risk, guard band w = 0 (ILAC-G8:09/2019 §4.2.1; JCGM 106:2012 §8.2)"
            }
            Rule::Guarded => {
                "guarded acceptance, guard band w = U = k·u, values within w of a limit indeterminate (ILAC-G8:09/2019 §4.2.3; JCGM 106:2012 §8.3.2)"
            }
        }
    }
}

/// A decision rule with its coverage factor.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct DecisionRule {
    /// Simple or guarded.
    pub rule: Rule,
    /// Coverage factor k of U = k·u (dimensionless, > 0).
    pub coverage_factor: f64,
}

impl DecisionRule {
    /// The rule with the default coverage factor k = 2.
    pub fn new(rule: Rule) -> DecisionRule {
        DecisionRule {
            rule,
            coverage_factor: DEFAULT_COVERAGE_FACTOR,
        }
    }

    /// Guard band w for a standard uncertainty `u` (same unit as `u`):
    /// w = 0 for simple acceptance, w = k·u for guarded acceptance.
    pub fn guard_band(&self, u: f64) -> f64 {
        match self.rule {
            Rule::Simple => 0.0,
            Rule::Guarded => self.coverage_factor * u,
        }
    }
}

/// Tolerance limits on the tension and the least quality to decide on.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Limits {
    /// Nominal (target) tension, N/m; reported, not used for the decision.
    pub nominal_n_per_m: f64,
    /// Lower tolerance limit L, N/m.
    pub lower_n_per_m: f64,
    /// Upper tolerance limit H, N/m.
    pub upper_n_per_m: f64,
    /// Largest allowed |anisotropy|, percent, if limited.
    pub max_anisotropy_percent: Option<f64>,
    /// Largest allowed unevenness (spread 2|ε|), percent, if limited.
    pub max_unevenness_percent: Option<f64>,
    /// Worst grade still decided on; worse grades are not measured.
    pub min_quality: Grade,
}

impl Limits {
    /// Tolerance width H − L, N/m.
    pub fn tolerance_n_per_m(&self) -> f64 {
        self.upper_n_per_m - self.lower_n_per_m
    }
}

/// What the decision is made on.
#[derive(Debug, Clone, Serialize)]
pub struct DecisionInput {
    /// Measured tension and its standard uncertainty, N/m; `None` when no
    /// tension was determined.
    pub tension: Option<Estimate>,
    /// Anisotropy and its standard uncertainty, percent, when the model
    /// measures it.
    pub anisotropy_percent: Option<Estimate>,
    /// Unevenness (spread 2|ε| of the principal tensions) and its standard
    /// uncertainty, percent, when a split pair was resolved.
    pub unevenness_percent: Option<Estimate>,
    /// Why the unevenness could not be judged although a split pair was
    /// found (e.g. a member without an uncertainty); with an unevenness
    /// limit such a recording is not measured rather than passed.
    pub unevenness_problem: Option<String>,
    /// Quality grade of the measurement.
    pub grade: Grade,
    /// The grade's reasons (quoted when the grade is too poor to decide).
    pub grade_reasons: Vec<String>,
}

/// The outcome of an acceptance decision.
#[derive(Debug, Clone, PartialEq, Serialize)]
#[serde(tag = "decision", rename_all = "snake_case")]
pub enum Decision {
    /// Conforms under the rule.
    Pass,
    /// Does not conform under the rule.
    Fail,
    /// Within the guard band of a limit: neither conformity nor
    /// non-conformity is shown (guarded rule only).
    Indeterminate,
    /// No decision could be made on this measurement.
    NotMeasured {
        /// Why, in a sentence a user can act on.
        reason: String,
    },
}

impl Decision {
    /// Lower-case name: `pass`, `fail`, `indeterminate`, `not_measured`.
    pub fn name(&self) -> &'static str {
        match self {
            Decision::Pass => "pass",
            Decision::Fail => "fail",
            Decision::Indeterminate => "indeterminate",
            Decision::NotMeasured { .. } => "not_measured",
        }
    }

    /// The names of all decisions, in the order above.
    pub const NAMES: [&'static str; 4] = ["pass", "fail", "indeterminate", "not_measured"];

    /// Severity for combining judgements: fail > indeterminate > pass.
    fn severity(&self) -> u8 {
        match self {
            Decision::Pass => 0,
            Decision::Indeterminate => 1,
            Decision::Fail => 2,
            Decision::NotMeasured { .. } => 3,
        }
    }
}

/// Which tolerance limit is nearest to the measured value.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum LimitSide {
    /// The lower limit L.
    Lower,
    /// The upper limit H.
    Upper,
}

/// Distance from the measured tension to the nearest tolerance limit.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Margin {
    /// The nearest limit.
    pub nearest_limit: LimitSide,
    /// Signed distance, N/m: min(x − L, H − x); positive inside the
    /// tolerance, negative outside.
    pub n_per_m: f64,
    /// The same as a percentage of the tolerance width H − L.
    pub percent_of_tolerance: f64,
}

/// A decision with everything a report needs to show how it was made.
#[derive(Debug, Clone, Serialize)]
pub struct Verdict {
    /// The decision.
    #[serde(flatten)]
    pub decision: Decision,
    /// The rule's name: `simple` or `guarded`.
    pub rule: &'static str,
    /// The rule's description and source.
    pub rule_description: &'static str,
    /// Coverage factor k.
    pub coverage_factor: f64,
    /// Expanded uncertainty U = k·u of the tension, N/m (when measured).
    pub expanded_uncertainty_n_per_m: Option<f64>,
    /// Guard band w, N/m (0 for simple acceptance; when measured).
    pub guard_band_n_per_m: Option<f64>,
    /// Acceptance interval [L + w, H − w], N/m; `None` when not measured or
    /// when the guard bands overlap and nothing can pass.
    pub acceptance_interval_n_per_m: Option<(f64, f64)>,
    /// Margin to the nearest tolerance limit (when measured).
    pub margin: Option<Margin>,
    /// Deviation from the nominal tension x − nominal, N/m (when measured).
    pub deviation_from_nominal_n_per_m: Option<f64>,
    /// The anisotropy judgement, when the limits hold one and it was
    /// measured.
    pub anisotropy: Option<LimitJudgement>,
    /// The unevenness judgement, when the limits hold one and it was
    /// measured.
    pub unevenness: Option<LimitJudgement>,
    /// Sentences explaining the decision.
    pub reasons: Vec<String>,
}

/// One upper-limit judgement of a percentage (anisotropy, unevenness)
/// under the rule.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct LimitJudgement {
    /// The measured value, percent (signed for the anisotropy; its
    /// magnitude is judged).
    pub value_percent: f64,
    /// Its standard uncertainty, percentage points.
    pub standard_uncertainty_percent: f64,
    /// The limit, percent.
    pub limit_percent: f64,
    /// Guard band w = k·u (0 for simple acceptance), percentage points.
    pub guard_band_percent: f64,
    /// `pass`, `fail` or `indeterminate`.
    pub decision: &'static str,
}

/// The reason printed when an unevenness limit meets a recording without
/// a resolved split pair.
pub const EVENNESS_NOT_MEASURABLE: &str = "evenness not measurable: no split pair resolved";

/// One two-sided judgement of `x` against [lo, hi] with guard band `w`
/// (see the module conventions); returns the decision and, for values in
/// the band, the ILAC-G8 term.
fn judge(x: f64, lo: f64, hi: f64, w: f64) -> (Decision, Option<&'static str>) {
    let inside_tolerance = lo <= x && x <= hi;
    if lo + w <= x && x <= hi - w {
        (Decision::Pass, None)
    } else if x < lo - w || x > hi + w {
        (Decision::Fail, None)
    } else if w <= 0.0 {
        // Simple acceptance has no band: inside is pass, outside fail.
        if inside_tolerance {
            (Decision::Pass, None)
        } else {
            (Decision::Fail, None)
        }
    } else if inside_tolerance {
        (Decision::Indeterminate, Some("conditional pass"))
    } else {
        (Decision::Indeterminate, Some("conditional fail"))
    }
}

/// Formats a tension for the reasons, N/m with enough digits to compare.
fn t(x: f64) -> String {
    format!("{} N/m", crate::base::units::sig(x, 6))
}

/// Decides whether a measurement conforms to the limits under the rule.
///
/// The tension x with standard uncertainty u (N/m) is compared with the
/// tolerance [L, H] using guard band w = 0 (simple) or w = k·u (guarded),
/// as set out in the module conventions. A measurement with no tension, a
/// non-finite value or uncertainty, a negative uncertainty, or a grade
/// worse than `limits.min_quality` (or unfit) is
/// [`Decision::NotMeasured`].
///
/// Sources: ILAC-G8:09/2019 "Guidelines on Decision Rules and Statements of
/// Conformity" §4.2; JCGM 106:2012 "The role of measurement uncertainty in
/// conformity assessment" §8.
pub fn decide(input: &DecisionInput, limits: &Limits, rule: &DecisionRule) -> Verdict {
    let mut verdict = Verdict {
        decision: Decision::Pass,
        rule: rule.rule.name(),
        rule_description: rule.rule.description(),
        coverage_factor: rule.coverage_factor,
        expanded_uncertainty_n_per_m: None,
        guard_band_n_per_m: None,
        acceptance_interval_n_per_m: None,
        margin: None,
        deviation_from_nominal_n_per_m: None,
        anisotropy: None,
        unevenness: None,
        reasons: Vec::new(),
    };
    let not_measured = |mut v: Verdict, reason: String| {
        v.decision = Decision::NotMeasured { reason };
        v
    };
    let (x, u) = match measurable_tension(input, limits, rule) {
        Ok(tension) => tension,
        Err(reason) => return not_measured(verdict, reason),
    };
    let decision = judge_tension(&mut verdict, x, u, limits, rule);
    match judge_other_limits(&mut verdict, decision, input, limits, rule) {
        Ok(decision) => {
            verdict.decision = decision;
            verdict
        }
        Err(reason) => not_measured(verdict, reason),
    }
}

/// The tension and its standard uncertainty when the measurement can be
/// judged at all (graded well enough, a finite tension, a positive
/// coverage factor); otherwise the reason it cannot.
fn measurable_tension(
    input: &DecisionInput,
    limits: &Limits,
    rule: &DecisionRule,
) -> Result<(f64, f64), String> {
    if input.grade == Grade::Unfit {
        let why = if input.grade_reasons.is_empty() {
            String::new()
        } else {
            format!(": {}", input.grade_reasons.join("; "))
        };
        return Err(format!("the fit is graded unfit{why}; tap again"));
    }
    if input.grade > limits.min_quality {
        let why = if input.grade_reasons.is_empty() {
            String::new()
        } else {
            format!(" ({})", input.grade_reasons.join("; "))
        };
        return Err(format!(
            "the fit is graded {}{why}, below the specification's min-quality {}; tap again or measure otherwise",
            input.grade.name(),
            limits.min_quality.name()
        ));
    }
    let Some(tension) = input.tension else {
        return Err("no tension was determined (the areal density is needed); give the areal density in the specification".into());
    };
    let (x, u) = (tension.value, tension.standard_uncertainty);
    if !x.is_finite() || !u.is_finite() || u < 0.0 {
        return Err(format!(
            "the tension {x} N/m with standard uncertainty {u} N/m cannot be judged"
        ));
    }
    if !(rule.coverage_factor.is_finite() && rule.coverage_factor > 0.0) {
        return Err(format!(
            "the coverage factor {} is not a positive number",
            rule.coverage_factor
        ));
    }
    Ok((x, u))
}

/// Judges the tension against its limits under the rule: fills in the
/// expanded uncertainty, guard band, acceptance interval, margin and
/// deviation of `verdict` with the reasons, and returns the decision.
fn judge_tension(
    verdict: &mut Verdict,
    x: f64,
    u: f64,
    limits: &Limits,
    rule: &DecisionRule,
) -> Decision {
    let (lo, hi) = (limits.lower_n_per_m, limits.upper_n_per_m);
    let w = rule.guard_band(u);
    verdict.expanded_uncertainty_n_per_m = Some(rule.coverage_factor * u);
    verdict.guard_band_n_per_m = Some(w);
    verdict.deviation_from_nominal_n_per_m = Some(x - limits.nominal_n_per_m);
    if lo + w <= hi - w {
        verdict.acceptance_interval_n_per_m = Some((lo + w, hi - w));
    }
    let tolerance = limits.tolerance_n_per_m();
    let (side, margin) = if x - lo <= hi - x {
        (LimitSide::Lower, x - lo)
    } else {
        (LimitSide::Upper, hi - x)
    };
    verdict.margin = Some(Margin {
        nearest_limit: side,
        n_per_m: margin,
        percent_of_tolerance: if tolerance > 0.0 {
            100.0 * margin / tolerance
        } else {
            f64::NAN
        },
    });

    let (decision, term) = judge(x, lo, hi, w);
    let limit_text = match side {
        LimitSide::Lower => format!("lower limit {}", t(lo)),
        LimitSide::Upper => format!("upper limit {}", t(hi)),
    };
    match (&decision, term) {
        (Decision::Pass, _) if w > 0.0 => verdict.reasons.push(format!(
            "{} is inside the acceptance interval [{}, {}] (tolerance narrowed by the guard band w = {})",
            t(x),
            t(lo + w),
            t(hi - w),
            t(w)
        )),
        (Decision::Pass, _) => verdict.reasons.push(format!(
            "{} is inside the tolerance [{}, {}]",
            t(x),
            t(lo),
            t(hi)
        )),
        (Decision::Fail, _) if w > 0.0 => verdict.reasons.push(format!(
            "{} is outside the tolerance [{}, {}] by more than the guard band w = {}",
            t(x),
            t(lo),
            t(hi),
            t(w)
        )),
        (Decision::Fail, _) => verdict.reasons.push(format!(
            "{} is outside the tolerance [{}, {}]",
            t(x),
            t(lo),
            t(hi)
        )),
        (_, Some(term)) => verdict.reasons.push(format!(
            "{} is within the guard band w = {} of the {} (ILAC-G8 \"{term}\"); the uncertainty does not allow a decision",
            t(x),
            t(w),
            limit_text
        )),
        _ => {}
    }
    if verdict.acceptance_interval_n_per_m.is_none() {
        verdict.reasons.push(format!(
            "the guard bands 2w = {} are wider than the tolerance {}: no measurement with this uncertainty can pass; reduce the uncertainty (areal density, more modes)",
            t(2.0 * w),
            t(tolerance)
        ));
    }
    decision
}

/// Judges the anisotropy and unevenness limits the specification sets,
/// each with its own uncertainty, and returns the worse of `decision` and
/// theirs; an error says why a limit cannot be judged.
fn judge_other_limits(
    verdict: &mut Verdict,
    mut decision: Decision,
    input: &DecisionInput,
    limits: &Limits,
    rule: &DecisionRule,
) -> Result<Decision, String> {
    if let Some(a_max) = limits.max_anisotropy_percent {
        let Some(a) = input.anisotropy_percent else {
            return Err(format!(
                "the specification limits the anisotropy to {a_max} % but this measurement has no anisotropy; use a model that measures it"
            ));
        };
        let (j, text) = judge_upper("anisotropy", a, a_max, rule)?;
        verdict.reasons.push(text);
        decision = worse(decision, j.decision);
        verdict.anisotropy = Some(j);
    }
    if let Some(s_max) = limits.max_unevenness_percent {
        match input.unevenness_percent {
            None if input.unevenness_problem.is_some() => {
                return Err(format!(
                    "the unevenness limit {s_max} % cannot be judged: {}; tap again (off the axes, a longer recording)",
                    input.unevenness_problem.clone().unwrap_or_default()
                ))
            }
            None => verdict.reasons.push(format!(
                "{EVENNESS_NOT_MEASURABLE} (the split, if any, is below what this recording resolves; tap off the axes so both members of a pair sound); decided without the unevenness limit {s_max} %"
            )),
            Some(e) => {
                let (j, text) = judge_upper("unevenness", e, s_max, rule)?;
                verdict.reasons.push(text);
                decision = worse(decision, j.decision);
                verdict.unevenness = Some(j);
            }
        }
    }
    Ok(decision)
}

/// The worse of a decision and a judgement's decision name.
fn worse(d: Decision, judged: &str) -> Decision {
    let j = match judged {
        "fail" => Decision::Fail,
        "indeterminate" => Decision::Indeterminate,
        _ => Decision::Pass,
    };
    if j.severity() > d.severity() {
        j
    } else {
        d
    }
}

/// Judges |x| ≤ `max` (percent) under the rule with x's own uncertainty:
/// the one-sided tolerance [−∞, max] with guard band w = k·u (0 for simple
/// acceptance). Returns the judgement and its sentence, or Err with the
/// reason it cannot be judged (non-finite value or uncertainty).
fn judge_upper(
    what: &str,
    x: Estimate,
    max: f64,
    rule: &DecisionRule,
) -> std::result::Result<(LimitJudgement, String), String> {
    let (v, u) = (x.value.abs(), x.standard_uncertainty);
    if !v.is_finite() || !u.is_finite() || u < 0.0 {
        return Err(format!("the {what} {} % ± {u} % cannot be judged", x.value));
    }
    let w = rule.guard_band(u);
    let (d, term) = judge(v, f64::NEG_INFINITY, max, w);
    let text = match (&d, term) {
        (Decision::Pass, _) if w > 0.0 => format!(
            "{what} |{:.3}| % ± {u:.3} % is within {max} % by more than the guard band {w:.3} %",
            x.value
        ),
        (Decision::Pass, _) => format!("{what} |{:.3}| % is within {max} %", x.value),
        (Decision::Fail, _) => format!("{what} |{:.3}| % exceeds {max} %", x.value),
        (_, Some(term)) => format!(
            "{what} |{:.3}| % is within the guard band {w:.3} % of the limit {max} % (ILAC-G8 \"{term}\")",
            x.value
        ),
        _ => String::new(),
    };
    Ok((
        LimitJudgement {
            value_percent: x.value,
            standard_uncertainty_percent: u,
            limit_percent: max,
            guard_band_percent: w,
            decision: d.name(),
        },
        text,
    ))
}

#[cfg(test)]
mod tests;
