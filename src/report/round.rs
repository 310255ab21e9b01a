//! The round's outputs: the terminal text, the JSON record (schema
//! [`SCHEMA`]), the Markdown and self-contained HTML reports with the
//! picture of the head beside the lug table. Every report carries
//! [`CAUTION`].
//!
//! JSON fields (units in the names): `schema`, `tonus_version`, `source`,
//! `panel` {`diameter_m`, `areal_density_kg_per_m2`}, `lugs`
//! {`count`, `first_deg`, `clockwise`}, `taps` [{`lug`, `angle_deg`,
//! `onset_s`, `value`, `grade`, `modes`, `split_pairs`, `lines`}],
//! `mean` {`value`, `standard_uncertainty`} in `unit`, `pattern`
//! {`orders` [{`order`, `pair_order`, `amplitude_pct`,
//! `amplitude_u_pct`, `significant`, `angle_deg`, `angle_u_deg`,
//! `orientation`, `angle_refused`, `pairs`}], `lugs`, `not_determined`
//! [[order, why]], `not_measurable`, `set_aside`}, `advice` {`tolerance_pct`,
//! `coverage_k`, `lugs` [{`lug`, `angle_deg`, `deviation_pct`,
//! `deviation_u_pct`, `deviation_abs`, `state`, `turn`}], `steps`,
//! `summary`}, `left_out`, `odd_orders`, `caution`.

use crate::acceptance::lug_advice::Advice;
use crate::fitting::round_taps::RoundResult;
use serde_json::{json, Value};

/// Schema name of the JSON record.
pub const SCHEMA: &str = "tonus.round/1";

/// The caution every round report carries.
pub const CAUTION: &str = "Caution: never tension a head past the maker's rating for the head and the hoop, and follow your workshop's practice — a head or a frame can fail suddenly. Turn in small steps and tap the round again. Tap gently, and keep your ear away from the head while tapping.";

/// What the frequencies cannot show, said in every output.
pub const ODD_ORDERS: &str = "Odd orders of the pattern (one side of the head tighter than the other, a three-fold pattern) move no pair's frequency to first order: a round of taps cannot see them, and the lug deviations do not contain them.";

/// How the round was laid out and what it was measured on.
#[derive(Debug, Clone)]
pub struct RoundSetting {
    /// Recording file(s), or "standard input".
    pub source: String,
    /// Panel description, e.g. "circle ⌀ 356 mm".
    pub panel: String,
    /// Diameter, m.
    pub diameter_m: f64,
    /// Areal density, kg/m², when given.
    pub areal_density: Option<f64>,
    /// Lug count.
    pub lugs: usize,
    /// Angle of lug 1, degrees.
    pub first_deg: f64,
    /// Lugs numbered clockwise.
    pub clockwise: bool,
}

fn pm(v: f64, u: f64, unit: &str) -> String {
    crate::report::text::pm(v, u, unit)
}

fn signed_pm(v: f64, u: f64, unit: &str) -> String {
    let s = pm(v, u, unit);
    if v >= 0.0 {
        format!("+{s}")
    } else {
        s
    }
}

/// The lines that describe the pattern (shared by text and Markdown).
fn pattern_lines(r: &RoundResult) -> Vec<String> {
    let p = &r.pattern;
    let mut out = Vec::new();
    if let Some(why) = &p.not_measurable {
        out.push(why.clone());
        return out;
    }
    for o in &p.orders {
        let size = if o.order == 2 {
            format!(
                "order 2 (principal tensions T̄(1 ± ε)): ε = {}",
                pm(o.amplitude_pct, o.amplitude_u_pct, "%")
            )
        } else {
            format!(
                "order {}: δ = {} (from the {} pair(s))",
                o.order,
                pm(o.amplitude_pct, o.amplitude_u_pct, "%"),
                o.pairs.join(" ")
            )
        };
        let dir = match (o.angle_deg, o.angle_u_deg, &o.angle_refused) {
            (Some(a), Some(u), _) if o.order == 2 => {
                format!(", tighter along {} (mod 180°)", pm(a, u, "°"))
            }
            (Some(a), Some(u), _) => format!(
                ", tightest at {} (mod {:.0}°)",
                pm(a, u, "°"),
                360.0 / o.order as f64
            ),
            (_, _, Some(why)) => format!(", direction not determined: {why}"),
            _ => String::new(),
        };
        let sig = if o.significant {
            ""
        } else {
            " — not significant (below 2u)"
        };
        out.push(format!("{size}{dir}{sig}"));
    }
    for (q, why) in p
        .not_determined
        .iter()
        .filter(|q| q.0 % 2 == 0 && !p.orders.iter().any(|o| o.order == q.0))
    {
        out.push(format!("order {q}: not determined ({why})"));
    }
    out
}

