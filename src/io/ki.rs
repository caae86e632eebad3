//! The reader of `kimech ki`: any IC50 table (`compound`, `ic50` with unit
//! in the cell or header and an optional qualifier), including the CSV that
//! `kimech ic50` writes, one row at a time into the conversion's inputs.
//! Conditions come from columns where present (a non-empty cell wins) and
//! from the defaults (the command-line values) otherwise.

use crate::convert::relations::parse_stated;
use crate::convert::{Assay, Conditions, Measurement, Mechanism};
use crate::error::{Error, Result};
use crate::io::input::{ColumnSpec, Record, Table};
use crate::io::output::sig;
use crate::report::Code;
use crate::units::{ConcUnit, ConcentrationArg, Qualifier};

const COMPOUND: ColumnSpec = ColumnSpec::new("compound", &["compound_id", "compound_name", "molecule", "id"]);
const TARGET: ColumnSpec = ColumnSpec::new("target", &["target_name", "protein"]);
const IC50: ColumnSpec = ColumnSpec::new("ic50", &["ic_50"]);
const IC50_LOW: ColumnSpec = ColumnSpec::new("ic50_low", &["ic50_lower"]);
const IC50_HIGH: ColumnSpec = ColumnSpec::new("ic50_high", &["ic50_upper"]);
const HILL: ColumnSpec = ColumnSpec::new("hill", &["hill_coefficient", "hill_slope", "nh"]);
const SUBSTRATE: ColumnSpec = ColumnSpec::new("substrate", &["s", "substrate_concentration"]);
const KM: ColumnSpec = ColumnSpec::new("km", &[]);
const KM_SE: ColumnSpec = ColumnSpec::new("km_se", &[]);
const ENZYME: ColumnSpec = ColumnSpec::new("enzyme", &["et", "enzyme_concentration"]);
const MECHANISM: ColumnSpec = ColumnSpec::new("mechanism", &["mode"]);
const ALPHA: ColumnSpec = ColumnSpec::new("alpha", &["α"]);
const ASSAY: ColumnSpec = ColumnSpec::new("assay", &["assay_type"]);
const LIGAND: ColumnSpec = ColumnSpec::new("ligand", &["l", "ligand_concentration"]);
const KD: ColumnSpec = ColumnSpec::new("kd", &[]);

/// Columns this command reads; every other column is carried through to the CSV.
pub const CONSUMED: [ColumnSpec; 15] = [
    COMPOUND, TARGET, IC50, IC50_LOW, IC50_HIGH, HILL, SUBSTRATE, KM, KM_SE, ENZYME, MECHANISM, ALPHA, ASSAY, LIGAND,
    KD,
];

/// The conditions that apply where a row's own column is empty or absent.
#[derive(Debug, Clone, Copy)]
pub struct Defaults {
    /// Unit of IC50 cells that carry none.
    pub ic50_unit: Option<ConcUnit>,
    /// Unit of condition cells that carry none.
    pub conc_unit: Option<ConcUnit>,
    /// Substrate concentration.
    pub substrate: Option<ConcentrationArg>,
    /// Km of the substrate.
    pub km: Option<ConcentrationArg>,
    /// Standard error of Km.
    pub km_se: Option<ConcentrationArg>,
    /// Total active enzyme concentration.
    pub enzyme: Option<ConcentrationArg>,
    /// Labelled-ligand concentration (binding assays).
    pub ligand: Option<ConcentrationArg>,
    /// Kd of the labelled ligand.
    pub kd: Option<ConcentrationArg>,
    /// α for mixed inhibition.
    pub alpha: Option<f64>,
    /// Mechanism (`None`: not known).
    pub mechanism: Option<Mechanism>,
    /// Assay kind.
    pub assay: Assay,
}

