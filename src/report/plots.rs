//! The report's plots as SVG text, drawn with `plotters`' SVG backend. Every axis is labelled
//! with its quantity and unit.
//!
//! Fonts: plotters is built without its font features, so it lays text out with its own crude
//! width estimate and the SVG names a generic `sans-serif` family that the viewer's browser
//! renders. That needs no system font library (fontconfig) and no font file in the build; the
//! cost is approximate text widths, which only affect how much margin a label gets.

use crate::geometry::Axis;
use crate::report::snapshot::{SpeedHistogram, SpeedMap};
use crate::{Error, Result};
use plotters::coord::Shift;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};

/// Colour of each flow axis in every plot.
pub const AXIS_COLOURS: [RGBColor; 3] = [
    RGBColor(31, 119, 180),
    RGBColor(230, 120, 20),
    RGBColor(44, 160, 44),
];

const FONT: &str = "sans-serif";
const SIZE: (u32, u32) = (640, 420);

fn plot_error(e: impl std::fmt::Display) -> Error {
    Error::Internal(format!("drawing a plot failed: {e}"))
}

/// Runs `draw` on a white SVG canvas of `size` and returns the SVG text.
fn svg(
    size: (u32, u32),
    draw: impl FnOnce(&DrawingArea<SVGBackend, Shift>) -> Result<()>,
) -> Result<String> {
    let mut out = String::new();
    {
        let root = SVGBackend::with_string(&mut out, size).into_drawing_area();
        root.fill(&WHITE).map_err(plot_error)?;
        draw(&root)?;
        root.present().map_err(plot_error)?;
    }
    Ok(out)
}

/// Whole decades around the positive values, at least two.
pub fn log_range(values: impl Iterator<Item = f64>) -> Option<(f64, f64)> {
    let (lo, hi) = values
        .filter(|v| v.is_finite() && *v > 0.0)
        .fold((f64::INFINITY, 0.0f64), |(a, b), v| (a.min(v), b.max(v)));
    if hi <= 0.0 {
        return None;
    }
    // At least two decades, so the axis always has labelled ticks.
    let b = hi.log10().ceil().max(lo.log10().floor() + 1.0);
    let a = lo.log10().floor().min(b - 2.0);
    Some((10f64.powf(a), 10f64.powf(b)))
}

/// Tick label of a log axis: "1e3" style, plain for 0.01–1000.
fn decade(v: f64) -> String {
    if (0.01..=1000.0).contains(&v) {
        format!("{v}")
    } else {
        format!("{v:.0e}")
    }
}

/// A porosity range around the values, inside [0, 1].
fn porosity_range(values: impl Iterator<Item = f64>) -> (f64, f64) {
    let (lo, hi) = values.fold((1.0f64, 0.0f64), |(a, b), v| (a.min(v), b.max(v)));
    let pad = ((hi - lo) * 0.15).max(0.05);
    ((lo - pad).max(0.0), (hi + pad).min(1.0))
}

/// Simulated points per axis, Kozeny–Carman values and reference curves for the k–φ plot.
pub struct PermeabilityPorosity {
    /// (porosity, k) of each sample, per flow axis x, y, z.
    pub simulated: [Vec<(f64, f64)>; 3],
    /// (porosity, k_KC) of each sample.
    pub kozeny_carman: Vec<(f64, f64)>,
    /// Labelled curves k(φ).
    pub curves: Vec<(String, Vec<(f64, f64)>)>,
    /// Unit of k, e.g. "mD".
    pub unit: String,
}

