//! `kimech km`: Michaelis–Menten fits of substrate series.

use std::collections::HashMap;

use serde::Serialize;

use super::{CAUTION, OutputArgs, PictureArgs, finish, parse_flag_concentration, parse_fraction};
use crate::analysis::km::{Enzyme, KmResult, Options, Series, Units, analyse};
use crate::error::{Error, Result};
use crate::fit::{FitSettings, Weighting};
use crate::io::output::{csv_bytes, json_bytes, new_grid, sig};
use crate::io::{ColumnSpec, Format, Table, write_output};
use crate::report::Param;
use crate::units::{ConcUnit, ConcentrationArg};

const SUBSTRATE: ColumnSpec = ColumnSpec::new("substrate", &["s", "substrate_concentration", "conc", "concentration"]);
const RATE: ColumnSpec = ColumnSpec::new("rate", &["v", "v0", "velocity", "initial_rate"]);
const SERIES: ColumnSpec = ColumnSpec::new("series", &["group", "condition", "state"]);
const SD: ColumnSpec = ColumnSpec::new("sd", &["rate_sd", "stdev", "std"]);

/// Fit Michaelis–Menten to initial rates: Vmax, Km (with profile-likelihood
/// intervals), kcat and kcat/Km when the enzyme concentration is given.
#[derive(Debug, Clone, clap::Args)]
pub struct Args {
    /// CSV with columns substrate, rate and optionally series and sd; `-` reads stdin.
    pub file: String,
    /// Unit of substrate values that carry none in the cell or header.
    #[arg(long, value_name = "UNIT")]
    pub substrate_unit: Option<ConcUnit>,
    /// Total active enzyme concentration, e.g. "10 nM": adds kcat and kcat/Km.
    #[arg(long, value_name = "CONC", value_parser = parse_flag_concentration)]
    pub enzyme: Option<ConcentrationArg>,
    /// Residual weighting: none, relative (1/rate²) or sd (1/sd² from the sd column).
    #[arg(long, value_enum, default_value_t = WeightingArg::None)]
    pub weighting: WeightingArg,
    /// Confidence level of the intervals.
    #[arg(long, default_value_t = 0.95, value_parser = parse_fraction)]
    pub confidence: f64,
    /// Output format and destination.
    #[command(flatten)]
    pub output: OutputArgs,
    /// Pictures and the HTML report.
    #[command(flatten)]
    pub pictures: PictureArgs,
}

/// `--weighting` values.
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum WeightingArg {
    /// Ordinary least squares.
    None,
    /// 1/rate²: constant relative error.
    Relative,
    /// 1/sd² from the sd column.
    Sd,
}

impl From<WeightingArg> for Weighting {
    fn from(w: WeightingArg) -> Self {
        match w {
            WeightingArg::None => Weighting::None,
            WeightingArg::Relative => Weighting::Relative,
            WeightingArg::Sd => Weighting::Sd,
        }
    }
}

/// The JSON document: `{"results": [...]}`.
#[derive(Debug, Serialize)]
pub struct Report {
    /// One result per series, in input order.
    pub results: Vec<KmResult>,
}

/// Runs `kimech km`.
pub fn run(args: &Args) -> Result<()> {
    let table = Table::read(&args.file)?;
    let outcome = process(&table, args)?;
    let bytes = render(&outcome.results, args.output.format)?;
    write_output(args.output.output.as_deref(), &bytes, &[&args.file])?;
    write_pictures(&outcome, args)?;
    finish(&outcome.failures, outcome.total, "series")
}

/// Writes `--plot` SVGs (one per series) and the `--report` page.
fn write_pictures(outcome: &Outcome, args: &Args) -> Result<()> {
    if let Some(dir) = &args.pictures.plot {
        let ids: Vec<Option<&str>> = outcome.results.iter().map(|r| r.series.as_deref()).collect();
        let names = crate::plot::files::unique_names("km", &ids);
        let mut files = Vec::with_capacity(names.len());
        for (name, r) in names.into_iter().zip(&outcome.results) {
            files.push((name, crate::plot::km::series_figure(r)?.text));
        }
        crate::plot::files::write_plots(dir, &files, &[&args.file])?;
    }
    if let Some(path) = &args.pictures.report {
        let section = crate::plot::km::section(&outcome.results, &outcome.failures, &command_line(args))?;
        let page = crate::plot::html::Page {
            title: format!("kimech km — {}", args.file),
            intro: vec![format!("Michaelis–Menten fits of {} series from {}.", outcome.total, args.file)],
            sections: vec![section],
            caution: CAUTION.to_string(),
        };
        write_output(Some(path), crate::plot::html::render(&page).as_bytes(), &[&args.file])?;
    }
    Ok(())
}

