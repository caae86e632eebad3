//! IC50 → Ki: the relation for the mechanism and assay, the tight-binding
//! correction, the assumption checks and the uncertainty of the result.
//!
//! Relations (Cheng & Prusoff, Biochem. Pharmacol. 22, 3099–3108, 1973) are
//! in [`relations`]. When the total enzyme concentration Et is known, IC50 −
//! Et/2 replaces IC50 first (Morrison, Biochim. Biophys. Acta 185, 269–286,
//! 1969; Copeland, *Evaluation of Enzyme Inhibitors in Drug Discovery*, 2nd
//! ed., 2013): exact under the Morrison model, negligible when Et ≪ IC50.
//!
//! Uncertainty, on the log scale. Every relation is Ki = g(IC50 − Et/2)·c(S,
//! Km, …) with c independent of the IC50, so the ends of the IC50 interval map
//! to ends of a Ki interval exactly. Km's standard error enters by the delta
//! method on ln Km: σ(ln Ki) = |∂ln Ki/∂ln Km| · SE(Km)/Km, and the two are
//! added in quadrature on each side, ln-half-width w = √(a² + (z·σ)²), with z
//! the normal quantile of the confidence level (the IC50 interval is taken to
//! be at the same level). S, Et, α, L and Kd are taken as exact.
//!
//! This module never prints and never reads files; it takes plain numbers in
//! mol/L and returns a [`Conversion`] or a [`Problem`] that says what is wrong.

pub mod checks;
pub mod relations;

use crate::report::Code;
use serde::Serialize;
use statrs::distribution::{ContinuousCDF, Normal};

pub use relations::Mechanism;

use crate::report::Warning;
use crate::units::Qualifier;

/// The kind of assay the IC50 came from.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Assay {
    /// Enzyme activity against substrate S with Michaelis constant Km.
    Enzyme,
    /// Displacement of a labelled ligand L with dissociation constant Kd.
    Binding,
}

/// Which constant the relation gives.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub enum Endpoint {
    /// The competitive (specific) constant Kic, reported as Ki.
    Ki,
    /// The uncompetitive (catalytic) constant.
    Kiu,
}

impl Endpoint {
    /// The name used in tables.
    pub fn name(self) -> &'static str {
        match self {
            Endpoint::Ki => "Ki",
            Endpoint::Kiu => "Kiu",
        }
    }
}

/// Whether the mechanism behind a Ki was given or assumed.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum MechanismSource {
    /// Given in the input (from a mechanism study).
    Measured,
    /// Not known; the competitive relation was assumed.
    Assumed,
}

/// One IC50 as measured, in mol/L.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Measurement {
    /// `=`, `<`, `>`, … as written.
    pub qualifier: Qualifier,
    /// The IC50.
    pub ic50: f64,
    /// Lower end of its confidence interval, if known.
    pub low: Option<f64>,
    /// Upper end of its confidence interval, if known.
    pub high: Option<f64>,
    /// Hill coefficient of the inhibition curve, if known.
    pub hill: Option<f64>,
}

/// The assay conditions, in mol/L; `None` where not given.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Conditions {
    /// Enzyme or binding assay.
    pub assay: Assay,
    /// The mechanism to convert under; `None` when not known (the
    /// competitive relation is then used, flagged, with the range over the others).
    pub mechanism: Option<Mechanism>,
    /// Substrate concentration S.
    pub substrate: Option<f64>,
    /// Michaelis constant of the substrate.
    pub km: Option<f64>,
    /// Standard error of Km.
    pub km_se: Option<f64>,
    /// Total (active) enzyme concentration Et.
    pub enzyme: Option<f64>,
    /// α = Kiu/Kic for the mixed mechanism (dimensionless).
    pub alpha: Option<f64>,
    /// Labelled ligand concentration L (binding assays).
    pub ligand: Option<f64>,
    /// Dissociation constant of the labelled ligand (binding assays).
    pub kd: Option<f64>,
}

