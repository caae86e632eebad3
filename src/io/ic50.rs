//! The reader of `kimech ic50`: tidy dose-response rows (compound,
//! concentration, response; optional plate and control) into the core's
//! [`Curve`]s, one contiguous block of one compound at a time, so that a
//! million curves stream through in bounded memory.
//!
//! Columns, units and located errors come from [`Table`] and [`RowStream`];
//! this file adds the grouping into curves, the control wells (a first pass
//! over the input gives each plate's [`PlateQc`], from which a second pass
//! turns signal into % activity), and the carry-through of every other
//! column. Each curve's [`Location`] holds its input lines; a reader of
//! another shape (a plate layout) fills it its own way.

use crate::report::Code;
use std::collections::HashMap;
use std::hash::BuildHasher;
use std::path::PathBuf;

use crate::analysis::ic50::{Carried, Curve, Location, PlateQc, Wells};
use crate::error::{Error, Result};
use crate::io::input::{ColumnSpec, Record, Row, Table};
use crate::io::stream::RowStream;
use crate::units::{ConcUnit, plain_decimal};

const COMPOUND: ColumnSpec = ColumnSpec::new("compound", &["compound_id", "sample", "id"]);
const CONCENTRATION: ColumnSpec =
    ColumnSpec::new("concentration", &["conc", "dose", "inhibitor", "inhibitor_concentration"]);
const RESPONSE: ColumnSpec = ColumnSpec::new("response", &["signal", "activity", "y", "value"]);
const PLATE: ColumnSpec = ColumnSpec::new("plate", &["plate_id", "barcode"]);
const CONTROL: ColumnSpec = ColumnSpec::new("control", &["control_type", "well_type"]);

/// Where rows come from; opened once, or twice with `--normalise`.
pub enum Input {
    /// A file path, or `-`.
    Path(String),
    /// Bytes in memory (the demo), with the name used in messages.
    Bytes(&'static [u8], String),
    /// Stdin spooled to a temporary file, named `<stdin>` in messages.
    Spooled(PathBuf),
}

impl Input {
    /// Stdin copied to a temporary file, so that it can be read twice; the
    /// returned [`Spool`] removes the file when dropped.
    pub fn spool_stdin() -> Result<(Input, Spool)> {
        let path = std::env::temp_dir().join(format!("kimech-ic50-stdin-{}.csv", std::process::id()));
        let spool = Spool { _registered: super::cleanup::register(&path), path: path.clone() };
        let mut file = std::fs::File::create(&path).map_err(|e| Error::Write { path: path.clone(), source: e })?;
        std::io::copy(&mut std::io::stdin().lock(), &mut file)
            .map_err(|e| Error::Read { path: "<stdin>".into(), source: e })?;
        Ok((Input::Spooled(path), spool))
    }

    /// A fresh stream of its rows.
    pub fn open(&self) -> Result<RowStream> {
        match self {
            Input::Path(p) => RowStream::open(p),
            Input::Bytes(b, name) => RowStream::new(name, Box::new(std::io::Cursor::new(*b)), b','),
            Input::Spooled(p) => {
                let f = std::fs::File::open(p).map_err(|e| Error::Read { path: "<stdin>".into(), source: e })?;
                RowStream::new("<stdin>", Box::new(f), b',')
            }
        }
    }

