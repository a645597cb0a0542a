//! History section: per serial and build, the residual dipole, the hard iron and the
//! calibration residual with their limits, the verdicts, and what changed between builds.
//! The trend plots live in `figures`.

mod figures;

use super::change_text::{change_amount, change_label, flag_text};
use super::{pm, to_json, verdict_tone};
use crate::ledger::history::kinds_of;
use crate::ledger::{group_by_build, Change, Flag, Run};
use crate::report::model::{Cell, Section, Table, Tone, Verdict};
use crate::Error;
use figures::history_figures;

/// Most change rows shown in the table (all are in the JSON).
const MAX_CHANGE_ROWS: usize = 80;

/// One build's latest run of each kind.
struct BuildRow<'a> {
    serial: &'a str,
    build: &'a str,
    ordinal: f64,
    /// The latest run of each kind recorded for this build.
    latest: Vec<&'a Run>,
}

impl<'a> BuildRow<'a> {
    /// The latest run of `kind`, if the build has one.
    fn of(&self, kind: &str) -> Option<&'a Run> {
        self.latest.iter().find(|r| r.kind == kind).copied()
    }
}

fn build_rows<'a>(runs: &'a [Run], kinds: &[String]) -> Vec<BuildRow<'a>> {
    let mut rows = Vec::new();
    for serial in group_by_build(runs) {
        for (k, b) in serial.builds.iter().enumerate() {
            let latest = kinds
                .iter()
                .filter_map(|kind| b.runs.iter().rev().find(|r| r.kind == *kind).copied())
                .collect();
            rows.push(BuildRow {
                serial: serial.serial,
                build: b.build,
                ordinal: (k + 1) as f64,
                latest,
            });
        }
    }
    rows
}

fn verdict_cell(run: Option<&Run>) -> Cell {
    match run {
        Some(r) => {
            let v = Verdict::from_pass(r.pass);
            Cell::toned(v.word(), verdict_tone(v))
        }
        None => Cell::plain("-"),
    }
}

/// A stored number of a run, by quantity name.
fn quantity(run: &Run, name: &str) -> Option<(f64, Option<f64>)> {
    run.quantities.iter().find_map(|q| match q.value {
        crate::ledger::QuantityValue::Number { value, sigma } if q.name == name => {
            Some((value, sigma))
        }
        _ => None,
    })
}

fn flag_tone(f: Flag) -> Tone {
    match f {
        Flag::LimitCrossed | Flag::VerdictChanged => Tone::Bad,
        Flag::Significant => Tone::Warn,
        Flag::LimitCleared => Tone::Good,
        Flag::WithinNoise | Flag::NoSigma | Flag::Unchanged => Tone::Plain,
    }
}

/// Build the history section from ledger runs and the changes between builds.
pub fn history_section(runs: &[Run], changes: &[Change]) -> Result<Section, Error> {
    let kinds = kinds_of(runs);
    let rows = build_rows(runs, &kinds);
    let serials = group_by_build(runs).len();
    let mut build_table = build_table(&rows, &kinds);
    let mut change_table = change_table(changes);
    // One serial: its name is in the figures of merit; the tables keep their width for
    // the numbers.
    if serials == 1 {
        drop_serial_column(&mut build_table);
        drop_serial_column(&mut change_table);
    }
    Ok(Section {
        kind: "history".into(),
        title: "History across builds".into(),
        verdict: latest_build_verdict(&rows),
        figures_of_merit: history_figures_of_merit(runs, &rows, serials, changes),
        tables: vec![build_table, change_table],
        figures: history_figures(&rows)?,
        warnings: limit_crossed_warnings(changes),
        notes: history_notes(changes),
        result: serde_json::json!({ "runs": to_json(&runs)?, "changes": to_json(&changes)? }),
    })
}

