//! Terminal summary: compact, within 80 columns, verdicts as words; colour only on a
//! terminal and never when `NO_COLOR` is set (no-color.org convention).

use std::fmt::Write as _;
use std::io::IsTerminal;

use super::model::{Cell, RunReport, Section, Tone, Verdict};

/// Width the summary keeps within.
pub const WIDTH: usize = 80;

/// Whether to colour the output.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Style {
    /// Emit ANSI colour codes.
    pub color: bool,
}

impl Style {
    /// Colour when stdout is a terminal and `NO_COLOR` is unset or empty.
    pub fn detect() -> Self {
        let no_color = std::env::var_os("NO_COLOR").is_some_and(|v| !v.is_empty());
        Style {
            color: !no_color && std::io::stdout().is_terminal(),
        }
    }

    /// Plain text, no colour.
    pub fn plain() -> Self {
        Style { color: false }
    }

    fn paint(&self, text: &str, tone: Tone) -> String {
        if !self.color {
            return text.to_string();
        }
        let code = match tone {
            Tone::Plain => return text.to_string(),
            Tone::Good => "32",
            Tone::Warn => "33",
            Tone::Bad => "1;31",
        };
        format!("\x1b[{code}m{text}\x1b[0m")
    }

    /// A verdict word, coloured if allowed.
    pub fn verdict(&self, v: Verdict) -> String {
        let tone = match v {
            Verdict::Pass => Tone::Good,
            Verdict::Fail => Tone::Bad,
            Verdict::Inconclusive | Verdict::NoLimit => Tone::Warn,
        };
        self.paint(&format!("[{}]", v.word()), tone)
    }
}

/// Format `value ± sigma unit`, with the value rounded to the sigma's second significant
/// digit (common practice for reporting measurements).
pub fn value_sigma(value: f64, sigma: f64, unit: &str) -> String {
    let d = decimals_for(sigma);
    format!("{value:.d$} ± {sigma:.d$} {unit}")
}

/// Decimals that show two significant digits of `sigma` (0..=9).
pub fn decimals_for(sigma: f64) -> usize {
    if !(sigma.is_finite() && sigma > 0.0) {
        return 3;
    }
    let mag = sigma.abs().log10().floor() as i32;
    (1 - mag).clamp(0, 9) as usize
}

fn truncate(s: &str, width: usize) -> String {
    if s.chars().count() <= width {
        s.to_string()
    } else {
        let mut t: String = s.chars().take(width.saturating_sub(1)).collect();
        t.push('…');
        t
    }
}

/// Wrap text to `width` columns with an indent on every line.
pub fn wrap(text: &str, indent: &str, width: usize) -> String {
    let mut out = String::new();
    let mut line = String::from(indent);
    for word in text.split_whitespace() {
        if line.chars().count() + word.chars().count() + 1 > width && !line.trim().is_empty() {
            out.push_str(line.trim_end());
            out.push('\n');
            line = String::from(indent);
        }
        if !line.trim().is_empty() {
            line.push(' ');
        }
        line.push_str(word);
    }
    if !line.trim().is_empty() {
        out.push_str(line.trim_end());
        out.push('\n');
    }
    out
}

/// Render one section.
pub fn render_section(s: &Section, style: &Style) -> String {
    let s = &printable_section(s);
    let mut out = String::new();
    let head = format!("{} ", s.title);
    let verdict = style.verdict(s.verdict);
    let pad = WIDTH.saturating_sub(head.chars().count() + s.verdict.word().len() + 2);
    let _ = writeln!(out, "{head}{}{verdict}", "─".repeat(pad.max(1)));
    let label_w = s
        .figures_of_merit
        .iter()
        .map(|(l, _)| l.chars().count())
        .max()
        .unwrap_or(0)
        .min(30);
    for (label, value) in &s.figures_of_merit {
        let line = format!("  {label:<label_w$}  {value}");
        let _ = writeln!(out, "{}", truncate(&line, WIDTH));
    }
    for t in &s.tables {
        out.push('\n');
        out.push_str(&render_table(t, style));
    }
    for w in &s.warnings {
        out.push_str(&style.paint(&wrap(&format!("! {w}"), "  ", WIDTH), Tone::Warn));
    }
    for n in &s.notes {
        out.push_str(&wrap(&format!("· {n}"), "  ", WIDTH));
    }
    out
}

