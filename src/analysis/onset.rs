//! Time-dependent inhibition: is there an onset, how does kobs depend on [I],
//! is the inhibition reversible, and what are kinact, KI and kinact/KI.
//!
//! Every progress curve follows P(t) = vs·t + (vi − vs)(1 − e^(−kobs·t))/kobs + P0
//! (Morrison & Walsh, Adv. Enzymol. 61, 201–301, 1988), vs = 0 when the
//! inhibitor is irreversible. Five global fits of all curves of a compound are
//! compared ([`crate::models::onset`]): no onset (straight lines), the one-step
//! and two-step schemes for kobs against [I], each irreversible or reversible.
//! The choice is made by AICc with the parsimony window that `mode` uses
//! (Burnham & Anderson, *Model Selection and Multimodel Inference*, 2002), or
//! by forward extra-sum-of-squares F tests (Bates & Watts 1988, §3.10). The
//! chosen global fit is the answer; each curve is also fitted on its own and
//! the kobs-against-[I] replot is reported beside it (Copeland, *Evaluation
//! of Enzyme Inhibitors in Drug Discovery*, 2nd ed., 2013, ch. 9).
//!
//! Intervals of kinact, KI and kinact/KI are by profile likelihood
//! ([`crate::fit::intervals::profile`]). KI from the fit is the apparent value
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

use serde::Serialize;

use crate::analysis::mode::{Criterion, PARSIMONY_WINDOW};
use crate::error::{Error, Result};
use crate::fit::intervals::{Interval, profile, wald};
use crate::fit::stats::{aicc, akaike_weights, extra_sum_of_squares};
use crate::fit::{Data, Fit, FitSettings, Model, fit, fit_from};
use crate::models::Polynomial;
use crate::models::onset::{CurveModel, OnsetModel, Reading, ReplotModel, Scheme};
use crate::report::{Param, Warning};

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
    pub origin: String,
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
            confidence: 0.95,
            substrate_mechanism: SubstrateMechanism::Competitive,
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

/// The five candidate global models, simplest first.
const CANDIDATES: [(Onset, bool); 5] = [
    (Onset::None, false),
    (Onset::OneStep, false),
    (Onset::TwoStep, false),
    (Onset::OneStep, true),
    (Onset::TwoStep, true),
];

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
}

impl OnsetWarning {
    /// Every code, for the README check.
    pub const ALL: [OnsetWarning; 7] = [
        OnsetWarning::NotConverged,
        OnsetWarning::NoOnset,
        OnsetWarning::LittleCurvature,
        OnsetWarning::SubstrateDepleted,
        OnsetWarning::KiBeyondTested,
        OnsetWarning::InhibitorNotInExcess,
        OnsetWarning::KiApparent,
    ];

