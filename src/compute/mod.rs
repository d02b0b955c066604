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

pub mod correctors;
pub mod fixed;
pub mod locate;
pub mod qa;
pub mod reduce;
pub mod series;
pub mod uncertainty;
pub mod zoning;

/// Formats UTC seconds as an ISO 8601 label (`2026-06-14T09:30:00Z`) for messages.
pub fn utc_label(t_s: f64) -> String {
    let whole = t_s.floor();
    let nanos = ((t_s - whole) * 1e9).round().min(999_999_999.0) as u32;
    match chrono::DateTime::from_timestamp(whole as i64, nanos) {
        Some(dt) => {
            if nanos == 0 {
                dt.format("%Y-%m-%dT%H:%M:%SZ").to_string()
            } else {
                dt.format("%Y-%m-%dT%H:%M:%S%.3fZ").to_string()
            }
        }
        None => format!("{t_s} s since 1970"),
    }
}
