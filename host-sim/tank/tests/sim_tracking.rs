//! Tracking through real use (the scenarios of docs/tracking.md, "Real
//! use"): busy days, a vessel run to empty, changeable weather, a quiet
//! temperature channel and a dead one; each scored in both gauges (the
//! fixed-point device path and the f64 reference), with identical alarm
//! events.

use isochor_tank::run::{BackendKind, RunOptions, RunResult, Summary, run};
use isochor_tank::scenario::Scenario;

fn run_with(sc: &Scenario, backend: BackendKind) -> RunResult {
    run(
        sc,
        &RunOptions {
            backend,
            trace_every_s: 60.0,
            progress: false,
        },
    )
    .unwrap()
}

/// Runs a built-in scenario in both gauges; asserts their alarm events are
/// the same and returns the fixed-point run.
fn both(name: &str) -> RunResult {
    let sc = Scenario::builtin(name).unwrap();
    let a = run_with(&sc, BackendKind::Fixed);
    let b = run_with(&sc, BackendKind::Float);
    show(&a.summary);
    assert_eq!(events(&a.summary), events(&b.summary), "{name}");
    a
}

fn events(s: &Summary) -> Vec<(u64, &'static str, &'static str)> {
    s.alarms
        .iter()
        .map(|e| (e.t_s as u64, e.alarm, e.change))
        .collect()
}

fn raised<'a>(s: &'a Summary, alarm: &'a str) -> impl Iterator<Item = f64> + 'a {
    s.alarms
        .iter()
        .filter(move |e| e.alarm == alarm && e.change == "raised")
        .map(|e| e.t_s)
}

fn show(s: &Summary) {
    eprintln!(
        "{}: max |e| {:.2} %, rms {:.2} %, coverage {:.1} %, median U {:.2} %, false alarms {}, leak after {:?} s, time to empty {} min (bounds hold {:?}), alarms {:?}",
        s.scenario,
        s.max_abs_error_fraction.unwrap_or(f64::NAN) * 100.0,
        s.rms_error_fraction.unwrap_or(f64::NAN) * 100.0,
        s.uncertainty_coverage.unwrap_or(f64::NAN) * 100.0,
        s.median_relative_uncertainty.unwrap_or(f64::NAN) * 100.0,
        s.false_alarms,
        s.leak_detected_after_s,
        s.time_to_empty_minutes,
        s.time_to_empty_coverage,
        s.alarms
            .iter()
            .filter(|e| e.alarm != "not_settled")
            .map(|e| format!("{:.1} h {} {}", e.t_s / 3600.0, e.alarm, e.change))
            .collect::<Vec<_>>()
    );
}

/// Two busy welding days (six hours at 12 sL/min, about 7 % of the content
/// an hour) with idle days between, in standby: the draws are use, not
/// loss, and no leak is raised after them (before draw episodes were kept
/// out of the leak ring, each busy day raised `leak` for about two days).
#[test]
fn busy_days_raise_no_leak() {
    let r = both("contractor-busy-days");
    let s = &r.summary;
    assert_eq!(s.false_alarms, 0);
    assert_eq!(raised(s, "leak").count(), 0);
    assert!(s.uncertainty_coverage.unwrap() >= 0.95);
    assert!(s.mass_end_kg < 0.7 * s.mass_start_kg);
    // No time to empty while a draw starts or stops within the rate window
    // (rate `steady: false`); where one is shown its bounds hold the truth.
    assert!(s.time_to_empty_coverage.unwrap() >= 0.9);
}

/// Run down to the reserve and left there, in use with a learned draw: the
/// gauge says `low_content` and never `leak`.
#[test]
fn run_to_empty_says_low_content_not_leak() {
    let r = both("run-to-empty");
    let s = &r.summary;
    assert_eq!(s.false_alarms, 0);
    assert_eq!(raised(s, "leak").count(), 0);
    assert_eq!(raised(s, "low_content").count(), 1);
    assert!(s.uncertainty_coverage.unwrap() >= 0.95);
    assert!(s.time_to_empty_coverage.unwrap() >= 0.9);
}

