//! `magproof closeout PLAN`: every `[[step]]` of a plan in order, one summary (and with
//! `--report`, one report), and one ledger record per step under the plan's serial and
//! build (docs/ledger.md).

use std::path::PathBuf;

use clap::Args as ClapArgs;

use super::common::{LedgerArgs, Outcome, OutputArgs};
use super::present::{emit, outcome, prepare_all, run_report, writers};
use magproof::check::closeout::{run_closeout, CloseoutRequest, CloseoutResult};
use magproof::check::sign_chain::{AxisChain, SignChain};
use magproof::ledger::{Ledger, NewRun, OtherVersion, Recorded};
use magproof::report::RunReport;

/// Flags of `magproof closeout`.
#[derive(Debug, ClapArgs)]
pub struct Args {
    /// Test plan (TOML) with [article] and [[step]] entries.
    plan: PathBuf,
    #[command(flatten)]
    output: OutputArgs,
    #[command(flatten)]
    ledger: LedgerArgs,
    /// Run the steps but write nothing to the ledger.
    #[arg(long)]
    no_record: bool,
    /// Skip rows with a bad cell in every log (counted and reported) instead of refusing.
    #[arg(long)]
    skip_bad_rows: bool,
    /// Write flight parameters into this folder: magproof-flight.json and
    /// magproof-flight.h (only when every step passed, unless --force).
    #[arg(long, value_name = "DIR")]
    params_out: Option<PathBuf>,
}

/// What closeout recorded, for the summary.
pub struct RecordedSteps {
    /// Ledger path.
    pub ledger: PathBuf,
    /// Per step: the run id and whether it was new.
    pub runs: Vec<Recorded>,
    /// Per step: runs of the same inputs and options by other magproof versions (for a
    /// step recorded as new; see `Ledger::same_inputs_by_other_versions`).
    pub other_versions: Vec<Vec<OtherVersion>>,
}

/// Run the plan's steps and record them; shared with `magproof demo`. `before_record`
/// runs after the steps and before anything is written to the ledger (the writers check
/// their destinations there).
pub fn run_and_record(
    plan: &std::path::Path,
    ledger: Option<&std::path::Path>,
    skip_bad_rows: bool,
    before_record: impl FnOnce(&CloseoutResult) -> anyhow::Result<()>,
) -> anyhow::Result<(CloseoutResult, Option<RecordedSteps>)> {
    let result = run_closeout(&CloseoutRequest {
        plan: plan.to_path_buf(),
        skip_bad_rows,
        ledger: ledger.map(std::path::Path::to_path_buf),
    })?;
    before_record(&result)?;
    let Some(path) = ledger else {
        return Ok((result, None));
    };
    // Build every record before opening the ledger: nothing is written unless all are good.
    let mut runs = result
        .steps
        .iter()
        .map(|s| {
            // Step log paths are already resolved against the plan's folder.
            let options = serde_json::json!({ "skip_bad_rows": skip_bad_rows });
            // The step's magnetometer goes with its record.
            let mut plan = result.plan.clone();
            if s.sensor.is_some() {
                plan.select_sensor(s.sensor.as_deref())?;
            }
            NewRun::from_result(&plan, s.result.as_ref(), (&s.log, &s.log_sha256), options)
                .map_err(magproof::Error::from)
        })
        .collect::<Result<Vec<_>, magproof::Error>>()?;
    // The sign chain is filed beside the steps, in the same transaction.
    if let Some(chain) = &result.sign_chain {
        let options = serde_json::json!({ "skip_bad_rows": skip_bad_rows });
        runs.push(
            chain
                .new_run(&result, options)
                .map_err(magproof::Error::from)?,
        );
    }
    let (recorded, other_versions) = Ledger::open(path)
        .and_then(|mut l| {
            let recorded = l.record_runs(&runs)?;
            let others = runs
                .iter()
                .zip(&recorded)
                .map(|(run, rec)| match rec {
                    Recorded::New(_) => l.same_inputs_by_other_versions(run),
                    Recorded::AlreadyThere(_) => Ok(Vec::new()),
                })
                .collect::<Result<Vec<_>, _>>()?;
            Ok((recorded, others))
        })
        .map_err(magproof::Error::from)?;
    Ok((
        result,
        Some(RecordedSteps {
            ledger: path.to_path_buf(),
            runs: recorded,
            other_versions,
        }),
    ))
}

