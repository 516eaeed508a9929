//! Leak detection on long synthetic series with known truth (1 Hz): a year of
//! day/night swings without loss (false alarms), slow leaks of 1 %/day and
//! 0.2 %/day in standby (detection delay), and leaks on top of a declared or
//! learned draw in use. Each series runs the fixed-point and the f64 tracker
//! side by side, and their agreement over the whole series is asserted too.
//!
//! Truth: `isochor_tests::synth` (ideal gas, rigid 50 L nitrogen cylinder
//! rated 200 bar at 15 °C, ±15 K day/night swing with day-to-day weather,
//! a temperature sensor lagging the wall by 10 min, sensor offsets, gain
//! error and noise). Run with `-- --nocapture` for the figures in docs/measured.md.

use isochor_core::alarm::AlarmKind;
use isochor_core::fx;
use isochor_core::track::LeakMode;
use isochor_core::track::float::TrackConfig;
use isochor_core::uncertainty::float::UncertaintyConfig;
use isochor_tests::synth::{DAY_MS, HOUR_MS, Scenario, rated_mass};
use isochor_tests::tracking::{Agreement, run, run_declared, tank_of};

fn config(sc: &Scenario) -> TrackConfig {
    TrackConfig::for_tank(&tank_of(sc), UncertaintyConfig::example(300e5))
}

/// First raise of `kind` in the fixed path's events, ms.
fn first_raise(a: &Agreement, kind: AlarmKind) -> Option<u64> {
    a.events_fixed
        .iter()
        .find(|e| e.kind == kind && e.raised)
        .map(|e| e.at.0)
}

#[test]
fn a_year_of_day_night_swings_without_loss_raises_no_alarm() {
    let sc = Scenario::standby(365, 2026);
    let cfg = config(&sc);
    // Whole-day verdicts (two days of hours in the ring) apart from the
    // early ones of the first two days, whose thresholds are wider.
    let mut worst_loss = 0.0f64;
    let mut worst_early = 0.0f64;
    let mut verdicts = 0u64;
    let agree = run(&sc, &cfg, |s, a, _| {
        if let Some(l) = a.leak
            && s.t_ms % HOUR_MS == 0
        {
            verdicts += 1;
            let loss = fx::to_f64(l.loss_per_day).abs();
            if s.t_ms < 48 * HOUR_MS {
                worst_early = worst_early.max(loss);
            } else {
                worst_loss = worst_loss.max(loss);
            }
        }
    });
    println!(
        "standby year, ±15 K swing: {} hourly leak verdicts, largest |loss| {:.4} %/day on whole days (threshold {:.2} %/day), {:.4} %/day in the first two days (wider thresholds), events: {:?}",
        verdicts,
        worst_loss * 100.0,
        cfg.leak_threshold_per_day * 100.0,
        worst_early * 100.0,
        agree.events_fixed
    );
    println!("{}", agree.summary());
    assert!(verdicts > 8000, "the detector must have judged most hours");
    assert!(
        agree.events_fixed.is_empty(),
        "false alarms: {:?}",
        agree.events_fixed
    );
    agree.assert_close("standby year");
}

fn standby_leak(rate_per_day: f64, seed: u64) -> (u64, Agreement) {
    let mut sc = Scenario::standby(8, seed);
    // Leak from day 3, 07:12 (an arbitrary time of day).
    sc.leak_start_ms = 3 * DAY_MS + 7 * HOUR_MS + 12 * 60_000;
    sc.leak_per_day = rate_per_day;
    let cfg = config(&sc);
    let agree = run(&sc, &cfg, |_, _, _| {});
    let at = first_raise(&agree, AlarmKind::Leak).expect("leak found");
    assert!(at > sc.leak_start_ms, "leak alarm before the leak");
    (at - sc.leak_start_ms, agree)
}

#[test]
fn standby_leak_of_one_percent_per_day_is_found_within_a_day() {
    let (delay, agree) = standby_leak(0.01, 11);
    println!(
        "standby 1 %/day: leak raised {:.1} h after it started; {}",
        delay as f64 / HOUR_MS as f64,
        agree.summary()
    );
    assert!(delay < 24 * HOUR_MS, "delay {delay} ms");
    agree.assert_close("standby 1 %/day");
}

#[test]
fn standby_leak_of_a_fifth_percent_per_day_is_found_within_two_days() {
    let (delay, agree) = standby_leak(0.002, 12);
    println!(
        "standby 0.2 %/day: leak raised {:.1} h after it started; {}",
        delay as f64 / HOUR_MS as f64,
        agree.summary()
    );
    assert!(delay < 48 * HOUR_MS, "delay {delay} ms");
    agree.assert_close("standby 0.2 %/day");
}

