//! Plots of a run (plotters), PNG and SVG, five panels on one time axis:
//! pressure, temperatures, content (true, gauge and its k = 2 band), the
//! gauge's content error against its uncertainty, and the alarms.
//!
//! Text is drawn with DejaVu Sans compiled into the binary
//! (`host-sim/tank/data/fonts/`, Bitstream Vera licence), so the plots need no
//! system font.

use super::run::RunResult;
use crate::Error;
use isochor_core::Status;
use isochor_core::alarm::AlarmKind;
use isochor_core::constants::{BAR_PA, ZERO_CELSIUS_K};
use plotters::coord::types::RangedCoordf64;
use plotters::coord::{CoordTranslate, Shift};
use plotters::prelude::*;
use std::path::{Path, PathBuf};
use std::sync::Once;

/// DejaVu Sans (Bitstream Vera licence, `host-sim/tank/data/fonts/LICENSE-DejaVu.txt`).
const FONT: &[u8] = include_bytes!("../data/fonts/DejaVuSans.ttf");
/// Most points drawn per line.
const MAX_POINTS: usize = 4000;
const FAMILY: &str = "sans-serif";
/// Width of the left label area of every panel (the same, so the time axes
/// line up).
const LABEL_AREA: u32 = 190;
/// The gauge's colour.
const ORANGE: RGBColor = RGBColor(230, 120, 0);

fn register_font() -> Result<(), Error> {
    static ONCE: Once = Once::new();
    let mut result = Ok(());
    ONCE.call_once(|| {
        if plotters::style::register_font(FAMILY, FontStyle::Normal, FONT).is_err() {
            result = Err(Error::Output(
                "the committed plot font is unreadable".into(),
            ));
        }
    });
    result
}

/// Writes `<scenario>.png` and `<scenario>.svg` into `dir`.
pub fn write_plots(dir: &Path, r: &RunResult) -> Result<Vec<PathBuf>, Error> {
    register_font()?;
    let base = &r.summary.scenario;
    let png = dir.join(format!("{base}.png"));
    let svg = dir.join(format!("{base}.svg"));
    let size = (1500, 1700);
    {
        let root = BitMapBackend::new(&png, size).into_drawing_area();
        draw(&root, r)?;
        root.present().map_err(out)?;
    }
    {
        let root = SVGBackend::new(&svg, size).into_drawing_area();
        draw(&root, r)?;
        root.present().map_err(out)?;
    }
    Ok(vec![png, svg])
}

fn out<E: std::fmt::Display>(e: E) -> Error {
    Error::Output(format!("plot: {e}"))
}

/// The time axis: days for runs over three days, else hours.
fn time_axis(duration_s: f64) -> (f64, &'static str) {
    if duration_s > 3.0 * 86_400.0 {
        (86_400.0, "time, days")
    } else if duration_s > 3.0 * 3600.0 {
        (3600.0, "time, hours")
    } else {
        (60.0, "time, minutes")
    }
}

fn range(vals: impl Iterator<Item = f64>, pad: f64, min_span: f64) -> (f64, f64) {
    let (mut lo, mut hi) = (f64::INFINITY, f64::NEG_INFINITY);
    for v in vals.filter(|v| v.is_finite()) {
        lo = lo.min(v);
        hi = hi.max(v);
    }
    if !lo.is_finite() {
        return (0.0, 1.0);
    }
    let mid = 0.5 * (lo + hi);
    let span = (hi - lo).max(min_span);
    (mid - span * (0.5 + pad), mid + span * (0.5 + pad))
}

/// The fonts of every panel.
struct Fonts {
    label: FontDesc<'static>,
    axis: FontDesc<'static>,
    caption: FontDesc<'static>,
}

impl Fonts {
    fn new() -> Self {
        Fonts {
            label: (FAMILY, 18).into_font(),
            axis: (FAMILY, 20).into_font(),
            caption: (FAMILY, 22).into_font(),
        }
    }
}

