//! The reader of `kimech mode`: an [S]×[I] rate table (substrate, inhibitor,
//! rate; optional compound and sd) into one [`Matrix`] per compound, with
//! both concentrations converted to one unit each.

use crate::analysis::mode::{Matrix, Units};
use crate::error::{Error, Result};
use crate::io::input::{ColumnSpec, Record, Table, group_by_label, rows_origin};
use crate::units::ConcUnit;

const SUBSTRATE: ColumnSpec = ColumnSpec::new("substrate", &["s", "substrate_concentration"]);
const INHIBITOR: ColumnSpec = ColumnSpec::new("inhibitor", &["i", "inhibitor_concentration"]);
const RATE: ColumnSpec = ColumnSpec::new("rate", &["v", "v0", "velocity", "initial_rate"]);
const COMPOUND: ColumnSpec = ColumnSpec::new("compound", &["compound_id", "inhibitor_id"]);
const SD: ColumnSpec = ColumnSpec::new("sd", &["rate_sd", "stdev", "std"]);

/// What the reader needs to know besides the table.
#[derive(Debug, Clone, Copy, Default)]
pub struct ReadOptions {
    /// Unit of substrate values that carry none in the cell or header.
    pub substrate_unit: Option<ConcUnit>,
    /// Unit of inhibitor values that carry none in the cell or header.
    pub inhibitor_unit: Option<ConcUnit>,
    /// Every row must carry a positive sd (SD weighting).
    pub sd_required: bool,
}

/// Splits the table by compound. A compound with a bad row fails as a whole
/// (its error names the line); the others go on.
pub fn read(table: &Table, options: &ReadOptions) -> Result<(Vec<Matrix>, Units, Vec<Error>)> {
    let s_col = table.require(&SUBSTRATE)?;
    let i_col = table.require(&INHIBITOR)?;
    let v_col = table.require(&RATE)?;
    let compound_col = table.find(&COMPOUND);
    let sd_col = if options.sd_required { Some(table.require(&SD)?) } else { table.find(&SD) };
    let s_unit = table.column_unit(s_col, options.substrate_unit)?;
    let i_unit = table.column_unit(i_col, options.inhibitor_unit)?;
    // No unit in the header, a flag or any cell: a problem of the whole file, not of one compound.
    for (col, unit, flag) in [(s_col, s_unit, "--substrate-unit"), (i_col, i_unit, "--inhibitor-unit")] {
        if unit.is_none() {
            return Err(Error::NoUnit {
                path: table.source.clone(),
                column: table.columns[col].header.clone(),
                flag: flag.into(),
            });
        }
    }
    let groups = group_by_label(table, compound_col);
    let cols = Columns { s: s_col, i: i_col, v: v_col, sd: sd_col, s_unit, i_unit };
    let (mut matrices, mut failures) = (Vec::new(), Vec::new());
    for (label, rows) in groups {
        match read_matrix(table, &cols, options, label, &rows) {
            Ok(m) => matrices.push(m),
            Err(e) => failures.push(e),
        }
    }
    let units = Units {
        substrate: s_unit.map(|u| u.symbol().to_string()),
        inhibitor: i_unit.map(|u| u.symbol().to_string()),
        rate: table.unit_text(v_col).map(str::to_string),
    };
    Ok((matrices, units, failures))
}

struct Columns {
    s: usize,
    i: usize,
    v: usize,
    sd: Option<usize>,
    s_unit: Option<ConcUnit>,
    i_unit: Option<ConcUnit>,
}

fn read_matrix(
    table: &Table,
    c: &Columns,
    options: &ReadOptions,
    label: Option<String>,
    rows: &[&Record],
) -> Result<Matrix> {
    let mut m = Matrix {
        label,
        origin: format!("{}, {}", table.source, rows_origin(rows)),
        lines: Vec::new(),
        substrate: Vec::new(),
        inhibitor: Vec::new(),
        rate: Vec::new(),
        sd: c.sd.map(|_| Vec::new()),
    };
    for row in rows {
        let s = table.concentration(row, c.s, options.substrate_unit, "--substrate-unit")?;
        if s.qualifier.is_bound() || s.molar <= 0.0 {
            return Err(table.cell_error(
                row,
                c.s,
                "substrate concentration must be a positive number without < or >",
                "give the substrate concentration used (S > 0)",
            ));
        }
        let i = table.concentration(row, c.i, options.inhibitor_unit, "--inhibitor-unit")?;
        if i.qualifier.is_bound() || i.molar < 0.0 {
            return Err(table.cell_error(
                row,
                c.i,
                "inhibitor concentration must be zero or positive, without < or >",
                "give the inhibitor concentration used (0 for the uninhibited series)",
            ));
        }
        let v = table.number(row, c.v)?;
        m.substrate.push(c.s_unit.unwrap_or(s.unit).from_molar(s.molar));
        m.inhibitor.push(c.i_unit.unwrap_or(i.unit).from_molar(i.molar));
        m.rate.push(v);
        m.lines.push(row.line);
        if let (Some(col), Some(sd)) = (c.sd, m.sd.as_mut()) {
            let value = table.optional_number(row, col)?;
            if options.sd_required && !value.is_some_and(|v| v > 0.0) {
                return Err(table.cell_error(row, col, "sd weighting needs a positive sd", "give the rate's SD (> 0)"));
            }
            sd.push(value.unwrap_or(f64::NAN));
        }
    }
    Ok(m)
}
