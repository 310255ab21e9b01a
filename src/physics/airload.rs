//! Air loading of a light membrane: each mode drags along air on both
//! sides, which adds mass and lowers its frequency.
//!
//! For a mode of structural wavenumber k, the air on one side moves like
//! the near field of a plane wave pattern of that wavenumber and adds an
//! acoustic mass of about ρ₀/k per unit area (the evanescent field of a
//! surface wave with k above the acoustic wavenumber; see N. H. Fletcher
//! and T. D. Rossing, "The Physics of Musical Instruments", 2nd ed.,
//! Springer 1998, §3.6 and §18.1, and P. M. Morse and K. U. Ingard,
//! "Theoretical Acoustics", §10.4, radiation from a plane surface wave).
//! With both sides in air the effective areal density is σ + 2ρ₀/k, so
//!
//! f = f_vacuum / √(1 + 2ρ₀/(k·σ)),  k = 2π·f_vacuum/c = 2π·g,
//!
//! with g the line's frequency factor (f_vacuum = c·g). The approximation
//! ignores the finite baffle, the drum shell and radiation damping; it
//! is best for the higher modes (k·a ≫ 1) and overstates the lowering of
//! the (0,1) mode of a kettle or a closed shell. Expect the mode ratios to
//! move the right way and by roughly the right amount (tens of percent on
//! a 0.2 kg/m² film), not a calibrated correction: calibrate against a
//! gauge where the number matters.

use crate::physics::membrane::ModeLine;

/// Density of air at 20 °C and 101.325 kPa, kg/m³ (ISO 2533 standard
/// atmosphere at 20 °C, common practice).
pub const AIR_DENSITY_KG_PER_M3: f64 = 1.204;

/// Factor by which air loading lowers a line of vacuum factor `g` (1/m) on
/// a membrane of areal density `sigma` (kg/m²): 1/√(1 + 2ρ₀/(2πg·σ)).
pub fn loading_factor(g: f64, sigma: f64) -> f64 {
    let k = 2.0 * std::f64::consts::PI * g;
    1.0 / (1.0 + 2.0 * AIR_DENSITY_KG_PER_M3 / (k * sigma)).sqrt()
}

/// The lines with air-loaded factors (f = c_vacuum·g′), re-sorted.
pub fn loaded_lines(lines: &[ModeLine], sigma: f64) -> Vec<ModeLine> {
    let mut out: Vec<ModeLine> = lines
        .iter()
        .map(|l| ModeLine {
            factor: l.factor * loading_factor(l.factor, sigma),
            ..l.clone()
        })
        .collect();
    out.sort_by(|a, b| a.factor.total_cmp(&b.factor));
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::base::units::Meters;
    use crate::physics::membrane::Shape;

    #[test]
    fn light_head_ratios_move_towards_the_measured_ones() {
        // A 14 in head of 0.26 kg/m² at the wave speed of about 3000 N/m:
        // the ideal (1,1)/(0,1) ratio is 1.593; air loading lowers (0,1)
        // most, so the ratio must rise (measured air-loaded heads show
        // (1,1)/(0,1) near 1.7 or more; Fletcher & Rossing §18.1, from
        // memory of the figures, not a check value).
        let lines = Shape::Circle {
            radius: Meters(0.1778),
        }
        .lines(30.0, None, None);
        let loaded = loaded_lines(&lines, 0.26);
        let ideal = lines[1].factor / lines[0].factor;
        let air = loaded[1].factor / loaded[0].factor;
        assert!((ideal - 1.5933).abs() < 1e-3);
        assert!(air > ideal + 0.05, "{air}");
        // Heavy membranes hardly notice the air.
        let heavy = loaded_lines(&lines, 50.0);
        assert!((heavy[1].factor / heavy[0].factor - ideal).abs() < 0.01);
    }

    #[test]
    fn loading_factor_limits() {
        assert!((loading_factor(1e6, 0.2) - 1.0).abs() < 1e-5);
        // g = 1/m: k = 2π/m, 2ρ₀/(kσ) = 2.408/(2π·0.2) = 1.9164, factor
        // 1/√2.9164 = 0.58557.
        assert!((loading_factor(1.0, 0.2) - 0.585_57).abs() < 1e-4);
    }
}
