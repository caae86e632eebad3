//! Aggregation and ranking of Ki results per compound and target.
//!
//! Repeats are averaged on the log scale: mean and sample SD (n − 1) of pKi,
//! and the geometric-mean Ki = 10^(−mean pKi). From three values on, the
//! interval of that geometric mean comes from the t distribution of the mean
//! pKi, mean ± t(n − 1)·SD/√n (Student 1908). Below three it does not: with one
//! degree of freedom t(0.975; 1) = 12.7 turns two values a factor two apart
//! into an interval spanning ten orders of magnitude, which tells a chemist
//! nothing. Two values give the range of the two instead, and a single value
//! keeps the interval it came with; `interval_method` says which.
//!
//! Censoring (a Ki written as `> x` or `< x`) is handled without inventing
//! numbers: when exact values exist they alone are averaged and the bounds
//! are reported beside them (and flagged when they disagree with the mean);
//! when every value is a bound the tightest one is reported (the largest
//! lower bound, the smallest upper bound); lower and upper bounds together
//! give a range, or a conflict when they cross. An approximate value (`~x`)
//! is averaged like an exact one and makes the result approximate.
//!
//! Selectivity against a counter-target T: ΔpKi = pKi(target) − pKi(T), a
//! bound when either side is. Ligand efficiency LE = 1.37·pKi / heavy atoms
//! in kcal/mol per heavy atom (1.37 ≈ 2.303·RT at about 298 K; Hopkins, Groom
//! & Alex, Drug Discov. Today 9, 430–431, 2004).
//!
//! Memory: [`Aggregator`] keeps one small accumulator per compound × target ×
//! endpoint (running mean and sum of squares by Welford's update, Technometrics
//! 4, 419–420, 1962; the tightest bounds; at most [`LISTED`] values, assays and
//! source lines), never the rows, so a file of millions of rows needs memory in
//! proportion to its groups. Repeated text (targets, methods, conditions) is
//! stored once.

use crate::report::Code;
use std::collections::HashMap;

use serde::Serialize;

use crate::fit::intervals::t_quantile;
use crate::units::Qualifier;

/// kcal/mol per log10 unit at about 298 K (2.303·RT), as used for LE.
pub const LE_FACTOR: f64 = 1.37;

/// pKi spread above which repeats are flagged (common practice: half a log unit, about threefold).
pub const SPREAD_LIMIT: f64 = 0.5;

/// At most this many individual values, assay ids, source lines and distinct
/// conditions are listed per group (a registry cell listing thousands of
/// repeats helps nobody, and the cap keeps memory per group bounded); `n` and
/// `n_censored` always count all of them.
pub const LISTED: usize = 50;

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

/// One Ki measurement as read (or a row that could not be read, with `error` set).
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Entry {
    /// File the row came from.
    pub file: String,
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
    /// The Ki, mol/L (ignored when `error` is set).
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
    /// Assay id (empty when not given).
    pub assay: String,
    /// Why this row has no usable Ki; such a row still gives its compound a registry row.
    pub error: Option<String>,
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
    /// 1-based rank by pKi within target and endpoint (most potent first); null without a value.
    pub rank: Option<usize>,
    /// Compound.
    pub compound: String,
    /// Target.
    pub target: String,
    /// `Ki` or `Kiu`.
    pub endpoint: String,
    /// Qualifier of `ki`: `=` exact, `~` approximate, or the direction of a bound.
    pub qualifier: Qualifier,
    /// Geometric-mean Ki, or the tightest bound; mol/L. `None` when there is no value (see `error`).
    pub ki: Option<f64>,
    /// Mean pKi (or the bound).
    pub pki: Option<f64>,
    /// Qualifier of `pki`: that of `ki` with a bound's direction reversed.
    pub pki_qualifier: Qualifier,
    /// Sample SD of pKi over the exact values (n ≥ 2).
    pub pki_sd: Option<f64>,
    /// Exact (and approximate) values averaged.
    pub n: usize,
    /// Bounds in the group.
    pub n_censored: usize,
    /// The bounds as written (qualifier and Ki in mol/L), at most [`LISTED`].
    pub censored: Vec<Bounded>,
    /// Every value of the group as written, in input order (at most [`LISTED`]), mol/L.
    pub values: Vec<Bounded>,
    /// Assay id of each of `values` (empty where the input gave none).
    pub assays: Vec<String>,
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
    /// Why there is no value (every row failed, or the bounds conflict); null otherwise.
    pub error: Option<String>,
    /// Input lines aggregated (failed ones included), at most [`LISTED`].
    pub lines: Vec<u64>,
    /// Where the rows came from: `file:line,line; file:line`.
    pub source: String,
}

