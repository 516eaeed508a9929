//! Samples, knot placement, least-squares fit and quantisation of a device
//! table (see the parent module for the method).

use super::Domain;
use crate::Error;
use isochor_core::Gas;
use isochor_core::model::device::{BoundaryBuf, TableBuf};

/// One sampled state.
#[derive(Clone, Copy, Debug)]
pub struct Point {
    /// Temperature, K (a multiple of 2^-16 K: exact in fixed point).
    pub t: f64,
    /// Pressure, Pa (an integer: exact in fixed point).
    pub p: f64,
    /// Z_eff from the reference equation.
    pub z: f64,
}

/// Samples on a grid, with the grid kept for finite differences.
#[derive(Clone, Debug)]
pub struct Samples {
    dom: Domain,
    /// Temperatures of the grid.
    pub ts: Vec<f64>,
    /// Pressures of the grid.
    pub ps: Vec<f64>,
    /// Z on the grid, `None` outside the domain.
    pub grid: Vec<Vec<Option<f64>>>,
    /// The defined grid points.
    pub points: Vec<Point>,
}

fn exact_t(t: f64) -> f64 {
    (t * 65_536.0).round() / 65_536.0
}

impl Samples {
    /// A grid of `dt` K × `p_max/np` inside the domain (exact curves).
    pub fn new(dom: &Domain, dt: f64, np: usize) -> Samples {
        let nt = ((dom.t_max - dom.t_min) / dt).ceil().max(4.0) as usize;
        let mut ts: Vec<f64> = (0..=nt)
            .map(|i| exact_t(dom.t_min + (dom.t_max - dom.t_min) * i as f64 / nt as f64))
            .collect();
        // The ends enclose the requested range in fixed point.
        ts[0] = (dom.t_min * 65_536.0).floor() / 65_536.0;
        ts[nt] = (dom.t_max * 65_536.0).ceil() / 65_536.0;
        let top = dom.p_top();
        let ps: Vec<f64> = (0..=np)
            .map(|j| (top * j as f64 / np as f64).round())
            .collect();
        Samples::on(dom, ts, ps)
    }

    /// The check grid: 0.5 K × p_max/1000, offset by half a step from the
    /// nodes of [`Samples::new`] grids.
    pub fn new_offset(dom: &Domain) -> Samples {
        let mut ts = Vec::new();
        let mut t = dom.t_min + 0.25;
        while t < dom.t_max {
            ts.push(exact_t(t));
            t += 0.5;
        }
        let n = 1000;
        let top = dom.p_top();
        let ps: Vec<f64> = (0..n)
            .map(|j| (top * (j as f64 + 0.5) / n as f64).round())
            .collect();
        Samples::on(dom, ts, ps)
    }

    fn on(dom: &Domain, ts: Vec<f64>, ps: Vec<f64>) -> Samples {
        let mut grid = Vec::with_capacity(ts.len());
        let mut points = Vec::new();
        for &t in &ts {
            let lim = dom.p_limit_exact(t);
            let row: Vec<Option<f64>> = ps
                .iter()
                .map(|&p| {
                    if p > lim {
                        return None;
                    }
                    let z = if p == 0.0 {
                        dom.fluid.z_eff_factor()
                    } else {
                        dom.z_ref(p, t)?
                    };
                    points.push(Point { t, p, z });
                    Some(z)
                })
                .collect();
            grid.push(row);
        }
        Samples {
            dom: dom.clone(),
            ts,
            ps,
            grid,
            points,
        }
    }

    /// Z_eff at an arbitrary state of the domain.
    pub fn dom_z(&self, p: f64, t: f64) -> Option<f64> {
        if p > self.dom.p_limit_exact(t) {
            return None;
        }
        if p == 0.0 {
            return Some(self.dom.fluid.z_eff_factor());
        }
        self.dom.z_ref(p, t)
    }