/// The command line that reproduces this run's numbers, for the report.
pub fn command_line(args: &Args) -> String {
    let mut line = format!("kimech km {}", args.file);
    if let Some(u) = args.substrate_unit {
        line.push_str(&format!(" --substrate-unit {}", u.symbol()));
    }
    if let Some(e) = &args.enzyme {
        let value = format!("{:.6}", e.unit.from_molar(e.molar));
        let value = value.trim_end_matches('0').trim_end_matches('.');
        line.push_str(&format!(" --enzyme \"{value} {}\"", e.unit.symbol()));
    }
    match args.weighting {
        WeightingArg::None => {}
        WeightingArg::Relative => line.push_str(" --weighting relative"),
        WeightingArg::Sd => line.push_str(" --weighting sd"),
    }
    if (args.confidence - 0.95).abs() > 1e-12 {
        line.push_str(&format!(" --confidence {}", args.confidence));
    }
    line
}

/// What one run produced: results for the series that could be fitted and
/// the errors of those that could not.
pub struct Outcome {
    /// Results, in input order.
    pub results: Vec<KmResult>,
    /// One error per series that failed.
    pub failures: Vec<Error>,
    /// Number of series in the input.
    pub total: usize,
}

/// Reads the series from `table` and fits each one.
pub fn process(table: &Table, args: &Args) -> Result<Outcome> {
    let (series, units) = read_series(table, args)?;
    let options = Options {
        weighting: args.weighting.into(),
        confidence: args.confidence,
        enzyme: args.enzyme.map(|e| Enzyme { molar: e.molar, unit: e.unit }),
        settings: FitSettings::default(),
    };
    let (results, failures) = analyse_all(&series, &units, &options);
    Ok(Outcome { results, failures, total: series.len() })
}

/// Fits every series; failures are collected, not fatal.
fn analyse_all(series: &[Series], units: &Units, options: &Options) -> (Vec<KmResult>, Vec<Error>) {
    let mut results = Vec::new();
    let mut failures = Vec::new();
    for s in series {
        match analyse(s, units, options) {
            Ok(r) => results.push(r),
            Err(e) => failures.push(e),
        }
    }
    (results, failures)
}

