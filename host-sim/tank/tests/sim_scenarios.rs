//! Every built-in scenario runs and is scored, with the scores a user cares
//! about asserted; the claimed 95 % coverage is checked on a population of
//! instruments; the fixed-point and f64 gauges agree on a whole run; and
//! scenario files are checked strictly.

use isochor_tank::run::{BackendKind, RunOptions, RunResult, Summary, run};
use isochor_tank::scenario::{BUILTIN, Scenario};
use rayon::prelude::*;

fn run_builtin(name: &str) -> RunResult {
    let sc = Scenario::builtin(name).unwrap();
    run(
        &sc,
        &RunOptions {
            backend: BackendKind::Fixed,
            trace_every_s: 60.0,
            progress: false,
        },
    )
    .unwrap()
}

fn raised<'a>(s: &'a Summary, alarm: &str) -> impl Iterator<Item = f64> + 'a {
    let alarm = alarm.to_string();
    s.alarms
        .iter()
        .filter(move |e| e.alarm == alarm && e.change == "raised")
        .map(|e| e.t_s)
}

fn show(s: &Summary) {
    eprintln!(
        "{}: {} samples, max |e| {:.3} %, bias {:.3} %, coverage {:.1} %, max |e|/U {:.2}, leak after {:?} s, false alarms {}, time to empty median {:?} over {} min (bounds {:?}), alarms {:?}",
        s.scenario,
        s.samples,
        s.max_abs_error_fraction.unwrap_or(f64::NAN) * 100.0,
        s.mean_error_fraction.unwrap_or(f64::NAN) * 100.0,
        s.uncertainty_coverage.unwrap_or(f64::NAN) * 100.0,
        s.max_error_over_uncertainty.unwrap_or(f64::NAN),
        s.leak_detected_after_s,
        s.false_alarms,
        s.time_to_empty_median_error,
        s.time_to_empty_minutes,
        s.time_to_empty_coverage,
        s.alarms
            .iter()
            .filter(|e| e.alarm != "not_settled")
            .map(|e| format!("{:.0} s {} {}", e.t_s, e.alarm, e.change))
            .collect::<Vec<_>>()
    );
}

/// The demo: the leak (0.5 % of the content per day from day four) is found
/// within the day (docs/tracking.md states 24–28 h for
/// 0.2 %/day and about 11 h for 1 %/day on synthetic series), nothing is
/// raised before it but the injected sensor fault, and the estimate is
/// within its uncertainty.
#[test]
fn workshop_leak_is_detected_without_false_alarms() {
    let r = run_builtin("workshop-leak");
    let s = &r.summary;
    show(s);
    assert_eq!(s.samples, 7 * 86_400 + 1);
    let after = s.leak_detected_after_s.expect("leak detected");
    assert!(after < 24.0 * 3600.0, "{after} s");
    assert_eq!(s.false_alarms, 0);
    assert!(raised(s, "leak").all(|t| t >= 3.0 * 86_400.0));
    // The temperature sensor's open circuit (36 h, 10 min) is reported.
    let faults: Vec<f64> = raised(s, "sensor_fault").collect();
    assert_eq!(faults.len(), 1);
    assert!((36.0 * 3600.0..36.0 * 3600.0 + 60.0).contains(&faults[0]));
    assert!(s.max_abs_error_fraction.unwrap() < 0.015);
    assert!(s.uncertainty_coverage.unwrap() >= 0.95);
    // Plots and series have what the user looks at.
    assert_eq!(r.trace.len(), 7 * 24 * 60 + 1);
}