    /// Knot-density estimate along one axis: (max |4th difference|)^¼ per
    /// grid node, smoothed.
    fn density(&self, along_p: bool) -> Vec<f64> {
        let (n_out, n_in) = if along_p {
            (self.ps.len(), self.ts.len())
        } else {
            (self.ts.len(), self.ps.len())
        };
        let at = |i: usize, j: usize| -> Option<f64> {
            if along_p {
                self.grid.get(j)?.get(i).copied().flatten()
            } else {
                self.grid.get(i)?.get(j).copied().flatten()
            }
        };
        let mut d = vec![0.0f64; n_out];
        for (i, di) in d
            .iter_mut()
            .enumerate()
            .take(n_out.saturating_sub(2))
            .skip(2)
        {
            for j in 0..n_in {
                if let (Some(a), Some(b), Some(c), Some(e), Some(f)) = (
                    at(i - 2, j),
                    at(i - 1, j),
                    at(i, j),
                    at(i + 1, j),
                    at(i + 2, j),
                ) {
                    let v = (a - 4.0 * b + 6.0 * c - 4.0 * e + f).abs();
                    *di = di.max(v);
                }
            }
        }
        // Edges take their neighbours' values.
        for i in 0..n_out.min(2) {
            d[i] = d.get(2).copied().unwrap_or(0.0);
        }
        for i in n_out.saturating_sub(2)..n_out {
            d[i] = d.get(n_out.saturating_sub(3)).copied().unwrap_or(0.0);
        }
        let d: Vec<f64> = d.iter().map(|v| v.powf(0.25)).collect();
        let max = d.iter().cloned().fold(0.0, f64::max);
        (0..n_out)
            .map(|i| {
                let lo = i.saturating_sub(2);
                let hi = (i + 3).min(n_out);
                let s: f64 = d[lo..hi].iter().sum::<f64>() / (hi - lo) as f64;
                s + 1e-3 * max + 1e-300
            })
            .collect()
    }
}

/// Knots equidistributing `dens` sampled at `x` into `n` spans.
fn equidistribute(x: &[f64], dens: &[f64], n: usize) -> Vec<f64> {
    let mut cum = vec![0.0];
    for i in 1..x.len() {
        let last = *cum.last().unwrap_or(&0.0);
        cum.push(last + 0.5 * (dens[i] + dens[i - 1]) * (x[i] - x[i - 1]));
    }
    let total = *cum.last().unwrap_or(&1.0);
    let mut knots = Vec::with_capacity(n + 1);
    let mut j = 1;
    for k in 0..=n {
        let target = total * k as f64 / n as f64;
        while j < x.len() - 1 && cum[j] < target {
            j += 1;
        }
        let (c0, c1) = (cum[j - 1], cum[j]);
        let f = if c1 > c0 {
            (target - c0) / (c1 - c0)
        } else {
            0.0
        };
        knots.push(x[j - 1] + f.clamp(0.0, 1.0) * (x[j] - x[j - 1]));
    }
    knots[0] = x[0];
    knots[n] = x[x.len() - 1];
    knots
}

/// Cubic B-spline weights of basis functions k−3…k on clamped `knots` at x.
pub fn basis(knots: &[f64], x: f64) -> (usize, [f64; 4]) {
    let n = knots.len() - 1;
    let k = knots
        .partition_point(|&t| t <= x)
        .saturating_sub(1)
        .min(n - 1);
    let e = |i: isize| knots[i.clamp(0, n as isize) as usize];
    let ki = k as isize;
    let h = e(ki + 1) - e(ki);
    let u = ((x - e(ki)) / h).clamp(0.0, 1.0);
    let fr = |j: isize, d: isize| ((x - e(j)) / (e(j + d) - e(j))).clamp(0.0, 1.0);
    let v = 1.0 - u;
    let (fa, fb) = (fr(ki - 1, 2), fr(ki, 2));
    let n2 = [v * (1.0 - fa), v * fa + u * (1.0 - fb), u * fb];
    let g = [fr(ki - 2, 3), fr(ki - 1, 3), fr(ki, 3)];
    (
        k,
        [
            n2[0] * (1.0 - g[0]),
            n2[0] * g[0] + n2[1] * (1.0 - g[1]),
            n2[1] * g[1] + n2[2] * (1.0 - g[2]),
            n2[2] * g[2],
        ],
    )
}

/// A symmetric positive definite system solved by band-limited Cholesky.
struct Normal {
    n: usize,
    band: usize,
    a: Vec<f64>,
    b: Vec<f64>,
}

