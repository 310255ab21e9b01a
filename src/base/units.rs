//! Physical quantities and their parsing.
//!
//! Values cross module boundaries as newtypes in SI units: [`Hz`],
//! [`Meters`], [`KgPerM2`], [`KgPerM3`], [`NewtonsPerMeter`],
//! [`MetersPerSecond`]. User input is a number glued to a unit
//! (`400mm`, `0.26kg/m2`, `2500N/m`, `14in`); a bare number is refused so
//! that nobody fits a panel in the wrong unit.
//!
//! Conversion factors are exact by definition: 1 in = 0.0254 m
//! (international inch, 1959), 1 lbf = 4.448 221 615 260 5 N
//! (standard gravity 9.806 65 m/s² times 0.453 592 37 kg).

use crate::base::error::{Result, TonusError};
use serde::Serialize;

macro_rules! quantity {
    ($(#[$doc:meta])* $name:ident, $unit:literal) => {
        $(#[$doc])*
        #[derive(Debug, Clone, Copy, PartialEq, PartialOrd, Serialize)]
        pub struct $name(pub f64);

        impl $name {
            /// The SI unit symbol of this quantity.
            pub const UNIT: &'static str = $unit;
            /// The value in SI units.
            pub fn value(self) -> f64 {
                self.0
            }
        }

        impl std::fmt::Display for $name {
            fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
                write!(f, "{} {}", crate::base::units::sig(self.0, 5), $unit)
            }
        }
    };
}

quantity!(
    /// A frequency in hertz.
    Hz,
    "Hz"
);
quantity!(
    /// A length in metres.
    Meters,
    "m"
);
quantity!(
    /// An areal (surface) density in kg/m².
    KgPerM2,
    "kg/m²"
);
quantity!(
    /// A volume density in kg/m³.
    KgPerM3,
    "kg/m³"
);
quantity!(
    /// A membrane tension per unit length (stress resultant) in N/m.
    NewtonsPerMeter,
    "N/m"
);
quantity!(
    /// A transverse wave speed in m/s.
    MetersPerSecond,
    "m/s"
);

/// One inch in metres (exact by definition).
pub const INCH_M: f64 = 0.0254;
/// One pound-force in newtons (exact by definition).
pub const POUND_FORCE_N: f64 = 4.448_221_615_260_5;

/// Units in which a tension can be written or reported.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub enum TensionUnit {
    /// Newtons per metre (SI).
    NewtonPerMeter,
    /// Newtons per centimetre, the screen-printing trade's unit.
    NewtonPerCentimeter,
    /// Kilonewtons per metre.
    KilonewtonPerMeter,
    /// Pound-force per inch.
    PoundForcePerInch,
}

impl TensionUnit {
    /// How many N/m one of this unit is.
    pub fn newtons_per_meter(self) -> f64 {
        match self {
            TensionUnit::NewtonPerMeter => 1.0,
            TensionUnit::NewtonPerCentimeter => 100.0,
            TensionUnit::KilonewtonPerMeter => 1000.0,
            TensionUnit::PoundForcePerInch => POUND_FORCE_N / INCH_M,
        }
    }

    /// The symbol printed after values.
    pub fn symbol(self) -> &'static str {
        match self {
            TensionUnit::NewtonPerMeter => "N/m",
            TensionUnit::NewtonPerCentimeter => "N/cm",
            TensionUnit::KilonewtonPerMeter => "kN/m",
            TensionUnit::PoundForcePerInch => "lbf/in",
        }
    }

    /// Parses a unit symbol such as `N/cm`.
    pub fn parse(key: &str, text: &str) -> Result<TensionUnit> {
        match normalise(text).as_str() {
            "n/m" => Ok(TensionUnit::NewtonPerMeter),
            "n/cm" => Ok(TensionUnit::NewtonPerCentimeter),
            "kn/m" => Ok(TensionUnit::KilonewtonPerMeter),
            "lbf/in" | "lb/in" => Ok(TensionUnit::PoundForcePerInch),
            _ => Err(TonusError::BadQuantity {
                key: key.to_string(),
                value: text.to_string(),
                expected: "a tension unit (N/m, N/cm, kN/m, lbf/in)".into(),
                example: "N/cm".into(),
            }),
        }
    }
}

