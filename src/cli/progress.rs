//! Progress on a terminal: a bar on stderr, nothing on a pipe or with
//! `--quiet`.

use indicatif::{ProgressBar, ProgressDrawTarget, ProgressStyle};
use qheat::scba::{IterationRecord, Observer};
use std::io::IsTerminal;

/// Whether progress may be drawn.
pub fn enabled(quiet: bool) -> bool {
    !quiet && std::io::stderr().is_terminal()
}

/// A Born-loop progress bar: position is the number of decades the residual
/// has fallen, out of the decades the tolerance asks for.
pub struct BornProgress {
    bar: Option<ProgressBar>,
    target_decades: f64,
}

impl BornProgress {
    /// A bar for a loop converging to `tolerance`, or nothing when `on` is false.
    pub fn new(on: bool, tolerance: f64, label: &str) -> Self {
        let target_decades = (-tolerance.log10()).max(1.0);
        let bar = on.then(|| {
            let b = ProgressBar::with_draw_target(
                Some((target_decades * 10.0) as u64),
                ProgressDrawTarget::stderr(),
            );
            b.set_style(
                ProgressStyle::with_template("{prefix} [{bar:30}] {msg} ({elapsed}, eta {eta})")
                    .expect("static template")
                    .progress_chars("=> "),
            );
            b.set_prefix(label.to_string());
            b
        });
        Self {
            bar,
            target_decades,
        }
    }

    /// Remove the bar.
    pub fn finish(&self) {
        if let Some(b) = &self.bar {
            b.finish_and_clear();
        }
    }
}

impl Observer for BornProgress {
    fn iteration(&mut self, r: &IterationRecord) {
        if let Some(b) = &self.bar {
            let decades = (-r.residual.max(1e-300).log10()).clamp(0.0, self.target_decades);
            b.set_position((decades * 10.0) as u64);
            b.set_message(format!(
                "iteration {} residual {:.1e}",
                r.iteration, r.residual
            ));
        }
    }
}

impl Drop for BornProgress {
    fn drop(&mut self) {
        self.finish();
    }
}
