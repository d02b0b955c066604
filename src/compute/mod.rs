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

pub mod astro;
pub mod compare;
pub mod correctors;
pub mod fixed;
pub mod harmonic;
pub mod locate;
pub mod lowpass;
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