/// k against porosity on a log axis, with the samples' Kozeny–Carman values and curves.
pub fn permeability_porosity(d: &PermeabilityPorosity) -> Result<String> {
    let all_k = d.simulated.iter().flatten().chain(&d.kozeny_carman);
    let Some((k0, k1)) = log_range(all_k.clone().map(|p| p.1)) else {
        return Err(Error::Usage("no positive permeability to plot".into()));
    };
    let (p0, p1) = porosity_range(all_k.map(|p| p.0));
    // A decade of headroom keeps the legend clear of the points.
    let k1 = k1 * 10.0;
    svg(SIZE, |root| {
        let mut c = ChartBuilder::on(root)
            .caption("Permeability and porosity", (FONT, 20))
            .margin(14)
            .x_label_area_size(48)
            .y_label_area_size(78)
            .build_cartesian_2d(p0..p1, (k0..k1).log_scale())
            .map_err(plot_error)?;
        c.configure_mesh()
            .label_style((FONT, 12))
            .axis_desc_style((FONT, 13))
            .max_light_lines(1)
            .x_desc("porosity φ (–)")
            .y_label_formatter(&|v| decade(*v))
            .y_desc(format!("permeability k ({})", d.unit))
            .draw()
            .map_err(plot_error)?;
        for (n, (label, pts)) in d.curves.iter().enumerate() {
            let inside: Vec<(f64, f64)> = pts
                .iter()
                .copied()
                .filter(|&(p, k)| (p0..=p1).contains(&p) && (k0..=k1).contains(&k))
                .collect();
            // Darker for larger grains, so the curves can be told apart without colour.
            let shade = 0.3 + 0.6 * n as f64 / d.curves.len().max(1) as f64;
            let style = ShapeStyle::from(&BLACK.mix(shade)).stroke_width(1 + n as u32 % 2);
            c.draw_series(LineSeries::new(inside, style))
                .map_err(plot_error)?
                .label(label.as_str())
                .legend(move |(x, y)| PathElement::new([(x, y), (x + 18, y)], style));
        }
        let kc = d
            .kozeny_carman
            .iter()
            .map(|&p| TriangleMarker::new(p, 6, ShapeStyle::from(&BLACK).stroke_width(1)));
        c.draw_series(kc)
            .map_err(plot_error)?
            .label("Kozeny–Carman φ³/(5 S²) of the sample")
            .legend(|(x, y)| TriangleMarker::new((x + 9, y), 6, BLACK));
        axis_points(&mut c, &d.simulated, "simulated, flow along")?;
        legend(&mut c, SeriesLabelPosition::UpperLeft)
    })
}

/// Bars of k per sample (groups) and flow axis (colours), log scale. Axes with k = 0 get no bar.
pub fn permeability_bars(names: &[String], k: &[[Option<f64>; 3]], unit: &str) -> Result<String> {
    let Some((k0, k1)) = log_range(k.iter().flatten().flatten().copied()) else {
        return Err(Error::Usage("no positive permeability to plot".into()));
    };
    let n = names.len().max(1);
    let width = (SIZE.0).max(160 + 60 * n as u32);
    let vertical = n > 6;
    svg((width, SIZE.1 + if vertical { 60 } else { 0 }), |root| {
        let mut c = ChartBuilder::on(root)
            .caption("Permeability per sample and flow axis", (FONT, 20))
            .margin(14)
            .x_label_area_size(if vertical { 110 } else { 48 })
            .y_label_area_size(78)
            .build_cartesian_2d(-0.5..(n as f64 - 0.5), (k0..k1).log_scale())
            .map_err(plot_error)?;
        c.configure_mesh()
            .label_style((FONT, 12))
            .axis_desc_style((FONT, 13))
            .disable_x_mesh()
            .max_light_lines(1)
            .x_labels(0)
            .x_desc("sample")
            .y_label_formatter(&|v| decade(*v))
            .y_desc(format!("permeability k ({unit})"))
            .draw()
            .map_err(plot_error)?;
        for a in 0..3 {
            if k.iter().all(|ks| ks[a].is_none_or(|v| v <= 0.0)) {
                continue;
            }
            let colour = AXIS_COLOURS[a];
            let bars = k.iter().enumerate().filter_map(|(i, ks)| {
                let v = ks[a].filter(|v| *v > 0.0)?;
                let x = i as f64 - 0.39 + 0.26 * a as f64;
                Some(Rectangle::new([(x, k0), (x + 0.24, v)], colour.filled()))
            });
            c.draw_series(bars)
                .map_err(plot_error)?
                .label(format!("flow along {}", Axis::ALL[a]))
                .legend(move |(x, y)| {
                    Rectangle::new([(x, y - 5), (x + 12, y + 5)], colour.filled())
                });
        }
        legend(&mut c, SeriesLabelPosition::UpperRight)?;
        // Sample names under their groups (plotters' own tick labels fall on round numbers).
        for (i, name) in names.iter().enumerate() {
            let (px, py) = c.backend_coord(&(i as f64, k0));
            let short: String = name.chars().take(18).collect();
            let style = if vertical {
                TextStyle::from((FONT, 12).into_font())
                    .transform(FontTransform::Rotate90)
                    .pos(Pos::new(HPos::Left, VPos::Center))
            } else {
                TextStyle::from((FONT, 12).into_font()).pos(Pos::new(HPos::Center, VPos::Top))
            };
            root.draw(&Text::new(short, (px, py + 6), style))
                .map_err(plot_error)?;
        }
        Ok(())
    })
}

