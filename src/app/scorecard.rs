//! The scorecard: `tonus fit`'s code path run on a folder of recordings
//! that tonus did not make, each scored against the truth beside it.
//!
//! A case is a folder `<id>/` with `rec.wav` and `truth.json` (the layout
//! of the open validation corpus, `../shared/corpus/synthetic`, whose
//! README defines the fields). Only the `inputs` (shape, dimensions,
//! areal density, model) reach the measurement; with `with_tap` the tap
//! point of `excitation` is added, as a user who noted it would.
//!
//! Per case: the tension error (T − T_true)/T_true (biaxial: the mean
//! tension, against whichever of the two equivalent solutions is nearer);
//! z = (T − T_true)/u with the stated standard uncertainty; recall, the
//! fraction of the `expected` modes with a reported frequency within
//! max(0.5 % f, 1.5 Hz) (split-pair members count); wrong labels, reported
//! modes on a true mode but carrying another (m,n) (biaxial: (n,m) is
//! accepted, the swapped solution being equivalent); whether the grade
//! was doubtful or unfit (flagged). A case that expects an error passes
//! when the measurement returns one whose message is one line.

use crate::app::commands;
use crate::base::error::{Result, TonusError};
use crate::fitting::fit::FitModel;
use crate::fitting::measurement::FitOptions;
use crate::fitting::measurement::Measurement;
use crate::fitting::quality::Grade;
use crate::physics::panel::{Panel, PanelSpec};
use crate::signal::recording::ChannelChoice;
use serde::Serialize;
use serde_json::Value;
use std::path::{Path, PathBuf};
use std::time::Instant;

/// Relative tension error above which an unflagged answer is wrong, as
/// the corpus README scores it.
pub const WRONG_FRACTION: f64 = 0.01;
/// Relative part of the frequency tolerance of recall and labels.
pub const MATCH_TOLERANCE_REL: f64 = 0.005;
/// Absolute floor of the frequency tolerance of recall and labels, Hz.
pub const MATCH_TOLERANCE_HZ: f64 = 1.5;

/// What the truth expects of a case.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Expect {
    /// A measured tension.
    Result,
    /// A one-line error.
    Error,
    /// Either (a cut data chunk may still hold a usable tap).
    ErrorOrResult,
}

/// One true mode of a case.
#[derive(Debug, Clone)]
struct TrueMode {
    m: u32,
    n: u32,
    freq_hz: f64,
    expected: bool,
}

/// A scored case.
#[derive(Debug, Clone, Serialize)]
pub struct CaseScore {
    /// Folder name.
    pub id: String,
    /// Category from `truth.json`.
    pub category: String,
    /// What the truth expects.
    pub expect: Expect,
    /// True tension, N/m (biaxial: the mean).
    pub true_tension_n_per_m: f64,
    /// Measured tension, N/m, when one was reported.
    pub tension_n_per_m: Option<f64>,
    /// Its standard uncertainty, N/m.
    pub tension_u_n_per_m: Option<f64>,
    /// (T − T_true)/T_true.
    pub error: Option<f64>,
    /// (T − T_true)/u.
    pub z: Option<f64>,
    /// Grade, when measured.
    pub grade: Option<Grade>,
    /// The error message, when the measurement refused.
    pub message: Option<String>,
    /// Expected modes found / expected modes.
    pub recall: Option<(usize, usize)>,
    /// Reported modes on a true mode with another label.
    pub wrong_labels: usize,
    /// Wall time of the measurement, s.
    pub seconds: f64,
    /// Bending stiffness reported (plate), N·m.
    pub bending_stiffness_n_m: Option<f64>,
}

impl CaseScore {
    /// Graded doubtful or unfit, or refused with an error.
    pub fn flagged(&self) -> bool {
        match self.grade {
            Some(g) => g >= Grade::Doubtful,
            None => true,
        }
    }

    /// |error| above [`WRONG_FRACTION`] (or no tension at all).
    pub fn wrong(&self) -> bool {
        self.error.is_none_or(|e| e.abs() > WRONG_FRACTION)
    }

    /// Wrong and graded sound or fair: the worst outcome.
    pub fn wrong_unflagged(&self) -> bool {
        self.expect == Expect::Result && self.wrong() && !self.flagged()
    }

