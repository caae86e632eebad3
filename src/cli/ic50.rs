//! `kimech ic50`: dose-response curves to IC50, streamed in bounded memory.
//!
//! Rows are read one at a time; each contiguous block of one compound becomes
//! a curve; curves are fitted in batches on all cores (rayon) while the next
//! batch is read, and written in input order, so memory depends on the batch
//! size and not on the file, and the output does not depend on the thread
//! count. With `--normalise` the file is read twice: once for the control
//! wells of every plate, once for the curves (stdin is first spooled to a
//! temporary file for this).

use std::collections::{HashMap, HashSet};
use std::io::{IsTerminal, Write};
use std::path::PathBuf;

use rayon::prelude::*;

use super::{CAUTION, OutputArgs, parse_flag_concentration, parse_fraction};
use crate::analysis::ic50::{
    Carried, Curve, Ic50Result, IntervalMethod, Options, OutlierMode, PlateQc, Thresholds, Wells, analyse,
};
use crate::error::{Error, Result};
use crate::io::input::Record;
use crate::io::output::{neutralise_formula, new_grid, sig};
use crate::io::stream::{OutputSink, RowStream};
use crate::io::{ColumnSpec, Format, Table};
use crate::report::Param;
use crate::units::{ConcUnit, ConcentrationArg, Qualifier};

const COMPOUND: ColumnSpec = ColumnSpec::new("compound", &["compound_id", "sample", "id"]);
const CONCENTRATION: ColumnSpec =
    ColumnSpec::new("concentration", &["conc", "dose", "inhibitor", "inhibitor_concentration"]);
const RESPONSE: ColumnSpec = ColumnSpec::new("response", &["signal", "activity", "y", "value"]);
const PLATE: ColumnSpec = ColumnSpec::new("plate", &["plate_id", "barcode"]);
const CONTROL: ColumnSpec = ColumnSpec::new("control", &["control_type", "well_type"]);

/// Fit dose-response curves: IC50 (with qualifier and interval), pIC50, Hill
/// coefficient, asymptotes and quality flags, one result per compound.
#[derive(Debug, Clone, clap::Args)]
pub struct Args {
    /// CSV with columns compound, concentration, response; optional plate and
    /// control (uninhibited / inhibited); other columns are carried through. `-` reads stdin.
    pub file: String,
    /// Unit of concentrations that carry none in the cell or header.
    #[arg(long, value_name = "UNIT")]
    pub concentration_unit: Option<ConcUnit>,
    /// Hold the lower asymptote at this response (e.g. 0 for % activity).
    #[arg(long, value_name = "X", allow_negative_numbers = true)]
    pub fix_lower: Option<f64>,
    /// Hold the upper asymptote at this response (e.g. 100 for % activity).
    #[arg(long, value_name = "X", allow_negative_numbers = true)]
    pub fix_upper: Option<f64>,
    /// Turn raw signal into % activity from each plate's control wells; reports Z′ per plate.
    #[arg(long, visible_alias = "normalize")]
    pub normalise: bool,
    /// Total active enzyme, e.g. "2 nM": fit Morrison's tight-binding equation (apparent Ki and
    /// IC50); the response must be % activity or background-subtracted (zero at full inhibition).
    #[arg(long, value_name = "CONC", value_parser = parse_flag_concentration)]
    pub enzyme: Option<ConcentrationArg>,
    /// Confidence level of the intervals.
    #[arg(long, default_value_t = 0.95, value_parser = parse_fraction)]
    pub confidence: f64,
    /// IC50 interval: wald (on ln IC50, fast) or profile (likelihood, several refits per curve).
    #[arg(long, value_enum, default_value_t = IntervalArg::Wald)]
    pub intervals: IntervalArg,
    /// Flag `hill-steep` above this |Hill coefficient| (common practice).
    #[arg(long, default_value_t = Thresholds::default().hill_steep)]
    pub hill_steep: f64,
    /// Flag `hill-shallow` below this |Hill coefficient| (common practice).
    #[arg(long, default_value_t = Thresholds::default().hill_shallow)]
    pub hill_shallow: f64,
    /// Flag `partial-inhibition` when lower/upper exceeds this (common practice).
    #[arg(long, default_value_t = Thresholds::default().partial_above)]
    pub partial_above: f64,
    /// Flag `no-inhibition` when the fitted inhibition at the top concentration is below this fraction (common practice).
    #[arg(long, default_value_t = Thresholds::default().min_inhibition)]
    pub min_inhibition: f64,
    /// Flag `poor-fit` below this R² (common practice).
    #[arg(long, default_value_t = Thresholds::default().min_r2)]
    pub min_r2: f64,
    /// Flag `too-few-points` below this many distinct concentrations (common practice).
    #[arg(long, default_value_t = Thresholds::default().min_concentrations)]
    pub min_concentrations: usize,
    /// Flag plates (and their compounds) whose Z′ is below this (Zhang et al. 1999: 0.5).
    #[arg(long, default_value_t = Thresholds::default().min_z_prime)]
    pub min_z_prime: f64,
    /// Wells the outlier rule marks (externally studentized residual beyond the Bonferroni
    /// bound, Cook & Weisberg 1982): exclude and refit, flag only, or keep (plain least squares).
    #[arg(long, value_enum, default_value_t = OutlierArg::Exclude)]
    pub outliers: OutlierArg,
    /// Family-wise level of the outlier rule, per curve.
    #[arg(long, default_value_t = Thresholds::default().outlier_alpha, value_parser = parse_fraction)]
    pub outlier_alpha: f64,
    /// Most wells one curve may lose to the outlier rule (flag `too-many-outliers` beyond).
    #[arg(long, default_value_t = Thresholds::default().max_outliers)]
    pub max_outliers: usize,
    /// Level of the F test of a flat line against the curve: p at or above it is "no significant inhibition".
    #[arg(long, default_value_t = Thresholds::default().flat_alpha, value_parser = parse_fraction)]
    pub flat_alpha: f64,
    /// % activity: lowest plausible fitted upper asymptote (else held at 100, flag `upper-outside-window`).
    #[arg(long, default_value_t = Thresholds::default().upper_window.0, allow_negative_numbers = true)]
    pub upper_min: f64,
    /// % activity: highest plausible fitted upper asymptote.
    #[arg(long, default_value_t = Thresholds::default().upper_window.1, allow_negative_numbers = true)]
    pub upper_max: f64,
    /// % activity: lowest plausible fitted lower asymptote (else held at 0, flag `lower-outside-window`).
    #[arg(long, default_value_t = Thresholds::default().lower_window.0, allow_negative_numbers = true)]
    pub lower_min: f64,
    /// % activity: highest plausible fitted lower asymptote.
    #[arg(long, default_value_t = Thresholds::default().lower_window.1, allow_negative_numbers = true)]
    pub lower_max: f64,
    /// Curves per parallel batch (memory and progress granularity).
    #[arg(long, default_value_t = 2048, hide = true)]
    pub batch_size: usize,
    /// Output format and destination.
    #[command(flatten)]
    pub output: OutputArgs,
    /// Pictures (one SVG per compound and a thumbnail grid) and the HTML report.
    #[command(flatten)]
    pub pictures: super::PictureArgs,
}

