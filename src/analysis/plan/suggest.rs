//! Searching for a better grid within a budget of wells.
//!
//! Candidates are built in multiples of the expected constants, the way an
//! assay biologist lays out a matrix (common practice, no single source):
//! substrate levels log-spaced over 0.2–5 × Km or 0.1–10 × Km; inhibitor
//! levels 0 plus a doubling series ending at 2, 4 or 8 × Ki; for each number
//! of replicates (1–3) the shape (4–8 substrate × 3–6 inhibitor levels) that
//! uses most of the budget, preferring more inhibitor levels on a tie. That
//! is at most 18 candidates.
//!
//! Running the full count on every candidate would take minutes, so the
//! search is in two rounds: every candidate is screened with a few
//! simulations per mechanism (common random numbers: simulation k of a
//! mechanism uses the same deviates on every grid, so the comparison is
//! paired), and the best few are rerun at the full count. Ranking: the mean
//! chance of naming the right mechanism, where shares in the same
//! [`TIE_BAND`] count as tied; ties go to the narrower headline Ki interval
//! (geometric mean of the median widths, an open median counting as
//! [`OPEN_WIDTH`]).

use serde::Serialize;

use super::{Constants, Design, PlanResult, PowerRow, Settings, Tick, mean_right, power};
use crate::error::{Error, Result};
use crate::units::sig;

/// Mean chances this close count as tied.
pub const TIE_BAND: f64 = 0.02;

/// The width an open (infinite) median counts as in the tie-break.
pub const OPEN_WIDTH: f64 = 1e6;

/// Substrate spans tried, as multiples of Km.
const SUBSTRATE_SPANS: [(f64, f64); 2] = [(0.2, 5.0), (0.1, 10.0)];

/// Top inhibitor concentrations tried, as multiples of Ki.
const INHIBITOR_TOPS: [f64; 3] = [2.0, 4.0, 8.0];

/// How the search runs.
#[derive(Debug, Clone, Copy)]
pub struct SearchSettings {
    /// The budget: wells per compound.
    pub wells: usize,
    /// Simulations per mechanism in the screening round.
    pub screening: usize,
    /// How many screened candidates are rerun at the full count.
    pub finalists: usize,
}

/// A candidate grid and how it was built.
#[derive(Debug, Clone, PartialEq)]
pub struct Candidate {
    /// The grid.
    pub design: Design,
    /// Substrate span as multiples of Km.
    pub substrate_span: (f64, f64),
    /// Highest inhibitor concentration as a multiple of Ki.
    pub inhibitor_top: f64,
}

/// A proposed grid with its predicted power.
#[derive(Debug, Clone, Serialize)]
pub struct Suggestion {
    /// Substrate concentrations, in Km's unit.
    pub substrate: Vec<f64>,
    /// Inhibitor concentrations, in Ki's unit.
    pub inhibitor: Vec<f64>,
    /// Wells per (S, I) pair.
    pub replicates: usize,
    /// Wells used (≤ the budget).
    pub wells: usize,
    /// One row per true mechanism, at the full simulation count.
    pub power: Vec<PowerRow>,
    /// Mean chance of naming the right mechanism.
    pub mean_right: f64,
    /// The mean chance in the screening round.
    pub screening_mean_right: f64,
    /// What makes it better than the grid given, in words.
    pub reasons: Vec<String>,
}

/// The whole search: what was screened and the best few.
#[derive(Debug, Clone, Serialize)]
pub struct Search {
    /// The budget.
    pub wells: usize,
    /// Candidates screened.
    pub candidates: usize,
    /// Simulations per mechanism in the screening round.
    pub screening_simulations: usize,
    /// The best few, best first.
    pub suggestions: Vec<Suggestion>,
}

/// Three significant digits: levels a pipetting scheme can use.
fn round3(v: f64) -> f64 {
    sig(v, 3).parse().unwrap_or(v)
}

fn log_levels(lo: f64, hi: f64, n: usize) -> Vec<f64> {
    (0..n).map(|k| round3((lo.ln() + (hi / lo).ln() * k as f64 / (n - 1) as f64).exp())).collect()
}

