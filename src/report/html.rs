//! `report.html`: one self-contained page (inline CSS and SVG, no scripts, no external
//! assets) that a reviewer can read and attach to a review. Every string that came from
//! a plan or log is escaped.

use std::fmt::Write as _;

use super::model::{RunReport, Section, Tone, Verdict, CAUTIONS};

/// Escape text for HTML element content and attribute values; characters XML does not
/// allow are shown as escapes ([`crate::text::xml_text`]).
pub fn escape(s: &str) -> String {
    let s = crate::text::xml_text(s);
    let mut out = String::with_capacity(s.len());
    for c in s.chars() {
        match c {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&#39;"),
            _ => out.push(c),
        }
    }
    out
}

const STYLE: &str = r#"
:root { --ink:#1f2933; --muted:#5f6b7a; --line:#d9dee5; --paper:#fbfaf7; --card:#ffffff;
        --pass:#1d7a4f; --fail:#b3412e; --info:#8a6d1f; --accent:#3b5b92; }
* { box-sizing: border-box; }
body { margin:0; background:var(--paper); color:var(--ink);
       font: 15px/1.45 "DejaVu Sans", "Helvetica Neue", Arial, sans-serif; }
header { background:var(--accent); color:#fff; padding:18px 28px; }
header h1 { margin:0; font-size:22px; font-weight:600; }
header .sub { opacity:.85; margin-top:4px; }
main { max-width:1240px; margin:0 auto; padding:18px 28px 40px; }
.overall { display:flex; align-items:center; gap:14px; margin:6px 0 18px; font-size:17px; }
.badge { display:inline-block; padding:3px 12px; border-radius:4px; font-weight:700;
         letter-spacing:.04em; color:#fff; border:2px solid transparent; }
.badge.pass { background:var(--pass); }
.badge.fail { background:var(--fail); }
.badge.info { background:var(--info); }
.badge.inconclusive { background:var(--info); }
section.check { background:var(--card); border:1px solid var(--line); border-radius:6px;
                padding:16px 20px; margin:0 0 20px; }
section.check > h2 { margin:0 0 10px; font-size:19px; display:flex; gap:12px; align-items:center; }
dl.merit { display:grid; grid-template-columns: max-content 1fr; gap:4px 18px; margin:6px 0 12px; }
dl.merit dt { color:var(--muted); }
dl.merit dd { margin:0; font-variant-numeric: tabular-nums; }
table { border-collapse:collapse; margin:8px 0 14px; font-variant-numeric: tabular-nums; }
caption { text-align:left; color:var(--muted); padding-bottom:4px; }
th, td { border-bottom:1px solid var(--line); padding:4px 12px 4px 0; text-align:left; }
th { font-weight:600; }
td.good { color:var(--pass); font-weight:600; }
td.warn { color:var(--info); font-weight:600; }
td.bad { color:var(--fail); font-weight:700; }
ul.warnings { border-left:4px solid var(--info); padding:6px 6px 6px 26px; background:#fdf7e8; }
ul.notes { color:var(--muted); }
.figs { display:flex; flex-wrap:wrap; gap:14px; }
figure { margin:0; border:1px solid var(--line); border-radius:4px; padding:6px; background:#fff; }
figure svg { display:block; max-width:100%; height:auto; }
figcaption { color:var(--muted); font-size:13px; padding:4px 2px 0; max-width:440px; }
footer { border-top:1px solid var(--line); margin-top:26px; padding-top:12px; color:var(--muted); font-size:13px; }
footer code { font-size:12px; }
"#;

fn badge(v: Verdict) -> String {
    let class = match v {
        Verdict::Pass => "pass",
        Verdict::Fail => "fail",
        Verdict::Inconclusive => "inconclusive",
        Verdict::NoLimit => "info",
    };
    format!("<span class=\"badge {class}\">{}</span>", v.word())
}

fn section_html(s: &Section, out: &mut String) {
    let _ = writeln!(
        out,
        "<section class=\"check\" id=\"{}\"><h2>{} {}</h2>",
        escape(&s.kind),
        escape(&s.title),
        // What a run assumed has no verdict of its own.
        if s.kind == super::sections::assumptions::KIND {
            String::new()
        } else {
            badge(s.verdict)
        }
    );
    if !s.figures_of_merit.is_empty() {
        out.push_str("<dl class=\"merit\">");
        for (k, v) in &s.figures_of_merit {
            let v = super::model::drop_negative_zero(v);
            let _ = write!(out, "<dt>{}</dt><dd>{}</dd>", escape(k), escape(&v));
        }
        out.push_str("</dl>\n");
    }
    for t in &s.tables {
        out.push_str("<table>");
        if !t.caption.is_empty() {
            let _ = write!(out, "<caption>{}</caption>", escape(&t.caption));
        }
        out.push_str("<thead><tr>");
        for h in &t.header {
            let _ = write!(out, "<th>{}</th>", escape(h));
        }
        out.push_str("</tr></thead><tbody>");
        for row in &t.rows {
            out.push_str("<tr>");
            for c in row {
                let class = match c.tone {
                    Tone::Plain => "",
                    Tone::Good => " class=\"good\"",
                    Tone::Warn => " class=\"warn\"",
                    Tone::Bad => " class=\"bad\"",
                };
                let text = super::model::drop_negative_zero(&c.text);
                let _ = write!(out, "<td{class}>{}</td>", escape(&text));
            }
            out.push_str("</tr>");
        }
        out.push_str("</tbody></table>\n");
    }
    if !s.warnings.is_empty() {
        out.push_str("<ul class=\"warnings\">");
        for w in &s.warnings {
            let _ = write!(out, "<li>{}</li>", escape(w));
        }
        out.push_str("</ul>\n");
    }
    if !s.notes.is_empty() {
        out.push_str("<ul class=\"notes\">");
        for n in &s.notes {
            let _ = write!(out, "<li>{}</li>", escape(n));
        }
        out.push_str("</ul>\n");
    }
    if !s.figures.is_empty() {
        out.push_str("<div class=\"figs\">");
        for f in &s.figures {
            // The SVG is our own plotter's output; its text nodes are already escaped.
            let _ = write!(
                out,
                "<figure>{}<figcaption>{}</figcaption></figure>",
                strip_xml_prolog(&f.svg),
                escape(&f.caption)
            );
        }
        out.push_str("</div>\n");
    }
    out.push_str("</section>\n");
}

fn strip_xml_prolog(svg: &str) -> &str {
    match svg.find("<svg") {
        Some(i) => &svg[i..],
        None => svg,
    }
}

/// Render the whole report as one HTML document.
pub fn render(report: &RunReport) -> String {
    let mut out = String::with_capacity(64 * 1024);
    out.push_str("<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">");
    let _ = write!(out, "<title>{}</title>", escape(&report.title));
    let _ = write!(
        out,
        "<style>{STYLE}</style></head><body>\n<header><h1>{}</h1>",
        escape(&report.title)
    );
    if let Some((serial, build)) = &report.article {
        let _ = write!(
            out,
            "<div class=\"sub\">serial {} · build {}</div>",
            escape(serial),
            escape(build)
        );
    }
    out.push_str("</header>\n<main>\n");
    let _ = writeln!(
        out,
        "<div class=\"overall\">Overall verdict {}</div>",
        badge(report.verdict())
    );
    for s in &report.sections {
        section_html(s, &mut out);
    }
    out.push_str("<footer>\n<p><strong>Cautions.</strong></p><ul>");
    for c in CAUTIONS {
        let _ = write!(out, "<li>{}</li>", escape(c));
    }
    out.push_str("</ul>\n");
    let _ = write!(
        out,
        "<p>Made by magproof {} at {} (UTC).</p>",
        escape(&report.tool_version),
        escape(&report.generated_at)
    );
    if !report.inputs.is_empty() {
        out.push_str("<p>Inputs (SHA-256):</p><ul>");
        for i in &report.inputs {
            let _ = write!(
                out,
                "<li><code>{}</code> {}</li>",
                escape(&i.sha256),
                escape(&i.path)
            );
        }
        out.push_str("</ul>");
    }
    out.push_str("\n</footer>\n</main></body></html>\n");
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::report::model::{Cell, InputFile, Table};

    fn report_with(text: &str) -> RunReport {
        RunReport {
            title: format!("Closeout {text}"),
            article: Some((text.to_string(), "B1".into())),
            generated_at: "2026-12-02T00:00:00Z".into(),
            tool_version: "0.1.0".into(),
            inputs: vec![InputFile {
                path: text.to_string(),
                sha256: "ab".into(),
            }],
            result: serde_json::Value::Null,
            sections: vec![Section {
                kind: "polarity".into(),
                title: text.to_string(),
                verdict: Verdict::Fail,
                figures_of_merit: vec![(text.to_string(), text.to_string())],
                tables: vec![Table {
                    caption: text.to_string(),
                    header: vec![text.to_string()],
                    rows: vec![vec![Cell::toned(text, Tone::Bad)]],
                }],
                figures: vec![],
                warnings: vec![text.to_string()],
                notes: vec![],
                result: serde_json::Value::Null,
            }],
        }
    }

    #[test]
    fn plan_strings_are_escaped_everywhere() {
        let html = render(&report_with("<script>alert(1)</script>"));
        assert!(!html.contains("<script>"), "unescaped script tag");
        assert!(html.contains("&lt;script&gt;alert(1)&lt;/script&gt;"));
    }

    #[test]
    fn verdicts_are_words_and_cautions_are_in_the_footer() {
        let html = render(&report_with("QX-7"));
        assert!(html.contains(">FAIL</span>"));
        assert!(html.contains("verification authority"));
        assert!(html.contains("pacemakers"));
        assert!(!html.contains("<script"));
        // Self-contained: nothing is loaded from elsewhere.
        assert!(!html.contains("src=") && !html.contains("href=") && !html.contains("@import"));
    }
}