    /// The stable kebab-case code.
    pub fn code(self) -> &'static str {
        match self {
            OnsetWarning::NotConverged => "not-converged",
            OnsetWarning::NoOnset => "no-onset",
            OnsetWarning::LittleCurvature => "little-curvature",
            OnsetWarning::SubstrateDepleted => "substrate-depleted",
            OnsetWarning::KiBeyondTested => "ki-beyond-tested",
            OnsetWarning::InhibitorNotInExcess => "inhibitor-not-in-excess",
            OnsetWarning::KiApparent => "ki-apparent",
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
    /// Weighted SSE in the signal's unit squared.
    pub sse: f64,
    /// Residual degrees of freedom.
    pub df: usize,
    /// AICc.
    pub aicc: Option<f64>,
    /// Akaike weight among the five.
    pub weight: f64,
    /// Whether the minimiser stopped at a trustworthy minimum.
    pub converged: bool,
}

/// Everything reported for one compound.
#[derive(Debug, Clone, Serialize)]
pub struct OnsetResult {
    /// Compound label.
    pub compound: Option<String>,
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
    /// Rate constant of the return from the final complex (reversible only).
    pub koff: Option<Param>,
    /// How KI was corrected for substrate, in words.
    pub substrate_correction: String,
    /// Per-curve fits, by increasing [I].
    pub curves: Vec<CurveResult>,
    /// kobs against [I] by both schemes.
    pub replot: Vec<ReplotFit>,
    /// The five global fits.
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
    let fitted: Vec<Fit> = CANDIDATES
        .iter()
        .map(|&(onset, rev)| global_fit(onset, rev, &inhibitor, &singles, &replot, &data, &options.settings))
        .collect();
    let aiccs: Vec<Option<f64>> = fitted.iter().map(|f| aicc(f.n, f.n_free, f.sse)).collect();
    let weights = akaike_weights(&aiccs);
    let (pick, evidence) = match options.criterion {
        Criterion::Aicc => choose_by_aicc(&fitted, &aiccs, &weights),
        Criterion::FTest => choose_by_f(&fitted, options.alpha_level),
    };
    let (onset, reversible) = CANDIDATES[pick];
    let model = OnsetModel::new(onset.scheme(), reversible, inhibitor.clone());
    let chosen = &fitted[pick];
    let constants = Constants::from_fit(&model, &data, chosen, compound, units, options);
    let curve_results = curve_results(&curves, &singles, &model, chosen, scale, units, options.confidence);
    let mut warnings = warnings(compound, &curves, &model, chosen, &constants, options);
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
        .map(|((&(onset, reversible), f), (a, w))| ModelSummary {
            onset,
            reversible,
            sse: f.sse * scale * scale,
            df: f.df,
            aicc: *a,
            weight: *w,
            converged: f.converged(),
        })
        .collect();
    Ok(OnsetResult {
        compound: compound.label.clone(),
        onset,
        reversible: (onset != Onset::None).then_some(reversible),
        kinact: constants.kinact,
        ki: constants.ki,
        ki_app: constants.ki_app,
        kinact_ki: constants.kinact_ki,
        koff: constants.koff,
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

/// Fits one candidate from starts built out of the single-curve fits and the replot.
fn global_fit(
    onset: Onset,
    reversible: bool,
    inhibitor: &[f64],
    singles: &[Single],
    replot: &[Replot],
    data: &Data<Reading>,
    settings: &FitSettings,
) -> Fit {
    let model = OnsetModel::new(onset.scheme(), reversible, inhibitor.to_vec());
    let mut starts: Vec<Vec<f64>> = Vec::new();
    for shared in shared_starts(onset, inhibitor, replot, singles) {
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

/// Starting values of the scheme's constants (and koff = 0 when reversible).
fn shared_starts(onset: Onset, inhibitor: &[f64], replot: &[Replot], singles: &[Single]) -> Vec<Vec<f64>> {
    let from_replot = replot.iter().filter(|r| r.summary.scheme == onset).map(|r| r.theta.clone());
    let positive: Vec<f64> = inhibitor.iter().cloned().filter(|i| *i > 0.0).collect();
    let (i_min, i_max) = positive.iter().fold((f64::INFINITY, 0.0f64), |(a, b), &i| (a.min(i), b.max(i)));
    let span = singles.iter().map(|s| s.data.x.last().unwrap_or(&1.0) - s.data.x[0]).fold(0.0, f64::max).max(1e-300);
    let mut out: Vec<Vec<f64>> = from_replot.collect();
    match onset {
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
/// fits (vs/vi·kobs, their median), then each curve's vi and P0 from its own fit.
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
    for (slots, s) in model.layout().iter().zip(singles) {
        let own = if model.scheme() == Scheme::None {
            None
        } else if model.reversible() {
            s.reversible.as_ref()
        } else {
            s.irreversible.as_ref()
        };
        match own {
            Some(f) => {
                theta[slots.vi] = f.theta[CurveModel::VI];
                theta[slots.p0] = f.theta[CurveModel::P0];
            }
            None => {
                theta[slots.vi] = s.line.theta[1];
                theta[slots.p0] = s.line.theta[0];
            }
        }
    }
    theta
}

/// Lowest AICc; among models within the parsimony window of it, the one with
/// fewest parameters (as `mode` chooses).
fn choose_by_aicc(fits: &[Fit], aiccs: &[Option<f64>], weights: &[f64]) -> (usize, String) {
    let usable = |k: usize| aiccs[k].is_some() && fits[k].converged();
    let best = (0..fits.len())
        .filter(|&k| usable(k))
        .min_by(|&a, &b| aiccs[a].unwrap_or(0.0).total_cmp(&aiccs[b].unwrap_or(0.0)));
    let Some(best) = best else {
        return (0, "no model could be compared (too few readings or no fit converged)".into());
    };
    let best_aicc = aiccs[best].unwrap_or(f64::INFINITY);
    let pick = (0..fits.len())
        .filter(|&k| usable(k) && aiccs[k].is_some_and(|a| a - best_aicc <= PARSIMONY_WINDOW))
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

/// Forward F tests: none → one-step → two-step, then irreversible → reversible.
fn choose_by_f(fits: &[Fit], level: f64) -> (usize, String) {
    let p = |a: usize, b: usize| extra_sum_of_squares(fits[a].sse, fits[a].df, fits[b].sse, fits[b].df).map(|t| t.1);
    let text = |v: Option<f64>| v.map_or("not computable".to_string(), |v| format!("p = {}", short(v)));
    let significant = |v: Option<f64>| v.is_some_and(|v| v < level);
    let mut steps = Vec::new();
    let p1 = p(0, 1);
    steps.push(format!("one-step vs none: {}", text(p1)));
    if !significant(p1) {
        return (0, format!("none ({}; level {level})", steps.join("; ")));
    }
    let p2 = p(1, 2);
    steps.push(format!("two-step vs one-step: {}", text(p2)));
    let irreversible = if significant(p2) { 2 } else { 1 };
    let reversible = irreversible + 2;
    let p3 = p(irreversible, reversible);
    steps.push(format!("reversible vs irreversible: {}", text(p3)));
    let pick = if significant(p3) { reversible } else { irreversible };
    (pick, format!("{} ({}; level {level})", candidate_name(pick), steps.join("; ")))
}

fn candidate_name(k: usize) -> String {
    let (onset, reversible) = CANDIDATES[k];
    match onset {
        Onset::None => "no onset".to_string(),
        _ => format!("{} {}", onset.name(), if reversible { "reversible" } else { "irreversible" }),
    }
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
                let ratio_model =
                    OnsetModel::new(Scheme::TwoStepByRatio, model.reversible(), model.inhibitor().to_vec());
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

fn fixed_param(value: f64, unit: String) -> Param {
    Param::new(
        value,
        None,
        Interval { low: crate::fit::intervals::Bound::At(value), high: crate::fit::intervals::Bound::At(value) },
        "fixed",
        Some(unit),
    )
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
            let vi = global.theta[slots.vi] * scale;
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
