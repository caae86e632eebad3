//! The report section of `kimech plan`.

use super::*;
use crate::analysis::plan::*;
use crate::error::*;
use crate::plot::plan::*;
use crate::view::plan::{PlanView, power_table, sensitivity_text};

/// The report section of a plan.
pub fn section(view: &PlanView, command: &str) -> Result<Section> {
    let p = view.plan;
    let mut blocks = vec![
        Block::Paragraph(format!(
            "{} simulated matrices per mechanism (seed {}), each analysed exactly as `kimech mode` analyses a file. \
             Mean chance of naming the right mechanism: {:.2}.",
            p.simulations, p.seed, p.mean_right
        )),
        table(&p.power),
        Block::Figure {
            svg: heatmap(&p.power, "grid given: share of calls")?.text,
            caption: "Rows: the mechanism the rates were drawn from; columns: what mode named; outlined: right.".into(),
        },
    ];
    if !p.sensitivity.is_empty() {
        blocks.push(Block::Heading("If Ki is 3× lower or higher than expected".into()));
        blocks.push(Block::Paragraph(p.sensitivity.iter().map(sensitivity_text).collect::<Vec<_>>().join("; ")));
    }
    if let Some(search) = view.search {
        blocks.push(Block::Heading(format!("Suggested grids within {} wells", search.wells)));
        for (k, s) in search.suggestions.iter().enumerate() {
            blocks.push(Block::Paragraph(format!(
                "{}. substrate {:?}, inhibitor {:?}, {} replicate(s), {} wells — {}",
                k + 1,
                s.substrate,
                s.inhibitor,
                s.replicates,
                s.wells,
                s.reasons.join("; ")
            )));
            blocks.push(table(&s.power));
        }
        if let Some(chart) = grids(view) {
            blocks.push(Block::Figure {
                svg: crate::plot::chart(&chart, crate::plot::PANEL)?.text,
                caption: "The grid given and the best proposal, on log axes.".into(),
            });
        }
    }
    Ok(Section { heading: "Plan: chance of naming the mechanism".into(), command: Some(command.to_string()), blocks })
}

fn table(rows: &[PowerRow]) -> Block {
    let (header, rows) = power_table(rows);
    Block::Table(Table { header, rows })
}