    /// A case expecting an error got a one-line one (or, for
    /// `error_or_result`, either).
    pub fn error_ok(&self) -> bool {
        let one_line = self.message.as_deref().is_some_and(|m| {
            !m.trim().is_empty() && !m.trim().contains('\n') && !m.contains("panicked")
        });
        match self.expect {
            Expect::Error => one_line,
            Expect::ErrorOrResult => one_line || self.tension_n_per_m.is_some(),
            Expect::Result => false,
        }
    }
}

/// The figures of one category.
#[derive(Debug, Clone, Serialize)]
pub struct CategoryFigures {
    /// Category name.
    pub category: String,
    /// Cases.
    pub n: usize,
    /// Median |error|, % (cases with a tension).
    pub median_abs_error_pct: Option<f64>,
    /// 90th percentile |error|, % (nearest rank).
    pub p90_abs_error_pct: Option<f64>,
    /// Largest |error|, %.
    pub max_abs_error_pct: Option<f64>,
    /// Cases with |z| ≤ 2 / cases with a tension.
    pub within_2u: (usize, usize),
    /// Expected modes found / expected.
    pub recall: (usize, usize),
    /// Wrong labels summed.
    pub wrong_labels: usize,
    /// Graded doubtful or unfit, or refused.
    pub flagged: usize,
    /// Bad-input cases answered with a one-line error.
    pub errors_ok: usize,
}

/// The whole run.
#[derive(Debug, Clone, Serialize)]
pub struct Scorecard {
    /// Every case, in folder order.
    pub cases: Vec<CaseScore>,
    /// Whether the tap point was given.
    pub with_tap: bool,
}

/// Runs every `<id>/truth.json` case under `dir`.
///
/// # Errors
/// An unreadable folder, or a `truth.json` that does not parse or lacks
/// its inputs (the corpus itself is broken; say which file).
pub fn run(dir: &Path, with_tap: bool) -> Result<Scorecard> {
    run_scaled(dir, with_tap, (1.0, 1.0))
}

/// As [`run`], with the entered width (or diameter) and height multiplied
/// by `scale`, as a user who measured a side wrong would enter them (the
/// truth is unchanged): the check of what tonus says when the inputs are
/// off.
///
/// # Errors
/// As [`run`].
pub fn run_scaled(dir: &Path, with_tap: bool, scale: (f64, f64)) -> Result<Scorecard> {
    let mut ids: Vec<PathBuf> = std::fs::read_dir(dir)
        .map_err(|e| TonusError::Io {
            path: dir.to_path_buf(),
            reason: format!("{e}; give the folder that holds the <id>/truth.json cases"),
        })?
        .filter_map(|e| e.ok().map(|e| e.path()))
        .filter(|p| p.join("truth.json").is_file())
        .collect();
    ids.sort();
    if ids.is_empty() {
        return Err(TonusError::Io {
            path: dir.to_path_buf(),
            reason: "no <id>/truth.json case in this folder".into(),
        });
    }
    let cases = ids
        .iter()
        .map(|case| score_case_scaled(case, with_tap, scale))
        .collect::<Result<Vec<_>>>()?;
    Ok(Scorecard { cases, with_tap })
}

fn corpus_error(path: &Path, what: &str) -> TonusError {
    TonusError::Io {
        path: path.to_path_buf(),
        reason: format!("not a corpus truth file: {what}"),
    }
}

/// A case's `truth.json`, parsed, with its path (for error messages).
fn read_truth(case: &Path) -> Result<(PathBuf, Value)> {
    let truth_path = case.join("truth.json");
    let text = std::fs::read_to_string(&truth_path).map_err(|e| TonusError::Io {
        path: truth_path.clone(),
        reason: e.to_string(),
    })?;
    let t = serde_json::from_str(&text)
        .map_err(|e| corpus_error(&truth_path, &format!("invalid JSON ({e})")))?;
    Ok((truth_path, t))
}

fn num(v: &Value, key: &str) -> Option<f64> {
    v.get(key).and_then(Value::as_f64)
}

/// Scores one case folder.
///
/// # Errors
/// A broken `truth.json`.
pub fn score_case(case: &Path, with_tap: bool) -> Result<CaseScore> {
    score_case_scaled(case, with_tap, (1.0, 1.0))
}

