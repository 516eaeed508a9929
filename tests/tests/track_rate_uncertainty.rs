//! The expanded uncertainty (k = 2) of the consumption rate and the
//! time-to-empty bounds against known truth (1 Hz synthetic series,
//! fixed-point and f64 trackers side by side, agreement asserted).
//!
//! The budget (first-order GUM, JCGM 100:2008; `isochor_core::uncertainty`)
//! has a random part — the scatter of the block means about the fitted line,
//! with the standard error widened for the lag-1 autocorrelation of the
//! residuals (effective sample size, Santer et al. 2000) — and systematic
//! parts: the temperature sensor's lag and gain error turning dT/dt and
//! d²T/dt² into an apparent rate, the offsets, and the scale errors.
//!
//! * a slower draw with a smaller swing and a longer lag (1.5 standard
//!   uncertainties of the declared lag);
//! * a population of instruments whose sensor errors (offsets, gains, lag,
//!   water capacity) are drawn from the declared distributions: the test of
//!   a 95 % claim, since one instrument keeps its systematic errors all along
//!   (the existing steady-draw series in `track_rate_settle` has its lag at
//!   one standard uncertainty and is covered nearly always);
//! * the random part alone, with white and with correlated block means
//!   (smoothing longer than a block), where the uncorrected least-squares
//!   standard error is shown to fall short.
//!
//! Run with `-- --nocapture` for the figures in docs/measured.md.

use isochor_core::Tank;
use isochor_core::fx;
use isochor_core::time::Millis;
use isochor_core::track::float::TrackConfig;
use isochor_core::uncertainty::float::{SQRT_3, UncertaintyConfig};
use isochor_tests::synth::{HOUR_MS, Scenario, normal, rated_mass};
use isochor_tests::tracking::{RateScore, run, run_declared, tank_of};
use rand::rngs::ChaCha8Rng;
use rand::{RngExt, SeedableRng};

fn config(sc: &Scenario) -> TrackConfig {
    synthetic_gas(TrackConfig::for_tank(
        &tank_of(sc),
        UncertaintyConfig::example(300e5),
    ))
}

/// The synthetic series have no gas–wall difference: the gas is at the
/// temperature of the body its sensor sits on (the sensor's own lag aside),
/// so the gas settles to its sensor's mount at once — declared as the
/// shortest settling time constant, 1 min (the gas–sensor term of
/// docs/uncertainty.md then nearly vanishes, as it should here).
fn synthetic_gas(mut cfg: TrackConfig) -> TrackConfig {
    cfg.settle_time_constant = Millis::from_secs(60);
    cfg
}

/// A steady draw of `per_h` of the rated content per hour from 95 %.
fn draw(sc: &mut Scenario, per_h: f64) -> f64 {
    let m_rated = rated_mass(sc.gas, sc.capacity_m3, 200e5, 288.15);
    sc.mass0_kg = 0.95 * m_rated;
    sc.draw_kg_h = per_h * m_rated;
    m_rated
}

#[test]
fn slower_draw_smaller_swing_longer_lag() {
    // 1 %/h over two days, ±8 K swing, the sensor lagging 15 min: 1.5 times
    // the declared standard uncertainty (the example's 10 min).
    let mut sc = Scenario::standby(2, 77);
    let m_rated = draw(&mut sc, 0.01);
    sc.weather.swing_k = 8.0;
    sc.sensors.t_lag_s = 900.0;
    let cfg = config(&sc);
    let reserve_kg = cfg.reserve_fraction * m_rated;
    let mut score = RateScore::default();
    let agree = run(&sc, &cfg, |s, a, _| {
        score.add(s, sc.draw_kg_h, reserve_kg, a.rate, a.time_to_empty);
    });
    println!(
        "slower draw 1 %/h, ±8 K swing, sensor lag 15 min: {}; {}",
        score.summary(),
        agree.summary()
    );
    assert!(score.minutes > 2500);
    assert!(
        (0.90..=0.995).contains(&score.coverage()),
        "U(rate) coverage {}",
        score.coverage()
    );
    assert!(
        (0.90..=0.995).contains(&score.tte_coverage()),
        "time-to-empty coverage {}",
        score.tte_coverage()
    );
    assert!(
        score.median_u() < 3.0 * score.rms(),
        "U(rate) too wide: median {} against rms error {}",
        score.median_u(),
        score.rms()
    );
    agree.assert_close("slower draw");
}