/// Two weeks idle on a sunny outdoor rack with the daily mean moving by 6 K
/// from day to day: no leak from weather alone.
#[test]
fn weather_alone_raises_no_leak() {
    let r = both("sunny-rack-weather");
    let s = &r.summary;
    assert_eq!(s.false_alarms, 0);
    assert!(s.uncertainty_coverage.unwrap() >= 0.95);
}

/// A temperature channel whose noise is below its code step repeats its
/// code for minutes: with the temperature's own stuck time (6 h) it is not
/// flagged and the leak (1 %/day) is found within a day. With the
/// pressure's 60 s it would be flagged over and over (checked here too, so
/// the scenario keeps showing the case).
#[test]
fn quiet_temperature_channel_is_not_stuck() {
    let r = both("quiet-sensor-leak");
    let s = &r.summary;
    assert_eq!(s.false_alarms, 0);
    assert_eq!(raised(s, "sensor_fault").count(), 0);
    let after = s.leak_detected_after_s.expect("leak found");
    assert!(after < 24.0 * 3600.0, "{after}");

    let text = isochor_tank::scenario::BUILTIN
        .iter()
        .find(|(n, _)| *n == "quiet-sensor-leak")
        .unwrap()
        .1
        .replace(
            "instrument = \"nominal\"",
            "instrument = \"nominal\"\ntemperature_stuck_after = \"60s\"",
        );
    let sc = Scenario::from_toml(&text)
        .unwrap()
        .with(Some(86_400.0), None);
    let short = run_with(&sc, BackendKind::Fixed);
    assert!(raised(&short.summary, "sensor_fault").count() > 10);
}

/// The temperature sensor dies for good while the draw goes on: the
/// `sensor_fault` alarm is raised, and no content is shown later than the
/// restart gap (5 min) after the last usable sample — never a frozen
/// content while the true one falls.
#[test]
fn dead_sensor_withdraws_the_content() {
    let r = both("dead-sensor-draw");
    let s = &r.summary;
    assert_eq!(s.false_alarms, 0);
    let fault = 36.0 * 3600.0;
    assert!(raised(s, "sensor_fault").any(|t| (fault..fault + 60.0).contains(&t)));
    let shown_late = r
        .trace
        .iter()
        .filter(|p| p.t_s > fault + 300.0 && p.mass_gauge_kg.is_some())
        .count();
    assert_eq!(shown_late, 0);
    let shown_before = r
        .trace
        .iter()
        .filter(|p| p.t_s < fault && p.mass_gauge_kg.is_some())
        .count();
    assert!(shown_before > 2000);
}

/// The leak delays of a population's runs that found the leak, hours,
/// sorted; printed with `what` (how many, min, median, max).
fn leak_delays(runs: &[(u64, Option<f64>, f64, u64)], what: &str) -> Vec<f64> {
    let mut delays: Vec<f64> = runs
        .iter()
        .filter_map(|r| r.1)
        .map(|s| s / 3600.0)
        .collect();
    delays.sort_by(f64::total_cmp);
    eprintln!(
        "{what}: found in {} of {}; delay h: min {:.1}, median {:.1}, max {:.1}",
        delays.len(),
        runs.len(),
        delays.first().copied().unwrap_or(f64::NAN),
        delays.get(delays.len() / 2).copied().unwrap_or(f64::NAN),
        delays.last().copied().unwrap_or(f64::NAN)
    );
    delays
}

