//! Calibration: per-mode correction factors against the ideal membrane,
//! from reference recordings of a membrane whose tension was measured
//! another way.
//!
//! Definition. For a reference recording at known tension T_ref on a
//! membrane of areal density σ, each matched mode (m, n) gives the ratio
//!
//! r(m,n) = f_measured / f_ideal,  f_ideal = g(m,n)·√(T_ref/σ),
//!
//! with g the ideal frequency factor of [`crate::physics::membrane`] (1/m). The
//! ratios of several reference recordings are averaged per mode. Air
//! loading, the supports of a frame and a shell all move each mode by a
//! nearly fixed factor, so a later recording of the same panel type at an
//! unknown tension T is fitted against the lines r(m,n)·g(m,n): ln c is
//! the mean of ln(f/(r·g)), T = σ·c². Then T = T_ref·(f/f_ref)² mode by
//! mode, so the result does not depend on σ or the geometry as long as
//! both are the ones of the calibration — which [`Calibration::check_panel`]
//! insists on.
//!
//! Uncertainty. The relative standard uncertainty of r has two parts:
//! - the reference tension's, u(T_ref)/(2·T_ref), common to all modes
//!   (r ∝ T_ref^(−1/2)); it passes to the fitted tension as
//!   u(T)/T = u(T_ref)/T_ref;
//! - the per-mode repeatability: s/√N over N reference recordings, with
//!   the frequency method's [`crate::fitting::fit::METHOD_CENTS`] in quadrature, or
//!   [`ONE_RECORDING_CENTS`] assumed when there is a single recording.
//!   These are independent between modes; for N_f fitted modes they pass
//!   to the tension as u(T)/T = 2·√(Σ u_i²)/N_f (ln T = 2 ln c and ln c is
//!   the mean of the modes' ln(f/(r·g))).
//!
//! Modes not in the calibration are not fitted: their correction is
//! unknown and the pattern (air loading lowers the low modes most) is not
//! smooth enough to extrapolate. They are placed for matching at a factor
//! interpolated in frequency between calibrated neighbours, so that they
//! keep their partials from being taken by other lines, and a warning
//! lists them.
//!
//! File format (TOML, schema `tonus.calibration`, version 1):
//!
//! ```toml
//! schema = "tonus.calibration"
//! version = 1
//! created = "2026-12-02T03:40:00.000Z"   # RFC 3339, UTC
//! tonus_version = "0.1.0"
//! label_model = "air"                      # model used to label the references
//!
//! [panel]
//! shape = "circle"                         # or "rectangle" (width_m, height_m)
//! diameter_m = 0.3556
//! areal_density_kg_per_m2 = 0.26
//!
//! [reference]
//! tension_n_per_m = 3000.0
//! tension_u_n_per_m = 30.0                 # standard uncertainty (k = 1)
//!
//! [[source]]
//! file = "ref-3000.wav"
//! sha256 = "…"
//! modes = 24
//!
//! [[mode]]
//! m = 0
//! n = 1
//! factor = 0.77100                          # r = f_measured / f_ideal
//! u_repeat = 0.00007                        # relative, per-mode part
//! u = 0.00387                               # absolute, k = 1, reference part included
//! recordings = 2
//! ```

use crate::base::error::{Result, TonusError};
use crate::base::estimate::CENTS_PER_LN;
use crate::fitting::fit::METHOD_CENTS;
use crate::physics::membrane::{circle_mode_frequency_hz, rect_mode_frequency_hz, ModeLine, Shape};
use crate::physics::panel::Panel;
use serde::Serialize;
use std::path::{Path, PathBuf};

/// Schema name written into and required in every calibration file.
pub const SCHEMA: &str = "tonus.calibration";
/// Schema version.
pub const VERSION: i64 = 1;
/// Per-mode frequency scatter assumed when only one reference recording
/// is given, cents: a tap-to-tap repeatability typical of hand taps (an
/// assumption, not a measured figure; give three or more references to
/// measure it instead).
pub const ONE_RECORDING_CENTS: f64 = 1.0;
/// Largest relative difference between the calibration's and the fitted
/// panel's dimensions, 0.1 %.
pub const GEOMETRY_REL_TOL: f64 = 1e-3;
/// Largest relative difference of the areal densities, 1 %.
pub const DENSITY_REL_TOL: f64 = 1e-2;

