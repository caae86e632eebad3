//! The one vocabulary of warnings and flags: every code any command can raise,
//! with what it means and where the rule comes from. A result carries
//! [`Code`]s, never free strings, so a misspelt code does not compile; the
//! README's tables list every code (tests/warning_codes.rs checks), and the
//! terminal legend of `ic50` takes its words from [`Code::meaning`].

use serde::Serialize;

macro_rules! codes {
    ($($(#[$doc:meta])* $variant:ident = $text:literal, $meaning:literal, $source:literal;)*) => {
        /// A warning or flag code (written as its kebab-case text in every output).
        #[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
        pub enum Code {
            $($(#[$doc])* $variant,)*
        }

        impl Code {
            /// Every code, in catalogue order.
            pub const ALL: &'static [Code] = &[$(Code::$variant,)*];

            /// The stable kebab-case text written in outputs.
            pub fn as_str(self) -> &'static str {
                match self { $(Code::$variant => $text,)* }
            }

            /// What it means, in one sentence.
            pub fn meaning(self) -> &'static str {
                match self { $(Code::$variant => $meaning,)* }
            }

            /// Where the rule comes from: a citation, or "common practice".
            pub fn source(self) -> &'static str {
                match self { $(Code::$variant => $source,)* }
            }
        }
    };
}

codes! {
    // rates
    /// The smallest window already curves.
    CurvedFromStart = "curved-from-start", "the smallest window of points already curves: the initial rate is likely underestimated", "t² term test on the first points (common practice)";
    /// Too much substrate used within the window.
    HighConversion = "high-conversion", "more than the allowed share of the substrate is converted within the smallest window", "common practice (about 10 %)";
    /// Upward curvature.
    Accelerating = "accelerating", "the signal accelerates (lag phase, mixing or temperature drift): the initial slope may not be the steady-state rate", "common practice";
    /// The rate's interval includes zero.
    NoDetectableChange = "no-detectable-change", "the rate's interval includes zero", "Wald interval of the slope";
    /// Conversion cannot be checked.
    ConversionNotChecked = "conversion-not-checked", "the signal is no concentration, or the substrate has no unit: the conversion limit could not be checked", "—";
    // km
    /// Km outside the tested range.
    KmNotBracketed = "km-not-bracketed", "the fitted Km lies outside the tested substrate range (about 0.2–5 × Km is wanted)", "common practice";
    /// Too few substrate levels.
    FewConcentrations = "few-concentrations", "fewer distinct concentrations than a reliable fit needs", "common practice";
    /// Rates fall at high substrate.
    SubstrateInhibition = "substrate-inhibition", "rates fall at high substrate: substrate inhibition (Haldane) describes the data better", "Haldane 1930; Cornish-Bowden 2012, §5.9";
    /// The minimiser stopped short.
    NotConverged = "not-converged", "the fit did not converge; the estimates are not trustworthy", "—";
    // mode
    /// Fewer than three non-zero inhibitor levels.
    FewInhibitorLevels = "few-inhibitor-levels", "fewer than 3 non-zero inhibitor concentrations", "common practice";
    /// No zero-inhibitor series.
    NoUninhibitedSeries = "no-uninhibited-series", "no series without inhibitor: Vmax and Km rest on the inhibited series alone", "—";
    /// The substrate levels do not span Km.
    KmNotSpanned = "km-not-spanned", "the substrate concentrations do not span Km", "common practice";
    /// The inhibitor levels are far from Ki.
    InhibitorRangeFarFromKi = "inhibitor-range-far-from-ki", "the inhibitor concentrations do not reach about 0.5–5 × Ki", "common practice";
    /// The inhibitor has no detectable effect.
    NoInhibitionDetected = "no-inhibition-detected", "no model with inhibition improves on no inhibition", "extra-sum-of-squares F test / AICc";
    /// α not determined.
    AlphaNotDetermined = "alpha-not-determined", "α of the mixed model is not determined by the data (its interval is unbounded)", "profile likelihood";
    /// No model describes the data.
    NoModelAdequate = "no-model-adequate", "no model of the five passes the runs and lack-of-fit tests: no mechanism is named", "Wald–Wolfowitz runs test; lack-of-fit F test (Draper & Smith 1998)";
    /// The data do not single out one mechanism.
    MechanismUncertain = "mechanism-uncertain", "the data do not single out one mechanism: the headline constants span the plausible models", "F test grey zone p 0.01–0.3 and Akaike weights (Burnham & Anderson 2002)";
    /// Partial inhibition (a diagnosis, or a dose-response curve that levels off above zero).
    PartialInhibition = "partial-inhibition", "the inhibition levels off above zero activity (partial inhibition)", "Segel 1975, ch. 4; Cheng & Prusoff 1973 assume complete inhibition";
    /// Partial inhibition cannot be ruled out.
    PartialInhibitionPossible = "partial-inhibition-possible", "complete inhibition (β = 0) cannot be told from mild partial inhibition on this design", "extra-sum-of-squares F test";
    // ki
    /// IC50 within tenfold of Et.
    TightBinding = "tight-binding", "the IC50 is within tenfold of Et: IC50 − Et/2 was used", "Morrison 1969; common practice";
    /// Et unknown and IC50 low.
    TightBindingNotChecked = "tight-binding-not-checked", "no Et given and IC50 below 100 nM: tight binding could not be checked", "common practice";
    /// Mechanism assumed.
    MechanismAssumed = "mechanism-assumed", "the mechanism is not known: the competitive Ki is given, with the range over the relations", "—";
    /// Hill coefficient far from one.
    HillFarFromOne = "hill-far-from-one", "the Hill coefficient is far from 1: the Cheng–Prusoff relations do not strictly hold", "Leff & Dougall 1993; common practice";
    /// S far from Km.
    SubstrateFarFromKm = "substrate-far-from-km", "S/Km outside 0.1–10: the constant leans heavily on Km", "common practice";
    /// L far from Kd.
    LigandFarFromKd = "ligand-far-from-kd", "L/Kd outside 0.1–10 (binding assay)", "common practice";
    /// The input is a bound.
    QualifiedInput = "qualified-input", "the input is a bound, so the result is a bound too", "—";
    /// The input is approximate.
    ApproximateInput = "approximate-input", "the input was written as approximate (~)", "—";
    /// The dose-response fit was poor.
    Ic50PoorFit = "ic50-poor-fit", "the dose-response fit behind this IC50 was poor", "—";
    /// The dose-response fit did not converge.
    Ic50NotConverged = "ic50-not-converged", "the dose-response fit behind this IC50 did not converge", "—";
    /// The dose-response fit held the Hill slope.
    Ic50HillFixed = "ic50-hill-fixed", "the dose-response fit held the Hill coefficient at 1", "—";
    /// Wells were left out of the dose-response fit.
    Ic50OutlierExcluded = "ic50-outlier-excluded", "wells marked by the outlier rule were left out of the dose-response fit", "Cook & Weisberg 1982";
    /// Too many aberrant wells in the dose-response curve.
    Ic50TooManyOutliers = "ic50-too-many-outliers", "the dose-response curve had more aberrant wells than the outlier rule may remove", "—";
    // ic50
    /// IC50 above the tested range.
    Ic50AboveRange = "ic50-above-range", "IC50 above the highest tested concentration; reported as '>' that concentration", "—";
    /// IC50 below the tested range.
    Ic50BelowRange = "ic50-below-range", "IC50 below the lowest tested concentration; reported as '<' that concentration", "—";
    /// Steep Hill slope.
    HillSteep = "hill-steep", "Hill coefficient steeper than the steep-slope limit (aggregation, tight binding or an assay artefact?)", "common practice";
    /// Shallow Hill slope.
    HillShallow = "hill-shallow", "Hill coefficient shallower than the shallow-slope limit (heterogeneity, solubility or several sites?)", "common practice";
    /// No significant inhibition.
    NoInhibition = "no-inhibition", "no significant inhibition: a flat line fits as well (F test), or too little inhibition at the highest concentration", "extra-sum-of-squares F test (Bates & Watts 1988)";
    /// Poor fit.
    PoorFit = "poor-fit", "R² below the minimum: the logistic does not describe these data well", "common practice";
    /// Too few concentrations.
    TooFewPoints = "too-few-points", "fewer distinct concentrations than the minimum", "common practice";
    /// Hill slope held at one.
    HillFixed = "hill-fixed", "no transition inside the tested range determines the slope; Hill held at 1 to place the IC50, which is therefore approximate (~) or a bound", "—";
    /// Ki,app below Et/10.
    TightBindingTitration = "tight-binding-titration", "Ki,app below Et/10: the curve mostly measures the enzyme concentration", "Copeland 2013, ch. 9";
    /// A plate with poor controls.
    PlateZPrimeLow = "plate-z-prime-low", "a plate of this compound has Z′ below the minimum", "Zhang, Chung & Oldenburg 1999";
    /// A carried column varies within the compound.
    CarriedVaries = "carried-varies", "a carried column has different values within the compound (joined with ';')", "—";
    /// Wells left out by the outlier rule.
    OutlierExcluded = "outlier-excluded", "wells marked by the outlier rule (studentized residual beyond the Bonferroni bound) were left out of the fit; they are listed", "Cook & Weisberg 1982";
    /// Wells marked but still fitted.
    OutlierFlagged = "outlier-flagged", "wells marked by the outlier rule are listed but still fitted", "Cook & Weisberg 1982";
    /// More aberrant wells than allowed.
    TooManyOutliers = "too-many-outliers", "the outlier rule marks more wells than allowed; the curve itself may be unreliable", "—";
    /// Upper asymptote held at 100 %.
    UpperOutsideWindow = "upper-outside-window", "% activity: the fitted upper asymptote fell outside its plausible window; it was held at 100 %", "common practice";
    /// Lower asymptote held at 0 %.
    LowerOutsideWindow = "lower-outside-window", "% activity: the fitted lower asymptote fell outside its plausible window; it was held at 0 %", "common practice";
    // onset
    /// Straight progress curves.
    NoOnset = "no-onset", "the curves are straight: no time-dependent onset within the run", "Morrison & Walsh 1988";
    /// Little curvature within the run.
    LittleCurvature = "little-curvature", "kobs × run length < 1 at the highest [I]: the onset is barely under way", "common practice";
    /// KI beyond the tested range.
    KiBeyondTested = "ki-beyond-tested", "KI,app above the highest [I], or kobs linear in [I]: only kinact/KI is determined", "Copeland 2013, ch. 9";
    /// Substrate depleted in the uninhibited curve.
    SubstrateDepleted = "substrate-depleted", "the uninhibited curve used more than 10 % of the substrate", "common practice";
    /// Inhibitor not in excess over enzyme.
    InhibitorNotInExcess = "inhibitor-not-in-excess", "the lowest [I] is below 10 × Et, so bound inhibitor depletes the free inhibitor", "common practice";
    /// Initial rates not tied to the scheme.
    RatesNotTied = "rates-not-tied", "the curves' initial rates do not follow the scheme's relation to v0 and [I] (mixing dead time, a fast first phase?): each curve keeps its own", "AICc / extra-sum-of-squares F test";
    /// KI is apparent.
    KiApparent = "ki-apparent", "no S and Km given: KI is KI,app, not a constant of the inhibitor", "—";
    // rank
    /// Rows behind the group failed.
    RowsFailed = "rows-failed", "some input rows of this group had no value", "—";
    /// Replicates disagree.
    ReplicatesDisagree = "replicates-disagree", "the values of this group spread more than replicate assays usually do", "common practice";
    /// Bounds set aside.
    CensoredSetAside = "censored-set-aside", "bounds were not averaged with the exact values; they are listed beside the mean", "—";
    /// The mean contradicts a bound.
    CensoredDisagrees = "censored-disagrees", "the geometric mean contradicts a bound of the same group", "—";
    /// Only bounds.
    AllCensored = "all-censored", "every value is a bound; the tightest bound is reported", "—";
    /// Lower and upper bounds.
    CensoredRange = "censored-range", "lower and upper bounds together leave a range", "—";
    /// Bounds that cross.
    CensoredConflict = "censored-conflict", "the bounds cross: no value", "—";
    /// Mechanism not stated.
    MechanismNotStated = "mechanism-not-stated", "the input gives no mechanism for some values", "—";
    /// Method not stated.
    MethodNotStated = "method-not-stated", "the input gives no method for some values", "—";
    /// Methods differ within a group.
    MethodsDiffer = "methods-differ", "the values of this group were made by different relations", "—";
    /// Heavy-atom counts differ.
    HeavyAtomsDiffer = "heavy-atoms-differ", "the heavy-atom counts of this compound differ between rows", "—";
    /// Selectivity cannot be told.
    SelectivityUndetermined = "selectivity-undetermined", "ΔpKi cannot be told from two bounds", "—";
}

/// Codes as one cell: their texts joined by `sep` (`hill-steep;poor-fit`).
pub fn joined(codes: &[Code], sep: &str) -> String {
    codes.iter().map(|c| c.as_str()).collect::<Vec<_>>().join(sep)
}

impl Code {
    /// The code written as `text`, if it is one of the catalogue.
    pub fn parse(text: &str) -> Option<Code> {
        Code::ALL.iter().copied().find(|c| c.as_str() == text)
    }
}

impl std::fmt::Display for Code {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(self.as_str())
    }
}

impl Serialize for Code {
    fn serialize<S: serde::Serializer>(&self, serializer: S) -> Result<S::Ok, S::Error> {
        serializer.serialize_str(self.as_str())
    }
}

/// A code equals its text (`Code::TightBinding == "tight-binding"`), for
/// reading outputs back in tests and tools.
impl PartialEq<&str> for Code {
    fn eq(&self, other: &&str) -> bool {
        self.as_str() == *other
    }
}

impl From<Code> for String {
    fn from(code: Code) -> String {
        code.as_str().to_string()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn every_code_is_kebab_case_unique_and_explained() {
        let mut seen = std::collections::HashSet::new();
        for c in Code::ALL {
            let t = c.as_str();
            assert!(t.chars().all(|ch| ch.is_ascii_lowercase() || ch.is_ascii_digit() || ch == '-'), "{t}");
            assert!(seen.insert(t), "{t} twice");
            assert!(!c.meaning().is_empty() && !c.source().is_empty(), "{t}");
            assert_eq!(Code::parse(t), Some(*c));
        }
    }
}