/// The verdict of every check in the latest build of each serial, combined.
fn latest_build_verdict(rows: &[BuildRow<'_>]) -> Verdict {
    Verdict::combine(
        rows.iter()
            .enumerate()
            .filter(|(i, r)| rows.get(i + 1).map_or(true, |n| n.serial != r.serial))
            .flat_map(|(_, r)| r.latest.iter().map(|run| Verdict::from_pass(run.pass))),
    )
}

/// The ledger's size (runs, serials, builds) and how many changes need attention.
fn history_figures_of_merit(
    runs: &[Run],
    rows: &[BuildRow<'_>],
    serials: usize,
    changes: &[Change],
) -> Vec<(String, String)> {
    let alerts = changes.iter().filter(|c| c.flag.is_alert()).count();
    vec![
        (
            "ledger".to_string(),
            format!(
                "{} run(s), {} serial(s) ({}), {} build(s)",
                runs.len(),
                serials,
                serial_names(rows),
                rows.len()
            ),
        ),
        (
            "changes".into(),
            format!(
                "{} between builds, {alerts} needing attention",
                changes.len()
            ),
        ),
    ]
}

/// The serials in first-seen order, each once, comma-separated.
fn serial_names(rows: &[BuildRow<'_>]) -> String {
    rows.iter()
        .map(|r| r.serial)
        .fold(Vec::<&str>::new(), |mut v, s| {
            if !v.contains(&s) {
                v.push(s);
            }
            v
        })
        .join(", ")
}

/// One row per build: |m| (A·m²), hard iron (nT) and the verdict of each kind of check.
fn build_table(rows: &[BuildRow<'_>], kinds: &[String]) -> Table {
    Table {
        caption: "Latest run of each check per build (verdict of the latest build decides)".into(),
        header: ["serial", "build", "|m| [A·m²]", "hard iron x/y/z [nT]"]
            .into_iter()
            .map(String::from)
            .chain(kinds.iter().cloned())
            .collect(),
        rows: rows.iter().map(|b| build_table_row(b, kinds)).collect(),
    }
}

/// The cells of one build: serial, build, |m| (A·m²), hard iron (nT), then verdicts.
fn build_table_row(b: &BuildRow<'_>, kinds: &[String]) -> Vec<Cell> {
    let m = b.latest.iter().find_map(|r| {
        let (v, s) = quantity(r, "dipole_magnitude_am2")?;
        Some(pm(v, s, ""))
    });
    let h = b.latest.iter().find_map(|r| {
        let h = ["x", "y", "z"].map(|a| quantity(r, &format!("hard_iron_{a}_nt")).map(|q| q.0));
        Some(format!("{:.0} / {:.0} / {:.0}", h[0]?, h[1]?, h[2]?))
    });
    let mut cells = vec![
        Cell::plain(b.serial),
        Cell::plain(b.build),
        Cell::plain(m.unwrap_or_else(|| "-".into()).trim_end().to_string()),
        Cell::plain(h.unwrap_or_else(|| "-".into())),
    ];
    cells.extend(kinds.iter().map(|k| verdict_cell(b.of(k))));
    cells
}

/// The changes between builds, most severe first, at most [`MAX_CHANGE_ROWS`] of them.
fn change_table(changes: &[Change]) -> Table {
    let mut shown: Vec<&Change> = changes.iter().collect();
    shown.sort_by_key(|c| attention_rank(c));
    shown.truncate(MAX_CHANGE_ROWS);
    Table {
        caption: "Changes between consecutive builds (attention first)".into(),
        header: vec![
            "serial".into(),
            "builds".into(),
            "quantity".into(),
            "change".into(),
            "flag".into(),
        ],
        rows: shown
            .iter()
            .map(|c| {
                vec![
                    Cell::plain(c.serial.clone()),
                    Cell::plain(format!("{} → {}", c.from_build, c.to_build)),
                    Cell::plain(change_label(c)),
                    Cell::plain(change_amount(c)),
                    Cell::toned(flag_text(c.flag), flag_tone(c.flag)),
                ]
            })
            .collect(),
    }
}

/// Sort key, most severe first: bad, then amber, then good news, then the rest.
fn attention_rank(c: &Change) -> u8 {
    match flag_tone(c.flag) {
        Tone::Bad => 0,
        Tone::Warn => 1,
        Tone::Good => 2,
        Tone::Plain => 3,
    }
}

/// Remove the first (serial) column from a table's header and rows.
fn drop_serial_column(t: &mut Table) {
    t.header.remove(0);
    for row in &mut t.rows {
        row.remove(0);
    }
}

/// How builds are numbered on the plots, and how many changes the table left out.
fn history_notes(changes: &[Change]) -> Vec<String> {
    let mut notes = vec![
        "Builds are numbered 1, 2, … per serial in the order they were first recorded; the \
         plots use these numbers (see the table for the labels)."
            .to_string(),
    ];
    if changes.len() > MAX_CHANGE_ROWS {
        notes.push(format!(
            "{} more changes are in result.json",
            changes.len() - MAX_CHANGE_ROWS
        ));
    }
    notes
}

/// One warning per quantity that went from pass to fail between two builds.
fn limit_crossed_warnings(changes: &[Change]) -> Vec<String> {
    changes
        .iter()
        .filter(|c| c.flag == Flag::LimitCrossed)
        .map(|c| {
            format!(
                "{} {}: {} went from pass to fail between builds {} and {}; find what was \
                 added or changed in that build",
                c.serial, c.kind, c.quantity, c.from_build, c.to_build
            )
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::ledger::{changes, ChangeRules, RunId};
    use serde_json::{json, Value};

    fn run(id: i64, build: &str, kind: &str, pass: bool, result: Value) -> Run {
        Run {
            id: RunId(id),
            serial: "QX-7".into(),
            build: build.into(),
            kind: kind.into(),
            quantities: {
                let mut q = crate::ledger::legacy_quantities(kind, &result);
                q.push(crate::ledger::Quantity::pass(kind, pass));
                q
            },
            recorded_at: format!("2026-11-2{id}T09:00:00.000Z"),
            tool_version: Some("0.1.0".into()),
            pass: Some(pass),
            result,
            inputs: vec![],
        }
    }

    #[test]
    fn crossing_the_dipole_limit_fails_and_is_flagged_in_words() {
        let dip = |m: f64, pass| {
            json!({"moment_body_am2": [m, 0.0, 0.0], "magnitude_am2": m,
                   "moment_sigma_am2": [0.001, 0.001, 0.001], "magnitude_sigma_am2": 0.001,
                   "residual_dipole_max_am2": 0.05, "pass": pass})
        };
        let cal = |h: f64| {
            json!({"hard_iron_nt": [h, 10.0, -5.0], "hard_iron_sigma_nt": [2.0, 2.0, 2.0],
                   "residual_rms_nt": 40.0, "residual_limit_nt": 100.0, "pass": true})
        };
        let runs = vec![
            run(1, "B1", "dipole", true, dip(0.02, true)),
            run(2, "B1", "calibrate", true, cal(100.0)),
            run(3, "B2", "dipole", false, dip(0.09, false)),
            run(4, "B2", "calibrate", true, cal(400.0)),
        ];
        let ch = changes(&runs, &ChangeRules::default());
        let s = history_section(&runs, &ch).unwrap();
        assert_eq!(s.verdict, Verdict::Fail);
        let names: Vec<&str> = s.figures.iter().map(|f| f.file_name.as_str()).collect();
        assert_eq!(
            names,
            [
                "history-dipole.svg",
                "history-hard-iron.svg",
                "history-calibration-residual.svg"
            ]
        );
        assert!(s.figures[0].svg.contains("limit"));
        let flag_column = s.tables[1].header.iter().position(|h| h == "flag").unwrap();
        let flags: Vec<&Cell> = s.tables[1].rows.iter().map(|r| &r[flag_column]).collect();
        assert!(flags
            .iter()
            .any(|c| c.text == "limit-crossed !" && c.tone == Tone::Bad));
        assert!(!s.warnings.is_empty());
        assert_eq!(s.result["changes"].as_array().unwrap().len(), ch.len());
        let dipole_column = s.tables[0]
            .header
            .iter()
            .position(|h| h == "dipole")
            .unwrap();
        assert_eq!(s.tables[0].rows[1][dipole_column].text, "FAIL");
    }

    #[test]
    fn empty_ledger_gives_a_section_without_plots() {
        let s = history_section(&[], &[]).unwrap();
        assert_eq!(s.verdict, Verdict::NoLimit);
        assert!(s.figures.is_empty());
    }
}