/// Text stored once and referred to by index.
#[derive(Debug, Default)]
struct Names {
    index: HashMap<String, u32>,
    text: Vec<String>,
}

impl Names {
    fn id(&mut self, s: &str) -> u32 {
        if let Some(&i) = self.index.get(s) {
            return i;
        }
        let i = self.text.len() as u32;
        self.text.push(s.to_string());
        self.index.insert(s.to_string(), i);
        i
    }

    fn get(&self, i: u32) -> &str {
        &self.text[i as usize]
    }
}

/// Pushes `v` unless present or the list is full.
fn add_unique(list: &mut Vec<u32>, v: u32) {
    if list.len() < LISTED && !list.contains(&v) {
        list.push(v);
    }
}

/// A single exact value with the interval it came with (ki, low, high, interval method).
type Single = (f64, Option<f64>, Option<f64>, Option<u32>);

/// The running state of one compound × target × endpoint.
#[derive(Debug)]
struct Group {
    compound: u32,
    target: u32,
    endpoint: u32,
    /// Exact and approximate values: count, running mean and sum of squared deviations of pKi.
    n: usize,
    mean: f64,
    m2: f64,
    approximate: bool,
    /// The first exact value with its own interval.
    single: Option<Single>,
    min_exact: f64,
    max_exact: f64,
    lower: Option<Bounded>,
    upper: Option<Bounded>,
    n_censored: usize,
    values: Vec<Bounded>,
    assays: Vec<u32>,
    /// (file, line) of every row, at most LISTED.
    sources: Vec<(u32, u32)>,
    flags: Vec<u32>,
    mechanisms: Vec<u32>,
    methods: Vec<u32>,
    conditions: Vec<u32>,
    mechanism_missing: bool,
    method_missing: bool,
    heavy_atoms: Option<f64>,
    atoms_differ: bool,
    failed: usize,
    first_error: Option<String>,
}

/// Aggregates entries as they are read: memory grows with the number of
/// groups, not rows (see the module docs).
#[derive(Debug, Default)]
pub struct Aggregator {
    names: Names,
    index: HashMap<(u32, u32, u32), usize>,
    groups: Vec<Group>,
}

impl Aggregator {
    /// An empty aggregator.
    pub fn new() -> Aggregator {
        Aggregator::default()
    }

    /// Number of groups so far.
    pub fn groups(&self) -> usize {
        self.groups.len()
    }