/// `--intervals` values (the core's [`IntervalMethod`] knows no flag).
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum IntervalArg {
    /// Wald on ln IC50 (fast; the default).
    Wald,
    /// Profile likelihood for IC50 (or Ki,app): several refits per end.
    Profile,
}

impl From<IntervalArg> for IntervalMethod {
    fn from(a: IntervalArg) -> Self {
        match a {
            IntervalArg::Wald => IntervalMethod::Wald,
            IntervalArg::Profile => IntervalMethod::Profile,
        }
    }
}

/// `--outliers` values (the core's [`OutlierMode`] knows no flag).
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum OutlierArg {
    /// Refit without them and list them (the default).
    Exclude,
    /// List them, but fit every well.
    Flag,
    /// No outlier rule: plain least squares on every well.
    Keep,
}

impl From<OutlierArg> for OutlierMode {
    fn from(a: OutlierArg) -> Self {
        match a {
            OutlierArg::Exclude => OutlierMode::Exclude,
            OutlierArg::Flag => OutlierMode::Flag,
            OutlierArg::Keep => OutlierMode::Keep,
        }
    }
}

impl Args {
    /// Arguments for `file` with every default.
    pub fn new(file: &str, format: Format) -> Args {
        let defaults = Thresholds::default();
        Args {
            file: file.into(),
            concentration_unit: None,
            fix_lower: None,
            fix_upper: None,
            normalise: false,
            enzyme: None,
            confidence: 0.95,
            intervals: IntervalArg::Wald,
            hill_steep: defaults.hill_steep,
            hill_shallow: defaults.hill_shallow,
            partial_above: defaults.partial_above,
            min_inhibition: defaults.min_inhibition,
            min_r2: defaults.min_r2,
            min_concentrations: defaults.min_concentrations,
            min_z_prime: defaults.min_z_prime,
            outliers: OutlierArg::Exclude,
            outlier_alpha: defaults.outlier_alpha,
            max_outliers: defaults.max_outliers,
            flat_alpha: defaults.flat_alpha,
            upper_min: defaults.upper_window.0,
            upper_max: defaults.upper_window.1,
            lower_min: defaults.lower_window.0,
            lower_max: defaults.lower_window.1,
            batch_size: 2048,
            output: OutputArgs { format, output: None },
            pictures: super::PictureArgs::default(),
        }
    }

    fn thresholds(&self) -> Thresholds {
        Thresholds {
            hill_steep: self.hill_steep,
            hill_shallow: self.hill_shallow,
            partial_above: self.partial_above,
            min_inhibition: self.min_inhibition,
            min_r2: self.min_r2,
            min_concentrations: self.min_concentrations,
            min_z_prime: self.min_z_prime,
            flat_alpha: self.flat_alpha,
            outlier_alpha: self.outlier_alpha,
            max_outliers: self.max_outliers,
            upper_window: (self.upper_min, self.upper_max),
            lower_window: (self.lower_min, self.lower_max),
        }
    }
}

/// Where rows come from; opened once, or twice with `--normalise`.
pub enum Source {
    /// A file path, or `-`.
    Path(String),
    /// Bytes in memory (the demo), with the name used in messages.
    Bytes(&'static [u8], String),
    /// Stdin spooled to a temporary file, named `<stdin>` in messages.
    Spooled(PathBuf),
}

impl Source {
    fn open(&self) -> Result<RowStream> {
        match self {
            Source::Path(p) => RowStream::open(p),
            Source::Bytes(b, name) => RowStream::new(name, Box::new(std::io::Cursor::new(*b)), b','),
            Source::Spooled(p) => {
                let f = std::fs::File::open(p).map_err(|e| Error::Read { path: "<stdin>".into(), source: e })?;
                RowStream::new("<stdin>", Box::new(f), b',')
            }
        }
    }

