//! Fuzz target: soundings are read in chunks of lines, the layout is resolved from the first
//! line and every other line is split and parsed; a parsed sounding has finite values.
#![no_main]
use libfuzzer_sys::fuzz_target;
use ebbwise::io::project::{ColumnMap, Delimiter, DepthSign, ExtraFields, SoundingsSpec};
use ebbwise::io::soundings::{lines_of, ChunkReader, Fields, SoundingLayout};
use ebbwise::io::timefmt::TimeFormat;

fuzz_target!(|data: &[u8]| {
    let delim = match data.first().map(|b| b % 4) {
        Some(0) => Delimiter::Comma,
        Some(1) => Delimiter::Semicolon,
        Some(2) => Delimiter::Tab,
        _ => Delimiter::Whitespace,
    };
    let spec = SoundingsSpec {
        files: vec![],
        crs: "EPSG:4326".into(),
        delimiter: delim,
        header: true,
        time_format: if data.get(1).is_some_and(|b| b % 2 == 0) { TimeFormat::Iso8601 } else { TimeFormat::UnixS },
        depth_sign: DepthSign::PositiveDown,
        extra_trailing_fields: if data.get(1).is_some_and(|b| b % 4 < 2) { ExtraFields::Allowed } else { ExtraFields::Refused },
        columns: ColumnMap {
            time: "time".into(),
            x: "x".into(),
            y: "#3".into(),
            depth: "depth".into(),
            line: Some("line".into()),
            u_depth: Some("u".into()),
        },
    };
    let mut reader = ChunkReader::new(data.get(2..).unwrap_or(&[]), 1);
    let mut layout = None;
    let mut fields = Fields::default();
    while let Ok(Some(chunk)) = reader.next_chunk(Vec::new()) {
        for (_, raw) in lines_of(&chunk) {
            let Ok(line) = std::str::from_utf8(raw) else { continue };
            if layout.is_none() {
                match SoundingLayout::resolve(&spec, Some(line), None, std::path::Path::new("s.csv")) {
                    Ok(l) => layout = Some(l),
                    Err(_) => return,
                }
                continue;
            }
            let lay = layout.as_ref().unwrap();
            fields.split(line, lay.delimiter);
            if let Ok(v) = lay.parse(line, &fields) {
                assert!(v.t_s.is_finite() && v.x.is_finite() && v.y.is_finite() && v.depth_m.is_finite());
            }
        }
    }
});
