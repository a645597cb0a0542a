//! The demo's on-orbit pass: after B3, the vehicle's telemetry is calibrated against the
//! model along its orbit, compared with B3's ground calibration in the demo's ledger,
//! recorded under the build "orbit", and reported beside the builds.

use std::path::{Path, PathBuf};

use magproof::check::orbit::ground::find_ground;
use magproof::check::orbit::{run_orbit, OrbitOptions, DEFAULT_GRID_S};
use magproof::check::{CheckInput, CheckRequest, CheckResult};
use magproof::ledger::record_check;
use magproof::log::read_plan;
use magproof::log::telemetry::read_telemetry;
use magproof::report::atomic::write_atomic;
use magproof::report::terminal::{render, Style};
use magproof::Error;

/// Run, record and report the on-orbit pass of `folder` under `samples`; returns the
/// summary lines and the report folder.
pub fn orbit_pass(
    samples: &Path,
    folder: &str,
    ledger_path: &Path,
    reports: &Path,
) -> anyhow::Result<(String, PathBuf)> {
    let plan_path = samples.join(folder).join("plan.toml");
    let plan = read_plan(&plan_path).map_err(Error::from)?;
    let log = samples.join(folder).join("telemetry.csv");
    let tele = read_telemetry(&log, Default::default()).map_err(Error::from)?;
    let input = CheckInput::screen(tele.log, Default::default(), None)?;
    let serial = plan
        .article
        .as_ref()
        .map(|a| a.serial.clone())
        .unwrap_or_default();
    let options = OrbitOptions {
        columns: &tele.orbit,
        ground: find_ground(Some(ledger_path), &plan)?,
        robust: true,
        grid_s: DEFAULT_GRID_S,
        keep_samples: true,
    };
    let result = run_orbit(&CheckRequest::new(&input, Some(&plan), options))?;
    let sha = input.log.sha256.clone();
    record_check(
        ledger_path,
        &plan,
        &result,
        (&log, &sha),
        serde_json::json!({"grid_s": DEFAULT_GRID_S}),
    )
    .map_err(Error::from)?;
    let report = super::present::run_report(
        "Magnetometer calibration on orbit",
        Some(&plan),
        &[
            (log.as_path(), sha.as_str()),
            (plan.path.as_path(), plan.sha256.as_str()),
        ],
        result.sections()?,
        result.json()?,
    )?;
    let dir = reports.join(folder);
    magproof::report::write_report_dir(&dir, true, &report)?;
    let text = render(&report, &Style::plain());
    write_atomic(&dir.join("orbit.txt"), text.as_bytes(), true)?;
    let summary = format!(
        "{serial} orbit: {}\n  {:<10} {:<5} {}\n",
        result.verdict().word(),
        "orbit",
        result.verdict().word(),
        result.summary()
    );
    Ok((summary, dir))
}