/// As [`score_case`], with the entered width (or diameter) and height
/// scaled ([`run_scaled`]).
///
/// # Errors
/// A broken `truth.json`.
pub fn score_case_scaled(case: &Path, with_tap: bool, scale: (f64, f64)) -> Result<CaseScore> {
    let (truth_path, t) = read_truth(case)?;
    let id = case
        .file_name()
        .map(|s| s.to_string_lossy().into_owned())
        .unwrap_or_default();
    let category = t
        .get("category")
        .and_then(Value::as_str)
        .unwrap_or("uncategorised")
        .to_string();
    let expect = match t.get("expect").and_then(Value::as_str) {
        Some("error") => Expect::Error,
        Some("error_or_result") => Expect::ErrorOrResult,
        _ => Expect::Result,
    };
    let inputs = t
        .get("inputs")
        .ok_or_else(|| corpus_error(&truth_path, "no inputs"))?;
    let truth = t.get("truth").cloned().unwrap_or(Value::Null);
    let true_t = num(&truth, "tension_n_per_m")
        .ok_or_else(|| corpus_error(&truth_path, "no truth.tension_n_per_m"))?;
    let equivalent_t = truth
        .get("equivalent_solution")
        .and_then(|e| num(e, "tension_n_per_m"));
    let model_name = inputs.get("model").and_then(Value::as_str).unwrap_or("iso");
    let model = match model_name {
        "iso" | "isotropic" => FitModel::Isotropic,
        other => FitModel::from_name(other)
            .ok_or_else(|| corpus_error(&truth_path, &format!("unknown model {other}")))?,
    };
    let spec = case_panel(&t, inputs, with_tap, scale);
    let modes = true_modes(&t);
    let mut score = CaseScore {
        id,
        category,
        expect,
        true_tension_n_per_m: true_t,
        tension_n_per_m: None,
        tension_u_n_per_m: None,
        error: None,
        z: None,
        grade: None,
        message: None,
        recall: None,
        wrong_labels: 0,
        seconds: 0.0,
        bending_stiffness_n_m: None,
    };
    let panel = match Panel::from_spec(&spec) {
        Ok(p) => p,
        Err(e) => {
            score.message = Some(e.to_string());
            return Ok(score);
        }
    };
    let opts = FitOptions {
        model,
        ..FitOptions::default()
    };
    let wav = case.join("rec.wav");
    let start = Instant::now();
    // A panic is scored as a failure of this case, never the run's end.
    let outcome = std::panic::catch_unwind(|| {
        commands::measure_file(&wav, ChannelChoice::MixDown, &panel, &opts)
    });
    score.seconds = start.elapsed().as_secs_f64();
    let m = match outcome {
        Ok(Ok(m)) => m,
        Ok(Err(e)) => {
            score.message = Some(e.to_string());
            return Ok(score);
        }
        Err(_) => {
            score.message = Some("panicked".into());
            return Ok(score);
        }
    };
    score.grade = Some(m.quality.grade);
    score.bending_stiffness_n_m = m
        .plate
        .as_ref()
        .and_then(|p| p.bending_stiffness.map(|d| d.value));
    score_tension(&mut score, &m, true_t, equivalent_t);
    score_labels(&mut score, &m, &modes, model == FitModel::Biaxial);
    Ok(score)
}

/// The panel a case's inputs describe, with the entered sides scaled and
/// the tap point when asked for.
fn case_panel(t: &Value, inputs: &Value, with_tap: bool, scale: (f64, f64)) -> PanelSpec {
    let shape = inputs
        .get("shape")
        .and_then(Value::as_str)
        .unwrap_or("rect");
    let mut spec = PanelSpec {
        shape: Some(shape.to_string()),
        areal_density: num(inputs, "sigma_kg_m2").map(|s| format!("{s}kg/m2")),
        ..PanelSpec::default()
    };
    let (lx, ly) = (num(inputs, "lx_m"), num(inputs, "ly_m"));
    if shape == "circle" {
        spec.diameter = num(inputs, "diameter_m").map(|d| format!("{}m", d * scale.0));
    } else {
        spec.width = lx.map(|v| format!("{}m", v * scale.0));
        spec.height = ly.map(|v| format!("{}m", v * scale.1));
    }
    if with_tap {
        let ex = t.get("excitation").cloned().unwrap_or(Value::Null);
        spec.tap_at = if shape == "circle" {
            ex.get("tap_r_theta").and_then(|v| {
                let r = v.get(0)?.as_f64()?;
                let th = v.get(1)?.as_f64()?;
                Some(format!("{r},{}", th.to_degrees()))
            })
        } else {
            ex.get("tap_xy_m").and_then(|v| {
                let x = v.get(0)?.as_f64()? / lx?;
                let y = v.get(1)?.as_f64()? / ly?;
                Some(format!("{x},{y}"))
            })
        };
    }
    spec
}