    fn len(&self) -> Option<u64> {
        match self {
            Source::Path(p) if p != "-" => std::fs::metadata(p).ok().map(|m| m.len()),
            Source::Bytes(b, _) => Some(b.len() as u64),
            Source::Spooled(p) => std::fs::metadata(p).ok().map(|m| m.len()),
            _ => None,
        }
    }
}

/// Removes the stdin spool file when done.
struct Spool(PathBuf);

impl Drop for Spool {
    fn drop(&mut self) {
        let _ = std::fs::remove_file(&self.0);
    }
}

/// Runs `kimech ic50`.
pub fn run(args: &Args) -> Result<()> {
    let mut _spool = None;
    let source = if args.file == "-" && args.normalise {
        let path = std::env::temp_dir().join(format!("kimech-ic50-stdin-{}.csv", std::process::id()));
        let mut file = std::fs::File::create(&path).map_err(|e| Error::Write { path: path.clone(), source: e })?;
        _spool = Some(Spool(path.clone()));
        std::io::copy(&mut std::io::stdin().lock(), &mut file)
            .map_err(|e| Error::Read { path: "<stdin>".into(), source: e })?;
        Source::Spooled(path)
    } else {
        Source::Path(args.file.clone())
    };
    let mut sink = OutputSink::create(args.output.output.as_deref(), &[&args.file])?;
    let wanted = args.pictures.plot.is_some() || args.pictures.report.is_some();
    let mut pictures = wanted.then(|| Pictures::new(args));
    let summary = run_source_with(&source, args, &mut sink, true, pictures.as_mut())?;
    sink.commit()?;
    if let Some(p) = &pictures {
        p.finish(args)?;
    }
    summary.into_result()
}

/// Thumbnails shown in the grid and the report at most (flagged first).
const GALLERY_CAP: usize = 60;
/// Compounds listed in the report's table at most.
const REPORT_ROWS: usize = 500;

/// What `--plot` and `--report` collect while the curves stream past: every
/// curve's SVG is written into the plot directory as it is fitted; a capped
/// gallery is kept for the grid and the report.
pub struct Pictures {
    /// Thumbnails and table rows.
    pub gallery: crate::plot::ic50::Gallery,
    /// The plate table (with `--normalise`).
    pub plates: Option<String>,
    /// Messages of compounds that failed.
    pub failures: Vec<String>,
    names: crate::plot::files::Names,
    plot_dir: Option<PathBuf>,
    input: String,
}

impl Pictures {
    /// Empty, for the run `args` describe.
    pub fn new(args: &Args) -> Pictures {
        let mut names = crate::plot::files::Names::new("ic50");
        // Reserved first, so a compound named "overview" cannot take the grid's name.
        let _ = names.next(Some("overview"));
        Pictures {
            gallery: crate::plot::ic50::Gallery::new(GALLERY_CAP, REPORT_ROWS),
            plates: None,
            failures: Vec::new(),
            names,
            plot_dir: args.pictures.plot.clone(),
            input: args.file.clone(),
        }
    }

    /// Adds a fitted curve: its SVG goes to the plot directory now.
    fn add(&mut self, curve: Curve, r: Ic50Result) -> Result<()> {
        if let Some(dir) = &self.plot_dir {
            let g = &self.gallery;
            let svg = crate::plot::ic50::figure(&r, &curve, &g.unit, &g.response, g.et)?;
            let name = self.names.next(Some(&r.compound));
            crate::plot::files::write_plots(dir, &[(name, svg.text)], &[&self.input])?;
        }
        self.gallery.add(curve, r);
        Ok(())
    }

    /// Writes the grid into the plot directory and the report page.
    fn finish(&self, args: &Args) -> Result<()> {
        if let Some(dir) = &self.plot_dir
            && !self.gallery.shown().is_empty()
        {
            let grid = self.gallery.grid()?;
            crate::plot::files::write_plots(dir, &[("ic50-overview.svg".into(), grid.text)], &[&args.file])?;
        }
        if let Some(path) = &args.pictures.report {
            let page = crate::plot::html::Page {
                title: format!("kimech ic50 — {}", args.file),
                intro: vec![format!("Dose-response fits of {} compound(s) from {}.", self.gallery.total, args.file)],
                sections: vec![self.section(&format!("kimech ic50 {}", args.file))?],
                caution: CAUTION.to_string(),
            };
            crate::io::write_output(Some(path), crate::plot::html::render(&page).as_bytes(), &[&args.file])?;
        }
        Ok(())
    }

