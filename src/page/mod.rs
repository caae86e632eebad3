//! The HTML report: one self-contained page with the tables, warnings,
//! notes and figures of a run.
//!
//! Self-contained means the page loads nothing: the CSS is in a `<style>`
//! element, the figures are inline SVG (without their XML namespace, which
//! HTML implies), the fonts are whatever the reader's system has, and there
//! is no script. Every piece of text from the input (series ids, labels) is
//! escaped, so an id such as `<b>` shows as written.
//!
//! Each command's section is in its own file here, assembled from the views' tables and
//! text (`crate::view`) and the charts (`crate::plot`, which draws charts only).

pub mod ic50;
pub mod ki;
pub mod km;
pub mod mode;
pub mod onset;
pub mod plan;
pub mod rank;

/// A whole report page.
#[derive(Debug, Clone, Default)]
pub struct Page {
    /// The page title and top heading.
    pub title: String,
    /// Paragraphs under the heading (what the run was, on what data).
    pub intro: Vec<String>,
    /// One section per command run.
    pub sections: Vec<Section>,
    /// The caution the page ends with ([`crate::view::CAUTION`]).
    pub caution: String,
}

/// One command's results.
#[derive(Debug, Clone, Default)]
pub struct Section {
    /// Section heading.
    pub heading: String,
    /// The command line that produced it, shown as code.
    pub command: Option<String>,
    /// The content, in order.
    pub blocks: Vec<Block>,
}

/// A piece of a section.
#[derive(Debug, Clone)]
pub enum Block {
    /// A sub-heading (one per series or compound).
    Heading(String),
    /// A paragraph of plain text.
    Paragraph(String),
    /// A table.
    Table(Table),
    /// Warnings: (code, message).
    Warnings(Vec<(String, String)>),
    /// Errors of groups that could not be analysed.
    Failures(Vec<String>),
    /// Notes in words (errors, ranges and flags of rows already in a table), as a list.
    Notes(Vec<String>),
    /// A figure: inline SVG and a caption.
    Figure {
        /// The SVG document as the chart functions return it.
        svg: String,
        /// What the figure shows.
        caption: String,
    },
}

/// A table: header cells and rows of text cells — the views' [`Grid`], so
/// the report shows what the terminal shows.
pub use crate::view::Grid as Table;

/// A report's parts (from a view) as page blocks: the title as a heading, lines
/// as paragraphs, tables as tables, warnings gathered into one list.
pub fn blocks_of(parts: &[crate::view::Part]) -> Vec<Block> {
    use crate::view::Part;
    let mut blocks = Vec::new();
    let mut warnings = Vec::new();
    for part in parts {
        match part {
            Part::Title(t) => blocks.push(Block::Heading(t.clone())),
            Part::TitleWith { title, finding } => {
                blocks.push(Block::Heading(title.clone()));
                blocks.push(Block::Paragraph(finding.clone()));
            }
            Part::Line(t) => blocks.push(Block::Paragraph(t.clone())),
            Part::Table(g) => blocks.push(Block::Table(g.clone())),
            Part::Warning { code, message } => warnings.push((code.clone(), message.clone())),
        }
    }
    blocks.push(Block::Warnings(warnings));
    blocks
}

/// Escapes text for HTML element content and attribute values.
pub fn escape(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    for c in text.chars() {
        match c {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&#39;"),
            c => out.push(c),
        }
    }
    out
}

