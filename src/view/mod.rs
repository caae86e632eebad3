//! Views: result structs → terminal table, CSV and JSON. Nothing here
//! computes; nothing outside `cli` imports from `cli`, so the sentence every
//! human-readable report ends with is held here for the views.

pub mod ic50;
pub mod ki;
pub mod km;
pub mod mode;
pub mod onset;
pub mod plan;
pub mod rank;
pub mod rates;
pub mod registry;

/// The sentence every human-readable report ends with.
pub const CAUTION: &str = "These are research estimates whose validity rests on the stated assumptions \
(model, weighting, mechanism); follow your laboratory's validated procedures before acting on them.";

/// How often each key occurs, in order of first appearance, written for a
/// report's summary line: `competitive × 2, mixed × 1` (empty for no keys).
pub fn tally<'a>(keys: impl IntoIterator<Item = &'a str>) -> String {
    let mut counts: Vec<(&str, usize)> = Vec::new();
    for key in keys {
        match counts.iter_mut().find(|(k, _)| *k == key) {
            Some((_, n)) => *n += 1,
            None => counts.push((key, 1)),
        }
    }
    counts.iter().map(|(k, n)| format!("{k} × {n}")).collect::<Vec<_>>().join(", ")
}

/// A table as text cells: the one builder behind a result's terminal table
/// and its HTML report table, so the two always show the same thing.
#[derive(Debug, Clone, Default)]
pub struct Grid {
    /// Column headings.
    pub header: Vec<String>,
    /// Rows; numbers already formatted.
    pub rows: Vec<Vec<String>>,
}

impl Grid {
    /// An empty table with these headings.
    pub fn new(header: Vec<String>) -> Grid {
        Grid { header, rows: Vec::new() }
    }

    /// The terminal rendering, in the house style.
    pub fn terminal(&self) -> String {
        let mut grid = crate::io::output::new_grid(self.header.clone());
        for row in &self.rows {
            grid.add_row(row.clone());
        }
        grid.to_string()
    }
}

/// One piece of a human-readable report, in order: the terminal writes each
/// as lines, the HTML report as a heading, a paragraph, a table or a list.
#[derive(Debug, Clone)]
pub enum Part {
    /// The result's title line.
    Title(String),
    /// A title with its one-line finding: one line on the terminal
    /// (`title — finding`), a heading and a paragraph in the report.
    TitleWith {
        /// What the result is about (`Inhibition mode — KX-201`).
        title: String,
        /// The finding, in one line.
        finding: String,
    },
    /// A line of text.
    Line(String),
    /// A table.
    Table(Grid),
    /// A warning: its stable code and the message.
    Warning {
        /// The stable kebab-case code (README's warning table).
        code: String,
        /// What it means for this result.
        message: String,
    },
}

/// The terminal text of a report's parts, one line each (a table as its rows).
pub fn terminal(parts: &[Part]) -> String {
    let mut out = String::new();
    for part in parts {
        match part {
            Part::Title(t) | Part::Line(t) => out.push_str(t),
            Part::TitleWith { title, finding } => out.push_str(&format!("{title} — {finding}")),
            Part::Table(g) => out.push_str(&g.terminal()),
            Part::Warning { code, message } => out.push_str(&format!("warning [{code}]: {message}")),
        }
        out.push('\n');
    }
    out
}
