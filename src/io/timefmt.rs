//! Reading times. Only this layer knows about UTC offsets and time zones: everything it returns
//! is UTC seconds since 1970-01-01T00:00:00Z as `f64`.
//!
//! Accepted forms:
//! * RFC 3339 / ISO 8601 with an offset: `2026-06-14T09:30:00Z`, `2026-06-14T10:30:00.25+01:00`
//!   (a space may stand for the `T`);
//! * the same without offset (`2026-06-14T09:30:00`), only when the caller supplies the offset to
//!   read it with (the project's `naive_time_utc_offset`); never guessed;
//! * Unix seconds (`1781429400.25`) where a column is declared so.

use chrono::{DateTime, FixedOffset, NaiveDateTime};

/// How a time column is written.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Deserialize, serde::Serialize)]
#[serde(rename_all = "snake_case")]
#[non_exhaustive]
pub enum TimeFormat {
    /// ISO 8601 / RFC 3339 text.
    Iso8601,
    /// Seconds since 1970-01-01T00:00:00Z.
    UnixS,
}

/// Why a time or an offset cannot be read. The texts quote what was found.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
#[non_exhaustive]
pub enum TimeError {
    /// Not an offset of the accepted forms.
    #[error("expected a UTC offset like +01:00 or -03:30, found '{found}'")]
    BadOffset {
        /// The text.
        found: String,
    },
    /// More than 18 hours, or more than 59 minutes.
    #[error("UTC offset out of range: '{found}'")]
    OffsetOutOfRange {
        /// The text.
        found: String,
    },
    /// Not a number of Unix seconds.
    #[error("expected Unix seconds, found '{found}'")]
    NotUnixSeconds {
        /// The text.
        found: String,
    },
    /// A number of Unix seconds that is not finite.
    #[error("expected finite Unix seconds, found '{found}'")]
    NonFiniteUnixSeconds {
        /// The text.
        found: String,
    },
    /// An empty field where an ISO 8601 time was expected.
    #[error("expected an ISO 8601 time, found an empty field")]
    Empty,
    /// Not an ISO 8601 time.
    #[error("expected an ISO 8601 time like 2026-06-14T09:30:00Z, found '{found}'")]
    NotIso8601 {
        /// The text.
        found: String,
    },
    /// A time without an offset, and none to read it with.
    #[error("time '{time}' has no UTC offset and none is configured (set naive_time_utc_offset)")]
    NoOffset {
        /// The text.
        time: String,
    },
    /// A time without an offset that does not exist at the configured offset.
    #[error("time '{time}' cannot be placed at offset {offset}")]
    NotAtOffset {
        /// The text.
        time: String,
        /// The configured offset.
        offset: FixedOffset,
    },
}

/// Parses a UTC offset written `+01:00`, `-03:30`, `+0100`, `Z` or `UTC`.
pub fn parse_offset(s: &str) -> Result<FixedOffset, TimeError> {
    let t = s.trim();
    if t.eq_ignore_ascii_case("z") || t.eq_ignore_ascii_case("utc") {
        return Ok(FixedOffset::east_opt(0).expect("zero offset"));
    }
    let bad = || TimeError::BadOffset { found: s.into() };
    let (sign, rest) = match t.as_bytes().first() {
        Some(b'+') => (1, &t[1..]),
        Some(b'-') => (-1, &t[1..]),
        _ => return Err(bad()),
    };
    let digits: String = rest.chars().filter(|c| *c != ':').collect();
    if digits.len() != 4 || !digits.chars().all(|c| c.is_ascii_digit()) {
        return Err(bad());
    }
    let h: i32 = digits[..2].parse().map_err(|_| bad())?;
    let m: i32 = digits[2..].parse().map_err(|_| bad())?;
    let out_of_range = || TimeError::OffsetOutOfRange { found: s.into() };
    if h > 18 || m > 59 {
        return Err(out_of_range());
    }
    FixedOffset::east_opt(sign * (h * 3600 + m * 60)).ok_or_else(out_of_range)
}

fn to_seconds(dt: DateTime<FixedOffset>) -> f64 {
    dt.timestamp() as f64 + dt.timestamp_subsec_nanos() as f64 * 1e-9
}

/// Parses one time field to UTC seconds.
///
/// `naive_offset` is the offset to apply to a time written without one; `None` makes such a time
/// an error.
pub fn parse_time(
    field: &str,
    format: TimeFormat,
    naive_offset: Option<FixedOffset>,
) -> Result<f64, TimeError> {
    let s = field.trim();
    match format {
        TimeFormat::UnixS => {
            let v: f64 = s
                .parse()
                .map_err(|_| TimeError::NotUnixSeconds { found: s.into() })?;
            if !v.is_finite() {
                return Err(TimeError::NonFiniteUnixSeconds { found: s.into() });
            }
            Ok(v)
        }
        TimeFormat::Iso8601 => parse_iso(s, naive_offset),
    }
}

