//! The views of `kimech ic50`, written while the curves stream past: the
//! CSV (one row per compound, the table `kimech ki` reads), the JSON (the
//! result structs as they are, one compact line each) and the terminal table.
//!
//! The columns are declared once, in [`COLUMNS`], with name, unit and value;
//! the CSV header, the CSV rows and the terminal table all come from that
//! list (a column the table shows says how, under which label). Every CSV
//! cell goes through the one export writer, [`CsvExport`]: text cells and
//! headers are guarded against spreadsheet formulas, numbers never are, and
//! an exact qualifier is an empty cell, as in every other export.

use std::io::Write;
use std::path::PathBuf;

use super::{CAUTION, Grid};
use crate::analysis::ic50::{Ic50Result, PlateQc};
use crate::error::{Error, Result};
use crate::io::Format;
use crate::io::ic50::CarriedColumn;
use crate::io::output::{Cell, CsvExport, RenderedRow, RowBuilder, new_grid, sig, write_shortest};
use crate::report::code::{Code, joined};
use crate::report::{Origin, Param};
use crate::units::{ConcUnit, Qualifier, for_people, potency};

/// What the header and the table need besides a result.
#[derive(Debug, Clone, Copy)]
pub struct Context {
    /// Unit of IC50, its interval and Ki,app.
    pub unit: ConcUnit,
    /// Tight-binding fits (`--enzyme`): the Ki,app columns are written and the table shows Ki,app for Hill.
    pub morrison: bool,
    /// Confidence level of the intervals.
    pub confidence: f64,
}

/// What a column's header carries besides its name.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Unit {
    /// Nothing (counts, words, response units, fractions).
    None,
    /// The concentration unit, as `ic50 (nM)`, so that the next step reads it.
    Concentration,
}

/// Which fits have the column.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Models {
    /// Every fit.
    All,
    /// Only Morrison fits (`--enzyme`).
    Morrison,
}

/// Which number of a [`Param`] a column holds.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Part {
    /// The estimate.
    Value,
    /// Its standard error.
    Se,
    /// The lower end of its interval.
    Low,
    /// The upper end of its interval.
    High,
}

