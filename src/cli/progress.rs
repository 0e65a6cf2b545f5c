//! Progress on a terminal: a bar on stderr, nothing on a pipe or with
//! `--quiet`.

use indicatif::{ProgressBar, ProgressDrawTarget, ProgressStyle};
use qheat::progress::{CurvePointRecord, IterationRecord, Observer, PointEvent};
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
    /// Which grid level runs ("" without coarse levels).
    level: String,
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
            level: String::new(),
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
                "{}iteration {} residual {:.1e}",
                self.level, r.iteration, r.residual
            ));
        }
    }

    fn born_level(&mut self, factor: usize, energies: usize) {
        self.level = if factor == 1 {
            format!("full grid ({energies} energies): ")
        } else {
            format!("coarse start, every {factor}th energy ({energies}): ")
        };
    }
}

impl Drop for BornProgress {
    fn drop(&mut self) {
        self.finish();
    }
}

/// A bar over the points of a sweep, with ETA; also the test hook
/// `QHEAT_ABORT_AFTER_POINTS=k`, which ends the process with exit code 75
/// once k points have been computed and stored in this run (the observer is
/// called only after a point is durably stored).
pub struct PointProgress {
    bar: Option<ProgressBar>,
    computed: usize,
    abort_after: Option<usize>,
}

impl PointProgress {
    /// A bar over `total` points, or nothing when `on` is false.
    pub fn new(on: bool, total: usize, label: &str) -> Self {
        let bar = on.then(|| {
            let b = ProgressBar::with_draw_target(Some(total as u64), ProgressDrawTarget::stderr());
            b.set_style(
                ProgressStyle::with_template(
                    "{prefix} [{bar:30}] {pos}/{len} points {msg} ({elapsed}, eta {eta})",
                )
                .expect("static template")
                .progress_chars("=> "),
            );
            b.set_prefix(label.to_string());
            b
        });
        let abort_after = std::env::var("QHEAT_ABORT_AFTER_POINTS")
            .ok()
            .and_then(|v| v.parse().ok());
        Self {
            bar,
            computed: 0,
            abort_after,
        }
    }

    /// Remove the bar.
    pub fn finish(&self) {
        if let Some(b) = &self.bar {
            b.finish_and_clear();
        }
    }
}

impl Observer for PointProgress {
    fn point_finished(&mut self, e: &PointEvent) {
        if let Some(b) = &self.bar {
            b.set_position(e.finished as u64);
            if !e.converged {
                b.set_message(format!("(point {} not converged)", e.index));
            }
        }
        if e.computed {
            self.computed += 1;
            if self.abort_after.is_some_and(|k| self.computed >= k) {
                std::process::exit(75);
            }
        }
    }
}

impl Drop for PointProgress {
    fn drop(&mut self) {
        self.finish();
    }
}

/// A spinner over the solves of a generator or cooler curve, with one line
/// per solved point above it.
pub struct CurveProgress {
    bar: Option<ProgressBar>,
    solves: usize,
}

impl CurveProgress {
    /// A spinner, or nothing when `on` is false.
    pub fn new(on: bool, label: &str) -> Self {
        let bar = on.then(|| {
            let b = ProgressBar::with_draw_target(None, ProgressDrawTarget::stderr());
            b.set_style(
                ProgressStyle::with_template("{prefix} {spinner} {msg} ({elapsed})")
                    .expect("static template"),
            );
            b.set_prefix(label.to_string());
            b
        });
        Self { bar, solves: 0 }
    }

    /// Remove the spinner.
    pub fn finish(&self) {
        if let Some(b) = &self.bar {
            b.finish_and_clear();
        }
    }
}

impl Observer for CurveProgress {
    fn curve_solved(&mut self, stage: &'static str, voltage_v: f64) {
        self.solves += 1;
        if let Some(b) = &self.bar {
            b.set_message(format!(
                "{stage}: solve {} at V = {:.4} mV",
                self.solves,
                voltage_v * 1e3
            ));
            b.tick();
        }
    }

    fn curve_point(&mut self, r: &CurvePointRecord) {
        if let Some(b) = &self.bar {
            b.println(curve_point_line(r));
        }
    }
}

/// The line of one solved curve point: what it was for, V, I, with
/// electrostatics its outer iterations and computed drop, its time, and a
/// mark when it did not converge.
fn curve_point_line(r: &CurvePointRecord) -> String {
    let mut line = format!(
        "{:<18} V = {:>10.4} mV  I = {}",
        r.stage,
        r.voltage_v * 1e3,
        super::format::si(r.current_a, "A", 4)
    );
    if let (Some(n), Some(d)) = (r.outer_iterations, r.potential_drop_v) {
        line += &format!("  drop {:.4} mV in {n} outer iterations", d * 1e3);
    }
    line += &format!("  {:.1} s", r.seconds);
    if !r.converged {
        line += "  NOT converged";
    }
    line
}

impl Drop for CurveProgress {
    fn drop(&mut self) {
        self.finish();
    }
}
