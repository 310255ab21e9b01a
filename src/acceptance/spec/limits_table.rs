//! The `[limits]` and `[decision]` tables of a specification.

use crate::acceptance::decision::Limits;
use crate::base::units::{self};
use crate::fitting::quality::Grade;

use super::loader::*;
use super::model::SpecModel;
use super::specification::DEFAULT_MIN_QUALITY;

impl Loader<'_> {
    pub(super) fn load_limits(&mut self, t: &Section, pp: &PanelPart) -> Option<Limits> {
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
