//! Acceptance specifications: which panel, which tension limits, which
//! decision rule — one TOML file per product, checked key by key when
//! loaded.
//!
//! # The file
//!
//! Every quantity is a string with its unit, in the syntax of the panel
//! file and the command line (see [`crate::base::units`]); a bare number is
//! refused. Four tables, all required:
//!
//! ```toml
//! # screen-500x400.spec.toml — acceptance of stretched printing screens
//! [spec]
//! name = "screen-500x400-20Ncm"    # required; what history is filtered by
//! version = "3"                    # required; any text, e.g. "2025-03" or "3"
//! note = "polyester 120-34, line 2" # optional
//!
//! [panel]
//! shape = "rect"                   # "rect" or "circle"; inferred if left out
//! width = "500mm"                  # rectangle: width and height
//! height = "400mm"
//! # diameter = "14in"              # circle: diameter or radius
//! areal-density = "40g/m2"         # or thickness = "0.19mm" with density = "1390kg/m3"
//! areal-density-u = "0.8g/m2"      # required: standard uncertainty (k = 1) of the areal density
//! tap-at = "0.3,0.35"              # optional, fractions of width and height
//! # pickup-at = "0.5,0.5"          # optional
//! model = "biaxial"                # required: "isotropic", "biaxial" (rectangle),
//!                                  # "air" (air-loaded film) or "stiff" (rectangle)
//! # calibration = "screen.calibration.toml" # optional, from tonus calibrate;
//! #                                # relative to this file's folder; model "isotropic"
//!
//! [limits]
//! nominal-tension = "20N/cm"       # required; lower ≤ nominal ≤ upper
//! lower-tension = "18N/cm"         # required
//! upper-tension = "22N/cm"         # required; above lower-tension
//! min-quality = "fair"             # optional: "sound" | "fair" (default) | "doubtful"
//! max-anisotropy-percent = 5       # optional number; model "biaxial" only
//! # max-unevenness-percent = 2     # optional number; circle or square panel,
//! #                                # model "isotropic" or "air"
//!
//! [decision]
//! rule = "guarded"                 # required: "simple" (shared risk) or "guarded"
//! coverage-factor = 2              # optional number, default 2 (U = k·u)
//! ```
//!
//! Tension units: `N/m`, `N/cm`, `kN/m`, `lbf/in`. Key names use hyphens
//! (underscores are accepted too, as in the panel file).
//!
//! # Models
//!
//! `model` names a model of `tonus fit --model`, read by the same
//! [`FitModel::from_name`] (aliases `plate`, `air-loaded` included):
//!
//! - `isotropic`: the wave speed, geometry as given;
//! - `biaxial` (rectangle): Tx and Ty along the sides ([`crate::fitting::biaxial`]);
//!   the tension decided on is the mean (Tx + Ty)/2, and the anisotropy
//!   a = 100·(Tx − Ty)/((Tx + Ty)/2) % comes with its uncertainty;
//! - `air`: the air-loaded membrane ([`crate::physics::airload`]), for light films
//!   such as drum heads;
//! - `stiff` (rectangle): the prestressed, simply supported plate
//!   ([`crate::physics::plate`]).
//!
//! `free-aspect` is refused (it fits the height a specification fixes),
//! and so are `biaxial` and `stiff` on a circle.
//!
//! # Limits beyond the tension
//!
//! - `max-anisotropy-percent` = a_max: |a| ≤ a_max, judged under the rule
//!   with a's own standard uncertainty (guard band k·u(a) under the
//!   guarded rule). Only with `model = "biaxial"`.
//! - `max-unevenness-percent` = s_max: the spread s = 2|ε| ≤ s_max, where
//!   the principal tensions are T(1 ± ε): s is, to first order, the
//!   tightest direction's tension over the slackest's, minus one — the
//!   figure a technician compares with a tolerance
//!   ([`crate::physics::evenness::Evenness::spread_pct`], u(s) = 2·u(ε)). It is
//!   read from the split (1,n) pairs of a circle or the (m,n)/(n,m) pairs
//!   of a square panel, so it applies to those shapes with the `isotropic`
//!   or `air` model only. A recording whose pairs are not split (an even
//!   head, or a split below the resolution) has no unevenness: it is
//!   decided on the tension alone, and the reasons say "evenness not
//!   measurable: no split pair resolved". A pair that was found but could
//!   not be evaluated makes the recording not measured.
//!
//! Both are judged by [`decision::decide`]; the verdict is the worst of
//! the tension's and the limits' judgements.
//!
//! # Calibration
//!
//! `calibration` in `[panel]` names a calibration file written by `tonus
//! calibrate` (a relative path starts at the specification's folder). It
//! is read and checked when the specification is loaded: the file must
//! parse ([`calibration::Calibration::parse`]) and match the panel's
//! geometry and areal density ([`calibration::Calibration::check_panel`]),
//! and the model must be `isotropic`, since the factors already hold air
//! loading and the supports. Its SHA-256 goes into every record (CSV,
//! JSON Lines, history). With a calibration the tension uncertainty is
//! [`Spec::calibrated_tension_uncertainty`]: the areal density cancels.
//!
//! # Checks
//!
//! Unknown tables and keys, missing keys, values of the wrong type or unit,
//! keys that do not apply to the shape or the model, a lower limit not
//! below the upper, a nominal outside the limits, an areal-density
//! uncertainty not below the areal density, and a calibration file that
//! cannot be read or does not fit the panel are all errors. Each names the
//! line and the key and says what is expected, e.g. `line 7: key
//! 'lower-tension': cannot read "12" as a tension with unit (N/m, N/cm,
//! kN/m, lbf/in); write e.g. 2500N/m`. All problems found are reported at
//! once, separated by ` | `.
//!
//! # Uncertainty
//!
//! The fit's standard uncertainty of the tension does not include the
//! areal density's. Since T = σ·c², the relative uncertainties add in
//! quadrature (GUM, JCGM 100:2008 §5.1.6):
//! (u_T/T)² = (u_fit/T)² + (u_σ/σ)², see [`Spec::tension_uncertainty`].
//! The dimensions' uncertainty is not included.

use crate::acceptance::decision::{self, DecisionInput, DecisionRule, Limits, Rule, Verdict};
use crate::base::error::{Result, TonusError};
use crate::base::estimate::Estimate;
use crate::base::hash::sha256_hex;
use crate::base::units::{self, KgPerM2, Meters};
use crate::fitting::calibration;
use crate::fitting::fit::FitModel;
use crate::fitting::pipeline::Measurement;
use crate::fitting::quality::Grade;
use crate::physics::membrane::Shape;
use crate::physics::panel::{self, Panel, PanelSpec, ShapeKind};
use serde::Serialize;
use std::path::{Path, PathBuf};
use std::sync::Arc;
use toml::de::{DeTable, DeValue};
use toml::Spanned;

/// Grade required when `min-quality` is not given: fair or better.
pub const DEFAULT_MIN_QUALITY: Grade = Grade::Fair;

/// Relative difference of areal densities above which a measurement is
/// taken to have been made with another panel than the specification's.
/// The values are copied, not recomputed, so only rounding is allowed for.
const SAME_DENSITY_REL: f64 = 1e-9;

/// The fit model a specification asks for: the models of `tonus fit
/// --model` (named as there, [`FitModel::from_name`]) except the free
/// aspect ratio, which would fit the geometry a specification fixes.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum SpecModel {
    /// Wave speed only, geometry as given ([`FitModel::Isotropic`]).
    Isotropic,
    /// Tx and Ty of a rectangle, the anisotropy with its uncertainty
    /// ([`FitModel::Biaxial`]); the tension decided on is the mean
    /// (Tx + Ty)/2.
    Biaxial,
    /// The air-loaded membrane ([`FitModel::AirLoaded`]), for light films
    /// such as drum heads.
    Air,
    /// The prestressed, simply supported rectangular plate
    /// ([`FitModel::Stiff`]): tension with the bending stiffness fitted.
    Stiff,
}

impl SpecModel {
    /// The specification model for a fit model; None for the free aspect
    /// ratio.
    pub fn from_fit_model(m: FitModel) -> Option<SpecModel> {
        match m {
            FitModel::Isotropic => Some(SpecModel::Isotropic),
            FitModel::Biaxial => Some(SpecModel::Biaxial),
            FitModel::AirLoaded => Some(SpecModel::Air),
            FitModel::Stiff => Some(SpecModel::Stiff),
            FitModel::FreeAspect => None,
        }
    }

    /// The fit model to run.
    pub fn fit_model(self) -> FitModel {
        match self {
            SpecModel::Isotropic => FitModel::Isotropic,
            SpecModel::Biaxial => FitModel::Biaxial,
            SpecModel::Air => FitModel::AirLoaded,
            SpecModel::Stiff => FitModel::Stiff,
        }
    }

