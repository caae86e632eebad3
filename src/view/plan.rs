//! The views of `kimech plan`: JSON (`design`, `power`, `sensitivity`,
//! `suggestions`), CSV (one row per grid and true mechanism, columns declared
//! once in [`COLUMNS`]) and the terminal report.

use serde::Serialize;

use super::CAUTION;
use crate::analysis::plan::{Call, Noise, PlanResult, PowerRow, Search, SensitivityRow, Suggestion, Truth};
use crate::error::Result;
use crate::fit::Weighting;
use crate::io::Format;
use crate::io::output::{Cell, CsvExport, json_bytes, new_grid, sig};

/// What the plan rests on, said with every output.
pub const GUESS_CAUTION: &str = "Km, Ki, α and the noise are guesses made before the experiment: these chances \
are simulated research estimates for those guesses, not properties of the compound. The sensitivity line shows \
how they change if Ki is 3× lower or higher.";

/// Everything the views need: the plan, the search and the units.
pub struct PlanView<'a> {
    /// The plan of the grid given.
    pub plan: &'a PlanResult,
    /// The search, with `--suggest`.
    pub search: Option<&'a Search>,
    /// Unit of substrate and Km.
    pub substrate_unit: &'a str,
    /// Unit of inhibitor and Ki.
    pub inhibitor_unit: &'a str,
}

/// The design block of the JSON.
#[derive(Serialize)]
struct DesignJson<'a> {
    substrate: &'a [f64],
    inhibitor: &'a [f64],
    replicates: usize,
    wells: usize,
    substrate_unit: &'a str,
    inhibitor_unit: &'a str,
    km: f64,
    ki: f64,
    alpha: f64,
    vmax: f64,
    #[serde(skip_serializing_if = "Option::is_none")]
    partial_beta: Option<f64>,
    noise: Noise,
    weighting: Weighting,
    simulations: usize,
    seed: u64,
}

/// The search block of the JSON.
#[derive(Serialize)]
struct SearchJson {
    wells: usize,
    candidates: usize,
    screening_simulations: usize,
}

/// `{"design", "power", "mean_right", "sensitivity", "suggestions"?, "search"?, "caution"}`.
#[derive(Serialize)]
struct Document<'a> {
    design: DesignJson<'a>,
    power: &'a [PowerRow],
    mean_right: f64,
    sensitivity: &'a [SensitivityRow],
    #[serde(skip_serializing_if = "Option::is_none")]
    suggestions: Option<&'a [Suggestion]>,
    #[serde(skip_serializing_if = "Option::is_none")]
    search: Option<SearchJson>,
    caution: String,
}

/// Serialises the plan in the chosen format.
pub fn render(view: &PlanView, format: Format) -> Result<Vec<u8>> {
    match format {
        Format::Json => json(view),
        Format::Csv => csv(view),
        Format::Table => Ok(human(view).into_bytes()),
    }
}

fn json(view: &PlanView) -> Result<Vec<u8>> {
    let p = view.plan;
    let document = Document {
        design: DesignJson {
            substrate: &p.design.substrate,
            inhibitor: &p.design.inhibitor,
            replicates: p.design.replicates,
            wells: p.design.wells(),
            substrate_unit: view.substrate_unit,
            inhibitor_unit: view.inhibitor_unit,
            km: p.constants.km,
            ki: p.constants.ki,
            alpha: p.constants.alpha,
            vmax: p.constants.vmax,
            partial_beta: p.constants.partial_beta,
            noise: p.noise,
            weighting: p.weighting,
            simulations: p.simulations,
            seed: p.seed,
        },
        power: &p.power,
        mean_right: p.mean_right,
        sensitivity: &p.sensitivity,
        suggestions: view.search.map(|s| s.suggestions.as_slice()),
        search: view.search.map(|s| SearchJson {
            wells: s.wells,
            candidates: s.candidates,
            screening_simulations: s.screening_simulations,
        }),
        caution: format!("{GUESS_CAUTION} {CAUTION}"),
    };
    json_bytes(&document)
}

/// One CSV row: a grid and one true mechanism on it.
struct Row<'a> {
    grid: String,
    substrate: &'a [f64],
    inhibitor: &'a [f64],
    replicates: usize,
    power: &'a PowerRow,
    sensitivity: Option<&'a SensitivityRow>,
}

/// A CSV column: header and value.
struct Column {
    name: &'static str,
    value: fn(&Row) -> Cell,
}

fn levels(v: &[f64]) -> Cell {
    Cell::Text(v.iter().map(|x| format!("{x}")).collect::<Vec<_>>().join(" "))
}

macro_rules! share_column {
    ($name:literal, $call:expr) => {
        Column { name: $name, value: |r| Cell::Number(Some(r.power.named.of($call))) }
    };
}

