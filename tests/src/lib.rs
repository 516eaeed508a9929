//! Shared helpers of the cross-crate tests: comparing the fixed-point path
//! with the float path quantity by quantity, and grids over the envelope.

use isochor_core::content::{OVER_FILL_FRACTION, fixed, float};
use isochor_core::model::{Compressibility, CompressibilityFx};
use isochor_core::{SetupFx, Status, envelope as env, fx};

/// The quantities both paths produce, as `f64`, in a fixed order.
pub const QUANTITIES: [&str; 8] = [
    "density_kg_m3",
    "mass_kg",
    "amount_mol",
    "standard_volume_m3",
    "settled_pressure_pa",
    "fill_fraction",
    "z",
    "vessel_factor",
];

/// The outputs of a fixed-point estimate as `f64`, in [`QUANTITIES`] order.
pub fn fixed_values(c: &fixed::Content) -> [f64; 8] {
    [
        fx::to_f64(c.density_kg_m3),
        fx::to_f64(c.mass_kg),
        fx::to_f64(c.amount_mol),
        fx::to_f64(c.standard_volume_m3),
        fx::to_f64(c.settled_pressure_pa),
        fx::to_f64(c.fill_fraction),
        fx::to_f64(c.z.z),
        fx::to_f64(c.vessel_factor),
    ]
}

/// The outputs of a float estimate, in [`QUANTITIES`] order.
pub fn float_values(c: &float::Content) -> [f64; 8] {
    [
        c.density_kg_m3,
        c.mass_kg,
        c.amount_mol,
        c.standard_volume_m3,
        c.settled_pressure_pa,
        c.fill_fraction,
        c.z.z,
        c.vessel_factor,
    ]
}

/// Largest error seen per quantity, relative to `max(|reference|, floor)`.
#[derive(Clone, Debug, Default)]
pub struct ErrorStats {
    /// Worst relative error per quantity.
    pub worst: [f64; 8],
    /// The sample (p Pa, T K) where each worst error occurred.
    pub at: [(f64, f64); 8],
    /// Number of samples compared.
    pub samples: u64,
    /// Samples whose status words differed between the paths.
    pub status_mismatches: u64,
}

impl ErrorStats {
    /// Adds one comparison. `floor` gives, per quantity, the magnitude below
    /// which the error is judged in absolute terms (relative to the floor).
    pub fn add(&mut self, p: f64, t: f64, fixed: [f64; 8], float: [f64; 8], floor: [f64; 8]) {
        self.samples += 1;
        for i in 0..8 {
            let scale = float[i].abs().max(floor[i]);
            let e = if scale == 0.0 {
                (fixed[i] - float[i]).abs()
            } else {
                (fixed[i] - float[i]).abs() / scale
            };
            if e > self.worst[i] {
                self.worst[i] = e;
                self.at[i] = (p, t);
            }
        }
    }

    /// Merges another set of statistics into this one.
    pub fn merge(&mut self, other: &ErrorStats) {
        self.samples += other.samples;
        self.status_mismatches += other.status_mismatches;
        for i in 0..8 {
            if other.worst[i] > self.worst[i] {
                self.worst[i] = other.worst[i];
                self.at[i] = other.at[i];
            }
        }
    }

    /// Panics with a readable table when any quantity exceeds `bound`.
    pub fn assert_within(&self, bound: f64, what: &str) {
        let mut bad = Vec::new();
        for (i, q) in QUANTITIES.iter().enumerate() {
            if self.worst[i] > bound {
                bad.push(format!(
                    "{q}: {:.3e} at p={:.6e} Pa T={:.4} K",
                    self.worst[i], self.at[i].0, self.at[i].1
                ));
            }
        }
        assert!(
            bad.is_empty(),
            "{what}: fixed vs float above {bound:e} over {} samples:\n{}",
            self.samples,
            bad.join("\n")
        );
    }
}

