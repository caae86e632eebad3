//! The report section of `kimech km`.

use super::*;
use crate::analysis::km::*;
use crate::error::*;
use crate::plot::km::*;

/// The report section of a km run: per series a table, fit statistics,
/// notes, warnings and the figure; then the series that failed.
pub fn section(results: &[KmResult], failures: &[Error], command: &str) -> Result<Section> {
    let mut blocks = Vec::new();
    for r in results {
        blocks.push(Block::Heading(format!("Michaelis–Menten fit — {}", series_name(r))));
        let level = format!("{:.0}%", r.confidence * 100.0);
        let (header, rows) = (crate::view::km::param_header(r.confidence), crate::view::km::param_rows(r));
        blocks.push(Block::Table(Table { header, rows }));
        blocks.push(Block::Paragraph(format!("{}.", crate::view::km::fit_summary(r))));
        for note in [&r.params.vmax.note, &r.params.km.note].into_iter().flatten() {
            blocks.push(Block::Paragraph(format!("Note: {note}")));
        }
        blocks.push(Block::Warnings(r.warnings.iter().map(|w| (w.code.to_string(), w.message.clone())).collect()));
        blocks.push(Block::Figure {
            svg: series_figure(r)?.text,
            caption: format!(
                "{}: rate with the fitted curve and pointwise {level} band; residuals; double-reciprocal view (line from the fitted parameters, for display only).",
                series_name(r)
            ),
        });
    }
    blocks.push(Block::Failures(failures.iter().map(|e| e.to_string()).collect()));
    Ok(Section { heading: "Km and Vmax".into(), command: Some(command.to_string()), blocks })
}