/// The CSV columns, one row per grid and true mechanism.
const COLUMNS: &[Column] = &[
    Column { name: "grid", value: |r| Cell::Text(r.grid.clone()) },
    Column { name: "substrate", value: |r| levels(r.substrate) },
    Column { name: "inhibitor", value: |r| levels(r.inhibitor) },
    Column { name: "replicates", value: |r| Cell::Count(Some(r.replicates)) },
    Column { name: "wells", value: |r| Cell::Count(Some(r.substrate.len() * r.inhibitor.len() * r.replicates)) },
    Column { name: "truth", value: |r| Cell::Text(r.power.truth.name().into()) },
    Column { name: "simulations", value: |r| Cell::Count(Some(r.power.simulations)) },
    share_column!("named_none", Call::ALL[0]),
    share_column!("named_competitive", Call::ALL[1]),
    share_column!("named_uncompetitive", Call::ALL[2]),
    share_column!("named_noncompetitive", Call::ALL[3]),
    share_column!("named_mixed", Call::ALL[4]),
    share_column!("named_partial_inhibition", Call::ALL[5]),
    share_column!("named_substrate_inhibition", Call::ALL[6]),
    share_column!("named_no_model_adequate", Call::ALL[7]),
    share_column!("named_failed", Call::ALL[8]),
    Column { name: "right", value: |r| Cell::Number(Some(r.power.right)) },
    Column { name: "right_se", value: |r| Cell::Number(Some(r.power.right_se)) },
    Column { name: "uncertain", value: |r| Cell::Number(Some(r.power.uncertain)) },
    Column { name: "ki_width_median", value: |r| Cell::Number(r.power.ki_width_median) },
    Column { name: "ki_width_p90", value: |r| Cell::Number(r.power.ki_width_p90) },
    Column { name: "ki_open", value: |r| Cell::Number(r.power.ki_open) },
    Column { name: "right_at_ki_third", value: |r| Cell::Number(r.sensitivity.map(|s| s.ki_third)) },
    Column { name: "right_at_ki_triple", value: |r| Cell::Number(r.sensitivity.map(|s| s.ki_triple)) },
];

fn rows<'a>(view: &'a PlanView) -> Vec<Row<'a>> {
    let p = view.plan;
    let mut out: Vec<Row> = p
        .power
        .iter()
        .map(|power| Row {
            grid: "given".into(),
            substrate: &p.design.substrate,
            inhibitor: &p.design.inhibitor,
            replicates: p.design.replicates,
            power,
            sensitivity: p.sensitivity.iter().find(|s| s.truth == power.truth),
        })
        .collect();
    for (k, s) in view.search.map_or(&[][..], |s| &s.suggestions).iter().enumerate() {
        out.extend(s.power.iter().map(|power| Row {
            grid: format!("suggestion {}", k + 1),
            substrate: &s.substrate,
            inhibitor: &s.inhibitor,
            replicates: s.replicates,
            power,
            sensitivity: None,
        }));
    }
    out
}

fn csv(view: &PlanView) -> Result<Vec<u8>> {
    let header: Vec<String> = COLUMNS.iter().map(|c| c.name.to_string()).collect();
    let mut out = CsvExport::new(Vec::new(), &header)?;
    for row in rows(view) {
        out.row(&COLUMNS.iter().map(|c| (c.value)(&row)).collect::<Vec<_>>())?;
    }
    out.finish()
}

/// A share for people: two decimals.
fn share(v: f64) -> String {
    format!("{v:.2}")
}

/// A width for people: "open" when infinite, "—" when the truth has no constant.
fn width_text(row: &PowerRow, w: Option<f64>) -> String {
    match (row.ki_open, w) {
        (None, _) => "—".into(),
        (Some(_), Some(w)) => sig(w, 3),
        (Some(_), None) => "open".into(),
    }
}

/// A number for people without trailing zeros: 4 significant digits.
fn short(v: f64) -> String {
    let s = sig(v, 4);
    if s.contains('.') && !s.contains('e') { s.trim_end_matches('0').trim_end_matches('.').to_string() } else { s }
}

fn levels_text(v: &[f64], unit: &str) -> String {
    format!("{} {unit}", v.iter().map(|x| short(*x)).collect::<Vec<_>>().join(", "))
}