/// The correction factor of one mode.
#[derive(Debug, Clone, Serialize)]
pub struct ModeFactor {
    /// Label of the line (first mode).
    pub m: u32,
    /// Label of the line (first mode).
    pub n: u32,
    /// r = f_measured/f_ideal, averaged over the reference recordings.
    pub factor: f64,
    /// Relative standard uncertainty of r from repeatability (and the
    /// frequency method), independent between modes.
    pub u_repeat: f64,
    /// Standard uncertainty of r, reference tension included (absolute).
    pub u: f64,
    /// Reference recordings in which the mode was fitted.
    pub recordings: usize,
}

/// A reference recording.
#[derive(Debug, Clone, Serialize)]
pub struct Source {
    /// Path as given.
    pub file: String,
    /// SHA-256 of the file's bytes, hex.
    pub sha256: String,
    /// Modes it contributed.
    pub modes: usize,
}

/// A calibration.
#[derive(Debug, Clone, Serialize)]
pub struct Calibration {
    /// Outline the factors belong to.
    pub shape: Shape,
    /// Areal density used, kg/m².
    pub areal_density_kg_per_m2: f64,
    /// Known tension of the references, N/m.
    pub reference_tension_n_per_m: f64,
    /// Its standard uncertainty, N/m.
    pub reference_tension_u_n_per_m: f64,
    /// Factors, sorted by ideal frequency.
    pub modes: Vec<ModeFactor>,
    /// Reference recordings.
    pub sources: Vec<Source>,
    /// When it was made (RFC 3339).
    pub created: String,
    /// Version of tonus that made it.
    pub tonus_version: String,
    /// Model used to label the references.
    pub label_model: String,
}

/// A calibration read from a file, with the path for messages.
#[derive(Debug, Clone)]
pub struct Loaded {
    /// Where it was read from.
    pub path: PathBuf,
    /// The factors.
    pub calibration: Calibration,
}

/// What a fit records about the calibration it applied.
#[derive(Debug, Clone, Serialize)]
pub struct Applied {
    /// Calibration file.
    pub file: String,
    /// When it was made.
    pub created: String,
    /// Its reference tension, N/m.
    pub reference_tension_n_per_m: f64,
    /// Its standard uncertainty, N/m.
    pub reference_tension_u_n_per_m: f64,
    /// The budget's two parts (None without areal density or fit).
    pub term: Option<CalibrationTerm>,
    /// Matched modes without a factor, left out of the fit.
    pub not_calibrated: Vec<String>,
}

/// One reference recording's fitted modes: (m, n, measured Hz).
#[derive(Debug, Clone)]
pub struct Reference {
    /// Path.
    pub file: PathBuf,
    /// SHA-256 hex of its bytes.
    pub sha256: String,
    /// Fitted modes (not outliers, not crowded): (m, n, f Hz).
    pub modes: Vec<(u32, u32, f64)>,
}

/// Ideal frequency factor g(m,n), 1/m.
pub fn ideal_factor(shape: &Shape, m: u32, n: u32) -> f64 {
    match *shape {
        Shape::Rectangle { width, height } => rect_mode_frequency_hz(width.0, height.0, 1.0, m, n),
        Shape::Circle { radius } => circle_mode_frequency_hz(radius.0, 1.0, m, n),
    }
}

/// The budget's view of the calibration for the fitted modes.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct CalibrationTerm {
    /// u(T_ref)/T_ref: relative part of the tension from the reference.
    pub u_rel_reference: f64,
    /// 2·√(Σ u_i²)/N_f: relative part from the per-mode factors.
    pub u_rel_factors: f64,
    /// Modes fitted.
    pub modes: usize,
}

