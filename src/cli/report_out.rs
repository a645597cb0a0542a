//! Shared by the checks' CLIs: write a `--report DIR` folder for one section, and read a
//! large log with a progress bar on a terminal.

use std::io::IsTerminal;
use std::path::Path;

use anyhow::Context;
use magproof::log::hash::sha256_file;
use magproof::log::{read_sweep_with_progress, LogError, Plan, ReadOptions, SweepLog};
use magproof::report::model::now_utc_iso;
use magproof::report::{write_report_dir, InputFile, RunReport, Section};

/// Logs larger than this get a progress bar while read (on a terminal only), bytes.
pub const PROGRESS_MIN_BYTES: u64 = 20 * 1024 * 1024;

/// Write `report.html`, `result.json` (= `result`) and the section's SVGs into `dir`
/// (replacing an existing folder only with `force`), and say where on stderr.
pub fn write_section_report(
    dir: &Path,
    force: bool,
    title: &str,
    plan: Option<&Plan>,
    inputs: &[&Path],
    section: Section,
    result: &serde_json::Value,
) -> anyhow::Result<()> {
    let path = write_run_report(dir, force, title, plan, inputs, vec![section], result)?;
    eprintln!("report written to {}", path.display());
    Ok(())
}

/// Write a report folder with several sections (closeout, demo); returns its path.
pub fn write_run_report(
    dir: &Path,
    force: bool,
    title: &str,
    plan: Option<&Plan>,
    inputs: &[&Path],
    sections: Vec<Section>,
    result: &serde_json::Value,
) -> anyhow::Result<std::path::PathBuf> {
    let mut files = Vec::with_capacity(inputs.len());
    for p in inputs {
        let sha256 = sha256_file(p).with_context(|| format!("hashing {}", p.display()))?;
        files.push(InputFile {
            path: p.display().to_string(),
            sha256,
        });
    }
    let report = RunReport {
        title: title.to_string(),
        article: plan
            .and_then(|p| p.article.as_ref())
            .map(|a| (a.serial.clone(), a.build.clone())),
        generated_at: now_utc_iso(),
        tool_version: env!("CARGO_PKG_VERSION").to_string(),
        inputs: files,
        sections,
    };
    Ok(write_report_dir(dir, force, &report, result)?)
}

/// A progress bar on stderr for reading `path`, when the file is larger than
/// [`PROGRESS_MIN_BYTES`] and stderr is a terminal; `None` otherwise.
pub fn progress_bar(path: &Path) -> Option<indicatif::ProgressBar> {
    let size = std::fs::metadata(path).map(|m| m.len()).unwrap_or(0);
    if size <= PROGRESS_MIN_BYTES || !std::io::stderr().is_terminal() {
        return None;
    }
    let bar = indicatif::ProgressBar::with_draw_target(
        Some(size),
        indicatif::ProgressDrawTarget::stderr(),
    );
    if let Ok(style) = indicatif::ProgressStyle::with_template(
        "reading {msg} {wide_bar} {bytes}/{total_bytes} ({eta})",
    ) {
        bar.set_style(style);
    }
    bar.set_message(
        path.file_name()
            .map(|n| n.to_string_lossy().into_owned())
            .unwrap_or_default(),
    );
    Some(bar)
}

/// Read a sweep log; a log over [`PROGRESS_MIN_BYTES`] shows a progress bar on stderr
/// when stderr is a terminal (never otherwise).
pub fn read_log(path: &Path, options: &ReadOptions) -> Result<SweepLog, LogError> {
    match progress_bar(path) {
        None => read_sweep_with_progress(path, options, &mut |_| {}),
        Some(bar) => {
            let out = read_sweep_with_progress(path, options, &mut |b| bar.set_position(b));
            bar.finish_and_clear();
            out
        }
    }
}
