//! The modelled supply curve of a hydrant (`fireflow::supply_curve`): against the closed form of
//! a single Hazen-Williams pipe, its required and available points, and invariants on the demo
//! town (the demo town's figures are invented and never a check value).

mod netkit;

use std::path::{Path, PathBuf};

use firemain::criteria::{load_criteria, Criteria};
use firemain::fireflow::{
    supply_curve, supply_curves, sweep, FireFlowSetup, HydrantResult, SupplyCurve,
    CHART_FLOW_EXPONENT, FLOOR_TOLERANCE_KPA,
};
use firemain::hydraulics::{Hydraulics, Tolerance};
use firemain::model::{load_network, Network};
use netkit::{criteria, hw_resistance, NetFiles, KPA_PER_M, KPA_PER_PSI, M3S_PER_GPM, M_PER_FT};

/// The residual floor, psi: hydrants are rated at 20 psi residual (NFPA 291, Recommended
/// Practice for Water Flow Testing and Marking of Hydrants, §4.2.1).
const FLOOR_PSI: f64 = 20.0;
/// Max-day factor of the test networks (common practice, no source: a typical 1.5).
const MAX_DAY: f64 = 1.5;
/// Points of the evenly spaced part of each curve.
const POINTS: usize = 12;

/// Reservoir grade, hydrant elevation (ft), pipe length (ft), diameter (in) and Hazen-Williams
/// C of the single-pipe network, and the hydrant's required flow (gpm).
const GRADE_FT: f64 = 950.0;
const Z_FT: f64 = 800.0;
const LENGTH_FT: f64 = 2000.0;
const D_IN: f64 = 8.0;
const C: f64 = 120.0;
const REQUIRED_GPM: f64 = 1000.0;

/// Reservoir R → pipe P → junction H with hydrant FH (average-day demand `demand_gpm` at H).
fn single_pipe(demand_gpm: f64) -> Network {
    let mut f = NetFiles::us_hw();
    f.max_day(MAX_DAY)
        .reservoir("R", GRADE_FT)
        .junction("H", Z_FT, demand_gpm)
        .pipe("P", "R", "H", LENGTH_FT, D_IN, C)
        .hydrant("FH", "H", Some(REQUIRED_GPM));
    f.load()
}

/// The sweep's results and the curves of every hydrant, with `threads` workers for both.
fn sweep_and_curves(
    net: &Network,
    criteria: &Criteria,
    threads: usize,
) -> (Vec<HydrantResult>, Vec<SupplyCurve>) {
    let hydraulics = Hydraulics::new(net).expect("prepare");
    let setup = FireFlowSetup::new(&hydraulics, criteria).expect("max-day solve");
    let all: Vec<usize> = (0..net.hydrants.len()).collect();
    let results = sweep(&setup, &all, Some(threads), &|_| {})
        .expect("sweep")
        .0;
    let curves = supply_curves(&setup, &all, &results, POINTS, threads).expect("curves");
    (results, curves)
}

/// The closed form of the single-pipe network: the pressure at H (kPa) with fire flow q
/// (m³/s) and max-day demand `background` (m³/s) at H, (G − z − r (q + D)^1.852)·γ with
/// r = 10.67 L/(C^1.852 D^4.8704) in SI (Hazen-Williams; Williams & Hazen, Hydraulic Tables,
/// 1920, in the SI form the project documents in docs/fire-flow-method.md §1 — the exponent
/// 4.8704 is the project's, the often quoted 4.87 would move h_f by 0.06 % here; γ = ρg =
/// 9.80665 kPa/m). Computed here from `netkit::hw_resistance`, not from firemain's head loss.
fn closed_form_kpa(q: f64, background: f64) -> f64 {
    let r = hw_resistance(LENGTH_FT * M_PER_FT, D_IN * 0.0254, C);
    let head = (GRADE_FT - Z_FT) * M_PER_FT - r * (q + background).powf(1.852);
    head * KPA_PER_M
}

