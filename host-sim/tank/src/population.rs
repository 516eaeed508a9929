//! Populations: one scenario run by many instruments, each drawn from the
//! gauge's declared uncertainties, in its own weather and noise (a seed
//! each), scored together.
//!
//! A k = 2 uncertainty promises about 95 % coverage over the population of
//! instruments its declaration describes (GUM, JCGM 100:2008, 6.2–6.3), not
//! for one instrument; false alarms are counted per instrument-year. This
//! is where both are judged: [`Population::from_runs`] pools the scores of
//! runs made with [`members`].

use crate::Error;
use crate::run::Summary;
use crate::scenario::Scenario;
use serde::Serialize;

/// Seconds in a year of 365.25 days (the instrument-year's unit).
pub const YEAR_S: f64 = 365.25 * 86_400.0;

/// The members of a population of `runs` instruments of `scenario`: the
/// same scenario with seeds `seed`, `seed + 1`, … (another weather, noise
/// and instrument each), every member's instrument drawn from the
/// declaration whatever the scenario's `gauge.instrument` says, cut to
/// `duration_s` when given.
pub fn members(
    scenario: &Scenario,
    runs: u64,
    seed: u64,
    duration_s: Option<f64>,
) -> Result<Vec<Scenario>, Error> {
    if runs == 0 {
        return Err(Error::Invalid("a population needs at least one run".into()));
    }
    let mut file = scenario.source.clone();
    file.gauge.instrument = "drawn".into();
    let drawn = file.build()?;
    Ok((0..runs)
        .map(|i| drawn.clone().with(duration_s, Some(seed.wrapping_add(i))))
        .collect())
}

/// The pooled scores of a population.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Population {
    /// Scenario name.
    pub scenario: String,
    /// The gauge under test (`fixed`, `float`, …).
    pub backend: String,
    /// Instruments run.
    pub runs: u64,
    /// Seed of the first run (the others follow it).
    pub seed_first: u64,
    /// Length of each run, s.
    pub duration_s: f64,
    /// Runs × their length, in years of 365.25 days.
    pub instrument_years: f64,
    /// Alarm raises the truth does not justify, over all runs.
    pub false_alarms: u64,
    /// `false_alarms / instrument_years`.
    pub false_alarms_per_instrument_year: f64,
    /// Runs with at least one false alarm.
    pub runs_with_false_alarms: u64,
    /// False alarms by alarm name (`leak`, `low_content`, …).
    pub false_alarms_by_kind: std::collections::BTreeMap<String, u64>,
    /// Judged samples over all runs (settled, no fault, above the reserve).
    pub judged_samples: u64,
    /// Share of all judged samples whose k = 2 interval holds the true
    /// content (the figure the declaration promises at about 95 %).
    pub coverage_pooled: Option<f64>,
    /// Smallest coverage of one run.
    pub coverage_min: Option<f64>,
    /// Median coverage of the runs.
    pub coverage_median: Option<f64>,
    /// Runs whose own coverage is below 95 % (single instruments may be;
    /// the population should not).
    pub runs_coverage_below_95: u64,
    /// Root mean square content error over all judged samples, fraction of
    /// the content (every instrument's bias included).
    pub rms_error_pooled: Option<f64>,
    /// Median of the runs' median U(m)/m (k = 2).
    pub median_relative_uncertainty: Option<f64>,
    /// `median_relative_uncertainty / rms_error_pooled`: about 2 for an
    /// honest k = 2 statement (U = 2u); well above, a wide one; below, an
    /// optimistic one.
    pub uncertainty_over_rms: Option<f64>,
    /// Runs in which a leak began.
    pub leak_runs: u64,
    /// Of those, runs in which it was found.
    pub leak_found_runs: u64,
    /// Median time from a leak's start to its alarm, s.
    pub leak_found_after_median_s: Option<f64>,
    /// Longest time from a leak's start to its alarm, s.
    pub leak_found_after_max_s: Option<f64>,
    /// Minutes judged for time to empty over all runs.
    pub time_to_empty_minutes: u64,
    /// Share of those minutes whose earliest … latest holds the truth.
    pub time_to_empty_coverage_pooled: Option<f64>,
    /// Safety cautions for the gas (oxygen, hydrogen, asphyxiants, …).
    pub caution: String,
}

fn median(mut v: Vec<f64>) -> Option<f64> {
    if v.is_empty() {
        return None;
    }
    v.sort_by(f64::total_cmp);
    let n = v.len();
    Some(if n % 2 == 1 {
        v[n / 2]
    } else {
        0.5 * (v[n / 2 - 1] + v[n / 2])
    })
}

