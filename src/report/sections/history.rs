//! History section: per serial and build, the residual dipole, the hard iron and the
//! calibration residual with their limits, the verdicts, and what changed between builds.

use serde_json::Value;

use super::change_text::{change_amount, change_label, flag_text};
use super::{figure, pm, to_json, verdict_tone};
use crate::ledger::history::kinds_of;
use crate::ledger::{group_by_build, Change, Flag, Run};
use crate::report::model::{Cell, Figure, Section, Table, Tone, Verdict};
use crate::report::plot::{draw_xy, Series, XyPlot};
use crate::Error;

/// The build axis of the history plots: builds numbered in ledger order.
const BUILD_AXIS: &str = "build [number in ledger order]";

/// Most change rows shown in the table (all are in the JSON).
const MAX_CHANGE_ROWS: usize = 80;

fn num(v: &Value, key: &str) -> Option<f64> {
    v.get(key)?.as_f64().filter(|x| x.is_finite())
}

fn vec3(v: &Value, key: &str) -> Option<[f64; 3]> {
    let a = v.get(key)?.as_array()?;
    if a.len() != 3 {
        return None;
    }
    let mut out = [0.0; 3];
    for (o, x) in out.iter_mut().zip(a) {
        *o = x.as_f64().filter(|f| f.is_finite())?;
    }
    Some(out)
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
    let verdict = Verdict::combine(
        rows.iter()
            .enumerate()
            .filter(|(i, r)| rows.get(i + 1).map_or(true, |n| n.serial != r.serial))
            .flat_map(|(_, r)| r.latest.iter().map(|run| Verdict::from_pass(run.pass))),
    );
    let serials = group_by_build(runs).len();
    let alerts = changes.iter().filter(|c| c.flag.is_alert()).count();
    let fom = vec![
        (
            "ledger".to_string(),
            format!(
                "{} run(s), {} serial(s) ({}), {} build(s)",
                runs.len(),
                serials,
                {
                    // Each serial once, in order of first appearance (a set, not a scan
                    // of the list per row: linear in the builds).
                    let mut seen = std::collections::HashSet::new();
                    rows.iter()
                        .map(|r| r.serial)
                        .filter(|s| seen.insert(*s))
                        .collect::<Vec<_>>()
                        .join(", ")
                },
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
    ];
    let mut build_table = Table {
        caption: "Latest run of each check per build (verdict of the latest build decides)".into(),
        header: ["serial", "build", "|m| [A·m²]", "hard iron x/y/z [nT]"]
            .into_iter()
            .map(String::from)
            .chain(kinds.iter().cloned())
            .collect(),
        rows: rows
            .iter()
            .map(|b| {
                let m = b.latest.iter().find_map(|r| {
                    let (v, s) = quantity(r, "dipole_magnitude_am2")?;
                    Some(pm(v, s, ""))
                });
                let h = b.latest.iter().find_map(|r| {
                    let h = ["x", "y", "z"]
                        .map(|a| quantity(r, &format!("hard_iron_{a}_nt")).map(|q| q.0));
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
            })
            .collect(),
    };
    // Most severe first (bad, then amber, then good news, then the rest); stable within.
    let rank = |c: &&Change| match flag_tone(c.flag) {
        Tone::Bad => 0,
        Tone::Warn => 1,
        Tone::Good => 2,
        Tone::Plain => 3,
    };
    let mut shown: Vec<&Change> = changes.iter().collect();
    shown.sort_by_key(rank);
    shown.truncate(MAX_CHANGE_ROWS);
    let mut change_table = Table {
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
    };
    // One serial: its name is in the figures of merit; the tables keep their width for
    // the numbers.
    if serials == 1 {
        for t in [&mut build_table, &mut change_table] {
            t.header.remove(0);
            for row in &mut t.rows {
                row.remove(0);
            }
        }
    }
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
    let warnings = changes
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
        .collect();
    Ok(Section {
        kind: "history".into(),
        title: "History across builds".into(),
        verdict,
        figures_of_merit: fom,
        tables: vec![build_table, change_table],
        figures: if full {
            history_figures(&rows)?
        } else {
            Vec::new()
        },
        warnings,
        notes,
        result: if full {
            serde_json::json!({ "runs": to_json(&runs)?, "changes": to_json(&changes)? })
        } else {
            serde_json::Value::Null
        },
    })
}

/// A limit drawn as a step across each build (±0.4 around its ordinal).
fn limit_steps(points: &[(f64, f64)]) -> Vec<(f64, f64)> {
    points
        .iter()
        .flat_map(|&(x, l)| [(x - 0.4, l), (x + 0.4, l)])
        .collect()
}

fn history_figures(rows: &[BuildRow<'_>]) -> Result<Vec<Figure>, Error> {
    // Rows come grouped by serial (see `build_rows`): each group is walked once, so the
    // figures cost time linear in the builds.
    let groups: Vec<&[BuildRow<'_>]> = rows.chunk_by(|a, b| a.serial == b.serial).collect();
    let mut figs = Vec::new();
    let n_builds = rows.iter().map(|r| r.ordinal).fold(1.0, f64::max);
    let x_range = Some((0.5, n_builds + 0.5));

    let mut dip = XyPlot::new("Residual dipole across builds", BUILD_AXIS, "|m| [A·m²]");
    let mut limits = Vec::new();
    for (k, g) in groups.iter().enumerate() {
        let s = g[0].serial;
        let pts: Vec<(f64, f64)> = g
            .iter()
            .filter_map(|r| Some((r.ordinal, num(&r.of("dipole")?.result, "magnitude_am2")?)))
            .collect();
        for r in g.iter() {
            if let Some(l) = r
                .of("dipole")
                .and_then(|d| num(&d.result, "residual_dipole_max_am2"))
            {
                limits.push((r.ordinal, l));
            }
        }
        if !pts.is_empty() {
            dip = dip
                .with(Series::points("", pts.clone(), k % 3))
                .with(Series::line(s, pts, k % 3));
        }
    }
    let has_dipole = !dip.series.is_empty();
    if !limits.is_empty() {
        dip = dip.with(Series::dashed("limit", limit_steps(&limits), 3));
    }
    dip.x_range = x_range;
    dip.size = (540, 340);
    if has_dipole {
        figs.push(figure(
            "history-dipole.svg",
            "Residual dipole magnitude of the latest dipole run per build (line per serial) \
             and the plan's limit (dashed).",
            draw_xy(&dip)?,
        ));
    }

    let mut hi = XyPlot::new("Hard iron across builds", BUILD_AXIS, "hard iron [nT]");
    for g in &groups {
        let s = g[0].serial;
        for a in 0..3 {
            let pts: Vec<(f64, f64)> = g
                .iter()
                .filter_map(|r| {
                    Some((
                        r.ordinal,
                        vec3(&r.of("calibrate")?.result, "hard_iron_nt")?[a],
                    ))
                })
                .collect();
            if !pts.is_empty() {
                hi = hi.with(Series::points("", pts.clone(), a));
                let name = if groups.len() > 1 {
                    format!("{s} {}", ["x", "y", "z"][a])
                } else {
                    ["x", "y", "z"][a].to_string()
                };
                hi = hi.with(Series::line(&name, pts, a));
            }
        }
    }
    hi.x_range = x_range;
    hi.size = (540, 340);
    if !hi.series.is_empty() {
        figs.push(figure(
            "history-hard-iron.svg",
            "Hard iron per sensor axis from the latest calibration per build. A jump between \
             builds means magnetic material was added near the magnetometer.",
            draw_xy(&hi)?,
        ));
    }

    let mut res = XyPlot::new("Calibration residual across builds", BUILD_AXIS, "RMS [nT]");
    let mut limits = Vec::new();
    for (k, g) in groups.iter().enumerate() {
        let s = g[0].serial;
        let pts: Vec<(f64, f64)> = g
            .iter()
            .filter_map(|r| {
                Some((
                    r.ordinal,
                    num(&r.of("calibrate")?.result, "residual_rms_nt")?,
                ))
            })
            .collect();
        for r in g.iter() {
            if let Some(l) = r
                .of("calibrate")
                .and_then(|c| num(&c.result, "residual_limit_nt"))
            {
                limits.push((r.ordinal, l));
            }
        }
        if !pts.is_empty() {
            res = res
                .with(Series::points("", pts.clone(), k % 3))
                .with(Series::line(s, pts, k % 3));
        }
    }
    let has_res = !res.series.is_empty();
    if !limits.is_empty() {
        res = res.with(Series::dashed("limit", limit_steps(&limits), 3));
    }
    res.x_range = x_range;
    res.size = (540, 340);
    if has_res {
        figs.push(figure(
            "history-calibration-residual.svg",
            "Calibration residual RMS per build and the plan's limit (dashed).",
            draw_xy(&res)?,
        ));
    }
    Ok(figs)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::ledger::{changes, ChangeRules, RunId};
    use serde_json::json;

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