/// The terminal text of a finished round.
pub fn text(s: &RoundSetting, r: &RoundResult, a: &Advice) -> String {
    let mut t = String::new();
    t.push_str(&format!(
        "round of {} taps — {}, lug 1 at {:.0}°, numbered {}\n",
        s.lugs,
        s.panel,
        s.first_deg,
        if s.clockwise {
            "clockwise"
        } else {
            "counter-clockwise"
        }
    ));
    match r.mean {
        Some(m) => t.push_str(&format!(
            "mean tension {} over {} tap(s)\n",
            pm(m.value, m.standard_uncertainty, r.unit),
            r.taps.len() - r.left_out.len()
        )),
        None => t.push_str("mean tension not measured: no tap was fitted well enough\n"),
    }
    for l in &r.left_out {
        t.push_str(&format!("left out     {l}\n"));
    }
    for l in &r.pattern.set_aside {
        t.push_str(&format!("set aside    {l}\n"));
    }
    for (i, l) in pattern_lines(r).iter().enumerate() {
        t.push_str(&format!(
            "{}{l}\n",
            if i == 0 {
                "pattern      "
            } else {
                "             "
            }
        ));
    }
    t.push_str(&format!("not seen     {ODD_ORDERS}\n"));
    if !a.lugs.is_empty() {
        t.push_str(&format!(
            "\n lug   angle   deviation            {:<18} state\n",
            r.unit
        ));
        for l in &a.lugs {
            let d = &l.deviation;
            let abs = l
                .deviation_abs
                .map(|e| signed_pm(e.value, e.standard_uncertainty, ""))
                .unwrap_or_default();
            t.push_str(&format!(
                "{:>4} {:>6.0}°   {:<20} {:<18} {}\n",
                d.lug,
                d.angle_deg,
                signed_pm(d.deviation_pct, d.deviation_u_pct, "%"),
                abs.trim_end(),
                l.state.name()
            ));
        }
    }
    t.push_str(&format!(
        "\nwhat to turn (tolerance ±{} %, k = {}): {}\n",
        a.tolerance_pct, a.coverage_k, a.summary
    ));
    for (i, step) in a.steps.iter().enumerate() {
        t.push_str(&format!("  {}. {step}\n", i + 1));
    }
    t.push_str(&format!("\n{CAUTION}\n"));
    t
}

/// The JSON record.
pub fn json(s: &RoundSetting, r: &RoundResult, a: &Advice) -> Value {
    json!({
        "schema": SCHEMA,
        "tonus_version": env!("CARGO_PKG_VERSION"),
        "source": s.source,
        "panel": {"description": s.panel, "diameter_m": s.diameter_m, "areal_density_kg_per_m2": s.areal_density},
        "lugs": {"count": s.lugs, "first_deg": s.first_deg, "clockwise": s.clockwise},
        "taps": r.taps,
        "mean": r.mean,
        "unit": r.unit,
        "pattern": r.pattern,
        "advice": a,
        "left_out": r.left_out,
        "odd_orders": ODD_ORDERS,
        "caution": CAUTION,
    })
}

/// The Markdown report; `picture` is the PNG's file name beside it.
pub fn markdown(s: &RoundSetting, r: &RoundResult, a: &Advice, picture: Option<&str>) -> String {
    let mut m = String::new();
    m.push_str(&format!("# Round of taps — {}\n\n", s.source));
    m.push_str(&format!("> {CAUTION}\n\n"));
    m.push_str(&format!(
        "{} with {} lugs, lug 1 at {:.0}°, numbered {}. ",
        s.panel,
        s.lugs,
        s.first_deg,
        if s.clockwise {
            "clockwise"
        } else {
            "counter-clockwise"
        }
    ));
    if let Some(mean) = r.mean {
        m.push_str(&format!(
            "Mean tension **{}** over {} tap(s).\n\n",
            pm(mean.value, mean.standard_uncertainty, r.unit),
            r.taps.len() - r.left_out.len()
        ));
    } else {
        m.push_str("No tap was fitted well enough for a mean tension.\n\n");
    }
    m.push_str("## Tension pattern\n\n");
    for l in pattern_lines(r) {
        m.push_str(&format!("- {l}\n"));
    }
    for l in &r.pattern.set_aside {
        m.push_str(&format!("- set aside: {l}\n"));
    }
    m.push_str(&format!("- {ODD_ORDERS}\n\n"));
    m.push_str("## Lugs\n\n");
    if let Some(p) = picture {
        m.push_str(&format!(
            "![The head from above: each lug's deviation drawn outward (tighter) or inward (slacker), with its uncertainty]({p})\n\n"
        ));
    }
    if a.lugs.is_empty() {
        m.push_str("No lug deviations: see the pattern above.\n\n");
    } else {
        m.push_str(&format!(
            "| lug | angle | deviation | {} | state |\n|---:|---:|---:|---:|---|\n",
            r.unit
        ));
        for l in &a.lugs {
            let d = &l.deviation;
            m.push_str(&format!(
                "| {} | {:.0}° | {} | {} | {} |\n",
                d.lug,
                d.angle_deg,
                signed_pm(d.deviation_pct, d.deviation_u_pct, "%"),
                l.deviation_abs
                    .map(|e| signed_pm(e.value, e.standard_uncertainty, ""))
                    .unwrap_or_default()
                    .trim_end(),
                l.state.name()
            ));
        }
        m.push('\n');
    }
    m.push_str(&format!(
        "## What to turn\n\nTolerance ±{} % of the mean, judged with k = {}: {}.\n\n",
        a.tolerance_pct, a.coverage_k, a.summary
    ));
    for (i, step) in a.steps.iter().enumerate() {
        m.push_str(&format!("{}. {step}\n", i + 1));
    }
    m.push_str("\n## Taps\n\n| lug | angle | onset s | fit | grade | split pairs |\n|---:|---:|---:|---:|---|---|\n");
    for t in &r.taps {
        m.push_str(&format!(
            "| {} | {:.0}° | {:.3} | {} | {} | {} |\n",
            t.lug,
            t.angle_deg,
            t.onset_s,
            t.value
                .map(|e| pm(e.value, e.standard_uncertainty, r.unit))
                .unwrap_or_else(|| "—".into()),
            t.grade.name(),
            if t.split_pairs.is_empty() {
                "none".to_string()
            } else {
                t.split_pairs.join(" ")
            }
        ));
    }
    m
}