/// Runs `n` weathers (seeds from `seed0`) of a scenario text at 10 s
/// samples; returns per run (false alarms, leak found after, coverage,
/// judged samples).
fn population(text: &str, n: u64, seed0: u64) -> Vec<(u64, Option<f64>, f64, u64)> {
    use rayon::prelude::*;
    let base = Scenario::from_toml(text).unwrap();
    (0..n)
        .into_par_iter()
        .map(|i| {
            let mut sc = base.clone().with(None, Some(seed0 + i));
            sc.interval_ms = 10_000;
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
            (
                s.false_alarms,
                s.leak_detected_after_s,
                s.uncertainty_coverage.unwrap_or(0.0),
                s.judged_samples,
            )
        })
        .collect()
}

fn builtin_text(name: &str) -> &'static str {
    isochor_tank::scenario::BUILTIN
        .iter()
        .find(|(n, _)| *n == name)
        .unwrap()
        .1
}

/// The population run of issue 18's weather: 60 weathers of two weeks idle
/// on the sunny rack (6 K day to day, ±10 K day/night, sun, a cold front and
/// a warm one), 2.3 instrument-years: no false alarm (before the weather
/// margin, 28 of 50 such weathers without the fronts raised `leak` at least
/// once); and a leak of 0.2 %/day from day four is found in every weather.
#[test]
fn weather_population_false_alarms_and_leak_delays() {
    let n = 60;
    let text = builtin_text("sunny-rack-weather");
    let idle = population(text, n, 5000);
    let years = n as f64 * 14.0 / 365.25;
    let alarms: u64 = idle.iter().map(|r| r.0).sum();
    let (judged, covered) = idle.iter().fold((0.0, 0.0), |(j, c), r| {
        (j + r.3 as f64, c + r.2 * r.3 as f64)
    });
    eprintln!(
        "weather population: {n} runs, {years:.2} instrument-years, {alarms} false alarms ({:.2} per instrument-year), pooled coverage {:.1} %",
        alarms as f64 / years,
        covered / judged * 100.0
    );
    assert_eq!(alarms, 0);

    // A leak of 0.2 %/day from day four, with the fronts (the cold one on
    // day six comes while the leak is being judged: the weather margin
    // rises and delays the verdict) and without them (6 K day to day only:
    // the stated sensitivity, within 48 h).
    let leak = "[[leak]]\nstart = \"4d\"\nloss_per_day = 0.002\n\n";
    let with_fronts = text.replacen("[[front]]", &format!("{leak}[[front]]"), 1);
    let without = text.split("[[front]]").next().unwrap().to_string()
        + leak
        + &text[text.find("[sensors.pressure]").unwrap()..];
    for (what, text, limit_h) in [
        ("with the fronts", with_fronts, 60.0),
        ("without fronts", without, 48.0),
    ] {
        let runs = population(&text, n, 5000);
        let delays = leak_delays(&runs, &format!("0.2 %/day from day four, {what}"));
        assert_eq!(runs.iter().map(|r| r.0).sum::<u64>(), 0);
        assert_eq!(delays.len() as u64, n);
        assert!(delays.iter().all(|&h| h < limit_h), "{what}: {delays:?}");
    }
}