/// A fast fill with pre-cooled hydrogen: the gas heats (compression) but
/// stays below 85 °C (the limit of the fuelling protocols for vehicle
/// tanks, SAE J2601; from memory), the gauge says `not_settled` from the
/// fill's first sample (the fill adds about 0.5 % of the rated content per
/// second: the smoothed reading lags the truth by several per cent within
/// seconds, so a verdict per block would leave it unflagged) while the gas
/// cools, every sample it vouches for is within its uncertainty, the time to
/// empty during the drives is right to a few per cent, and no false alarm.
#[test]
fn hydrogen_fast_fill_heats_settles_and_is_tracked() {
    let r = run_builtin("hydrogen-fast-fill");
    let s = &r.summary;
    show(s);
    let t_max_c = s.gas_temperature_max_k - 273.15;
    assert!((40.0..85.0).contains(&t_max_c), "{t_max_c} °C");
    assert!(s.pressure_max_pa > 690e5 && s.pressure_max_pa < 705e5);
    let fill = 6.0 * 3600.0;
    // The first sample after the fill opens (1 s samples).
    assert!(
        raised(s, "not_settled").any(|t| t == fill + 1.0),
        "{:?}",
        s.alarms
    );
    assert_eq!(s.false_alarms, 0);
    assert!(s.time_to_empty_minutes >= 30);
    assert!(s.time_to_empty_median_error.unwrap() < 0.05);
    assert!(s.uncertainty_coverage.unwrap() >= 0.95);
    assert!(s.max_error_over_uncertainty.unwrap() <= 1.0);
}

/// Balloons filled in bursts: single-sample spikes of a loose pressure
/// connector never reach the estimate (median of three; the plausibility
/// check flags each one, too briefly for the debounced `sensor_fault`
/// alarm); no alarm, the estimate within 2 %.
#[test]
fn helium_party_spikes_are_caught() {
    let r = run_builtin("helium-party");
    let s = &r.summary;
    show(s);
    assert_eq!(s.false_alarms, 0);
    assert_eq!(raised(s, "sensor_fault").count(), 0);
    let during = r
        .trace
        .iter()
        .filter(|p| (34.0 * 3600.0..38.0 * 3600.0).contains(&p.t_s));
    let worst = during
        .filter_map(|p| p.mass_gauge_kg.map(|m| (m / p.mass_true_kg - 1.0).abs()))
        .fold(0.0f64, f64::max);
    assert!(worst < 0.02, "{worst}");
    assert!(s.max_abs_error_fraction.unwrap() < 0.02);
    assert!(s.uncertainty_coverage.unwrap() >= 0.95);
    assert!(s.mass_end_kg < 0.5 * s.mass_start_kg);
}

/// Hot afternoons and a 4–20 mA failure current: the failure is reported
/// as a sensor fault after its persistence time, the time to empty of the
/// daytime draw is right to a few per cent with bounds that hold the truth
/// most of the time, no false alarm.
///
/// The scenario's one instrument, drawn from the declared errors, is an
/// unlucky one: its pressure offset and gain put it beyond its U most of the
/// time (coverage about 20 %). The claim "k = 2 holds the truth 95 % of the
/// time" is about the population of instruments and is checked on this
/// scenario below; for the one instrument the test asserts what the
/// declaration promises for any single instrument: its error stays within
/// 2 U (four standard uncertainties; beyond that with a probability of about
/// 1e-4 if the declared uncertainties hold).
#[test]
fn oxygen_clinic_failure_current_and_time_to_empty() {
    let r = run_builtin("oxygen-clinic");
    let s = &r.summary;
    show(s);
    assert_eq!(s.false_alarms, 0);
    let fault = 58.0 * 3600.0;
    assert!(raised(s, "sensor_fault").any(|t| (fault..fault + 60.0).contains(&t)));
    assert!(s.time_to_empty_minutes > 1000);
    assert!(s.time_to_empty_median_error.unwrap() < 0.05);
    assert!(s.time_to_empty_coverage.unwrap() > 0.85);
    assert!(s.gas_temperature_max_k - 273.15 > 35.0);
    assert!(s.max_error_over_uncertainty.unwrap() <= 2.0);
}

