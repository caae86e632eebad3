//! Pictures and the report section for `kimech rank`: per target and
//! endpoint, compounds by pKi (most potent at the top) with the interval of
//! the mean; censored values (`Ki > 10 uM`) are drawn as bounds — an open
//! marker with an arrow pointing where the value lies — never as points.

use super::charts::{Ranked, ranking_panel};
use super::xy::Direction;
use super::{PANEL, Svg};
use crate::analysis::rank::RankRow;
use crate::error::Result;
use crate::units::Qualifier;

/// pKi of a Ki in mol/L.
fn p(molar: f64) -> Option<f64> {
    (molar > 0.0 && molar.is_finite()).then(|| -molar.log10())
}

/// Which way the true pKi lies for a bounded Ki: Ki > x means pKi < −log x.
fn direction(q: Qualifier) -> Option<Direction> {
    match q {
        Qualifier::Greater | Qualifier::AtLeast => Some(Direction::Below),
        Qualifier::Less | Qualifier::AtMost => Some(Direction::Above),
        _ => None,
    }
}

/// (target, endpoint) groups in order of first appearance, rows kept in rank order.
pub fn groups(rows: &[RankRow]) -> Vec<((String, String), Vec<&RankRow>)> {
    let mut out: Vec<((String, String), Vec<&RankRow>)> = Vec::new();
    for r in rows {
        let key = (r.target.clone(), r.endpoint.clone());
        match out.iter_mut().find(|(k, _)| *k == key) {
            Some((_, v)) => v.push(r),
            None => out.push((key, vec![r])),
        }
    }
    out
}

/// The ranking chart of one group; rows without a pKi (conflicting bounds) are
/// left out and counted in a note.
pub fn group_figure(target: &str, endpoint: &str, rows: &[&RankRow]) -> Result<Svg> {
    let shown: Vec<Ranked> = rows
        .iter()
        .filter_map(|r| {
            let value = r.pki?;
            let bound = direction(r.qualifier);
            let (low, high) = if bound.is_some() { (None, None) } else { (r.high.and_then(p), r.low.and_then(p)) };
            Some(Ranked { label: r.compound.clone(), value, low, high, bound })
        })
        .collect();
    let label = if endpoint.eq_ignore_ascii_case("kiu") { "pKiu" } else { "pKi" };
    let mut panel = ranking_panel(&format!("{target}: compounds by {label}"), &format!("{label} (−log₁₀ M)"), &shown);
    panel.subtitle = Some("most potent at the top; bars: interval of the mean; open markers: bounds".into());
    let hidden = rows.len() - shown.len();
    if hidden > 0 {
        panel.notes.push(format!("{hidden} compound(s) with conflicting bounds have no pKi and are not drawn."));
    }
    let height = (150 + 30 * shown.len().max(1) as u32).max(260);
    super::chart(&panel, (PANEL.0 + 250, height))
}
