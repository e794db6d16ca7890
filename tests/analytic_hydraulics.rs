//! The steady-state solver against closed-form solutions and handbook relations.
//!
//! Every expected value is computed in the test from the formula named beside it; firemain's
//! own laws (`firemain::hydraulics::laws`) are never used to produce an expected value.

mod common;
mod netkit;

use std::path::Path;

use common::{read_rows, test_path};
use firemain::hydraulics::headloss::colebrook;
use firemain::hydraulics::LinkState;
use firemain::model::{HeadlossFormula, LinkKind, Network};
use netkit::{
    bisect, colebrook_f, hw_flow, hw_loss, hw_resistance, junction_imbalances, load_dir,
    minor_loss, solve, NetFiles, G, KPA_PER_M, KPA_PER_PSI, M3S_PER_GPM, M_PER_FT, M_PER_IN, NU,
};

/// Heads are compared to 1e-6 m (0.0000014 psi): the solver stops when its estimated remaining
/// head error is below 1e-6 m (`firemain::hydraulics::Tolerance::STEADY`).
const HEAD_TOL: f64 = 1e-6;

#[test]
fn single_pipe_head_is_grade_minus_r_q_to_the_1_852() {
    // Closed form: one pipe from a reservoir to a junction drawing Q carries Q, so
    // H = grade − r Q^1.852 (Hazen-Williams SI form, Williams & Hazen, Hydraulic Tables, 1920;
    // constants 10.67 / 1.852 / 4.8704 as in docs/network-format.md §8 pipes.csv).
    let mut f = NetFiles::si_hw();
    f.reservoir("R", 100.0)
        .junction("J", 40.0, 50.0)
        .pipe("P", "R", "J", 1000.0, 200.0, 130.0);
    let net = f.load();
    let sol = solve(&net, 1.0, &[]);
    let r = hw_resistance(1000.0, 0.2, 130.0);
    let expected = 100.0 - r * 0.05_f64.powf(1.852);
    assert!((sol.heads_m[0] - expected).abs() < HEAD_TOL);
    assert!((sol.flows_m3s[0] - 0.05).abs() < 1e-12);
    // Handbook check value: 1000 m of 200-mm C130 pipe at 0.050 m³/s loses 12.81 m with
    // K = 10.67 and exponents 1.852 / 4.87 (derived from the Hazen-Williams velocity form
    // V = 0.849 C R^0.63 S^0.54, Williams & Hazen 1920). The last digit and the 4.87 vs 4.8704
    // exponent allow 0.1 %.
    let loss = 100.0 - sol.heads_m[0];
    assert!((loss - 12.81).abs() / 12.81 < 1e-3, "loss {loss}");
    // Pressure = (grade − elevation) × 9.80665 kPa/m (ρ = 1000 kg/m³, standard g).
    assert!((sol.pressure_kpa(&net, 0) - (expected - 40.0) * KPA_PER_M).abs() < 1e-5);
}

#[test]
fn pipes_in_series_add_their_resistances() {
    // Closed form: the same flow passes each pipe of a series path, so the losses add:
    // H_k = grade − (r_1 + … + r_k) Q^1.852 (continuity plus the Hazen-Williams law,
    // Williams & Hazen 1920).
    let pipes = [
        (400.0, 300.0, 120.0),
        (650.0, 250.0, 110.0),
        (300.0, 150.0, 95.0),
    ];
    let q = 0.035;
    let mut f = NetFiles::si_hw();
    f.reservoir("R", 120.0)
        .junction("A", 30.0, 0.0)
        .junction("B", 25.0, 0.0)
        .junction("C", 20.0, q * 1000.0)
        .pipe("P1", "R", "A", pipes[0].0, pipes[0].1, pipes[0].2)
        .pipe("P2", "A", "B", pipes[1].0, pipes[1].1, pipes[1].2)
        .pipe("P3", "B", "C", pipes[2].0, pipes[2].1, pipes[2].2);
    let net = f.load();
    let sol = solve(&net, 1.0, &[]);
    let mut head = 120.0;
    for (k, &(l, d, c)) in pipes.iter().enumerate() {
        head -= hw_resistance(l, d / 1000.0, c) * q.powf(1.852);
        assert!(
            (sol.heads_m[k] - head).abs() < HEAD_TOL,
            "junction {k}: {} vs {head}",
            sol.heads_m[k]
        );
        assert!((sol.flows_m3s[k] - q).abs() < 1e-12);
    }
    // One equivalent pipe of resistance r1 + r2 + r3 gives the same end head.
    let r_sum: f64 = pipes
        .iter()
        .map(|&(l, d, c)| hw_resistance(l, d / 1000.0, c))
        .sum();
    assert!((sol.heads_m[2] - (120.0 - r_sum * q.powf(1.852))).abs() < HEAD_TOL);
}