    /// Adds one entry (a failed one too: it keeps its compound in the output).
    pub fn add(&mut self, e: &Entry) {
        let key = (self.names.id(&e.compound), self.names.id(&e.target), self.names.id(&e.endpoint));
        let i = match self.index.get(&key) {
            Some(&i) => i,
            None => {
                self.groups.push(Group::new(key));
                self.index.insert(key, self.groups.len() - 1);
                self.groups.len() - 1
            }
        };
        let file = self.names.id(&e.file);
        let g = &mut self.groups[i];
        if g.sources.len() < LISTED {
            g.sources.push((file, u32::try_from(e.line).unwrap_or(u32::MAX)));
        }
        if let Some(message) = &e.error {
            g.failed += 1;
            if g.first_error.is_none() {
                g.first_error = Some(message.clone());
            }
            return;
        }
        g.add_value(e);
        let assay = self.names.id(&e.assay);
        let interval_method = e.interval_method.as_deref().map(|m| self.names.id(m));
        let g = &mut self.groups[i];
        if g.assays.len() < LISTED {
            g.assays.push(assay);
        }
        if g.n == 1 && !e.qualifier.is_bound() && g.single.is_none() {
            g.single = Some((e.ki, e.low, e.high, interval_method));
        }
        for f in &e.flags {
            let id = self.names.id(f);
            add_unique(&mut self.groups[i].flags, id);
        }
        let mechanism = (!e.mechanism.is_empty()).then(|| self.names.id(&e.mechanism));
        let method = (!e.method.is_empty()).then(|| self.names.id(&e.method));
        let conditions = (!e.conditions.is_empty()).then(|| self.names.id(without_ic50(&e.conditions)));
        let g = &mut self.groups[i];
        match mechanism {
            Some(m) => add_unique(&mut g.mechanisms, m),
            None => g.mechanism_missing = true,
        }
        match method {
            Some(m) => add_unique(&mut g.methods, m),
            None => g.method_missing = true,
        }
        if let Some(c) = conditions {
            add_unique(&mut g.conditions, c);
        }
        if let Some(ha) = e.heavy_atoms {
            match g.heavy_atoms {
                None => g.heavy_atoms = Some(ha),
                Some(a) if (a - ha).abs() > 1e-9 => g.atoms_differ = true,
                Some(_) => {}
            }
        }
    }

    /// Aggregates, ranks and adds selectivity: every row at once (see [`Aggregator::rank`]).
    pub fn finish(self, options: &Options) -> Vec<RankRow> {
        self.rank(options).rows().collect()
    }

    /// Ranks the groups. Groups keep first-appearance order of targets; within
    /// a target and endpoint, rows are sorted by pKi, most potent first; rows
    /// without a value come last, unranked. Rows are built one at a time by
    /// [`Ranking::rows`], so the ranking holds only the groups.
    pub fn rank(self, options: &Options) -> Ranking {
        let headlines: Vec<(Option<f64>, Qualifier)> = self.groups.iter().map(Group::headline).collect();
        let mut place: HashMap<(u32, u32), usize> = HashMap::new();
        for g in &self.groups {
            let next = place.len();
            place.entry((g.target, g.endpoint)).or_insert(next);
        }
        let mut order: Vec<usize> = (0..self.groups.len()).collect();
        let names = &self.names;
        let groups = &self.groups;
        order.sort_by(|&a, &b| {
            let (ga, gb) = (&groups[a], &groups[b]);
            let ((pa, qa), (pb, qb)) = (headlines[a], headlines[b]);
            place[&(ga.target, ga.endpoint)]
                .cmp(&place[&(gb.target, gb.endpoint)])
                .then_with(|| pb.unwrap_or(f64::NEG_INFINITY).total_cmp(&pa.unwrap_or(f64::NEG_INFINITY)))
                .then_with(|| qa.is_bound().cmp(&qb.is_bound()))
                .then_with(|| names.get(ga.compound).cmp(names.get(gb.compound)))
        });
        let mut ranks = Vec::with_capacity(order.len());
        let mut previous = None;
        let mut rank = 0;
        for &i in &order {
            let key = (groups[i].target, groups[i].endpoint);
            rank = if previous == Some(key) { rank + 1 } else { 1 };
            previous = Some(key);
            ranks.push((i, headlines[i].0.map(|_| rank)));
        }
        let counter = options.versus.as_ref().map(|versus| {
            let id = names.index.get(versus.as_str()).copied();
            let values: HashMap<(u32, u32), (Option<f64>, Qualifier)> = groups
                .iter()
                .zip(&headlines)
                .filter(|(g, _)| Some(g.target) == id)
                .map(|(g, &(p, q))| ((g.compound, g.endpoint), (p, q.reversed())))
                .collect();
            (versus.clone(), id, values)
        });
        Ranking { names: self.names, groups: self.groups, order: ranks, counter, confidence: options.confidence }
    }
}

