//! Progress bars on long jobs (indicatif), drawn on standard error only when
//! it is a terminal: redirected or piped, a command prints no progress.

use indicatif::{ProgressBar, ProgressStyle};

/// Inputs smaller than this are read too fast to need a bar.
pub const WORTH_A_BAR_BYTES: u64 = 16 * 1024 * 1024;

/// Records read between two updates of a bar (an update takes a lock).
pub const RECORDS_PER_UPDATE: u64 = 4096;

/// A bar over `total` bytes, labelled `what` ("reading run.gleanlog");
/// none for less than [`WORTH_A_BAR_BYTES`].
pub fn bytes(total: u64, what: &str) -> ProgressBar {
    if total < WORTH_A_BAR_BYTES {
        return none();
    }
    let bar = ProgressBar::new(total);
    bar.set_style(
        ProgressStyle::with_template(
            "{msg} [{bar:30}] {bytes}/{total_bytes} ({bytes_per_sec}, {eta} left)",
        )
        .unwrap_or_else(|_| ProgressStyle::default_bar())
        .progress_chars("=> "),
    );
    bar.set_message(what.to_owned());
    bar
}

/// A bar over `total` steps of `unit` ("simulated s", "samples").
pub fn steps(total: u64, what: &str, unit: &str) -> ProgressBar {
    let bar = ProgressBar::new(total);
    bar.set_style(
        ProgressStyle::with_template(&format!(
            "{{msg}} [{{bar:30}}] {{pos}}/{{len}} {unit} ({{eta}} left)"
        ))
        .unwrap_or_else(|_| ProgressStyle::default_bar())
        .progress_chars("=> "),
    );
    bar.set_message(what.to_owned());
    bar
}

/// The total size of the files at `paths` (0 for any that cannot be read).
pub fn total_size<'a>(paths: impl IntoIterator<Item = &'a std::path::Path>) -> u64 {
    paths
        .into_iter()
        .filter_map(|p| std::fs::metadata(p).ok())
        .map(|m| m.len())
        .sum()
}

/// A counter of bytes written when the total is not known in advance.
pub fn counting_bytes(what: &str) -> ProgressBar {
    let bar = ProgressBar::new_spinner();
    bar.set_style(
        ProgressStyle::with_template("{spinner} {msg}: {bytes} ({bytes_per_sec})")
            .unwrap_or_else(|_| ProgressStyle::default_spinner()),
    );
    bar.set_message(what.to_owned());
    bar
}

/// A bar that draws nothing, for callers that show no progress.
pub fn none() -> ProgressBar {
    ProgressBar::hidden()
}
