//! The fit model a specification asks for.

use serde::Serialize;

use crate::fitting::fit::FitModel;

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
