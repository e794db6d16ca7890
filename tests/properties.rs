//! Property tests on small random networks (few cases each, to keep the suite fast).
//!
//! The cases come from a fixed seed, so the suite is deterministic. To explore further, set
//! `PROPTEST_CASES` (e.g. 400) and `PROPTEST_RNG_SEED`; failures found are saved to
//! `tests/properties.proptest-regressions` and replayed first.

mod common;
mod netkit;

use std::collections::BTreeMap;

use firemain::fireflow::{HydrantResult, Outcome};
use firemain::model::Network;
use firemain::upsizing::{apply, plan_upsizing, CostModel, UpsizeConfig, DEFAULT_SIZES_MM};
use netkit::{criteria, fire_sweep, junction_imbalances, solve, NetFiles, KPA_PER_M};
use proptest::prelude::*;

/// Residual floor, kPa: 20 psi, which NFPA 291 (Recommended Practice for Water Flow Testing
/// and Marking of Hydrants, §4.2.1) also quotes as 1.4 bar.
const FLOOR_KPA: f64 = 140.0;
/// Search cap and required flow, L/s (test inputs, not check values).
const CAP_LPS: f64 = 300.0;
const REQUIRED_LPS: f64 = 30.0;
/// A requirement that the random grids often fail, so that plans are not empty.
const UPSIZE_REQUIRED_LPS: f64 = 150.0;
const MAX_DAY: f64 = 1.5;

#[derive(Clone, Debug)]
struct PipeSpec {
    length_m: f64,
    diameter_mm: f64,
    c: f64,
}

fn pipe_spec() -> impl Strategy<Value = PipeSpec> {
    (
        100.0..800.0_f64,
        prop::sample::select(vec![100.0, 150.0, 200.0, 250.0, 300.0]),
        80.0..140.0_f64,
    )
        .prop_map(|(length_m, diameter_mm, c)| PipeSpec {
            length_m,
            diameter_mm,
            c,
        })
}

#[derive(Clone, Debug)]
struct Node {
    elevation_m: f64,
    demand_lps: f64,
}

fn node_spec() -> impl Strategy<Value = Node> {
    (0.0..25.0_f64, 0.0..4.0_f64).prop_map(|(elevation_m, demand_lps)| Node {
        elevation_m,
        demand_lps,
    })
}

/// A looped grid of rows × cols junctions fed at one corner, optionally by a second source at
/// the opposite corner; a hydrant on every junction.
#[derive(Clone, Debug)]
struct Grid {
    rows: usize,
    cols: usize,
    nodes: Vec<Node>,
    /// Horizontal pipes row by row, then vertical pipes.
    pipes: Vec<PipeSpec>,
    feed: PipeSpec,
    grade_m: f64,
    second_source: Option<(f64, PipeSpec)>,
}

fn grid() -> impl Strategy<Value = Grid> {
    (2..=3_usize, 2..=3_usize).prop_flat_map(|(rows, cols)| {
        let n = rows * cols;
        let n_pipes = rows * (cols - 1) + (rows - 1) * cols;
        (
            prop::collection::vec(node_spec(), n),
            prop::collection::vec(pipe_spec(), n_pipes),
            pipe_spec(),
            70.0..100.0_f64,
            prop::option::of((65.0..100.0_f64, pipe_spec())),
        )
            .prop_map(move |(nodes, pipes, feed, grade_m, second_source)| Grid {
                rows,
                cols,
                nodes,
                pipes,
                feed,
                grade_m,
                second_source,
            })
    })
}

impl Grid {
    fn files(&self, grade_shift_m: f64) -> NetFiles {
        let id = |r: usize, c: usize| format!("J{r}{c}");
        let mut f = NetFiles::si_hw();
        f.max_day(MAX_DAY);
        for r in 0..self.rows {
            for c in 0..self.cols {
                let n = &self.nodes[r * self.cols + c];
                f.junction(&id(r, c), n.elevation_m, n.demand_lps).hydrant(
                    &format!("H{r}{c}"),
                    &id(r, c),
                    None,
                );
            }
        }
        let mut pipes = self.pipes.iter();
        let mut k = 0;
        let mut add = |f: &mut NetFiles, a: String, b: String| {
            let p = pipes.next().unwrap();
            k += 1;
            f.pipe(&format!("P{k}"), &a, &b, p.length_m, p.diameter_mm, p.c);
        };
        for r in 0..self.rows {
            for c in 1..self.cols {
                add(&mut f, id(r, c - 1), id(r, c));
            }
        }
        for r in 1..self.rows {
            for c in 0..self.cols {
                add(&mut f, id(r - 1, c), id(r, c));
            }
        }
        let p = &self.feed;
        f.reservoir("R1", self.grade_m + grade_shift_m).pipe(
            "F1",
            "R1",
            &id(0, 0),
            p.length_m,
            p.diameter_mm,
            p.c,
        );
        if let Some((grade, p)) = &self.second_source {
            f.reservoir("R2", grade + grade_shift_m).pipe(
                "F2",
                "R2",
                &id(self.rows - 1, self.cols - 1),
                p.length_m,
                p.diameter_mm,
                p.c,
            );
        }
        f
    }
}

