//! Time to compute and write one day of 1-min tide correctors for 50 zones, with uncertainty.
//!
//! Run: `cargo bench --bench correctors_write`. Figures are kept in docs/benchmarks.md.

use std::time::Instant;

use ebbwise::compute::correctors::{zone_correctors, CorrectorUncertainty};
use ebbwise::compute::series::{LevelSeries, Linear};
use ebbwise::compute::uncertainty::{rate_series, GaugeUncertainty, ZoneUncertainty};
use ebbwise::compute::zoning::{Gauge, GaugeFeed, MeanLevelForm, Zone};
use ebbwise::io::correctors_file::{push_zone_rows, ZONE_CORRECTOR_COLUMNS};

mod common;

fn main() {
    let omega = 28.984_104_2_f64.to_radians() / 3600.0;
    let t0 = 1_781_395_200.0; // 2026-06-14T00:00:00Z
                              // Three gauges, 1-min records over the day and an hour either side.
    let gauges: Vec<Gauge> = (0..3)
        .map(|g| {
            let times: Vec<f64> = (-60..=1500).map(|m| t0 + m as f64 * 60.0).collect();
            Gauge {
                id: format!("g{g}"),
                series: LevelSeries {
                    heights_m: times
                        .iter()
                        .map(|t| 2.5 + 1.4 * (omega * (t - t0) - 0.3 * g as f64).cos())
                        .collect(),
                    times_s: times,
                    max_gap_s: 1800.0,
                    ..Default::default()
                },
                mean_level_above_datum_m: 2.5,
            }
        })
        .collect();
    let zones: Vec<Zone> = (0..50)
        .map(|z| Zone {
            id: format!("Z{z:02}"),
            feeds: vec![
                GaugeFeed {
                    gauge: z % 3,
                    weight: 0.7,
                    time_corrector_min: (z % 20) as f64 - 10.0,
                    range_ratio: 0.9 + 0.004 * z as f64,
                },
                GaugeFeed {
                    gauge: (z + 1) % 3,
                    weight: 0.3,
                    time_corrector_min: 5.0,
                    range_ratio: 1.0,
                },
            ],
            mean_level: MeanLevelForm::ZoneMean {
                zone_mean_level_above_datum_m: 2.5,
            },
        })
        .collect();
    let gu = vec![
        GaugeUncertainty {
            u_gauge_m: 0.015,
            u_datum_m: 0.04
        };
        3
    ];
    let zu = ZoneUncertainty {
        u_renormalised_m: 0.0,
        u_time_corrector_min: 6.0,
        u_range_ratio: 0.03,
        u_zone_m: 0.08,
        u_datum_m: None,
    };
    let rates: Vec<_> = gauges.iter().map(|g| rate_series(g, &Linear)).collect();
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("correctors-zones.csv");
    let mut times = Vec::new();
    let mut rows = 0;
    for _ in 0..7 {
        let start = Instant::now();
        let mut text = ZONE_CORRECTOR_COLUMNS.join(",");
        text.push('\n');
        rows = 0;
        for z in &zones {
            let u = CorrectorUncertainty {
                gauge_u: &gu,
                zone_u: &zu,
                rates: &rates,
            };
            let c = zone_correctors(z, &gauges, &Linear, Some(u), t0, 60.0, 1441);
            rows += c.len();
            push_zone_rows(&mut text, &z.id, &c);
        }
        ebbwise::io::atomic::write_atomic(&path, text.as_bytes()).unwrap();
        times.push(start.elapsed().as_secs_f64());
    }
    let runs = times.len();
    let (median_s, min_s) = common::median_min(times);
    println!(
        "one day of 1-min correctors, 50 zones ({rows} rows, {:.1} MiB): median {:.1} ms, min {:.1} ms over {runs} runs",
        std::fs::metadata(&path).unwrap().len() as f64 / 1048576.0,
        median_s * 1e3,
        min_s * 1e3,
    );
}
