//! Which lugs to turn: each lug's deviation from the mean tension judged
//! against a tolerance, and the adjustments in the trade's terms.
//!
//! Conventions: deviations in percent of the mean tension (and in N/m when
//! the areal density is known), standard uncertainties u (k = 1); a lug is
//! judged with the expanded uncertainty U = k·u, k = [`COVERAGE_K`]:
//!
//! - *within* when |d| + U ≤ t (inside the tolerance t even at the edge of
//!   its uncertainty),
//! - *beyond* when |d| − U > t,
//! - *unsure* otherwise (re-tap that lug, or tap closer to it).
//!
//! This is the guarded acceptance of ILAC-G8:2019 applied to |d| ≤ t, the
//! same rule `inspect` uses for its limits.
//!
//! Advice: a lug beyond the tolerance below the mean is to be tightened,
//! above it loosened, towards the mean; listed smallest change first (the
//! small corrections change the neighbours least and leave the pattern
//! easiest to re-read), each by its deviation — tonus does not know the
//! thread pitch, so it names a change in tension, never an angle of the
//! key. When a maker's rating is given and the mean already reaches it,
//! no lug is to be tightened: the slack ones come up by loosening the
//! tight ones. The advice always ends with the same round of taps again.

use crate::base::estimate::Estimate;
use crate::fitting::round::{LugDeviation, Pattern};
use serde::Serialize;

/// Coverage factor of the lug judgements.
pub const COVERAGE_K: f64 = 2.0;

/// Default tolerance on a lug's deviation from the mean, %.
pub const DEFAULT_TOLERANCE_PCT: f64 = 1.0;

/// A lug's state against the tolerance.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum LugState {
    /// Inside the tolerance with its uncertainty.
    Within,
    /// Outside the tolerance with its uncertainty.
    Beyond,
    /// The tolerance lies inside the uncertainty.
    Unsure,
}

impl LugState {
    /// The word printed.
    pub fn name(self) -> &'static str {
        match self {
            LugState::Within => "within",
            LugState::Beyond => "BEYOND",
            LugState::Unsure => "unsure",
        }
    }
}

/// What to do at a lug.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Turn {
    /// Raise its tension.
    Tighten,
    /// Lower its tension.
    Loosen,
}

/// One lug judged.
#[derive(Debug, Clone, Serialize)]
pub struct LugJudgement {
    /// The deviation.
    #[serde(flatten)]
    pub deviation: LugDeviation,
    /// In N/m (or m²/s²) with its standard uncertainty, when the mean is known.
    pub deviation_abs: Option<Estimate>,
    /// Against the tolerance.
    pub state: LugState,
    /// What to do, for a lug beyond the tolerance.
    pub turn: Option<Turn>,
}

/// The advice for one round.
#[derive(Debug, Clone, Serialize)]
pub struct Advice {
    /// Tolerance on |deviation|, %.
    pub tolerance_pct: f64,
    /// Coverage factor of the judgements.
    pub coverage_k: f64,
    /// Every lug, in lug order (empty when the lugs are not known).
    pub lugs: Vec<LugJudgement>,
    /// The steps, in order, as sentences.
    pub steps: Vec<String>,
    /// One line that sums the round up.
    pub summary: String,
}

/// One lug against the tolerance (see the module notes).
fn judge(d: &LugDeviation, mean: Option<Estimate>, tolerance_pct: f64) -> LugJudgement {
    let big_u = COVERAGE_K * d.deviation_u_pct;
    let a = d.deviation_pct.abs();
    let state = if a + big_u <= tolerance_pct {
        LugState::Within
    } else if a - big_u > tolerance_pct {
        LugState::Beyond
    } else {
        LugState::Unsure
    };
    let turn = (state == LugState::Beyond).then_some(if d.deviation_pct < 0.0 {
        Turn::Tighten
    } else {
        Turn::Loosen
    });
    let deviation_abs = mean.map(|m| Estimate {
        value: m.value * d.deviation_pct / 100.0,
        standard_uncertainty: ((m.value * d.deviation_u_pct / 100.0).powi(2)
            + (m.standard_uncertainty * d.deviation_pct / 100.0).powi(2))
        .sqrt(),
    });
    LugJudgement {
        deviation: d.clone(),
        deviation_abs,
        state,
        turn,
    }
}

/// The turns for the lugs beyond the tolerance, in the order given.
fn turn_steps(beyond: &[&LugJudgement], unit: &str, at_rating: bool) -> Vec<String> {
    let mut steps = Vec::new();
    let amount = |l: &LugJudgement| match l.deviation_abs {
        Some(e) => format!(
            "{:.1} % ({:.0} {unit})",
            l.deviation.deviation_pct.abs(),
            e.value.abs()
        ),
        None => format!("{:.1} %", l.deviation.deviation_pct.abs()),
    };
    for l in beyond {
        let lug = format!("lug {} ({:.0}°)", l.deviation.lug, l.deviation.angle_deg);
        match (l.turn, at_rating) {
            (Some(Turn::Tighten), false) => steps.push(format!(
                "tighten {lug} by about {}, in small steps",
                amount(l)
            )),
            (Some(Turn::Tighten), true) => steps.push(format!(
                "do not tighten {lug} ({} below the mean): the mean is at the maker's rating already; bring it level by loosening the tight lugs",
                amount(l)
            )),
            (Some(Turn::Loosen), _) => {
                steps.push(format!("loosen {lug} by about {}, in small steps", amount(l)))
            }
            (None, _) => {}
        }
    }
    steps
}

