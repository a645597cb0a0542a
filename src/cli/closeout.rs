//! `magproof closeout PLAN`: every `[[step]]` of a plan in order, one summary (and with
//! `--report`, one report), and one ledger record per step under the plan's serial and
//! build (DESIGN §6, issue 7).

use std::path::PathBuf;

use clap::Args as ClapArgs;

use super::common::{LedgerArgs, Outcome, OutputArgs};
use magproof::check::closeout::{run_closeout, CloseoutRequest, CloseoutResult, StepResult};
use magproof::ledger::{Ledger, NewRun, Recorded};
use magproof::report::sections::{calibration_section, dipole_section, polarity_section};

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
}

/// What closeout recorded, for the summary.
pub struct RecordedSteps {
    /// Ledger path.
    pub ledger: PathBuf,
    /// Per step: the run id and whether it was new.
    pub runs: Vec<Recorded>,
}

/// Run the plan's steps and record them; shared with `magproof demo`.
pub fn run_and_record(
    plan: &std::path::Path,
    ledger: Option<&std::path::Path>,
    skip_bad_rows: bool,
) -> anyhow::Result<(CloseoutResult, Option<RecordedSteps>)> {
    let result = run_closeout(&CloseoutRequest {
        plan: plan.to_path_buf(),
        skip_bad_rows,
    })?;
    let Some(path) = ledger else {
        return Ok((result, None));
    };
    // Build every record before opening the ledger: nothing is written unless all are good.
    let runs = result
        .steps
        .iter()
        .map(|s| {
            // Step log paths are already resolved against the plan's folder.
            NewRun::from_plan(&result.plan, s.result.kind(), &s.log, s.result.to_json()?)
                .map_err(magproof::Error::from)
        })
        .collect::<Result<Vec<_>, magproof::Error>>()?;
    let recorded = Ledger::open(path)
        .and_then(|mut l| l.record_runs(&runs))
        .map_err(magproof::Error::from)?;
    Ok((
        result,
        Some(RecordedSteps {
            ledger: path.to_path_buf(),
            runs: recorded,
        }),
    ))
}

/// The terminal summary of a closeout: each step's own summary, then the verdicts.
pub fn render(result: &CloseoutResult, recorded: Option<&RecordedSteps>) -> String {
    let mut out = String::new();
    if let Some(a) = &result.plan.article {
        out.push_str(&format!(
            "Closeout of {} build {} ({} steps, plan {})\n",
            a.serial,
            a.build,
            result.steps.len(),
            result.plan.path.display()
        ));
    }
    for s in &result.steps {
        out.push('\n');
        out.push_str(&format!(
            "── step {} · {} · {}\n",
            s.index,
            s.result.kind().as_str(),
            s.log.display()
        ));
        match &s.result {
            StepResult::Calibrate(r) => out.push_str(&super::calibrate::render(r)),
            StepResult::Polarity(r) => out.push_str(&super::polarity::render_table(r)),
            StepResult::Dipole(r) => out.push_str(&super::dipole::render(&s.log, r)),
        }
    }
    out.push_str("\nVerdicts\n");
    for (k, s) in result.steps.iter().enumerate() {
        let word = match s.result.pass() {
            Some(true) => "PASS",
            Some(false) => "FAIL",
            None => "NO LIMIT",
        };
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
            "  step {} {:<10} {:<9} {}\n",
            s.index,
            s.result.kind().as_str(),
            word,
            rec
        ));
    }
    let overall = match result.pass() {
        Some(true) => "PASS",
        Some(false) => "FAIL",
        None => "NO LIMIT",
    };
    out.push_str(&format!("  overall         {overall}\n"));
    if let Some(r) = recorded {
        out.push_str(&format!("  ledger          {}\n", r.ledger.display()));
    }
    out
}

/// Write the combined report of a closeout: one section per step, with every log and
/// the plan as hashed inputs. Returns the report folder.
pub fn write_report(
    result: &CloseoutResult,
    dir: &std::path::Path,
    force: bool,
) -> anyhow::Result<PathBuf> {
    let mut sections = Vec::with_capacity(result.steps.len());
    for s in &result.steps {
        let mut section = match &s.result {
            StepResult::Calibrate(r) => calibration_section(r)?,
            StepResult::Polarity(r) => polarity_section(r)?,
            StepResult::Dipole(r) => dipole_section(r)?,
        };
        // Figure files must stay unique when a plan has two steps of one kind.
        for f in &mut section.figures {
            f.file_name = format!("step{}-{}", s.index, f.file_name);
        }
        section.title = format!("Step {} · {}", s.index, section.title);
        sections.push(section);
    }
    let mut inputs: Vec<&std::path::Path> = vec![&result.plan.path];
    inputs.extend(result.steps.iter().map(|s| s.log.as_path()));
    let title = match &result.plan.article {
        Some(a) => format!("Closeout of {} build {}", a.serial, a.build),
        None => "Closeout".to_string(),
    };
    super::report_out::write_run_report(
        dir,
        force,
        &title,
        Some(&result.plan),
        &inputs,
        sections,
        &result.to_json()?,
    )
}

/// Run `closeout`.
pub fn run(args: Args) -> anyhow::Result<Outcome> {
    if let Some(dir) = &args.output.report {
        // Refuse an existing folder before any step runs or anything is recorded.
        if dir.exists() && !args.output.force {
            return Err(magproof::Error::Usage(format!(
                "report folder {} exists; add --force to replace it",
                dir.display()
            ))
            .into());
        }
    }
    let ledger = (!args.no_record).then(|| args.ledger.path());
    let (result, recorded) = run_and_record(&args.plan, ledger.as_deref(), args.skip_bad_rows)?;
    if let Some(dir) = &args.output.report {
        let path = write_report(&result, dir, args.output.force)?;
        eprintln!("report written to {}", path.display());
    }
    if args.output.json {
        println!("{}", serde_json::to_string_pretty(&result.to_json()?)?);
    } else {
        print!("{}", render(&result, recorded.as_ref()));
    }
    Ok(Outcome::from_pass(result.pass()))
}
