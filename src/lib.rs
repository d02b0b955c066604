//! # ebbwise — soundings to chart datum
//!
//! A library (and the `ebbwise` command) that reduces a survey day's soundings to chart datum:
//! it reads gauge water-level records, carries the tide across the survey area by tidal zoning,
//! subtracts it from every sounding and accounts for every row.
//!
//! Three layers, visible in the module tree:
//!
//! * [`compute`] — the functional core: interpolation, zoning, point-in-zone, reduction. Plain
//!   data in, plain data out; no files, no printing.
//! * [`io`] — readers and writers: project file, gauge records, zonings, soundings, times, CRSs.
//! * [`run`] — one function per command, joining the two (used by the CLI in `src/main.rs`).
//! * [`pipeline`] — the reduction for processing pipelines: a project loaded once, Arrow record
//!   batches in and out, and the tide at one point. **This is the library's stable surface**;
//!   the other modules are the program's internals and may change between releases.
//!
//! Conventions: heights positive up, depths positive down, metres, UTC. Names carry units
//! (`_m`, `_min`, `_s`) and uncertainty level (`u_` standard, `u95_` 95 %).
//!
//! Results are for qualified hydrographic review: datum, zoning and uncertainty parameters must
//! come from the responsible hydrographic authority's specifications, and local regulations and
//! licensed practice take precedence.
#![deny(missing_docs)]
#![forbid(unsafe_code)]

pub mod compute;
pub mod io;
pub mod pipeline;
pub mod run;

/// Exit status: everything worked and every sounding was reduced / no check failed.
pub const EXIT_OK: i32 = 0;
/// Exit status: the run completed but some soundings were not reduced, or a check failed.
pub const EXIT_INCOMPLETE: i32 = 1;
/// Exit status: the run could not be done (bad project, unreadable input, bad options).
pub const EXIT_CANNOT_RUN: i32 = 2;

/// The caution printed with every result.
pub const CAUTION: &str = "Results are for qualified hydrographic review. Datum, zoning and \
uncertainty parameters must come from the responsible hydrographic authority's specifications; \
local regulations and licensed practice take precedence.";
