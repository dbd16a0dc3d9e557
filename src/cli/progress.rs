//! Progress bars on stderr, hidden with `--quiet` or when stderr is not a terminal.

use std::io::IsTerminal;

use indicatif::{ProgressBar, ProgressDrawTarget, ProgressStyle};

fn visible(quiet: bool) -> bool {
    !quiet && std::io::stderr().is_terminal()
}

/// A spinner showing what is being done, for steps without a count.
pub fn spinner(label: &str, quiet: bool) -> ProgressBar {
    let bar = if visible(quiet) {
        let bar = ProgressBar::with_draw_target(None, ProgressDrawTarget::stderr());
        bar.set_style(
            ProgressStyle::with_template("{spinner} {msg} ({elapsed})")
                .unwrap_or_else(|_| ProgressStyle::default_spinner()),
        );
        bar.enable_steady_tick(std::time::Duration::from_millis(120));
        bar
    } else {
        ProgressBar::hidden()
    };
    bar.set_message(label.to_string());
    bar
}

/// A spinner counting rows, labelled with `label`.
pub fn row_counter(label: &str, quiet: bool) -> ProgressBar {
    let bar = if !visible(quiet) {
        ProgressBar::hidden()
    } else {
        let bar = ProgressBar::with_draw_target(None, ProgressDrawTarget::stderr());
        bar.set_style(
            ProgressStyle::with_template("{spinner} {msg}: {human_pos} rows ({elapsed})")
                .unwrap_or_else(|_| ProgressStyle::default_spinner()),
        );
        bar
    };
    bar.set_message(label.to_string());
    bar
}