/// Ranked groups; [`Ranking::rows`] builds the output rows one at a time.
#[derive(Debug)]
pub struct Ranking {
    names: Names,
    groups: Vec<Group>,
    /// Group index and rank, in output order.
    order: Vec<(usize, Option<usize>)>,
    /// Counter-target name, its id, and its (pKi, pKi qualifier) per compound and endpoint.
    counter: Option<Counter>,
    confidence: f64,
}

type Counter = (String, Option<u32>, HashMap<(u32, u32), (Option<f64>, Qualifier)>);

impl Ranking {
    /// Number of rows.
    pub fn len(&self) -> usize {
        self.order.len()
    }

    /// Whether there are no rows.
    pub fn is_empty(&self) -> bool {
        self.order.is_empty()
    }

    /// The distinct targets, sorted.
    pub fn targets(&self) -> Vec<&str> {
        let mut t: Vec<&str> = self.groups.iter().map(|g| self.names.get(g.target)).collect();
        t.sort_unstable();
        t.dedup();
        t
    }

    /// The rows in output order, each built when asked for.
    pub fn rows(&self) -> impl Iterator<Item = RankRow> + '_ {
        self.order.iter().map(|&(i, rank)| {
            let g = &self.groups[i];
            let mut row = g.row(&self.names, self.confidence);
            row.rank = rank;
            if let Some((versus, id, values)) = &self.counter
                && Some(g.target) != *id
                && let Some(&counter) = values.get(&(g.compound, g.endpoint))
            {
                selectivity(&mut row, versus, counter);
            }
            row
        })
    }
}

/// The conditions text of `kimech ki` starts with the row's own IC50, which
/// the registry lists in `values`; without it, repeats share one conditions text.
fn without_ic50(conditions: &str) -> &str {
    match conditions.strip_prefix("IC50 = ") {
        Some(rest) => rest.split_once("; ").map_or("", |(_, r)| r),
        None => conditions,
    }
}

/// Aggregates a whole list of entries (see [`Aggregator`]).
pub fn aggregate(entries: &[Entry], options: &Options) -> Vec<RankRow> {
    let mut a = Aggregator::new();
    for e in entries {
        a.add(e);
    }
    a.finish(options)
}

impl Group {
    fn new((compound, target, endpoint): (u32, u32, u32)) -> Group {
        Group {
            compound,
            target,
            endpoint,
            n: 0,
            mean: 0.0,
            m2: 0.0,
            approximate: false,
            single: None,
            min_exact: f64::INFINITY,
            max_exact: f64::NEG_INFINITY,
            lower: None,
            upper: None,
            n_censored: 0,
            values: Vec::new(),
            assays: Vec::new(),
            sources: Vec::new(),
            flags: Vec::new(),
            mechanisms: Vec::new(),
            methods: Vec::new(),
            conditions: Vec::new(),
            mechanism_missing: false,
            method_missing: false,
            heavy_atoms: None,
            atoms_differ: false,
            failed: 0,
            first_error: None,
        }
    }

    /// The pKi and qualifier the row will have (as [`Group::row`] computes them), for ranking.
    fn headline(&self) -> (Option<f64>, Qualifier) {
        if self.n > 0 {
            return (Some(self.mean), if self.approximate { Qualifier::About } else { Qualifier::Equal });
        }
        let chosen = match (self.lower, self.upper) {
            (Some(l), Some(u)) if l.value < u.value => Some(l),
            (Some(_), Some(_)) => None,
            (l, u) => l.or(u),
        };
        chosen.map_or((None, Qualifier::Equal), |b| (Some(crate::units::p_value(b.value)), b.qualifier))
    }