    /// The report section of what was collected.
    pub fn section(&self, command: &str) -> Result<crate::plot::html::Section> {
        crate::plot::ic50::section(&self.gallery, self.plates.as_deref(), &self.failures, command)
    }
}

/// What a run did, for the exit status.
#[derive(Debug, Clone, Copy, Default)]
pub struct Summary {
    /// Compounds seen.
    pub total: usize,
    /// Compounds (and control rows) that could not be processed.
    pub failed: usize,
}

impl Summary {
    /// `Partial` when something failed.
    pub fn into_result(self) -> Result<()> {
        if self.failed == 0 {
            Ok(())
        } else {
            Err(Error::Partial { failed: self.failed, total: self.total, what: "compounds or control rows" })
        }
    }
}

/// Reads, fits and writes everything from `source` to `out`; messages about
/// failed compounds go to stderr as they are met (in input order).
pub fn run_source(source: &Source, args: &Args, out: &mut dyn Write, progress: bool) -> Result<Summary> {
    run_source_with(source, args, out, progress, None)
}

/// [`run_source`], also handing every fitted curve to `pictures`.
pub fn run_source_with(
    source: &Source,
    args: &Args,
    out: &mut dyn Write,
    progress: bool,
    mut pictures: Option<&mut Pictures>,
) -> Result<Summary> {
    check_options(args)?;
    let thresholds = args.thresholds();
    let mut summary = Summary::default();
    let plates = if args.normalise { Some(read_controls(source, &thresholds, &mut summary)?) } else { None };
    let stream = source.open()?;
    let layout = Layout::new(stream.table(), args)?;
    let mut grouper = Grouper::new(stream, layout, args, plates.as_ref());
    let mut writer = Writer::new(args.output.format, &grouper.layout, args.enzyme.is_some(), args.confidence);
    if let Some(p) = &plates {
        writer.plates(out, &p.qc)?;
        if let Some(pics) = pictures.as_deref_mut() {
            pics.plates = Some(human_plates(&p.qc));
        }
    }
    let response_unit = if args.normalise {
        Some("%".to_string())
    } else {
        grouper.stream.table().unit_text(grouper.layout.response).map(str::to_string)
    };
    let percent = response_unit.as_deref() == Some("%");
    let options_for = |unit: ConcUnit| Options {
        percent,
        outliers: args.outliers.into(),
        response_unit: response_unit.clone(),
        fix_lower: args.fix_lower,
        fix_upper: args.fix_upper,
        enzyme: args.enzyme.map(|e| unit.from_molar(e.molar)),
        unit,
        confidence: args.confidence,
        intervals: args.intervals.into(),
        thresholds,
        settings: crate::analysis::ic50::screening_settings(),
    };
    let mut bar = Progress::new(progress, source.len());
    let batch_size = args.batch_size.max(1);
    let mut current = grouper.next_batch(batch_size)?;
    while !current.is_empty() {
        let unit = grouper.unit.unwrap_or(ConcUnit::Molar);
        let options = options_for(unit);
        // Pictures need the curves after the fit: keep a copy only when asked.
        let kept: Vec<Option<Curve>> = match pictures {
            Some(_) => current.iter().map(|c| c.as_ref().ok().cloned()).collect(),
            None => Vec::new(),
        };
        let format = args.output.format;
        let morrison = args.enzyme.is_some();
        let (next, results) =
            rayon::join(|| grouper.next_batch(batch_size), || fit_batch(current, &options, format, morrison));
        summary.total += results.len();
        writer.batch(out, &results, unit)?;
        if let Some(pics) = pictures.as_deref_mut() {
            pics.gallery.unit = unit.symbol().to_string();
            pics.gallery.et = options.enzyme;
            pics.gallery.response = match &response_unit {
                Some(u) if u == "%" => "activity (%)".into(),
                Some(u) => format!("response ({u})"),
                None => "response (unit not given)".into(),
            };
            for (curve, (r, _)) in kept.into_iter().zip(&results) {
                match (curve, r) {
                    (Some(c), Ok(r)) => pics.add(c, r.clone())?,
                    (_, Err(e)) => pics.failures.push(e.to_string()),
                    (None, Ok(_)) => {}
                }
            }
        }
        for (result, _) in results {
            match result {
                // A missing unit is a property of the file, not of one compound: stop once.
                Err(e @ Error::NoUnit { .. }) => return Err(e),
                Err(e) => {
                    eprintln!("kimech: {e}");
                    summary.failed += 1;
                }
                Ok(_) => {}
            }
        }
        bar.update(grouper.stream.bytes_read());
        current = next?;
    }
    bar.finish();
    if grouper.unused_controls > 0 {
        eprintln!(
            "kimech: note: {} control rows were not used; pass --normalise to turn raw signal into % activity from them",
            grouper.unused_controls
        );
    }
    writer.finish(out, plates.as_ref().map(|p| p.qc.as_slice()))?;
    Ok(summary)
}

/// Option combinations that cannot mean what the user wants.
fn check_options(args: &Args) -> Result<()> {
    if let (Some(lower), Some(_)) = (args.fix_lower, args.enzyme) {
        return Err(Error::Option {
            option: "--fix-lower".into(),
            value: lower.to_string(),
            problem: "the Morrison model (--enzyme) has no lower asymptote; inhibition is complete at saturation"
                .into(),
            expected: "drop --fix-lower, and give % activity (--normalise) or background-subtracted signal".into(),
        });
    }
    if !(args.upper_min < args.upper_max && args.lower_min < args.lower_max) {
        return Err(Error::Option {
            option: "--upper-min/--upper-max/--lower-min/--lower-max".into(),
            value: format!("{}..{}, {}..{}", args.upper_min, args.upper_max, args.lower_min, args.lower_max),
            problem: "a plausible window must have its minimum below its maximum".into(),
            expected: "e.g. --upper-min 70 --upper-max 130 --lower-min -30 --lower-max 100 (the defaults)".into(),
        });
    }
    if args.min_concentrations < 2 || args.min_z_prime >= 1.0 || args.min_z_prime.is_nan() || args.hill_shallow < 0.0 {
        return Err(Error::Option {
            option: "thresholds".into(),
            value: format!(
                "--min-concentrations {}, --min-z-prime {}, --hill-shallow {}",
                args.min_concentrations, args.min_z_prime, args.hill_shallow
            ),
            problem: "a threshold is outside its meaningful range".into(),
            expected: "use --min-concentrations ≥ 2, --min-z-prime < 1 and --hill-shallow ≥ 0".into(),
        });
    }
    Ok(())
}

/// A fitted compound and its CSV or JSON line, rendered on the worker thread
/// (formatting two dozen numbers per curve is too much to leave to the one
/// thread that writes).
type Fitted = (Result<Ic50Result>, String);

fn fit_batch(batch: Vec<Result<Curve>>, options: &Options, format: Format, morrison: bool) -> Vec<Fitted> {
    batch
        .into_par_iter()
        .map(|item| {
            let result = item.and_then(|curve| analyse(&curve, options));
            let line = match (&result, format) {
                (Ok(r), Format::Csv) => csv_line(r, morrison),
                (Ok(r), Format::Json) => serde_json::to_string(r).unwrap_or_default(),
                _ => String::new(),
            };
            (result, line)
        })
        .collect()
}

/// One CSV record: fields quoted (RFC 4180) when they hold a comma, quote or line break.
fn csv_line(r: &Ic50Result, morrison: bool) -> String {
    let mut line = String::with_capacity(400);
    for (k, field) in csv_row(r, morrison).iter().enumerate() {
        if k > 0 {
            line.push(',');
        }
        if field.contains([',', '"', '\n', '\r']) {
            line.push('"');
            line.push_str(&field.replace('"', "\"\""));
            line.push('"');
        } else {
            line.push_str(field);
        }
    }
    line.push('\n');
    line
}

/// Column positions and the names of carried columns.
struct Layout {
    compound: usize,
    concentration: usize,
    response: usize,
    plate: Option<usize>,
    control: Option<usize>,
    /// (column index, header as written, header as output).
    carried: Vec<(usize, String, String)>,
    header_unit: Option<ConcUnit>,
}

impl Layout {
    fn new(table: &Table, args: &Args) -> Result<Layout> {
        let compound = table.require(&COMPOUND)?;
        let concentration = table.require(&CONCENTRATION)?;
        let response = table.require(&RESPONSE)?;
        let plate = table.find(&PLATE);
        let control = if args.normalise { Some(table.require(&CONTROL)?) } else { table.find(&CONTROL) };
        let used = [Some(compound), Some(concentration), Some(response), plate, control];
        let ours = csv_fields(args.enzyme.is_some());
        let carried = (0..table.columns.len())
            .filter(|c| !used.contains(&Some(*c)))
            .map(|c| {
                let header = table.columns[c].header.clone();
                let clash = ours.iter().any(|o| o.split(' ').next() == Some(table.columns[c].key.as_str()));
                let out = if clash { format!("carried_{header}") } else { header.clone() };
                (c, header, out)
            })
            .collect();
        let header_unit = table.header_unit(concentration)?.or(args.concentration_unit);
        Ok(Layout { compound, concentration, response, plate, control, carried, header_unit })
    }
}

/// What a row is, from the control column.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Kind {
    Sample,
    Uninhibited,
    Inhibited,
}

