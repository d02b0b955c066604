//! Fuzz target: the gauge-record reader, with a flag column and null values configured, then
//! quality control and the series the reducer would use, with and without QC: each must hold
//! only finite, strictly increasing samples, and QC must give one flag set per sample.
#![no_main]
use libfuzzer_sys::fuzz_target;
use ebbwise::io::project::{GaugeSpec, HeightUnit};

fuzz_target!(|data: &[u8]| {
    let spec = GaugeSpec {
        id: "g".into(),
        name: None,
        lon: 0.0,
        lat: 0.0,
        record: "g.csv".into(),
        units: HeightUnit::Foot,
        zero_above_datum_m: -1.0,
        mean_level_above_datum_m: 2.0,
        max_gap_min: 30.0,
        time_column: "time".into(),
        height_column: "height".into(),
        flag_column: Some("qc".into()),
        good_flags: vec!["0".into()],
        null_values: vec!["-99".into()],
        naive_time_utc_offset: None,
        u_gauge_m: None,
        u_datum_m: None,
        interpolation: Default::default(),
        lowpass_cutoff_min: None,
        band_min_m: None,
        band_max_m: None,
        constants: None,
        datums: None,
    };
    let offset = chrono::FixedOffset::east_opt(3600);
    if let Ok(r) = ebbwise::io::gauge_csv::parse_gauge_record(data, std::path::Path::new("g.csv"), &spec, offset) {
        // Readings may be NaN or infinite (QC sets them aside); the series never holds one.
        let s = r.increasing_series();
        assert!(s.times_s.windows(2).all(|w| w[0] < w[1]));
        assert!(s.heights_m.iter().all(|h| h.is_finite()));
        let qc = ebbwise::io::project::QcSpec::default();
        let p = ebbwise::run::load::prepare_series(
            &qc,
            &ebbwise::io::project::InterpolationSpec::default(),
            &spec,
            &r,
        );
        assert_eq!(p.qc.as_ref().map(|q| q.flags.len()), Some(r.times_s.len()));
        let t = &p.series.times_s;
        assert!(t.windows(2).all(|w| w[0] < w[1]));
        assert!(p.series.heights_m.iter().all(|h| h.is_finite()));
    }
});