impl Calibration {
    /// Builds the factors from reference recordings.
    ///
    /// # Errors
    /// A non-positive tension or σ, or no fitted mode in any reference.
    pub fn from_references(
        shape: Shape,
        sigma: f64,
        tension: f64,
        tension_u: f64,
        refs: &[Reference],
        label_model: &str,
    ) -> Result<Calibration> {
        if !(tension > 0.0 && tension.is_finite()) {
            return Err(TonusError::OutOfRange {
                key: "--tension".into(),
                value: tension.to_string(),
                why: "the reference tension must be positive".into(),
            });
        }
        if !(tension_u >= 0.0 && tension_u.is_finite() && tension_u < tension) {
            return Err(TonusError::OutOfRange {
                key: "--tension-u".into(),
                value: tension_u.to_string(),
                why: "the standard uncertainty must be zero or positive and below the tension"
                    .into(),
            });
        }
        let c_ref = (tension / sigma).sqrt();
        let mut per_mode: std::collections::BTreeMap<(u32, u32), Vec<f64>> = Default::default();
        for r in refs {
            for &(m, n, f) in &r.modes {
                per_mode
                    .entry((m, n))
                    .or_default()
                    .push(f / (c_ref * ideal_factor(&shape, m, n)));
            }
        }
        if per_mode.is_empty() {
            return Err(TonusError::NoFit(
                "calibrate: no mode could be fitted in any reference recording; check the geometry and --model (air for a light film)".into(),
            ));
        }
        let method = METHOD_CENTS / CENTS_PER_LN;
        let u_ref_rel = 0.5 * tension_u / tension;
        let mut modes: Vec<ModeFactor> = per_mode
            .into_iter()
            .map(|((m, n), rs)| {
                let k = rs.len() as f64;
                let mean_ln = rs.iter().map(|r| r.ln()).sum::<f64>() / k;
                let u_repeat = if rs.len() >= 2 {
                    let s2 = rs.iter().map(|r| (r.ln() - mean_ln).powi(2)).sum::<f64>() / (k - 1.0);
                    (s2 / k + method * method).sqrt()
                } else {
                    (ONE_RECORDING_CENTS / CENTS_PER_LN).hypot(method)
                };
                let factor = mean_ln.exp();
                ModeFactor {
                    m,
                    n,
                    factor,
                    u_repeat,
                    u: factor * u_repeat.hypot(u_ref_rel),
                    recordings: rs.len(),
                }
            })
            .collect();
        modes.sort_by(|a, b| {
            ideal_factor(&shape, a.m, a.n).total_cmp(&ideal_factor(&shape, b.m, b.n))
        });
        Ok(Calibration {
            shape,
            areal_density_kg_per_m2: sigma,
            reference_tension_n_per_m: tension,
            reference_tension_u_n_per_m: tension_u,
            modes,
            sources: refs
                .iter()
                .map(|r| Source {
                    file: r.file.display().to_string(),
                    sha256: r.sha256.clone(),
                    modes: r.modes.len(),
                })
                .collect(),
            created: crate::base::time::UtcTime::now().to_rfc3339(),
            tonus_version: env!("CARGO_PKG_VERSION").into(),
            label_model: label_model.into(),
        })
    }

    /// The factor of a mode, if calibrated.
    pub fn factor(&self, m: u32, n: u32) -> Option<&ModeFactor> {
        self.modes.iter().find(|f| (f.m, f.n) == (m, n))
    }

