//! The one reader every command uses: a CSV (or TSV, by extension) from a
//! path or `-` for stdin, header names matched case-insensitively with
//! aliases, units taken from the header (`ic50 (nM)`, `substrate [uM]`), and
//! cell accessors whose errors name file, line, column and value.

use std::io::Read;

use super::line_endings::{LineLog, UnifiedLineEndings};
use crate::error::{CellError, Error, Result};
/// "line 4" or "lines 4-9" (readers that stream name their groups by it).
pub use crate::report::line_span;
use crate::units::{ACCEPTED_UNITS, CellProblem, ConcUnit, Qualifier, Written, parse_written, plain_decimal};

/// A column a command looks for: its name and other accepted spellings.
#[derive(Debug, Clone, Copy)]
pub struct ColumnSpec {
    /// The canonical name (as documented).
    pub name: &'static str,
    /// Other accepted names (lower case).
    pub aliases: &'static [&'static str],
}

impl ColumnSpec {
    /// A column spec.
    pub const fn new(name: &'static str, aliases: &'static [&'static str]) -> Self {
        ColumnSpec { name, aliases }
    }

    fn matches(&self, key: &str) -> bool {
        key == self.name || self.aliases.contains(&key)
    }
}

/// One header cell, split into its name and the unit written with it.
#[derive(Debug, Clone)]
pub struct Column {
    /// As written in the file.
    pub header: String,
    /// Lower-cased name without the unit, spaces and dashes as `_`.
    pub key: String,
    /// The text inside `(…)` or `[…]` after the name, if any.
    pub unit_text: Option<String>,
}

impl Column {
    pub(crate) fn parse(header: &str) -> Column {
        let h = header.trim().trim_start_matches('\u{feff}');
        let (name, unit_text) = match h.find(['(', '[']) {
            Some(open) if h.ends_with(')') || h.ends_with(']') => {
                (h[..open].trim(), Some(h[open + 1..h.len() - 1].trim().to_string()))
            }
            _ => (h, None),
        };
        let key = name.to_lowercase().split([' ', '-', '_']).filter(|p| !p.is_empty()).collect::<Vec<_>>().join("_");
        Column { header: h.to_string(), key, unit_text }
    }
}

/// One data row and the line it came from.
#[derive(Debug, Clone)]
pub struct Record {
    /// 1-based line number in the file.
    pub line: u64,
    /// Cells, trimmed, one per column.
    pub cells: Vec<String>,
}

/// A data row as the cell accessors read it: its line and its cells, trimmed.
pub trait Row {
    /// 1-based line number in the file.
    fn line(&self) -> u64;
    /// The text of cell `col` ("" past the end).
    fn cell(&self, col: usize) -> &str;
}

impl Row for Record {
    fn line(&self) -> u64 {
        self.line
    }

    fn cell(&self, col: usize) -> &str {
        self.cells.get(col).map_or("", String::as_str)
    }
}

impl<R: Row + ?Sized> Row for &R {
    fn line(&self) -> u64 {
        (**self).line()
    }

    fn cell(&self, col: usize) -> &str {
        (**self).cell(col)
    }
}

/// A whole table in memory.
#[derive(Debug, Clone)]
pub struct Table {
    /// The file as named by the user, or `<stdin>`.
    pub source: String,
    /// Header cells.
    pub columns: Vec<Column>,
    /// The line the header is on (after any leading comments).
    pub header_line: u64,
    /// Data rows in file order.
    pub rows: Vec<Record>,
}

/// A concentration read from a cell, already in mol/L.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Concentration {
    /// `>`, `<`, … or exact.
    pub qualifier: Qualifier,
    /// The value in mol/L.
    pub molar: f64,
    /// The unit it was written in (cell, header or default).
    pub unit: ConcUnit,
}