/// A CSV cell of a result, borrowing what it can from it, so that a row is
/// written straight into its buffer with nothing allocated per cell.
pub enum Piece<'r> {
    /// Text (guarded against formulas, quoted when it must be).
    Text(&'r str),
    /// Text made for the cell.
    Made(String),
    /// Where the wells came from (`file:2-11`), written into the row as it is made.
    Source(&'r Origin),
    /// Flag codes joined by `;` (a text cell).
    Codes(&'r [Code]),
    /// A number with every digit it has; empty when absent or not finite.
    Full(Option<f64>),
    /// A count.
    Count(usize),
    /// An IC50 (or Ki,app): the number, or its bound as written (`>10000`).
    Qualified(Qualifier, f64),
}

impl Piece<'_> {
    /// Appends the cell to `row`.
    #[inline(always)]
    pub fn write_to(&self, row: &mut RowBuilder) {
        match self {
            Piece::Text(t) => row.text(t),
            Piece::Made(t) => row.text(t),
            Piece::Source(o) => row.text_with(|out| o.write_cell(out)),
            Piece::Codes(codes) => row.text_with(|out| {
                for (k, c) in codes.iter().enumerate() {
                    if k > 0 {
                        out.push(b';');
                    }
                    out.extend_from_slice(c.as_str().as_bytes());
                }
            }),
            Piece::Full(v) => row.full(*v),
            Piece::Count(n) => row.count(Some(*n)),
            Piece::Qualified(Qualifier::Equal, v) => row.full(Some(*v)),
            Piece::Qualified(q, v) => row.text_with(|out| {
                out.extend_from_slice(q.symbol().as_bytes());
                if v.is_finite() {
                    write_shortest(*v, out);
                }
            }),
        }
    }

    /// The cell as a [`Cell`] (for writers of whole rows).
    pub fn cell(&self) -> Cell {
        match self {
            Piece::Text(t) => Cell::Text(t.to_string()),
            Piece::Made(t) => Cell::Text(t.clone()),
            Piece::Source(o) => Cell::Text(o.cell()),
            Piece::Codes(codes) => Cell::Text(joined(codes, ";")),
            Piece::Full(v) => Cell::Full(*v),
            Piece::Count(n) => Cell::Count(Some(*n)),
            Piece::Qualified(Qualifier::Equal, v) => Cell::Full(Some(*v)),
            Piece::Qualified(q, v) => Cell::Text(format!("{}{}", q.symbol(), Cell::Full(Some(*v)).render())),
        }
    }
}

/// How a row fills a column.
#[derive(Clone, Copy)]
pub enum Value {
    /// A cell made from the result.
    Cell(for<'r> fn(&'r Ic50Result) -> Piece<'r>),
    /// One number of a parameter (empty when the parameter is absent).
    Param(fn(&Ic50Result) -> Option<&Param>, Part),
}

/// A table label: fixed, or made from the context (units, confidence level).
#[derive(Clone, Copy)]
pub enum Label {
    /// As written.
    Fixed(&'static str),
    /// Made from the context.
    Made(fn(&Context) -> String),
}

/// How the terminal table shows a column.
#[derive(Clone, Copy)]
pub struct Shown {
    /// Its label.
    pub label: Label,
    /// Its cell, for people.
    pub text: fn(&Ic50Result, &Context) -> String,
}

/// One output column: name, unit and value, and whether the table shows it.
#[derive(Clone, Copy)]
pub struct Column {
    /// CSV header name (the unit appended by [`Unit`]).
    pub name: &'static str,
    /// What the header carries besides the name.
    pub unit: Unit,
    /// Which fits have it.
    pub models: Models,
    /// How a row fills it.
    pub value: Value,
    /// The terminal table's view of it, if shown.
    pub shown: Option<Shown>,
}

impl Column {
    const fn cell(name: &'static str, value: for<'r> fn(&'r Ic50Result) -> Piece<'r>) -> Column {
        Column { name, unit: Unit::None, models: Models::All, value: Value::Cell(value), shown: None }
    }

    const fn param(name: &'static str, get: fn(&Ic50Result) -> Option<&Param>, part: Part) -> Column {
        Column { name, unit: Unit::None, models: Models::All, value: Value::Param(get, part), shown: None }
    }

    const fn concentration(mut self) -> Column {
        self.unit = Unit::Concentration;
        self
    }

    const fn morrison(mut self) -> Column {
        self.models = Models::Morrison;
        self
    }

    const fn shown(mut self, label: Label, text: fn(&Ic50Result, &Context) -> String) -> Column {
        self.shown = Some(Shown { label, text });
        self
    }

    /// Whether fits of this kind have the column.
    pub fn present(&self, morrison: bool) -> bool {
        morrison || self.models == Models::All
    }

    /// Its CSV header.
    pub fn header(&self, unit: ConcUnit) -> String {
        match self.unit {
            Unit::None => self.name.to_string(),
            Unit::Concentration => format!("{} ({unit})", self.name),
        }
    }

    /// Its CSV cell for `r`.
    #[inline(always)]
    pub fn piece_of<'r>(&self, r: &'r Ic50Result) -> Piece<'r> {
        match self.value {
            Value::Cell(f) => f(r),
            Value::Param(get, part) => Piece::Full(get(r).and_then(|p| match part {
                Part::Value => Some(p.value),
                Part::Se => p.se,
                Part::Low => p.low,
                Part::High => p.high,
            })),
        }
    }

    /// Its CSV cell for `r`, as a [`Cell`].
    pub fn cell_of(&self, r: &Ic50Result) -> Cell {
        self.piece_of(r).cell()
    }
}

/// A concentration or pIC50 for people, with its qualifier (`> 10000`).
fn people(q: Qualifier, v: String) -> String {
    match q {
        Qualifier::Equal => v,
        q => format!("{} {v}", q.symbol()),
    }
}

/// A slope fitted to a curve without its middle is not a measurement: it is
/// left out of the table the next step reads (JSON keeps it, with the qualifier).
fn measured_hill(r: &Ic50Result) -> Option<&Param> {
    r.hill.as_ref().filter(|_| r.qualifier == Qualifier::Equal)
}

fn upper(r: &Ic50Result) -> Option<&Param> {
    Some(&r.upper)
}

fn lower(r: &Ic50Result) -> Option<&Param> {
    Some(&r.lower)
}

fn ki_app(r: &Ic50Result) -> Option<&Param> {
    r.ki_app.as_ref()
}

/// The table's slope column: Hill, or Ki,app for Morrison fits. Out of
/// range, neither is measured: show the bound or nothing.
fn slope_text(r: &Ic50Result, c: &Context) -> String {
    match (c.morrison, r.qualifier) {
        (true, q) => r.ki_app.as_ref().map_or("—".into(), |k| people(q, potency(k.value))),
        (false, Qualifier::Equal) => r.hill.as_ref().map_or("—".into(), |h| sig(h.value, 3)),
        (false, _) => "—".into(),
    }
}

/// The columns before the carried ones, in order.
pub const COLUMNS: &[Column] = &[
    Column::cell("compound", |r| Piece::Text(&r.compound)).shown(Label::Fixed("compound"), |r, _| r.compound.clone()),
    Column::cell("n", |r| Piece::Count(r.n)).shown(Label::Fixed("n"), |r, _| match r.outliers.len() {
        0 => r.n.to_string(),
        k => format!("{} (+{k} out)", r.n),
    }),
    Column::cell("converged", |r| Piece::Text(if r.converged { "true" } else { "false" })),
    Column::cell("call", |r| Piece::Text(r.call.word())).shown(Label::Fixed("call"), |r, _| r.call.word().to_string()),
    Column::cell("qualifier", |r| match r.qualifier {
        Qualifier::Equal => Piece::Text(""),
        q => Piece::Text(q.symbol()),
    }),
    Column::cell("ic50", |r| Piece::Qualified(r.qualifier, r.ic50.value))
        .concentration()
        .shown(Label::Made(|c| format!("IC50 ({})", for_people(c.unit.symbol()))), |r, _| {
            people(r.qualifier, potency(r.ic50.value))
        }),
    Column::cell("ic50_se", |r| Piece::Full(r.ic50.se)).concentration(),
    Column::cell("ic50_low", |r| Piece::Full(r.ic50.low)).concentration().shown(
        Label::Made(|c| format!("{:.0}% interval", 100.0 * c.confidence)),
        |r, _| match r.qualifier.is_bound() {
            true => "(bound)".into(),
            false => interval_text(r.ic50.low, r.ic50.high),
        },
    ),
    Column::cell("ic50_high", |r| Piece::Full(r.ic50.high)).concentration(),
    Column::cell("ic50_interval", |r| Piece::Text(r.ic50.interval)),
    Column::cell("pic50", |r| Piece::Full(Some(r.pic50)))
        .shown(Label::Fixed("pIC50"), |r, _| people(r.qualifier.reversed(), format!("{:.2}", r.pic50))),
    Column::param("hill", measured_hill, Part::Value).shown(
        Label::Made(|c| if c.morrison { format!("Ki,app ({})", for_people(c.unit.symbol())) } else { "Hill".into() }),
        slope_text,
    ),
    Column::param("hill_se", measured_hill, Part::Se),
    Column::param("hill_low", measured_hill, Part::Low),
    Column::param("hill_high", measured_hill, Part::High),
    Column::param("upper", upper, Part::Value).shown(Label::Fixed("upper"), |r, _| sig(r.upper.value, 4)),
    Column::param("upper_se", upper, Part::Se),
    Column::param("upper_low", upper, Part::Low),
    Column::param("upper_high", upper, Part::High),
    Column::param("lower", lower, Part::Value).shown(Label::Fixed("lower"), |r, _| sig(r.lower.value, 4)),
    Column::param("lower_se", lower, Part::Se),
    Column::param("lower_low", lower, Part::Low),
    Column::param("lower_high", lower, Part::High),
    Column::cell("residual_sd", |r| Piece::Full(Some(r.residual_sd))),
    Column::cell("r2", |r| Piece::Full(Some(r.r2))).shown(Label::Fixed("R²"), |r, _| sig(r.r2, 3)),
    Column::cell("model", |r| Piece::Text(r.model)),
    Column::cell("flat_p", |r| Piece::Full(r.flat_p)),
    Column::cell("outliers", |r| Piece::Count(r.outliers.len())),
    Column::cell("ki_app", |r| ki_app(r).map_or(Piece::Full(None), |k| Piece::Qualified(r.qualifier, k.value)))
        .concentration()
        .morrison(),
    Column::param("ki_app_low", ki_app, Part::Low).morrison(),
    Column::param("ki_app_high", ki_app, Part::High).morrison(),
    Column::cell("flags", |r| Piece::Codes(&r.flags)).shown(Label::Fixed("flags"), |r, _| joined(&r.flags, ", ")),
    Column::cell("source", |r| Piece::Source(&r.source)),
];

/// The command-line option that sets a flag's limit, for the legend.
fn setting_of(code: Code) -> Option<&'static str> {
    Some(match code {
        Code::HillSteep => "--hill-steep",
        Code::HillShallow => "--hill-shallow",
        Code::PartialInhibition => "--partial-above",
        Code::NoInhibition => "--flat-alpha, --min-inhibition",
        Code::PoorFit => "--min-r2",
        Code::TooFewPoints => "--min-concentrations",
        Code::PlateZPrimeLow => "--min-z-prime",
        Code::TooManyOutliers => "--max-outliers",
        Code::OutlierFlagged => "--outliers",
        Code::UpperOutsideWindow => "--upper-min, --upper-max",
        Code::LowerOutsideWindow => "--lower-min, --lower-max",
        _ => return None,
    })
}