#[test]
fn parallel_pipes_split_flow_as_r_to_the_minus_0_54() {
    // Closed form: pipes in parallel share one head loss h, so Q_i = (h/r_i)^(1/1.852) and
    // Q_A/Q_B = (r_B/r_A)^(1/1.852) (equivalent-pipe relation for Hazen-Williams; continuity
    // Q_A + Q_B = Q gives Q_A = Q / (1 + (r_A/r_B)^(1/1.852))).
    let q = 0.060;
    let mut f = NetFiles::si_hw();
    f.reservoir("R", 100.0)
        .junction("J", 50.0, q * 1000.0)
        .pipe("PA", "R", "J", 1000.0, 200.0, 130.0)
        .pipe("PB", "R", "J", 1000.0, 150.0, 130.0);
    let net = f.load();
    let sol = solve(&net, 1.0, &[]);
    let ra = hw_resistance(1000.0, 0.2, 130.0);
    let rb = hw_resistance(1000.0, 0.15, 130.0);
    let qa = q / (1.0 + (ra / rb).powf(1.0 / 1.852));
    let qb = q - qa;
    assert!(
        (sol.flows_m3s[0] - qa).abs() < 1e-9,
        "{} vs {qa}",
        sol.flows_m3s[0]
    );
    assert!(
        (sol.flows_m3s[1] - qb).abs() < 1e-9,
        "{} vs {qb}",
        sol.flows_m3s[1]
    );
    let ratio = sol.flows_m3s[0] / sol.flows_m3s[1];
    assert!((ratio - (rb / ra).powf(1.0 / 1.852)).abs() < 1e-6);
    assert!((sol.heads_m[0] - (100.0 - ra * qa.powf(1.852))).abs() < HEAD_TOL);
}

#[test]
fn two_reservoirs_feeding_one_junction_satisfy_continuity_by_bisection() {
    // Closed form: with H the junction head, continuity is
    // sgn(H1 − H)(|H1 − H|/r1)^(1/1.852) + sgn(H2 − H)(|H2 − H|/r2)^(1/1.852) = D,
    // one monotone equation in H, solved here by bisection. The second case has a demand small
    // enough that the upper reservoir also fills the lower one.
    let (g1, g2) = (100.0, 90.0);
    let r1 = hw_resistance(1500.0, 0.25, 120.0);
    let r2 = hw_resistance(800.0, 0.2, 110.0);
    for demand in [0.080, 0.005] {
        let mut f = NetFiles::si_hw();
        f.reservoir("R1", g1)
            .reservoir("R2", g2)
            .junction("J", 20.0, demand * 1000.0)
            .pipe("P1", "R1", "J", 1500.0, 250.0, 120.0)
            .pipe("P2", "R2", "J", 800.0, 200.0, 110.0);
        let net = f.load();
        let sol = solve(&net, 1.0, &[]);
        let h = bisect(0.0, g1, |h| {
            hw_flow(r1, g1 - h) + hw_flow(r2, g2 - h) - demand
        });
        assert!(
            (sol.heads_m[0] - h).abs() < HEAD_TOL,
            "demand {demand}: head {} vs {h}",
            sol.heads_m[0]
        );
        // Flows to 1e-7 m³/s: the solver stops when its last flow step is below 1e-7 m³/s
        // (`Tolerance::STEADY`).
        assert!(
            (sol.flows_m3s[0] - hw_flow(r1, g1 - h)).abs() < 1e-7,
            "demand {demand}: flow {} vs {}",
            sol.flows_m3s[0],
            hw_flow(r1, g1 - h)
        );
        assert!((sol.flows_m3s[1] - hw_flow(r2, g2 - h)).abs() < 1e-7);
        if demand < 0.01 {
            assert!(sol.flows_m3s[1] < 0.0, "R2 should be filling");
        }
    }
}

