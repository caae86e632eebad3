//! `kimech mode`: how a compound inhibits, from global fits of its [S]×[I]
//! rate matrix (the numerical core is [`crate::analysis::mode`]).

use std::collections::HashMap;

use serde::Serialize;

use super::km::WeightingArg;
use super::{CAUTION, OutputArgs, finish};
use crate::analysis::mode::{Basis, Criterion, Matrix, ModeResult, ModelResult, Options, Units, analyse};
use crate::error::{Error, Result};
use crate::fit::FitSettings;
use crate::io::input::Record;
use crate::io::output::{csv_bytes, json_bytes, new_grid, sig};
use crate::io::{ColumnSpec, Format, Table, write_output};
use crate::report::Param;
use crate::units::ConcUnit;

const SUBSTRATE: ColumnSpec = ColumnSpec::new("substrate", &["s", "substrate_concentration"]);
const INHIBITOR: ColumnSpec = ColumnSpec::new("inhibitor", &["i", "inhibitor_concentration"]);
const RATE: ColumnSpec = ColumnSpec::new("rate", &["v", "v0", "velocity", "initial_rate"]);
const COMPOUND: ColumnSpec = ColumnSpec::new("compound", &["compound_id", "inhibitor_id"]);
const SD: ColumnSpec = ColumnSpec::new("sd", &["rate_sd", "stdev", "std"]);

/// Say how a compound inhibits: global fits of none, competitive,
/// uncompetitive, noncompetitive and mixed inhibition to an [S]×[I] rate
/// matrix, with Ki, α, their intervals, AICc weights, F tests and an
/// adequacy check.
#[derive(Debug, Clone, clap::Args)]
pub struct Args {
    /// CSV with columns substrate, inhibitor, rate and optionally compound and sd; `-` reads stdin.
    pub file: String,
    /// Unit of substrate values that carry none in the cell or header.
    #[arg(long, value_name = "UNIT")]
    pub substrate_unit: Option<ConcUnit>,
    /// Unit of inhibitor values that carry none in the cell or header.
    #[arg(long, value_name = "UNIT")]
    pub inhibitor_unit: Option<ConcUnit>,
    /// Residual weighting: none, relative (1/rate²) or sd (1/sd² from the sd column).
    #[arg(long, value_enum, default_value_t = WeightingArg::None)]
    pub weighting: WeightingArg,
    /// Model choice and confidence level.
    #[command(flatten)]
    pub choice: super::ModelChoiceArgs,
    /// Output format and destination.
    #[command(flatten)]
    pub output: OutputArgs,
    /// Pictures (one SVG per compound) and the HTML report.
    #[command(flatten)]
    pub pictures: super::PictureArgs,
}

/// `--criterion` values.
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum CriterionArg {
    /// Lowest AICc, preferring the simplest model within 2 units.
    Aicc,
    /// none → best one-constant model → mixed, each step by an F test.
    FTest,
}

impl From<CriterionArg> for Criterion {
    fn from(c: CriterionArg) -> Self {
        match c {
            CriterionArg::Aicc => Criterion::Aicc,
            CriterionArg::FTest => Criterion::FTest,
        }
    }
}

/// The JSON document: `{"results": [...]}`.
#[derive(Debug, Serialize)]
pub struct Report {
    /// One result per compound, in input order.
    pub results: Vec<ModeResult>,
}

/// Runs `kimech mode`.
pub fn run(args: &Args) -> Result<()> {
    let table = Table::read(&args.file)?;
    let outcome = analyse_with_matrices(&table, args)?;
    let results: Vec<ModeResult> = outcome.pairs.iter().map(|(r, _)| r.clone()).collect();
    let bytes = render(&results, args.output.format)?;
    write_output(args.output.output.as_deref(), &bytes, &[&args.file])?;
    write_pictures(&outcome, args)?;
    finish(&outcome.failures, outcome.total, "compounds")
}