/// The CSV header of a carried column: as written, or `carried_…` when its
/// name is one of the output's own.
pub fn carried_header(column: &CarriedColumn, morrison: bool) -> String {
    let clash = COLUMNS.iter().any(|c| c.present(morrison) && c.name == column.key);
    if clash { format!("carried_{}", column.header) } else { column.header.clone() }
}

/// The whole CSV header.
fn csv_header(carried: &[String], context: &Context) -> Vec<String> {
    let ours = COLUMNS.iter().filter(|c| c.present(context.morrison)).map(|c| c.header(context.unit));
    ours.chain(carried.iter().cloned()).collect()
}

/// `r`'s CSV row after `rows` (in the same buffer, on the worker thread that fitted it).
fn csv_row(rows: RenderedRow, r: &Ic50Result, morrison: bool) -> RenderedRow {
    let mut row = RowBuilder::after(rows);
    // The columns one by one, each its own constant: the compiler calls
    // each cell's function directly and lays its number out in place,
    // where a loop over the list would call through a pointer per cell.
    macro_rules! each_column {
        ($($k:literal)*) => {$(
            if let Some(column) = COLUMNS.get($k)
                && column.present(morrison)
            {
                column.piece_of(r).write_to(&mut row);
            }
        )*};
    }
    each_column!(0 1 2 3 4 5 6 7 8 9 10 11 12 13 14 15 16 17 18 19 20 21 22 23 24 25 26 27 28 29 30 31 32 33 34 35 36 37 38 39);
    for column in COLUMNS.iter().skip(40).filter(|c| c.present(morrison)) {
        column.piece_of(r).write_to(&mut row);
    }
    for (_, v) in &r.carried.0 {
        row.text(v);
    }
    row.finish()
}

