//! The combined available flow of a group of hydrants flowing together
//! (`fireflow::combined_available_flow`, `fireflow::group_at_flow`): against closed forms of
//! Hazen-Williams branches, against the single-hydrant search on the demo town (an invariant,
//! not a check value), and every answer re-solved by a plain ordinary solve.

mod netkit;

use std::path::Path;

use firemain::criteria::{load_criteria, Criteria};
use firemain::fireflow::{
    analyse_hydrant, combined_available_flow, group_at_flow, FireFlowSetup, GroupResult, LimitedBy,
    Split, FLOOR_TOLERANCE_KPA, SPLIT_TOLERANCE_KPA,
};
use firemain::hydraulics::{Hydraulics, Tolerance};
use firemain::model::Network;
use netkit::{bisect, criteria, hw_flow, hw_resistance, load_dir, NetFiles, KPA_PER_M};

/// Residual floor, kPa (140 kPa is the SI rounding of 20 psi, NFPA 291 §4.2.1's rating
/// pressure; common practice).
const FLOOR_KPA: f64 = 140.0;
/// Search cap per hydrant, L/s: far above every branch's flow here.
const CAP_LPS: f64 = 500.0;

fn floor_head_m() -> f64 {
    FLOOR_KPA / KPA_PER_M
}

/// The search's promise for a total (docs/fire-flow-method.md §2, the same accuracy as one
/// hydrant): not above the exact limit (up to the floor tolerance and the search's head
/// tolerance, turned into flow by `exact_at(extra head)`), and not more than max(0.5 %,
/// 0.1 L/s) below it.
fn assert_within_promise(what: &str, got: f64, exact: f64, exact_at: impl Fn(f64) -> f64) {
    let slack = FLOOR_TOLERANCE_KPA / KPA_PER_M + Tolerance::SEARCH.head_m;
    let upper = exact_at(slack);
    let accuracy = (0.005 * exact).max(1.0e-4);
    assert!(
        got <= upper && got >= exact - accuracy,
        "{what}: total {:.4} L/s vs exact {:.4} L/s (allowed [{:.4}, {:.4}])",
        got * 1e3,
        exact * 1e3,
        (exact - accuracy) * 1e3,
        upper * 1e3
    );
}

/// Re-solves the answer's demands by a plain ordinary solve (cold start, `Tolerance::STEADY`,
/// max-day demand plus every share as an extra demand) and checks every junction against the
/// floor: the verified-answer rule of docs/fire-flow-method.md §2.
fn assert_resolves_above_floor(net: &Network, demand_factor: f64, r: &GroupResult) {
    let extra: Vec<(usize, f64)> = r
        .hydrants
        .iter()
        .zip(&r.shares_m3s)
        .map(|(&h, &q)| (net.hydrants[h].junction, q))
        .collect();
    let total: f64 = r.shares_m3s.iter().sum();
    assert!(
        (total - r.total_m3s.expect("a total")).abs() < 1e-12,
        "the shares sum to the total"
    );
    assert_eq!(
        demand_factor, 1.0,
        "the test networks' max day is average day"
    );
    let sol = ordinary_solve(net, &extra);
    for j in 0..net.n_junctions {
        let p = sol.pressure_kpa(net, j);
        assert!(
            p >= FLOOR_KPA - FLOOR_TOLERANCE_KPA,
            "{}: {p} kPa below the floor at the reported shares {:?}",
            net.nodes[j].id,
            r.shares_m3s
        );
    }
}

/// An ordinary solve of a test network (max day = average day) with `extra` withdrawals, to
/// `Tolerance::STEADY`: from a cold start, and where that finds no steady state, from the
/// state without extra withdrawals (as tests/verified_answers.rs does: a start the solver
/// cannot work from is no verdict on the flow).
fn ordinary_solve(net: &Network, extra: &[(usize, f64)]) -> firemain::hydraulics::Solution {
    let h = Hydraulics::new(net).expect("prepare");
    let mut ws = h.workspace();
    let request = |extra| firemain::hydraulics::SolveRequest {
        demand_factor: 1.0,
        extra_demand: extra,
        fixed_head: None,
    };
    h.solve(&mut ws, &request(extra), &h.cold_start())
        .or_else(|_| {
            let base = h.solve(&mut ws, &request(&[]), &h.cold_start())?;
            ws.forget_factor();
            h.solve(&mut ws, &request(extra), &base)
        })
        .unwrap_or_else(|e| panic!("no steady state at {extra:?}: {e}"))
}

