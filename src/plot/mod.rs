//! Pictures of fits: SVG charts and the self-contained HTML report.
//!
//! Everything is drawn with the `plotters` crate through its SVG backend;
//! no chart geometry is written by hand. A chart function takes plain data
//! ([`XyChart`]: points, sampled curves or closures, labels) and returns an
//! [`Svg`]: the document and, for each panel, the [`Frame`] that maps data to
//! pixels, so tests can check that what is drawn is what was fitted.
//!
//! Layers: [`axis`] (ranges, ticks, labels), [`style`] (palette and look),
//! [`xy`] (the panel), [`charts`] (builders on plain data), one module per
//! command ([`km`], [`mode`], [`ic50`], [`rank`]) saying which panels its
//! results make and what its report section holds,
//! [`html`] (the report page) and [`files`] (safe file names in `--plot DIR`).

pub mod axis;
pub mod charts;
pub mod files;
pub mod ic50;
pub mod km;
pub mod mode;
pub mod onset;
pub mod plan;
pub mod rank;
pub mod style;
pub mod xy;

use plotters::prelude::*;

pub use axis::{Axis, AxisRange, Scale};
pub use xy::{Direction, Frame, Layer, Line, XyChart};

use crate::error::{Error, Result};

/// A finished SVG document and where each panel's plotting area lies in it.
#[derive(Debug, Clone)]
pub struct Svg {
    /// The SVG text (a standalone document with its XML namespace).
    pub text: String,
    /// One frame per panel, in panel order.
    pub frames: Vec<Frame>,
}

/// The pixel size of one panel in a figure.
pub const PANEL: (u32, u32) = (400, 360);
/// The pixel size of one thumbnail in a grid.
pub const THUMBNAIL: (u32, u32) = (380, 300);

/// One chart.
pub fn chart(panel: &XyChart, size: (u32, u32)) -> Result<Svg> {
    figure(std::slice::from_ref(panel), 1, size, &panel.title)
}

/// Panels side by side, `columns` to a row, each `size` pixels; `what` names
/// the figure in error messages.
pub fn figure(panels: &[XyChart], columns: usize, size: (u32, u32), what: &str) -> Result<Svg> {
    let columns = columns.clamp(1, panels.len().max(1));
    let rows = panels.len().div_ceil(columns).max(1);
    let total = (size.0 * columns as u32, size.1 * rows as u32);
    let mut text = String::new();
    let plot_error = |problem: String| Error::Plot { what: what.to_string(), problem };
    let frames = {
        let root = SVGBackend::with_string(&mut text, total).into_drawing_area();
        root.fill(&WHITE).map_err(|e| plot_error(xy::drawing_error(e)))?;
        let areas = root.split_evenly((rows, columns));
        let mut frames = Vec::with_capacity(panels.len());
        for (panel, area) in panels.iter().zip(&areas) {
            frames.push(xy::draw(area, panel).map_err(plot_error)?);
        }
        root.present().map_err(|e| plot_error(xy::drawing_error(e)))?;
        frames
    };
    Ok(Svg { text, frames })
}

/// The SVG without its XML namespace and declaration, for inlining into
/// HTML (where the namespace is implied and the page then names no URL).
pub fn inline(svg: &str) -> String {
    svg.replace(" xmlns=\"http://www.w3.org/2000/svg\"", "").replace("<?xml version=\"1.0\" encoding=\"UTF-8\"?>\n", "")
}
