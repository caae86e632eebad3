//! The report section of `kimech ki` (no charts: a conversion table reads best
//! as a table): a summary, the rows with an error or a flag first, then every
//! row, the relations as footnotes and the notes in words — the same cells as
//! the terminal table ([`crate::view::ki::ki_table`]).

use super::{Block, Section, Table};
use crate::view::ki::{KiRow, ki_table};

/// The section for one `ki` run over `rows`.
pub fn section(heading: &str, rows: &[KiRow], command: &str) -> Section {
    let table = ki_table(rows);
    let mut blocks = vec![Block::Paragraph(summary(rows))];
    let attention: Vec<Vec<String>> =
        table.grid.rows.iter().zip(&table.flagged).filter(|(_, f)| **f).map(|(cells, _)| cells.clone()).collect();
    if !attention.is_empty() {
        blocks.push(Block::Heading("Rows with an error or a flag".into()));
        blocks.push(Block::Table(Table { header: table.grid.header.clone(), rows: attention }));
    }
    blocks.push(Block::Heading("Every row, in input order".into()));
    blocks.push(Block::Table(table.grid));
    let footnotes: Vec<String> = table.methods.iter().enumerate().map(|(i, m)| format!("[{}] {m}", i + 1)).collect();
    if !footnotes.is_empty() {
        blocks.push(Block::Paragraph(footnotes.join(" · ")));
    }
    blocks.push(Block::Notes(table.notes));
    Section { heading: heading.into(), command: Some(command.into()), blocks }
}

/// Counts for the top of the section: rows, converted, bounds, errors, each flag.
fn summary(rows: &[KiRow]) -> String {
    let errors = rows.iter().filter(|r| r.error.is_some()).count();
    let bounds = rows.iter().filter(|r| r.ki.qualifier.is_bound()).count();
    let flags = crate::view::tally(rows.iter().flat_map(|r| r.flags.iter().map(|c| c.as_str())));
    let mut text = format!(
        "{} rows: {} converted ({bounds} of them bounds), {errors} without a value.",
        rows.len(),
        rows.len() - errors
    );
    if !flags.is_empty() {
        text.push_str(&format!(" Flags: {flags}."));
    }
    text
}
