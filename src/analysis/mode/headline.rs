//! The constant the output leads with, and whether the mechanism is certain.
//!
//! * Plausible models: the five ranked by Akaike weight, taken until their
//!   weights sum to [`CONFIDENCE_SET`] (a confidence set of models,
//!   Burnham & Anderson, *Model Selection and Multimodel Inference*, 2nd ed.,
//!   2002, §4.2), plus the chosen model if it is not already among them.
//! * Headline: one plausible model alone → its constants (`chosen-model`).
//!   Several → the span of their intervals (`span-over-plausible-models`):
//!   the lowest lower end and the highest upper end. Model averaging in the
//!   sense of Burnham & Anderson §4.3 (Buckland, Burnham & Augustin,
//!   Biometrics 53, 603–618, 1997) cannot be used as such here, because a
//!   plausible model may put a constant at infinity (uncompetitive has no
//!   Kic, competitive no Kiu); the span keeps that end open (`null`) instead
//!   of averaging a number that does not exist. The value is the chosen
//!   model's estimate (or, where the chosen model lacks the constant, that of
//!   the most-weighted plausible model that has it).
//! * `mechanism-uncertain`: see [`uncertain`].

use crate::models::inhibition::Mechanism;
use crate::report::Code;
use serde::Serialize;

use super::ModelResult;
use crate::fit::stats::extra_sum_of_squares;
use crate::report::{Param, Warning};
use crate::units::sig;

/// Cumulative Akaike weight of the confidence set of models.
pub const CONFIDENCE_SET: f64 = 0.95;

/// The `mechanism-uncertain` rule fires when the F test between the chosen
/// model and its nearest competitor has a p-value in [low, high): below 0.01
/// the difference is clear (the level of the adequacy tests); at 0.3 and
/// above the extra constant is idle. The upper end was set by simulation so
/// that the warning fires on most wrong calls and few right ones.
pub const GREY_ZONE: (f64, f64) = (0.01, 0.3);

/// What the headline rests on.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Basis {
    /// One model carries (almost) all the evidence: its constants.
    ChosenModel,
    /// Several models are plausible: the span of their intervals.
    SpanOverPlausibleModels,
    /// An extension model (partial or substrate inhibition) was named: its constants.
    Diagnosis,
    /// No model describes the data: no constant.
    NoModelAdequate,
}

/// The constants the output leads with.
#[derive(Debug, Clone, Serialize)]
pub struct Headline {
    /// What the numbers rest on.
    pub basis: Basis,
    /// The models they come from.
    pub models: Vec<&'static str>,
    /// Kic; null when no plausible model has it (value null, with a lower
    /// end, when the plausible models put it at infinity but bound it below).
    pub ki: Option<Param>,
    /// Kiu; null when no plausible model has a finite one.
    pub kiu: Option<Param>,
    /// The basis in words.
    pub note: String,
}

/// Indices of the plausible models: by weight until [`CONFIDENCE_SET`], plus `chosen`.
pub fn plausible(models: &[ModelResult], chosen: usize) -> Vec<usize> {
    let mut order: Vec<usize> = (0..models.len()).collect();
    order.sort_by(|&a, &b| models[b].weight.total_cmp(&models[a].weight));
    let mut set = Vec::new();
    let mut total = 0.0;
    for k in order {
        if total >= CONFIDENCE_SET {
            break;
        }
        total += models[k].weight;
        set.push(k);
    }
    if !set.contains(&chosen) {
        set.push(chosen);
    }
    set.sort_unstable();
    set
}

/// Which constant.
#[derive(Clone, Copy)]
enum Which {
    Ki,
    Kiu,
}

/// One model's statement about a constant: `None` when the model puts it at
/// infinity (it is not part of the model).
fn constant(m: &ModelResult, which: Which) -> Option<&Param> {
    match (which, m.model) {
        (Which::Ki, "noncompetitive") | (Which::Kiu, "noncompetitive") => m.params.ki.as_ref(),
        (Which::Ki, _) => m.params.ki.as_ref(),
        (Which::Kiu, _) => m.params.kiu.as_ref(),
    }
}

/// The span of one constant over the plausible models; `None` when none has
/// a finite estimate.
fn span(models: &[ModelResult], set: &[usize], chosen: usize, which: Which) -> Option<Param> {
    let finite = |k: usize| constant(&models[k], which).filter(|p| p.value.is_finite());
    let heaviest = |pick: &dyn Fn(usize) -> bool| {
        set.iter().cloned().filter(|&k| pick(k)).max_by(|&a, &b| models[a].weight.total_cmp(&models[b].weight))
    };
    // A finite estimate if any plausible model has one; otherwise a model
    // that puts the constant at infinity but bounds it from below (Ki > low).
    let source = finite(chosen)
        .map(|_| chosen)
        .or_else(|| heaviest(&|k| finite(k).is_some()))
        .or_else(|| heaviest(&|k| constant(&models[k], which).is_some_and(|p| p.low.is_some())))?;
    let base = constant(&models[source], which)?.clone();
    let (mut low, mut high) = (base.low, base.high);
    let mut open_because = Vec::new();
    for &k in set {
        match constant(&models[k], which) {
            Some(p) => {
                low = match (low, p.low) {
                    (Some(a), Some(b)) => Some(a.min(b)),
                    _ => None,
                };
                high = match (high, p.high) {
                    (Some(a), Some(b)) => Some(a.max(b)),
                    _ => None,
                };
            }
            None => {
                high = None;
                open_because.push(models[k].model);
            }
        }
    }
    let mut note = format!(
        "value from {}; interval spans the plausible models ({})",
        models[source].model,
        set.iter().map(|&k| models[k].model).collect::<Vec<_>>().join(", ")
    );
    if !open_because.is_empty() {
        note.push_str(&format!(
            "; no upper end because {} (plausible) has no such constant",
            open_because.join(" and ")
        ));
    }
    if (low.is_none() || high.is_none())
        && let Some(n) = &base.note
    {
        note.push_str(&format!("; {n}"));
    }
    Some(Param { value: base.value, se: None, low, high, unit: base.unit, interval: "span", note: Some(note) })
}