#[test]
fn pipe_with_zero_flow_by_symmetry_converges_without_nan() {
    // Closed form: two identical branches from one reservoir to two identical junctions, joined
    // by a cross pipe. By symmetry the cross pipe carries exactly nothing and each branch
    // carries its junction's demand: H = grade − r D^1.852. (The zero-flow singularity of the
    // gradient algorithm is documented by Elhay & Simpson, J. Hydraul. Eng. 137(10), 2011.)
    // The cold start puts 0.3 m/s in the cross pipe, so the solver must drive it to zero.
    let demand = 0.025;
    let mut f = NetFiles::si_hw();
    f.reservoir("R", 80.0)
        .junction("A", 10.0, demand * 1000.0)
        .junction("B", 10.0, demand * 1000.0)
        .pipe("PA", "R", "A", 700.0, 200.0, 120.0)
        .pipe("PB", "R", "B", 700.0, 200.0, 120.0)
        .pipe("X", "A", "B", 300.0, 150.0, 120.0);
    let net = f.load();
    let sol = solve(&net, 1.0, &[]);
    let x = net.link_by_id("X").unwrap();
    assert!(sol.heads_m.iter().all(|h| h.is_finite()));
    assert!(sol.flows_m3s.iter().all(|q| q.is_finite()));
    assert!(
        sol.flows_m3s[x].abs() < 1e-9,
        "cross flow {}",
        sol.flows_m3s[x]
    );
    let expected = 80.0 - hw_resistance(700.0, 0.2, 120.0) * demand.powf(1.852);
    for j in 0..2 {
        assert!((sol.heads_m[j] - expected).abs() < HEAD_TOL);
    }
    assert_eq!(sol.states[x], LinkState::Open);
}

#[test]
fn tree_heads_follow_from_continuity_alone() {
    // Closed form: on a tree fed by one source, continuity alone fixes every pipe's flow (the
    // demand below it), and each head is the parent's head minus r Q^1.852 (Hazen-Williams,
    // Williams & Hazen 1920). The odd numbers are a case found by the property tests; rounded
    // values happen to converge.
    let grade = 74.96824770496477;
    let (z0, z1, z2) = (9.266504377732264, 12.198243834265826, 12.855094807883749);
    let (d0, d1, d2) = (2.1763975185742668, 3.279729764366233, 1.3778950368535652);
    let p0 = (703.5761588151265, 100.0, 63.71050289730658);
    let p1 = (232.20905499733902, 150.0, 74.5359498105614);
    let p2 = (188.78950791474085, 100.0, 68.09845182431758);
    let mut f = NetFiles::si_hw();
    f.reservoir("R", grade)
        .junction("J0", z0, d0)
        .junction("J1", z1, d1)
        .junction("J2", z2, d2)
        .pipe("P0", "R", "J0", p0.0, p0.1, p0.2)
        .pipe("P1", "J0", "J1", p1.0, p1.1, p1.2)
        .pipe("P2", "J0", "J2", p2.0, p2.1, p2.2);
    let net = f.load();
    let r = |p: (f64, f64, f64)| hw_resistance(p.0, p.1 / 1000.0, p.2);
    for factor in [1.0, 1.5] {
        let q1 = factor * d1 / 1000.0;
        let q2 = factor * d2 / 1000.0;
        let q0 = factor * d0 / 1000.0 + q1 + q2;
        let h0 = grade - r(p0) * q0.powf(1.852);
        let expected = [h0, h0 - r(p1) * q1.powf(1.852), h0 - r(p2) * q2.powf(1.852)];
        let sol = solve(&net, factor, &[]);
        for (j, h) in expected.iter().enumerate() {
            assert!(
                (sol.heads_m[j] - h).abs() < HEAD_TOL,
                "factor {factor}, J{j}"
            );
        }
    }
}

