//! The membrane being measured: outline, areal density, tap and pickup
//! points — from command-line values or a panel file (TOML).
//!
//! A panel file holds the same keys as the command-line flags, all values
//! as strings with units:
//!
//! ```toml
//! shape = "rect"            # or "circle"
//! width = "400mm"
//! height = "300mm"
//! areal-density = "0.26kg/m2"   # or thickness + density
//! tap-at = "0.31,0.27"          # fractions of width, height
//! pickup-at = "0.5,0.5"
//! ```
//! Flags given on the command line override the file.

use crate::base::error::{Result, TonusError};
use crate::base::units::{self, KgPerM2, Meters};
use crate::physics::membrane::{Point, Shape};
use serde::Serialize;
use std::path::Path;

/// Panel values as text, before parsing (from flags or a file).
#[derive(Debug, Clone, Default)]
pub struct PanelSpec {
    /// "rect"/"rectangle" or "circle".
    pub shape: Option<String>,
    /// Width (x), rectangle.
    pub width: Option<String>,
    /// Height (y), rectangle.
    pub height: Option<String>,
    /// Diameter, circle.
    pub diameter: Option<String>,
    /// Radius, circle.
    pub radius: Option<String>,
    /// Areal density.
    pub areal_density: Option<String>,
    /// Film thickness (with density, instead of areal density).
    pub thickness: Option<String>,
    /// Material density (with thickness).
    pub density: Option<String>,
    /// Tap point.
    pub tap_at: Option<String>,
    /// Pickup point.
    pub pickup_at: Option<String>,
    /// Standard uncertainty of the areal density.
    pub areal_density_u: Option<String>,
    /// Standard uncertainty of each dimension.
    pub size_u: Option<String>,
    /// Fit model to use for this panel (isotropic, free-aspect, air).
    pub model: Option<String>,
    /// Standard uncertainty of the thickness (for Young's modulus).
    pub thickness_u: Option<String>,
    /// Poisson's ratio ν (for Young's modulus from D).
    pub poisson_ratio: Option<String>,
    /// Its standard uncertainty.
    pub poisson_ratio_u: Option<String>,
}

impl PanelSpec {
    /// Values of `self` where set, else of `base`.
    pub fn over(self, base: PanelSpec) -> PanelSpec {
        PanelSpec {
            shape: self.shape.or(base.shape),
            width: self.width.or(base.width),
            height: self.height.or(base.height),
            diameter: self.diameter.or(base.diameter),
            radius: self.radius.or(base.radius),
            areal_density: self.areal_density.or(base.areal_density),
            thickness: self.thickness.or(base.thickness),
            density: self.density.or(base.density),
            tap_at: self.tap_at.or(base.tap_at),
            pickup_at: self.pickup_at.or(base.pickup_at),
            areal_density_u: self.areal_density_u.or(base.areal_density_u),
            size_u: self.size_u.or(base.size_u),
            model: self.model.or(base.model),
            thickness_u: self.thickness_u.or(base.thickness_u),
            poisson_ratio: self.poisson_ratio.or(base.poisson_ratio),
            poisson_ratio_u: self.poisson_ratio_u.or(base.poisson_ratio_u),
        }
    }

    /// Reads a panel file.
    ///
    /// # Errors
    /// Unreadable file, invalid TOML, unknown key, a value that is not a string.
    pub fn from_file(path: &Path) -> Result<PanelSpec> {
        let text = std::fs::read_to_string(path).map_err(|e| TonusError::Io {
            path: path.to_path_buf(),
            reason: e.to_string(),
        })?;
        let table: toml::Table =
            text.parse()
                .map_err(|e: toml::de::Error| TonusError::ConfigFile {
                    path: path.to_path_buf(),
                    reason: format!("not valid TOML: {}", e.message()),
                })?;
        let mut spec = PanelSpec::default();
        for (key, value) in &table {
            let text = match value {
                toml::Value::String(s) => s.clone(),
                other => {
                    return Err(TonusError::ConfigFile {
                        path: path.to_path_buf(),
                        reason: format!(
                        "key '{key}' must be a string with its unit, e.g. \"400mm\"; found {other}"
                    ),
                    })
                }
            };
            let slot = match key.as_str() {
                "shape" => &mut spec.shape,
                "width" => &mut spec.width,
                "height" => &mut spec.height,
                "diameter" => &mut spec.diameter,
                "radius" => &mut spec.radius,
                "areal-density" | "areal_density" => &mut spec.areal_density,
                "thickness" => &mut spec.thickness,
                "density" => &mut spec.density,
                "tap-at" | "tap_at" => &mut spec.tap_at,
                "pickup-at" | "pickup_at" => &mut spec.pickup_at,
                "areal-density-u" | "areal_density_u" => &mut spec.areal_density_u,
                "size-u" | "size_u" => &mut spec.size_u,
                "model" => &mut spec.model,
                "thickness-u" | "thickness_u" => &mut spec.thickness_u,
                "poisson-ratio" | "poisson_ratio" => &mut spec.poisson_ratio,
                "poisson-ratio-u" | "poisson_ratio_u" => &mut spec.poisson_ratio_u,
                "name" | "note" => continue,
                _ => {
                    return Err(TonusError::ConfigFile {
                        path: path.to_path_buf(),
                        reason: format!(
                            "unknown key '{key}'; known keys: shape, width, height, diameter, radius, areal-density, areal-density-u, thickness, thickness-u, density, poisson-ratio, poisson-ratio-u, size-u, tap-at, pickup-at, model, name, note"
                        ),
                    })
                }
            };
            *slot = Some(text);
        }
        Ok(spec)
    }
}

