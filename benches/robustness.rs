//! The robustness loops at size, with their figures: `kill -9` during lab imports, campaign
//! fits and exports; mutated input files and damaged campaign files; commands started
//! together. `tests/robustness.rs` runs a few of each; this runs many (about two minutes in
//! a release build).
//!
//! ```text
//! cargo bench --bench robustness            # all three
//! cargo bench --bench robustness -- kill    # one of kill, fuzz, concurrency
//! ```
//!
//! Each loop is seeded; PW_ROBUST_SCALE=0.1 runs a tenth of each.

#[path = "../tests/common/robust.rs"]
mod robust;

use std::time::Instant;

fn main() {
    let wanted: Vec<String> = std::env::args()
        .skip(1)
        .filter(|a| !a.starts_with('-'))
        .collect();
    let runs = |name: &str| wanted.is_empty() || wanted.iter().any(|w| name.contains(w.as_str()));
    let scale: f64 = std::env::var("PW_ROBUST_SCALE")
        .ok()
        .and_then(|s| s.parse().ok())
        .unwrap_or(1.0);
    let n = |count: usize| ((count as f64 * scale).round() as usize).max(3);
    if runs("kill") {
        let start = Instant::now();
        let f = robust::kill_loop(n(210), 600, 2026);
        println!(
            "kill -9: {} runs (lab import {}, fit {}, export {}); landed while running: {} / {} / {}",
            f.runs.iter().sum::<usize>(),
            f.runs[0],
            f.runs[1],
            f.runs[2],
            f.landed[0],
            f.landed[1],
            f.landed[2]
        );
        println!(
            "  corrupt files {}, half-written imports {}, broken fits {}, mixed export folders {}, \
             leftovers after the next export {}, unreadable campaigns {}  ({:.0} s)",
            f.corrupt,
            f.half_imports,
            f.broken_fits,
            f.mixed_exports,
            f.leftovers,
            f.unreadable,
            start.elapsed().as_secs_f64()
        );
    }
    if runs("fuzz") {
        let start = Instant::now();
        let f = robust::fuzz_loop(n(4400), n(232), 2026);
        println!(
            "fuzz: {} mutated input files ({} still valid), {} damaged campaign files x 3 commands",
            f.inputs, f.accepted, f.campaigns
        );
        println!(
            "  panics {}, hangs {}, refused imports that wrote {}, odd exit codes {}  ({:.0} s)",
            f.panics,
            f.hangs,
            f.written_on_error,
            f.odd_exits,
            start.elapsed().as_secs_f64()
        );
    }
    if runs("concurrency") {
        let start = Instant::now();
        let f = robust::concurrency_loop(n(20), 1500);
        println!(
            "concurrency: {} rounds of fit + 2 lab imports + set + flag on 1,500 samples: \
             {} commands, {} failed, {} readings lost, {} fits lost  ({:.0} s)",
            f.rounds,
            f.commands,
            f.failed,
            f.lost_readings,
            f.lost_fits,
            start.elapsed().as_secs_f64()
        );
    }
}
