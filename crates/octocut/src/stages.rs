//! Stage bookkeeping: wall time and peak resident memory of each pipeline stage, progress
//! callbacks and cancellation.
//!
//! Peak memory is read from the kernel (`VmHWM` in `/proc/self/status`, Linux); the high-water
//! mark is reset at the start of each stage through `/proc/self/clear_refs` so every stage gets
//! its own peak. Elsewhere the figures are reported as 0.

use serde::{Deserialize, Serialize};
use std::sync::atomic::{AtomicBool, Ordering};
use std::time::Instant;

/// The pipeline's stages, in order.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Stage {
    Load,
    Refine,
    Cut,
    Validate,
    Quality,
    Write,
}

impl Stage {
    pub fn label(self) -> &'static str {
        match self {
            Stage::Load => "load + repair + index",
            Stage::Refine => "octree refine + balance",
            Stage::Cut => "classify + clip + assemble",
            Stage::Validate => "validate",
            Stage::Quality => "quality",
            Stage::Write => "write",
        }
    }
}

/// A progress event: a stage started, advanced or finished, with a count of items done.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Progress {
    Started(Stage),
    Finished {
        stage: Stage,
        items: u64,
        seconds: f64,
    },
}

/// Time and peak memory of one finished stage.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct StageFigures {
    pub stage: Stage,
    pub seconds: f64,
    /// Items the stage produced (leaves, cells, faces or bytes: see `unit`).
    pub items: u64,
    pub unit: String,
    /// Peak resident memory of the process during the stage, bytes.
    pub peak_memory_bytes: u64,
}

/// Hooks a caller passes to follow or stop a run.
///
/// ```
/// use octocut::stages::{Hooks, Progress};
/// use std::sync::atomic::AtomicBool;
/// let stop = AtomicBool::new(false);
/// let log = |p: Progress| eprintln!("{p:?}");
/// let hooks = Hooks { progress: Some(&log), cancel: Some(&stop) };
/// assert!(!hooks.cancelled());
/// ```
#[derive(Clone, Copy, Default)]
pub struct Hooks<'a> {
    pub progress: Option<&'a (dyn Fn(Progress) + Sync)>,
    pub cancel: Option<&'a AtomicBool>,
}

impl Hooks<'_> {
    pub fn cancelled(&self) -> bool {
        self.cancel.is_some_and(|c| c.load(Ordering::Relaxed))
    }

    fn emit(&self, p: Progress) {
        if let Some(f) = self.progress {
            f(p);
        }
    }
}

/// Runs stages one after the other, recording their figures.
#[derive(Default)]
pub struct StageClock {
    pub figures: Vec<StageFigures>,
}

impl StageClock {
    /// Runs `f` as `stage`; `f` returns its result and the count of items it produced.
    pub fn run<T, E>(
        &mut self,
        hooks: &Hooks,
        stage: Stage,
        unit: &str,
        f: impl FnOnce() -> Result<(T, u64), E>,
    ) -> Result<T, E> {
        hooks.emit(Progress::Started(stage));
        reset_peak_memory();
        let t0 = Instant::now();
        let (value, items) = f()?;
        let seconds = t0.elapsed().as_secs_f64();
        self.figures.push(StageFigures {
            stage,
            seconds,
            items,
            unit: unit.to_string(),
            peak_memory_bytes: peak_memory_bytes(),
        });
        hooks.emit(Progress::Finished {
            stage,
            items,
            seconds,
        });
        Ok(value)
    }
}

/// Peak resident set size of this process since the last reset, bytes (0 where unknown).
pub fn peak_memory_bytes() -> u64 {
    std::fs::read_to_string("/proc/self/status")
        .ok()
        .and_then(|s| {
            s.lines().find(|l| l.starts_with("VmHWM:")).and_then(|l| {
                l.split_whitespace()
                    .nth(1)
                    .and_then(|kb| kb.parse::<u64>().ok())
            })
        })
        .map_or(0, |kb| kb * 1024)
}

/// Resets the kernel's peak-RSS mark to the current RSS (Linux; a no-op elsewhere).
pub fn reset_peak_memory() {
    let _ = std::fs::write("/proc/self/clear_refs", "5");
}
