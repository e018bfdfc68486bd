//! The stage clock: where a compile spends its time, stage by stage.
//!
//! In: the pipeline wraps each of its stages in [`stage`] (or times it with [`add`]). Out: after
//! [`start`] and a compile, [`stop`] returns the seconds spent in each stage. A stage timed on
//! each of several threads at once (one candidate's synthesis, say) adds up their seconds; a
//! stage timed around parallel work (the layout search) counts its wall time once. On one
//! thread the stages add up to the compile's time.
//! Benchmarks and `compile --stage-times` read it to print a compile's cost stage by stage
//! without copying the pipeline's flow.
//!
//! **Invariant:** the clock only reads the time. It is off unless [`start`] was called, and
//! then it only adds to counters: what is compiled never depends on it. Off, a stage costs one
//! relaxed atomic load. The counters are process-wide, so two compiles timed at once in the
//! same process would add into each other; only benchmarks and `compile --stage-times` (the
//! binary runs one compile; a program calling `cli::compile_campaign` with `stage_times` on
//! from several threads at once would get mixed figures) turn the clock on.

use std::sync::atomic::{AtomicBool, AtomicU64, Ordering};
use std::time::Instant;

/// A stage of the pipeline ([`crate::pipeline`]), in the order a compile meets them.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Stage {
    /// Grouping and ordering the terms (`formula::order_terms`).
    Order,
    /// The rotation program of every time point.
    Formula,
    /// Level 3's scans of each program: the agreeing order, hopping pairs, shared runs.
    Scans,
    /// The circuits' frames (preparation, readout, ids), grouped by shared body.
    Frames,
    /// Synthesis of the bodies built from scratch (preparation and rotations), verified.
    Synthesis,
    /// The peephole stream over those bodies.
    Peephole,
    /// The later time points built from one synthesis of the repeated step, or grown from the
    /// longest program, peephole included.
    LaterPoints,
    /// Each candidate body counted once, then each circuit's readout counted on top of it.
    Readout,
    /// The kept circuits verified and written as OpenQASM 3 text (each shared body once).
    Format,
    /// On a device: the layout search and the routing of the step (`route`).
    Layout,
    /// On a device: every circuit assembled from the routed step, lowered and written.
    DeviceCircuits,
    /// The plan (`plan`) and the campaign's summary.
    Finish,
}

impl Stage {
    /// Every stage, in order.
    pub const ALL: [Stage; 12] = [
        Stage::Order,
        Stage::Formula,
        Stage::Scans,
        Stage::Frames,
        Stage::Synthesis,
        Stage::Peephole,
        Stage::LaterPoints,
        Stage::Readout,
        Stage::Format,
        Stage::Layout,
        Stage::DeviceCircuits,
        Stage::Finish,
    ];

    /// A short name for tables.
    pub fn name(self) -> &'static str {
        match self {
            Stage::Order => "group+order",
            Stage::Formula => "formula",
            Stage::Scans => "scans",
            Stage::Frames => "frames",
            Stage::Synthesis => "synthesis",
            Stage::Peephole => "peephole",
            Stage::LaterPoints => "later points",
            Stage::Readout => "readout+counts",
            Stage::Format => "format",
            Stage::Layout => "layout+route",
            Stage::DeviceCircuits => "device circuits",
            Stage::Finish => "finish",
        }
    }
}

static ON: AtomicBool = AtomicBool::new(false);
static NANOS: [AtomicU64; Stage::ALL.len()] = [const { AtomicU64::new(0) }; Stage::ALL.len()];

/// Runs `f`, adding its time to `s` when the clock is on.
pub fn stage<T>(s: Stage, f: impl FnOnce() -> T) -> T {
    if !ON.load(Ordering::Relaxed) {
        return f();
    }
    let t = Instant::now();
    let out = f();
    add(s, t);
    out
}

/// Adds the time since `since` to `s` when the clock is on (for a stage that is a run of
/// statements rather than one expression).
pub fn add(s: Stage, since: Instant) {
    if ON.load(Ordering::Relaxed) {
        let ns = u64::try_from(since.elapsed().as_nanos()).unwrap_or(u64::MAX);
        NANOS[s as usize].fetch_add(ns, Ordering::Relaxed);
    }
}

/// Zeroes every stage and turns the clock on.
pub fn start() {
    for n in &NANOS {
        n.store(0, Ordering::Relaxed);
    }
    ON.store(true, Ordering::Relaxed);
}

/// Turns the clock off and returns the seconds of every stage that ran, in pipeline order
/// (see the module essay for how parallel work is counted).
pub fn stop() -> Vec<(Stage, f64)> {
    ON.store(false, Ordering::Relaxed);
    Stage::ALL
        .iter()
        .map(|&s| (s, NANOS[s as usize].load(Ordering::Relaxed) as f64 * 1e-9))
        .filter(|&(_, secs)| secs > 0.0)
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn stages_add_their_time_only_while_the_clock_runs() {
        // On: a stage that sleeps 20 ms records at least that. Off: nothing moves, whatever
        // else this process compiles meanwhile. (Other tests compile in parallel and may add
        // to any stage while the clock is on, so only lower bounds are checked then.)
        let nap = || std::thread::sleep(std::time::Duration::from_millis(20));
        start();
        let v = stage(Stage::Synthesis, || {
            nap();
            7
        });
        assert_eq!(v, 7);
        let got = stop();
        let synthesis = got.iter().find(|(s, _)| *s == Stage::Synthesis);
        assert!(synthesis.is_some_and(|&(_, secs)| secs >= 0.020), "{got:?}");
        let before: Vec<u64> = NANOS.iter().map(|n| n.load(Ordering::Relaxed)).collect();
        stage(Stage::Format, nap);
        let after: Vec<u64> = NANOS.iter().map(|n| n.load(Ordering::Relaxed)).collect();
        assert_eq!(before, after);
    }
}