impl Table {
    /// Reads `path` (`-` for stdin). Lines starting with `#` are comments.
    pub fn read(path: &str) -> Result<Table> {
        let source = if path == "-" { "<stdin>".to_string() } else { path.to_string() };
        let mut bytes = Vec::new();
        let read = if path == "-" {
            std::io::stdin().read_to_end(&mut bytes)
        } else {
            std::fs::File::open(path).and_then(|mut f| f.read_to_end(&mut bytes))
        };
        read.map_err(|source_err| Error::Read { path: source.clone(), source: source_err })?;
        super::provenance::record_bytes(path, &bytes);
        let delimiter = if path.ends_with(".tsv") || path.ends_with(".tab") { b'\t' } else { b',' };
        Table::parse(&source, &bytes, delimiter)
    }

    /// Parses CSV bytes; `source` names them in errors. Comment lines (first
    /// cell starting with `#`) and blank lines are skipped; the first other
    /// line is the header.
    pub fn parse(source: &str, bytes: &[u8], delimiter: u8) -> Result<Table> {
        let lines = LineLog::default();
        let mut reader = csv::ReaderBuilder::new()
            .delimiter(delimiter)
            .trim(csv::Trim::All)
            .has_headers(false)
            .flexible(true)
            .from_reader(UnifiedLineEndings::new(bytes, lines.clone()));
        let csv_error = |line: u64, message: String| Error::Csv { path: source.to_string(), line, message };
        let mut columns: Option<Vec<Column>> = None;
        let mut header_line = 1;
        let mut rows = Vec::new();
        let mut record = csv::StringRecord::new();
        loop {
            match reader.read_record(&mut record) {
                Ok(false) => break,
                Ok(true) => {}
                Err(e) => {
                    return Err(csv_error(lines.line_at(e.position().map_or(0, |p| p.byte())), describe_csv_error(&e)));
                }
            }
            let line = lines.line_at(record.position().map_or(0, |p| p.byte()));
            if record.iter().all(str::is_empty) || record.get(0).is_some_and(|c| c.starts_with('#')) {
                continue;
            }
            let Some(header) = &columns else {
                let parsed: Vec<Column> = record.iter().map(Column::parse).collect();
                check_unique_columns(source, line, &parsed)?;
                columns = Some(parsed);
                header_line = line;
                continue;
            };
            if record.len() != header.len() {
                return Err(csv_error(
                    line,
                    format!(
                        "this row has {} fields but the header has {}; every row needs one cell per header column (quote cells that contain the delimiter)",
                        record.len(),
                        header.len()
                    ),
                ));
            }
            rows.push(Record { line, cells: record.iter().map(str::to_string).collect() });
        }
        match columns {
            Some(columns) if !rows.is_empty() => Ok(Table { source: source.to_string(), columns, header_line, rows }),
            _ => Err(Error::Empty { path: source.to_string() }),
        }
    }

    /// Index of the column matching `spec`, if present.
    pub fn find(&self, spec: &ColumnSpec) -> Option<usize> {
        self.columns.iter().position(|c| spec.matches(&c.key))
    }

    /// Index of the column matching `spec`, or an error listing what is
    /// there. Two columns that both match (`ki` and an accepted alias of it)
    /// are an error naming both, not a silent choice of the first.
    pub fn require(&self, spec: &ColumnSpec) -> Result<usize> {
        let mut matching = self.columns.iter().enumerate().filter(|(_, c)| spec.matches(&c.key));
        if let (Some(first), Some(second)) = (matching.next(), matching.next()) {
            return Err(Error::Csv {
                path: self.source.clone(),
                line: self.header_line,
                message: format!(
                    "{} and {} both give the '{}' column; keep one of them (rename or remove the other)",
                    describe_column(first.0, first.1),
                    describe_column(second.0, second.1),
                    spec.name
                ),
            });
        }
        self.find(spec).ok_or_else(|| Error::MissingColumn {
            path: self.source.clone(),
            column: spec.name.to_string(),
            aliases: if spec.aliases.is_empty() { "none".into() } else { spec.aliases.join(", ") },
            found: self.columns.iter().map(|c| c.header.as_str()).collect::<Vec<_>>().join(", "),
        })
    }