fn parse_iso(s: &str, naive_offset: Option<FixedOffset>) -> Result<f64, TimeError> {
    if s.is_empty() {
        return Err(TimeError::Empty);
    }
    if let Ok(dt) = DateTime::parse_from_rfc3339(s) {
        return Ok(to_seconds(dt));
    }
    // A space instead of T, or an offset without a colon.
    let normal: String = s.replacen(' ', "T", 1);
    if let Ok(dt) = DateTime::parse_from_rfc3339(&normal) {
        return Ok(to_seconds(dt));
    }
    if let Ok(dt) = DateTime::parse_from_str(&normal, "%Y-%m-%dT%H:%M:%S%.f%z") {
        return Ok(to_seconds(dt));
    }
    let naive = NaiveDateTime::parse_from_str(&normal, "%Y-%m-%dT%H:%M:%S%.f")
        .or_else(|_| NaiveDateTime::parse_from_str(&normal, "%Y-%m-%dT%H:%M"))
        .map_err(|_| TimeError::NotIso8601 { found: s.into() })?;
    let Some(off) = naive_offset else {
        return Err(TimeError::NoOffset { time: s.into() });
    };
    let dt = naive
        .and_local_timezone(off)
        .single()
        .ok_or_else(|| TimeError::NotAtOffset {
            time: s.into(),
            offset: off,
        })?;
    Ok(to_seconds(dt))
}

#[cfg(test)]
mod tests {
    use super::*;

    // 2026-06-14T09:30:00Z = 1781429400 s (20618 days × 86400 + 34200; 20618 days from
    // 1970-01-01 to 2026-06-14 counted with 14 leap days 1972..2024).
    const T0: f64 = 1_781_429_400.0;

    #[test]
    fn offsets_and_forms() {
        let z = Some(FixedOffset::east_opt(0).unwrap());
        assert_eq!(
            parse_time("2026-06-14T09:30:00Z", TimeFormat::Iso8601, None),
            Ok(T0)
        );
        assert_eq!(
            parse_time("2026-06-14 09:30:00Z", TimeFormat::Iso8601, None),
            Ok(T0)
        );
        assert_eq!(
            parse_time("2026-06-14T10:30:00+01:00", TimeFormat::Iso8601, None),
            Ok(T0)
        );
        assert_eq!(
            parse_time("2026-06-14T10:30:00+0100", TimeFormat::Iso8601, None),
            Ok(T0)
        );
        assert_eq!(
            parse_time("2026-06-14T09:30:00.25Z", TimeFormat::Iso8601, None),
            Ok(T0 + 0.25)
        );
        assert_eq!(
            parse_time("2026-06-14T09:30:00", TimeFormat::Iso8601, z),
            Ok(T0)
        );
        let plus2 = Some(parse_offset("+02:00").unwrap());
        assert_eq!(
            parse_time("2026-06-14T11:30:00", TimeFormat::Iso8601, plus2),
            Ok(T0)
        );
        assert_eq!(parse_time("1781429400", TimeFormat::UnixS, None), Ok(T0));
    }

    #[test]
    fn naive_time_without_configured_offset_is_an_error() {
        let e = parse_time("2026-06-14T09:30:00", TimeFormat::Iso8601, None).unwrap_err();
        assert_eq!(
            e,
            TimeError::NoOffset {
                time: "2026-06-14T09:30:00".into()
            }
        );
        assert_eq!(
            e.to_string(),
            "time '2026-06-14T09:30:00' has no UTC offset and none is configured (set naive_time_utc_offset)"
        );
    }

    #[test]
    fn malformed_times_are_errors() {
        for bad in [
            "",
            "yesterday",
            "2026-13-01T00:00:00Z",
            "2026-06-14T25:00:00Z",
        ] {
            assert!(parse_time(bad, TimeFormat::Iso8601, None).is_err(), "{bad}");
        }
        assert!(parse_time("NaN", TimeFormat::UnixS, None).is_err());
        assert!(parse_offset("1:00").is_err());
        assert!(parse_offset("+25:00").is_err());
        assert_eq!(parse_offset("-03:30").unwrap().local_minus_utc(), -12600);
    }
}

#[cfg(test)]
mod properties {
    use super::*;
    use proptest::prelude::*;

    proptest! {
        /// A time written by ebbwise (ISO 8601 UTC, millisecond precision) reads back to the same
        /// instant, and so does the same instant written with any fixed offset.
        #[test]
        fn written_times_read_back(ms in 0i64..4_102_444_800_000, off_min in -720i32..=840) {
            let t = ms as f64 / 1000.0;
            let text = crate::compute::utc_label(t);
            let back = parse_time(&text, TimeFormat::Iso8601, None).unwrap();
            prop_assert!((back - t).abs() < 5e-4, "{} -> {} -> {}", t, text, back);
            let off = FixedOffset::east_opt(off_min * 60).unwrap();
            let local = chrono::DateTime::from_timestamp_millis(ms).unwrap().with_timezone(&off);
            let text = local.format("%Y-%m-%dT%H:%M:%S%.3f%:z").to_string();
            let back = parse_time(&text, TimeFormat::Iso8601, None).unwrap();
            prop_assert!((back - t).abs() < 5e-4, "{}", text);
            let naive = local.format("%Y-%m-%dT%H:%M:%S%.3f").to_string();
            prop_assert!((parse_time(&naive, TimeFormat::Iso8601, Some(off)).unwrap() - t).abs() < 5e-4);
        }
    }
}
