//! What a harmonic analysis's residual (observed − fitted) says about the fit: its spectrum near
//! each constituent's frequency (for uncertainties that hold when the residual is not white),
//! the sample-to-sample noise of the record, and tests for a level step or a trend in the
//! residual's lunar-day means.
//!
//! **Residual spectrum.** The residual is averaged into bins of `Δb` (the record's step, or a
//! multiple of it near 10 minutes for finer records), bins without a sample left at zero, and
//! its one-sided periodogram taken by FFT: `G(f_k) = 2 Δb |Σ_m r_m e^{−2πi f_k t_m}|² / M`, in
//! m² per cycle per day, `M` the bins with a sample, corrected for the bin average's response
//! `sinc²(π f Δb)`. White noise of variance `σ²` sampled every `Δ` has `G = 2 σ² Δ`; so the
//! *white-equivalent variance* of the residual at a frequency is `G(f) / (2 Δ)`, and the
//! least-squares variance of a cosine or sine coefficient at that frequency is `G(f) / T` instead
//! of `2 σ² / N` (a record of `N` samples over `T`): the white-noise covariance `σ² (AᵀA)⁻¹`
//! holds with `σ²` replaced by the white-equivalent variance at the constituent's frequency
//! (Munk & Cartwright 1966 on the noise spectrum of tidal analyses; the band-averaged residual
//! spectrum of Pawlowicz, Beardsley & Lentz 2002, *Computers & Geosciences* 28, 929–937, §3.2;
//! both from memory).
//!
//! The level at a constituent is the mean of the periodogram over the Fourier frequencies within
//! ±0.2 cycles per day of it, leaving out those within one Fourier spacing of any frequency the
//! model fits (the fit has removed the residual there) and the zero frequency; the band is widened
//! (×1.5 at a time, to at most ±1.5 cpd) until [`MIN_BAND_BINS`] frequencies remain. With fewer
//! even then, no level is given and the white-noise covariance stands.
//!
//! **Noise floor.** The standard deviation of the record's sample-to-sample noise, from the second
//! differences of the residual at consecutive samples one step apart:
//! `1.4826 · MAD / √6` (a white noise's second difference has variance `6σ²`; the MAD makes it
//! robust to spikes and steps; common practice).
//!
//! **Level step and trend.** The residual's means over lunar days (24.8412 h, each with at least
//! half its expected samples) are tested for one step (every split, keeping the one that most
//! reduces the residual sum of squares) and for a linear trend. Each is tested as a column added
//! to the analysis: the long-period constituents the analysis fitted (SA, SSA, MM, MF, …) take
//! part of a step or trend into their own constants, so the step's indicator, the trend's ramp
//! and the means are first freed of the constant and of those slow columns, and the size is the
//! added column's coefficient in the model with them (Frisch–Waugh–Lovell; a textbook fact of
//! least squares). Each statistic is its estimate over a standard error that allows for the
//! day-to-day correlation of the means (lag-one autocorrelation `ρ` of what is left, variance
//! inflated by `(1+ρ)/(1−ρ)`); a step or trend is *found* when the statistic exceeds
//! [`LEVEL_TEST_CRITICAL`] and its size exceeds [`LEVEL_TEST_MIN_M`]. When both are found, the
//! one that leaves the smaller residual sum of squares is named.

use rustfft::{num_complex::Complex, FftPlanner};

/// Fewest Fourier frequencies a band level is averaged over: 32 degrees of freedom, so that
/// the level's own relative standard uncertainty is about 25 % (12 % on u(H)).
pub const MIN_BAND_BINS: usize = 16;

/// Half-width of the band a residual level is averaged over, cycles per day, before widening.
pub const BAND_HALF_WIDTH_CPD: f64 = 0.2;

/// Widest half-band, cycles per day.
pub const MAX_BAND_HALF_WIDTH_CPD: f64 = 1.5;

/// The bin the residual is averaged into for its spectrum is at least this long, seconds
/// (a multiple of the record's step; 10 min keeps the response at 8 cpd above 0.99).
pub const MIN_SPECTRUM_BIN_S: f64 = 600.0;

/// A lunar day, seconds (24.8412 h: 360° / (ω_M2 / 2)).
pub const LUNAR_DAY_S: f64 = 89_428.3;

/// Critical value of the step and trend statistics (5): chosen so that records of red noise
/// without a step or trend do not reach it (the test `level_tests_quiet_on_red_noise`); a
/// maximum over many split points needs more than a single test's 2–3.
pub const LEVEL_TEST_CRITICAL: f64 = 5.0;