/// The oxygen clinic's hot afternoons, sun and 4–20 mA transmitter over a
/// population: 100 instruments drawn from the declaration, one week each at
/// 10 s samples; the pooled coverage of the k = 2 interval is near 95 %
/// (the same window as the workshop's population below).
#[test]
fn oxygen_clinic_population_coverage_is_near_95_percent() {
    let coverage = population("oxygen-clinic", 100, 7.0 * 86_400.0, 5000);
    assert!((0.92..=0.985).contains(&coverage), "{coverage}");
}

/// Pooled coverage of `n` instruments of a built-in scenario (seeds from
/// `seed0`), each run for `duration_s` at 10 s samples.
fn population(name: &str, n: u64, duration_s: f64, seed0: u64) -> f64 {
    let base = Scenario::builtin(name).unwrap();
    let opts = RunOptions {
        backend: BackendKind::Fixed,
        trace_every_s: 0.0,
        progress: false,
    };
    let runs: Vec<_> = (0..n)
        .into_par_iter()
        .map(|seed| {
            let mut sc = base.clone().with(Some(duration_s), Some(seed0 + seed));
            sc.interval_ms = 10_000;
            run(&sc, &opts).unwrap().summary
        })
        .collect();
    assert!(runs.iter().all(|r| r.uncertainty_coverage.is_some()));
    // Pooled as `isochor sim --population` pools (weighted by judged samples).
    let p = isochor_tank::population::Population::from_runs(&runs, seed0).unwrap();
    eprint!("{}", p.render_text());
    p.coverage_pooled.unwrap()
}

/// Two cold nights on methane: real-gas content at −25 °C, a draw that
/// cools the gas below the wall the sensor sits on; no false alarm (in
/// particular no leak with the declared draw), the estimate within 2 %.
#[test]
fn methane_cold_night_no_false_alarm() {
    let r = run_builtin("methane-cold-night");
    let s = &r.summary;
    show(s);
    assert_eq!(s.false_alarms, 0);
    assert_eq!(raised(s, "leak").count(), 0);
    assert!(s.gas_temperature_min_k - 273.15 < -20.0);
    assert!(s.max_abs_error_fraction.unwrap() < 0.02);
    let gap = r
        .trace
        .iter()
        .map(|p| p.wall_temperature_k - p.gas_temperature_k)
        .fold(0.0f64, f64::max);
    eprintln!("largest wall − gas temperature during the draws: {gap:.2} K");
    assert!(gap > 1.0);
}

/// A shielding-gas cylinder (argon 82 %, carbon dioxide 18 %) through a
/// cold week: the gauge runs a device table built for the composition; the
/// mixture's dew line (tangent-plane test on GERG-2008) is checked along the
/// whole run — the coldest night stays more than 20 K above the
/// cricondentherm, and no sample is flagged `condensation_risk`; estimate
/// within 2 %, no false alarm.
#[test]
fn shielding_gas_cold_week_stays_one_phase() {
    let r = run_builtin("shielding-gas-cold-week");
    let s = &r.summary;
    show(s);
    assert_eq!(s.false_alarms, 0);
    assert!(s.gas_temperature_min_k - 273.15 < -15.0);
    let fluid = isochor_eos::fluid::Fluid::for_gas(
        Scenario::builtin("shielding-gas-cold-week").unwrap().gas,
    )
    .unwrap();
    let cct = fluid
        .condensation_temperature_max_k()
        .expect("Ar–CO2 condenses when cold");
    let margin = s.gas_temperature_min_k - cct;
    eprintln!(
        "coldest gas {:.2} K, cricondentherm {cct:.2} K: margin {margin:.1} K",
        s.gas_temperature_min_k
    );
    assert!(margin > 20.0);
    for p in &r.trace {
        if let Some(pd) = fluid.condensation_pressure_pa(p.gas_temperature_k) {
            assert!(p.pressure_true_pa < pd, "{} s: below the dew line", p.t_s);
        }
        assert!(
            !isochor_core::Status::from_bits(p.status)
                .contains(isochor_core::Status::CONDENSATION_RISK)
        );
    }
    assert!(s.max_abs_error_fraction.unwrap() < 0.02);
    assert!(s.uncertainty_coverage.unwrap() >= 0.95);
    assert!(s.mass_end_kg < 0.3 * s.mass_start_kg);
}