/// Reads the table into series, converting substrate to one unit.
fn read_series(table: &Table, args: &Args) -> Result<(Vec<Series>, Units)> {
    let s_col = table.require(&SUBSTRATE)?;
    let v_col = table.require(&RATE)?;
    let series_col = table.find(&SERIES);
    let sd_col = table.find(&SD);
    if args.weighting == WeightingArg::Sd && sd_col.is_none() {
        return Err(table.require(&SD).unwrap_err());
    }
    let unit = table.column_unit(s_col, args.substrate_unit)?;
    let mut groups: Vec<(Option<String>, Vec<&crate::io::input::Record>)> = Vec::new();
    let mut index: HashMap<Option<String>, usize> = HashMap::new();
    for row in &table.rows {
        let label = series_col.map(|c| table.text(row, c).to_string());
        let k = *index.entry(label.clone()).or_insert_with(|| {
            groups.push((label, Vec::new()));
            groups.len() - 1
        });
        groups[k].1.push(row);
    }
    let mut series = Vec::new();
    for (label, rows) in groups {
        let mut s = Series {
            label,
            origin: format!("{}, {}", table.source, super::rows_origin(&rows)),
            substrate: Vec::new(),
            rate: Vec::new(),
            sd: sd_col.map(|_| Vec::new()),
        };
        for row in rows {
            let c = table.concentration(row, s_col, args.substrate_unit, "--substrate-unit")?;
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
                if args.weighting == WeightingArg::Sd && !value.is_some_and(|v| v > 0.0) {
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

/// Serialises results in the chosen format.
pub fn render(results: &[KmResult], format: Format) -> Result<Vec<u8>> {
    match format {
        Format::Json => json_bytes(&Report { results: results.to_vec() }),
        Format::Csv => csv_bytes(&results.iter().map(CsvRow::from).collect::<Vec<_>>()),
        Format::Table => Ok(human(results).into_bytes()),
    }
}

/// One flattened CSV row per series.
#[derive(Debug, Serialize)]
struct CsvRow {
    series: String,
    n: usize,
    df: usize,
    vmax: Option<f64>,
    vmax_se: Option<f64>,
    vmax_low: Option<f64>,
    vmax_high: Option<f64>,
    vmax_unit: String,
    km: Option<f64>,
    km_se: Option<f64>,
    km_low: Option<f64>,
    km_high: Option<f64>,
    km_unit: String,
    kcat: Option<f64>,
    kcat_unit: Option<String>,
    kcat_km: Option<f64>,
    kcat_km_unit: Option<String>,
    sse: Option<f64>,
    residual_sd: Option<f64>,
    r2: Option<f64>,
    runs_p: Option<f64>,
    converged: bool,
    warnings: String,
}

impl From<&KmResult> for CsvRow {
    fn from(r: &KmResult) -> Self {
        let p = &r.params;
        CsvRow {
            series: crate::io::neutralise_formula(r.series.as_deref().unwrap_or("")),
            n: r.n,
            df: r.df,
            vmax: finite(p.vmax.value),
            vmax_se: p.vmax.se.and_then(finite),
            vmax_low: p.vmax.low.and_then(finite),
            vmax_high: p.vmax.high.and_then(finite),
            vmax_unit: p.vmax.unit.clone().unwrap_or_default(),
            km: finite(p.km.value),
            km_se: p.km.se.and_then(finite),
            km_low: p.km.low.and_then(finite),
            km_high: p.km.high.and_then(finite),
            km_unit: p.km.unit.clone().unwrap_or_default(),
            kcat: p.kcat.as_ref().map(|k| k.value).and_then(finite),
            kcat_unit: p.kcat.as_ref().and_then(|k| k.unit.clone()),
            kcat_km: p.kcat_km.as_ref().map(|k| k.value).and_then(finite),
            kcat_km_unit: p.kcat_km.as_ref().and_then(|k| k.unit.clone()),
            sse: finite(r.sse),
            residual_sd: finite(r.residual_sd),
            r2: finite(r.r2),
            runs_p: r.runs_p.and_then(finite),
            converged: r.converged,
            warnings: r.warnings.iter().map(|w| w.code).collect::<Vec<_>>().join(";"),
        }
    }
}

/// A number for a CSV cell: a non-finite one (an R² with no spread to
/// explain) is written as an empty cell, never as `NaN` or `inf`.
fn finite(value: f64) -> Option<f64> {
    value.is_finite().then_some(value)
}

fn weighting_name(w: Weighting) -> &'static str {
    match w {
        Weighting::None => "none",
        Weighting::Relative => "relative (1/rate²)",
        Weighting::Sd => "1/sd²",
    }
}

/// The one-line account of a fit's quality, shared with the HTML report.
pub fn fit_summary(r: &KmResult) -> String {
    format!(
        "n = {}, df = {}, SSE = {}, residual SD = {}, R² = {}, runs-test p = {}, {}; intervals: {}, weighting: {}",
        r.n,
        r.df,
        sig(r.sse, 5),
        sig(r.residual_sd, 4),
        sig(r.r2, 4),
        r.runs_p.map_or("—".into(), |p| sig(p, 2)),
        if r.converged { "converged" } else { "NOT converged" },
        r.params.km.interval,
        weighting_name(r.weighting),
    )
}

/// The column headers of the parameter table, shared with the HTML report.
pub fn param_header(confidence: f64) -> Vec<String> {
    let level = format!("{:.0}%", confidence * 100.0);
    ["parameter", "estimate", "SE", &format!("{level} low"), &format!("{level} high"), "unit", "interval"]
        .map(String::from)
        .to_vec()
}

/// One parameter as table cells (estimate, SE, interval ends, unit, interval method),
/// and every parameter of a result in reporting order; shared with the HTML report.
pub fn param_rows(r: &KmResult) -> Vec<Vec<String>> {
    let cells = |name: &str, p: &Param| {
        let end = |v: Option<f64>| v.map_or("unbounded".to_string(), |v| sig(v, 5));
        vec![
            name.to_string(),
            sig(p.value, 6),
            p.se.map_or("—".into(), |s| sig(s, 3)),
            end(p.low),
            end(p.high),
            p.unit.clone().unwrap_or_default(),
            p.interval.to_string(),
        ]
    };
    let mut rows = vec![cells("Vmax", &r.params.vmax), cells("Km", &r.params.km)];
    rows.extend(r.params.kcat.as_ref().map(|k| cells("kcat", k)));
    rows.extend(r.params.kcat_km.as_ref().map(|k| cells("kcat/Km", k)));
    rows
}

/// The human-readable report.
pub fn human(results: &[KmResult]) -> String {
    let mut out = String::new();
    for r in results {
        let title = r
            .series
            .as_deref()
            .map_or("Michaelis–Menten fit".to_string(), |s| format!("Michaelis–Menten fit — series {s}"));
        out.push_str(&format!("{title}\n"));
        let mut grid = new_grid(param_header(r.confidence));
        for row in param_rows(r) {
            grid.add_row(row);
        }
        out.push_str(&format!("{grid}\n"));
        out.push_str(&format!("{}\n", fit_summary(r)));
        let dr = &r.double_reciprocal;
        out.push_str(&format!(
            "double-reciprocal line from the fit: slope Km/Vmax = {}, 1/v intercept = {}, 1/S intercept = {}\n",
            sig(dr.slope, 5),
            sig(dr.y_intercept, 5),
            sig(dr.x_intercept, 5)
        ));
        for note in [&r.params.vmax.note, &r.params.km.note].into_iter().flatten() {
            out.push_str(&format!("note: {note}\n"));
        }
        for w in &r.warnings {
            out.push_str(&format!("warning [{}]: {}\n", w.code, w.message));
        }
        out.push('\n');
    }
    out.push_str(CAUTION);
    out.push('\n');
    out
}