impl Normal {
    fn new(n: usize, band: usize) -> Normal {
        Normal {
            n,
            band,
            a: vec![0.0; n * n],
            b: vec![0.0; n],
        }
    }
    fn add_row(&mut self, idx: &[usize], val: &[f64], y: f64, w: f64) {
        for (a, &i) in idx.iter().enumerate() {
            self.b[i] += w * val[a] * y;
            for (c, &j) in idx.iter().enumerate() {
                self.a[i * self.n + j] += w * val[a] * val[c];
            }
        }
    }
    #[allow(clippy::needless_range_loop)]
    fn solve(mut self) -> Result<Vec<f64>, Error> {
        let (n, bw) = (self.n, self.band);
        for j in 0..n {
            let lo = j.saturating_sub(bw);
            let mut d = self.a[j * n + j];
            for k in lo..j {
                d -= self.a[j * n + k] * self.a[j * n + k];
            }
            if d <= 0.0 {
                return Err(Error::Build("singular least-squares system".into()));
            }
            let d = d.sqrt();
            self.a[j * n + j] = d;
            for i in j + 1..(j + bw + 1).min(n) {
                let mut s = self.a[i * n + j];
                for k in i.saturating_sub(bw).max(lo)..j {
                    s -= self.a[i * n + k] * self.a[j * n + k];
                }
                self.a[i * n + j] = s / d;
            }
        }
        let mut y = self.b.clone();
        for i in 0..n {
            let mut s = y[i];
            for k in i.saturating_sub(bw)..i {
                s -= self.a[i * n + k] * y[k];
            }
            y[i] = s / self.a[i * n + i];
        }
        for i in (0..n).rev() {
            let mut s = y[i];
            for k in i + 1..(i + bw + 1).min(n) {
                s -= self.a[k * n + i] * y[k];
            }
            y[i] = s / self.a[i * n + i];
        }
        Ok(y)
    }
}

/// A conservative 1-D fit of `target(T)` on the temperature knots: least
/// squares over `ts` where the target is defined, then lowered so it never
/// exceeds `target·(1 − margin)`. Returns B-spline coefficients.
fn fit_curve(
    kt: &[f64],
    ts: &[f64],
    target: &dyn Fn(f64) -> Option<f64>,
) -> Result<Vec<f64>, Error> {
    let n = kt.len() + 2;
    let mut sys = Normal::new(n, 4);
    let mut pts = Vec::new();
    for &t in ts {
        if let Some(y) = target(t) {
            let (k, w) = basis(kt, t);
            let idx = [k, k + 1, k + 2, k + 3];
            sys.add_row(&idx, &w, y, 1.0 / (y * y).max(1.0));
            pts.push((t, y));
        }
    }
    let scale = pts.iter().map(|p| p.1).fold(1.0, f64::max);
    for i in 0..n.saturating_sub(2) {
        let w = 1e-10 / (scale * scale);
        sys.add_row(&[i, i + 1, i + 2], &[1.0, -2.0, 1.0], 0.0, w);
    }
    let mut c = sys.solve()?;
    let margin = 2e-4;
    let excess = pts
        .iter()
        .map(|&(t, y)| {
            let (k, w) = basis(kt, t);
            (0..4).map(|a| w[a] * c[k + a]).sum::<f64>() - y * (1.0 - margin)
        })
        .fold(0.0, f64::max);
    for v in c.iter_mut() {
        *v -= excess;
    }
    Ok(c)
}

/// Value of a 1-D curve.
pub fn curve_value(kt: &[f64], c: &[f64], t: f64) -> f64 {
    let (k, w) = basis(kt, t);
    (0..4).map(|a| w[a] * c[k + a]).sum()
}

/// One sample with its basis: (T span, T weights, p span, p weights, Z).
type DataRow = (usize, [f64; 4], usize, [f64; 4], f64);

