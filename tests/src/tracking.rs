//! Running the fixed-point and float trackers side by side over a synthetic
//! series, with the comparison of the two paths kept along the way.

use crate::synth::{HOUR_MS, Sample, Scenario};
use isochor_core::alarm::AlarmEvent;
use isochor_core::model::Ideal;
use isochor_core::time::Instant;
use isochor_core::track::fixed::{RateFx, TrackConfigFx, TrackFx, Tracker as TrackerFx};
use isochor_core::track::float::{TimeToEmpty, Track, TrackConfig, Tracker};
use isochor_core::{Setup, SetupFx, Status, Tank, fx};

/// Where in each minute (block) the tests judge the outputs: this long
/// after the block's close, when all of the close's steps have run (they
/// run one a sample over the samples after it and finish within half a
/// block; `isochor_core::track`, "A close spread over the samples that
/// follow it"). A time to empty counts from its close.
pub const JUDGED_AFTER_CLOSE_MS: u64 = 30_000;

/// Whether the sample at `t_ms` is one the tests judge (once a minute,
/// [`JUDGED_AFTER_CLOSE_MS`] after the close).
pub fn judged(t_ms: u64) -> bool {
    t_ms % 60_000 == JUDGED_AFTER_CLOSE_MS
}

/// The true time to empty counted from the last close: `truth_now_ms` at a
/// judged sample plus the time since the close.
pub fn from_close(truth_now_ms: f64) -> f64 {
    truth_now_ms + JUDGED_AFTER_CLOSE_MS as f64
}

/// Worst differences between the fixed-point and the f64 tracker over a
/// series.
#[derive(Clone, Debug, Default)]
pub struct Agreement {
    /// Samples compared.
    pub samples: u64,
    /// Largest |ΔF| of the fill fraction of the smoothed content.
    pub fill_fraction: f64,
    /// Largest |Δrate| / max(|rate|, 1e-3 × rated mass per hour).
    pub rate_rel: f64,
    /// Largest |Δ expected time to empty| / expected (samples with both).
    pub tte_rel: f64,
    /// Largest |ΔU(rate)| / max(U(rate), 1e-6 × rated mass per hour).
    pub u_rate_rel: f64,
    /// Largest |Δ earliest| / earliest and |Δ latest| / latest of the time
    /// to empty (samples with both, rate known to ±50 %).
    pub tte_bounds_rel: f64,
    /// Largest |ΔU(F)| (k = 2) of the fill fraction.
    pub u_fraction: f64,
    /// Largest |Δ loss per day| of the leak detector.
    pub leak_loss: f64,
    /// Largest |Δ predicted settled fraction|.
    pub settled_fraction: f64,
    /// Samples where one path had a rate, time to empty, leak verdict or
    /// settled prediction and the other not, the leak verdicts differ, or
    /// (rate told from zero) the reasons for no time to empty differ.
    pub presence_mismatches: u64,
    /// Samples whose tracking-and-alarm status bits differ.
    pub status_mismatches: u64,
    /// Alarm events of the fixed path.
    pub events_fixed: Vec<AlarmEvent>,
    /// Alarm events of the float path.
    pub events_float: Vec<AlarmEvent>,
}

impl Agreement {
    fn add(&mut self, a: &TrackFx, b: &Track, rated_kg: f64) {
        self.samples += 1;
        let d = |x: &mut f64, v: f64| {
            if v > *x {
                *x = v;
            }
        };
        if let (Some(ca), Some(cb)) = (a.content, b.content) {
            d(
                &mut self.fill_fraction,
                (fx::to_f64(ca.fill_fraction) - cb.fill_fraction).abs(),
            );
        }
        // Whether a time to empty exists depends on the sign of the rate: it
        // is compared only where the rate is told from zero.
        let confident = b.rate.is_some_and(|r| r.confidence >= 0.5);
        let mut presence = a.rate.is_some() != b.rate.is_some()
            || (confident && a.time_to_empty.is_some() != b.time_to_empty.is_some())
            || (confident && a.time_to_empty_withheld != b.time_to_empty_withheld)
            || a.leak.is_some() != b.leak.is_some()
            || a.settling.predicted.is_some() != b.settling.predicted.is_some();
        if let (Some(ra), Some(rb)) = (a.rate, b.rate) {
            let scale = rb.kg_h.abs().max(1e-3 * rated_kg);
            d(
                &mut self.rate_rel,
                (fx::to_f64(ra.kg_h) - rb.kg_h).abs() / scale,
            );
            d(
                &mut self.u_rate_rel,
                (fx::to_f64(ra.u_kg_h) - rb.u_kg_h).abs() / rb.u_kg_h.max(1e-6 * rated_kg),
            );
        }
        // Time to empty compared where the rate is known to ±50 % (near a
        // zero rate it amplifies any difference without meaning).
        if let (Some(ta), Some(tb), Some(rb)) = (a.time_to_empty, b.time_to_empty, b.rate)
            && tb.expected.0 > 0
            && rb.confidence >= 0.5
        {
            d(
                &mut self.tte_rel,
                (ta.expected.0 as f64 - tb.expected.0 as f64).abs() / tb.expected.0 as f64,
            );
            let rel = |x: u64, y: u64| (x as f64 - y as f64).abs() / (y as f64).max(1.0);
            d(&mut self.tte_bounds_rel, rel(ta.earliest.0, tb.earliest.0));
            if let (Some(la), Some(lb)) = (ta.latest, tb.latest) {
                d(&mut self.tte_bounds_rel, rel(la.0, lb.0));
            }
        }
        if let (Some(ua), Some(ub)) = (a.uncertainty, b.uncertainty) {
            d(
                &mut self.u_fraction,
                (fx::to_f64(ua.fill_fraction) - ub.fill_fraction).abs(),
            );
        }
        if let (Some(la), Some(lb)) = (a.leak, b.leak) {
            d(
                &mut self.leak_loss,
                (fx::to_f64(la.loss_per_day) - lb.loss_per_day).abs(),
            );
            presence |= la.leaking != lb.leaking;
        }
        if let (Some(pa), Some(pb)) = (a.settling.predicted, b.settling.predicted) {
            d(
                &mut self.settled_fraction,
                (fx::to_f64(pa.fill_fraction) - pb.fill_fraction).abs(),
            );
        }
        if presence {
            self.presence_mismatches += 1;
        }
        if (a.status & Status::TRACKING_RANGE) != (b.status & Status::TRACKING_RANGE) {
            self.status_mismatches += 1;
        }
        self.events_fixed.extend(a.events.iter());
        self.events_float.extend(b.events.iter());
    }