    /// The name in the file (as `tonus fit --model` writes it).
    pub fn name(self) -> &'static str {
        self.fit_model().name()
    }

    /// The model measures the anisotropy Tx/Ty (biaxial only).
    pub fn measures_anisotropy(self) -> bool {
        self == SpecModel::Biaxial
    }
}

/// A loaded, checked specification.
#[derive(Debug, Clone)]
pub struct Spec {
    /// The file it was read from.
    pub path: PathBuf,
    /// `[spec] name`.
    pub name: String,
    /// `[spec] version`.
    pub version: String,
    /// `[spec] note`, if given.
    pub note: Option<String>,
    /// SHA-256 of the file's bytes, lower-case hex (64 characters).
    pub hash: String,
    /// The `[panel]` values as written.
    pub panel_spec: PanelSpec,
    /// Standard uncertainty of the areal density, kg/m².
    pub areal_density_u: KgPerM2,
    /// The fit model.
    pub model: SpecModel,
    /// Tolerance limits and the least quality decided on.
    pub limits: Limits,
    /// The decision rule and coverage factor.
    pub rule: DecisionRule,
    /// The calibration named by `[panel] calibration`, loaded and checked
    /// against the panel.
    pub calibration: Option<Arc<calibration::Loaded>>,
    /// SHA-256 of the calibration file's bytes, hex (with `calibration`).
    pub calibration_sha256: Option<String>,
    panel: Panel,
}

impl Spec {
    /// Reads and checks a specification file.
    ///
    /// # Errors
    /// [`TonusError::Io`] when the file cannot be read;
    /// [`TonusError::ConfigFile`] for anything wrong inside it, naming the
    /// line and key.
    pub fn from_file(path: &Path) -> Result<Spec> {
        let bytes = std::fs::read(path).map_err(|e| TonusError::Io {
            path: path.to_path_buf(),
            reason: e.to_string(),
        })?;
        Spec::from_bytes(&bytes, path)
    }

    /// Checks a specification given as the file's bytes; `path` is used in
    /// messages and kept in [`Spec::path`].
    ///
    /// # Errors
    /// As [`Spec::from_file`].
    pub fn from_bytes(bytes: &[u8], path: &Path) -> Result<Spec> {
        let fail = |reason: String| TonusError::ConfigFile {
            path: path.to_path_buf(),
            reason,
        };
        let text = std::str::from_utf8(bytes).map_err(|e| {
            fail(format!(
                "line {}: not UTF-8 text; save the file as UTF-8",
                line_of(bytes, e.valid_up_to())
            ))
        })?;
        let doc = DeTable::parse(text).map_err(|e| {
            let line = e.span().map(|s| line_of(bytes, s.start)).unwrap_or(1);
            fail(format!(
                "line {line}: not valid TOML: {}",
                e.message().trim()
            ))
        })?;
        let mut ld = Loader {
            bytes,
            dir: path.parent().map(Path::to_path_buf).unwrap_or_default(),
            problems: Vec::new(),
        };
        let spec = ld.load(doc.get_ref(), path, sha256_hex(bytes));
        if ld.problems.is_empty() {
            if let Some(spec) = spec {
                return Ok(spec);
            }
        }
        ld.problems.sort_by_key(|p| p.0);
        let text: Vec<String> = ld
            .problems
            .iter()
            .map(|(line, msg)| match line {
                Some(l) => format!("line {l}: {msg}"),
                None => msg.clone(),
            })
            .collect();
        Err(fail(if text.is_empty() {
            "the specification could not be read".into()
        } else {
            text.join(" | ")
        }))
    }

    /// The panel to measure with.
    pub fn panel(&self) -> Panel {
        self.panel.clone()
    }

    /// Standard uncertainty of the tension with the areal density's
    /// uncertainty included, N/m:
    /// u_T = √(u_fit² + (T·u_σ/σ)²), T the tension and u_fit its fit
    /// uncertainty (N/m), σ and u_σ the areal density and its standard
    /// uncertainty (kg/m²). T = σ·c² is proportional to σ, so the relative
    /// uncertainties add in quadrature (GUM, JCGM 100:2008 §5.1.6).
    pub fn tension_uncertainty(&self, tension: &Estimate) -> f64 {
        let sigma = self.panel.areal_density.map(|s| s.0).unwrap_or(f64::NAN);
        let rel = self.areal_density_u.0 / sigma;
        tension.standard_uncertainty.hypot(tension.value * rel)
    }

    /// Standard uncertainty of a tension fitted against the calibration,
    /// N/m: u_T = √(u_fit² + (T·u_ref)² + (T·u_f)²), u_ref = u(T_ref)/T_ref
    /// the reference tension's relative part and u_f the per-mode
    /// factors' ([`calibration::CalibrationTerm`]). σ does not enter: with
    /// the calibration's σ, T = T_ref·(f/f_ref)² mode by mode, so the areal
    /// density and its uncertainty cancel ([`crate::fitting::calibration`]).
    pub fn calibrated_tension_uncertainty(
        tension: &Estimate,
        term: &calibration::CalibrationTerm,
    ) -> f64 {
        let rel = term.u_rel_reference.hypot(term.u_rel_factors);
        tension.standard_uncertainty.hypot(tension.value * rel)
    }

    /// What [`decision::decide`] is given for a measurement: the tension
    /// with [`Spec::tension_uncertainty`] (or
    /// [`Spec::calibrated_tension_uncertainty`] when the fit used the
    /// calibration), the anisotropy of the biaxial model, the unevenness
    /// from the resolved split pairs (the spread 2|ε| with u = 2·u(ε),
    /// percent, [`crate::physics::evenness::Evenness::spread_pct`]), the grade and
    /// its reasons.
    pub fn decision_input(&self, m: &Measurement) -> DecisionInput {
        let term = m.calibration.as_ref().and_then(|c| c.term);
        DecisionInput {
            tension: m.tension.map(|t| Estimate {
                value: t.value,
                standard_uncertainty: match &term {
                    Some(term) => Spec::calibrated_tension_uncertainty(&t, term),
                    None => self.tension_uncertainty(&t),
                },
            }),
            anisotropy_percent: m.biaxial.as_ref().map(|b| b.anisotropy_percent),
            unevenness_percent: m.evenness.as_ref().map(|e| Estimate {
                value: e.spread_pct,
                standard_uncertainty: 2.0 * e.epsilon_u_pct,
            }),
            unevenness_problem: if m.evenness.is_none() {
                unevaluated_pairs(m)
            } else {
                None
            },
            grade: m.quality.grade,
            grade_reasons: m.quality.reasons.clone(),
        }
    }

    /// Decides on a measurement made with [`Spec::panel`].
    ///
    /// A measurement made with another shape or areal density is
    /// [`decision::Decision::NotMeasured`]: its tension does not answer
    /// this specification.
    pub fn decide(&self, m: &Measurement) -> Verdict {
        let mut input = self.decision_input(m);
        let same_shape = m.panel.shape == self.panel.shape;
        let same_density = match (m.panel.areal_density, self.panel.areal_density) {
            (Some(a), Some(b)) => (a.0 - b.0).abs() <= SAME_DENSITY_REL * b.0.abs(),
            _ => false,
        };
        let mut verdict = decision::decide(&input, &self.limits, &self.rule);
        if !(same_shape && same_density) {
            input.tension = None;
            verdict = decision::decide(&input, &self.limits, &self.rule);
            verdict.decision = decision::Decision::NotMeasured {
                reason: format!(
                    "the measurement was made for {} with areal density {}, not the specification's {} ({}); measure with the specification's panel",
                    m.panel.describe(),
                    m.panel
                        .areal_density
                        .map(|s| s.to_string())
                        .unwrap_or_else(|| "not given".into()),
                    self.panel.describe(),
                    self.spec_label()
                ),
            };
        }
        verdict
    }

    /// The unevenness from split pairs ([`crate::physics::evenness`]) applies: a
    /// circle or a square panel measured with a membrane model (isotropic
    /// or air); the same test `max-unevenness-percent` is checked against.
    pub fn unevenness_applies(&self) -> bool {
        let shape_ok = match self.panel.shape {
            Shape::Circle { .. } => true,
            Shape::Rectangle { width, height } => {
                // Tolerance: as when the file is read (rounding only).
                (width.0 - height.0).abs() <= 1e-9 * width.0
            }
        };
        shape_ok && matches!(self.model, SpecModel::Isotropic | SpecModel::Air)
    }

    /// "name version" for messages.
    pub fn spec_label(&self) -> String {
        format!("{} version {}", self.name, self.version)
    }
}

