//! Membrane models (forward): predicted mode lines for a given geometry.
//!
//! Mode labels follow the trade's convention:
//! - rectangle, fixed edges: (m, n) count half-waves along the width (x)
//!   and the height (y), both ≥ 1;
//! - circle, fixed rim: m is the number of nodal diameters (≥ 0) and n the
//!   number of nodal circles counting the rim (≥ 1), so the fundamental
//!   is (0,1).
//!
//! A line is written as f = c·g with c the wave speed (m/s) and g the
//! line's *frequency factor* (1/m), so that matching and fitting can work
//! with g alone. Modes of equal frequency (f(m,n) = f(n,m) on a square; the
//! cos/sin pair of every circle mode with m ≥ 1) form one line.
//!
//! Ideal membrane: −T∇²w + σ ∂²w/∂t² = 0 with c = √(T/σ); see P. M. Morse
//! and K. U. Ingard, "Theoretical Acoustics" (McGraw-Hill 1968), §5.2
//! (rectangular and circular membranes), or N. H. Fletcher and T. D.
//! Rossing, "The Physics of Musical Instruments" (2nd ed., Springer 1998),
//! §3.2–3.3.

use crate::base::units::{KgPerM2, Meters, MetersPerSecond, NewtonsPerMeter};
use crate::physics::bessel;
use serde::Serialize;
use std::f64::consts::PI;

/// Relative tolerance under which two modes count as one line.
pub const DEGENERATE_REL: f64 = 1e-9;
/// Most lines ever generated.
pub const MAX_LINES: usize = 5000;

/// Outline of the membrane.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
#[serde(tag = "shape", rename_all = "snake_case")]
pub enum Shape {
    /// Rectangle with fixed edges; width along x, height along y.
    Rectangle {
        /// Width Lx.
        width: Meters,
        /// Height Ly.
        height: Meters,
    },
    /// Circle with fixed rim.
    Circle {
        /// Radius a.
        radius: Meters,
    },
}

/// A point on the membrane in relative coordinates: for a rectangle
/// (x/Lx, y/Ly), each in 0..1; for a circle (r/a, θ in degrees).
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Point {
    /// x/Lx, or r/a.
    pub u: f64,
    /// y/Ly, or θ in degrees (None: unknown angle).
    pub v: Option<f64>,
}

/// One predicted line: one frequency, one or more modes.
#[derive(Debug, Clone, Serialize)]
pub struct ModeLine {
    /// Labels of the modes at this frequency.
    pub labels: Vec<(u32, u32)>,
    /// Frequency factor g (1/m): f = c·g.
    pub factor: f64,
    /// Number of physical modes (2 for a cos/sin pair or an (m,n)/(n,m) pair).
    pub degeneracy: usize,
    /// Expected relative excitation at the tap and pickup points, 0..1
    /// (1 where the points are unknown).
    pub coupling: f64,
}

impl ModeLine {
    /// Labels as text, e.g. "(1,2)/(2,1)".
    pub fn label_text(&self) -> String {
        self.labels
            .iter()
            .map(|(m, n)| format!("({m},{n})"))
            .collect::<Vec<_>>()
            .join("/")
    }
}

/// Frequency of rectangle mode (m,n), Hz:
/// f = (c/2)·√((m/Lx)² + (n/Ly)²), with c the wave speed (m/s) and Lx, Ly
/// the width and height (m).
pub fn rect_mode_frequency_hz(
    width_m: f64,
    height_m: f64,
    wave_speed_m_per_s: f64,
    m: u32,
    n: u32,
) -> f64 {
    0.5 * wave_speed_m_per_s * ((m as f64 / width_m).powi(2) + (n as f64 / height_m).powi(2)).sqrt()
}

/// Frequency of circle mode (m,n), Hz: f = j_{m,n}·c/(2πa), with j_{m,n}
/// the n-th zero of J_m, c the wave speed (m/s) and a the radius (m).
pub fn circle_mode_frequency_hz(radius_m: f64, wave_speed_m_per_s: f64, m: u32, n: u32) -> f64 {
    bessel::bessel_zero(m, n) * wave_speed_m_per_s / (2.0 * PI * radius_m)
}