/// Head loss from → to of pipe `link` at flow `q`, from the formulas themselves: Hazen-Williams
/// (Williams & Hazen 1920) or Darcy-Weisbach h = f (L/D) v²/(2g) with Colebrook-White f
/// (Colebrook 1939; at average-day demand every loop_grid_dw pipe is turbulent, Re > 4000,
/// checked here), plus the minor loss K v²/(2g).
fn pipe_loss(net: &Network, link: usize, q: f64) -> f64 {
    let LinkKind::Pipe(p) = &net.links[link].kind else {
        panic!("not a pipe");
    };
    let friction = match net.headloss {
        HeadlossFormula::HazenWilliams => {
            hw_loss(hw_resistance(p.length_m, p.diameter_m, p.roughness), q)
        }
        HeadlossFormula::DarcyWeisbach => {
            let area = std::f64::consts::PI * p.diameter_m * p.diameter_m / 4.0;
            let v = q / area;
            let re = v.abs() * p.diameter_m / NU;
            assert!(re > 4000.0, "{}: Re {re}", net.links[link].id);
            let f = colebrook_f(re, p.roughness / p.diameter_m);
            f * p.length_m / p.diameter_m * v * v.abs() / (2.0 * G)
        }
    };
    friction + minor_loss(p.minor_loss, p.diameter_m, q)
}

fn check_balance_and_energy(name: &str, energy_tol_m: f64) {
    let net = common::load(name);
    // Average-day demand, the condition of the loop_grid reference fixtures.
    let factor = 1.0;
    let sol = solve(&net, factor, &[]);
    // Continuity at every junction (conservation of mass; common practice, no source):
    // inflow − outflow − demand = 0 to 1e-9 m³/s.
    let worst = junction_imbalances(&net, &sol, factor, &[])
        .into_iter()
        .fold(0.0_f64, |m, e| m.max(e.abs()));
    assert!(worst < 1e-9, "{name}: imbalance {worst:e} m³/s");
    // Energy along every pipe: head difference = the pipe's loss law at its flow.
    let mut worst_energy = 0.0_f64;
    for (i, l) in net.links.iter().enumerate() {
        let q = sol.flows_m3s[i];
        assert!(q.abs() > 1e-5, "{}: flow too small for this check", l.id);
        let dh = sol.heads_m[l.from] - sol.heads_m[l.to];
        let loss = pipe_loss(&net, i, q);
        worst_energy = worst_energy.max((dh - loss).abs());
        assert!(
            (dh - loss).abs() < energy_tol_m,
            "{name} {}: head difference {dh} vs loss {loss}",
            l.id
        );
    }
    eprintln!("{name}: largest imbalance {worst:e} m³/s, energy residual {worst_energy:e} m");
}

// The energy residual of a converged solution is of the order of the solver's last head step
// (the stopping rule bounds the estimated remaining head error by Tolerance::STEADY.head_m =
// 1e-6 m; a last step made with a reused factorization leaves a residual a few times that,
// about 2.5e-6 m here), so energy is checked to 1e-5 m.
const ENERGY_TOL_M: f64 = 1.0e-5;

#[test]
fn loop_grid_mass_balance_and_energy_hazen_williams() {
    check_balance_and_energy("loop_grid", ENERGY_TOL_M);
}

#[test]
fn loop_grid_mass_balance_and_energy_darcy_weisbach() {
    check_balance_and_energy("loop_grid_dw", ENERGY_TOL_M);
}

/// SI value of one unit of a quantity, from the unit definitions in `netkit` (sources there).
fn si_per_unit(units: &str, quantity: &str) -> f64 {
    match (units, quantity) {
        ("us", "length") => M_PER_FT,
        ("us", "diameter") => M_PER_IN,
        ("us", "flow") => M3S_PER_GPM,
        ("us", "pressure") => KPA_PER_PSI,
        ("si", "length") => 1.0,
        ("si", "diameter") => 1.0e-3,
        ("si", "flow") => 1.0e-3,
        ("si", "pressure") => 1.0,
        _ => panic!("unknown {units} {quantity}"),
    }
}

