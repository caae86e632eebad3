//! The one chart kind everything is drawn with: an x–y panel with points,
//! curves (sampled, or closures sampled across the final x range), bands,
//! bars, reference lines and estimates with intervals, on linear, log or
//! category axes. All geometry goes through `plotters`; this file only says
//! what to draw where.

use plotters::coord::Shift;
use plotters::element::DashedPathElement;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};

use super::axis::{Axis, AxisRange};
use super::style::{self, Shape};

/// A curve given as a closure, sampled once the x range is known.
pub type CurveFn = Box<dyn Fn(f64) -> f64>;

/// One thing drawn in a panel.
pub enum Layer {
    /// Observations.
    Points {
        /// Legend text; unlabelled layers stay out of the legend.
        label: Option<String>,
        /// Palette index: colour and marker shape.
        series: usize,
        /// (x, y) pairs.
        points: Vec<(f64, f64)>,
    },
    /// A curve through given (x, y) vertices.
    Curve {
        /// Legend text.
        label: Option<String>,
        /// Palette index.
        series: usize,
        /// Vertices, in drawing order.
        points: Vec<(f64, f64)>,
        /// Dashed instead of solid.
        dashed: bool,
    },
    /// A curve y = f(x), sampled at 240 points evenly spaced along the x axis.
    Function {
        /// Legend text.
        label: Option<String>,
        /// Palette index.
        series: usize,
        /// The curve.
        f: CurveFn,
        /// Dashed instead of solid.
        dashed: bool,
        /// Where the curve is defined (defaults to the whole x range).
        domain: Option<(f64, f64)>,
    },
    /// A shaded band between two curves: (x, low, high).
    Band {
        /// Legend text.
        label: Option<String>,
        /// Palette index of the curve it belongs to.
        series: usize,
        /// (x, low, high) triples, ascending in x.
        points: Vec<(f64, f64, f64)>,
    },
    /// Vertical bars from zero.
    Bars {
        /// Palette index.
        series: usize,
        /// (x, height) pairs.
        bars: Vec<(f64, f64)>,
        /// Bar width in x units.
        width: f64,
    },
    /// A thin line across the whole panel.
    Reference {
        /// Which way and where.
        at: Line,
        /// Legend text.
        label: Option<String>,
    },
    /// A point estimate with a horizontal interval (IC50 with its interval,
    /// pKi in a ranking). With `interval`, a missing end means the interval
    /// runs beyond the axis (or has no bound) and is drawn dashed to the edge.
    Estimate {
        /// Legend text.
        label: Option<String>,
        /// Palette index.
        series: usize,
        /// The estimate.
        at: (f64, f64),
        /// Lower end of the interval.
        low: Option<f64>,
        /// Upper end of the interval.
        high: Option<f64>,
        /// Whether there is an interval to draw at all.
        interval: bool,
        /// The value is a bound, not an estimate: drawn open with an arrow
        /// pointing where the true value lies.
        bound: Option<Direction>,
        /// Also draw a vertical line at x down to the axis.
        drop_line: bool,
    },
}

/// A reference line.
#[derive(Debug, Clone, Copy)]
pub enum Line {
    /// y = constant.
    Horizontal(f64),
    /// x = constant.
    Vertical(f64),
}

/// Which side of a bound the true value lies on.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Direction {
    /// The value is at most the bound (`<`): arrow to the left.
    Below,
    /// The value is at least the bound (`>`): arrow to the right.
    Above,
}

/// One panel: title, axes, layers and notes under the plot.
pub struct XyChart {
    /// Bold title, top left.
    pub title: String,
    /// A grey line under the title (the fit summary, the flags).
    pub subtitle: Option<String>,
    /// Draw the subtitle in the flag colour: something here needs attention.
    pub flagged: bool,
    /// The x axis.
    pub x: Axis,
    /// The y axis.
    pub y: Axis,
    /// Category names for x = 0, 1, 2 … (bar charts); replaces numeric ticks.
    pub x_categories: Option<Vec<String>>,
    /// Category names for y = 0, 1, 2 … (rankings); replaces numeric ticks.
    pub y_categories: Option<Vec<String>>,
    /// What is drawn, back to front.
    pub layers: Vec<Layer>,
    /// Small print under the plot, one line each.
    pub notes: Vec<String>,
}

