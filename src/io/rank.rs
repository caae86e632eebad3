//! The reader of `kimech rank`: the CSV `kimech ki` writes, or any table
//! with `compound`, a Ki (unit in the cell, the header, a `unit` column or a
//! default unit) and an optional `qualifier` column, one row at a time into
//! the aggregation's [`Entry`].

use crate::analysis::rank::Entry;
use crate::error::{Error, Result};
use crate::io::input::{ColumnSpec, Record, Table};
use crate::units::{ConcUnit, Qualifier, parse_written};

const COMPOUND: ColumnSpec = ColumnSpec::new("compound", &["compound_id", "compound_name", "molecule", "id"]);
const TARGET: ColumnSpec = ColumnSpec::new("target", &["target_name", "protein"]);
const KI: ColumnSpec = ColumnSpec::new("ki", &["kiu", "ki_value", "value"]);
const PKI: ColumnSpec = ColumnSpec::new("pki", &["p_value", "pkiu"]);
const UNIT: ColumnSpec = ColumnSpec::new("unit", &["ki_unit"]);
const QUALIFIER: ColumnSpec = ColumnSpec::new("qualifier", &["relation", "ki_qualifier"]);
const ENDPOINT: ColumnSpec = ColumnSpec::new("endpoint", &[]);
const LOW: ColumnSpec = ColumnSpec::new("ki_low", &[]);
const HIGH: ColumnSpec = ColumnSpec::new("ki_high", &[]);
const INTERVAL_METHOD: ColumnSpec = ColumnSpec::new("interval_method", &[]);
const HEAVY_ATOMS: ColumnSpec = ColumnSpec::new("heavy_atoms", &["heavy_atom_count", "hac"]);
const MECHANISM: ColumnSpec = ColumnSpec::new("mechanism", &[]);
const MECHANISM_SOURCE: ColumnSpec = ColumnSpec::new("mechanism_source", &[]);
const METHOD: ColumnSpec = ColumnSpec::new("method", &[]);
const FLAGS: ColumnSpec = ColumnSpec::new("flags", &[]);
const CONDITIONS: ColumnSpec = ColumnSpec::new("conditions", &[]);
const ERROR: ColumnSpec = ColumnSpec::new("error", &[]);
const ASSAY_ID: ColumnSpec = ColumnSpec::new("assay_id", &["assay_ids", "experiment_id", "run_id"]);

/// Where each known column is.
pub struct Columns {
    compound: usize,
    ki: Option<usize>,
    pki: Option<usize>,
    target: Option<usize>,
    unit: Option<usize>,
    qualifier: Option<usize>,
    endpoint: Option<usize>,
    low: Option<usize>,
    high: Option<usize>,
    interval_method: Option<usize>,
    heavy_atoms: Option<usize>,
    mechanism: Option<usize>,
    mechanism_source: Option<usize>,
    method: Option<usize>,
    flags: Option<usize>,
    conditions: Option<usize>,
    error: Option<usize>,
    assay_id: Option<usize>,
}

impl Columns {
    /// Finds the known columns; compound and a ki or pki column are required.
    pub fn find(table: &Table) -> Result<Columns> {
        let ki = table.find(&KI);
        let pki = table.find(&PKI);
        if ki.is_none() && pki.is_none() {
            return Err(missing_value_column(table));
        }
        Ok(Columns {
            compound: table.require(&COMPOUND)?,
            ki,
            pki,
            target: table.find(&TARGET),
            unit: table.find(&UNIT),
            qualifier: table.find(&QUALIFIER),
            endpoint: table.find(&ENDPOINT),
            low: table.find(&LOW),
            high: table.find(&HIGH),
            interval_method: table.find(&INTERVAL_METHOD),
            heavy_atoms: table.find(&HEAVY_ATOMS),
            mechanism: table.find(&MECHANISM),
            mechanism_source: table.find(&MECHANISM_SOURCE),
            method: table.find(&METHOD),
            flags: table.find(&FLAGS),
            conditions: table.find(&CONDITIONS),
            error: table.find(&ERROR),
            assay_id: table.find(&ASSAY_ID),
        })
    }
}

/// Reads every row into an [`Entry`]. A row that cannot be used is returned
/// as an error naming its line, and, when it names a compound, also as an
/// entry with `error` set, so that the compound keeps its registry row.
pub fn read_entries(table: &Table, ki_unit: Option<ConcUnit>) -> Result<(Vec<Entry>, Vec<Error>)> {
    let cols = Columns::find(table)?;
    let mut entries = Vec::new();
    let mut failures = Vec::new();
    for record in &table.rows {
        let (entry, failure) = entry_for_row(table, &cols, record, ki_unit);
        entries.extend(entry);
        failures.extend(failure);
    }
    Ok((entries, failures))
}

/// One row as an entry, a failure, or both (a failed row that names its compound).
pub fn entry_for_row(
    table: &Table,
    cols: &Columns,
    record: &Record,
    ki_unit: Option<ConcUnit>,
) -> (Option<Entry>, Option<Error>) {
    match read_entry(table, cols, record, ki_unit) {
        Ok(e) => (Some(e), None),
        Err(error) => {
            let compound = text(table, record, Some(cols.compound));
            let entry = (!compound.is_empty()).then(|| {
                let endpoint = text(table, record, cols.endpoint);
                Entry {
                    file: table.source.clone(),
                    line: record.line,
                    compound,
                    target: text(table, record, cols.target),
                    endpoint: if endpoint.is_empty() { "Ki".into() } else { endpoint },
                    error: Some(error.to_string()),
                    ..Entry::default()
                }
            });
            (entry, Some(error))
        }
    }
}

