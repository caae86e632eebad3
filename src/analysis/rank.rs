//! Aggregation and ranking of Ki results per compound and target.
//!
//! Repeats are averaged on the log scale: mean and sample SD (n − 1) of pKi,
//! and the geometric-mean Ki = 10^(−mean pKi). A 1 − α interval of that
//! geometric mean comes from the t distribution of the mean pKi,
//! mean ± t(n − 1)·SD/√n (Student 1908); a single measurement keeps the
//! interval it came with.
//!
//! Censoring (a Ki written as `> x` or `< x`) is handled without inventing
//! numbers: when exact values exist they alone are averaged and the bounds
//! are reported beside them (and flagged when they disagree with the mean);
//! when every value is a bound the tightest one is reported (the largest
//! lower bound, the smallest upper bound); lower and upper bounds together
//! give a range, or a conflict when they cross.
//!
//! Selectivity against a counter-target T: ΔpKi = pKi(target) − pKi(T), a
//! bound when either side is. Ligand efficiency LE = 1.37·pKi / heavy atoms
//! in kcal/mol per heavy atom (1.37 ≈ 2.303·RT at about 298 K; Hopkins, Groom
//! & Alex, Drug Discov. Today 9, 430–431, 2004).

use std::collections::HashMap;

use serde::Serialize;

use crate::fit::intervals::t_quantile;
use crate::units::Qualifier;

/// kcal/mol per log10 unit at about 298 K (2.303·RT), as used for LE.
pub const LE_FACTOR: f64 = 1.37;

/// pKi spread above which repeats are flagged (common practice: half a log unit, about threefold).
pub const SPREAD_LIMIT: f64 = 0.5;

/// A flag on an aggregated row: a stable kebab-case code and a sentence. Owns
/// its code because codes carried from the input are not known in advance.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct Flag {
    /// Stable identifier, e.g. `censored-set-aside`.
    pub code: String,
    /// What it means here.
    pub message: String,
}

impl Flag {
    /// A flag with its code and message.
    pub fn new(code: impl Into<String>, message: impl Into<String>) -> Flag {
        Flag { code: code.into(), message: message.into() }
    }
}

/// One Ki measurement as read.
#[derive(Debug, Clone, PartialEq)]
pub struct Entry {
    /// Input line.
    pub line: u64,
    /// Compound.
    pub compound: String,
    /// Target (empty when not given).
    pub target: String,
    /// `Ki` or `Kiu` (repeats of different endpoints are never averaged together).
    pub endpoint: String,
    /// Qualifier of the Ki.
    pub qualifier: Qualifier,
    /// The Ki, mol/L.
    pub ki: f64,
    /// Interval of a single measurement, mol/L.
    pub low: Option<f64>,
    /// Upper end, mol/L.
    pub high: Option<f64>,
    /// How that interval was obtained.
    pub interval_method: Option<String>,
    /// Heavy-atom count, for ligand efficiency.
    pub heavy_atoms: Option<f64>,
    /// Mechanism behind the Ki (with its source), empty when not stated.
    pub mechanism: String,
    /// Relation behind the Ki, empty when not stated.
    pub method: String,
    /// Flag codes carried from the input.
    pub flags: Vec<String>,
    /// Assay conditions as text.
    pub conditions: String,
}

/// How to aggregate.
#[derive(Debug, Clone, Default)]
pub struct Options {
    /// Counter-target for selectivity.
    pub versus: Option<String>,
    /// Confidence level of the interval of the geometric mean.
    pub confidence: f64,
}

/// A number that may be a bound.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Bounded {
    /// `=` or the direction of the bound.
    pub qualifier: Qualifier,
    /// The number or bound.
    pub value: f64,
}