fn kind(table: &Table, row: &Record, col: Option<usize>) -> Result<Kind> {
    let Some(c) = col else { return Ok(Kind::Sample) };
    let text = table.text(row, c);
    if text.is_empty() {
        Ok(Kind::Sample)
    } else if text.eq_ignore_ascii_case("uninhibited") {
        Ok(Kind::Uninhibited)
    } else if text.eq_ignore_ascii_case("inhibited") {
        Ok(Kind::Inhibited)
    } else {
        Err(table.cell_error(
            row,
            c,
            "not a control kind",
            "leave it empty for compound wells, or write 'uninhibited' (full activity) or 'inhibited' (no activity)",
        ))
    }
}

/// Per-plate control statistics from a first pass over the file.
struct Plates {
    index: HashMap<String, usize>,
    qc: Vec<PlateQc>,
}

fn read_controls(source: &Source, thresholds: &Thresholds, summary: &mut Summary) -> Result<Plates> {
    let mut stream = source.open()?;
    let table = stream.table().clone();
    let plate_col = table.find(&PLATE);
    let control_col = Some(table.require(&CONTROL)?);
    let response_col = table.require(&RESPONSE)?;
    let mut index: HashMap<String, usize> = HashMap::new();
    let mut wells: Vec<(String, Wells, Wells)> = Vec::new();
    let mut row = Record { line: 0, cells: Vec::new() };
    while stream.next_into(&mut row)? {
        let plate = plate_col.map_or("", |c| table.text(&row, c));
        let k = match index.get(plate) {
            Some(k) => *k,
            None => {
                wells.push((plate.to_string(), Wells::default(), Wells::default()));
                index.insert(plate.to_string(), wells.len() - 1);
                wells.len() - 1
            }
        };
        let Ok(which) = kind(&table, &row, control_col) else { continue }; // reported with its compound later
        if which == Kind::Sample {
            continue;
        }
        match table.number(&row, response_col) {
            Ok(y) if which == Kind::Uninhibited => wells[k].1.add(y),
            Ok(y) => wells[k].2.add(y),
            Err(e) => {
                eprintln!("kimech: control well of plate '{plate}' not used: {e}");
                summary.failed += 1;
            }
        }
    }
    let qc = wells.iter().map(|(p, u, i)| PlateQc::new(p, u, i, thresholds.min_z_prime)).collect();
    Ok(Plates { index, qc })
}

/// Builds curves from contiguous compound blocks.
struct Grouper<'a> {
    stream: RowStream,
    layout: Layout,
    plates: Option<&'a Plates>,
    flag_unit: Option<ConcUnit>,
    /// The reporting unit: header or flag, else that of the first concentration read.
    unit: Option<ConcUnit>,
    row: Record,
    pending: bool,
    done: bool,
    seen: HashSet<String>,
    unused_controls: usize,
}

/// A compound block being read.
struct Block {
    compound: String,
    first: u64,
    last: u64,
    x: Vec<f64>,
    y: Vec<f64>,
    lines: Vec<u64>,
    carried: Vec<Vec<String>>,
    low_z: bool,
    error: Option<Error>,
}