/// One panel on the shared time axis (`x`: its end and description), its
/// mesh drawn.
fn panel<'a, DB: DrawingBackend>(
    area: &'a DrawingArea<DB, Shift>,
    title: &str,
    y_desc: &str,
    (x_end, x_desc): (f64, &str),
    y: std::ops::Range<f64>,
    fonts: &Fonts,
) -> Result<ChartContext<'a, DB, Cartesian2d<RangedCoordf64, RangedCoordf64>>, Error>
where
    DB::ErrorType: 'static,
{
    let mut c = ChartBuilder::on(area)
        .caption(title, fonts.caption.clone())
        .margin(12)
        .x_label_area_size(45)
        .y_label_area_size(LABEL_AREA)
        .build_cartesian_2d(0.0..x_end, y)
        .map_err(out)?;
    c.configure_mesh()
        .x_desc(x_desc)
        .y_desc(y_desc)
        .label_style(fonts.label.clone())
        .axis_desc_style(fonts.axis.clone())
        .draw()
        .map_err(out)?;
    Ok(c)
}

fn draw<DB: DrawingBackend>(root: &DrawingArea<DB, Shift>, r: &RunResult) -> Result<(), Error>
where
    DB::ErrorType: 'static,
{
    root.fill(&WHITE).map_err(out)?;
    let s = &r.summary;
    let title = format!(
        "{} — {} ({} core, {} model)",
        s.scenario, s.gas, s.backend, s.model
    );
    let root = root.titled(&title, (FAMILY, 30).into_font()).map_err(out)?;
    let stride = r.trace.len().div_ceil(MAX_POINTS).max(1);
    let pts: Vec<_> = r.trace.iter().step_by(stride).collect();
    let (unit, xdesc) = time_axis(s.duration_s);
    let x_end = s.duration_s / unit;
    let x = |t: f64| t / unit;
    let panels = root.split_by_breakpoints([] as [i32; 0], [360, 720, 1030, 1340]);
    let fonts = Fonts::new();
    let label = fonts.label.clone();
    let line = |c: RGBColor| {
        move |(x, y): (i32, i32)| PathElement::new(vec![(x, y), (x + 24, y)], c.stroke_width(3))
    };

    // 1. Pressure.
    {
        let (lo, hi) = range(
            pts.iter()
                .flat_map(|p| [Some(p.pressure_true_pa), p.pressure_read_pa])
                .flatten()
                .map(|v| v / BAR_PA),
            0.08,
            1.0,
        );
        let mut c = panel(
            &panels[0],
            "Pressure",
            "bar (absolute)",
            (x_end, xdesc),
            lo..hi,
            &fonts,
        )?;
        c.draw_series(LineSeries::new(
            pts.iter()
                .filter_map(|p| p.pressure_read_pa.map(|v| (x(p.t_s), v / BAR_PA))),
            ORANGE.stroke_width(1),
        ))
        .map_err(out)?
        .label("sensor reading (abs)")
        .legend(line(ORANGE));
        c.draw_series(LineSeries::new(
            pts.iter().map(|p| (x(p.t_s), p.pressure_true_pa / BAR_PA)),
            BLUE.stroke_width(2),
        ))
        .map_err(out)?
        .label("true")
        .legend(line(BLUE));
        legend(&mut c, &label)?;
    }
    // 2. Temperatures.
    {
        let c_of = |k: f64| k - ZERO_CELSIUS_K;
        let (lo, hi) = range(
            pts.iter()
                .flat_map(|p| {
                    [
                        Some(p.gas_temperature_k),
                        Some(p.wall_temperature_k),
                        Some(p.ambient_temperature_k),
                        p.temperature_read_k,
                    ]
                })
                .flatten()
                .map(c_of),
            0.08,
            2.0,
        );
        let mut c = panel(
            &panels[1],
            "Temperature",
            "°C",
            (x_end, xdesc),
            lo..hi,
            &fonts,
        )?;
        let series: [Curve; 4] = [
            (
                "ambient",
                GREEN,
                1,
                Box::new(|p| Some(p.ambient_temperature_k)),
            ),
            ("wall", MAGENTA, 2, Box::new(|p| Some(p.wall_temperature_k))),
            (
                "sensor reading",
                ORANGE,
                1,
                Box::new(|p| p.temperature_read_k),
            ),
            (
                "gas (true)",
                BLUE,
                2,
                Box::new(|p| Some(p.gas_temperature_k)),
            ),
        ];
        for (name, color, w, f) in series {
            c.draw_series(LineSeries::new(
                pts.iter().filter_map(|p| f(p).map(|v| (x(p.t_s), c_of(v)))),
                color.stroke_width(w),
            ))
            .map_err(out)?
            .label(name)
            .legend(line(color));
        }
        legend(&mut c, &label)?;
    }
    // 3. Content.
    {
        let (lo, hi) = range(
            pts.iter()
                .flat_map(|p| {
                    [
                        Some(p.mass_true_kg),
                        p.mass_gauge_kg.zip(p.u_mass_kg).map(|(m, u)| m + u),
                        p.mass_gauge_kg.zip(p.u_mass_kg).map(|(m, u)| m - u),
                    ]
                })
                .flatten(),
            0.08,
            1e-3,
        );
        let mut c = panel(
            &panels[2],
            "Content",
            "kg",
            (x_end, xdesc),
            lo.max(0.0)..hi,
            &fonts,
        )?;
        let band = RGBColor(255, 165, 0).mix(0.3);
        for seg in segments(&pts, |p| p.mass_gauge_kg.zip(p.u_mass_kg)) {
            let mut poly: Vec<(f64, f64)> = seg.iter().map(|&(t, (m, u))| (x(t), m + u)).collect();
            poly.extend(seg.iter().rev().map(|&(t, (m, u))| (x(t), m - u)));
            c.draw_series(std::iter::once(Polygon::new(poly, band.filled())))
                .map_err(out)?;
        }
        c.draw_series(std::iter::once(Rectangle::new(
            [(0.0, lo), (0.0, lo)],
            band.filled(),
        )))
        .map_err(out)?
        .label("gauge ± U (k = 2)")
        .legend(move |(x, y)| Rectangle::new([(x, y - 6), (x + 24, y + 6)], band.filled()));
        c.draw_series(LineSeries::new(
            pts.iter()
                .filter_map(|p| p.mass_gauge_kg.map(|m| (x(p.t_s), m))),
            ORANGE.stroke_width(1),
        ))
        .map_err(out)?
        .label("gauge")
        .legend(line(ORANGE));
        c.draw_series(LineSeries::new(
            pts.iter().map(|p| (x(p.t_s), p.mass_true_kg)),
            BLUE.stroke_width(2),
        ))
        .map_err(out)?
        .label("true")
        .legend(line(BLUE));
        legend(&mut c, &label)?;
    }
    // 4. Content error against the uncertainty.
    {
        // Above the reserve only (as the scores): near empty, full-scale
        // errors make any relative figure large.
        let reserve = 0.05 * s.rated_mass_true_kg;
        let rel = |p: &super::run::TracePoint| {
            p.mass_gauge_kg
                .zip(p.u_mass_kg)
                .filter(|_| p.mass_true_kg > reserve)
                .map(|(m, u)| {
                    (
                        100.0 * (m - p.mass_true_kg) / p.mass_true_kg,
                        100.0 * u / p.mass_true_kg,
                    )
                })
        };
        let settled = |p: &&&super::run::TracePoint| {
            !Status::from_bits(p.status).intersects(Status::NOT_SETTLED)
        };
        let (lo, hi) = range(
            pts.iter()
                .filter(settled)
                .filter_map(|p| rel(p))
                .flat_map(|(e, u)| [e, u, -u]),
            0.1,
            0.01,
        );
        let mut c = panel(
            &panels[3],
            "Content error: gauge − true, % of the true content (settled, above the 5 % reserve)",
            "% of content",
            (x_end, xdesc),
            lo..hi,
            &fonts,
        )?;
        let band = RGBColor(160, 160, 160).mix(0.35);
        for seg in segments(&pts, rel) {
            let mut poly: Vec<(f64, f64)> = seg.iter().map(|&(t, (_, u))| (x(t), u)).collect();
            poly.extend(seg.iter().rev().map(|&(t, (_, u))| (x(t), -u)));
            c.draw_series(std::iter::once(Polygon::new(poly, band.filled())))
                .map_err(out)?;
        }
        c.draw_series(std::iter::once(Rectangle::new(
            [(0.0, lo), (0.0, lo)],
            band.filled(),
        )))
        .map_err(out)?
        .label("± U (k = 2), the gauge's claim")
        .legend(move |(x, y)| Rectangle::new([(x, y - 6), (x + 24, y + 6)], band.filled()));
        c.draw_series(LineSeries::new(
            pts.iter()
                .filter_map(|p| rel(p).map(|(e, _)| (x(p.t_s), e.clamp(lo, hi)))),
            RED.stroke_width(1),
        ))
        .map_err(out)?
        .label("error")
        .legend(line(RED));
        if let Some(ls) = s.leak_started_s {
            c.draw_series(std::iter::once(PathElement::new(
                vec![(x(ls), lo), (x(ls), hi)],
                BLACK.stroke_width(1),
            )))
            .map_err(out)?
            .label("leak begins")
            .legend(line(BLACK));
        }
        legend(&mut c, &label)?;
    }
    // 5. Alarms.
    {
        let kinds = AlarmKind::ALL;
        let n = kinds.len() as i32;
        let mut c = ChartBuilder::on(&panels[4])
            .caption("Alarms (active)", fonts.caption.clone())
            .margin(12)
            .x_label_area_size(45)
            .y_label_area_size(LABEL_AREA)
            .build_cartesian_2d(0.0..x_end, (0..n).into_segmented())
            .map_err(out)?;
        c.configure_mesh()
            .x_desc(xdesc)
            .label_style(label.clone())
            .axis_desc_style(fonts.axis.clone())
            .y_labels(kinds.len())
            .y_label_formatter(&|v| match v {
                SegmentValue::CenterOf(i) | SegmentValue::Exact(i) => kinds
                    .get(*i as usize)
                    .map(|k| k.name().to_string())
                    .unwrap_or_default(),
                SegmentValue::Last => String::new(),
            })
            .disable_y_mesh()
            .draw()
            .map_err(out)?;
        let colors = [
            RGBColor(120, 120, 120),
            RED,
            RGBColor(200, 120, 0),
            RGBColor(150, 0, 150),
            RGBColor(220, 60, 60),
            BLUE,
            BLACK,
        ];
        for (i, k) in kinds.iter().enumerate() {
            let mut start: Option<f64> = None;
            let mut bars = Vec::new();
            for p in &r.trace {
                let on = Status::from_bits(p.status).contains(k.status());
                match (on, start) {
                    (true, None) => start = Some(p.t_s),
                    (false, Some(t0)) => {
                        bars.push((t0, p.t_s));
                        start = None;
                    }
                    _ => {}
                }
            }
            if let Some(t0) = start {
                bars.push((t0, s.duration_s));
            }
            let color = colors.get(i).copied().unwrap_or(BLACK);
            let min_w = x_end / 400.0;
            c.draw_series(bars.into_iter().map(|(a, b)| {
                let (xa, xb) = (x(a), x(b).max(x(a) + min_w));
                Rectangle::new(
                    [
                        (xa, SegmentValue::Exact(i as i32)),
                        (xb, SegmentValue::Exact(i as i32 + 1)),
                    ],
                    color.mix(0.8).filled(),
                )
            }))
            .map_err(out)?;
        }
    }
    Ok(())
}