/// Two hydrant branches from one reservoir: R → A (length `la`) and R → B (length `lb`), both
/// 200 mm, C = 120, junctions at elevation 0, no demand, reservoir grade 100 m.
fn two_branches(la: f64, lb: f64) -> Network {
    let mut f = NetFiles::si_hw();
    f.reservoir("R", 100.0)
        .junction("A", 0.0, 0.0)
        .junction("B", 0.0, 0.0)
        .pipe("PA", "R", "A", la, 200.0, 120.0)
        .pipe("PB", "R", "B", lb, 200.0, 120.0)
        .hydrant("HA", "A", None)
        .hydrant("HB", "B", None);
    f.load()
}

fn group(net: &Network, criteria: &Criteria, split: Split) -> GroupResult {
    let hydraulics = Hydraulics::new(net).expect("prepare");
    let setup = FireFlowSetup::new(&hydraulics, criteria).expect("max-day");
    let mut ws = hydraulics.workspace();
    combined_available_flow(&setup, &mut ws, &[0, 1], split).expect("group")
}

/// Closed form (Hazen-Williams, Williams & Hazen, *Hydraulic Tables*, 1920, SI form
/// h = 10.67 L Q^1.852/(C^1.852 D^4.8704)): a branch of resistance r from a reservoir of grade
/// G to a hydrant at elevation 0 delivers q = ((G − floor/γ)/r)^(1/1.852) at the floor. With
/// two identical branches the group's flow is twice one branch's, with either split.
#[test]
fn symmetric_branches_give_twice_one_branch() {
    let net = two_branches(1000.0, 1000.0);
    let c = criteria(&net, FLOOR_KPA, CAP_LPS, 50.0);
    let r = hw_resistance(1000.0, 0.2, 120.0);
    let branch = |extra_head: f64| hw_flow(r, 100.0 - floor_head_m() + extra_head);
    for split in [Split::EqualResidual, Split::Even] {
        let g = group(&net, &c, split);
        let total = g.total_m3s.expect("total");
        assert_within_promise(split.name(), total, 2.0 * branch(0.0), |s| 2.0 * branch(s));
        assert_eq!(g.limited_by, Some(LimitedBy::HydrantPressure));
        // The shares are equal to the grid's resolution (0.0001 L/s) for a symmetric pair.
        assert!(
            (g.shares_m3s[0] - g.shares_m3s[1]).abs() <= 2.0e-7,
            "{:?}",
            g.shares_m3s
        );
        assert_resolves_above_floor(&net, 1.0, &g);
    }
}

/// Closed forms as above for unequal branches (A 1000 m, B 2000 m): with equal residual
/// pressures both hydrants reach the floor together, so the group delivers q_A + q_B at the
/// floor; with the even split the farther hydrant B reaches the floor first, at a total of
/// 2 q_B, while A still has pressure to spare. So even ≤ equal-residual, and the even split is
/// limited by B's own pressure (reasoning: each branch is independent, its pressure falls with
/// its own flow only).
#[test]
fn even_split_is_limited_by_the_farther_hydrant() {
    let net = two_branches(1000.0, 2000.0);
    let c = criteria(&net, FLOOR_KPA, CAP_LPS, 50.0);
    let ra = hw_resistance(1000.0, 0.2, 120.0);
    let rb = hw_resistance(2000.0, 0.2, 120.0);
    let qa = |s: f64| hw_flow(ra, 100.0 - floor_head_m() + s);
    let qb = |s: f64| hw_flow(rb, 100.0 - floor_head_m() + s);

    let equal = group(&net, &c, Split::EqualResidual);
    let even = group(&net, &c, Split::Even);
    let (t_equal, t_even) = (equal.total_m3s.unwrap(), even.total_m3s.unwrap());
    assert_within_promise("equal residual", t_equal, qa(0.0) + qb(0.0), |s| {
        qa(s) + qb(s)
    });
    assert_within_promise("even", t_even, 2.0 * qb(0.0), |s| 2.0 * qb(s));
    assert!(
        t_even <= t_equal,
        "even {t_even} > equal-residual {t_equal}"
    );
    let b = net.node_by_id("B").unwrap();
    assert_eq!(even.limited_by, Some(LimitedBy::HydrantPressure));
    assert_eq!(even.critical_junction, Some(b));
    // Equal residual: the nearer hydrant draws more, and the pressures agree.
    assert!(equal.shares_m3s[0] > equal.shares_m3s[1]);
    let spread = (equal.residual_kpa[0] - equal.residual_kpa[1]).abs();
    assert!(spread <= SPLIT_TOLERANCE_KPA, "spread {spread} kPa");
    assert!(equal.notes.is_empty(), "{:?}", equal.notes);
    assert_resolves_above_floor(&net, 1.0, &equal);
    assert_resolves_above_floor(&net, 1.0, &even);
}