/// The headline for a call among the five (adequate).
pub fn from_five(models: &[ModelResult], chosen: usize) -> Headline {
    let set = plausible(models, chosen);
    let names: Vec<&'static str> = set.iter().map(|&k| models[k].model).collect();
    if set.len() == 1 {
        let m = &models[chosen];
        let finite = |p: Option<&Param>| p.filter(|p| p.value.is_finite()).cloned();
        return Headline {
            basis: Basis::ChosenModel,
            models: names,
            ki: finite(constant(m, Which::Ki)),
            kiu: finite(constant(m, Which::Kiu)),
            note: format!(
                "{} carries Akaike weight {} ≥ {CONFIDENCE_SET} among the five laws: its constants",
                m.model,
                sig(m.weight, 3)
            ),
        };
    }
    let ki = span(models, &set, chosen, Which::Ki);
    let kiu = span(models, &set, chosen, Which::Kiu);
    Headline {
        basis: Basis::SpanOverPlausibleModels,
        note: format!(
            "{} models make up {CONFIDENCE_SET} of the Akaike weight ({}); each interval runs from the lowest to the \
             highest end among them, open where one of them leaves it open",
            set.len(),
            names.join(", ")
        ),
        models: names,
        ki,
        kiu,
    }
}

/// `mechanism-uncertain`: the extra-sum-of-squares F test between the
/// chosen model and its nearest competitor in the nesting — mixed, for a
/// one-constant call; the best-weighted one-constant model, for a mixed call —
/// falls in the grey zone [`GREY_ZONE`]: the constant that tells the two
/// mechanisms apart is neither clearly needed (p < 0.01) nor clearly idle
/// (p ≥ 0.3). In either case the headline constant of the call depends on a
/// choice the data do not make. Rates of firing on right and wrong calls are
/// measured in tests/mode_uncertainty.rs and stated in the README.
pub fn uncertain(models: &[ModelResult], chosen: usize) -> Option<Warning> {
    let mixed = Mechanism::Mixed.index();
    let (simpler, fuller) = match Mechanism::at(chosen) {
        None | Some(Mechanism::None) => return None,
        Some(Mechanism::Mixed) => {
            let one_constant = Mechanism::Competitive.index()..mixed;
            let one = one_constant.max_by(|&a, &b| models[a].weight.total_cmp(&models[b].weight))?;
            (one, mixed)
        }
        Some(_) => (chosen, mixed),
    };
    let (s, f) = (&models[simpler], &models[fuller]);
    let (_, p) = extra_sum_of_squares(s.sse, s.df, f.sse, f.df)?;
    if !(GREY_ZONE.0..GREY_ZONE.1).contains(&p) {
        return None;
    }
    let lean = if chosen == mixed {
        format!("mixed improves on {} only modestly (F test p = {})", s.model, sig(p, 2))
    } else {
        format!("mixed improves on {} more than chance would usually allow (F test p = {})", s.model, sig(p, 2))
    };
    Some(Warning::new(
        Code::MechanismUncertain,
        format!(
            "the data do not single out one mechanism: {lean}, in the grey zone {}–{} where the evidence neither \
             demands nor rules out the extra constant (Akaike weights {} {}, {} {}); the headline Ki/Kiu span \
             the plausible models — measure more inhibitor levels around Ki and substrate levels across Km to decide",
            GREY_ZONE.0,
            GREY_ZONE.1,
            models[chosen].model,
            sig(models[chosen].weight, 2),
            models[if chosen == mixed { simpler } else { fuller }].model,
            sig(models[if chosen == mixed { simpler } else { fuller }].weight, 2)
        ),
    ))
}

/// The headline when an extension model is the diagnosis: its constants.
pub fn from_extension(r: &super::ExtensionResult) -> Headline {
    Headline {
        basis: Basis::Diagnosis,
        models: vec![r.model],
        ki: Some(r.params.ki.clone()),
        kiu: Some(r.params.kiu.clone()),
        note: format!("{}: the constants of that model, not of a plain mechanism", r.model),
    }
}

/// The headline when no model describes the data: none.
pub fn inadequate() -> Headline {
    Headline {
        basis: Basis::NoModelAdequate,
        models: Vec::new(),
        ki: None,
        kiu: None,
        note: "no model describes the data: no constant is given".into(),
    }
}
