//! Numbers as the output files write them: one decimal rule per quantity, and a fixed-decimal
//! writer fast enough for the hot loops of the reduction.
//!
//! Values are rounded half away from zero to a fixed number of decimals (4 for metres: 0.1 mm),
//! so a column never shows more precision than was computed and always parses back exactly to the
//! written decimal. (Written here rather than with `format!`, which costs several times more and
//! dominates the writer's time: a float-to-decimal crate gives shortest, not fixed, decimals.)
//!
//! The rules, and the files they apply to, are listed in `docs/outputs.md`
//! (the integration test `output_table` checks the files against that table).

/// Decimals of every height and depth in metres (tide, reduced depth, levels, differences): 0.1 mm.
pub const HEIGHT_DECIMALS: u32 = 4;

/// Decimals of every uncertainty and standard deviation in metres: 0.1 mm.
pub const UNCERTAINTY_DECIMALS: u32 = 4;

/// Decimals of a harmonic constituent's amplitude in metres (constants files): 0.01 mm, so that a
/// prediction summing some thirty rounded amplitudes stays within 0.1 mm of one from the
/// unrounded analysis.
pub const AMPLITUDE_DECIMALS: u32 = 5;

/// Decimals of a duration or lag in minutes written in a JSON summary: 0.01 min (0.6 s).
pub const MINUTE_DECIMALS: u32 = 2;

/// Serialises a height, depth or difference in metres rounded to [`HEIGHT_DECIMALS`]
/// (`#[serde(serialize_with = "…")]`; the value in memory keeps its precision).
pub fn ser_height<S: serde::Serializer>(v: &f64, s: S) -> Result<S::Ok, S::Error> {
    s.serialize_f64(round_to(*v, HEIGHT_DECIMALS))
}

/// Serialises an uncertainty or standard deviation in metres rounded to
/// [`UNCERTAINTY_DECIMALS`].
pub fn ser_uncertainty<S: serde::Serializer>(v: &f64, s: S) -> Result<S::Ok, S::Error> {
    s.serialize_f64(round_to(*v, UNCERTAINTY_DECIMALS))
}

/// Serialises minutes rounded to [`MINUTE_DECIMALS`].
pub fn ser_minutes<S: serde::Serializer>(v: &f64, s: S) -> Result<S::Ok, S::Error> {
    s.serialize_f64(round_to(*v, MINUTE_DECIMALS))
}

/// Serialises an optional height rounded to [`HEIGHT_DECIMALS`] (`None` as `null`).
pub fn ser_opt_height<S: serde::Serializer>(v: &Option<f64>, s: S) -> Result<S::Ok, S::Error> {
    match v {
        Some(x) => s.serialize_some(&round_to(*x, HEIGHT_DECIMALS)),
        None => s.serialize_none(),
    }
}

/// Powers of ten up to 10⁹.
const POW10: [f64; 10] = [1.0, 10.0, 100.0, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9];

/// `x` rounded to the nearest integer, halves away from zero: `f64::round`, by truncating
/// casts (the library call behind `round` costs more than the rest of a column's value).
fn round_half_away(x: f64) -> f64 {
    // Below 2^52 in magnitude the truncation and the fraction are exact; at and above it every
    // double is an integer already (NaN and ±∞ go to `round` too).
    if x.abs() < 4_503_599_627_370_496.0 {
        let i = x as i64;
        let frac = x - i as f64;
        (i + i64::from(frac >= 0.5) - i64::from(frac <= -0.5)) as f64
    } else {
        x.round()
    }
}

/// `value` rounded half away from zero to `decimals` decimals (at most 9), for numbers written
/// by a serialiser (JSON, TOML) that writes the shortest text of the rounded value.
pub fn round_to(value: f64, decimals: u32) -> f64 {
    let p = POW10[decimals as usize];
    let r = round_half_away(value * p) / p;
    // No negative zero in an output.
    if r == 0.0 {
        0.0
    } else {
        r
    }
}

/// Appends `value` with `decimals` fixed decimals (at most 9) to `out`.
/// Non-finite values are written as `nan`, `inf` or `-inf`.
pub fn push_fixed(out: &mut Vec<u8>, value: f64, decimals: u32) {
    let mut buf = [0u8; 32];
    match fixed_digits(&mut buf, value, decimals) {
        Some(n) => out.extend_from_slice(&buf[..n]),
        None => {
            // Too large for the integer path: the standard formatter.
            use std::io::Write;
            let _ = write!(out, "{value:.*}", decimals as usize);
        }
    }
}

