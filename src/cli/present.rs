//! What every check command shares: reading its log through the one input builder (with
//! a progress bar on large logs), and presenting its result through the writers chosen
//! by the output flags — each checked before anything is recorded, then the ledger
//! (when asked), then the writing.

use std::path::Path;

use anyhow::Context;
use magproof::check::{CheckInput, CheckResult, InputOptions, Verdict};
use magproof::log::hash::sha256_file;
use magproof::log::Plan;
use magproof::report::model::now_utc_iso;
use magproof::report::terminal::Style;
use magproof::report::{
    HtmlWriter, InputFile, JsonWriter, ReportWriter, RunReport, TerminalWriter, Written,
};

use super::common::{InputArgs, Outcome, OutputArgs};
use super::record::{record_if_asked, RecordArgs};
use super::report_out::progress_bar;

/// Read and screen `log` as the flags and the plan say.
pub fn read_input(
    log: &Path,
    plan: Option<&Plan>,
    flags: &InputArgs,
    plan_range_applies: bool,
) -> anyhow::Result<CheckInput> {
    let options = InputOptions {
        unit: flags.unit,
        range_nt: flags.range,
        skip_bad_rows: flags.skip_bad_rows,
        plan_range_applies,
    };
    let input = match progress_bar(log) {
        None => CheckInput::read(log, plan, &options),
        Some(bar) => {
            let r =
                CheckInput::read_with_progress(log, plan, &options, &mut |b| bar.set_position(b));
            bar.finish_and_clear();
            r
        }
    };
    Ok(input?)
}

/// The writers the output flags ask for: JSON or the terminal summary on stdout, and
/// the report folder with `--report`.
pub fn writers<'a>(output: &OutputArgs) -> Vec<Box<dyn ReportWriter + 'a>> {
    let mut out: Vec<Box<dyn ReportWriter + 'a>> = Vec::new();
    if let Some(dir) = &output.report {
        out.push(Box::new(HtmlWriter {
            dir: dir.clone(),
            force: output.force,
        }));
    }
    if output.json {
        out.push(Box::new(JsonWriter));
    } else {
        out.push(Box::new(TerminalWriter {
            style: Style::detect(),
        }));
    }
    out
}

/// A report of sections with the input files hashed.
pub fn run_report(
    title: &str,
    plan: Option<&Plan>,
    inputs: &[&Path],
    sections: Vec<magproof::report::Section>,
    result: serde_json::Value,
) -> anyhow::Result<RunReport> {
    let mut files = Vec::with_capacity(inputs.len());
    for p in inputs {
        let sha256 = sha256_file(p).with_context(|| format!("hashing {}", p.display()))?;
        files.push(InputFile {
            path: p.display().to_string(),
            sha256,
        });
    }
    Ok(RunReport {
        title: title.to_string(),
        article: plan
            .and_then(|p| p.article.as_ref())
            .map(|a| (a.serial.clone(), a.build.clone())),
        generated_at: now_utc_iso(),
        tool_version: magproof::VERSION.to_string(),
        inputs: files,
        sections,
        result,
    })
}

/// Check every writer, record when asked, then write; say on stderr where files went.
pub fn emit(
    writers: &[Box<dyn ReportWriter + '_>],
    report: &RunReport,
    record: impl FnOnce() -> anyhow::Result<()>,
) -> anyhow::Result<()> {
    for w in writers {
        w.prepare()
            .map_err(anyhow::Error::from)
            .with_context(|| format!("{} (add --force to replace)", w.name()))?;
    }
    record()?;
    let mut stdout = std::io::stdout().lock();
    for (name, written) in magproof::report::writer::write_all(writers, report, &mut stdout)? {
        if let Written::Path(p) = written {
            eprintln!("{name} written to {}", p.display());
        }
    }
    Ok(())
}

/// The single-check path: present `result` of the check run on `log` under `plan`.
pub fn present_check(
    result: &dyn CheckResult,
    log: &Path,
    plan: (Option<&Plan>, Option<&Path>),
    output: &OutputArgs,
    record: &RecordArgs,
    extra: Vec<Box<dyn ReportWriter + '_>>,
) -> anyhow::Result<Outcome> {
    let (plan, plan_path) = plan;
    let mut all = writers(output);
    all.extend(extra);
    // Hash the inputs and draw the sections only for a writer that reads them.
    let mut inputs = Vec::new();
    if all.iter().any(|w| w.reads_inputs()) {
        inputs.push(log);
        inputs.extend(plan_path);
    }
    let sections = if all.iter().any(|w| w.reads_sections()) {
        result.sections()?
    } else {
        Vec::new()
    };
    let title = result.kind().spec()?.title;
    let report = run_report(title, plan, &inputs, sections, result.json()?)?;
    emit(&all, &report, || record_if_asked(record, plan, result, log))?;
    Ok(outcome(result.verdict()))
}

/// Exit 1 for a failing or inconclusive verdict.
pub fn outcome(v: Verdict) -> Outcome {
    Outcome::from_pass(v.pass())
}
