//! Fixed-decimal formatting of metres for output columns, without going through `format!`.
//!
//! Values are rounded half away from zero to a fixed number of decimals (4 for metres: 0.1 mm),
//! so a column never shows more precision than was computed and always parses back exactly to the
//! written decimal. (Written here rather than with `format!`, which costs several times more and
//! dominates the writer's time: a float-to-decimal crate gives shortest, not fixed, decimals.)

/// Powers of ten up to 10⁹.
const POW10: [f64; 10] = [1.0, 10.0, 100.0, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9];

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
    // Adding one half and truncating rounds half away from zero for the magnitude.
    let scaled = value.abs() * POW10[decimals as usize] + 0.5;
    if scaled >= 1.0e18 {
        // Too large for the integer path: fall back to the standard formatter.
        use std::io::Write;
        let _ = write!(out, "{value:.*}", decimals as usize);
        return;
    }
    let mut n = scaled as u64;
    if value < 0.0 && n != 0 {
        out.push(b'-');
    }
    // Count the digits (at least one before the point), then write them in place from the right.
    let d = decimals as usize;
    let mut digits = 1;
    let mut m = n / 10;
    while m > 0 {
        digits += 1;
        m /= 10;
    }
    let digits = digits.max(d + 1);
    let len = if d > 0 { digits + 1 } else { digits };
    let start = out.len();
    out.resize(start + len, b'0');
    let dst = &mut out[start..];
    // Two digits at a time from a table while no decimal point falls between them.
    let mut pos = len;
    let mut k = 0;
    while k < digits {
        if k == d && d > 0 {
            pos -= 1;
            dst[pos] = b'.';
        }
        if k + 1 < digits && !(d > 0 && k + 1 == d) && n >= 10 {
            let pair = (n % 100) as usize * 2;
            n /= 100;
            dst[pos - 2..pos].copy_from_slice(&DIGIT_PAIRS[pair..pair + 2]);
            pos -= 2;
            k += 2;
        } else {
            pos -= 1;
            dst[pos] = b'0' + (n % 10) as u8;
            n /= 10;
            k += 1;
        }
    }
}

/// The number [`push_fixed`] writes for `value` with `decimals`, as an integer count of units of
/// the last decimal (the written digits without the point, with their sign): `0.256` at 3
/// decimals is 256. `None` for a value that is not finite or too large for the integer path.
/// Comparing two such counts compares the two values as a reader sees them.
pub fn fixed_units(value: f64, decimals: u32) -> Option<i64> {
    debug_assert!(decimals <= 9);
    if !value.is_finite() {
        return None;
    }
    // The same rounding as `push_fixed`: half away from zero on the magnitude.
    let scaled = value.abs() * POW10[decimals as usize] + 0.5;
    if scaled >= 1.0e18 {
        return None;
    }
    let n = scaled as u64 as i64;
    Some(if value < 0.0 { -n } else { n })
}

/// "00" to "99".
const DIGIT_PAIRS: &[u8; 200] = b"0001020304050607080910111213141516171819\
2021222324252627282930313233343536373839\
4041424344454647484950515253545556575859\
6061626364656667686970717273747576777879\
8081828384858687888990919293949596979899";

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
        assert_eq!(f(0.0004, 3), "0.000");
        assert_eq!(f(-0.0006, 3), "-0.001");
        assert_eq!(f(123.0, 0), "123");
        assert_eq!(f(0.05, 1), "0.1");
        assert_eq!(f(7.0, 4), "7.0000");
        assert_eq!(f(-12345.67891, 4), "-12345.6789");
    }

    proptest::proptest! {
        /// `fixed_units` is the written text with its point removed.
        #[test]
        fn units_are_the_written_digits(v in -1.0e6f64..1.0e6, d in 0u32..8) {
            let text = f(v, d).replace('.', "");
            let written: i64 = text.parse().unwrap();
            proptest::prop_assert_eq!(fixed_units(v, d), Some(written), "{} at {}", v, d);
        }

        /// Written text parses back to the value within half a unit of the last decimal.
        #[test]
        fn parses_back_within_half_a_unit(v in -1.0e6f64..1.0e6, d in 0u32..8) {
            let text = f(v, d);
            let back: f64 = text.parse().unwrap();
            let half = 0.5 * 10f64.powi(-(d as i32));
            proptest::prop_assert!((back - v).abs() <= half * (1.0 + 1e-6) + 1e-9, "{} -> {}", v, text);
        }
    }
}
