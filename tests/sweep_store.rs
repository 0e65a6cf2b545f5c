//! The sweep's resume logic through the library alone, with the in-memory
//! point store: no files are involved, so this checks the sweep itself
//! (which points it computes, what it stores and reports), not the folder
//! format (tests/sweep_resume.rs runs the binary for that).

use qheat::case::Case;
use qheat::progress::{Observer, PointEvent};
use qheat::sweep::{
    Axis, Grid, MemoryStore, ObservablesTask, PointStore, SweepOptions, run, sweep_fingerprint,
};
use std::path::Path;

/// A short coherent chain: each point is one linear solve per energy, so a
/// point computed again is bit-identical.
fn chain() -> Case {
    let text = r#"
name = "store-chain"
[device]
kind = "chain"
spacing_nm = 0.25
length_nm = 3.0
effective_mass = 0.1
[[device.region]]
from_nm = 1.0
to_nm = 2.0
offset_ev = 0.05
[leads.left]
fermi_level_ev = 0.04
temperature_k = 300.0
[leads.right]
fermi_level_ev = 0.04
temperature_k = 300.0
[grid]
step_ev = 0.004
"#;
    Case::parse(text, "store-chain.toml", Path::new(".")).unwrap()
}

/// Records every point event.
#[derive(Default)]
struct Events(Vec<PointEvent>);
impl Observer for Events {
    fn point_finished(&mut self, e: &PointEvent) {
        self.0.push(*e);
    }
}

/// A second run over a store missing some rows computes exactly those
/// points, reports every point once, and gives the same table to the bit.
#[test]
fn a_second_run_computes_only_missing_points() {
    let case = chain();
    let grid = Grid::new(vec![
        Axis::parse("leads.left.temperature_k=300:320:2").unwrap(),
        Axis::parse("bias.voltage_v=0:0.02:3").unwrap(),
    ])
    .unwrap();
    let store = MemoryStore::new();
    let options = SweepOptions {
        max_parallel_lines: Some(2),
        memory_budget_bytes: None,
    };
    let mut first = Events::default();
    let full = run(
        &case,
        &grid,
        &ObservablesTask::default(),
        &store,
        options,
        &mut first,
    )
    .unwrap();
    assert_eq!(full.computed, 6);
    assert_eq!(store.stored_rows(), (0..6).collect::<Vec<_>>());
    assert!(
        store.stored_sigmas().is_empty(),
        "a coherent sweep keeps no Σ0"
    );
    assert_eq!(full.store, store.location());

    store.remove_row(1);
    store.remove_row(5);
    let mut second = Events::default();
    let again = run(
        &case,
        &grid,
        &ObservablesTask::default(),
        &store,
        options,
        &mut second,
    )
    .unwrap();
    assert_eq!(again.computed, 2);
    let mut recomputed: Vec<usize> = second
        .0
        .iter()
        .filter(|e| e.computed)
        .map(|e| e.index)
        .collect();
    recomputed.sort();
    assert_eq!(recomputed, vec![1, 5]);
    let mut finished: Vec<usize> = second.0.iter().map(|e| e.finished).collect();
    finished.sort();
    assert_eq!(finished, (1..=6).collect::<Vec<_>>());
    let bits = |t: &qheat::sweep::SweepTable| -> Vec<Vec<u64>> {
        t.rows
            .iter()
            .map(|r| r.iter().map(|v| v.to_bits()).collect())
            .collect()
    };
    assert_eq!(bits(&again), bits(&full));
    // The fingerprint that keys a store follows the grid.
    let other = Grid::new(vec![Axis::parse("bias.voltage_v=0:0.02:4").unwrap()]).unwrap();
    assert_ne!(
        sweep_fingerprint(&case, &grid, &ObservablesTask::default()),
        sweep_fingerprint(&case, &other, &ObservablesTask::default())
    );
}
