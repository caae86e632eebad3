//! Time-dependent inhibition: is there an onset, how does kobs depend on [I],
//! is the inhibition reversible, and what are kinact, KI and kinact/KI.
//!
//! Every progress curve follows P(t) = vs·t + (vi − vs)(1 − e^(−kobs·t))/kobs + P0
//! (Morrison & Walsh, Adv. Enzymol. 61, 201–301, 1988), vs = 0 when the
//! inhibitor is irreversible. Global fits of all curves of a compound
//! ([`crate::models::onset`]): no onset (straight lines), the one-step and
//! two-step schemes for kobs against [I], each irreversible or reversible; each
//! with the initial rates tied to one v0 by the scheme (vi = v0/(1 + [I]/KI,app)
//! two-step, vi = v0 one-step; Morrison & Walsh 1988; Copeland 2013, ch. 9) and
//! with a free vi per curve. The tie is tested on the two-step reversible pair
//! and kept unless rejected (then the free fits are used, with a warning).
//! Within the chosen set the choice is made by AICc with the parsimony window that `mode` uses
//! (Burnham & Anderson, *Model Selection and Multimodel Inference*, 2002), or
//! by forward extra-sum-of-squares F tests (Bates & Watts 1988, §3.10). The
//! chosen global fit is the answer; each curve is also fitted on its own and
//! the kobs-against-[I] replot is reported beside it (Copeland, *Evaluation
//! of Enzyme Inhibitors in Drug Discovery*, 2nd ed., 2013, ch. 9).
//!
//! Intervals of kinact, KI and kinact/KI are by profile likelihood
//! ([`crate::fit::intervals::profile`]); an irreversible call bounds koff from
//! above by the profile of koff in the reversible form. KI from the fit is the apparent value
//! at the assay's substrate; the substrate correction follows the
//! Cheng–Prusoff forms (Cheng & Prusoff, Biochem. Pharmacol. 22, 3099–3108,
//! 1973; for covalent inhibitors Copeland 2013, §9.3): competitive KI =
//! KI,app/(1 + S/Km), uncompetitive KI = KI,app/(1 + Km/S), noncompetitive
//! KI = KI,app; kinact is unchanged, so kinact/KI grows by the same factor.
//!
//! The fits are scale-free: the signal is divided by its largest magnitude
//! before fitting and the rates and offsets multiplied back afterwards, so
//! every linear coordinate the minimiser sees is of order one to the reciprocal
//! run length, whatever the instrument's counts.

use crate::report::Code;
use serde::Serialize;

use crate::analysis::mode::{Criterion, PARSIMONY_WINDOW};
use crate::error::{Error, Result};
use crate::fit::intervals::{Bound, Interval, profile, wald};
use crate::fit::stats::{aicc, akaike_weights, extra_sum_of_squares};
use crate::fit::{Data, Fit, FitSettings, Model, fit, fit_from};
use crate::models::Polynomial;
use crate::models::onset::{CurveModel, OnsetModel, Reading, ReplotModel, Scheme};
use crate::report::{Param, Warning};
use crate::units::Qualifier;

/// Minimiser settings of the global fits: tolerances of 1e-12 leave the
/// estimates good to far more digits than the data carry, and a budget of 100
/// evaluations per parameter stops the fits that wander off to a limit
/// (KI → ∞, kobs → 0) in reasonable time; the AICc of such a limit is already
/// as good as it gets.
pub const SETTINGS: FitSettings = FitSettings { ftol: 1e-12, xtol: 1e-12, gtol: 1e-12, patience: 100, polish: true };

/// Fewest readings a progress curve needs: four parameters and one degree of freedom.
pub const MIN_POINTS: usize = 5;

/// One progress curve: product or signal against time at one [I].
#[derive(Debug, Clone)]
pub struct Curve {
    /// Inhibitor concentration, in the reporting unit.
    pub inhibitor: f64,
    /// Times, strictly increasing.
    pub time: Vec<f64>,
    /// Signal (product formed, or a quantity proportional to it) at each time.
    pub signal: Vec<f64>,
    /// Where the rows came from, for messages.
    pub origin: String,
}

/// Assay conditions of one compound.
#[derive(Debug, Clone, Copy, Default)]
pub struct Conditions {
    /// Substrate concentration, mol/L.
    pub substrate: Option<f64>,
    /// Km of the substrate, mol/L.
    pub km: Option<f64>,
    /// Total enzyme concentration, in the inhibitor's reporting unit.
    pub enzyme: Option<f64>,
    /// Substrate concentration in the signal's unit, when the signal is a
    /// product concentration: enables the depletion check.
    pub substrate_as_signal: Option<f64>,
}

/// All curves of one compound.
#[derive(Debug, Clone)]
pub struct Compound {
    /// Compound label, or `None` when the input had no compound column.
    pub label: Option<String>,
    /// Where its rows came from.
    pub origin: crate::report::Origin,
    /// The progress curves (an uninhibited one, [I] = 0, is welcome).
    pub curves: Vec<Curve>,
    /// Substrate, Km, enzyme.
    pub conditions: Conditions,
}

/// Units of the reported numbers, as text.
#[derive(Debug, Clone, Default)]
pub struct Units {
    /// Inhibitor concentration unit (KI's unit).
    pub inhibitor: Option<String>,
    /// Time unit (kinact is per this unit).
    pub time: Option<String>,
    /// Signal unit (rates are this per time).
    pub signal: Option<String>,
}

impl Units {
    fn per_time(&self) -> String {
        format!("1/{}", self.time.as_deref().unwrap_or("time"))
    }

    fn per_inhibitor_time(&self) -> String {
        format!("1/({}·{})", self.inhibitor.as_deref().unwrap_or("conc"), self.time.as_deref().unwrap_or("time"))
    }

    fn rate(&self) -> String {
        format!("{}/{}", self.signal.as_deref().unwrap_or("signal"), self.time.as_deref().unwrap_or("time"))
    }
}

/// How the inhibitor's first binding step competes with the substrate, for
/// the substrate correction of KI.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum SubstrateMechanism {
    /// KI = KI,app/(1 + S/Km).
    Competitive,
    /// KI = KI,app.
    Noncompetitive,
    /// KI = KI,app/(1 + Km/S).
    Uncompetitive,
}

impl SubstrateMechanism {
    /// KI,app/KI at substrate S with Michaelis constant Km (same unit).
    pub fn factor(self, s: f64, km: f64) -> f64 {
        match self {
            SubstrateMechanism::Competitive => 1.0 + s / km,
            SubstrateMechanism::Noncompetitive => 1.0,
            SubstrateMechanism::Uncompetitive => 1.0 + km / s,
        }
    }

    fn name(self) -> &'static str {
        match self {
            SubstrateMechanism::Competitive => "competitive",
            SubstrateMechanism::Noncompetitive => "noncompetitive",
            SubstrateMechanism::Uncompetitive => "uncompetitive",
        }
    }
}