/// [`push_fixed`] onto a `String`.
pub fn push_fixed_str(out: &mut String, value: f64, decimals: u32) {
    let mut buf = [0u8; 32];
    match fixed_digits(&mut buf, value, decimals) {
        Some(n) => out.push_str(std::str::from_utf8(&buf[..n]).expect("digits are ASCII")),
        None => {
            use std::fmt::Write;
            let _ = write!(out, "{value:.*}", decimals as usize);
        }
    }
}

/// Writes the fixed-decimal text of `value` into `buf` and returns its length, or `None` when the
/// value is too large for the integer path.
fn fixed_digits(buf: &mut [u8; 32], value: f64, decimals: u32) -> Option<usize> {
    debug_assert!(decimals <= 9);
    if !value.is_finite() {
        let word: &[u8] = match value {
            v if v.is_nan() => b"nan",
            v if v > 0.0 => b"inf",
            _ => b"-inf",
        };
        buf[..word.len()].copy_from_slice(word);
        return Some(word.len());
    }
    // Adding one half and truncating rounds half away from zero for the magnitude.
    let scaled = value.abs() * POW10[decimals as usize] + 0.5;
    if scaled >= 1.0e18 {
        return None;
    }
    let mut n = scaled as u64;
    let mut start = 0;
    if value < 0.0 && n != 0 {
        buf[0] = b'-';
        start = 1;
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
    let dst = &mut buf[start..start + len];
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
    Some(start + len)
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
    fn rounding_by_casts_equals_the_standard_round() {
        // Reference: `f64::round` (halves away from zero), on halves, neighbours of halves,
        // large magnitudes, the 2^52 edge and non-finite values.
        let mut xs = vec![
            0.5,
            -0.5,
            1.5,
            -2.5,
            0.499_999_999_999_999_94,
            -0.499_999_999_999_999_94,
            4_503_599_627_370_495.5,
            -4_503_599_627_370_495.5,
            4_503_599_627_370_496.0,
            9.0e18,
            -9.3e18,
            1e300,
            f64::INFINITY,
            f64::NEG_INFINITY,
        ];
        for i in -20_000..20_000 {
            let x = i as f64 * 0.25 + 0.000_1 * (i % 7) as f64;
            xs.push(x);
            xs.push(x * 12_345.678_9);
        }
        for x in xs {
            let (a, b) = (round_half_away(x), x.round());
            assert!(a == b || (a == 0.0 && b == 0.0), "{x}: {a} vs {b}");
        }
        assert!(round_half_away(f64::NAN).is_nan());
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
        // Beyond the integer path: the standard formatter.
        assert_eq!(f(1.0e15, 4), "1000000000000000.0000");
    }

    #[test]
    fn string_and_byte_writers_agree() {
        for &(v, d) in &[(2.61, 4), (-0.00005, 4), (1.0e15, 4), (f64::INFINITY, 2)] {
            let mut s = String::from("x");
            push_fixed_str(&mut s, v, d);
            assert_eq!(s, format!("x{}", f(v, d)));
        }
    }

    #[test]
    fn rounding_for_serialisers() {
        // 2.61 is 2.6099999999999999… in binary: rounded to 4 decimals it is the double nearest
        // 2.61 again, which a serialiser writes as "2.61".
        assert_eq!(round_to(2.6109999999999998, 4).to_string(), "2.611");
        assert_eq!(round_to(-0.00004, 4).to_string(), "0");
        assert_eq!(round_to(0.123456, 5), 0.12346);
    }

    proptest::proptest! {
        /// The integer the verdict `within_order` compares (`compute::uncertainty::
        /// units_at_decimals`) is the written text with its point removed.
        #[test]
        fn verdict_units_are_the_written_digits(v in -1.0e6f64..1.0e6, d in 0u32..8) {
            let text = f(v, d).replace('.', "");
            let written: i64 = text.parse().unwrap();
            proptest::prop_assert_eq!(
                crate::compute::uncertainty::units_at_decimals(v, d),
                Some(written),
                "{} at {}",
                v,
                d
            );
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