    /// Refuses a panel whose geometry or areal density differs from the
    /// calibration's.
    ///
    /// # Errors
    /// [`TonusError::Panel`] naming both values.
    pub fn check_panel(&self, panel: &Panel, path: &Path) -> Result<()> {
        let close = |a: f64, b: f64, tol: f64| (a / b - 1.0).abs() <= tol;
        let geometry_ok = match (self.shape, panel.shape) {
            (
                Shape::Rectangle { width, height },
                Shape::Rectangle {
                    width: w,
                    height: h,
                },
            ) => close(width.0, w.0, GEOMETRY_REL_TOL) && close(height.0, h.0, GEOMETRY_REL_TOL),
            (Shape::Circle { radius }, Shape::Circle { radius: r }) => {
                close(radius.0, r.0, GEOMETRY_REL_TOL)
            }
            _ => false,
        };
        let describe = |s: &Shape| match *s {
            Shape::Rectangle { width, height } => {
                format!("rectangle {:.1} × {:.1} mm", width.0 * 1e3, height.0 * 1e3)
            }
            Shape::Circle { radius } => format!("circle ⌀ {:.1} mm", radius.0 * 2e3),
        };
        if !geometry_ok {
            return Err(TonusError::Panel(format!(
                "calibration {} was made for a {} but the panel is a {}; calibrate this geometry or give its dimensions",
                path.display(),
                describe(&self.shape),
                describe(&panel.shape)
            )));
        }
        match panel.areal_density {
            Some(s) if close(s.0, self.areal_density_kg_per_m2, DENSITY_REL_TOL) => Ok(()),
            Some(s) => Err(TonusError::Panel(format!(
                "calibration {} was made with areal density {} kg/m² but the panel has {} kg/m²; the correction factors depend on it, so calibrate this membrane",
                path.display(),
                self.areal_density_kg_per_m2,
                s.0
            ))),
            None => Err(TonusError::Panel(format!(
                "--calibration needs --areal-density (the calibration {} used {} kg/m²)",
                path.display(),
                self.areal_density_kg_per_m2
            ))),
        }
    }

    /// The lines with calibrated factors r·g, re-sorted, and the labels of
    /// the lines without a factor (placed at a factor interpolated in g
    /// between calibrated neighbours, or the nearest one's beyond the ends).
    pub fn apply(&self, lines: &[ModeLine]) -> (Vec<ModeLine>, Vec<(u32, u32)>) {
        let known: Vec<(f64, f64)> = self
            .modes
            .iter()
            .map(|f| (ideal_factor(&self.shape, f.m, f.n), f.factor))
            .collect();
        let interp = |g: f64| -> f64 {
            match known.iter().position(|&(gk, _)| gk >= g) {
                Some(0) => known[0].1,
                Some(i) => {
                    let (g0, r0) = known[i - 1];
                    let (g1, r1) = known[i];
                    r0 + (r1 - r0) * (g - g0) / (g1 - g0).max(1e-300)
                }
                None => known.last().map(|k| k.1).unwrap_or(1.0),
            }
        };
        let mut missing = Vec::new();
        let mut out: Vec<ModeLine> = lines
            .iter()
            .map(|l| {
                let (m, n) = l.labels[0];
                let r = match self.factor(m, n) {
                    Some(f) => f.factor,
                    None => {
                        missing.push((m, n));
                        interp(l.factor)
                    }
                };
                ModeLine {
                    factor: l.factor * r,
                    ..l.clone()
                }
            })
            .collect();
        out.sort_by(|a, b| a.factor.total_cmp(&b.factor));
        (out, missing)
    }

    /// The budget's two calibration parts for the fitted modes.
    pub fn term(&self, fitted: &[(u32, u32)]) -> CalibrationTerm {
        let sum: f64 = fitted
            .iter()
            .filter_map(|&(m, n)| self.factor(m, n))
            .map(|f| f.u_repeat * f.u_repeat)
            .sum();
        let k = fitted.len().max(1) as f64;
        CalibrationTerm {
            u_rel_reference: self.reference_tension_u_n_per_m / self.reference_tension_n_per_m,
            u_rel_factors: 2.0 * sum.sqrt() / k,
            modes: fitted.len(),
        }
    }