/// Fits a table with `nt` temperature and `np` pressure spans.
pub fn fit_table(
    gas: Gas,
    dom: &Domain,
    samples: &Samples,
    nt: usize,
    np: usize,
) -> Result<TableBuf, Error> {
    // Temperature knots from the curvature along T.
    let kt = equidistribute(&samples.ts, &samples.density(false), nt);
    let kt_raw: Vec<u32> = kt
        .iter()
        .enumerate()
        .map(|(i, &t)| {
            let r = t * 65_536.0;
            (if i == 0 {
                r.floor()
            } else if i == nt {
                r.ceil()
            } else {
                r.round()
            }) as u32
        })
        .collect();
    let kt: Vec<f64> = kt_raw.iter().map(|&r| r as f64 / 65_536.0).collect();

    // Boundary curves of liquefiable gases (raw Pa·16 coefficients).
    let fine: Vec<f64> = {
        let n = ((dom.t_max - dom.t_min) / 0.05).ceil() as usize;
        (0..=n)
            .map(|i| dom.t_min + (dom.t_max - dom.t_min) * i as f64 / n as f64)
            .collect()
    };
    let mut curves = None;
    if let Some(l) = &dom.liquefiable {
        let tc = l.t_sat_max;
        let sat = fit_curve(&kt, &fine, &|t| (t < tc).then(|| dom.p_sat(t)).flatten())?;
        let lim = fit_curve(&kt, &fine, &|t| Some(dom.p_limit_exact(t)))?;
        curves = Some((tc, sat, lim));
    }
    let p_limit = |t: f64| -> f64 {
        match &curves {
            None => dom.p_max,
            Some((tc, sat, lim)) => {
                let mut p = curve_value(&kt, lim, t);
                if t < *tc {
                    p = p.min(curve_value(&kt, sat, t));
                }
                p.min(dom.p_max)
            }
        }
    };
    let p_top = fine.iter().map(|&t| p_limit(t)).fold(0.0, f64::max);

    // Pressure knots from the curvature along p, on [0, p_top].
    let cut = samples
        .ps
        .iter()
        .position(|&p| p >= p_top)
        .unwrap_or(samples.ps.len() - 1)
        .max(4);
    let dens = samples.density(true);
    let mut kp = equidistribute(&samples.ps[..=cut], &dens[..=cut], np);
    kp[np] = p_top;
    let kp_raw: Vec<u32> = kp
        .iter()
        .enumerate()
        .map(|(i, &p)| if i == np { (p * 16.0).ceil() } else { (p * 16.0).round() } as u32)
        .collect();
    let kp: Vec<f64> = kp_raw.iter().map(|&r| r as f64 / 16.0).collect();

    // Least squares of the relative error, with Lawson reweighting.
    let (rows, cols) = (nt + 3, np + 3);
    let data: Vec<DataRow> = samples
        .points
        .iter()
        .filter(|s| s.p <= p_limit(s.t))
        .map(|s| {
            let (it, wt) = basis(&kt, s.t);
            let (ip, wp) = basis(&kp, s.p);
            (it, wt, ip, wp, s.z)
        })
        .collect();
    let mut weights = vec![1.0f64; data.len()];
    let mut coef = Vec::new();
    for round in 0..5 {
        let mut sys = Normal::new(rows * cols, 3 * cols + 3);
        for (d, &w) in data.iter().zip(&weights) {
            let (it, wt, ip, wp, z) = *d;
            let mut idx = [0usize; 16];
            let mut val = [0.0f64; 16];
            for a in 0..4 {
                for b in 0..4 {
                    idx[a * 4 + b] = (it + a) * cols + ip + b;
                    val[a * 4 + b] = wt[a] * wp[b];
                }
            }
            sys.add_row(&idx, &val, z, w / (z * z));
        }
        // Second differences fix coefficients no sample reaches; a lighter
        // first-difference term keeps them from drifting far (the liquid side
        // of liquefiable gases).
        let lambda = 1e-7;
        let lambda1 = 1e-7;
        for i in 0..rows {
            for j in 0..cols {
                if j + 1 < cols {
                    sys.add_row(
                        &[i * cols + j, i * cols + j + 1],
                        &[1.0, -1.0],
                        0.0,
                        lambda1,
                    );
                }
                if i + 1 < rows {
                    sys.add_row(
                        &[i * cols + j, (i + 1) * cols + j],
                        &[1.0, -1.0],
                        0.0,
                        lambda1,
                    );
                }
                if j + 2 < cols {
                    let idx = [i * cols + j, i * cols + j + 1, i * cols + j + 2];
                    sys.add_row(&idx, &[1.0, -2.0, 1.0], 0.0, lambda);
                }
                if i + 2 < rows {
                    let idx = [i * cols + j, (i + 1) * cols + j, (i + 2) * cols + j];
                    sys.add_row(&idx, &[1.0, -2.0, 1.0], 0.0, lambda);
                }
            }
        }
        coef = sys.solve()?;
        if round == 4 {
            break;
        }
        let res: Vec<f64> = data
            .iter()
            .map(|&(it, wt, ip, wp, z)| {
                let mut v = 0.0;
                for a in 0..4 {
                    for b in 0..4 {
                        v += wt[a] * wp[b] * coef[(it + a) * cols + ip + b];
                    }
                }
                ((v - z) / z).abs()
            })
            .collect();
        let rmax = res.iter().cloned().fold(1e-300, f64::max);
        for (w, r) in weights.iter_mut().zip(&res) {
            *w *= (r / rmax).max(1e-2).sqrt();
        }
        let mean = weights.iter().sum::<f64>() / weights.len().max(1) as f64;
        for w in weights.iter_mut() {
            *w /= mean;
        }
    }

    // Coefficients no sample depends on (beyond a liquefiable gas's boundary)
    // change no covered state: keep them inside the sampled Z range.
    let mut supported = vec![false; coef.len()];
    for &(it, _, ip, _, _) in &data {
        for a in 0..4 {
            for b in 0..4 {
                supported[(it + a) * cols + ip + b] = true;
            }
        }
    }
    let (zlo, zhi) = data
        .iter()
        .fold((f64::MAX, f64::MIN), |(a, b), d| (a.min(d.4), b.max(d.4)));
    for (c, &s) in coef.iter_mut().zip(&supported) {
        if !s {
            *c = c.clamp(zlo, zhi);
        }
    }

    // Quantisation: u16 steps of 2^-e above a Q30 offset.
    let (lo, hi) = coef
        .iter()
        .fold((f64::MAX, f64::MIN), |(a, b), &c| (a.min(c), b.max(c)));
    let off_bits = (lo * (1u64 << 30) as f64).floor().max(1.0);
    let off = off_bits / (1u64 << 30) as f64;
    let mut e = 24u8;
    while e > 14 && (hi - off) * (1u64 << e) as f64 > 65_535.0 {
        e -= 1;
    }
    if (hi - off) * (1u64 << e) as f64 > 65_535.0 {
        return Err(Error::Build(format!(
            "{gas}: Z range {lo}..{hi} too wide for 16-bit steps ({nt}x{np})"
        )));
    }
    let step = (1u64 << e) as f64;
    let coefs: Vec<u16> = coef
        .iter()
        .map(|&c| ((c - off) * step).round().clamp(0.0, 65_535.0) as u16)
        .collect();

    let raw_curve = |c: &[f64]| -> Result<
        heapless::Vec<u32, { isochor_core::model::device::MAX_CURVE }>,
        Error,
    > {
        heapless::Vec::from_slice(
            &c.iter()
                .map(|&p| (p * 16.0).floor().clamp(0.0, u32::MAX as f64) as u32)
                .collect::<Vec<u32>>(),
        )
        .map_err(|_| Error::Build("boundary curve too long".into()))
    };
    let boundary = match &curves {
        None => None,
        Some((tc, sat, lim)) => Some(BoundaryBuf {
            critical_temperature: (tc * 65_536.0).floor() as u32,
            saturation_pressure: raw_curve(sat)?,
            limit_pressure: raw_curve(lim)?,
        }),
    };
    let too_big = |_| Error::Build(format!("{gas}: table too large"));
    // Z floor: a little below the smallest Z sampled in the covered domain
    // (the device clamps its answers there; states outside are clamped onto
    // the domain first). It sets the estimator's density resolution.
    let z_floor = 0.98 * zlo;
    Ok(TableBuf {
        gas,
        z_floor: (z_floor * (1u64 << 30) as f64).floor() as u32,
        temperature_knots: heapless::Vec::from_slice(&kt_raw).map_err(too_big)?,
        pressure_knots: heapless::Vec::from_slice(&kp_raw).map_err(too_big)?,
        z_offset: off_bits as u32,
        z_step_exp: e,
        coefs: heapless::Vec::from_slice(&coefs).map_err(too_big)?,
        boundary,
    })
}