/// The true modes of a case.
fn true_modes(t: &Value) -> Vec<TrueMode> {
    t.get("modes")
        .and_then(Value::as_array)
        .map(|a| {
            a.iter()
                .filter_map(|m| {
                    Some(TrueMode {
                        m: m.get("m")?.as_u64()? as u32,
                        n: m.get("n")?.as_u64()? as u32,
                        freq_hz: num(m, "freq_hz")?,
                        expected: m.get("expected").and_then(Value::as_bool) == Some(true),
                    })
                })
                .collect()
        })
        .unwrap_or_default()
}

/// The tension's error and z-score against the truth (biaxial: against
/// the nearer of the two equivalent solutions).
fn score_tension(score: &mut CaseScore, m: &Measurement, true_t: f64, equivalent_t: Option<f64>) {
    let Some(tension) = m.tension else {
        return;
    };
    // Biaxial: either equivalent solution is right; score the nearer.
    let reference = match equivalent_t {
        Some(eq) if (tension.value - eq).abs() < (tension.value - true_t).abs() => eq,
        _ => true_t,
    };
    score.tension_n_per_m = Some(tension.value);
    score.tension_u_n_per_m = Some(tension.standard_uncertainty);
    score.error = Some(tension.value / reference - 1.0);
    score.z = Some((tension.value - reference) / tension.standard_uncertainty.max(1e-300));
}

/// Recall of the expected modes and the labels that no true mode at their
/// frequency carries (a biaxial fit may carry the swapped labels).
fn score_labels(score: &mut CaseScore, m: &Measurement, modes: &[TrueMode], swap_ok: bool) {
    // Every reported frequency with its labels (split-pair members too).
    let mut reported: Vec<(f64, Vec<(u32, u32)>)> = Vec::new();
    for r in &m.modes {
        let labels = parse_labels(&r.labels);
        reported.push((r.measured_hz, labels.clone()));
        if let Some(p) = r.pair {
            reported.push((p.lower.frequency_hz, labels.clone()));
            reported.push((p.upper.frequency_hz, labels));
        }
    }
    let tol = |f: f64| (MATCH_TOLERANCE_REL * f).max(MATCH_TOLERANCE_HZ);
    let expected: Vec<&TrueMode> = modes.iter().filter(|m| m.expected).collect();
    if !expected.is_empty() {
        let found = expected
            .iter()
            .filter(|tm| {
                reported
                    .iter()
                    .any(|(f, _)| (f - tm.freq_hz).abs() <= tol(tm.freq_hz))
            })
            .count();
        score.recall = Some((found, expected.len()));
    }
    for r in &m.modes {
        let labels = parse_labels(&r.labels);
        // The true modes this report sits on; a label is wrong when none
        // of them carries it.
        let on: Vec<&TrueMode> = modes
            .iter()
            .filter(|tm| (r.measured_hz - tm.freq_hz).abs() <= tol(tm.freq_hz))
            .collect();
        if on.is_empty() {
            continue;
        }
        let right = on.iter().any(|tm| {
            labels
                .iter()
                .any(|&(a, b)| (a, b) == (tm.m, tm.n) || (swap_ok && (b, a) == (tm.m, tm.n)))
        });
        if !right {
            score.wrong_labels += 1;
        }
    }
}

