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

/// `v` rounded to `digits` significant figures, printed in the shortest form that reads back as
/// that: "20", "0.5", "1.05", never "20.0" or "0.30000000000000004".
pub fn significant(v: f64, digits: usize) -> String {
    if v == 0.0 || !v.is_finite() {
        return if v.is_finite() {
            "0".into()
        } else {
            "–".into()
        };
    }
    let rounded: f64 = format!("{v:.*e}", digits.saturating_sub(1))
        .parse()
        .unwrap_or(v);
    format!("{rounded}")
}

/// Tick label of a linear axis: plain and without trailing zeros ("0", "20", "1.05"); powers of
/// ten outside 0.001–10⁶, which no axis of the report reaches in practice.
pub fn tick(v: f64) -> String {
    let a = v.abs();
    if a != 0.0 && !(1e-3..1e6).contains(&a) {
        return power_of_ten(v);
    }
    significant(v, 6)
}

/// Digits of `n` as superscripts, with a superscript minus: 10⁻³.
fn superscript(n: i32) -> String {
    let digits = ['⁰', '¹', '²', '³', '⁴', '⁵', '⁶', '⁷', '⁸', '⁹'];
    let mut out: String = n
        .unsigned_abs()
        .to_string()
        .bytes()
        .map(|b| digits[usize::from(b - b'0')])
        .collect();
    if n < 0 {
        out.insert(0, '⁻');
    }
    out
}

/// "10⁴", or "2.5×10⁴" off the decades.
fn power_of_ten(v: f64) -> String {
    let e = v.abs().log10().floor() as i32;
    let m: f64 = significant(v / 10f64.powi(e), 3).parse().unwrap_or(1.0);
    // Rounding may carry the mantissa to 10.
    let (m, e) = if m.abs() >= 10.0 {
        (m / 10.0, e + 1)
    } else {
        (m, e)
    };
    if m == 1.0 {
        format!("10{}", superscript(e))
    } else {
        format!("{}×10{}", significant(m, 3), superscript(e))
    }
}

