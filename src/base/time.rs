//! Time in UTC as milliseconds since the Unix epoch, with RFC 3339 text
//! both ways. One clock read ([`UtcTime::now`]) stamps a recording's CSV
//! row and its history row alike.

use crate::base::error::{Result, TonusError};
use std::time::{SystemTime, UNIX_EPOCH};

/// A time in UTC, as milliseconds since 1970-01-01T00:00:00Z (Unix time,
/// leap seconds not counted, as in POSIX).
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub struct UtcTime(pub i64);

/// Days since 1970-01-01 of a proleptic Gregorian date (H. Hinnant,
/// "chrono-Compatible Low-Level Date Algorithms", `days_from_civil`).
fn days_from_civil(y: i64, m: i64, d: i64) -> i64 {
    let y = if m <= 2 { y - 1 } else { y };
    let era = y.div_euclid(400);
    let yoe = y - era * 400;
    let mp = (m + 9) % 12;
    let doy = (153 * mp + 2) / 5 + d - 1;
    let doe = yoe * 365 + yoe / 4 - yoe / 100 + doy;
    era * 146_097 + doe - 719_468
}

/// The date of a day count since 1970-01-01 (Hinnant, `civil_from_days`).
fn civil_from_days(z: i64) -> (i64, i64, i64) {
    let z = z + 719_468;
    let era = z.div_euclid(146_097);
    let doe = z - era * 146_097;
    let yoe = (doe - doe / 1460 + doe / 36_524 - doe / 146_096) / 365;
    let doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
    let mp = (5 * doy + 2) / 153;
    let d = doy - (153 * mp + 2) / 5 + 1;
    let m = if mp < 10 { mp + 3 } else { mp - 9 };
    let y = yoe + era * 400 + i64::from(m <= 2);
    (y, m, d)
}

fn days_in_month(y: i64, m: i64) -> i64 {
    let leap = (y % 4 == 0 && y % 100 != 0) || y % 400 == 0;
    match m {
        1 | 3 | 5 | 7 | 8 | 10 | 12 => 31,
        4 | 6 | 9 | 11 => 30,
        2 if leap => 29,
        _ => 28,
    }
}

impl UtcTime {
    /// The system clock now (1970 if the clock is set before 1970).
    pub fn now() -> UtcTime {
        UtcTime::from_system_time(SystemTime::now())
    }

    /// From a [`SystemTime`], truncated to the millisecond.
    pub fn from_system_time(t: SystemTime) -> UtcTime {
        match t.duration_since(UNIX_EPOCH) {
            Ok(d) => UtcTime(i64::try_from(d.as_millis()).unwrap_or(i64::MAX)),
            Err(e) => UtcTime(-i64::try_from(e.duration().as_millis()).unwrap_or(i64::MAX)),
        }
    }

    /// RFC 3339 in UTC with milliseconds: `YYYY-MM-DDTHH:MM:SS.mmmZ`.
    /// Fixed width for years 0000–9999, so text order is time order.
    pub fn to_rfc3339(self) -> String {
        let days = self.0.div_euclid(86_400_000);
        let ms_of_day = self.0.rem_euclid(86_400_000);
        let (y, mo, d) = civil_from_days(days);
        let s = ms_of_day / 1000;
        format!(
            "{y:04}-{mo:02}-{d:02}T{:02}:{:02}:{:02}.{:03}Z",
            s / 3600,
            (s / 60) % 60,
            s % 60,
            ms_of_day % 1000
        )
    }