    /// The raw text of a cell.
    pub fn text<'a, R: Row + ?Sized>(&self, row: &'a R, col: usize) -> &'a str {
        row.cell(col)
    }

    /// A cell error at `row`, `col`.
    pub fn cell_error<R: Row + ?Sized>(
        &self,
        row: &R,
        col: usize,
        problem: impl Into<String>,
        expected: impl Into<String>,
    ) -> Error {
        Error::Cell(Box::new(CellError {
            path: self.source.clone(),
            line: row.line(),
            column: self.columns[col].header.clone(),
            value: self.text(row, col).to_string(),
            problem: problem.into(),
            expected: expected.into(),
        }))
    }

    /// A plain finite number (no qualifier, no unit).
    pub fn number<R: Row + ?Sized>(&self, row: &R, col: usize) -> Result<f64> {
        let text = self.text(row, col);
        if let Some(value) = plain_decimal(text) {
            return Ok(value); // the usual cell, as parse_written reads it, without its Result
        }
        let expected = "expected a plain number such as 12.5 or 1.2e-3";
        match parse_written(text) {
            Ok(w) if w.qualifier == Qualifier::Equal && w.unit.is_none() => Ok(w.value),
            Ok(w) if w.unit.is_some() => Err(self.cell_error(row, col, "a unit is not expected here", expected)),
            Ok(_) => Err(self.cell_error(row, col, "a qualifier is not expected here", expected)),
            Err(p) => Err(self.cell_error(row, col, p.describe(), expected)),
        }
    }

    /// A number, or `None` for an empty cell.
    pub fn optional_number<R: Row + ?Sized>(&self, row: &R, col: usize) -> Result<Option<f64>> {
        if self.text(row, col).is_empty() { Ok(None) } else { self.number(row, col).map(Some) }
    }

    /// The unit declared in a column's header, if it is a concentration unit.
    pub fn header_unit(&self, col: usize) -> Result<Option<ConcUnit>> {
        match &self.columns[col].unit_text {
            None => Ok(None),
            Some(text) => ConcUnit::parse(text).map(Some).ok_or_else(|| {
                Error::Cell(Box::new(CellError {
                    path: self.source.clone(),
                    line: self.header_line,
                    column: self.columns[col].header.clone(),
                    value: text.clone(),
                    problem: "the unit in the header is not a concentration unit".into(),
                    expected: format!("use one of {ACCEPTED_UNITS}"),
                }))
            }),
        }
    }

    /// An inhibitor concentration, as every reader of inhibitor levels wants it:
    /// exact (no `<` or `>`) and zero (the uninhibited series) or positive.
    pub fn inhibitor_concentration<R: Row + ?Sized>(
        &self,
        row: &R,
        col: usize,
        default: Option<ConcUnit>,
        flag: &str,
    ) -> Result<Concentration> {
        let c = self.concentration(row, col, default, flag)?;
        if c.qualifier.is_bound() || c.molar < 0.0 {
            return Err(self.cell_error(
                row,
                col,
                "inhibitor concentration must be zero or positive, without < or >",
                "give the inhibitor concentration used, e.g. '2.5 uM' (0 for the uninhibited series)",
            ));
        }
        Ok(c)
    }

    /// A concentration with optional qualifier, in mol/L. The unit comes from
    /// the cell, else the header, else `default` (a command-line flag named
    /// `flag`); with none of these it is an error naming the column.
    pub fn concentration<R: Row + ?Sized>(
        &self,
        row: &R,
        col: usize,
        default: Option<ConcUnit>,
        flag: &str,
    ) -> Result<Concentration> {
        self.concentration_or(row, col, || Ok(self.header_unit(col)?.or(default)), flag)
    }

    /// [`Table::concentration`] for a reader that has already looked up the
    /// unit of cells without one (`header_unit(col)?.or(default)`), so that
    /// the header is not parsed again for every row.
    pub fn concentration_in<R: Row + ?Sized>(
        &self,
        row: &R,
        col: usize,
        unit: Option<ConcUnit>,
        flag: &str,
    ) -> Result<Concentration> {
        self.concentration_or(row, col, || Ok(unit), flag)
    }

    fn concentration_or<R: Row + ?Sized>(
        &self,
        row: &R,
        col: usize,
        unit_if_none: impl FnOnce() -> Result<Option<ConcUnit>>,
        flag: &str,
    ) -> Result<Concentration> {
        let expected = || format!("expected a concentration such as '150 nM' or '> 10 uM' (units: {ACCEPTED_UNITS})");
        let text = self.text(row, col);
        let written = match plain_decimal(text) {
            Some(value) => Written { qualifier: Qualifier::Equal, value, unit: None },
            None => parse_written(text).map_err(|p| match p {
                CellProblem::UnknownUnit(_) => {
                    self.cell_error(row, col, p.describe(), format!("use one of {ACCEPTED_UNITS}"))
                }
                _ => self.cell_error(row, col, p.describe(), expected()),
            })?,
        };
        let unit = match written.unit {
            Some(u) => u,
            None => match unit_if_none()? {
                Some(u) => u,
                None => {
                    return Err(Error::NoUnit {
                        path: self.source.clone(),
                        column: self.columns[col].header.clone(),
                        flag: flag.to_string(),
                    });
                }
            },
        };
        let molar = unit.to_molar(written.value);
        if !molar.is_finite() || (molar != 0.0 && molar.abs() < f64::MIN_POSITIVE) {
            return Err(self.cell_error(
                row,
                col,
                format!("{} {} is {molar:e} mol/L, beyond what a double can hold", written.value, unit.symbol()),
                "check the exponent and the unit; concentrations lie between about 1e-300 and 1e300 mol/L",
            ));
        }
        Ok(Concentration { qualifier: written.qualifier, molar, unit })
    }

    /// The unit a concentration column is expressed in, for reporting: the
    /// header's, else the flag's, else that of the first cell that has one.
    pub fn column_unit(&self, col: usize, default: Option<ConcUnit>) -> Result<Option<ConcUnit>> {
        if let Some(u) = self.header_unit(col)?.or(default) {
            return Ok(Some(u));
        }
        Ok(self.rows.iter().find_map(|r| parse_written(self.text(r, col)).ok().and_then(|w| w.unit)))
    }

    /// The unit text written in a column's header, verbatim (for rates).
    pub fn unit_text(&self, col: usize) -> Option<&str> {
        self.columns[col].unit_text.as_deref()
    }
}