    /// Counts a value: Welford's update for an exact one, the tightest bound for a bound.
    fn add_value(&mut self, e: &Entry) {
        if self.values.len() < LISTED {
            self.values.push(Bounded { qualifier: e.qualifier, value: e.ki });
        }
        let b = Bounded { qualifier: e.qualifier, value: e.ki };
        match e.qualifier {
            Qualifier::Greater | Qualifier::AtLeast => {
                self.n_censored += 1;
                self.lower = Some(tighter(self.lower, b, true));
            }
            Qualifier::Less | Qualifier::AtMost => {
                self.n_censored += 1;
                self.upper = Some(tighter(self.upper, b, false));
            }
            Qualifier::Equal | Qualifier::About => {
                self.approximate |= e.qualifier == Qualifier::About;
                let p = crate::units::p_value(e.ki);
                self.n += 1;
                let delta = p - self.mean;
                self.mean += delta / self.n as f64;
                self.m2 += delta * (p - self.mean);
                self.min_exact = self.min_exact.min(e.ki);
                self.max_exact = self.max_exact.max(e.ki);
            }
        }
    }

    /// The finished row.
    fn row(&self, names: &Names, confidence: f64) -> RankRow {
        let text =
            |list: &[u32], separator: &str| list.iter().map(|&i| names.get(i)).collect::<Vec<_>>().join(separator);
        let mut flags: Vec<Flag> =
            self.flags.iter().map(|&f| Flag::new(names.get(f), "carried from the input")).collect();
        let mut row = RankRow {
            rank: None,
            compound: names.get(self.compound).to_string(),
            target: names.get(self.target).to_string(),
            endpoint: names.get(self.endpoint).to_string(),
            qualifier: Qualifier::Equal,
            ki: None,
            pki: None,
            pki_qualifier: Qualifier::Equal,
            pki_sd: None,
            n: self.n,
            n_censored: self.n_censored,
            censored: self.values.iter().copied().filter(|b| b.qualifier.is_bound()).collect(),
            values: self.values.clone(),
            assays: self.assays.iter().map(|&a| names.get(a).to_string()).collect(),
            low: None,
            high: None,
            interval_method: None,
            mechanism: text(&self.mechanisms, "; "),
            method: text(&self.methods, " | "),
            flags: Vec::new(),
            conditions: text(&self.conditions, " | "),
            heavy_atoms: None,
            ligand_efficiency: None,
            versus: None,
            delta_pki: None,
            error: None,
            lines: self.sources.iter().map(|&(_, l)| u64::from(l)).collect(),
            source: source_text(&self.sources, names),
        };
        if self.n > 0 {
            self.exact_mean(&mut row, names, confidence, &mut flags);
            self.check_bounds_against_mean(&row, &mut flags);
        } else if self.n_censored > 0 {
            self.all_censored(&mut row, &mut flags);
        } else {
            row.error = Some(match (&self.first_error, self.failed) {
                (Some(e), 1) => e.clone(),
                (Some(e), k) => format!("none of the {k} rows could be used; the first: {e}"),
                (None, _) => "no rows".into(),
            });
        }
        if self.failed > 0 && (self.n > 0 || self.n_censored > 0) {
            flags.push(Flag::new(
                Code::RowsFailed,
                format!(
                    "{} row(s) of this compound had no usable Ki and are left out; the first: {}",
                    self.failed,
                    self.first_error.as_deref().unwrap_or("")
                ),
            ));
        }
        row.pki_qualifier = row.qualifier.reversed();
        self.describe_basis(&mut row, &mut flags);
        self.efficiency(&mut row, &mut flags);
        row.flags = without_repeats(flags);
        row
    }

