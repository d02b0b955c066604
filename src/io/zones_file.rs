//! The derived-correctors table of `ebbwise zones derive` and `ebbwise zones compare` (CSV).
//!
//! One row per zone and feeding gauge: the zoning's time corrector and range ratio, those
//! derived from the co-tidal field (`compute::cotidal`), their range over the zone, the spring
//! difference between the two, and how far the zone reaches outside the stations' hull. Minutes
//! to 0.1, ratios to 4 decimals, metres to 4 (docs/outputs.md).

use std::path::Path;

use super::atomic::{Sink, SinkWriter};
use super::error::IoError;
use super::numfmt::push_fixed_str as fx;
use crate::compute::cotidal::ZoneDerived;

/// The header.
pub const HEADER: &str = "zone,gauge,weight,dominant,zoning_time_corrector_min,derived_time_corrector_min,derived_time_corrector_min_lo,derived_time_corrector_min_hi,zoning_range_ratio,derived_range_ratio,derived_range_ratio_lo,derived_range_ratio_hi,zoning_mean_level_above_datum_m,derived_mean_level_above_datum_m,spring_difference_m,worst_spring_difference_m,outside_hull_max_m,points";

/// The table as text.
pub fn zones_csv(rows: &[ZoneDerived]) -> String {
    let mut s = String::from(HEADER);
    s.push('\n');
    for r in rows {
        s.push_str(&r.zone);
        s.push(',');
        s.push_str(&r.gauge);
        s.push(',');
        fx(&mut s, r.weight, 4);
        s.push(',');
        s.push_str(r.derived.dominant.name());
        for (v, d) in [
            (r.zoning.0, 1),
            (r.derived.time_corrector_min, 1),
            (r.time_corrector_range_min.0, 1),
            (r.time_corrector_range_min.1, 1),
            (r.zoning.1, 4),
            (r.derived.range_ratio, 4),
            (r.range_ratio_range.0, 4),
            (r.range_ratio_range.1, 4),
        ] {
            s.push(',');
            fx(&mut s, v, d);
        }
        s.push(',');
        if let Some(m) = r.zoning_mean_level_m {
            fx(&mut s, m, 4);
        }
        for (v, d) in [
            (r.derived.mean_level_m, 4),
            (r.spring_difference_m, 4),
            (r.worst_spring_difference_m, 4),
            (r.outside_hull_max_m, 1),
        ] {
            s.push(',');
            fx(&mut s, v, d);
        }
        s.push(',');
        s.push_str(&r.points.to_string());
        s.push('\n');
    }
    s
}

/// Writes the table to `sink` (a file through a temporary name, never over one of `inputs`).
pub fn write_zones_csv(
    rows: &[ZoneDerived],
    sink: Sink<'_>,
    inputs: &[&Path],
) -> Result<Option<std::path::PathBuf>, IoError> {
    let mut w = SinkWriter::open(sink, inputs)?;
    w.write_all(zones_csv(rows).as_bytes())?;
    w.finish()
}