    /// Parses RFC 3339 (`2025-03-01T08:15:02Z`, `2025-03-01T09:15:02.5+01:00`,
    /// `t`/`z` or a space as separators allowed) or a bare date
    /// `2025-03-01` (midnight UTC). Fractions finer than a millisecond are
    /// truncated; `key` names the flag or field in the error.
    ///
    /// # Errors
    /// [`TonusError::BadQuantity`] naming `key` and the text.
    pub fn parse(key: &str, text: &str) -> Result<UtcTime> {
        let bad = || TonusError::BadQuantity {
            key: key.to_string(),
            value: text.to_string(),
            expected: "an RFC 3339 time or a date".into(),
            example: "2025-03-01T08:00:00Z (or 2025-03-01)".into(),
        };
        let s = text.trim().as_bytes();
        let num = |a: usize, b: usize| -> Option<i64> {
            let part = s.get(a..b)?;
            if part.iter().all(u8::is_ascii_digit) {
                std::str::from_utf8(part).ok()?.parse().ok()
            } else {
                None
            }
        };
        let y = num(0, 4).ok_or_else(bad)?;
        let mo = num(5, 7).ok_or_else(bad)?;
        let d = num(8, 10).ok_or_else(bad)?;
        if s.get(4) != Some(&b'-') || s.get(7) != Some(&b'-') {
            return Err(bad());
        }
        if !(1..=12).contains(&mo) || d < 1 || d > days_in_month(y, mo) {
            return Err(bad());
        }
        let day_ms = days_from_civil(y, mo, d) * 86_400_000;
        if s.len() == 10 {
            return Ok(UtcTime(day_ms));
        }
        if !matches!(s.get(10), Some(b'T' | b't' | b' ')) {
            return Err(bad());
        }
        let h = num(11, 13).ok_or_else(bad)?;
        let mi = num(14, 16).ok_or_else(bad)?;
        let se = num(17, 19).ok_or_else(bad)?;
        if s.get(13) != Some(&b':') || s.get(16) != Some(&b':') {
            return Err(bad());
        }
        // 60 allows a leap second, counted as the next second's start.
        if h > 23 || mi > 59 || se > 60 {
            return Err(bad());
        }
        let mut i = 19;
        let mut ms = 0i64;
        if s.get(i) == Some(&b'.') {
            i += 1;
            let start = i;
            while s.get(i).is_some_and(u8::is_ascii_digit) {
                if i - start < 3 {
                    ms = ms * 10 + i64::from(s[i] - b'0');
                }
                i += 1;
            }
            if i == start {
                return Err(bad());
            }
            for _ in (i - start)..3 {
                ms *= 10;
            }
        }
        let offset_min = match s.get(i) {
            Some(b'Z' | b'z') if s.len() == i + 1 => 0,
            Some(&sign @ (b'+' | b'-')) if s.len() == i + 6 && s[i + 3] == b':' => {
                let oh = num(i + 1, i + 3).ok_or_else(bad)?;
                let om = num(i + 4, i + 6).ok_or_else(bad)?;
                if oh > 23 || om > 59 {
                    return Err(bad());
                }
                let m = oh * 60 + om;
                if sign == b'-' {
                    -m
                } else {
                    m
                }
            }
            _ => return Err(bad()),
        };
        Ok(UtcTime(
            day_ms + ((h * 60 + mi - offset_min) * 60 + se) * 1000 + ms,
        ))
    }
}

impl std::fmt::Display for UtcTime {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(&self.to_rfc3339())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn rfc3339_known_dates() {
        // Checked against GNU date: `date -u -d @SECONDS +%FT%TZ`.
        let cases = [
            (0i64, "1970-01-01T00:00:00.000Z"),
            (951_782_400_000, "2000-02-29T00:00:00.000Z"),
            (1_709_210_096_789, "2024-02-29T12:34:56.789Z"),
            (4_102_444_800_000, "2100-01-01T00:00:00.000Z"),
            (-1_000, "1969-12-31T23:59:59.000Z"),
        ];
        for (ms, text) in cases {
            assert_eq!(UtcTime(ms).to_rfc3339(), text);
            assert_eq!(UtcTime::parse("t", text).unwrap(), UtcTime(ms), "{text}");
        }
        // Offsets and other accepted forms.
        let t = UtcTime(1_709_210_096_000);
        assert_eq!(UtcTime::parse("t", "2024-02-29T13:34:56+01:00").unwrap(), t);
        assert_eq!(UtcTime::parse("t", "2024-02-29t07:04:56-05:30").unwrap(), t);
        assert_eq!(UtcTime::parse("t", "2024-02-29 12:34:56z").unwrap(), t);
        assert_eq!(
            UtcTime::parse("t", "2024-02-29T12:34:56.7891Z").unwrap(),
            UtcTime(1_709_210_096_789)
        );
        assert_eq!(
            UtcTime::parse("t", "2024-02-29").unwrap(),
            UtcTime(1_709_164_800_000)
        );
        for bad in [
            "2023-02-29",
            "2024-13-01",
            "2024-02-29T25:00:00Z",
            "2024-02-29T12:34:56",
            "2024-02-29T12:34:56.Z",
            "yesterday",
            "",
            "2024-02-29T12:34:56+0100",
        ] {
            let e = UtcTime::parse("--since", bad).unwrap_err().to_string();
            assert!(e.contains("--since"), "{bad}: {e}");
        }
        // A day-by-day walk agrees with the month lengths.
        let mut day = days_from_civil(1999, 12, 31);
        for y in 2000..2005 {
            for m in 1..=12 {
                for d in 1..=days_in_month(y, m) {
                    day += 1;
                    assert_eq!(civil_from_days(day), (y, m, d));
                }
            }
        }
        let now = UtcTime::now();
        assert!(now.0 > 1_700_000_000_000);
    }
}