/// Formats `x` with `digits` significant digits, without exponent for
/// ordinary magnitudes.
pub fn sig(x: f64, digits: usize) -> String {
    if !x.is_finite() {
        return format!("{x}");
    }
    if x == 0.0 {
        return "0".into();
    }
    let mag = x.abs().log10().floor() as i32;
    if !(-4..=7).contains(&mag) {
        return format!("{:.*e}", digits.saturating_sub(1), x);
    }
    let decimals = (digits as i32 - 1 - mag).max(0) as usize;
    format!("{x:.decimals$}")
}

fn normalise(s: &str) -> String {
    s.trim()
        .to_lowercase()
        .replace(['²', '^'], "")
        .replace('³', "3")
        .replace(' ', "")
}

/// Splits `"400mm"` into `(400.0, "mm")`.
fn split_number(key: &str, text: &str, expected: &str, example: &str) -> Result<(f64, String)> {
    let t = text.trim();
    let bad = || TonusError::BadQuantity {
        key: key.to_string(),
        value: text.to_string(),
        expected: expected.to_string(),
        example: example.to_string(),
    };
    let end = t
        .char_indices()
        .find(|&(i, c)| {
            !(c.is_ascii_digit()
                || c == '.'
                || c == '+'
                || c == '-'
                || ((c == 'e' || c == 'E')
                    && t[i + 1..]
                        .chars()
                        .next()
                        .is_some_and(|d| d.is_ascii_digit() || d == '-' || d == '+')))
        })
        .map(|(i, _)| i)
        .unwrap_or(t.len());
    let number: f64 = t[..end].parse().map_err(|_| bad())?;
    if !number.is_finite() {
        return Err(bad());
    }
    let unit = normalise(&t[end..]);
    if unit.is_empty() {
        return Err(bad());
    }
    Ok((number, unit))
}

fn require_positive(key: &str, text: &str, v: f64) -> Result<f64> {
    if v > 0.0 && v.is_finite() {
        Ok(v)
    } else {
        Err(TonusError::OutOfRange {
            key: key.to_string(),
            value: text.to_string(),
            why: "it must be greater than zero".into(),
        })
    }
}

/// Parses a length: `mm`, `cm`, `m`, `in`.
pub fn parse_length(key: &str, text: &str) -> Result<Meters> {
    let expected = "a length with unit (mm, cm, m, in)";
    let (v, unit) = split_number(key, text, expected, "400mm")?;
    let factor = match unit.as_str() {
        "mm" => 1e-3,
        "cm" => 1e-2,
        "m" => 1.0,
        "in" | "\"" => INCH_M,
        _ => return Err(unit_error(key, text, expected, "400mm")),
    };
    Ok(Meters(require_positive(key, text, v * factor)?))
}

/// Parses an areal density: `kg/m2`, `g/m2`.
pub fn parse_areal_density(key: &str, text: &str) -> Result<KgPerM2> {
    let expected = "an areal density with unit (kg/m2, g/m2)";
    let (v, unit) = split_number(key, text, expected, "0.26kg/m2")?;
    let factor = match unit.as_str() {
        "kg/m2" => 1.0,
        "g/m2" | "gsm" => 1e-3,
        _ => return Err(unit_error(key, text, expected, "0.26kg/m2")),
    };
    Ok(KgPerM2(require_positive(key, text, v * factor)?))
}

/// Parses a volume density: `kg/m3`, `g/cm3`.
pub fn parse_density(key: &str, text: &str) -> Result<KgPerM3> {
    let expected = "a density with unit (kg/m3, g/cm3)";
    let (v, unit) = split_number(key, text, expected, "1390kg/m3")?;
    let factor = match unit.as_str() {
        "kg/m3" => 1.0,
        "g/cm3" | "g/cc" => 1000.0,
        _ => return Err(unit_error(key, text, expected, "1390kg/m3")),
    };
    Ok(KgPerM3(require_positive(key, text, v * factor)?))
}

