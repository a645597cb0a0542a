//! What every check command shares: reading its log through the one input builder (with
//! a progress bar on large logs), and presenting its result through the writers chosen
//! by the output flags — each checked before anything is recorded, then the ledger
//! (when asked), then the writing.

use std::path::Path;

use magproof::check::{CheckInput, CheckResult, InputOptions, Verdict};
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
        decimal_comma: flags.decimal_comma,
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

/// A report of sections with its input files: each path with the SHA-256 of the bytes
/// that were analysed (hashed as they were read, never read again).
pub fn run_report(
    title: &str,
    plan: Option<&Plan>,
    inputs: &[(&Path, &str)],
    sections: Vec<magproof::report::Section>,
    result: serde_json::Value,
) -> anyhow::Result<RunReport> {
    let files = inputs
        .iter()
        .map(|(p, sha256)| InputFile {
            path: p.display().to_string(),
            sha256: sha256.to_string(),
        })
        .collect();
    let mut sections = sections;
    if let (Some(plan), false) = (plan, sections.is_empty()) {
        // A closeout's JSON holds each step's result; a single check's is the result.
        let results: Vec<&serde_json::Value> = match result["steps"].as_array() {
            Some(steps) => steps.iter().map(|s| &s["result"]).collect(),
            None => vec![&result],
        };
        let kinds: Vec<&str> = sections.iter().map(|s| s.kind.as_str()).collect();
        let echoed = magproof::report::sections::assumptions_section(plan, &kinds, &results);
        sections.insert(0, echoed);
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

/// Ask every writer whether it can write, before anything is recorded; a refusal of an
/// existing destination names `--force` when it was not given.
pub fn prepare_all(writers: &[Box<dyn ReportWriter + '_>], force: bool) -> anyhow::Result<()> {
    for w in writers {
        if let Err(e) = w.prepare() {
            let hint = !force && e.to_string().contains("must be asked for");
            let what = if hint {
                format!("{} (add --force to replace)", w.name())
            } else {
                w.name().to_string()
            };
            return Err(anyhow::Error::from(e).context(what));
        }
    }
    Ok(())
}

/// Check every writer, record when asked, then write; say on stderr where files went.
pub fn emit(
    writers: &[Box<dyn ReportWriter + '_>],
    report: &RunReport,
    force: bool,
    record: impl FnOnce() -> anyhow::Result<()>,
) -> anyhow::Result<()> {
    prepare_all(writers, force)?;
    record()?;
    let mut stdout = std::io::stdout().lock();
    for (name, written) in magproof::report::writer::write_all(writers, report, &mut stdout)? {
        let shown = |p: &std::path::Path| magproof::text::printable(&p.display().to_string());
        match written {
            Written::Path(p) => eprintln!("{name} written to {}", shown(&p)),
            Written::Paths(ps) => {
                let all: Vec<String> = ps.iter().map(|p| shown(p)).collect();
                eprintln!("{name} written to {}", all.join(" and "));
            }
            Written::Stdout => {}
        }
    }
    Ok(())
}

/// What a check analysed: the log (its path and the SHA-256 of the bytes read) and the
/// analysis options that change the result (for the ledger's dedupe key).
pub struct Analysed<'a> {
    /// The log as given.
    pub log: &'a Path,
    /// SHA-256 of the log's bytes, hashed as they were read.
    pub log_sha256: String,
    /// The options, a JSON object.
    pub options: serde_json::Value,
    /// Columns of the log no check uses, as written in its header.
    pub ignored_columns: Vec<String>,
    /// Other files the check read (a calibration), with their SHA-256, for the report's
    /// inputs.
    pub other_inputs: Vec<(std::path::PathBuf, String)>,
}

impl<'a> Analysed<'a> {
    /// From the input read; `options` are the check's own options that change its result
    /// (the input flags are added here).
    pub fn new(
        log: &'a Path,
        input: &CheckInput,
        flags: &InputArgs,
        options: serde_json::Value,
    ) -> Self {
        let mut all = serde_json::json!({
            "unit": flags.unit.map(|u| format!("{u:?}")),
            "range_nt": flags.range,
            "skip_bad_rows": flags.skip_bad_rows,
            "decimal_comma": flags.decimal_comma,
        });
        if let (Some(all), serde_json::Value::Object(own)) = (all.as_object_mut(), options) {
            all.extend(own);
        }
        Analysed {
            log,
            log_sha256: input.log.sha256.clone(),
            options: all,
            ignored_columns: input.log.ignored_columns.clone(),
            other_inputs: Vec::new(),
        }
    }
}

/// The single-check path: present `result` of the check run on `analysed` under `plan`.
pub fn present_check(
    result: &dyn CheckResult,
    analysed: Analysed<'_>,
    plan: Option<&Plan>,
    output: &OutputArgs,
    record: &RecordArgs,
    extra: Vec<Box<dyn ReportWriter + '_>>,
) -> anyhow::Result<Outcome> {
    let log = (analysed.log, analysed.log_sha256.as_str());
    let mut inputs = vec![log];
    inputs.extend(plan.map(|p| (p.path.as_path(), p.sha256.as_str())));
    inputs.extend(
        analysed
            .other_inputs
            .iter()
            .map(|(p, h)| (p.as_path(), h.as_str())),
    );
    let mut all = writers(output);
    all.extend(extra);
    // Draw the sections (with their plots) only for a writer that reads them.
    let mut sections = if all.iter().any(|w| w.reads_sections()) {
        result.sections()?
    } else {
        Vec::new()
    };
    let ignored = &analysed.ignored_columns;
    if let (Some(first), false) = (sections.first_mut(), ignored.is_empty()) {
        first.notes.push(ignored_note(ignored));
    }
    let mut json = result.json()?;
    if let Some(obj) = json.as_object_mut() {
        obj.insert("ignored_columns".into(), serde_json::json!(ignored));
    }
    let title = result.kind().spec()?.title;
    let report = run_report(title, plan, &inputs, sections, json)?;
    emit(&all, &report, output.force, || {
        record_if_asked(record, plan, result, log, analysed.options)
    })?;
    Ok(outcome(result.verdict()))
}

/// The note every report carries about the log's columns no check used.
pub fn ignored_note(ignored: &[String]) -> String {
    format!(
        "Columns of the log not used (ignored): {}. Map one in the plan's [columns] if it \
         holds a quantity of ours.",
        ignored.join(", ")
    )
}

/// Exit 1 for a failing or inconclusive verdict.
pub fn outcome(v: Verdict) -> Outcome {
    Outcome::from_pass(v.pass())
}