/// Thresholds of the assumption checks.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Settings {
    /// Flag `hill-far-from-one` when |log2 h| exceeds this (common practice: 0.5).
    pub hill_tolerance: f64,
    /// Confidence level of the Ki interval (and assumed of the IC50 interval).
    pub confidence: f64,
    /// Without Et, flag `tight-binding-not-checked` below this IC50 (mol/L).
    pub tight_binding_screen: f64,
}

impl Default for Settings {
    fn default() -> Self {
        Settings {
            hill_tolerance: 0.5,
            confidence: crate::report::DEFAULT_CONFIDENCE,
            tight_binding_screen: checks::TIGHT_BINDING_SCREEN,
        }
    }
}

/// The converted constant with everything it leans on.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Conversion {
    /// Ki or Kiu.
    pub endpoint: Endpoint,
    /// `=` for a number, `~` for an approximate one (also flagged), a bound otherwise.
    pub qualifier: Qualifier,
    /// The constant, mol/L.
    pub ki: f64,
    /// Lower end of its interval, mol/L.
    pub low: Option<f64>,
    /// Upper end of its interval, mol/L.
    pub high: Option<f64>,
    /// How the interval was obtained; `None` when there is none.
    pub interval_method: Option<&'static str>,
    /// The relation used, with its formula and source.
    pub method: String,
    /// The mechanism the relation assumes (competitive when it was assumed).
    pub mechanism: Mechanism,
    /// Given or assumed.
    pub mechanism_source: MechanismSource,
    /// For an unknown mechanism: the smallest and largest constant over the
    /// competitive, noncompetitive and uncompetitive relations, mol/L.
    pub range: Option<(f64, f64)>,
    /// Assumption checks that fired.
    pub flags: Vec<Warning>,
}

/// Why a row cannot be converted.
#[derive(Debug, Clone, PartialEq)]
pub enum Problem {
    /// A condition the relation needs is absent.
    Missing {
        /// What it is, in words.
        what: &'static str,
        /// The column it is read from.
        column: &'static str,
        /// The command-line default.
        flag: &'static str,
        /// The relation that needs it.
        relation: &'static str,
    },
    /// A value that must be positive is not.
    NotPositive {
        /// What it is.
        what: &'static str,
        /// The value (mol/L for concentrations).
        value: f64,
    },
    /// A binding assay was given a mechanism other than competitive.
    BindingMechanism(Mechanism),
    /// The mechanism stated is "none": a compound that does not inhibit has no Ki.
    NoInhibition,
    /// The IC50 is not above Et/2: impossible under any mechanism.
    BelowHalfEnzyme {
        /// The IC50, mol/L.
        ic50: f64,
        /// Et, mol/L.
        enzyme: f64,
    },
    /// The relation's result underflows to 0 or overflows (e.g. S/Km of
    /// 10^600): a number no double holds, so no Ki can be stated.
    OutOfRange {
        /// The IC50, mol/L.
        ic50: f64,
        /// The factor IC50 is multiplied by.
        factor: f64,
    },
}

impl Problem {
    /// What is wrong, in words.
    pub fn problem(&self) -> String {
        match self {
            Problem::Missing { what, column, flag, relation } => {
                format!(
                    "the {relation} relation needs the {what}, but column '{column}' is absent or empty and {flag} was not given"
                )
            }
            Problem::NotPositive { what, value } if *what == "alpha" => {
                format!("{what} is {}, not positive", crate::units::sig(*value, 4))
            }
            Problem::NotPositive { what, value } => {
                format!("the {what} is {} nM, not positive", crate::units::sig(value * 1e9, 4))
            }
            Problem::BindingMechanism(m) => format!(
                "the binding-assay relation assumes competitive displacement of the labelled ligand, but the mechanism is {}",
                m.name()
            ),
            Problem::NoInhibition => {
                "the mechanism is stated as none (no inhibition), so no Ki follows from the IC50".into()
            }
            Problem::BelowHalfEnzyme { ic50, enzyme } => format!(
                "the IC50 ({} nM) is not above half the enzyme concentration (Et/2 = {} nM), which no inhibitor can achieve (Morrison 1969)",
                crate::units::sig(ic50 * 1e9, 4),
                crate::units::sig(enzyme * 0.5e9, 4)
            ),
            Problem::OutOfRange { ic50, factor } => format!(
                "the relation gives Ki = IC50 × {factor:e} = {ic50:e} M × {factor:e}, which is beyond what a double can hold (below 2.2e-308 or above 1.8e308 mol/L)"
            ),
        }
    }