/// The quantity of a column, or None for plain numbers and text (C factor, K, ids, x, y ...).
fn column_quantity(
    file: &str,
    column: &str,
    row: &[&str],
    header: &[&str],
    dw: bool,
) -> Option<&'static str> {
    match (file, column) {
        ("junctions.csv", "elevation") | ("sources.csv", "grade") | ("pipes.csv", "length") => {
            Some("length")
        }
        ("junctions.csv", "demand") | ("hydrants.csv", "required_flow") => Some("flow"),
        ("pipes.csv", "diameter") | ("valves.csv", "diameter") => Some("diameter"),
        ("pipes.csv", "roughness") if dw => Some("diameter"),
        ("pumps.csv", "shutoff_head" | "design_head" | "runout_head") => Some("length"),
        ("pumps.csv", "design_flow" | "runout_flow") => Some("flow"),
        ("valves.csv", "setting") => {
            let kind = header.iter().position(|h| *h == "kind").map(|k| row[k]);
            match kind {
                Some("prv" | "psv") => Some("pressure"),
                Some("fcv") => Some("flow"),
                _ => None,
            }
        }
        _ => None,
    }
}

/// Copies the network folder `src` (in units `from`) to `dst`, rewritten in units `to`.
fn convert_network(src: &Path, dst: &Path, from: &str, to: &str) {
    let model = std::fs::read_to_string(src.join("model.toml")).unwrap();
    let dw = model.contains("darcy-weisbach");
    let model = model.replace(&format!("units = \"{from}\""), &format!("units = \"{to}\""));
    std::fs::write(dst.join("model.toml"), model).unwrap();
    for entry in std::fs::read_dir(src).unwrap() {
        let path = entry.unwrap().path();
        let file = path.file_name().unwrap().to_str().unwrap().to_string();
        if !file.ends_with(".csv") {
            continue;
        }
        let text = std::fs::read_to_string(&path).unwrap();
        let mut lines = text.lines().filter(|l| !l.starts_with('#'));
        let header_line = lines.next().unwrap();
        let header: Vec<&str> = header_line.split(',').collect();
        let mut out = format!("{header_line}\n");
        for line in lines.filter(|l| !l.is_empty()) {
            let row: Vec<&str> = line.split(',').collect();
            let cells: Vec<String> = row
                .iter()
                .enumerate()
                .map(
                    |(k, cell)| match column_quantity(&file, header[k], &row, &header, dw) {
                        Some(q) if !cell.is_empty() => {
                            let v: f64 = cell.parse().unwrap();
                            (v * si_per_unit(from, q) / si_per_unit(to, q)).to_string()
                        }
                        _ => cell.to_string(),
                    },
                )
                .collect();
            out.push_str(&cells.join(","));
            out.push('\n');
        }
        std::fs::write(dst.join(&file), out).unwrap();
    }
}

fn same_answer_in_both_unit_systems(name: &str, from: &str, to: &str) {
    // The physics does not depend on the units the files are written in: the same network in
    // US and SI units gives the same heads, flows and states (to the solver's tolerance).
    let original = common::load(name);
    let dir = tempfile::tempdir().unwrap();
    convert_network(&test_path(&format!("data/{name}")), dir.path(), from, to);
    let converted = load_dir(dir.path());
    assert_eq!(converted.units.name(), to);
    let a = solve(&original, 1.0, &[]);
    let b = solve(&converted, 1.0, &[]);
    for (j, node) in original.nodes.iter().enumerate() {
        assert!(
            (a.heads_m[j] - b.heads_m[j]).abs() < HEAD_TOL,
            "{name} {}: {} vs {} m",
            node.id,
            a.heads_m[j],
            b.heads_m[j]
        );
        assert!((a.pressure_kpa(&original, j) - b.pressure_kpa(&converted, j)).abs() < 1e-5);
    }
    for (i, link) in original.links.iter().enumerate() {
        assert!(
            (a.flows_m3s[i] - b.flows_m3s[i]).abs() < 1e-8,
            "{name} {}: {} vs {} m³/s",
            link.id,
            a.flows_m3s[i],
            b.flows_m3s[i]
        );
        assert_eq!(a.states[i], b.states[i], "{name} {}", link.id);
    }
}