/// Refuses a header in which two columns have the same name once case, the
/// unit and spacing are set aside (`IC50 (nM)` and `ic50 [uM]`): every
/// command would silently read only the first of them.
pub(crate) fn check_unique_columns(source: &str, line: u64, columns: &[Column]) -> Result<()> {
    for (second, column) in columns.iter().enumerate() {
        if column.key.is_empty() {
            continue;
        }
        if let Some(first) = columns[..second].iter().position(|c| c.key == column.key) {
            return Err(Error::Csv {
                path: source.to_string(),
                line,
                message: format!(
                    "{} and {} have the same name; every column needs its own name (rename or remove one)",
                    describe_column(first, &columns[first]),
                    describe_column(second, column)
                ),
            });
        }
    }
    Ok(())
}

/// `column 3 ('ic50 (nM)')`, counting from 1 as a spreadsheet does.
fn describe_column(index: usize, column: &Column) -> String {
    format!("column {} ('{}')", index + 1, column.header)
}

pub(crate) fn describe_csv_error(e: &csv::Error) -> String {
    match e.kind() {
        csv::ErrorKind::Utf8 { .. } => "the text is not valid UTF-8; save the file as UTF-8".to_string(),
        csv::ErrorKind::Io(io) => format!("read error: {io}"),
        _ => format!("malformed CSV: {e}"),
    }
}