/// Smallest step, or trend over the record, worth naming, metres.
pub const LEVEL_TEST_MIN_M: f64 = 0.01;

const SECONDS_PER_DAY: f64 = 86_400.0;
const SECONDS_PER_YEAR: f64 = 365.25 * SECONDS_PER_DAY;

/// The residual's one-sided periodogram.
#[derive(Debug, Clone, PartialEq)]
pub struct Spectrum {
    /// Spacing of the Fourier frequencies, cycles per day (1 / the binned span).
    pub df_cpd: f64,
    /// Density at `k · df_cpd`, m² per cycle per day.
    pub density_m2_per_cpd: Vec<f64>,
    /// The record's sample step, seconds (for the white-equivalent variance).
    pub step_s: f64,
}

/// A band level of the residual spectrum.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct BandLevel {
    /// White-equivalent variance `G / (2 Δ)`, m².
    pub variance_m2: f64,
    /// Fourier frequencies averaged.
    pub bins: usize,
    /// Half-width of the band used, cycles per day.
    pub half_width_cpd: f64,
}

/// The record's most common sample interval, seconds (`None` for fewer than two samples).
pub fn modal_step_s(times_s: &[f64]) -> Option<f64> {
    let mut d: Vec<i64> = times_s
        .windows(2)
        .map(|w| ((w[1] - w[0]) * 1000.0).round() as i64)
        .filter(|&x| x > 0)
        .collect();
    if d.is_empty() {
        return None;
    }
    d.sort_unstable();
    let (mut best, mut best_n, mut i) = (d[0], 0usize, 0usize);
    while i < d.len() {
        let j = i + d[i..].iter().take_while(|&&x| x == d[i]).count();
        if j - i > best_n {
            best = d[i];
            best_n = j - i;
        }
        i = j;
    }
    Some(best as f64 / 1000.0)
}

/// The periodogram of a residual series (times increasing, UTC seconds; residuals metres).
/// `None` for fewer than 16 samples or no regular step.
pub fn residual_spectrum(times_s: &[f64], resid_m: &[f64]) -> Option<Spectrum> {
    if times_s.len() < 16 || times_s.len() != resid_m.len() {
        return None;
    }
    let step_s = modal_step_s(times_s)?;
    let per_bin = (MIN_SPECTRUM_BIN_S / step_s).ceil().max(1.0);
    let bin_s = step_s * per_bin;
    let t0 = times_s[0];
    let span = times_s[times_s.len() - 1] - t0;
    let nbins = (span / bin_s).floor() as usize + 1;
    if !(16..=1 << 26).contains(&nbins) {
        return None;
    }
    let mut sum = vec![0.0; nbins];
    let mut count = vec![0u32; nbins];
    for (&t, &r) in times_s.iter().zip(resid_m) {
        let b = (((t - t0) / bin_s).floor() as usize).min(nbins - 1);
        sum[b] += r;
        count[b] += 1;
    }
    let filled = count.iter().filter(|&&c| c > 0).count();
    let mut buf: Vec<Complex<f64>> = sum
        .iter()
        .zip(&count)
        .map(|(s, &c)| Complex::new(if c > 0 { s / c as f64 } else { 0.0 }, 0.0))
        .collect();
    FftPlanner::new().plan_fft_forward(nbins).process(&mut buf);
    let bin_days = bin_s / SECONDS_PER_DAY;
    let df_cpd = 1.0 / (nbins as f64 * bin_days);
    let density_m2_per_cpd = buf[..nbins / 2 + 1]
        .iter()
        .enumerate()
        .map(|(k, z)| {
            let x = std::f64::consts::PI * k as f64 * df_cpd * bin_days;
            let response = if x == 0.0 { 1.0 } else { (x.sin() / x).powi(2) };
            2.0 * bin_days * z.norm_sqr() / filled as f64 / response
        })
        .collect();
    Some(Spectrum {
        df_cpd,
        density_m2_per_cpd,
        step_s,
    })
}