/// A run of results (a chunk of a batch) as written in the chosen format,
/// rendered into one buffer on the worker thread that fitted them:
/// formatting two dozen numbers per curve is too much to leave to the one
/// thread that writes, and one buffer per chunk spares an allocation per
/// row. The results themselves are kept only when something besides the
/// text needs them (the terminal table, the pictures); otherwise they are
/// dropped on the thread that made them.
#[derive(Debug)]
pub struct Rendered {
    format: Format,
    morrison: bool,
    keep: bool,
    /// CSV rows.
    rows: RenderedRow,
    /// JSON objects, separated by `,\n`.
    json: Vec<u8>,
    /// Results rendered.
    count: usize,
    /// Results expected: once the first is written, room is made for the
    /// rest at its size, so that the buffer is not copied as it grows.
    expected: usize,
    /// The results, in order, when kept.
    pub kept: Vec<Ic50Result>,
}

impl Rendered {
    /// Nothing yet, for `format`, with `expected` results to come; `keep`
    /// the results whatever the format (the table always keeps them: it is
    /// built from them).
    pub fn new(format: Format, morrison: bool, keep: bool, expected: usize) -> Rendered {
        Rendered {
            format,
            morrison,
            keep: keep || format == Format::Table,
            rows: RenderedRow::default(),
            json: Vec::new(),
            count: 0,
            expected,
            kept: Vec::new(),
        }
    }

