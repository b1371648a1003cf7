//! The Markdown report: the same sections as the HTML report, with each plot as an SVG file
//! written beside the `.md` file and linked by its bare file name.
//!
//! Text from logs is backslash-escaped ([`crate::report::text::md`]), so a series name such
//! as `res_p|k` cannot break a table or start emphasis.

use std::fmt::Write;

use crate::report::ReportInput;
use crate::report::content::{self, Class, Table};
use crate::report::gci;
use crate::report::text::{self, SAFETY, SAFETY_TITLE, md, slug};
use crate::view::words::{self, Piece};

/// Render the report; returns the Markdown and the SVG files it links to, as
/// (file name, content). File names start with `svg_prefix` (for example `wing-a4-`) so
/// several reports can share a folder.
pub fn render_markdown(
    input: &ReportInput<'_>,
    svg_prefix: &str,
) -> (String, Vec<(String, String)>) {
    let j = input.judgement;
    let views = content::series_views(input);
    let monitors = content::monitors(j, &views);
    let mut files = Vec::new();
    let mut m = String::with_capacity(32 * 1024);

    let _ = writeln!(m, "# Convergence report: {}\n", md(&input.run.name));
    let mut facts = vec![format!("**{}**", text::verdict_word(j.verdict))];
    if let Some(s) = text::since_text(j.verdict, j.since) {
        facts.push(md(&s));
    }
    facts.push(md(&format!("last iteration {}", text::iteration(j.iterations))));
    let _ = writeln!(m, "{}\n", facts.join(" · "));
    let _ = writeln!(
        m,
        "Verdict **{}**: {}.\n",
        j.verdict.as_str(),
        md(text::verdict_meaning(j.verdict))
    );
    let _ = writeln!(m, "> **{}.** {}\n", md(SAFETY_TITLE), md(SAFETY));

    m.push_str("## Why\n\n");
    let why = content::why(j, &views);
    if why.is_empty() {
        let _ = writeln!(m, "{}\n", md(content::why_empty(j)));
    } else {
        for (head, detail, ev) in &why {
            let _ = writeln!(m, "- **{}**: {}  \n  {}", md(head), prose(detail), md(ev));
        }
        m.push('\n');
    }

    m.push_str("## Criteria\n\n");
    table(&mut m, &content::criteria_table(j), "No criteria were evaluated.");
    let _ = writeln!(m, "{}\n", md(text::DEFAULTS_NOTE));

    m.push_str("## Residual history\n\n");
    let name = format!("{svg_prefix}residuals.svg");
    let _ = writeln!(m, "![Residual history, log scale]({})\n", link(&name));
    files.push((name, content::residual_svg(input, &views, true)));
    m.push_str(
        "Every residual series on a log scale. Dashed horizontal lines are the criteria \
         thresholds; dotted vertical lines mark restarts.\n\n",
    );
    table(&mut m, &content::residual_table(j), "The judge reported no residual summaries.");

    m.push_str("## Monitors\n\n");
    if monitors.is_empty() {
        m.push_str(
            "No monitors were read. Residuals alone cannot show that the quantities of \
             interest have settled.\n\n",
        );
    } else {
        table(&mut m, &content::monitor_table(&monitors), "");
        for (i, mon) in monitors.iter().enumerate() {
            let name = format!("{svg_prefix}monitor-{}-{}.svg", i + 1, slug(&mon.view.input.name));
            let _ = writeln!(m, "### {}\n", md(&mon.view.input.name));
            let _ = writeln!(m, "![Monitor {}]({})\n", md(&mon.view.input.name), link(&name));
            let _ = writeln!(m, "{}\n", md(&content::monitor_caption(mon)));
            files.push((name, content::monitor_svg(mon, i, true)));
        }
    }

    m.push_str("## Findings\n\n");
    let _ = writeln!(m, "{}\n", md(&content::findings_summary(j)));
    table(&mut m, &content::findings_table(j, &views), "");

    if let Some(study) = input.mesh {
        m.push_str("## Grid convergence\n\n");
        let _ = writeln!(m, "Monitor **{}** on three grids.\n", md(&study.monitor));
        match gci::analyse(study) {
            Ok(r) => {
                table(&mut m, &content::gci_grids_table(&r), "");
                let _ = writeln!(m, "{}\n", md(&content::gci_summary(&r)));
                table(&mut m, &content::gci_results_table(&r), "");
                if r.warnings.is_empty() {
                    m.push_str("No warnings.\n\n");
                } else {
                    m.push_str("**Warnings**\n\n");
                    for w in &r.warnings {
                        let _ = writeln!(m, "- {}", md(&w.to_string()));
                    }
                    m.push('\n');
                }
            }
            Err(e) => {
                let _ = writeln!(m, "**Not analysed:** {}\n", md(&e.to_string()));
            }
        }
        let _ = writeln!(m, "{}\n", md(content::GCI_NOTE));
    }

    m.push_str("## What was read\n\n");
    table(&mut m, &content::sources_table(input), "No sources.");
    let msgs = content::messages_table(input, 12);
    if !msgs.rows.is_empty() {
        m.push_str("### Last warnings and errors from the logs\n\n");
        table(&mut m, &msgs, "");
    }

    m.push_str("## Provenance\n\n");
    for (k, v) in content::provenance_facts(input) {
        let _ = writeln!(m, "- **{}**: {}", md(k), code(&v));
    }
    m.push('\n');
    table(&mut m, &content::parsers_table(input), "No parser definitions recorded.");
    table(&mut m, &content::files_table(input), "No files recorded.");
    m.push_str("### Criteria in effect\n\n");
    table(&mut m, &content::criteria_settings_table(input), "No criteria recorded.");
    let _ = writeln!(
        m,
        "---\n\nWritten by settle {}. A convergence verdict is evidence, not proof of a correct \
         solution; read the note at the top before relying on it.",
        md(&input.provenance.settle_version)
    );
    (m, files)
}

