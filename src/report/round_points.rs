//! Outputs of `tonus round --points` (taps at several points of a panel
//! or screen): one line per tap, the text, the JSON (schema
//! `tonus.round-points/1`) and Markdown. Every output carries
//! [`PANEL_CAUTION`].

use crate::fitting::biaxial::AxisVerdict;
use crate::fitting::round_points::{Combined, PointTap, PointsResult};
use crate::report::text::pm;

/// The caution every panel report carries (the round's, for a panel).
pub const PANEL_CAUTION: &str = "Caution: never tension a panel or screen past the maker's rating for the mesh, film or head and for the frame, and follow your workshop's practice — a membrane or a frame can fail suddenly. Tension in small steps and tap again. Tap gently, and keep your ear away from the panel while tapping.";

/// What the panel was.
pub struct PointsSetting {
    /// The recording(s).
    pub source: String,
    /// e.g. "rectangle 400 × 400 mm".
    pub panel: String,
}

/// One line per fitted tap.
pub fn tap_line(t: &PointTap, unit: &str) -> String {
    let values = match t.reported {
        Some((tx, ty, _)) => format!(
            "Tx = {}  Ty = {}  axis evidence 10^{:.1} : 1 for this labelling",
            pm(tx.value, tx.standard_uncertainty, unit),
            pm(ty.value, ty.standard_uncertainty, unit),
            t.log10_lr
        ),
        None => "no biaxial fit".into(),
    };
    format!(
        "tap {} at ({:.2}, {:.2})  {}  {}",
        t.tap,
        t.x,
        t.y,
        values,
        t.grade.name()
    )
}

fn solution(c: &Combined, unit: &str, indent: &str) -> String {
    let mut t = String::new();
    t.push_str(&format!(
        "{indent}along x      {}\n",
        pm(c.tension_x.value, c.tension_x.standard_uncertainty, unit)
    ));
    t.push_str(&format!(
        "{indent}along y      {}\n",
        pm(c.tension_y.value, c.tension_y.standard_uncertainty, unit)
    ));
    t.push_str(&format!(
        "{indent}anisotropy   {}  (Birge ratio x {:.2}, y {:.2})\n",
        pm(
            c.anisotropy_percent.value,
            c.anisotropy_percent.standard_uncertainty,
            "%"
        ),
        c.birge.0,
        c.birge.1
    ));
    if !c.outlying_taps.is_empty() {
        t.push_str(&format!(
            "{indent}outlying     tap(s) {} lie more than 3u from these values\n",
            c.outlying_taps
                .iter()
                .map(|k| k.to_string())
                .collect::<Vec<_>>()
                .join(", ")
        ));
    }
    t
}

fn tighter(c: &Combined) -> &'static str {
    if c.tension_x.value >= c.tension_y.value {
        "the larger tension along the width (x)"
    } else {
        "the larger tension along the height (y)"
    }
}

/// The result as text.
pub fn text(s: &PointsSetting, r: &PointsResult) -> String {
    let mut t = format!(
        "panel of {} tap(s) — {}, biaxial model\n",
        r.taps.len(),
        s.panel
    );
    match (&r.verdict, &r.chosen) {
        (AxisVerdict::Determined, Some(c)) => {
            t.push_str(&format!(
                "axis         determined: {} of {} tap(s) agree; summed likelihood ratio 10^{:.1} : 1 for {}\n",
                r.agreeing,
                r.used,
                r.log10_lr_sum.abs(),
                tighter(c)
            ));
            t.push_str(&solution(c, r.unit, ""));
        }
        (_, Some(c)) => {
            t.push_str(&format!(
                "axis         not determined: {} of {} tap(s) agree; summed likelihood ratio 10^{:.1} : 1 (at least 10^2 needed); both solutions:\n",
                r.agreeing,
                r.used,
                r.log10_lr_sum.abs()
            ));
            t.push_str(&format!("  one solution ({})\n", tighter(c)));
            t.push_str(&solution(c, r.unit, "  "));
            if let Some(o) = &r.other {
                t.push_str(&format!("  the other ({})\n", tighter(o)));
                t.push_str(&solution(o, r.unit, "  "));
            }
        }
        (_, None) => t.push_str("axis         not determined: no tap gave a usable biaxial fit\n"),
    }
    for d in &r.disagreeing {
        t.push_str(&format!("disagrees    {d}\n"));
    }
    for l in &r.left_out {
        t.push_str(&format!("left out     {l}\n"));
    }
    t.push_str(&format!("\n{PANEL_CAUTION}\n"));
    t
}

/// The result as JSON (`tonus.round-points/1`).
pub fn json(s: &PointsSetting, r: &PointsResult) -> serde_json::Value {
    serde_json::json!({
        "schema": "tonus.round-points/1",
        "source": s.source,
        "panel": s.panel,
        "model": "biaxial",
        "result": r,
        "caution": PANEL_CAUTION,
    })
}

/// The result as Markdown: the taps as a table, the text below.
pub fn markdown(s: &PointsSetting, r: &PointsResult) -> String {
    let mut m = format!(
        "# {} — panel of {} taps\n\n| tap | x | y | Tx | Ty | log₁₀ LR | grade |\n|---|---|---|---|---|---|---|\n",
        s.source,
        r.taps.len()
    );
    for t in &r.taps {
        let (tx, ty) = t
            .reported
            .map(|(x, y, _)| {
                (
                    pm(x.value, x.standard_uncertainty, r.unit),
                    pm(y.value, y.standard_uncertainty, r.unit),
                )
            })
            .unwrap_or_else(|| ("—".into(), "—".into()));
        m.push_str(&format!(
            "| {} | {:.2} | {:.2} | {} | {} | {:.1} | {} |\n",
            t.tap,
            t.x,
            t.y,
            tx,
            ty,
            t.log10_lr,
            t.grade.name()
        ));
    }
    m.push_str(&format!("\n```\n{}```\n", text(s, r)));
    m
}
