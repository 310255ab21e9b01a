//! The picture of a round: the head seen from above, its lugs round the
//! rim, each lug's deviation from the mean drawn as a bar outward
//! (tighter) or inward (slacker) from the rim to one scale, with a
//! whisker of ±2u, the tolerance as two dashed circles, and the tighter
//! principal direction as a line across the head.
//!
//! Conventions: angles counter-clockwise from the right-hand side of the
//! picture (the head's 0°), as the round's lug angles are given; bar
//! lengths in pixels per percent fixed by the largest |d| + 2u and the
//! tolerance, printed on the picture. Drawn with plotters into an RGB
//! buffer and encoded by [`crate::report::plot`] (its bundled font).

use crate::acceptance::lug_advice::{Advice, LugState};
use crate::fitting::round_taps::RoundResult;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};

/// Picture size, pixels (square).
pub const SIZE_PX: u32 = 900;
/// Radius of the rim, pixels.
const RIM_PX: f64 = 225.0;
/// Longest bar, pixels (the largest |d| + 2u, or the tolerance).
const LONGEST_BAR_PX: f64 = 85.0;
const INK: RGBColor = RGBColor(38, 42, 48);
const SOFT: RGBColor = RGBColor(150, 154, 160);
const HEAD: RGBColor = RGBColor(246, 243, 236);
const WITHIN: RGBColor = RGBColor(52, 110, 160);
const BEYOND: RGBColor = RGBColor(186, 48, 40);
const UNSURE: RGBColor = RGBColor(206, 140, 20);
const AXIS: RGBColor = RGBColor(40, 128, 96);

use crate::report::plot::{draw_err as err, font};