/// A tree of junctions (junction i hangs from an earlier one) fed by one source at J0.
#[derive(Clone, Debug)]
struct Tree {
    nodes: Vec<Node>,
    /// parents[i − 1] in [0, 1): junction i hangs from junction floor(parents[i − 1] · i).
    parents: Vec<f64>,
    /// The pipe into junction i (pipe 0 is the feed from the source).
    pipes: Vec<PipeSpec>,
    grade_m: f64,
}

fn tree() -> impl Strategy<Value = Tree> {
    (3..=7_usize).prop_flat_map(|n| {
        (
            prop::collection::vec(node_spec(), n),
            prop::collection::vec(0.0..1.0_f64, n - 1),
            prop::collection::vec(pipe_spec(), n),
            70.0..100.0_f64,
        )
            .prop_map(|(nodes, parents, pipes, grade_m)| Tree {
                nodes,
                parents,
                pipes,
                grade_m,
            })
    })
}

impl Tree {
    fn files(&self) -> NetFiles {
        let mut f = NetFiles::si_hw();
        f.max_day(MAX_DAY).reservoir("R", self.grade_m);
        for (i, n) in self.nodes.iter().enumerate() {
            f.junction(&format!("J{i}"), n.elevation_m, n.demand_lps)
                .hydrant(&format!("H{i}"), &format!("J{i}"), None);
            let from = if i == 0 {
                "R".to_string()
            } else {
                let parent = (self.parents[i - 1] * i as f64) as usize;
                format!("J{}", parent.min(i - 1))
            };
            let p = &self.pipes[i];
            f.pipe(
                &format!("P{i}"),
                &from,
                &format!("J{i}"),
                p.length_m,
                p.diameter_mm,
                p.c,
            );
        }
        f
    }
}

fn available(results: &[HydrantResult]) -> Vec<f64> {
    results
        .iter()
        .map(|r| r.available_m3s.expect("available flow"))
        .collect()
}

/// The search's accuracy at flow q (max(0.5 %, 0.1 L/s) in SI units), plus what the floor
/// tolerance it accepts as passing (`FLOOR_TOLERANCE_KPA`, 1e-4 m of head) can add above the
/// exact limit: ΔQ/Q = Δh/(1.852 h), below 0.1 % whenever more than 5 cm of head separate the
/// binding junction's static pressure from the floor.
fn search_tolerance(q: f64) -> f64 {
    (0.005 * q).max(1.0e-4) + 1.0e-3 * q
}

fn sweep_network(net: &Network, threads: usize) -> Vec<HydrantResult> {
    let c = criteria(net, FLOOR_KPA, CAP_LPS, REQUIRED_LPS);
    fire_sweep(net, &c, threads)
}

/// 16 cases from a fixed seed (see `netkit::seeded_config`).
fn config() -> ProptestConfig {
    netkit::seeded_config(16, 0x6669_7265)
}

