//! Runs: the glue between the I/O layer and the core for each command (load a project, stream
//! the soundings through the model, validate). No argument parsing and no printing here: the CLI
//! does that.
//!
//! * [`load`] — project inputs into core data.
//! * [`reduce`] — the streaming, parallel reduction.
//! * [`check`] — validation before a reduction.
//! * [`correctors`] — tide-correction files with provenance, and applying them.
//! * [`datums`] — observed high and low waters and tidal datums of a record into a datums file.
//! * [`fields`] — the project's co-tidal field and each zone's derived correctors.
//! * [`cotidal_map`] — co-tidal and co-range lines of the field, with what the map draws.
//! * [`transfer`] — a short-term gauge's datums by comparison with a control gauge.
//! * [`harmonics`] — harmonic analysis of a record into a constants file; prediction.
//! * [`qc`] — gauge-record quality control and gauge-to-gauge comparison.
//! * [`provenance`] — every input that can change a tide, recorded and compared.
//! * [`qa_report`] — the QA report of a reduction (survey orders, budgets, tide bands).

pub mod check;
pub mod correctors;
pub mod cotidal_map;
pub mod datums;
pub mod fields;
pub mod harmonics;
pub mod load;
pub mod provenance;
pub mod qa_report;
pub mod qc;
pub mod reduce;
pub mod transfer;