/// How to analyse.
#[derive(Debug, Clone)]
pub struct Options {
    /// AICc or F test.
    pub criterion: Criterion,
    /// Significance level of the F tests.
    pub alpha_level: f64,
    /// Confidence level of the intervals.
    pub confidence: f64,
    /// For the substrate correction of KI.
    pub substrate_mechanism: SubstrateMechanism,
    /// Whether the initial rates are tested, always tied, or always free.
    pub initial_rates: RatesPolicy,
    /// Smallest kobs·(run length) at the highest [I] that shows the onset
    /// clearly: 1 means the exponential is 63 % complete (common practice).
    pub min_onset: f64,
    /// Largest fraction of the substrate the uninhibited curve may consume
    /// (common practice: 0.1).
    pub max_depletion: f64,
    /// Smallest [I]/Et for the inhibitor to count as in excess (common practice: 10).
    pub min_excess: f64,
    /// Minimiser settings.
    pub settings: FitSettings,
}

impl Default for Options {
    fn default() -> Self {
        Options {
            criterion: Criterion::Aicc,
            alpha_level: 0.05,
            confidence: crate::report::DEFAULT_CONFIDENCE,
            substrate_mechanism: SubstrateMechanism::Competitive,
            initial_rates: RatesPolicy::Test,
            min_onset: 1.0,
            max_depletion: 0.1,
            min_excess: 10.0,
            settings: SETTINGS,
        }
    }
}

/// Whether the effect builds up over time, and how kobs depends on [I].
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Onset {
    /// Straight curves: rapid (or no) inhibition.
    None,
    /// kobs linear in [I]: only kinact/KI is determined.
    OneStep,
    /// kobs hyperbolic in [I]: kinact and KI.
    TwoStep,
}

impl Onset {
    /// The label used in tables and JSON.
    pub fn name(self) -> &'static str {
        match self {
            Onset::None => "none",
            Onset::OneStep => "one-step",
            Onset::TwoStep => "two-step",
        }
    }

    fn scheme(self) -> Scheme {
        match self {
            Onset::None => Scheme::None,
            Onset::OneStep => Scheme::OneStep,
            Onset::TwoStep => Scheme::TwoStep,
        }
    }
}

/// How the initial rates vi of the curves enter the global fit.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Rates {
    /// Each curve has its own vi.
    Free,
    /// vi = v0/(1 + [I]/KI,app) (two-step; rapid reversible with its own KI)
    /// or vi = v0 (one-step): one v0 for all curves (Morrison & Walsh 1988).
    Tied,
}

impl Rates {
    /// The label used in tables and JSON.
    pub fn name(self) -> &'static str {
        match self {
            Rates::Free => "free",
            Rates::Tied => "tied",
        }
    }
}

/// What the intervals of the constants rest on.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum IntervalBasis {
    /// The chosen fit alone.
    ChosenModel,
    /// The span of the chosen fit's interval and that of the same scheme with
    /// the other reversibility, both in the 95 % confidence set of models.
    SpanOverReversibility,
}

impl IntervalBasis {
    /// The label used in tables and CSV.
    pub fn name(self) -> &'static str {
        match self {
            IntervalBasis::ChosenModel => "chosen-model",
            IntervalBasis::SpanOverReversibility => "span-over-reversibility",
        }
    }
}

/// Cumulative Akaike weight of the confidence set of models (Burnham &
/// Anderson 2002, §4.2), as `mode` uses.
const CONFIDENCE_SET: f64 = 0.95;

/// Whether model `k` is in the confidence set of models of `set`: the models
/// ranked by Akaike weight, taken until their weights sum to [`CONFIDENCE_SET`].
fn plausible(k: usize, weights: &[f64], set: std::ops::Range<usize>) -> bool {
    if !set.contains(&k) {
        return false;
    }
    let mut ranked: Vec<usize> = set.collect();
    ranked.sort_by(|&a, &b| weights[b].total_cmp(&weights[a]));
    let mut total = 0.0;
    for m in ranked {
        if m == k {
            return true;
        }
        total += weights[m];
        if total >= CONFIDENCE_SET {
            return false;
        }
    }
    false
}

/// Which initial rates the answer uses.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum RatesPolicy {
    /// Tied unless the tie is rejected (the default).
    #[default]
    Test,
    /// Tied, whatever the data say.
    Tied,
    /// Free per curve (e.g. a known mixing dead time).
    Free,
}

/// The candidate global models: five with free initial rates, then the same
/// five with tied ones, simplest first within each.
const CANDIDATES: [(Onset, bool, Rates); 10] = [
    (Onset::None, false, Rates::Free),
    (Onset::OneStep, false, Rates::Free),
    (Onset::TwoStep, false, Rates::Free),
    (Onset::OneStep, true, Rates::Free),
    (Onset::TwoStep, true, Rates::Free),
    (Onset::None, false, Rates::Tied),
    (Onset::OneStep, false, Rates::Tied),
    (Onset::TwoStep, false, Rates::Tied),
    (Onset::OneStep, true, Rates::Tied),
    (Onset::TwoStep, true, Rates::Tied),
];

/// Models per set of rates; the set of `Rates::Tied` starts here.
const SET: usize = 5;

/// Position of the most general model (two-step reversible) within a set:
/// the tie of the rates is tested there.
const GENERAL: usize = 4;

/// The warnings `onset` can give; each code has a row in the README.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum OnsetWarning {
    /// The chosen fit did not converge.
    NotConverged,
    /// Straight curves: no time dependence seen.
    NoOnset,
    /// The onset is barely visible within the run.
    LittleCurvature,
    /// The uninhibited curve consumed more than the allowed share of substrate.
    SubstrateDepleted,
    /// KI,app is beyond the tested [I]: kinact and KI not separable.
    KiBeyondTested,
    /// [I] is not in large excess over the enzyme.
    InhibitorNotInExcess,
    /// No substrate correction was applied.
    KiApparent,
    /// The initial rates do not follow the scheme; each curve kept its own vi.
    RatesNotTied,
}

impl OnsetWarning {
    /// Every code, for the README check.
    pub const ALL: [OnsetWarning; 8] = [
        OnsetWarning::NotConverged,
        OnsetWarning::NoOnset,
        OnsetWarning::LittleCurvature,
        OnsetWarning::SubstrateDepleted,
        OnsetWarning::KiBeyondTested,
        OnsetWarning::InhibitorNotInExcess,
        OnsetWarning::KiApparent,
        OnsetWarning::RatesNotTied,
    ];

