//! Regenerate the demo scenario in `sample-logs/` from its fixed seeds:
//! `cargo run --example make_sample_logs [-- OUT_DIR]` (default `sample-logs`).
//! The README in that folder is written by hand and left alone.
use magproof::sim::scenario::sample_files;

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let dir = std::path::PathBuf::from(std::env::args().nth(1).unwrap_or("sample-logs".into()));
    for (rel, text) in sample_files()? {
        let path = dir.join(&rel);
        if let Some(parent) = path.parent() {
            std::fs::create_dir_all(parent)?;
        }
        magproof::report::atomic::write_atomic(&path, text.as_bytes(), true)?;
        println!("{}", path.display());
    }
    Ok(())
}
