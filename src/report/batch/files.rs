//! Writing the batch report: pictures, Markdown and HTML, each atomically.

use std::fmt::Write as _;
use std::path::{Path, PathBuf};

use crate::base::error::{Result, TonusError};

use super::html::html_with;
use super::pictures::{pictures, Pictures};
use super::sections::sections;
use super::summary::*;

pub(super) fn markdown_with(s: &BatchSummary, pics: &Pictures) -> String {
    let mut out = format!(
        "# Batch report: {} v{}, {} recordings\n\n",
        s.spec_name,
        s.spec_version,
        s.entries.len()
    );
    for (h, body) in sections(s, pics) {
        let _ = write!(out, "## {h}\n\n{body}\n");
    }
    out
}

/// Writes the pictures, `batch-report.md` and `batch-report.html` into
/// `dir`, each atomically; returns the paths written.
///
/// # Errors
/// [`TonusError::Write`] when a picture cannot be drawn or a file cannot
/// be written.
pub fn write_batch_report(dir: &Path, s: &BatchSummary) -> Result<Vec<PathBuf>> {
    let pics = pictures(s).map_err(|reason| TonusError::Write {
        path: dir.join(HISTOGRAM_NAME),
        reason,
    })?;
    let mut written = Vec::new();
    for (name, png, _) in &pics.items {
        let p = dir.join(name);
        crate::base::files::write_atomic(&p, png)?;
        written.push(p);
    }
    // Pictures from an earlier batch that this one does not have (no
    // anisotropy, nothing measured) would be misleading beside it.
    for name in [
        HISTOGRAM_NAME,
        RUN_CHART_NAME,
        ANISOTROPY_NAME,
        UNEVENNESS_NAME,
    ] {
        if !pics.items.iter().any(|p| p.0 == name) {
            let _ = std::fs::remove_file(dir.join(name));
        }
    }
    let md = dir.join(MARKDOWN_NAME);
    crate::base::files::write_atomic(&md, markdown_with(s, &pics).as_bytes())?;
    written.push(md);
    let html = dir.join(HTML_NAME);
    crate::base::files::write_atomic(&html, html_with(s, &pics).as_bytes())?;
    written.push(html);
    Ok(written)
}