    fn exact_mean(&self, row: &mut RankRow, names: &Names, confidence: f64, flags: &mut Vec<Flag>) {
        let n = self.n as f64;
        row.pki = Some(self.mean);
        row.qualifier = if self.approximate { Qualifier::About } else { Qualifier::Equal };
        if self.approximate {
            flags.push(Flag::new(Code::ApproximateInput, "at least one value was written as approximate (~)"));
        }
        match (self.n, self.single) {
            // A single value is reported as it came, not through the round trip 10^(−log10 x).
            (1, Some((ki, low, high, method))) => {
                row.ki = Some(ki);
                row.low = low;
                row.high = high;
                if low.is_some() || high.is_some() {
                    let own = method.map_or("as given in the input", |m| names.get(m));
                    row.interval_method = Some(format!("single value: its own interval ({own})"));
                }
            }
            _ => row.ki = Some(10f64.powf(-self.mean)),
        }
        if self.n == 2 {
            row.low = Some(self.min_exact);
            row.high = Some(self.max_exact);
            row.interval_method = Some("range of the 2 values (no t interval from fewer than 3 values)".to_string());
        }
        if self.n >= 2 {
            let sd = (self.m2.max(0.0) / (n - 1.0)).sqrt();
            row.pki_sd = Some(sd);
            if self.n >= 3
                && let Some(t) = t_quantile(confidence, self.n - 1)
            {
                let h = t * sd / n.sqrt();
                row.low = Some(10f64.powf(-(self.mean + h)));
                row.high = Some(10f64.powf(-(self.mean - h)));
                row.interval_method = Some(format!(
                    "{:.0}% t interval of the mean pKi over {} values, as Ki",
                    confidence * 100.0,
                    self.n
                ));
            }
            if sd > SPREAD_LIMIT {
                flags.push(Flag::new(
                    Code::ReplicatesDisagree,
                    format!(
                        "the repeats spread by SD {sd:.2} in pKi (more than {SPREAD_LIMIT}, about threefold; common practice)"
                    ),
                ));
            }
        }
    }

    fn check_bounds_against_mean(&self, row: &RankRow, flags: &mut Vec<Flag>) {
        if self.n_censored == 0 {
            return;
        }
        let Some(mean) = row.ki else { return };
        let contradicts = |b: &Bounded| match b.qualifier {
            Qualifier::Greater | Qualifier::AtLeast => mean < b.value,
            Qualifier::Less | Qualifier::AtMost => mean > b.value,
            _ => false,
        };
        flags.push(Flag::new(
            Code::CensoredSetAside,
            format!("{} bound(s) not averaged with the exact values; they are listed beside the mean", self.n_censored),
        ));
        let disagree: Vec<String> = [self.lower, self.upper]
            .into_iter()
            .flatten()
            .filter(contradicts)
            .map(|b| format!("{} {:.3e} M", b.qualifier, b.value))
            .collect();
        if !disagree.is_empty() {
            flags.push(Flag::new(
                Code::CensoredDisagrees,
                format!("the geometric mean contradicts bound(s) {}", disagree.join(", ")),
            ));
        }
    }