proptest! {
    #![proptest_config(config())]

    #[test]
    fn raising_every_source_grade_raises_every_pressure_by_the_same_amount(
        g in grid(),
        shift in 0.5..20.0_f64,
    ) {
        // With fixed demands the flows depend only on head differences, so adding the same
        // amount to every fixed grade adds exactly that to every head (the steady-state
        // equations are invariant under a common head shift; common practice, no source).
        let base = g.files(0.0).load();
        let raised = g.files(shift).load();
        let a = solve(&base, MAX_DAY, &[]);
        let b = solve(&raised, MAX_DAY, &[]);
        for j in 0..base.n_junctions {
            let dp = b.pressure_kpa(&raised, j) - a.pressure_kpa(&base, j);
            // 1e-5 m of head (the solver's step tolerance) is 1e-4 kPa.
            prop_assert!((dp - shift * KPA_PER_M).abs() < 1e-4, "junction {j}: {dp} kPa");
        }
    }

    #[test]
    fn raising_every_source_grade_never_lowers_available_flow(
        g in grid(),
        shift in 0.5..20.0_f64,
    ) {
        // Every pressure rises by the shift at every fire flow (previous property), so every
        // flow that met the floor before still meets it: no available flow drops (beyond the
        // search's own accuracy).
        let base = g.files(0.0).load();
        let raised = g.files(shift).load();
        let before = available(&sweep_network(&base, 1));
        let after = available(&sweep_network(&raised, 1));
        for (k, (q0, q1)) in before.iter().zip(&after).enumerate() {
            prop_assert!(
                *q1 >= q0 - search_tolerance(q0.max(*q1)),
                "hydrant {k}: {q0} -> {q1} m³/s"
            );
        }
    }

    #[test]
    fn narrowing_a_pipe_or_lowering_its_c_never_raises_available_flow_on_a_tree(
        t in tree(),
        which in 0.0..1.0_f64,
        narrow in prop::bool::ANY,
        factor in 0.5..0.95_f64,
    ) {
        // On a tree fed by one source every pipe's flow is fixed by the demands below it
        // (continuity alone), so a larger resistance in one pipe lowers every head below it
        // and changes none above: no hydrant can gain available flow. (Not true on looped
        // networks, where flows redistribute.)
        let base = t.files();
        let mut worse = t.clone();
        let k = ((which * worse.pipes.len() as f64) as usize).min(worse.pipes.len() - 1);
        if narrow {
            worse.pipes[k].diameter_mm *= factor;
        } else {
            worse.pipes[k].c *= factor;
        }
        let before = available(&sweep_network(&base.load(), 1));
        let after = available(&sweep_network(&worse.files().load(), 1));
        for (h, (q0, q1)) in before.iter().zip(&after).enumerate() {
            prop_assert!(
                *q1 <= q0 + search_tolerance(*q0),
                "hydrant {h}: {q0} -> {q1} m³/s after changing pipe {k}"
            );
        }
    }

    #[test]
    fn upsizing_a_pipe_never_lowers_available_flow_on_a_tree(
        t in tree(),
        which in 0.0..1.0_f64,
        factor in 1.05..2.0_f64,
        new_c in 100.0..150.0_f64,
    ) {
        // The mirror of the previous property: on a tree fed by one source a smaller
        // resistance in one pipe raises every head below it and changes none above.
        let base = t.files();
        let mut better = t.clone();
        let k = ((which * better.pipes.len() as f64) as usize).min(better.pipes.len() - 1);
        better.pipes[k].diameter_mm *= factor;
        better.pipes[k].c = better.pipes[k].c.max(new_c);
        let before = available(&sweep_network(&base.load(), 1));
        let after = available(&sweep_network(&better.files().load(), 1));
        for (h, (q0, q1)) in before.iter().zip(&after).enumerate() {
            prop_assert!(
                *q1 >= q0 - search_tolerance(*q0),
                "hydrant {h}: {q0} -> {q1} m³/s after upsizing pipe {k}"
            );
        }
    }

    #[test]
    fn no_upsizing_of_a_plan_can_be_dropped(g in grid()) {
        // The planner's promise after pruning (docs/fire-flow-method.md §5): dropping any one
        // upsizing of the plan makes some targeted hydrant that passes with the plan fail.
        let net = g.files(0.0).load();
        let c = criteria(&net, FLOOR_KPA, CAP_LPS, UPSIZE_REQUIRED_LPS);
        let config = UpsizeConfig {
            sizes_m: DEFAULT_SIZES_MM.iter().map(|d| d / 1000.0).collect(),
            costs: CostModel::LengthTimesDiameter,
            hydrants: None,
            budget: None,
            threads: Some(1),
        };
        let plan = plan_upsizing(&net, &c, &config, &|_| {}).expect("plan");
        let passing: Vec<usize> = plan
            .after
            .iter()
            .filter(|r| plan.targets.contains(&r.hydrant) && r.outcome == Outcome::Pass)
            .map(|r| r.hydrant)
            .collect();
        let full: BTreeMap<usize, f64> = plan
            .upsizings
            .iter()
            .map(|u| (u.link, u.to_diameter_m))
            .collect();
        for u in &plan.upsizings {
            let mut without = full.clone();
            without.remove(&u.link);
            let reduced = apply(&net, &without, 130.0);
            let results = fire_sweep(&reduced, &c, 1);
            let still: Vec<usize> = results
                .iter()
                .filter(|r| r.outcome == Outcome::Pass)
                .map(|r| r.hydrant)
                .collect();
            prop_assert!(
                passing.iter().any(|h| !still.contains(h)),
                "upsizing of {} can be dropped",
                net.links[u.link].id
            );
        }
    }

    #[test]
    fn sweep_results_do_not_depend_on_the_number_of_threads(g in grid()) {
        // Documented promise of the sweep (results identical for any number of threads):
        // every field of every result, compared through its full-precision Debug form.
        let net = g.files(0.0).load();
        let one = sweep_network(&net, 1);
        let two = sweep_network(&net, 2);
        prop_assert_eq!(one.len(), two.len());
        for (a, b) in one.iter().zip(&two) {
            prop_assert_eq!(format!("{a:?}"), format!("{b:?}"));
        }
    }

    #[test]
    fn mass_balance_holds_at_every_junction(
        g in grid(),
        at in 0.0..1.0_f64,
        fire_lps in 0.0..60.0_f64,
    ) {
        // Continuity (conservation of mass): at every junction inflow − outflow = withdrawal,
        // to 1e-9 m³/s, at max-day demand plus a fire flow at one junction.
        let net = g.files(0.0).load();
        let j = ((at * net.n_junctions as f64) as usize).min(net.n_junctions - 1);
        let extra = [(j, fire_lps / 1000.0)];
        let sol = solve(&net, MAX_DAY, &extra);
        for (k, e) in junction_imbalances(&net, &sol, MAX_DAY, &extra).iter().enumerate() {
            prop_assert!(e.abs() < 1e-9, "junction {k}: imbalance {e:e}");
        }
    }
}