/// Tick labels of a log axis spanning `lo`–`hi`: all plain ("0.01" … "1000") when every
/// decade of the axis lies in 0.01–1000, else all powers of ten ("10³", "10⁴"), so one axis
/// never mixes "1000" with "1e4".
pub fn decade_labels(lo: f64, hi: f64) -> impl Fn(&f64) -> String {
    let plain = lo >= 0.01 * (1.0 - 1e-9) && hi <= 1000.0 * (1.0 + 1e-9);
    move |v: &f64| {
        if plain {
            significant(*v, 6)
        } else {
            power_of_ten(*v)
        }
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
    /// Each sample's simulated points, for the names beside them.
    pub samples: Vec<Named>,
}

/// A sample's name and its points in a scatter plot, which the name is drawn beside.
pub struct Named {
    pub name: String,
    pub points: Vec<(f64, f64)>,
}

const KC_LABEL: &str = "Kozeny–Carman φ³/(5 S²) of the sample";

/// k against porosity on a log axis, with the samples' Kozeny–Carman values and curves.
pub fn permeability_porosity(d: &PermeabilityPorosity) -> Result<String> {
    let all_k = d.simulated.iter().flatten().chain(&d.kozeny_carman);
    let Some((k0, k1)) = log_range(all_k.clone().map(|p| p.1)) else {
        return Err(Error::Usage("no positive permeability to plot".into()));
    };
    let (p0, p1) = porosity_range(all_k.map(|p| p.0));
    // A decade of headroom keeps the legend clear of the points.
    let k1 = k1 * 10.0;
    let key = SampleKey::new(&d.samples, SIZE.0);
    svg((SIZE.0, SIZE.1 + key.height()), |root| {
        let (top, _) = root.split_vertically(SIZE.1);
        let mut c = ChartBuilder::on(&top)
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
            .x_label_formatter(&|v| tick(*v))
            .y_label_formatter(&decade_labels(k0, k1))
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
            .label(KC_LABEL)
            .legend(|(x, y)| TriangleMarker::new((x + 9, y), 6, BLACK));
        axis_points(&mut c, &d.simulated, "simulated, flow along")?;
        legend(&mut c, SeriesLabelPosition::UpperLeft)?;
        let mut legend_labels: Vec<&str> = d.curves.iter().map(|(l, _)| l.as_str()).collect();
        legend_labels.push(KC_LABEL);
        let axes = d.simulated.iter().filter(|p| !p.is_empty()).count();
        let markers: Vec<(f64, f64)> = d
            .simulated
            .iter()
            .flatten()
            .chain(&d.kozeny_carman)
            .copied()
            .collect();
        let area = c.plotting_area().get_pixel_range();
        let px = |p: (f64, f64)| c.backend_coord(&p);
        let legend_box = legend_box(
            &area,
            SeriesLabelPosition::UpperLeft,
            &legend_labels,
            axes,
            "simulated, flow along x",
        );
        key.draw(root, &area, &px, &markers, legend_box, SIZE.1)
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
            .y_label_formatter(&decade_labels(k0, k1))
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
pub fn tortuosity_porosity(points: &[Vec<(f64, f64)>; 3], samples: &[Named]) -> Result<String> {
    let all: Vec<(f64, f64)> = points.iter().flatten().copied().collect();
    if all.is_empty() {
        return Err(Error::Usage("no tortuosity to plot".into()));
    }
    let (p0, p1) = porosity_range(all.iter().map(|p| p.0));
    let t1 = all.iter().fold(1.0f64, |m, p| m.max(p.1));
    let t1 = 1.0 + ((t1 - 1.0) * 1.25).max(0.05);
    let key = SampleKey::new(samples, SIZE.0);
    svg((SIZE.0, SIZE.1 + key.height()), |root| {
        let (top, _) = root.split_vertically(SIZE.1);
        let mut c = ChartBuilder::on(&top)
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
            .x_label_formatter(&|v| tick(*v))
            .y_label_formatter(&|v| tick(*v))
            .y_desc("hydraulic tortuosity Σ|u| / Σu_axis (–)")
            .draw()
            .map_err(plot_error)?;
        axis_points(&mut c, points, "flow along")?;
        legend(&mut c, SeriesLabelPosition::UpperRight)?;
        let axes = points.iter().filter(|p| !p.is_empty()).count();
        let area = c.plotting_area().get_pixel_range();
        let px = |p: (f64, f64)| c.backend_coord(&p);
        let legend_box = legend_box(
            &area,
            SeriesLabelPosition::UpperRight,
            &[],
            axes,
            "flow along x",
        );
        key.draw(root, &area, &px, &all, legend_box, SIZE.1)
    })
}

/// A pixel rectangle: left, top, right, bottom.
type PixelBox = (i32, i32, i32, i32);

fn overlap(a: PixelBox, b: PixelBox) -> i64 {
    let w = (a.2.min(b.2) - a.0.max(b.0)).max(0);
    let h = (a.3.min(b.3) - a.1.max(b.1)).max(0);
    i64::from(w) * i64::from(h)
}

/// Distance from a point to a box (0 inside it), pixels.
fn box_distance(b: PixelBox, (x, y): (i32, i32)) -> f64 {
    let dx = (b.0 - x).max(x - b.2).max(0);
    let dy = (b.1 - y).max(y - b.3).max(0);
    f64::from(dx).hypot(f64::from(dy))
}

/// Size of the sample names beside the points (plotters units; the SVG gets size / 1.24 px).
const NAME_FONT: f64 = 12.0;
/// Samples whose names fit beside their points; more get numbers and a key under the plot.
const MAX_NAMED: usize = 8;
/// Longest name drawn beside a point, in characters; a longer one switches to numbers too.
const MAX_NAME_CHARS: usize = 20;
/// Points closer than this (pixels, each direction) are one place: their names share a label.
const SAME_PLACE: i32 = 4;
/// Radius of the scatter markers, pixels.
const MARKER: i32 = 5;
/// Row height and column width of the numbered key under a plot, pixels.
const KEY_ROW: u32 = 15;
const KEY_COLUMN: u32 = 200;

/// Rough width of `text` in the SVG at plotters size `size` (a browser's sans-serif averages
/// about 0.55 em per character; a little more keeps labels apart). Our own estimate: plotters
/// without its font features has none better.
fn text_width(text: &str, size: f64) -> i32 {
    (text.chars().count() as f64 * size / 1.24 * 0.6).ceil() as i32
}

/// Where plotters puts the legend box ([`legend`]): measured from its SVG for this font size,
/// about 15 px a row plus 15, and 36 px plus 6.6 px per character of the longest label.
fn legend_box(
    area: &(std::ops::Range<i32>, std::ops::Range<i32>),
    position: SeriesLabelPosition,
    labels: &[&str],
    axis_rows: usize,
    axis_label: &str,
) -> PixelBox {
    let rows = (labels.len() + axis_rows) as i32;
    let chars = labels
        .iter()
        .chain([&axis_label])
        .map(|l| l.chars().count())
        .max()
        .unwrap_or(0);
    let (w, h) = (36 + (6.6 * chars as f64) as i32, 15 * rows + 15);
    let top = area.1.start + 5;
    match position {
        SeriesLabelPosition::UpperRight => (area.0.end - 5 - w, top, area.0.end - 5, top + h),
        _ => (area.0.start + 5, top, area.0.start + 5 + w, top + h),
    }
}

/// How samples are named in a scatter plot: their names beside the points, or (many or long
/// names) numbers beside the points and a key "1 name" under the plot.
struct SampleKey<'a> {
    samples: &'a [Named],
    numbered: bool,
    columns: u32,
}

impl<'a> SampleKey<'a> {
    fn new(samples: &'a [Named], width: u32) -> SampleKey<'a> {
        let numbered = samples.len() > MAX_NAMED
            || samples
                .iter()
                .any(|s| s.name.chars().count() > MAX_NAME_CHARS);
        SampleKey {
            samples,
            numbered,
            columns: ((width - 20) / KEY_COLUMN).max(1),
        }
    }

    /// Extra canvas height the key needs under the plot.
    fn height(&self) -> u32 {
        if self.numbered {
            (self.samples.len() as u32).div_ceil(self.columns) * KEY_ROW + 12
        } else {
            0
        }
    }

    fn tag(&self, i: usize) -> String {
        if self.numbered {
            (i + 1).to_string()
        } else {
            self.samples[i].name.clone()
        }
    }

    /// Draws each sample's name (or number) beside its topmost point, moved off other labels,
    /// markers and the legend where it can be; samples at one place share a label ("a, b"), so
    /// a point hidden under another is still named. Then the key, from `key_top` down.
    fn draw<DB: DrawingBackend>(
        &self,
        root: &DrawingArea<DB, Shift>,
        area: &(std::ops::Range<i32>, std::ops::Range<i32>),
        px: &dyn Fn((f64, f64)) -> (i32, i32),
        markers: &[(f64, f64)],
        legend: PixelBox,
        key_top: u32,
    ) -> Result<()> {
        // Every labelled point in pixels, with its sample.
        let points: Vec<((i32, i32), usize)> = self
            .samples
            .iter()
            .enumerate()
            .flat_map(|(i, s)| s.points.iter().map(move |&p| (p, i)))
            .map(|(p, i)| (px(p), i))
            .collect();
        // Topmost point of each sample, in pixels.
        let anchors: Vec<Option<(i32, i32)>> = self
            .samples
            .iter()
            .map(|s| s.points.iter().map(|&p| px(p)).min_by_key(|p| (p.1, p.0)))
            .collect();
        let mut groups: Vec<((i32, i32), Vec<usize>)> = Vec::new();
        for (i, a) in anchors.iter().enumerate() {
            let Some(a) = *a else { continue };
            let near = |g: &&mut ((i32, i32), Vec<usize>)| {
                (g.0.0 - a.0).abs() <= SAME_PLACE && (g.0.1 - a.1).abs() <= SAME_PLACE
            };
            match groups.iter_mut().find(|g| near(g)) {
                Some(g) => g.1.push(i),
                None => groups.push((a, vec![i])),
            }
        }
        let mut taken: Vec<PixelBox> = markers
            .iter()
            .map(|&p| {
                let (x, y) = px(p);
                (x - MARKER, y - MARKER, x + MARKER, y + MARKER)
            })
            .collect();
        taken.push(legend);
        let bounds = (area.0.start, area.1.start, area.0.end, area.1.end);
        let grey = BLACK.mix(0.8);
        let style = TextStyle::from((FONT, NAME_FONT).into_font())
            .color(&grey)
            .pos(Pos::new(HPos::Left, VPos::Top));
        let h = (NAME_FONT / 1.24).ceil() as i32 + 2;
        for ((x, y), members) in &groups {
            let text = members
                .iter()
                .map(|&i| self.tag(i))
                .collect::<Vec<_>>()
                .join(", ");
            let w = text_width(&text, NAME_FONT);
            let gap = MARKER + 3;
            // Right, left, above, below, then the corners and one row further out.
            let candidates = [
                (x + gap, y - h / 2),
                (x - gap - w, y - h / 2),
                (x - w / 2, y - gap - h),
                (x - w / 2, y + gap),
                (x + gap, y - gap - h + 2),
                (x + gap, y + gap - 2),
                (x - gap - w, y - gap - h + 2),
                (x - gap - w, y + gap - 2),
                (x + gap, y - h / 2 - 2 * h),
                (x + gap, y - h / 2 + 2 * h),
            ];
            // A label nearer to another sample's point than to its own would name the wrong
            // point: as bad as covering a label.
            let nearest = |b: PixelBox, own: bool| {
                points
                    .iter()
                    .filter(|(_, i)| members.contains(i) == own)
                    .map(|&(p, _)| box_distance(b, p))
                    .fold(f64::INFINITY, f64::min)
            };
            let score = |&(l, t): &(i32, i32)| {
                let b = (l, t, l + w, t + h);
                let area = i64::from(w) * i64::from(h);
                let outside = area - overlap(b, bounds);
                let misleading = if nearest(b, false) <= nearest(b, true) {
                    area
                } else {
                    0
                };
                10 * outside + misleading + taken.iter().map(|&o| overlap(b, o)).sum::<i64>()
            };
            let best = candidates
                .iter()
                .enumerate()
                .min_by_key(|(n, c)| (score(c), *n))
                .map(|(_, c)| *c)
                .unwrap_or(candidates[0]);
            taken.push((best.0, best.1, best.0 + w, best.1 + h));
            // A label moved away from its point gets a faint line to it.
            let near = (
                (*x).clamp(best.0, best.0 + w),
                (*y).clamp(best.1, best.1 + h),
            );
            let (dx, dy) = (f64::from(near.0 - x), f64::from(near.1 - y));
            let dist = dx.hypot(dy);
            if dist > f64::from(gap + 3) {
                let from = (
                    x + (dx / dist * f64::from(MARKER + 1)).round() as i32,
                    y + (dy / dist * f64::from(MARKER + 1)).round() as i32,
                );
                root.draw(&PathElement::new([from, near], BLACK.mix(0.4)))
                    .map_err(plot_error)?;
            }
            root.draw(&Text::new(text, best, style.clone()))
                .map_err(plot_error)?;
        }
        if !self.numbered {
            return Ok(());
        }
        let key =
            TextStyle::from((FONT, NAME_FONT).into_font()).pos(Pos::new(HPos::Left, VPos::Top));
        for (i, s) in self.samples.iter().enumerate() {
            let (row, col) = (i as u32 / self.columns, i as u32 % self.columns);
            let mut name: String = s.name.chars().take(30).collect();
            if s.name.chars().count() > 30 {
                name.push('…');
            }
            let at = (
                (14 + col * KEY_COLUMN) as i32,
                (key_top + 4 + row * KEY_ROW) as i32,
            );
            root.draw(&Text::new(
                format!("{}\u{2002}{name}", i + 1),
                at,
                key.clone(),
            ))
            .map_err(plot_error)?;
        }
        Ok(())
    }
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
            .x_label_formatter(&|v| tick(*v))
            .y_label_formatter(&|v| tick(*v))
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
            .x_label_formatter(&|v| tick(*v))
            .y_label_formatter(&|v| tick(*v))
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
            .y_label_formatter(&|v| tick(*v))
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

    /// Text of every `<text>` element of an SVG, in order.
    fn texts(svg: &str) -> Vec<String> {
        svg.split("<text")
            .skip(1)
            .map(|t| {
                let body = &t[t.find('>').unwrap() + 1..t.find("</text>").unwrap()];
                body.trim().to_string()
            })
            .collect()
    }

    #[test]
    fn ticks_are_compact_and_one_style_per_axis() {
        assert_eq!(tick(20.0), "20");
        assert_eq!(tick(0.0), "0");
        assert_eq!(tick(0.1 + 0.2), "0.3");
        assert_eq!(tick(1.05), "1.05");
        assert_eq!(tick(-2.5), "-2.5");
        let wide = decade_labels(1e3, 1e7);
        assert_eq!([1e3, 1e4, 1e7].map(|v| wide(&v)), ["10³", "10⁴", "10⁷"]);
        assert_eq!(wide(&2e4), "2×10⁴");
        let small = decade_labels(1e-4, 1e-2);
        assert_eq!(small(&1e-3), "10⁻³");
        let plain = decade_labels(0.01, 1000.0);
        assert_eq!(
            [0.01, 1.0, 1000.0].map(|v| plain(&v)),
            ["0.01", "1", "1000"]
        );
    }

    fn named(name: &str, points: &[(f64, f64)]) -> Named {
        Named {
            name: name.into(),
            points: points.to_vec(),
        }
    }

    /// Each sample is named beside its points; samples on one spot share one label.
    #[test]
    fn scatter_points_carry_sample_names() {
        let samples = [
            named("pack-a", &[(0.45, 1.2)]),
            named("pack-b", &[(0.45, 1.2)]),
            named("foam", &[(0.7, 1.1), (0.7, 1.15)]),
        ];
        let points = [
            vec![(0.45, 1.2), (0.45, 1.2), (0.7, 1.1)],
            vec![(0.7, 1.15)],
            vec![],
        ];
        let t = texts(&tortuosity_porosity(&points, &samples).unwrap());
        assert_eq!(
            t.iter().filter(|s| *s == "pack-a, pack-b").count(),
            1,
            "{t:?}"
        );
        assert_eq!(t.iter().filter(|s| *s == "foam").count(), 1, "{t:?}");
        assert!(!t.iter().any(|s| s == "pack-a"), "{t:?}");
    }

    /// Many samples: numbers beside the points and a key of numbers and names under the plot.
    #[test]
    fn many_samples_get_a_numbered_key() {
        let samples: Vec<Named> = (0..MAX_NAMED + 1)
            .map(|i| {
                named(
                    &format!("core {i}"),
                    &[(0.3 + 0.05 * i as f64, 10f64.powi(i as i32))],
                )
            })
            .collect();
        let simulated = [
            samples.iter().map(|s| s.points[0]).collect(),
            vec![],
            vec![],
        ];
        let d = PermeabilityPorosity {
            simulated,
            kozeny_carman: vec![],
            curves: vec![],
            unit: "mD".into(),
            samples,
        };
        let svg = permeability_porosity(&d).unwrap();
        let t = texts(&svg);
        for i in 0..=MAX_NAMED {
            assert!(t.contains(&(i + 1).to_string()), "{t:?}");
            assert!(t.contains(&format!("{}\u{2002}core {i}", i + 1)), "{t:?}");
        }
        assert!(!svg.starts_with(&format!("<svg width=\"{}\" height=\"{}\"", SIZE.0, SIZE.1)));
    }

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