/// The `tonus fit` arguments (after the recording) that a case's inputs
/// stand for: what a user would type, for timing the binary on the case.
///
/// # Errors
/// A broken `truth.json`.
pub fn fit_args(case: &Path) -> Result<Vec<String>> {
    let (truth_path, t) = read_truth(case)?;
    let inputs = t
        .get("inputs")
        .ok_or_else(|| corpus_error(&truth_path, "no inputs"))?;
    let mut out = Vec::new();
    if inputs.get("shape").and_then(Value::as_str) == Some("circle") {
        if let Some(d) = num(inputs, "diameter_m") {
            out.extend(["--diameter".to_string(), format!("{d}m")]);
        }
    } else {
        for (flag, key) in [("--width", "lx_m"), ("--height", "ly_m")] {
            if let Some(v) = num(inputs, key) {
                out.extend([flag.to_string(), format!("{v}m")]);
            }
        }
    }
    if let Some(s) = num(inputs, "sigma_kg_m2") {
        out.extend(["--areal-density".to_string(), format!("{s}kg/m2")]);
    }
    match inputs.get("model").and_then(Value::as_str) {
        Some("iso") | None => {}
        Some(m) => out.extend(["--model".to_string(), m.to_string()]),
    }
    Ok(out)
}

/// "(1,2)/(2,1)" → [(1,2), (2,1)].
fn parse_labels(text: &str) -> Vec<(u32, u32)> {
    text.split('/')
        .filter_map(|l| {
            let l = l.trim().trim_start_matches('(').trim_end_matches(')');
            let (a, b) = l.split_once(',')?;
            Some((a.trim().parse().ok()?, b.trim().parse().ok()?))
        })
        .collect()
}

/// Nearest-rank percentile of sorted values (q in 0..=1).
fn percentile(sorted: &[f64], q: f64) -> Option<f64> {
    if sorted.is_empty() {
        return None;
    }
    let rank = ((q * sorted.len() as f64).ceil() as usize).clamp(1, sorted.len());
    Some(sorted[rank - 1])
}

fn median(sorted: &[f64]) -> Option<f64> {
    let n = sorted.len();
    match n {
        0 => None,
        _ if n % 2 == 1 => Some(sorted[n / 2]),
        _ => Some(0.5 * (sorted[n / 2 - 1] + sorted[n / 2])),
    }
}

/// Figures of a set of cases under one name.
pub fn figures(name: &str, cases: &[&CaseScore]) -> CategoryFigures {
    let mut errs: Vec<f64> = cases
        .iter()
        .filter(|c| c.expect == Expect::Result)
        .filter_map(|c| c.error.map(|e| 100.0 * e.abs()))
        .collect();
    errs.sort_by(f64::total_cmp);
    let with_t: Vec<&&CaseScore> = cases
        .iter()
        .filter(|c| c.expect == Expect::Result && c.z.is_some())
        .collect();
    let recall = cases
        .iter()
        .filter(|c| c.expect == Expect::Result)
        .fold((0, 0), |(f, n), c| match c.recall {
            Some((a, b)) => (f + a, n + b),
            None => (f, n + 12),
        });
    CategoryFigures {
        category: name.to_string(),
        n: cases.len(),
        median_abs_error_pct: median(&errs),
        p90_abs_error_pct: percentile(&errs, 0.9),
        max_abs_error_pct: errs.last().copied(),
        within_2u: (
            with_t
                .iter()
                .filter(|c| c.z.is_some_and(|z| z.abs() <= 2.0))
                .count(),
            with_t.len(),
        ),
        recall,
        wrong_labels: cases.iter().map(|c| c.wrong_labels).sum(),
        flagged: cases
            .iter()
            .filter(|c| c.expect == Expect::Result && c.flagged())
            .count(),
        errors_ok: cases.iter().filter(|c| c.error_ok()).count(),
    }
}

impl Scorecard {
    /// Categories in order of first appearance.
    pub fn categories(&self) -> Vec<String> {
        let mut out: Vec<String> = Vec::new();
        for c in &self.cases {
            if !out.contains(&c.category) {
                out.push(c.category.clone());
            }
        }
        out
    }

