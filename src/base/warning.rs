//! Warnings: results that are usable but suspicious.
//!
//! Each is printed on the terminal and written into every report, so a
//! record never hides what made it doubtful.

use serde::Serialize;

/// A usable but suspicious condition found during analysis or fitting.
#[derive(Debug, Clone, PartialEq, Serialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub enum Warning {
    /// Some samples sit at or stuck near full scale.
    Clipping {
        /// Fraction of samples affected, 0..1.
        fraction: f64,
    },
    /// No tap onset was found; the file was analysed as a steady sound.
    NoOnset,
    /// The file holds further taps after the one analysed.
    FurtherTaps {
        /// Onset times in seconds.
        onsets_s: Vec<f64>,
    },
    /// The tap stands little above the background.
    LowSnr {
        /// Median SNR of the fitted partials, dB.
        median_snr_db: f64,
    },
    /// Partials at multiples of the mains frequency that do not decay.
    Hum {
        /// Mains frequency of the family, Hz.
        mains_hz: f64,
        /// The frequencies set aside, Hz.
        frequencies_hz: Vec<f64>,
    },
    /// A predicted mode that should be strong has no partial.
    ModeWithoutPeak {
        /// Mode labels, e.g. "(2,1)".
        labels: String,
        /// Predicted frequency, Hz.
        predicted_hz: f64,
    },
    /// Two labellings of the spectrum explain it almost equally well.
    Ambiguous {
        /// What the alternative is.
        detail: String,
    },
    /// The residuals follow a trend with frequency instead of scattering.
    SystematicResidual {
        /// What the trend is.
        detail: String,
    },
    /// Matched modes that the calibration has no factor for (not fitted).
    NotCalibrated {
        /// Their labels.
        labels: Vec<String>,
    },
    /// The analysis span was short for the frequency resolution needed.
    ShortSpan {
        /// Span in seconds.
        span_s: f64,
    },
    /// A partial resolved into two sits on a line of one mode: two modes
    /// close together or a beating, not a degenerate pair.
    PairOnSingleMode {
        /// Mode labels.
        labels: String,
        /// The two frequencies, Hz.
        frequencies_hz: (f64, f64),
    },
    /// The model does not describe the recording (a negative bending
    /// stiffness, dimensions the modes contradict): the fit is doubtful.
    ModelMisfit {
        /// What does not fit, and what would.
        detail: String,
    },
    /// A search reached the end of its range (or a cap on its work):
    /// what lies beyond was not examined.
    SearchLimit {
        /// Which limit, and what it may mean.
        detail: String,
    },
}

impl std::fmt::Display for Warning {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            Warning::PairOnSingleMode {
                labels,
                frequencies_hz: (a, b),
            } => write!(
                f,
                "mode {labels} has one member but its peak holds two partials ({a:.3} and {b:.3} Hz); a neighbouring mode or a beating shares it, so its mean frequency is less reliable"
            ),
            Warning::Clipping { fraction } => write!(
                f,
                "clipping: {:.3} % of samples at full scale; levels and decays are distorted, lower the input gain",
                fraction * 100.0
            ),
            Warning::NoOnset => write!(
                f,
                "no tap onset found; the recording was analysed as a steady sound"
            ),
            Warning::FurtherTaps { onsets_s } => write!(
                f,
                "{} further tap(s) at {} s; the detailed record is the first tap's, every tap is fitted in the tap table",
                onsets_s.len(),
                onsets_s
                    .iter()
                    .map(|t| format!("{t:.3}"))
                    .collect::<Vec<_>>()
                    .join(", ")
            ),
            Warning::LowSnr { median_snr_db } => write!(
                f,
                "low signal-to-noise ratio: median {median_snr_db:.1} dB over the fitted partials; tap harder or move the microphone closer"
            ),
            Warning::Hum {
                mains_hz,
                frequencies_hz,
            } => write!(
                f,
                "mains hum ({mains_hz:.0} Hz family) set aside at {} Hz",
                frequencies_hz
                    .iter()
                    .map(|x| format!("{x:.1}"))
                    .collect::<Vec<_>>()
                    .join(", ")
            ),
            Warning::ModeWithoutPeak {
                labels,
                predicted_hz,
            } => write!(
                f,
                "mode {labels} predicted at {predicted_hz:.1} Hz should be excited but has no partial"
            ),
            Warning::Ambiguous { detail } => write!(f, "ambiguous mode assignment: {detail}"),
            Warning::SystematicResidual { detail } => {
                write!(f, "systematic residuals: {detail}")
            }
            Warning::NotCalibrated { labels } => write!(
                f,
                "modes {} are not in the calibration and were left out of the fit; add reference recordings that show them",
                labels.join(", ")
            ),
            Warning::ModelMisfit { detail } => write!(f, "model misfit: {detail}"),
            Warning::SearchLimit { detail } => write!(f, "search limit: {detail}"),
            Warning::ShortSpan { span_s } => write!(
                f,
                "short analysis span ({:.0} ms): close partials may merge",
                span_s * 1e3
            ),
        }
    }
}