#[test]
fn single_pipe_curve_matches_the_closed_form() {
    // Source: the Hazen-Williams closed form above (Williams & Hazen 1920). Every point is a
    // steady solve, so it must match to the steady tolerance on heads (1e-6 m, converted to
    // kPa by γ), with a 10 % allowance for the convergence estimate.
    let allowed_kpa = 1.1 * Tolerance::STEADY.head_m * KPA_PER_M;
    for demand_gpm in [0.0, 100.0] {
        let net = single_pipe(demand_gpm);
        let criteria = criteria(&net, FLOOR_PSI, 8000.0, 1000.0);
        let (results, curves) = sweep_and_curves(&net, &criteria, 1);
        let curve = &curves[0];
        let h = net.node_by_id("H").unwrap();
        assert_eq!(curve.hydrant, results[0].hydrant);
        assert_eq!(curve.critical_junction, Some(h));
        assert!(curve.unsolved.is_empty(), "{:?}", curve.unsolved);
        assert!(curve.points.len() >= POINTS);
        let background = MAX_DAY * demand_gpm * M3S_PER_GPM;
        for p in &curve.points {
            let exact = closed_form_kpa(p.flow_m3s, background);
            assert!(
                (p.hydrant_kpa - exact).abs() <= allowed_kpa,
                "demand {demand_gpm} gpm, {:.3} gpm: {} kPa vs closed form {exact} kPa",
                p.flow_m3s / M3S_PER_GPM,
                p.hydrant_kpa
            );
            // One junction: it is the critical and the lowest constrained one.
            assert_eq!(p.critical_kpa, Some(p.hydrant_kpa));
            assert_eq!((p.lowest_junction, p.lowest_kpa), (h, p.hydrant_kpa));
        }
    }
}

#[test]
fn a_hydrant_lead_lowers_its_curve_by_the_leads_loss() {
    // Source: the closed form above with a second Hazen-Williams pipe in series that carries
    // the fire flow alone (Williams & Hazen 1920): the hydrant's own pressure is
    // (G − z − r (q + D)^1.852 − r_L q^1.852)·γ. Its available flow is the point where that
    // reaches the floor, and it lies on the curve at or above the floor.
    let allowed_kpa = 1.1 * Tolerance::STEADY.head_m * KPA_PER_M;
    let (lead_ft, lead_in, lead_c) = (60.0, 6.0, 100.0);
    let r_lead = hw_resistance(lead_ft * M_PER_FT, lead_in * 0.0254, lead_c);
    let mut f = NetFiles::us_hw();
    f.max_day(MAX_DAY)
        .reservoir("R", GRADE_FT)
        .junction("H", Z_FT, 0.0)
        .pipe("P", "R", "H", LENGTH_FT, D_IN, C)
        .hydrant_with_lead(
            "FH",
            "H",
            Some(REQUIRED_GPM),
            (lead_ft, lead_in, Some(lead_c)),
        );
    let net = f.load();
    let criteria = criteria(&net, FLOOR_PSI, 8000.0, 1000.0);
    let (results, curves) = sweep_and_curves(&net, &criteria, 1);
    let curve = &curves[0];
    let h = net.node_by_id("H").unwrap();
    assert!(curve.unsolved.is_empty(), "{:?}", curve.unsolved);
    for p in &curve.points {
        let exact = closed_form_kpa(p.flow_m3s, 0.0) - r_lead * p.flow_m3s.powf(1.852) * KPA_PER_M;
        assert!(
            (p.hydrant_kpa - exact).abs() <= allowed_kpa,
            "{:.3} gpm: {} kPa vs closed form {exact} kPa",
            p.flow_m3s / M3S_PER_GPM,
            p.hydrant_kpa
        );
        assert_eq!(p.critical_kpa, Some(p.hydrant_kpa));
        assert_eq!((p.lowest_junction, p.lowest_kpa), (h, p.hydrant_kpa));
    }
    let available = results[0].available_m3s.expect("available");
    let at_available = curve
        .points
        .iter()
        .find(|p| p.flow_m3s == available)
        .expect("the available flow is a point of the curve");
    let floor_kpa = FLOOR_PSI * KPA_PER_PSI;
    assert!(at_available.hydrant_kpa >= floor_kpa - FLOOR_TOLERANCE_KPA);
    let residual = results[0].residual_kpa.expect("residual");
    let required = REQUIRED_GPM * M3S_PER_GPM;
    let exact = closed_form_kpa(required, 0.0) - r_lead * required.powf(1.852) * KPA_PER_M;
    assert!((residual - exact).abs() < 0.01, "{residual} vs {exact}");
}

