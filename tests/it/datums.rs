//! Observed high and low waters and tidal datums (`compute::extrema`, `compute::datums`,
//! `ebbwise datums`), each check against an analytic relation or an independent computation.

use super::{ebbwise_in, stderr};
use ebbwise::compute::astro::{constituent, nodal_fu};
use ebbwise::compute::datums::{datums, Datums};
use ebbwise::compute::extrema::{tabulate, ExtremaSettings, TIDAL_DAY_S};
use ebbwise::compute::harmonic::{predict_grid, HarmonicConstants};

const DEG_PER_H: f64 = std::f64::consts::PI / 180.0 / 3600.0;

/// (speed °/h, amplitude m, phase °) of closed-form cosines.
type Wave = (f64, f64, f64);

fn closed_form(z0: f64, waves: &[Wave], t: f64) -> f64 {
    z0 + waves
        .iter()
        .map(|(w, a, g)| a * (w * DEG_PER_H * t - g.to_radians()).cos())
        .sum::<f64>()
}

fn grid(t0: f64, step_s: f64, n: usize) -> Vec<f64> {
    (0..n).map(|i| t0 + step_s * i as f64).collect()
}

const T0: f64 = 1_767_225_600.0; // 2026-01-01T00:00:00Z

/// A mixed tide (M2 1.0 m, S2 0.33, K1 0.30, O1 0.22 m; F = 0.39) as closed-form cosines,
/// 6-minute samples over 30 days. Each complete tidal day's HHW and LLW are the day's highest
/// and lowest value of the analytic tide (found by evaluating it every 10 s over the day: an
/// independent computation), within 3 mm and 4 min; MHHW and MLLW are the means of those
/// maxima and minima within 2 mm; MSL is Z0 within the analytic bound of a lunar day's mean of
/// each constituent, |H·sinc(ωT/2)|.
#[test]
fn mixed_tide_against_its_analytic_daily_extremes() {
    let waves: [Wave; 4] = [
        (28.984_104_2, 1.0, 40.0),
        (30.0, 0.33, 75.0),
        (15.041_068_6, 0.30, 200.0),
        (13.943_035_6, 0.22, 190.0),
    ];
    let z0 = 2.0;
    let t = grid(T0, 360.0, 30 * 240);
    let h: Vec<f64> = t.iter().map(|&x| closed_form(z0, &waves, x)).collect();
    let tab = tabulate(&t, &h, &ExtremaSettings::default()).unwrap();
    let d = datums(&tab).unwrap();
    let (mut maxima, mut minima) = (Vec::new(), Vec::new());
    for (k, day) in tab.days.iter().enumerate().filter(|(_, d)| d.complete) {
        let dense = grid(day.start_s, 10.0, (TIDAL_DAY_S / 10.0) as usize);
        let (mut tmax, mut vmax, mut tmin, mut vmin) = (0.0, f64::MIN, 0.0, f64::MAX);
        for &x in &dense {
            let v = closed_form(z0, &waves, x);
            if v > vmax {
                (tmax, vmax) = (x, v);
            }
            if v < vmin {
                (tmin, vmin) = (x, v);
            }
        }
        // The day's extremes lie inside it (turning points, not edge values).
        assert!(tmax > day.start_s + 600.0 && tmax < day.start_s + TIDAL_DAY_S - 600.0);
        assert!(tmin > day.start_s + 600.0 && tmin < day.start_s + TIDAL_DAY_S - 600.0);
        let of_day: Vec<_> = tab.extrema.iter().filter(|e| e.day == k).collect();
        let hhw = of_day.iter().find(|e| e.label() == "HHW").expect("an HHW");
        let llw = of_day.iter().find(|e| e.label() == "LLW").expect("an LLW");
        assert!(
            (hhw.water.height_m - vmax).abs() < 3e-3,
            "day {k}: HHW {hhw:?}, max {vmax}"
        );
        assert!((hhw.water.t_s - tmax).abs() < 240.0, "day {k}");
        assert!(
            (llw.water.height_m - vmin).abs() < 3e-3,
            "day {k}: LLW {llw:?}, min {vmin}"
        );
        assert!((llw.water.t_s - tmin).abs() < 240.0, "day {k}");
        // Two high and two low waters a day in this mainly semidiurnal tide, at most one of
        // each higher/lower label.
        assert_eq!(of_day.iter().filter(|e| e.water.high).count(), 2, "day {k}");
        assert_eq!(
            of_day.iter().filter(|e| !e.water.high).count(),
            2,
            "day {k}"
        );
        maxima.push(vmax);
        minima.push(vmin);
    }
    let mean = |v: &[f64]| v.iter().sum::<f64>() / v.len() as f64;
    assert!(maxima.len() >= 27);
    assert!(
        (d.mhhw.value_m - mean(&maxima)).abs() < 2e-3,
        "{:?}",
        d.mhhw
    );
    assert!(
        (d.mllw.value_m - mean(&minima)).abs() < 2e-3,
        "{:?}",
        d.mllw
    );
    let bound: f64 = waves
        .iter()
        .map(|(w, a, _)| {
            let x = w * DEG_PER_H * TIDAL_DAY_S / 2.0;
            (a * x.sin() / x).abs()
        })
        .sum();
    assert!(
        (d.msl.value_m - z0).abs() <= bound,
        "MSL {:?}, bound {bound}",
        d.msl
    );
    assert!((d.dtl.value_m - (d.mhhw.value_m + d.mllw.value_m) / 2.0).abs() < 1e-12);
    assert!((d.gt.value_m - (d.mhhw.value_m - d.mllw.value_m)).abs() < 1e-12);
}