    /// Panics unless the two paths agree within the bounds used by every
    /// long-series test.
    pub fn assert_close(&self, what: &str) {
        assert!(self.samples > 0, "{what}: nothing compared");
        let checks = [
            ("fill fraction", self.fill_fraction, 1e-6),
            ("rate (relative)", self.rate_rel, 1e-4),
            ("time to empty (relative)", self.tte_rel, 1e-4),
            // An uncertainty is stated to two significant digits (GUM 7.2.6);
            // 1e-3 of it is far below that. The budget arithmetic of both
            // paths agrees to 1e-6 on equal inputs (core unit test); the rest
            // is the inputs' rounding (block means in Q28, the smoothing's α
            // in Q16), amplified where the curvature of the temperature is
            // no larger than its noise (early windows).
            ("U(rate) (relative)", self.u_rate_rel, 1e-3),
            ("time to empty bounds (relative)", self.tte_bounds_rel, 1e-3),
            ("U(fill fraction)", self.u_fraction, 1e-6),
            ("leak loss per day", self.leak_loss, 1e-6),
            ("predicted settled fraction", self.settled_fraction, 1e-5),
        ];
        for (name, v, bound) in checks {
            assert!(
                v <= bound,
                "{what}: fixed vs f64 {name} differs by {v:e} > {bound:e}"
            );
        }
        assert_eq!(
            self.presence_mismatches, 0,
            "{what}: outputs present in one path only"
        );
        assert_eq!(self.status_mismatches, 0, "{what}: alarm states differ");
        assert_eq!(
            self.events_fixed, self.events_float,
            "{what}: alarm events differ"
        );
    }

    /// A one-line summary for `--nocapture` runs.
    pub fn summary(&self) -> String {
        format!(
            "fixed vs f64 over {} samples: |ΔF| {:.1e}, rate {:.1e} rel, U(rate) {:.1e} rel, time to empty {:.1e} rel (bounds {:.1e}), U(F) {:.1e}, leak loss {:.1e}/day, settled F {:.1e}",
            self.samples,
            self.fill_fraction,
            self.rate_rel,
            self.u_rate_rel,
            self.tte_rel,
            self.tte_bounds_rel,
            self.u_fraction,
            self.leak_loss,
            self.settled_fraction
        )
    }
}

/// The tank of a scenario: its capacity, rated 200 bar absolute at 15 °C.
pub fn tank_of(sc: &Scenario) -> Tank {
    Tank::new(sc.capacity_m3, 200e5)
}

/// Runs both trackers over the scenario, calling `observe` with each sample
/// and both outputs, and returns the comparison of the paths. The float path
/// gets exactly the fixed path's inputs and configuration.
pub fn run<O>(sc: &Scenario, cfg: &TrackConfig, observe: O) -> Agreement
where
    O: FnMut(&Sample, &TrackFx, &Track),
{
    run_declared(sc, tank_of(sc), cfg, observe)
}