    /// What would make the row usable.
    pub fn expected(&self) -> String {
        match self {
            Problem::Missing { column: "alpha", flag, .. } => format!("add an 'alpha' column or pass {flag}"),
            Problem::Missing { column, flag, .. } => format!("add a '{column}' column (with its unit) or pass {flag}"),
            Problem::NotPositive { .. } => "give a value greater than zero, with its unit".into(),
            Problem::BindingMechanism(_) => {
                "use --assay enzyme with substrate and Km for this mechanism, or mechanism competitive/unknown".into()
            }
            Problem::NoInhibition => "state the mechanism the compound inhibits by, or unknown".into(),
            Problem::BelowHalfEnzyme { .. } => {
                "check the units of the IC50 and of Et, and that Et is the active enzyme concentration".into()
            }
            Problem::OutOfRange { .. } => {
                "check the units and exponents of the IC50, substrate, Km, alpha, ligand and Kd".into()
            }
        }
    }
}

/// Converts one IC50 under the given conditions.
pub fn convert(m: &Measurement, c: &Conditions, settings: &Settings) -> Result<Conversion, Problem> {
    positive("IC50", Some(m.ic50))?;
    // A lower interval end of exactly zero says "down to zero": no lower end.
    let m = &Measurement { low: m.low.filter(|v| v.is_nan() || *v < 0.0 || *v > 0.0), ..*m };
    for (what, v) in [
        ("lower end of the IC50 interval", m.low),
        ("upper end of the IC50 interval", m.high),
        ("substrate concentration", c.substrate),
        ("Km", c.km),
        ("enzyme concentration", c.enzyme),
        ("alpha", c.alpha),
        ("labelled-ligand concentration", c.ligand),
        ("Kd", c.kd),
    ] {
        if v.is_some() {
            positive(what, v)?;
        }
    }
    if let Some(se) = c.km_se.filter(|se| se.is_nan() || *se < 0.0) {
        return Err(Problem::NotPositive { what: "Km standard error", value: se });
    }
    let relation = Relation::choose(c)?;
    // Et is used only in enzyme assays: the binding-assay relation has its own depletion problems.
    let et = if c.assay == Assay::Enzyme { c.enzyme } else { None };
    let effective = |ic50: f64| match et {
        Some(e) => relations::tight_binding_corrected(ic50, e),
        None => Some(ic50),
    };
    let Some(corrected) = effective(m.ic50) else {
        return Err(Problem::BelowHalfEnzyme { ic50: m.ic50, enzyme: et.unwrap_or(0.0) });
    };
    let factor = relation.factor();
    let ki = corrected * factor;
    if !(ki.is_finite() && ki >= f64::MIN_POSITIVE) {
        return Err(Problem::OutOfRange { ic50: corrected, factor });
    }
    // `~` stays `~`: an approximate IC50 gives an approximate Ki (DESIGN §3), flagged too.
    let qualifier = m.qualifier;
    let (low, high, interval_method) = if m.qualifier.is_bound() {
        (None, None, None)
    } else {
        interval(ki, m, &relation, effective, settings.confidence)
    };
    let range =
        matches!(relation, Relation::Competitive { assumed: true, .. }).then(|| relation.unknown_range(corrected));
    Ok(Conversion {
        endpoint: relation.endpoint(),
        qualifier,
        ki,
        low,
        high,
        interval_method,
        method: relation.method(et.is_some()),
        mechanism: c.mechanism.unwrap_or(Mechanism::Competitive),
        mechanism_source: if c.mechanism.is_none() { MechanismSource::Assumed } else { MechanismSource::Measured },
        range,
        flags: tight_binding_effect(checks::flags(m, c, settings), m.ic50 * factor, ki),
    })
}