/// Where each known column is.
pub struct Columns {
    /// Column of compound.
    pub compound: usize,
    /// Column of ic50.
    pub ic50: usize,
    /// Column of target.
    pub target: Option<usize>,
    /// Column of low.
    pub low: Option<usize>,
    /// Column of high.
    pub high: Option<usize>,
    /// Column of hill.
    pub hill: Option<usize>,
    /// Column of substrate.
    pub substrate: Option<usize>,
    /// Column of km.
    pub km: Option<usize>,
    /// Column of km_se.
    pub km_se: Option<usize>,
    /// Column of enzyme.
    pub enzyme: Option<usize>,
    /// Column of mechanism.
    pub mechanism: Option<usize>,
    /// Column of alpha.
    pub alpha: Option<usize>,
    /// Column of assay.
    pub assay: Option<usize>,
    /// Column of ligand.
    pub ligand: Option<usize>,
    /// Column of kd.
    pub kd: Option<usize>,
}

impl Columns {
    /// Finds the known columns; compound and ic50 are required.
    pub fn find(t: &Table) -> Result<Columns> {
        Ok(Columns {
            compound: t.require(&COMPOUND)?,
            ic50: t.require(&IC50)?,
            target: t.find(&TARGET),
            low: t.find(&IC50_LOW),
            high: t.find(&IC50_HIGH),
            hill: t.find(&HILL),
            substrate: t.find(&SUBSTRATE),
            km: t.find(&KM),
            km_se: t.find(&KM_SE),
            enzyme: t.find(&ENZYME),
            mechanism: t.find(&MECHANISM),
            alpha: t.find(&ALPHA),
            assay: t.find(&ASSAY),
            ligand: t.find(&LIGAND),
            kd: t.find(&KD),
        })
    }
}

/// What one row said, before conversion.
pub struct RowInput {
    /// The IC50 with its qualifier, interval and Hill coefficient.
    pub measurement: Measurement,
    /// The assay conditions, from the row's columns or the defaults.
    pub conditions: Conditions,
    /// The conditions as used, in words (`IC50 = …; S = …`).
    pub described: String,
}

/// When the IC50 step already reported why a row has no IC50 (an `error`
/// column, as `kimech ic50` writes), say that instead of "empty cell".
pub fn with_upstream_error(table: &Table, record: &Record, e: Error) -> Error {
    let upstream = table.find(&ColumnSpec::new("error", &[])).map(|c| table.text(record, c)).unwrap_or("");
    match e {
        Error::Cell(cell) if cell.value.is_empty() && !upstream.is_empty() => Error::Data {
            group: format!("{}, line {}", cell.path, cell.line),
            problem: format!("no value in column '{}'; the input's error column says: {upstream}", cell.column),
            expected: "fix the IC50 fit for this row first".into(),
        },
        e => e,
    }
}

/// Flags of the dose-response fit (the `flags` column `kimech ic50` writes)
/// that undermine the conversion itself: Cheng–Prusoff assumes a complete,
/// well-defined inhibition curve (Cheng & Prusoff 1973).
const CURVE_FLAGS_THAT_MATTER: [(Code, Code, &str); 6] = [
    (
        Code::PartialInhibition,
        Code::PartialInhibition,
        "the dose-response curve levels off above zero activity: the Cheng–Prusoff relations assume complete inhibition, so this constant is not a Ki of a full inhibitor",
    ),
    (
        Code::PoorFit,
        Code::Ic50PoorFit,
        "the dose-response fit was poor, so the IC50 behind this constant is unreliable",
    ),
    (
        Code::NotConverged,
        Code::Ic50NotConverged,
        "the dose-response fit did not converge, so the IC50 behind this constant is unreliable",
    ),
    (
        Code::HillFixed,
        Code::Ic50HillFixed,
        "the Hill coefficient was held at 1 in the dose-response fit, so the IC50 leans on that assumption",
    ),
    (
        Code::OutlierExcluded,
        Code::Ic50OutlierExcluded,
        "wells marked by the outlier rule were left out of the dose-response fit (listed in the ic50 output)",
    ),
    (
        Code::TooManyOutliers,
        Code::Ic50TooManyOutliers,
        "the dose-response curve had more aberrant wells than the outlier rule may remove; the IC50 is unreliable",
    ),
];