/// For each number of replicates, the shape that uses most of the budget.
fn shapes(wells: usize) -> Vec<(usize, usize, usize)> {
    (1..=3)
        .filter_map(|r| {
            let mut best: Option<(usize, usize, usize)> = None;
            for n_i in 3..=6 {
                for n_s in 4..=8 {
                    let used = n_s * n_i * r;
                    let better = best.is_none_or(|(s, i, _)| used > s * i * r || (used == s * i * r && n_i > i));
                    if used <= wells && better {
                        best = Some((n_s, n_i, r));
                    }
                }
            }
            best
        })
        .collect()
}

/// The candidate grids within `wells`.
pub fn candidates(constants: &Constants, wells: usize) -> Vec<Candidate> {
    let mut out = Vec::new();
    for (n_s, n_i, r) in shapes(wells) {
        for &(lo, hi) in &SUBSTRATE_SPANS {
            for &top in &INHIBITOR_TOPS {
                let substrate = log_levels(lo * constants.km, hi * constants.km, n_s);
                let mut inhibitor = vec![0.0];
                let bottom = top / 2f64.powi(n_i as i32 - 2);
                inhibitor.extend(log_levels(bottom * constants.ki, top * constants.ki, n_i - 1));
                out.push(Candidate {
                    design: Design { substrate, inhibitor, replicates: r },
                    substrate_span: (lo, hi),
                    inhibitor_top: top,
                });
            }
        }
    }
    out
}

/// The tie-break: geometric mean of the median Ki widths (open = [`OPEN_WIDTH`]).
fn width_summary(rows: &[PowerRow]) -> f64 {
    let logs: Vec<f64> = rows
        .iter()
        .filter(|r| r.ki_open.is_some())
        .map(|r| r.ki_width_median.unwrap_or(OPEN_WIDTH).min(OPEN_WIDTH).ln())
        .collect();
    if logs.is_empty() { 1.0 } else { (logs.iter().sum::<f64>() / logs.len() as f64).exp() }
}

/// Orders by mean chance (in bands of [`TIE_BAND`]), then by narrower Ki intervals.
fn rank(rows: &[PowerRow]) -> (i64, f64) {
    (-((mean_right(rows) / TIE_BAND).floor() as i64), width_summary(rows))
}

/// How many matrices [`suggest`] analyses (for a progress bar).
pub fn workload(constants: &Constants, settings: &Settings, search: &SearchSettings) -> u64 {
    let t = super::truths(constants).len() as u64;
    let n = candidates(constants, search.wells).len() as u64;
    t * (n * search.screening as u64 + search.finalists.min(n as usize) as u64 * settings.simulations as u64)
}

/// Searches the candidates within the budget and returns the best few,
/// compared in words with the grid of `base`.
pub fn suggest(base: &PlanResult, settings: &Settings, search: &SearchSettings, tick: &dyn Tick) -> Result<Search> {
    let constants = &base.constants;
    let pool = candidates(constants, search.wells);
    if pool.is_empty() {
        return Err(Error::Data {
            group: "--wells".into(),
            problem: format!("a budget of {} wells", search.wells),
            expected: "at least 12 wells per compound (4 substrate × 3 inhibitor levels, one well each)".into(),
        });
    }
    let mut screened: Vec<(usize, Vec<PowerRow>)> = pool
        .iter()
        .enumerate()
        .map(|(k, c)| (k, power(&c.design, constants, search.screening, settings, tick)))
        .collect();
    screened.sort_by(|a, b| rank(&a.1).partial_cmp(&rank(&b.1)).unwrap_or(std::cmp::Ordering::Equal));
    let mut finals: Vec<Suggestion> = screened
        .iter()
        .take(search.finalists.max(1))
        .map(|(k, rows)| {
            let c = &pool[*k];
            let full = power(&c.design, constants, settings.simulations, settings, tick);
            Suggestion {
                substrate: c.design.substrate.clone(),
                inhibitor: c.design.inhibitor.clone(),
                replicates: c.design.replicates,
                wells: c.design.wells(),
                mean_right: mean_right(&full),
                screening_mean_right: mean_right(rows),
                reasons: reasons(base, c, mean_right(&full)),
                power: full,
            }
        })
        .collect();
    finals.sort_by(|a, b| rank(&a.power).partial_cmp(&rank(&b.power)).unwrap_or(std::cmp::Ordering::Equal));
    Ok(Search {
        wells: search.wells,
        candidates: pool.len(),
        screening_simulations: search.screening,
        suggestions: finals,
    })
}

