//! The pictures of a batch, drawn from its summary.

use crate::acceptance::stats;

use super::chart_style::*;
use super::histogram::{bin_count, histogram_png, HistogramPicture};
use super::run_chart::run_chart_png;
use super::summary::*;

/// The pictures of a batch: (file name, PNG bytes, alt text).
pub(super) struct Pictures {
    pub(super) items: Vec<Picture>,
}

impl Pictures {
    /// Whether the batch has the picture named `name`.
    pub(super) fn has(&self, name: &str) -> bool {
        self.items.iter().any(|p| p.0 == name)
    }
}

/// A picture: file name, PNG bytes, alt text.
type Picture = (&'static str, Vec<u8>, String);

pub(super) fn pictures(s: &BatchSummary) -> std::result::Result<Pictures, String> {
    let pts = measured(s);
    let values: Vec<f64> = pts.iter().filter_map(|(_, e)| e.tension_n_per_m).collect();
    let mut items = Vec::new();
    if !values.is_empty() {
        items.push(tension_histogram(s, &values)?);
    }
    if let Some(chart) = stats::individuals_chart(&values) {
        let png = run_chart_png(s, &pts, &chart)?;
        items.push((
            RUN_CHART_NAME,
            png,
            "Individuals and moving-range chart of the tension in recording order".to_string(),
        ));
    }
    let aniso: Vec<f64> = s
        .entries
        .iter()
        .filter(|e| e.measured())
        .filter_map(|e| e.anisotropy_percent)
        .filter(|a| a.is_finite())
        .collect();
    if !aniso.is_empty() {
        items.push(anisotropy_histogram(s, aniso)?);
    }
    let uneven: Vec<f64> = s
        .entries
        .iter()
        .filter(|e| e.measured())
        .filter_map(|e| e.unevenness_percent)
        .filter(|a| a.is_finite())
        .collect();
    if !uneven.is_empty() {
        items.push(unevenness_histogram(s, uneven)?);
    }
    Ok(Pictures { items })
}

/// The histogram of the fitted tension against the limits.
fn tension_histogram(s: &BatchSummary, values: &[f64]) -> Result<Picture, String> {
    let mean = stats::mean(values);
    let mut marks = vec![
        solid(
            s.lower_n_per_m,
            format!("L {:.0} N/m", s.lower_n_per_m),
            LIMIT,
        ),
        solid(
            s.upper_n_per_m,
            format!("H {:.0} N/m", s.upper_n_per_m),
            LIMIT,
        ),
        dashed(
            s.nominal_n_per_m,
            format!("nominal {:.0}", s.nominal_n_per_m),
            NOMINAL,
        ),
    ];
    if let Some(m) = mean {
        marks.push(dashed(m, format!("mean {m:.1}"), CENTRE));
    }
    let png = histogram_png(&HistogramPicture {
        title: format!("Fitted tension — {} v{}", s.spec_name, s.spec_version),
        subtitle: format!(
            "{} measured recordings of {} · limits {:.0} … {:.0} N/m · rule {}",
            values.len(),
            s.entries.len(),
            s.lower_n_per_m,
            s.upper_n_per_m,
            s.rule
        ),
        x_label: "tension [N/m]",
        view: value_view(values, s.lower_n_per_m, s.upper_n_per_m),
        anchor: (s.lower_n_per_m, s.upper_n_per_m - s.lower_n_per_m),
        bin_count: bin_count(values.len()),
        x_digits: 0,
        values: values.to_vec(),
        marks,
    })?;
    Ok((
        HISTOGRAM_NAME,
        png,
        "Histogram of the fitted tension with the lower and upper limits".to_string(),
    ))
}

/// The histogram of the anisotropy against ± its limit.
fn anisotropy_histogram(s: &BatchSummary, aniso: Vec<f64>) -> Result<Picture, String> {
    let amax = aniso.iter().fold(0.0f64, |a, &b| a.max(b.abs()));
    let lim = s.max_anisotropy_percent.unwrap_or(amax.max(1.0));
    // Labels alternate between two rows in this order: the mean sits
    // in the other row from the limits and from 0.
    let mut marks = vec![dashed(0.0, "0 %".to_string(), NOMINAL)];
    if let Some(m) = stats::mean(&aniso) {
        marks.push(dashed(m, format!("mean {m:.2} %"), CENTRE));
    }
    if let Some(m) = s.max_anisotropy_percent {
        marks.push(solid(m, format!("limit +{m} %"), LIMIT));
        marks.push(solid(-m, format!("limit −{m} %"), LIMIT));
    }
    let png = histogram_png(&HistogramPicture {
        title: format!("Anisotropy — {} v{}", s.spec_name, s.spec_version),
        subtitle: format!(
            "100·(Tx − Ty)/((Tx + Ty)/2) · {} measured recordings{}",
            aniso.len(),
            s.max_anisotropy_percent
                .map(|m| format!(" · limit |a| ≤ {m} % · rule {}", s.rule))
                .unwrap_or_default()
        ),
        x_label: "anisotropy [%]",
        view: value_view(&aniso, -lim, lim),
        anchor: (-lim, 2.0 * lim),
        bin_count: bin_count(aniso.len()),
        x_digits: 1,
        values: aniso,
        marks,
    })?;
    Ok((
        ANISOTROPY_NAME,
        png,
        "Histogram of the anisotropy against the limits".to_string(),
    ))
}

/// The histogram of the unevenness against its limit.
fn unevenness_histogram(s: &BatchSummary, uneven: Vec<f64>) -> Result<Picture, String> {
    let vmax = uneven.iter().fold(0.0f64, |a, &b| a.max(b));
    let lim = s.max_unevenness_percent.unwrap_or(vmax.max(1.0));
    let mut marks = Vec::new();
    if let Some(m) = s.max_unevenness_percent {
        marks.push(solid(m, format!("limit {m} %"), LIMIT));
    }
    if let Some(m) = stats::mean(&uneven) {
        marks.push(dashed(m, format!("mean {m:.2} %"), CENTRE));
    }
    let png = histogram_png(&HistogramPicture {
        title: format!("Unevenness — {} v{}", s.spec_name, s.spec_version),
        subtitle: format!(
            "spread 2|ε| from resolved split pairs · {} of {} measured recordings{}",
            uneven.len(),
            measured(s).len(),
            s.max_unevenness_percent
                .map(|m| format!(" · limit {m} % · rule {}", s.rule))
                .unwrap_or_default()
        ),
        x_label: "unevenness, tightest over slackest direction − 1 [%]",
        // From 0 to the limit or the largest value: the limit is
        // one-sided, so a tolerance "width" says little here.
        view: value_view(&uneven, 0.0, lim.max(vmax)),
        anchor: (0.0, lim),
        bin_count: bin_count(uneven.len()),
        x_digits: 1,
        values: uneven,
        marks,
    })?;
    Ok((
        UNEVENNESS_NAME,
        png,
        "Histogram of the unevenness against the limit".to_string(),
    ))
}