    /// The stable kebab-case code.
    pub fn code(self) -> Code {
        match self {
            OnsetWarning::NotConverged => Code::NotConverged,
            OnsetWarning::NoOnset => Code::NoOnset,
            OnsetWarning::LittleCurvature => Code::LittleCurvature,
            OnsetWarning::SubstrateDepleted => Code::SubstrateDepleted,
            OnsetWarning::KiBeyondTested => Code::KiBeyondTested,
            OnsetWarning::InhibitorNotInExcess => Code::InhibitorNotInExcess,
            OnsetWarning::KiApparent => Code::KiApparent,
            OnsetWarning::RatesNotTied => Code::RatesNotTied,
        }
    }

    fn with(self, message: impl Into<String>) -> Warning {
        Warning::new(self.code(), message)
    }
}

/// One curve's own fit (the replot's input).
#[derive(Debug, Clone, Serialize)]
pub struct CurveResult {
    /// Inhibitor concentration, in the inhibitor's unit.
    pub inhibitor: f64,
    /// kobs of this curve alone (Wald interval on the log scale); 0, `fixed`, for an uninhibited curve.
    pub kobs: Param,
    /// Initial rate.
    pub vi: Param,
    /// Steady-state rate (0, `fixed`, when the chosen model is irreversible).
    pub vs: Param,
    /// Points in the curve.
    pub n: usize,
    /// This curve under the chosen global fit.
    pub global: GlobalCurve,
}

/// One curve as the chosen global fit draws it.
#[derive(Debug, Clone, Copy, Serialize)]
pub struct GlobalCurve {
    /// kobs from the shared constants.
    pub kobs: f64,
    /// Initial rate.
    pub vi: f64,
    /// Steady-state rate, vi·koff/kobs (0 when irreversible).
    pub vs: f64,
    /// Signal at time zero.
    pub p0: f64,
}

impl GlobalCurve {
    /// The fitted signal at time `t`.
    pub fn at(&self, t: f64) -> f64 {
        let (g, _) = crate::models::onset::onset_term(self.kobs, t);
        self.vs * t + (self.vi - self.vs) * g + self.p0
    }
}

/// A fit of per-curve kobs against [I].
#[derive(Debug, Clone, Serialize)]
pub struct ReplotFit {
    /// The scheme.
    pub scheme: Onset,
    /// kinact (two-step only).
    pub kinact: Option<f64>,
    /// KI,app (two-step only).
    pub ki_app: Option<f64>,
    /// kinact/KI,app (the slope for one-step).
    pub kinact_ki_app: f64,
    /// Intercept koff (reversible only).
    pub koff: Option<f64>,
    /// Residual sum of squares in kobs.
    pub sse: f64,
    /// AICc; null with too few curves.
    pub aicc: Option<f64>,
}

/// One candidate global fit.
#[derive(Debug, Clone, Serialize)]
pub struct ModelSummary {
    /// `none`, `one-step` or `two-step`.
    pub onset: Onset,
    /// Whether vs and koff were free.
    pub reversible: bool,
    /// Initial rates free per curve or tied to v0 by the scheme.
    pub rates: Rates,
    /// Weighted SSE in the signal's unit squared.
    pub sse: f64,
    /// Residual degrees of freedom.
    pub df: usize,
    /// AICc.
    pub aicc: Option<f64>,
    /// Akaike weight among the five models of its set of rates.
    pub weight: f64,
    /// Whether the minimiser stopped at a trustworthy minimum.
    pub converged: bool,
}

/// Everything reported for one compound.
#[derive(Debug, Clone, Serialize)]
pub struct OnsetResult {
    /// Compound label.
    pub compound: Option<String>,
    /// Where the rows came from (`file:2-218`): the input and the lines.
    pub source: crate::report::Origin,
    /// The chosen scheme.
    pub onset: Onset,
    /// Whether the inhibition is reversible (vs > 0); null without onset.
    pub reversible: Option<bool>,
    /// Rate constant of inactivation (or isomerisation), per time unit (two-step only).
    pub kinact: Option<Param>,
    /// Inhibition constant of the first step, corrected for substrate when S and Km are given (two-step only).
    pub ki: Option<Param>,
    /// KI as fitted, at the assay's substrate (two-step only).
    pub ki_app: Option<Param>,
    /// kinact/KI, corrected for substrate when S and Km are given; null without onset.
    pub kinact_ki: Option<Param>,
    /// Rate constant of the return from the final complex: the estimate when
    /// reversible; when irreversible, an upper bound (`koff_qualifier` "<"): the
    /// upper end of koff's profile interval in the reversible form of the
    /// chosen scheme. Null without onset.
    pub koff: Option<Param>,
    /// "=" for an estimate, "<" for the upper bound of an irreversible call.
    pub koff_qualifier: Qualifier,
    /// Whether the answer's initial rates are tied to v0 by the scheme or free per curve.
    pub rates: Rates,
    /// What the intervals of kinact, KI and kinact/KI rest on.
    pub interval_basis: IntervalBasis,
    /// How KI was corrected for substrate, in words.
    pub substrate_correction: String,
    /// Per-curve fits, by increasing [I].
    pub curves: Vec<CurveResult>,
    /// kobs against [I] by both schemes.
    pub replot: Vec<ReplotFit>,
    /// The ten global fits (five schemes, free and tied initial rates).
    pub models: Vec<ModelSummary>,
    /// The criterion used.
    pub criterion: Criterion,
    /// Why this model, in words.
    pub evidence: String,
    /// Number of readings.
    pub n: usize,
    /// Confidence level of the intervals.
    pub confidence: f64,
    /// Warnings with stable codes.
    pub warnings: Vec<Warning>,
}

/// The compound's name for messages.
pub fn group_name(compound: &Compound) -> String {
    match &compound.label {
        Some(l) => format!("compound '{}' ({})", crate::report::short_id(l), compound.origin),
        None => format!("the data ({})", compound.origin),
    }
}

