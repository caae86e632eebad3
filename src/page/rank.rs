//! The report section of `kimech rank`.

use super::*;
use crate::analysis::rank::*;
use crate::error::*;
use crate::plot::rank::*;
use crate::units::ConcUnit;

/// The report section of a rank run: a summary (counts per flag), the rows
/// that carry an error or a flag first, the whole ranking as an HTML table,
/// then one chart per target.
pub fn section(rows: &[RankRow], unit: ConcUnit, failures: &[Error], command: &str) -> Result<Section> {
    let shown: Vec<RankRow> = rows.iter().map(|r| crate::view::rank::in_unit(r, unit)).collect();
    let table = crate::view::rank::rank_table(&shown, unit);
    let mut blocks = vec![Block::Paragraph(summary(&shown))];
    let attention: Vec<Vec<String>> = shown
        .iter()
        .zip(&table.rows)
        .filter(|(r, _)| r.error.is_some() || !r.flags.is_empty())
        .map(|(_, cells)| cells.clone())
        .collect();
    if !attention.is_empty() {
        blocks.push(Block::Heading("Rows with an error or a flag".into()));
        blocks.push(Block::Table(crate::page::Table { header: table.header.clone(), rows: attention }));
    }
    blocks.push(Block::Heading("Ranking by pKi (most potent first within each target)".into()));
    blocks.push(Block::Table(crate::page::Table { header: table.header, rows: table.rows }));
    let footnotes: Vec<String> = table.methods.iter().enumerate().map(|(i, m)| format!("[{}] {m}", i + 1)).collect();
    if !footnotes.is_empty() {
        blocks.push(Block::Paragraph(footnotes.join(" · ")));
    }
    let notes = crate::view::rank::row_notes(&shown);
    if !notes.is_empty() {
        blocks.push(Block::Notes(notes));
    }
    blocks.push(Block::Paragraph(crate::view::rank::LE_NOTE.into()));
    for ((target, endpoint), group) in groups(rows) {
        blocks.push(Block::Figure {
            svg: group_figure(&target, &endpoint, &group)?.text,
            caption: format!(
                "{target}, {endpoint}: compounds by potency. Horizontal bars are intervals of the mean pKi; censored values are drawn as bounds with an arrow towards the side where the value lies."
            ),
        });
    }
    blocks.push(Block::Failures(failures.iter().map(|e| e.to_string()).collect()));
    Ok(Section { heading: "Ranking".into(), command: Some(command.to_string()), blocks })
}

/// Counts for the top of the section: rows, ranked, bounds, errors, and each flag.
fn summary(rows: &[RankRow]) -> String {
    let ranked = rows.iter().filter(|r| r.rank.is_some()).count();
    let bounds = rows.iter().filter(|r| r.qualifier.is_bound()).count();
    let errors = rows.iter().filter(|r| r.error.is_some()).count();
    let flags = crate::view::tally(rows.iter().flat_map(|r| r.flags.iter().map(|f| f.code.as_str())));
    let mut text = format!("{} rows: {ranked} ranked, {bounds} bounds, {errors} without a value.", rows.len());
    if !flags.is_empty() {
        text.push_str(&format!(" Flags: {flags}."));
    }
    text
}
