//! What the batch report is made from: one [`BatchEntry`] a recording,
//! the [`BatchSummary`] of the batch, the [`Interruption`] note, the file
//! names of the outputs, and the counts every part of the report shares.

/// One recording of the batch, as the report needs it.
#[derive(Debug, Clone, Default)]
pub struct BatchEntry {
    /// The recording's path as given.
    pub file: String,
    /// `pass`, `fail`, `indeterminate`, `not_measured` or `error`
    /// (unreadable or unfittable).
    pub decision: String,
    /// Fitted tension, N/m.
    pub tension_n_per_m: Option<f64>,
    /// Its standard uncertainty (fit and areal density), N/m.
    pub tension_u_n_per_m: Option<f64>,
    /// Expanded uncertainty U = k·u, N/m.
    pub expanded_u_n_per_m: Option<f64>,
    /// Signed distance to the nearest limit, N/m (positive inside).
    pub margin_n_per_m: Option<f64>,
    /// `lower` or `upper`.
    pub nearest_limit: Option<String>,
    /// Anisotropy 100·(Tx − Ty)/((Tx + Ty)/2), percent (biaxial model).
    pub anisotropy_percent: Option<f64>,
    /// Its standard uncertainty, percent.
    pub anisotropy_u_percent: Option<f64>,
    /// The anisotropy judgement against the limit (`pass`, `fail`,
    /// `indeterminate`), when the specification limits it.
    pub anisotropy_decision: Option<String>,
    /// Unevenness, the spread 2|ε| from resolved split pairs, percent.
    pub unevenness_percent: Option<f64>,
    /// Its standard uncertainty, percent.
    pub unevenness_u_percent: Option<f64>,
    /// The unevenness judgement against the limit, when limited and
    /// measured.
    pub unevenness_decision: Option<String>,
    /// Quality grade of the fit.
    pub grade: Option<String>,
    /// Why it was not measured, or the error.
    pub reason: Option<String>,
    /// The partial frequencies came from the damped-sinusoid refinement
    /// (false: FFT peaks only, or not measured).
    pub refined: bool,
}

impl BatchEntry {
    /// Measured: decided pass, fail or indeterminate on a tension.
    pub fn measured(&self) -> bool {
        matches!(self.decision.as_str(), "pass" | "fail" | "indeterminate")
            && self.tension_n_per_m.is_some_and(f64::is_finite)
    }
}

/// The batch and the specification it was decided against.
#[derive(Debug, Clone, Default)]
pub struct BatchSummary {
    /// Specification name.
    pub spec_name: String,
    /// Specification version.
    pub spec_version: String,
    /// SHA-256 of the specification file.
    pub spec_sha256: String,
    /// Model used for the fits.
    pub model: String,
    /// Decision rule name (`simple`, `guarded`).
    pub rule: String,
    /// The rule's description and source.
    pub rule_description: String,
    /// Coverage factor k of the expanded uncertainty.
    pub coverage_factor: f64,
    /// Nominal tension, N/m.
    pub nominal_n_per_m: f64,
    /// Lower limit L, N/m.
    pub lower_n_per_m: f64,
    /// Upper limit H, N/m.
    pub upper_n_per_m: f64,
    /// Largest anisotropy allowed, percent, if the specification sets one.
    pub max_anisotropy_percent: Option<f64>,
    /// Largest unevenness (spread 2|ε|) allowed, percent, if set.
    pub max_unevenness_percent: Option<f64>,
    /// The calibration file and its SHA-256, if the specification names
    /// one.
    pub calibration: Option<String>,
    /// Set when a signal stopped the batch before every recording was
    /// decided.
    pub interrupted: Option<Interruption>,
    /// The unevenness from split pairs applies: a circle or a square
    /// panel, measured with a membrane model (isotropic or air).
    pub unevenness_applies: bool,
    /// When the report was made (RFC 3339).
    pub generated: String,
    /// Station name, if given.
    pub station: Option<String>,
    /// Operator name, if given.
    pub operator: Option<String>,
    /// Every recording, in batch order.
    pub entries: Vec<BatchEntry>,
}

/// A batch stopped by a signal.
#[derive(Debug, Clone)]
pub struct Interruption {
    /// The signal's name, e.g. `SIGINT`.
    pub signal: String,
    /// Its number (exit status 128 + this).
    pub signal_number: i32,
    /// Recordings decided before the stop.
    pub decided: usize,
    /// Recordings the batch was given (None for the watch mode).
    pub total: Option<usize>,
}

/// File names of the report, inside the output folder.
pub const MARKDOWN_NAME: &str = "batch-report.md";

/// The self-contained HTML page.
pub const HTML_NAME: &str = "batch-report.html";

/// Histogram of the fitted tension.
pub const HISTOGRAM_NAME: &str = "batch-tension-spread.png";

/// Individuals and moving-range chart.
pub const RUN_CHART_NAME: &str = "batch-tension-run.png";

/// Histogram of the anisotropy.
pub const ANISOTROPY_NAME: &str = "batch-anisotropy.png";

/// Histogram of the unevenness.
pub const UNEVENNESS_NAME: &str = "batch-unevenness.png";

/// Tensions of the measured recordings with their 1-based positions.
pub(super) fn measured(s: &BatchSummary) -> Vec<(usize, &BatchEntry)> {
    s.entries
        .iter()
        .enumerate()
        .filter(|(_, e)| e.measured())
        .map(|(i, e)| (i + 1, e))
        .collect()
}

/// Counts per decision, in a fixed order.
pub(super) fn tally(s: &BatchSummary) -> Vec<(&'static str, usize)> {
    ["pass", "indeterminate", "fail", "not_measured", "error"]
        .iter()
        .map(|d| (*d, s.entries.iter().filter(|e| e.decision == *d).count()))
        .collect()
}

pub(super) fn decision_label(d: &str) -> &str {
    match d {
        "not_measured" => "not measured",
        "error" => "unreadable / error",
        other => other,
    }
}