/// A link target: file names are made of safe characters except for the caller's prefix,
/// whose spaces and brackets are percent-encoded.
fn link(name: &str) -> String {
    let mut out = String::with_capacity(name.len());
    for c in text::clean(name) {
        match c {
            ' ' => out.push_str("%20"),
            '(' => out.push_str("%28"),
            ')' => out.push_str("%29"),
            '<' => out.push_str("%3C"),
            '>' => out.push_str("%3E"),
            c => out.push(c),
        }
    }
    out
}

/// Inline code that cannot be closed early by backticks in the text.
fn code(s: &str) -> String {
    let cleaned: String = text::clean(s).collect();
    let longest = cleaned.split(|c| c != '`').map(str::len).max().unwrap_or(0);
    let fence = "`".repeat(longest + 1);
    if cleaned.is_empty() { "(none)".into() } else { format!("{fence} {cleaned} {fence}") }
}

/// A sentence of the judge: text escaped, `` `code` `` spans kept as Markdown code spans.
fn prose(s: &str) -> String {
    words::code_spans(s)
        .into_iter()
        .map(|p| match p {
            Piece::Text(t) => md(t),
            // A `|` would end a table cell even inside a code span.
            Piece::Code(c) if !c.contains('|') => code(c),
            Piece::Code(c) => md(c),
        })
        .collect()
}

fn table(m: &mut String, t: &Table, empty: &str) {
    if t.rows.is_empty() {
        if !empty.is_empty() {
            let _ = writeln!(m, "{}\n", md(empty));
        }
        return;
    }
    let head: Vec<String> = t.head.iter().map(|h| md(h)).collect();
    let _ = writeln!(m, "| {} |", head.join(" | "));
    let rule: Vec<&str> = t
        .rows
        .first()
        .map(|r| {
            r.iter().map(|c| if c.class.css() == Some("num") { "---:" } else { "---" }).collect()
        })
        .unwrap_or_default();
    let _ = writeln!(m, "|{}|", rule.join("|"));
    for row in &t.rows {
        let cells: Vec<String> = row
            .iter()
            .map(|c| if c.class == Class::Prose { prose(&c.text) } else { md(&c.text) })
            .collect();
        let _ = writeln!(m, "| {} |", cells.join(" | "));
    }
    m.push('\n');
}