/// The split pairs that would give the unevenness ((1,n) on a circle,
/// (m,n)/(n,m) with m ≠ n on a square panel) but have a member without a
/// finite standard uncertainty (an FFT peak that was not refined), so
/// that [`crate::physics::evenness`] leaves them out; None when there are none.
fn unevaluated_pairs(m: &Measurement) -> Option<String> {
    let bad: Vec<String> = m
        .modes
        .iter()
        .filter(|r| r.degeneracy >= 2)
        .filter(|r| match m.panel.shape {
            Shape::Circle { .. } => r.m == 1,
            Shape::Rectangle { .. } => r.m != r.n,
        })
        .filter_map(|r| {
            let p = r.pair?;
            let ok = |u: f64| u.is_finite() && u >= 0.0;
            (!(ok(p.lower.frequency_u_hz) && ok(p.upper.frequency_u_hz))).then(|| {
                format!(
                    "{} split into {:.2} and {:.2} Hz",
                    r.labels, p.lower.frequency_hz, p.upper.frequency_hz
                )
            })
        })
        .collect();
    (!bad.is_empty()).then(|| {
        format!(
            "a split pair was found ({}) but a member has no frequency uncertainty, so its unevenness could not be computed",
            bad.join("; ")
        )
    })
}

/// 1-based line number of byte `offset` in `bytes`.
fn line_of(bytes: &[u8], offset: usize) -> usize {
    let end = offset.min(bytes.len());
    bytes[..end].iter().filter(|&&b| b == b'\n').count() + 1
}

/// Keys of each table: (name, required).
const SPEC_KEYS: &[&str] = &["name", "version", "note"];
const PANEL_KEYS: &[&str] = &[
    "shape",
    "width",
    "height",
    "diameter",
    "radius",
    "areal-density",
    "thickness",
    "density",
    "tap-at",
    "pickup-at",
    "areal-density-u",
    "model",
    "calibration",
    "note",
];
const LIMITS_KEYS: &[&str] = &[
    "nominal-tension",
    "lower-tension",
    "upper-tension",
    "max-anisotropy-percent",
    "max-unevenness-percent",
    "min-quality",
];
const DECISION_KEYS: &[&str] = &["rule", "coverage-factor"];
const TABLES: &[&str] = &["spec", "panel", "limits", "decision"];

/// Levenshtein distance, for "did you mean" hints.
fn edit_distance(a: &str, b: &str) -> usize {
    let b: Vec<char> = b.chars().collect();
    let mut row: Vec<usize> = (0..=b.len()).collect();
    for (i, ca) in a.chars().enumerate() {
        let mut prev = row[0];
        row[0] = i + 1;
        for (j, &cb) in b.iter().enumerate() {
            let cur = row[j + 1];
            row[j + 1] = (prev + usize::from(ca != cb)).min(row[j] + 1).min(cur + 1);
            prev = cur;
        }
    }
    row[b.len()]
}

fn hint(word: &str, known: &[&str]) -> String {
    known
        .iter()
        .map(|k| (edit_distance(word, k), k))
        .filter(|(d, _)| *d <= 2)
        .min()
        .map(|(_, k)| format!("did you mean '{k}'? "))
        .unwrap_or_default()
}

/// The message of a quantity parsing error, without the key (which the
/// caller puts in front).
fn quantity_problem(e: TonusError) -> String {
    match e {
        TonusError::BadQuantity {
            value,
            expected,
            example,
            ..
        } => format!("cannot read {value:?} as {expected}; write e.g. {example}"),
        TonusError::OutOfRange { value, why, .. } => format!("{value:?} is not allowed: {why}"),
        other => other.to_string(),
    }
}

/// One table of the file with its keys (hyphenated) and their spans.
struct Section<'a, 'i> {
    name: &'static str,
    line: Option<usize>,
    entries: Vec<(String, &'a Spanned<DeValue<'i>>)>,
}

impl<'a, 'i> Section<'a, 'i> {
    fn get(&self, key: &str) -> Option<&'a Spanned<DeValue<'i>>> {
        self.entries.iter().find(|(k, _)| k == key).map(|(_, v)| *v)
    }
}

struct Loader<'b> {
    bytes: &'b [u8],
    /// The specification's folder: a relative calibration path starts here.
    dir: PathBuf,
    problems: Vec<(Option<usize>, String)>,
}

/// What `[panel]` gives the rest of the file.
#[derive(Default)]
struct PanelPart {
    panel: Option<Panel>,
    spec: Option<PanelSpec>,
    density_u: Option<KgPerM2>,
    model: Option<SpecModel>,
    /// Circle or rectangle, when the shape could be read.
    is_circle: Option<bool>,
    /// Width equals height (square panel), when both could be read.
    is_square: Option<bool>,
    /// `Some(None)` without a calibration key; None when it failed.
    calibration: Option<Option<(Arc<calibration::Loaded>, String)>>,
}

impl<'b> Loader<'b> {
    fn line(&self, offset: usize) -> usize {
        line_of(self.bytes, offset)
    }

    fn problem(&mut self, line: Option<usize>, msg: String) {
        self.problems.push((line, msg));
    }

    /// Finds table `name`, checks its keys against `known`.
    fn section<'a, 'i>(
        &mut self,
        top: &'a DeTable<'i>,
        name: &'static str,
        known: &[&str],
    ) -> Section<'a, 'i> {
        let mut s = Section {
            name,
            line: None,
            entries: Vec::new(),
        };
        let Some((key, value)) = top.iter().find(|(k, _)| &**k.get_ref() == name) else {
            self.problem(
                None,
                format!("the file has no [{name}] table; add it (see the example in the documentation of tonus::acceptance::spec)"),
            );
            return s;
        };
        let line = self.line(key.span().start);
        s.line = Some(line);
        let Some(table) = value.get_ref().as_table() else {
            self.problem(
                Some(line),
                format!(
                    "'{name}' must be a table [{name}]; found a {}",
                    value.get_ref().type_str()
                ),
            );
            return s;
        };
        for (k, v) in table.iter() {
            let raw: &str = k.get_ref().as_ref();
            let hyphenated = raw.replace('_', "-");
            let kline = self.line(k.span().start);
            if !known.contains(&hyphenated.as_str()) {
                self.problem(
                    Some(kline),
                    format!(
                        "key '{raw}' in [{name}] is unknown; {}known keys: {}",
                        hint(&hyphenated, known),
                        known.join(", ")
                    ),
                );
                continue;
            }
            s.entries.push((hyphenated, v));
        }
        s
    }

    /// A string value; `what` describes it for messages ("a length, e.g.
    /// \"400mm\"").
    fn string(
        &mut self,
        s: &Section,
        key: &str,
        what: &str,
        required: bool,
    ) -> Option<(usize, String)> {
        let Some(v) = s.get(key) else {
            if required {
                let at = s.line;
                self.problem(at, format!("[{}] lacks key '{key}': {what}", s.name));
            }
            return None;
        };
        let line = self.line(v.span().start);
        match v.get_ref().as_str() {
            Some(text) => Some((line, text.to_string())),
            None => {
                self.problem(
                    Some(line),
                    format!(
                        "key '{key}': must be a string in quotes, {what}; found a {}",
                        v.get_ref().type_str()
                    ),
                );
                None
            }
        }
    }

    /// A number (TOML integer or float) that must be finite and positive.
    fn positive_number(&mut self, s: &Section, key: &str, example: &str) -> Option<(usize, f64)> {
        let v = s.get(key)?;
        let line = self.line(v.span().start);
        let parsed = match v.get_ref() {
            DeValue::Integer(i) => {
                let digits = i.as_str().replace('_', "");
                i64::from_str_radix(digits.trim_start_matches('+'), i.radix())
                    .ok()
                    .map(|n| n as f64)
            }
            DeValue::Float(f) => f.as_str().replace('_', "").parse::<f64>().ok(),
            _ => None,
        };
        match parsed {
            Some(x) if x.is_finite() && x > 0.0 => Some((line, x)),
            Some(x) => {
                self.problem(
                    Some(line),
                    format!("key '{key}': {x} is not allowed: it must be a number greater than zero, e.g. {example}"),
                );
                None
            }
            None => {
                self.problem(
                    Some(line),
                    format!(
                        "key '{key}': must be a number without quotes, e.g. {key} = {example}; found a {}",
                        v.get_ref().type_str()
                    ),
                );
                None
            }
        }
    }

    /// Parses a quantity string with `parse`, reporting under `key`.
    fn quantity<T>(
        &mut self,
        s: &Section,
        key: &str,
        what: &str,
        required: bool,
        parse: fn(&str, &str) -> Result<T>,
    ) -> Option<(usize, String, T)> {
        let (line, text) = self.string(s, key, what, required)?;
        match parse(key, &text) {
            Ok(v) => Some((line, text, v)),
            Err(e) => {
                self.problem(Some(line), format!("key '{key}': {}", quantity_problem(e)));
                None
            }
        }
    }