/// The mean of the envelope |a + b·e^{iθ}| over θ (by quadrature): the mean high water above Z0
/// of a tide of two semidiurnal constituents whose relative phase θ turns slowly, when every
/// phase θ counts alike; and the same mean **per high water**: the sum's phase turns at
/// ω + Δω·(b² + ab cos θ)/|a + b e^{iθ}|² (the derivative of arg(a + b e^{iθ})), faster at springs,
/// so high waters come more often at springs and their mean weights θ by that rate (Δω the
/// speed difference, ω the first constituent's speed; analytic).
fn mean_envelope(a: f64, b: f64, w: f64, dw: f64) -> (f64, f64) {
    let n = 100_000;
    let (mut plain, mut weighted, mut weights) = (0.0, 0.0, 0.0);
    for i in 0..n {
        let th = std::f64::consts::TAU * (i as f64 + 0.5) / n as f64;
        let e2 = a * a + b * b + 2.0 * a * b * th.cos();
        let rate = w + dw * (b * b + a * b * th.cos()) / e2;
        plain += e2.sqrt();
        weighted += e2.sqrt() * rate;
        weights += rate;
    }
    (plain / n as f64, weighted / weights)
}

/// M2 + S2 over a year from the project's prediction (`predict_grid`, with nodal corrections):
/// MHW − Z0 and Z0 − MLW are the mean envelope of the two amplitudes (f·H at mid-year) **per
/// high (low) water** ([`mean_envelope`]), MN twice it, within 6 mm. Measured: MHW − Z0 lies
/// 7.2 mm above the envelope averaged over phases alike; 2.7 mm of it is the high waters coming
/// more often at springs (the per-high-water mean), 4.5 mm is not yet explained, hence the
/// bound. MSL = MTL = Z0 (analytic relations of a two-constituent tide) within 1 and 3 mm.
#[test]
fn spring_neap_year_against_the_mean_envelope() {
    let (m2, s2) = (constituent("M2").unwrap(), constituent("S2").unwrap());
    let k = HarmonicConstants {
        z0_m: 1.8,
        constituents: vec![(m2, 1.1, 60.0), (s2, 0.4, 95.0)],
    };
    let n = 365 * 240;
    let h = predict_grid(&k, T0, 360.0, n);
    let t = grid(T0, 360.0, n);
    let tab = tabulate(&t, &h, &ExtremaSettings::default()).unwrap();
    let d = datums(&tab).unwrap();
    let mid = ebbwise::compute::astro::astro_at(T0 + 0.5 * n as f64 * 360.0);
    let a = nodal_fu(m2, &mid).0 * 1.1;
    let b = nodal_fu(s2, &mid).0 * 0.4;
    let (plain, env) = mean_envelope(a, b, m2.speed_deg_per_h, 30.0 - m2.speed_deg_per_h);
    println!(
        "MHW - Z0 {:.5}, Z0 - MLW {:.5}; envelope per high water {env:.5}, over phases {plain:.5}",
        d.mhw.value_m - 1.8,
        1.8 - d.mlw.value_m
    );
    assert!(
        (d.mhw.value_m - 1.8 - env).abs() < 6e-3,
        "{:?} vs {env}",
        d.mhw
    );
    assert!(
        (1.8 - d.mlw.value_m - env).abs() < 6e-3,
        "{:?} vs {env}",
        d.mlw
    );
    assert!((d.mn.value_m - 2.0 * env).abs() < 1.2e-2, "{:?}", d.mn);
    assert!((d.msl.value_m - 1.8).abs() < 1e-3, "{:?}", d.msl);
    assert!((d.mtl.value_m - 1.8).abs() < 3e-3, "{:?}", d.mtl);
    // A semidiurnal tide: two of each per tidal day, none doubled (analytic count).
    let days = d.complete_days as f64;
    assert!(
        (d.high_waters as f64 - 2.0 * days).abs() <= 1.0,
        "{}",
        d.high_waters
    );
    assert!(
        (d.low_waters as f64 - 2.0 * days).abs() <= 1.0,
        "{}",
        d.low_waters
    );
    assert_eq!(d.doubles, 0);
}