    /// Its size in bytes, when known (for progress).
    pub fn size(&self) -> Option<u64> {
        match self {
            Input::Path(p) if p != "-" => std::fs::metadata(p).ok().map(|m| m.len()),
            Input::Bytes(b, _) => Some(b.len() as u64),
            Input::Spooled(p) => std::fs::metadata(p).ok().map(|m| m.len()),
            _ => None,
        }
    }
}

/// Removes the stdin spool file when done (and, registered, on SIGINT/SIGTERM).
pub struct Spool {
    path: PathBuf,
    _registered: super::cleanup::Registered,
}

impl Drop for Spool {
    fn drop(&mut self) {
        let _ = std::fs::remove_file(&self.path);
    }
}

/// How to read.
#[derive(Debug, Clone, Copy)]
pub struct ReadOptions {
    /// Turn signal into % activity from each plate's control wells (needs a control column).
    pub normalise: bool,
    /// Unit of concentrations with none in the cell or header.
    pub concentration_unit: Option<ConcUnit>,
    /// The flag that sets `concentration_unit`, for messages.
    pub unit_flag: &'static str,
}

/// A column carried through to the output unchanged.
#[derive(Debug, Clone)]
pub struct CarriedColumn {
    /// Its index in the input.
    pub index: usize,
    /// Its header as written.
    pub header: String,
    /// Its key (lower case, no unit), to compare with the output's own column names.
    pub key: String,
}

/// Column positions and the carried columns.
struct Layout {
    compound: usize,
    concentration: usize,
    response: usize,
    plate: Option<usize>,
    control: Option<usize>,
    carried: Vec<CarriedColumn>,
    header_unit: Option<ConcUnit>,
}

impl Layout {
    fn new(table: &Table, options: &ReadOptions) -> Result<Layout> {
        let compound = table.require(&COMPOUND)?;
        let concentration = table.require(&CONCENTRATION)?;
        let response = table.require(&RESPONSE)?;
        let plate = table.find(&PLATE);
        let control = if options.normalise { Some(table.require(&CONTROL)?) } else { table.find(&CONTROL) };
        let used = [Some(compound), Some(concentration), Some(response), plate, control];
        let carried = (0..table.columns.len())
            .filter(|c| !used.contains(&Some(*c)))
            .map(|c| CarriedColumn {
                index: c,
                header: table.columns[c].header.clone(),
                key: table.columns[c].key.clone(),
            })
            .collect();
        let header_unit = table.header_unit(concentration)?.or(options.concentration_unit);
        Ok(Layout { compound, concentration, response, plate, control, carried, header_unit })
    }
}

impl Layout {
    /// A sample well as nearly every row of a screening file has it: both
    /// cells plain decimals and the unit from the header (or flag), its
    /// concentration zero or a positive normal double. Its concentration in
    /// mol/L, that unit and its response, as the general path would give
    /// them; `None` sends the row down that path (which gives any error).
    #[inline]
    fn plain_well<R: Row + ?Sized>(&self, row: &R) -> Option<(f64, ConcUnit, f64)> {
        let unit = self.header_unit?;
        let molar = unit.to_molar(plain_decimal(row.cell(self.concentration))?);
        let y = plain_decimal(row.cell(self.response))?;
        (molar == 0.0 || (molar >= f64::MIN_POSITIVE && molar.is_finite())).then_some((molar, unit, y))
    }
}

/// What a row is, from the control column.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Kind {
    Sample,
    Uninhibited,
    Inhibited,
}

fn kind<R: Row + ?Sized>(table: &Table, row: &R, col: Option<usize>) -> Result<Kind> {
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

/// Per-plate control statistics from a first pass over the input.
pub struct Plates {
    index: HashMap<String, usize>,
    /// Z′ and control levels of each plate, in order of first appearance.
    pub qc: Vec<PlateQc>,
    /// Control wells that could not be used: their plate and why.
    pub rejected: Vec<(String, Error)>,
}

/// Reads every control well of `input` (the first pass of `--normalise`).
pub fn read_controls(input: &Input, min_z_prime: f64) -> Result<Plates> {
    let mut stream = input.open()?;
    let table = stream.table().clone();
    let plate_col = table.find(&PLATE);
    let control_col = Some(table.require(&CONTROL)?);
    let response_col = table.require(&RESPONSE)?;
    let mut index: HashMap<String, usize> = HashMap::new();
    let mut wells: Vec<(String, Wells, Wells)> = Vec::new();
    let mut rejected = Vec::new();
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
            Err(e) => rejected.push((plate.to_string(), e)),
        }
    }
    let qc = wells.iter().map(|(p, u, i)| PlateQc::new(p, u, i, min_z_prime)).collect();
    Ok(Plates { index, qc, rejected })
}

/// Builds curves from contiguous compound blocks of a stream.
pub struct CurveReader<'a> {
    stream: RowStream,
    layout: Layout,
    plates: Option<&'a Plates>,
    options: ReadOptions,
    /// The reporting unit: header or flag, else that of the first concentration read.
    unit: Option<ConcUnit>,
    /// The stream's current row starts the next block: read it again.
    pending: bool,
    done: bool,
    /// Every compound whose block has begun, to refuse one that comes back.
    seen: SeenCompounds,
    unused_controls: usize,
    /// The input's name, shared by every curve's location.
    file: std::sync::Arc<str>,
    /// Bytes of names and wells in the last batch (room made for the next).
    last_size: (usize, usize),
    /// The file has only the three columns, the unit in the concentration
    /// header (or flag) and no plates: a plain line that continues the
    /// current curve can be read by [`CurveReader::take_plain_well`].
    plain_layout: bool,
}