/// The same cylinder on an arctic day (ambient −50 °C on average): the gas
/// goes below the mixture's dew line, and the gauge flags those samples
/// `condensation_risk` and shows no content for them. (The simulated tank
/// itself stays one phase: the physics does not model condensation; the
/// check is that the guard sees where it could happen.)
#[test]
fn shielding_gas_below_its_dew_line_is_flagged() {
    let mut sc = Scenario::builtin("shielding-gas-cold-week")
        .unwrap()
        .with(Some(86_400.0), None);
    sc.plant.weather.mean_k = 273.15 - 50.0;
    sc.plant.initial_temperature_k = Some(273.15 - 40.0);
    sc.plant.initial_pressure_pa = 60e5;
    let fluid = isochor_eos::fluid::Fluid::for_gas(sc.gas).unwrap();
    let r = run(
        &sc,
        &RunOptions {
            backend: BackendKind::Fixed,
            trace_every_s: 60.0,
            progress: false,
        },
    )
    .unwrap();
    let (mut below, mut flagged, mut missed) = (0, 0, 0);
    for p in &r.trace {
        let inside = fluid
            .condensation_pressure_pa(p.gas_temperature_k)
            .is_some_and(|pd| p.pressure_true_pa > pd);
        let flag = isochor_core::Status::from_bits(p.status)
            .contains(isochor_core::Status::CONDENSATION_RISK);
        below += usize::from(inside);
        flagged += usize::from(flag);
        // The gauge judges its own readings: a reading above the dew line
        // (inside the envelope's temperatures) must be flagged.
        if let (Some(pr), Some(tr)) = (p.pressure_read_pa, p.temperature_read_k)
            && tr > isochor_core::envelope::TEMPERATURE_MIN_K
            && fluid.condensation_pressure_pa(tr).is_some_and(|pd| pr > pd)
            && !flag
        {
            missed += 1;
        }
        if flag {
            assert!(
                p.mass_gauge_kg.is_none() || p.fill_fraction.is_none(),
                "{} s: content shown",
                p.t_s
            );
        }
    }
    eprintln!("{below} trace points below the dew line, {flagged} flagged, {missed} missed");
    assert!(below > 100);
    assert!(flagged > 100);
    assert_eq!(missed, 0);
}

/// A natural-gas vehicle tank: fast fill (the gas heats by compression but
/// stays below 85 °C), `not_settled` while it cools, then two drives a day;
/// the mixture's table is built for its composition; after the fill has
/// settled the estimate is within 2 %, the time to empty of the drives is
/// right to a few per cent, no false alarm.
#[test]
fn ngv_fast_fill_settles_and_is_tracked() {
    let r = run_builtin("ngv-fast-fill");
    let s = &r.summary;
    show(s);
    let t_max_c = s.gas_temperature_max_k - 273.15;
    assert!((30.0..85.0).contains(&t_max_c), "{t_max_c} °C");
    assert!(s.pressure_max_pa > 215e5 && s.pressure_max_pa < 225e5);
    let fill = 6.0 * 3600.0;
    assert!(raised(s, "not_settled").any(|t| (fill..fill + 900.0).contains(&t)));
    assert_eq!(s.false_alarms, 0);
    assert!(s.time_to_empty_minutes >= 30);
    assert!(s.time_to_empty_median_error.unwrap() < 0.05);
    assert!(s.uncertainty_coverage.unwrap() >= 0.9);
    let settled = r
        .trace
        .iter()
        .filter(|p| p.t_s > fill + 3600.0)
        .filter_map(|p| p.mass_gauge_kg.map(|m| (m / p.mass_true_kg - 1.0).abs()))
        .fold(0.0f64, f64::max);
    eprintln!(
        "after the fill has settled: max |e| {:.3} %",
        settled * 100.0
    );
    assert!(settled < 0.02);
}