/// The (code, message) of each flag in the row's `flags` column that
/// undermines the conversion.
pub fn curve_flags(table: &Table, record: &Record) -> Vec<(Code, &'static str)> {
    let Some(col) = table.find(&ColumnSpec::new("flags", &[])) else { return Vec::new() };
    let upstream: Vec<&str> = table.text(record, col).split([';', ',', ' ']).filter(|f| !f.is_empty()).collect();
    CURVE_FLAGS_THAT_MATTER
        .iter()
        .filter(|(upstream_code, _, _)| upstream.contains(&upstream_code.as_str()))
        .map(|&(_, code, message)| (code, message))
        .collect()
}

/// What a row from a partial-inhibition curve is refused as (the demo recognises it).
pub const PARTIAL_REFUSED: &str = "a partial-inhibition curve";

/// Reads the measurement and conditions of one row; the first bad cell is the row's error.
pub fn read_row(table: &Table, cols: &Columns, record: &Record, defaults: &Defaults) -> Result<RowInput> {
    refuse_time_dependent(table, record)?;
    if table.text(record, cols.compound).is_empty() {
        return Err(table.cell_error(record, cols.compound, "no compound name", "give the compound code"));
    }
    let ic50 = table.concentration(record, cols.ic50, defaults.ic50_unit, "--ic50-unit")?;
    // `kimech ic50` says what the curve showed; Cheng–Prusoff needs a curve
    // that inhibits completely, so a partial one gives no Ki (issue 9).
    if let Some(c) = table.find(&ColumnSpec::new("call", &[]))
        && table.text(record, c).eq_ignore_ascii_case("partial")
    {
        return Err(table.cell_error(
            record,
            c,
            PARTIAL_REFUSED,
            "a curve that inhibits completely: Cheng–Prusoff assumes full inhibition, so no Ki is derived from a partial curve",
        ));
    }
    let bound_end = |col: Option<usize>| -> Result<Option<f64>> {
        match col {
            Some(c) if !is_missing(table.text(record, c)) => {
                let end = table.concentration(record, c, Some(ic50.unit), "--ic50-unit")?;
                if end.qualifier.is_bound() {
                    return Err(table.cell_error(record, c, "a qualified interval end", "give the number itself"));
                }
                Ok(Some(end.molar))
            }
            _ => Ok(None),
        }
    };
    let measurement = Measurement {
        qualifier: ic50.qualifier,
        ic50: ic50.molar,
        low: bound_end(cols.low)?,
        high: bound_end(cols.high)?,
        hill: match cols.hill {
            Some(c) if !is_missing(table.text(record, c)) => Some(table.number(record, c)?),
            _ => None,
        },
    };
    let mut described = vec![format!("IC50 = {}", table.text(record, cols.ic50))];
    // Km's SE is read in Km's header unit when its own column has none.
    let km_unit = cols.km.and_then(|c| table.header_unit(c).ok().flatten());
    let mut conc = |col: Option<usize>, flag_value: Option<ConcentrationArg>, label: &str, flag: &str| {
        let default_unit = if label == "Km SE" { defaults.conc_unit.or(km_unit) } else { defaults.conc_unit };
        condition(table, record, col, flag_value, default_unit, flag).map(|found| {
            found.map(|(molar, unit)| {
                described.push(format!("{label} = {} {unit}", sig(unit.from_molar(molar), 4)));
                molar
            })
        })
    };
    let substrate = conc(cols.substrate, defaults.substrate, "S", "--substrate")?;
    let km = conc(cols.km, defaults.km, "Km", "--km")?;
    let km_se = conc(cols.km_se, defaults.km_se, "Km SE", "--km-se")?;
    let enzyme = conc(cols.enzyme, defaults.enzyme, "Et", "--enzyme")?;
    let ligand = conc(cols.ligand, defaults.ligand, "L", "--ligand")?;
    let kd = conc(cols.kd, defaults.kd, "Kd", "--kd")?;
    let alpha = match cols.alpha {
        Some(c) if !table.text(record, c).is_empty() => Some(table.number(record, c)?),
        _ => defaults.alpha,
    };
    if let Some(a) = alpha {
        described.push(format!("alpha = {}", sig(a, 4)));
    }
    let mechanism = match cols.mechanism.map(|c| (c, table.text(record, c))) {
        Some((c, text)) if !text.is_empty() => parse_stated(text).ok_or_else(|| {
            table.cell_error(
                record,
                c,
                "not a mechanism",
                "use competitive, uncompetitive, noncompetitive, mixed, none or unknown",
            )
        })?,
        _ => defaults.mechanism,
    };
    let assay = match cols.assay.map(|c| (c, table.text(record, c))) {
        Some((c, text)) if !text.is_empty() => match text.to_ascii_lowercase().as_str() {
            "enzyme" => Assay::Enzyme,
            "binding" => Assay::Binding,
            _ => return Err(table.cell_error(record, c, "not an assay kind", "use enzyme or binding")),
        },
        _ => defaults.assay,
    };
    described.push(format!("{} assay", if assay == Assay::Enzyme { "enzyme" } else { "binding" }));
    let conditions = Conditions { assay, mechanism, substrate, km, km_se, enzyme, alpha, ligand, kd };
    Ok(RowInput { measurement, conditions, described: described.join("; ") })
}

