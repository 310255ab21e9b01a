//! The `[panel]` table of a specification, with its calibration file.

use crate::base::hash::sha256_hex;
use crate::base::units::{self, KgPerM2, Meters};
use crate::fitting::calibration;
use crate::fitting::fit::FitModel;
use crate::physics::membrane::Shape;
use crate::physics::panel::{self, Panel, PanelSpec, ShapeKind};
use std::sync::Arc;

use super::loader::*;
use super::model::SpecModel;

/// What `[panel]` says of the shape.
struct PanelShape {
    /// Circle or rectangle, when the shape could be read.
    is_circle: Option<bool>,
    /// The dimensions could be read.
    ok: bool,
    /// Width equals height, when both could be read.
    is_square: Option<bool>,
    /// A shape of the right kind to check the points against.
    placeholder: Option<Shape>,
}

/// What a length key holds.
const LENGTH: &str = "a length with its unit, e.g. \"400mm\"";

impl Loader<'_> {
    /// The `[panel]` table: shape, areal density, points, model, then the
    /// panel itself and its calibration.
    pub(super) fn load_panel(&mut self, t: &Section) -> PanelPart {
        if t.line.is_none() {
            return PanelPart::default();
        }
        let ok_before = self.problems.len();
        let mut ps = PanelSpec::default();
        let shape = self.panel_shape(t, &mut ps);
        let (sigma, density_u) = self.areal_density(t, &mut ps);
        self.panel_points(t, &mut ps, shape.is_circle, shape.placeholder);
        let model = self.panel_model(t, shape.is_circle);
        let (is_circle, is_square, shape_ok) = (shape.is_circle, shape.is_square, shape.ok);
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

    /// The shape and its dimensions; keys of the other shape are refused
    /// so a forgotten line cannot silently change the panel.
    fn panel_shape(&mut self, t: &Section, ps: &mut PanelSpec) -> PanelShape {
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
        ps.shape = shape_text.map(|s| s.1);
        let mut shape = PanelShape {
            is_circle,
            ok: false,
            is_square: None,
            placeholder: None,
        };
        match is_circle {
            Some(false) => {
                shape.placeholder = Some(Shape::Rectangle {
                    width: Meters(1.0),
                    height: Meters(1.0),
                });
                shape.is_square = self.rectangle_sides(t, ps);
                shape.ok = shape.is_square.is_some();
            }
            Some(true) => {
                shape.placeholder = Some(Shape::Circle {
                    radius: Meters(1.0),
                });
                shape.ok = self.circle_size(t, ps);
            }
            None => {}
        }
        shape
    }

    /// A rectangle's width and height; whether it is a square when both
    /// could be read.
    fn rectangle_sides(&mut self, t: &Section, ps: &mut PanelSpec) -> Option<bool> {
        let length = LENGTH;
        let w = self.quantity(t, "width", length, true, units::parse_length);
        let h = self.quantity(t, "height", length, true, units::parse_length);
        for key in ["diameter", "radius"] {
            if let Some(v) = t.get(key) {
                let line = self.line(v.span().start);
                self.problem(Some(line), format!("key '{key}' does not apply to a rectangle; remove it, or write shape = \"circle\""));
            }
        }
        let (Some(w), Some(h)) = (w, h) else {
            return None;
        };
        ps.width = Some(w.1);
        ps.height = Some(h.1);
        // Tolerance: the same length written two ways (mm, m) differs by
        // rounding only.
        Some((w.2 .0 - h.2 .0).abs() <= 1e-9 * w.2 .0)
    }

    /// A circle's diameter or radius; whether it could be read.
    fn circle_size(&mut self, t: &Section, ps: &mut PanelSpec) -> bool {
        let length = LENGTH;
        for key in ["width", "height"] {
            if let Some(v) = t.get(key) {
                let line = self.line(v.span().start);
                self.problem(Some(line), format!("key '{key}' does not apply to a circle; remove it, or write shape = \"rect\""));
            }
        }
        match (t.get("diameter").is_some(), t.get("radius").is_some()) {
            (true, true) => {
                let line = t.get("radius").map(|v| self.line(v.span().start));
                self.problem(
                    line,
                    "key 'radius': give diameter or radius, not both".into(),
                );
                false
            }
            (false, false) => {
                self.problem(t.line, "[panel] lacks key 'diameter' (or 'radius'): a circle needs it, e.g. diameter = \"14in\"".into());
                false
            }
            (true, false) => {
                let d = self.quantity(t, "diameter", length, true, units::parse_length);
                ps.diameter = d.as_ref().map(|d| d.1.clone());
                d.is_some()
            }
            (false, true) => {
                let r = self.quantity(t, "radius", length, true, units::parse_length);
                ps.radius = r.as_ref().map(|r| r.1.clone());
                r.is_some()
            }
        }
    }

    /// The areal density (given, or thickness × density) and its standard
    /// uncertainty.
    fn areal_density(
        &mut self,
        t: &Section,
        ps: &mut PanelSpec,
    ) -> (Option<KgPerM2>, Option<KgPerM2>) {
        let length = LENGTH;
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

        (sigma, density_u)
    }

    /// The tap and pickup points, checked against the shape's kind.
    fn panel_points(
        &mut self,
        t: &Section,
        ps: &mut PanelSpec,
        is_circle: Option<bool>,
        placeholder: Option<Shape>,
    ) {
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
    }

    /// The fit model, refused here (with its line) when it is one the
    /// specification cannot use or one that needs a rectangle on a circle.
    fn panel_model(&mut self, t: &Section, is_circle: Option<bool>) -> Option<SpecModel> {
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
        model
    }

    /// `[panel] calibration`: a calibration file (relative paths from the
    /// specification's folder), read and checked with
    /// [`calibration::Calibration::parse`] and
    /// [`calibration::Calibration::check_panel`]; the model must be
    /// isotropic, since the factors already hold air loading and the
    /// supports (as for `tonus fit --calibration`). Returns `Some(None)`
    /// without the key, None when it is wrong.
    pub(super) fn load_calibration(
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
}