    /// The calibration file's text (the format above).
    pub fn to_toml(&self) -> String {
        use std::fmt::Write;
        let mut s = String::new();
        let _ = writeln!(s, "# tonus calibration: per-mode factors r = f_measured / f_ideal against the ideal membrane");
        let _ = writeln!(s, "schema = \"{SCHEMA}\"\nversion = {VERSION}");
        let _ = writeln!(s, "created = \"{}\"", self.created);
        let _ = writeln!(s, "tonus_version = \"{}\"", self.tonus_version);
        let _ = writeln!(s, "label_model = \"{}\"\n\n[panel]", self.label_model);
        match self.shape {
            Shape::Rectangle { width, height } => {
                let _ = writeln!(
                    s,
                    "shape = \"rectangle\"\nwidth_m = {:?}\nheight_m = {:?}",
                    width.0, height.0
                );
            }
            Shape::Circle { radius } => {
                let _ = writeln!(s, "shape = \"circle\"\ndiameter_m = {:?}", 2.0 * radius.0);
            }
        }
        let _ = writeln!(
            s,
            "areal_density_kg_per_m2 = {:?}\n\n[reference]\ntension_n_per_m = {:?}\ntension_u_n_per_m = {:?}",
            self.areal_density_kg_per_m2,
            self.reference_tension_n_per_m,
            self.reference_tension_u_n_per_m
        );
        for src in &self.sources {
            let _ = writeln!(
                s,
                "\n[[source]]\nfile = {}\nsha256 = \"{}\"\nmodes = {}",
                toml::Value::String(src.file.clone()),
                src.sha256,
                src.modes
            );
        }
        for f in &self.modes {
            let _ = writeln!(
                s,
                "\n[[mode]]\nm = {}\nn = {}\nfactor = {:?}\nu_repeat = {:?}\nu = {:?}\nrecordings = {}",
                f.m, f.n, f.factor, f.u_repeat, f.u, f.recordings
            );
        }
        s
    }

    /// Reads and checks a calibration file.
    ///
    /// # Errors
    /// Unreadable file, invalid TOML, wrong schema or version, a missing or
    /// malformed key, a non-positive factor.
    pub fn from_file(path: &Path) -> Result<Calibration> {
        let text = std::fs::read_to_string(path).map_err(|e| TonusError::Io {
            path: path.to_path_buf(),
            reason: e.to_string(),
        })?;
        Self::parse(&text).map_err(|reason| TonusError::ConfigFile {
            path: path.to_path_buf(),
            reason: format!("{reason}; make the file again with tonus calibrate"),
        })
    }

    /// Parses the text of a calibration file; Err with the reason.
    pub fn parse(text: &str) -> std::result::Result<Calibration, String> {
        let t: toml::Table = text
            .parse()
            .map_err(|e: toml::de::Error| format!("not valid TOML: {}", e.message()))?;
        let schema = get_str(&t, "schema")?;
        if schema != SCHEMA {
            return Err(format!("schema is '{schema}', expected '{SCHEMA}'"));
        }
        match t.get("version") {
            Some(v) if v.as_integer() == Some(VERSION) => {}
            other => {
                let found = other.map_or_else(|| "missing".to_string(), |v| v.to_string());
                return Err(format!(
                    "version {found} is not supported (expected {VERSION})"
                ));
            }
        }
        let panel = table(&t, "panel")?;
        let reference = table(&t, "reference")?;
        let tension = positive(reference, "tension_n_per_m")?;
        let tension_u = num(reference, "tension_u_n_per_m")?;
        if tension_u < 0.0 {
            return Err("'tension_u_n_per_m' must not be negative".into());
        }
        Ok(Calibration {
            shape: parse_shape(panel)?,
            areal_density_kg_per_m2: positive(panel, "areal_density_kg_per_m2")?,
            reference_tension_n_per_m: tension,
            reference_tension_u_n_per_m: tension_u,
            modes: parse_modes(&t)?,
            sources: parse_sources(&t)?,
            created: get_str(&t, "created")?,
            tonus_version: get_str(&t, "tonus_version").unwrap_or_default(),
            label_model: get_str(&t, "label_model").unwrap_or_else(|_| "isotropic".into()),
        })
    }
}