#[test]
fn loop_grid_written_in_us_units_gives_the_same_answer() {
    same_answer_in_both_unit_systems("loop_grid", "si", "us");
}

#[test]
fn loop_grid_dw_written_in_us_units_gives_the_same_answer() {
    same_answer_in_both_unit_systems("loop_grid_dw", "si", "us");
}

#[test]
fn two_zone_with_pump_and_prv_written_in_si_gives_the_same_answer() {
    same_answer_in_both_unit_systems("two_zone", "us", "si");
}

#[test]
fn darcy_weisbach_single_pipe_matches_colebrook_solved_here() {
    // Closed form: h = f (L/D) v²/(2g) (Darcy-Weisbach) with f from the Colebrook-White
    // equation (Colebrook, J. ICE 11(4), 1939) solved in this test by fixed-point iteration;
    // ν = 1.0e-6 m²/s (project convention). Turbulent: Re = 4Q/(π D ν) ≈ 3.2e5.
    let (l, d, eps_mm, q) = (1000.0, 0.2, 0.26, 0.05);
    let mut f = NetFiles::new("si", "darcy-weisbach");
    f.reservoir("R", 100.0)
        .junction("J", 30.0, q * 1000.0)
        .pipe("P", "R", "J", l, d * 1000.0, eps_mm);
    let net = f.load();
    let sol = solve(&net, 1.0, &[]);
    let v = q / (std::f64::consts::PI * d * d / 4.0);
    let re = v * d / NU;
    let friction = colebrook_f(re, eps_mm / 1000.0 / d);
    let loss = friction * l / d * v * v / (2.0 * G);
    assert!(
        (sol.heads_m[0] - (100.0 - loss)).abs() < HEAD_TOL,
        "{} vs {}",
        sol.heads_m[0],
        100.0 - loss
    );
}

#[test]
fn darcy_weisbach_laminar_pipe_follows_hagen_poiseuille() {
    // Closed form: laminar flow (Re < 2000), f = 64/Re, so h = 128 ν L Q/(g π D⁴)
    // (Hagen-Poiseuille law; from memory, a standard fluid-mechanics result). Here Re ≈ 1270.
    let (l, d, q) = (200.0, 0.1, 1.0e-4);
    let mut f = NetFiles::new("si", "darcy-weisbach");
    f.reservoir("R", 50.0)
        .junction("J", 0.0, q * 1000.0)
        .pipe("P", "R", "J", l, d * 1000.0, 0.1);
    let net = f.load();
    let sol = solve(&net, 1.0, &[]);
    let re = 4.0 * q / (std::f64::consts::PI * d * NU);
    assert!(re < 2000.0);
    let loss = 128.0 * NU * l * q / (G * std::f64::consts::PI * d.powi(4));
    // The loss is 0.0266 m; compare to a tighter absolute tolerance than elsewhere.
    assert!(
        (sol.heads_m[0] - (50.0 - loss)).abs() < 1e-8,
        "{} vs {}",
        50.0 - sol.heads_m[0],
        loss
    );
}

#[test]
fn colebrook_matches_the_fluids_fixture() {
    // Reference: tests/reference/colebrook/colebrook_fixture.csv, Darcy f from
    // fluids.friction.Colebrook (fluids 1.3.1, the exact Lambert-W solution; within 2.5e-11 of
    // 50-digit arithmetic, see the fixture header), 25 Re values from 4e3 to 1e8 × 9 relative
    // roughnesses. Tolerance 1e-10 relative, as the fixture's README recommends.
    let rows = read_rows("reference/colebrook/colebrook_fixture.csv");
    assert_eq!(rows.len(), 225);
    for row in &rows {
        let re: f64 = row["re"].parse().unwrap();
        let ed: f64 = row["rel_roughness"].parse().unwrap();
        let expected: f64 = row["friction_factor"].parse().unwrap();
        let (f, _) = colebrook(re, ed);
        assert!(
            ((f - expected) / expected).abs() < 1e-10,
            "Re {re}, eD {ed}: {f} vs {expected}"
        );
        // The test's own Colebrook solver, used for the expected values above, agrees too.
        let own = colebrook_f(re, ed);
        assert!(
            ((own - expected) / expected).abs() < 1e-10,
            "own: Re {re}, eD {ed}"
        );
    }
}

