//! `magproof demo [--out DIR] [--force]`: the whole closeout of the bundled, invented
//! scenario (sample-logs/: vehicle TMR-0207, builds B1–B3), from any folder. The sample
//! logs are embedded in the binary, written into DIR, and each build's plan is closed out
//! in order into a fresh ledger in DIR; then the per-build verdicts, the history of
//! changes and where everything went are printed. Exit 0 when it ran: the failing build
//! (B1, a rod wired backwards) is part of the story.

use std::path::{Path, PathBuf};

use clap::Args as ClapArgs;

use super::closeout::{closeout_report, run_and_record, verdict_lines};
use super::common::Outcome;
use magproof::check::closeout::CloseoutResult;
use magproof::ledger::{changes, ChangeRules, Ledger, RunFilter};
use magproof::report::atomic::write_atomic;
use magproof::report::terminal::{render, Style};
use magproof::Error;

/// Flags of `magproof demo`.
#[derive(Debug, ClapArgs)]
pub struct Args {
    /// Folder to write into (default: a new `magproof-demo-<UTC time>` here).
    #[arg(long, value_name = "DIR")]
    out: Option<PathBuf>,
    /// Use an existing non-empty folder, replacing the demo's files in it.
    #[arg(long)]
    force: bool,
}

macro_rules! embedded {
    ($($rel:literal),* $(,)?) => {
        &[$(($rel, include_str!(concat!("../../sample-logs/", $rel)))),*]
    };
}

/// The sample logs, as committed in `sample-logs/`: (path relative to it, text).
const SAMPLE_FILES: &[(&str, &str)] = embedded![
    "README.md",
    "tmr-0207-b1/plan.toml",
    "tmr-0207-b1/tumble.csv",
    "tmr-0207-b1/rod-pulses.csv",
    "tmr-0207-b1/turntable.csv",
    "tmr-0207-b1/loop.csv",
    "tmr-0207-b2/plan.toml",
    "tmr-0207-b2/tumble.csv",
    "tmr-0207-b2/rod-pulses.csv",
    "tmr-0207-b2/turntable.csv",
    "tmr-0207-b2/loop.csv",
    "tmr-0207-b3/plan.toml",
    "tmr-0207-b3/tumble.csv",
    "tmr-0207-b3/rod-pulses.csv",
    "tmr-0207-b3/turntable.csv",
    "tmr-0207-b3/loop.csv",
    "rods/tmr-tr-x/plan.toml",
    "rods/tmr-tr-x/rod.csv",
    "rods/tmr-tr-y/plan.toml",
    "rods/tmr-tr-y/rod.csv",
    "rods/tmr-tr-z/plan.toml",
    "rods/tmr-tr-z/rod.csv",
    "tmr-0207-orbit/plan.toml",
    "tmr-0207-orbit/telemetry.csv",
    "tmr-0207-b1/align/plan.toml",
    "tmr-0207-b1/align/align.csv",
    "tmr-0207-b1/align/align-retest.csv",
    "tmr-0207-b2/align/plan.toml",
    "tmr-0207-b2/align/align.csv",
    "tmr-0207-b3/align/plan.toml",
    "tmr-0207-b3/align/align.csv",
];

/// The builds' folders, in the order they are closed out.
const BUILDS: [&str; 3] = ["tmr-0207-b1", "tmr-0207-b2", "tmr-0207-b3"];

fn default_out() -> Result<PathBuf, Error> {
    let fmt = time::macros::format_description!("[year][month][day]-[hour][minute][second]");
    let stamp = time::OffsetDateTime::now_utc()
        .format(&fmt)
        .map_err(|e| Error::Internal(format!("timestamp: {e}")))?;
    Ok(PathBuf::from(format!("magproof-demo-{stamp}")))
}

fn write_samples(root: &Path) -> Result<(), Error> {
    for (rel, text) in SAMPLE_FILES {
        let path = root.join(rel);
        if let Some(parent) = path.parent() {
            std::fs::create_dir_all(parent).map_err(|e| Error::io(parent, e))?;
        }
        write_atomic(&path, text.as_bytes(), true)?;
    }
    Ok(())
}

