//! Zero-phase low-pass filter for noisy 1-minute water-level records.
//!
//! # What it is
//! A symmetric FIR filter: a windowed sinc (ideal low-pass impulse response truncated by a Hamming
//! window) normalised to unit gain for a constant, applied as a centred weighted mean. Gauges in
//! exposed places log waves, swell and seiches on top of the tide; on 1-min records a low-pass
//! before use is common practice (DOMAIN §3).
//!
//! # Why zero phase
//! The kernel is symmetric about its centre, so its frequency response is real: every component
//! is scaled, none is shifted in time. The filtered tide therefore has its high and low waters at
//! the same instants as the record, and adds no timing error to the reduction (a one-sided running
//! mean of length L would delay the tide by L/2).
//!
//! # The cut-off
//! `cutoff_min` is the period at which the gain is one half. With the kernel below, measured for
//! cut-offs of 10–30 min at 1-min steps (tests and [`lowpass_gain`]):
//! * periods of 8 × the cut-off or longer pass with gain within 1e-3 of 1 (periods of 4 h and more
//!   for a 30-min cut-off; for a 10-min cut-off M2 is within 1.1e-5 and M4 within 4.3e-5);
//! * periods of half the cut-off or shorter are attenuated to a gain of at most 1.2e-3 in
//!   magnitude (waves, seiches of a few minutes; 2 min: 5e-4 for a 10-min cut-off);
//! * in between, the gain falls smoothly through 0.5 at the cut-off.
//!
//! White noise is reduced in standard deviation by the square root of the sum of the squared
//! weights: a factor of 2.4 for a 10-min cut-off, 3.4 for 20 min, 4.2 for 30 min (1-min steps).
//!
//! # Kernel length
//! Half-length `N = ceil(1.5 × cutoff / step)` samples (2N + 1 taps; 15 each side for a 10-min
//! cut-off at 1-min steps). Chosen by measurement: a shorter kernel (1 × cutoff) lets more of half
//! the cut-off through (0.3 %) and misses the 1e-3 pass-band target at 4 h for a 30-min cut-off; a
//! longer one (2 × cutoff) sharpens the transition but moves the Hamming pass-band ripple (≈ 2e-3)
//! down onto tidal periods, so 4 h misses the target again. The filter is meant for cut-offs of at
//! least about 5 steps; a cut-off of 2 steps or less removes nothing a sampled record can hold (it
//! is at or above the Nyquist frequency) and the record is returned unchanged.
//!
//! # Runs and edges
//! The record is split into runs of regular spacing; each run is filtered on its own with a kernel
//! built for its own step, so nothing is smoothed across a gap or a change of sampling interval.
//! Within `N` samples of a run's end the kernel is truncated **symmetrically** (the same number of
//! taps each side) and renormalised to unit gain for a constant, so the filter stays zero-phase and
//! a constant or a straight line passes unchanged; but it smooths less there (at the very ends it
//! is a 3-point weighted mean), and the first and last sample of each run are left as they are.
//! Spikes should be removed (or their intervals marked unbridged) before filtering: the filter
//! spreads a spike over the kernel's length.
//!
//! # Why hand-written
//! General signal-processing crates (from memory: `sci-rs` offers window-designed FIR and
//! forward–backward filtering; `biquad` offers recursive filters) assume a regular, unbroken
//! signal and pad or reflect at the ends. None splits a record into runs at gaps and changes of
//! step, or truncates symmetrically at run ends; the kernel and the centred sum are about forty
//! lines here.
//!
//! # References
//! Windowed-sinc design and the Hamming window: textbook FIR design. Zero phase of a symmetric
//! kernel: textbook. Use on exposed 1-min records: common practice (DOMAIN §3).