/// The closing lines of a closeout's terminal text: each step's verdict and what the
/// ledger did with it.
pub fn verdict_lines(result: &CloseoutResult, recorded: Option<&RecordedSteps>) -> String {
    let mut out = String::from("\nVerdicts\n");
    for (k, s) in result.steps.iter().enumerate() {
        let rec = recorded
            .and_then(|r| r.runs.get(k))
            .map(|r| match r {
                Recorded::New(id) => format!("recorded as run {id}"),
                Recorded::AlreadyThere(id) => {
                    format!("same inputs as run {id}, not recorded again")
                }
            })
            .unwrap_or_default();
        out.push_str(&format!(
            "  step {} {:<10} {:<12} {}\n",
            s.index,
            s.result.kind().as_str(),
            s.result.verdict().word(),
            rec
        ));
        let others = recorded.and_then(|r| r.other_versions.get(k));
        for other in others.into_iter().flatten() {
            out.push_str(&format!(
                "         (same inputs as run {} by magproof {}: a new version's run)\n",
                other.id,
                magproof::text::printable(&other.version)
            ));
        }
    }
    if let Some(chain) = &result.sign_chain {
        out.push_str(&chain_lines(chain, recorded, result.steps.len()));
    }
    out.push_str(&format!("  overall         {}\n", result.verdict().word()));
    if let Some(r) = recorded {
        let shown = magproof::text::printable(&r.ledger.display().to_string());
        out.push_str(&format!("  ledger          {shown}\n"));
    }
    out
}

/// The sign chain's lines in the verdicts: its state and what the ledger did with it
/// (its record follows the `steps` step records), and the axes not proven.
fn chain_lines(chain: &SignChain, recorded: Option<&RecordedSteps>, steps: usize) -> String {
    let rec = match recorded.and_then(|r| r.runs.get(steps)) {
        Some(Recorded::New(id)) => format!("recorded as run {id}"),
        Some(Recorded::AlreadyThere(id)) => format!("same inputs as run {id}, not recorded again"),
        None => String::new(),
    };
    let mut out = format!(
        "  {:<18}{:<12} {rec}\n",
        "sign chain",
        chain.status().to_uppercase()
    );
    let axes = |broken: bool| -> Vec<&str> {
        let on = |a: &&AxisChain| {
            [a.magnetometer, a.gyro, a.rod, a.law]
                .iter()
                .any(|e| e.is_broken())
                == broken
        };
        chain
            .axes
            .iter()
            .filter(|a| !a.ok)
            .filter(on)
            .map(|a| a.axis)
            .collect()
    };
    let (broken, open) = (axes(true), axes(false));
    let mut said = Vec::new();
    if !broken.is_empty() {
        said.push(format!("broken on body {}", broken.join(", ")));
    }
    if !open.is_empty() {
        said.push(format!("not proven on body {}", open.join(", ")));
    }
    if !said.is_empty() {
        out.push_str(&format!(
            "         ({}; see the sign chain section)\n",
            said.join("; ")
        ));
    }
    let others = recorded.and_then(|r| r.other_versions.get(steps));
    for other in others.into_iter().flatten() {
        out.push_str(&format!(
            "         (same inputs as run {} by magproof {}: a new version's run)\n",
            other.id,
            magproof::text::printable(&other.version)
        ));
    }
    out
}

/// The combined report of a closeout: one section per step, with every log and the
/// plan as hashed inputs.
pub fn closeout_report(result: &CloseoutResult) -> anyhow::Result<RunReport> {
    let mut sections = Vec::with_capacity(result.steps.len());
    for s in &result.steps {
        for (k, mut section) in s.result.sections()?.into_iter().enumerate() {
            if k == 0 && !s.ignored_columns.is_empty() {
                section
                    .notes
                    .push(super::present::ignored_note(&s.ignored_columns));
            }
            if let (0, Some(sensor)) = (k, &s.sensor) {
                section.notes.push(format!("Magnetometer: {sensor}."));
            }
            // Figure files must stay unique when a plan has two steps of one kind.
            for f in &mut section.figures {
                f.file_name = format!("step{}-{}", s.index, f.file_name);
            }
            section.title = format!("Step {} · {}", s.index, section.title);
            sections.push(section);
        }
    }
    if let Some(chain) = &result.sign_chain {
        sections.push(magproof::report::sections::sign_chain_section(chain));
    }
    let mut inputs: Vec<(&std::path::Path, &str)> = vec![(&result.plan.path, &result.plan.sha256)];
    inputs.extend(
        result
            .steps
            .iter()
            .map(|s| (s.log.as_path(), s.log_sha256.as_str())),
    );
    let title = match &result.plan.article {
        Some(a) => format!("Closeout of {} build {}", a.serial, a.build),
        None => "Closeout".to_string(),
    };
    run_report(
        &title,
        Some(&result.plan),
        &inputs,
        sections,
        result.to_json()?,
    )
}

/// Run `closeout`.
pub fn run(args: Args) -> anyhow::Result<Outcome> {
    let mut writers = writers(&args.output);
    let ledger = (!args.no_record).then(|| args.ledger.path());
    // Every output is checked before any step is recorded.
    let (result, recorded) = run_and_record(
        &args.plan,
        ledger.as_deref(),
        args.skip_bad_rows,
        |result| {
            if let Some(dir) = &args.params_out {
                let w = super::flight_out::for_closeout(result, dir, args.output.force)
                    .map_err(|e| e.context("--params-out"))?;
                writers.push(Box::new(w));
            }
            prepare_all(&writers, args.output.force)
        },
    )?;
    let report = closeout_report(&result)?;
    emit(&writers, &report, args.output.force, || Ok(()))?;
    if !args.output.json {
        out!("{}", verdict_lines(&result, recorded.as_ref()))?;
    }
    Ok(outcome(result.verdict()))
}