/// Wave speed c = √(T/σ).
pub fn wave_speed(tension: NewtonsPerMeter, areal_density: KgPerM2) -> MetersPerSecond {
    MetersPerSecond((tension.0 / areal_density.0).sqrt())
}

/// Tension T = σ·c².
pub fn tension(wave_speed: MetersPerSecond, areal_density: KgPerM2) -> NewtonsPerMeter {
    NewtonsPerMeter(areal_density.0 * wave_speed.0 * wave_speed.0)
}

impl Shape {
    /// The largest frequency factor (1/m) [`Shape::lines`] goes to: where
    /// Weyl's law for the membrane, N(g) ≈ π·A·g² modes below g (A the
    /// area; H. Weyl 1911, the leading term, which overcounts a fixed
    /// edge), reaches [`MAX_LINES`] lines (a circle's lines are mostly
    /// pairs of modes). The work of predicting lines is bounded by it
    /// whatever a recording's partials ask for; hypotheses that would need
    /// lines beyond it are not scored.
    pub fn factor_cap(&self) -> f64 {
        let (area, modes_per_line) = match *self {
            Shape::Rectangle { width, height } => (width.0 * height.0, 1.0),
            Shape::Circle { radius } => (PI * radius.0 * radius.0, 2.0),
        };
        (MAX_LINES as f64 * modes_per_line / (PI * area.max(1e-12))).sqrt()
    }

    /// Frequency factor of the lowest mode.
    pub fn fundamental_factor(&self) -> f64 {
        match *self {
            Shape::Rectangle { width, height } => {
                rect_mode_frequency_hz(width.0, height.0, 1.0, 1, 1)
            }
            Shape::Circle { radius } => circle_mode_frequency_hz(radius.0, 1.0, 0, 1),
        }
    }

    /// Mode shape value at a relative point, normalised so that its largest
    /// magnitude over the membrane is 1. For a circle with unknown angle the
    /// radial part alone is used (a cos/sin pair always has a member
    /// excited away from a nodal circle).
    pub fn mode_shape(&self, m: u32, n: u32, p: Point) -> f64 {
        match *self {
            Shape::Rectangle { .. } => {
                let y = p.v.unwrap_or(0.5);
                (m as f64 * PI * p.u).sin() * (n as f64 * PI * y).sin()
            }
            Shape::Circle { .. } => {
                let j = bessel::bessel_zero(m, n);
                let radial = bessel::bessel_j(m, j * p.u.clamp(0.0, 1.0));
                let norm = radial_max(m, j);
                let angular = match p.v {
                    Some(deg) if m > 0 => (m as f64 * deg.to_radians()).cos(),
                    _ => 1.0,
                };
                radial / norm * angular
            }
        }
    }

    /// Predicted lines with factor up to `max_factor` (1/m), sorted by
    /// frequency, with degenerate modes merged and the expected coupling
    /// at the tap and pickup points.
    pub fn lines(
        &self,
        max_factor: f64,
        tap: Option<Point>,
        pickup: Option<Point>,
    ) -> Vec<ModeLine> {
        let max_factor = max_factor.min(self.factor_cap());
        let mut modes: Vec<(f64, u32, u32, usize)> = Vec::new();
        match *self {
            Shape::Rectangle { width, height } => {
                let (lx, ly) = (width.0, height.0);
                let m_max = (2.0 * max_factor * lx).floor() as u32;
                let n_max = (2.0 * max_factor * ly).floor() as u32;
                for m in 1..=m_max.max(1) {
                    for n in 1..=n_max.max(1) {
                        let g = rect_mode_frequency_hz(lx, ly, 1.0, m, n);
                        if g <= max_factor * (1.0 + 1e-12) {
                            modes.push((g, m, n, 1));
                        }
                    }
                }
            }
            Shape::Circle { radius } => {
                let x_max = max_factor * 2.0 * PI * radius.0;
                let mut m = 0u32;
                loop {
                    let zs = bessel::zeros_below(m, x_max, 0);
                    if zs.is_empty() {
                        break;
                    }
                    for (i, z) in zs.iter().enumerate() {
                        if *z <= x_max {
                            let deg = if m == 0 { 1 } else { 2 };
                            modes.push((z / (2.0 * PI * radius.0), m, i as u32 + 1, deg));
                        }
                    }
                    m += 1;
                }
            }
        }
        modes.sort_by(|a, b| a.0.total_cmp(&b.0).then(a.1.cmp(&b.1)));
        let mut lines: Vec<ModeLine> = Vec::new();
        for (g, m, n, deg) in modes {
            match lines.last_mut() {
                Some(last) if (g - last.factor).abs() <= DEGENERATE_REL * g => {
                    last.labels.push((m, n));
                    last.degeneracy += deg;
                }
                _ => lines.push(ModeLine {
                    labels: vec![(m, n)],
                    factor: g,
                    degeneracy: deg,
                    coupling: 1.0,
                }),
            }
            if lines.len() > MAX_LINES {
                lines.pop();
                break;
            }
        }
        if tap.is_some() || pickup.is_some() {
            for line in &mut lines {
                line.coupling = self.coupling(line, tap, pickup);
            }
        }
        lines
    }