/// The compounds whose blocks have begun, one lookup per curve.
///
/// A screening file names a million compounds, so the set is built for
/// that: the names lie side by side in one string (no allocation per name,
/// none to free at the end), and the table maps each name's 64-bit hash
/// (foldhash, several times cheaper than SipHash on short identifiers) to
/// its place. When the table grows it moves plain numbers; a set of boxed
/// names re-hashed every name through its pointer as it grew, and with a
/// malloc and a free per name cost about 5 % of a run at 10⁶ curves. Names
/// whose hashes collide are chained, and a name is only ever judged seen by
/// comparing its text.
#[derive(Default)]
struct SeenCompounds<S = foldhash::fast::RandomState> {
    /// Hash → the first name entered with that hash (an index into `starts`).
    by_hash: HashMap<u64, usize, S>,
    /// Name → the next name entered with the same hash: a chain that 64-bit
    /// hashes of real identifiers all but never need, kept apart so that
    /// each name costs only its text and one offset.
    same_hash: HashMap<usize, usize, S>,
    /// Where each name begins in `text` (it ends where the next begins).
    starts: Vec<usize>,
    text: String,
    hasher: S,
}

impl<S: BuildHasher> SeenCompounds<S> {
    /// Enters `name`; false when it was entered before.
    fn insert(&mut self, name: &str) -> bool {
        let hash = self.hasher.hash_one(name);
        let next = self.starts.len();
        let first = *self.by_hash.entry(hash).or_insert(next);
        if first != next {
            // The hash was met before: the name is new unless its chain holds it.
            let mut k = first;
            loop {
                if self.name(k) == name {
                    return false;
                }
                match self.same_hash.get(&k) {
                    Some(&after) => k = after,
                    None => break,
                }
            }
            self.same_hash.insert(k, next);
        }
        self.starts.push(self.text.len());
        self.text.push_str(name);
        true
    }

    /// The `k`-th name entered.
    fn name(&self, k: usize) -> &str {
        let end = self.starts.get(k + 1).copied().unwrap_or(self.text.len());
        &self.text[self.starts[k]..end]
    }
}

/// A batch of curves as read, in input order: each curve's place in the
/// batch's shared arrays ([`BatchWells`]), or why its block cannot be a curve.
///
/// The wells of a whole batch lie side by side, so that reading a curve
/// allocates nothing of its own: a fitting thread copies each curve into
/// one [`Curve`] it reuses ([`BatchWells::fill`]). A `Curve` per block, made
/// on the reading thread and freed on a fitting one, cost four allocations
/// and four frees across threads and several moves of the struct per curve.
#[derive(Debug, Default)]
pub struct CurveBatch {
    /// Each curve's span, or its error, in input order.
    pub items: Vec<Result<CurveSpan>>,
    /// The names and wells the spans point into.
    pub wells: BatchWells,
}

impl CurveBatch {
    /// Whether the input had no curve left.
    pub fn is_empty(&self) -> bool {
        self.items.is_empty()
    }
}

/// Where one curve of a [`CurveBatch`] lies in its [`BatchWells`], with
/// what is the curve's alone (carried values, flags found while reading).
#[derive(Debug, Clone)]
pub struct CurveSpan {
    name: std::ops::Range<usize>,
    wells: std::ops::Range<usize>,
    rows: (u64, u64),
    carried: Carried,
    read_flags: Vec<Code>,
}

/// The compound names and wells of a batch's curves, one after the other.
#[derive(Debug, Default)]
pub struct BatchWells {
    names: String,
    x: Vec<f64>,
    y: Vec<f64>,
    lines: Vec<u64>,
    /// The input's name, shared by every curve's location.
    file: std::sync::Arc<str>,
}

impl BatchWells {
    /// An empty curve of this input, for [`BatchWells::fill`].
    pub fn empty_curve(&self) -> Curve {
        Curve {
            compound: String::new(),
            location: Location { file: self.file.clone(), rows: None, lines: Vec::new() },
            x: Vec::new(),
            y: Vec::new(),
            carried: Carried(Vec::new()),
            read_flags: Vec::new(),
        }
    }

    /// Makes `curve` the curve of `span`, in the buffers it already has:
    /// the same curve, field for field, as a new one would be.
    pub fn fill(&self, span: CurveSpan, curve: &mut Curve) {
        curve.compound.clear();
        curve.compound.push_str(&self.names[span.name]);
        if !std::sync::Arc::ptr_eq(&curve.location.file, &self.file) {
            curve.location.file = self.file.clone();
        }
        curve.location.rows = Some(span.rows);
        let wells = span.wells;
        curve.location.lines.clear();
        curve.location.lines.extend_from_slice(&self.lines[wells.clone()]);
        curve.x.clear();
        curve.x.extend_from_slice(&self.x[wells.clone()]);
        curve.y.clear();
        curve.y.extend_from_slice(&self.y[wells]);
        curve.carried = span.carried;
        curve.read_flags = span.read_flags;
    }