/// Parses a tension: `N/m`, `N/cm`, `kN/m`, `lbf/in`.
pub fn parse_tension(key: &str, text: &str) -> Result<NewtonsPerMeter> {
    let expected = "a tension with unit (N/m, N/cm, kN/m, lbf/in)";
    let (v, unit) = split_number(key, text, expected, "2500N/m")?;
    let u =
        TensionUnit::parse(key, &unit).map_err(|_| unit_error(key, text, expected, "2500N/m"))?;
    Ok(NewtonsPerMeter(require_positive(
        key,
        text,
        v * u.newtons_per_meter(),
    )?))
}

/// Parses a frequency: `Hz`, `kHz`.
pub fn parse_frequency(key: &str, text: &str) -> Result<Hz> {
    let expected = "a frequency with unit (Hz, kHz)";
    let (v, unit) = split_number(key, text, expected, "180Hz")?;
    let factor = match unit.as_str() {
        "hz" => 1.0,
        "khz" => 1e3,
        _ => return Err(unit_error(key, text, expected, "180Hz")),
    };
    Ok(Hz(require_positive(key, text, v * factor)?))
}

/// Parses a duration: `s`, `ms`.
pub fn parse_duration_s(key: &str, text: &str) -> Result<f64> {
    let expected = "a duration with unit (s, ms)";
    let (v, unit) = split_number(key, text, expected, "1.5s")?;
    let factor = match unit.as_str() {
        "s" => 1.0,
        "ms" => 1e-3,
        _ => return Err(unit_error(key, text, expected, "1.5s")),
    };
    require_positive(key, text, v * factor)
}

fn unit_error(key: &str, text: &str, expected: &str, example: &str) -> TonusError {
    TonusError::BadQuantity {
        key: key.to_string(),
        value: text.to_string(),
        expected: expected.to_string(),
        example: example.to_string(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    // Tolerance: the conversions are single multiplications, so agreement
    // to 1e-12 relative only allows for floating-point rounding.
    fn close(a: f64, b: f64) -> bool {
        (a - b).abs() <= 1e-12 * b.abs().max(1.0)
    }

    #[test]
    fn lengths_in_all_units() {
        assert!(close(parse_length("w", "400mm").unwrap().0, 0.4));
        assert!(close(parse_length("w", "30 cm").unwrap().0, 0.3));
        assert!(close(parse_length("w", "14in").unwrap().0, 0.3556));
        assert!(close(parse_length("w", "1.5e-1m").unwrap().0, 0.15));
    }

    #[test]
    fn bare_numbers_and_wrong_units_are_refused() {
        assert!(parse_length("width", "400").is_err());
        assert!(parse_length("width", "400kg").is_err());
        assert!(parse_areal_density("areal-density", "0.26kg/m3").is_err());
        let e = parse_length("width", "-3mm").unwrap_err().to_string();
        assert!(e.contains("width"), "{e}");
        assert!(parse_areal_density("a", "0kg/m2").is_err());
    }

    #[test]
    fn tension_units() {
        assert!(close(parse_tension("t", "25N/cm").unwrap().0, 2500.0));
        assert!(close(parse_tension("t", "2.5kN/m").unwrap().0, 2500.0));
        // 1 lbf/in = 4.4482216152605 N / 0.0254 m = 175.126835246 N/m.
        let lbf = parse_tension("t", "1lbf/in").unwrap().0;
        assert!((lbf - 175.126_835_246).abs() < 1e-6);
        assert!(close(parse_areal_density("a", "260g/m2").unwrap().0, 0.26));
        assert!(close(parse_density("d", "1.39g/cm3").unwrap().0, 1390.0));
        assert!(close(parse_frequency("f", "0.18kHz").unwrap().0, 180.0));
    }

    #[test]
    fn significant_digits() {
        assert_eq!(sig(1234.567, 4), "1235");
        assert_eq!(sig(0.012345, 3), "0.0123");
        assert_eq!(sig(12.0, 3), "12.0");
    }
}