impl XyChart {
    /// An empty panel with a title and two axes.
    pub fn new(title: impl Into<String>, x: Axis, y: Axis) -> XyChart {
        XyChart {
            title: title.into(),
            subtitle: None,
            flagged: false,
            x,
            y,
            x_categories: None,
            y_categories: None,
            layers: Vec::new(),
            notes: Vec::new(),
        }
    }
}

/// Where a panel's plotting area ended up in the SVG: two axis ranges and
/// the pixels of their ends, so that a test can map SVG coordinates back to
/// data values.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Frame {
    /// The x range drawn.
    pub x: AxisRange,
    /// The y range drawn.
    pub y: AxisRange,
    /// Pixel x of `x.lo` and `x.hi`.
    pub px: (i32, i32),
    /// Pixel y of `y.lo` and `y.hi` (the first is the larger: SVG y runs down).
    pub py: (i32, i32),
}

impl Frame {
    /// The data value at pixel (u, v).
    pub fn value_at(&self, u: f64, v: f64) -> (f64, f64) {
        let fx = (u - self.px.0 as f64) / (self.px.1 - self.px.0) as f64;
        let fy = (v - self.py.0 as f64) / (self.py.1 - self.py.0) as f64;
        (self.x.at_fraction(fx), self.y.at_fraction(fy))
    }

    /// The pixel of a data value (unrounded).
    pub fn pixel_of(&self, x: f64, y: f64) -> (f64, f64) {
        let u = self.px.0 as f64 + self.x.fraction(x) * (self.px.1 - self.px.0) as f64;
        let v = self.py.0 as f64 + self.y.fraction(y) * (self.py.1 - self.py.0) as f64;
        (u, v)
    }
}

const SAMPLES: usize = 240;
const MARKER: i32 = 4;

/// Every x value the layers need to show.
fn x_values(chart: &XyChart) -> Vec<f64> {
    let mut xs = Vec::new();
    for layer in &chart.layers {
        match layer {
            Layer::Points { points, .. } | Layer::Curve { points, .. } => xs.extend(points.iter().map(|p| p.0)),
            Layer::Band { points, .. } => xs.extend(points.iter().map(|p| p.0)),
            Layer::Bars { bars, width, .. } => {
                xs.extend(bars.iter().flat_map(|b| [b.0 - width / 2.0, b.0 + width / 2.0]))
            }
            Layer::Reference { at: Line::Vertical(x), .. } => xs.push(*x),
            Layer::Estimate { at, low, high, .. } => xs.extend([Some(at.0), *low, *high].into_iter().flatten()),
            Layer::Function { domain: Some((a, b)), .. } => xs.extend([*a, *b]),
            Layer::Function { .. } | Layer::Reference { .. } => {}
        }
    }
    xs
}

/// Every y value the layers need to show, functions sampled across `xr`.
fn y_values(chart: &XyChart, xr: &AxisRange) -> Vec<f64> {
    let mut ys = Vec::new();
    for layer in &chart.layers {
        match layer {
            Layer::Points { points, .. } | Layer::Curve { points, .. } => ys.extend(points.iter().map(|p| p.1)),
            Layer::Band { points, .. } => ys.extend(points.iter().flat_map(|p| [p.1, p.2])),
            Layer::Bars { bars, .. } => ys.extend(bars.iter().flat_map(|b| [0.0, b.1])),
            Layer::Reference { at: Line::Horizontal(y), .. } => ys.push(*y),
            Layer::Estimate { at, .. } => ys.push(at.1),
            Layer::Function { f, domain, .. } => ys.extend(sample(f, xr, *domain).into_iter().map(|p| p.1)),
            Layer::Reference { .. } => {}
        }
    }
    ys
}