fn build_summary(result: &CloseoutResult) -> String {
    let (serial, build) = result
        .plan
        .article
        .as_ref()
        .map_or(("?", "?"), |a| (a.serial.as_str(), a.build.as_str()));
    let mut s = format!("{serial} {build}: {}\n", result.verdict().word());
    for step in &result.steps {
        s += &format!(
            "  {:<10} {:<5} {}\n",
            step.result.kind().as_str(),
            step.result.verdict().word(),
            step.result.summary()
        );
    }
    s
}

/// The rod batch on the bench (sample-logs/rods/: one plan per rod, filed under the
/// rod's serial): close each out into the same ledger and write its report; returns the
/// report folders.
fn close_out_rods(out: &Path, samples: &Path, ledger_path: &Path) -> anyhow::Result<Vec<PathBuf>> {
    use magproof::sim::scenario_rods::{BATCH, ROD_FOLDERS};
    outln!("\nThe vehicle's torque rods on the bench before integration (batch {BATCH}):")?;
    let mut reports = Vec::new();
    for folder in ROD_FOLDERS {
        let plan = samples.join(folder).join("plan.toml");
        let (result, recorded) = run_and_record(&plan, Some(ledger_path), false, |_| Ok(()))?;
        out!("{}", build_summary(&result))?;
        let dir = out.join("reports").join(folder);
        std::fs::create_dir_all(out.join("reports").join("rods"))
            .map_err(|e| Error::io(&dir, e))?;
        let report = closeout_report(&result)?;
        magproof::report::write_report_dir(&dir, true, &report)?;
        let text = render(&report, &Style::plain()) + &verdict_lines(&result, recorded.as_ref());
        write_atomic(&dir.join("closeout.txt"), text.as_bytes(), true)?;
        let json = serde_json::to_string_pretty(&result.to_json()?)? + "\n";
        write_atomic(&dir.join("closeout.json"), json.as_bytes(), true)?;
        reports.push(dir);
    }
    Ok(reports)
}

/// The flight parameters of a passing build, in `OUT/flight-params/<build>/` (what
/// `closeout --params-out` writes); `None` for a build that did not pass.
fn demo_flight_params(
    result: &CloseoutResult,
    report: &magproof::report::RunReport,
    out: &Path,
    folder: &str,
) -> anyhow::Result<Option<magproof::report::ParamsPaths>> {
    if result.verdict() != magproof::check::Verdict::Pass {
        return Ok(None);
    }
    let dir = out.join("flight-params").join(folder);
    let w = super::flight_out::for_closeout(result, &dir, true)?;
    magproof::report::ReportWriter::prepare(&w)?;
    magproof::report::ReportWriter::write(&w, report, &mut std::io::sink())?;
    Ok(Some(w.paths.clone()))
}

/// Run `demo`.
pub fn run(args: Args) -> anyhow::Result<Outcome> {
    let out = match args.out {
        Some(d) => d,
        None => default_out()?,
    };
    super::common::prepare_out(&out, args.force)?;
    // Closeout is given absolute plan paths so log paths resolve the same from anywhere.
    let out = out.canonicalize().map_err(|e| Error::io(&out, e))?;
    let samples = out.join("sample-logs");
    write_samples(&samples)?;
    let ledger_path = out.join("ledger.db");
    // --force: the demo's ledger starts fresh every time, its side files with it (a
    // write-ahead log left from a killed run would be replayed into the new ledger).
    magproof::ledger::remove_with_side_files(&ledger_path)
        .map_err(|e| Error::io(&ledger_path, e))?;

    outln!("magproof demo: the invented 3U vehicle \"Tamarin\" (serial TMR-0207), three")?;
    outln!("builds closed out in order into a fresh ledger, then a calibration from its")?;
    outln!("telemetry on orbit. All data are simulated.\n")?;
    let mut reports = super::demo_align::close_out_align(&out, &samples, &ledger_path)?;
    let (builds, flight) = close_out_builds(&out, &samples, &ledger_path)?;
    reports.extend(builds);
    reports.extend(close_out_rods(&out, &samples, &ledger_path)?);
    // After B3, the on-orbit pass, compared with B3's ground calibration.
    let (summary, dir) = super::demo_orbit::orbit_pass(
        &samples,
        magproof::sim::scenario::ORBIT_FOLDER,
        &ledger_path,
        &out.join("reports"),
    )?;
    out!("{summary}")?;
    reports.push(dir);

    let ledger = Ledger::open_existing(&ledger_path).map_err(Error::from)?;
    let runs = ledger.runs(&RunFilter::default()).map_err(Error::from)?;
    let rules = ChangeRules::default();
    let changes = changes(&runs, &rules);
    outln!()?;
    out!("{}", super::history::render(&ledger_path, &runs, &changes)?)?;

    where_things_are(&out, &samples, &ledger_path, &reports, &flight)?;
    write_history_report(&out, &ledger_path, &runs, &changes)?;
    outln!(
        "Look again with: magproof history --ledger {}",
        ledger_path.display()
    )?;
    Ok(Outcome::Passed)
}