/// Leaks from the first hour: the stronger the leak, the sooner it is
/// reported. In the first day (standby) the older half of the hours is
/// judged against the newer with a floor for what a day's swing leaves
/// (before, every leak waited for pairs of hours one day apart: 30 h at
/// least, whatever its size); in the second day on the pairs that are in.
/// Indoors, both gauges alike; then 60 weathers of the sunny rack (6 K day
/// to day, ±10 K, sun): found in every one, and the same 60 idle give no
/// alarm from their first-day verdicts (the whole two weeks idle:
/// `weather_population_false_alarms_and_leak_delays`).
#[test]
fn leak_at_start_up_is_reported_sooner_the_stronger_it_is() {
    for (loss, limit_h) in [("0.05", 8.0), ("0.01", 24.0), ("0.002", 48.0)] {
        let text = builtin_text("quiet-sensor-leak")
            .replace("start = \"3d\"", "start = \"1h\"")
            .replace("loss_per_day = 0.01", &format!("loss_per_day = {loss}"));
        let sc = Scenario::from_toml(&text)
            .unwrap()
            .with(Some(3.0 * 86_400.0), None);
        let a = run_with(&sc, BackendKind::Fixed);
        let b = run_with(&sc, BackendKind::Float);
        assert_eq!(events(&a.summary), events(&b.summary), "{loss}");
        assert_eq!(a.summary.false_alarms, 0, "{loss}");
        let after = a.summary.leak_detected_after_s.expect("leak found") / 3600.0;
        eprintln!("{loss} per day from the first hour, indoors: found after {after:.1} h");
        assert!(after + 1.0 < limit_h, "{loss}: {after} h");
    }

    let n = 60;
    let text = builtin_text("sunny-rack-weather");
    let no_fronts = text.split("[[front]]").next().unwrap().to_string()
        + &text[text.find("[sensors.pressure]").unwrap()..];
    let short = no_fronts.replace("duration = \"14d\"", "duration = \"2d\"");
    let idle = population(&short, n, 7000);
    assert_eq!(idle.iter().map(|r| r.0).sum::<u64>(), 0, "idle first days");
    for (loss, limit_h) in [("0.05", 12.0), ("0.01", 24.0)] {
        let leak = format!("[[leak]]\nstart = \"0s\"\nloss_per_day = {loss}\n\n");
        let with = short.replacen(
            "[sensors.pressure]",
            &format!("{leak}[sensors.pressure]"),
            1,
        );
        let runs = population(&with, n, 7000);
        let delays = leak_delays(&runs, &format!("{loss} per day from the start, sunny rack"));
        assert_eq!(runs.iter().map(|r| r.0).sum::<u64>(), 0);
        assert_eq!(delays.len() as u64, n);
        assert!(delays.iter().all(|&h| h < limit_h), "{loss}: {delays:?}");
    }
}

/// A 4 m³ methane store in winter with its sensor on the shell: the gas
/// trails the wall by hours and the day's draw cools it below the sensor.
/// With the vessel's gas–wall time constant declared (the settling time
/// constant, 2 h) the k = 2 interval holds the truth and the time-to-empty
/// bounds hold it where shown; told the default 30 min instead, the
/// interval misses it for a large share of the samples (52 % coverage and
/// errors to 5 % before the gas–sensor term, whatever the declaration).
#[test]
fn large_vessel_gas_trailing_its_wall_is_covered() {
    let mut file = Scenario::builtin("methane-store-winter").unwrap().source;
    file.gauge.instrument = "nominal".into();
    let sc = file.build().unwrap();
    let a = run_with(&sc, BackendKind::Fixed);
    let b = run_with(&sc, BackendKind::Float);
    let s = &a.summary;
    show(s);
    assert_eq!(events(s), events(&b.summary));
    assert_eq!(s.false_alarms, 0);
    assert!(s.uncertainty_coverage.unwrap() >= 0.95);
    assert!(s.time_to_empty_minutes > 1000);
    assert!(s.time_to_empty_coverage.unwrap() >= 0.9);
    let gap = a
        .trace
        .iter()
        .map(|p| (p.wall_temperature_k - p.gas_temperature_k).abs())
        .fold(0.0f64, f64::max);
    eprintln!("largest |wall − gas| temperature: {gap:.2} K");
    assert!(gap > 3.0);

    file.gauge.settle_time_constant = None;
    let s = run_with(&file.build().unwrap(), BackendKind::Fixed).summary;
    show(&s);
    assert!(s.uncertainty_coverage.unwrap() < 0.8);
}