    /// The curve of `span` on its own.
    pub fn curve(&self, span: CurveSpan) -> Curve {
        let mut curve = self.empty_curve();
        self.fill(span, &mut curve);
        curve
    }

    /// Makes room for `like` (bytes of names, wells) and an eighth more, so
    /// that a batch a little larger than the last does not copy its buffers
    /// as they double.
    fn reserve_like(&mut self, like: (usize, usize)) {
        let (names, wells) = (like.0 + like.0 / 8, like.1 + like.1 / 8);
        self.names.reserve(names);
        self.x.reserve(wells);
        self.y.reserve(wells);
        self.lines.reserve(wells);
    }

    /// Adds the well [`Layout::plain_well`] read on `line`, its
    /// concentration in the reporting unit (the first unit read becomes it
    /// when neither header nor flag gave one).
    fn push_plain(&mut self, (molar, unit, y): (f64, ConcUnit, f64), reporting: &mut Option<ConcUnit>, line: u64) {
        let reporting = *reporting.get_or_insert(unit);
        self.x.push(reporting.from_molar(molar));
        self.y.push(y);
        self.lines.push(line);
    }
}

/// A compound block being read: its name and wells are the last ones in
/// the batch's [`BatchWells`].
struct Block {
    /// Where its name lies in `names`.
    name: std::ops::Range<usize>,
    first: u64,
    last: u64,
    /// Where its wells begin.
    wells: usize,
    carried: Vec<Vec<String>>,
    low_z: bool,
    error: Option<Error>,
}

