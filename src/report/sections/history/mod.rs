//! History section: per serial and build, the residual dipole, the hard iron and the
//! calibration residual with their limits, the verdicts, and what changed between builds.

use serde_json::Value;

use super::change_text::{change_amount, change_label, flag_text};
use super::{pm, to_json, verdict_tone};
use crate::ledger::history::kinds_of;
use crate::ledger::{group_by_build, Change, Flag, Run};
use crate::report::model::{Cell, Section, Table, Tone, Verdict};
use crate::Error;
use trends::history_figures;

mod trends;

/// Most change rows shown in the table (all are in the JSON).
const MAX_CHANGE_ROWS: usize = 80;

fn num(v: &Value, key: &str) -> Option<f64> {
    v.get(key)?.as_f64().filter(|x| x.is_finite())
}

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

/// Build the history section from ledger runs and the changes between builds, with its
/// plots and its JSON (for a report folder).
pub fn history_section(runs: &[Run], changes: &[Change]) -> Result<Section, Error> {
    build_section(runs, changes, true)
}

/// The history section as the terminal shows it: the same figures of merit, tables,
/// warnings and notes, without the plots and the JSON the terminal never shows (they
/// cost most of the time and memory of a large ledger).
pub fn history_text_section(runs: &[Run], changes: &[Change]) -> Result<Section, Error> {
    build_section(runs, changes, false)
}

fn build_section(runs: &[Run], changes: &[Change], full: bool) -> Result<Section, Error> {
    let kinds = kinds_of(runs);
    let rows = build_rows(runs, &kinds);
    let serials = group_by_build(runs).len();
    let mut tables = vec![
        verdict_table(&rows, &kinds),
        number_table(&rows),
        change_table(changes),
    ];
    // One serial: its name is in the figures of merit; the tables keep their width for
    // the numbers.
    if serials == 1 {
        tables.iter_mut().for_each(drop_first_column);
    }
    let mut notes = vec![
        "Builds are numbered 1, 2, … per serial in the order they were first recorded; a \
         plot of one serial names them on its axis; for several serials see the table."
            .to_string(),
        "Error bars are ±1σ as each run recorded it; each quantity has its own scale, so a \
         jump of a few σ fills its plot."
            .to_string(),
    ];
    if changes.len() > MAX_CHANGE_ROWS {
        notes.push(format!(
            "{} more changes are in result.json",
            changes.len() - MAX_CHANGE_ROWS
        ));
    }
    Ok(Section {
        kind: "history".into(),
        title: "History across builds".into(),
        verdict: latest_verdict(&rows),
        figures_of_merit: ledger_figures_of_merit(runs, &rows, changes, serials),
        tables,
        figures: if full {
            history_figures(&rows)?
        } else {
            Vec::new()
        },
        warnings: limit_warnings(changes),
        notes,
        result: if full {
            serde_json::json!({ "runs": to_json(&runs)?, "changes": to_json(&changes)? })
        } else {
            serde_json::Value::Null
        },
    })
}

/// The worst verdict of each serial's latest build.
fn latest_verdict(rows: &[BuildRow<'_>]) -> Verdict {
    Verdict::combine(
        rows.iter()
            .enumerate()
            .filter(|(i, r)| rows.get(i + 1).map_or(true, |n| n.serial != r.serial))
            .flat_map(|(_, r)| r.latest.iter().map(|run| Verdict::from_pass(run.pass))),
    )
}

fn ledger_figures_of_merit(
    runs: &[Run],
    rows: &[BuildRow<'_>],
    changes: &[Change],
    serials: usize,
) -> Vec<(String, String)> {
    // Each serial once, in order of first appearance (a set, not a scan of the list per
    // row: linear in the builds).
    let mut seen = std::collections::HashSet::new();
    let names = rows
        .iter()
        .map(|r| r.serial)
        .filter(|s| seen.insert(*s))
        .collect::<Vec<_>>()
        .join(", ");
    let alerts = changes.iter().filter(|c| c.flag.is_alert()).count();
    vec![
        (
            "ledger".to_string(),
            format!(
                "{} run(s), {serials} serial(s) ({names}), {} build(s)",
                runs.len(),
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

/// A check kind's column heading in the build table: short enough that eight kinds
/// beside the numbers fit a terminal (the caption spells out the shortened ones).
fn kind_heading(kind: &str) -> &str {
    match kind {
        "calibrate" => "calib",
        "polarity" => "polar",
        "sign_chain" => "chain",
        k => k,
    }
}

/// Latest run of each check per build: its verdict.
fn verdict_table(rows: &[BuildRow<'_>], kinds: &[String]) -> Table {
    Table {
        caption: "Latest run of each check per build (verdict of the latest build decides; \
                  calib = calibrate, polar = polarity, chain = sign chain)"
            .into(),
        header: ["serial", "build"]
            .into_iter()
            .map(String::from)
            .chain(kinds.iter().map(|k| kind_heading(k).to_string()))
            .collect(),
        rows: rows
            .iter()
            .map(|b| {
                let mut cells = vec![Cell::plain(b.serial), Cell::plain(b.build)];
                cells.extend(kinds.iter().map(|k| verdict_cell(b.of(k))));
                cells
            })
            .collect(),
    }
}

/// Per build with either number: the residual dipole |m| with its 1σ and the hard
/// iron |b| of the latest runs that measured them.
fn number_table(rows: &[BuildRow<'_>]) -> Table {
    let number_rows = rows.iter().filter_map(|b| {
        let m = b.latest.iter().find_map(|r| {
            let (v, s) = quantity(r, "dipole_magnitude_am2")?;
            Some(pm(v * 1e3, s.map(|s| s * 1e3), ""))
        });
        let h = b.latest.iter().find_map(|r| {
            let (v, s) = quantity(r, "hard_iron_magnitude_nt")?;
            Some(pm(v, s, ""))
        });
        if m.is_none() && h.is_none() {
            return None;
        }
        let cell = |t: Option<String>| Cell::plain(t.unwrap_or_else(|| "-".into()).trim_end());
        Some(vec![
            Cell::plain(b.serial),
            Cell::plain(b.build),
            cell(m),
            cell(h),
        ])
    });
    Table {
        caption: "Residual dipole and hard iron of the latest runs per build".into(),
        header: ["serial", "build", "|m| [mA·m²]", "|hard iron| [nT]"]
            .into_iter()
            .map(String::from)
            .collect(),
        rows: number_rows.collect(),
    }
}

/// Changes between consecutive builds, most severe first (bad, then amber, then good
/// news, then the rest; stable within), at most [`MAX_CHANGE_ROWS`].
fn change_table(changes: &[Change]) -> Table {
    let rank = |c: &&Change| match flag_tone(c.flag) {
        Tone::Bad => 0,
        Tone::Warn => 1,
        Tone::Good => 2,
        Tone::Plain => 3,
    };
    let mut shown: Vec<&Change> = changes.iter().collect();
    shown.sort_by_key(rank);
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

fn drop_first_column(t: &mut Table) {
    t.header.remove(0);
    for row in &mut t.rows {
        row.remove(0);
    }
}

/// One warning per limit crossed, naming the build where it happened.
fn limit_warnings(changes: &[Change]) -> Vec<String> {
    changes
        .iter()
        .filter(|c| c.flag == Flag::LimitCrossed)
        .map(|c| {
            format!(
                "{} {}: {} went from pass to fail between builds {} and {}; find what was \
                 added or changed in that build",
                c.serial,
                c.kind,
                change_label(c),
                c.from_build,
                c.to_build
            )
        })
        .collect()
}

#[cfg(test)]
mod tests;
