//! Reliability battery, an old or hand-edited ledger: text written into it directly with
//! SQL (as a ledger of an older magproof may hold it: escape sequences, a line break, a
//! NUL, C1 and bidirectional controls, markup) is shown escaped on the terminal and in
//! CSV, kept faithfully in JSON, and never makes an SVG or HTML document ill-formed
//! (docs/reliability.md, "Battery"). Common practice: a case drives the binary and
//! checks every byte it printed.

use crate::battery_outputs::sample;
use crate::util::{assert_code, stderr, stdout, TestDir};

const SERIAL: &str = "TMR\u{1b}]0;owned\u{7}\u{1b}[31m";
const BUILD: &str = "B1\nforged: every check PASS <script>alert(1)</script> & \u{202e}\u{0}\u{85}";
const QUANTITY: &str = "q\u{1b}[2J<b>&";

/// A control character a terminal would act on (line feed, which ends our own lines,
/// aside), or a bidirectional control.
fn acting(text: &str) -> Option<char> {
    text.chars()
        .find(|&c| (c.is_control() && c != '\n') || ('\u{202a}'..='\u{202e}').contains(&c))
}

/// A character XML 1.0 forbids, or a C1 control / DEL it discourages.
fn not_xml(text: &str) -> Option<char> {
    text.chars()
        .find(|&c| c.is_control() && !matches!(c, '\t' | '\n' | '\r'))
}

/// A ledger of two real closeouts (builds B1 and B2), then rewritten with SQL: every
/// serial, B1's build label and one quantity's name hold hostile text.
fn hostile_ledger(d: &TestDir) {
    for build in ["b1", "b2"] {
        let plan = sample(d, build);
        let out = d.run(&["closeout", plan, "--ledger", "l.db"]);
        assert!(out.status.code().unwrap() <= 1, "{}", stderr(&out));
    }
    let conn = rusqlite::Connection::open(d.join("l.db")).unwrap();
    conn.execute("UPDATE runs SET serial = ?1", [SERIAL])
        .unwrap();
    let n = conn
        .execute("UPDATE runs SET build = ?1 WHERE build = 'B1'", [BUILD])
        .unwrap();
    assert_eq!(n, 6, "build B1's five steps and its sign chain");
    let q = conn
        .execute(
            "UPDATE quantities SET name = ?1 WHERE name = 'dipole_pass'",
            [QUANTITY],
        )
        .unwrap();
    assert!(q >= 2, "the dipole verdict of both builds renamed");
}

#[test]
fn an_old_ledgers_hostile_text_never_acts_on_the_terminal_or_a_document() {
    let d = TestDir::new();
    hostile_ledger(&d);

    // The terminal view: escapes shown, nothing acting, no forged line.
    let out = d.run(&["history", "--ledger", "l.db"]);
    assert_code(&out, 0);
    let text = stdout(&out);
    assert_eq!(acting(&text), None, "{text:?}");
    assert_eq!(acting(&stderr(&out)), None);
    assert!(
        !text.lines().any(|l| l.trim_start().starts_with("forged")),
        "{text}"
    );
    assert!(text.contains("TMR\\u{1b}]0;owned\\u{7}"), "{text}");

    // No run matches: the serials listed on stderr are escaped too.
    let out = d.run(&["history", "--ledger", "l.db", "--serial", "none"]);
    assert_eq!(acting(&stderr(&out)), None, "{:?}", stderr(&out));
    assert!(stderr(&out).contains("TMR\\u{1b}"), "{}", stderr(&out));

    // CSV on standard output: escaped cells.
    for export in ["csv", "changes-csv"] {
        let out = d.run(&["history", "--ledger", "l.db", "--export", export]);
        assert_code(&out, 0);
        assert_eq!(acting(&stdout(&out)), None, "{export}: {:?}", stdout(&out));
        assert!(stdout(&out).contains("TMR\\u{1b}"), "{export}");
    }

    // JSON keeps the text exactly (JSON escapes it), so nothing recorded is lost.
    let out = d.run(&["history", "--ledger", "l.db", "--json"]);
    assert_code(&out, 0);
    assert_eq!(acting(&stdout(&out)), None);
    let doc: serde_json::Value = serde_json::from_str(&stdout(&out)).unwrap();
    let all = doc.to_string();
    for raw in [SERIAL, BUILD] {
        assert!(
            all.contains(&serde_json::Value::from(raw).to_string()),
            "{raw:?} kept"
        );
    }

    // A closeout into that ledger prints nothing acting either.
    let plan = sample(&d, "b3");
    let out = d.run(&["closeout", plan, "--ledger", "l.db"]);
    assert!(out.status.code().unwrap() <= 1, "{}", stderr(&out));
    assert_eq!(acting(&stdout(&out)), None);
    assert_eq!(acting(&stderr(&out)), None);

    // The history section as the demo's report draws it: HTML and every SVG well-formed
    // (nothing XML forbids), markup escaped.
    use magproof::ledger::{changes, ChangeRules, Ledger, RunFilter};
    let ledger = Ledger::open_for_reading(&d.join("l.db")).unwrap();
    let runs = ledger.runs(&RunFilter::default()).unwrap();
    let ch = changes(&runs, &ChangeRules::default());
    assert!(runs.iter().any(|r| r.serial == SERIAL && r.build == BUILD));
    let section = magproof::report::sections::history_section(&runs, &ch).unwrap();
    // The serial reaches the figures (a legend per serial), escaped.
    assert!(
        section.figures.iter().any(|f| f.svg.contains("TMR\\u{1b}")),
        "the hostile serial is drawn"
    );
    for f in &section.figures {
        assert_eq!(not_xml(&f.svg), None, "{}", f.file_name);
        assert!(!f.svg.contains("<script>"), "{}", f.file_name);
    }
    let report = magproof::report::RunReport {
        title: format!("History of {SERIAL}"),
        article: Some((SERIAL.into(), BUILD.into())),
        generated_at: "2026-01-01T00:00:00Z".into(),
        tool_version: "test".into(),
        inputs: Vec::new(),
        sections: vec![section],
        result: serde_json::Value::Null,
    };
    let html = magproof::report::html::render(&report);
    assert_eq!(not_xml(&html), None);
    assert!(!html.contains("<script>alert"), "markup escaped");
    assert!(
        html.contains("&lt;script&gt;alert(1)&lt;/script&gt; &amp;"),
        "shown as text"
    );
    assert!(html.contains("TMR\\u{1b}]0;owned"), "the escape shown");
}