/// kimech's report look: a narrow reading column, a blue rule at each
/// section, tables with hairlines only, warnings on a pale vermilion edge.
const CSS: &str = r#"
:root { --ink: #263238; --muted: #6a7074; --rule: #d9d5ce; --accent: #0072b2; --flag: #b34a00; }
* { box-sizing: border-box; }
body { margin: 0; background: #fbfaf7; color: var(--ink);
  font: 15px/1.5 system-ui, "Segoe UI", "Helvetica Neue", Arial, sans-serif; }
main { max-width: 1180px; margin: 0 auto; padding: 28px 32px 48px; }
h1 { font-size: 26px; margin: 0 0 6px; letter-spacing: -0.01em; }
h2 { font-size: 20px; margin: 36px 0 10px; padding-left: 12px; border-left: 5px solid var(--accent); }
h3 { font-size: 16px; margin: 26px 0 8px; }
p.lede { color: var(--muted); margin: 4px 0; }
code, .code { font-family: ui-monospace, "SFMono-Regular", Menlo, Consolas, monospace; font-size: 13px; }
pre.command { background: #fff; border: 1px solid var(--rule); border-radius: 4px; padding: 8px 12px;
  overflow-x: auto; margin: 8px 0 14px; }
pre.table { background: #fff; border: 1px solid var(--rule); padding: 8px 12px; overflow-x: auto;
  font: 12.5px/1.35 ui-monospace, "SFMono-Regular", Menlo, Consolas, monospace; }
table { border-collapse: collapse; margin: 8px 0 12px; background: #fff; }
th, td { padding: 4px 14px 4px 0; text-align: left; }
th { font-weight: 600; border-bottom: 1px solid var(--ink); }
tr:last-child td { border-bottom: 1px solid var(--rule); }
td.num { text-align: right; font-variant-numeric: tabular-nums; }
ul.warnings { list-style: none; padding: 0; margin: 8px 0; }
ul.warnings li { border-left: 4px solid var(--flag); background: #fdf1ea; padding: 6px 10px; margin: 4px 0; }
ul.warnings code { color: var(--flag); font-weight: 600; margin-right: 6px; }
ul.failures li { color: var(--flag); }
figure { margin: 12px 0 20px; background: #fff; border: 1px solid var(--rule); border-radius: 4px; padding: 8px; }
figure svg { display: block; max-width: 100%; height: auto; }
figcaption { color: var(--muted); font-size: 13px; margin-top: 6px; }
.caution { margin-top: 36px; padding: 12px 16px; border: 1px solid var(--ink); background: #fff; }
"#;

/// Renders the page as one HTML document.
pub fn render(page: &Page) -> String {
    let mut out = String::new();
    out.push_str("<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n");
    out.push_str("<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n");
    out.push_str(&format!("<title>{}</title>\n<style>{CSS}</style>\n</head>\n<body>\n<main>\n", escape(&page.title)));
    out.push_str(&format!("<h1>{}</h1>\n", escape(&page.title)));
    let provenance = crate::io::provenance::current();
    if let Some(p) = &provenance {
        render_provenance(&mut out, p);
    }
    for p in &page.intro {
        out.push_str(&format!("<p class=\"lede\">{}</p>\n", escape(p)));
    }
    // A page of one command shows that command as it was typed, with every option.
    let typed = provenance.as_ref().filter(|_| page.sections.len() == 1).map(|p| shell_words(&p.command));
    for section in &page.sections {
        match &typed {
            Some(command) => render_section(&mut out, &Section { command: Some(command.clone()), ..section.clone() }),
            None => render_section(&mut out, section),
        }
    }
    out.push_str(&format!("<p class=\"caution\"><strong>Caution.</strong> {}</p>\n", escape(&page.caution)));
    out.push_str("</main>\n</body>\n</html>\n");
    out
}

/// The provenance record as a table at the top of the page (the same as the JSON's).
fn render_provenance(out: &mut String, p: &crate::io::provenance::Provenance) {
    out.push_str("<table class=\"provenance\">\n<caption>Provenance</caption>\n<tbody>\n");
    let row = |out: &mut String, key: &str, value: String| {
        out.push_str(&format!("<tr><th scope=\"row\">{key}</th><td>{value}</td></tr>\n"));
    };
    row(out, "tool", escape(&p.tool));
    row(out, "command", format!("<code>{}</code>", escape(&shell_words(&p.command))));
    row(out, "started (UTC)", escape(&p.started));
    for input in &p.inputs {
        row(
            out,
            "input",
            format!(
                "<code>{}</code> — {} bytes, SHA-256 <code>{}</code>",
                escape(&input.path),
                input.bytes,
                escape(&input.sha256)
            ),
        );
    }
    out.push_str("</tbody>\n</table>\n");
}

/// argv as one line a shell would read back: words with spaces or shell
/// characters in single quotes.
pub fn shell_words(argv: &[String]) -> String {
    argv.iter()
        .map(|w| {
            let plain = !w.is_empty()
                && w.chars().all(|c| c.is_ascii_alphanumeric() || "-_./=:,+@%".contains(c) || !c.is_ascii());
            if plain { w.clone() } else { format!("'{}'", w.replace('\'', "'\\''")) }
        })
        .collect::<Vec<_>>()
        .join(" ")
}

fn render_section(out: &mut String, section: &Section) {
    out.push_str(&format!("<section>\n<h2>{}</h2>\n", escape(&section.heading)));
    if let Some(c) = &section.command {
        out.push_str(&format!("<pre class=\"command\"><code>$ {}</code></pre>\n", escape(c)));
    }
    for block in &section.blocks {
        render_block(out, block);
    }
    out.push_str("</section>\n");
}

fn render_block(out: &mut String, block: &Block) {
    match block {
        Block::Heading(h) => out.push_str(&format!("<h3>{}</h3>\n", escape(h))),
        Block::Paragraph(p) => out.push_str(&format!("<p>{}</p>\n", escape(p))),
        Block::Table(t) => render_table(out, t),
        Block::Warnings(ws) if !ws.is_empty() => {
            out.push_str("<ul class=\"warnings\">\n");
            for (code, message) in ws {
                out.push_str(&format!("<li><code>{}</code>{}</li>\n", escape(code), escape(message)));
            }
            out.push_str("</ul>\n");
        }
        Block::Failures(fs) if !fs.is_empty() => {
            out.push_str("<p>Could not be analysed:</p>\n<ul class=\"failures\">\n");
            for f in fs {
                out.push_str(&format!("<li>{}</li>\n", escape(f)));
            }
            out.push_str("</ul>\n");
        }
        Block::Notes(ns) if !ns.is_empty() => {
            out.push_str("<ul class=\"notes\">\n");
            for n in ns {
                out.push_str(&format!("<li>{}</li>\n", escape(n)));
            }
            out.push_str("</ul>\n");
        }
        Block::Warnings(_) | Block::Failures(_) | Block::Notes(_) => {}
        Block::Figure { svg, caption } => {
            out.push_str("<figure>\n");
            out.push_str(&crate::plot::inline(svg));
            out.push_str(&format!("<figcaption>{}</figcaption>\n</figure>\n", escape(caption)));
        }
    }
}

/// A cell that reads as a number (digits, sign, exponent, "—") is right-aligned.
fn is_numeric(cell: &str) -> bool {
    let t = cell.trim();
    !t.is_empty()
        && t.chars().any(|c| c.is_ascii_digit())
        && t.chars().all(|c| c.is_ascii_digit() || matches!(c, '.' | '-' | '+' | 'e' | 'E' | '−' | '<' | '>' | ' '))
}

fn render_table(out: &mut String, t: &Table) {
    out.push_str("<div class=\"scroll\"><table>\n<thead><tr>");
    for h in &t.header {
        out.push_str(&format!("<th>{}</th>", escape(h)));
    }
    out.push_str("</tr></thead>\n<tbody>\n");
    for row in &t.rows {
        out.push_str("<tr>");
        for cell in row {
            let class = if is_numeric(cell) { " class=\"num\"" } else { "" };
            out.push_str(&format!("<td{class}>{}</td>", escape(cell)));
        }
        out.push_str("</tr>\n");
    }
    out.push_str("</tbody>\n</table></div>\n");
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn escapes_input_text() {
        let page = Page {
            title: "a <b> & c".into(),
            sections: vec![Section {
                heading: "<script>x</script>".into(),
                blocks: vec![Block::Table(Table { header: vec!["id".into()], rows: vec![vec!["\"q\"".into()]] })],
                ..Section::default()
            }],
            ..Page::default()
        };
        let html = render(&page);
        assert!(!html.contains("<script"));
        assert!(html.contains("a &lt;b&gt; &amp; c"));
        assert!(html.contains("&quot;q&quot;"));
    }
}