/// The uncertainty model against the actual errors: a mixed tide (`predict_grid`, M2 1.0 m, S2
/// 0.33, K1 0.30, O1 0.22, Z0 2.0) with 3 cm white noise, 120 records of 15 to 45 days starting
/// anywhere in 2026 (seeded), each datum against the datum of the noiseless year (the long
/// record of the same tide the model refers to). The share of errors within the stated u is
/// printed (`--nocapture`) and must lie between 50 % and 90 % (68 % for a normal error), and
/// within 2u at least 90 % (95 %); each datum's at least 50 % within u and 80 % within 2u.
#[test]
fn stated_uncertainty_covers_the_actual_error() {
    use rand::{Rng, SeedableRng};
    use rand_distr::{Distribution, Normal};
    let c = |n: &str| constituent(n).unwrap();
    let k = HarmonicConstants {
        z0_m: 2.0,
        constituents: vec![
            (c("M2"), 1.0, 40.0),
            (c("S2"), 0.33, 75.0),
            (c("K1"), 0.30, 200.0),
            (c("O1"), 0.22, 190.0),
        ],
    };
    let step = 360.0;
    let n_year = 365 * 240;
    let year = predict_grid(&k, T0, step, n_year);
    let truth =
        datums(&tabulate(&grid(T0, step, n_year), &year, &ExtremaSettings::default()).unwrap())
            .unwrap();
    let values = |d: &Datums| {
        [
            ("MSL", d.msl),
            ("MHW", d.mhw),
            ("MLW", d.mlw),
            ("MHHW", d.mhhw),
            ("MLLW", d.mllw),
            ("MTL", d.mtl),
            ("DTL", d.dtl),
            ("MN", d.mn),
            ("GT", d.gt),
        ]
    };
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(2026);
    let noise = Normal::new(0.0, 0.03).unwrap();
    let trials = 120;
    let mut within = [0usize; 9];
    let mut within2 = [0usize; 9];
    let mut ratio_sq = [0.0f64; 9];
    for _ in 0..trials {
        let days: f64 = rng.gen_range(15.0..45.0);
        let n = (days * 240.0) as usize;
        let i0 = rng.gen_range(0..n_year - n);
        let t = grid(T0 + i0 as f64 * step, step, n);
        let h: Vec<f64> = year[i0..i0 + n]
            .iter()
            .map(|v| v + noise.sample(&mut rng))
            .collect();
        let d = datums(&tabulate(&t, &h, &ExtremaSettings::default()).unwrap()).unwrap();
        for (j, ((_, est), (_, tru))) in values(&d).iter().zip(values(&truth)).enumerate() {
            let err = (est.value_m - tru.value_m).abs();
            within[j] += usize::from(err <= est.u_m);
            within2[j] += usize::from(err <= 2.0 * est.u_m);
            ratio_sq[j] += (err / est.u_m).powi(2);
        }
    }
    let mut all = 0;
    let mut all2 = 0;
    for (j, (name, _)) in values(&truth).iter().enumerate() {
        println!(
            "{name:<5} within u {:5.1} %, within 2u {:5.1} %, RMS(error/u) {:.2}",
            100.0 * within[j] as f64 / trials as f64,
            100.0 * within2[j] as f64 / trials as f64,
            (ratio_sq[j] / trials as f64).sqrt()
        );
        all += within[j];
        all2 += within2[j];
    }
    let share = all as f64 / (9 * trials) as f64;
    let share2 = all2 as f64 / (9 * trials) as f64;
    println!(
        "all datums: within u {:.1} %, within 2u {:.1} % ({} records)",
        100.0 * share,
        100.0 * share2,
        trials
    );
    assert!((0.5..=0.9).contains(&share), "{share}");
    assert!(share2 >= 0.9, "{share2}");
    // Every datum on its own: within u at least half, within 2u at least 80 %.
    for (j, (name, _)) in values(&truth).iter().enumerate() {
        assert!(
            within[j] * 2 >= trials,
            "{name}: {} of {trials} within u",
            within[j]
        );
        assert!(
            within2[j] * 5 >= trials * 4,
            "{name}: {} of {trials} within 2u",
            within2[j]
        );
    }
}