/// Hydraulic tortuosity against porosity, per flow axis.
pub fn tortuosity_porosity(points: &[Vec<(f64, f64)>; 3]) -> Result<String> {
    let all: Vec<(f64, f64)> = points.iter().flatten().copied().collect();
    if all.is_empty() {
        return Err(Error::Usage("no tortuosity to plot".into()));
    }
    let (p0, p1) = porosity_range(all.iter().map(|p| p.0));
    let t1 = all.iter().fold(1.0f64, |m, p| m.max(p.1));
    let t1 = 1.0 + ((t1 - 1.0) * 1.25).max(0.05);
    svg(SIZE, |root| {
        let mut c = ChartBuilder::on(root)
            .caption("Hydraulic tortuosity and porosity", (FONT, 20))
            .margin(14)
            .x_label_area_size(48)
            .y_label_area_size(70)
            .build_cartesian_2d(p0..p1, 1.0..t1)
            .map_err(plot_error)?;
        c.configure_mesh()
            .label_style((FONT, 12))
            .axis_desc_style((FONT, 13))
            .max_light_lines(1)
            .x_desc("porosity φ (–)")
            .y_desc("hydraulic tortuosity Σ|u| / Σu_axis (–)")
            .draw()
            .map_err(plot_error)?;
        axis_points(&mut c, points, "flow along")?;
        legend(&mut c, SeriesLabelPosition::UpperRight)
    })
}

/// One series of dots per flow axis (axis colours), labelled "`label` x" etc.; empty axes are
/// left out of the plot and the legend.
fn axis_points<'a, DB: DrawingBackend + 'a, CT: CoordTranslate<From = (f64, f64)>>(
    c: &mut ChartContext<'a, DB, CT>,
    points: &[Vec<(f64, f64)>; 3],
    label: &str,
) -> Result<()> {
    for (a, pts) in points.iter().enumerate() {
        if pts.is_empty() {
            continue;
        }
        let colour = AXIS_COLOURS[a];
        c.draw_series(pts.iter().map(|&p| Circle::new(p, 5, colour.filled())))
            .map_err(plot_error)?
            .label(format!("{label} {}", Axis::ALL[a]))
            .legend(move |(x, y)| Circle::new((x + 9, y), 5, colour.filled()));
    }
    Ok(())
}

/// The legend box every plot uses.
fn legend<'a, DB: DrawingBackend + 'a, CT: CoordTranslate>(
    c: &mut ChartContext<'a, DB, CT>,
    position: SeriesLabelPosition,
) -> Result<()> {
    c.configure_series_labels()
        .position(position)
        .background_style(WHITE.mix(0.85))
        .border_style(BLACK.mix(0.3))
        .label_font((FONT, 12))
        .draw()
        .map_err(plot_error)
}

/// Distribution of local speeds over the fluid nodes, in % of the nodes per bin.
pub fn speed_histogram(h: &SpeedHistogram, title: &str) -> Result<String> {
    let total = h.counts.iter().sum::<u64>().max(1) as f64;
    let pct: Vec<f64> = h.counts.iter().map(|&c| 100.0 * c as f64 / total).collect();
    let top = pct.iter().fold(0.0f64, |m, &v| m.max(v)) * 1.1;
    let x1 = h.bin_width * h.counts.len() as f64;
    svg((480, 340), |root| {
        let mut c = ChartBuilder::on(root)
            .caption(title, (FONT, 16))
            .margin(12)
            .x_label_area_size(44)
            .y_label_area_size(60)
            .build_cartesian_2d(0.0..x1, 0.0..top.max(1e-9))
            .map_err(plot_error)?;
        c.configure_mesh()
            .label_style((FONT, 12))
            .axis_desc_style((FONT, 13))
            .max_light_lines(1)
            .x_desc("local speed |u| / mean speed ⟨|u|⟩ (–)")
            .y_desc("fluid nodes per bin (%)")
            .draw()
            .map_err(plot_error)?;
        let bars = pct
            .iter()
            .enumerate()
            .filter(|(_, v)| **v > 0.0)
            .map(|(i, &v)| {
                let x = i as f64 * h.bin_width;
                Rectangle::new([(x, 0.0), (x + h.bin_width, v)], AXIS_COLOURS[0].filled())
            });
        c.draw_series(bars).map_err(plot_error)?;
        Ok(())
    })
}

/// Largest side of a drawn map: finer maps are averaged over 2×2 cells (repeatedly), so a page
/// with many samples stays light (at most 4096 rectangles per map).
const DRAWN_MAX_SIDE: usize = 64;

/// The map's levels averaged over f×f cells, with the new width, height and f.
fn coarsen(m: &SpeedMap) -> (Vec<Option<u8>>, usize, usize, usize) {
    let mut f = 1;
    while m.width.div_ceil(f) > DRAWN_MAX_SIDE || m.height.div_ceil(f) > DRAWN_MAX_SIDE {
        f *= 2;
    }
    let (w, h) = (m.width.div_ceil(f), m.height.div_ceil(f));
    let mut out = Vec::with_capacity(w * h);
    for r in 0..h {
        for c in 0..w {
            let (mut sum, mut n) = (0u32, 0u32);
            for rr in r * f..((r + 1) * f).min(m.height) {
                for cc in c * f..((c + 1) * f).min(m.width) {
                    if let Some(v) = m.levels[rr * m.width + cc] {
                        sum += u32::from(v);
                        n += 1;
                    }
                }
            }
            out.push((n > 0).then(|| ((sum + n / 2) / n) as u8));
        }
    }
    (out, w, h, f)
}

