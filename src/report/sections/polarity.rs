//! Polarity section: the verdict table per rod (words with tones), lag and noise, and per
//! rod a plot of command and field response over time with the fitted model.

use nalgebra::Vector3;

use super::{figure, pm, short, to_json};
use crate::check::polarity::{PolarityResult, RodResult, Verdict as RodVerdict};
use crate::report::model::{Cell, Figure, Section, Table, Tone};
use crate::report::plot::{draw_xy, Series, XyPlot};
use crate::Error;

/// Build the polarity section of a report.
pub fn polarity_section(r: &PolarityResult) -> Result<Section, Error> {
    let fom = vec![
        (
            "lag".to_string(),
            format!("{} s (response after command)", short(r.lag_s)),
        ),
        (
            "noise σ x/y/z".into(),
            format!(
                "{} / {} / {} nT",
                short(r.noise_sigma_nt[0]),
                short(r.noise_sigma_nt[1]),
                short(r.noise_sigma_nt[2])
            ),
        ),
        (
            "residual σ x/y/z".into(),
            format!(
                "{} / {} / {} nT",
                short(r.residual_sigma_nt[0]),
                short(r.residual_sigma_nt[1]),
                short(r.residual_sigma_nt[2])
            ),
        ),
        (
            "angle limit".into(),
            format!("{:.1}° ({})", r.angle_max_deg, r.angle_max_source),
        ),
        ("SNR threshold".into(), short(r.snr_min)),
        ("drift terms".into(), r.drift.clone()),
        (
            "samples".into(),
            format!("{} used, {} pulses", r.samples_used, r.pulses.len()),
        ),
    ];
    let rows = r.rods.iter().map(rod_row).collect();
    let table = Table {
        caption: "Rod verdicts (sensor frame; angle between measured and expected response)".into(),
        header: vec![
            "rod".into(),
            "verdict".into(),
            "angle".into(),
            "|coupling| nT/cmd".into(),
            "SNR".into(),
            "gain".into(),
            "settle".into(),
        ],
        rows,
    };
    let mut notes: Vec<String> = r
        .rods
        .iter()
        .map(|rod| format!("{}: {}", rod.name, rod.note))
        .collect();
    if r.rods.iter().any(|x| x.gain_reliable == Some(false)) {
        notes.push(
            "gain marked * is unreliable: the sensor is closer than three rod lengths".into(),
        );
    }
    notes.push(
        "The verdict compares the measured response with the direction the dipole geometry \
         of the plan predicts at the sensor, never a bare sign."
            .into(),
    );
    Ok(Section {
        kind: "polarity".into(),
        title: "Torque-rod polarity".into(),
        verdict: r.verdict,
        figures_of_merit: fom,
        tables: vec![table, super::gates_table(&r.gates)],
        figures: polarity_figures(r)?,
        warnings: crate::check::outcome::tally(&r.warnings),
        notes,
        result: to_json(r)?,
    })
}

fn rod_tone(v: RodVerdict) -> Tone {
    match v {
        RodVerdict::Ok => Tone::Good,
        RodVerdict::Reversed | RodVerdict::WrongAxis | RodVerdict::OffAxis => Tone::Bad,
        RodVerdict::NoResponse | RodVerdict::Inconclusive => Tone::Warn,
    }
}