fn render_table(t: &super::model::Table, style: &Style) -> String {
    let cols = t.header.len();
    let mut widths: Vec<usize> = t.header.iter().map(|h| h.chars().count()).collect();
    for row in &t.rows {
        for (k, c) in row.iter().enumerate().take(cols) {
            widths[k] = widths[k].max(c.text.chars().count());
        }
    }
    // Keep within the width: shrink the widest column first (its cells wrap).
    while widths.iter().sum::<usize>() + 2 * cols + 2 > WIDTH {
        let Some((k, _)) = widths.iter().enumerate().max_by_key(|(_, w)| **w) else {
            break;
        };
        if widths[k] <= 6 {
            break;
        }
        widths[k] -= 1;
    }
    let mut out = String::new();
    if !t.caption.is_empty() {
        out.push_str(&wrap(&t.caption, "  ", WIDTH));
    }
    let heads: Vec<Cell> = t.header.iter().map(|h| Cell::plain(h.as_str())).collect();
    for row in std::iter::once(&heads).chain(&t.rows) {
        // A cell longer than its column wraps onto further lines of the row.
        let cells: Vec<Vec<String>> = row
            .iter()
            .enumerate()
            .take(cols)
            .map(|(k, c)| wrap_cell(&c.text, widths[k]))
            .collect();
        let height = cells.iter().map(Vec::len).max().unwrap_or(1);
        for i in 0..height {
            let mut line = String::from("  ");
            for (k, c) in row.iter().enumerate().take(cols) {
                let part = cells[k].get(i).map_or("", String::as_str);
                let text = format!("{part:<w$}", w = widths[k]);
                let _ = write!(line, "{}  ", style.paint(&text, c.tone));
            }
            let _ = writeln!(out, "{}", line.trim_end());
        }
    }
    out
}

/// A cell's text cut into lines of at most `width` characters, at spaces where it can
/// (a word longer than the width is cut).
fn wrap_cell(text: &str, width: usize) -> Vec<String> {
    let mut lines = Vec::new();
    let mut line = String::new();
    for word in text.split(' ') {
        let mut word: Vec<char> = word.chars().collect();
        loop {
            let used = line.chars().count();
            let sep = usize::from(used > 0);
            if used + sep + word.len() <= width {
                if sep == 1 {
                    line.push(' ');
                }
                line.extend(word.iter());
                break;
            }
            if used > 0 {
                lines.push(std::mem::take(&mut line));
                continue;
            }
            let rest = word.split_off(width.min(word.len()).max(1));
            lines.push(word.into_iter().collect());
            word = rest;
            if word.is_empty() {
                break;
            }
        }
    }
    if !line.is_empty() || lines.is_empty() {
        lines.push(line);
    }
    lines
}

/// Render a whole report for the terminal.
pub fn render(report: &RunReport, style: &Style) -> String {
    let report = &printable_report(report);
    let mut out = String::new();
    if let Some((serial, build)) = &report.article {
        let _ = writeln!(out, "{} · serial {serial} · build {build}", report.title);
    } else {
        let _ = writeln!(out, "{}", report.title);
    }
    // The summary leaves the echoed assumptions to the HTML report.
    let shown: Vec<&Section> = report
        .sections
        .iter()
        .filter(|s| s.kind != super::sections::assumptions::KIND)
        .collect();
    for s in &shown {
        out.push('\n');
        out.push_str(&render_section(s, style));
    }
    if shown.len() > 1 {
        let _ = writeln!(out, "\nOverall {}", style.verdict(report.verdict()));
    }
    out
}