/// The kind of a panel's shape, as named in flags, panel files and
/// specifications.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ShapeKind {
    Rectangle,
    Circle,
}

impl ShapeKind {
    /// The one reader of shape names: `rect`, `rectangle`, `rectangular`
    /// or `circle`, `round`, `circular`, in any case; `None` for anything
    /// else.
    pub fn from_name(name: &str) -> Option<ShapeKind> {
        match name.to_lowercase().as_str() {
            "rect" | "rectangle" | "rectangular" => Some(ShapeKind::Rectangle),
            "circle" | "round" | "circular" => Some(ShapeKind::Circle),
            _ => None,
        }
    }
}

/// A parsed, checked panel.
#[derive(Debug, Clone, Serialize)]
pub struct Panel {
    /// Outline.
    pub shape: Shape,
    /// Areal density σ, if known.
    pub areal_density: Option<KgPerM2>,
    /// Tap point, if known.
    pub tap: Option<Point>,
    /// Pickup point, if known.
    pub pickup: Option<Point>,
    /// Standard uncertainty of σ, if given.
    pub areal_density_u: Option<KgPerM2>,
    /// Standard uncertainty of each dimension, if given.
    pub size_u: Option<Meters>,
    /// Thickness and Poisson's ratio, when both are given (Young's modulus
    /// from the plate model's D).
    pub plate_material: Option<PlateMaterial>,
}

/// What Young's modulus E = 12·D·(1 − ν²)/h³ needs besides D.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct PlateMaterial {
    /// Thickness h, m.
    pub thickness_m: f64,
    /// Its standard uncertainty, m (0 when not given).
    pub thickness_u_m: f64,
    /// Poisson's ratio ν.
    pub poisson_ratio: f64,
    /// Its standard uncertainty (0 when not given).
    pub poisson_ratio_u: f64,
}