#[test]
fn a_population_of_instruments_is_covered_95_percent() {
    // Each instrument: its own weather, draw (1–5 %/h) and sensor errors
    // drawn from UncertaintyConfig::example's declared distributions:
    // pressure offset ±0.25 % of 300 bar and gain ±0.1 % (rectangular),
    // temperature offset 0.5 K (normal), gain ±0.5 % (rectangular), lag
    // |N(0, 10 min)| (the sign of a lag or lead only flips the error's sign),
    // water capacity off by N(0, 0.5 %) in the tracker's tank. The gas model
    // is exact here (ideal gas both sides): its 0.1 % declared standard
    // uncertainty is carried but never realised, a slight conservatism.
    let decl = UncertaintyConfig::example(300e5);
    let mut rng = ChaCha8Rng::seed_from_u64(5);
    let rect = |r: &mut ChaCha8Rng, a: f64| a * (2.0 * r.random::<f64>() - 1.0);
    let mut all = RateScore::default();
    let mut per_instrument = Vec::new();
    let (mut worst_rate, mut worst_u, mut worst_bounds) = (0.0f64, 0.0f64, 0.0f64);
    for i in 0..100u64 {
        let mut sc = Scenario::standby(1, 1000 + i);
        let per_h = 0.01 + 0.04 * rng.random::<f64>();
        let m_rated = draw(&mut sc, per_h);
        sc.duration_ms = ((0.85 / per_h).min(24.0) * HOUR_MS as f64) as u64;
        let s = &mut sc.sensors;
        s.p_offset_pa = rect(
            &mut rng,
            decl.pressure_fs * SQRT_3 * decl.pressure_full_scale_pa,
        );
        s.p_gain = rect(&mut rng, decl.pressure_reading * SQRT_3);
        s.t_offset_k = decl.temperature_k * normal(&mut rng);
        s.t_gain = rect(&mut rng, decl.temperature_gain * SQRT_3);
        s.t_lag_s = (decl.temperature_lag.0 as f64 / 1000.0 * normal(&mut rng)).abs();
        let capacity = sc.capacity_m3 * (1.0 + decl.capacity * normal(&mut rng));
        let cfg = synthetic_gas(TrackConfig::for_tank(&Tank::new(capacity, 200e5), decl));
        let reserve_kg = cfg.reserve_fraction * m_rated;
        let mut score = RateScore::default();
        let agree = run_declared(&sc, Tank::new(capacity, 200e5), &cfg, |s, a, _| {
            score.add(s, sc.draw_kg_h, reserve_kg, a.rate, a.time_to_empty);
        });
        agree.assert_close(&format!("instrument {i}"));
        worst_rate = worst_rate.max(agree.rate_rel);
        worst_u = worst_u.max(agree.u_rate_rel);
        worst_bounds = worst_bounds.max(agree.tte_bounds_rel);
        per_instrument.push((sc.sensors.t_lag_s, score.coverage()));
        all.merge(&score);
    }
    let lows = per_instrument.iter().filter(|(_, c)| *c < 0.9).count();
    println!(
        "population of 100 instruments, errors drawn from the declared distributions: {}; {} instruments below 90 % (lags {:?} s); fixed vs f64 worst over the instruments: rate {:.1e} rel, U(rate) {:.1e} rel, time-to-empty bounds {:.1e} rel",
        all.summary(),
        lows,
        per_instrument
            .iter()
            .filter(|(_, c)| *c < 0.9)
            .map(|(l, _)| l.round())
            .collect::<Vec<_>>(),
        worst_rate,
        worst_u,
        worst_bounds
    );
    assert!(all.minutes > 100_000);
    assert!(
        (0.92..=0.98).contains(&all.coverage()),
        "U(rate) coverage {}",
        all.coverage()
    );
    assert!(
        (0.90..=0.99).contains(&all.tte_coverage()),
        "time-to-empty coverage {}",
        all.tte_coverage()
    );
    assert!(
        all.median_u() < 3.0 * all.rms(),
        "U(rate) too wide: median {} against rms error {}",
        all.median_u(),
        all.rms()
    );
}

/// The random part alone: no temperature change, no sensor offsets or gain
/// errors, only noise, and nothing systematic declared.
fn noise_only(smoothing_s: u64) -> (RateScore, f64) {
    let mut sc = Scenario::standby(2, 78);
    let m_rated = draw(&mut sc, 0.02);
    sc.duration_ms = 40 * HOUR_MS;
    sc.weather.swing_k = 0.0;
    sc.weather.daily_mean_sd_k = 0.0;
    let s = &mut sc.sensors;
    (s.p_offset_pa, s.p_gain, s.t_offset_k, s.t_lag_s) = (0.0, 0.0, 0.0, 0.0);
    let mut cfg = config(&sc);
    cfg.smoothing_pressure = Millis::from_secs(smoothing_s);
    cfg.smoothing_temperature = Millis::from_secs(smoothing_s);
    let u = &mut cfg.uncertainty;
    (u.pressure_fs, u.pressure_reading, u.temperature_k) = (0.0, 0.0, 0.0);
    (u.capacity, u.model, u.temperature_gain) = (0.0, 0.0, 0.0);
    u.temperature_lag = Millis(0);
    let reserve_kg = cfg.reserve_fraction * m_rated;
    let mut score = RateScore::default();
    // The plain least-squares interval on the same block means (rebuilt from
    // the fixed path's per-sample fill fractions: 60 samples a block).
    let rated_kg_h = m_rated * 60.0;
    let (mut blocks, mut sum, mut count) = (Vec::<f64>::new(), 0.0, 0u32);
    let (mut plain_n, mut plain_covered) = (0u64, 0u64);
    let agree = run(&sc, &cfg, |s, a, _| {
        if s.t_ms > 0 && s.t_ms % 60_000 == 0 {
            blocks.push(sum / count as f64);
            (sum, count) = (0.0, 0);
            if blocks.len() >= 32 && a.rate.is_some_and(|r| r.blocks == 32) {
                let y = &blocks[blocks.len() - 32..];
                let (slope, se) = ols(y);
                plain_n += 1;
                if (-slope * rated_kg_h - sc.draw_kg_h).abs() <= 2.0 * se * rated_kg_h {
                    plain_covered += 1;
                }
            }
        }
        score.add(s, sc.draw_kg_h, reserve_kg, a.rate, a.time_to_empty);
        if let Some(c) = a.content {
            sum += fx::to_f64(c.fill_fraction);
            count += 1;
        }
    });
    agree.assert_close(&format!("noise only, smoothing {smoothing_s} s"));
    println!("noise only, smoothing {smoothing_s} s: {}", agree.summary());
    (score, plain_covered as f64 / plain_n.max(1) as f64)
}

