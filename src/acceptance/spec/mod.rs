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

mod limits_table;
mod loader;
mod model;
mod panel_table;
mod specification;

pub use model::SpecModel;
pub use specification::{Spec, DEFAULT_MIN_QUALITY};

#[cfg(test)]
mod tests;
