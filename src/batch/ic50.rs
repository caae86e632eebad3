//! The `ic50` run, streamed in bounded memory: the reader
//! ([`crate::io::ic50`]) yields each contiguous block of one compound as a
//! curve; curves are fitted in batches on all cores (rayon) while the next
//! batch is read, and written in input order by the view
//! ([`crate::view::ic50`]), so memory depends on the batch size and not on
//! the input, and the output does not depend on the thread count. With
//! normalisation the input is read twice: once for the control wells of
//! every plate, once for the curves.

use std::io::Write;
use std::path::PathBuf;

use rayon::prelude::*;

use super::Progress;
use crate::analysis::ic50::{Curve, Ic50Result, IntervalMethod, Options, OutlierMode, Thresholds, analyse};
use crate::error::{Error, Result};
use crate::io::Format;
use crate::io::ic50::{BatchWells, CurveBatch, CurveReader, CurveSpan, Input, ReadOptions, read_controls};
use crate::units::ConcUnit;
use crate::view::ic50::{Context, Rendered, StreamWriter, plates_grid, table_header, table_row};

/// Everything a run needs besides its input and output.
#[derive(Debug, Clone)]
pub struct Settings {
    /// How to read.
    pub read: ReadOptions,
    /// Output format.
    pub format: Format,
    /// Curves per parallel batch (memory and progress granularity).
    pub batch_size: usize,
    /// Hold the lower asymptote here (response units).
    pub fix_lower: Option<f64>,
    /// Hold the upper asymptote here (response units).
    pub fix_upper: Option<f64>,
    /// Total active enzyme, mol/L: fit Morrison's equation.
    pub enzyme: Option<f64>,
    /// Confidence level of the intervals.
    pub confidence: f64,
    /// Interval method for IC50.
    pub intervals: IntervalMethod,
    /// What to do with wells the outlier rule marks.
    pub outliers: OutlierMode,
    /// Flag thresholds.
    pub thresholds: Thresholds,
}

impl Settings {
    /// Every command-line default, writing `format`.
    pub fn defaults(format: Format) -> Settings {
        Settings {
            read: ReadOptions { normalise: false, concentration_unit: None, unit_flag: "--concentration-unit" },
            format,
            batch_size: 8192,
            fix_lower: None,
            fix_upper: None,
            enzyme: None,
            confidence: crate::report::DEFAULT_CONFIDENCE,
            intervals: IntervalMethod::Wald,
            outliers: OutlierMode::Exclude,
            thresholds: Thresholds::default(),
        }
    }

    /// Refuses combinations that cannot mean what the user wants (named by their flags).
    pub fn check(&self) -> Result<()> {
        let t = &self.thresholds;
        if let (Some(lower), Some(_)) = (self.fix_lower, self.enzyme) {
            return Err(Error::Option {
                option: "--fix-lower".into(),
                value: lower.to_string(),
                problem: "the Morrison model (--enzyme) has no lower asymptote; inhibition is complete at saturation"
                    .into(),
                expected: "drop --fix-lower, and give % activity (--normalise) or background-subtracted signal".into(),
            });
        }
        let ((upper_min, upper_max), (lower_min, lower_max)) = (t.upper_window, t.lower_window);
        if !(upper_min < upper_max && lower_min < lower_max) {
            return Err(Error::Option {
                option: "--upper-min/--upper-max/--lower-min/--lower-max".into(),
                value: format!("{upper_min}..{upper_max}, {lower_min}..{lower_max}"),
                problem: "a plausible window must have its minimum below its maximum".into(),
                expected: "e.g. --upper-min 70 --upper-max 130 --lower-min -30 --lower-max 100 (the defaults)".into(),
            });
        }
        if t.min_concentrations < 2 || t.min_z_prime >= 1.0 || t.min_z_prime.is_nan() || t.hill_shallow < 0.0 {
            return Err(Error::Option {
                option: "thresholds".into(),
                value: format!(
                    "--min-concentrations {}, --min-z-prime {}, --hill-shallow {}",
                    t.min_concentrations, t.min_z_prime, t.hill_shallow
                ),
                problem: "a threshold is outside its meaningful range".into(),
                expected: "use --min-concentrations ≥ 2, --min-z-prime < 1 and --hill-shallow ≥ 0".into(),
            });
        }
        Ok(())
    }
}