pub use crate::text::printable;

fn printable_section(s: &Section) -> Section {
    let p = |v: &[String]| v.iter().map(|x| printable(x)).collect::<Vec<_>>();
    Section {
        kind: printable(&s.kind),
        title: printable(&s.title),
        verdict: s.verdict,
        figures_of_merit: s
            .figures_of_merit
            .iter()
            .map(|(k, v)| {
                (
                    printable(k),
                    printable(&super::model::drop_negative_zero(v)),
                )
            })
            .collect(),
        tables: s
            .tables
            .iter()
            .map(|t| super::model::Table {
                caption: printable(&t.caption),
                header: p(&t.header),
                rows: t
                    .rows
                    .iter()
                    .map(|r| {
                        r.iter()
                            .map(|c| super::model::Cell {
                                text: printable(&super::model::drop_negative_zero(&c.text)),
                                tone: c.tone,
                            })
                            .collect()
                    })
                    .collect(),
            })
            .collect(),
        figures: Vec::new(),
        warnings: p(&s.warnings),
        notes: p(&s.notes),
        result: serde_json::Value::Null,
    }
}

fn printable_report(r: &RunReport) -> RunReport {
    RunReport {
        title: printable(&r.title),
        article: r
            .article
            .as_ref()
            .map(|(s, b)| (printable(s), printable(b))),
        generated_at: r.generated_at.clone(),
        tool_version: r.tool_version.clone(),
        inputs: Vec::new(),
        result: serde_json::Value::Null,
        sections: r.sections.iter().map(printable_section).collect(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::report::model::{Cell, Table};

    #[test]
    fn value_sigma_keeps_two_significant_digits_of_sigma() {
        assert_eq!(value_sigma(-1530.04, 2.34, "nT"), "-1530.0 ± 2.3 nT");
        assert_eq!(
            value_sigma(0.0012345, 0.000056, "A·m²"),
            "0.001234 ± 0.000056 A·m²"
        );
        assert_eq!(value_sigma(48210.0, 12.0, "nT"), "48210 ± 12 nT");
    }

    #[test]
    fn section_fits_80_columns_and_has_no_colour_when_plain() {
        let s = Section {
            kind: "calibrate".into(),
            title: "Magnetometer calibration".into(),
            verdict: Verdict::Fail,
            figures_of_merit: vec![("hard iron".into(), "x".repeat(200))],
            tables: vec![Table {
                caption: "rods".into(),
                header: vec![
                    "rod".into(),
                    "verdict".into(),
                    "a very long heading".repeat(5),
                ],
                rows: vec![vec![
                    Cell::plain("x"),
                    Cell::toned("reversed", Tone::Bad),
                    Cell::plain("y".repeat(120)),
                ]],
            }],
            figures: vec![],
            warnings: vec!["w ".repeat(100)],
            notes: vec![],
            result: serde_json::Value::Null,
        };
        let text = render_section(&s, &Style::plain());
        for line in text.lines() {
            assert!(line.chars().count() <= WIDTH, "too wide: {line:?}");
        }
        assert!(!text.contains('\x1b'));
        assert!(text.contains("[FAIL]"));
        assert!(text.contains("reversed"));
        assert!(
            text.contains(&"y".repeat(30)),
            "a long cell wraps, it is not cut"
        );
    }

    #[test]
    fn a_cell_wraps_at_spaces_and_cuts_only_a_word_longer_than_the_column() {
        assert_eq!(
            wrap_cell("+0.00258 ± 0.00003 A·m² (94.3σ)", 20),
            ["+0.00258 ± 0.00003", "A·m² (94.3σ)"]
        );
        assert_eq!(wrap_cell("abcdefgh", 3), ["abc", "def", "gh"]);
        assert_eq!(wrap_cell("", 5), [""]);
    }
}