fn escape(s: &str) -> String {
    s.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
}

/// A self-contained HTML page of the same content, the picture embedded
/// as a base64 `data:` URI beside the lug table.
pub fn html(s: &RoundSetting, r: &RoundResult, a: &Advice, png: Option<&[u8]>) -> String {
    let mut h = String::from("<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\"><title>tonus round</title>\n<style>body{font-family:sans-serif;max-width:1100px;margin:2em auto;color:#262a30}.caution{border-left:4px solid #b03028;padding:.4em 1em;background:#fbf1ef}.side{display:flex;gap:2em;align-items:flex-start}table{border-collapse:collapse}td,th{padding:.2em .6em;border-bottom:1px solid #e8eaee;text-align:right}.beyond{color:#b03028;font-weight:bold}</style></head><body>\n");
    h.push_str(&format!("<h1>Round of taps — {}</h1>\n", escape(&s.source)));
    h.push_str(&format!("<p class=\"caution\">{}</p>\n", escape(CAUTION)));
    h.push_str(&format!(
        "<p>{} with {} lugs, lug 1 at {:.0}°, numbered {}.{}</p>\n",
        escape(&s.panel),
        s.lugs,
        s.first_deg,
        if s.clockwise {
            "clockwise"
        } else {
            "counter-clockwise"
        },
        r.mean
            .map(|m| format!(
                " Mean tension <b>{}</b>.",
                escape(&pm(m.value, m.standard_uncertainty, r.unit))
            ))
            .unwrap_or_default()
    ));
    h.push_str("<h2>Tension pattern</h2><ul>\n");
    for l in pattern_lines(r) {
        h.push_str(&format!("<li>{}</li>\n", escape(&l)));
    }
    h.push_str(&format!("<li>{}</li></ul>\n", escape(ODD_ORDERS)));
    h.push_str("<h2>Lugs</h2><div class=\"side\">\n");
    if let Some(bytes) = png {
        h.push_str(&format!(
            "<img alt=\"the head from above with each lug's deviation\" width=\"560\" src=\"data:image/png;base64,{}\">\n",
            crate::report::batch::base64(bytes)
        ));
    }
    h.push_str("<table><tr><th>lug</th><th>angle</th><th>deviation</th><th>");
    h.push_str(r.unit);
    h.push_str("</th><th>state</th></tr>\n");
    for l in &a.lugs {
        let d = &l.deviation;
        h.push_str(&format!(
            "<tr{}><td>{}</td><td>{:.0}°</td><td>{}</td><td>{}</td><td>{}</td></tr>\n",
            if l.state == crate::acceptance::lug_advice::LugState::Beyond {
                " class=\"beyond\""
            } else {
                ""
            },
            d.lug,
            d.angle_deg,
            escape(&signed_pm(d.deviation_pct, d.deviation_u_pct, "%")),
            escape(
                l.deviation_abs
                    .map(|e| signed_pm(e.value, e.standard_uncertainty, ""))
                    .unwrap_or_default()
                    .trim_end()
            ),
            l.state.name()
        ));
    }
    h.push_str("</table></div>\n");
    h.push_str(&format!(
        "<h2>What to turn</h2><p>Tolerance ±{} % of the mean, judged with k = {}: {}.</p><ol>\n",
        a.tolerance_pct,
        a.coverage_k,
        escape(&a.summary)
    ));
    for step in &a.steps {
        h.push_str(&format!("<li>{}</li>\n", escape(step)));
    }
    h.push_str("</ol></body></html>\n");
    h
}
