//! Fixed-decimal formatting of metres for output columns, without going through `format!`.
//!
//! Values are rounded half away from zero to a fixed number of decimals (4 for metres: 0.1 mm),
//! so a column never shows more precision than was computed and always parses back exactly to the
//! written decimal.

/// Appends `value` with `decimals` fixed decimals (at most 9) to `out`.
/// Non-finite values are written as `nan`, `inf` or `-inf`.
pub fn push_fixed(out: &mut Vec<u8>, value: f64, decimals: u32) {
    debug_assert!(decimals <= 9);
    if !value.is_finite() {
        out.extend_from_slice(match value {
            v if v.is_nan() => b"nan",
            v if v > 0.0 => b"inf",
            _ => b"-inf",
        });
        return;
    }
    let scale = 10u64.pow(decimals) as f64;
    let scaled = (value.abs() * scale).round();
    if scaled >= 9.0e18 {
        // Too large for the integer path: fall back to the standard formatter.
        use std::io::Write;
        let _ = write!(out, "{value:.*}", decimals as usize);
        return;
    }
    let scaled = scaled as u64;
    if value < 0.0 && scaled != 0 {
        out.push(b'-');
    }
    let p = 10u64.pow(decimals);
    let mut buf = itoa::Buffer::new();
    out.extend_from_slice(buf.format(scaled / p).as_bytes());
    if decimals > 0 {
        out.push(b'.');
        let frac = scaled % p;
        let s = buf.format(frac);
        for _ in s.len()..decimals as usize {
            out.push(b'0');
        }
        out.extend_from_slice(s.as_bytes());
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn f(v: f64, d: u32) -> String {
        let mut out = Vec::new();
        push_fixed(&mut out, v, d);
        String::from_utf8(out).unwrap()
    }

    #[test]
    fn matches_the_standard_formatter() {
        for &(v, d) in &[
            (0.0, 4),
            (1.23456, 4),
            (-1.23456, 4),
            (-0.00004, 4),
            (12.6, 0),
            (1000000.1, 3),
            (0.00051, 3),
            (-3.0, 2),
        ] {
            let mine = f(v, d);
            let std = format!("{v:.*}", d as usize);
            let std = if std.starts_with("-") && std.trim_start_matches(['-', '0', '.']).is_empty()
            {
                std[1..].to_string()
            } else {
                std
            };
            assert_eq!(
                mine.parse::<f64>().unwrap(),
                std.parse::<f64>().unwrap(),
                "{v} {d}"
            );
        }
        assert_eq!(f(-1.23456, 4), "-1.2346");
        assert_eq!(f(-0.00004, 4), "0.0000");
        assert_eq!(f(2.0006, 3), "2.001");
        assert_eq!(f(f64::NAN, 3), "nan");
    }
}