fn rod_row(rod: &RodResult) -> Vec<Cell> {
    let c = Vector3::from(rod.coupling_nt_per_command);
    let sigma = Vector3::from(rod.coupling_sigma_nt_per_command).norm();
    let mut verdict = rod.verdict.as_str().to_string();
    if let Some(m) = &rod.matches_rod {
        let rev = if rod.matches_reversed == Some(true) {
            " reversed"
        } else {
            ""
        };
        verdict = format!("{verdict} ({m}{rev})");
    }
    vec![
        Cell::plain(rod.name.clone()),
        Cell::toned(verdict, rod_tone(rod.verdict)),
        Cell::plain(match (rod.angle_to_expected_deg, rod.angle_sigma_deg) {
            (Some(a), s) => pm(a, s, "°").replace(" °", "°"),
            (None, _) => "-".into(),
        }),
        Cell::plain(pm(c.norm(), Some(sigma), "")),
        Cell::plain(snr_text(rod.snr)),
        Cell::plain(match (rod.gain_ratio, rod.gain_ratio_sigma) {
            (Some(g), s) => {
                let mark = if rod.gain_reliable == Some(false) {
                    " *"
                } else {
                    ""
                };
                format!("{}{mark}", pm(g, s, "").trim_end())
            }
            (None, _) => "-".into(),
        }),
        Cell::plain(
            rod.settle_time_s
                .map_or("-".into(), |t| format!("{t:.3} s")),
        ),
    ]
}

/// Per rod: the field (others' fitted responses removed) along the direction the plan
/// expects, the fitted model along that direction, and the command scaled by |coupling|
/// (what a correctly wired rod would give). A reversed rod's response runs opposite to
/// its command.
#[allow(clippy::needless_range_loop)] // one index over several parallel series
fn polarity_figures(r: &PolarityResult) -> Result<Vec<Figure>, Error> {
    let s = &r.series;
    let n = s.t_s.len();
    if [&s.field_minus_drift_nt, &s.model_nt]
        .iter()
        .any(|a| a.iter().any(|v| v.len() != n))
    {
        return Ok(Vec::new());
    }
    let mut figs = Vec::new();
    for (k, rod) in r.rods.iter().enumerate() {
        let Some(cmd) = s.commands.get(k).filter(|c| c.len() == n) else {
            continue;
        };
        let c = Vector3::from(rod.coupling_nt_per_command);
        let e = Vector3::from(rod.expected_nt_per_am2);
        let dir = if e.norm() > 0.0 {
            e.normalize()
        } else if c.norm() > 0.0 {
            c.normalize()
        } else {
            Vector3::x()
        };
        let along = dir.dot(&c);
        let scale = c.norm();
        let mut all = Vec::with_capacity(n);
        let mut meas = Vec::with_capacity(n);
        let mut model = Vec::with_capacity(n);
        let mut command = Vec::with_capacity(n);
        for i in 0..n {
            let f = Vector3::new(
                s.field_minus_drift_nt[0][i],
                s.field_minus_drift_nt[1][i],
                s.field_minus_drift_nt[2][i],
            );
            let m = Vector3::new(s.model_nt[0][i], s.model_nt[1][i], s.model_nt[2][i]);
            let t = s.t_s[i];
            all.push((t, dir.dot(&(f - m)) + along * cmd[i]));
            // The time plot draws the evenly thinned rows; the stacked view every row.
            if s.thinned.get(i).copied().unwrap_or(true) {
                meas.push(all[all.len() - 1]);
                model.push((t, along * cmd[i]));
                command.push((t, scale * cmd[i]));
            }
        }
        let mut plot = XyPlot::new(
            &format!("Rod {}: {}", rod.name, rod.verdict.as_str()),
            "time [s]",
            "field along expected direction [nT]",
        )
        .with(Series::points("measured", meas, 0))
        .with(Series::dashed("command×|c|", command, 1))
        .with(Series::line("model", model, 3));
        plot.size = (540, 340);
        let stem = file_safe(&rod.name, k);
        let stacked = super::polarity_stack::stacked_pulses(r, k, &all, &stem)?;
        figs.push(figure(
            &format!("polarity-rod-{stem}.svg"),
            &format!(
                "Rod {}: field at the sensor with drift and the other rods' fitted responses \
                 removed, along the direction the plan predicts (dots); the fitted model \
                 (line); the command scaled by |coupling| (dashed), which a correctly wired \
                 rod follows. Opposite signs mean reversed polarity.",
                rod.name
            ),
            draw_xy(&plot)?,
        ));
        figs.extend(stacked);
    }
    Ok(figs)
}