/// `ebbwise datums` on a one-minute record with 3 cm noise, a stand at every high water and a
/// secondary crest after it: the file's high and low waters number one per M2 period of the
/// complete days (analytic), the doubles are reported, the gauge-zero heights are the
/// chart-datum heights less the zero's height above chart datum (definition), and the default
/// name is `<STEM>.datums.toml`. Without QC: the planted secondary crest (0.6 m within about
/// 30 minutes onto a clipped, flat top) is a step to QC's level-shift test (+0.45 m against a
/// cubic over 120 min each side, limit 0.19 m), which sets aside 482 samples and leaves no
/// complete day; a real stand is not flagged (`clean_stand_passes_qc`).
#[test]
fn command_writes_the_datums_file() {
    use rand::SeedableRng;
    use rand_distr::{Distribution, Normal};
    let dir = tempfile::tempdir().unwrap();
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(11);
    let noise = Normal::new(0.0, 0.03).unwrap();
    let w = 28.984_104_2 * DEG_PER_H;
    let top = (w * 2700.0).cos();
    let mut csv = String::from("time,height\n");
    for i in 0..5 * 1440 {
        let x = i as f64 * 60.0;
        let ph = (w * x).rem_euclid(std::f64::consts::TAU);
        let after_h = ph / w / 3600.0;
        let bump = 0.6 * (-((after_h - 2.5) / 0.5).powi(2)).exp();
        let v = 3.0 + 1.2 * (w * x).cos().min(top) + bump + noise.sample(&mut rng);
        let secs = i * 60;
        csv.push_str(&format!(
            "2026-03-{:02}T{:02}:{:02}:00Z,{v:.3}\n",
            1 + secs / 86400,
            (secs % 86400) / 3600,
            (secs % 3600) / 60
        ));
    }
    std::fs::write(dir.path().join("sta.csv"), csv).unwrap();
    let o = ebbwise_in(
        dir.path(),
        &[
            "datums",
            "sta.csv",
            "--zero-above-datum-m",
            "-1.5",
            "--no-qc",
        ],
    );
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    let text = std::fs::read_to_string(dir.path().join("sta.datums.toml")).unwrap();
    let v: toml::Value = toml::from_str(&text).unwrap();
    assert_eq!(v["format"].as_str(), Some("ebbwise-datums/1"));
    let complete = v["complete_days"].as_integer().unwrap() as f64;
    let hw = v["high_waters"].as_integer().unwrap() as f64;
    let lw = v["low_waters"].as_integer().unwrap() as f64;
    let per_day = TIDAL_DAY_S / 3600.0 / (360.0 / 28.984_104_2);
    assert!(
        (hw - per_day * complete).abs() < 0.5,
        "{hw} in {complete} days"
    );
    assert!(
        (lw - per_day * complete).abs() < 0.5,
        "{lw} in {complete} days"
    );
    assert!(v["doubles"].as_integer().unwrap() as f64 >= hw - 1.0);
    for name in ["msl", "mhw", "mlw", "mhhw", "mllw", "mtl", "dtl"] {
        let e = &v[name];
        let cd = e["above_chart_datum_m"].as_float().unwrap();
        let gz = e["above_gauge_zero_m"].as_float().unwrap();
        assert!((gz - (cd + 1.5)).abs() < 1.5e-4, "{name}: {cd} {gz}");
        assert!(e["u_m"].as_float().unwrap() > 0.0);
    }
    let sha = v["record_sha256"].as_str().unwrap();
    assert_eq!(sha.len(), 64);
    let err = stderr(&o);
    for word in [
        "MHHW",
        "MLLW",
        "above CD m",
        "above zero m",
        "wrote sta.datums.toml",
    ] {
        assert!(err.contains(word), "{word} not in\n{err}");
    }
}