impl Spectrum {
    /// The white-equivalent variance of the residual near `f_cpd`, leaving out the frequencies
    /// within one spacing of any of `model_cpd` (and zero); `None` when even the widest band
    /// holds fewer than [`MIN_BAND_BINS`] frequencies.
    pub fn band_level(&self, f_cpd: f64, model_cpd: &[f64]) -> Option<BandLevel> {
        let mut hw = BAND_HALF_WIDTH_CPD;
        loop {
            let lo = ((f_cpd - hw) / self.df_cpd).ceil().max(1.0) as usize;
            let hi = (((f_cpd + hw) / self.df_cpd).floor() as usize)
                .min(self.density_m2_per_cpd.len() - 1);
            let (mut s, mut n) = (0.0, 0usize);
            for k in lo..=hi {
                let fk = k as f64 * self.df_cpd;
                if model_cpd
                    .iter()
                    .any(|m| (fk - m).abs() < self.df_cpd * (1.0 - 1e-9))
                {
                    continue;
                }
                s += self.density_m2_per_cpd[k];
                n += 1;
            }
            if n >= MIN_BAND_BINS {
                let step_days = self.step_s / SECONDS_PER_DAY;
                return Some(BandLevel {
                    variance_m2: s / n as f64 / (2.0 * step_days),
                    bins: n,
                    half_width_cpd: hw,
                });
            }
            if hw >= MAX_BAND_HALF_WIDTH_CPD {
                return None;
            }
            hw = (hw * 1.5).min(MAX_BAND_HALF_WIDTH_CPD);
        }
    }
}

/// Standard deviation of the sample-to-sample noise, metres, from the second differences of the
/// residual at consecutive samples one `step_s` apart (see the module's docs). `None` with fewer
/// than 8 such triples.
pub fn noise_floor_m(times_s: &[f64], resid_m: &[f64], step_s: f64) -> Option<f64> {
    let tol = 1e-3 * step_s;
    let mut d2: Vec<f64> = times_s
        .windows(3)
        .zip(resid_m.windows(3))
        .filter(|(t, _)| (t[1] - t[0] - step_s).abs() <= tol && (t[2] - t[1] - step_s).abs() <= tol)
        .map(|(_, r)| (r[2] - 2.0 * r[1] + r[0]).abs())
        .collect();
    if d2.len() < 8 {
        return None;
    }
    let mid = d2.len() / 2;
    let (_, m, _) = d2.select_nth_unstable_by(mid, f64::total_cmp);
    Some(1.4826 * *m / 6f64.sqrt())
}

/// Means of the residual over lunar days from the first sample: (centre of the day's samples,
/// mean), for days with at least half the samples expected at `step_s`.
pub fn lunar_day_means(times_s: &[f64], resid_m: &[f64], step_s: f64) -> Vec<(f64, f64)> {
    let Some(&t0) = times_s.first() else {
        return Vec::new();
    };
    let expected = LUNAR_DAY_S / step_s;
    let mut out = Vec::new();
    let (mut day, mut st, mut sr, mut n) = (0usize, 0.0, 0.0, 0usize);
    let flush = |st: f64, sr: f64, n: usize, out: &mut Vec<(f64, f64)>| {
        if n > 0 && n as f64 >= 0.5 * expected {
            out.push((st / n as f64, sr / n as f64));
        }
    };
    for (&t, &r) in times_s.iter().zip(resid_m) {
        let d = ((t - t0) / LUNAR_DAY_S).floor() as usize;
        if d != day {
            flush(st, sr, n, &mut out);
            (day, st, sr, n) = (d, 0.0, 0.0, 0);
        }
        st += t;
        sr += r;
        n += 1;
    }
    flush(st, sr, n, &mut out);
    out
}

/// A level step found in the residual.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct LevelStep {
    /// Between the last lunar day before and the first after: the first day's start, UTC s.
    pub at_s: f64,
    /// The step's size (level after − level before) as a column added to the analysis, metres.
    pub size_m: f64,
    /// Standard uncertainty of the size, metres.
    pub u_size_m: f64,
    /// |size| / u.
    pub statistic: f64,
}

/// A linear trend of the residual.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct LevelTrend {
    /// Rate, metres per year.
    pub rate_m_per_yr: f64,
    /// Standard uncertainty of the rate, metres per year.
    pub u_rate_m_per_yr: f64,
    /// |rate| / u.
    pub statistic: f64,
}

/// What the lunar-day means say.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct LevelTests {
    /// Lunar-day means tested.
    pub days: usize,
    /// Root mean square of the means, metres (the residual's slow part).
    pub rms_m: f64,
    /// The best single step, whether found or not.
    pub step: Option<LevelStep>,
    /// The trend, whether found or not.
    pub trend: Option<LevelTrend>,
    /// The step is found (and explains the means better than a found trend).
    pub step_found: bool,
    /// The trend is found (and explains the means better than a found step).
    pub trend_found: bool,
}