/// A shared main and two branches at different elevations (reservoir 100 m; main R → M
/// 500 m 300 mm C 120; branches M → A 800 m 150 mm C 100 at 5 m, M → B 600 m 200 mm C 110 at
/// 12 m). At the group's limit with equal residuals both hydrants sit at the floor, so the
/// head h_M at the main's end solves G − r₀ (q_A(h_M) + q_B(h_M))^1.852 = h_M with
/// q_i = ((h_M − z_i − floor/γ)/r_i)^(1/1.852) (Hazen-Williams as above), found here by
/// bisection on h_M.
#[test]
fn shared_main_equal_residual_matches_the_closed_form() {
    let mut f = NetFiles::si_hw();
    f.reservoir("R", 100.0)
        .junction("M", 0.0, 0.0)
        .junction("A", 5.0, 0.0)
        .junction("B", 12.0, 0.0)
        .pipe("P0", "R", "M", 500.0, 300.0, 120.0)
        .pipe("PA", "M", "A", 800.0, 150.0, 100.0)
        .pipe("PB", "M", "B", 600.0, 200.0, 110.0)
        .hydrant("HA", "A", None)
        .hydrant("HB", "B", None);
    let net = f.load();
    let c = criteria(&net, FLOOR_KPA, CAP_LPS, 50.0);
    let r0 = hw_resistance(500.0, 0.3, 120.0);
    let ra = hw_resistance(800.0, 0.15, 100.0);
    let rb = hw_resistance(600.0, 0.2, 110.0);
    let exact_at = |s: f64| {
        let floor = floor_head_m() - s;
        let q = |hm: f64| hw_flow(ra, hm - 5.0 - floor) + hw_flow(rb, hm - 12.0 - floor);
        let hm = bisect(12.0 + floor, 100.0, |hm| {
            100.0 - r0 * q(hm).powf(1.852) - hm
        });
        q(hm)
    };
    let g = group(&net, &c, Split::EqualResidual);
    assert_within_promise("shared main", g.total_m3s.unwrap(), exact_at(0.0), exact_at);
    let spread = (g.residual_kpa[0] - g.residual_kpa[1]).abs();
    assert!(spread <= SPLIT_TOLERANCE_KPA, "spread {spread} kPa");
    assert_resolves_above_floor(&net, 1.0, &g);
}

/// `group_at_flow` at a total below and above the closed-form limit of the symmetric pair
/// (closed form as in `symmetric_branches_give_twice_one_branch`): pass below, fail above, and
/// the reported residuals are those of the branch law, G − r q^1.852 (γ = 9.80665 kPa/m).
#[test]
fn pressures_at_a_given_total() {
    let net = two_branches(1000.0, 1000.0);
    let c = criteria(&net, FLOOR_KPA, CAP_LPS, 50.0);
    let hydraulics = Hydraulics::new(&net).expect("prepare");
    let setup = FireFlowSetup::new(&hydraulics, &c).expect("max-day");
    let mut ws = hydraulics.workspace();
    let r = hw_resistance(1000.0, 0.2, 120.0);
    let limit = 2.0 * hw_flow(r, 100.0 - floor_head_m());
    let below =
        group_at_flow(&setup, &mut ws, &[0, 1], 0.9 * limit, Split::EqualResidual).expect("solve");
    assert!(below.passes);
    assert!(below.total_m3s <= 0.9 * limit && below.total_m3s > 0.9 * limit - 1e-6);
    for (&q, &p) in below.shares_m3s.iter().zip(&below.residual_kpa) {
        let expected = (100.0 - r * q.powf(1.852)) * KPA_PER_M;
        assert!((p - expected).abs() < 0.01, "{p} vs {expected}");
    }
    let above = group_at_flow(&setup, &mut ws, &[0, 1], 1.02 * limit, Split::Even).expect("solve");
    assert!(!above.passes);
    assert!(group_at_flow(&setup, &mut ws, &[0, 0], limit, Split::Even).is_err());
    assert!(group_at_flow(&setup, &mut ws, &[0, 1], f64::NAN, Split::Even).is_err());
}