    /// Renders `r` after the results before it, and keeps it when results are kept.
    pub fn add(&mut self, r: Ic50Result) {
        self.render(&r);
        if self.keep {
            self.kept.push(r);
        }
    }

    /// Whether the results are kept besides their text ([`Rendered::add`]
    /// keeps them; after [`Rendered::render`], [`Rendered::keep`] does).
    pub fn keeps(&self) -> bool {
        self.keep
    }

    /// Keeps `r`, rendered already.
    pub fn keep(&mut self, r: Ic50Result) {
        self.kept.push(r);
    }

    /// Renders `r` after the results before it, where it lies: a result
    /// of some 900 bytes that only its text is wanted of is not moved.
    pub fn render(&mut self, r: &Ic50Result) {
        match self.format {
            Format::Csv => {
                self.rows = csv_row(std::mem::take(&mut self.rows), r, self.morrison);
                if self.count == 0 {
                    self.rows.reserve_for(self.expected.saturating_sub(1));
                }
            }
            Format::Json => {
                if self.count > 0 {
                    self.json.extend_from_slice(b",\n");
                }
                // Serialising plain data into memory cannot fail; an empty object would show if it did.
                let before = self.json.len();
                if serde_json::to_writer(&mut self.json, r).is_err() {
                    self.json.truncate(before);
                    self.json.extend_from_slice(b"{}");
                }
                if self.count == 0 {
                    let size = self.json.len() + 2;
                    crate::io::output::reserve_like(&mut self.json, self.expected.saturating_sub(1), size);
                }
            }
            Format::Table => {}
        }
        self.count += 1;
    }
}

/// The destination while the document is being written: raw bytes until
/// the CSV header is known, then the export writer.
enum Sink<'a> {
    Raw(&'a mut dyn Write),
    Csv(Box<CsvExport<&'a mut dyn Write>>),
    Done,
}

/// Writes one run's output batch by batch. The document header of JSON and
/// the column header of CSV depend on the first batch (the unit), so the
/// writer keeps a little state.
pub struct StreamWriter<'a> {
    sink: Sink<'a>,
    format: Format,
    carried: Vec<String>,
    morrison: bool,
    confidence: f64,
    started: bool,
    any_result: bool,
    flags_seen: Vec<Code>,
}