impl Panel {
    /// Parses and checks a specification.
    ///
    /// # Errors
    /// Missing or contradictory dimensions, malformed quantities, points
    /// outside the membrane.
    pub fn from_spec(spec: &PanelSpec) -> Result<Panel> {
        let shape_text = spec.shape.clone().unwrap_or_else(|| {
            if spec.diameter.is_some() || spec.radius.is_some() {
                "circle".into()
            } else {
                "rect".into()
            }
        });
        let shape = match ShapeKind::from_name(&shape_text) {
            Some(ShapeKind::Rectangle) => {
                let w = spec.width.as_deref().ok_or_else(|| {
                    TonusError::Panel("a rectangle needs --width (e.g. --width 400mm)".into())
                })?;
                let h = spec.height.as_deref().ok_or_else(|| {
                    TonusError::Panel("a rectangle needs --height (e.g. --height 300mm)".into())
                })?;
                Shape::Rectangle {
                    width: units::parse_length("--width", w)?,
                    height: units::parse_length("--height", h)?,
                }
            }
            Some(ShapeKind::Circle) => {
                let radius = match (spec.diameter.as_deref(), spec.radius.as_deref()) {
                    (Some(d), None) => Meters(units::parse_length("--diameter", d)?.0 / 2.0),
                    (None, Some(r)) => units::parse_length("--radius", r)?,
                    (Some(_), Some(_)) => {
                        return Err(TonusError::Panel(
                            "give --diameter or --radius, not both".into(),
                        ))
                    }
                    (None, None) => {
                        return Err(TonusError::Panel(
                            "a circle needs --diameter (e.g. --diameter 14in)".into(),
                        ))
                    }
                };
                Shape::Circle { radius }
            }
            None => {
                return Err(TonusError::BadQuantity {
                    key: "--shape".into(),
                    value: shape_text.to_lowercase(),
                    expected: "rect or circle".into(),
                    example: "rect".into(),
                })
            }
        };
        let areal_density = match (
            spec.areal_density.as_deref(),
            spec.thickness.as_deref(),
            spec.density.as_deref(),
        ) {
            // A thickness beside the areal density serves Young's modulus.
            (Some(a), _, None) => Some(units::parse_areal_density("--areal-density", a)?),
            (None, Some(t), Some(d)) => {
                let t = units::parse_length("--thickness", t)?;
                let d = units::parse_density("--density", d)?;
                Some(KgPerM2(t.0 * d.0))
            }
            (None, None, None) => None,
            (Some(_), _, _) => {
                return Err(TonusError::Panel(
                    "give --areal-density or --thickness with --density, not both".into(),
                ))
            }
            (None, Some(_), None) if spec.poisson_ratio.is_some() => None,
            (None, Some(_), None) => {
                return Err(TonusError::Panel(
                    "--thickness needs --density (e.g. --density 1390kg/m3)".into(),
                ))
            }
            (None, None, Some(_)) => {
                return Err(TonusError::Panel(
                    "--density needs --thickness (e.g. --thickness 0.19mm)".into(),
                ))
            }
        };
        let tap = spec
            .tap_at
            .as_deref()
            .map(|t| parse_point("--tap-at", t, &shape))
            .transpose()?;
        let pickup = spec
            .pickup_at
            .as_deref()
            .map(|t| parse_point("--pickup-at", t, &shape))
            .transpose()?;
        let areal_density_u = spec
            .areal_density_u
            .as_deref()
            .map(|t| units::parse_areal_density("--areal-density-u", t))
            .transpose()?;
        let size_u = spec
            .size_u
            .as_deref()
            .map(|t| units::parse_length("--size-u", t))
            .transpose()?;
        let plate_material = plate_material(spec)?;
        Ok(Panel {
            shape,
            areal_density,
            tap,
            pickup,
            areal_density_u,
            size_u,
            plate_material,
        })
    }

    /// A one-line description, e.g. "rectangle 400 × 300 mm".
    pub fn describe(&self) -> String {
        match self.shape {
            Shape::Rectangle { width, height } => {
                format!("rectangle {:.0} × {:.0} mm", width.0 * 1e3, height.0 * 1e3)
            }
            Shape::Circle { radius } => format!("circle ⌀ {:.0} mm", radius.0 * 2e3),
        }
    }
}

/// Thickness and Poisson's ratio with their uncertainties, checked:
/// −1 < ν < 0.5 (the range a stable isotropic solid allows), u ≥ 0.
fn plate_material(spec: &PanelSpec) -> Result<Option<PlateMaterial>> {
    let nu = |key: &str, text: &str| -> Result<f64> {
        text.trim()
            .parse::<f64>()
            .map_err(|_| TonusError::BadQuantity {
                key: key.into(),
                value: text.into(),
                expected: "a plain number".into(),
                example: "0.38".into(),
            })
    };
    let (h, p) =
        match (spec.thickness.as_deref(), spec.poisson_ratio.as_deref()) {
            (Some(h), Some(p)) => (
                units::parse_length("--thickness", h)?.0,
                nu("--poisson-ratio", p)?,
            ),
            (None, Some(_)) => return Err(TonusError::Panel(
                "--poisson-ratio needs --thickness for Young's modulus (e.g. --thickness 0.19mm)"
                    .into(),
            )),
            _ => {
                if spec.thickness_u.is_some() && spec.thickness.is_none() {
                    return Err(TonusError::Panel("--thickness-u needs --thickness".into()));
                }
                return Ok(None);
            }
        };
    if !(p > -1.0 && p < 0.5) {
        return Err(TonusError::OutOfRange {
            key: "--poisson-ratio".into(),
            value: p.to_string(),
            why: "Poisson's ratio of an isotropic solid lies between −1 and 0.5 (films 0.3–0.45)"
                .into(),
        });
    }
    let h_u = spec
        .thickness_u
        .as_deref()
        .map(|t| units::parse_length("--thickness-u", t))
        .transpose()?
        .map(|m| m.0)
        .unwrap_or(0.0);
    let p_u = match spec.poisson_ratio_u.as_deref() {
        Some(t) => {
            let v = nu("--poisson-ratio-u", t)?;
            if !(0.0..0.5).contains(&v) {
                return Err(TonusError::OutOfRange {
                    key: "--poisson-ratio-u".into(),
                    value: t.into(),
                    why: "a standard uncertainty of ν lies between 0 and 0.5".into(),
                });
            }
            v
        }
        None => 0.0,
    };
    Ok(Some(PlateMaterial {
        thickness_m: h,
        thickness_u_m: h_u,
        poisson_ratio: p,
        poisson_ratio_u: p_u,
    }))
}