/// Zero-phase low-pass filter of a record: a symmetric FIR (windowed sinc, Hamming window) with cut-off
/// period `cutoff_min` (components with periods shorter than it are removed; the gain is one half at the
/// cut-off itself, see the module doc). The record is split into
/// runs of regular spacing (a new run starts where an interval differs from the run's first interval by
/// more than 1 %, or where `unbridged[i]` is true); each run is filtered on its own. Kernel half-length:
/// ceil(1.5 × cut-off period / step) samples (see the module doc for why). Near a run's ends the kernel is
/// truncated symmetrically (same number of taps each side, renormalised to unit DC gain), so the filter
/// stays zero-phase; the first and last sample of a run are left as they are. Returns filtered heights, same length.
///
/// The step of a run is its mean interval. An interval that is not a positive finite number also
/// starts a new run. Heights must be finite: a non-finite height spoils its neighbours.
///
/// # Panics
/// When `cutoff_min` is not a positive finite number, when `heights_m` is not as long as
/// `times_s`, or when `unbridged` is not one shorter (empty for an empty record).
pub fn lowpass_zero_phase(
    times_s: &[f64],
    heights_m: &[f64],
    unbridged: &[bool],
    cutoff_min: f64,
) -> Vec<f64> {
    assert!(
        cutoff_min.is_finite() && cutoff_min > 0.0,
        "cut-off period must be a positive number of minutes, got {cutoff_min}"
    );
    let n = times_s.len();
    assert_eq!(heights_m.len(), n, "heights_m and times_s differ in length");
    assert_eq!(
        unbridged.len(),
        n.saturating_sub(1),
        "unbridged must hold one flag per interval"
    );
    let mut out = heights_m.to_vec();
    let mut start = 0;
    while start < n {
        let end = run_end(times_s, unbridged, start);
        if end > start + 1 {
            let step_min = (times_s[end] - times_s[start]) / (end - start) as f64 / 60.0;
            filter_run(
                &heights_m[start..=end],
                &mut out[start..=end],
                &half_kernel(cutoff_min, step_min),
            );
        }
        start = end + 1;
    }
    out
}

/// Gain of the full (untruncated) kernel for a sinusoid of period `period_min` when sampled every `step_min`.
///
/// Exactly 1 for a constant (`period_min` infinite) and when the cut-off is 2 steps or less (the
/// record is then returned unchanged).
///
/// # Panics
/// When `cutoff_min` or `step_min` is not a positive finite number, or `period_min` is not positive.
pub fn lowpass_gain(cutoff_min: f64, step_min: f64, period_min: f64) -> f64 {
    assert!(
        cutoff_min.is_finite() && cutoff_min > 0.0,
        "cut-off period must be a positive number of minutes, got {cutoff_min}"
    );
    assert!(
        step_min.is_finite() && step_min > 0.0,
        "step must be a positive number of minutes, got {step_min}"
    );
    assert!(
        period_min > 0.0,
        "period must be positive, got {period_min}"
    );
    let half = half_kernel(cutoff_min, step_min);
    let total = half[0] + 2.0 * half[1..].iter().sum::<f64>();
    let cycles_per_sample = step_min / period_min;
    let response = half[0]
        + 2.0
            * half
                .iter()
                .enumerate()
                .skip(1)
                .map(|(k, &w)| w * (std::f64::consts::TAU * cycles_per_sample * k as f64).cos())
                .sum::<f64>();
    response / total
}

/// Last index of the run of regular spacing that starts at `start`.
fn run_end(times_s: &[f64], unbridged: &[bool], start: usize) -> usize {
    let n = times_s.len();
    if start + 1 >= n {
        return start;
    }
    let first = times_s[start + 1] - times_s[start];
    if unbridged[start] || !(first > 0.0 && first.is_finite()) {
        return start;
    }
    let mut end = start + 1;
    while end + 1 < n {
        let interval = times_s[end + 1] - times_s[end];
        // Written so that a NaN interval also ends the run.
        let regular = (interval - first).abs() <= 0.01 * first;
        if unbridged[end] || !regular {
            break;
        }
        end += 1;
    }
    end
}