impl<'a> Grouper<'a> {
    fn new(stream: RowStream, layout: Layout, args: &Args, plates: Option<&'a Plates>) -> Grouper<'a> {
        let unit = layout.header_unit;
        Grouper {
            stream,
            layout,
            plates,
            flag_unit: args.concentration_unit,
            unit,
            row: Record { line: 0, cells: Vec::new() },
            pending: false,
            done: false,
            seen: HashSet::new(),
            unused_controls: 0,
        }
    }

    /// Reads up to `max` complete compound blocks.
    fn next_batch(&mut self, max: usize) -> Result<Vec<Result<Curve>>> {
        let mut batch = Vec::with_capacity(max.min(4096));
        let mut block: Option<Block> = None;
        while batch.len() < max {
            if !self.pending && (self.done || !self.stream.next_into(&mut self.row)?) {
                self.done = true;
                break;
            }
            self.pending = false;
            let table = self.stream.table();
            let kind = kind(table, &self.row, self.layout.control);
            if let Ok(Kind::Uninhibited | Kind::Inhibited) = kind {
                if self.plates.is_none() {
                    self.unused_controls += 1;
                }
                continue;
            }
            let name = table.text(&self.row, self.layout.compound);
            if block.as_ref().is_some_and(|b| b.compound != name) {
                // This row starts the next block: finish the current one, keep the row.
                self.pending = true;
                if let Some(b) = block.take() {
                    batch.push(self.finish(b));
                }
                continue;
            }
            if block.is_none() {
                block = Some(self.start(name.to_string()));
            }
            if let Some(b) = block.as_mut() {
                let row_error = kind.err();
                Self::add_row(
                    &self.stream,
                    &self.layout,
                    self.plates,
                    self.flag_unit,
                    &mut self.unit,
                    &self.row,
                    b,
                    row_error,
                );
            }
        }
        // The loop stops on a full batch right after a block was finished, so
        // an open block here means the file ended.
        if let Some(b) = block.take() {
            batch.push(self.finish(b));
        }
        Ok(batch)
    }

    fn start(&mut self, compound: String) -> Block {
        let line = self.row.line;
        let mut b = Block {
            compound,
            first: line,
            last: line,
            x: Vec::new(),
            y: Vec::new(),
            lines: Vec::new(),
            carried: vec![Vec::new(); self.layout.carried.len()],
            low_z: false,
            error: None,
        };
        if b.compound.is_empty() {
            b.error = Some(self.stream.table().cell_error(
                &self.row,
                self.layout.compound,
                "empty compound identifier",
                "every compound well needs a compound; control wells need 'uninhibited' or 'inhibited' in the control column",
            ));
        } else if !self.seen.insert(b.compound.clone()) {
            b.error = Some(Error::Data {
                group: format!("compound '{}' (line {line})", b.compound),
                problem: "its rows appear again after rows of other compounds".into(),
                expected: "rows of one compound must be together; sort the file by compound (the earlier block was fitted on its own)".into(),
            });
        }
        b
    }

    #[allow(clippy::too_many_arguments)]
    fn add_row(
        stream: &RowStream,
        layout: &Layout,
        plates: Option<&Plates>,
        flag_unit: Option<ConcUnit>,
        unit: &mut Option<ConcUnit>,
        row: &Record,
        b: &mut Block,
        row_error: Option<Error>,
    ) {
        b.last = row.line;
        let table = stream.table();
        for (k, (col, _, _)) in layout.carried.iter().enumerate() {
            let v = table.text(row, *col);
            if !b.carried[k].iter().any(|s| s == v) {
                b.carried[k].push(v.to_string());
            }
        }
        if b.error.is_some() {
            return;
        }
        let parsed = row_error.map_or_else(|| Self::parse_row(table, layout, plates, flag_unit, unit, row, b), Err);
        if let Err(e) = parsed {
            b.error = Some(with_compound(e, &b.compound));
        }
    }

    fn parse_row(
        table: &Table,
        layout: &Layout,
        plates: Option<&Plates>,
        flag_unit: Option<ConcUnit>,
        unit: &mut Option<ConcUnit>,
        row: &Record,
        b: &mut Block,
    ) -> Result<()> {
        let c = table.concentration(row, layout.concentration, flag_unit, "--concentration-unit")?;
        if c.qualifier.is_bound() {
            return Err(table.cell_error(
                row,
                layout.concentration,
                "a qualified concentration",
                "give the concentration tested, without < or >",
            ));
        }
        if c.molar < 0.0 {
            return Err(table.cell_error(
                row,
                layout.concentration,
                "negative concentration",
                "concentrations must be zero (no inhibitor) or positive",
            ));
        }
        let mut y = table.number(row, layout.response)?;
        if let Some(p) = plates {
            let plate = layout.plate.map_or("", |c| table.text(row, c));
            let qc = p.index.get(plate).map(|k| &p.qc[*k]);
            match qc.and_then(|q| q.percent_activity(y).map(|a| (a, q))) {
                Some((activity, q)) => {
                    y = activity;
                    b.low_z |= !q.flags.is_empty();
                }
                None => {
                    let (u, i) = qc.map_or((0, 0), |q| (q.uninhibited_n, q.inhibited_n));
                    return Err(Error::Data {
                        group: format!("compound '{}' (line {})", b.compound, row.line),
                        problem: format!(
                            "plate '{plate}' has {u} uninhibited and {i} inhibited control wells (or no signal window between them)"
                        ),
                        expected:
                            "--normalise needs both kinds of control well, with different mean signals, on every plate"
                                .into(),
                    });
                }
            }
        }
        let reporting = *unit.get_or_insert(c.unit);
        b.x.push(reporting.from_molar(c.molar));
        b.y.push(y);
        b.lines.push(row.line);
        Ok(())
    }

    fn finish(&self, b: Block) -> Result<Curve> {
        if let Some(e) = b.error {
            return Err(e);
        }
        let mut read_flags = Vec::new();
        if b.low_z {
            read_flags.push("plate-z-prime-low");
        }
        let carried = self
            .layout
            .carried
            .iter()
            .zip(b.carried)
            .map(|((_, header, _), values)| {
                if values.len() > 1 && !read_flags.contains(&"carried-varies") {
                    read_flags.push("carried-varies");
                }
                (header.clone(), values.join(";"))
            })
            .collect();
        let origin =
            if b.first == b.last { format!("line {}", b.first) } else { format!("lines {}-{}", b.first, b.last) };
        Ok(Curve {
            compound: b.compound,
            origin,
            x: b.x,
            y: b.y,
            lines: b.lines,
            carried: Carried(carried),
            read_flags,
        })
    }
}

/// Puts the compound into a cell error's message, so it names compound and line.
fn with_compound(e: Error, compound: &str) -> Error {
    match e {
        Error::Cell(mut cell) => {
            cell.problem = format!("compound '{compound}': {}", cell.problem);
            Error::Cell(cell)
        }
        other => other,
    }
}

/// A progress bar on stderr, only for a terminal and only once the job has run a second.
struct Progress {
    enabled: bool,
    total: Option<u64>,
    started: std::time::Instant,
    bar: Option<indicatif::ProgressBar>,
}

impl Progress {
    fn new(wanted: bool, total: Option<u64>) -> Progress {
        let enabled = wanted && std::io::stderr().is_terminal();
        Progress { enabled, total, started: std::time::Instant::now(), bar: None }
    }

    fn update(&mut self, bytes: u64) {
        if !self.enabled || self.started.elapsed().as_secs_f64() < 1.0 {
            return;
        }
        let bar = self.bar.get_or_insert_with(|| {
            let bar = match self.total {
                Some(t) => indicatif::ProgressBar::new(t),
                None => indicatif::ProgressBar::new_spinner(),
            };
            let style = indicatif::ProgressStyle::with_template("{bar:40} {bytes}/{total_bytes} read, eta {eta}")
                .unwrap_or_else(|_| indicatif::ProgressStyle::default_bar());
            bar.set_style(style);
            bar
        });
        bar.set_position(bytes);
    }

    fn finish(&mut self) {
        if let Some(bar) = self.bar.take() {
            bar.finish_and_clear();
        }
    }
}

/// The CSV columns before the carried ones (`ic50` and `ki_app` get the unit appended).
fn csv_fields(morrison: bool) -> Vec<&'static str> {
    let mut f = vec![
        "compound",
        "n",
        "converged",
        "call",
        "qualifier",
        "ic50",
        "ic50_se",
        "ic50_low",
        "ic50_high",
        "ic50_interval",
        "pic50",
        "hill",
        "hill_se",
        "hill_low",
        "hill_high",
        "upper",
        "upper_se",
        "upper_low",
        "upper_high",
        "lower",
        "lower_se",
        "lower_low",
        "lower_high",
        "residual_sd",
        "r2",
        "model",
        "flat_p",
        "outliers",
    ];
    if morrison {
        f.extend(["ki_app", "ki_app_low", "ki_app_high"]);
    }
    f.push("flags");
    f
}

/// The document header of JSON output and the column header of CSV output
/// depend on the first batch (the unit), so writers keep a little state.
struct Writer {
    format: Format,
    carried_headers: Vec<String>,
    morrison: bool,
    started: bool,
    any_result: bool,
    flags_seen: Vec<&'static str>,
    confidence: f64,
}

