//! The `--stats` work counters by solve role add up to each hydrant's own counters (common
//! practice, no source: a bookkeeping identity, checked on the demo town, whose pumps and
//! valves send solves through every role).

use std::path::Path;
use std::time::Duration;

use firemain::criteria::load_criteria;
use firemain::fireflow::{sweep, FireFlowSetup, SolveRole, SweepStats};
use firemain::hydraulics::Hydraulics;
use firemain::model::load_network;

#[test]
fn work_by_role_adds_up_to_each_hydrants_counters() {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let net = load_network(&root.join("examples/demo-town"))
        .expect("demo town")
        .network;
    let criteria =
        load_criteria(&root.join("criteria/cedar-county-demo.toml"), &net).expect("criteria");
    let hydraulics = Hydraulics::new(&net).expect("prepare");
    let setup = FireFlowSetup::new(&hydraulics, &criteria).expect("max-day");
    let all: Vec<usize> = (0..net.hydrants.len()).collect();
    let (results, stats) = sweep(&setup, &all, Some(1), &|_| {}).expect("sweep");
    for r in &results {
        let total = r.work_by_role.total();
        let id = &net.hydrants[r.hydrant].id;
        assert_eq!(total.solves, u64::from(r.solves), "{id}: solves");
        assert_eq!(
            total.iterations,
            u64::from(r.iterations),
            "{id}: iterations"
        );
        assert_eq!(
            total.factorizations,
            u64::from(r.factorizations),
            "{id}: factorizations"
        );
        // One ordinary solve at the required flow (or its restart from the max-day state).
        let required = r.work_by_role.of(SolveRole::Required).solves;
        assert!(
            (1..=2).contains(&required),
            "{id}: {required} required-flow solves"
        );
    }
    let again = SweepStats::of_results(&results, Duration::ZERO, 1);
    assert_eq!(again.by_role, stats.by_role);
    assert_eq!(stats.hydrants_by_role, results.len());
    assert_eq!(stats.by_role.total().solves, stats.solves);
    assert_eq!(stats.by_role.total().iterations, stats.iterations);
    assert_eq!(stats.by_role.total().factorizations, stats.factorizations);
    // The demo town exercises every role.
    for role in SolveRole::ALL {
        assert!(
            stats.by_role.of(role).solves > 0,
            "no {} solve",
            role.label()
        );
    }
}