/// What a run did, for the exit status.
#[derive(Debug, Clone, Copy, Default)]
pub struct Summary {
    /// Compounds seen.
    pub total: usize,
    /// Compounds (and control rows) that could not be processed.
    pub failed: usize,
    /// Control rows not used (no normalisation was asked for).
    pub unused_controls: usize,
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

/// Thumbnails shown in the grid and the report at most (flagged first).
const GALLERY_CAP: usize = 60;
/// Compounds listed in the report's table at most.
const REPORT_ROWS: usize = 500;

/// What the pictures and the report page collect while the curves stream
/// past: every curve's SVG is written into the plot directory as it is
/// fitted; a capped gallery is kept for the grid and the report.
pub struct Pictures {
    /// Thumbnails and table rows.
    pub gallery: crate::plot::ic50::Gallery,
    /// The plate table (with normalisation).
    pub plates: Option<crate::view::Grid>,
    /// Messages of compounds that failed.
    pub failures: Vec<String>,
    names: crate::plot::files::Names,
    plot_dir: Option<PathBuf>,
    report: Option<PathBuf>,
    input: String,
}

impl Pictures {
    /// Empty, for a run on `input` writing SVGs into `plot_dir` and the page to `report`.
    pub fn new(input: &str, plot_dir: Option<PathBuf>, report: Option<PathBuf>) -> Pictures {
        let mut names = crate::plot::files::Names::new("ic50");
        // Reserved first, so a compound named "overview" cannot take the grid's name.
        let _ = names.next(Some("overview"));
        Pictures {
            gallery: crate::plot::ic50::Gallery::new(GALLERY_CAP, REPORT_ROWS),
            plates: None,
            failures: Vec::new(),
            names,
            plot_dir,
            report,
            input: input.to_string(),
        }
    }

    /// Adds a fitted curve: its SVG goes to the plot directory now.
    fn add(&mut self, curve: Curve, r: Ic50Result, context: &Context) -> Result<()> {
        if let Some(dir) = &self.plot_dir {
            let g = &self.gallery;
            let svg = crate::plot::ic50::figure(&r, &curve, &g.unit, &g.response, g.et)?;
            let name = self.names.next(Some(&r.compound));
            crate::plot::files::write_plots(dir, &[(name, svg.text)], &[&self.input])?;
        }
        let row = table_row(&r, context);
        self.gallery.add(curve, r, row);
        Ok(())
    }

    /// Writes the grid into the plot directory and the report page.
    pub fn finish(&self) -> Result<()> {
        if let Some(dir) = &self.plot_dir
            && !self.gallery.shown().is_empty()
        {
            let grid = self.gallery.grid()?;
            crate::plot::files::write_plots(dir, &[("ic50-overview.svg".into(), grid.text)], &[&self.input])?;
        }
        if let Some(path) = &self.report {
            let input = &self.input;
            let page = crate::page::Page {
                title: format!("kimech ic50 — {input}"),
                intro: vec![format!("Dose-response fits of {} compound(s) from {input}.", self.gallery.total)],
                sections: vec![self.section(&format!("kimech ic50 {input}"))?],
                caution: crate::view::CAUTION.to_string(),
            };
            crate::io::write_output(Some(path), crate::page::render(&page).as_bytes(), &[input])?;
        }
        Ok(())
    }

    /// The report section of what was collected.
    pub fn section(&self, command: &str) -> Result<crate::page::Section> {
        crate::page::ic50::section(&self.gallery, self.plates.as_ref(), &self.failures, command)
    }