/// A datums file in the right layout, with the given gauge id, zero and MSL above chart datum.
fn datums_file_text(gauge: &str, zero: f64, msl_cd: f64) -> String {
    let level = |v: f64| {
        format!(
            "above_chart_datum_m = {v}\nabove_gauge_zero_m = {}\nu_m = 0.01\ndays = 28\n",
            v - zero
        )
    };
    let mut s = format!(
        "format = \"ebbwise-datums/1\"\ngauge = \"{gauge}\"\nzero_above_datum_m = {zero}\nrecord_start_utc = \"2026-05-01T00:00:00.000Z\"\nrecord_end_utc = \"2026-05-30T00:00:00.000Z\"\ndays_start_utc = \"2026-05-01T03:00:00.000Z\"\ndays_end_utc = \"2026-05-29T03:00:00.000Z\"\nsamples = 7000\ncomplete_days = 28\nincomplete_days = 2\nhigh_waters = 56\nlow_waters = 56\ndoubles = 0\nnoise_m = 0.02\nthreshold_m = 0.05\nsmoothing_cutoff_min = 30.0\nmin_separation_h = 2.07\nmethod = \"m\"\nuncertainty_model = \"u\"\n"
    );
    for name in ["msl", "mhw", "mlw", "mhhw", "mllw", "mtl", "dtl"] {
        s.push_str(&format!("\n[{name}]\n{}", level(msl_cd)));
    }
    for name in ["mn", "gt"] {
        s.push_str(&format!(
            "\n[{name}]\nrange_m = 2.0\nu_m = 0.02\ndays = 28\n"
        ));
    }
    s
}

/// A gauge's `datums` entry: a file of another gauge is an error naming the file and field
/// `gauge`; a file whose MSL lies far from the gauge's mean_level_above_datum_m (2.1 m in the
/// mini project) is a warning of `ebbwise check`; one that agrees gives neither.
#[test]
fn project_gauge_datums_are_checked() {
    let p = super::MiniProject::new("time,x,y,depth\n");
    let project = std::fs::read_to_string(p.path("project.toml")).unwrap();
    let with = project.replacen(
        "id = \"g1\"\n",
        "id = \"g1\"\ndatums = \"g1.datums.toml\"\n",
        1,
    );
    p.write("project.toml", &with);
    p.write("g1.datums.toml", &datums_file_text("other", 1.0, 2.1));
    let o = super::ebbwise(&["check", p.path("project.toml").to_str().unwrap()]);
    let e = stderr(&o);
    assert_ne!(o.status.code(), Some(0), "{e}");
    assert!(
        e.contains("g1.datums.toml") && e.contains("field 'gauge'") && e.contains("'other'"),
        "{e}"
    );
    p.write("g1.datums.toml", &datums_file_text("g1", 1.0, 2.5));
    let o = super::ebbwise(&["check", p.path("project.toml").to_str().unwrap()]);
    let e = stderr(&o);
    assert!(
        e.contains("mean_level_above_datum_m = 2.1") && e.contains("warning"),
        "{e}"
    );
    p.write("g1.datums.toml", &datums_file_text("g1", 1.0, 2.105));
    let o = super::ebbwise(&["check", p.path("project.toml").to_str().unwrap()]);
    assert!(!stderr(&o).contains("datums"), "{}", stderr(&o));
}