#[test]
fn single_pipe_curve_spans_zero_to_beyond_the_available_flow() {
    // Sources: the chart's abscissa is Q^1.85 (NFPA 291, supply graph of the flow-test
    // chapter, N^1.85 paper; from memory), so the evenly spaced flows are (i/n)^(1/1.85) of the
    // upper end, 1.25 × the available flow here (the curve's definition); a single pipe's head
    // loss rises with flow (Hazen-Williams, Williams & Hazen 1920), so pressures never rise.
    let net = single_pipe(100.0);
    let criteria = criteria(&net, FLOOR_PSI, 8000.0, 1000.0);
    let (results, curves) = sweep_and_curves(&net, &criteria, 1);
    let (result, curve) = (&results[0], &curves[0]);
    let available = result.available_m3s.expect("available flow");
    assert!(available > result.required_m3s, "the hydrant passes");
    let flows: Vec<f64> = curve.points.iter().map(|p| p.flow_m3s).collect();
    assert_eq!(flows[0], 0.0, "static point");
    assert!(flows.windows(2).all(|w| w[0] < w[1]), "sorted, distinct");
    assert!(flows.contains(&result.required_m3s), "required point");
    assert!(flows.contains(&available), "available point");
    let top = 1.25 * available;
    // One reporting-grid step (0.001 gpm) of rounding down, plus round-off.
    let grid = 1.0e-3 * M3S_PER_GPM * (1.0 + 1e-6);
    for i in 1..POINTS {
        let frac = i as f64 / (POINTS - 1) as f64;
        let q = top * frac.powf(1.0 / 1.85);
        assert!(
            flows.iter().any(|&f| f <= q && q - f <= grid),
            "grid point {i}: {:.3} gpm missing",
            q / M3S_PER_GPM
        );
    }
    assert_eq!(CHART_FLOW_EXPONENT, 1.85);
    assert!(curve
        .points
        .windows(2)
        .all(|w| w[1].hydrant_kpa <= w[0].hydrant_kpa));
    // The static point is the sweep's static pressure; the required flow's is its residual.
    assert_eq!(Some(curve.points[0].hydrant_kpa), result.static_kpa);
    let at_required = curve
        .points
        .iter()
        .find(|p| p.flow_m3s == result.required_m3s)
        .unwrap();
    let residual = result.residual_kpa.unwrap();
    // The search solves the required flow to `Tolerance::SEARCH` (2e-4 m).
    assert!(
        (at_required.hydrant_kpa - residual).abs() <= 1.1 * Tolerance::SEARCH.head_m * KPA_PER_M
    );
    // Beyond the available flow the hydrant is below the floor.
    let floor_kpa = FLOOR_PSI * KPA_PER_PSI;
    assert!(curve.points.last().unwrap().hydrant_kpa < floor_kpa);
}