/// Analyses one compound.
pub fn analyse(compound: &Compound, units: &Units, options: &Options) -> Result<OnsetResult> {
    check(compound)?;
    let mut curves: Vec<&Curve> = compound.curves.iter().collect();
    curves.sort_by(|a, b| a.inhibitor.total_cmp(&b.inhibitor));
    let scale = signal_scale(&curves);
    let inhibitor: Vec<f64> = curves.iter().map(|c| c.inhibitor).collect();
    let data = global_data(&curves, scale);
    let singles: Vec<Single> = curves.iter().map(|c| fit_single(c, scale, &options.settings)).collect();
    let replot = replot_fits(&singles, &inhibitor, &options.settings);
    let mut fitted: Vec<Fit> = Vec::with_capacity(CANDIDATES.len());
    for (k, &(onset, rev, rates)) in CANDIDATES.iter().enumerate() {
        // A tied fit also starts from the shared constants of its free twin.
        let twin = (rates == Rates::Tied).then(|| &fitted[k - SET]);
        let f = global_fit(onset, rev, rates, &inhibitor, &singles, &replot, twin, &data, &options.settings);
        fitted.push(f);
    }
    // koff is a rate constant: a reversible fit that reaches its minimum at
    // koff < 0 (product disappearing at steady state) has its constrained
    // optimum on the bound koff = 0, which is the irreversible model; it is not
    // a candidate.
    let negative_koff: Vec<bool> = CANDIDATES
        .iter()
        .zip(&fitted)
        .map(|(&(onset, rev, rates), f)| {
            let m = OnsetModel::with_rates(onset.scheme(), rev, rates == Rates::Tied, inhibitor.clone());
            m.koff_index().is_some_and(|j| f.theta[j] < 0.0)
        })
        .collect();
    let aiccs: Vec<Option<f64>> = fitted.iter().map(|f| aicc(f.n, f.n_free, f.sse)).collect();
    let (rates, tie_text) = tie_test(&fitted, &aiccs, options);
    let base = if rates == Rates::Tied { SET } else { 0 };
    let set = base..base + SET;
    let mut weights = akaike_weights(&aiccs[..SET]);
    weights.extend(akaike_weights(&aiccs[SET..]));
    let (pick, evidence) = match options.criterion {
        Criterion::Aicc => choose_by_aicc(&fitted, &aiccs, &weights, &negative_koff, set),
        Criterion::FTest => choose_by_f(&fitted, &negative_koff, base, rates, options.alpha_level),
    };
    let evidence = format!("{evidence}; initial rates {tie_text}");
    let (onset, reversible, _) = CANDIDATES[pick];
    let model = OnsetModel::with_rates(onset.scheme(), reversible, rates == Rates::Tied, inhibitor.clone());
    let chosen = &fitted[pick];
    let mut constants = Constants::from_fit(&model, &data, chosen, compound, units, options);
    if onset != Onset::None && !reversible {
        let twin = OnsetModel::with_rates(onset.scheme(), true, rates == Rates::Tied, inhibitor.clone());
        constants.koff = koff_bound(&twin, &data, &fitted[pick + 2], &fitted[pick], units, options);
    }
    // Reversibility uncertainty is part of the answer (as in `mode`'s
    // headline): when the other reversibility of the chosen scheme is in the
    // 95 % confidence set of models, the intervals span both fits.
    let twin = if reversible { pick.wrapping_sub(2) } else { pick + 2 };
    let mut interval_basis = IntervalBasis::ChosenModel;
    if onset != Onset::None
        && plausible(twin, &weights, base..base + SET)
        && fitted[twin].converged()
        && !negative_koff[twin]
    {
        let twin_model = OnsetModel::with_rates(onset.scheme(), !reversible, rates == Rates::Tied, inhibitor.clone());
        let other = Constants::from_fit(&twin_model, &data, &fitted[twin], compound, units, options);
        let note = format!(
            "interval spans the {} and {} fits (Akaike weights {:.2} and {:.2}): reversibility is not settled by the data",
            candidate_name(pick),
            candidate_name(twin),
            weights[pick],
            weights[twin]
        );
        constants.span(&other, &note);
        interval_basis = IntervalBasis::SpanOverReversibility;
    }
    let curve_results = curve_results(&curves, &singles, &model, chosen, scale, units, options.confidence);
    let mut warnings = warnings(compound, &curves, &model, chosen, &constants, options);
    if rates == Rates::Free && options.initial_rates == RatesPolicy::Test {
        warnings.push(OnsetWarning::RatesNotTied.with(format!(
            "the initial rates do not follow the scheme's vi = v0/(1 + [I]/KI,app) (two-step) or vi = v0 \
             (one-step) ({tie_text}): a mixing dead time, a fast first phase or a drifting signal; each curve \
             keeps its own vi, which costs precision in kinact and KI"
        )));
    }
    if !chosen.converged() {
        warnings.insert(
            0,
            OnsetWarning::NotConverged.with(format!(
                "the chosen global fit did not converge ({}); its numbers are not trustworthy",
                chosen.termination
            )),
        );
    }
    let models = CANDIDATES
        .iter()
        .zip(&fitted)
        .zip(aiccs.iter().zip(&weights))
        .map(|((&(onset, reversible, rates), f), (a, w))| ModelSummary {
            onset,
            reversible,
            rates,
            sse: f.sse * scale * scale,
            df: f.df,
            aicc: *a,
            weight: *w,
            converged: f.converged(),
        })
        .collect();
    let koff_qualifier = if onset != Onset::None && !reversible { Qualifier::Less } else { Qualifier::Equal };
    Ok(OnsetResult {
        compound: compound.label.clone(),
        source: compound.origin.clone(),
        onset,
        reversible: (onset != Onset::None).then_some(reversible),
        kinact: constants.kinact,
        ki: constants.ki,
        ki_app: constants.ki_app,
        kinact_ki: constants.kinact_ki,
        koff: constants.koff,
        koff_qualifier,
        rates,
        interval_basis,
        substrate_correction: constants.correction_text,
        curves: curve_results,
        replot: replot.iter().map(|r| r.summary.clone()).collect(),
        models,
        criterion: options.criterion,
        evidence,
        n: data.len(),
        confidence: options.confidence,
        warnings,
    })
}

/// Whether the initial rates are tied to v0 by the scheme: the tied and free
/// forms of the most general model (two-step reversible) compared by the
/// chosen criterion. Tied rates are kept unless rejected: by AICc, unless the
/// free form's AICc is lower by more than the parsimony window; by F test,
/// unless the extra-sum-of-squares test of the tie is significant. Returns the
/// rates and the comparison in words.
fn tie_test(fits: &[Fit], aiccs: &[Option<f64>], options: &Options) -> (Rates, String) {
    let (free, tied) = (GENERAL, SET + GENERAL);
    match options.initial_rates {
        RatesPolicy::Tied => return (Rates::Tied, "tied to the scheme (as asked)".into()),
        RatesPolicy::Free => return (Rates::Free, "free per curve (as asked)".into()),
        RatesPolicy::Test => {}
    }
    if !fits[tied].converged() {
        return (Rates::Free, "free (the tied fit did not converge)".into());
    }
    if !fits[free].converged() {
        return (Rates::Tied, "tied to the scheme (the free fit did not converge)".into());
    }
    match options.criterion {
        Criterion::Aicc => match (aiccs[free], aiccs[tied]) {
            (Some(f), Some(t)) if t - f > PARSIMONY_WINDOW => {
                (Rates::Free, format!("free: the tie is rejected, AICc of free rates lower by {:.1}", t - f))
            }
            (Some(f), Some(t)) => (Rates::Tied, format!("tied to the scheme (AICc free − tied = {:.1})", f - t)),
            _ => (Rates::Tied, "tied to the scheme (AICc not computable)".into()),
        },
        Criterion::FTest => match extra_sum_of_squares(fits[tied].sse, fits[tied].df, fits[free].sse, fits[free].df) {
            Some((_, p)) if p < options.alpha_level => {
                (Rates::Free, format!("free: the tie is rejected, F test p = {}", short(p)))
            }
            Some((_, p)) => (Rates::Tied, format!("tied to the scheme (F test of the tie p = {})", short(p))),
            None => (Rates::Tied, "tied to the scheme (F test not computable)".into()),
        },
    }
}

