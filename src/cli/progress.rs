//! A progress bar on a terminal (indicatif), nothing when stderr is piped or redirected.

use indicatif::{ProgressBar, ProgressDrawTarget, ProgressStyle};
use std::io::IsTerminal;

/// A bar over `total` units labelled `what`; hidden unless stderr is a terminal.
pub fn bar(total: u64, what: &str) -> ProgressBar {
    let pb = ProgressBar::with_draw_target(Some(total), ProgressDrawTarget::stderr());
    if !std::io::stderr().is_terminal() {
        pb.set_draw_target(ProgressDrawTarget::hidden());
    }
    pb.set_style(
        ProgressStyle::with_template("{msg:>12} [{bar:40}] {pos}/{len} ({eta} left)")
            .unwrap_or_else(|_| ProgressStyle::default_bar())
            .progress_chars("=> "),
    );
    pb.set_message(what.to_string());
    pb
}