/// A file-name-safe form of a rod name, made unique by its index.
fn file_safe(name: &str, k: usize) -> String {
    let clean: String = name
        .chars()
        .map(|c| {
            if c.is_ascii_alphanumeric() || c == '-' || c == '_' {
                c
            } else {
                '_'
            }
        })
        .collect();
    if clean.is_empty() || clean != name {
        format!("{k}-{clean}")
    } else {
        clean
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::check::polarity::run_polarity;
    use crate::check::{CheckInput, CheckRequest};
    use crate::log::{read_plan, read_sweep, ReadOptions};
    use crate::report::Verdict;
    use crate::sim::polarity::{simulate_polarity, PolarityConfig};

    fn result(cfg: &PolarityConfig) -> PolarityResult {
        let dir = tempfile::tempdir().unwrap();
        let sim = simulate_polarity(cfg, 5).unwrap();
        let [csv, plan, _] = sim.write(dir.path(), "p").unwrap();
        let plan = read_plan(&plan).unwrap();
        let log = read_sweep(&csv, &ReadOptions::default()).unwrap();
        let input = CheckInput::screen(log, Default::default(), None).unwrap();
        run_polarity(&CheckRequest::new(&input, Some(&plan), Default::default())).unwrap()
    }

    #[test]
    fn reversed_rod_is_a_red_word_and_its_response_runs_against_the_command() {
        let mut cfg = PolarityConfig::default();
        cfg.rods[1].reversed = true;
        let r = result(&cfg);
        let s = polarity_section(&r).unwrap();
        assert_eq!(s.verdict, Verdict::Fail);
        let row = &s.tables[0].rows[1];
        assert!(row[1].text.starts_with("reversed"));
        assert_eq!(row[1].tone, Tone::Bad);
        assert_eq!(s.tables[0].rows[0][1].tone, Tone::Good);
        // Per rod: its time plot and its pulses stacked on their turn-off edge, with the
        // blanking window marked.
        assert_eq!(s.figures.len(), 2 * r.rods.len());
        let stack = s
            .figures
            .iter()
            .find(|f| f.file_name == "polarity-stack-y.svg")
            .unwrap();
        assert!(
            stack.caption.contains("blanking window (dashed"),
            "{}",
            stack.caption
        );
        assert!(stack.svg.contains("time from command off [s]"));
        assert_eq!(s.result, serde_json::to_value(&r).unwrap());
        // The reversed rod's coupling points against the expected direction: the plotted
        // model (coupling along expected × command) has the opposite sign of the command.
        let rod = &r.rods[1];
        let along = Vector3::from(rod.expected_nt_per_am2)
            .normalize()
            .dot(&Vector3::from(rod.coupling_nt_per_command));
        assert!(along < 0.0);
        let ok = &r.rods[0];
        let along_ok = Vector3::from(ok.expected_nt_per_am2)
            .normalize()
            .dot(&Vector3::from(ok.coupling_nt_per_command));
        assert!(along_ok > 0.0);
    }

    #[test]
    fn file_names_are_safe_and_unique() {
        assert_eq!(file_safe("x", 0), "x");
        assert_eq!(file_safe("a/b", 2), "2-a_b");
    }
}

/// An SNR a reader takes in at a glance: whole numbers with thousands grouped below
/// 10⁶ (`12 400`), "> 10⁶" above (beyond any decision the check makes).
fn snr_text(snr: f64) -> String {
    if !snr.is_finite() || snr >= 1e6 {
        return "> 10⁶".into();
    }
    let whole = format!("{:.0}", snr.max(0.0));
    let mut out = String::new();
    for (k, c) in whole.chars().enumerate() {
        if k > 0 && (whole.len() - k) % 3 == 0 {
            out.push('\u{2009}');
        }
        out.push(c);
    }
    out
}

#[cfg(test)]
mod snr_tests {
    #[test]
    fn snr_is_grouped_and_capped() {
        assert_eq!(super::snr_text(7.4), "7");
        assert_eq!(super::snr_text(12_400.0), "12\u{2009}400");
        assert_eq!(super::snr_text(3.0e7), "> 10⁶");
    }
}