    /// Figures per category, then over every case that expects a result.
    pub fn table(&self) -> Vec<CategoryFigures> {
        let mut rows: Vec<CategoryFigures> = self
            .categories()
            .iter()
            .map(|cat| {
                let cs: Vec<&CaseScore> =
                    self.cases.iter().filter(|c| &c.category == cat).collect();
                figures(cat, &cs)
            })
            .collect();
        let all: Vec<&CaseScore> = self
            .cases
            .iter()
            .filter(|c| c.expect == Expect::Result)
            .collect();
        rows.push(figures("all scored", &all));
        rows
    }

    /// Wrong (|error| > 1 %) and graded sound or fair.
    pub fn wrong_unflagged(&self) -> Vec<&CaseScore> {
        self.cases.iter().filter(|c| c.wrong_unflagged()).collect()
    }

    /// The slowest case.
    pub fn slowest(&self) -> Option<&CaseScore> {
        self.cases
            .iter()
            .max_by(|a, b| a.seconds.total_cmp(&b.seconds))
    }

    /// The table as Markdown-compatible text, then the lists.
    pub fn render(&self, each: bool) -> String {
        let pct = |v: Option<f64>| v.map_or("–".to_string(), |v| format!("{v:.3}"));
        let mut s = format!(
            "scorecard: {} cases, tap point {}\n\n",
            self.cases.len(),
            if self.with_tap { "given" } else { "not given" }
        );
        s.push_str("| category | n | median \\|e\\| % | p90 \\|e\\| % | max \\|e\\| % | within ±2u | recall | wrong labels | flagged | errors as expected |\n");
        s.push_str("|---|---|---|---|---|---|---|---|---|---|\n");
        for r in self.table() {
            let recall = if r.recall.1 > 0 {
                format!("{:.2}", r.recall.0 as f64 / r.recall.1 as f64)
            } else {
                "–".into()
            };
            let cov = if r.within_2u.1 > 0 {
                format!("{}/{}", r.within_2u.0, r.within_2u.1)
            } else {
                "–".into()
            };
            s.push_str(&format!(
                "| {} | {} | {} | {} | {} | {} | {} | {} | {} | {} |\n",
                r.category,
                r.n,
                pct(r.median_abs_error_pct),
                pct(r.p90_abs_error_pct),
                pct(r.max_abs_error_pct),
                cov,
                recall,
                r.wrong_labels,
                r.flagged,
                r.errors_ok
            ));
        }
        let bad = self.wrong_unflagged();
        s.push_str(&format!(
            "\nwrong and not flagged (|e| > {:.0} % graded sound or fair): {}\n",
            100.0 * WRONG_FRACTION,
            if bad.is_empty() {
                "none".to_string()
            } else {
                bad.iter()
                    .map(|c| format!("{} ({:+.2} %)", c.id, 100.0 * c.error.unwrap_or(f64::NAN)))
                    .collect::<Vec<_>>()
                    .join(", ")
            }
        ));
        if let Some(c) = self.slowest() {
            s.push_str(&format!("slowest: {} in {:.3} s\n", c.id, c.seconds));
        }
        if each {
            s.push('\n');
            for c in &self.cases {
                s.push_str(&format!(
                    "{:<22} {:>10} {:>12} {:>9} {:>9} {:>7} {:>6}  {:.3} s  {}\n",
                    c.id,
                    c.grade.map_or("–", |g| g.name()),
                    c.tension_n_per_m.map_or("–".into(), |t| format!("{t:.2}")),
                    c.error
                        .map_or("–".into(), |e| format!("{:+.3}%", 100.0 * e)),
                    c.z.map_or("–".into(), |z| format!("z {z:+.1}")),
                    c.recall.map_or("–".into(), |(a, b)| format!("{a}/{b}")),
                    c.wrong_labels,
                    c.seconds,
                    c.message.as_deref().unwrap_or("")
                ));
            }
        }
        s
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn labels_parse() {
        assert_eq!(parse_labels("(1,2)/(2,1)"), vec![(1, 2), (2, 1)]);
        assert_eq!(parse_labels("(0,1)"), vec![(0, 1)]);
    }

    #[test]
    fn nearest_rank_percentile() {
        let v: Vec<f64> = (1..=10).map(f64::from).collect();
        assert_eq!(percentile(&v, 0.9), Some(9.0));
        assert_eq!(percentile(&v[..4], 0.9), Some(4.0));
        assert_eq!(median(&v), Some(5.5));
    }
}