    fn load(&mut self, top: &DeTable, path: &Path, hash: String) -> Option<Spec> {
        for (k, _) in top.iter() {
            let raw: &str = k.get_ref().as_ref();
            if !TABLES.contains(&raw) {
                let line = self.line(k.span().start);
                self.problem(
                    Some(line),
                    format!(
                        "'{raw}' is unknown at the top level; {}a specification has the tables [spec], [panel], [limits], [decision]",
                        hint(raw, TABLES)
                    ),
                );
            }
        }
        let spec_t = self.section(top, "spec", SPEC_KEYS);
        let panel_t = self.section(top, "panel", PANEL_KEYS);
        let limits_t = self.section(top, "limits", LIMITS_KEYS);
        let decision_t = self.section(top, "decision", DECISION_KEYS);

        // [spec]
        let text_key = |ld: &mut Self, key: &str, what: &str, required: bool| {
            let got = ld.string(&spec_t, key, what, required)?;
            if got.1.trim().is_empty() {
                ld.problem(
                    Some(got.0),
                    format!("key '{key}': must not be empty; {what}"),
                );
                return None;
            }
            Some(got.1.trim().to_string())
        };
        let name = text_key(
            self,
            "name",
            "the specification's name, e.g. \"screen-500x400-20Ncm\"",
            spec_t.line.is_some(),
        );
        let version = text_key(
            self,
            "version",
            "the specification's version, e.g. \"3\"",
            spec_t.line.is_some(),
        );
        let note = text_key(self, "note", "a note", false);

        // [panel]
        let pp = self.load_panel(&panel_t);

        // [limits]
        let limits = self.load_limits(&limits_t, &pp);

        // [decision]
        let rule = if decision_t.line.is_some() {
            let r = self
                .string(&decision_t, "rule", "\"simple\" or \"guarded\"", true)
                .and_then(|(line, text)| match Rule::from_name(&text) {
                    Some(r) => Some(r),
                    None => {
                        self.problem(
                            Some(line),
                            format!("key 'rule': {text:?} is not a decision rule; write \"simple\" (shared risk) or \"guarded\" (guard band w = k·u)"),
                        );
                        None
                    }
                });
            let k = match decision_t.get("coverage-factor") {
                None => Some(decision::DEFAULT_COVERAGE_FACTOR),
                Some(_) => self
                    .positive_number(&decision_t, "coverage-factor", "2")
                    .map(|(_, k)| k),
            };
            match (r, k) {
                (Some(rule), Some(coverage_factor)) => Some(DecisionRule {
                    rule,
                    coverage_factor,
                }),
                _ => None,
            }
        } else {
            None
        };

        let calibration = pp.calibration?;
        Some(Spec {
            path: path.to_path_buf(),
            name: name?,
            version: version?,
            note,
            hash,
            panel_spec: pp.spec?,
            areal_density_u: pp.density_u?,
            model: pp.model?,
            limits: limits?,
            rule: rule?,
            calibration_sha256: calibration.as_ref().map(|c| c.1.clone()),
            calibration: calibration.map(|c| c.0),
            panel: pp.panel?,
        })
    }

    fn load_panel(&mut self, t: &Section) -> PanelPart {
        if t.line.is_none() {
            return PanelPart::default();
        }
        let ok_before = self.problems.len();
        let length = "a length with its unit, e.g. \"400mm\"";
        let shape_text = self.string(t, "shape", "\"rect\" or \"circle\"", false);
        let is_circle = match &shape_text {
            Some((line, s)) => match ShapeKind::from_name(s) {
                Some(kind) => Some(kind == ShapeKind::Circle),
                None => {
                    self.problem(
                        Some(*line),
                        format!("key 'shape': {s:?} is not a shape; write \"rect\" or \"circle\""),
                    );
                    None
                }
            },
            None => Some(t.get("diameter").is_some() || t.get("radius").is_some()),
        };
        let mut ps = PanelSpec {
            shape: shape_text.map(|s| s.1),
            ..Default::default()
        };
        // The shape's dimensions; keys of the other shape are refused so a
        // forgotten line cannot silently change the panel.
        let mut shape_ok = false;
        let mut is_square = None;
        let mut placeholder = None;
        match is_circle {
            Some(false) => {
                let w = self.quantity(t, "width", length, true, units::parse_length);
                let h = self.quantity(t, "height", length, true, units::parse_length);
                for key in ["diameter", "radius"] {
                    if let Some(v) = t.get(key) {
                        let line = self.line(v.span().start);
                        self.problem(Some(line), format!("key '{key}' does not apply to a rectangle; remove it, or write shape = \"circle\""));
                    }
                }
                placeholder = Some(Shape::Rectangle {
                    width: Meters(1.0),
                    height: Meters(1.0),
                });
                if let (Some(w), Some(h)) = (w, h) {
                    // Tolerance: the same length written two ways (mm, m)
                    // differs by rounding only.
                    is_square = Some((w.2 .0 - h.2 .0).abs() <= 1e-9 * w.2 .0);
                    ps.width = Some(w.1);
                    ps.height = Some(h.1);
                    shape_ok = true;
                }
            }
            Some(true) => {
                for key in ["width", "height"] {
                    if let Some(v) = t.get(key) {
                        let line = self.line(v.span().start);
                        self.problem(Some(line), format!("key '{key}' does not apply to a circle; remove it, or write shape = \"rect\""));
                    }
                }
                placeholder = Some(Shape::Circle {
                    radius: Meters(1.0),
                });
                match (t.get("diameter").is_some(), t.get("radius").is_some()) {
                    (true, true) => {
                        let line = t.get("radius").map(|v| self.line(v.span().start));
                        self.problem(
                            line,
                            "key 'radius': give diameter or radius, not both".into(),
                        );
                    }
                    (false, false) => {
                        self.problem(t.line, "[panel] lacks key 'diameter' (or 'radius'): a circle needs it, e.g. diameter = \"14in\"".into());
                    }
                    (true, false) => {
                        if let Some(d) =
                            self.quantity(t, "diameter", length, true, units::parse_length)
                        {
                            ps.diameter = Some(d.1);
                            shape_ok = true;
                        }
                    }
                    (false, true) => {
                        if let Some(r) =
                            self.quantity(t, "radius", length, true, units::parse_length)
                        {
                            ps.radius = Some(r.1);
                            shape_ok = true;
                        }
                    }
                }
            }
            None => {}
        }

        // Areal density: given, or thickness × density.
        let sigma = match (
            t.get("areal-density").is_some(),
            t.get("thickness").is_some(),
            t.get("density").is_some(),
        ) {
            (true, false, false) => self
                .quantity(
                    t,
                    "areal-density",
                    "an areal density, e.g. \"40g/m2\"",
                    true,
                    units::parse_areal_density,
                )
                .map(|(_, text, v)| {
                    ps.areal_density = Some(text);
                    v
                }),
            (false, true, true) => {
                let th = self.quantity(t, "thickness", length, true, units::parse_length);
                let de = self.quantity(
                    t,
                    "density",
                    "a density, e.g. \"1390kg/m3\"",
                    true,
                    units::parse_density,
                );
                match (th, de) {
                    (Some(th), Some(de)) => {
                        ps.thickness = Some(th.1);
                        ps.density = Some(de.1);
                        Some(KgPerM2(th.2 .0 * de.2 .0))
                    }
                    _ => None,
                }
            }
            (false, false, false) => {
                self.problem(t.line, "[panel] lacks key 'areal-density' (or 'thickness' with 'density'): a tension needs it, e.g. areal-density = \"40g/m2\"".into());
                None
            }
            (true, _, _) => {
                let key = if t.get("thickness").is_some() {
                    "thickness"
                } else {
                    "density"
                };
                let line = t.get(key).map(|v| self.line(v.span().start));
                self.problem(
                    line,
                    format!("key '{key}': give areal-density, or thickness with density, not both"),
                );
                None
            }
            (false, true, false) => {
                self.problem(
                    t.line,
                    "[panel] lacks key 'density': thickness needs it, e.g. density = \"1390kg/m3\""
                        .into(),
                );
                None
            }
            (false, false, true) => {
                self.problem(
                    t.line,
                    "[panel] lacks key 'thickness': density needs it, e.g. thickness = \"0.19mm\""
                        .into(),
                );
                None
            }
        };
        let sigma_u = self.quantity(
            t,
            "areal-density-u",
            "the standard uncertainty (k = 1) of the areal density, e.g. \"0.8g/m2\"",
            true,
            units::parse_areal_density,
        );
        let density_u = match (sigma, &sigma_u) {
            (Some(s), Some((line, text, u))) if u.0 >= s.0 => {
                self.problem(
                    Some(*line),
                    format!("key 'areal-density-u': {text:?} is not smaller than the areal density {s}; give the standard uncertainty of the areal density"),
                );
                None
            }
            _ => sigma_u.map(|(_, _, u)| u),
        };

        // Points, checked against the shape's kind.
        for key in ["tap-at", "pickup-at"] {
            let what = if is_circle == Some(true) {
                "a fraction of the radius, optionally with an angle in degrees, e.g. \"0.6,45\""
            } else {
                "fractions of width and height, e.g. \"0.3,0.35\""
            };
            if let (Some((line, text)), Some(shape)) =
                (self.string(t, key, what, false), placeholder)
            {
                match panel::parse_point(key, &text, &shape) {
                    Ok(_) => {
                        if key == "tap-at" {
                            ps.tap_at = Some(text);
                        } else {
                            ps.pickup_at = Some(text);
                        }
                    }
                    Err(e) => {
                        self.problem(Some(line), format!("key '{key}': {}", quantity_problem(e)))
                    }
                }
            }
        }

        let model_what = "the fit model: \"isotropic\", \"biaxial\" (rectangle), \"air\" or \"stiff\" (rectangle)";
        let model = self
            .string(t, "model", model_what, true)
            .and_then(|(line, text)| {
                let m = FitModel::from_name(&text).map(|m| (m, SpecModel::from_fit_model(m)));
                match m {
                    Some((_, Some(m))) => Some((line, m)),
                    Some((_, None)) => {
                        self.problem(
                            Some(line),
                            format!("key 'model': {text:?} fits the panel's height, which a specification fixes; write \"isotropic\" (or \"biaxial\" for a mesh stretched unevenly along its sides)"),
                        );
                        None
                    }
                    None => {
                        self.problem(
                            Some(line),
                            format!("key 'model': {text:?} is not a model; write {model_what}"),
                        );
                        None
                    }
                }
            });
        // A model defined on rectangles only is refused on a circle here,
        // with the line, rather than on every recording.
        let model = match (model, is_circle) {
            (Some((line, m)), Some(true)) if m.fit_model().needs_rectangle() => {
                let why = match m {
                    SpecModel::Biaxial => "Tx and Ty act along the sides of a rectangle; for uneven tension on a circle use model \"isotropic\" or \"air\" with [limits] max-unevenness-percent",
                    _ => "the prestressed plate is solved for a simply supported rectangle",
                };
                self.problem(
                    Some(line),
                    format!(
                        "key 'model': {:?} does not apply to a circle: {why}",
                        m.name()
                    ),
                );
                None
            }
            (m, _) => m.map(|(_, m)| m),
        };

        let panel = if shape_ok && sigma.is_some() && self.problems.len() == ok_before {
            match Panel::from_spec(&ps) {
                Ok(p) => Some(p),
                Err(e) => {
                    self.problem(t.line, format!("[panel]: {e}"));
                    None
                }
            }
        } else {
            None
        };
        let calibration = self.load_calibration(t, panel.as_ref(), model);
        PanelPart {
            panel,
            spec: Some(ps),
            density_u,
            model,
            is_circle,
            is_square: if is_circle == Some(true) {
                Some(false)
            } else {
                is_square
            },
            calibration,
        }
    }