/// A constants file (levels above chart datum, gauge zero 0.5 m below it, a 29-day record) of
/// the given (name, speed °/h, amplitude m, u amplitude m, phase °) constituents, Z0 1.2 m.
fn constants_text(waves: &[(&str, f64, f64, f64, f64)]) -> String {
    let mut s = String::from(
        "format = \"ebbwise-harmonic-constants/1\"\nlevels = \"above chart datum\"\nz0_m = 1.2\nu_z0_m = 0.002\nrayleigh_factor = 1.0\ndatum = \"chart datum\"\nzero_above_datum_m = -0.5\nrecord_start_utc = \"2026-01-01T00:00:00.000Z\"\nrecord_end_utc = \"2026-01-30T00:00:00.000Z\"\n",
    );
    for (name, speed, h, uh, g) in waves {
        s.push_str(&format!(
            "\n[[constituent]]\nname = \"{name}\"\nspeed_deg_per_h = {speed}\namplitude_m = {h}\nphase_deg = {g}\nu_amplitude_m = {uh}\nu_phase_deg = 0.5\n"
        ));
    }
    s
}

/// `ebbwise datums --constants` alone: pure M2 (H = 1 m) gives LAT = Z0 − f̂·H and HAT =
/// Z0 + f̂·H with f̂ = 1.0378 the largest nodal factor of M2 (textbook 1.0379, Pugh 1987, from
/// memory; 1.03783 from the project's formula), within 0.5 mm; its u is
/// √(u(Z0)² + (f̂·u(H))²) at the extreme (θ = 180°, so the phase's u drops out), within 0.2 mm;
/// each level above the gauge zero is 0.5 m more (definition). M2 (1.0) + S2 (0.4 m): LAT lies
/// between Z0 − f̂·H_M2 − H_S2 (a strict lower bound) and 2.5 mm above it (the alignment bound
/// derived in docs/datums-computation.md). The month-long record gets the short-span warning.
#[test]
fn lat_and_hat_from_constants_through_the_command() {
    let dir = tempfile::tempdir().unwrap();
    let m2 = ("M2", 28.984_104_2, 1.0, 0.003, 10.0);
    let s2 = ("S2", 30.0, 0.4, 0.003, 50.0);
    std::fs::write(dir.path().join("m2.toml"), constants_text(&[m2])).unwrap();
    std::fs::write(dir.path().join("ms.toml"), constants_text(&[m2, s2])).unwrap();
    let f_max = 1.037_83;
    let o = ebbwise_in(dir.path(), &["datums", "--constants", "m2.toml"]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    let err = stderr(&o);
    assert!(
        err.contains("LAT") && err.contains("less than a year"),
        "{err}"
    );
    let text = std::fs::read_to_string(dir.path().join("m2.harmonic-datums.toml")).unwrap();
    let v: toml::Value = toml::from_str(&text).unwrap();
    assert_eq!(v["format"].as_str(), Some("ebbwise-harmonic-datums/1"));
    let lat = v["lat"]["above_chart_datum_m"].as_float().unwrap();
    let hat = v["hat"]["above_chart_datum_m"].as_float().unwrap();
    assert!((lat - (1.2 - f_max)).abs() < 5e-4, "LAT {lat}");
    assert!((hat - (1.2 + f_max)).abs() < 5e-4, "HAT {hat}");
    let u = v["lat"]["u_m"].as_float().unwrap();
    let u_expected = (0.002f64.powi(2) + (f_max * 0.003f64).powi(2)).sqrt();
    assert!((u - u_expected).abs() < 2e-4, "u {u} vs {u_expected}");
    let gz = v["lat"]["above_gauge_zero_m"].as_float().unwrap();
    assert!((gz - (lat + 0.5)).abs() < 1.5e-4, "{gz}");
    assert_eq!(v["z0"]["above_chart_datum_m"].as_float(), Some(1.2));
    let o = ebbwise_in(dir.path(), &["datums", "--constants", "ms.toml"]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    let text = std::fs::read_to_string(dir.path().join("ms.harmonic-datums.toml")).unwrap();
    let v: toml::Value = toml::from_str(&text).unwrap();
    let lat = v["lat"]["above_chart_datum_m"].as_float().unwrap();
    let bound = 1.2 - f_max * 1.0 - 0.4;
    assert!(
        lat >= bound - 1e-4 && lat <= bound + 2.5e-3,
        "LAT {lat} vs {bound}"
    );
}

/// A record with `--constants` and `--high-low-waters`: the datums file holds the observed
/// datums and [lat], [hat], [z0] with their method; the CSV has one row per high or low water
/// of the tabulation, at least 18 of each kind in 10 days, kinds alternating (a semidiurnal
/// tide), each high water at Z0 + H above the zero less the zero's depth below chart datum
/// (2.2 m, definition of the references) within 2 mm, and a class of `higher` or `lower`. Pure
/// M2 of 1 m about 1.7 m above the zero: MHW − MLW = 2H within 0.4 mm (analytic), LAT from the
/// constants Z0 − f̂·H.
#[test]
fn record_with_constants_and_high_low_waters() {
    let dir = tempfile::tempdir().unwrap();
    let w = 28.984_104_2 * DEG_PER_H;
    let mut csv = String::from("time,height\n");
    for i in 0..10 * 240 {
        let x = i as f64 * 360.0;
        let v = 1.7 + (w * x).cos();
        let secs = i * 360;
        csv.push_str(&format!(
            "2026-03-{:02}T{:02}:{:02}:00Z,{v:.4}\n",
            1 + secs / 86400,
            (secs % 86400) / 3600,
            (secs % 3600) / 60
        ));
    }
    std::fs::write(dir.path().join("m2.csv"), csv).unwrap();
    std::fs::write(
        dir.path().join("k.toml"),
        constants_text(&[("M2", 28.984_104_2, 1.0, 0.003, 0.0)]),
    )
    .unwrap();
    let o = ebbwise_in(
        dir.path(),
        &[
            "datums",
            "m2.csv",
            "--zero-above-datum-m",
            "-0.5",
            "--constants",
            "k.toml",
            "--high-low-waters",
            "m2.hw.csv",
        ],
    );
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    let v: toml::Value =
        toml::from_str(&std::fs::read_to_string(dir.path().join("m2.datums.toml")).unwrap())
            .unwrap();
    let mn = v["mn"]["range_m"].as_float().unwrap();
    assert!((mn - 2.0).abs() < 4e-4, "MN {mn}");
    for t in ["lat", "hat", "z0"] {
        assert!(v[t]["method"].as_str().is_some(), "{t}");
    }
    let lat = v["lat"]["above_chart_datum_m"].as_float().unwrap();
    assert!((lat - (1.2 - 1.037_83)).abs() < 5e-4, "{lat}");
    let hw = std::fs::read_to_string(dir.path().join("m2.hw.csv")).unwrap();
    let mut lines = hw.lines();
    assert_eq!(
        lines.next(),
        Some("time_utc,level_above_chart_datum_m,u_level_m,kind,class")
    );
    let rows: Vec<Vec<&str>> = lines.map(|l| l.split(',').collect()).collect();
    let (highs, lows) = (
        rows.iter().filter(|r| r[3] == "high").count(),
        rows.iter().filter(|r| r[3] == "low").count(),
    );
    assert!(highs >= 18 && lows >= 18, "{highs} {lows}");
    for p in rows.windows(2) {
        assert_ne!(p[0][3], p[1][3], "kinds alternate: {p:?}");
    }
    for r in rows.iter().filter(|r| r[3] == "high") {
        let h: f64 = r[1].parse().unwrap();
        // 1.7 + 1.0 m above the zero, the zero 0.5 m below chart datum.
        assert!((h - 2.2).abs() < 2e-3, "{r:?}");
        assert!(r[4] == "higher" || r[4] == "lower");
    }
}

/// Bad requests of `ebbwise datums --constants` (docs/robustness.md): a missing constants file
/// is named; constants above chart datum without the zero's height name the field `levels` and
/// ask for --zero-above-datum-m (and work with it); --high-low-waters without a record is
/// refused (no high or low water is observed).
#[test]
fn bad_constants_requests_are_named() {
    let dir = tempfile::tempdir().unwrap();
    let o = ebbwise_in(dir.path(), &["datums", "--constants", "none.toml"]);
    assert_ne!(o.status.code(), Some(0));
    assert!(stderr(&o).contains("none.toml"), "{}", stderr(&o));
    let text = constants_text(&[("M2", 28.984_104_2, 1.0, 0.003, 0.0)])
        .replace("zero_above_datum_m = -0.5\n", "");
    std::fs::write(dir.path().join("k.toml"), text).unwrap();
    let o = ebbwise_in(dir.path(), &["datums", "--constants", "k.toml"]);
    let e = stderr(&o);
    assert_ne!(o.status.code(), Some(0), "{e}");
    assert!(
        e.contains("k.toml") && e.contains("field 'levels'") && e.contains("--zero-above-datum-m"),
        "{e}"
    );
    let o = ebbwise_in(
        dir.path(),
        &[
            "datums",
            "--constants",
            "k.toml",
            "--zero-above-datum-m",
            "-0.5",
        ],
    );
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    let o = ebbwise_in(
        dir.path(),
        &[
            "datums",
            "--constants",
            "k.toml",
            "--zero-above-datum-m",
            "-0.5",
            "--high-low-waters",
            "x.csv",
        ],
    );
    assert_ne!(o.status.code(), Some(0));
    assert!(stderr(&o).contains("needs a record"), "{}", stderr(&o));
}

/// A clean one-minute record rounded to millimetres, M2 1.2 m with M4 0.3 m at the phase that
/// makes a stand at every high water (dh/dcos = 0 at the crest: the level stays within 1.2 mm for
/// 30 minutes each side, analytic), goes through `ebbwise datums` **with** QC: nothing is set
/// aside (the flat-line test asks 5 equal readings over 60 minutes and excuses stands at turning
/// points), and MHW is the crest Z0 + 1.2 − 0.3 = 3.9 m within 2 mm (analytic).
#[test]
fn clean_stand_passes_qc() {
    let dir = tempfile::tempdir().unwrap();
    let w = 28.984_104_2 * DEG_PER_H;
    let mut csv = String::from("time,height\n");
    for i in 0..5 * 1440 {
        let x = i as f64 * 60.0;
        let v = 3.0 + 1.2 * (w * x).cos() - 0.3 * (2.0 * w * x).cos();
        let secs = i * 60;
        csv.push_str(&format!(
            "2026-03-{:02}T{:02}:{:02}:00Z,{v:.3}\n",
            1 + secs / 86400,
            (secs % 86400) / 3600,
            (secs % 3600) / 60
        ));
    }
    std::fs::write(dir.path().join("stand.csv"), csv).unwrap();
    let o = ebbwise_in(dir.path(), &["datums", "stand.csv"]);
    let err = stderr(&o);
    assert_eq!(o.status.code(), Some(0), "{err}");
    assert!(!err.contains("set aside"), "{err}");
    let v: toml::Value =
        toml::from_str(&std::fs::read_to_string(dir.path().join("stand.datums.toml")).unwrap())
            .unwrap();
    assert_eq!(v["qc_applied"].as_bool(), Some(true));
    let mhw = v["mhw"]["above_gauge_zero_m"].as_float().unwrap();
    assert!((mhw - 3.9).abs() < 2e-3, "MHW {mhw}");
}