impl<'a> CurveReader<'a> {
    /// Opens `input`; with `plates` (from [`read_controls`]) responses become % activity.
    pub fn new(input: &Input, options: ReadOptions, plates: Option<&'a Plates>) -> Result<CurveReader<'a>> {
        let stream = input.open()?;
        let stream_name = stream.table().source.clone();
        let layout = Layout::new(stream.table(), &options)?;
        let plain_layout = stream.table().columns.len() == 3
            && layout.carried.is_empty()
            && layout.plate.is_none()
            && layout.control.is_none()
            && layout.header_unit.is_some()
            && plates.is_none();
        Ok(CurveReader {
            plain_layout,
            stream,
            unit: layout.header_unit,
            layout,
            plates,
            options,
            pending: false,
            done: false,
            seen: SeenCompounds::default(),
            unused_controls: 0,
            file: std::sync::Arc::from(stream_name.as_str()),
            last_size: (0, 0),
        })
    }

    /// The columns carried through, in input order.
    pub fn carried(&self) -> &[CarriedColumn] {
        &self.layout.carried
    }

    /// The unit the response column's header gives (`%` makes it % activity).
    pub fn response_unit(&self) -> Option<&str> {
        self.stream.table().unit_text(self.layout.response)
    }

    /// The reporting unit of concentrations, once known (header, flag, or first cell read).
    pub fn unit(&self) -> Option<ConcUnit> {
        self.unit
    }

    /// Bytes of the input read so far.
    pub fn bytes_read(&self) -> u64 {
        self.stream.bytes_read()
    }

    /// Control rows skipped because there were no plates to use them for.
    pub fn unused_controls(&self) -> usize {
        self.unused_controls
    }

    /// Reads up to `max` complete compound blocks; a block that cannot be a
    /// curve is an `Err` in its place, so the rest still come out.
    pub fn next_batch(&mut self, max: usize) -> Result<CurveBatch> {
        // Room for every curve of a full batch (up to a bound, for a huge
        // `--batch-size`): growing a vector of ~100-byte items copied it
        // whole, at the default batch size once a batch.
        let mut batch = CurveBatch {
            items: Vec::with_capacity(max.min(1 << 16)),
            wells: BatchWells { file: self.file.clone(), ..BatchWells::default() },
        };
        // Room for the batch at the size of the last one, or for the first
        // at a dozen wells and a short name per curve.
        let first = (16 * batch.items.capacity(), 12 * batch.items.capacity());
        batch.wells.reserve_like(if self.last_size.1 > 0 { self.last_size } else { first });
        let mut block: Option<Block> = None;
        while batch.items.len() < max {
            if self.plain_layout
                && !self.pending
                && let Some(b) = block.as_mut()
                && b.error.is_none()
                && self.take_plain_well(b, &mut batch.wells)
            {
                continue;
            }
            if !self.pending && (self.done || !self.stream.advance()?) {
                self.done = true;
                break;
            }
            self.pending = false;
            let table = self.stream.table();
            let kind = kind(table, &self.stream, self.layout.control);
            if let Ok(Kind::Uninhibited | Kind::Inhibited) = kind {
                if self.plates.is_none() {
                    self.unused_controls += 1;
                }
                continue;
            }
            let name = table.text(&self.stream, self.layout.compound);
            if block.as_ref().is_some_and(|b| batch.wells.names.as_bytes()[b.name.clone()] != *name.as_bytes()) {
                // This row starts the next block: finish the current one, keep the row.
                self.pending = true;
                if let Some(b) = block.take() {
                    let item = self.finish(b, &mut batch.wells);
                    batch.items.push(item);
                }
                continue;
            }
            if block.is_none() {
                block = Some(self.start(&mut batch.wells));
            }
            if let Some(b) = block.as_mut() {
                let mut row = RowContext {
                    table: self.stream.table(),
                    layout: &self.layout,
                    plates: self.plates,
                    options: &self.options,
                    unit: &mut self.unit,
                    row: &self.stream,
                };
                row.add_to(b, &mut batch.wells, kind.err());
            }
        }
        // The loop stops on a full batch right after a block was finished, so
        // an open block here means the input ended.
        if let Some(b) = block.take() {
            let item = self.finish(b, &mut batch.wells);
            batch.items.push(item);
        }
        self.last_size = (batch.wells.names.len(), batch.wells.x.len());
        Ok(batch)
    }

    /// Reads the next line as a well of block `b` (the last in `wells`) if
    /// it is a plain line ([`RowStream::peek_plain`]) of the same compound
    /// whose cells are plain numbers ([`Layout::plain_well`]): the well the
    /// general path would add, without its per-row steps (a control kind,
    /// carried cells, a record of fields). False, with nothing read, for
    /// any other line: the general path reads it (a new compound's first
    /// line among them, every tenth line of a ten-point screen).
    #[inline]
    fn take_plain_well(&mut self, b: &mut Block, wells: &mut BatchWells) -> bool {
        let Some(line) = self.stream.peek_plain() else { return false };
        if line.cell(self.layout.compound).as_bytes() != &wells.names.as_bytes()[b.name.clone()] {
            return false;
        }
        let Some(well) = self.layout.plain_well(&line) else { return false };
        wells.push_plain(well, &mut self.unit, line.line);
        b.last = line.line;
        let end = line.end;
        self.stream.take_plain(end);
        true
    }

    /// Begins the block of the current row: its name goes into `wells`.
    fn start(&mut self, wells: &mut BatchWells) -> Block {
        let line = self.stream.line();
        let compound = self.stream.table().text(&self.stream, self.layout.compound);
        let at = wells.names.len();
        wells.names.push_str(compound);
        let mut b = Block {
            name: at..wells.names.len(),
            first: line,
            last: line,
            wells: wells.x.len(),
            carried: vec![Vec::new(); self.layout.carried.len()],
            low_z: false,
            error: None,
        };
        if compound.is_empty() {
            b.error = Some(self.stream.table().cell_error(
                &self.stream,
                self.layout.compound,
                "empty compound identifier",
                "every compound well needs a compound; control wells need 'uninhibited' or 'inhibited' in the control column",
            ));
        } else if !self.seen.insert(compound) {
            b.error = Some(Error::Data {
                group: format!(
                    "compound '{}' ({}, line {line})",
                    crate::report::short_id(compound),
                    self.stream.table().source
                ),
                problem: "its rows appear again after rows of other compounds".into(),
                expected: "rows of one compound must be together; sort the file by compound (the earlier block was fitted on its own)".into(),
            });
        }
        b
    }

    /// Ends block `b`, the last in `wells`: its span, or its error (and
    /// then its name and wells are taken out again).
    fn finish(&self, b: Block, wells: &mut BatchWells) -> Result<CurveSpan> {
        if let Some(e) = b.error {
            wells.names.truncate(b.name.start);
            wells.x.truncate(b.wells);
            wells.y.truncate(b.wells);
            wells.lines.truncate(b.wells);
            return Err(e);
        }
        let mut read_flags = Vec::new();
        if b.low_z {
            read_flags.push(Code::PlateZPrimeLow);
        }
        let carried = self
            .layout
            .carried
            .iter()
            .zip(b.carried)
            .map(|(column, values)| {
                if values.len() > 1 && !read_flags.contains(&Code::CarriedVaries) {
                    read_flags.push(Code::CarriedVaries);
                }
                (column.header.clone(), values.join(";"))
            })
            .collect();
        Ok(CurveSpan {
            name: b.name,
            wells: b.wells..wells.x.len(),
            rows: (b.first, b.last),
            carried: Carried(carried),
            read_flags,
        })
    }
}

/// One row being added to its block, with what it needs from the reader.
struct RowContext<'r> {
    table: &'r Table,
    layout: &'r Layout,
    plates: Option<&'r Plates>,
    options: &'r ReadOptions,
    unit: &'r mut Option<ConcUnit>,
    row: &'r RowStream,
}