impl Population {
    /// Pools the summaries of the runs of one population (all of one
    /// scenario and backend; `seed_first` as given to [`members`]).
    pub fn from_runs(runs: &[Summary], seed_first: u64) -> Result<Population, Error> {
        let first = runs
            .first()
            .ok_or_else(|| Error::Invalid("a population needs at least one run".into()))?;
        if runs
            .iter()
            .any(|r| r.scenario != first.scenario || r.backend != first.backend)
        {
            return Err(Error::Invalid(
                "a population's runs are of one scenario and one gauge".into(),
            ));
        }
        let n = runs.len() as u64;
        let duration_s = first.duration_s;
        let instrument_years = runs.iter().map(|r| r.duration_s).sum::<f64>() / YEAR_S;
        let false_alarms: u64 = runs.iter().map(|r| r.false_alarms).sum();
        let judged: u64 = runs.iter().map(|r| r.judged_samples).sum();
        let weighted = |f: &dyn Fn(&Summary) -> Option<f64>, w: &dyn Fn(&Summary) -> u64| {
            let (mut sum, mut weight) = (0.0, 0u64);
            for r in runs {
                if let Some(v) = f(r) {
                    sum += v * w(r) as f64;
                    weight += w(r);
                }
            }
            (weight > 0).then(|| sum / weight as f64)
        };
        let coverages: Vec<f64> = runs.iter().filter_map(|r| r.uncertainty_coverage).collect();
        let coverage_pooled = weighted(&|r| r.uncertainty_coverage, &|r| r.judged_samples);
        let rms_error_pooled = weighted(&|r| r.rms_error_fraction.map(|e| e * e), &|r| {
            r.judged_samples
        })
        .map(f64::sqrt);
        let median_relative_uncertainty = median(
            runs.iter()
                .filter_map(|r| r.median_relative_uncertainty)
                .collect(),
        );
        let found: Vec<f64> = runs
            .iter()
            .filter_map(|r| r.leak_detected_after_s)
            .collect();
        Ok(Population {
            scenario: first.scenario.clone(),
            backend: first.backend.clone(),
            runs: n,
            seed_first,
            duration_s,
            instrument_years,
            false_alarms,
            false_alarms_per_instrument_year: false_alarms as f64 / instrument_years.max(1e-12),
            runs_with_false_alarms: runs.iter().filter(|r| r.false_alarms > 0).count() as u64,
            false_alarms_by_kind: runs
                .iter()
                .flat_map(|r| &r.alarms)
                .filter(|e| e.justified == Some(false))
                .fold(Default::default(), |mut m, e| {
                    *m.entry(e.alarm.to_string()).or_insert(0) += 1;
                    m
                }),
            judged_samples: judged,
            coverage_pooled,
            coverage_min: coverages.iter().copied().reduce(f64::min),
            coverage_median: median(coverages.clone()),
            runs_coverage_below_95: coverages.iter().filter(|&&c| c < 0.95).count() as u64,
            rms_error_pooled,
            median_relative_uncertainty,
            uncertainty_over_rms: match (median_relative_uncertainty, rms_error_pooled) {
                (Some(u), Some(e)) if e > 0.0 => Some(u / e),
                _ => None,
            },
            leak_runs: runs.iter().filter(|r| r.leak_started_s.is_some()).count() as u64,
            leak_found_runs: found.len() as u64,
            leak_found_after_median_s: median(found.clone()),
            leak_found_after_max_s: found.iter().copied().reduce(f64::max),
            time_to_empty_minutes: runs.iter().map(|r| r.time_to_empty_minutes).sum(),
            time_to_empty_coverage_pooled: weighted(&|r| r.time_to_empty_coverage, &|r| {
                r.time_to_empty_minutes
            }),
            caution: first.caution.clone(),
        })
    }

    /// A readable report with what each figure means.
    pub fn render_text(&self) -> String {
        let pct = |v: Option<f64>| v.map_or_else(|| "—".into(), |v| format!("{:.1} %", 100.0 * v));
        let hours =
            |v: Option<f64>| v.map_or_else(|| "—".into(), |v| format!("{:.1} h", v / 3600.0));
        let mut o = format!(
            "population: {} — {} instruments drawn from the gauge's declaration (seeds {} …), \
             {:.1} d each, {} gauge\n",
            self.scenario,
            self.runs,
            self.seed_first,
            self.duration_s / 86_400.0,
            self.backend
        );
        let mut row = |k: &str, v: String| o.push_str(&format!("  {k:<44} {v}\n"));
        row("instrument-years", format!("{:.2}", self.instrument_years));
        row(
            "false alarms (per instrument-year)",
            format!(
                "{} ({:.3}; {} of {} runs had any){}",
                self.false_alarms,
                self.false_alarms_per_instrument_year,
                self.runs_with_false_alarms,
                self.runs,
                if self.false_alarms_by_kind.is_empty() {
                    String::new()
                } else {
                    format!(
                        ": {}",
                        self.false_alarms_by_kind
                            .iter()
                            .map(|(k, n)| format!("{k} {n}"))
                            .collect::<Vec<_>>()
                            .join(", ")
                    )
                }
            ),
        );
        row(
            "k = 2 coverage, pooled (promise: about 95 %)",
            format!(
                "{} of {} judged samples",
                pct(self.coverage_pooled),
                self.judged_samples
            ),
        );
        row(
            "k = 2 coverage per run, min / median",
            format!(
                "{} / {} ({} runs below 95 %)",
                pct(self.coverage_min),
                pct(self.coverage_median),
                self.runs_coverage_below_95
            ),
        );
        row(
            "content error rms, pooled / median U(m)/m",
            format!(
                "{} / {} (ratio {}; about 2 is honest)",
                pct(self.rms_error_pooled),
                pct(self.median_relative_uncertainty),
                self.uncertainty_over_rms
                    .map_or_else(|| "—".into(), |v| format!("{v:.2}"))
            ),
        );
        if self.leak_runs > 0 {
            row(
                "leak found, runs (median / longest delay)",
                format!(
                    "{} of {} ({} / {})",
                    self.leak_found_runs,
                    self.leak_runs,
                    hours(self.leak_found_after_median_s),
                    hours(self.leak_found_after_max_s)
                ),
            );
        }
        row(
            "time-to-empty bounds hold the truth",
            if self.time_to_empty_minutes > 0 {
                format!(
                    "{} of {} judged minutes",
                    pct(self.time_to_empty_coverage_pooled),
                    self.time_to_empty_minutes
                )
            } else {
                "not judged (no steady draw)".into()
            },
        );
        o.push('\n');
        o.push_str(&self.caution);
        o.push('\n');
        o
    }
}
