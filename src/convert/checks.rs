//! The assumption checks behind every converted constant. Each fires a
//! [`Warning`] with a stable kebab-case code:
//!
//! | code | fires when | source |
//! |---|---|---|
//! | `tight-binding` | Et given and IC50 < 10·Et | common practice (no single source) |
//! | `tight-binding-not-checked` | no Et used and IC50 < 100 nM | common practice: assays commonly run at 0.1–10 nM enzyme |
//! | `mechanism-assumed` | mechanism unknown; competitive used | Cheng & Prusoff 1973 (the relation depends on it) |
//! | `hill-far-from-one` | \|log2 h\| > 0.5 (h outside 0.71–1.41) | common practice; Leff & Dougall 1993 |
//! | `substrate-far-from-km` | S/Km outside 0.1–10 for a relation that uses S/Km | common practice |
//! | `ligand-far-from-kd` | L/Kd outside 0.1–10 in a binding assay | common practice |
//! | `qualified-input` | the IC50 is a bound, so the Ki is a bound | DESIGN §3 |
//! | `approximate-input` | the IC50 was written with `~` | DESIGN §3 |

use super::{Assay, Conditions, Measurement, Mechanism, Settings};
use crate::report::Code;
use crate::report::Warning;
use crate::units::Qualifier;
use crate::units::sig;

/// Below this IC50 (mol/L), with no Et, tight binding could matter: tenfold
/// above 10 nM, the top of the usual enzyme concentrations (common practice).
pub const TIGHT_BINDING_SCREEN: f64 = 100e-9;

/// Interval method: IC50 interval only.
pub const INTERVAL_IC50: &str = "IC50 interval mapped through the relation (conditions taken as exact)";
/// Interval method: IC50 interval and Km SE.
pub const INTERVAL_IC50_AND_KM: &str = "IC50 interval mapped through the relation, Km SE by the delta method on ln Km, added in quadrature on the log scale";
/// Interval method: Km SE only.
pub const INTERVAL_KM_ONLY: &str =
    "Km SE only, delta method on ln Km (no IC50 interval given, so this understates the uncertainty)";

/// Every check that fires for this row.
pub fn flags(m: &Measurement, c: &Conditions, settings: &Settings) -> Vec<Warning> {
    let mut out = Vec::new();
    tight_binding(m, c, settings, &mut out);
    match (c.mechanism, c.assay) {
        (None, Assay::Enzyme) => out.push(Warning::new(
            Code::MechanismAssumed,
            "mechanism not known: the competitive Ki is given (the common default); see the range over the competitive, noncompetitive and uncompetitive relations",
        )),
        (None, Assay::Binding) => out.push(Warning::new(
            Code::MechanismAssumed,
            "mechanism not known: competitive displacement of the labelled ligand is assumed by the binding-assay relation",
        )),
        _ => {}
    }
    if let Some(h) = m.hill {
        let off = h.abs().log2().abs();
        if off > settings.hill_tolerance || off.is_nan() {
            out.push(Warning::new(
                Code::HillFarFromOne,
                format!(
                    "Hill coefficient {} is far from 1 (|log2 h| > {}): the Cheng–Prusoff relations assume simple 1:1 inhibition and do not strictly hold (Leff & Dougall 1993)",
                    crate::units::sig(h, 3),
                    settings.hill_tolerance
                ),
            ));
        }
    }
    ratio_checks(c, &mut out);
    match m.qualifier {
        q if q.is_bound() => out.push(Warning::new(
            Code::QualifiedInput,
            format!("the IC50 is a bound ({q}), so the constant is a bound too, not a number"),
        )),
        Qualifier::About => out.push(Warning::new(
            Code::ApproximateInput,
            "the IC50 was written as approximate (~); the constant is no better than that",
        )),
        _ => {}
    }
    out
}

fn tight_binding(m: &Measurement, c: &Conditions, settings: &Settings, out: &mut Vec<Warning>) {
    match (c.assay, c.enzyme) {
        (Assay::Enzyme, Some(et)) if m.ic50 < 10.0 * et => out.push(Warning::new(
            Code::TightBinding,
            format!(
                "IC50 ({} nM) is within tenfold of Et ({} nM): IC50 - Et/2 was used (Morrison 1969), so the constant leans on Et being the active enzyme concentration",
                sig(m.ic50 * 1e9, 4),
                sig(et * 1e9, 4)
            ),
        )),
        (Assay::Enzyme, Some(_)) => {}
        (assay, _) if m.ic50 < settings.tight_binding_screen => out.push(Warning::new(
            Code::TightBindingNotChecked,
            if assay == Assay::Enzyme {
                format!(
                    "IC50 ({} nM) is low enough that depletion of free inhibitor could matter, but no enzyme concentration was given; pass --enzyme or an 'enzyme' column",
                    sig(m.ic50 * 1e9, 4)
                )
            } else {
                format!(
                    "IC50 ({} nM) is low enough that depletion of free inhibitor could matter; the binding-assay relation does not correct for it",
                    sig(m.ic50 * 1e9, 4)
                )
            },
        )),
        _ => {}
    }
}

/// A ratio in words, three significant digits; one past the double range
/// (1e300 / 1e-300) is said as such, never `inf`.
fn ratio_text(r: f64) -> String {
    if r.is_finite() { crate::units::sig(r, 3) } else { "beyond 1e308".into() }
}

fn ratio_checks(c: &Conditions, out: &mut Vec<Warning>) {
    let outside = |r: f64| !(0.1..=10.0).contains(&r);
    match c.assay {
        Assay::Enzyme if c.mechanism != Some(Mechanism::Noncompetitive) => {
            if let (Some(s), Some(km)) = (c.substrate, c.km)
                && outside(s / km)
            {
                out.push(Warning::new(
                    Code::SubstrateFarFromKm,
                    format!(
                        "S/Km = {} is outside 0.1–10: the correction then dominates the result and inherits Km's error",
                        ratio_text(s / km)
                    ),
                ));
            }
        }
        Assay::Binding => {
            if let (Some(l), Some(kd)) = (c.ligand, c.kd)
                && outside(l / kd)
            {
                out.push(Warning::new(
                    Code::LigandFarFromKd,
                    format!(
                        "L/Kd = {} is outside 0.1–10: the correction then dominates the result and inherits Kd's error",
                        ratio_text(l / kd)
                    ),
                ));
            }
        }
        Assay::Enzyme => {}
    }
}