type Parsed<T> = std::result::Result<T, String>;

fn get_str(tab: &toml::Table, k: &str) -> Parsed<String> {
    tab.get(k)
        .and_then(|v| v.as_str())
        .map(str::to_string)
        .ok_or_else(|| format!("missing text key '{k}'"))
}

fn num(tab: &toml::Table, k: &str) -> Parsed<f64> {
    let v = match tab.get(k) {
        Some(toml::Value::Float(x)) => *x,
        Some(toml::Value::Integer(i)) => *i as f64,
        _ => return Err(format!("missing number '{k}'")),
    };
    if v.is_finite() {
        Ok(v)
    } else {
        Err(format!("'{k}' is not a finite number"))
    }
}

fn positive(tab: &toml::Table, k: &str) -> Parsed<f64> {
    let v = num(tab, k)?;
    if v > 0.0 {
        Ok(v)
    } else {
        Err(format!("'{k}' must be positive, found {v}"))
    }
}

fn table<'a>(t: &'a toml::Table, k: &str) -> Parsed<&'a toml::Table> {
    t.get(k)
        .and_then(|v| v.as_table())
        .ok_or_else(|| format!("missing table [{k}]"))
}

fn tables<'a>(t: &'a toml::Table, k: &str) -> Vec<&'a toml::Table> {
    t.get(k)
        .and_then(|v| v.as_array())
        .map(|a| a.iter().filter_map(|v| v.as_table()).collect())
        .unwrap_or_default()
}

fn parse_shape(panel: &toml::Table) -> Parsed<Shape> {
    match get_str(panel, "shape")?.as_str() {
        "circle" => Ok(Shape::Circle {
            radius: crate::base::units::Meters(positive(panel, "diameter_m")? / 2.0),
        }),
        "rectangle" => Ok(Shape::Rectangle {
            width: crate::base::units::Meters(positive(panel, "width_m")?),
            height: crate::base::units::Meters(positive(panel, "height_m")?),
        }),
        other => Err(format!(
            "panel shape '{other}' is neither circle nor rectangle"
        )),
    }
}

fn parse_modes(t: &toml::Table) -> Parsed<Vec<ModeFactor>> {
    let mut modes = Vec::new();
    for (i, m) in tables(t, "mode").into_iter().enumerate() {
        let int = |k: &str| -> Parsed<u32> {
            m.get(k)
                .and_then(|v| v.as_integer())
                .and_then(|v| u32::try_from(v).ok())
                .ok_or_else(|| format!("mode entry {} lacks a whole number '{k}'", i + 1))
        };
        let (mm, nn) = (int("m")?, int("n")?);
        if nn == 0 {
            return Err(format!("mode entry {}: n counts from 1", i + 1));
        }
        modes.push(ModeFactor {
            m: mm,
            n: nn,
            factor: positive(m, "factor").map_err(|e| format!("mode ({mm},{nn}): {e}"))?,
            u_repeat: num(m, "u_repeat").map_err(|e| format!("mode ({mm},{nn}): {e}"))?,
            u: num(m, "u").map_err(|e| format!("mode ({mm},{nn}): {e}"))?,
            recordings: int("recordings")? as usize,
        });
    }
    if modes.is_empty() {
        return Err("no [[mode]] entries".into());
    }
    Ok(modes)
}