/// A function sampled along the x axis, within its domain.
fn sample(f: &CurveFn, xr: &AxisRange, domain: Option<(f64, f64)>) -> Vec<(f64, f64)> {
    let (a, b) = domain.map_or((xr.lo, xr.hi), |(a, b)| (a.max(xr.lo), b.min(xr.hi)));
    if a.partial_cmp(&b) != Some(std::cmp::Ordering::Less) {
        return Vec::new();
    }
    let part = AxisRange { lo: a, hi: b, scale: xr.scale };
    part.samples(SAMPLES).into_iter().map(|x| (x, f(x))).collect()
}

/// Splits a polyline into the runs that lie inside both ranges, cutting
/// segments at the edges (in each axis's own space, so log axes cut right).
fn clip(points: &[(f64, f64)], xr: &AxisRange, yr: &AxisRange) -> Vec<Vec<(f64, f64)>> {
    let inside = |p: &(f64, f64)| xr.contains(p.0) && yr.contains(p.1);
    let mut runs: Vec<Vec<(f64, f64)>> = Vec::new();
    let mut current: Vec<(f64, f64)> = Vec::new();
    for (k, p) in points.iter().enumerate() {
        let prev = k.checked_sub(1).map(|j| points[j]);
        match (inside(p), prev) {
            (true, Some(q)) if !inside(&q) => {
                current.extend(edge_point(&q, p, yr));
                current.push(*p);
            }
            (true, _) => current.push(*p),
            (false, Some(q)) if inside(&q) => {
                current.extend(edge_point(p, &q, yr));
                runs.push(std::mem::take(&mut current));
            }
            (false, _) => {}
        }
    }
    runs.push(current);
    runs.retain(|r| r.len() >= 2);
    runs
}

/// Where the segment from `outside` to `inside` crosses the y range's edge,
/// interpolated in the y axis's space; `None` when it cannot be placed.
fn edge_point(outside: &(f64, f64), inside: &(f64, f64), yr: &AxisRange) -> Option<(f64, f64)> {
    if !(outside.1.is_finite() && outside.0.is_finite()) || yr.contains(outside.1) {
        return None;
    }
    let edge = if outside.1 > yr.hi { yr.hi } else { yr.lo };
    let (to, ti, te) = (yr.forward(outside.1), yr.forward(inside.1), yr.forward(edge));
    if !(to.is_finite() && ti.is_finite()) || (ti - to).abs() < f64::MIN_POSITIVE {
        return None;
    }
    let s = (te - to) / (ti - to);
    Some((outside.0 + s * (inside.0 - outside.0), edge))
}

/// How a marker shape is built from plotters elements, in pixels about its centre.
enum Mark {
    Disc(bool),
    Outline(Vec<(i32, i32)>, bool),
    Cross(i32),
}

fn mark(shape: Shape) -> Mark {
    let r = MARKER;
    let square = vec![(-r, -r), (r, -r), (r, r), (-r, r)];
    match shape {
        Shape::Circle => Mark::Disc(true),
        Shape::OpenCircle => Mark::Disc(false),
        Shape::Square => Mark::Outline(square, true),
        Shape::OpenSquare => Mark::Outline(square, false),
        Shape::TriangleUp => Mark::Outline(vec![(0, -r - 1), (r + 1, r), (-r - 1, r)], true),
        Shape::TriangleDown => Mark::Outline(vec![(0, r + 1), (r + 1, -r), (-r - 1, -r)], true),
        Shape::Diamond => Mark::Outline(vec![(0, -r - 1), (r + 1, 0), (0, r + 1), (-r - 1, 0)], true),
        Shape::Cross => Mark::Cross(r),
    }
}

fn closed(mut v: Vec<(i32, i32)>) -> Vec<(i32, i32)> {
    if let Some(first) = v.first().copied() {
        v.push(first);
    }
    v
}