/// Unnormalised weights `w_0 ..= w_N` of the symmetric kernel (w_{-k} = w_k): the ideal low-pass
/// response `sin(2π f k) / (π k)` (`f` the cut-off in cycles per sample) times a Hamming window
/// `0.54 + 0.46 cos(π k / N)`. A single weight `[1]` (identity) when the cut-off is at or above the
/// Nyquist frequency.
fn half_kernel(cutoff_min: f64, step_min: f64) -> Vec<f64> {
    let f = step_min / cutoff_min;
    if f >= 0.5 {
        return vec![1.0];
    }
    let half_len = (1.5 * cutoff_min / step_min).ceil() as usize;
    let pi = std::f64::consts::PI;
    (0..=half_len)
        .map(|k| {
            let ideal = if k == 0 {
                2.0 * f
            } else {
                (2.0 * pi * f * k as f64).sin() / (pi * k as f64)
            };
            ideal * (0.54 + 0.46 * (pi * k as f64 / half_len as f64).cos())
        })
        .collect()
}

/// Filters one run (`y`, regular spacing) into `out` with the symmetric kernel `half`, truncating
/// it symmetrically near the ends and renormalising each truncation to unit DC gain.
fn filter_run(y: &[f64], out: &mut [f64], half: &[f64]) {
    let len = y.len();
    let half_len = half.len() - 1;
    // norm[m] = sum of the kernel truncated to m taps each side.
    let mut norm = Vec::with_capacity(half.len());
    let mut acc = half[0];
    norm.push(acc);
    for &w in &half[1..] {
        acc += 2.0 * w;
        norm.push(acc);
    }
    for j in 0..len {
        let m = half_len.min(j).min(len - 1 - j);
        if m == 0 {
            out[j] = y[j];
            continue;
        }
        let mut sum = half[0] * y[j];
        for k in 1..=m {
            sum += half[k] * (y[j - k] + y[j + k]);
        }
        out[j] = sum / norm[m];
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::SeedableRng;
    use rand_distr::{Distribution, Normal};

    /// M2 period, minutes: 360 / 28.9841042 °/h (shared/constituents.md; DOMAIN §5 check value
    /// 12.4206 h).
    const M2_PERIOD_MIN: f64 = 360.0 / 28.9841042 * 60.0;
    /// M4 period, minutes: 360 / 57.9682085 °/h (shared/constituents.md).
    const M4_PERIOD_MIN: f64 = 360.0 / 57.9682085 * 60.0;
    const T0_S: f64 = 1.7806e9;

    fn minute_times(n: usize) -> Vec<f64> {
        (0..n).map(|k| T0_S + 60.0 * k as f64).collect()
    }

    #[test]
    fn tidal_periods_pass_and_short_periods_are_removed() {
        // Targets of the design (module doc); half gain at the cut-off is the windowed-sinc
        // property (textbook FIR design).
        let g_m2 = lowpass_gain(10.0, 1.0, M2_PERIOD_MIN);
        let g_m4 = lowpass_gain(10.0, 1.0, M4_PERIOD_MIN);
        assert!((g_m2 - 1.0).abs() < 1e-4, "M2 gain {g_m2}");
        assert!((g_m4 - 1.0).abs() < 1e-3, "M4 gain {g_m4}");
        let g_seiche = lowpass_gain(10.0, 1.0, 2.0);
        assert!(g_seiche.abs() < 0.05, "2-min gain {g_seiche}");
        let g_cut = lowpass_gain(10.0, 1.0, 10.0);
        assert!((g_cut - 0.5).abs() < 0.01, "gain at the cut-off {g_cut}");
        assert_eq!(lowpass_gain(10.0, 1.0, f64::INFINITY), 1.0);
        for cutoff in [10.0, 15.0, 20.0, 25.0, 30.0] {
            for period_h in [4.0, 6.21, 12.42, 24.0] {
                let g = lowpass_gain(cutoff, 1.0, period_h * 60.0);
                assert!(
                    (g - 1.0).abs() < 1e-3,
                    "cut-off {cutoff}, {period_h} h: {g}"
                );
            }
            for frac in [0.2, 0.3, 0.4, 0.5] {
                let g = lowpass_gain(cutoff, 1.0, frac * cutoff);
                assert!(g.abs() < 5e-3, "cut-off {cutoff}, period {frac}×: {g}");
            }
        }
    }

    #[test]
    fn gain_matches_what_the_filter_does_to_a_sinusoid() {
        // Consistency of lowpass_gain with the filter itself (definition of gain); amplitude
        // measured by least-squares projection on cos/sin over whole periods in the interior.
        let n = 6000;
        let t = minute_times(n);
        for period_min in [7.0, 10.0, 13.0, 40.0] {
            let h: Vec<f64> = t
                .iter()
                .map(|&x| ((x - T0_S) / 60.0 / period_min * std::f64::consts::TAU).cos())
                .collect();
            let out = lowpass_zero_phase(&t, &h, &vec![false; n - 1], 10.0);
            let (mut c, mut s, mut cc, mut ss) = (0.0, 0.0, 0.0, 0.0);
            for (k, &y) in out.iter().enumerate().take(n - 100).skip(100) {
                let phase = k as f64 / period_min * std::f64::consts::TAU;
                c += y * phase.cos();
                s += y * phase.sin();
                cc += phase.cos().powi(2);
                ss += phase.sin().powi(2);
            }
            let measured_cos = c / cc;
            let measured_sin = s / ss;
            let expected = lowpass_gain(10.0, 1.0, period_min);
            assert!(
                (measured_cos - expected).abs() < 2e-3,
                "period {period_min}: filter gives {measured_cos}, gain says {expected}"
            );
            // Zero phase: no quadrature component appears.
            assert!(
                measured_sin.abs() < 2e-3,
                "period {period_min}: sin part {measured_sin}"
            );
        }
    }

    #[test]
    fn recovers_m2_under_a_three_minute_oscillation_without_lag() {
        // Exact M2 curve as reference; tolerance 2 mm from the brief; "no lag": the filtered
        // maximum is at the true maximum within one step (zero phase of a symmetric kernel).
        let n = 2 * 24 * 60; // two days of 1-min samples
        let t = minute_times(n);
        // Put a true high water exactly on sample 1000.
        let peak_s = t[1000];
        let m2 = |x: f64| 1.5 * ((x - peak_s) / 60.0 / M2_PERIOD_MIN * std::f64::consts::TAU).cos();
        let noisy: Vec<f64> = t
            .iter()
            .map(|&x| m2(x) + 0.05 * ((x - T0_S) / 180.0 * std::f64::consts::TAU + 0.3).sin())
            .collect();
        let out = lowpass_zero_phase(&t, &noisy, &vec![false; n - 1], 10.0);
        let edge = 15; // the kernel's half-length for 10 min at 1 min
        let mut worst = 0.0f64;
        for k in edge..n - edge {
            worst = worst.max((out[k] - m2(t[k])).abs());
        }
        assert!(
            worst < 0.002,
            "worst departure from M2: {:.3} mm",
            worst * 1e3
        );
        // The unfiltered record is far from M2 (the check is not vacuous).
        assert!(
            (noisy[1000] - m2(t[1000])).abs() > 0.01 || (noisy[1001] - m2(t[1001])).abs() > 0.01
        );
        // Time of the filtered maximum, in the first tidal cycle.
        let window = 500..1500;
        let argmax = window
            .clone()
            .max_by(|&a, &b| out[a].total_cmp(&out[b]))
            .unwrap();
        assert!(
            (t[argmax] - peak_s).abs() <= 60.0,
            "filtered maximum at {} s from the true one",
            t[argmax] - peak_s
        );
        // The crest is flat (M2 changes by 0.05 mm in the minute either side of high water), so
        // also locate it by a parabola fitted over ±60 min (least squares): zero phase puts it on
        // the true high water within 5 s, while a one-sided 10-min running mean puts it
        // ≈ 4.5 min late (its delay is half its length, textbook).
        let crest = crest_time_s(&t, &out, argmax, 60);
        assert!(
            (crest - peak_s).abs() < 5.0,
            "fitted crest {} s off",
            crest - peak_s
        );
        let lagged: Vec<f64> = (0..n)
            .map(|k| noisy[k.saturating_sub(9)..=k].iter().sum::<f64>() / (k.min(9) + 1) as f64)
            .collect();
        let lag_argmax = window
            .max_by(|&a, &b| lagged[a].total_cmp(&lagged[b]))
            .unwrap();
        let lag_crest = crest_time_s(&t, &lagged, lag_argmax, 60);
        assert!(
            (lag_crest - peak_s - 270.0).abs() < 30.0,
            "one-sided mean crest {} s late",
            lag_crest - peak_s
        );
    }

    /// Vertex time of the least-squares parabola through `y[centre - half ..= centre + half]`
    /// (regular spacing, so the odd moments of the centred abscissa vanish).
    fn crest_time_s(t: &[f64], y: &[f64], centre: usize, half: usize) -> f64 {
        let (mut n, mut sx2, mut sx4, mut sy, mut sxy, mut sx2y) = (0.0, 0.0, 0.0, 0.0, 0.0, 0.0);
        for (k, &yk) in y
            .iter()
            .enumerate()
            .take(centre + half + 1)
            .skip(centre - half)
        {
            let x = k as f64 - centre as f64;
            n += 1.0;
            sx2 += x * x;
            sx4 += x.powi(4);
            sy += yk;
            sxy += x * yk;
            sx2y += x * x * yk;
        }
        let b = sxy / sx2;
        let a = (n * sx2y - sx2 * sy) / (n * sx4 - sx2 * sx2);
        let step_s = t[centre + 1] - t[centre];
        t[centre] + (-b / (2.0 * a)) * step_s
    }

    #[test]
    fn white_noise_standard_deviation_is_reduced() {
        // Variance of white noise through a linear filter is σ² Σ w² (textbook); at least a 2×
        // reduction is the brief's target. σ = 2 cm, seeded generator.
        let n = 20_000;
        let t = minute_times(n);
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(20_260_614);
        let normal = Normal::new(0.0, 0.02).unwrap();
        let h: Vec<f64> = (0..n).map(|_| normal.sample(&mut rng)).collect();
        let out = lowpass_zero_phase(&t, &h, &vec![false; n - 1], 10.0);
        let std = |v: &[f64]| {
            let mean = v.iter().sum::<f64>() / v.len() as f64;
            (v.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / v.len() as f64).sqrt()
        };
        let before = std(&h[15..n - 15]);
        let after = std(&out[15..n - 15]);
        assert!(before > 0.019 && before < 0.021, "input σ {before}");
        assert!(after * 2.0 <= before, "σ {before} → {after}");
        let half = half_kernel(10.0, 1.0);
        let total = half[0] + 2.0 * half[1..].iter().sum::<f64>();
        let sum_sq = (half[0].powi(2) + 2.0 * half[1..].iter().map(|w| w * w).sum::<f64>())
            / (total * total);
        let predicted = before * sum_sq.sqrt();
        assert!(
            (after - predicted).abs() < 0.05 * predicted,
            "σ after {after}, predicted {predicted}"
        );
    }

    #[test]
    fn runs_are_filtered_independently() {
        // Definition of the API: a gap (unbridged) or a change of step ends a run.
        let mut t = minute_times(200);
        for x in t.iter_mut().skip(120) {
            *x += 3600.0; // a one-hour gap between samples 119 and 120
        }
        let h: Vec<f64> = t.iter().map(|&x| ((x - T0_S) / 900.0).sin()).collect();
        let mut unbridged = vec![false; 199];
        unbridged[119] = true;
        let whole = lowpass_zero_phase(&t, &h, &unbridged, 10.0);
        let left = lowpass_zero_phase(&t[..120], &h[..120], &[false; 119], 10.0);
        let right = lowpass_zero_phase(&t[120..], &h[120..], &[false; 79], 10.0);
        assert_eq!(&whole[..120], &left[..]);
        assert_eq!(&whole[120..], &right[..]);
        // Changing the right run leaves the left one alone.
        let mut h2 = h.clone();
        h2[121] += 1.0;
        let whole2 = lowpass_zero_phase(&t, &h2, &unbridged, 10.0);
        assert_eq!(&whole[..120], &whole2[..120]);
        assert_ne!(&whole[120..], &whole2[120..]);
        // Run ends are left as they are.
        for k in [0, 119, 120, 199] {
            assert_eq!(whole[k], h[k], "run end {k}");
        }
        // Without the flag, the one-hour interval still breaks the run (spacing rule).
        let by_spacing = lowpass_zero_phase(&t, &h, &[false; 199], 10.0);
        assert_eq!(by_spacing, whole);
        // But bridging would change samples near the join if they were one run: check that a
        // regular record across the same indices differs (the split is not a no-op).
        let t_regular = minute_times(200);
        let joined = lowpass_zero_phase(&t_regular, &h, &[false; 199], 10.0);
        assert_ne!(&joined[110..120], &whole[110..120]);
    }

    #[test]
    fn step_changes_split_runs_and_small_jitter_does_not() {
        // The 1 % rule of the API.
        let mut t = minute_times(100);
        // 0.5 % jitter on one interval: same run.
        t[30] += 0.3;
        let h: Vec<f64> = (0..100).map(|k| (k as f64 * 0.7).sin()).collect();
        let out = lowpass_zero_phase(&t, &h, &[false; 99], 10.0);
        assert_ne!(out[30], h[30], "jitter of 0.5 % must not start a new run");
        // 2 % on one interval: the run ends at sample 30, the next starts at 31.
        let mut t2 = minute_times(100);
        for x in t2.iter_mut().skip(31) {
            *x += 1.2;
        }
        let out2 = lowpass_zero_phase(&t2, &h, &[false; 99], 10.0);
        assert_eq!(out2[30], h[30]);
        assert_eq!(out2[31], h[31]);
        // A run of 5-min samples after 1-min ones gets its own kernel.
        let mut t3 = minute_times(60);
        for k in 1..=40 {
            t3.push(t3[59] + 300.0 * k as f64);
        }
        let h3: Vec<f64> = (0..100).map(|k| (k as f64 * 0.7).sin()).collect();
        let out3 = lowpass_zero_phase(&t3, &h3, &[false; 99], 30.0);
        let alone = lowpass_zero_phase(&t3[60..], &h3[60..], &[false; 39], 30.0);
        assert_eq!(&out3[60..], &alone[..]);
    }

    #[test]
    fn straight_lines_pass_unchanged_up_to_the_run_ends() {
        // A symmetric kernel of unit DC gain reproduces any straight line (textbook); an
        // asymmetric truncation near the ends would bend it, so this checks the edge handling.
        let n = 80;
        let t = minute_times(n);
        let h: Vec<f64> = (0..n).map(|k| 0.4 + 0.003 * k as f64).collect();
        let out = lowpass_zero_phase(&t, &h, &vec![false; n - 1], 10.0);
        for k in 0..n {
            assert!(
                (out[k] - h[k]).abs() < 1e-12,
                "sample {k}: {} vs {}",
                out[k],
                h[k]
            );
        }
        // A curve is smoothed near the ends too (the truncated kernel still filters).
        let wiggle: Vec<f64> = (0..n)
            .map(|k| if k % 2 == 0 { 0.01 } else { -0.01 })
            .collect();
        let out = lowpass_zero_phase(&t, &wiggle, &vec![false; n - 1], 10.0);
        assert!(
            out[2].abs() < 0.5 * wiggle[2].abs(),
            "near-end sample {}",
            out[2]
        );
    }

    #[test]
    fn cutoff_at_or_above_nyquist_leaves_the_record_unchanged() {
        // A sampled record holds no period shorter than 2 steps (Nyquist; textbook).
        let n = 50;
        let t: Vec<f64> = (0..n).map(|k| T0_S + 360.0 * k as f64).collect();
        let h: Vec<f64> = (0..n).map(|k| (k as f64 * 1.3).sin()).collect();
        assert_eq!(lowpass_zero_phase(&t, &h, &vec![false; n - 1], 12.0), h);
        assert_eq!(lowpass_gain(12.0, 6.0, 13.0), 1.0);
        // A cut-off of 5 steps does filter.
        assert_ne!(lowpass_zero_phase(&t, &h, &vec![false; n - 1], 30.0), h);
        assert!(lowpass_zero_phase(&[], &[], &[], 10.0).is_empty());
    }
}