/// Judges each lug of `pattern` against `tolerance_pct` and writes the
/// steps. `mean` converts percent to N/m (`unit`); `rating` is the
/// maker's rating in the same unit, if given.
pub fn advise(
    pattern: &Pattern,
    mean: Option<Estimate>,
    unit: &str,
    tolerance_pct: f64,
    rating: Option<f64>,
) -> Advice {
    let again =
        "then tap the same round again (same lugs, same microphone place) to confirm".to_string();
    let Some(devs) = &pattern.lugs else {
        let (summary, steps) = match &pattern.not_measurable {
            Some(_) => (
                "no lug advice: unevenness not measurable from these taps (why: see the pattern)"
                    .into(),
                vec![],
            ),
            None => (
                "the head is uneven but the taps do not fix which lugs: no lug advice".into(),
                vec![pattern
                    .orders
                    .iter()
                    .filter_map(|o| o.angle_refused.clone())
                    .collect::<Vec<_>>()
                    .join("; ")],
            ),
        };
        return Advice {
            tolerance_pct,
            coverage_k: COVERAGE_K,
            lugs: Vec::new(),
            steps,
            summary,
        };
    };
    let lugs: Vec<LugJudgement> = devs.iter().map(|d| judge(d, mean, tolerance_pct)).collect();
    let at_rating = match (rating, mean) {
        (Some(r), Some(m)) => m.value >= r,
        _ => false,
    };
    let mut beyond: Vec<&LugJudgement> = lugs.iter().filter(|l| l.turn.is_some()).collect();
    // Smallest change first; changes equal to 0.01 % in lug order (the
    // pattern gives opposite lugs equal deviations, which rounding must
    // not reorder between a stream and a file).
    beyond.sort_by_key(|l| {
        (
            (l.deviation.deviation_pct.abs() * 100.0).round() as i64,
            l.deviation.lug,
        )
    });
    let mut steps = turn_steps(&beyond, unit, at_rating);
    let unsure: Vec<String> = lugs
        .iter()
        .filter(|l| l.state == LugState::Unsure)
        .map(|l| l.deviation.lug.to_string())
        .collect();
    if !unsure.is_empty() {
        steps.push(format!(
            "lug(s) {} are too close to the tolerance to call: tap them again with the round",
            unsure.join(", ")
        ));
    }
    let n_beyond = beyond.len();
    let summary = if n_beyond == 0 && unsure.is_empty() {
        format!(
            "every lug within ±{tolerance_pct} % of the mean (k = {COVERAGE_K}): nothing to turn"
        )
    } else {
        format!(
            "{n_beyond} lug(s) beyond ±{tolerance_pct} % of the mean, {} unsure (k = {COVERAGE_K})",
            unsure.len()
        )
    };
    if n_beyond > 0 {
        steps.push(format!(
            "never take a lug past the maker's rating for the head and the hoop{}",
            match rating {
                Some(r) => format!(" ({r:.0} {unit} as given)"),
                None => String::new(),
            }
        ));
        steps.push(again);
    }
    Advice {
        tolerance_pct,
        coverage_k: COVERAGE_K,
        lugs,
        steps,
        summary,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn pattern(devs: &[(f64, f64)]) -> Pattern {
        Pattern {
            orders: Vec::new(),
            lugs: Some(
                devs.iter()
                    .enumerate()
                    .map(|(i, &(d, u))| LugDeviation {
                        lug: i + 1,
                        angle_deg: 60.0 * i as f64,
                        deviation_pct: d,
                        deviation_u_pct: u,
                    })
                    .collect(),
            ),
            not_determined: Vec::new(),
            not_measurable: None,
            set_aside: Vec::new(),
        }
    }

    #[test]
    fn states_and_order_of_the_steps() {
        let p = pattern(&[
            (2.0, 0.1),
            (-1.5, 0.1),
            (0.2, 0.1),
            (-0.9, 0.1),
            (0.5, 0.1),
            (-0.3, 0.1),
        ]);
        let mean = Some(Estimate {
            value: 3000.0,
            standard_uncertainty: 1.0,
        });
        let a = advise(&p, mean, "N/m", 1.0, None);
        let states: Vec<LugState> = a.lugs.iter().map(|l| l.state).collect();
        use LugState::*;
        assert_eq!(states, vec![Beyond, Beyond, Within, Unsure, Within, Within]);
        // Smallest change first: lug 2 (1.5 %) before lug 1 (2 %).
        assert!(a.steps[0].starts_with("tighten lug 2"), "{:?}", a.steps);
        assert!(a.steps[0].contains("45 N/m"), "{:?}", a.steps);
        assert!(a.steps[1].starts_with("loosen lug 1"));
        assert!(a.steps.iter().any(|s| s.contains("lug(s) 4")));
        assert!(a.steps.last().unwrap().contains("same round again"));
    }

    #[test]
    fn at_the_rating_nothing_is_tightened() {
        let p = pattern(&[(2.0, 0.1), (-2.0, 0.1)]);
        let mean = Some(Estimate {
            value: 3000.0,
            standard_uncertainty: 1.0,
        });
        let a = advise(&p, mean, "N/m", 1.0, Some(2900.0));
        assert!(
            a.steps.iter().all(|s| !s.starts_with("tighten")),
            "{:?}",
            a.steps
        );
        assert!(a
            .steps
            .iter()
            .any(|s| s.starts_with("do not tighten lug 2")));
    }

    #[test]
    fn not_measurable_gives_no_lugs() {
        let p = Pattern {
            orders: Vec::new(),
            lugs: None,
            not_determined: Vec::new(),
            not_measurable: Some("unevenness not measurable from these taps: x".into()),
            set_aside: Vec::new(),
        };
        let a = advise(&p, None, "N/m", 1.0, None);
        assert!(a.lugs.is_empty() && a.steps.is_empty());
        assert!(a
            .summary
            .contains("unevenness not measurable from these taps"));
    }
}
