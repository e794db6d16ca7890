//! The starts of the required-flow and held solves: the junctions around a hydrant solved
//! alone, every other node held at its head (`Hydraulics::refine_around`,
//! `Hydraulics::refine_held_around`), against closed forms.

mod netkit;

use firemain::hydraulics::Hydraulics;
use firemain::model::Network;
use netkit::{hw_resistance, solve, NetFiles};

/// The region's solve stops when its Newton step is below 0.01 m; Newton's quadratic
/// convergence leaves far less than that. 1 mm is what a start needs.
const REGION_HEAD_TOL_M: f64 = 1e-3;

fn index(net: &Network, id: &str) -> usize {
    net.nodes
        .iter()
        .position(|n| n.id == id)
        .unwrap_or_else(|| panic!("no node {id}"))
}

/// R (grade 120 m) - P1 - A - P2 - B - P3 - C, with B and C drawing `b_lps` and `c_lps`.
fn series_path(b_lps: f64, c_lps: f64) -> Network {
    let mut f = NetFiles::si_hw();
    f.reservoir("R", 120.0)
        .junction("A", 30.0, 0.0)
        .junction("B", 25.0, b_lps)
        .junction("C", 20.0, c_lps)
        .pipe("P1", "R", "A", 400.0, 300.0, 120.0)
        .pipe("P2", "A", "B", 650.0, 250.0, 110.0)
        .pipe("P3", "B", "C", 300.0, 150.0, 95.0);
    f.load()
}

#[test]
fn region_of_a_series_path_matches_hazen_williams_with_its_boundary_held() {
    // Closed form: the same flow passes each pipe of a series path, so below a node held at
    // head H_A the heads are H_A − r_2 Q^1.852 and then − r_3 Q^1.852 (continuity plus the
    // Hazen-Williams law, Williams & Hazen, Hydraulic Tables, 1920; SI constants 10.67 / 1.852
    // / 4.8704 as in docs/network-format.md).
    let q: f64 = 0.035;
    let net = series_path(0.0, 0.0);
    let (a, b, c) = (index(&net, "A"), index(&net, "B"), index(&net, "C"));
    let hydraulics = Hydraulics::new(&net).expect("prepare");
    // The start: the state without the fire flow (no flow, every head at the grade), with A
    // moved to its head at fire flow q, which the region takes as its boundary.
    let mut start = solve(&net, 1.0, &[]);
    let r = |l: f64, d: f64, c: f64| hw_resistance(l, d / 1000.0, c) * q.powf(1.852);
    let head_a = 120.0 - r(400.0, 300.0, 120.0);
    start.heads_m[a] = head_a;
    let before = start.clone();
    assert!(hydraulics.refine_around(&mut start, c, 1.0, q, 2));
    let head_b = head_a - r(650.0, 250.0, 110.0);
    let head_c = head_b - r(300.0, 150.0, 95.0);
    assert!(
        (start.heads_m[b] - head_b).abs() < REGION_HEAD_TOL_M,
        "{}",
        start.heads_m[b]
    );
    assert!(
        (start.heads_m[c] - head_c).abs() < REGION_HEAD_TOL_M,
        "{}",
        start.heads_m[c]
    );
    // Both pipes touching the region carry the fire flow; the one outside it is as it was.
    assert!((start.flows_m3s[1] - q).abs() < 1e-9);
    assert!((start.flows_m3s[2] - q).abs() < 1e-9);
    assert_eq!(start.flows_m3s[0], before.flows_m3s[0]);
    assert_eq!(start.heads_m[a], before.heads_m[a]);
}

#[test]
fn region_with_a_loop_splits_flow_as_r_to_the_minus_0_54() {
    // Closed form: pipes in parallel share one head loss h, so Q_A/Q_B = (r_B/r_A)^(1/1.852)
    // and Q_A + Q_B = Q (equivalent-pipe relation for Hazen-Williams, Williams & Hazen 1920).
    let q: f64 = 0.060;
    let mut f = NetFiles::si_hw();
    f.reservoir("R", 100.0)
        .junction("J", 50.0, 0.0)
        .pipe("PA", "R", "J", 1000.0, 200.0, 130.0)
        .pipe("PB", "R", "J", 1000.0, 150.0, 130.0);
    let net = f.load();
    let j = index(&net, "J");
    let hydraulics = Hydraulics::new(&net).expect("prepare");
    let mut start = solve(&net, 1.0, &[]);
    assert!(hydraulics.refine_around(&mut start, j, 1.0, q, 1));
    let ra = hw_resistance(1000.0, 0.2, 130.0);
    let rb = hw_resistance(1000.0, 0.15, 130.0);
    let qa = q / (1.0 + (ra / rb).powf(1.0 / 1.852));
    let head = 100.0 - ra * qa.powf(1.852);
    assert!(
        (start.heads_m[j] - head).abs() < REGION_HEAD_TOL_M,
        "{}",
        start.heads_m[j]
    );
    // A head error e moves a flow by about Q·e/(1.852·h): 1e-5 m³/s for 1 mm here.
    assert!(
        (start.flows_m3s[0] - qa).abs() < 1e-5,
        "{} vs {qa}",
        start.flows_m3s[0]
    );
    assert!((start.flows_m3s[0] + start.flows_m3s[1] - q).abs() < 1e-9);
}