/// A run's results, each with the matrix it was fitted to (for pictures).
pub struct Outcome {
    /// (result, matrix) per analysed compound, in input order.
    pub pairs: Vec<(ModeResult, Matrix)>,
    /// Units of the matrices.
    pub units: Units,
    /// Compounds that could not be read or analysed.
    pub failures: Vec<Error>,
    /// Compounds in the input.
    pub total: usize,
}

/// [`analyse_table`], keeping each compound's matrix beside its result.
pub fn analyse_with_matrices(table: &Table, args: &Args) -> Result<Outcome> {
    let (matrices, units, mut failures) = read_matrices(table, args)?;
    let total = matrices.len() + failures.len();
    let opts = options(args);
    let mut pairs = Vec::new();
    for m in matrices {
        match analyse(&m, &units, &opts) {
            Ok(r) => pairs.push((r, m)),
            Err(e) => failures.push(e),
        }
    }
    Ok(Outcome { pairs, units, failures, total })
}

/// The report section of a run: per compound its text block and figure.
pub fn report_section(outcome: &Outcome, command: &str) -> Result<crate::plot::html::Section> {
    let pairs: Vec<(&ModeResult, &Matrix)> = outcome.pairs.iter().map(|(r, m)| (r, m)).collect();
    crate::plot::mode::section(&pairs, &outcome.units, block, &outcome.failures, command)
}

/// Writes `--plot` SVGs (one per compound) and the `--report` page.
fn write_pictures(outcome: &Outcome, args: &Args) -> Result<()> {
    if let Some(dir) = &args.pictures.plot {
        let ids: Vec<Option<&str>> = outcome.pairs.iter().map(|(r, _)| r.compound.as_deref()).collect();
        let names = crate::plot::files::unique_names("mode", &ids);
        let mut files = Vec::with_capacity(names.len());
        for (name, (r, m)) in names.into_iter().zip(&outcome.pairs) {
            files.push((name, crate::plot::mode::figure(r, m, &outcome.units)?.text));
        }
        crate::plot::files::write_plots(dir, &files, &[&args.file])?;
    }
    if let Some(path) = &args.pictures.report {
        let page = crate::plot::html::Page {
            title: format!("kimech mode — {}", args.file),
            intro: vec![format!("Inhibition mechanism of {} compound(s) from {}.", outcome.total, args.file)],
            sections: vec![report_section(outcome, &format!("kimech mode {}", args.file))?],
            caution: CAUTION.to_string(),
        };
        write_output(Some(path), crate::plot::html::render(&page).as_bytes(), &[&args.file])?;
    }
    Ok(())
}

/// The analysis options the arguments ask for.
pub fn options(args: &Args) -> Options {
    Options {
        weighting: args.weighting.into(),
        criterion: args.choice.criterion.into(),
        alpha_level: args.choice.alpha_level,
        confidence: args.choice.confidence,
        settings: FitSettings::default(),
    }
}

/// Reads and analyses every compound of a table: (results, failures, compounds).
pub fn analyse_table(table: &Table, args: &Args) -> Result<(Vec<ModeResult>, Vec<Error>, usize)> {
    let (matrices, units, mut failures) = read_matrices(table, args)?;
    let total = matrices.len() + failures.len();
    let opts = options(args);
    let mut results = Vec::new();
    for m in &matrices {
        match analyse(m, &units, &opts) {
            Ok(r) => results.push(r),
            Err(e) => failures.push(e),
        }
    }
    Ok((results, failures, total))
}