#[test]
fn without_an_available_flow_the_curve_runs_to_beyond_the_required_flow() {
    // Source: the curve's definition (1.25 × the required flow without an available flow);
    // common practice, no source. An error row of the search keeps its required flow.
    let net = single_pipe(0.0);
    let criteria = criteria(&net, FLOOR_PSI, 8000.0, 1000.0);
    let hydraulics = Hydraulics::new(&net).expect("prepare");
    let setup = FireFlowSetup::new(&hydraulics, &criteria).expect("max-day solve");
    let mut result = sweep(&setup, &[0], Some(1), &|_| {})
        .expect("sweep")
        .0
        .remove(0);
    result.available_m3s = None;
    result.critical_junction = None;
    let mut ws = hydraulics.workspace();
    let curve = supply_curve(&setup, &mut ws, &result, 5);
    let flows: Vec<f64> = curve.points.iter().map(|p| p.flow_m3s).collect();
    let top = 1.25 * REQUIRED_GPM * M3S_PER_GPM;
    // Zero, four evenly spaced flows, and the required flow.
    assert_eq!(flows.len(), 6, "{flows:?}");
    assert!(flows.contains(&result.required_m3s));
    let last = *flows.last().unwrap();
    assert!(last <= top && top - last < 1.0e-3 * M3S_PER_GPM);
    // Falls back on the lowest constrained junction at the required flow.
    assert_eq!(curve.critical_junction, result.min_pressure_junction);
}

fn repo(relative: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join(relative)
}

fn demo_town() -> (Network, Criteria) {
    let net = load_network(&repo("examples/demo-town"))
        .unwrap_or_else(|d| panic!("demo town did not load:\n{d}"))
        .network;
    let criteria = load_criteria(&repo("criteria/cedar-county-demo.toml"), &net)
        .unwrap_or_else(|d| panic!("criteria did not load:\n{d}"));
    (net, criteria)
}

#[test]
fn demo_town_curves_hold_the_verified_answers_and_ignore_thread_count() {
    // Invariants (docs/fire-flow-method.md §2, "Verified answers"): the available flow is a
    // flow whose ordinary solve keeps every constrained pressure at the floor or above, so its
    // point on the curve does too (up to the floor tolerance the search accepts); every curve
    // holds its required and available flows; results do not depend on the thread count.
    let (net, criteria) = demo_town();
    let floor = criteria.residual_floor_kpa;
    let hydraulics = Hydraulics::new(&net).expect("prepare");
    let setup = FireFlowSetup::new(&hydraulics, &criteria).expect("max-day solve");
    let all: Vec<usize> = (0..net.hydrants.len()).collect();
    let results = sweep(&setup, &all, Some(2), &|_| {}).expect("sweep").0;
    let one = supply_curves(&setup, &all, &results, POINTS, 1).expect("curves");
    let two = supply_curves(&setup, &all, &results, POINTS, 2).expect("curves");
    assert_eq!(one, two, "1 and 2 threads");
    assert_eq!(one.len(), results.len());
    for (r, c) in results.iter().zip(&one) {
        let id = &net.hydrants[r.hydrant].id;
        assert_eq!(c.hydrant, r.hydrant);
        let flows: Vec<f64> = c.points.iter().map(|p| p.flow_m3s).collect();
        assert!(flows.windows(2).all(|w| w[0] < w[1]), "{id}: sorted");
        let drawn_or_listed =
            |q: f64| flows.contains(&q) || c.unsolved.iter().any(|(u, _)| *u == q);
        assert!(drawn_or_listed(r.required_m3s), "{id}: required flow");
        for p in &c.points {
            assert!(
                p.hydrant_kpa.is_finite() && p.lowest_kpa.is_finite(),
                "{id}"
            );
            assert!(
                p.lowest_kpa <= p.hydrant_kpa,
                "{id}: lowest includes the hydrant"
            );
        }
        if let Some(a) = r.available_m3s.filter(|&a| a > 0.0) {
            let p = c.points.iter().find(|p| p.flow_m3s == a);
            let p = p.unwrap_or_else(|| panic!("{id}: no point at the available flow"));
            assert!(
                p.lowest_kpa >= floor - FLOOR_TOLERANCE_KPA,
                "{id}: {} kPa at the available flow, floor {floor} kPa",
                p.lowest_kpa
            );
        }
    }
}

