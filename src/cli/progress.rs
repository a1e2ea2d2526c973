//! The progress bar on standard error for the long extras of `fickfit fit`: one bar for the
//! profile-likelihood searches (two sides per free parameter) and one for the bootstrap
//! refits (one per replicate), fed by the engine through [`fickfit::fit::progress`]. Hidden
//! when standard error is not a terminal, and not made at all with `--quiet` or `--json`.

use fickfit::fit::progress::{Observer, Stage};
use indicatif::{ProgressBar, ProgressDrawTarget, ProgressStyle};
use std::io::IsTerminal;

/// A bar that the engine's counters move.
pub struct Bar {
    bar: ProgressBar,
}

impl Bar {
    /// A bar on standard error (hidden when it is not a terminal), showing `first` until the
    /// first counted stage begins.
    pub fn new(first: &str) -> Bar {
        let bar = ProgressBar::with_draw_target(None, target());
        if let Ok(style) = ProgressStyle::with_template("{spinner} {msg} ({elapsed})") {
            bar.set_style(style);
        }
        bar.set_message(first.to_string());
        bar.enable_steady_tick(std::time::Duration::from_millis(200));
        Bar { bar }
    }

    /// Remove the bar from the terminal.
    pub fn clear(&self) {
        self.bar.finish_and_clear();
    }
}

fn target() -> ProgressDrawTarget {
    if std::io::stderr().is_terminal() {
        ProgressDrawTarget::stderr()
    } else {
        ProgressDrawTarget::hidden()
    }
}

impl Observer for Bar {
    fn started(&self, stage: Stage, total: usize) {
        if let Ok(style) = ProgressStyle::with_template(
            "{msg:<26} [{bar:30}] {pos}/{len} ({elapsed}, about {eta} left)",
        ) {
            self.bar.set_style(style.progress_chars("=> "));
        }
        self.bar.set_length(total as u64);
        self.bar.set_position(0);
        self.bar.reset_elapsed();
        self.bar.reset_eta();
        self.bar.set_message(stage.describe());
    }

    fn advanced(&self, _stage: Stage, done: usize, _total: usize) {
        self.bar.set_position(done as u64);
    }

    fn finished(&self, _stage: Stage) {}
}