/// The claim "k = 2 holds the truth 95 % of the time" is about instruments
/// whose errors follow the declaration (docs/uncertainty.md): 200
/// instruments drawn from it (pressure offset and gain, temperature offset,
/// water capacity), one day each of the workshop at 10 s samples.
#[test]
fn population_coverage_is_near_95_percent() {
    let coverage = population("workshop-leak", 200, 86_400.0, 1000);
    assert!((0.92..=0.985).contains(&coverage), "{coverage}");
}

/// The fixed-point gauge and the f64 gauge agree over a whole run with
/// bursts, spikes and settling (the same configuration, exactly converted).
#[test]
fn fixed_and_float_gauges_agree() {
    let sc = Scenario::builtin("helium-party")
        .unwrap()
        .with(Some(2.0 * 86_400.0), None);
    let mut out = Vec::new();
    for backend in [BackendKind::Fixed, BackendKind::Float] {
        let opts = RunOptions {
            backend,
            trace_every_s: 1.0,
            progress: false,
        };
        out.push(run(&sc, &opts).unwrap());
    }
    let (a, b) = (&out[0], &out[1]);
    let mut worst = 0.0f64;
    for (x, y) in a.trace.iter().zip(&b.trace) {
        if let (Some(m1), Some(m2)) = (x.mass_gauge_kg, y.mass_gauge_kg) {
            worst = worst.max((m1 - m2).abs() / m2);
        }
    }
    eprintln!(
        "fixed vs f64 over {} samples: mass {worst:.1e} rel",
        a.trace.len()
    );
    assert!(worst < 1e-5);
    let ev = |s: &Summary| {
        s.alarms
            .iter()
            .map(|e| (e.t_s, e.alarm, e.change))
            .collect::<Vec<_>>()
    };
    assert_eq!(ev(&a.summary), ev(&b.summary));
}

#[test]
fn every_builtin_parses_and_names_match() {
    for (name, text) in BUILTIN {
        let sc = Scenario::from_toml(text).unwrap();
        assert_eq!(sc.name, name);
    }
}

#[test]
fn scenario_files_are_checked_strictly() {
    let good = BUILTIN[0].1;
    assert!(Scenario::from_toml(good).is_ok());
    let cases = [
        good.replace("water_capacity", "water_capacty"),
        good.replace("\"50L\"", "\"50\""),
        good.replace("\"50L\"", "\"50gal\""),
        good.replace("isochor-scenario 1", "isochor-scenario 2"),
        good.replace("duration = \"7d\"", "duration = \"7 weeks\""),
        good.replace(
            "loss_per_day = 0.005",
            "loss_per_day = 0.005\narea = \"1mm2\"",
        ),
        good.replace("kind = \"open\"", "kind = \"failure_low\""),
        good.replace("mount = \"wall\"", "mount = \"roof\""),
        good.replace("gas = \"nitrogen\"", "gas = \"unobtainium\""),
    ];
    for (i, text) in cases.iter().enumerate() {
        let e = Scenario::from_toml(text);
        assert!(e.is_err(), "case {i} was accepted");
        assert_eq!(e.unwrap_err().exit_code(), 2, "case {i}");
    }
}

