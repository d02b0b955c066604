//! A malformed row is that row's problem alone: for random valid soundings files, inserting one
//! malformed row anywhere changes only that row's output (status `bad_input`, a detail naming the
//! field) and leaves every other row byte for byte as it was.

use super::{ebbwise, stderr, MiniProject};
use proptest::prelude::*;

/// One valid row of the mini project's soundings (time within the gauge record, a position in
/// zone Z1 or Z2, a positive depth).
fn valid_row() -> impl Strategy<Value = String> {
    (
        0u32..=240,
        0u32..60,
        0.0f64..0.02,
        0.0f64..0.01,
        0.5f64..60.0,
        0usize..3,
    )
        .prop_map(|(minute, s, dx, dy, depth, line)| {
            format!(
                "2026-06-14T{:02}:{:02}:{:02}Z,{:.6},{:.6},{:.3},L{line}",
                minute / 60,
                minute % 60,
                s,
                10.0 + dx,
                50.0 + dy,
                depth
            )
        })
}

/// A malformed row as bytes, and the field its detail must name (`None`: the row is not text,
/// so no field can be named; its detail must say so).
fn malformed_row() -> impl Strategy<Value = (Vec<u8>, Option<&'static str>)> {
    let ok_time = "2026-06-14T01:00:00Z";
    prop_oneof![
        Just((format!("{ok_time},10.005,50.005,abc,L1"), Some("depth"))),
        Just((format!("{ok_time},10.005,50.005,,L1"), Some("depth"))),
        Just((format!("{ok_time},10.005,50.005,NaN,L1"), Some("depth"))),
        Just((format!("{ok_time},10.005,50.005,1e400,L1"), Some("depth"))),
        Just((format!("{ok_time},10.005,50.005,1,015.65,L1"), Some("#6"))),
        Just((format!("{ok_time},10.005,50.005"), Some("depth"))),
        Just((format!("{ok_time},210.005,50.005,12.0,L1"), Some("lon"))),
        Just((format!("{ok_time},10.005,-95.0,12.0,L1"), Some("lat"))),
        Just((format!("{ok_time},10.005,\"50.005,12.0,L1"), Some("lat"))),
        Just((
            "2026-06-14T01:00:00,10.005,50.005,12.0,L1".to_string(),
            Some("time")
        )),
        Just((
            "14/06/2026 01:00,10.005,50.005,12.0,L1".to_string(),
            Some("time")
        )),
        Just((
            "2126-06-14T01:00:00Z,10.005,50.005,12.0,L1".to_string(),
            Some("time")
        )),
        Just((",,,,".to_string(), Some("time"))),
    ]
    .prop_map(|(s, f)| (s.into_bytes(), f))
    .boxed()
    .prop_union(
        Just((
            b"2026-06-14T01:00:00Z,10.005,50.005,12.\xff0,L1".to_vec(),
            None,
        ))
        .boxed(),
    )
}

/// Reduces `rows` (header added) in a fresh mini project; returns the reduced file's lines.
fn reduce(rows: &[Vec<u8>]) -> Vec<String> {
    let p = MiniProject::new("");
    let mut text = b"time,lon,lat,depth,line\n".to_vec();
    for r in rows {
        text.extend_from_slice(r);
        text.push(b'\n');
    }
    std::fs::write(p.path("s.csv"), text).unwrap();
    let o = ebbwise(&["reduce", &p.project(), "--no-progress"]);
    assert!(
        matches!(o.status.code(), Some(0) | Some(1)),
        "{}",
        stderr(&o)
    );
    String::from_utf8_lossy(&std::fs::read(p.path("out/s.reduced.csv")).unwrap())
        .lines()
        .map(String::from)
        .collect()
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 48, ..ProptestConfig::default() })]
    #[test]
    fn one_malformed_row_changes_only_itself(
        rows in proptest::collection::vec(valid_row(), 1..12),
        at in any::<proptest::sample::Index>(),
        (bad, field) in malformed_row(),
    ) {
        let rows: Vec<Vec<u8>> = rows.into_iter().map(String::into_bytes).collect();
        let before = reduce(&rows);
        let k = at.index(rows.len() + 1);
        let mut with_bad = rows.clone();
        with_bad.insert(k, bad.clone());
        let after = reduce(&with_bad);
        prop_assert_eq!(after.len(), before.len() + 1);
        // Header and every other row unchanged, byte for byte.
        prop_assert_eq!(&after[..k + 1], &before[..k + 1]);
        prop_assert_eq!(&after[k + 2..], &before[k + 1..]);
        // The inserted row (line k + 1 after the header) is bad_input naming its field.
        prop_assert!(
            after[k + 1].contains(",bad_input,"),
            "row {}: {}",
            k,
            after[k + 1]
        );
        match field {
            Some(f) => prop_assert!(
                after[k + 1].contains(&format!("field '{f}'")),
                "detail does not name field '{}': {}",
                f,
                after[k + 1]
            ),
            None => prop_assert!(
                after[k + 1].contains("not valid UTF-8"),
                "{}",
                after[k + 1]
            ),
        }
    }
}