/// Draws markers at data points.
fn draw_markers<'a, DB: DrawingBackend + 'a>(
    ctx: &mut Ctx<'a, DB>,
    points: &[(f64, f64)],
    shape: Shape,
    c: RGBColor,
) -> Result<(), String> {
    let pts = points.iter().copied();
    let line = c.stroke_width(2);
    match mark(shape) {
        Mark::Disc(fill) => {
            let st = if fill { c.filled() } else { line };
            ctx.draw_series(pts.map(|p| EmptyElement::at(p) + Circle::new((0, 0), MARKER, st))).map(|_| ())
        }
        Mark::Outline(v, true) => {
            ctx.draw_series(pts.map(|p| EmptyElement::at(p) + Polygon::new(v.clone(), c.filled()))).map(|_| ())
        }
        Mark::Outline(v, false) => {
            let v = closed(v);
            ctx.draw_series(pts.map(|p| EmptyElement::at(p) + PathElement::new(v.clone(), line))).map(|_| ())
        }
        Mark::Cross(r) => ctx
            .draw_series(pts.map(|p| {
                EmptyElement::at(p)
                    + PathElement::new(vec![(-r, -r), (r, r)], line)
                    + PathElement::new(vec![(-r, r), (r, -r)], line)
            }))
            .map(|_| ()),
    }
    .map_err(drawing_error)
}

/// Draws one marker at a pixel position (legends).
fn draw_marker_at<DB: DrawingBackend>(area: &Area<DB>, p: (i32, i32), shape: Shape, c: RGBColor) -> Result<(), String> {
    let line = c.stroke_width(2);
    let offset = |v: &[(i32, i32)]| v.iter().map(|(x, y)| (p.0 + x, p.1 + y)).collect::<Vec<_>>();
    match mark(shape) {
        Mark::Disc(true) => area.draw(&Circle::new(p, MARKER, c.filled())),
        Mark::Disc(false) => area.draw(&Circle::new(p, MARKER, line)),
        Mark::Outline(v, true) => area.draw(&Polygon::new(offset(&v), c.filled())),
        Mark::Outline(v, false) => area.draw(&PathElement::new(offset(&closed(v)), line)),
        Mark::Cross(r) => area
            .draw(&PathElement::new(offset(&[(-r, -r), (r, r)]), line))
            .and_then(|_| area.draw(&PathElement::new(offset(&[(-r, r), (r, -r)]), line))),
    }
    .map_err(drawing_error)
}

/// Plotters' drawing errors, as text for [`crate::Error::Plot`].
pub(crate) fn drawing_error<E: std::fmt::Debug>(e: E) -> String {
    format!("{e:?}")
}

type Area<'a, DB> = DrawingArea<DB, Shift>;

/// How a legend entry is drawn.
enum Key {
    Marker(Shape, RGBColor),
    Line(RGBColor, bool),
    Swatch(RGBColor),
}

fn legend_entries(chart: &XyChart) -> Vec<(Key, String)> {
    let mut keys = Vec::new();
    for layer in &chart.layers {
        let entry = match layer {
            Layer::Points { label: Some(l), series, .. } => {
                Some((Key::Marker(style::shape(*series), style::colour(*series)), l))
            }
            Layer::Curve { label: Some(l), series, dashed, .. }
            | Layer::Function { label: Some(l), series, dashed, .. } => {
                Some((Key::Line(style::colour(*series), *dashed), l))
            }
            // The key is the marker drawn: a diamond for an estimate, an open
            // circle for a bound (see `draw_point`).
            Layer::Estimate { label: Some(l), series, bound, .. } => {
                let shape = if bound.is_some() { Shape::OpenCircle } else { Shape::Diamond };
                Some((Key::Marker(shape, style::colour(*series)), l))
            }
            Layer::Reference { label: Some(l), .. } => Some((Key::Line(style::REFERENCE, true), l)),
            Layer::Band { label: Some(l), series, .. } => Some((Key::Swatch(style::colour(*series)), l)),
            _ => None,
        };
        if let Some((k, l)) = entry {
            keys.push((k, l.clone()));
        }
    }
    keys
}

