//! Coordinate transformations against an outside reference: pyproj 3.7.2 with its bundled
//! PROJ 9.5.1 (tests/fixtures/pyproj_transforms.csv, made by
//! tests/reference/make_pyproj_fixture.py).

use ebbwise::io::crs::Transformer;

#[test]
fn transforms_agree_with_pyproj() {
    let text = std::fs::read_to_string(super::repo().join("tests/fixtures/pyproj_transforms.csv"))
        .unwrap();
    let mut n = 0;
    let body: String = text
        .lines()
        .filter(|l| !l.starts_with('#'))
        .collect::<Vec<_>>()
        .join("\n");
    let mut r = csv::Reader::from_reader(body.as_bytes());
    for rec in r.records() {
        let rec = rec.unwrap();
        let f = |i: usize| rec[i].parse::<f64>().unwrap();
        let t = Transformer::new(&rec[0], &rec[1]).unwrap();
        let (x, y) = t.convert(f(2), f(3)).unwrap();
        // Metres to 1 mm; degrees to 1e-8° (about 1 mm).
        let tol = if rec[1].ends_with("4326") { 1e-8 } else { 1e-3 };
        assert!(
            (x - f(4)).abs() < tol && (y - f(5)).abs() < tol,
            "{:?}: got ({x}, {y})",
            rec
        );
        n += 1;
    }
    assert!(n >= 15, "fixture has {n} rows");
}
