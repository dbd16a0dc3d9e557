//! Progress bars on stderr, hidden with `--quiet` or when stderr is not a terminal.

use std::io::IsTerminal;

use indicatif::{ProgressBar, ProgressDrawTarget, ProgressStyle};

/// A spinner counting rows, labelled with `label`.
pub fn row_counter(label: &str, quiet: bool) -> ProgressBar {
    let bar = if quiet || !std::io::stderr().is_terminal() {
        ProgressBar::hidden()
    } else {
        let bar = ProgressBar::with_draw_target(None, ProgressDrawTarget::stderr());
        bar.set_style(
            ProgressStyle::with_template("{spinner} {msg}: {human_pos} rows ({per_sec})")
                .unwrap_or_else(|_| ProgressStyle::default_spinner()),
        );
        bar
    };
    bar.set_message(label.to_string());
    bar
}