/// The k = 2 interval with a nominal instrument (the scenario's stated
/// errors only, the capacity exact), every built-in scenario: it holds the
/// truth in at least 95 % of the judged samples, draws and weather
/// included, and where a time to empty is shown its bounds hold the truth
/// in at least 90 % of the minutes (none is shown without a steady draw).
/// Before the gas–sensor term (docs/uncertainty.md) `methane-cold-night`
/// held 92 % and its time-to-empty bounds 27 %; `methane-store-winter` 52 %
/// and 7 %.
#[test]
fn every_builtin_with_a_nominal_instrument_is_covered() {
    let rows: Vec<(String, Summary)> = BUILTIN
        .par_iter()
        .map(|(name, _)| {
            let mut file = Scenario::builtin(name).unwrap().source;
            file.gauge.instrument = "nominal".into();
            let sc = file.build().unwrap();
            let s = run(
                &sc,
                &RunOptions {
                    backend: BackendKind::Fixed,
                    trace_every_s: 0.0,
                    progress: false,
                },
            )
            .unwrap()
            .summary;
            (name.to_string(), s)
        })
        .collect();
    for (name, s) in &rows {
        let cov = s.uncertainty_coverage.unwrap();
        eprintln!(
            "{name}: coverage {:.1} % of {} judged samples, rms {:.3} %, median U/m {:.3} %; time to empty {} min, bounds {:?}",
            cov * 100.0,
            s.judged_samples,
            s.rms_error_fraction.unwrap() * 100.0,
            s.median_relative_uncertainty.unwrap() * 100.0,
            s.time_to_empty_minutes,
            s.time_to_empty_coverage
        );
        assert!(cov >= 0.95, "{name}: {cov}");
        if s.time_to_empty_minutes > 0 {
            let t = s.time_to_empty_coverage.unwrap();
            assert!(t >= 0.9, "{name}: {t}");
        }
    }
}

/// Two cold nights on methane over a population: 100 instruments drawn from
/// the declaration, two days each at 10 s samples; the pooled coverage of
/// the k = 2 interval is near 95 % (82 % before the gas–sensor term).
#[test]
fn methane_cold_night_population_coverage_is_near_95_percent() {
    let coverage = population("methane-cold-night", 100, 2.0 * 86_400.0, 5000);
    assert!((0.92..=0.99).contains(&coverage), "{coverage}");
}

/// The 4 m³ methane store over a population: 100 instruments drawn from the
/// declaration, four days each at 10 s samples; the pooled coverage of the
/// k = 2 interval is near 95 % with the gas trailing its wall by hours.
#[test]
fn methane_store_winter_population_coverage_is_near_95_percent() {
    let coverage = population("methane-store-winter", 100, 4.0 * 86_400.0, 5000);
    assert!((0.92..=0.99).contains(&coverage), "{coverage}");
}

