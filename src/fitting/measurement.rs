//! What a measurement is: the options it runs with and the result it
//! returns. The stages that fill it are in [`crate::fitting::pipeline`].

use crate::base::estimate::Estimate;
use crate::base::warning::Warning;
use crate::fitting::fit::{FitModel, FitResult};
use crate::fitting::matching::Matching;
use crate::fitting::quality::Quality;
use crate::fitting::rows::{MissingMode, ModeRow};
use crate::physics::membrane::ModeLine;
use crate::physics::panel::Panel;
use crate::signal::partials::{AnalysisConfig, PartialAnalysis};

/// Options of a fit.
#[derive(Debug, Clone)]
pub struct FitOptions {
    /// What to fit.
    pub model: FitModel,
    /// Partial finder settings.
    pub analysis: AnalysisConfig,
    /// Per-mode correction factors to fit against ([`crate::fitting::calibration`]).
    pub calibration: Option<std::sync::Arc<crate::fitting::calibration::Loaded>>,
    /// Run the isotropic rectangle's aspect search when the entered
    /// sides' labelling is not good enough (true); false for the further
    /// taps of one file, which are labelled on the entered sides alone so
    /// that a file of many short taps keeps its time bound (their spans
    /// are short, their peaks coarse, and the first tap has searched).
    pub aspect_search: bool,
}

impl Default for FitOptions {
    fn default() -> Self {
        FitOptions {
            model: FitModel::Isotropic,
            analysis: AnalysisConfig::default(),
            calibration: None,
            aspect_search: true,
        }
    }
}

/// The full result for one recording.
#[derive(Debug, Clone)]
pub struct Measurement {
    /// The panel as given.
    pub panel: Panel,
    /// Partials and spectrum.
    pub analysis: PartialAnalysis,
    /// Predicted lines used for matching (at unit wave speed: factor g).
    pub lines: Vec<ModeLine>,
    /// Matching outcome.
    pub matching: Option<Matching>,
    /// Fit outcome.
    pub fit: Option<FitResult>,
    /// Tension T = σ·c², N/m, when σ is known.
    pub tension: Option<Estimate>,
    /// T/σ = c², m²/s².
    pub tension_over_density: Option<Estimate>,
    /// Matched modes.
    pub modes: Vec<ModeRow>,
    /// Expected-but-missing lines within the matched band.
    pub missing: Vec<MissingMode>,
    /// Indices of partials not assigned to any mode.
    pub unmatched: Vec<usize>,
    /// Grade and reasons.
    pub quality: Quality,
    /// All warnings.
    pub warnings: Vec<Warning>,
    /// Recording duration, s.
    pub duration_s: f64,
    /// Uncertainty budget of the tension (GUM), when σ is known.
    pub budget: Option<crate::fitting::budget::Budget>,
    /// Tensions along the two axes, for the biaxial model.
    pub biaxial: Option<crate::fitting::biaxial::Biaxial>,
    /// Tension and bending stiffness, for the plate model.
    pub plate: Option<crate::fitting::plate_fit::PlateFit>,
    /// Every tap of a recording with several, combined (set by
    /// [`crate::fitting::pipeline::measure_taps`] callers).
    pub taps: Option<crate::fitting::taps::TapSeries>,
    /// The calibration applied, if any.
    pub calibration: Option<crate::fitting::calibration::Applied>,
    /// Rank, condition and correlations of the fit's Jacobian.
    pub identifiability: Option<crate::fitting::identifiability::Identifiability>,
    /// Uneven tension from the resolved split pairs (circle, or square
    /// panel), when any pair was resolved.
    pub evenness: Option<crate::physics::evenness::Evenness>,
    /// What the recording shows when the fit is doubtful or unfit: the
    /// fundamental, the overtone ratios, the closest model.
    pub diagnosis: Option<crate::fitting::diagnosis::Diagnosis>,
}