/// The confusion table of one grid: shown calls are those any row got.
pub fn power_table(rows: &[PowerRow]) -> (Vec<String>, Vec<Vec<String>>) {
    let shown: Vec<Call> = Call::ALL
        .iter()
        .copied()
        .filter(|&c| rows.iter().any(|r| r.named.of(c) > 0.0 || r.truth.right_call() == c))
        .collect();
    let mut header = vec!["truth \\ named".to_string()];
    header.extend(shown.iter().map(|c| c.name().to_string()));
    header.extend(["right ± SE", "uncertain", "Ki width median", "Ki width p90", "Ki open"].map(String::from));
    let body = rows
        .iter()
        .map(|r| {
            let mut cells = vec![r.truth.name().to_string()];
            cells.extend(shown.iter().map(|&c| share(r.named.of(c))));
            cells.push(format!("{} ± {}", share(r.right), share(r.right_se)));
            cells.push(share(r.uncertain));
            cells.push(width_text(r, r.ki_width_median));
            cells.push(width_text(r, r.ki_width_p90));
            cells.push(r.ki_open.map_or("—".into(), share));
            cells
        })
        .collect();
    (header, body)
}

fn grid_text(header: Vec<String>, body: Vec<Vec<String>>) -> String {
    let mut grid = new_grid(header);
    for row in body {
        grid.add_row(row);
    }
    grid.to_string()
}

fn noise_text(noise: Noise) -> String {
    match noise {
        Noise::Proportional(c) => format!("{}% proportional (analysed with relative weighting)", short(c * 100.0)),
        Noise::Constant(sd) => format!("constant SD {} rate units (analysed unweighted)", short(sd)),
    }
}

/// The sensitivity line of one truth.
pub fn sensitivity_text(s: &SensitivityRow) -> String {
    if s.truth == Truth::None {
        return format!("{}: {} (Ki plays no part)", s.truth.name(), share(s.ki_expected));
    }
    format!(
        "{}: {} if Ki is 3× lower, {} as expected, {} if 3× higher",
        s.truth.name(),
        share(s.ki_third),
        share(s.ki_expected),
        share(s.ki_triple)
    )
}

/// The terminal report.
pub fn human(view: &PlanView) -> String {
    let p = view.plan;
    let (su, iu) = (view.substrate_unit, view.inhibitor_unit);
    let mut out = format!(
        "Plan: chance that `mode` names each mechanism ({} simulated matrices per mechanism, seed {})\n",
        p.simulations, p.seed
    );
    out.push_str(&format!(
        "grid: substrate {}; inhibitor {}; {} replicate(s) = {} wells\n",
        levels_text(&p.design.substrate, su),
        levels_text(&p.design.inhibitor, iu),
        p.design.replicates,
        p.design.wells()
    ));
    let partial = p.constants.partial_beta.map_or(String::new(), |b| format!(", partial β = {}", sig(b, 2)));
    out.push_str(&format!(
        "expected: Km = {} {su}, Ki = {} {iu}, α = {} (mixed), Vmax = {}{partial}; noise {}\n",
        short(p.constants.km),
        short(p.constants.ki),
        short(p.constants.alpha),
        short(p.constants.vmax),
        noise_text(p.noise)
    ));
    let (header, body) = power_table(&p.power);
    out.push_str(&grid_text(header, body));
    out.push_str(&format!(
        "\nmean chance of naming the right mechanism: {}\n\
         rows: share of simulated matrices given each call; uncertain: share with the mechanism-uncertain warning;\n\
         Ki width: high/low of the headline interval of Kic (Kiu for uncompetitive); an interval with an open end \
         has infinite width, so the median is 'open' when half of them are, the p90 when a tenth are; \
         Ki open: that share\n",
        share(p.mean_right)
    ));
    if !p.sensitivity.is_empty() {
        let n = p.sensitivity[0].simulations;
        out.push_str(&format!(
            "sensitivity — chance of naming the right mechanism ({n} simulations per cell at ×1/3 and ×3):\n"
        ));
        for s in &p.sensitivity {
            out.push_str(&format!("  {}\n", sensitivity_text(s)));
        }
    }
    if let Some(search) = view.search {
        out.push_str(&format!(
            "\nSuggested grids within {} wells ({} candidates screened with {} simulations per mechanism; \
             the best {} rerun with {}):\n",
            search.wells,
            search.candidates,
            search.screening_simulations,
            search.suggestions.len(),
            p.simulations
        ));
        for (k, s) in search.suggestions.iter().enumerate() {
            out.push_str(&format!(
                "\n{}. substrate {}; inhibitor {}; {} replicate(s) = {} wells — mean chance {}\n",
                k + 1,
                levels_text(&s.substrate, su),
                levels_text(&s.inhibitor, iu),
                s.replicates,
                s.wells,
                share(s.mean_right)
            ));
            for r in &s.reasons {
                out.push_str(&format!("   · {r}\n"));
            }
            let (header, body) = power_table(&s.power);
            out.push_str(&grid_text(header, body));
            out.push('\n');
        }
    }
    out.push('\n');
    out.push_str(GUESS_CAUTION);
    out.push(' ');
    out.push_str(CAUTION);
    out.push('\n');
    out
}