/// Rejects compounds that cannot support the fits: a located message per problem.
fn check(compound: &Compound) -> Result<()> {
    let err = |problem: String, expected: &str| Error::Data {
        group: group_name(compound),
        problem,
        expected: expected.to_string(),
    };
    for c in &compound.curves {
        if c.time.len() < MIN_POINTS {
            return Err(err(
                format!("the curve at [I] = {} ({}) has {} readings", c.inhibitor, c.origin, c.time.len()),
                &format!("each progress curve needs at least {MIN_POINTS} readings (four parameters and one to spare)"),
            ));
        }
        if let Some(k) =
            (1..c.time.len()).find(|&k| c.time[k].partial_cmp(&c.time[k - 1]) != Some(std::cmp::Ordering::Greater))
        {
            return Err(err(
                format!(
                    "in the curve at [I] = {} ({}) time {} follows {}",
                    c.inhibitor,
                    c.origin,
                    c.time[k],
                    c.time[k - 1]
                ),
                "times within a curve must increase strictly; give repeated curves their own curve or replicate label",
            ));
        }
        if c.time.iter().chain(&c.signal).any(|v| !v.is_finite()) || c.inhibitor < 0.0 {
            return Err(err(
                format!("the curve at [I] = {} ({}) has a non-finite value", c.inhibitor, c.origin),
                "use finite numbers",
            ));
        }
    }
    let mut levels: Vec<f64> = compound.curves.iter().map(|c| c.inhibitor).filter(|i| *i > 0.0).collect();
    levels.sort_by(f64::total_cmp);
    levels.dedup_by(|a, b| (*a - *b).abs() <= 1e-12 * b.abs());
    if levels.len() < 2 {
        let found = levels.first().map_or("none".to_string(), |l| format!("only {l}"));
        return Err(err(
            format!("needs progress curves at two or more inhibitor concentrations above zero; found {found}"),
            "kobs against [I] needs several concentrations (five or more spanning KI tell one-step from two-step)",
        ));
    }
    Ok(())
}

/// The largest |signal| of the compound (1 when all are zero).
fn signal_scale(curves: &[&Curve]) -> f64 {
    let m = curves.iter().flat_map(|c| &c.signal).fold(0.0f64, |a, v| a.max(v.abs()));
    if m > 0.0 && m.is_finite() { m } else { 1.0 }
}

fn global_data(curves: &[&Curve], scale: f64) -> Data<Reading> {
    let mut x = Vec::new();
    let mut y = Vec::new();
    for (k, c) in curves.iter().enumerate() {
        for (&t, &s) in c.time.iter().zip(&c.signal) {
            x.push(Reading { curve: k, time: t });
            y.push(s / scale);
        }
    }
    Data::unweighted(x, y)
}

/// One curve fitted on its own (on the scaled signal).
struct Single {
    data: Data<f64>,
    line: Fit,
    irreversible: Option<Fit>,
    reversible: Option<Fit>,
}

fn fit_single(curve: &Curve, scale: f64, settings: &FitSettings) -> Single {
    let data = Data::unweighted(curve.time.clone(), curve.signal.iter().map(|s| s / scale).collect());
    let line = fit(&Polynomial::LINE, &data, &[None, None], settings);
    if curve.inhibitor <= 0.0 {
        return Single { data, line, irreversible: None, reversible: None };
    }
    let irreversible = fit(&CurveModel, &data, &[None, Some(0.0), None, None], settings);
    let mut starts = CurveModel.starts(&data);
    starts.push(irreversible.theta.clone());
    let reversible = fit_from(&CurveModel, &data, &starts, &[None, None, None, None], settings);
    Single { data, line, irreversible: Some(irreversible), reversible: Some(reversible) }
}

/// Both replot schemes, for the report and as starts of the global fits.
struct Replot {
    summary: ReplotFit,
    theta: Vec<f64>,
}

fn replot_fits(singles: &[Single], inhibitor: &[f64], settings: &FitSettings) -> Vec<Replot> {
    let mut out = Vec::new();
    for reversible in [false, true] {
        let (x, y): (Vec<f64>, Vec<f64>) = singles
            .iter()
            .zip(inhibitor)
            .filter_map(|(s, &i)| {
                let own = if reversible { s.reversible.as_ref() } else { s.irreversible.as_ref() };
                own.map(|f| (i, f.theta[CurveModel::KOBS]))
            })
            .filter(|(_, k)| k.is_finite() && *k > 0.0)
            .unzip();
        let data = Data::unweighted(x, y);
        for (onset, scheme) in [(Onset::OneStep, Scheme::OneStep), (Onset::TwoStep, Scheme::TwoStep)] {
            let model = ReplotModel { scheme, reversible };
            if data.len() <= model.names().len() {
                continue;
            }
            let f = fit(&model, &data, &vec![None; model.names().len()], settings);
            let (kinact, ki_app, ratio) = match scheme {
                Scheme::OneStep => (None, None, f.theta[0]),
                _ => (Some(f.theta[0]), Some(f.theta[1]), f.theta[0] / f.theta[1]),
            };
            let koff = reversible.then(|| f.theta[model.names().len() - 1]);
            out.push(Replot {
                summary: ReplotFit {
                    scheme: onset,
                    kinact,
                    ki_app,
                    kinact_ki_app: ratio,
                    koff,
                    sse: f.sse,
                    aicc: aicc(f.n, f.n_free, f.sse),
                },
                theta: f.theta,
            });
        }
    }
    out
}

/// Fits one candidate from starts built out of the single-curve fits and the
/// replot (and, for tied rates, the shared constants of the free twin).
#[allow(clippy::too_many_arguments)]
fn global_fit(
    onset: Onset,
    reversible: bool,
    rates: Rates,
    inhibitor: &[f64],
    singles: &[Single],
    replot: &[Replot],
    twin: Option<&Fit>,
    data: &Data<Reading>,
    settings: &FitSettings,
) -> Fit {
    let model = OnsetModel::with_rates(onset.scheme(), reversible, rates == Rates::Tied, inhibitor.to_vec());
    let mut starts: Vec<Vec<f64>> = Vec::new();
    let mut shared_sets = shared_starts(onset, rates, inhibitor, replot, singles);
    if let Some(f) = twin.filter(|f| f.sse.is_finite()) {
        let n = model.shared();
        if onset != Onset::None {
            shared_sets.insert(0, f.theta[..n].to_vec());
        }
    }
    for shared in shared_sets {
        let start = full_start(&model, &shared, singles);
        // A replot with koff gives its own koff start as well.
        if let (Some(j), Some(&koff)) = (model.koff_index(), shared.get(model.koff_index().unwrap_or(usize::MAX))) {
            let mut with_koff = start.clone();
            with_koff[j] = koff.max(0.0);
            starts.push(with_koff);
        }
        starts.push(start);
    }
    let model = model.with_starts(starts);
    fit(&model, data, &vec![None; model.len()], settings)
}

