//! The gas model of a prepared configuration: its table read in place, one
//! prepared span per axis, and the settled-pressure curve of the setup.

use super::{ModelScalars, Prepared, PreparedBytes, array, curve_of};
use crate::curve::Curve;
use crate::model::device::fixed::{self, Axes};
use crate::model::device::{Boundary, Table};
use crate::model::{CompressibilityFx, IsothermFx, ZPointFx};
use crate::{Error, Gas, Status, fx};

/// The table of a prepared configuration.
pub(super) fn table<B: AsRef<[u8]>>(p: &Prepared<B>) -> Table<'_> {
    view(p.bytes.as_ref(), p.arrays, &p.scalars.model)
}

fn view<'a>(b: &'a [u8], arrays: usize, m: &ModelScalars) -> Table<'a> {
    let u32s = |s| array::<u32>(b, arrays, s).unwrap_or(&[]);
    Table {
        gas: m.gas,
        temperature_knots: u32s(m.temperature_knots),
        pressure_knots: u32s(m.pressure_knots),
        z_offset: m.z_offset,
        z_step_exp: m.z_step_exp,
        z_floor: m.z_floor,
        coefs: array::<u16>(b, arrays, m.coefs).unwrap_or(&[]),
        boundary: m.boundary.map(|bd| Boundary {
            critical_temperature: bd.critical_temperature,
            saturation_pressure: u32s(bd.saturation_pressure),
            limit_pressure: u32s(bd.limit_pressure),
        }),
    }
}

/// The gas model of a prepared configuration (both bytes handles share the
/// configuration's bytes `B`: a `&'static [u8]` on a device, a shared
/// buffer on a host).
#[derive(Clone, Debug)]
pub struct PreparedModel<B> {
    bytes: B,
    arrays: usize,
    scalars: ModelScalars,
    axes: Axes,
    /// The table's and the settled-pressure curve's views over bytes that
    /// last ([`PreparedBytes::lasting`]), derived once.
    lasting: Option<(Table<'static>, Option<Curve<'static>>)>,
}

impl<B: PreparedBytes + Clone> PreparedModel<B> {
    /// The model of a (validated) prepared configuration.
    pub fn new(p: &Prepared<B>) -> Result<PreparedModel<B>, Error> {
        let axes = Axes::prepare(&table(p))?;
        let scalars = p.scalars.model;
        let lasting = p.bytes.lasting().map(|b| {
            (
                view(b, p.arrays, &scalars),
                settle_of(b, p.arrays, &scalars),
            )
        });
        Ok(PreparedModel {
            bytes: p.bytes.clone(),
            arrays: p.arrays,
            scalars,
            axes,
            lasting,
        })
    }
}

/// The settled-pressure curve of `m` in the arrays at `arrays` in `b`.
fn settle_of<'a>(b: &'a [u8], arrays: usize, m: &ModelScalars) -> Option<Curve<'a>> {
    Some(curve_of(b, arrays, &m.settle?))
}

impl<B: AsRef<[u8]>> PreparedModel<B> {
    /// The table, read in place.
    pub fn table(&self) -> Table<'_> {
        match &self.lasting {
            Some((t, _)) => *t,
            None => view(self.bytes.as_ref(), self.arrays, &self.scalars),
        }
    }

    /// `f` of the table (the kept view, or one derived for the call).
    fn with_table<R>(&self, f: impl FnOnce(&Table<'_>) -> R) -> R {
        match &self.lasting {
            Some((t, _)) => f(t),
            None => f(&view(self.bytes.as_ref(), self.arrays, &self.scalars)),
        }
    }

    /// The settled-pressure curve, if the setup has one.
    pub fn settle_curve(&self) -> Option<Curve<'_>> {
        match &self.lasting {
            Some((_, c)) => *c,
            None => settle_of(self.bytes.as_ref(), self.arrays, &self.scalars),
        }
    }
}

impl<B: AsRef<[u8]>> CompressibilityFx for PreparedModel<B> {
    fn gas(&self) -> Gas {
        self.scalars.gas
    }
    fn z_fx(&self, p: fx::Pressure, t: fx::Temperature) -> ZPointFx {
        self.with_table(|tb| fixed::evaluate(tb, &self.axes, p.to_bits(), t.to_bits()))
    }
    fn z_value_fx(&self, p: fx::Pressure, t: fx::Temperature) -> (fx::Compressibility, Status) {
        let (z, flags) =
            self.with_table(|tb| fixed::evaluate_z(tb, &self.axes, p.to_bits(), t.to_bits()));
        (fx::Compressibility::from_bits(z), flags)
    }
    fn settle_fx(&self, tau: u32) -> Option<u32> {
        let c = self.settle_curve()?;
        let x = (tau >> 1) as i32;
        let (lo, hi) = c.domain()?;
        if x < lo || x > hi {
            return None;
        }
        Some(c.eval(x).clamp(0, u32::MAX as i64) as u32)
    }
    fn z_floor(&self) -> fx::Compressibility {
        fx::Compressibility::from_bits(self.scalars.z_floor)
    }
    fn pressure_knots_fx(&self) -> &[u32] {
        if let Some((t, _)) = &self.lasting {
            return t.pressure_knots;
        }
        array::<u32>(
            self.bytes.as_ref(),
            self.arrays,
            self.scalars.pressure_knots,
        )
        .unwrap_or(&[])
    }
    fn isotherm_fx(&self, t: fx::Temperature) -> IsothermFx {
        self.with_table(|tb| fixed::isotherm(tb, &self.axes, t.to_bits()))
    }
    fn isotherm_z_fx(&self, iso: &IsothermFx, p: fx::Pressure) -> ZPointFx {
        self.with_table(|tb| fixed::isotherm_z(tb, &self.axes, iso, p.to_bits()))
    }
}