/// Adds to the tight-binding flag what plain Cheng–Prusoff would have given,
/// so the size of the correction is visible.
fn tight_binding_effect(mut flags: Vec<Warning>, uncorrected: f64, corrected: f64) -> Vec<Warning> {
    for f in flags.iter_mut().filter(|f| f.code == Code::TightBinding) {
        f.message.push_str(&format!(
            "; ignoring Et would give {} nM instead of {} nM",
            crate::units::sig(uncorrected * 1e9, 4),
            crate::units::sig(corrected * 1e9, 4)
        ));
    }
    flags
}

fn positive(what: &'static str, v: Option<f64>) -> Result<(), Problem> {
    match v {
        Some(x) if x > 0.0 && x.is_finite() => Ok(()),
        Some(x) => Err(Problem::NotPositive { what, value: x }),
        None => Ok(()),
    }
}

/// The relation chosen for a row, with the conditions it needs already present.
#[derive(Debug, Clone, Copy)]
enum Relation {
    Competitive { s: f64, km: f64, km_se: Option<f64>, assumed: bool },
    Uncompetitive { s: f64, km: f64, km_se: Option<f64> },
    Noncompetitive,
    Mixed { s: f64, km: f64, km_se: Option<f64>, alpha: f64 },
    Binding { ligand: f64, kd: f64 },
}

impl Relation {
    fn choose(c: &Conditions) -> Result<Relation, Problem> {
        if c.assay == Assay::Binding {
            if let Some(m) = c.mechanism.filter(|&m| m != Mechanism::Competitive) {
                return Err(Problem::BindingMechanism(m));
            }
            let need = |v: Option<f64>, what, column, flag| {
                v.ok_or(Problem::Missing { what, column, flag, relation: "competitive binding-assay" })
            };
            let ligand = need(c.ligand, "labelled-ligand concentration L", "ligand", "--ligand")?;
            let kd = need(c.kd, "labelled ligand's Kd", "kd", "--kd")?;
            return Ok(Relation::Binding { ligand, kd });
        }
        let name = match c.mechanism {
            Some(Mechanism::Competitive) | None => "competitive",
            Some(Mechanism::Uncompetitive) => "uncompetitive",
            Some(Mechanism::Noncompetitive) => return Ok(Relation::Noncompetitive),
            Some(Mechanism::Mixed) => "mixed",
            Some(Mechanism::None) => return Err(Problem::NoInhibition),
        };
        let s = c.substrate.ok_or(Problem::Missing {
            what: "substrate concentration S",
            column: "substrate",
            flag: "--substrate",
            relation: name,
        })?;
        let km = c.km.ok_or(Problem::Missing { what: "substrate's Km", column: "km", flag: "--km", relation: name })?;
        Ok(match c.mechanism {
            Some(Mechanism::Uncompetitive) => Relation::Uncompetitive { s, km, km_se: c.km_se },
            Some(Mechanism::Mixed) => {
                let alpha = c.alpha.ok_or(Problem::Missing {
                    what: "α (Kiu/Kic)",
                    column: "alpha",
                    flag: "--alpha",
                    relation: name,
                })?;
                Relation::Mixed { s, km, km_se: c.km_se, alpha }
            }
            m => Relation::Competitive { s, km, km_se: c.km_se, assumed: m.is_none() },
        })
    }

    /// Ki / (IC50 − Et/2): everything that does not depend on the IC50.
    fn factor(&self) -> f64 {
        match *self {
            Relation::Competitive { s, km, .. } => relations::competitive(1.0, s, km),
            Relation::Uncompetitive { s, km, .. } => relations::uncompetitive(1.0, s, km),
            Relation::Noncompetitive => relations::noncompetitive(1.0),
            Relation::Mixed { s, km, alpha, .. } => relations::mixed(1.0, s, km, alpha),
            Relation::Binding { ligand, kd } => relations::binding(1.0, ligand, kd),
        }
    }

