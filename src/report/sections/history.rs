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

/// The build axis with one serial: the builds by name, in ledger order.
const NAMED_BUILD_AXIS: &str = "build [name, in ledger order]";

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
    let mut tables = vec![build_table(&rows, &kinds), change_table(changes)];
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

/// Latest run of each check per build: |m|, hard iron and the verdicts.
fn build_table(rows: &[BuildRow<'_>], kinds: &[String]) -> Table {
    Table {
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

/// A limit drawn as a step across each build (±0.4 around its ordinal).
fn limit_steps(points: &[(f64, f64)]) -> Vec<(f64, f64)> {
    points
        .iter()
        .flat_map(|&(x, l)| [(x - 0.4, l), (x + 0.4, l)])
        .collect()
}

/// One quantity's trend across builds: which run it comes from, its ledger name, and
/// where its limit is kept in the run's result.
struct Trend {
    kind: &'static str,
    quantity: &'static str,
    limit_key: Option<&'static str>,
    title: &'static str,
    y_label: &'static str,
    file_name: &'static str,
    caption: &'static str,
}

/// The trends plotted, each on its own scale.
const TRENDS: [Trend; 5] = [
    Trend {
        kind: "dipole",
        quantity: "dipole_magnitude_am2",
        limit_key: Some("residual_dipole_max_am2"),
        title: "Residual dipole across builds",
        y_label: "|m| [A·m²]",
        file_name: "history-dipole.svg",
        caption: "Residual dipole magnitude ±1σ of the latest dipole run per build (line per \
                  serial) and the plan's limit (dashed).",
    },
    Trend {
        kind: "calibrate",
        quantity: "hard_iron_x_nt",
        limit_key: None,
        title: "Hard iron x across builds",
        y_label: "hard iron x, sensor frame [nT]",
        file_name: "history-hard-iron-x.svg",
        caption: "Hard iron along sensor x ±1σ from the latest calibration per build, on its \
                  own scale. A jump between builds means magnetic material was added or moved \
                  near the magnetometer.",
    },
    Trend {
        kind: "calibrate",
        quantity: "hard_iron_y_nt",
        limit_key: None,
        title: "Hard iron y across builds",
        y_label: "hard iron y, sensor frame [nT]",
        file_name: "history-hard-iron-y.svg",
        caption: "Hard iron along sensor y ±1σ, as for x.",
    },
    Trend {
        kind: "calibrate",
        quantity: "hard_iron_z_nt",
        limit_key: None,
        title: "Hard iron z across builds",
        y_label: "hard iron z, sensor frame [nT]",
        file_name: "history-hard-iron-z.svg",
        caption: "Hard iron along sensor z ±1σ, as for x.",
    },
    Trend {
        kind: "calibrate",
        quantity: "calibration_residual_rms_nt",
        limit_key: Some("residual_limit_nt"),
        title: "Calibration residual across builds",
        y_label: "residual RMS [nT]",
        file_name: "history-calibration-residual.svg",
        caption: "Calibration residual RMS ±1σ per build and the plan's limit (dashed).",
    },
];

fn history_figures(rows: &[BuildRow<'_>]) -> Result<Vec<Figure>, Error> {
    // Rows come grouped by serial (see `build_rows`): each group is walked once, so the
    // figures cost time linear in the builds.
    let groups: Vec<&[BuildRow<'_>]> = rows.chunk_by(|a, b| a.serial == b.serial).collect();
    let mut figs = Vec::new();
    for t in &TRENDS {
        if let Some(plot) = trend_plot(t, &groups) {
            figs.push(figure(t.file_name, t.caption, draw_xy(&plot)?));
        }
    }
    Ok(figs)
}

/// The plot of one trend: per serial, the value ±1σ at each build, a line through them,
/// and the limit as a dashed step; `None` when no build has the quantity.
/// Builds are named on the axis when only one serial has the quantity (one serial in the
/// ledger, or a vehicle's calibrations beside its rods' bench tests).
fn trend_plot(t: &Trend, groups: &[&[BuildRow<'_>]]) -> Option<XyPlot> {
    let mut plot = XyPlot::new(t.title, BUILD_AXIS, t.y_label);
    let mut plotted: Vec<usize> = Vec::new();
    let mut limits = Vec::new();
    for (k, g) in groups.iter().enumerate() {
        let mut pts = Vec::new();
        let mut sigma = Vec::new();
        for r in g.iter() {
            let Some(run) = r.of(t.kind) else { continue };
            if let Some((v, s)) = quantity(run, t.quantity) {
                pts.push((r.ordinal, v));
                sigma.push(s.unwrap_or(0.0));
            }
            if let Some(l) = t.limit_key.and_then(|key| num(&run.result, key)) {
                limits.push((r.ordinal, l));
            }
        }
        if !pts.is_empty() {
            plotted.push(k);
            plot = plot
                .with(Series::points("", pts.clone(), k % 3).with_sigma(sigma))
                .with(Series::line(g[0].serial, pts, k % 3));
        }
    }
    if plot.series.is_empty() {
        return None;
    }
    if !limits.is_empty() {
        plot = plot.with(Series::dashed("limit", limit_steps(&limits), 3));
    }
    let n_builds = groups.iter().map(|g| g.len()).max().unwrap_or(1) as f64;
    plot.x_range = Some((0.5, n_builds + 0.5));
    if let [k] = plotted.as_slice() {
        plot.x_label = NAMED_BUILD_AXIS.to_string();
        plot.x_names = groups[*k].iter().map(|r| r.build.to_string()).collect();
    }
    plot.size = (540, 340);
    Some(plot)
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
                "history-hard-iron-x.svg",
                "history-hard-iron-y.svg",
                "history-hard-iron-z.svg",
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

    #[test]
    fn a_flagged_15_nt_jump_fills_its_own_plot_and_builds_are_named() {
        // Hard iron x 1200 → 1215 nT (σ 2 nT) beside y and z near −750 and 425 nT: on a
        // shared scale the jump would be 0.8 % of the axis; on its own it must be most
        // of it.
        let cal = |h: f64| {
            json!({"hard_iron_nt": [h, -750.0, 425.0], "hard_iron_sigma_nt": [2.0, 2.0, 2.0],
                   "residual_rms_nt": 20.0, "residual_limit_nt": 150.0, "pass": true})
        };
        let runs = vec![
            run(1, "B1", "calibrate", true, cal(1200.0)),
            run(2, "B2", "calibrate", true, cal(1215.0)),
        ];
        let rows = build_rows(&runs, &kinds_of(&runs));
        let groups: Vec<&[BuildRow<'_>]> = vec![&rows[..]];
        let plot = trend_plot(&TRENDS[1], &groups).unwrap();
        let (_, (y0, y1)) = crate::report::plot::xy_ranges(&plot);
        assert!(
            15.0 / (y1 - y0) > 0.5,
            "jump is {} of the axis",
            15.0 / (y1 - y0)
        );
        // Error bars of ±2 nT inside the range, names on the axis.
        assert!(y0 <= 1198.0 && y1 >= 1217.0);
        assert_eq!(plot.x_names, ["B1", "B2"]);
        assert_eq!(plot.series[0].sigma, [2.0, 2.0]);
        let svg = draw_xy(&plot).unwrap();
        assert!(
            svg.contains("B1") && svg.contains("B2"),
            "build names on the axis: {svg}"
        );
    }

    #[test]
    fn a_rod_beside_the_vehicle_keeps_the_vehicle_builds_named() {
        // A rod's bench run has no hard iron: the hard-iron plot shows the vehicle alone
        // and names its builds; with a second vehicle calibrated, numbers again.
        let cal = json!({"hard_iron_nt": [1200.0, -750.0, 425.0],
                         "hard_iron_sigma_nt": [2.0, 2.0, 2.0], "pass": true});
        let mut rod = run(3, "R-1", "rod", true, json!({"pass": true}));
        rod.serial = "ROD-1".into();
        let mut runs = vec![
            run(1, "B1", "calibrate", true, cal.clone()),
            run(2, "B2", "calibrate", true, cal.clone()),
            rod,
        ];
        let plot_of = |runs: &[Run]| {
            let rows = build_rows(runs, &kinds_of(runs));
            let groups: Vec<&[BuildRow<'_>]> = rows.chunk_by(|a, b| a.serial == b.serial).collect();
            assert!(groups.len() >= 2);
            trend_plot(&TRENDS[1], &groups).unwrap()
        };
        let plot = plot_of(&runs);
        assert_eq!(plot.x_names, ["B1", "B2"]);
        assert_eq!(plot.x_label, NAMED_BUILD_AXIS);
        let mut other = run(4, "C1", "calibrate", true, cal);
        other.serial = "QX-8".into();
        runs.push(other);
        let plot = plot_of(&runs);
        assert!(plot.x_names.is_empty());
        assert_eq!(plot.x_label, BUILD_AXIS);
    }
}