impl<'a> StreamWriter<'a> {
    /// A writer of `format` into `out`, with the carried columns the reader found.
    pub fn new(
        out: &'a mut dyn Write,
        format: Format,
        carried: &[CarriedColumn],
        morrison: bool,
        confidence: f64,
    ) -> StreamWriter<'a> {
        StreamWriter {
            sink: Sink::Raw(out),
            format,
            carried: carried.iter().map(|c| carried_header(c, morrison)).collect(),
            morrison,
            confidence,
            started: false,
            any_result: false,
            flags_seen: Vec::new(),
        }
    }

    fn raw(&mut self, bytes: &[u8]) -> Result<()> {
        match &mut self.sink {
            Sink::Raw(out) => {
                out.write_all(bytes).map_err(|source| Error::Write { path: PathBuf::from("<output>"), source })
            }
            _ => Err(Error::Serialise("the CSV export has already begun".into())),
        }
    }

    fn start_csv(&mut self, unit: ConcUnit) -> Result<()> {
        let context = Context { unit, morrison: self.morrison, confidence: self.confidence };
        let Sink::Raw(out) = std::mem::replace(&mut self.sink, Sink::Done) else {
            return Err(Error::Serialise("the CSV export has already begun".into()));
        };
        self.sink = Sink::Csv(Box::new(CsvExport::new(out, &csv_header(&self.carried, &context))?));
        self.started = true;
        Ok(())
    }

    /// The plates' control statistics (JSON writes them before the results).
    pub fn plates(&mut self, qc: &[PlateQc]) -> Result<()> {
        if self.format == Format::Json {
            let plates = serde_json::to_string(qc).map_err(|e| Error::Serialise(e.to_string()))?;
            self.raw(format!("{{\"plates\": {plates},\n\"results\": [\n").as_bytes())?;
            self.started = true;
        }
        Ok(())
    }

    /// Writes a batch, rendered in chunks (failed compounds are not in
    /// them: their errors go elsewhere).
    pub fn batch(&mut self, chunks: &[&Rendered], unit: ConcUnit) -> Result<()> {
        match self.format {
            Format::Json => {
                if !self.started {
                    self.raw(b"{\"results\": [\n")?;
                    self.started = true;
                }
                for chunk in chunks.iter().filter(|c| c.count > 0) {
                    if self.any_result {
                        self.raw(b",\n")?;
                    }
                    self.any_result = true;
                    self.raw(&chunk.json)?;
                }
                Ok(())
            }
            Format::Csv => {
                if !self.started {
                    self.start_csv(unit)?;
                }
                let Sink::Csv(export) = &mut self.sink else { return Ok(()) };
                for chunk in chunks {
                    export.rendered(&chunk.rows)?;
                }
                Ok(())
            }
            Format::Table => {
                let ok: Vec<&Ic50Result> = chunks.iter().flat_map(|c| &c.kept).collect();
                for r in &ok {
                    for f in &r.flags {
                        if !self.flags_seen.contains(f) {
                            self.flags_seen.push(*f);
                        }
                    }
                }
                if ok.is_empty() {
                    return Ok(());
                }
                self.started = true;
                let context = Context { unit, morrison: self.morrison, confidence: self.confidence };
                self.raw(table(&ok, &context).as_bytes())
            }
        }
    }

    /// Ends the document: the JSON tail with provenance, the CSV header of an
    /// empty run, or the table's plate summary, flag meanings and caution.
    pub fn finish(mut self, plates: Option<&[PlateQc]>) -> Result<()> {
        match self.format {
            Format::Json => {
                if !self.started {
                    self.raw(b"{\"results\": [\n")?;
                }
                self.raw(&crate::io::provenance::compact_json_tail())
            }
            Format::Csv => {
                if !self.started {
                    self.start_csv(ConcUnit::Molar)?;
                }
                match std::mem::replace(&mut self.sink, Sink::Done) {
                    Sink::Csv(export) => export.finish().map(|_| ()),
                    _ => Ok(()),
                }
            }
            Format::Table => {
                let mut text = String::new();
                if let Some(qc) = plates {
                    text.push_str(&plates_table(qc));
                }
                if !self.flags_seen.is_empty() {
                    text.push_str("flags:\n");
                    for f in &self.flags_seen {
                        text.push_str(&format!(
                            "  {f}: {}{}\n",
                            f.meaning(),
                            setting_of(*f).map_or(String::new(), |o| format!(" (set by {o})"))
                        ));
                    }
                }
                text.push_str(CAUTION);
                text.push('\n');
                self.raw(text.as_bytes())
            }
        }
    }
}

/// The labels of the table for people (terminal and HTML report alike).
pub fn table_header(context: &Context) -> Vec<String> {
    COLUMNS
        .iter()
        .filter_map(|c| c.shown)
        .map(|s| match s.label {
            Label::Fixed(l) => l.to_string(),
            Label::Made(f) => f(context),
        })
        .collect()
}

/// One result's row of the table for people (terminal and HTML report alike).
pub fn table_row(r: &Ic50Result, context: &Context) -> Vec<String> {
    COLUMNS.iter().filter_map(|c| c.shown).map(|s| (s.text)(r, context)).collect()
}

/// The terminal table of a batch, with the model and interval method under it.
pub fn table(results: &[&Ic50Result], context: &Context) -> String {
    let mut grid = new_grid(table_header(context));
    for r in results {
        grid.add_row(table_row(r, context));
    }
    let method = results.first().map_or("", |r| {
        if context.morrison {
            "Morrison (known Et); Ki,app is the apparent constant, before any mechanism correction (kimech ki applies it)"
        } else {
            r.model
        }
    });
    format!("{grid}\nmodel: {method}; IC50 interval: {}\n\n", results.first().map_or("", |r| r.ic50.interval))
}

/// The title of the plates' control table.
pub const PLATES_TITLE: &str = "Plate controls (Z′, Zhang, Chung & Oldenburg 1999)";

