//! The functional core: computation on plain data. No file I/O, no printing, no environment,
//! and no output formatting: times are UTC seconds and reasons are enums with their numbers,
//! which the I/O layer turns into text (`io::text`, `io::timefmt`, `io::numfmt`).
//!
//! * [`series`] — gauge level series and time interpolation (the maximum-gap rule).
//! * [`zoning`] — discrete tidal zones: time correctors, range ratios, several gauges per zone.
//! * [`locate`] — which zone holds a point (spatial index, edge rule).
//! * [`reduce`] — one sounding to chart datum, with its status.
//! * [`uncertainty`] — GUM propagation of the tide and sounding uncertainty; S-44 orders.
//! * [`qa`] — per-order shares, budgets and histograms for the QA report.
//! * [`qa_report`] — the QA report as plain data (built by `run`, rendered by `io`).
//! * [`quantile`] — a mergeable percentile sketch with a stated error bound.
//! * [`correctors`] — tide on a regular grid per zone, and models that read correctors back.
//! * [`cotidal`] — co-tidal and co-range fields from several stations; derived correctors.
//! * [`continuous`] — continuous tide models on a field: corrector fields, astronomical + residual.
//! * [`cotidal_map`] — the co-tidal map as plain data (lines, zones, stations, steps).
//! * [`isolines`] — co-tidal and co-range lines of a sampled field (the phase's wrap handled).
//! * [`qc`] — gauge-record quality control: per-sample flags with reasons.
//! * [`spline`] — not-a-knot cubic spline interpolation in time, per unbroken segment.
//! * [`lowpass`] — zero-phase low-pass filter for noisy 1-minute records.
//! * [`compare`] — gauge-to-gauge comparison through the zoning's correctors.
//! * [`astro`] — astronomical arguments, equilibrium arguments and nodal corrections.
//! * [`harmonic`] — tidal harmonic analysis (least squares) and prediction.
//! * [`residual`] — a harmonic fit's residual: spectrum near each constituent, noise floor, level step and trend.
//! * [`lat`] — LAT and HAT from harmonic constants over a nodal cycle.
//! * [`transfer`] — datum transfer from a short-term gauge against a control gauge.
//! * [`extrema`] — observed high and low waters, classified higher and lower per tidal day.
//! * [`datums`] — tidal datums (MSL, MHW, MLLW, …) of an observed record, with uncertainties.
//! * [`gapfill`] — filling gauge gaps from a prediction or a neighbour, with a measured error.
//! * [`boundary`] — zone adjacency and the tide step across each shared edge.
//! * [`names`] — the nearest valid name to a misspelt one, for "did you mean" hints.

pub mod astro;
pub mod boundary;
pub mod compare;
pub mod continuous;
pub mod correctors;
pub mod cotidal;
pub mod cotidal_map;
pub mod datums;
pub mod extrema;
pub mod gapfill;
pub mod harmonic;
pub mod isolines;
pub mod lat;
pub mod locate;
pub mod lowpass;
pub mod names;
pub mod qa;
pub mod qa_report;
pub mod qc;
pub mod quantile;
pub mod reduce;
pub mod residual;
pub mod series;
pub mod spline;
pub mod transfer;
pub mod uncertainty;
pub mod zoning;