/// The keys of ramp faults and irregular draws: accepted where they belong,
/// refused elsewhere (exit code 2, as every scenario error).
#[test]
fn ramp_and_schedule_keys_are_checked() {
    let ramp = BUILTIN
        .iter()
        .find(|b| b.0 == "transmitter-ramp")
        .unwrap()
        .1;
    let odd = BUILTIN
        .iter()
        .find(|b| b.0 == "workshop-odd-days")
        .unwrap()
        .1;
    let sc = Scenario::from_toml(ramp).unwrap();
    let ramps: Vec<_> = sc
        .faults
        .iter()
        .map(|f| (f.ramp_to, f.ramp_over_s))
        .collect();
    assert_eq!(
        ramps,
        [(-6e5, 12.0 * 3600.0), (8.0, 4.0 * 3600.0), (400e5, 20.0)]
    );
    assert_eq!(sc.faults[2].duration_s, f64::INFINITY);
    let sc = Scenario::from_toml(odd).unwrap();
    assert!(!sc.plant.draws[0].day_demand.is_empty());
    // Good variants.
    for text in [
        ramp.replace("to = \"-6bar\"", "to = \"+87psi\""),
        odd.replace("start_weekday = \"wed\"", "start_weekday = \"Sun\""),
        odd.replace("probability = 0.5", "days = [0, 3, 700]"),
        odd.replace("flow_max = \"10sL/min\"\n", ""),
    ] {
        assert!(Scenario::from_toml(&text).is_ok(), "{text}");
    }
    let cases = [
        // A ramp without `to` or `over`, or with a zero `over`.
        ramp.replacen("to = \"-6bar\"\n", "", 1),
        ramp.replacen("over = \"12h\"\n", "", 1),
        ramp.replacen("over = \"12h\"", "over = \"0s\"", 1),
        // A pressure ramp in kelvin, a temperature ramp in bar, a gauge unit.
        ramp.replacen("to = \"-6bar\"", "to = \"-6K\"", 1),
        ramp.replacen("to = \"+8K\"", "to = \"+8bar\"", 1),
        ramp.replacen("to = \"-6bar\"", "to = \"-6barg\"", 1),
        // `to`/`over` on another kind.
        BUILTIN[0].1.replace(
            "duration = \"10min\"",
            "duration = \"10min\"\nto = \"1K\"\nover = \"1h\"",
        ),
        // Schedules: a probability out of 0 … 1, an unknown weekday, a day
        // beyond two years, a flow range upside down, an unknown key.
        odd.replace("probability = 0.5", "probability = 1.5"),
        odd.replace("\"fri\"", "\"fry\""),
        odd.replace("start_weekday = \"wed\"", "start_weekday = \"someday\""),
        odd.replace("probability = 0.5", "days = [800]"),
        odd.replace("flow_max = \"10sL/min\"", "flow_max = \"5sL/min\""),
        odd.replace("probability = 0.5", "chance = 0.5"),
    ];
    for (i, text) in cases.iter().enumerate() {
        assert_ne!(text, ramp, "case {i} changed nothing");
        assert_ne!(text, odd, "case {i} changed nothing");
        let e = Scenario::from_toml(text);
        assert!(e.is_err(), "case {i} was accepted");
        assert_eq!(e.unwrap_err().exit_code(), 2, "case {i}");
    }
}

/// Irregular draws are drawn from the scenario's seed: the same seed gives
/// the same schedule, another seed another; only the allowed weekdays are
/// used (day 0 a Wednesday), each in about half of them (binomial, 3σ over
/// two years), at a demand between `flow` and `flow_max`; `days` picks
/// exactly the days it names. The simulated outflow follows the schedule:
/// only on scheduled days, inside the windows, at the day's demand.
#[test]
fn irregular_draw_schedules_are_deterministic_per_seed() {
    let odd = BUILTIN
        .iter()
        .find(|b| b.0 == "workshop-odd-days")
        .unwrap()
        .1;
    let a = Scenario::from_toml(odd).unwrap();
    let b = Scenario::from_toml(odd).unwrap();
    let c = Scenario::from_toml(odd).unwrap().with(None, Some(30));
    let (da, db, dc) = (
        &a.plant.draws[0].day_demand,
        &b.plant.draws[0].day_demand,
        &c.plant.draws[0].day_demand,
    );
    assert_eq!(da, db);
    assert_ne!(da, dc);
    let lo = a.plant.draws[0].kg_s;
    let hi = lo * 10.0 / 6.0;
    let (mut weekdays, mut used) = (0, 0);
    for (day, &q) in da.iter().enumerate() {
        let weekday = (2 + day) % 7 < 5;
        weekdays += usize::from(weekday);
        if q > 0.0 {
            assert!(weekday, "day {day} is a weekend day");
            assert!(q >= lo && q <= hi * (1.0 + 1e-12), "day {day}: {q}");
            used += 1;
        }
    }
    let (n, p) = (weekdays as f64, 0.5);
    let sigma = (n * p * (1.0 - p)).sqrt();
    eprintln!(
        "{used} of {weekdays} weekdays used (expected {:.0} ± {sigma:.1})",
        n * p
    );
    assert!((used as f64 - n * p).abs() < 3.0 * sigma);
    let days = Scenario::from_toml(&odd.replace("probability = 0.5", "days = [0, 5, 6, 7]"))
        .unwrap()
        .plant
        .draws[0]
        .day_demand
        .clone();
    // `days` alone: those days and no other (every weekday is allowed).
    let on: Vec<usize> = (0..days.len()).filter(|&d| days[d] > 0.0).collect();
    assert_eq!(on, [0, 5, 6, 7]);

    // The physics follows the schedule (1 min trace; the draws start and
    // stop on the minute).
    let r = run(
        &a.clone().with(Some(14.0 * 86_400.0), None),
        &RunOptions {
            backend: BackendKind::Fixed,
            trace_every_s: 60.0,
            progress: false,
        },
    )
    .unwrap();
    let d = &a.plant.draws[0];
    let mut drawn_minutes = 0;
    for p in &r.trace {
        let want = d.demand_kg_s(p.t_s) * 3600.0;
        assert!(
            (p.true_outflow_kg_h - want).abs() <= 1e-9 * want.max(1e-3),
            "at {} s: {} vs {want}",
            p.t_s,
            p.true_outflow_kg_h
        );
        drawn_minutes += usize::from(want > 0.0);
    }
    let scheduled_days = da.iter().take(14).filter(|&&q| q > 0.0).count();
    assert!(scheduled_days >= 2, "{scheduled_days}");
    // Two windows of 90 min a day, each minute mark inside one.
    assert_eq!(drawn_minutes, scheduled_days * 180);
}