/// The plates' control statistics as cells (terminal and report).
pub fn plates_grid(qc: &[PlateQc]) -> Grid {
    let mut grid = Grid::new(
        ["plate", "uninhibited n", "mean", "SD", "inhibited n", "mean", "SD", "Z′", "flags"].map(String::from).to_vec(),
    );
    for p in qc {
        grid.rows.push(vec![
            if p.plate.is_empty() { "(one plate)".into() } else { p.plate.clone() },
            p.uninhibited_n.to_string(),
            sig(p.uninhibited_mean, 4),
            sig(p.uninhibited_sd, 3),
            p.inhibited_n.to_string(),
            sig(p.inhibited_mean, 4),
            sig(p.inhibited_sd, 3),
            sig(p.z_prime, 3),
            joined(&p.flags, ", "),
        ]);
    }
    grid
}

/// The plates' control statistics for people.
pub fn plates_table(qc: &[PlateQc]) -> String {
    format!("{PLATES_TITLE}\n{}\n\n", plates_grid(qc).terminal())
}

/// An interval in words, the same in the pictures and the table: "8.26–10.8",
/// "8.26–unbounded" when one end is missing, "not determined" when both are.
pub fn interval_text(low: Option<f64>, high: Option<f64>) -> String {
    let end = |v: Option<f64>| v.map_or("unbounded".into(), potency);
    match (low, high) {
        (None, None) => "not determined".into(),
        _ => format!("{}–{}", end(low), end(high)),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::analysis::ic50::{Carried, Curve, IntervalMethod, Location, Options, OutlierMode, Thresholds, analyse};

    /// Rows written in place, column by column ([`csv_row`]), are the rows
    /// the export writer makes of the same columns as [`Cell`]s: logistic
    /// and Morrison fits, bounds out of range, an outlier, flags, names that
    /// need the guard or quotes, and a carried column.
    #[test]
    fn rows_written_in_place_are_the_rows_of_their_cells() {
        for enzyme in [None, Some(1.0)] {
            let options = Options {
                fix_lower: None,
                fix_upper: None,
                enzyme,
                unit: ConcUnit::Nanomolar,
                response_unit: Some("%".into()),
                confidence: 0.95,
                intervals: IntervalMethod::Wald,
                thresholds: Thresholds::default(),
                settings: crate::analysis::ic50::screening_settings(),
                percent: true,
                outliers: OutlierMode::Exclude,
            };
            let cases = [("KX-1", 80.0, 0.0), ("-cmd", 0.001, 1.0), ("a,b", 1e9, 2.0), ("=x", 300.0, 40.0)];
            let mut rendered = Rendered::new(Format::Csv, enzyme.is_some(), true, cases.len());
            for (k, (name, ic50, spike)) in cases.into_iter().enumerate() {
                let x: Vec<f64> = (0..10).map(|i| 10_000.0 / 3f64.powi(i)).collect();
                let y = x
                    .iter()
                    .enumerate()
                    .map(|(i, &c)| {
                        let noise = (7.0 * (i + k) as f64).sin() + if i == 4 { spike } else { 0.0 };
                        100.0 / (1.0 + c / ic50) + noise
                    })
                    .collect();
                let first = 2 + 10 * k as u64;
                let lines = (first..first + 10).filter(|&l| l != first + 3).collect();
                let curve = Curve {
                    compound: name.into(),
                    location: Location { file: "plates, run 1.csv".into(), rows: Some((first, first + 9)), lines },
                    x,
                    y,
                    carried: Carried(vec![("note".into(), ["plain", "-1", "x,y", "@a"][k].into())]),
                    read_flags: Vec::new(),
                };
                rendered.add(analyse(&curve, &options).unwrap());
            }
            let header = ["h".to_string()];
            let mut in_place = CsvExport::new(Vec::new(), &header).unwrap();
            in_place.rendered(&rendered.rows).unwrap();
            let mut cells = CsvExport::new(Vec::new(), &header).unwrap();
            for r in &rendered.kept {
                let mut row: Vec<Cell> =
                    COLUMNS.iter().filter(|c| c.present(enzyme.is_some())).map(|c| c.cell_of(r)).collect();
                row.extend(r.carried.0.iter().map(|(_, v)| Cell::Text(v.clone())));
                cells.row(&row).unwrap();
            }
            let (in_place, cells) = (in_place.finish().unwrap(), cells.finish().unwrap());
            assert_eq!(String::from_utf8(in_place).unwrap(), String::from_utf8(cells).unwrap());
        }
    }
}