/// Starting values of the scheme's constants (and koff = 0 when reversible;
/// for tied rates without onset, the rapid KI over the tested range).
fn shared_starts(
    onset: Onset,
    rates: Rates,
    inhibitor: &[f64],
    replot: &[Replot],
    singles: &[Single],
) -> Vec<Vec<f64>> {
    let from_replot = replot.iter().filter(|r| r.summary.scheme == onset).map(|r| r.theta.clone());
    let positive: Vec<f64> = inhibitor.iter().cloned().filter(|i| *i > 0.0).collect();
    let (i_min, i_max) = positive.iter().fold((f64::INFINITY, 0.0f64), |(a, b), &i| (a.min(i), b.max(i)));
    let span = singles.iter().map(|s| s.data.x.last().unwrap_or(&1.0) - s.data.x[0]).fold(0.0, f64::max).max(1e-300);
    let mut out: Vec<Vec<f64>> = from_replot.collect();
    match onset {
        Onset::None if rates == Rates::Tied => {
            return [i_min, (i_min * i_max).sqrt(), i_max * 3.0, i_max * 100.0].iter().map(|&k| vec![k]).collect();
        }
        Onset::None => return vec![Vec::new()],
        Onset::OneStep => {
            for k in [0.3, 3.0] {
                out.push(vec![k / (span * i_max)]);
            }
        }
        Onset::TwoStep => {
            for ki in [i_min, (i_min * i_max).sqrt(), i_max * 3.0, i_max * 30.0] {
                out.push(vec![3.0 / span * (ki + i_max) / i_max, ki]);
            }
        }
    }
    out
}

/// A full parameter vector: shared constants, koff from the curves' own
/// fits (vs/vi·kobs, their median), then v0 (tied: the uninhibited curve's
/// slope, or the largest vi) or each curve's vi, and each curve's P0 from its
/// own fit.
fn full_start(model: &OnsetModel, shared: &[f64], singles: &[Single]) -> Vec<f64> {
    let mut theta = vec![0.0; model.len()];
    let n = shared.len().min(model.shared() - usize::from(model.reversible()));
    theta[..n].copy_from_slice(&shared[..n]);
    if let Some(j) = model.koff_index() {
        let mut koff: Vec<f64> = singles
            .iter()
            .filter_map(|s| s.reversible.as_ref())
            .map(|f| f.theta[CurveModel::VS] / f.theta[CurveModel::VI] * f.theta[CurveModel::KOBS])
            .filter(|k| k.is_finite())
            .map(|k| k.max(0.0))
            .collect();
        koff.sort_by(f64::total_cmp);
        theta[j] = koff.get(koff.len() / 2).copied().unwrap_or(0.0);
    }
    let mut rates = Vec::with_capacity(singles.len());
    for (slots, s) in model.layout().iter().zip(singles) {
        let own = if model.scheme() == Scheme::None {
            None
        } else if model.reversible() {
            s.reversible.as_ref()
        } else {
            s.irreversible.as_ref()
        };
        let (vi, p0) = match own {
            Some(f) => (f.theta[CurveModel::VI], f.theta[CurveModel::P0]),
            None => (s.line.theta[1], s.line.theta[0]),
        };
        rates.push(vi);
        theta[slots.p0] = p0;
        if !model.tied() {
            theta[slots.vi] = vi;
        }
    }
    if let Some(j) = model.v0_index() {
        let uninhibited = model.inhibitor().iter().position(|i| *i <= 0.0);
        theta[j] = match uninhibited {
            Some(c) => rates[c],
            None => rates.iter().cloned().fold(f64::NEG_INFINITY, f64::max),
        };
    }
    theta
}

/// Lowest AICc among the models of `set`; among those within the parsimony
/// window of it, the one with fewest parameters (as `mode` chooses).
fn choose_by_aicc(
    fits: &[Fit],
    aiccs: &[Option<f64>],
    weights: &[f64],
    negative_koff: &[bool],
    set: std::ops::Range<usize>,
) -> (usize, String) {
    let usable = |k: &usize| aiccs[*k].is_some() && fits[*k].converged() && !negative_koff[*k];
    let best = set.clone().filter(usable).min_by(|&a, &b| aiccs[a].unwrap_or(0.0).total_cmp(&aiccs[b].unwrap_or(0.0)));
    let Some(best) = best else {
        return (set.start, "no model could be compared (too few readings or no fit converged)".into());
    };
    let best_aicc = aiccs[best].unwrap_or(f64::INFINITY);
    let pick = set
        .filter(|k| usable(k) && aiccs[*k].is_some_and(|a| a - best_aicc <= PARSIMONY_WINDOW))
        .min_by(|&a, &b| {
            fits[a].n_free.cmp(&fits[b].n_free).then(aiccs[a].unwrap_or(0.0).total_cmp(&aiccs[b].unwrap_or(0.0)))
        })
        .unwrap_or(best);
    let mut text = format!("{} (Akaike weight {:.2}", candidate_name(pick), weights[pick]);
    if pick != best {
        text.push_str(&format!(
            "; {} has a lower AICc by {:.1}, within {PARSIMONY_WINDOW}, so the simpler model is kept",
            candidate_name(best),
            aiccs[pick].unwrap_or(0.0) - best_aicc
        ));
    }
    text.push(')');
    (pick, text)
}