    /// Expected relative excitation of a line: |Σ φ(tap)·φ(pickup)| over its
    /// modes (a missing point counts as 1), capped at 1.
    fn coupling(&self, line: &ModeLine, tap: Option<Point>, pickup: Option<Point>) -> f64 {
        let mut sum = 0.0;
        let mut any = 0.0f64;
        for &(m, n) in &line.labels {
            let a = tap.map(|p| self.mode_shape(m, n, p)).unwrap_or(1.0);
            let b = pickup.map(|p| self.mode_shape(m, n, p)).unwrap_or(1.0);
            sum += a * b;
            any = any.max((a * b).abs());
        }
        // Degenerate rectangle modes share a frequency, so their responses
        // add; for a circle pair the radial factor alone applies.
        match self {
            Shape::Rectangle { .. } => sum.abs().min(1.0),
            Shape::Circle { .. } => any.min(1.0),
        }
    }
}

/// Tap and pickup points an unknown excitation may have, for
/// [`Shape::excitation_ensemble`]: a fixed low-discrepancy set (Halton
/// bases 2, 3, 5, 7) over the membrane, to which the places people
/// actually tap are added (the centre, a third across, a quarter across),
/// each with a pickup from the same set.
pub const ENSEMBLE_SIZE: usize = 96;

/// The Halton radical inverse of i in the given base, in 0..1.
fn halton(mut i: usize, base: usize) -> f64 {
    let (mut f, mut r) = (1.0, 0.0);
    while i > 0 {
        f /= base as f64;
        r += f * (i % base) as f64;
        i /= base;
    }
    r
}

impl Shape {
    /// Couplings of the first `n_lines` lines at each of
    /// [`ENSEMBLE_SIZE`] possible (tap, pickup) pairs, for matching when
    /// the tap point is not known: `out[e][k]` is line k's |response| in
    /// pair e, 0..1. A rectangle line sums φ(tap)·φ(pickup) over its
    /// modes; a circle pair (cos mθ and sin mθ members at one frequency)
    /// responds as J_m(j·r_t)·J_m(j·r_p)·cos(m·Δθ)/max|J_m|², Δθ the angle
    /// between the two points.
    pub fn excitation_ensemble(&self, lines: &[ModeLine], n_lines: usize) -> Vec<Vec<f64>> {
        let lines = &lines[..n_lines.min(lines.len())];
        // Structured taps first (rectangle: the centre, a third and a
        // quarter across; circle: the centre and rings from a third of the
        // radius out), each with four pickups, then Halton points. Points
        // are (x/Lx, y/Ly), or (r/a, θ/2π) for a circle.
        let structured: [(f64, f64); 6] = match self {
            Shape::Rectangle { .. } => [
                (0.5, 0.5),
                (1.0 / 3.0, 0.5),
                (0.5, 1.0 / 3.0),
                (0.25, 0.25),
                (1.0 / 3.0, 1.0 / 3.0),
                (0.2, 0.5),
            ],
            Shape::Circle { .. } => [
                (0.0, 0.0),
                (1.0 / 3.0, 0.0),
                (0.5, 0.0),
                (2.0 / 3.0, 0.0),
                (0.8, 0.0),
                (0.9, 0.0),
            ],
        };
        let per_structured = 4;
        let circle = matches!(self, Shape::Circle { .. });
        (0..ENSEMBLE_SIZE)
            .map(|e| {
                let i = e + 1;
                let (tu, tv) = match structured.get(e / per_structured) {
                    Some(&t) => t,
                    // Circle radii spread over the area (r = √u).
                    None if circle => (halton(i, 2).sqrt(), halton(i, 3)),
                    None => (halton(i, 2), halton(i, 3)),
                };
                let (pu, pv) = if circle {
                    (halton(i, 5).sqrt(), halton(i, 7))
                } else {
                    (halton(i, 5), halton(i, 7))
                };
                lines
                    .iter()
                    .map(|line| match *self {
                        Shape::Rectangle { .. } => line
                            .labels
                            .iter()
                            .map(|&(m, n)| {
                                let f = |u: f64, v: f64| {
                                    (m as f64 * PI * u).sin() * (n as f64 * PI * v).sin()
                                };
                                f(tu, tv) * f(pu, pv)
                            })
                            .sum::<f64>()
                            .abs()
                            .min(1.0),
                        Shape::Circle { .. } => line
                            .labels
                            .iter()
                            .map(|&(m, n)| {
                                let (rt, rp) = (tu, pu);
                                let dtheta = 2.0 * PI * (tv - pv);
                                let j = bessel::bessel_zero(m, n);
                                let norm = radial_max(m, j);
                                (bessel::bessel_j(m, j * rt) * bessel::bessel_j(m, j * rp)
                                    / (norm * norm)
                                    * (m as f64 * dtheta).cos())
                                .abs()
                            })
                            .fold(0.0, f64::max)
                            .min(1.0),
                    })
                    .collect()
            })
            .collect()
    }
}

