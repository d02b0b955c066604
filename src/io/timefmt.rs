//! Reading and writing times. Only this layer knows about UTC offsets and time zones: everything
//! it returns is UTC seconds since 1970-01-01T00:00:00Z as `f64`, and everything it writes is UTC.
//!
//! Written forms:
//! * in data (CSV columns, JSON and TOML values): [`push_utc`] / [`utc_time`], ISO 8601 UTC to
//!   the millisecond, `2026-06-14T09:30:00.000Z`, or to the microsecond
//!   (`2026-06-14T09:30:00.250001Z`) when the time is not a whole millisecond;
//! * in messages and reasons: [`utc_label`], `2026-06-14T09:30:00Z`, with milliseconds only when
//!   they are not zero.
//!
//! Accepted forms:
//! * RFC 3339 / ISO 8601 with an offset: `2026-06-14T09:30:00Z`, `2026-06-14T10:30:00.25+01:00`
//!   (a space may stand for the `T`);
//! * the same without offset (`2026-06-14T09:30:00`), only when the caller supplies the offset to
//!   read it with (the project's `naive_time_utc_offset`); never guessed;
//! * Unix seconds (`1781429400.25`) where a column is declared so.

use chrono::{DateTime, Datelike, FixedOffset, NaiveDateTime, Timelike};

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
    /// A leap second (second 60) where none can be: only the last second of 30 June or 31
    /// December UTC can be one.
    #[error("time '{found}' has second 60, a leap second, which can only be 23:59:60 UTC on 30 June or 31 December")]
    NoSuchLeapSecond {
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
    let t_s = parse_iso_any_second(s, naive_offset)?;
    // chrono reads second 60 at the end of any minute; a leap second is only ever inserted at
    // the end of a UTC day in June or December (IERS practice; in fact all have been on 30 June
    // or 31 December). It is read as the first instant of the next day.
    if s.contains(":60") {
        use chrono::Datelike;
        let day = chrono::DateTime::from_timestamp(t_s.floor() as i64 - 1, 0);
        let ok = day.is_some_and(|d| {
            let (m, dd) = (d.month(), d.day());
            d.format("%H:%M:%S").to_string() == "23:59:59"
                && ((m, dd) == (6, 30) || (m, dd) == (12, 31))
        });
        if !ok {
            return Err(TimeError::NoSuchLeapSecond { found: s.into() });
        }
    }
    Ok(t_s)
}