/// Variance inflation `(1+ρ)/(1−ρ)` from the lag-one autocorrelation of `e` (ρ clamped to
/// [0, 0.95]).
fn inflation(e: &[f64]) -> f64 {
    let ss: f64 = e.iter().map(|x| x * x).sum();
    if ss <= 0.0 {
        return 1.0;
    }
    let lag: f64 = e.windows(2).map(|w| w[0] * w[1]).sum();
    let rho = (lag / ss).clamp(0.0, 0.95);
    (1.0 + rho) / (1.0 - rho)
}

/// The columns of the analysis that vary slowly enough to take part of a level step or a trend:
/// what [`level_tests`] tests against.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct SlowModel {
    /// Frequencies of the long-period constituents fitted, cycles per day.
    pub freqs_cpd: Vec<f64>,
    /// A linear trend was fitted.
    pub trend: bool,
}

/// Orthonormal basis (columns, each of length `n`) of the constant, the slow model's cosines
/// and sines at times `t_d` (days) and its trend; columns dependent on earlier ones (below
/// 1e-9 of their norm) are dropped. Modified Gram–Schmidt, twice.
fn slow_basis(t_d: &[f64], slow: &SlowModel) -> Vec<Vec<f64>> {
    let n = t_d.len();
    let tm = t_d.iter().sum::<f64>() / n as f64;
    let mut cols: Vec<Vec<f64>> = vec![vec![1.0; n]];
    for f in &slow.freqs_cpd {
        let w = std::f64::consts::TAU * f;
        cols.push(t_d.iter().map(|t| (w * (t - tm)).cos()).collect());
        cols.push(t_d.iter().map(|t| (w * (t - tm)).sin()).collect());
    }
    if slow.trend {
        cols.push(t_d.iter().map(|t| t - tm).collect());
    }
    let mut basis: Vec<Vec<f64>> = Vec::new();
    for mut c in cols {
        let norm0 = dot(&c, &c).sqrt();
        for _ in 0..2 {
            for q in &basis {
                let a = dot(&c, q);
                c.iter_mut().zip(q).for_each(|(x, y)| *x -= a * y);
            }
        }
        let norm = dot(&c, &c).sqrt();
        if norm > 1e-9 * norm0 && basis.len() + 2 < n {
            c.iter_mut().for_each(|x| *x /= norm);
            basis.push(c);
        }
    }
    basis
}

fn dot(a: &[f64], b: &[f64]) -> f64 {
    a.iter().zip(b).map(|(x, y)| x * y).sum()
}

/// `v` less its projection on the orthonormal `basis`.
fn residualise(v: &[f64], basis: &[Vec<f64>]) -> Vec<f64> {
    let mut out = v.to_vec();
    for q in basis {
        let a = dot(&out, q);
        out.iter_mut().zip(q).for_each(|(x, y)| *x -= a * y);
    }
    out
}