/// A multiple for people: "0.25", "4", "10" (two significant digits, no trailing zeros).
fn times(v: f64) -> String {
    let s = sig(v, 2);
    if s.contains('.') && !s.contains('e') { s.trim_end_matches('0').trim_end_matches('.').to_string() } else { s }
}

/// What differs between the grid given and a candidate, in words.
fn reasons(base: &PlanResult, c: &Candidate, chance: f64) -> Vec<String> {
    let (km, ki) = (base.constants.km, base.constants.ki);
    let old = &base.design;
    let far = |a: f64, b: f64| a > 1.5 * b || b > 1.5 * a;
    let mut out = Vec::new();
    let old_top = old.inhibitor.iter().cloned().fold(0.0, f64::max) / ki;
    if far(c.inhibitor_top, old_top) {
        let verb = if c.inhibitor_top > old_top { "now reaches" } else { "now stops at" };
        out.push(format!(
            "the inhibitor range {verb} {} × Ki (yours ends at {} × Ki)",
            times(c.inhibitor_top),
            times(old_top)
        ));
    }
    if !old.inhibitor.contains(&0.0) {
        out.push("an uninhibited series (I = 0) is included, which fixes Vmax and Km".into());
    }
    let s_lo = old.substrate.iter().cloned().fold(f64::INFINITY, f64::min) / km;
    let s_hi = old.substrate.iter().cloned().fold(0.0, f64::max) / km;
    let (lo, hi) = c.substrate_span;
    if far(lo, s_lo) || far(hi, s_hi) {
        out.push(format!(
            "the substrate now spans {}–{} × Km (yours {}–{} × Km)",
            times(lo),
            times(hi),
            times(s_lo),
            times(s_hi)
        ));
    }
    let (n_s, n_i, r) = (c.design.substrate.len(), c.design.inhibitor.len(), c.design.replicates);
    if (n_s, n_i, r) != (old.substrate.len(), old.inhibitor.len(), old.replicates) {
        out.push(format!(
            "{n_s} substrate × {n_i} inhibitor levels × {r} replicate(s) = {} wells (yours {} × {} × {} = {})",
            c.design.wells(),
            old.substrate.len(),
            old.inhibitor.len(),
            old.replicates,
            old.wells()
        ));
    }
    out.push(format!("mean chance of naming the right mechanism {:.2} → {:.2}", base.mean_right, chance));
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn multiples_keep_their_digits() {
        assert_eq!(times(10.0), "10");
        assert_eq!(times(0.25), "0.25");
        assert_eq!(times(4.0), "4");
        assert_eq!(times(0.05), "0.05");
    }

    #[test]
    fn candidates_stay_within_the_budget() {
        let c = Constants { vmax: 10.0, km: 20.0, ki: 0.5, alpha: 4.0, partial_beta: None };
        for wells in [12, 30, 48, 60, 96, 200] {
            let pool = candidates(&c, wells);
            assert!(!pool.is_empty());
            assert!(pool.iter().all(|p| p.design.wells() <= wells), "{wells}");
        }
        assert!(candidates(&c, 11).is_empty());
        let pool = candidates(&c, 60);
        // Duplicates of 6 × 5 fill the budget exactly; the top inhibitor level is 2, 4 or 8 × Ki.
        assert!(pool.iter().any(|p| p.design.wells() == 60 && p.design.replicates == 2));
        for p in &pool {
            let top = p.design.inhibitor.last().copied().unwrap_or(0.0);
            assert!((top / c.ki - p.inhibitor_top).abs() < 0.01 * p.inhibitor_top);
            assert!(p.design.inhibitor[0] == 0.0);
        }
    }
}