fn missing_value_column(table: &Table) -> Error {
    Error::MissingColumn {
        path: table.source.clone(),
        column: "ki".into(),
        aliases: "kiu, ki_value, value, or a pki / p_value column".into(),
        found: table.columns.iter().map(|c| c.header.as_str()).collect::<Vec<_>>().join(", "),
    }
}

/// Text of an optional column, with the formula guard's apostrophe removed
/// (so our own exports read back as they were).
fn text(table: &Table, record: &Record, col: Option<usize>) -> String {
    col.map(|c| {
        let t = table.text(record, c);
        match t.strip_prefix('\'') {
            Some(rest) if rest.starts_with(['=', '+', '-', '@', '\t', '\r']) => rest.to_string(),
            _ => t.to_string(),
        }
    })
    .unwrap_or_default()
}

fn read_entry(table: &Table, cols: &Columns, record: &Record, ki_unit: Option<ConcUnit>) -> Result<Entry> {
    let compound = text(table, record, Some(cols.compound));
    if compound.is_empty() {
        return Err(table.cell_error(record, cols.compound, "no compound name", "give the compound code"));
    }
    if let Some(c) = cols.error
        && !table.text(record, c).is_empty()
    {
        return Err(Error::Data {
            group: format!(
                "{}, line {} (compound '{}')",
                table.source,
                record.line,
                crate::report::short_id(&compound)
            ),
            problem: format!("the row has no Ki: {}", table.text(record, c)),
            expected: "fix the input of `kimech ki` for this row and convert again".into(),
        });
    }
    let row_unit = match cols.unit.map(|c| (c, table.text(record, c))) {
        Some((c, t)) if !t.is_empty() => Some(ConcUnit::parse(t).ok_or_else(|| {
            table.cell_error(
                record,
                c,
                "not a concentration unit",
                format!("use one of {}", crate::units::ACCEPTED_UNITS),
            )
        })?),
        _ => ki_unit,
    };
    let (cell_qualifier, ki, unit) = match (cols.ki, cols.pki) {
        (Some(c), _) if !table.text(record, c).is_empty() => {
            let v = table.concentration(record, c, row_unit, "--ki-unit")?;
            (v.qualifier, v.molar, Some(v.unit))
        }
        (_, Some(c)) if !table.text(record, c).is_empty() => {
            let w = parse_written(table.text(record, c))
                .map_err(|p| table.cell_error(record, c, p.describe(), "expected a pKi such as 7.2"))?;
            // A bound on pKi is the reverse bound on Ki.
            (w.qualifier.reversed(), 10f64.powf(-w.value), None)
        }
        (Some(c), _) | (None, Some(c)) => {
            return Err(table.cell_error(record, c, "empty cell", "give the Ki, e.g. '12 nM' or '> 10 uM'"));
        }
        (None, None) => return Err(missing_value_column(table)),
    };
    let qualifier = merge_qualifier(table, cols, record, cell_qualifier)?;
    let value_col = cols.ki.or(cols.pki).unwrap_or(cols.compound);
    if !(ki > 0.0 && ki.is_finite()) {
        return Err(table.cell_error(record, value_col, "a Ki must be positive", "give a positive concentration"));
    }
    let end = |col: Option<usize>| -> Result<Option<f64>> {
        match col {
            Some(c) if !table.text(record, c).is_empty() => {
                Ok(Some(table.concentration(record, c, unit.or(row_unit), "--ki-unit")?.molar))
            }
            _ => Ok(None),
        }
    };
    let heavy_atoms = match cols.heavy_atoms {
        Some(c) if !table.text(record, c).is_empty() => {
            let h = table.number(record, c)?;
            if h < 1.0 {
                return Err(table.cell_error(record, c, "fewer than one heavy atom", "give the heavy-atom count"));
            }
            Some(h)
        }
        _ => None,
    };
    let mechanism = match (text(table, record, cols.mechanism), text(table, record, cols.mechanism_source)) {
        (m, _) if m.is_empty() => String::new(),
        (m, s) if s.is_empty() => m,
        (m, s) => format!("{m} ({s})"),
    };
    let endpoint = text(table, record, cols.endpoint);
    Ok(Entry {
        file: table.source.clone(),
        assay: text(table, record, cols.assay_id),
        error: None,
        line: record.line,
        compound,
        target: text(table, record, cols.target),
        endpoint: if endpoint.is_empty() { "Ki".into() } else { endpoint },
        qualifier,
        ki,
        low: end(cols.low)?,
        high: end(cols.high)?,
        interval_method: Some(text(table, record, cols.interval_method)).filter(|t| !t.is_empty()),
        heavy_atoms,
        mechanism,
        method: text(table, record, cols.method),
        flags: text(table, record, cols.flags)
            .split([';', ','])
            .map(str::trim)
            .filter(|f| !f.is_empty())
            .map(String::from)
            .collect(),
        conditions: text(table, record, cols.conditions),
    })
}

/// The qualifier from a `qualifier` column and the one in the value cell must agree.
fn merge_qualifier(table: &Table, cols: &Columns, record: &Record, cell: Qualifier) -> Result<Qualifier> {
    let Some(c) = cols.qualifier else { return Ok(cell) };
    let t = table.text(record, c).trim_start_matches('\'');
    let (q, rest) = Qualifier::split(t);
    if !rest.is_empty() {
        return Err(table.cell_error(
            record,
            c,
            "not a qualifier",
            "use one of = < <= > >= ~, or leave empty for exact",
        ));
    }
    match (q.is_bound(), cell.is_bound()) {
        (true, true) if q != cell => Err(table.cell_error(
            record,
            c,
            format!("disagrees with the qualifier '{cell}' written in the value cell"),
            "write the qualifier once",
        )),
        (true, _) => Ok(q),
        _ if q == Qualifier::About => Ok(Qualifier::About),
        _ => Ok(cell),
    }
}