    /// ∂ln Ki/∂ln Km and SE(ln Km), when Km's SE is known and Ki depends on Km.
    fn km_sensitivity(&self) -> Option<(f64, f64)> {
        let (g, km, se) = match *self {
            Relation::Competitive { s, km, km_se, .. } => ((s / km) / (1.0 + s / km), km, km_se?),
            Relation::Uncompetitive { s, km, km_se } => (-1.0 / (1.0 + s / km), km, km_se?),
            Relation::Mixed { s, km, km_se, alpha } => (km / (km + s / alpha) - km / (km + s), km, km_se?),
            Relation::Noncompetitive | Relation::Binding { .. } => return None,
        };
        Some((g, se / km))
    }

    fn endpoint(&self) -> Endpoint {
        match self {
            Relation::Uncompetitive { .. } => Endpoint::Kiu,
            _ => Endpoint::Ki,
        }
    }

    fn method(&self, tight: bool) -> String {
        let ic50 = if tight { "(IC50 - Et/2)" } else { "IC50" };
        let morrison = if tight { "; Morrison 1969" } else { "" };
        let base = match self {
            Relation::Competitive { assumed: false, .. } => format!("competitive: Ki = {ic50}/(1 + S/Km)"),
            Relation::Competitive { assumed: true, .. } => {
                format!("competitive (assumed): Ki = {ic50}/(1 + S/Km)")
            }
            Relation::Uncompetitive { .. } => format!("uncompetitive: Kiu = {ic50}/(1 + Km/S)"),
            Relation::Noncompetitive => format!("noncompetitive: Ki = {ic50}"),
            Relation::Mixed { .. } => format!("mixed: Ki = {ic50}*(Km + S/alpha)/(Km + S)"),
            Relation::Binding { .. } => "competitive binding: Ki = IC50/(1 + L/Kd)".to_string(),
        };
        format!("{base} (Cheng & Prusoff 1973{morrison})")
    }

    /// Smallest and largest constant over the three one-constant relations.
    fn unknown_range(&self, corrected: f64) -> (f64, f64) {
        match *self {
            Relation::Competitive { s, km, .. } => {
                let all = [
                    relations::competitive(corrected, s, km),
                    relations::noncompetitive(corrected),
                    relations::uncompetitive(corrected, s, km),
                ];
                (all.iter().copied().fold(f64::INFINITY, f64::min), all.iter().copied().fold(0.0, f64::max))
            }
            _ => {
                let ki = corrected * self.factor();
                (ki, ki)
            }
        }
    }
}

/// The Ki interval: IC50 ends mapped through the relation, Km's SE added in
/// quadrature on the log scale (see the module docs).
fn interval(
    ki: f64,
    m: &Measurement,
    relation: &Relation,
    effective: impl Fn(f64) -> Option<f64>,
    confidence: f64,
) -> (Option<f64>, Option<f64>, Option<&'static str>) {
    let factor = relation.factor();
    let z = Normal::new(0.0, 1.0).map(|n| n.inverse_cdf(0.5 + confidence / 2.0)).unwrap_or(f64::NAN);
    let km_part = relation.km_sensitivity().map(|(g, sigma)| (z * g * sigma).abs());
    // ln half-widths from the IC50 interval; a lower end at or below Et/2 means "down to zero".
    let ln_low = m.low.map(|lo| effective(lo).map(|e| (ki / (e * factor)).ln()));
    let ln_high = m.high.and_then(&effective).map(|e| (e * factor / ki).ln());
    let combine = |a: f64| km_part.map_or(a, |k| a.hypot(k));
    match (m.low.is_some() || m.high.is_some(), km_part) {
        (false, None) => (None, None, None),
        (false, Some(k)) => (Some(ki * (-k).exp()), Some(ki * k.exp()), Some(checks::INTERVAL_KM_ONLY)),
        (true, k) => {
            let low = match ln_low {
                Some(Some(a)) => Some(ki * (-combine(a.max(0.0))).exp()),
                _ => None,
            };
            let high = ln_high.map(|a| ki * combine(a.max(0.0)).exp());
            let method = if k.is_some() { checks::INTERVAL_IC50_AND_KM } else { checks::INTERVAL_IC50 };
            (low, high, Some(method))
        }
    }
}