/// Runs both paths at one sample and records the comparison.
///
/// The float path gets exactly the fixed-point inputs (converted without
/// loss), so the comparison measures the fixed-point arithmetic. Relative
/// errors are judged against `max(|value|, value at 1 bar)`: below 1 bar the
/// bound applies to the absolute error scaled by the 1-bar value.
pub fn compare_at<MF, MX>(
    stats: &mut ErrorStats,
    fixed_est: &fixed::Estimator<MX>,
    float_est: &float::Estimator<f64, MF>,
    p: fx::Pressure,
    t: fx::Temperature,
) where
    MF: Compressibility<f64>,
    MX: CompressibilityFx,
{
    let a = fixed_est.estimate(p, t);
    let (pf, tf) = (fx::to_f64(p), fx::to_f64(t));
    let b = float_est.estimate(pf, tf).expect("finite inputs");
    let floor_sample = float_est
        .estimate(
            1e5,
            tf.clamp(env::TEMPERATURE_MIN_K, env::TEMPERATURE_MAX_K),
        )
        .expect("finite inputs");
    let mut floor = float_values(&floor_sample);
    // Z and the vessel factor are near one: judged relative to themselves.
    floor[6] = 0.0;
    floor[7] = 0.0;
    stats.add(pf, tf, fixed_values(&a), float_values(&b), floor);
    // The over-fill flag is a threshold on the fill fraction: within the
    // paths' difference of its limit either answer is right.
    let near_over_fill = (b.fill_fraction / OVER_FILL_FRACTION - 1.0).abs() < 1e-5;
    // Outside the envelope the content is not valid and over-fill is not
    // judged: where the paths differ on an edge (the float path rounds the
    // fixed-point input), they may differ on over-fill too.
    let edge_differs = (a.status & BOUNDARY_FLAGS) != (b.status & BOUNDARY_FLAGS);
    let ignore = if near_over_fill || edge_differs {
        BOUNDARY_FLAGS | Status::OVER_FILL
    } else {
        BOUNDARY_FLAGS
    };
    if a.status.without(ignore) != b.status.without(ignore) {
        stats.status_mismatches += 1;
    }
}

/// Flags the two paths may legitimately disagree on right at an envelope edge
/// (the fixed-point edges are the float edges rounded outwards).
pub const BOUNDARY_FLAGS: Status = Status::from_bits(
    Status::PRESSURE_OUTSIDE_ENVELOPE.bits() | Status::TEMPERATURE_OUTSIDE_ENVELOPE.bits(),
);

/// Builds both estimators for one float setup (the float one from the exact
/// equivalent of the fixed-point setup).
pub fn estimators<MF, MX>(
    setup: &isochor_core::Setup,
    float_model: MF,
    fixed_model: MX,
) -> (fixed::Estimator<MX>, float::Estimator<f64, MF>)
where
    MF: Compressibility<f64>,
    MX: CompressibilityFx,
{
    let sfx = SetupFx::from_f64(setup).expect("valid setup");
    let fixed_est = fixed::Estimator::new(sfx, fixed_model).expect("fixed estimator");
    let float_est = float::Estimator::new(sfx.to_real(), float_model).expect("float estimator");
    (fixed_est, float_est)
}

/// Pressures (Pa) spanning the envelope: linear steps plus a log sweep that
/// covers the low end, plus the edges.
pub fn pressure_grid(linear_steps: u32, log_steps: u32) -> Vec<f64> {
    let mut v: Vec<f64> = (0..=linear_steps)
        .map(|i| env::PRESSURE_MAX_PA * i as f64 / linear_steps as f64)
        .collect();
    for i in 0..=log_steps {
        // 100 Pa … 1000 bar
        v.push(100.0 * 1e6f64.powf(i as f64 / log_steps as f64));
    }
    v.sort_by(f64::total_cmp);
    v.dedup();
    v
}

/// Temperatures (K) spanning the envelope in `step_k` steps, edges included.
pub fn temperature_grid(step_k: f64) -> Vec<f64> {
    let mut v = Vec::new();
    let mut t = env::TEMPERATURE_MIN_K;
    while t < env::TEMPERATURE_MAX_K {
        v.push(t);
        t += step_k;
    }
    v.push(env::TEMPERATURE_MAX_K);
    v
}

pub mod synth;
pub mod tracking;