#[test]
fn behind_a_pressure_reducing_valve_the_curve_is_flat_then_follows_the_main() {
    // Sources: a PRV holds its downstream junction at its setting while the upstream grade
    // allows, and is wide open below that (the regulating valve's rule, docs/fire-flow-method.md
    // §1 Controls; common practice, no source); wide open with no loss coefficient it passes
    // the upstream head, which is the Hazen-Williams closed form of `closed_form_kpa` (Williams
    // & Hazen 1920) with the upstream junction's max-day demand on the main. 1 psi =
    // 6.894757 kPa (NFPA 24 (2019) Annex D, Table D.1.4).
    let setting_psi = 40.0;
    let demand_gpm = 10.0;
    let mut f = NetFiles::us_hw();
    f.max_day(MAX_DAY)
        .reservoir("R", GRADE_FT)
        .junction("J", Z_FT, demand_gpm)
        .junction("H", Z_FT, 0.0)
        .pipe("P", "R", "J", LENGTH_FT, D_IN, C)
        .valve("V", "J", "H", "prv", D_IN, setting_psi, 0.0)
        .hydrant("FH", "H", Some(REQUIRED_GPM));
    let net = f.load();
    let criteria = criteria(&net, FLOOR_PSI, 8000.0, 1000.0);
    let (_, curves) = sweep_and_curves(&net, &criteria, 1);
    let curve = &curves[0];
    assert!(curve.unsolved.is_empty(), "{:?}", curve.unsolved);
    let setting_kpa = setting_psi * KPA_PER_PSI;
    let background = MAX_DAY * demand_gpm * M3S_PER_GPM;
    let allowed_kpa = 1.1 * Tolerance::STEADY.head_m * KPA_PER_M;
    let (mut flat, mut open) = (0, 0);
    for p in &curve.points {
        let upstream = closed_form_kpa(p.flow_m3s, background);
        // Within 0.1 kPa of the switch either reading is a steady state of the rule.
        if (upstream - setting_kpa).abs() < 0.1 {
            continue;
        }
        let expected = if upstream > setting_kpa {
            flat += 1;
            setting_kpa
        } else {
            open += 1;
            upstream
        };
        assert!(
            (p.hydrant_kpa - expected).abs() <= allowed_kpa,
            "{:.3} gpm: {} kPa, expected {expected} kPa",
            p.flow_m3s / M3S_PER_GPM,
            p.hydrant_kpa
        );
    }
    assert!(
        flat >= 2 && open >= 2,
        "both stretches drawn: {flat} flat, {open} open"
    );
}

#[test]
fn a_flow_that_cannot_reach_the_hydrant_is_listed_not_drawn() {
    // Source: a check valve passes flow only from its `from` end (docs/network-format.md §8,
    // pipes.csv `status = check`; common practice, no source): with the hydrant's only supply
    // through one that points away from it, no fire flow can reach it, and the demand-driven
    // solve has no solution; only the static point (no fire flow, no flow through the valve)
    // is drawn.
    let mut f = NetFiles::us_hw();
    f.max_day(MAX_DAY)
        .reservoir("R", GRADE_FT)
        .junction("J", Z_FT, 10.0)
        .junction("H", Z_FT, 0.0)
        .pipe("P", "R", "J", LENGTH_FT, D_IN, C)
        .check_pipe("CV", "H", "J", 100.0, D_IN, C)
        .hydrant("FH", "H", Some(REQUIRED_GPM));
    let net = f.load();
    let criteria = criteria(&net, FLOOR_PSI, 8000.0, 1000.0);
    let (results, curves) = sweep_and_curves(&net, &criteria, 1);
    let curve = &curves[0];
    let flows: Vec<f64> = curve.points.iter().map(|p| p.flow_m3s).collect();
    assert_eq!(flows, vec![0.0]);
    assert!(curve.unsolved.len() >= POINTS - 1, "{:?}", curve.unsolved);
    assert!(curve
        .unsolved
        .iter()
        .any(|(q, _)| *q == results[0].required_m3s));
    for (q, reason) in &curve.unsolved {
        assert!(*q > 0.0);
        assert!(
            reason.contains("cut off") && reason.contains("CV"),
            "{reason}"
        );
    }
}