/// The manifold's keys: the group parsed as written (capacity told: the
/// cylinders open at the start; valve changes in time order; the sensor's
/// cylinder), and refused where they do not fit.
#[test]
fn manifold_keys_are_checked() {
    let text = BUILTIN
        .iter()
        .find(|b| b.0 == "lab-argon-manifold")
        .unwrap()
        .1;
    let sc = Scenario::from_toml(text).unwrap();
    let m = sc.plant.manifold.as_ref().unwrap();
    assert_eq!(m.cylinders.len(), 4);
    assert_eq!(m.sensor, 0);
    assert_eq!(sc.tank.water_capacity_m3, 0.1);
    assert_eq!(m.cylinders[0].switches, [(28.0 * 3600.0, false)]);
    assert_eq!(m.cylinders[3].switches, [(28.0 * 3600.0, true)]);
    assert!(!m.cylinders[2].open && m.cylinders[2].initial_pressure_pa == 198e5);
    let cases = [
        text.replace("cylinder = 4\n", "cylinder = 5\n"),
        text.replace("pressure = \"52bar\"", "pressure = \"52bar\"\ntemperature_sensor = true"),
        text.replace("pressure = \"52bar\"", "pressure = \"52bar\"\nvalve_area = \"0mm2\""),
        text.replace("pressure = \"52bar\"", "pressure = \"52bar\"\nsun_exposure = 2.0"),
        text.replace("pressure = \"52bar\"", "pressure = \"52bar\"\ncolour = \"blue\""),
        text.replace("pressure = \"60bar\"\n", "pressure = \"60bar\"\nopen = false\n")
            .replace("pressure = \"52bar\"\n", "pressure = \"52bar\"\nopen = false\n"),
        text.replace("[[draw]]", "[[fill]]\nstart = \"1h\"\nsupply_pressure = \"300bar\"\nsupply_temperature = \"20C\"\narea = \"1mm2\"\nto_pressure = \"200bar\"\n\n[[draw]]"),
        BUILTIN[0].1.replace("[gauge]", "[[valve]]\ncylinder = 1\nat = \"1h\"\nopen = false\n\n[gauge]"),
    ];
    for (i, t) in cases.iter().enumerate() {
        assert_ne!(t, text, "case {i} changed nothing");
        let e = Scenario::from_toml(t);
        assert!(e.is_err(), "case {i} was accepted");
        assert_eq!(e.unwrap_err().exit_code(), 2, "case {i}");
    }
}
