//! The demo's first alignment run of B1 (sample-logs/tmr-0207-b1/align/), closed out
//! from its own plan into the demo's ledger with its report, before the builds: it
//! catches the magnetometer harness's reversed axis as `flipped`. The builds' plans list
//! their own alignment runs (B1's repeat after the fix) as their first step.

use std::path::{Path, PathBuf};

use super::closeout::{closeout_report, run_and_record, verdict_lines};
use magproof::report::atomic::write_atomic;
use magproof::report::terminal::{render, Style};
use magproof::Error;

/// Close out B1's first alignment plan into the ledger and write its report; returns the
/// report folder.
pub fn close_out_align(
    out: &Path,
    samples: &Path,
    ledger_path: &Path,
) -> anyhow::Result<Vec<PathBuf>> {
    use magproof::sim::scenario_align::ALIGN_FOLDERS;
    outln!("B1's first turntable run of the morning (sensor axes and alignment):")?;
    let mut reports = Vec::new();
    for folder in &ALIGN_FOLDERS[..1] {
        let plan = samples.join(folder).join("plan.toml");
        let (result, recorded) = run_and_record(&plan, Some(ledger_path), false, |_| Ok(()))?;
        let build = result
            .plan
            .article
            .as_ref()
            .map_or("?", |a| a.build.as_str());
        for step in &result.steps {
            outln!(
                "  {build} align      {:<5} {}",
                step.result.verdict().word(),
                step.result.summary()
            )?;
        }
        // Beside the builds' report folders, not inside one: reports/tmr-0207-b1-align.
        let dir = out.join("reports").join(folder.replace('/', "-"));
        std::fs::create_dir_all(&dir).map_err(|e| Error::io(&dir, e))?;
        let report = closeout_report(&result)?;
        magproof::report::write_report_dir(&dir, true, &report)?;
        let text = render(&report, &Style::plain()) + &verdict_lines(&result, recorded.as_ref());
        write_atomic(&dir.join("closeout.txt"), text.as_bytes(), true)?;
        let json = serde_json::to_string_pretty(&result.to_json()?)? + "\n";
        write_atomic(&dir.join("closeout.json"), json.as_bytes(), true)?;
        reports.push(dir);
    }
    outln!("  (the magnetometer harness's sensor-x pair was re-terminated and the run repeated;")?;
    outln!("  B1's closeout below lists the repeat.)\n")?;
    Ok(reports)
}