/// One aggregated, ranked row.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct RankRow {
    /// 1-based rank by pKi within target and endpoint (most potent first).
    pub rank: usize,
    /// Compound.
    pub compound: String,
    /// Target.
    pub target: String,
    /// `Ki` or `Kiu`.
    pub endpoint: String,
    /// Qualifier of `ki` (and, reversed, of `pki`).
    pub qualifier: Qualifier,
    /// Geometric-mean Ki, or the tightest bound; mol/L. `None` when bounds conflict.
    pub ki: Option<f64>,
    /// Mean pKi (or the bound).
    pub pki: Option<f64>,
    /// Sample SD of pKi over the exact values (n ≥ 2).
    pub pki_sd: Option<f64>,
    /// Exact values averaged.
    pub n: usize,
    /// Bounds in the group.
    pub n_censored: usize,
    /// The bounds as written (qualifier and Ki in mol/L).
    pub censored: Vec<Bounded>,
    /// Interval of the Ki, mol/L.
    pub low: Option<f64>,
    /// Upper end, mol/L.
    pub high: Option<f64>,
    /// How the interval was obtained.
    pub interval_method: Option<String>,
    /// Mechanisms behind the values.
    pub mechanism: String,
    /// Relations behind the values.
    pub method: String,
    /// Input flags and aggregation flags.
    pub flags: Vec<Flag>,
    /// Conditions behind the values.
    pub conditions: String,
    /// Heavy atoms, when given and consistent.
    pub heavy_atoms: Option<f64>,
    /// LE in kcal/mol per heavy atom (a bound when the Ki is, direction reversed).
    pub ligand_efficiency: Option<Bounded>,
    /// The counter-target of `delta_pki`.
    pub versus: Option<String>,
    /// ΔpKi against the counter-target.
    pub delta_pki: Option<Bounded>,
    /// Input lines aggregated.
    pub lines: Vec<u64>,
}

/// Aggregates, ranks and adds selectivity. Groups keep first-appearance order
/// of targets; within a target and endpoint, rows are sorted by pKi, most potent first.
pub fn aggregate(entries: &[Entry], options: &Options) -> Vec<RankRow> {
    // Groups in order of first appearance.
    let mut index: HashMap<(&str, &str, &str), usize> = HashMap::new();
    let mut groups: Vec<Vec<&Entry>> = Vec::new();
    for e in entries {
        let k = (e.compound.as_str(), e.target.as_str(), e.endpoint.as_str());
        let i = *index.entry(k).or_insert_with(|| {
            groups.push(Vec::new());
            groups.len() - 1
        });
        groups[i].push(e);
    }
    let mut rows: Vec<RankRow> = groups.iter().map(|members| group(members, options.confidence)).collect();
    let targets: Vec<(String, String)> = {
        let mut v: Vec<(String, String)> = Vec::new();
        for r in &rows {
            let k = (r.target.clone(), r.endpoint.clone());
            if !v.contains(&k) {
                v.push(k);
            }
        }
        v
    };
    rows.sort_by(|a, b| {
        let ta = targets.iter().position(|k| k.0 == a.target && k.1 == a.endpoint);
        let tb = targets.iter().position(|k| k.0 == b.target && k.1 == b.endpoint);
        ta.cmp(&tb)
            .then_with(|| b.pki.unwrap_or(f64::NEG_INFINITY).total_cmp(&a.pki.unwrap_or(f64::NEG_INFINITY)))
            .then_with(|| a.qualifier.is_bound().cmp(&b.qualifier.is_bound()))
            .then_with(|| a.compound.cmp(&b.compound))
    });
    let mut previous: Option<(String, String)> = None;
    let mut rank = 0;
    for r in &mut rows {
        let k = (r.target.clone(), r.endpoint.clone());
        rank = if previous.as_ref() == Some(&k) { rank + 1 } else { 1 };
        previous = Some(k);
        r.rank = rank;
    }
    if let Some(versus) = &options.versus {
        selectivity(&mut rows, versus);
    }
    rows
}

fn joined_unique<'a>(values: impl Iterator<Item = &'a str>, separator: &str) -> String {
    let mut seen: Vec<&str> = Vec::new();
    for v in values.filter(|v| !v.is_empty()) {
        if !seen.contains(&v) {
            seen.push(v);
        }
    }
    seen.join(separator)
}

/// One compound × target × endpoint.
fn group(members: &[&Entry], confidence: f64) -> RankRow {
    let first = members[0];
    let mut flags: Vec<Flag> = Vec::new();
    for e in members {
        for f in &e.flags {
            if !flags.iter().any(|w| &w.code == f) {
                flags.push(Flag::new(f.clone(), "carried from the input"));
            }
        }
    }
    let exact: Vec<&Entry> = members.iter().copied().filter(|e| !e.qualifier.is_bound()).collect();
    let bounds: Vec<Bounded> = members
        .iter()
        .filter(|e| e.qualifier.is_bound())
        .map(|e| Bounded { qualifier: e.qualifier, value: e.ki })
        .collect();
    let mut row = RankRow {
        rank: 0,
        compound: first.compound.clone(),
        target: first.target.clone(),
        endpoint: first.endpoint.clone(),
        qualifier: Qualifier::Equal,
        ki: None,
        pki: None,
        pki_sd: None,
        n: exact.len(),
        n_censored: bounds.len(),
        censored: bounds.clone(),
        low: None,
        high: None,
        interval_method: None,
        mechanism: String::new(),
        method: String::new(),
        flags: Vec::new(),
        conditions: joined_unique(members.iter().map(|e| e.conditions.as_str()), " | "),
        heavy_atoms: None,
        ligand_efficiency: None,
        versus: None,
        delta_pki: None,
        lines: members.iter().map(|e| e.line).collect(),
    };
    if exact.is_empty() {
        all_censored(&mut row, &bounds, &mut flags);
    } else {
        exact_mean(&mut row, &exact, confidence, &mut flags);
        check_bounds_against_mean(&row, &bounds, &mut flags);
    }
    describe_basis(&mut row, members, &mut flags);
    efficiency(&mut row, members, &mut flags);
    row.flags = flags;
    row
}