/// Rough text width in pixels for layout (the viewer picks the real face;
/// 0.55 em per character is a fair sans-serif average).
fn text_width(text: &str, size: f64) -> i32 {
    (text.chars().count() as f64 * size / style::FONT_SCALE * 0.55).ceil() as i32
}

/// Breaks `text` into lines no wider than `width` pixels, at spaces.
fn wrap(text: &str, size: f64, width: i32) -> Vec<String> {
    let mut lines: Vec<String> = Vec::new();
    let mut line = String::new();
    for word in text.split(' ') {
        let candidate = if line.is_empty() { word.to_string() } else { format!("{line} {word}") };
        if text_width(&candidate, size) > width && !line.is_empty() {
            lines.push(std::mem::take(&mut line));
            line = word.to_string();
        } else {
            line = candidate;
        }
    }
    if !line.is_empty() {
        lines.push(line);
    }
    lines
}

/// The line height of text of `size`.
fn line_height(size: f64) -> i32 {
    (size / style::FONT_SCALE * 1.35).ceil() as i32
}

/// Draws the legend row(s) starting at `top`; returns the height used.
fn draw_legend<DB: DrawingBackend>(area: &Area<DB>, chart: &XyChart, top: i32) -> Result<i32, String> {
    let entries = legend_entries(chart);
    if entries.is_empty() {
        return Ok(0);
    }
    let width = area.dim_in_pixel().0 as i32;
    let font = (style::FONT, style::SMALL_SIZE).into_font().color(&style::INK);
    let (mut x, mut y) = (16, top + 9);
    for (key, label) in &entries {
        let w = 30 + text_width(label, style::SMALL_SIZE) + 18;
        if x + w > width && x > 16 {
            x = 16;
            y += line_height(style::SMALL_SIZE) + 4;
        }
        match key {
            Key::Marker(shape, c) => {
                draw_marker_at(area, (x + 10, y), *shape, *c)?;
                Ok(())
            }
            Key::Line(c, false) => area.draw(&PathElement::new(vec![(x, y), (x + 22, y)], c.stroke_width(2))),
            Key::Swatch(c) => {
                area.draw(&Rectangle::new([(x + 1, y - 6), (x + 21, y + 6)], c.mix(style::BAND_OPACITY * 2.0).filled()))
            }
            Key::Line(c, true) => {
                area.draw(&DashedPathElement::new(vec![(x, y), (x + 22, y)], 5, 3, c.stroke_width(2)))
            }
        }
        .map_err(drawing_error)?;
        area.draw(&Text::new(label.clone(), (x + 28, y), font.clone().pos(Pos::new(HPos::Left, VPos::Center))))
            .map_err(drawing_error)?;
        x += w;
    }
    Ok(y - top + 14)
}

/// Draws the title block; returns its height.
fn draw_header<DB: DrawingBackend>(area: &Area<DB>, chart: &XyChart) -> Result<i32, String> {
    let width = area.dim_in_pixel().0 as i32 - 32;
    let title = (style::FONT, style::TITLE_SIZE).into_font().style(FontStyle::Bold).color(&style::INK);
    let mut top = 12;
    for line in wrap(&chart.title, style::TITLE_SIZE, width) {
        area.draw(&Text::new(line, (16, top), title.clone())).map_err(drawing_error)?;
        top += line_height(style::TITLE_SIZE);
    }
    if let Some(sub) = &chart.subtitle {
        let ink = if chart.flagged { style::FLAG } else { style::MUTED };
        let font = (style::FONT, style::SMALL_SIZE).into_font().color(&ink);
        for line in wrap(sub, style::SMALL_SIZE, width) {
            area.draw(&Text::new(line, (16, top), font.clone())).map_err(drawing_error)?;
            top += line_height(style::SMALL_SIZE);
        }
    }
    top += draw_legend(area, chart, top)?;
    Ok(top + 6)
}