/// The mid-plane speed map as coloured blocks (grey: no fluid) with a colour bar.
pub fn speed_map(m: &SpeedMap, voxel_m: Option<f64>, title: &str) -> Result<String> {
    let (unit, per_cell) = match voxel_m {
        Some(dx) => ("µm", m.block as f64 * dx * 1e6),
        None => ("voxels", m.block as f64),
    };
    let (levels, width, height, f) = coarsen(m);
    let per_cell = per_cell * f as f64;
    let (w, h) = (width as f64 * per_cell, height as f64 * per_cell);
    let peak = 255.0 * m.scale;
    svg((560, 460), |root| {
        let (left, right) = root.split_horizontally(470);
        let mut c = ChartBuilder::on(&left)
            .caption(title, (FONT, 16))
            .margin(12)
            .x_label_area_size(44)
            .y_label_area_size(60)
            .build_cartesian_2d(0.0..w, 0.0..h)
            .map_err(plot_error)?;
        c.configure_mesh()
            .label_style((FONT, 12))
            .axis_desc_style((FONT, 13))
            .disable_mesh()
            .x_desc(format!("{} ({unit})", m.horizontal))
            .y_desc(format!("{} ({unit})", m.vertical))
            .draw()
            .map_err(plot_error)?;
        // Runs of equal colour along a row become one rectangle: far fewer SVG elements.
        let colour = |l: Option<u8>| match l {
            None => RGBColor(190, 190, 190),
            Some(v) => ViridisRGB::get_color(f64::from(v / 4) / 63.0),
        };
        let mut rects = Vec::new();
        for r in 0..height {
            let row = &levels[r * width..(r + 1) * width];
            let mut start = 0;
            for col in 1..=width {
                if col == width || colour(row[col]) != colour(row[start]) {
                    let (x0, x1) = (start as f64 * per_cell, col as f64 * per_cell);
                    let (y0, y1) = (r as f64 * per_cell, (r + 1) as f64 * per_cell);
                    rects.push(Rectangle::new(
                        [(x0, y0), (x1, y1)],
                        colour(row[start]).filled(),
                    ));
                    start = col;
                }
            }
        }
        c.draw_series(rects).map_err(plot_error)?;
        let mut bar = ChartBuilder::on(&right)
            .margin_top(40)
            .margin_bottom(56)
            .margin_right(8)
            .y_label_area_size(44)
            .build_cartesian_2d(0.0..1.0, 0.0..peak.max(1e-9))
            .map_err(plot_error)?;
        bar.configure_mesh()
            .label_style((FONT, 12))
            .axis_desc_style((FONT, 13))
            .disable_mesh()
            .disable_x_axis()
            .y_labels(5)
            .y_desc("|u| / ⟨|u|⟩ (–)")
            .draw()
            .map_err(plot_error)?;
        let steps = (0..64).map(|i| {
            let (a, b) = (peak * i as f64 / 64.0, peak * (i + 1) as f64 / 64.0);
            Rectangle::new(
                [(0.0, a), (1.0, b)],
                ViridisRGB::get_color(i as f64 / 63.0).filled(),
            )
        });
        bar.draw_series(steps).map_err(plot_error)?;
        Ok(())
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn log_range_spans_whole_decades() {
        assert_eq!(log_range([0.3, 7.0].into_iter()), Some((0.1, 10.0)));
        assert_eq!(log_range([0.3].into_iter()), Some((0.01, 1.0)));
        assert_eq!(log_range([0.0, -1.0, f64::NAN].into_iter()), None);
    }

    #[test]
    fn coarse_maps_average_fluid_cells_only() {
        let mut levels = vec![Some(10u8); 130 * 3];
        levels[0] = None;
        levels[1] = Some(20);
        let m = SpeedMap {
            horizontal: Axis::Y,
            vertical: Axis::Z,
            plane_index: 0,
            block: 1,
            width: 130,
            height: 3,
            scale: 1.0,
            levels,
        };
        let (out, w, h, f) = coarsen(&m);
        // 130 needs f = 4 to fit 64: ceil(130/4) = 33 columns, ceil(3/4) = 1 row.
        assert_eq!((w, h, f), (33, 1, 4));
        // First block: 4 columns × 3 rows, one solid cell ignored, one 20 and ten 10s: 120/11 → 11.
        assert_eq!(out[0], Some(11));
        assert_eq!(out[32], Some(10));
    }
}