fn exact_mean(row: &mut RankRow, exact: &[&Entry], confidence: f64, flags: &mut Vec<Flag>) {
    let p: Vec<f64> = exact.iter().map(|e| crate::units::p_value(e.ki)).collect();
    let n = p.len() as f64;
    let mean = p.iter().sum::<f64>() / n;
    row.pki = Some(mean);
    // A single value is reported as it came, not through the round trip 10^(−log10 x).
    row.ki = Some(if exact.len() == 1 { exact[0].ki } else { 10f64.powf(-mean) });
    if exact.iter().any(|e| e.qualifier == Qualifier::About) {
        flags.push(Flag::new("approximate-input", "at least one value was written as approximate (~)"));
    }
    if p.len() >= 2 {
        let sd = (p.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / (n - 1.0)).sqrt();
        row.pki_sd = Some(sd);
        if let Some(t) = t_quantile(confidence, p.len() - 1) {
            let h = t * sd / n.sqrt();
            row.low = Some(10f64.powf(-(mean + h)));
            row.high = Some(10f64.powf(-(mean - h)));
            row.interval_method =
                Some(format!("{:.0}% t interval of the mean pKi over {} repeats, as Ki", confidence * 100.0, p.len()));
        }
        if sd > SPREAD_LIMIT {
            flags.push(Flag::new(
                "replicates-disagree",
                format!("the repeats spread by SD {sd:.2} in pKi (more than {SPREAD_LIMIT}, about threefold; common practice)"),
            ));
        }
    } else {
        row.low = exact[0].low;
        row.high = exact[0].high;
        row.interval_method = exact[0].interval_method.clone().filter(|_| row.low.is_some() || row.high.is_some());
    }
}

fn check_bounds_against_mean(row: &RankRow, bounds: &[Bounded], flags: &mut Vec<Flag>) {
    if bounds.is_empty() {
        return;
    }
    let Some(mean) = row.ki else { return };
    let disagree: Vec<String> = bounds
        .iter()
        .filter(|b| match b.qualifier {
            Qualifier::Greater | Qualifier::AtLeast => mean < b.value,
            Qualifier::Less | Qualifier::AtMost => mean > b.value,
            _ => false,
        })
        .map(|b| format!("{} {:.3e} M", b.qualifier, b.value))
        .collect();
    flags.push(Flag::new(
        "censored-set-aside",
        format!("{} bound(s) not averaged with the exact values; they are listed beside the mean", bounds.len()),
    ));
    if !disagree.is_empty() {
        flags.push(Flag::new(
            "censored-disagrees",
            format!("the geometric mean contradicts bound(s) {}", disagree.join(", ")),
        ));
    }
}

