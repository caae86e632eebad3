//! Pictures and the report section for `kimech rank`: per target and
//! endpoint, compounds by pKi (most potent at the top) with the interval of
//! the mean; censored values (`Ki > 10 uM`) are drawn as bounds — an open
//! marker with an arrow pointing where the value lies — never as points.

use super::charts::{Ranked, ranking_panel};
use super::html::{Block, Section};
use super::xy::Direction;
use super::{PANEL, Svg};
use crate::analysis::rank::RankRow;
use crate::error::{Error, Result};
use crate::units::{ConcUnit, Qualifier};

/// pKi of a Ki in mol/L.
fn p(molar: f64) -> Option<f64> {
    (molar > 0.0 && molar.is_finite()).then(|| -molar.log10())
}

/// Which way the true pKi lies for a bounded Ki: Ki > x means pKi < −log x.
fn direction(q: Qualifier) -> Option<Direction> {
    match q {
        Qualifier::Greater | Qualifier::AtLeast => Some(Direction::Below),
        Qualifier::Less | Qualifier::AtMost => Some(Direction::Above),
        _ => None,
    }
}

/// (target, endpoint) groups in order of first appearance, rows kept in rank order.
pub fn groups(rows: &[RankRow]) -> Vec<((String, String), Vec<&RankRow>)> {
    let mut out: Vec<((String, String), Vec<&RankRow>)> = Vec::new();
    for r in rows {
        let key = (r.target.clone(), r.endpoint.clone());
        match out.iter_mut().find(|(k, _)| *k == key) {
            Some((_, v)) => v.push(r),
            None => out.push((key, vec![r])),
        }
    }
    out
}

/// The ranking chart of one group; rows without a pKi (conflicting bounds) are
/// left out and counted in a note.
pub fn group_figure(target: &str, endpoint: &str, rows: &[&RankRow]) -> Result<Svg> {
    let shown: Vec<Ranked> = rows
        .iter()
        .filter_map(|r| {
            let value = r.pki?;
            let bound = direction(r.qualifier);
            let (low, high) = if bound.is_some() { (None, None) } else { (r.high.and_then(p), r.low.and_then(p)) };
            Some(Ranked { label: r.compound.clone(), value, low, high, bound })
        })
        .collect();
    let label = if endpoint.eq_ignore_ascii_case("kiu") { "pKiu" } else { "pKi" };
    let mut panel = ranking_panel(&format!("{target}: compounds by {label}"), &format!("{label} (−log₁₀ M)"), &shown);
    panel.subtitle = Some("most potent at the top; bars: interval of the mean; open markers: bounds".into());
    let hidden = rows.len() - shown.len();
    if hidden > 0 {
        panel.notes.push(format!("{hidden} compound(s) with conflicting bounds have no pKi and are not drawn."));
    }
    let height = (150 + 30 * shown.len().max(1) as u32).max(260);
    super::chart(&panel, (PANEL.0 + 250, height))
}

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
        blocks.push(Block::Table(super::html::Table { header: table.header.clone(), rows: attention }));
    }
    blocks.push(Block::Heading("Ranking by pKi (most potent first within each target)".into()));
    blocks.push(Block::Table(super::html::Table { header: table.header, rows: table.rows }));
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
    let mut flags: Vec<(String, usize)> = Vec::new();
    for code in rows.iter().flat_map(|r| r.flags.iter().map(|f| f.code.clone())) {
        match flags.iter_mut().find(|(c, _)| *c == code) {
            Some((_, n)) => *n += 1,
            None => flags.push((code, 1)),
        }
    }
    let mut text = format!("{} rows: {ranked} ranked, {bounds} bounds, {errors} without a value.", rows.len());
    if !flags.is_empty() {
        let listed: Vec<String> = flags.iter().map(|(c, n)| format!("{c} × {n}")).collect();
        text.push_str(&format!(" Flags: {}.", listed.join(", ")));
    }
    text
}