/// Draws the notes at the foot of the panel; returns their height.
fn draw_notes<DB: DrawingBackend>(area: &Area<DB>, notes: &[String]) -> Result<i32, String> {
    let (w, h) = area.dim_in_pixel();
    let size = style::SMALL_SIZE * 0.95;
    let font = (style::FONT, size).into_font().style(FontStyle::Italic).color(&style::MUTED);
    let lines: Vec<String> = notes.iter().flat_map(|n| wrap(n, size, w as i32 - 32)).collect();
    let step = line_height(size);
    let used = lines.len() as i32 * step;
    for (k, line) in lines.into_iter().enumerate() {
        let y = h as i32 - 6 - used + k as i32 * step;
        area.draw(&Text::new(line, (16, y), font.clone())).map_err(drawing_error)?;
    }
    Ok(used)
}

/// A tick labeller for an axis: category names, or numbers.
fn tick_labeller(range: AxisRange, categories: Option<&[String]>) -> impl Fn(&f64) -> String + '_ {
    move |v: &f64| match categories {
        Some(names) => {
            let k = v.round();
            let on_slot = (v - k).abs() < 1e-6 && k >= 0.0;
            if on_slot { names.get(k as usize).cloned().unwrap_or_default() } else { String::new() }
        }
        None => range.label(*v, 7),
    }
}

type Ctx<'a, DB> = ChartContext<'a, DB, Cartesian2d<AxisRange, AxisRange>>;

/// Draws one panel into `area` and says where its plotting area went.
pub fn draw<DB: DrawingBackend>(area: &Area<DB>, chart: &XyChart) -> Result<Frame, String> {
    area.fill(&WHITE).map_err(drawing_error)?;
    let header = draw_header(area, chart)?;
    let foot = draw_notes(area, &chart.notes)?;
    let xr = chart.x.range_for(x_values(chart));
    let yr = chart.y.range_for(y_values(chart, &xr));
    let y_label_width = match &chart.y_categories {
        Some(names) => 28 + names.iter().map(|n| text_width(n, style::TICK_SIZE)).max().unwrap_or(0),
        None => 74,
    };
    let mut ctx = ChartBuilder::on(area)
        .margin_top(header)
        .margin_bottom(8 + foot)
        .margin_right(22)
        .margin_left(6)
        .x_label_area_size(50)
        .y_label_area_size(y_label_width.min(260))
        .build_cartesian_2d(xr, yr)
        .map_err(drawing_error)?;
    configure_mesh(&mut ctx, chart, xr, yr)?;
    draw_layers(&mut ctx, chart, xr, yr)?;
    let lo = ctx.backend_coord(&(xr.lo, yr.lo));
    let hi = ctx.backend_coord(&(xr.hi, yr.hi));
    Ok(Frame { x: xr, y: yr, px: (lo.0, hi.0), py: (lo.1, hi.1) })
}

fn configure_mesh<DB: DrawingBackend>(
    ctx: &mut Ctx<DB>,
    chart: &XyChart,
    xr: AxisRange,
    yr: AxisRange,
) -> Result<(), String> {
    let fx = tick_labeller(xr, chart.x_categories.as_deref());
    let fy = tick_labeller(yr, chart.y_categories.as_deref());
    let tick_font = (style::FONT, style::TICK_SIZE).into_font().color(&style::INK);
    let axis_font = (style::FONT, style::AXIS_SIZE).into_font().color(&style::INK);
    let mut mesh = ctx.configure_mesh();
    mesh.disable_x_mesh()
        .bold_line_style(style::GUIDE.stroke_width(1))
        .light_line_style(TRANSPARENT)
        .axis_style(style::INK.stroke_width(1))
        .x_labels(7)
        .y_labels(6)
        .x_label_formatter(&fx)
        .y_label_formatter(&fy)
        .label_style(tick_font)
        .axis_desc_style(axis_font)
        .x_desc(chart.x.label.clone())
        .y_desc(chart.y.label.clone());
    if chart.y_categories.is_some() {
        mesh.disable_y_mesh();
    }
    mesh.draw().map_err(drawing_error)
}