fn in_use(declared: bool, seed: u64) -> (u64, Agreement) {
    let mut sc = Scenario::standby(9, seed);
    let m_rated = rated_mass(sc.gas, sc.capacity_m3, 200e5, 288.15);
    // A steady consumer: 2 % of the rated content per day.
    sc.draw_kg_h = 0.02 * m_rated / 24.0;
    sc.leak_start_ms = 5 * DAY_MS + 15 * HOUR_MS;
    sc.leak_per_day = 0.01;
    let mut cfg = config(&sc);
    cfg.leak_mode = LeakMode::InUse;
    cfg.declared_draw_kg_h = declared.then_some(sc.draw_kg_h);
    let agree = run(&sc, &cfg, |_, _, _| {});
    let at = first_raise(&agree, AlarmKind::Leak).expect("leak found");
    assert!(at > sc.leak_start_ms, "leak alarm before the leak at {at}");
    (at - sc.leak_start_ms, agree)
}

#[test]
fn in_use_leak_beyond_a_declared_draw_is_found_within_a_day() {
    let (delay, agree) = in_use(true, 21);
    println!(
        "in use, declared draw 2 %/day, leak 1 %/day: raised {:.1} h after start; {}",
        delay as f64 / HOUR_MS as f64,
        agree.summary()
    );
    assert!(delay < 24 * HOUR_MS);
    agree.assert_close("in use, declared");
}

#[test]
fn in_use_leak_beyond_a_learned_draw_is_found_within_a_day() {
    let (delay, agree) = in_use(false, 22);
    println!(
        "in use, learned draw 2 %/day, leak 1 %/day: raised {:.1} h after start; {}",
        delay as f64 / HOUR_MS as f64,
        agree.summary()
    );
    assert!(delay < 24 * HOUR_MS);
    agree.assert_close("in use, learned");
}

/// A busy cylinder in use with a declared draw of 13 % of the rated
/// content per day (a clinic's oxygen, invented) and an instrument told a
/// water capacity 1 % above the truth (two standard uncertainties of the
/// example declaration's 0.5 %): the loss the gauge measures is then 1 %
/// off the declared draw, 0.13 %/day — above the 0.1 %/day threshold on
/// its own. The margin for the gauge's scale against a declared draw keeps
/// that from reading as a leak over a week; a real leak of 1 %/day on top
/// is still found, later than beside a small draw (measured 24 h: the
/// margin is 3·u_s of a draw that is by then half the remaining content a
/// day), within a day and a half.
#[test]
fn declared_draw_with_a_scale_error_is_no_leak() {
    let busy = |leak: f64, seed: u64| {
        let mut sc = Scenario::standby(7, seed);
        let m_rated = rated_mass(sc.gas, sc.capacity_m3, 200e5, 288.15);
        sc.draw_kg_h = 0.13 * m_rated / 24.0;
        sc.leak_start_ms = 4 * DAY_MS + 9 * HOUR_MS;
        sc.leak_per_day = leak;
        let mut cfg = config(&sc);
        cfg.leak_mode = LeakMode::InUse;
        cfg.declared_draw_kg_h = Some(sc.draw_kg_h);
        cfg.leak_threshold_per_day = 0.001;
        let mut told = tank_of(&sc);
        told.water_capacity_m3 *= 1.01;
        let agree = run_declared(&sc, told, &cfg, |_, _, _| {});
        (sc, agree)
    };
    let (_, quiet) = busy(0.0, 31);
    assert_eq!(
        first_raise(&quiet, AlarmKind::Leak),
        None,
        "{}",
        quiet.summary()
    );
    quiet.assert_close("in use, declared draw, capacity told 1 % high");
    let (sc, leaking) = busy(0.01, 32);
    let at = first_raise(&leaking, AlarmKind::Leak).expect("a 1 %/day leak is found");
    assert!(at > sc.leak_start_ms, "raised before the leak");
    let delay = at - sc.leak_start_ms;
    println!(
        "in use, declared draw 13 %/day, capacity told +1 %: no leak in a week; \
         a 1 %/day leak raised {:.1} h after it started",
        delay as f64 / HOUR_MS as f64
    );
    assert!(delay < 36 * HOUR_MS, "delay {delay} ms");
    leaking.assert_close("in use, declared draw, leak");
}
