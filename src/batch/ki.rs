//! `ki` on one table: per row IC50 → Ki with the relation, the mechanism
//! behind it, the assumption checks and an interval; rows that fail keep
//! their place with `error` set. The command (row at a time, through
//! [`Plan`]) and the demo (whole table, [`convert_table`]) share this code.

use crate::convert::relations::parse_stated;
use crate::convert::{self, Assay, Mechanism, MechanismSource};
use crate::error::{Error, Result};
use crate::io::Table;
use crate::io::input::Record;
use crate::io::ki::{CONSUMED, Columns, Defaults, curve_flags, read_row, with_upstream_error};
use crate::units::{ConcUnit, Qualifier};
use crate::view::ki::{CSV_KEYS, KiRow, KiValue};

/// What a run needs besides its table.
#[derive(Debug, Clone, Copy)]
pub struct Settings {
    /// The conditions for rows that do not give their own.
    pub defaults: Defaults,
    /// The conversion's settings (Hill tolerance, confidence).
    pub convert: convert::Settings,
    /// Unit of the reported constants.
    pub unit: ConcUnit,
}

impl Default for Settings {
    /// The command-line defaults: conditions only from the table, mechanism unknown, enzyme assay, nM.
    fn default() -> Self {
        Settings {
            defaults: Defaults {
                ic50_unit: None,
                conc_unit: None,
                substrate: None,
                km: None,
                km_se: None,
                enzyme: None,
                ligand: None,
                kd: None,
                alpha: None,
                mechanism: None,
                assay: Assay::Enzyme,
            },
            convert: convert::Settings::default(),
            unit: ConcUnit::Nanomolar,
        }
    }
}

/// Converts every row; rows that fail keep their place with `error` set.
/// Returns the rows, the headers of the carried columns and the failures.
pub fn convert_table(table: &Table, settings: &Settings) -> Result<(Vec<KiRow>, Vec<String>, Vec<Error>)> {
    let plan = Plan::new(table, settings)?;
    let mut rows = Vec::new();
    let mut failures = Vec::new();
    for record in &table.rows {
        let (row, failure) = plan.convert(table, record);
        rows.push(row);
        failures.extend(failure);
    }
    Ok((rows, plan.carried_headers, failures))
}

/// What the header says: where each column is and which ones are carried through.
pub struct Plan {
    columns: Columns,
    carried_cols: Vec<usize>,
    /// Headers of the carried columns, as the output names them.
    pub carried_headers: Vec<String>,
    settings: Settings,
}

impl Plan {
    /// Finds the columns of `table`'s header.
    pub fn new(table: &Table, settings: &Settings) -> Result<Plan> {
        let columns = Columns::find(table)?;
        let carried_cols: Vec<usize> =
            (0..table.columns.len()).filter(|&i| !CONSUMED.iter().any(|spec| table.find(spec) == Some(i))).collect();
        let carried_headers = carried_cols
            .iter()
            .map(|&i| {
                let c = &table.columns[i];
                if CSV_KEYS.contains(&c.key.as_str()) { format!("input {}", c.header) } else { c.header.clone() }
            })
            .collect();
        Ok(Plan { columns, carried_cols, carried_headers, settings: *settings })
    }

    /// Converts one row; a row that fails keeps its place with `error` set, and the error.
    pub fn convert(&self, table: &Table, record: &Record) -> (KiRow, Option<Error>) {
        let carried = self.carried_cols.iter().map(|&i| table.text(record, i).to_string()).collect();
        convert_row(table, &self.columns, record, &self.settings, carried)
    }
}

fn convert_row(
    table: &Table,
    cols: &Columns,
    record: &Record,
    settings: &Settings,
    carried: Vec<String>,
) -> (KiRow, Option<Error>) {
    let compound = table.text(record, cols.compound).to_string();
    let mechanism = cols
        .mechanism
        .and_then(|c| parse_stated(table.text(record, c)).filter(|_| !table.text(record, c).is_empty()))
        .unwrap_or(settings.defaults.mechanism);
    let mut row = KiRow {
        source: table.source.clone(),
        row: record.line,
        confidence: settings.convert.confidence,
        compound: compound.clone(),
        ki: KiValue {
            value: None,
            unit: settings.unit.symbol().into(),
            qualifier: Qualifier::Equal,
            low: None,
            high: None,
        },
        pki: None,
        pki_qualifier: Qualifier::Equal,
        endpoint: if mechanism == Some(Mechanism::Uncompetitive) { "Kiu" } else { "Ki" },
        method: "not converted".into(),
        mechanism: mechanism.map_or("competitive", Mechanism::name),
        mechanism_source: if mechanism.is_none() { MechanismSource::Assumed } else { MechanismSource::Measured },
        flags: Vec::new(),
        error: None,
        target: cols.target.map(|c| table.text(record, c).to_string()),
        range: None,
        interval_method: None,
        messages: Vec::new(),
        conditions: String::new(),
        carried,
    };
    let outcome = read_row(table, cols, record, &settings.defaults).and_then(|input| {
        row.conditions = input.described.clone();
        convert::convert(&input.measurement, &input.conditions, &settings.convert).map_err(|p| Error::Data {
            group: format!(
                "{}, line {} (compound '{}')",
                table.source,
                record.line,
                crate::report::short_id(&compound)
            ),
            problem: p.problem(),
            expected: p.expected(),
        })
    });
    match outcome {
        Ok(conversion) => {
            row.fill(&conversion, settings.unit);
            for (code, message) in curve_flags(table, record) {
                if !row.flags.contains(&code) {
                    row.flags.push(code);
                    row.messages.push(message.to_string());
                }
            }
            (row, None)
        }
        Err(e) => {
            let e = with_upstream_error(table, record, e);
            row.error = Some(e.to_string());
            (row, Some(e))
        }
    }
}