fn draw_layers<'a, DB: DrawingBackend + 'a>(
    ctx: &mut Ctx<'a, DB>,
    chart: &XyChart,
    xr: AxisRange,
    yr: AxisRange,
) -> Result<(), String> {
    // Back to front by kind: bands and bars, reference lines, curves, estimates, points.
    for pass in 0..5 {
        for layer in &chart.layers {
            let this_pass = match layer {
                Layer::Band { .. } | Layer::Bars { .. } => 0,
                Layer::Reference { .. } => 1,
                Layer::Curve { .. } | Layer::Function { .. } => 2,
                Layer::Estimate { .. } => 3,
                Layer::Points { .. } => 4,
            };
            if this_pass == pass {
                draw_layer(ctx, layer, xr, yr)?;
            }
        }
    }
    Ok(())
}

fn draw_layer<'a, DB: DrawingBackend + 'a>(
    ctx: &mut Ctx<'a, DB>,
    layer: &Layer,
    xr: AxisRange,
    yr: AxisRange,
) -> Result<(), String> {
    match layer {
        Layer::Points { series, points, .. } => {
            let (c, s) = (style::colour(*series), style::shape(*series));
            let shown: Vec<(f64, f64)> =
                points.iter().copied().filter(|p| xr.contains(p.0) && yr.contains(p.1)).collect();
            draw_markers(ctx, &shown, s, c)?;
        }
        Layer::Curve { series, points, dashed, .. } => draw_curve(ctx, points, *series, *dashed, xr, yr)?,
        Layer::Function { series, f, dashed, domain, .. } => {
            draw_curve(ctx, &sample(f, &xr, *domain), *series, *dashed, xr, yr)?
        }
        Layer::Band { series, points, .. } => {
            let clamp = |v: f64| {
                if yr.contains(v) {
                    v
                } else if v > yr.hi || v.is_nan() {
                    yr.hi
                } else {
                    yr.lo
                }
            };
            let shown: Vec<&(f64, f64, f64)> =
                points.iter().filter(|p| xr.contains(p.0) && p.1.is_finite() && p.2.is_finite()).collect();
            let outline: Vec<(f64, f64)> =
                shown.iter().map(|p| (p.0, clamp(p.2))).chain(shown.iter().rev().map(|p| (p.0, clamp(p.1)))).collect();
            if outline.len() >= 4 {
                let fill = style::colour(*series).mix(style::BAND_OPACITY).filled();
                ctx.draw_series(std::iter::once(Polygon::new(outline, fill))).map_err(drawing_error)?;
            }
        }
        Layer::Bars { series, bars, width } => {
            let c = style::colour(*series);
            let base = if yr.contains(0.0) { 0.0 } else { yr.lo };
            let rects = bars.iter().filter(|b| b.1.is_finite()).map(|b| {
                Rectangle::new([(b.0 - width / 2.0, base), (b.0 + width / 2.0, b.1.clamp(yr.lo, yr.hi))], c.filled())
            });
            ctx.draw_series(rects).map_err(drawing_error)?;
        }
        Layer::Reference { at, .. } => {
            let ends = match at {
                Line::Horizontal(y) if yr.contains(*y) => Some([(xr.lo, *y), (xr.hi, *y)]),
                Line::Vertical(x) if xr.contains(*x) => Some([(*x, yr.lo), (*x, yr.hi)]),
                _ => None,
            };
            if let Some(ends) = ends {
                let line = DashedPathElement::new(ends, 6, 4, style::REFERENCE.stroke_width(1));
                ctx.draw_series(std::iter::once(line)).map_err(drawing_error)?;
            }
        }
        Layer::Estimate { series, at, low, high, interval, bound, drop_line, .. } => {
            let ends = if *interval { Some((*low, *high)) } else { None };
            draw_estimate(ctx, *series, *at, ends, *bound, *drop_line, xr, yr)?
        }
    }
    Ok(())
}