/// A curve of the temperature panel: name, colour, width, value.
type Curve = (
    &'static str,
    RGBColor,
    u32,
    Box<dyn Fn(&super::run::TracePoint) -> Option<f64>>,
);

/// Draws the legend box of a panel.
fn legend<'a, DB, CT>(c: &mut ChartContext<'a, DB, CT>, font: &FontDesc<'_>) -> Result<(), Error>
where
    DB: DrawingBackend + 'a,
    DB::ErrorType: 'static,
    CT: CoordTranslate,
{
    c.configure_series_labels()
        .label_font(font.clone())
        .background_style(WHITE.mix(0.85))
        .border_style(BLACK)
        .position(SeriesLabelPosition::UpperRight)
        .draw()
        .map_err(out)
}

/// Runs of consecutive points where `f` has a value.
fn segments<T: Copy>(
    pts: &[&super::run::TracePoint],
    f: impl Fn(&super::run::TracePoint) -> Option<T>,
) -> Vec<Vec<(f64, T)>> {
    let mut out = Vec::new();
    let mut cur = Vec::new();
    for p in pts {
        match f(p) {
            Some(v) => cur.push((p.t_s, v)),
            None => {
                if cur.len() > 1 {
                    out.push(std::mem::take(&mut cur));
                } else {
                    cur.clear();
                }
            }
        }
    }
    if cur.len() > 1 {
        out.push(cur);
    }
    out
}
