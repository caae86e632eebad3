//! The reader of `kimech km`: a table of initial rates (substrate, rate;
//! optional series and sd) into one [`Series`] per series label, with the
//! substrate converted to one unit.

use crate::analysis::km::{Series, Units};
use crate::error::Result;
use crate::io::input::{ColumnSpec, Table, group_by_label, rows_source};
use crate::units::ConcUnit;

const SUBSTRATE: ColumnSpec = ColumnSpec::new("substrate", &["s", "substrate_concentration", "conc", "concentration"]);
const RATE: ColumnSpec = ColumnSpec::new("rate", &["v", "v0", "velocity", "initial_rate"]);
const SERIES: ColumnSpec = ColumnSpec::new("series", &["group", "condition", "state"]);
const SD: ColumnSpec = ColumnSpec::new("sd", &["rate_sd", "stdev", "std"]);

/// What the reader needs to know besides the table.
#[derive(Debug, Clone, Copy, Default)]
pub struct ReadOptions {
    /// Unit of substrate values that carry none in the cell or header.
    pub substrate_unit: Option<ConcUnit>,
    /// Every row must carry a positive sd (SD weighting).
    pub sd_required: bool,
}

/// Reads the table into series, converting substrate to one unit.
pub fn read(table: &Table, options: &ReadOptions) -> Result<(Vec<Series>, Units)> {
    let s_col = table.require(&SUBSTRATE)?;
    let v_col = table.require(&RATE)?;
    let series_col = table.find(&SERIES);
    let sd_col = table.find(&SD);
    if options.sd_required && sd_col.is_none() {
        return Err(table.require(&SD).unwrap_err());
    }
    let unit = table.column_unit(s_col, options.substrate_unit)?;
    let groups = group_by_label(table, series_col);
    let mut series = Vec::new();
    for (label, rows) in groups {
        let mut s = Series {
            label,
            origin: rows_source(table, &rows),
            substrate: Vec::new(),
            rate: Vec::new(),
            sd: sd_col.map(|_| Vec::new()),
        };
        for row in rows {
            let c = table.concentration(row, s_col, options.substrate_unit, "--substrate-unit")?;
            if c.qualifier.is_bound() {
                return Err(table.cell_error(
                    row,
                    s_col,
                    "a qualified substrate concentration",
                    "give the concentration used, without < or >",
                ));
            }
            if c.molar <= 0.0 {
                return Err(table.cell_error(
                    row,
                    s_col,
                    "substrate concentration must be positive",
                    "Michaelis–Menten fits use S > 0; remove blank (S = 0) rows after subtracting the blank from the rates",
                ));
            }
            let reporting = unit.unwrap_or(c.unit);
            s.substrate.push(reporting.from_molar(c.molar));
            s.rate.push(table.number(row, v_col)?);
            if let (Some(col), Some(sd)) = (sd_col, s.sd.as_mut()) {
                let value = table.optional_number(row, col)?;
                if options.sd_required && !value.is_some_and(|v| v > 0.0) {
                    return Err(table.cell_error(
                        row,
                        col,
                        "SD weighting needs a positive sd on every row",
                        "fill in the sd or choose another --weighting",
                    ));
                }
                sd.push(value.unwrap_or(f64::NAN));
            }
        }
        series.push(s);
    }
    let units =
        Units { substrate: unit.map(|u| u.symbol().to_string()), rate: table.unit_text(v_col).map(str::to_string) };
    Ok((series, units))
}