/// Largest |J_m(x)| for x in 0..j (j a zero of J_m): the first maximum of
/// |J_m|, since the successive maxima of a Bessel function decrease
/// (DLMF 10.21(i)). It lies before j_{m,1}, so it is the same for every
/// zero; found once per order on a fine grid over [0, j_{m,1}] and cached.
fn radial_max(m: u32, _j: f64) -> f64 {
    use std::collections::HashMap;
    use std::sync::{Mutex, OnceLock};
    static CACHE: OnceLock<Mutex<HashMap<u32, f64>>> = OnceLock::new();
    let cache = CACHE.get_or_init(|| Mutex::new(HashMap::new()));
    let mut guard = cache.lock().unwrap_or_else(|e| e.into_inner());
    *guard.entry(m).or_insert_with(|| {
        let j1 = bessel::bessel_zero(m, 1);
        (0..=400)
            .map(|i| bessel::bessel_j(m, j1 * i as f64 / 400.0).abs())
            .fold(1e-12, f64::max)
    })
}

#[cfg(test)]
mod tests {

    #[test]
    fn weyl_cap_bounds_the_line_count() {
        // Weyl's leading term overcounts a fixed edge, so at the cap the
        // real count stays at or under MAX_LINES (and not far under).
        for shape in [
            rect(0.4, 0.3),
            rect(2.0, 0.1),
            Shape::Circle {
                radius: Meters(0.18),
            },
        ] {
            let lines = shape.lines(1e9, None, None);
            assert!(lines.len() <= MAX_LINES, "{}", lines.len());
            assert!(lines.len() > MAX_LINES / 2, "{}", lines.len());
        }
    }

    #[test]
    fn ensemble_silences_even_modes_at_the_centre_tap() {
        // The first ensemble points tap the centre (x, y) = (1/2, 1/2),
        // a node of every mode with an even index; (1,1) is excited.
        let shape = rect(0.4, 0.3);
        let lines = shape.lines(40.0, None, None);
        let ens = shape.excitation_ensemble(&lines, 20);
        assert_eq!(ens.len(), ENSEMBLE_SIZE);
        for (k, l) in lines.iter().take(20).enumerate() {
            let (m, n) = l.labels[0];
            let c = ens[0][k];
            assert!((0.0..=1.0).contains(&c));
            if m % 2 == 0 || n % 2 == 0 {
                assert!(c < 1e-9, "({m},{n}) {c}");
            }
        }
        assert!(ens[0][0] > 0.01, "(1,1) sounds at the centre");
        // A circle tapped at its centre sounds only the m = 0 modes.
        let circle = Shape::Circle {
            radius: Meters(0.2),
        };
        let cl = circle.lines(40.0, None, None);
        let ce = circle.excitation_ensemble(&cl, 12);
        for (k, l) in cl.iter().take(12).enumerate() {
            if l.labels[0].0 > 0 {
                assert!(ce[0][k] < 1e-9, "{:?} {}", l.labels, ce[0][k]);
            }
        }
    }

