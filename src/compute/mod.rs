//! The functional core: computation on plain data. No file I/O, no printing, no environment.
//!
//! * [`series`] — gauge level series and time interpolation (the maximum-gap rule).
//! * [`zoning`] — discrete tidal zones: time correctors, range ratios, several gauges per zone.
//! * [`locate`] — which zone holds a point (spatial index, edge rule).
//! * [`reduce`] — one sounding to chart datum, with its status.
//! * [`uncertainty`] — GUM propagation of the tide and sounding uncertainty; S-44 orders.
//! * [`qa`] — per-order shares, budgets and histograms for the QA report.
//! * [`correctors`] — tide on a regular grid per zone, and models that read correctors back.
//! * [`fixed`] — fast fixed-decimal formatting of metres for the output writers.
//! * [`qc`] — gauge-record quality control: per-sample flags with reasons.
//! * [`spline`] — natural cubic spline interpolation in time, per unbroken segment.
//! * [`lowpass`] — zero-phase low-pass filter for noisy 1-minute records.
//! * [`compare`] — gauge-to-gauge comparison through the zoning's correctors.
//! * [`astro`] — astronomical arguments, equilibrium arguments and nodal corrections.
//! * [`harmonic`] — tidal harmonic analysis (least squares) and prediction.
//! * [`names`] — the nearest valid name to a misspelt one, for "did you mean" hints.

pub mod astro;
pub mod compare;
pub mod correctors;
pub mod fixed;
pub mod harmonic;
pub mod locate;
pub mod lowpass;
pub mod names;
pub mod qa;
pub mod qc;
pub mod reduce;
pub mod series;
pub mod spline;
pub mod uncertainty;
pub mod zoning;

/// Formats UTC seconds as an ISO 8601 label (`2026-06-14T09:30:00Z`) for messages.
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

/// Appends UTC seconds `t_s` (whole seconds) as `2026-06-14T09:30:00Z`; several times faster than
/// [`utc_label`] for long regular series. Falls back to [`utc_label`] outside years 0–9999.
pub fn push_utc_seconds(buf: &mut String, t_s: i64) {
    use chrono::{Datelike, Timelike};
    match chrono::DateTime::from_timestamp(t_s, 0) {
        Some(dt) if (0..=9999).contains(&dt.year()) => {
            let mut two = |v: u32, sep: Option<char>| {
                buf.push(char::from(b'0' + (v / 10) as u8));
                buf.push(char::from(b'0' + (v % 10) as u8));
                if let Some(c) = sep {
                    buf.push(c);
                }
            };
            let y = dt.year() as u32;
            two(y / 100, None);
            two(y % 100, Some('-'));
            two(dt.month(), Some('-'));
            two(dt.day(), Some('T'));
            two(dt.hour(), Some(':'));
            two(dt.minute(), Some(':'));
            two(dt.second(), Some('Z'));
        }
        _ => buf.push_str(&utc_label(t_s as f64)),
    }
}

#[cfg(test)]
mod label_tests {
    use super::*;

    #[test]
    fn fast_label_matches_the_general_one() {
        for t in [0i64, 1_781_400_600, 951_782_400, 4_102_444_799, -86_400] {
            let mut s = String::new();
            push_utc_seconds(&mut s, t);
            assert_eq!(s, utc_label(t as f64));
        }
    }
}
