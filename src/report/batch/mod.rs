//! The batch report of `tonus inspect`: a Markdown page and a
//! self-contained HTML page (pictures embedded as base64 `data:` URIs),
//! with three PNG pictures beside them, and the growing CSV / JSON Lines
//! outputs of a batch ([`Spool`]).
//!
//! # What the report holds
//!
//! - a tally of the decisions and the rule that made them;
//! - the spread of fitted tension (histogram) against the lower and upper
//!   limits and the nominal;
//! - the tension in recording order on an individuals chart with its
//!   moving-range chart: centre x̄, control limits x̄ ± 3·MR̄/d₂
//!   (NIST/SEMATECH e-Handbook of Statistical Methods §6.3.2.2; computed in
//!   [`crate::acceptance::stats`]);
//! - Cp, Cpk (σ̂ = MR̄/d₂) and Pp, Ppk (σ = s), with their formulas
//!   (e-Handbook §6.1.6);
//! - the anisotropy distribution where the model measures it (biaxial),
//!   against ± the specification's limit, with the per-recording
//!   judgements against it;
//! - the unevenness distribution (the spread 2|ε| from resolved split
//!   pairs, circle or square panel) against its limit, and how many
//!   recordings resolved no pair;
//! - when the batch was stopped by a signal, how many recordings of how
//!   many were decided;
//! - the recordings that were not measured, with their reasons;
//! - every recording's decision.
//!
//! # Conventions
//!
//! - Tensions are in N/m, anisotropy in percent, recording positions from
//!   1 in the order the batch was given (the order of `inspect.csv`).
//! - The statistics use the recordings that were measured (pass, fail or
//!   indeterminate); not-measured and unreadable ones are listed apart.
//! - The value axes show the limits and at most one tolerance width
//!   (H − L) beyond them; values further out are counted at the edge
//!   (and drawn as triangles on the run chart) so that one gross outlier
//!   does not flatten the picture.
//! - Pictures are drawn with plotters into memory, with the bundled
//!   DejaVu Sans (the plotting core, [`crate::report::plot`]), encoded with the `png`
//!   crate and written atomically like every output.

mod chart_style;
mod files;
mod histogram;
mod html;
mod pictures;
mod run_chart;
mod sections;
mod spool;
mod summary;

pub use crate::report::plot::FONT_FAMILY;
pub use chart_style::{HISTOGRAM_HEIGHT_PX, PICTURE_WIDTH_PX, RUN_CHART_HEIGHT_PX};
pub use files::write_batch_report;
pub use html::base64;
pub use spool::Spool;
pub use summary::{
    BatchEntry, BatchSummary, Interruption, ANISOTROPY_NAME, HISTOGRAM_NAME, HTML_NAME,
    MARKDOWN_NAME, RUN_CHART_NAME, UNEVENNESS_NAME,
};

#[cfg(test)]
mod tests;
