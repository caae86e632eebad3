//! `plan` as a library call: a design (levels in the units they were written
//! in), the constants guessed for it and the simulation settings in, the plan
//! (and with a search budget the suggested grid) out. The command and the
//! demo both call [`compute`].

use crate::analysis::plan::{
    Constants, Design, PlanResult, Search, SearchSettings, Settings, plan, search_workload, suggest, workload,
};
use crate::batch::CountProgress;
use crate::error::Result;
use crate::units::{ACCEPTED_UNITS, ConcUnit, ConcentrationArg, Qualifier, parse_written};
use crate::view::plan::PlanView;

/// A list of concentrations with the unit each was written in.
#[derive(Debug, Clone, PartialEq)]
pub struct Levels {
    /// In mol/L, ascending, without duplicates.
    pub molar: Vec<f64>,
    /// The unit written (the last one in the list).
    pub unit: ConcUnit,
}

/// Parses "5,10,20 uM" or "5 uM, 10 uM": comma-separated levels; a bare number
/// takes the unit written last in the list. Every level must be ≥ 0.
pub fn parse_levels(text: &str) -> std::result::Result<Levels, String> {
    let items: Vec<&str> = text.split([',', ';']).map(str::trim).collect();
    let mut written = Vec::new();
    for (k, item) in items.iter().enumerate() {
        let w = parse_written(item)
            .map_err(|p| format!("item {} ('{item}'): {}; expected e.g. \"5,10,20 uM\"", k + 1, p.describe()))?;
        if w.qualifier != Qualifier::Equal {
            return Err(format!("item {} ('{item}'): a qualifier makes no sense in a design; give the level", k + 1));
        }
        if w.value < 0.0 {
            return Err(format!("item {} ('{item}') is negative; a concentration must be ≥ 0", k + 1));
        }
        written.push(w);
    }
    let unit = written.iter().rev().find_map(|w| w.unit).ok_or_else(|| {
        format!("'{text}' has no unit; write one after the list, e.g. \"{text} uM\" ({ACCEPTED_UNITS})")
    })?;
    let mut molar: Vec<f64> = written.iter().map(|w| w.unit.unwrap_or(unit).to_molar(w.value)).collect();
    molar.sort_by(f64::total_cmp);
    let before = molar.len();
    molar.dedup_by(|a, b| (*a - *b).abs() <= 1e-9 * b.abs());
    if molar.len() < before {
        return Err(format!("'{text}' lists a level twice; give each level once and set --replicates"));
    }
    Ok(Levels { molar, unit })
}

/// What a plan needs: the grid, the constants guessed for it, the simulation settings.
#[derive(Debug, Clone)]
pub struct Request {
    /// Expected Km.
    pub km: ConcentrationArg,
    /// Expected Ki.
    pub ki: ConcentrationArg,
    /// α = Kiu/Kic of the simulated mixed inhibitor.
    pub alpha: f64,
    /// Expected Vmax in rate units.
    pub vmax: f64,
    /// Residual activity β of a simulated partial inhibitor, if any.
    pub partial: Option<f64>,
    /// Substrate levels.
    pub substrate: Levels,
    /// Inhibitor levels.
    pub inhibitor: Levels,
    /// Wells per (S, I) pair.
    pub replicates: usize,
    /// The simulation settings.
    pub settings: Settings,
    /// With a budget, also search for a better grid.
    pub search: Option<SearchSettings>,
}

/// Everything a run produced, for the views.
pub struct Outcome {
    /// The plan of the grid given.
    pub plan: PlanResult,
    /// The search, with --suggest.
    pub search: Option<Search>,
    /// Unit of substrate and Km.
    pub substrate_unit: ConcUnit,
    /// Unit of inhibitor and Ki.
    pub inhibitor_unit: ConcUnit,
}

impl Outcome {
    /// The view of this outcome.
    pub fn view(&self) -> PlanView<'_> {
        PlanView {
            plan: &self.plan,
            search: self.search.as_ref(),
            substrate_unit: self.substrate_unit.symbol(),
            inhibitor_unit: self.inhibitor_unit.symbol(),
        }
    }
}

/// A concentration in `unit`, rounded to 12 significant digits so that a
/// conversion (250 nM → 0.25 uM → 250.00000000000003 nM) prints as written.
fn in_unit(molar: f64, unit: ConcUnit) -> f64 {
    let v = unit.from_molar(molar);
    format!("{v:.11e}").parse().unwrap_or(v)
}

/// The design in the units of Km and Ki.
pub fn design(request: &Request) -> Design {
    let s_unit = request.km.unit;
    let i_unit = request.ki.unit;
    Design {
        substrate: request.substrate.molar.iter().map(|m| in_unit(*m, s_unit)).collect(),
        inhibitor: request.inhibitor.molar.iter().map(|m| in_unit(*m, i_unit)).collect(),
        replicates: request.replicates,
    }
}

/// Runs the plan (and the search) without writing anything; progress bars on a terminal.
pub fn compute(request: &Request) -> Result<Outcome> {
    let design = design(request);
    let constants = Constants {
        vmax: request.vmax,
        km: in_unit(request.km.molar, request.km.unit),
        ki: in_unit(request.ki.molar, request.ki.unit),
        alpha: request.alpha,
        partial_beta: request.partial,
    };
    let settings = &request.settings;
    let bar = CountProgress::new(workload(&constants, settings), "simulating");
    let result = plan(&design, &constants, settings, &bar);
    bar.finish();
    let plan = result?;
    let search = match &request.search {
        Some(search_settings) => {
            let bar = CountProgress::new(search_workload(&constants, settings, search_settings), "searching");
            let found = suggest(&plan, settings, search_settings, &bar);
            bar.finish();
            Some(found?)
        }
        None => None,
    };
    Ok(Outcome { plan, search, substrate_unit: request.km.unit, inhibitor_unit: request.ki.unit })
}