impl RowContext<'_> {
    /// Carries its other columns and, unless the block already failed, adds its well.
    fn add_to(&mut self, b: &mut Block, wells: &mut BatchWells, row_error: Option<Error>) {
        b.last = self.row.line();
        for (k, column) in self.layout.carried.iter().enumerate() {
            let v = self.table.text(self.row, column.index);
            if !b.carried[k].iter().any(|s| s == v) {
                b.carried[k].push(v.to_string());
            }
        }
        if b.error.is_some() {
            return;
        }
        let parsed = row_error.map_or_else(|| self.well(b, wells), Err);
        if let Err(e) = parsed {
            b.error = Some(with_compound(e, &wells.names[b.name.clone()]));
        }
    }

    fn well(&mut self, b: &mut Block, wells: &mut BatchWells) -> Result<()> {
        let (table, layout, row) = (self.table, self.layout, self.row);
        if self.plates.is_none()
            && let Some(well) = layout.plain_well(row)
        {
            wells.push_plain(well, self.unit, row.line());
            return Ok(());
        }
        // The header's unit, else the flag's: looked up once, in the layout.
        let c = table.concentration_in(row, layout.concentration, layout.header_unit, self.options.unit_flag)?;
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
        if let Some(p) = self.plates {
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
                        group: format!(
                            "compound '{}' ({}, line {})",
                            crate::report::short_id(&wells.names[b.name.clone()]),
                            self.table.source,
                            row.line()
                        ),
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
        let reporting = *self.unit.get_or_insert(c.unit);
        wells.x.push(reporting.from_molar(c.molar));
        wells.y.push(y);
        wells.lines.push(row.line());
        Ok(())
    }
}