fn parse_sources(t: &toml::Table) -> Parsed<Vec<Source>> {
    tables(t, "source")
        .into_iter()
        .map(|s| -> Parsed<Source> {
            Ok(Source {
                file: get_str(s, "file")?,
                sha256: get_str(s, "sha256")?,
                modes: s
                    .get("modes")
                    .and_then(|v| v.as_integer())
                    .unwrap_or(0)
                    .max(0) as usize,
            })
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::base::units::Meters;

    fn head() -> Shape {
        Shape::Circle {
            radius: Meters(0.1778),
        }
    }

    fn reference(tension: f64, shift: &[f64]) -> Reference {
        let c = (tension / 0.26f64).sqrt();
        let labels = [(0, 1), (1, 1), (2, 1), (0, 2), (3, 1)];
        Reference {
            file: "ref.wav".into(),
            sha256: "00".into(),
            modes: labels
                .iter()
                .zip(shift)
                .map(|(&(m, n), s)| (m, n, c * ideal_factor(&head(), m, n) * s))
                .collect(),
        }
    }

    #[test]
    fn factors_and_their_uncertainty() {
        let shift = [0.77, 0.85, 0.88, 0.9, 0.91];
        let refs = [reference(3000.0, &shift), reference(3000.0, &shift)];
        let cal = Calibration::from_references(head(), 0.26, 3000.0, 30.0, &refs, "air").unwrap();
        assert_eq!(cal.modes.len(), 5);
        let f = cal.factor(0, 1).unwrap();
        assert!((f.factor - 0.77).abs() < 1e-12);
        // Two identical references: repeatability 0, the method's 0.15
        // cents remain; the reference adds 0.5 % (half of 1 %).
        let method = METHOD_CENTS / CENTS_PER_LN;
        assert!((f.u_repeat - method).abs() < 1e-15);
        assert!((f.u / f.factor - method.hypot(0.005)).abs() < 1e-12);
        let t = cal.term(&[(0, 1), (1, 1)]);
        assert!((t.u_rel_reference - 0.01).abs() < 1e-15);
        assert!((t.u_rel_factors - 2.0 * (2.0f64).sqrt() * method / 2.0).abs() < 1e-15);
    }

    #[test]
    fn file_round_trip_and_bad_files() {
        let cal = Calibration::from_references(
            head(),
            0.26,
            3000.0,
            30.0,
            &[reference(3000.0, &[0.77, 0.85, 0.88, 0.9, 0.91])],
            "air",
        )
        .unwrap();
        let text = cal.to_toml();
        let back = Calibration::parse(&text).unwrap();
        assert_eq!(back.modes.len(), 5);
        for (a, b) in cal.modes.iter().zip(&back.modes) {
            // {:?} writes the shortest text that reads back exactly.
            assert_eq!(a.factor, b.factor);
            assert_eq!(a.u, b.u);
        }
        assert!(
            matches!(back.shape, Shape::Circle { radius } if (radius.0 - 0.1778).abs() < 1e-15)
        );
        let wrong = text.replace("tonus.calibration", "tonus.other");
        assert!(Calibration::parse(&wrong).unwrap_err().contains("schema"));
        let wrong = text.replace("version = 1", "version = 7");
        assert!(Calibration::parse(&wrong).unwrap_err().contains("version"));
        let wrong = text.replacen("factor = 0.77", "factor = -0.77", 1);
        assert!(Calibration::parse(&wrong).unwrap_err().contains("positive"));
    }

    #[test]
    fn other_geometry_is_refused() {
        let cal = Calibration::from_references(
            head(),
            0.26,
            3000.0,
            30.0,
            &[reference(3000.0, &[0.77, 0.85, 0.88, 0.9, 0.91])],
            "air",
        )
        .unwrap();
        let spec = crate::physics::panel::PanelSpec {
            diameter: Some("13in".into()),
            areal_density: Some("0.26kg/m2".into()),
            ..Default::default()
        };
        let p = Panel::from_spec(&spec).unwrap();
        let e = cal
            .check_panel(&p, Path::new("c.toml"))
            .unwrap_err()
            .to_string();
        assert!(e.contains("⌀ 355.6 mm") && e.contains("⌀ 330.2 mm"), "{e}");
        let spec = crate::physics::panel::PanelSpec {
            diameter: Some("14in".into()),
            areal_density: Some("0.3kg/m2".into()),
            ..Default::default()
        };
        let p = Panel::from_spec(&spec).unwrap();
        assert!(cal
            .check_panel(&p, Path::new("c.toml"))
            .unwrap_err()
            .to_string()
            .contains("areal density"));
    }
}