/// Forward F tests within one set of rates: is there an onset, then
/// one-step → two-step, then irreversible → reversible. With free rates the
/// onset test is none against one-step (one-step with kinact/KI → 0 is the
/// straight lines); with tied rates it is none against two-step irreversible
/// (two-step with kinact → 0 is the rapid-reversible lines vi = v0/(1 + [I]/KI)),
/// and one-step is two-step's limit KI → ∞ at fixed kinact/KI.
fn choose_by_f(fits: &[Fit], negative_koff: &[bool], base: usize, rates: Rates, level: f64) -> (usize, String) {
    let p = |a: usize, b: usize| {
        let (a, b) = (base + a, base + b);
        extra_sum_of_squares(fits[a].sse, fits[a].df, fits[b].sse, fits[b].df).map(|t| t.1)
    };
    let text = |v: Option<f64>| v.map_or("not computable".to_string(), |v| format!("p = {}", short(v)));
    let significant = |v: Option<f64>| v.is_some_and(|v| v < level);
    let mut steps = Vec::new();
    let (p1, against) = match rates {
        Rates::Free => (p(0, 1), "one-step"),
        Rates::Tied => (p(0, 2), "two-step"),
    };
    steps.push(format!("{against} vs none: {}", text(p1)));
    if !significant(p1) {
        return (base, format!("{} ({}; level {level})", candidate_name(base), steps.join("; ")));
    }
    let p2 = p(1, 2);
    steps.push(format!("two-step vs one-step: {}", text(p2)));
    let irreversible = if significant(p2) { 2 } else { 1 };
    let reversible = irreversible + 2;
    let p3 = p(irreversible, reversible);
    if negative_koff[base + reversible] {
        steps.push("reversible vs irreversible: koff at its bound 0".into());
        let pick = base + irreversible;
        return (pick, format!("{} ({}; level {level})", candidate_name(pick), steps.join("; ")));
    }
    steps.push(format!("reversible vs irreversible: {}", text(p3)));
    let pick = base + if significant(p3) { reversible } else { irreversible };
    (pick, format!("{} ({}; level {level})", candidate_name(pick), steps.join("; ")))
}

fn candidate_name(k: usize) -> String {
    let (onset, reversible, _) = CANDIDATES[k];
    match onset {
        Onset::None => "no onset".to_string(),
        _ => format!("{} {}", onset.name(), if reversible { "reversible" } else { "irreversible" }),
    }
}

/// The upper bound on koff when the call is irreversible: the upper end of
/// koff's profile interval in the reversible form of the chosen scheme, at
/// the chosen confidence (Bates & Watts 1988, §6.1). When the reversible fit
/// has koff < 0, the profile starts from the constrained optimum koff = 0
/// (the irreversible fit `irreversible`, with the reversible model's degrees
/// of freedom). `None` when the profile has no finite upper end.
fn koff_bound(
    model: &OnsetModel,
    data: &Data<Reading>,
    fit: &Fit,
    irreversible: &Fit,
    units: &Units,
    options: &Options,
) -> Option<Param> {
    let j = model.koff_index()?;
    let mut start = fit.clone();
    if fit.theta[j] < 0.0 {
        // The irreversible parameters with koff = 0 inserted at its place.
        let mut theta = irreversible.theta.clone();
        theta.insert(j, 0.0);
        if theta.len() != fit.theta.len() {
            return None;
        }
        start.theta = theta;
        start.sse = irreversible.sse;
    }
    let interval = profile(model, data, &start, j, options.confidence, &options.settings);
    let high = interval.high.value()?;
    let mut p = Param::new(
        high,
        None,
        Interval { low: Bound::Unbounded, high: Bound::At(high) },
        "profile-upper",
        Some(units.per_time()),
    );
    p.low = None;
    p.note = Some(format!(
        "no return from the final complex seen within the run: koff below {} {} (upper end of its {:.0} % profile \
         interval in the reversible fit)",
        short(high),
        units.per_time(),
        options.confidence * 100.0
    ));
    Some(p)
}

/// kinact, KI and kinact/KI of the chosen fit, with profile intervals.
struct Constants {
    kinact: Option<Param>,
    ki: Option<Param>,
    ki_app: Option<Param>,
    kinact_ki: Option<Param>,
    koff: Option<Param>,
    correction_text: String,
    factor: Option<f64>,
}

impl Constants {
    fn from_fit(
        model: &OnsetModel,
        data: &Data<Reading>,
        fit: &Fit,
        compound: &Compound,
        units: &Units,
        options: &Options,
    ) -> Constants {
        let c = &compound.conditions;
        let factor = match (c.substrate, c.km) {
            (Some(s), Some(km)) if s > 0.0 && km > 0.0 => Some(options.substrate_mechanism.factor(s, km)),
            _ => None,
        };
        let correction_text = match factor {
            Some(f) => format!(
                "{}: KI = KI,app/{} (S/Km = {}); kinact/KI = (kinact/KI,app)·{}",
                options.substrate_mechanism.name(),
                short(f),
                short(c.substrate.unwrap_or(0.0) / c.km.unwrap_or(1.0)),
                short(f)
            ),
            None => {
                "none: no substrate concentration and Km given, so KI is the apparent KI,app at the assay's substrate"
                    .into()
            }
        };
        let mut out =
            Constants { kinact: None, ki: None, ki_app: None, kinact_ki: None, koff: None, correction_text, factor };
        let profiled = |m: &OnsetModel, f: &Fit, j: usize, unit: String| {
            let interval = profile(m, data, f, j, options.confidence, &options.settings);
            Param::new(f.theta[j], f.se[j], interval, "profile", Some(unit))
        };
        let correct = |p: Param, unit: String, up: bool| match factor {
            Some(f) => p.scaled(if up { f } else { 1.0 / f }, Some(unit)),
            None => p,
        };
        match model.scheme() {
            Scheme::None => return out,
            Scheme::OneStep => {
                out.kinact_ki = Some(correct(
                    profiled(model, fit, 0, units.per_inhibitor_time()),
                    units.per_inhibitor_time(),
                    true,
                ));
            }
            _ => {
                out.kinact = Some(profiled(model, fit, 0, units.per_time()));
                let ki_unit = units.inhibitor.clone().unwrap_or_else(|| "conc".into());
                let ki_app = profiled(model, fit, 1, ki_unit.clone());
                out.ki = Some(correct(ki_app.clone(), ki_unit, false));
                out.ki_app = Some(ki_app);
                let ratio_model = model.in_scheme(Scheme::TwoStepByRatio);
                let mut start = fit.theta.clone();
                start[0] = fit.theta[0] / fit.theta[1];
                let ratio_fit =
                    fit_from(&ratio_model, data, &[start], &vec![None; ratio_model.len()], &options.settings);
                out.kinact_ki = Some(correct(
                    profiled(&ratio_model, &ratio_fit, 0, units.per_inhibitor_time()),
                    units.per_inhibitor_time(),
                    true,
                ));
            }
        }
        if let Some(j) = model.koff_index() {
            let interval = wald(model, fit, j, options.confidence);
            out.koff = Some(Param::new(fit.theta[j], fit.se[j], interval, "wald", Some(units.per_time())));
        }
        out
    }
}

impl Constants {
    /// Widens the intervals of kinact, KI, KI,app and kinact/KI to cover those
    /// of `other` (an open end stays open); the estimates stay this fit's.
    fn span(&mut self, other: &Constants, note: &str) {
        let widen = |p: &mut Option<Param>, q: &Option<Param>| {
            if let (Some(p), Some(q)) = (p.as_mut(), q.as_ref()) {
                p.low = p.low.zip(q.low).map(|(a, b)| a.min(b));
                p.high = p.high.zip(q.high).map(|(a, b)| a.max(b));
                p.interval = "profile-span";
                p.note = Some(match &p.note {
                    Some(n) => format!("{n}; {note}"),
                    None => note.to_string(),
                });
            }
        };
        widen(&mut self.kinact, &other.kinact);
        widen(&mut self.ki, &other.ki);
        widen(&mut self.ki_app, &other.ki_app);
        widen(&mut self.kinact_ki, &other.kinact_ki);
    }
}