/// A build's flight-parameter files, `None` when it did not pass.
type FlightFiles = Option<magproof::report::ParamsPaths>;

/// Each build closed out in order into the ledger: its report folder, closeout text and
/// JSON, and its flight parameters when it passed.
fn close_out_builds(
    out: &Path,
    samples: &Path,
    ledger_path: &Path,
) -> anyhow::Result<(Vec<PathBuf>, Vec<FlightFiles>)> {
    let mut reports = Vec::new();
    let mut flight = Vec::new();
    for folder in BUILDS {
        let plan = samples.join(folder).join("plan.toml");
        let (result, recorded) = run_and_record(&plan, Some(ledger_path), false, |_| Ok(()))?;
        out!("{}", build_summary(&result))?;
        let dir = out.join("reports").join(folder);
        std::fs::create_dir_all(out.join("reports")).map_err(|e| Error::io(&dir, e))?;
        // report.html, result.json and plots; then the terminal text beside them.
        let report = closeout_report(&result)?;
        magproof::report::write_report_dir(&dir, true, &report)?;
        let text = render(&report, &Style::plain()) + &verdict_lines(&result, recorded.as_ref());
        write_atomic(&dir.join("closeout.txt"), text.as_bytes(), true)?;
        let json = serde_json::to_string_pretty(&result.to_json()?)? + "\n";
        write_atomic(&dir.join("closeout.json"), json.as_bytes(), true)?;
        flight.push(demo_flight_params(&result, &report, out, folder)?);
        reports.push(dir);
    }
    Ok((reports, flight))
}

/// The closing list of what the demo wrote and where.
fn where_things_are(
    out: &Path,
    samples: &Path,
    ledger_path: &Path,
    reports: &[PathBuf],
    flight: &[FlightFiles],
) -> anyhow::Result<()> {
    outln!("\nWhere things are (under {}):", out.display())?;
    outln!("  sample logs and plans   {}", samples.display())?;
    outln!("  ledger                  {}", ledger_path.display())?;
    for r in reports {
        outln!(
            "  closeout report         {}",
            r.join("report.html").display()
        )?;
    }
    for (folder, written) in BUILDS.iter().zip(flight) {
        match written {
            Some(p) => outln!(
                "  flight parameters       {} and {}",
                p.json.display(),
                p.header.display()
            )?,
            None => {
                outln!("  flight parameters       none for {folder}: its verdict did not pass")?
            }
        }
    }
    Ok(())
}

/// The ledger's history as a report of its own, listed after the others.
fn write_history_report(
    out: &Path,
    ledger_path: &Path,
    runs: &[magproof::ledger::Run],
    changes: &[magproof::ledger::Change],
) -> anyhow::Result<()> {
    let history_dir = out.join("reports").join("history");
    let section = magproof::report::sections::history_section(runs, changes)?;
    let json = section.result.clone();
    let ledger_sha256 =
        magproof::log::hash::sha256_file(ledger_path).map_err(|e| Error::io(ledger_path, e))?;
    let report = super::present::run_report(
        "History of TMR-0207",
        None,
        &[(ledger_path, ledger_sha256.as_str())],
        vec![section],
        json,
    )?;
    let path = magproof::report::write_report_dir(&history_dir, true, &report)?;
    outln!(
        "  history report          {}",
        path.join("report.html").display()
    )?;
    Ok(())
}
