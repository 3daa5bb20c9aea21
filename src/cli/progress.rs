//! The command line's progress report: a bar on a terminal (indicatif), nothing when stderr is
//! piped or redirected, or under `--quiet`. Jobs report through [`crate::jobs::Progress`]; this is its drawing.

use crate::jobs::Progress;
use indicatif::{ProgressBar, ProgressDrawTarget, ProgressStyle};
use std::io::IsTerminal;

/// A progress bar drawn on stderr when it is a terminal, hidden otherwise.
pub struct Bar(ProgressBar);

impl Bar {
    /// A bar, drawn once a job starts its work.
    pub fn new() -> Bar {
        Bar(ProgressBar::hidden())
    }
}

impl Default for Bar {
    fn default() -> Self {
        Bar::new()
    }
}

impl Progress for Bar {
    fn start(&self, total: u64, unit: &str) {
        let pb = &self.0;
        pb.set_length(total);
        pb.set_style(
            ProgressStyle::with_template("{msg:>12} [{bar:40}] {pos}/{len} ({eta} left)")
                .unwrap_or_else(|_| ProgressStyle::default_bar())
                .progress_chars("=> "),
        );
        pb.set_message(unit.to_string());
        if std::io::stderr().is_terminal() && super::show_progress() {
            pb.set_draw_target(ProgressDrawTarget::stderr());
        }
    }

    fn set(&self, done: u64) {
        self.0.set_position(done);
    }

    fn add(&self, n: u64) {
        self.0.inc(n);
    }

    fn finish(&self) {
        self.0.finish_and_clear();
    }
}