#[test]
fn region_touching_a_pump_is_left_to_the_whole_solve() {
    // Common practice, no source: a pump's state follows rules (off, on, closed by its check
    // valve) that only the whole network's solve applies, so a region that reaches one gives no
    // start and leaves the state as it was.
    let mut f = NetFiles::si_hw();
    f.reservoir("LOW", 100.0)
        .junction("J", 95.0, 0.0)
        .junction("K", 95.0, 0.0)
        .pump("PU1", "LOW", "J", 40.0, (50.0, 30.0), (90.0, 15.0), 1.0)
        .pipe("P", "J", "K", 100.0, 150.0, 120.0);
    let net = f.load();
    let k = index(&net, "K");
    let hydraulics = Hydraulics::new(&net).expect("prepare");
    let mut start = solve(&net, 1.0, &[]);
    let before = start.clone();
    assert!(!hydraulics.refine_around(&mut start, k, 1.0, 0.02, 2));
    assert_eq!(start.heads_m, before.heads_m);
    assert_eq!(start.flows_m3s, before.flows_m3s);
}

/// Heads held at A and at the hydrant's junction C in the held series-path tests, m.
const HELD_HEAD_A_M: f64 = 110.0;
const HELD_HEAD_C_M: f64 = 80.0;

/// The series path with B drawing 2 L/s and C 3 L/s, and its junctions A and C.
fn held_series_path() -> (Network, usize, usize) {
    let net = series_path(2.0, 3.0);
    let (a, c) = (index(&net, "A"), index(&net, "C"));
    (net, a, c)
}

/// The state without fire flow, with A moved to `HELD_HEAD_A_M` (the region's boundary).
fn start_with_a_held(net: &Network, a: usize) -> firemain::hydraulics::Solution {
    let mut start = solve(net, 1.0, &[]);
    start.heads_m[a] = HELD_HEAD_A_M;
    start
}

/// Closed form: with the hydrant's junction C held at head H_C below a node A held at H_A,
/// the series path A-B-C carries Q in P2 and Q − q_B in P3, with
/// H_A − H_C = r_2 Q^1.852 + r_3 (Q − q_B)^1.852 (continuity plus the Hazen-Williams law,
/// Williams & Hazen, Hydraulic Tables, 1920), and C draws Q − q_B less its own demand, m³/s.
fn held_series_drawn() -> f64 {
    let (r2, r3) = (
        hw_resistance(650.0, 0.25, 110.0),
        hw_resistance(300.0, 0.15, 95.0),
    );
    // B draws 2 L/s on the way, so P2 carries Q and P3 carries Q − 0.002: solve
    // r_2 Q^1.852 + r_3 (Q − 0.002)^1.852 = H_A − H_C by bisection.
    let drop = |q: f64| r2 * q.powf(1.852) + r3 * (q - 0.002).powf(1.852);
    let (mut lo, mut hi) = (0.002, 1.0);
    for _ in 0..200 {
        let mid = 0.5 * (lo + hi);
        if drop(mid) < HELD_HEAD_A_M - HELD_HEAD_C_M {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    0.5 * (lo + hi) - 0.002 - 0.003
}

#[test]
fn region_held_at_a_head_draws_the_series_path_flow() {
    // The closed form of `held_series_drawn`; this is the held start of a fire-flow search
    // (`Hydraulics::refine_held_around`).
    let (net, a, c) = held_series_path();
    let hydraulics = Hydraulics::new(&net).expect("prepare");
    let mut start = start_with_a_held(&net, a);
    let expected = held_series_drawn();
    let drawn = hydraulics
        .refine_held_around(&mut start, c, 1.0, HELD_HEAD_C_M, 2)
        .expect("the region settles");
    assert!(
        (drawn - expected).abs() < 1e-4 * expected,
        "drawn {drawn} m³/s, closed form {expected}"
    );
    assert_eq!(start.heads_m[c], HELD_HEAD_C_M);
    assert_eq!(start.heads_m[a], HELD_HEAD_A_M);
}

#[test]
fn region_reused_for_the_held_start_draws_what_a_fresh_one_draws() {
    // A search builds a hydrant's region once: solved first at the required flow, then again
    // with the hydrant held (`Hydraulics::refine_in`, `Hydraulics::refine_held_in`). Held, the
    // hydrant's junction is pinned in the region instead of left out of it. The reused region
    // must give what a region built for the held start gives (common practice, no source: the
    // same system solved twice), and the closed form of `held_series_drawn`.
    let (net, a, c) = held_series_path();
    let hydraulics = Hydraulics::new(&net).expect("prepare");
    let start = start_with_a_held(&net, a);
    let mut region = hydraulics
        .region(&start, c, 2)
        .expect("a region of plain pipes");
    let mut at_required = start.clone();
    assert!(hydraulics.refine_in(&mut region, &mut at_required, 1.0, 0.02));
    let mut reused = start.clone();
    let drawn_reused = hydraulics
        .refine_held_in(&mut region, &mut reused, 1.0, HELD_HEAD_C_M)
        .expect("the region settles");
    let mut fresh = start.clone();
    let drawn_fresh = hydraulics
        .refine_held_around(&mut fresh, c, 1.0, HELD_HEAD_C_M, 2)
        .expect("the region settles");
    assert_eq!(drawn_reused, drawn_fresh);
    assert_eq!(reused.heads_m, fresh.heads_m);
    assert_eq!(reused.flows_m3s, fresh.flows_m3s);
    let expected = held_series_drawn();
    assert!(
        (drawn_reused - expected).abs() < 1e-4 * expected,
        "drawn {drawn_reused} m³/s, closed form {expected}"
    );
}
