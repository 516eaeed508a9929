//! Running the fixed-point and float trackers side by side over a synthetic
//! series, with the comparison of the two paths kept along the way.

use crate::synth::{Sample, Scenario};
use isochor_core::alarm::AlarmEvent;
use isochor_core::model::Ideal;
use isochor_core::time::Instant;
use isochor_core::track::fixed::{TrackConfigFx, TrackFx, Tracker as TrackerFx};
use isochor_core::track::float::{Track, TrackConfig, Tracker};
use isochor_core::{Setup, SetupFx, Status, Tank, fx};

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
    /// Largest |ΔU(F)| (k = 2) of the fill fraction.
    pub u_fraction: f64,
    /// Largest |Δ loss per day| of the leak detector.
    pub leak_loss: f64,
    /// Largest |Δ predicted settled fraction|.
    pub settled_fraction: f64,
    /// Samples where one path had a rate, time to empty, leak verdict or
    /// settled prediction and the other not, or the leak verdicts differ.
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
            || a.leak.is_some() != b.leak.is_some()
            || a.settling.predicted.is_some() != b.settling.predicted.is_some();
        if let (Some(ra), Some(rb)) = (a.rate, b.rate) {
            let scale = rb.kg_h.abs().max(1e-3 * rated_kg);
            d(
                &mut self.rate_rel,
                (fx::to_f64(ra.kg_h) - rb.kg_h).abs() / scale,
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
            "fixed vs f64 over {} samples: |ΔF| {:.1e}, rate {:.1e} rel, time to empty {:.1e} rel, U(F) {:.1e}, leak loss {:.1e}/day, settled F {:.1e}",
            self.samples,
            self.fill_fraction,
            self.rate_rel,
            self.tte_rel,
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
pub fn run<O>(sc: &Scenario, cfg: &TrackConfig, mut observe: O) -> Agreement
where
    O: FnMut(&Sample, &TrackFx, &Track),
{
    let setup = Setup::new(sc.gas, tank_of(sc));
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
        agree.add(&ra, &rb, rated_kg);
        observe(&s, &ra, &rb);
    }
    agree
}
