//! The robustness loops, a few seeded runs each (`cargo bench --bench robustness` runs many and
//! prints the figures): `kill -9` during imports, fits and exports; mutated inputs and damaged
//! campaign files; commands run at the same time.

#[path = "common/robust.rs"]
mod robust;

#[cfg(unix)]
#[test]
fn kill_nine_leaves_nothing_corrupt_or_half_written() {
    let f = robust::kill_loop(6, 150, 11);
    eprintln!("{f:?}");
    assert_eq!(f.runs, [2, 2, 2]);
    assert_eq!(f.problems(), 0, "{f:?}");
}

#[test]
fn mutated_inputs_and_damaged_campaigns_are_refused_cleanly() {
    let f = robust::fuzz_loop(54, 8, 7);
    eprintln!("{f:?}");
    assert_eq!((f.inputs, f.campaigns), (54, 8));
    assert_eq!(f.problems(), 0, "{f:?}");
    // Most mutations break a file; some leave it valid.
    assert!(f.accepted < f.inputs, "{f:?}");
}

#[test]
fn commands_at_the_same_time_lose_nothing() {
    let f = robust::concurrency_loop(2, 90);
    eprintln!("{f:?}");
    assert_eq!((f.rounds, f.commands), (2, 10));
    assert_eq!(f.failed, 0, "{f:?}");
    assert_eq!(f.lost_readings, 0, "{f:?}");
    assert_eq!(f.lost_fits, 0, "{f:?}");
}