fn fixed_param(value: f64, unit: String) -> Param {
    Param::new(value, None, Interval { low: Bound::At(value), high: Bound::At(value) }, "fixed", Some(unit))
}

/// Per-curve kobs, vi, vs from each curve's own fit (irreversible or
/// reversible as chosen), and the curve under the global fit.
fn curve_results(
    curves: &[&Curve],
    singles: &[Single],
    model: &OnsetModel,
    global: &Fit,
    scale: f64,
    units: &Units,
    confidence: f64,
) -> Vec<CurveResult> {
    let reversible = model.reversible();
    curves
        .iter()
        .zip(singles)
        .enumerate()
        .map(|(k, (c, s))| {
            let slots = model.layout()[k];
            let kobs = model.kobs(&global.theta, k);
            let vi = model.vi(&global.theta, k) * scale;
            let koff = model.koff_index().map_or(0.0, |j| global.theta[j]);
            let global_curve = GlobalCurve {
                kobs,
                vi,
                vs: if model.is_line(k) || kobs == 0.0 { vi } else { vi * koff / kobs },
                p0: global.theta[slots.p0] * scale,
            };
            let own = if reversible { s.reversible.as_ref() } else { s.irreversible.as_ref() };
            let (kobs, vi, vs) = match own {
                Some(f) => {
                    let p = |j: usize, factor: f64, unit: String, method: &'static str| {
                        Param::new(f.theta[j], f.se[j], wald(&CurveModel, f, j, confidence), method, None)
                            .scaled(factor, Some(unit))
                    };
                    let vs = if reversible {
                        p(CurveModel::VS, scale, units.rate(), "wald")
                    } else {
                        fixed_param(0.0, units.rate())
                    };
                    (
                        p(CurveModel::KOBS, 1.0, units.per_time(), "wald-log"),
                        p(CurveModel::VI, scale, units.rate(), "wald"),
                        vs,
                    )
                }
                None => {
                    let v = Param::new(
                        s.line.theta[1],
                        s.line.se[1],
                        wald(&Polynomial::LINE, &s.line, 1, confidence),
                        "wald",
                        None,
                    )
                    .scaled(scale, Some(units.rate()));
                    (fixed_param(0.0, units.per_time()), v.clone(), v)
                }
            };
            CurveResult { inhibitor: c.inhibitor, kobs, vi, vs, n: c.time.len(), global: global_curve }
        })
        .collect()
}

fn warnings(
    compound: &Compound,
    curves: &[&Curve],
    model: &OnsetModel,
    fit: &Fit,
    constants: &Constants,
    options: &Options,
) -> Vec<Warning> {
    let mut out = Vec::new();
    let i_max = curves.iter().map(|c| c.inhibitor).fold(0.0, f64::max);
    let i_min = curves.iter().map(|c| c.inhibitor).filter(|i| *i > 0.0).fold(f64::INFINITY, f64::min);
    match model.scheme() {
        Scheme::None => out.push(OnsetWarning::NoOnset.with(
            "the progress curves are straight: no time-dependent onset is seen within the run. \
             Treat the compound as a rapid reversible inhibitor (kimech mode / ki), or extend the run if a slow onset is expected",
        )),
        scheme => {
            let k = curves.len() - 1;
            let run = curves[k].time.last().unwrap_or(&0.0) - curves[k].time[0];
            let extent = model.kobs(&fit.theta, k) * run;
            if extent < options.min_onset {
                out.push(OnsetWarning::LittleCurvature.with(format!(
                    "at the highest [I] kobs × run length = {extent:.2} (below {}): the onset is barely under way by the end of the run, \
                     so kobs and the constants rest on little curvature; run longer or at higher [I]",
                    options.min_onset
                )));
            }
            let beyond = match scheme {
                Scheme::OneStep => Some("kobs stays linear in [I] up to the highest concentration".to_string()),
                _ => constants.ki_app.as_ref().and_then(|k| {
                    (k.value > i_max || k.high.is_none())
                        .then(|| format!("KI,app = {} is beyond (or not bounded within) the highest tested [I] = {}", short(k.value), short(i_max)))
                }),
            };
            if let Some(why) = beyond {
                out.push(OnsetWarning::KiBeyondTested.with(format!(
                    "{why}: kinact and KI cannot be separated; rank by kinact/KI only, or test higher [I]"
                )));
            }
        }
    }
    if let Some(w) = depletion(compound, curves, options) {
        out.push(w);
    }
    if let Some(et) = compound.conditions.enzyme
        && i_min < options.min_excess * et
    {
        out.push(OnsetWarning::InhibitorNotInExcess.with(format!(
            "the lowest [I] ({}) is less than {}× the enzyme ({}): inhibitor bound to enzyme depletes the free \
             inhibitor, which the pseudo-first-order equations assume constant",
            short(i_min),
            options.min_excess,
            short(et)
        )));
    }
    if model.scheme() == Scheme::TwoStep && constants.factor.is_none() {
        out.push(OnsetWarning::KiApparent.with(
            "no substrate concentration and Km were given: KI is the apparent KI,app at the assay's substrate, not a constant of the inhibitor",
        ));
    }
    out
}

/// Substrate use in the uninhibited curve, when the signal is a product
/// concentration and the substrate concentration is known.
fn depletion(compound: &Compound, curves: &[&Curve], options: &Options) -> Option<Warning> {
    let s0 = compound.conditions.substrate_as_signal?;
    let control = curves.iter().find(|c| c.inhibitor <= 0.0)?;
    let formed = control.signal.iter().fold(f64::NEG_INFINITY, |a, &v| a.max(v)) - control.signal[0];
    let fraction = formed / s0;
    (fraction > options.max_depletion).then(|| {
        OnsetWarning::SubstrateDepleted.with(format!(
            "the uninhibited curve converts {:.0} % of the substrate (more than {:.0} %): its rate falls for want of substrate, \
             which the equations read as onset; shorten the run or use less enzyme",
            fraction * 100.0,
            options.max_depletion * 100.0
        ))
    })
}

/// Three significant digits for numbers inside sentences.
fn short(v: f64) -> String {
    if v == 0.0 || !v.is_finite() {
        return format!("{v}");
    }
    let magnitude = v.abs().log10().floor() as i32;
    if (-3..5).contains(&magnitude) {
        let decimals = (2 - magnitude).max(0) as usize;
        format!("{v:.decimals$}")
    } else {
        format!("{v:.2e}")
    }
}