    /// Hands a fitted batch over (its chunks hold the curves and results).
    fn batch(&mut self, chunks: Vec<Fitted>, options: &Options) -> Result<()> {
        self.gallery.unit = options.unit.symbol().to_string();
        self.gallery.et = options.enzyme;
        self.gallery.response = match &options.response_unit {
            Some(u) if u == "%" => "activity (%)".into(),
            Some(u) => format!("response ({u})"),
            None => "response (unit not given)".into(),
        };
        let context =
            Context { unit: options.unit, morrison: options.enzyme.is_some(), confidence: options.confidence };
        self.gallery.header = table_header(&context);
        for chunk in chunks {
            self.failures.extend(chunk.failures.iter().map(|e| e.to_string()));
            for (curve, r) in chunk.curves.into_iter().zip(chunk.rendered.kept) {
                self.add(curve, r, &context)?;
            }
        }
        Ok(())
    }
}

/// [`run`] after [`Settings::check`], with the note on unused controls:
/// the whole run as the command does it, on any input.
pub fn run_checked(
    input: &Input,
    settings: &Settings,
    out: &mut dyn Write,
    progress: bool,
    pictures: Option<&mut Pictures>,
) -> Result<Summary> {
    settings.check()?;
    let summary = run(input, settings, out, progress, pictures)?;
    if summary.unused_controls > 0 {
        eprintln!(
            "kimech: note: {} control rows were not used; pass --normalise to turn raw signal into % activity from them",
            summary.unused_controls
        );
    }
    Ok(summary)
}

/// [`run_checked`] on in-memory CSV (the demo), returning the output bytes.
pub fn run_bytes(
    name: &str,
    bytes: &'static [u8],
    settings: &Settings,
    pictures: Option<&mut Pictures>,
) -> Result<(Vec<u8>, Summary)> {
    let mut out = Vec::new();
    let summary = run_checked(&Input::Bytes(bytes, name.to_string()), settings, &mut out, false, pictures)?;
    Ok((out, summary))
}

/// Curves fitted together on one worker thread (rayon splits a batch into
/// chunks of this many): enough that a chunk's one output buffer saves
/// allocations, few enough that both cores share a batch evenly.
const CHUNK: usize = 64;

/// A chunk of a batch, fitted and rendered on one worker thread.
struct Fitted {
    /// Curves in the chunk (fitted or failed).
    total: usize,
    /// The fitted ones in the output format (and the results, when kept).
    rendered: Rendered,
    /// The compounds that could not be fitted, in input order.
    failures: Vec<Error>,
    /// The fitted curves, when pictures are drawn (in the order of `rendered.kept`).
    curves: Vec<Curve>,
}

/// A fitted batch on its way from the fitting threads to the writer, with
/// what the writer needs to know about it.
struct Done {
    chunks: Vec<Fitted>,
    /// The batch's options (its concentration unit among them).
    options: Options,
    /// Input bytes read once this batch was read (for progress).
    bytes_read: u64,
}

/// Reads, fits and writes everything from `input` to `out`; messages about
/// failed compounds go to stderr as they are met (in input order), and a
/// progress bar when `progress` and stderr is a terminal.
///
/// Three stages overlap: a thread of its own reads batch after batch and
/// hands each to the thread pool to be fitted; the calling thread writes
/// each fitted batch, in input order, and frees it. The writer waits for
/// the batches in the order they were read, so the output and the messages
/// come out in input order whatever the thread count, and at most a few
/// batches ([`IN_FLIGHT`]) are in memory.
pub fn run(
    input: &Input,
    settings: &Settings,
    out: &mut dyn Write,
    progress: bool,
    mut pictures: Option<&mut Pictures>,
) -> Result<Summary> {
    let mut summary = Summary::default();
    let plates = match settings.read.normalise {
        true => Some(read_controls(input, settings.thresholds.min_z_prime)?),
        false => None,
    };
    for (plate, e) in plates.iter().flat_map(|p| &p.rejected) {
        eprintln!("kimech: control well of plate '{plate}' not used: {e}");
        summary.failed += 1;
    }
    let mut reader = CurveReader::new(input, settings.read, plates.as_ref())?;
    let morrison = settings.enzyme.is_some();
    let mut writer = StreamWriter::new(out, settings.format, reader.carried(), morrison, settings.confidence);
    if let Some(p) = &plates {
        writer.plates(&p.qc)?;
        if let Some(pics) = pictures.as_deref_mut() {
            pics.plates = Some(plates_grid(&p.qc));
        }
    }
    let response_unit =
        if settings.read.normalise { Some("%".to_string()) } else { reader.response_unit().map(str::to_string) };
    let mut bar = Progress::new(progress, input.size());
    let keep_curves = pictures.is_some();
    let (order, batches) = std::sync::mpsc::sync_channel::<Fitting>(IN_FLIGHT);
    let streamed = std::thread::scope(|scope| -> Result<()> {
        let producer = scope.spawn(|| read_and_fit(&mut reader, settings, response_unit, keep_curves, order));
        let written = write_all(batches, &mut writer, &mut summary, &mut bar, &mut pictures);
        // On a write error the receiver is gone, so the producer stops at its next send.
        let read_and_fitted = producer.join().unwrap_or_else(|panic| std::panic::resume_unwind(panic));
        written.and(read_and_fitted)
    });
    streamed?;
    bar.finish();
    summary.unused_controls = reader.unused_controls();
    writer.finish(plates.as_ref().map(|p| p.qc.as_slice()))?;
    Ok(summary)
}

/// Batches read but not yet taken by the writer, at most (besides the one
/// being read and the one being written): enough that the pool always has
/// a batch to start on, few enough that memory stays a few batches.
const IN_FLIGHT: usize = 2;

/// A batch on the thread pool: where the writer waits for it, in input order
/// (a panic on the pool comes back here, to be raised on the writing thread).
type Fitting = std::sync::mpsc::Receiver<std::thread::Result<Done>>;

/// The reading stage, on a thread of its own: each batch read is handed to
/// the thread pool to be fitted, and its place in the output queued for the
/// writer. The pool does not wait at the end of a batch: while the last
/// chunks of one batch are fitted, the next batch is already there to start
/// on (a `rayon::join` of reading and fitting per batch left a core idle at
/// every batch's end). Stops at the end of the input, on a read error
/// (returned), or when the writer has hung up.
fn read_and_fit(
    reader: &mut CurveReader,
    settings: &Settings,
    response_unit: Option<String>,
    keep_curves: bool,
    order: std::sync::mpsc::SyncSender<Fitting>,
) -> Result<()> {
    let batch_size = settings.batch_size.max(1);
    let format = settings.format;
    loop {
        let batch = reader.next_batch(batch_size)?;
        if batch.is_empty() {
            return Ok(());
        }
        let unit = reader.unit().unwrap_or(ConcUnit::Molar);
        let options = options(settings, unit, response_unit.clone());
        let bytes_read = reader.bytes_read();
        let (fitted, fitting) = std::sync::mpsc::sync_channel(1);
        if order.send(fitting).is_err() {
            return Ok(());
        }
        rayon::spawn(move || {
            let done = std::panic::catch_unwind(std::panic::AssertUnwindSafe(|| {
                let chunks = fit_batch(batch, &options, format, keep_curves);
                Done { chunks, options, bytes_read }
            }));
            // The writer may have stopped on an error: nobody is waiting then.
            let _ = fitted.send(done);
        });
    }
}

/// The writing stage: every batch, in input order as the reader queued
/// them, to the writer, the pictures and stderr.
fn write_all(
    batches: std::sync::mpsc::Receiver<Fitting>,
    writer: &mut StreamWriter,
    summary: &mut Summary,
    bar: &mut Progress,
    pictures: &mut Option<&mut Pictures>,
) -> Result<()> {
    for fitting in batches {
        let mut done = match fitting.recv() {
            Ok(Ok(done)) => done,
            Ok(Err(panic)) => std::panic::resume_unwind(panic),
            // Every fitting job sends its batch, panic or not.
            Err(_) => unreachable!("a fitting job ended without its batch"),
        };
        let rendered: Vec<&Rendered> = done.chunks.iter().map(|c| &c.rendered).collect();
        writer.batch(&rendered, done.options.unit)?;
        for chunk in &mut done.chunks {
            summary.total += chunk.total;
            for k in 0..chunk.failures.len() {
                // A missing unit is a property of the input, not of one compound: stop once.
                if let Error::NoUnit { .. } = chunk.failures[k] {
                    return Err(chunk.failures.swap_remove(k));
                }
                eprintln!("kimech: {}", chunk.failures[k]);
                summary.failed += 1;
            }
        }
        if let Some(pics) = pictures.as_deref_mut() {
            pics.batch(done.chunks, &done.options)?;
        }
        bar.update(done.bytes_read);
    }
    Ok(())
}

/// The core's options for a batch whose concentrations are in `unit`.
fn options(settings: &Settings, unit: ConcUnit, response_unit: Option<String>) -> Options {
    Options {
        percent: response_unit.as_deref() == Some("%"),
        outliers: settings.outliers,
        response_unit,
        fix_lower: settings.fix_lower,
        fix_upper: settings.fix_upper,
        enzyme: settings.enzyme.map(|molar| unit.from_molar(molar)),
        unit,
        confidence: settings.confidence,
        intervals: settings.intervals,
        thresholds: settings.thresholds,
        settings: crate::analysis::ic50::screening_settings(),
    }
}

/// Fits and renders a batch in chunks of [`CHUNK`] curves on the thread
/// pool, in input order; the results are kept (with their curves) only for
/// the pictures.
fn fit_batch(batch: CurveBatch, options: &Options, format: Format, pictures: bool) -> Vec<Fitted> {
    let CurveBatch { items, wells } = batch;
    items.into_par_iter().chunks(CHUNK).map(|chunk| fit_chunk(chunk, &wells, options, format, pictures)).collect()
}

/// Fits a chunk's curves one by one, each copied from the batch into the
/// one [`Curve`] the chunk reuses (so a curve allocates nothing of its own).
fn fit_chunk(
    items: Vec<Result<CurveSpan>>,
    wells: &BatchWells,
    options: &Options,
    format: Format,
    pictures: bool,
) -> Fitted {
    let mut fitted = Fitted {
        total: items.len(),
        rendered: Rendered::new(format, options.enzyme.is_some(), pictures, items.len()),
        failures: Vec::new(),
        curves: Vec::new(),
    };
    let mut curve = wells.empty_curve();
    for item in items {
        let span = match item {
            Ok(span) => span,
            Err(e) => {
                fitted.failures.push(e);
                continue;
            }
        };
        wells.fill(span, &mut curve);
        match analyse(&curve, options) {
            Ok(r) => {
                // Rendered where the result lies; moved only to be kept.
                fitted.rendered.render(&r);
                if fitted.rendered.keeps() {
                    fitted.rendered.keep(r);
                }
                if pictures {
                    fitted.curves.push(curve.clone());
                }
            }
            Err(e) => fitted.failures.push(e),
        }
    }
    fitted
}