    /// Every value a bound: the tightest bound, a range, or a conflict.
    fn all_censored(&self, row: &mut RankRow, flags: &mut Vec<Flag>) {
        flags.push(Flag::new(Code::AllCensored, "every value is a bound; the tightest bound is reported"));
        let chosen = match (self.lower, self.upper) {
            (Some(l), Some(u)) if l.value < u.value => {
                row.low = Some(l.value);
                row.high = Some(u.value);
                row.interval_method = Some("range left by the tightest lower and upper bounds".into());
                flags.push(Flag::new(
                    Code::CensoredRange,
                    format!("the bounds leave the range {:.3e} to {:.3e} M", l.value, u.value),
                ));
                Some(l)
            }
            (Some(l), Some(u)) => {
                let message = format!(
                    "the bounds contradict each other ({} {:.3e} M and {} {:.3e} M); no value is reported",
                    l.qualifier, l.value, u.qualifier, u.value
                );
                flags.push(Flag::new(Code::CensoredConflict, message.clone()));
                row.error = Some(message);
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

    fn describe_basis(&self, row: &mut RankRow, flags: &mut Vec<Flag>) {
        if self.n + self.n_censored == 0 {
            return;
        }
        if self.mechanism_missing {
            flags.push(Flag::new(Code::MechanismNotStated, "the input gives no mechanism for some values"));
            if row.mechanism.is_empty() {
                row.mechanism = "not stated".into();
            }
        }
        if self.method_missing {
            flags.push(Flag::new(Code::MethodNotStated, "the input gives no method for some values"));
            if row.method.is_empty() {
                row.method = "not stated".into();
            }
        }
        if self.methods.len() > 1 {
            flags.push(Flag::new(
                Code::MethodsDiffer,
                "the values were obtained with different relations; check that they are comparable",
            ));
        }
    }

    fn efficiency(&self, row: &mut RankRow, flags: &mut Vec<Flag>) {
        let Some(ha) = self.heavy_atoms else { return };
        if self.atoms_differ {
            flags.push(Flag::new(Code::HeavyAtomsDiffer, "the rows disagree on the heavy-atom count; no LE is given"));
            return;
        }
        row.heavy_atoms = Some(ha);
        if let Some(p) = row.pki {
            row.ligand_efficiency = Some(Bounded { qualifier: row.pki_qualifier, value: LE_FACTOR * p / ha });
        }
    }
}

/// One flag per code: where the aggregation says in words what a carried code
/// means here, that sentence replaces "carried from the input".
fn without_repeats(flags: Vec<Flag>) -> Vec<Flag> {
    let mut out: Vec<Flag> = Vec::with_capacity(flags.len());
    for f in flags {
        match out.iter_mut().find(|g| g.code == f.code) {
            Some(g) if g.message == "carried from the input" => g.message = f.message,
            Some(_) => {}
            None => out.push(f),
        }
    }
    out
}

/// The tighter of two bounds on the same side; at equal values the strict bound.
fn tighter(current: Option<Bounded>, b: Bounded, lower: bool) -> Bounded {
    let Some(a) = current else { return b };
    let better = if lower { b.value > a.value } else { b.value < a.value };
    let strict = |q: Qualifier| matches!(q, Qualifier::Greater | Qualifier::Less);
    if better || (b.value.total_cmp(&a.value).is_eq() && strict(b.qualifier) && !strict(a.qualifier)) { b } else { a }
}

/// `ki.csv:2,3; other.csv:7` from (file, line) pairs in input order.
fn source_text(sources: &[(u32, u32)], names: &Names) -> String {
    let mut parts: Vec<(u32, Vec<String>)> = Vec::new();
    for &(file, line) in sources {
        match parts.iter_mut().find(|(f, _)| *f == file) {
            Some((_, lines)) => lines.push(line.to_string()),
            None => parts.push((file, vec![line.to_string()])),
        }
    }
    parts.iter().map(|(f, lines)| format!("{}:{}", names.get(*f), lines.join(","))).collect::<Vec<_>>().join("; ")
}

/// Which way a bound on a p-scale quantity points: −1 below, +1 above, 0 exact.
fn direction(q: Qualifier) -> i8 {
    match q {
        Qualifier::Less | Qualifier::AtMost => -1,
        Qualifier::Greater | Qualifier::AtLeast => 1,
        _ => 0,
    }
}

/// ΔpKi = pKi(row) − pKi(versus), for a compound measured on both;
/// `counter` is the counter-target's (pKi, pKi qualifier).
fn selectivity(r: &mut RankRow, versus: &str, (pv, qv): (Option<f64>, Qualifier)) {
    r.versus = Some(versus.to_string());
    let (Some(pa), Some(pv)) = (r.pki, pv) else { return };
    let qa = r.pki_qualifier;
    // ΔpKi inherits pA's direction and the reverse of pV's.
    let (da, dv) = (direction(qa), -direction(qv));
    let d = match (da, dv) {
        (0, d) | (d, 0) => d,
        (a, b) if a == b => a,
        _ => {
            r.flags.push(Flag::new(
                Code::SelectivityUndetermined,
                format!(
                    "pKi is {qa} {pa:.2} here and {qv} {pv:.2} on {versus}: two bounds on the same side leave their difference open both ways, so ΔpKi against {versus} is unknown"
                ),
            ));
            return;
        }
    };
    let qualifier = match (d, qa == Qualifier::About || qv == Qualifier::About) {
        (-1, _) => Qualifier::Less,
        (1, _) => Qualifier::Greater,
        (_, true) => Qualifier::About,
        _ => Qualifier::Equal,
    };
    r.delta_pki = Some(Bounded { qualifier, value: pa - pv });
}
