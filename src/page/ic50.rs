//! The report section of `kimech ic50`.

use super::*;
use crate::error::*;
use crate::plot::ic50::*;

/// The report section of an ic50 run: the summary table (the terminal's, from the view), the plate table when
/// there is one, and the thumbnail grid (flagged first).
pub fn section(
    gallery: &Gallery,
    plates: Option<&crate::view::Grid>,
    failures: &[String],
    command: &str,
) -> Result<Section> {
    let mut blocks = Vec::new();
    if let Some(p) = plates {
        blocks.push(Block::Heading(crate::view::ic50::PLATES_TITLE.into()));
        blocks.push(Block::Table(p.clone()));
    }
    if !gallery.rows.is_empty() {
        blocks.push(Block::Table(crate::page::Table { header: gallery.header.clone(), rows: gallery.rows.clone() }));
    }
    if gallery.rows.len() < gallery.total {
        blocks.push(Block::Paragraph(format!(
            "The table shows the first {} of {} compounds; the command's CSV output has all of them.",
            gallery.rows.len(),
            gallery.total
        )));
    }
    let shown = gallery.shown();
    if !shown.is_empty() {
        let omitted = gallery.total - shown.len();
        let more = if omitted > 0 {
            format!(" {omitted} more curves are not drawn here; --plot DIR writes every one.")
        } else {
            String::new()
        };
        blocks.push(Block::Figure {
            svg: gallery.grid()?.text,
            caption: format!(
                "{} of {} curves on a log-concentration axis, the flagged ones first ({} flagged; flags in their subtitles). Diamonds: IC50 with its interval; open markers with arrows: an IC50 outside the tested range, drawn as a bound.{more}",
                shown.len(),
                gallery.total,
                gallery.total_flagged
            ),
        });
    }
    blocks.push(Block::Failures(failures.to_vec()));
    Ok(Section { heading: "IC50".into(), command: Some(command.to_string()), blocks })
}
