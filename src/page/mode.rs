//! The report section of `kimech mode`.

use super::*;
use crate::analysis::mode::*;
use crate::error::*;
use crate::plot::mode::*;

/// The report section of a mode run: per compound the view's parts (the
/// terminal's lines and model table, as HTML) and its figure.
pub fn section(results: &[(&ModeResult, &Matrix)], u: &Units, failures: &[Error], command: &str) -> Result<Section> {
    let all: Vec<&ModeResult> = results.iter().map(|(r, _)| *r).collect();
    let mut blocks = vec![
        Block::Paragraph(crate::view::mode::summary_text(&all)),
        Block::Heading("Summary (compounds with a warning first)".into()),
        Block::Table(crate::view::mode::summary_grid(&all)),
    ];
    for (r, matrix) in results {
        blocks.extend(blocks_of(&crate::view::mode::parts(r)));
        blocks.push(Block::Figure {
            svg: figure(r, matrix, u)?.text,
            caption: format!(
                "{}: rates with the {} model's global curves; double-reciprocal, Dixon and Cornish-Bowden views with lines from that model (for reading the mechanism only); Akaike weights; residuals of every model on one scale.",
                compound_name(r),
                drawn(r).map_or("chosen", |m| m.model)
            ),
        });
    }
    blocks.push(Block::Failures(failures.iter().map(|e| e.to_string()).collect()));
    Ok(Section { heading: "Mechanism".into(), command: Some(command.to_string()), blocks })
}
