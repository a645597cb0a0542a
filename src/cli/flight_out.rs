//! `--params-out`: the flight-parameter writer for a single check (`FILE.json` or
//! `FILE.h`: both are written, side by side) or a closeout (`DIR`).

use std::path::Path;

use magproof::check::closeout::CloseoutResult;
use magproof::check::{CheckResult, FlightPart};
use magproof::log::Plan;
use magproof::report::flight::InputHash;
use magproof::report::model::now_utc_iso;
use magproof::report::{FlightParams, FlightParamsWriter, FlightSources, ParamsPaths};

fn hash(role: &str, path: &Path, sha256: &str) -> InputHash {
    InputHash {
        role: role.to_string(),
        path: path.display().to_string(),
        sha256: sha256.to_string(),
    }
}

fn plan_hash(plan: Option<&Plan>) -> Option<InputHash> {
    plan.map(|p| hash("plan", &p.path, &p.sha256))
}

/// The writer for one check's result read from `log` (its SHA-256 `log_sha256`).
pub fn for_check(
    result: &dyn CheckResult,
    plan: Option<&Plan>,
    log: (&Path, &str),
    file: &Path,
    force: bool,
) -> anyhow::Result<FlightParamsWriter> {
    let paths = ParamsPaths::beside(file)?;
    let mut inputs: Vec<InputHash> = plan_hash(plan).into_iter().collect();
    inputs.push(hash(result.kind().as_str(), log.0, log.1));
    let parts: Vec<FlightPart<'_>> = result.flight_part().into_iter().collect();
    let params = FlightParams::assemble(&FlightSources {
        plan,
        parts,
        verdict: result.verdict(),
        inputs,
        generated_at: now_utc_iso(),
    })?;
    Ok(FlightParamsWriter {
        params,
        paths,
        force,
    })
}

/// The writer for a closeout: every step that measured something, under the
/// closeout's overall verdict, into `dir`.
pub fn for_closeout(
    result: &CloseoutResult,
    dir: &Path,
    force: bool,
) -> anyhow::Result<FlightParamsWriter> {
    let mut inputs: Vec<InputHash> = plan_hash(Some(&result.plan)).into_iter().collect();
    let mut parts = Vec::new();
    let mut sensors = Vec::new();
    for s in &result.steps {
        if let Some(p) = s.result.flight_part() {
            inputs.push(hash(s.result.kind().as_str(), &s.log, &s.log_sha256));
            parts.push(p);
            sensors.push(s.sensor.clone());
        }
    }
    let sources = FlightSources {
        plan: Some(&result.plan),
        parts,
        verdict: result.verdict(),
        inputs,
        generated_at: now_utc_iso(),
    };
    // A plan of several magnetometers: one entry per magnetometer, from its own steps.
    let params = if result.plan.magnetometers.len() > 1 {
        FlightParams::assemble_per_sensor(&sources, &sensors)?
    } else {
        FlightParams::assemble(&sources)?
    };
    Ok(FlightParamsWriter {
        params,
        paths: ParamsPaths::in_dir(dir),
        force,
    })
}