/// Every value a bound: the tightest bound, a range, or a conflict.
fn all_censored(row: &mut RankRow, bounds: &[Bounded], flags: &mut Vec<Flag>) {
    let tightest = |lower: bool| -> Option<Bounded> {
        bounds
            .iter()
            .copied()
            .filter(|b| matches!(b.qualifier, Qualifier::Greater | Qualifier::AtLeast) == lower)
            .reduce(|a, b| {
                let better = if lower { b.value > a.value } else { b.value < a.value };
                // At equal values the strict bound is the tighter one.
                let strict = |q: Qualifier| matches!(q, Qualifier::Greater | Qualifier::Less);
                if better || (b.value.total_cmp(&a.value).is_eq() && strict(b.qualifier)) { b } else { a }
            })
    };
    let (lower, upper) = (tightest(true), tightest(false));
    flags.push(Flag::new("all-censored", "every value is a bound; the tightest bound is reported"));
    let chosen = match (lower, upper) {
        (Some(l), Some(u)) if l.value < u.value => {
            row.low = Some(l.value);
            row.high = Some(u.value);
            row.interval_method = Some("range left by the tightest lower and upper bounds".into());
            flags.push(Flag::new(
                "censored-range",
                format!("the bounds leave the range {:.3e} to {:.3e} M", l.value, u.value),
            ));
            Some(l)
        }
        (Some(l), Some(u)) => {
            flags.push(Flag::new(
                "censored-conflict",
                format!(
                    "the bounds contradict each other ({} {:.3e} M and {} {:.3e} M); no value is reported",
                    l.qualifier, l.value, u.qualifier, u.value
                ),
            ));
            None
        }
        (l, u) => l.or(u),
    };
    if let Some(b) = chosen {
        row.qualifier = b.qualifier;
        row.ki = Some(b.value);
        row.pki = Some(crate::units::p_value(b.value));
    }
}

fn describe_basis(row: &mut RankRow, members: &[&Entry], flags: &mut Vec<Flag>) {
    row.mechanism = joined_unique(members.iter().map(|e| e.mechanism.as_str()), "; ");
    row.method = joined_unique(members.iter().map(|e| e.method.as_str()), " | ");
    if members.iter().any(|e| e.mechanism.is_empty()) {
        flags.push(Flag::new("mechanism-not-stated", "the input gives no mechanism for some values"));
        if row.mechanism.is_empty() {
            row.mechanism = "not stated".into();
        }
    }
    if members.iter().any(|e| e.method.is_empty()) {
        flags.push(Flag::new("method-not-stated", "the input gives no method for some values"));
        if row.method.is_empty() {
            row.method = "not stated".into();
        }
    }
    if row.method.contains(" | ") {
        flags.push(Flag::new(
            "methods-differ",
            "the values were obtained with different relations; check that they are comparable",
        ));
    }
}

fn efficiency(row: &mut RankRow, members: &[&Entry], flags: &mut Vec<Flag>) {
    let atoms: Vec<f64> = members.iter().filter_map(|e| e.heavy_atoms).collect();
    let Some(&ha) = atoms.first() else { return };
    if atoms.iter().any(|a| (a - ha).abs() > 1e-9) {
        flags.push(Flag::new("heavy-atoms-differ", "the rows disagree on the heavy-atom count; no LE is given"));
        return;
    }
    row.heavy_atoms = Some(ha);
    if let Some(p) = row.pki {
        row.ligand_efficiency = Some(Bounded { qualifier: row.qualifier.reversed(), value: LE_FACTOR * p / ha });
    }
}

/// Which way a bound on a p-scale quantity points: −1 below, +1 above, 0 exact.
fn direction(q: Qualifier) -> i8 {
    match q {
        Qualifier::Less | Qualifier::AtMost => -1,
        Qualifier::Greater | Qualifier::AtLeast => 1,
        _ => 0,
    }
}

/// ΔpKi = pKi(row) − pKi(versus) for every compound measured on both.
fn selectivity(rows: &mut [RankRow], versus: &str) {
    let counter: HashMap<(String, String), (Option<f64>, Qualifier)> = rows
        .iter()
        .filter(|r| r.target == versus)
        .map(|r| ((r.compound.clone(), r.endpoint.clone()), (r.pki, r.qualifier.reversed())))
        .collect();
    for r in rows.iter_mut().filter(|r| r.target != versus) {
        let Some((pv, qv)) = counter.get(&(r.compound.clone(), r.endpoint.clone())) else {
            continue;
        };
        r.versus = Some(versus.to_string());
        let (Some(pa), Some(pv)) = (r.pki, *pv) else { continue };
        let qa = r.qualifier.reversed();
        // ΔpKi inherits pA's direction and the reverse of pV's.
        let (da, dv) = (direction(qa), -direction(*qv));
        let d = match (da, dv) {
            (0, d) | (d, 0) => d,
            (a, b) if a == b => a,
            _ => {
                r.flags.push(Flag::new(
                    "selectivity-undetermined",
                    format!("both pKi values are bounds pointing opposite ways; ΔpKi against {versus} is unknown"),
                ));
                continue;
            }
        };
        let qualifier = match d {
            -1 => Qualifier::Less,
            1 => Qualifier::Greater,
            _ => Qualifier::Equal,
        };
        r.delta_pki = Some(Bounded { qualifier, value: pa - pv });
    }
}
