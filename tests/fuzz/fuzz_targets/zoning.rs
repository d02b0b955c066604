//! Fuzz target: the zoning (GeoJSON) reader, then the self-intersection check and a zone
//! locator over what was read.
#![no_main]
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    if let Ok(z) = ebbwise::io::zoning_geojson::parse_zoning(data, std::path::Path::new("z.geojson")) {
        let polys: Vec<_> = z.zones.iter().map(|z| z.polygon_lonlat.clone()).collect();
        for p in &polys {
            if p.0.iter().map(|q| q.exterior().0.len()).sum::<usize>() < 200 {
                let _ = ebbwise::run::load::self_intersection(p);
            }
        }
        let loc = ebbwise::compute::locate::ZoneLocator::new(polys);
        let _ = loc.locate(0.0, 0.0);
        let _ = loc.locate(10.005, 50.005);
    }
});