/// A column saying whether the inhibitor is time-dependent: `time_dependent`
/// (yes/no), or `onset` as `kimech onset` writes it (none/one-step/two-step).
const TIME_DEPENDENT: ColumnSpec = ColumnSpec::new("time_dependent", &["onset"]);

/// The IC50 of a time-dependent (slow-binding or covalent) inhibitor depends on
/// how long enzyme and inhibitor were together, so no exact Ki follows from it
/// (Copeland, *Evaluation of Enzyme Inhibitors in Drug Discovery*, 2nd ed.,
/// 2013, ch. 9): such a row is refused with the reason.
fn refuse_time_dependent(table: &Table, record: &Record) -> Result<()> {
    let Some(col) = table.find(&TIME_DEPENDENT) else { return Ok(()) };
    let text = table.text(record, col);
    let time_dependent = match text.to_ascii_lowercase().as_str() {
        "" | "no" | "false" | "0" | "none" => false,
        "yes" | "true" | "1" | "one-step" | "two-step" => true,
        _ => {
            return Err(table.cell_error(
                record,
                col,
                "not a yes/no answer",
                "use yes or no (or none, one-step, two-step as kimech onset writes)",
            ));
        }
    };
    if !time_dependent {
        return Ok(());
    }
    Err(Error::Data {
        group: format!("{}, line {}", table.source, record.line),
        problem: format!(
            "the inhibitor is time-dependent ('{text}' in column '{}'): its IC50 depends on the preincubation time, \
             so no exact Ki can be derived from it",
            table.columns[col].header
        ),
        expected: "rank it by kinact/KI from kimech onset (Copeland 2013, ch. 9)".into(),
    })
}

/// Cells that mean "no value" in an interval column (as fitters write unbounded ends).
fn is_missing(text: &str) -> bool {
    matches!(text.to_ascii_lowercase().as_str(), "" | "na" | "n/a" | "nan" | "none" | "null" | "unbounded" | "—")
}

/// A condition from its column (a non-empty cell wins) or from its flag.
fn condition(
    table: &Table,
    record: &Record,
    col: Option<usize>,
    flag_value: Option<ConcentrationArg>,
    default_unit: Option<ConcUnit>,
    flag: &str,
) -> Result<Option<(f64, ConcUnit)>> {
    match col {
        Some(c) if !table.text(record, c).is_empty() => {
            let v = table.concentration(record, c, default_unit, "--conc-unit")?;
            if v.qualifier.is_bound() || v.qualifier == Qualifier::About {
                return Err(table.cell_error(
                    record,
                    c,
                    "a qualified assay condition",
                    format!("give the concentration used, without < > ~ (or leave the cell empty to use {flag})"),
                ));
            }
            Ok(Some((v.molar, v.unit)))
        }
        _ => Ok(flag_value.map(|f| (f.molar, f.unit))),
    }
}