/// The 4 m³ methane store of `methane-store-winter` idle in standby
/// outdoors (daily mean 5 °C moving 3 K from day to day, ±12 K between
/// night and afternoon), its gas trailing the shell-mounted sensor by about
/// two hours: the day means of the compensated content move by up to
/// ±0.6 %/day with the weather. Before the leak verdict took the gas's
/// lag into account every one of 100 such two-week weathers raised a
/// false `leak` (461 alarms); now none of 40 does, and a leak of 1 %/day
/// from day four is found in every weather within a day, in both gauges
/// alike.
#[test]
fn large_store_idle_outdoors_raises_no_leak_from_weather() {
    let winter = builtin_text("methane-store-winter");
    let draw = winter.find("[[draw]]").unwrap();
    let sensors = winter.find("[sensors.pressure]").unwrap();
    let idle = (winter[..draw].to_string() + &winter[sensors..])
        .replace("duration = \"4d\"", "duration = \"14d\"")
        .replace("pressure = \"160bar\"", "pressure = \"150bar\"")
        .replace("mean = \"-8C\"", "mean = \"5C\"")
        .replace("swing = \"6K\"", "swing = \"12K\"")
        .replace("leak_mode = \"in_use\"", "leak_mode = \"standby\"")
        .replace(
            "name = \"methane-store-winter\"",
            "name = \"methane-store-idle\"",
        );
    let n = 40;
    let runs = population(&idle, n, 9000);
    let alarms: u64 = runs.iter().map(|r| r.0).sum();
    eprintln!(
        "4 m³ store idle outdoors, {n} weathers of 14 days: {alarms} false alarms; pooled coverage {:.1} %",
        runs.iter().map(|r| r.2).sum::<f64>() / n as f64 * 100.0
    );
    assert_eq!(alarms, 0);

    let leak = "[[leak]]\nstart = \"4d\"\nloss_per_day = 0.01\n\n";
    let leaking = idle
        .replacen(
            "[sensors.pressure]",
            &format!("{leak}[sensors.pressure]"),
            1,
        )
        .replace("duration = \"14d\"", "duration = \"8d\"");
    let runs = population(&leaking, n, 9000);
    let delays = leak_delays(&runs, "1 %/day from day four");
    assert_eq!(runs.iter().map(|r| r.0).sum::<u64>(), 0);
    assert_eq!(delays.len() as u64, n);
    assert!(delays.iter().all(|&h| h < 24.0), "{delays:?}");

    let sc = Scenario::from_toml(&leaking)
        .unwrap()
        .with(None, Some(9001));
    let a = run_with(&sc, BackendKind::Fixed);
    let b = run_with(&sc, BackendKind::Float);
    show(&a.summary);
    // The leak events of both gauges are the same. (`not_settled` from the
    // gas–sensor term flickers at its threshold in this weather and the two
    // paths differ there by a block at a few edges: 41 of 43 events equal.)
    let leak =
        |s: &Summary| -> Vec<_> { events(s).into_iter().filter(|e| e.1 == "leak").collect() };
    assert_eq!(leak(&a.summary), leak(&b.summary));
    assert!(a.summary.leak_detected_after_s.is_some());
}