    use super::*;

    fn rect(w: f64, h: f64) -> Shape {
        Shape::Rectangle {
            width: Meters(w),
            height: Meters(h),
        }
    }

    #[test]
    fn square_ratios_are_the_textbook_ones() {
        // Square membrane: f(m,n)/f(1,1) = √((m² + n²)/2); f(1,2)/f(1,1) =
        // √(5/2) = 1.5811 (Fletcher & Rossing, §3.2).
        let lines = rect(0.3, 0.3).lines(20.0, None, None);
        let f1 = lines[0].factor;
        assert_eq!(lines[0].labels, vec![(1, 1)]);
        assert_eq!(lines[1].labels, vec![(1, 2), (2, 1)]);
        assert_eq!(lines[1].degeneracy, 2);
        assert!((lines[1].factor / f1 - 2.5f64.sqrt()).abs() < 1e-12);
        assert!((lines[2].factor / f1 - 2.0).abs() < 1e-12);
        // (1,7), (7,1) and (5,5) share √50: one line of three modes.
        let l50 = lines
            .iter()
            .find(|l| (l.factor / f1 - 25.0f64.sqrt()).abs() < 1e-9)
            .unwrap();
        assert_eq!(l50.degeneracy, 3, "{:?}", l50.labels);
    }

    #[test]
    fn circle_ratios_are_bessel_zero_ratios() {
        // f(1,1)/f(0,1) = 3.8317/2.4048 = 1.5933; f(2,1)/f(0,1) = 2.1355
        // (Fletcher & Rossing, Table 3.2 lists 1.59, 2.14, 2.30, ...).
        let c = Shape::Circle {
            radius: Meters(0.178),
        };
        let lines = c.lines(30.0, None, None);
        let f1 = lines[0].factor;
        assert_eq!(lines[0].labels, vec![(0, 1)]);
        assert_eq!(lines[1].labels, vec![(1, 1)]);
        assert_eq!(lines[1].degeneracy, 2);
        assert!((lines[1].factor / f1 - 1.593_340_505).abs() < 1e-8);
        assert_eq!(lines[2].labels, vec![(2, 1)]);
        assert!((lines[2].factor / f1 - 2.135_548_787).abs() < 1e-8);
        assert_eq!(lines[3].labels, vec![(0, 2)]);
        assert!((lines[3].factor / f1 - 2.295_417_267).abs() < 1e-8);
    }

    #[test]
    fn tap_on_a_nodal_line_silences_the_mode() {
        // Tapping the centre of a rectangle: every mode with an even index
        // has a nodal line through it.
        let r = rect(0.4, 0.3);
        let centre = Point {
            u: 0.5,
            v: Some(0.5),
        };
        let lines = r.lines(10.0, Some(centre), None);
        for l in &lines {
            let (m, n) = l.labels[0];
            if m % 2 == 0 || n % 2 == 0 {
                assert!(l.coupling < 1e-9, "{:?}", l);
            } else {
                assert!((l.coupling - 1.0).abs() < 1e-9);
            }
        }
        // Tapping a circle at its centre excites only m = 0.
        let c = Shape::Circle {
            radius: Meters(0.2),
        };
        for l in c.lines(20.0, Some(Point { u: 0.0, v: None }), None) {
            if l.labels[0].0 > 0 {
                assert!(l.coupling < 1e-9);
            }
        }
    }

    #[test]
    fn tension_and_wave_speed_round_trip() {
        let c = wave_speed(NewtonsPerMeter(2500.0), KgPerM2(0.26));
        let t = tension(c, KgPerM2(0.26));
        assert!((t.0 - 2500.0).abs() < 1e-9);
        // 400 mm × 300 mm at c = 98.06 m/s: f(1,1) = 204.3 Hz.
        let f = rect_mode_frequency_hz(0.4, 0.3, c.0, 1, 1);
        assert!((f - 0.5 * c.0 * (1.0 / 0.16 + 1.0 / 0.09f64).sqrt()).abs() < 1e-9);
    }
}