/// [`run`] with the trackers told `tank` (e.g. a water capacity that is off
/// by a drawn error) while the truth keeps the scenario's.
pub fn run_declared<O>(sc: &Scenario, tank: Tank, cfg: &TrackConfig, mut observe: O) -> Agreement
where
    O: FnMut(&Sample, &TrackFx, &Track),
{
    let setup = Setup::new(sc.gas, tank);
    let sfx = SetupFx::from_f64(&setup).expect("valid setup");
    let cfx = TrackConfigFx::from_f64(cfg).expect("valid tracking configuration");
    let est_fx =
        isochor_core::content::fixed::Estimator::new(sfx, Ideal::new(sc.gas)).expect("estimator");
    let est_f = isochor_core::content::float::Estimator::new(sfx.to_real(), Ideal::new(sc.gas))
        .expect("estimator");
    let rated_kg = est_f.rated_mass_kg();
    let mut a = TrackerFx::new(est_fx, cfx).expect("fixed tracker");
    let mut b = Tracker::new(est_f, cfx.to_real()).expect("float tracker");
    let mut agree = Agreement::default();
    for s in sc.series() {
        let p = fx::Pressure::saturating_from_num(s.p_read_pa);
        let t = fx::Temperature::saturating_from_num(s.t_read_k);
        let at = Instant(s.t_ms);
        let ra = a.update(at, p, t, Status::OK);
        let rb = b
            .update(at, fx::to_f64(p), fx::to_f64(t), Status::OK)
            .expect("finite inputs");
        agree.add(ra, &rb, rated_kg);
        observe(&s, ra, &rb);
    }
    agree
}

/// How the rate and time to empty of the fixed path do against the truth of
/// a steady draw, judged once a minute with a full rate window (32 blocks).
#[derive(Clone, Debug, Default)]
pub struct RateScore {
    /// Judged minutes.
    pub minutes: u64,
    /// Minutes whose rate ± U(rate) holds the true draw.
    pub covered: u64,
    /// Sum of squared relative rate errors.
    pub sq_err: f64,
    /// Largest |relative rate error|.
    pub worst: f64,
    /// U(rate) / true draw, every judged minute.
    pub u_rel: Vec<f64>,
    /// Minutes judged for the time to empty (the truth more than 1 h away).
    pub tte_minutes: u64,
    /// Of those, minutes whose earliest … latest holds the true time.
    pub tte_covered: u64,
}

impl RateScore {
    /// Judges one sample: `draw_kg_h` the true draw, `reserve_kg` the true
    /// mass at the reserve fraction.
    pub fn add(
        &mut self,
        s: &Sample,
        draw_kg_h: f64,
        reserve_kg: f64,
        rate: Option<RateFx>,
        tte: Option<TimeToEmpty>,
    ) {
        let Some(r) = rate else { return };
        if !judged(s.t_ms) || r.blocks < 32 {
            return;
        }
        let (kg_h, u) = (fx::to_f64(r.kg_h), fx::to_f64(r.u_kg_h));
        let e = (kg_h - draw_kg_h) / draw_kg_h;
        self.minutes += 1;
        self.sq_err += e * e;
        self.worst = self.worst.max(e.abs());
        self.u_rel.push(u / draw_kg_h);
        if (kg_h - draw_kg_h).abs() <= u {
            self.covered += 1;
        }
        let truth_ms = from_close((s.mass_kg - reserve_kg) / draw_kg_h * HOUR_MS as f64);
        if truth_ms > HOUR_MS as f64 {
            self.tte_minutes += 1;
            if let Some(t) = tte {
                let latest = t.latest.map_or(f64::INFINITY, |l| l.0 as f64);
                if t.earliest.0 as f64 <= truth_ms && truth_ms <= latest {
                    self.tte_covered += 1;
                }
            }
        }
    }

    /// Adds another score's minutes.
    pub fn merge(&mut self, o: &RateScore) {
        self.minutes += o.minutes;
        self.covered += o.covered;
        self.sq_err += o.sq_err;
        self.worst = self.worst.max(o.worst);
        self.u_rel.extend_from_slice(&o.u_rel);
        self.tte_minutes += o.tte_minutes;
        self.tte_covered += o.tte_covered;
    }

    /// Share of judged minutes whose rate ± U holds the truth.
    pub fn coverage(&self) -> f64 {
        self.covered as f64 / self.minutes.max(1) as f64
    }

    /// Share of judged minutes whose time-to-empty bounds hold the truth.
    pub fn tte_coverage(&self) -> f64 {
        self.tte_covered as f64 / self.tte_minutes.max(1) as f64
    }

    /// Root mean square relative rate error.
    pub fn rms(&self) -> f64 {
        (self.sq_err / self.minutes.max(1) as f64).sqrt()
    }

    /// Median U(rate) relative to the true draw.
    pub fn median_u(&self) -> f64 {
        let mut v = self.u_rel.clone();
        v.sort_by(f64::total_cmp);
        v.get(v.len() / 2).copied().unwrap_or(f64::NAN)
    }

    /// A one-line summary for `--nocapture` runs.
    pub fn summary(&self) -> String {
        format!(
            "{} minutes: rate error rms {:.2} %, worst {:.2} %; U(rate) k=2 median {:.2} % ({:.1} × rms error), covers {:.1} %; time-to-empty bounds cover {:.1} % of {} minutes",
            self.minutes,
            self.rms() * 100.0,
            self.worst * 100.0,
            self.median_u() * 100.0,
            self.median_u() / self.rms(),
            self.coverage() * 100.0,
            self.tte_coverage() * 100.0,
            self.tte_minutes
        )
    }
}