/// Puts the compound into a cell error's message, so it names compound and line.
fn with_compound(e: Error, compound: &str) -> Error {
    match e {
        Error::Cell(mut cell) => {
            cell.problem = format!("compound '{}': {}", crate::report::short_id(compound), cell.problem);
            Error::Cell(cell)
        }
        other => other,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A well the short cut takes is the very well the general path reads
    /// (same bits, same unit, accepted), on random cells of every shape:
    /// plain, signed, with exponents, units, qualifiers, spaces, overflow.
    #[test]
    fn plain_wells_read_as_the_general_path_reads_them() {
        use rand::{Rng, SeedableRng};
        let mut rng = rand::rngs::StdRng::seed_from_u64(5);
        let pieces = [
            "0", "1", "2", "3", "4", "5", "6", "7", "8", "9", "00", "37", ".", "-", "e", "E", "+", " ", "nM", " uM",
            "<", ">", "1e300", "x", "\u{e9}",
        ];
        for (header, flag) in [("concentration (nM)", None), ("conc", Some(ConcUnit::Picomolar)), ("dose [M]", None)] {
            let table = Table::parse("t.csv", format!("compound,{header},response\na,1,2\n").as_bytes(), b',').unwrap();
            let options = ReadOptions { normalise: false, concentration_unit: flag, unit_flag: "--unit" };
            let layout = Layout::new(&table, &options).unwrap();
            let mut taken = 0;
            for _ in 0..50_000 {
                let mut cell = || -> String {
                    (0..rng.random_range(1..6)).map(|_| pieces[rng.random_range(0..pieces.len())]).collect()
                };
                let row = Record { line: 7, cells: vec!["a".into(), cell(), cell()] };
                let Some((molar, unit, y)) = layout.plain_well(&row) else { continue };
                taken += 1;
                let c = table.concentration_in(&row, 1, layout.header_unit, "--unit").unwrap();
                assert_eq!((c.molar.to_bits(), c.unit), (molar.to_bits(), unit), "{row:?}");
                assert!(!c.qualifier.is_bound() && c.molar >= 0.0, "{row:?}");
                assert_eq!(table.number(&row, 2).unwrap().to_bits(), y.to_bits(), "{row:?}");
            }
            assert!(taken > 2_000, "{taken}");
        }
    }

    /// Names are judged seen by their text, whatever their hashes: with a
    /// hash that makes every name collide, and with the real one, the set
    /// agrees with a plain set of strings on random names, repeats included.
    #[test]
    fn seen_compounds_agree_with_a_set_of_strings() {
        use rand::{Rng, SeedableRng};
        #[derive(Default)]
        struct Colliding;
        impl BuildHasher for Colliding {
            type Hasher = ConstantHasher;
            fn build_hasher(&self) -> ConstantHasher {
                ConstantHasher
            }
        }
        struct ConstantHasher;
        impl std::hash::Hasher for ConstantHasher {
            fn finish(&self) -> u64 {
                7
            }
            fn write(&mut self, _: &[u8]) {}
        }
        let mut rng = rand::rngs::StdRng::seed_from_u64(13);
        let mut colliding = SeenCompounds::<Colliding>::default();
        let mut real = SeenCompounds::<foldhash::fast::RandomState>::default();
        let mut plain = std::collections::HashSet::new();
        for _ in 0..3_000 {
            let len = rng.random_range(0..4);
            let name: String = (0..len).map(|_| ['a', 'b', 'é', '1'][rng.random_range(0..4)]).collect();
            let fresh = plain.insert(name.clone());
            assert_eq!(colliding.insert(&name), fresh, "{name:?}");
            assert_eq!(real.insert(&name), fresh, "{name:?}");
        }
        assert_eq!(real.starts.len(), plain.len());
    }

    /// A curve copied into a reused [`Curve`] is the curve made afresh from
    /// its span, whatever curve the buffers held before: blocks of every
    /// length, a carried column that varies, and blocks that fail (an empty
    /// name, a compound that comes back) taken out of the batch again.
    #[test]
    fn reused_curves_are_the_curves_made_afresh() {
        let mut text = String::from("compound,conc (nM),response,note\n");
        let blocks = [("a", 12), ("b", 3), ("", 2), ("c", 1), ("a", 4), ("d", 20), ("e", 10)];
        for (k, (name, wells)) in blocks.iter().enumerate() {
            for w in 0..*wells {
                text.push_str(&format!("{name},{}.5,{},n{}\n", 10 * w, 100 - w, (k + w) % 2));
            }
        }
        let bytes: &'static [u8] = Box::leak(text.into_bytes().into_boxed_slice());
        let input = Input::Bytes(bytes, "t.csv".into());
        let options = ReadOptions { normalise: false, concentration_unit: None, unit_flag: "--unit" };
        let mut reader = CurveReader::new(&input, options, None).unwrap();
        let (mut names, mut failed) = (Vec::new(), 0);
        let mut reused = BatchWells::default().empty_curve();
        loop {
            let batch = reader.next_batch(2).unwrap();
            if batch.is_empty() {
                break;
            }
            for item in batch.items {
                let Ok(span) = item else {
                    failed += 1;
                    continue;
                };
                let fresh = batch.wells.curve(span.clone());
                batch.wells.fill(span, &mut reused);
                assert_eq!(format!("{reused:?}"), format!("{fresh:?}"));
                assert_eq!(
                    (fresh.x.len(), fresh.y.len(), fresh.location.lines.len()),
                    (fresh.x.len(), fresh.x.len(), fresh.x.len())
                );
                names.push((fresh.compound.clone(), fresh.x.len(), fresh.carried.0[0].1.clone()));
            }
        }
        let expected: Vec<(String, usize, String)> =
            [("a", 12, "n0;n1"), ("b", 3, "n1;n0"), ("c", 1, "n1"), ("d", 20, "n1;n0"), ("e", 10, "n0;n1")]
                .iter()
                .map(|(n, w, c)| (n.to_string(), *w, c.to_string()))
                .collect();
        assert_eq!((names, failed), (expected, 2));
    }

    /// Everything a reader hands on, batch by batch: each curve (its name,
    /// wells, lines, carried cells, flags) or its error, the unit and the
    /// bytes read after the batch, and at the end the unused controls.
    fn read_all(text: &str, batch: usize, plain: bool) -> Vec<String> {
        let bytes: &'static [u8] = Box::leak(text.as_bytes().to_vec().into_boxed_slice());
        let input = Input::Bytes(bytes, "t.csv".into());
        let options = ReadOptions { normalise: false, concentration_unit: None, unit_flag: "--unit" };
        let mut reader = match CurveReader::new(&input, options, None) {
            Ok(r) => r,
            Err(e) => return vec![format!("open: {e}")],
        };
        reader.plain_layout &= plain;
        let mut seen = Vec::new();
        loop {
            let batch = match reader.next_batch(batch) {
                Ok(b) => b,
                Err(e) => {
                    seen.push(format!("error: {e}"));
                    break;
                }
            };
            if batch.is_empty() {
                break;
            }
            for item in batch.items {
                seen.push(match item {
                    Ok(span) => format!("{:?}", batch.wells.curve(span)),
                    Err(e) => format!("curve error: {e}"),
                });
            }
            seen.push(format!("unit {:?}, {} bytes", reader.unit(), reader.bytes_read()));
        }
        seen.push(format!("unused controls {}", reader.unused_controls()));
        seen
    }

    /// The short cut for plain lines ([`CurveReader::take_plain_well`])
    /// reads what the general path reads: on random files of three
    /// columns (in any order, with the unit in the header or a cell) whose
    /// lines are plain or not — spaces, quotes, non-ASCII names, blank and
    /// comment lines, CRLF ends, units and qualifiers in cells, bad
    /// numbers, wrong field counts, empty names, compounds that come back,
    /// no final newline — and on files big enough to cross the stream's
    /// refills, every batch, curve, error and line number is the same.
    #[test]
    fn plain_lines_read_as_the_general_path_reads_them() {
        use rand::{Rng, SeedableRng};
        let mut rng = rand::rngs::StdRng::seed_from_u64(23);
        let names = ["a", "b", "C-1", "a ", " b", "\"a\"", "\u{e9}t", "#c", "", "d"];
        let numbers =
            ["1", "10", "0.5", "12.25", "3333.33", "-4", "1e-3", " 7", "8 ", "2 nM", "<1", "x", "", "0", "97.1234"];
        let headers = [
            ("compound,concentration (nM),response", [0, 1, 2]),
            ("response,compound,conc [uM]", [1, 2, 0]),
            ("compound,concentration,response", [0, 1, 2]),
            ("compound,concentration (nM),response,note", [0, 1, 2]),
        ];
        let mut shortcut_lines = 0;
        for round in 0..400 {
            let (header, order) = headers[round % headers.len()];
            let width = header.split(',').count();
            let mut text = format!("{header}\n");
            let rows = if round % 40 == 0 { 6_000 } else { rng.random_range(0..60) };
            let mut name = names[0];
            for _ in 0..rows {
                if rng.random_range(0..8) == 0 {
                    name = names[rng.random_range(0..names.len())];
                }
                let plain = rng.random_range(0..10) < 8;
                let pick = |rng: &mut rand::rngs::StdRng| {
                    if plain {
                        ["1", "10", "0.5", "12.25", "97.1234"][rng.random_range(0..5)]
                    } else {
                        numbers[rng.random_range(0..numbers.len())]
                    }
                };
                let mut cells = vec![String::new(); width];
                cells[order[0]] = name.to_string();
                cells[order[1]] = pick(&mut rng).to_string();
                cells[order[2]] = pick(&mut rng).to_string();
                if width == 4 {
                    cells[3] = "n".into();
                }
                let mut line = cells.join(",");
                match rng.random_range(0..40) {
                    0 => line.clear(),
                    1 => line = "# a comment".into(),
                    2 => line.push(','),
                    3 => line = line.replacen(',', ";", 1),
                    4 => line.push('\r'),
                    _ => {}
                }
                text.push_str(&line);
                text.push('\n');
            }
            if rng.random_range(0..4) == 0 {
                text.pop();
            }
            let batch = rng.random_range(1..6);
            let general = read_all(&text, batch, false);
            assert_eq!(read_all(&text, batch, true), general, "round {round}:\n{text}");
            shortcut_lines += usize::from(width == 3 && !header.ends_with("concentration,response")) * rows;
        }
        assert!(shortcut_lines > 50_000, "{shortcut_lines}");
    }

    #[test]
    fn spans_read_as_line_span_writes_them() {
        for (first, last) in [(1, 1), (2, 11), (9, 10), (99_999, 1_000_000), (u64::MAX, u64::MAX)] {
            let location = Location { file: "a.csv".into(), rows: Some((first, last)), lines: Vec::new() };
            assert_eq!(location.span(), format!("a.csv, {}", crate::io::input::line_span(first, last)));
        }
    }
}