/// Least-squares slope and its plain standard error (per block).
fn ols(y: &[f64]) -> (f64, f64) {
    let n = y.len() as f64;
    let c = (n - 1.0) / 2.0;
    let mean = y.iter().sum::<f64>() / n;
    let sxx = n * (n * n - 1.0) / 12.0;
    let slope = y
        .iter()
        .enumerate()
        .map(|(i, v)| (i as f64 - c) * v)
        .sum::<f64>()
        / sxx;
    let ssr: f64 = y
        .iter()
        .enumerate()
        .map(|(i, v)| (v - mean - slope * (i as f64 - c)).powi(2))
        .sum();
    (slope, (ssr / (n - 2.0) / sxx).sqrt())
}

#[test]
fn the_random_part_with_white_and_correlated_blocks() {
    // 63 s: α = 1/64 at 1 Hz is exact in the fixed path's Q16, so both paths
    // smooth alike (a 60 s constant rounds α by 4e-4 and the rates of the
    // two paths then differ by 1.2e-4, beyond the agreement bound).
    for (smoothing_s, plain_max) in [(4, 1.0), (63, 0.85)] {
        let (score, plain) = noise_only(smoothing_s);
        println!(
            "noise only, smoothing {smoothing_s} s: {}; the plain least-squares interval would cover {:.1} %",
            score.summary(),
            plain * 100.0
        );
        assert!(score.minutes > 2000);
        assert!(
            (0.90..=0.995).contains(&score.coverage()),
            "smoothing {smoothing_s} s: U(rate) coverage {}",
            score.coverage()
        );
        assert!(
            score.median_u() < 3.0 * score.rms(),
            "U(rate) too wide: median {} against rms error {}",
            score.median_u(),
            score.rms()
        );
        // The time to empty with the default smoothing (with 63 s the
        // content trails the gas by 63 s × rate, a delay the budget leaves
        // out: 81 % covered).
        if smoothing_s == 4 {
            assert!(
                (0.90..=0.995).contains(&score.tte_coverage()),
                "time-to-empty coverage {}",
                score.tte_coverage()
            );
        }
        // With blocks correlated by the smoothing the plain interval falls
        // short: the case the autocorrelation correction is for.
        assert!(plain <= plain_max, "plain coverage {plain}");
    }
}

#[test]
fn the_declared_lag_and_gain_are_checked_and_carried_to_the_fixed_path() {
    let sc = Scenario::standby(1, 1);
    let mut cfg = config(&sc);
    cfg.uncertainty.temperature_lag = Millis::from_secs(7201);
    assert!(cfg.validate().is_err());
    cfg.uncertainty.temperature_lag = Millis::from_secs(900);
    cfg.uncertainty.temperature_gain = 0.6;
    assert!(cfg.validate().is_err());
    cfg.uncertainty.temperature_gain = 0.004;
    let fx = isochor_core::track::fixed::TrackConfigFx::from_f64(&cfg).unwrap();
    assert_eq!(fx.uncertainty.temperature_lag, Millis::from_secs(900));
    let back: TrackConfig = fx.to_real();
    assert!((back.uncertainty.temperature_gain - 0.004).abs() < 1e-9);
    // A larger declared lag widens U(rate) under a swing, in both paths.
    let mut sc = Scenario::standby(1, 31);
    draw(&mut sc, 0.04);
    sc.duration_ms = 6 * HOUR_MS;
    let u_at = |lag_s: u64| {
        let mut c = config(&sc);
        c.uncertainty.temperature_lag = Millis::from_secs(lag_s);
        let mut last = None;
        run(&sc, &c, |_, a, b| {
            if let (Some(ra), Some(rb)) = (a.rate, b.rate) {
                last = Some((fx::to_f64(ra.u_kg_h), rb.u_kg_h));
            }
        });
        last.expect("a rate")
    };
    let (small, large) = (u_at(60), u_at(1800));
    assert!(
        large.0 > 2.0 * small.0 && large.1 > 2.0 * small.1,
        "{small:?} {large:?}"
    );
}