impl Writer {
    fn new(format: Format, layout: &Layout, morrison: bool, confidence: f64) -> Writer {
        Writer {
            format,
            carried_headers: layout.carried.iter().map(|c| c.2.clone()).collect(),
            morrison,
            started: false,
            any_result: false,
            flags_seen: Vec::new(),
            confidence,
        }
    }

    fn plates(&mut self, out: &mut dyn Write, qc: &[PlateQc]) -> Result<()> {
        if self.format == Format::Json {
            let plates = serde_json::to_string(qc).map_err(|e| Error::Serialise(e.to_string()))?;
            write_all(out, format!("{{\"plates\": {plates},\n\"results\": [\n").as_bytes())?;
            self.started = true;
        }
        Ok(())
    }

    fn batch(&mut self, out: &mut dyn Write, results: &[Fitted], unit: ConcUnit) -> Result<()> {
        let ok: Vec<&Ic50Result> = results.iter().filter_map(|r| r.0.as_ref().ok()).collect();
        let lines = results.iter().filter(|r| r.0.is_ok()).map(|r| r.1.as_str());
        for r in &ok {
            for f in &r.flags {
                if !self.flags_seen.contains(f) {
                    self.flags_seen.push(f);
                }
            }
        }
        match self.format {
            Format::Json => {
                if !self.started {
                    write_all(out, b"{\"results\": [\n")?;
                    self.started = true;
                }
                let mut text = String::new();
                for line in lines {
                    if self.any_result {
                        text.push_str(",\n");
                    }
                    self.any_result = true;
                    text.push_str(line);
                }
                write_all(out, text.as_bytes())
            }
            Format::Csv => {
                let mut text = String::new();
                if !self.started {
                    let mut w = csv::WriterBuilder::new().has_headers(false).from_writer(Vec::new());
                    w.write_record(self.csv_header(unit)).map_err(|e| Error::Serialise(e.to_string()))?;
                    text = String::from_utf8_lossy(&w.into_inner().map_err(|e| Error::Serialise(e.to_string()))?)
                        .into_owned();
                    self.started = true;
                }
                lines.for_each(|l| text.push_str(l));
                write_all(out, text.as_bytes())
            }
            Format::Table => {
                if ok.is_empty() {
                    return Ok(());
                }
                self.started = true;
                write_all(out, human_batch(&ok, self.morrison, unit, self.confidence).as_bytes())
            }
        }
    }

    fn csv_header(&self, unit: ConcUnit) -> Vec<String> {
        let mut h: Vec<String> = csv_fields(self.morrison)
            .into_iter()
            .map(|f| if f == "ic50" || f == "ki_app" { format!("{f} ({unit})") } else { f.to_string() })
            .collect();
        h.extend(self.carried_headers.iter().cloned());
        h
    }

    fn finish(&mut self, out: &mut dyn Write, plates: Option<&[PlateQc]>) -> Result<()> {
        match self.format {
            Format::Json => {
                if !self.started {
                    write_all(out, b"{\"results\": [\n")?;
                }
                write_all(out, &crate::io::provenance::compact_json_tail())
            }
            Format::Csv => {
                if !self.started {
                    let header = self.csv_header(ConcUnit::Molar).join(",");
                    write_all(out, format!("{header}\n").as_bytes())?;
                }
                Ok(())
            }
            Format::Table => {
                let mut text = String::new();
                if let Some(qc) = plates {
                    text.push_str(&human_plates(qc));
                }
                if !self.flags_seen.is_empty() {
                    text.push_str("flags:\n");
                    for f in &self.flags_seen {
                        text.push_str(&format!("  {f}: {}\n", flag_meaning(f)));
                    }
                }
                text.push_str(CAUTION);
                text.push('\n');
                write_all(out, text.as_bytes())
            }
        }
    }
}

fn write_all(out: &mut dyn Write, bytes: &[u8]) -> Result<()> {
    out.write_all(bytes).map_err(|source| Error::Write { path: PathBuf::from("<output>"), source })
}

fn num(v: f64) -> String {
    if v.is_finite() { format!("{v}") } else { String::new() }
}

fn opt(v: Option<f64>) -> String {
    v.map_or(String::new(), num)
}

fn param_cells(p: &Param) -> [String; 4] {
    [num(p.value), opt(p.se), opt(p.low), opt(p.high)]
}

/// An IC50 cell: `>10000`, `<0.5` or the number.
fn qualified(q: Qualifier, v: f64) -> String {
    match q {
        Qualifier::Equal => num(v),
        q => format!("{}{}", q.symbol(), num(v)),
    }
}

fn csv_row(r: &Ic50Result, morrison: bool) -> Vec<String> {
    let mut row = vec![
        neutralise_formula(&r.compound),
        r.n.to_string(),
        r.converged.to_string(),
        r.call.word().to_string(),
        crate::io::output::qualifier_cell(r.qualifier),
        qualified(r.qualifier, r.ic50.value),
        opt(r.ic50.se),
        opt(r.ic50.low),
        opt(r.ic50.high),
        r.ic50.interval.to_string(),
        num(r.pic50),
    ];
    // A slope fitted to a curve without its middle is not a measurement; leave
    // it out of the table the next step reads (JSON keeps it, with the qualifier).
    match (&r.hill, r.qualifier) {
        (Some(h), Qualifier::Equal) => row.extend(param_cells(h)),
        _ => row.extend(std::iter::repeat_n(String::new(), 4)),
    }
    row.extend(param_cells(&r.upper));
    row.extend(param_cells(&r.lower));
    row.extend([num(r.residual_sd), num(r.r2), r.model.to_string(), opt(r.flat_p), r.outliers.len().to_string()]);
    if morrison {
        match &r.ki_app {
            Some(k) => row.extend([qualified(r.qualifier, k.value), opt(k.low), opt(k.high)]),
            None => row.extend(std::iter::repeat_n(String::new(), 3)),
        }
    }
    row.push(r.flags.join(";"));
    row.extend(r.carried.0.iter().map(|(_, v)| neutralise_formula(v)));
    row
}

