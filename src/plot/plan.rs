//! Pictures of `kimech plan`: the confusion matrix as a heatmap (true
//! mechanism × call, shade = share) and, with `--suggest`, the grid given and
//! the proposed one on log axes. The heatmap is drawn with plotters'
//! rectangles and text directly (the x–y panel has no cell layer); the grids
//! are ordinary [`XyChart`] point layers.

use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};

use super::style::{self, FONT, INK, MUTED};
use super::{Axis, Layer, Svg, XyChart};
use crate::analysis::plan::{Call, PowerRow};
use crate::error::{Error, Result};
use crate::view::plan::PlanView;

/// Cell size of the heatmap in pixels.
const CELL: (i32, i32) = (92, 38);
/// Room for the row labels and the column labels.
const MARGIN: (i32, i32) = (150, 150);

/// The calls shown as columns: every call any row got, and each truth's right one.
fn columns(rows: &[PowerRow]) -> Vec<Call> {
    Call::ALL
        .iter()
        .copied()
        .filter(|&c| rows.iter().any(|r| r.named.of(c) > 0.0 || r.truth.right_call() == c))
        .collect()
}

/// White through the accent blue, by share.
fn shade(share: f64) -> RGBColor {
    let t = share.clamp(0.0, 1.0);
    let mix = |from: u8, to: u8| (from as f64 + (to as f64 - from as f64) * t).round() as u8;
    RGBColor(mix(0xFF, 0x00), mix(0xFF, 0x72), mix(0xFF, 0xB2))
}

/// The confusion matrix of `rows` as a heatmap; the right call of each row is outlined.
pub fn heatmap(rows: &[PowerRow], title: &str) -> Result<Svg> {
    let calls = columns(rows);
    let size =
        ((MARGIN.0 + CELL.0 * calls.len() as i32 + 20) as u32, (MARGIN.1 + CELL.1 * rows.len() as i32 + 20) as u32);
    let mut text = String::new();
    let fail = |e: String| Error::Plot { what: title.to_string(), problem: e };
    {
        let root = SVGBackend::with_string(&mut text, size).into_drawing_area();
        root.fill(&WHITE).map_err(|e| fail(e.to_string()))?;
        let font = |px: f64, colour: RGBColor, pos: Pos| (FONT, px).into_font().color(&colour).pos(pos);
        root.draw(&Text::new(
            title.to_string(),
            (10, 10),
            font(style::TITLE_SIZE, INK, Pos::new(HPos::Left, VPos::Top)),
        ))
        .map_err(|e| fail(e.to_string()))?;
        for (c, call) in calls.iter().enumerate() {
            let x = MARGIN.0 + CELL.0 * c as i32 + CELL.0 / 2;
            let label =
                font(style::SMALL_SIZE, INK, Pos::new(HPos::Left, VPos::Center)).transform(FontTransform::Rotate270);
            root.draw(&Text::new(call.name().to_string(), (x, MARGIN.1 - 6), label))
                .map_err(|e| fail(e.to_string()))?;
        }
        for (r, row) in rows.iter().enumerate() {
            let y = MARGIN.1 + CELL.1 * r as i32;
            let label = font(style::SMALL_SIZE, INK, Pos::new(HPos::Right, VPos::Center));
            root.draw(&Text::new(row.truth.name().to_string(), (MARGIN.0 - 8, y + CELL.1 / 2), label))
                .map_err(|e| fail(e.to_string()))?;
            for (c, &call) in calls.iter().enumerate() {
                let x = MARGIN.0 + CELL.0 * c as i32;
                let share = row.named.of(call);
                root.draw(&Rectangle::new([(x, y), (x + CELL.0, y + CELL.1)], shade(share).filled()))
                    .map_err(|e| fail(e.to_string()))?;
                let edge = if call == row.truth.right_call() { INK.stroke_width(3) } else { MUTED.stroke_width(1) };
                root.draw(&Rectangle::new([(x, y), (x + CELL.0, y + CELL.1)], edge))
                    .map_err(|e| fail(e.to_string()))?;
                let ink = if share > 0.55 { WHITE } else { INK };
                let label = font(style::SMALL_SIZE, ink, Pos::new(HPos::Center, VPos::Center));
                root.draw(&Text::new(format!("{share:.2}"), (x + CELL.0 / 2, y + CELL.1 / 2), label))
                    .map_err(|e| fail(e.to_string()))?;
            }
        }
        root.present().map_err(|e| fail(e.to_string()))?;
    }
    Ok(Svg { text, frames: Vec::new() })
}

/// The grid given and the proposed one on log axes; the uninhibited series
/// (I = 0 has no place on a log axis) is drawn on the bottom edge, at a
/// quarter of the lowest inhibitor level, and the subtitle says so.
pub fn grids(view: &PlanView) -> Option<XyChart> {
    let search = view.search?;
    let best = search.suggestions.first()?;
    let p = view.plan;
    let lowest =
        p.design.inhibitor.iter().chain(&best.inhibitor).cloned().filter(|i| *i > 0.0).fold(f64::INFINITY, f64::min);
    let zero_at = if lowest.is_finite() { lowest / 4.0 } else { 1.0 };
    let points = |s: &[f64], i: &[f64]| -> Vec<(f64, f64)> {
        i.iter().flat_map(|&i| s.iter().map(move |&s| (s, if i > 0.0 { i } else { zero_at }))).collect()
    };
    let mut chart = XyChart::new(
        "grid given and proposed",
        Axis::log(format!("substrate ({})", view.substrate_unit)),
        Axis::log(format!("inhibitor ({})", view.inhibitor_unit)),
    );
    chart.subtitle = Some(format!("I = 0 drawn at {}; dashed lines: Km and Ki", crate::io::output::sig(zero_at, 3)));
    chart.layers.push(Layer::Points {
        label: Some("given".into()),
        series: 1,
        points: points(&p.design.substrate, &p.design.inhibitor),
    });
    chart.layers.push(Layer::Points {
        label: Some("proposed".into()),
        series: 0,
        points: points(&best.substrate, &best.inhibitor),
    });
    chart.layers.push(Layer::Reference { at: super::Line::Vertical(p.constants.km), label: Some("Km".into()) });
    chart.layers.push(Layer::Reference { at: super::Line::Horizontal(p.constants.ki), label: Some("Ki".into()) });
    Some(chart)
}

/// The `--plot` files: `plan-confusion.svg`, one heatmap per suggestion, and `plan-grid.svg`.
pub fn figures(view: &PlanView) -> Result<Vec<(String, String)>> {
    let mut files =
        vec![("plan-confusion.svg".to_string(), heatmap(&view.plan.power, "grid given: share of calls")?.text)];
    if let Some(search) = view.search {
        for (k, s) in search.suggestions.iter().enumerate() {
            let title = format!("suggestion {}: share of calls", k + 1);
            files.push((format!("plan-suggestion-{}.svg", k + 1), heatmap(&s.power, &title)?.text));
        }
    }
    if let Some(chart) = grids(view) {
        files.push(("plan-grid.svg".into(), super::chart(&chart, super::PANEL)?.text));
    }
    Ok(files)
}
