//! The demo's plan stage: what `plan` predicts for the demo's rate-matrix
//! design, next to what `mode` finds on the bundled matrix.

use crate::analysis::plan::{Noise, Settings};
use crate::batch::plan::{Request, compute, parse_levels};
use crate::error::{Error, Result};
use crate::units::{ConcUnit, ConcentrationArg};

/// The demo's plan stage: `plan` for the design of the demo's rate matrix
/// (demo-compounds/make_rate_matrix.py: VRD7, Km = 12 uM, Vmax = 85 nM/min;
/// KX-201's grid, Ki = 40 nM: S = 2–100 uM, I = 0 and 0.5–8 × Ki, duplicates),
/// printed next to what `mode` finds on the bundled matrix. The noise there is
/// 4 % of the rate plus 0.3 nM/min and `mode` runs unweighted, so the plan
/// takes a constant SD of 1.5 nM/min (≈ 4 % of a mid-range rate).
pub fn plan_stage(matrix_csv: &str, sections: &mut Vec<crate::page::Section>) -> Result<()> {
    let command = "kimech plan --km \"12 uM\" --ki \"40 nM\" --alpha 6 --vmax 85 --substrate \"2,4,7,12,20,35,60,100 uM\" \
                   --inhibitor \"0,20,40,80,160,320 nM\" --replicates 2 --noise 1.5 --simulations 40 \
                   --sensitivity-simulations 0";
    println!("\nStage 3c — before the experiment: how often should `mode` name each mechanism on this design?");
    println!("  $ {command}\n");
    let mode = crate::analysis::mode::Options::default();
    let settings = Settings { simulations: 40, sensitivity_simulations: 0, seed: 1, noise: Noise::Constant(1.5), mode };
    let request = Request {
        km: ConcentrationArg { molar: 12e-6, unit: ConcUnit::Micromolar },
        ki: ConcentrationArg { molar: 40e-9, unit: ConcUnit::Nanomolar },
        alpha: 6.0,
        vmax: 85.0,
        partial: None,
        substrate: parse_levels("2,4,7,12,20,35,60,100 uM").map_err(Error::Usage)?,
        inhibitor: parse_levels("0,20,40,80,160,320 nM").map_err(Error::Usage)?,
        replicates: 2,
        settings,
        search: None,
    };
    let outcome = compute(&request)?;
    let table = crate::io::Table::parse("demo-compounds/rate-matrix.csv", matrix_csv.as_bytes(), b',')?;
    let found = crate::batch::mode::process(&table, &crate::batch::mode::Settings::default())?;
    // The compounds of the demo matrix and the mechanism each was made with.
    let made = [
        ("KX-205", "none"),
        ("KX-201", "competitive"),
        ("KX-202", "uncompetitive"),
        ("KX-203", "noncompetitive"),
        ("KX-204", "mixed"),
    ];
    let mut grid = crate::view::Grid::new(
        ["made as", "plan: named right", "plan: uncertain", "compound", "mode named"].map(String::from).to_vec(),
    );
    for row in &outcome.plan.power {
        let compound = made.iter().find(|(_, m)| *m == row.truth.name()).map_or("", |(c, _)| c);
        let named = found
            .pairs
            .iter()
            .find(|(r, _)| r.compound.as_deref() == Some(compound))
            .map_or("not analysed".to_string(), |(r, _)| r.chosen.clone());
        grid.rows.push(vec![
            row.truth.name().to_string(),
            format!("{:.2}", row.right),
            format!("{:.2}", row.uncertain),
            compound.to_string(),
            named,
        ]);
    }
    println!("{}", grid.terminal());
    println!(
        "  (KX-202…204 were measured on this grid scaled to their own constant, α = 6 as KX-204; \
         KX-205 at 0–10 uM, where Ki plays no part.)"
    );
    let mut section = crate::page::plan::section(&outcome.view(), command)?;
    section.blocks.push(crate::page::Block::Table(grid));
    sections.push(section);
    Ok(())
}