fn human_batch(results: &[&Ic50Result], morrison: bool, unit: ConcUnit, confidence: f64) -> String {
    let level = format!("{:.0}% interval", 100.0 * confidence);
    let mut header: Vec<String> =
        ["compound", "n", "call", &format!("IC50 ({unit})"), &level, "pIC50", "Hill", "upper", "lower", "R²"]
            .map(String::from)
            .to_vec();
    if morrison {
        header[6] = format!("Ki,app ({unit})");
    }
    header.push("flags".into());
    let mut grid = new_grid(header);
    for r in results {
        let interval = match r.qualifier.is_bound() {
            true => "(bound)".into(),
            false => crate::plot::ic50::interval_text(r.ic50.low, r.ic50.high),
        };
        let ic50 = match r.qualifier {
            Qualifier::Equal => sig(r.ic50.value, 4),
            q => format!("{} {}", q.symbol(), sig(r.ic50.value, 4)),
        };
        let pic50 = match r.qualifier {
            Qualifier::Equal => format!("{:.2}", r.pic50),
            q => format!("{} {:.2}", q.reversed().symbol(), r.pic50),
        };
        // Out of range, the slope and Ki,app are not measured: show the bound or nothing.
        let slope = match (morrison, r.qualifier) {
            (true, q) => r.ki_app.as_ref().map_or("—".into(), |k| match q {
                Qualifier::Equal => sig(k.value, 4),
                q => format!("{} {}", q.symbol(), sig(k.value, 4)),
            }),
            (false, Qualifier::Equal) => r.hill.as_ref().map_or("—".into(), |h| sig(h.value, 3)),
            (false, _) => "—".into(),
        };
        let n = match r.outliers.len() {
            0 => r.n.to_string(),
            k => format!("{} (+{k} out)", r.n),
        };
        grid.add_row(vec![
            r.compound.clone(),
            n,
            r.call.word().to_string(),
            ic50,
            interval,
            pic50,
            slope,
            sig(r.upper.value, 4),
            sig(r.lower.value, 4),
            sig(r.r2, 3),
            r.flags.join(", "),
        ]);
    }
    let method = results.first().map_or("", |r| {
        if morrison {
            "Morrison (known Et); Ki,app is the apparent constant, before any mechanism correction (kimech ki applies it)"
        } else {
            r.model
        }
    });
    format!("{grid}\nmodel: {method}; IC50 interval: {}\n\n", results.first().map_or("", |r| r.ic50.interval))
}

fn human_plates(qc: &[PlateQc]) -> String {
    let mut grid = new_grid(
        ["plate", "uninhibited n", "mean", "SD", "inhibited n", "mean", "SD", "Z′", "flags"].map(String::from).to_vec(),
    );
    for p in qc {
        grid.add_row(vec![
            if p.plate.is_empty() { "(one plate)".into() } else { p.plate.clone() },
            p.uninhibited_n.to_string(),
            sig(p.uninhibited_mean, 4),
            sig(p.uninhibited_sd, 3),
            p.inhibited_n.to_string(),
            sig(p.inhibited_mean, 4),
            sig(p.inhibited_sd, 3),
            sig(p.z_prime, 3),
            p.flags.join(", "),
        ]);
    }
    format!("Plate controls (Z′, Zhang, Chung & Oldenburg 1999)\n{grid}\n\n")
}

/// One line per flag for the human report.
pub fn flag_meaning(code: &str) -> &'static str {
    match code {
        "ic50-above-range" => "IC50 above the highest tested concentration; reported as '>' that concentration",
        "ic50-below-range" => "IC50 below the lowest tested concentration; reported as '<' that concentration",
        "hill-steep" => {
            "Hill coefficient steeper than the --hill-steep limit (aggregation, tight binding or an assay artefact?)"
        }
        "hill-shallow" => {
            "Hill coefficient shallower than the --hill-shallow limit (heterogeneity, solubility or several sites?)"
        }
        "partial-inhibition" => {
            "the curve levels off well above zero activity (lower asymptote above --partial-above of the full activity)"
        }
        "no-inhibition" => {
            "no significant inhibition: a flat line fits as well (F test, --flat-alpha), or less than --min-inhibition at the highest concentration"
        }
        "poor-fit" => "R² below --min-r2: the logistic does not describe these data well",
        "too-few-points" => "fewer distinct concentrations than --min-concentrations",
        "not-converged" => "the fit did not converge; the estimates are not trustworthy",
        "hill-fixed" => {
            "no transition inside the tested range determines the slope; Hill held at 1 to place the IC50, which is therefore approximate (~) or a bound"
        }
        "tight-binding-titration" => "Ki,app below Et/10: the curve mostly measures the enzyme concentration",
        "plate-z-prime-low" => "a plate of this compound has Z′ below --min-z-prime",
        "carried-varies" => "a carried column has different values within the compound (joined with ';')",
        "outlier-excluded" => {
            "wells marked by the outlier rule (studentized residual beyond the Bonferroni bound, Cook & Weisberg 1982) were left out of the fit; they are listed"
        }
        "outlier-flagged" => "wells marked by the outlier rule are listed but still fitted (--outliers flag)",
        "too-many-outliers" => {
            "the outlier rule marks more wells than --max-outliers allows; the curve itself may be unreliable"
        }
        "upper-outside-window" => {
            "% activity: the fitted upper asymptote fell outside --upper-min..--upper-max; it was held at 100 %"
        }
        "lower-outside-window" => {
            "% activity: the fitted lower asymptote fell outside --lower-min..--lower-max; it was held at 0 %"
        }
        _ => "",
    }
}

/// Runs `ic50` on in-memory CSV (the demo), returning the report bytes.
pub fn run_bytes(name: &str, bytes: &'static [u8], args: &Args) -> Result<(Vec<u8>, Summary)> {
    let mut out = Vec::new();
    let summary = run_source(&Source::Bytes(bytes, name.to_string()), args, &mut out, false)?;
    Ok((out, summary))
}

/// [`run_bytes`], also collecting the pictures (for the demo's report).
pub fn run_bytes_with_pictures(name: &str, bytes: &'static [u8], args: &Args) -> Result<(Vec<u8>, Summary, Pictures)> {
    let mut out = Vec::new();
    let mut pictures = Pictures::new(args);
    let summary = run_source_with(&Source::Bytes(bytes, name.to_string()), args, &mut out, false, Some(&mut pictures))?;
    Ok((out, summary, pictures))
}