/// A pressure transmitter and a temperature sensor failing by ramps (no
/// leak): the slow pressure ramp (−6 bar over 12 h from 30 h) looks like a
/// leak and the gauge says so — a raise the ramp justifies, not a leak
/// found; the temperature ramp (+8 K over 4 h) moves the content as a real
/// warming would (and may be called a leak while it lasts, justified too);
/// the fast ramp (+400 bar in 20 s from 126 h, for good) is the device's
/// to flag: `sensor_fault` within the minute, raised for good.
/// Samples under a ramp are not judged; the others are covered.
#[test]
fn ramps_are_caught_or_explained() {
    let r = both("transmitter-ramp");
    let s = &r.summary;
    assert_eq!(s.false_alarms, 0);
    assert_eq!(s.leak_started_s, None);
    assert_eq!(s.leak_detected_after_s, None);
    // Raised under the slow pressure ramp, and may be under the temperature
    // ramp (its +8 K reads as a loss of about 2.7 %: the first-day verdict
    // of the ring restarted after the pressure ramp sees it), never else.
    let leak: Vec<f64> = raised(s, "leak").collect();
    let h = 3600.0;
    assert!(
        leak.iter().any(|&t| (30.0 * h..54.0 * h).contains(&t)),
        "{:?}",
        s.alarms
    );
    assert!(
        leak.iter()
            .all(|&t| (30.0 * h..54.0 * h).contains(&t) || (76.0 * h..84.0 * h).contains(&t)),
        "{:?}",
        s.alarms
    );
    let fast = 126.0 * 3600.0;
    let faults: Vec<f64> = raised(s, "sensor_fault").collect();
    assert_eq!(faults.len(), 1, "{:?}", s.alarms);
    assert!((fast..fast + 60.0).contains(&faults[0]), "{faults:?}");
    assert!(
        !s.alarms
            .iter()
            .any(|e| e.alarm == "sensor_fault" && e.change == "cleared")
    );
    // Judged: the 7 days less the ramps (24 h, 8 h, the last 42 h) and
    // settling: between 35 % and 57 % of the samples.
    let share = s.judged_samples as f64 / s.samples as f64;
    assert!((0.35..0.57).contains(&share), "{share}");
    assert!(s.uncertainty_coverage.unwrap() >= 0.95);
    // The ramps show in the errors over every sample: −6 bar of 190 is
    // about −3 % of the content.
    assert!(s.max_abs_error_fraction_all.unwrap() > 0.025);
    assert!(s.max_abs_error_fraction.unwrap() < 0.01);
}

/// Welding on irregular weekdays at a flow drawn per day, standby: the
/// draws are use, never a leak; time to empty in the sessions within its
/// bounds.
#[test]
fn irregular_draws_raise_no_leak() {
    let r = both("workshop-odd-days");
    let s = &r.summary;
    assert_eq!(s.false_alarms, 0);
    assert_eq!(raised(s, "leak").count(), 0);
    assert!(s.uncertainty_coverage.unwrap() >= 0.95);
    assert!(s.time_to_empty_minutes > 60);
    assert!(s.time_to_empty_coverage.unwrap() >= 0.9);
    assert!(s.mass_end_kg < 0.7 * s.mass_start_kg);
}

/// Four argon cylinders on a lab manifold, bank A in service, bank B
/// changed over at 28 h: the gauge (told one bank's 100 L) raises
/// `low_content` as bank A runs down, takes the changeover as a fill
/// (`not_settled` while the fresh bank's gas settles, `low_content`
/// cleared), keeps its content within U, no false alarm, no leak.
#[test]
fn manifold_changeover_reads_as_a_fill() {
    let r = both("lab-argon-manifold");
    let s = &r.summary;
    assert_eq!(s.false_alarms, 0);
    assert_eq!(raised(s, "leak").count(), 0);
    let change = 28.0 * 3600.0;
    let low: Vec<f64> = raised(s, "low_content").collect();
    assert_eq!(low.len(), 1, "{:?}", s.alarms);
    assert!(low[0] < change);
    assert!(s.alarms.iter().any(|e| e.alarm == "low_content"
        && e.change == "cleared"
        && (change..change + 600.0).contains(&e.t_s)));
    assert!(s.uncertainty_coverage.unwrap() >= 0.95);
    assert!(s.time_to_empty_coverage.unwrap() >= 0.9);
    // The content open to the header jumps at the changeover.
    let before = r
        .trace
        .iter()
        .rfind(|p| p.t_s < change)
        .unwrap()
        .mass_true_kg;
    let after = r
        .trace
        .iter()
        .find(|p| p.t_s > change + 60.0)
        .unwrap()
        .mass_true_kg;
    assert!(after > 5.0 * before, "{before} → {after}");
    assert_eq!(s.instrument.capacity_told_m3, 0.1);
}
