//! The report section of `kimech onset`.

use crate::analysis::onset::*;
use crate::error::*;
use crate::plot::onset::*;

/// The report section of an onset run: per compound the constants, the
/// evidence, warnings and the figure; then the compounds that failed.
pub fn section(
    pairs: &[(&Compound, &OnsetResult)],
    failures: &[crate::error::Error],
    command: &str,
) -> Result<crate::page::Section> {
    use crate::page::{Block, Section, Table};
    let mut blocks = Vec::new();
    for (compound, r) in pairs {
        blocks.push(Block::Heading(format!("Time-dependent inhibition — {}", name(r))));
        let (header, rows) = crate::view::onset::constant_table(r);
        if !rows.is_empty() {
            blocks.push(Block::Table(Table { header, rows }));
        }
        blocks.push(Block::Paragraph(format!("Onset {}; chosen by {}.", r.onset.name(), r.evidence)));
        blocks.push(Block::Paragraph(format!("Substrate correction: {}.", r.substrate_correction)));
        blocks.push(Block::Warnings(r.warnings.iter().map(|w| (w.code.to_string(), w.message.clone())).collect()));
        blocks.push(Block::Figure {
            svg: compound_figure(compound, r)?.text,
            caption: format!(
                "{}: progress curves with the chosen global fit; kobs of each curve's own fit against [I] with the one-step line and the two-step hyperbola (chosen scheme solid).",
                name(r)
            ),
        });
    }
    blocks.push(Block::Failures(failures.iter().map(|e| e.to_string()).collect()));
    Ok(Section { heading: "Time-dependent inhibition".into(), command: Some(command.to_string()), blocks })
}