/// The table's rows grouped by the text of `label_col` (one group, labelled
/// `None`, without one), groups in order of first appearance and rows in file
/// order: the series of `km`, the compounds of `mode`, the curves of `rates`.
pub fn group_by_label(table: &Table, label_col: Option<usize>) -> Vec<(Option<String>, Vec<&Record>)> {
    let mut groups: Vec<(Option<String>, Vec<&Record>)> = Vec::new();
    let mut index: std::collections::HashMap<Option<String>, usize> = std::collections::HashMap::new();
    for row in &table.rows {
        let label = label_col.map(|c| table.text(row, c).to_string());
        let k = *index.entry(label.clone()).or_insert_with(|| {
            groups.push((label, Vec::new()));
            groups.len() - 1
        });
        groups[k].1.push(row);
    }
    groups
}

/// Where a group's rows are: the table's source and their lines.
pub fn rows_source(table: &Table, rows: &[&Record]) -> crate::report::Origin {
    crate::report::Origin::new(&table.source, rows.iter().map(|r| r.line))
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    fn table(text: &str) -> Table {
        Table::parse("t.csv", text.as_bytes(), b',').unwrap()
    }

    #[test]
    fn splits_units_from_headers_and_matches_case_insensitively() {
        let t = table("Substrate (uM),Rate [uM/min]\n1,2\n");
        assert_eq!(t.columns[0].key, "substrate");
        assert_eq!(t.header_unit(0).unwrap(), Some(ConcUnit::Micromolar));
        assert_eq!(t.unit_text(1), Some("uM/min"));
        assert!(t.require(&ColumnSpec::new("substrate", &[])).is_ok());
    }

    #[test]
    fn reports_line_numbers_after_comments() {
        let t = table("# provenance\nx,y\n1,2\n# note\n3,zz\n");
        assert_eq!(t.rows[0].line, 3);
        assert_eq!(t.rows[1].line, 5);
        let e = t.number(&t.rows[1], 1).unwrap_err().to_string();
        assert!(e.contains("line 5") && e.contains("'y'") && e.contains("zz"), "{e}");
    }

    #[test]
    fn line_numbers_are_right_for_crlf_cr_and_mixed_line_endings() {
        for text in ["x,y\r\n1,2\r\n\r\n3,zz\r\n", "x,y\r1,2\r\r3,zz\r", "x,y\n1,2\r\n\r3,zz"] {
            let t = table(text);
            assert_eq!((t.rows[0].line, t.rows[1].line), (2, 4), "{text:?}");
            let e = t.number(&t.rows[1], 1).unwrap_err().to_string();
            assert!(e.contains("line 4") && e.contains("zz"), "{e}");
        }
        let e = Table::parse("t.csv", b"x,y\r\n1,2\r\n3\r\n", b',').unwrap_err().to_string();
        assert!(e.contains("line 3"), "{e}");
    }

    #[test]
    fn duplicate_column_names_are_an_error_naming_both() {
        let e = Table::parse("t.csv", b"# note\nIC50 (nM),compound,ic50 [uM]\n1,a,2\n", b',').unwrap_err().to_string();
        assert!(
            e.contains("t.csv, line 2") && e.contains("column 1 ('IC50 (nM)')") && e.contains("column 3 ('ic50 [uM]')"),
            "{e}"
        );
        let t = table("s,substrate\n1,2\n");
        let e = t.require(&ColumnSpec::new("substrate", &["s"])).unwrap_err().to_string();
        assert!(e.contains("column 1 ('s')") && e.contains("column 2 ('substrate')"), "{e}");
    }

    #[test]
    fn concentration_unit_from_cell_header_or_flag() {
        let t = table("c (nM),d\n150,2 uM\n");
        let c = t.concentration(&t.rows[0], 0, None, "--x").unwrap();
        assert_relative_eq!(c.molar, 1.5e-7, max_relative = 1e-15);
        let d = t.concentration(&t.rows[0], 1, Some(ConcUnit::Molar), "--x").unwrap();
        assert_relative_eq!(d.molar, 2e-6, max_relative = 1e-15);
        let t = table("d\n2\n");
        let e = t.concentration(&t.rows[0], 0, None, "--d-unit").unwrap_err().to_string();
        assert!(e.contains("--d-unit") && e.contains("'d'"), "{e}");
    }
}