    /// `[panel] calibration`: a calibration file (relative paths from the
    /// specification's folder), read and checked with
    /// [`calibration::Calibration::parse`] and
    /// [`calibration::Calibration::check_panel`]; the model must be
    /// isotropic, since the factors already hold air loading and the
    /// supports (as for `tonus fit --calibration`). Returns `Some(None)`
    /// without the key, None when it is wrong.
    fn load_calibration(
        &mut self,
        t: &Section,
        panel: Option<&Panel>,
        model: Option<SpecModel>,
    ) -> Option<Option<(Arc<calibration::Loaded>, String)>> {
        let what = "the path of a calibration file made by tonus calibrate, e.g. \"head-14in.calibration.toml\" (relative to the specification's folder)";
        let Some((line, text)) = self.string(t, "calibration", what, false) else {
            return if t.get("calibration").is_some() {
                None
            } else {
                Some(None)
            };
        };
        if text.trim().is_empty() {
            self.problem(
                Some(line),
                format!("key 'calibration': must not be empty; {what}"),
            );
            return None;
        }
        let path = self.dir.join(text.trim());
        let bytes = match std::fs::read(&path) {
            Ok(b) => b,
            Err(e) => {
                self.problem(
                    Some(line),
                    format!(
                        "key 'calibration': cannot read {} ({e}); give {what}",
                        path.display()
                    ),
                );
                return None;
            }
        };
        let parsed = std::str::from_utf8(&bytes)
            .map_err(|_| "not UTF-8 text".to_string())
            .and_then(calibration::Calibration::parse);
        let cal = match parsed {
            Ok(c) => c,
            Err(reason) => {
                self.problem(
                    Some(line),
                    format!(
                        "key 'calibration': {} is not a usable calibration file: {reason}; make it again with tonus calibrate",
                        path.display()
                    ),
                );
                return None;
            }
        };
        if let Some(m) = model.filter(|m| *m != SpecModel::Isotropic) {
            self.problem(
                Some(line),
                format!(
                    "key 'calibration': a calibration replaces the model (its factors already hold air loading and the supports), so it goes with model = \"isotropic\", not {:?}",
                    m.name()
                ),
            );
            return None;
        }
        if let Some(p) = panel {
            if let Err(e) = cal.check_panel(p, &path) {
                self.problem(Some(line), format!("key 'calibration': {e}"));
                return None;
            }
        }
        Some(Some((
            Arc::new(calibration::Loaded {
                path,
                calibration: cal,
            }),
            sha256_hex(&bytes),
        )))
    }