/// Parses "x,y" (rectangle, fractions of width and height) or "r" / "r,θ"
/// (circle, fraction of radius and degrees).
pub fn parse_point(key: &str, text: &str, shape: &Shape) -> Result<Point> {
    let bad = |why: &str| TonusError::BadQuantity {
        key: key.into(),
        value: text.into(),
        expected: why.into(),
        example: match shape {
            Shape::Rectangle { .. } => "0.31,0.27".into(),
            Shape::Circle { .. } => "0.6,45".into(),
        },
    };
    let parts: Vec<&str> = text.split(',').map(str::trim).collect();
    let nums: Vec<f64> = parts
        .iter()
        .map(|p| p.parse::<f64>())
        .collect::<std::result::Result<_, _>>()
        .map_err(|_| bad("numbers separated by a comma"))?;
    match shape {
        Shape::Rectangle { .. } => {
            if nums.len() != 2 || nums.iter().any(|v| !(0.0..=1.0).contains(v)) {
                return Err(bad("two fractions of width and height, each 0..1"));
            }
            Ok(Point {
                u: nums[0],
                v: Some(nums[1]),
            })
        }
        Shape::Circle { .. } => {
            if nums.is_empty() || nums.len() > 2 || !(0.0..=1.0).contains(&nums[0]) {
                return Err(bad(
                    "a fraction of the radius 0..1, optionally an angle in degrees",
                ));
            }
            Ok(Point {
                u: nums[0],
                v: nums.get(1).copied(),
            })
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn thickness_times_density_gives_areal_density() {
        let spec = PanelSpec {
            diameter: Some("14in".into()),
            thickness: Some("0.19mm".into()),
            density: Some("1390kg/m3".into()),
            ..Default::default()
        };
        let p = Panel::from_spec(&spec).unwrap();
        assert!((p.areal_density.unwrap().0 - 0.19e-3 * 1390.0).abs() < 1e-12);
        assert!(matches!(p.shape, Shape::Circle { radius } if (radius.0 - 0.1778).abs() < 1e-12));
    }

    #[test]
    fn missing_and_bad_values_name_the_flag() {
        let spec = PanelSpec {
            width: Some("400mm".into()),
            ..Default::default()
        };
        assert!(Panel::from_spec(&spec)
            .unwrap_err()
            .to_string()
            .contains("--height"));
        let spec = PanelSpec {
            width: Some("-400mm".into()),
            height: Some("300mm".into()),
            ..Default::default()
        };
        assert!(Panel::from_spec(&spec)
            .unwrap_err()
            .to_string()
            .contains("--width"));
        let spec = PanelSpec {
            width: Some("400mm".into()),
            height: Some("300mm".into()),
            areal_density: Some("0kg/m2".into()),
            ..Default::default()
        };
        assert!(Panel::from_spec(&spec)
            .unwrap_err()
            .to_string()
            .contains("--areal-density"));
    }

    #[test]
    fn thickness_and_poisson_ratio_for_youngs_modulus() {
        let spec = PanelSpec {
            width: Some("600mm".into()),
            height: Some("400mm".into()),
            areal_density: Some("0.5kg/m2".into()),
            thickness: Some("0.5mm".into()),
            thickness_u: Some("0.005mm".into()),
            poisson_ratio: Some("0.35".into()),
            ..Default::default()
        };
        let p = Panel::from_spec(&spec).unwrap();
        assert_eq!(p.areal_density.unwrap().0, 0.5);
        let m = p.plate_material.unwrap();
        assert!((m.thickness_m - 5e-4).abs() < 1e-15 && m.poisson_ratio_u == 0.0);
        let bad = PanelSpec {
            poisson_ratio: Some("0.5".into()),
            ..spec.clone()
        };
        assert!(Panel::from_spec(&bad)
            .unwrap_err()
            .to_string()
            .contains("--poisson-ratio"));
        let lone = PanelSpec {
            thickness: None,
            thickness_u: None,
            ..spec
        };
        assert!(Panel::from_spec(&lone)
            .unwrap_err()
            .to_string()
            .contains("needs --thickness"));
    }
}
