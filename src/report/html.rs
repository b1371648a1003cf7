//! The HTML report: one self-contained file with inline CSS and inline SVG.
//!
//! No scripts, no fonts, images or style sheets from elsewhere, no links out: the file can be
//! mailed, archived or opened on a machine without network and looks the same. The style sheet
//! prints well (`@media print`) and the page reads in greyscale: states are words and marks,
//! never colour alone.

use std::fmt::Write;

use crate::report::ReportInput;
use crate::report::content::{self, Table};
use crate::report::gci;
use crate::report::text::{self, SAFETY, SAFETY_TITLE, xml};
use crate::view::words::{self, Piece};

const CSS: &str = r#"
:root { color-scheme: light; }
* { box-sizing: border-box; }
body { font-family: system-ui, "Segoe UI", "DejaVu Sans", Helvetica, Arial, sans-serif;
  color: #1a1a1a; background: #ffffff; max-width: 1040px; margin: 0 auto;
  padding: 24px 28px 48px; line-height: 1.45; font-size: 15px; }
h1 { font-size: 1.55em; margin: 0 0 0.4em; }
h2 { font-size: 1.2em; border-bottom: 2px solid #1a1a1a; padding-bottom: 2px; margin: 1.8em 0 0.6em; }
h3 { font-size: 1.02em; margin: 1.2em 0 0.3em; }
p { margin: 0.4em 0; }
.headline { font-size: 1.05em; margin: 0.3em 0; }
.verdict { display: inline-block; font-weight: 700; letter-spacing: 0.08em; padding: 2px 12px;
  border: 3px solid currentColor; border-radius: 4px; font-size: 1.3em; margin-right: 0.5em;
  background: #ffffff; }
.v-converged { color: #0d6a50; }
.v-converging { color: #1b4f9c; border-style: dashed; }
.v-stalled { color: #7a5c00; }
.v-oscillating { color: #6b3f99; border-style: dotted; }
.v-suspect { color: #a34d00; border-style: dotted; }
.v-diverging { color: #a3122f; border-style: double; border-width: 6px; }
.v-stale { color: #4d4d4d; border-style: dashed; }
.meaning { color: #333333; }
.safety { border: 2px solid #1a1a1a; border-left-width: 9px; padding: 10px 14px; margin: 18px 0;
  background: #f3f3f3; }
.safety strong { display: block; margin-bottom: 0.2em; }
ul.why { padding-left: 1.3em; }
ul.why li { margin-bottom: 0.5em; }
.evidence { color: #333333; font-size: 0.92em; }
table { border-collapse: collapse; width: 100%; margin: 0.4em 0 1em; font-size: 0.88em; }
th, td { border: 1px solid #b5b5b5; padding: 4px 7px; text-align: left; vertical-align: top; }
th { background: #ebebeb; font-weight: 600; }
table.findings { font-size: 0.84em; }
table.findings td:last-child { min-width: 13em; }
td.num { text-align: right; font-variant-numeric: tabular-nums; white-space: nowrap; }
td.met { color: #0d6a50; white-space: nowrap; }
td.unmet { color: #a3122f; font-weight: 700; white-space: nowrap; }
code { font-family: "DejaVu Sans Mono", Menlo, Consolas, monospace; font-size: 0.9em;
  background: #f0f0f0; padding: 0 3px; border-radius: 2px; }
table.monitors td.num { white-space: normal; }
.nw { white-space: nowrap; }
table.monitors td:first-child { word-break: break-word; }
td.hash { font-family: "DejaVu Sans Mono", Menlo, Consolas, monospace; font-size: 0.85em;
  word-break: break-all; }
dl.facts { display: grid; grid-template-columns: max-content 1fr; gap: 2px 14px; margin: 0.4em 0 1em; }
dl.facts dt { font-weight: 600; }
dl.facts dd { margin: 0; font-family: "DejaVu Sans Mono", Menlo, Consolas, monospace;
  font-size: 0.9em; word-break: break-all; }
figure { margin: 0.5em 0 1.2em; }
figcaption { font-size: 0.88em; color: #333333; margin-top: 0.2em; }
svg.plot { width: 100%; height: auto; display: block; border: 1px solid #d0d0d0; }
.muted { color: #555555; font-size: 0.9em; }
ul.warnings li { margin-bottom: 0.3em; }
footer { margin-top: 2.5em; border-top: 1px solid #b5b5b5; padding-top: 0.6em; font-size: 0.85em;
  color: #444444; }
@page { margin: 15mm; }
@media print {
  body { max-width: none; padding: 0; font-size: 10pt; }
  h2 { break-after: avoid; }
  table, figure, .safety, ul.why li { break-inside: avoid; }
  .safety { background: none; }
  svg.plot { border: none; }
}
"#;

/// Render the whole report as one HTML document.
pub fn render_html(input: &ReportInput<'_>) -> String {
    let j = input.judgement;
    let views = content::series_views(input);
    let monitors = content::monitors(j, &views);
    let mut h = String::with_capacity(256 * 1024);
    let name = xml(&input.run.name);
    let _ = write!(
        h,
        "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n\
         <meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n\
         <meta name=\"generator\" content=\"settle {}\">\n\
         <title>Convergence report: {name}</title>\n<style>{CSS}</style>\n</head>\n<body>\n",
        xml(&input.provenance.settle_version)
    );

    // Verdict first: the eye meets it before anything else.
    let _ = write!(
        h,
        "<header>\n<h1>Convergence report: {name}</h1>\n<p class=\"headline\">\
         <span class=\"verdict v-{v}\">{word}</span>",
        v = j.verdict.as_str(),
        word = xml(&text::verdict_word(j.verdict)),
    );
    let mut facts = Vec::new();
    if let Some(s) = text::since_text(j.verdict, j.since) {
        facts.push(s);
    }
    facts.push(format!("last iteration {}", text::iteration(j.iterations)));
    let _ = writeln!(h, "{}</p>", xml(&facts.join(" · ")));
    let _ = write!(
        h,
        "<p class=\"meaning\">Verdict <b>{}</b>: {}.</p>\n</header>\n",
        j.verdict.as_str(),
        xml(text::verdict_meaning(j.verdict))
    );
    let _ = writeln!(
        h,
        "<aside class=\"safety\" id=\"safety\"><strong>{}</strong>{}</aside>",
        xml(SAFETY_TITLE),
        xml(SAFETY)
    );

    h.push_str("<section id=\"why\">\n<h2>Why</h2>\n");
    let why = content::why(j, &views);
    if why.is_empty() {
        let _ = writeln!(h, "<p>{}</p>", xml(content::why_empty(j)));
    } else {
        h.push_str("<ul class=\"why\">\n");
        for (head, detail, ev) in &why {
            let _ = writeln!(
                h,
                "<li><b>{}</b>: {}<br><span class=\"evidence\">{}</span></li>",
                xml(head),
                prose(detail),
                xml(ev)
            );
        }
        h.push_str("</ul>\n");
    }
    h.push_str("</section>\n");

    h.push_str("<section id=\"criteria\">\n<h2>Criteria</h2>\n");
    table(&mut h, &content::criteria_table(j), "No criteria were evaluated.");
    let _ = writeln!(h, "<p class=\"muted\">{}</p>", xml(text::DEFAULTS_NOTE));
    h.push_str("</section>\n");

    h.push_str("<section id=\"residuals\">\n<h2>Residual history</h2>\n<figure>\n");
    h.push_str(&content::residual_svg(input, &views, false));
    h.push_str(
        "\n<figcaption>Every residual series on a log scale (iterations along the bottom). \
         Dashed horizontal lines are the criteria thresholds; dotted vertical lines mark \
         restarts. Long histories are drawn as min/max envelopes.</figcaption>\n</figure>\n",
    );
    table(&mut h, &content::residual_table(j), "The judge reported no residual summaries.");
    h.push_str("</section>\n");

    h.push_str("<section id=\"monitors\">\n<h2>Monitors</h2>\n");
    if monitors.is_empty() {
        h.push_str(
            "<p>No monitors were read. Residuals alone cannot show that the quantities of \
             interest have settled.</p>\n",
        );
    } else {
        table(&mut h, &content::monitor_table(&monitors), "");
        h.push_str(
            "<p class=\"muted\">The confidence interval of the mean accounts for \
             autocorrelation; the iterative-error estimate and the extrapolated value come \
             from the ratio of successive differences and appear only for histories that \
             converge geometrically.</p>\n",
        );
        for (i, m) in monitors.iter().enumerate() {
            let _ = writeln!(h, "<h3>{}</h3>\n<figure>", xml(&m.view.input.name));
            h.push_str(&content::monitor_svg(m, i, false));
            let _ = writeln!(
                h,
                "\n<figcaption>{}</figcaption>\n</figure>",
                xml(&content::monitor_caption(m))
            );
        }
    }
    h.push_str("</section>\n");

    h.push_str("<section id=\"findings\">\n<h2>Findings</h2>\n");
    let _ = writeln!(h, "<p>{}</p>", xml(&content::findings_summary(j)));
    table(&mut h, &content::findings_table(j, &views), "");
    h.push_str("</section>\n");

    if let Some(study) = input.mesh {
        h.push_str("<section id=\"grid-convergence\">\n<h2>Grid convergence</h2>\n");
        let _ = writeln!(h, "<p>Monitor <b>{}</b> on three grids.</p>", xml(&study.monitor));
        match gci::analyse(study) {
            Ok(r) => {
                table(&mut h, &content::gci_grids_table(&r), "");
                let _ = writeln!(h, "<p>{}</p>", xml(&content::gci_summary(&r)));
                table(&mut h, &content::gci_results_table(&r), "");
                if r.warnings.is_empty() {
                    h.push_str("<p>No warnings.</p>\n");
                } else {
                    h.push_str("<p><b>Warnings</b></p>\n<ul class=\"warnings\">\n");
                    for w in &r.warnings {
                        let _ = writeln!(h, "<li>{}</li>", xml(&w.to_string()));
                    }
                    h.push_str("</ul>\n");
                }
            }
            Err(e) => {
                let _ = writeln!(h, "<p><b>Not analysed:</b> {}</p>", xml(&e.to_string()));
            }
        }
        let _ = writeln!(h, "<p class=\"muted\">{}</p>", xml(content::GCI_NOTE));
        h.push_str("</section>\n");
    }

    h.push_str("<section id=\"sources\">\n<h2>What was read</h2>\n");
    table(&mut h, &content::sources_table(input), "No sources.");
    let msgs = content::messages_table(input, 12);
    if !msgs.rows.is_empty() {
        h.push_str("<h3>Last warnings and errors from the logs</h3>\n");
        table(&mut h, &msgs, "");
    }
    h.push_str("</section>\n");

    h.push_str("<section id=\"provenance\">\n<h2>Provenance</h2>\n<dl class=\"facts\">\n");
    for (k, v) in content::provenance_facts(input) {
        let _ = writeln!(h, "<dt>{}</dt><dd>{}</dd>", xml(k), xml(&v));
    }
    h.push_str("</dl>\n");
    table(&mut h, &content::parsers_table(input), "No parser definitions recorded.");
    table(&mut h, &content::files_table(input), "No files recorded.");
    h.push_str("<h3>Criteria in effect</h3>\n");
    table(&mut h, &content::criteria_settings_table(input), "No criteria recorded.");
    h.push_str("</section>\n");

    let _ = write!(
        h,
        "<footer>Written by settle {}. A convergence verdict is evidence, not proof of a \
         correct solution; read the note at the top before relying on it.</footer>\n\
         </body>\n</html>\n",
        xml(&input.provenance.settle_version)
    );
    h
}

/// A sentence of the judge, escaped, with its `` `code` `` spans as `<code>`.
/// A number cell, escaped, with each word holding a minus or an exponent kept on one line
/// (`1.08e-21` must not wrap after its `-` in a narrow column).
fn number_text(s: &str) -> String {
    s.split(' ')
        .map(|w| {
            if w.contains('-') && w.chars().any(|c| c.is_ascii_digit()) {
                format!("<span class=\"nw\">{}</span>", xml(w))
            } else {
                xml(w)
            }
        })
        .collect::<Vec<_>>()
        .join(" ")
}

fn prose(s: &str) -> String {
    words::code_spans(s)
        .into_iter()
        .map(|p| match p {
            Piece::Text(t) => xml(t),
            Piece::Code(c) => format!("<code>{}</code>", xml(c)),
        })
        .collect()
}

/// A table, or a sentence when it has no rows.
fn table(h: &mut String, t: &Table, empty: &str) {
    if t.rows.is_empty() {
        if !empty.is_empty() {
            let _ = writeln!(h, "<p>{}</p>", xml(empty));
        }
        return;
    }
    match t.class {
        Some(class) => {
            let _ = write!(h, "<table class=\"{class}\">\n<thead><tr>");
        }
        None => h.push_str("<table>\n<thead><tr>"),
    }
    for c in &t.head {
        let _ = write!(h, "<th>{}</th>", xml(c));
    }
    h.push_str("</tr></thead>\n<tbody>\n");
    for row in &t.rows {
        h.push_str("<tr>");
        for cell in row {
            match cell.class.css() {
                _ if cell.class == content::Class::Prose => {
                    let _ = write!(h, "<td>{}</td>", prose(&cell.text));
                }
                Some(class) if cell.class == content::Class::Num => {
                    let _ = write!(h, "<td class=\"{class}\">{}</td>", number_text(&cell.text));
                }
                Some(class) => {
                    let _ = write!(h, "<td class=\"{class}\">{}</td>", xml(&cell.text));
                }
                None => {
                    let _ = write!(h, "<td>{}</td>", xml(&cell.text));
                }
            }
        }
        h.push_str("</tr>\n");
    }
    h.push_str("</tbody>\n</table>\n");
}