    fn load_limits(&mut self, t: &Section, pp: &PanelPart) -> Option<Limits> {
        t.line?;
        let model = pp.model;
        let what = "a tension with its unit, e.g. \"20N/cm\"";
        let nominal = self.quantity(t, "nominal-tension", what, true, units::parse_tension);
        let lower = self.quantity(t, "lower-tension", what, true, units::parse_tension);
        let upper = self.quantity(t, "upper-tension", what, true, units::parse_tension);
        let mut ok = true;
        if let (Some(lo), Some(hi)) = (&lower, &upper) {
            if lo.2 .0 >= hi.2 .0 {
                self.problem(
                    Some(lo.0),
                    format!(
                        "key 'lower-tension': {:?} is not below upper-tension {:?} (line {}); the lower limit must be the smaller",
                        lo.1, hi.1, hi.0
                    ),
                );
                ok = false;
            } else if let Some(nom) = &nominal {
                if nom.2 .0 < lo.2 .0 || nom.2 .0 > hi.2 .0 {
                    self.problem(
                        Some(nom.0),
                        format!(
                            "key 'nominal-tension': {:?} is outside the limits {:?} .. {:?}; the nominal must lie between lower-tension and upper-tension",
                            nom.1, lo.1, hi.1
                        ),
                    );
                    ok = false;
                }
            }
        }
        let min_quality = match self.string(
            t,
            "min-quality",
            "\"sound\", \"fair\" or \"doubtful\"",
            false,
        ) {
            None if t.get("min-quality").is_none() => Some(DEFAULT_MIN_QUALITY),
            None => None,
            Some((line, text)) => match text.as_str() {
                "sound" => Some(Grade::Sound),
                "fair" => Some(Grade::Fair),
                "doubtful" => Some(Grade::Doubtful),
                "unfit" => {
                    self.problem(Some(line), "key 'min-quality': \"unfit\" is not allowed: an unfit fit has no tension to decide on; write \"sound\", \"fair\" or \"doubtful\"".into());
                    None
                }
                _ => {
                    self.problem(Some(line), format!("key 'min-quality': {text:?} is not a grade; write \"sound\", \"fair\" or \"doubtful\""));
                    None
                }
            },
        };
        let anisotropy = match t.get("max-anisotropy-percent") {
            None => Some(None),
            Some(_) => match self.positive_number(t, "max-anisotropy-percent", "5") {
                Some((line, a)) => match model {
                    Some(m) if !m.measures_anisotropy() => {
                        self.problem(
                            Some(line),
                            format!("key 'max-anisotropy-percent': model {:?} does not measure anisotropy; write model = \"biaxial\" in [panel] (rectangles), or remove the key", m.name()),
                        );
                        None
                    }
                    _ => Some(Some(a)),
                },
                None => None,
            },
        };
        let unevenness = match t.get("max-unevenness-percent") {
            None => Some(None),
            Some(_) => match self.positive_number(t, "max-unevenness-percent", "2") {
                Some((line, a)) => {
                    let shape_ok = pp.is_circle == Some(true) || pp.is_square == Some(true);
                    let shape_known = pp.is_circle.is_some()
                        && (pp.is_circle == Some(true) || pp.is_square.is_some());
                    let fault = if shape_known && !shape_ok {
                        Some("the unevenness is read from split mode pairs, which only a circle or a square panel has; for a rectangle write model = \"biaxial\" and max-anisotropy-percent".to_string())
                    } else {
                        match model {
                            Some(SpecModel::Biaxial) => Some("model \"biaxial\" measures the anisotropy itself; use max-anisotropy-percent".to_string()),
                            Some(SpecModel::Stiff) => Some("the split of a pair is derived for the membrane, not for the stiff plate; use model \"isotropic\"".to_string()),
                            _ => None,
                        }
                    };
                    match fault {
                        Some(why) => {
                            self.problem(
                                Some(line),
                                format!("key 'max-unevenness-percent': {why}"),
                            );
                            None
                        }
                        None => Some(Some(a)),
                    }
                }
                None => None,
            },
        };
        if !ok {
            return None;
        }
        Some(Limits {
            nominal_n_per_m: nominal?.2 .0,
            lower_n_per_m: lower?.2 .0,
            upper_n_per_m: upper?.2 .0,
            max_anisotropy_percent: anisotropy?,
            max_unevenness_percent: unevenness?,
            min_quality: min_quality?,
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::acceptance::decision::Decision;

    const GOOD: &str = r#"# test spec
[spec]
name = "screen-500x400-20Ncm"
version = "3"

[panel]
shape = "rect"
width = "500mm"
height = "400mm"
areal-density = "40g/m2"
areal-density-u = "0.8g/m2"
tap-at = "0.3,0.35"
model = "isotropic"

[limits]
nominal-tension = "20N/cm"
lower-tension = "18N/cm"
upper-tension = "22N/cm"
min-quality = "fair"

[decision]
rule = "guarded"
coverage-factor = 2
"#;

    fn load(text: &str) -> Result<Spec> {
        Spec::from_bytes(text.as_bytes(), Path::new("test.spec.toml"))
    }

    fn err(text: &str) -> String {
        match load(text) {
            Ok(_) => panic!("accepted:\n{text}"),
            Err(e) => e.to_string(),
        }
    }

    /// Replaces the line holding `from` with `to` (empty `to` deletes it).
    fn edit(from: &str, to: &str) -> String {
        let mut out = String::new();
        for line in GOOD.lines() {
            if line.starts_with(from) {
                if !to.is_empty() {
                    out.push_str(to);
                    out.push('\n');
                }
            } else {
                out.push_str(line);
                out.push('\n');
            }
        }
        out
    }

    /// The 1-based line of GOOD that starts with `prefix`.
    fn line_no(prefix: &str) -> usize {
        GOOD.lines().position(|l| l.starts_with(prefix)).unwrap() + 1
    }

    #[test]
    fn good_spec_loads() {
        let s = load(GOOD).unwrap();
        assert_eq!(s.name, "screen-500x400-20Ncm");
        assert_eq!(s.version, "3");
        // Tolerance: unit conversions are one multiplication; 1e-9 allows
        // for rounding only.
        assert!((s.limits.lower_n_per_m - 1800.0).abs() < 1e-9);
        assert!((s.limits.upper_n_per_m - 2200.0).abs() < 1e-9);
        assert!((s.limits.nominal_n_per_m - 2000.0).abs() < 1e-9);
        assert_eq!(s.limits.min_quality, Grade::Fair);
        assert_eq!(s.rule.rule, Rule::Guarded);
        assert!((s.rule.coverage_factor - 2.0).abs() < 1e-15);
        assert!((s.areal_density_u.0 - 0.8e-3).abs() < 1e-15);
        let p = s.panel();
        assert!((p.areal_density.unwrap().0 - 0.04).abs() < 1e-15);
        assert!(matches!(p.shape, Shape::Rectangle { width, height }
            if (width.0 - 0.5).abs() < 1e-12 && (height.0 - 0.4).abs() < 1e-12));
        assert!(p.tap.is_some());
        assert_eq!(s.hash, sha256_hex(GOOD.as_bytes()));
        assert_eq!(s.hash.len(), 64);
    }

    #[test]
    fn defaults_and_circle_with_thickness() {
        let text = r#"
[spec]
name = "head-14"
version = "1"
[panel]
diameter = "14in"
thickness = "0.19mm"
density = "1390kg/m3"
areal-density-u = "5g/m2"
model = "isotropic"
[limits]
nominal-tension = "3000N/m"
lower-tension = "2.8kN/m"
upper-tension = "3200N/m"
[decision]
rule = "simple"
"#;
        let s = load(text).unwrap();
        assert!(matches!(s.panel().shape, Shape::Circle { .. }));
        assert_eq!(s.limits.min_quality, DEFAULT_MIN_QUALITY);
        assert!((s.rule.coverage_factor - decision::DEFAULT_COVERAGE_FACTOR).abs() < 1e-15);
        assert_eq!(s.rule.rule, Rule::Simple);
    }

    #[test]
    fn wrong_unit_names_key_and_line() {
        let e = err(&edit("lower-tension", "lower-tension = \"12\""));
        let l = line_no("lower-tension");
        assert!(e.contains(&format!("line {l}: key 'lower-tension'")), "{e}");
        assert!(e.contains("\"12\"") && e.contains("write e.g."), "{e}");
        let e = err(&edit("width", "width = \"500kg\""));
        assert!(
            e.contains(&format!("line {}: key 'width'", line_no("width"))),
            "{e}"
        );
        let e = err(&edit("areal-density =", "areal-density = \"40g/m3\""));
        assert!(e.contains("key 'areal-density'"), "{e}");
    }

    #[test]
    fn unknown_and_missing_keys_name_key_and_line() {
        let e = err(&edit("width", "widht = \"500mm\""));
        let l = line_no("width");
        assert!(e.contains(&format!("line {l}: key 'widht'")), "{e}");
        assert!(e.contains("did you mean 'width'"), "{e}");
        // The missing width is reported at the [panel] header.
        assert!(
            e.contains(&format!(
                "line {}: [panel] lacks key 'width'",
                line_no("[panel]")
            )),
            "{e}"
        );

        let e = err(&edit("upper-tension", ""));
        assert!(
            e.contains(&format!(
                "line {}: [limits] lacks key 'upper-tension'",
                line_no("[limits]")
            )),
            "{e}"
        );
        let e = err(&edit("areal-density-u", ""));
        assert!(e.contains("lacks key 'areal-density-u'"), "{e}");
        let e = err(&edit("rule", ""));
        assert!(e.contains("[decision] lacks key 'rule'"), "{e}");
        let e = err(&edit("[decision]", "[decisions]"));
        assert!(
            e.contains(&format!(
                "line {}: 'decisions' is unknown",
                line_no("[decision]")
            )),
            "{e}"
        );
        assert!(e.contains("no [decision] table"), "{e}");
        let e = err(&edit("name", "nmae = \"x\""));
        assert!(
            e.contains("key 'nmae'") && e.contains("lacks key 'name'"),
            "{e}"
        );
    }

    #[test]
    fn limits_are_checked() {
        let e = err(&edit("lower-tension", "lower-tension = \"23N/cm\""));
        assert!(
            e.contains(&format!(
                "line {}: key 'lower-tension'",
                line_no("lower-tension")
            )),
            "{e}"
        );
        assert!(e.contains("not below upper-tension"), "{e}");
        let e = err(&edit("nominal-tension", "nominal-tension = \"25N/cm\""));
        assert!(
            e.contains(&format!(
                "line {}: key 'nominal-tension'",
                line_no("nominal-tension")
            )),
            "{e}"
        );
        assert!(e.contains("outside the limits"), "{e}");
        let e = err(&edit("min-quality", "min-quality = \"unfit\""));
        assert!(e.contains("key 'min-quality'"), "{e}");
        let e = err(&edit("min-quality", "min-quality = \"great\""));
        assert!(e.contains("not a grade"), "{e}");
        let e = err(&edit("min-quality", "max-anisotropy-percent = 5"));
        assert!(
            e.contains("key 'max-anisotropy-percent'") && e.contains("isotropic"),
            "{e}"
        );
    }

    #[test]
    fn types_and_values_are_checked() {
        let e = err(&edit("width", "width = 500"));
        assert!(e.contains("key 'width': must be a string"), "{e}");
        let e = err(&edit("coverage-factor", "coverage-factor = \"2\""));
        assert!(e.contains("key 'coverage-factor': must be a number"), "{e}");
        let e = err(&edit("coverage-factor", "coverage-factor = -1"));
        assert!(e.contains("key 'coverage-factor'"), "{e}");
        assert!(load(&edit("coverage-factor", "coverage-factor = 2.5")).is_ok());
        let e = err(&edit("rule", "rule = \"strict\""));
        assert!(
            e.contains(&format!("line {}: key 'rule'", line_no("rule"))),
            "{e}"
        );
        let e = err(&edit("model", "model = \"free-aspect\""));
        assert!(e.contains("key 'model'"), "{e}");
        let e = err(&edit("areal-density-u", "areal-density-u = \"50g/m2\""));
        assert!(e.contains("not smaller than the areal density"), "{e}");
        let e = err(&edit("tap-at", "tap-at = \"1.3,0.35\""));
        assert!(
            e.contains(&format!("line {}: key 'tap-at'", line_no("tap-at"))),
            "{e}"
        );
        let e = err(&edit("height", "diameter = \"400mm\""));
        assert!(
            e.contains("key 'diameter' does not apply to a rectangle"),
            "{e}"
        );
        let e = err(&edit("version", "version = \"  \""));
        assert!(e.contains("key 'version': must not be empty"), "{e}");
        let e = err(&edit("areal-density =", "thickness = \"0.1mm\""));
        assert!(e.contains("lacks key 'density'"), "{e}");
    }

    #[test]
    fn several_problems_are_reported_together_in_line_order() {
        let text = edit("width", "width = \"500\"").replace("\"18N/cm\"", "\"18\"");
        let e = err(&text);
        let a = e.find("key 'width'").unwrap();
        let b = e.find("key 'lower-tension'").unwrap();
        assert!(a < b && e.contains(" | "), "{e}");
    }

    #[test]
    fn bad_toml_gives_a_line() {
        let e = err("[spec]\nname = \"x\"\nversion = \n");
        assert!(e.contains("line 3: not valid TOML"), "{e}");
        let e = Spec::from_bytes(b"[spec]\nname = \"\xff\"\n", Path::new("x")).unwrap_err();
        assert!(e.to_string().contains("line 2: not UTF-8"), "{e}");
    }

    #[test]
    fn from_file_reads_and_hashes() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("a.spec.toml");
        std::fs::write(&p, GOOD).unwrap();
        let s = Spec::from_file(&p).unwrap();
        assert_eq!(s.hash, sha256_hex(GOOD.as_bytes()));
        assert_eq!(s.path, p);
        let e = Spec::from_file(&dir.path().join("missing.toml")).unwrap_err();
        assert!(matches!(e, TonusError::Io { .. }));
        std::fs::write(&p, edit("lower-tension", "lower-tension = \"12\"")).unwrap();
        let e = Spec::from_file(&p).unwrap_err().to_string();
        assert!(
            e.contains("a.spec.toml") && e.contains("key 'lower-tension'"),
            "{e}"
        );
    }

    #[test]
    fn areal_density_uncertainty_is_combined() {
        let s = load(GOOD).unwrap();
        // u_σ/σ = 0.8/40 = 2 %; T = 2000 N/m gives 40 N/m, with a fit
        // part of 30 N/m: √(30² + 40²) = 50 N/m. Tolerance: rounding only.
        let u = s.tension_uncertainty(&Estimate {
            value: 2000.0,
            standard_uncertainty: 30.0,
        });
        assert!((u - 50.0).abs() < 1e-9, "{u}");
        let i = DecisionInput {
            tension: Some(Estimate {
                value: 2000.0,
                standard_uncertainty: u,
            }),
            anisotropy_percent: None,
            unevenness_percent: None,
            unevenness_problem: None,
            grade: Grade::Sound,
            grade_reasons: vec![],
        };
        assert_eq!(
            decision::decide(&i, &s.limits, &s.rule).decision,
            Decision::Pass
        );
    }

    /// A 14 in head specification; `extra_panel` and `extra_limits` are
    /// appended to their tables.
    fn head(model: &str, extra_panel: &str, extra_limits: &str) -> String {
        format!(
            r#"[spec]
name = "head-14"
version = "1"
[panel]
diameter = "14in"
areal-density = "0.26kg/m2"
areal-density-u = "5g/m2"
tap-at = "0.6,30"
model = "{model}"
{extra_panel}
[limits]
nominal-tension = "3000N/m"
lower-tension = "2700N/m"
upper-tension = "3300N/m"
{extra_limits}
[decision]
rule = "guarded"
"#
        )
    }

    fn line_in(text: &str, prefix: &str) -> usize {
        text.lines().position(|l| l.starts_with(prefix)).unwrap() + 1
    }

    #[test]
    fn models_of_fit_are_accepted_by_name() {
        let s = load(&edit("model", "model = \"biaxial\"")).unwrap();
        assert_eq!(s.model, SpecModel::Biaxial);
        assert_eq!(s.model.fit_model(), FitModel::Biaxial);
        assert_eq!(s.model.name(), "biaxial");
        let s = load(&edit("model", "model = \"stiff\"")).unwrap();
        assert_eq!(s.model.fit_model(), FitModel::Stiff);
        // The aliases of `tonus fit --model` too.
        let s = load(&edit("model", "model = \"plate\"")).unwrap();
        assert_eq!(s.model, SpecModel::Stiff);
        let s = load(&head("air", "", "")).unwrap();
        assert_eq!(s.model, SpecModel::Air);
        assert_eq!(s.model.fit_model(), FitModel::AirLoaded);
        assert_eq!(
            load(&head("air-loaded", "", "")).unwrap().model,
            SpecModel::Air
        );
        let e = err(&edit("model", "model = \"elastic\""));
        assert!(
            e.contains(&format!("line {}: key 'model'", line_no("model")))
                && e.contains("\"biaxial\""),
            "{e}"
        );
    }

    #[test]
    fn rectangle_models_are_refused_on_a_circle_with_the_line() {
        for model in ["biaxial", "stiff"] {
            let text = head(model, "", "");
            let e = err(&text);
            assert!(
                e.contains(&format!(
                    "line {}: key 'model': \"{model}\" does not apply to a circle",
                    line_in(&text, "model")
                )),
                "{e}"
            );
        }
        let e = err(&head("biaxial", "", ""));
        assert!(e.contains("max-unevenness-percent"), "{e}");
    }

    #[test]
    fn anisotropy_limit_needs_the_biaxial_model() {
        let text = edit("model", "model = \"biaxial\"")
            .replace("min-quality = \"fair\"", "max-anisotropy-percent = 4.5");
        let s = load(&text).unwrap();
        assert_eq!(s.limits.max_anisotropy_percent, Some(4.5));
        for model in ["isotropic", "stiff"] {
            let text = edit("model", &format!("model = \"{model}\""))
                .replace("min-quality = \"fair\"", "max-anisotropy-percent = 5");
            let e = err(&text);
            assert!(
                e.contains(&format!(
                    "line {}: key 'max-anisotropy-percent': model \"{model}\" does not measure anisotropy",
                    line_in(&text, "max-anisotropy-percent")
                )),
                "{e}"
            );
        }
        let e = err(&head("air", "", "max-anisotropy-percent = 5"));
        assert!(e.contains("key 'max-anisotropy-percent'"), "{e}");
        let e = err(&edit("min-quality", "max-anisotropy-percent = \"5%\""));
        assert!(
            e.contains("key 'max-anisotropy-percent': must be a number"),
            "{e}"
        );
        let e = err(&edit("min-quality", "max-anisotropy-percent = 0"));
        assert!(e.contains("greater than zero"), "{e}");
    }

    #[test]
    fn unevenness_limit_applies_to_circles_and_squares() {
        for model in ["air", "isotropic"] {
            let s = load(&head(model, "", "max-unevenness-percent = 2")).unwrap();
            assert_eq!(s.limits.max_unevenness_percent, Some(2.0));
            assert!(s.unevenness_applies());
        }
        // A square screen, the same side written two ways.
        let square = edit("height", "height = \"0.5m\"")
            .replace("min-quality = \"fair\"", "max-unevenness-percent = 3");
        assert_eq!(
            load(&square).unwrap().limits.max_unevenness_percent,
            Some(3.0)
        );
        // Not a 500 × 400 mm rectangle: no pairs to split.
        let text = edit("min-quality", "max-unevenness-percent = 3");
        let e = err(&text);
        assert!(
            e.contains(&format!(
                "line {}: key 'max-unevenness-percent': the unevenness is read from split mode pairs",
                line_in(&text, "max-unevenness-percent")
            )) && e.contains("biaxial"),
            "{e}"
        );
        assert!(!load(GOOD).unwrap().unevenness_applies());
        // Nor with the models that do not give pairs.
        let e = err(&square.replace("model = \"isotropic\"", "model = \"biaxial\""));
        assert!(
            e.contains("key 'max-unevenness-percent'") && e.contains("max-anisotropy-percent"),
            "{e}"
        );
        let e = err(&square.replace("model = \"isotropic\"", "model = \"stiff\""));
        assert!(e.contains("key 'max-unevenness-percent'"), "{e}");
        let e = err(&head("air", "", "max-unevenness-percent = -2"));
        assert!(e.contains("key 'max-unevenness-percent'"), "{e}");
    }

    /// A calibration of the 14 in head at 3000 N/m with every mode 2 %
    /// below the ideal membrane, as `tonus calibrate` would write it.
    fn calibration_text(diameter_m: f64, sigma: f64) -> String {
        let shape = Shape::Circle {
            radius: Meters(diameter_m / 2.0),
        };
        let c = (3000.0f64 / sigma).sqrt();
        let modes: Vec<(u32, u32, f64)> = [(0, 1), (1, 1), (2, 1), (0, 2), (3, 1), (1, 2)]
            .iter()
            .map(|&(m, n)| (m, n, 0.98 * c * calibration::ideal_factor(&shape, m, n)))
            .collect();
        let refs = [calibration::Reference {
            file: PathBuf::from("ref.wav"),
            sha256: sha256_hex(b"ref"),
            modes,
        }];
        calibration::Calibration::from_references(shape, sigma, 3000.0, 30.0, &refs, "air")
            .unwrap()
            .to_toml()
    }

    #[test]
    fn calibration_is_loaded_relative_to_the_spec_and_checked() {
        let dir = tempfile::tempdir().unwrap();
        let d = dir.path();
        std::fs::create_dir(d.join("cal")).unwrap();
        let cal = calibration_text(14.0 * 0.0254, 0.26);
        std::fs::write(d.join("cal/head.calibration.toml"), &cal).unwrap();
        let spec_path = d.join("head.spec.toml");
        let write_and_load = |text: &str| {
            std::fs::write(&spec_path, text).unwrap();
            Spec::from_file(&spec_path)
        };
        let good = head(
            "isotropic",
            "calibration = \"cal/head.calibration.toml\"",
            "",
        );
        let s = write_and_load(&good).unwrap();
        assert_eq!(
            s.calibration_sha256.as_deref(),
            Some(sha256_hex(cal.as_bytes()).as_str())
        );
        let loaded = s.calibration.as_ref().unwrap();
        assert_eq!(loaded.path, d.join("cal/head.calibration.toml"));
        assert_eq!(loaded.calibration.modes.len(), 6);

        let cal_line = line_in(&good, "calibration");
        let expect = |text: &str, want: &str| {
            let e = write_and_load(text).unwrap_err().to_string();
            assert!(
                e.contains(&format!("line {cal_line}: key 'calibration'")) && e.contains(want),
                "{want}: {e}"
            );
        };
        // Missing file.
        expect(
            &head(
                "isotropic",
                "calibration = \"cal/none.calibration.toml\"",
                "",
            ),
            "cannot read",
        );
        // Broken file.
        std::fs::write(d.join("cal/broken.calibration.toml"), "schema = 3\n[").unwrap();
        expect(
            &head(
                "isotropic",
                "calibration = \"cal/broken.calibration.toml\"",
                "",
            ),
            "not a usable calibration file",
        );
        // Another head's calibration.
        std::fs::write(
            d.join("cal/13in.calibration.toml"),
            calibration_text(13.0 * 0.0254, 0.26),
        )
        .unwrap();
        expect(
            &head(
                "isotropic",
                "calibration = \"cal/13in.calibration.toml\"",
                "",
            ),
            "was made for a circle",
        );
        // A calibration replaces the air model.
        expect(
            &head("air", "calibration = \"cal/head.calibration.toml\"", ""),
            "model = \"isotropic\"",
        );
        expect(
            &head("isotropic", "calibration = 3", ""),
            "must be a string",
        );
    }

    #[test]
    fn calibrated_uncertainty_leaves_out_the_areal_density() {
        // 1 % from the reference, 0.5 % from the factors, 3 N/m from the
        // fit at 3000 N/m: √(3² + 30² + 15²) = √1134 N/m.
        let u = Spec::calibrated_tension_uncertainty(
            &Estimate {
                value: 3000.0,
                standard_uncertainty: 3.0,
            },
            &calibration::CalibrationTerm {
                u_rel_reference: 0.01,
                u_rel_factors: 0.005,
                modes: 6,
            },
        );
        // Tolerance: rounding only.
        assert!((u - 1134f64.sqrt()).abs() < 1e-9, "{u}");
    }

    /// A synthetic screen with Ty 5 % above Tx: the biaxial specification
    /// passes it with a 5.5 % limit and fails it with 4 %, the anisotropy
    /// entering the decision with its own uncertainty.
    #[test]
    fn biaxial_spec_decides_the_anisotropy_of_a_synthetic_screen() {
        use crate::fitting::pipeline::{measure, FitOptions};
        use crate::physics::synth::{synthesise, SynthConfig};
        use crate::signal::recording::Recording;
        let text = edit("model", "model = \"biaxial\"")
            .replace("min-quality = \"fair\"", "max-anisotropy-percent = 5.5");
        let s = load(&text).unwrap();
        let panel = s.panel();
        let mut cfg = SynthConfig::new(
            panel.shape,
            panel.areal_density.unwrap(),
            crate::base::units::NewtonsPerMeter(1950.0),
            panel.tap.unwrap(),
        );
        cfg.tension_y = Some(crate::base::units::NewtonsPerMeter(2050.0));
        let rec = Recording::from_samples(
            Path::new("biaxial.wav"),
            synthesise(&cfg).unwrap(),
            f64::from(cfg.sample_rate_hz),
        );
        let opts = FitOptions {
            model: s.model.fit_model(),
            ..FitOptions::default()
        };
        let m = measure(&rec, &panel, &opts).unwrap();
        let input = s.decision_input(&m);
        // 100·(1950 − 2050)/2000 = −5 %.
        let a = input.anisotropy_percent.unwrap();
        assert!((a.value + 5.0).abs() < 0.3, "{a:?}");
        assert!(a.standard_uncertainty > 0.0 && a.standard_uncertainty < 0.3);
        let v = s.decide(&m);
        assert_eq!(v.decision, Decision::Pass, "{:?}", v.reasons);
        assert_eq!(v.anisotropy.as_ref().unwrap().decision, "pass");
        let mut strict = s.clone();
        strict.limits.max_anisotropy_percent = Some(4.0);
        let v = strict.decide(&m);
        assert_eq!(v.decision, Decision::Fail, "{:?}", v.reasons);
        assert!(v.reasons.iter().any(|r| r.contains("exceeds 4 %")));
    }

    /// End to end: a synthetic tap of the specification's screen at
    /// 2000 N/m (the nominal) passes; the same recording measured as
    /// another panel is not measured under this specification.
    #[test]
    fn decides_on_a_synthetic_tap() {
        use crate::fitting::pipeline::{measure, FitOptions};
        use crate::physics::synth::{synthesise, SynthConfig};
        use crate::signal::recording::Recording;
        let s = load(GOOD).unwrap();
        let panel = s.panel();
        let cfg = SynthConfig::new(
            panel.shape,
            panel.areal_density.unwrap(),
            crate::base::units::NewtonsPerMeter(2000.0),
            panel.tap.unwrap(),
        );
        let rec = Recording::from_samples(
            Path::new("synthetic.wav"),
            synthesise(&cfg).unwrap(),
            f64::from(cfg.sample_rate_hz),
        );
        let m = measure(&rec, &panel, &FitOptions::default()).unwrap();
        let v = s.decide(&m);
        assert_eq!(v.decision, Decision::Pass, "{v:?}");
        // The areal density's 2 % dominates the combined uncertainty:
        // about 40 N/m against a fit part well under 1 N/m.
        let u = v.guard_band_n_per_m.unwrap() / s.rule.coverage_factor;
        assert!(u > 39.0 && u < 41.0, "{u}");

        let row = crate::acceptance::history::Row::from_decision(
            &crate::acceptance::history::RecordingContext {
                recording_sha256: sha256_hex(b"synthetic"),
                recording_path: "synthetic.wav".into(),
                station: None,
                operator: Some("test".into()),
            },
            &s,
            &m,
            &v,
            "{}".into(),
        );
        assert_eq!(row.decision, "pass");
        assert_eq!(row.spec_sha256, s.hash);
        assert!((row.tension_u_n_per_m.unwrap() - u).abs() < 1e-9);

        let mut other = m.clone();
        other.panel.areal_density = Some(KgPerM2(0.05));
        let v = s.decide(&other);
        let Decision::NotMeasured { reason } = &v.decision else {
            panic!("{v:?}")
        };
        assert!(reason.contains("specification"), "{reason}");
    }
}