/// Invariant on the demo town (invented data, used only for invariants): a group's combined
/// flow with equal residual pressures is never less than the largest single-hydrant available
/// flow of its members, up to the two searches' accuracy (docs/fire-flow-method.md §2:
/// max(0.5 %, 1 gpm) each). Reasoning: at the members' best single flow, moving part of it to
/// another hydrant raises the first hydrant's pressure (the inverse of the Newton matrix, a
/// grounded Laplacian, is largest on its diagonal: from memory), and the equal split keeps the
/// others at that pressure; common practice, no source. Every answer re-solves above the floor.
#[test]
fn demo_town_group_is_at_least_its_best_member() {
    let dir = Path::new(env!("CARGO_MANIFEST_DIR"));
    let net = load_dir(&dir.join("examples/demo-town"));
    let criteria = load_criteria(&dir.join("criteria/cedar-county-demo.toml"), &net)
        .unwrap_or_else(|d| panic!("{d}"));
    let hydraulics = Hydraulics::new(&net).expect("prepare");
    let setup = FireFlowSetup::new(&hydraulics, &criteria).expect("max-day");
    let mut ws = hydraulics.workspace();
    let id = |s: &str| net.hydrant_by_id(s).unwrap_or_else(|| panic!("{s}"));
    let groups = [
        vec![id("HYD-101"), id("HYD-102")],
        vec![id("HYD-101"), id("HYD-102"), id("HYD-103")],
    ];
    for g in groups {
        let result =
            combined_available_flow(&setup, &mut ws, &g, Split::EqualResidual).expect("group");
        let total = result.total_m3s.expect("a total");
        let best = g
            .iter()
            .filter_map(|&h| analyse_hydrant(&setup, &mut ws, h).available_m3s)
            .fold(0.0, f64::max);
        let accuracy = 2.0 * (0.005 * best).max(netkit::M3S_PER_GPM);
        assert!(
            total >= best - accuracy,
            "group {g:?}: {total} below its best member {best} ({:?})",
            result.notes
        );
        assert_resolves_demo(&net, &setup, &result);
    }
}

/// The demo town's criteria constrain every junction; the answer re-solved from a cold start
/// must clear the floor everywhere.
fn assert_resolves_demo(net: &Network, setup: &FireFlowSetup<'_>, r: &GroupResult) {
    let floor = setup.criteria.residual_floor_kpa;
    let extra: Vec<(usize, f64)> = r
        .hydrants
        .iter()
        .zip(&r.shares_m3s)
        .map(|(&h, &q)| (net.hydrants[h].junction, q))
        .collect();
    let sol = netkit::solve(net, setup.demand_factor, &extra);
    let junctions: Vec<usize> = extra.iter().map(|e| e.0).collect();
    let check = setup.constraints_for(&sol, &junctions);
    assert!(
        check.pressure_margin_kpa >= -FLOOR_TOLERANCE_KPA,
        "{}: {} kPa below the floor {floor}",
        net.nodes[check.pressure_junction].id,
        -check.pressure_margin_kpa
    );
}

/// A second source behind a check valve that opens during the fire (reservoir R 80 m →
/// M 2000 m 200 mm C 100; source T at 50 m → M through a check-valve pipe 500 m 200 mm C 100;
/// hydrants A and B on 150 mm branches of 300 m and 600 m from M, all at elevation 0): element
/// states change, so the first-crossing check runs. Source of the expected value: a brute-force
/// scan with the ordinary solver (cold start, `Tolerance::STEADY`) over totals in steps of
/// 0.1 L/s with the even split, the first failing total bounding the answer from above.
#[test]
fn check_valve_opening_during_the_group_flow() {
    let mut f = NetFiles::si_hw();
    f.reservoir("R", 80.0)
        .reservoir("T", 50.0)
        .junction("M", 0.0, 0.0)
        .junction("A", 0.0, 0.0)
        .junction("B", 0.0, 0.0)
        .pipe("PR", "R", "M", 2000.0, 200.0, 100.0)
        .check_pipe("PT", "T", "M", 500.0, 200.0, 100.0)
        .pipe("PA", "M", "A", 300.0, 150.0, 100.0)
        .pipe("PB", "M", "B", 600.0, 150.0, 100.0)
        .hydrant("HA", "A", None)
        .hydrant("HB", "B", None);
    let net = f.load();
    let c = criteria(&net, FLOOR_KPA, CAP_LPS, 50.0);
    let (a, b) = (net.node_by_id("A").unwrap(), net.node_by_id("B").unwrap());
    let passes = |q: f64| {
        let sol = ordinary_solve(&net, &[(a, q / 2.0), (b, q / 2.0)]);
        (0..net.n_junctions).all(|j| sol.pressure_kpa(&net, j) >= FLOOR_KPA)
    };
    let step = 1.0e-4;
    let mut first_failing = step;
    while passes(first_failing) {
        first_failing += step;
    }
    let even = group(&net, &c, Split::Even);
    let total = even.total_m3s.unwrap();
    let accuracy = (0.005 * first_failing).max(1.0e-4);
    assert!(
        total < first_failing && total >= first_failing - step - accuracy,
        "even {total} vs scan's first failing {first_failing}"
    );
    assert_resolves_above_floor(&net, 1.0, &even);
    // The check valve is open at the answer: the scan reached past its opening.
    let at_answer = ordinary_solve(&net, &[(a, total / 2.0), (b, total / 2.0)]);
    let pt = net.link_by_id("PT").unwrap();
    assert!(
        at_answer.flows_m3s[pt] > 1e-4,
        "{}",
        at_answer.flows_m3s[pt]
    );
    let equal = group(&net, &c, Split::EqualResidual);
    assert!(equal.total_m3s.unwrap() >= total - accuracy, "{:?}", equal);
    assert_resolves_above_floor(&net, 1.0, &equal);
}