/// Splits the table by compound. A compound with a bad row fails as a whole
/// (its error names the line); the others go on.
pub fn read_matrices(table: &Table, args: &Args) -> Result<(Vec<Matrix>, Units, Vec<Error>)> {
    let s_col = table.require(&SUBSTRATE)?;
    let i_col = table.require(&INHIBITOR)?;
    let v_col = table.require(&RATE)?;
    let compound_col = table.find(&COMPOUND);
    let sd_col = if args.weighting == WeightingArg::Sd { Some(table.require(&SD)?) } else { table.find(&SD) };
    let s_unit = table.column_unit(s_col, args.substrate_unit)?;
    let i_unit = table.column_unit(i_col, args.inhibitor_unit)?;
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
    let mut groups: Vec<(Option<String>, Vec<&Record>)> = Vec::new();
    let mut index: HashMap<Option<String>, usize> = HashMap::new();
    for row in &table.rows {
        let label = compound_col.map(|c| table.text(row, c).to_string());
        let k = *index.entry(label.clone()).or_insert_with(|| {
            groups.push((label, Vec::new()));
            groups.len() - 1
        });
        groups[k].1.push(row);
    }
    let cols = Columns { s: s_col, i: i_col, v: v_col, sd: sd_col, s_unit, i_unit };
    let (mut matrices, mut failures) = (Vec::new(), Vec::new());
    for (label, rows) in groups {
        match read_matrix(table, &cols, args, label, &rows) {
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

fn read_matrix(table: &Table, c: &Columns, args: &Args, label: Option<String>, rows: &[&Record]) -> Result<Matrix> {
    let mut m = Matrix {
        label,
        origin: origin(rows),
        lines: Vec::new(),
        substrate: Vec::new(),
        inhibitor: Vec::new(),
        rate: Vec::new(),
        sd: c.sd.map(|_| Vec::new()),
    };
    for row in rows {
        let s = table.concentration(row, c.s, args.substrate_unit, "--substrate-unit")?;
        if s.qualifier.is_bound() || s.molar <= 0.0 {
            return Err(table.cell_error(
                row,
                c.s,
                "substrate concentration must be a positive number without < or >",
                "give the substrate concentration used (S > 0)",
            ));
        }
        let i = table.concentration(row, c.i, args.inhibitor_unit, "--inhibitor-unit")?;
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
            if args.weighting == WeightingArg::Sd && !value.is_some_and(|v| v > 0.0) {
                return Err(table.cell_error(row, col, "sd weighting needs a positive sd", "give the rate's SD (> 0)"));
            }
            sd.push(value.unwrap_or(f64::NAN));
        }
    }
    Ok(m)
}

fn origin(rows: &[&Record]) -> String {
    match (rows.first(), rows.last()) {
        (Some(a), Some(b)) if a.line == b.line => format!("line {}", a.line),
        (Some(a), Some(b)) => format!("lines {}-{}", a.line, b.line),
        _ => "no rows".into(),
    }
}

/// Serialises results in the chosen format.
pub fn render(results: &[ModeResult], format: Format) -> Result<Vec<u8>> {
    match format {
        Format::Json => json_bytes(&Report { results: results.to_vec() }),
        Format::Csv => csv_bytes(&results.iter().flat_map(csv_rows).collect::<Vec<_>>()),
        Format::Table => Ok(human(results).into_bytes()),
    }
}

/// One CSV row per compound and model.
#[derive(Debug, Serialize)]
struct CsvRow {
    compound: String,
    model: &'static str,
    chosen: bool,
    choice: String,
    n: usize,
    df: usize,
    sse: f64,
    aicc: Option<f64>,
    weight: Option<f64>,
    converged: bool,
    weighting: String,
    runs_p: Option<f64>,
    lack_of_fit_p: Option<f64>,
    headline_basis: String,
    headline_ki: Option<f64>,
    headline_ki_low: Option<f64>,
    headline_ki_high: Option<f64>,
    headline_kiu: Option<f64>,
    headline_kiu_low: Option<f64>,
    headline_kiu_high: Option<f64>,
    vmax: Option<f64>,
    vmax_se: Option<f64>,
    vmax_low: Option<f64>,
    vmax_high: Option<f64>,
    rate_unit: String,
    km: Option<f64>,
    km_se: Option<f64>,
    km_low: Option<f64>,
    km_high: Option<f64>,
    km_unit: String,
    ki: Option<f64>,
    ki_se: Option<f64>,
    ki_low: Option<f64>,
    ki_high: Option<f64>,
    alpha: Option<f64>,
    alpha_se: Option<f64>,
    alpha_low: Option<f64>,
    alpha_high: Option<f64>,
    kiu: Option<f64>,
    kiu_se: Option<f64>,
    kiu_low: Option<f64>,
    kiu_high: Option<f64>,
    inhibitor_unit: String,
    beta: Option<f64>,
    beta_low: Option<f64>,
    beta_high: Option<f64>,
    ksi: Option<f64>,
    ksi_low: Option<f64>,
    ksi_high: Option<f64>,
    warnings: String,
}

fn finite(p: Option<&Param>) -> (Option<f64>, Option<f64>, Option<f64>) {
    p.map_or((None, None, None), |p| (p.value.is_finite().then_some(p.value), p.low, p.high))
}

fn se(p: Option<&Param>) -> Option<f64> {
    p.and_then(|p| p.se)
}

/// The columns every row of a compound shares.
fn compound_row(
    r: &ModeResult,
    model: &'static str,
    sse: f64,
    df: usize,
    aicc: Option<f64>,
    converged: bool,
) -> CsvRow {
    let (hki, hki_low, hki_high) = finite(r.headline.ki.as_ref());
    let (hkiu, hkiu_low, hkiu_high) = finite(r.headline.kiu.as_ref());
    let basis = serde_json::to_value(r.headline.basis).ok().and_then(|v| v.as_str().map(String::from));
    CsvRow {
        compound: crate::io::neutralise_formula(r.compound.as_deref().unwrap_or("")),
        model,
        chosen: r.chosen == model,
        choice: r.chosen.clone(),
        n: r.n,
        df,
        sse,
        aicc,
        weight: None,
        converged,
        weighting: format!("{:?}", r.weighting).to_lowercase(),
        runs_p: r.adequacy.runs_p,
        lack_of_fit_p: r.adequacy.lack_of_fit_p,
        headline_basis: basis.unwrap_or_default(),
        headline_ki: hki,
        headline_ki_low: hki_low,
        headline_ki_high: hki_high,
        headline_kiu: hkiu,
        headline_kiu_low: hkiu_low,
        headline_kiu_high: hkiu_high,
        vmax: None,
        vmax_se: None,
        vmax_low: None,
        vmax_high: None,
        rate_unit: String::new(),
        km: None,
        km_se: None,
        km_low: None,
        km_high: None,
        km_unit: String::new(),
        ki: None,
        ki_se: None,
        ki_low: None,
        ki_high: None,
        alpha: None,
        alpha_se: None,
        alpha_low: None,
        alpha_high: None,
        kiu: None,
        kiu_se: None,
        kiu_low: None,
        kiu_high: None,
        inhibitor_unit: String::new(),
        beta: None,
        beta_low: None,
        beta_high: None,
        ksi: None,
        ksi_low: None,
        ksi_high: None,
        warnings: r.warnings.iter().map(|w| w.code).collect::<Vec<_>>().join(";"),
    }
}

/// Fills the constants' columns of a row.
fn with_constants(
    mut row: CsvRow,
    vmax: &Param,
    km: &Param,
    ki: Option<&Param>,
    alpha: Option<&Param>,
    kiu: Option<&Param>,
) -> CsvRow {
    (row.vmax, row.vmax_low, row.vmax_high) = finite(Some(vmax));
    (row.km, row.km_low, row.km_high) = finite(Some(km));
    (row.ki, row.ki_low, row.ki_high) = finite(ki);
    (row.alpha, row.alpha_low, row.alpha_high) = finite(alpha);
    (row.kiu, row.kiu_low, row.kiu_high) = finite(kiu);
    row.vmax_se = vmax.se;
    row.km_se = km.se;
    row.ki_se = se(ki);
    row.alpha_se = se(alpha);
    row.kiu_se = se(kiu);
    row.rate_unit = vmax.unit.clone().unwrap_or_default();
    row.km_unit = km.unit.clone().unwrap_or_default();
    row.inhibitor_unit = ki.or(kiu).and_then(|k| k.unit.clone()).unwrap_or_default();
    row
}

/// One row per model of the five, then one per extension model.
fn csv_rows(r: &ModeResult) -> Vec<CsvRow> {
    let mut rows: Vec<CsvRow> = r
        .models
        .iter()
        .map(|m| {
            let p = &m.params;
            let mut row = compound_row(r, m.model, m.sse, m.df, m.aicc, m.converged);
            row.weight = Some(m.weight);
            with_constants(row, &p.vmax, &p.km, p.ki.as_ref(), p.alpha.as_ref(), p.kiu.as_ref())
        })
        .collect();
    rows.extend(r.extensions.iter().map(|e| {
        let p = &e.params;
        let row = compound_row(r, e.model, e.sse, e.df, e.aicc, e.converged);
        let mut row = with_constants(row, &p.vmax, &p.km, Some(&p.ki), Some(&p.alpha), Some(&p.kiu));
        (row.beta, row.beta_low, row.beta_high) = finite(p.beta.as_ref());
        (row.ksi, row.ksi_low, row.ksi_high) = finite(p.ksi.as_ref());
        row
    }));
    rows
}

/// The headline in one line: the constants, their intervals and what they rest on.
pub fn headline_text(r: &ModeResult) -> String {
    let h = &r.headline;
    let basis = match h.basis {
        Basis::ChosenModel => format!("chosen model {}", r.chosen),
        Basis::SpanOverPlausibleModels => format!("span over the plausible models {}", h.models.join(", ")),
        Basis::Diagnosis => format!("diagnosis {}", r.chosen),
        Basis::NoModelAdequate => "no model adequate".to_string(),
    };
    let consts: Vec<String> = [("Ki", &h.ki), ("Kiu", &h.kiu)]
        .into_iter()
        .map(|(n, p)| p.as_ref().map_or(format!("{n} not given"), |p| with_interval(n, p)))
        .collect();
    let flag = if r.warnings.iter().any(|w| w.code == "mechanism-uncertain") { "; MECHANISM UNCERTAIN" } else { "" };
    format!("headline: {} ({basis}{flag})", consts.join("; "))
}

/// A constant in a table cell: the estimate, or `→ ∞` / `n.d.` when it lies at a limit.
fn cell(p: Option<&Param>) -> String {
    match p {
        None => String::new(),
        Some(p) if p.value.is_infinite() => "→ ∞".into(),
        Some(p) if p.value.is_nan() => "n.d.".into(),
        Some(p) => sig(p.value, 4),
    }
}

/// A constant with its interval, for the chosen model's line.
fn with_interval(name: &str, p: &Param) -> String {
    let end = |v: Option<f64>| v.map_or("unbounded".to_string(), |v| sig(v, 3));
    let unit = p.unit.as_deref().map(|u| format!(" {u}")).unwrap_or_default();
    let value = if p.value.is_finite() { sig(p.value, 4) } else { cell(Some(p)) };
    format!("{name} = {value}{unit} [{} to {}]", end(p.low), end(p.high))
}

fn model_row(m: &ModelResult) -> Vec<String> {
    let p = &m.params;
    vec![
        m.model.to_string(),
        cell(Some(&p.vmax)),
        cell(Some(&p.km)),
        cell(p.ki.as_ref()),
        cell(p.alpha.as_ref()),
        cell(p.kiu.as_ref()),
        sig(m.sse, 4),
        m.aicc.map_or("—".into(), |a| format!("{a:.2}")),
        format!("{:.3}", m.weight),
        if m.converged { String::new() } else { "not converged".into() },
    ]
}

/// The human-readable report: one compact block per compound.
pub fn human(results: &[ModeResult]) -> String {
    let mut out = String::new();
    for r in results {
        out.push_str(&block(r));
        out.push('\n');
    }
    out.push_str(CAUTION);
    out.push('\n');
    out
}

fn block(r: &ModeResult) -> String {
    let mut out = String::new();
    let name = r.compound.as_deref().map_or("Inhibition mode".to_string(), |c| format!("Inhibition mode — {c}"));
    out.push_str(&format!("{name} — {}\n", headline_text(r)));
    out.push_str(&format!(
        "(n = {}, weighting {}, global fits, Vmax and Km shared)\n",
        r.n,
        format!("{:?}", r.weighting).to_lowercase()
    ));
    let first = &r.models[0].params;
    let unit = |p: Option<&Param>| p.and_then(|p| p.unit.clone()).map(|u| format!(" ({u})")).unwrap_or_default();
    let iu = r.models[4].params.ki.as_ref();
    let mut grid = new_grid(vec![
        "model".into(),
        format!("Vmax{}", unit(Some(&first.vmax))),
        format!("Km{}", unit(Some(&first.km))),
        format!("Ki{}", unit(iu)),
        "α".into(),
        format!("Kiu{}", unit(iu)),
        "SSE".into(),
        "AICc".into(),
        "weight".into(),
        String::new(),
    ]);
    for m in &r.models {
        grid.add_row(model_row(m));
    }
    out.push_str(&format!("{grid}\n"));
    let criterion = match r.criterion {
        Criterion::Aicc => "AICc",
        Criterion::FTest => "F test",
    };
    if r.extensions.iter().any(|e| e.named) {
        out.push_str(&format!(
            "choice: {} (diagnosis); among the five laws alone ({criterion}): {}\n",
            r.chosen, r.evidence
        ));
    } else {
        out.push_str(&format!("choice ({criterion}): {}\n", r.evidence));
    }
    if let Some(m) = r.models.iter().find(|m| m.model == r.chosen) {
        let level = format!("{:.0}%", r.confidence * 100.0);
        let consts: Vec<String> = [("Ki", &m.params.ki), ("α", &m.params.alpha), ("Kiu", &m.params.kiu)]
            .into_iter()
            .filter_map(|(n, p)| p.as_ref().map(|p| with_interval(n, p)))
            .collect();
        if !consts.is_empty() {
            out.push_str(&format!(
                "{} inhibition, global fit, {level} profile-likelihood intervals: {}\n",
                m.model,
                consts.join("; ")
            ));
        }
    } else if r.headline.basis == crate::analysis::mode::Basis::Diagnosis {
        out.push_str(&format!(
            "chosen: {} (a diagnosis beyond the five laws) — its constants are in the headline and the warning below\n",
            r.chosen
        ));
    } else {
        out.push_str(&format!("chosen: {} — no Ki is reported\n", r.chosen));
    }
    if !r.alpha_interpretation.is_empty() {
        out.push_str(&format!("mixed model: {}\n", r.alpha_interpretation));
    }
    let a = &r.adequacy;
    let p = |p: Option<f64>| p.map_or("—".to_string(), |p| sig(p, 2));
    out.push_str(&format!(
        "adequacy of {}: runs-test p = {}, lack-of-fit p = {} ({})\n",
        a.model,
        p(a.runs_p),
        p(a.lack_of_fit_p),
        if a.adequate { "adequate" } else { "NOT adequate" }
    ));
    let tests: Vec<String> = r.tests.iter().map(|t| format!("{}→{} p = {}", t.simpler, t.fuller, p(t.p))).collect();
    out.push_str(&format!("F tests: {}\n", tests.join(", ")));
    for w in &r.warnings {
        out.push_str(&format!("warning [{}]: {}\n", w.code, w.message));
    }
    out
}
