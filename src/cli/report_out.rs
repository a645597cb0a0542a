//! A progress bar on a terminal while a large log is read.

use std::io::IsTerminal;
use std::path::Path;

/// Logs larger than this get a progress bar while read (on a terminal only), bytes.
pub const PROGRESS_MIN_BYTES: u64 = 20 * 1024 * 1024;

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