/// Hazen-Williams closed form (Williams & Hazen 1920, SI form, as above) for a hydrant's lead:
/// `lateral_headloss_m` equals r_L q^1.852 with r_L of the lateral's length, diameter and C
/// (default C 100 when `lateral_roughness` is empty). With a lead on each of two symmetric
/// branches, a hydrant reaches the floor when G − (r + r_L) q^1.852 = floor/γ, so the group
/// delivers 2 ((G − floor/γ)/(r + r_L))^(1/1.852), below the 2 ((G − floor/γ)/r)^(1/1.852)
/// of the same branches without leads.
#[test]
fn laterals_lower_the_hydrants_own_pressure() {
    let dir = tempfile::tempdir().expect("tempdir");
    let mut f = NetFiles::si_hw();
    f.reservoir("R", 100.0)
        .junction("A", 0.0, 0.0)
        .junction("B", 0.0, 0.0)
        .pipe("PA", "R", "A", 1000.0, 200.0, 120.0)
        .pipe("PB", "R", "B", 1000.0, 200.0, 120.0);
    f.write_to(dir.path());
    std::fs::write(
        dir.path().join("hydrants.csv"),
        "id,junction,lateral_length,lateral_diameter,lateral_roughness\nHA,A,20,150,\nHB,B,20,150,100\n",
    )
    .expect("write");
    let net = load_dir(dir.path());
    let lateral = net.hydrants[0].lateral.expect("a lateral");
    assert_eq!(Some(lateral), net.hydrants[1].lateral);
    let r_l = hw_resistance(20.0, 0.15, 100.0);
    for q in [0.01, 0.05, 0.12] {
        let got = firemain::fireflow::lateral_headloss_m(net.headloss, &lateral, q);
        let want = r_l * q.powf(1.852);
        assert!(
            (got - want).abs() <= 1e-12 * want.max(1.0),
            "{got} vs {want}"
        );
    }
    let c = criteria(&net, FLOOR_KPA, CAP_LPS, 50.0);
    let r = hw_resistance(1000.0, 0.2, 120.0);
    let exact_at = |s: f64| 2.0 * hw_flow(r + r_l, 100.0 - floor_head_m() + s);
    for split in [Split::EqualResidual, Split::Even] {
        let g = group(&net, &c, split);
        assert_within_promise(split.name(), g.total_m3s.unwrap(), exact_at(0.0), exact_at);
        assert_eq!(g.limited_by, Some(LimitedBy::HydrantPressure));
        // The residual reported is the hydrant's, after its lead: γ (G − (r + r_L) q^1.852)
        // at its share q, and at or above the floor.
        for (&q, &p) in g.shares_m3s.iter().zip(&g.residual_kpa) {
            let expected = (100.0 - (r + r_l) * q.powf(1.852)) * KPA_PER_M;
            assert!((p - expected).abs() < 0.01, "{p} vs {expected}");
            assert!(p >= FLOOR_KPA - FLOOR_TOLERANCE_KPA, "{p}");
        }
    }
}

/// The loader's rule for leads (docs/network-format.md §9): length and diameter go together,
/// reported at the empty cell.
#[test]
fn a_lateral_needs_its_length_and_diameter() {
    let dir = tempfile::tempdir().expect("tempdir");
    let mut f = NetFiles::si_hw();
    f.reservoir("R", 100.0)
        .junction("A", 0.0, 0.0)
        .pipe("PA", "R", "A", 1000.0, 200.0, 120.0);
    f.write_to(dir.path());
    std::fs::write(
        dir.path().join("hydrants.csv"),
        "id,junction,lateral_length,lateral_diameter\nHA,A,20,\n",
    )
    .expect("write");
    let text = match firemain::model::load_network(dir.path()) {
        Ok(_) => String::new(),
        Err(d) => d.to_string(),
    };
    assert!(text.contains("hydrants.csv:2:4: error"), "{text}");
}