fn parse_iso_any_second(s: &str, naive_offset: Option<FixedOffset>) -> Result<f64, TimeError> {
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

/// Formats UTC seconds as an ISO 8601 label for messages: `2026-06-14T09:30:00Z`, with
/// milliseconds (`…:00.750Z`) only when they are not zero.
pub fn utc_label(t_s: f64) -> String {
    let ms = (t_s * 1000.0).round();
    if !ms.is_finite() || ms.abs() > 8.0e15 {
        return format!("{t_s} s since 1970");
    }
    match chrono::DateTime::from_timestamp_millis(ms as i64) {
        Some(dt) if (ms as i64) % 1000 == 0 => dt.format("%Y-%m-%dT%H:%M:%SZ").to_string(),
        Some(dt) => dt.format("%Y-%m-%dT%H:%M:%S%.3fZ").to_string(),
        None => format!("{t_s} s since 1970"),
    }
}

/// Appends UTC seconds `t_s` as the data columns write a time: ISO 8601 UTC with milliseconds,
/// `2026-06-14T09:30:00.000Z`, or with microseconds, `2026-06-14T09:30:00.250001Z`, when the time
/// rounded to the microsecond is not a whole millisecond (an input time finer than a millisecond
/// keeps its precision, to the microsecond). Several times faster than `chrono`'s formatter.
/// Outside years 0–9999 it falls back to [`utc_label`].
pub fn push_utc(out: &mut String, t_s: f64) {
    let mut buf = [0u8; 32];
    match utc_digits(&mut buf, t_s) {
        Some(n) => out.push_str(std::str::from_utf8(&buf[..n]).expect("digits are ASCII")),
        None => out.push_str(&utc_label(t_s)),
    }
}

/// [`push_utc`] onto bytes.
pub fn push_utc_bytes(out: &mut Vec<u8>, t_s: f64) {
    let mut buf = [0u8; 32];
    match utc_digits(&mut buf, t_s) {
        Some(n) => out.extend_from_slice(&buf[..n]),
        None => out.extend_from_slice(utc_label(t_s).as_bytes()),
    }
}

/// A time as the data columns write it ([`push_utc`]).
pub fn utc_time(t_s: f64) -> String {
    let mut s = String::with_capacity(27);
    push_utc(&mut s, t_s);
    s
}

/// Writes the data form of `t_s` into `buf`; `None` outside years 0–9999 or for a non-finite time.
fn utc_digits(buf: &mut [u8; 32], t_s: f64) -> Option<usize> {
    let micros = (t_s * 1e6).round();
    if !micros.is_finite() || micros.abs() > 2.6e17 {
        return None;
    }
    let micros = micros as i64;
    let secs = micros.div_euclid(1_000_000);
    let sub_us = micros.rem_euclid(1_000_000) as u32;
    let dt = chrono::DateTime::from_timestamp(secs, 0)?;
    if !(0..=9999).contains(&dt.year()) {
        return None;
    }
    let y = dt.year() as u32;
    let fields = [
        (y / 100, 0),
        (y % 100, b'-'),
        (dt.month(), b'-'),
        (dt.day(), b'T'),
        (dt.hour(), b':'),
        (dt.minute(), b':'),
        (dt.second(), b'.'),
    ];
    let mut n = 0;
    for (v, sep) in fields {
        buf[n] = b'0' + (v / 10) as u8;
        buf[n + 1] = b'0' + (v % 10) as u8;
        n += 2;
        if sep != 0 {
            buf[n] = sep;
            n += 1;
        }
    }
    let (mut frac, width) = if sub_us.is_multiple_of(1000) {
        (sub_us / 1000, 3)
    } else {
        (sub_us, 6)
    };
    for k in (0..width).rev() {
        buf[n + k] = b'0' + (frac % 10) as u8;
        frac /= 10;
    }
    n += width;
    buf[n] = b'Z';
    Some(n + 1)
}

#[cfg(test)]
mod tests {
    use super::*;

    // 2026-06-14T09:30:00Z = 1781429400 s (20618 days × 86400 + 34200; 20618 days from
    // 1970-01-01 to 2026-06-14 counted with 14 leap days 1972..2024).
    const T0: f64 = 1_781_429_400.0;

    #[test]
    fn a_leap_second_only_where_one_can_be() {
        let iso = |s: &str| parse_time(s, TimeFormat::Iso8601, None);
        // 2016-12-31T23:59:60Z was a leap second (IERS Bulletin C 52, from memory); it reads
        // as the next day's first instant, 2017-01-01T00:00:00Z = 1483228800 s.
        assert_eq!(iso("2016-12-31T23:59:60Z").unwrap(), 1_483_228_800.0);
        // The same instant written at +02:00.
        assert_eq!(iso("2017-01-01T01:59:60+02:00").unwrap(), 1_483_228_800.0);
        assert_eq!(iso("2015-06-30T23:59:60.5Z").unwrap(), 1_435_708_800.5);
        for bad in [
            "2026-06-14T23:59:60Z",
            "2026-06-30T12:59:60Z",
            "2026-12-31T23:58:60Z",
        ] {
            assert!(
                matches!(iso(bad), Err(TimeError::NoSuchLeapSecond { .. })),
                "{bad}: {:?}",
                iso(bad)
            );
        }
    }

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
    fn data_times_have_milliseconds_or_microseconds() {
        assert_eq!(utc_time(T0), "2026-06-14T09:30:00.000Z");
        assert_eq!(utc_time(T0 + 0.25), "2026-06-14T09:30:00.250Z");
        assert_eq!(utc_time(T0 + 0.250001), "2026-06-14T09:30:00.250001Z");
        assert_eq!(utc_time(-0.5), "1969-12-31T23:59:59.500Z");
        // 951782400 s = 2000-02-29T00:00:00Z (11016 days; leap day of a century leap year).
        assert_eq!(utc_time(951_782_400.0), "2000-02-29T00:00:00.000Z");
        // Against chrono's own formatter, over a range of times.
        for k in 0..2000i64 {
            let us = 1_000_000_000_000_000 + k * 567_654_321_123;
            let us = if k % 2 == 0 { us - us % 1000 } else { us };
            let t = us as f64 / 1e6;
            let r = (t * 1e6).round() as i64;
            let dt = chrono::DateTime::from_timestamp_micros(r).unwrap();
            let fmt = if r % 1000 == 0 {
                "%Y-%m-%dT%H:%M:%S%.3fZ"
            } else {
                "%Y-%m-%dT%H:%M:%S%.6fZ"
            };
            assert_eq!(utc_time(t), dt.format(fmt).to_string(), "{us}");
        }
        // Messages keep the short form.
        assert_eq!(utc_label(T0), "2026-06-14T09:30:00Z");
        assert_eq!(utc_label(T0 + 0.75), "2026-06-14T09:30:00.750Z");
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
            let text = utc_label(t);
            let back = parse_time(&text, TimeFormat::Iso8601, None).unwrap();
            prop_assert!((back - t).abs() < 5e-4, "{} -> {} -> {}", t, text, back);
            let text = utc_time(t);
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

        /// A time written in the data form reads back to the same microsecond, which is what a
        /// per-sounding correction file keys its rows by; a whole millisecond is written with
        /// three decimals, any other time with six. (Up to 2038: below 2³¹ s a double holds a
        /// time to 0.24 µs, so that the microsecond survives both conversions.)
        #[test]
        fn data_times_keep_the_microsecond(us in 0i64..2_147_483_648_000_000) {
            let t = us as f64 / 1e6;
            let text = utc_time(t);
            let back = parse_time(&text, TimeFormat::Iso8601, None).unwrap();
            prop_assert_eq!((back * 1e6).round() as i64, us, "{}", text);
            let decimals = text.len() - text.find('.').unwrap() - 2;
            prop_assert_eq!(decimals, if us % 1000 == 0 { 3 } else { 6 }, "{}", text);
        }
    }
}