/// Tests the lunar-day means for a step and a trend (see the module's docs). Each is tested as a
/// column added to the analysis: its regressor and the means are first freed of the constant
/// and of `slow` (the long-period constituents and trend the analysis fitted, which absorb part
/// of a step or trend), and the size is the added column's coefficient (Frisch–Waugh–Lovell;
/// a textbook fact of least squares). With fewer than 8 means, nothing is tested.
pub fn level_tests(means: &[(f64, f64)], slow: &SlowModel) -> LevelTests {
    let n = means.len();
    let rms_m = if n > 0 {
        (means.iter().map(|m| m.1 * m.1).sum::<f64>() / n as f64).sqrt()
    } else {
        0.0
    };
    let mut out = LevelTests {
        days: n,
        rms_m,
        ..LevelTests::default()
    };
    if n < 8 {
        return out;
    }
    let t_d: Vec<f64> = means.iter().map(|m| m.0 / SECONDS_PER_DAY).collect();
    let basis = slow_basis(&t_d, slow);
    let q = basis.len();
    let dof = (n - q - 1) as f64;
    let y0: Vec<f64> = means.iter().map(|m| m.1).collect();
    let y = residualise(&y0, &basis);
    let yy = dot(&y, &y);
    // Step at k (indicator of days k..n): suffix sums of y and of the basis rows give
    // <y, x⊥> = <y, x> and <x⊥, x⊥> = (n − k) − |Qᵀx|².
    let mut best: Option<(usize, f64, f64, f64)> = None; // (k, gain, b, xx)
    let mut sy = 0.0;
    let mut sq = vec![0.0; q];
    for k in (1..n).rev() {
        sy += y[k];
        for (j, b) in basis.iter().enumerate() {
            sq[j] += b[k];
        }
        if k < 3 || n - k < 3 {
            continue;
        }
        let xx = (n - k) as f64 - sq.iter().map(|v| v * v).sum::<f64>();
        if xx <= 1e-9 * (n - k) as f64 {
            continue;
        }
        let gain = sy * sy / xx;
        if best.is_none_or(|b| gain > b.1) {
            best = Some((k, gain, sy / xx, xx));
        }
    }
    let mut rss_step = f64::INFINITY;
    if let Some((k, gain, size, xx)) = best {
        let x: Vec<f64> = (0..n).map(|i| f64::from(u8::from(i >= k))).collect();
        let xp = residualise(&x, &basis);
        let e: Vec<f64> = y.iter().zip(&xp).map(|(a, b)| a - size * b).collect();
        rss_step = (yy - gain).max(0.0);
        let u = (rss_step / dof / xx * inflation(&e)).sqrt();
        out.step = Some(LevelStep {
            at_s: 0.5 * (means[k - 1].0 + means[k].0),
            size_m: size,
            u_size_m: u,
            statistic: if u > 0.0 {
                size.abs() / u
            } else {
                f64::INFINITY
            },
        });
    }
    // Trend (absent when the analysis fitted one: its residual holds none).
    let t_yr: Vec<f64> = means.iter().map(|m| m.0 / SECONDS_PER_YEAR).collect();
    let xp = residualise(&t_yr, &basis);
    let xx = dot(&xp, &xp);
    let tm = t_yr.iter().sum::<f64>() / n as f64;
    let stt: f64 = t_yr.iter().map(|v| (v - tm) * (v - tm)).sum();
    let mut rss_trend = f64::INFINITY;
    if xx > 1e-6 * stt && stt > 0.0 {
        let b = dot(&y, &xp) / xx;
        let e: Vec<f64> = y.iter().zip(&xp).map(|(a, x)| a - b * x).collect();
        rss_trend = dot(&e, &e);
        let u = (rss_trend / dof / xx * inflation(&e)).sqrt();
        out.trend = Some(LevelTrend {
            rate_m_per_yr: b,
            u_rate_m_per_yr: u,
            statistic: if u > 0.0 { b.abs() / u } else { f64::INFINITY },
        });
    }
    let span_yr = t_yr[n - 1] - t_yr[0];
    let step_ok = out
        .step
        .is_some_and(|s| s.statistic > LEVEL_TEST_CRITICAL && s.size_m.abs() >= LEVEL_TEST_MIN_M);
    let trend_ok = out.trend.is_some_and(|s| {
        s.statistic > LEVEL_TEST_CRITICAL && (s.rate_m_per_yr * span_yr).abs() >= LEVEL_TEST_MIN_M
    });
    out.step_found = step_ok && (!trend_ok || rss_step <= rss_trend);
    out.trend_found = trend_ok && (!step_ok || rss_trend < rss_step);
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::SeedableRng;
    use rand_distr::{Distribution, Normal};

    fn grid(n: usize, step_s: f64) -> Vec<f64> {
        (0..n).map(|i| 1.0e9 + i as f64 * step_s).collect()
    }

    /// White noise of variance σ²: the white-equivalent variance is σ² at every band
    /// (definition of the normalisation; Parseval).
    #[test]
    fn white_noise_level_is_its_variance() {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(7);
        let nd = Normal::new(0.0, 0.05).unwrap();
        for step_s in [3600.0, 360.0, 60.0] {
            let n = (60.0 * 86_400.0 / step_s) as usize;
            let t = grid(n, step_s);
            let r: Vec<f64> = (0..n).map(|_| nd.sample(&mut rng)).collect();
            let s = residual_spectrum(&t, &r).unwrap();
            for f in [0.1, 1.0, 1.93, 4.0] {
                let b = s.band_level(f, &[1.93]).unwrap();
                // 32+ degrees of freedom: within 45 % of 0.0025 m² (some 3.6 σ of the estimate).
                assert!(
                    (b.variance_m2 / 0.0025 - 1.0).abs() < 0.45,
                    "step {step_s} s, {f} cpd: {} ({} bins)",
                    b.variance_m2,
                    b.bins
                );
            }
        }
    }

    /// AR(1) noise x_i = φ x_{i−1} + e_i: discrete spectrum σ_e² / (1 + φ² − 2φ cos ωΔ)
    /// (Box & Jenkins; textbook result, from memory), which is the white-equivalent variance.
    #[test]
    fn red_noise_level_follows_the_ar1_spectrum() {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(11);
        let nd = Normal::new(0.0, 0.01).unwrap();
        let (step_s, phi) = (3600.0, 0.9);
        let n = 24 * 365;
        let t = grid(n, step_s);
        let mut x = 0.0;
        let r: Vec<f64> = (0..n)
            .map(|_| {
                x = phi * x + nd.sample(&mut rng);
                x
            })
            .collect();
        let s = residual_spectrum(&t, &r).unwrap();
        for f in [0.5, 1.0, 2.0, 4.0] {
            let w = 2.0 * std::f64::consts::PI * f / 24.0;
            let expect = 1e-4 / (1.0 + phi * phi - 2.0 * phi * w.cos());
            let b = s.band_level(f, &[]).unwrap();
            assert!(
                (b.variance_m2 / expect - 1.0).abs() < 0.3,
                "{f} cpd: {} against {expect}",
                b.variance_m2
            );
        }
    }

    /// The second-difference estimate of white noise σ = 1 cm on a smooth signal.
    #[test]
    fn noise_floor_of_white_noise() {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(3);
        let nd = Normal::new(0.0, 0.01).unwrap();
        let t = grid(5000, 360.0);
        let r: Vec<f64> = t
            .iter()
            .map(|ti| 0.3 * (ti / 40_000.0).sin() + nd.sample(&mut rng))
            .collect();
        let s = noise_floor_m(&t, &r, 360.0).unwrap();
        assert!((s / 0.01 - 1.0).abs() < 0.08, "{s}");
    }

    fn ar1_days(n: usize, seed: u64, sigma_m: f64, phi: f64) -> Vec<(f64, f64)> {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(seed);
        let nd = Normal::new(0.0, sigma_m).unwrap();
        let mut x = 0.0;
        (0..n)
            .map(|i| {
                x = phi * x + nd.sample(&mut rng);
                (1.0e9 + i as f64 * LUNAR_DAY_S, x)
            })
            .collect()
    }

    /// Red noise without a step or trend: no alarm over 200 records (the critical value's
    /// calibration; a false alarm rate of at most 1 %).
    #[test]
    fn level_tests_quiet_on_red_noise() {
        let mut alarms = 0;
        for seed in 0..200 {
            let m = ar1_days(350, seed, 0.03, 0.7);
            let r = level_tests(&m, &SlowModel::default());
            if r.step_found || r.trend_found {
                alarms += 1;
            }
        }
        assert!(alarms <= 2, "{alarms} false alarms in 200");
    }

    /// A 10 cm step and a 5 cm/yr trend in the same red noise: each found, and named as what it is.
    #[test]
    fn level_tests_find_and_name_a_step_and_a_trend() {
        for seed in 0..20 {
            let mut m = ar1_days(350, 500 + seed, 0.03, 0.7);
            let at = m[200].0;
            for d in m.iter_mut().skip(200) {
                d.1 += 0.10;
            }
            let r = level_tests(&m, &SlowModel::default());
            assert!(r.step_found && !r.trend_found, "seed {seed}: {r:?}");
            let s = r.step.unwrap();
            // 4 u: the split that maximises the statistic is chosen from the noisy means, which
            // biases the size a little towards the noise's own excursions.
            assert!((s.size_m - 0.10).abs() < 4.0 * s.u_size_m, "{s:?}");
            // Red noise moves the best split by days to a couple of weeks (σ of the means 4 cm,
            // correlated over about six days, against a 10 cm step).
            assert!((s.at_s - at).abs() < 20.0 * LUNAR_DAY_S, "{s:?}");

            let mut m = ar1_days(350, 900 + seed, 0.01, 0.7);
            let t0 = m[0].0;
            for d in m.iter_mut() {
                d.1 += 0.05 * (d.0 - t0) / SECONDS_PER_YEAR;
            }
            let r = level_tests(&m, &SlowModel::default());
            assert!(r.trend_found && !r.step_found, "seed {seed}: {r:?}");
            let tr = r.trend.unwrap();
            assert!(
                (tr.rate_m_per_yr - 0.05).abs() < 3.0 * tr.u_rate_m_per_yr,
                "{tr:?}"
            );
        }
    }

    /// The modal step of a record with a gap and an odd interval.
    #[test]
    fn modal_step() {
        let t = [0.0, 360.0, 720.0, 1080.0, 5000.0, 5360.0, 5720.0];
        assert_eq!(modal_step_s(&t), Some(360.0));
    }
}