// Size: one picture drawn top to bottom, layer over layer.
/// Renders the picture and returns it as PNG bytes.
///
/// # Errors
/// A drawing or encoding failure, as a sentence.
pub fn render(
    title: &str,
    r: &RoundResult,
    a: &Advice,
    lug_angles: &[f64],
) -> Result<Vec<u8>, String> {
    let n = SIZE_PX as usize;
    crate::report::plot::picture(SIZE_PX, SIZE_PX, |root| {
        // The head sits a little above the middle, so a lug at the bottom
        // keeps its label clear of the legend lines.
        let c = (SIZE_PX as f64 / 2.0, SIZE_PX as f64 / 2.0 - 8.0);
        let at = |rad: f64, deg: f64| -> (i32, i32) {
            let t = deg.to_radians();
            (
                (c.0 + rad * t.cos()).round() as i32,
                (c.1 - rad * t.sin()).round() as i32,
            )
        };
        let top = font(24.0)
            .color(&INK)
            .pos(Pos::new(HPos::Center, VPos::Top));
        root.draw(&Text::new(title.to_string(), (n as i32 / 2, 14), top))
            .map_err(err)?;
        let summary = if a.lugs.is_empty() {
            "no lug advice".to_string()
        } else {
            a.summary.clone()
        };
        let sub = match r.mean {
            Some(m) => format!(
                "mean {} over {} taps; {summary}",
                crate::report::text::pm(m.value, m.standard_uncertainty, r.unit),
                r.taps.len() - r.left_out.len(),
            ),
            None => summary,
        };
        let sub_style = font(15.0)
            .color(&INK)
            .pos(Pos::new(HPos::Center, VPos::Top));
        let sub = if sub.chars().count() > 110 {
            format!("{}…", sub.chars().take(109).collect::<String>())
        } else {
            sub
        };
        root.draw(&Text::new(sub, (n as i32 / 2, 46), sub_style))
            .map_err(err)?;
        // The head.
        root.draw(&Circle::new(
            at(0.0, 0.0),
            RIM_PX as i32,
            ShapeStyle::from(&HEAD).filled(),
        ))
        .map_err(err)?;
        root.draw(&Circle::new(
            at(0.0, 0.0),
            RIM_PX as i32,
            ShapeStyle::from(&INK).stroke_width(3),
        ))
        .map_err(err)?;
        // Scale: percent to pixels.
        let reach = a
            .lugs
            .iter()
            .map(|l| l.deviation.deviation_pct.abs() + 2.0 * l.deviation.deviation_u_pct)
            .fold(a.tolerance_pct, f64::max)
            .max(1e-6);
        let px_per_pct = LONGEST_BAR_PX / reach;
        // Tolerance circles (only beside bars to compare).
        let signs: &[f64] = if a.lugs.is_empty() { &[] } else { &[-1.0, 1.0] };
        for &sign in signs {
            let rad = RIM_PX + sign * a.tolerance_pct * px_per_pct;
            let pts: Vec<(i32, i32)> = (0..=180).map(|i| at(rad, i as f64 * 2.0)).collect();
            for (k, w) in pts.windows(2).enumerate() {
                if k % 2 == 0 {
                    root.draw(&PathElement::new(
                        vec![w[0], w[1]],
                        ShapeStyle::from(&SOFT).stroke_width(1),
                    ))
                    .map_err(err)?;
                }
            }
        }
        // Principal direction of order 2.
        if let Some(o) = r.pattern.orders.iter().find(|o| o.order == 2) {
            if let (Some(th), true) = (o.angle_deg, o.significant) {
                let style = ShapeStyle::from(&AXIS).stroke_width(3);
                root.draw(&PathElement::new(
                    vec![at(RIM_PX - 20.0, th), at(RIM_PX - 20.0, th + 180.0)],
                    style,
                ))
                .map_err(err)?;
                for end in [th, th + 180.0] {
                    // Arrow heads pointing out: the tighter direction.
                    let tip = at(RIM_PX - 20.0, end);
                    let t = end.to_radians();
                    let back = |side: f64| {
                        let a = t + side * 0.35;
                        (
                            tip.0 - (22.0 * a.cos()).round() as i32,
                            tip.1 + (22.0 * a.sin()).round() as i32,
                        )
                    };
                    root.draw(&PathElement::new(vec![back(1.0), tip, back(-1.0)], style))
                        .map_err(err)?;
                }
                let label = format!(
                    "green arrow: tighter direction {} (mod 180°), ε = {}",
                    crate::report::text::pm(th, o.angle_u_deg.unwrap_or(0.0), "°"),
                    crate::report::text::pm(o.amplitude_pct, o.amplitude_u_pct, "%")
                );
                root.draw(&Text::new(
                    label,
                    (n as i32 / 2, n as i32 - 58),
                    font(16.0)
                        .color(&AXIS)
                        .pos(Pos::new(HPos::Center, VPos::Center)),
                ))
                .map_err(err)?;
            }
        }
        // Lugs, bars and whiskers.
        for (j, &ang) in lug_angles.iter().enumerate() {
            let judged = a.lugs.iter().find(|l| l.deviation.lug == j + 1);
            let colour = match judged.map(|l| l.state) {
                Some(LugState::Beyond) => BEYOND,
                Some(LugState::Unsure) => UNSURE,
                Some(LugState::Within) => WITHIN,
                None => SOFT,
            };
            if let Some(l) = judged {
                let d = l.deviation.deviation_pct;
                let u2 = 2.0 * l.deviation.deviation_u_pct;
                let end = RIM_PX + d * px_per_pct;
                // The bar: a thick radial line from the rim.
                root.draw(&PathElement::new(
                    vec![at(RIM_PX, ang), at(end, ang)],
                    ShapeStyle::from(&colour).stroke_width(11),
                ))
                .map_err(err)?;
                // Whisker ±2u across its end, with caps.
                let w = ShapeStyle::from(&INK).stroke_width(2);
                let (lo, hi) = (end - u2 * px_per_pct, end + u2 * px_per_pct);
                root.draw(&PathElement::new(vec![at(lo, ang), at(hi, ang)], w))
                    .map_err(err)?;
                for rad in [lo, hi] {
                    let dphi = (7.0 / rad.max(1.0)).to_degrees();
                    root.draw(&PathElement::new(
                        vec![at(rad, ang - dphi), at(rad, ang + dphi)],
                        w,
                    ))
                    .map_err(err)?;
                }
                let (x, y) = at(RIM_PX + LONGEST_BAR_PX + 36.0, ang);
                root.draw(&Text::new(
                    format!("{d:+.1} %"),
                    (x, y + 20),
                    font(16.0)
                        .color(&colour)
                        .pos(Pos::new(HPos::Center, VPos::Center)),
                ))
                .map_err(err)?;
            }
            // The lug itself: a block on the rim, its number outside.
            root.draw(&Circle::new(
                at(RIM_PX, ang),
                9,
                ShapeStyle::from(&INK).filled(),
            ))
            .map_err(err)?;
            root.draw(&Text::new(
                format!("{}", j + 1),
                at(RIM_PX + LONGEST_BAR_PX + 36.0, ang),
                font(22.0)
                    .color(&INK)
                    .pos(Pos::new(HPos::Center, VPos::Center)),
            ))
            .map_err(err)?;
        }
        if a.lugs.is_empty() {
            let why = r
                .pattern
                .not_measurable
                .as_deref()
                .map(|_| "unevenness not measurable from these taps")
                .unwrap_or("the taps do not fix which lugs are off");
            root.draw(&Text::new(
                why,
                at(0.0, 0.0),
                font(20.0)
                    .color(&BEYOND)
                    .pos(Pos::new(HPos::Center, VPos::Center)),
            ))
            .map_err(err)?;
        }
        let foot = if a.lugs.is_empty() {
            "no bars: the lugs' deviations are not known from these taps (see the report)"
                .to_string()
        } else {
            format!(
            "bar: lug's deviation from the mean, outward = tighter, {:.0} px per %;  whisker: ±2u;  dashed circles: tolerance ±{} %",
            px_per_pct, a.tolerance_pct
        )
        };
        root.draw(&Text::new(
            foot,
            (n as i32 / 2, n as i32 - 28),
            font(14.0)
                .color(&INK)
                .pos(Pos::new(HPos::Center, VPos::Center)),
        ))
        .map_err(err)?;
        Ok(())
    })
}