fn draw_curve<DB: DrawingBackend>(
    ctx: &mut Ctx<DB>,
    points: &[(f64, f64)],
    series: usize,
    dashed: bool,
    xr: AxisRange,
    yr: AxisRange,
) -> Result<(), String> {
    let stroke = style::colour(series).stroke_width(2);
    for run in clip(points, &xr, &yr) {
        if dashed {
            ctx.draw_series(DashedLineSeries::new(run, 8, 5, stroke)).map_err(drawing_error)?;
        } else {
            ctx.draw_series(LineSeries::new(run, stroke)).map_err(drawing_error)?;
        }
    }
    Ok(())
}

#[allow(clippy::too_many_arguments)]
fn draw_estimate<'a, DB: DrawingBackend + 'a>(
    ctx: &mut Ctx<'a, DB>,
    series: usize,
    at: (f64, f64),
    ends: Option<(Option<f64>, Option<f64>)>,
    bound: Option<Direction>,
    drop_line: bool,
    xr: AxisRange,
    yr: AxisRange,
) -> Result<(), String> {
    let c = style::colour(series);
    let (x, y) = (at.0.clamp(xr.lo, xr.hi), at.1);
    if drop_line && yr.contains(y) {
        let line = DashedPathElement::new([(x, yr.lo), (x, y)], 4, 3, c.stroke_width(1));
        ctx.draw_series(std::iter::once(line)).map_err(drawing_error)?;
    }
    let solid = c.stroke_width(2);
    // The interval: solid between known ends, dashed to the edge where an end is missing.
    let Some((low, high)) = ends else {
        return draw_point(ctx, series, (x, y), bound);
    };
    let lo = low.map(|v| v.clamp(xr.lo, xr.hi));
    let hi = high.map(|v| v.clamp(xr.lo, xr.hi));
    let seg = |a: f64, b: f64| [(a, y), (b, y)];
    let mut solid_parts = Vec::new();
    let mut dashed_parts = Vec::new();
    match lo {
        Some(l) => solid_parts.push(seg(l, x)),
        None if bound.is_none() => dashed_parts.push(seg(xr.lo, x)),
        None => {}
    }
    match hi {
        Some(h) => solid_parts.push(seg(x, h)),
        None if bound.is_none() => dashed_parts.push(seg(x, xr.hi)),
        None => {}
    }
    for s in solid_parts {
        ctx.draw_series(std::iter::once(PathElement::new(s.to_vec(), solid))).map_err(drawing_error)?;
    }
    for s in dashed_parts {
        ctx.draw_series(std::iter::once(DashedPathElement::new(s, 5, 4, solid))).map_err(drawing_error)?;
    }
    for end in [lo, hi].into_iter().flatten() {
        let cap = EmptyElement::at((end, y)) + PathElement::new(vec![(0, -5), (0, 5)], solid);
        ctx.draw_series(std::iter::once(cap)).map_err(drawing_error)?;
    }
    draw_point(ctx, series, (x, y), bound)
}

/// The marker of an estimate: a diamond, or for a bound an open circle with
/// an arrow towards where the value lies.
fn draw_point<'a, DB: DrawingBackend + 'a>(
    ctx: &mut Ctx<'a, DB>,
    series: usize,
    (x, y): (f64, f64),
    bound: Option<Direction>,
) -> Result<(), String> {
    let c = style::colour(series);
    let solid = c.stroke_width(2);
    match bound {
        None => {
            draw_markers(ctx, &[(x, y)], Shape::Diamond, c)?;
        }
        Some(dir) => {
            // A bound: an open marker with an arrow towards where the value lies.
            let s = if dir == Direction::Above { 1 } else { -1 };
            let arrow = EmptyElement::at((x, y))
                + PathElement::new(vec![(0, 0), (s * 26, 0)], solid)
                + Polygon::new(vec![(s * 34, 0), (s * 24, -6), (s * 24, 6)], c.filled())
                + Circle::new((0, 0), MARKER + 1, WHITE.filled())
                + Circle::new((0, 0), MARKER + 1, c.stroke_width(2));
            ctx.draw_series(std::iter::once(arrow)).map_err(drawing_error)?;
        }
    }
    Ok(())
}