#[test]
fn a_hydrant_behind_a_lead_draws_what_puts_its_outlet_at_the_held_head() {
    // Closed form: reservoir R (grade G) → pipe P (r_P) → junction J, a lead of resistance r_L
    // to a hydrant whose outlet is held at head H_o. The flow q through both satisfies
    // G − r_P·q^1.852 − r_L·q^1.852 = H_o (continuity and the Hazen-Williams law, Williams &
    // Hazen 1920), so q = ((G − H_o)/(r_P + r_L))^(1/1.852). With a loop J–K–R beside it (a
    // junction system of more than one row) the outlet relation H_J − r_L·q^1.852 = H_o is
    // checked instead. Then an ordinary solve with q as J's demand, started from the held state on the held
    // solve's last factorization (the lead's slope taken back out of it), must reach the
    // heads of a solve started cold, to the steady tolerance.
    use firemain::hydraulics::demand::LeadOutflow;
    use firemain::hydraulics::laws::LinkLaw;
    use firemain::hydraulics::{Hydraulics, SolveRequest};
    let mut f = NetFiles::si_hw();
    f.reservoir("R", 100.0)
        .junction("J", 40.0, 0.0)
        .pipe("P", "R", "J", 1000.0, 200.0, 130.0);
    let net = f.load();
    let h = Hydraulics::new(&net).expect("hydraulics");
    let mut ws = h.workspace();
    let r_p = hw_resistance(1000.0, 0.2, 130.0);
    let r_l = hw_resistance(15.0, 0.15, 100.0);
    let outlet = 70.0;
    let outflow = LeadOutflow {
        junction: 0,
        outlet_head_m: outlet,
        lead: LinkLaw::HazenWilliams { r: r_l, m: 0.0 },
    };
    let request = SolveRequest {
        demand_factor: 1.0,
        extra_demand: &[],
        fixed_head: None,
    };
    let held = h
        .solve_behind_lead(&mut ws, &request, &outflow, &h.cold_start())
        .expect("held behind the lead");
    let q = held.fixed_head_outflow_m3s.expect("flow drawn");
    let exact = ((100.0 - outlet) / (r_p + r_l)).powf(1.0 / 1.852);
    assert!((q - exact).abs() <= 1e-6 * exact, "{q} vs {exact}");
    let expected_head = 100.0 - r_p * exact.powf(1.852);
    assert!((held.heads_m[0] - expected_head).abs() < 1e-4);

    let mut f = NetFiles::si_hw();
    f.reservoir("R", 100.0)
        .junction("J", 40.0, 0.0)
        .junction("K", 45.0, 5.0)
        .pipe("P", "R", "J", 1000.0, 200.0, 130.0)
        .pipe("Q", "J", "K", 600.0, 150.0, 110.0)
        .pipe("S", "R", "K", 800.0, 150.0, 120.0);
    let net = f.load();
    let h = Hydraulics::new(&net).expect("hydraulics");
    let mut ws = h.workspace();
    let held = h
        .solve_behind_lead(&mut ws, &request, &outflow, &h.cold_start())
        .expect("held behind the lead");
    let q = held.fixed_head_outflow_m3s.expect("flow drawn");
    // The hydrant's outlet sits at the held head: H_J − r_L·q^1.852 = H_o.
    assert!((held.heads_m[0] - hw_loss(r_l, q) - outlet).abs() < 1e-4);
    let demand = [(0, q)];
    let ordinary = SolveRequest {
        demand_factor: 1.0,
        extra_demand: &demand,
        fixed_head: None,
    };
    let reused = h.solve(&mut ws, &ordinary, &held).expect("reused");
    assert_eq!(
        reused.factorizations, 0,
        "the held solve's factorization serves"
    );
    let cold = solve(&net, 1.0, &demand);
    for (a, b) in reused.heads_m.iter().zip(&cold.heads_m) {
        assert!((a - b).abs() < 1e-5, "{a} vs {b}");
    }
}
