//! Every available flow the fire-flow search reports is a flow that an ordinary solve (max-day
//! demand plus the fire flow as an extra demand, no junction held, the steady tolerance)
//! verifies: against closed forms, against brute-force scans with the ordinary solver, on the
//! demo town, and on random networks with pumps and control valves.
//!
//! Cases marked `#[ignore]` fail with the current search and are kept as its specification;
//! run them with `cargo test --test verified_answers -- --include-ignored`.

mod netkit;

use std::path::{Path, PathBuf};

use firemain::criteria::{load_criteria, Criteria};
use firemain::fireflow::{
    combined_available_flow, sweep, ConstraintCheck, FireFlowSetup, GroupNote, GroupResult,
    HydrantNote, HydrantResult, LimitedBy, Outcome, Split, FLOOR_TOLERANCE_KPA,
};
use firemain::hydraulics::{Hydraulics, Solution, SolveError, SolveRequest, Tolerance};
use firemain::model::{load_network, Network};
use firemain::units::UnitSystem;
use netkit::{hw_resistance, NetFiles, KPA_PER_M, KPA_PER_PSI, M3S_PER_GPM, M_PER_FT, M_PER_IN};
use proptest::prelude::*;

fn repo(relative: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join(relative)
}

fn shipped_criteria(name: &str, net: &Network) -> Criteria {
    let path = repo(&format!("criteria/{name}"));
    load_criteria(&path, net).unwrap_or_else(|d| panic!("{name} did not load:\n{d}"))
}

/// The accuracy the search promises at flow q: max(0.5 %, 1 gpm or 0.1 L/s)
/// (docs/fire-flow-method.md §2).
fn promised_accuracy(q: f64, units: UnitSystem) -> f64 {
    let absolute = match units {
        UnitSystem::Us => M3S_PER_GPM,
        UnitSystem::Si => 1.0e-4,
    };
    (0.005 * q).max(absolute)
}

/// An ordinary solve at fire flow `q` at junction `at`: max-day demand, the fire flow as an
/// extra demand, no held junction, in a fresh workspace, to `Tolerance::STEADY` (or the
/// search's tolerance where the steady one stalls, see below); with the
/// setup's constraint check. It starts cold, and when that finds no steady state, from the
/// max-day state (the start every search uses): a start the solver cannot work from is no
/// verdict on the flow.
fn ordinary(
    setup: &FireFlowSetup<'_>,
    at: usize,
    q: f64,
) -> Result<(Solution, ConstraintCheck), SolveError> {
    ordinary_with(setup, &[(at, q)])
}

/// [`ordinary`] with fire flows at several junctions at once (a group of hydrants flowing
/// together, `extra` as (junction, m³/s)), judged by [`judged`].
fn ordinary_with(
    setup: &FireFlowSetup<'_>,
    extra: &[(usize, f64)],
) -> Result<(Solution, ConstraintCheck), SolveError> {
    let hydraulics = setup.hydraulics;
    let request = SolveRequest {
        demand_factor: setup.demand_factor,
        extra_demand: extra,
        fixed_head: None,
    };
    let from = |start: &Solution, tolerance: Tolerance| {
        let mut ws = hydraulics.workspace();
        ws.set_tolerance(tolerance);
        hydraulics.solve(&mut ws, &request, start)
    };
    // Two regulating valves that feed one zone from a loop can leave the head steps in a slow
    // exchange short of the steady tolerance (1e-6 m): such a state is judged at the search's
    // own tolerance for reported pressures (2e-4 m), the one its answers are verified at.
    let sol = from(&hydraulics.cold_start(), Tolerance::STEADY)
        .or_else(|_| from(&setup.base, Tolerance::STEADY))
        .or_else(|_| from(&setup.base, Tolerance::SEARCH))?;
    let check = judged(setup, &sol, extra);
    Ok((sol, check))
}

/// The constraint check of a solution with the fire flows `extra`, each flowing hydrant's own
/// pressure taken after its lead (hydrants.csv `lateral_*`): its junction's less the lead's
/// Hazen-Williams or Darcy-Weisbach loss at its flow (docs/fire-flow-method.md, "Laterals").
/// The generated networks with leads have one hydrant per junction.
fn judged(setup: &FireFlowSetup<'_>, sol: &Solution, extra: &[(usize, f64)]) -> ConstraintCheck {
    let net = setup.network();
    let mut check = setup.constraints_for(sol, &junctions_of(extra));
    for &(j, q) in extra {
        let mut leads = net.hydrants.iter().filter(|h| h.junction == j);
        let Some(lead) = leads.next().and_then(|h| h.lateral) else {
            continue;
        };
        assert!(
            leads.next().is_none(),
            "one hydrant per junction with leads"
        );
        if q <= 0.0 || sol.isolated.contains(&j) {
            continue;
        }
        let loss_m = firemain::fireflow::lateral_headloss_m(net.headloss, &lead, q);
        let margin = sol.pressure_kpa(net, j)
            - loss_m * firemain::units::KPA_PER_M_OF_HEAD
            - setup.criteria.residual_floor_kpa;
        if margin < check.pressure_margin_kpa {
            check.pressure_margin_kpa = margin;
            check.pressure_junction = j;
        }
    }
    check
}

/// The junctions of a set of withdrawals.
fn junctions_of(extra: &[(usize, f64)]) -> Vec<usize> {
    extra.iter().map(|&(j, _)| j).collect()
}

/// Whether an ordinary solve at `q` meets every constraint (within the floor tolerance the
/// code defines, `ConstraintCheck::feasible`). A flow that cannot be solved does not. With
/// pumps or valves a flow can settle in other states from another start: it meets the
/// constraints only when the solve from a cold start and the one from the max-day state both
/// do (the safe reading the search promises).
fn meets(setup: &FireFlowSetup<'_>, at: usize, q: f64) -> bool {
    meets_with(setup, &[(at, q)])
}

/// [`meets`] with fire flows at several junctions at once (`extra`, as in [`ordinary_with`]).
fn meets_with(setup: &FireFlowSetup<'_>, extra: &[(usize, f64)]) -> bool {
    meets_with_by(setup, extra, &ConstraintCheck::feasible)
}

/// Whether an ordinary solve at `q` clears every constraint by the floor tolerance: the test
/// that a flow above a reported answer passes. Within ± that tolerance a solve cannot tell a
/// pass from a failure, and where the binding pressure nears the floor almost flat (0.002 psi
/// per gpm on a generated two-PRV zone) the band spans more than the promised 1 gpm.
fn clearly_meets(setup: &FireFlowSetup<'_>, at: usize, q: f64) -> bool {
    meets_by(setup, at, q, &clears)
}

/// Whether a check clears every pressure by the floor tolerance and every velocity limit.
fn clears(c: &ConstraintCheck) -> bool {
    c.pressure_margin_kpa >= FLOOR_TOLERANCE_KPA && c.velocity.is_none_or(|(m, _)| m >= 0.0)
}

fn meets_by(
    setup: &FireFlowSetup<'_>,
    at: usize,
    q: f64,
    judge: &dyn Fn(&ConstraintCheck) -> bool,
) -> bool {
    meets_with_by(setup, &[(at, q)], judge)
}

/// [`meets_by`] with fire flows at several junctions at once (`extra`, as in
/// [`ordinary_with`]).
fn meets_with_by(
    setup: &FireFlowSetup<'_>,
    extra: &[(usize, f64)],
    judge: &dyn Fn(&ConstraintCheck) -> bool,
) -> bool {
    let from_max_day = || {
        let request = SolveRequest {
            demand_factor: setup.demand_factor,
            extra_demand: extra,
            fixed_head: None,
        };
        let mut ws = setup.hydraulics.workspace();
        [Tolerance::STEADY, Tolerance::SEARCH]
            .into_iter()
            .any(|tolerance| {
                ws.set_tolerance(tolerance);
                matches!(setup.hydraulics.solve(&mut ws, &request, &setup.base),
                Ok(sol) if judge(&judged(setup, &sol, extra)))
            })
    };
    matches!(ordinary_with(setup, extra), Ok((_, c)) if judge(&c)) && from_max_day()
}

/// Whether the ordinary solve at `next`, started from the ordinary solve at `q` (the fire flow
/// ramping up from the answer), meets the constraints too. Where pumps and valves give a flow
/// two steady states, one passing and one failing, a flow counts as passing only when every
/// start tried passes: the safe reading (common practice, no source).
fn continues_to_pass(setup: &FireFlowSetup<'_>, at: usize, q: f64, next: f64) -> bool {
    continues_to_pass_with(setup, &[(at, q)], &[(at, next)])
}

/// [`continues_to_pass`] with fire flows at several junctions (`answer`, then `next`: the same
/// junctions, as in [`ordinary_with`]).
fn continues_to_pass_with(
    setup: &FireFlowSetup<'_>,
    answer: &[(usize, f64)],
    next: &[(usize, f64)],
) -> bool {
    let solve = |extra: &[(usize, f64)], start: &Solution| {
        let request = SolveRequest {
            demand_factor: setup.demand_factor,
            extra_demand: extra,
            fixed_head: None,
        };
        let mut ws = setup.hydraulics.workspace();
        ws.set_tolerance(Tolerance::SEARCH);
        setup.hydraulics.solve(&mut ws, &request, start)
    };
    let Ok(at_answer) = solve(answer, &setup.base) else {
        return true;
    };
    matches!(solve(next, &at_answer),
        Ok(sol) if judged(setup, &sol, next).feasible())
}

/// Whether every one of 16 flows evenly spaced over (answer, next] passes (`passes_at(f)` for
/// f in (0, 1]): a failing window between an answer and the next flow up by the accuracy (a
/// velocity that exceeds its limit until a second source opens) makes the answer the first
/// crossing the method asks for, not one that falls short (common practice, no source).
fn passes_throughout(passes_at: &dyn Fn(f64) -> bool) -> bool {
    (1..=16).all(|k| passes_at(k as f64 / 16.0))
}

/// By how much (%) a reported flow `q` that fails exceeds the limit of the ordinary solver,
/// found by bisection from 0.95 q (`None` when 0.95 q fails too).
fn overshoot_percent(setup: &FireFlowSetup<'_>, at: usize, q: f64) -> Option<f64> {
    let (mut lo, mut hi) = (0.95 * q, q);
    if !meets(setup, at, lo) {
        return None;
    }
    for _ in 0..16 {
        let mid = 0.5 * (lo + hi);
        if meets(setup, at, mid) {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    Some(100.0 * (q - lo) / lo)
}

/// What an ordinary solve at `q` says, in words (for failure messages).
fn verdict(setup: &FireFlowSetup<'_>, at: usize, q: f64) -> String {
    let net = setup.network();
    match ordinary(setup, at, q) {
        Ok((_, c)) if c.feasible() => "meets the floor".to_string(),
        Ok((_, c)) => format!(
            "{:.3} kPa below the floor at {}, {}",
            -c.pressure_margin_kpa,
            net.nodes[c.pressure_junction].id,
            match overshoot_percent(setup, at, q) {
                Some(p) => format!("{p:.2} % above the ordinary solver's limit"),
                None => "more than 5 % above the ordinary solver's limit".to_string(),
            }
        ),
        Err(e) => format!("does not solve: {e}"),
    }
}

/// The sweep over every hydrant.
fn check_all(setup: &FireFlowSetup<'_>, threads: usize) -> Vec<HydrantResult> {
    let all: Vec<usize> = (0..setup.network().hydrants.len()).collect();
    sweep(setup, &all, Some(threads), &|_| {}).expect("sweep").0
}

/// The first flow at which an ordinary solve fails the constraints, by a scan in `step`
/// from 0 up to `top`, then bisection between the last passing and first failing flow to
/// `resolution`. Returns (last passing, first failing) of the bisection, or `None` when
/// every scanned flow passes.
fn brute_force_limit(
    setup: &FireFlowSetup<'_>,
    at: usize,
    step: f64,
    top: f64,
    resolution: f64,
) -> Option<(f64, f64)> {
    let mut lo = 0.0;
    let mut q = 0.0;
    loop {
        if q > top {
            return None;
        }
        if !meets(setup, at, q) {
            break;
        }
        lo = q;
        q += step;
    }
    let mut hi = q;
    while hi - lo > resolution {
        let mid = 0.5 * (lo + hi);
        if meets(setup, at, mid) {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    Some((lo, hi))
}

/// Checks reported flows against exact ones: at most `exact × 1.001` and at least
/// `exact − max(0.5 %, 1 gpm or 0.1 L/s)`; returns one line per violation.
fn outside_promise(label: &str, got: Option<f64>, exact: f64, units: UnitSystem) -> Vec<String> {
    let (scale, unit) = match units {
        UnitSystem::Us => (1.0 / M3S_PER_GPM, "gpm"),
        UnitSystem::Si => (1000.0, "L/s"),
    };
    let Some(got) = got else {
        return vec![format!("{label}: no available flow")];
    };
    let low = exact - promised_accuracy(exact, units);
    let high = exact * 1.001;
    if got <= high && got >= low {
        return Vec::new();
    }
    vec![format!(
        "{label}: available {:.3} {unit}, exact {:.3} {unit} ({:+.2} %), allowed [{:.3}, {:.3}]",
        got * scale,
        exact * scale,
        100.0 * (got - exact) / exact,
        low * scale,
        high * scale
    )]
}

fn assert_none(failures: &[String]) {
    assert!(failures.is_empty(), "\n{}", failures.join("\n"));
}

// 1. A hydrant fed directly by one pipe: the Hazen-Williams closed form.

/// Fire flow that brings a junction `head_m` of head below the source grade to the floor
/// through one pipe of resistance r: Q = (head/r)^(1/1.852) (Hazen-Williams formula, SI form
/// h = 10.67 L Q^1.852 / (C^1.852 D^4.8704), e.g. as given in the project's
/// docs/fire-flow-method.md source: Williams & Hazen, Hydraulic Tables, 1920).
fn single_pipe_limit(r: f64, head_m: f64) -> f64 {
    (head_m / r).powf(1.0 / 1.852)
}

/// Sweeps a one-pipe network for each required flow and compares with `exact`.
fn single_pipe_failures(
    build: impl Fn(f64) -> NetFiles,
    criteria_file: &str,
    required: &[f64],
    exact: f64,
) -> Vec<String> {
    let mut failures = Vec::new();
    for &req in required {
        let net = build(req).load();
        let criteria = shipped_criteria(criteria_file, &net);
        let hydraulics = Hydraulics::new(&net).expect("prepare");
        let setup = FireFlowSetup::new(&hydraulics, &criteria).expect("max-day");
        // The network is the one the closed form describes: the ordinary solver agrees.
        let at = net.hydrants[0].junction;
        assert!(meets(&setup, at, 0.999 * exact) && !meets(&setup, at, 1.001 * exact));
        let res = check_all(&setup, 1).pop().expect("one hydrant");
        let label = format!("required {req}");
        failures.extend(outside_promise(&label, res.available_m3s, exact, net.units));
    }
    failures
}

#[test]
fn direct_fed_hydrant_us_matches_hazen_williams_closed_form() {
    // A reservoir 200 ft above the hydrant junction, 3000 ft of 6-in pipe, C = 100, 20 psi
    // floor (criteria/common-practice-us.toml; NFPA 291 §4.2 rating pressure), no other
    // demand. Exact: Q = ((200 ft − 20 psi/γ)/r)^(1/1.852) ≈ 630.6 gpm (Hazen-Williams formula,
    // SI form, e.g. as given in the project's docs/fire-flow-method.md source).
    let r = hw_resistance(3000.0 * M_PER_FT, 6.0 * M_PER_IN, 100.0);
    let head = 200.0 * M_PER_FT - 20.0 * KPA_PER_PSI / KPA_PER_M;
    let exact = single_pipe_limit(r, head);
    assert!((exact / M3S_PER_GPM - 630.6).abs() < 0.05);
    let build = |req: f64| {
        let mut f = NetFiles::us_hw();
        f.reservoir("R", 1200.0)
            .junction("H", 1000.0, 0.0)
            .pipe("P", "R", "H", 3000.0, 6.0, 100.0)
            .hydrant("FH", "H", Some(req));
        f
    };
    let required = [500.0, 1000.0, 1500.0, 2500.0, 3500.0, 5000.0];
    assert_none(&single_pipe_failures(
        build,
        "common-practice-us.toml",
        &required,
        exact,
    ));
}

#[test]
fn velocity_limited_hydrant_matches_the_closed_form() {
    // A reservoir 200 ft above the hydrant junction, 500 ft of 6-in pipe, C = 120, a 6 ft/s
    // velocity limit in every pipe and the 20 psi floor. The pipe carries the whole fire flow,
    // so the limit binds at Q = V·πD²/4 = 6 ft/s × 0.19635 ft² = 528.8 gpm (continuity; the
    // pressure at the hydrant is then about 140 ft, far above the floor).
    let exact = 6.0 * M_PER_FT * std::f64::consts::PI * (6.0 * M_PER_IN).powi(2) / 4.0;
    assert!((exact / M3S_PER_GPM - 528.8).abs() < 0.05);
    let mut f = NetFiles::us_hw();
    f.reservoir("R", 1200.0)
        .junction("H", 1000.0, 0.0)
        .pipe("P", "R", "H", 500.0, 6.0, 120.0)
        .hydrant("FH", "H", Some(1000.0));
    let net = f.load();
    let criteria = netkit::criteria_with_limits(&net, 20.0, 8000.0, 1000.0, "system", &[], 6.0);
    let hydraulics = Hydraulics::new(&net).expect("prepare");
    let setup = FireFlowSetup::new(&hydraulics, &criteria).expect("max-day");
    let res = check_all(&setup, 1).pop().expect("one hydrant");
    assert_eq!(res.limited_by, Some(LimitedBy::Velocity), "{res:?}");
    assert_none(&outside_promise(
        "velocity",
        res.available_m3s,
        exact,
        net.units,
    ));
}

#[test]
fn direct_fed_hydrant_si_matches_hazen_williams_closed_form() {
    // The SI twin in round numbers: a reservoir 60 m above the hydrant junction, 900 m of
    // 150 mm pipe, C = 100, 140 kPa floor (criteria/common-practice-si.toml; NFPA 291 §4.2
    // quotes 1.4 bar). Exact: Q = ((60 m − 140 kPa/γ)/r)^(1/1.852) ≈ 37.96 L/s (Hazen-Williams
    // formula, SI form, e.g. as given in the project's docs/fire-flow-method.md source).
    let r = hw_resistance(900.0, 0.150, 100.0);
    let exact = single_pipe_limit(r, 60.0 - 140.0 / KPA_PER_M);
    assert!((exact * 1000.0 - 37.96).abs() < 0.01);
    let build = |req: f64| {
        let mut f = NetFiles::si_hw();
        f.reservoir("R", 60.0)
            .junction("H", 0.0, 0.0)
            .pipe("P", "R", "H", 900.0, 150.0, 100.0)
            .hydrant("FH", "H", Some(req));
        f
    };
    let required = [10.0, 20.0, 30.0, 40.0, 60.0, 100.0, 200.0, 300.0];
    assert_none(&single_pipe_failures(
        build,
        "common-practice-si.toml",
        &required,
        exact,
    ));
}

#[test]
fn required_flow_above_the_cap_is_searched_and_noted() {
    // The US direct-fed hydrant (exact 630.6 gpm, Hazen-Williams closed form as above) with
    // the criteria's search cap lowered to 500 gpm and a required flow of 600 gpm: pass or
    // fail must still be decided, so the search goes up to the required flow, passes, and says
    // that the required flow is above the cap (common practice, no source: the decision rule).
    let r = hw_resistance(3000.0 * M_PER_FT, 6.0 * M_PER_IN, 100.0);
    let head = 200.0 * M_PER_FT - 20.0 * KPA_PER_PSI / KPA_PER_M;
    let exact = single_pipe_limit(r, head);
    let mut f = NetFiles::us_hw();
    f.reservoir("R", 1200.0)
        .junction("H", 1000.0, 0.0)
        .pipe("P", "R", "H", 3000.0, 6.0, 100.0)
        .hydrant("FH", "H", Some(600.0));
    let net = f.load();
    let mut criteria = shipped_criteria("common-practice-us.toml", &net);
    criteria.search_cap_m3s = 500.0 * M3S_PER_GPM;
    let hydraulics = Hydraulics::new(&net).expect("prepare");
    let setup = FireFlowSetup::new(&hydraulics, &criteria).expect("max-day");
    let res = check_all(&setup, 1).pop().expect("one hydrant");
    assert_eq!(res.outcome, Outcome::Pass);
    let got = res.available_m3s.expect("available flow");
    assert!(got >= 600.0 * M3S_PER_GPM - 1e-9 && got <= exact * 1.001);
    assert!(res
        .notes
        .iter()
        .any(|n| matches!(n, HydrantNote::RequiredAboveCap { .. })));
}

// 2. A pressure-sustaining valve at the hydrant's junction.

#[test]
fn psv_at_the_hydrant_junction_matches_a_brute_force_scan() {
    // Reservoir R1 at 100 m → 2000 m of 150 mm pipe (C 100) → hydrant junction H (elevation
    // 0) → PSV (300 kPa, held at H) → junction V → short pipe → reservoir R2 at 60 m. Without
    // fire flow R1 drains through the open PSV into R2; once H falls below R2's grade the PSV
    // shuts against reverse flow, and only R1 feeds the hydrant.
    // Reference: a brute-force scan with the ordinary solver (no held junction), 0.05 L/s
    // steps, the first failing flow bisected to 1e-4 L/s (common practice, no source). Cross-
    // check: with the PSV shut, Q = ((100 m − 140 kPa/γ)/r)^(1/1.852) ≈ 34.633 L/s
    // (Hazen-Williams formula, SI form, e.g. as given in the project's
    // docs/fire-flow-method.md source).
    let mut failures = Vec::new();
    for req in [10.0, 20.0] {
        let mut f = NetFiles::si_hw();
        f.reservoir("R1", 100.0)
            .reservoir("R2", 60.0)
            .junction("H", 0.0, 0.0)
            .junction("V", 0.0, 0.0)
            .pipe("P1", "R1", "H", 2000.0, 150.0, 100.0)
            .valve("PSV", "H", "V", "psv", 150.0, 300.0, 0.5)
            .pipe("P2", "V", "R2", 10.0, 300.0, 130.0)
            .hydrant("FH", "H", Some(req));
        let net = f.load();
        let criteria = shipped_criteria("common-practice-si.toml", &net);
        let hydraulics = Hydraulics::new(&net).expect("prepare");
        let setup = FireFlowSetup::new(&hydraulics, &criteria).expect("max-day");
        let at = net.node_by_id("H").expect("H");
        let (pass, fail) =
            brute_force_limit(&setup, at, 0.05e-3, 0.2, 1.0e-7).expect("a failing flow");
        let reference = 0.5 * (pass + fail);
        eprintln!("PSV case: brute-force limit {:.4} L/s", reference * 1000.0);
        let closed = single_pipe_limit(
            hw_resistance(2000.0, 0.150, 100.0),
            100.0 - 140.0 / KPA_PER_M,
        );
        assert!((reference - closed).abs() < 2e-5, "{reference} vs {closed}");
        let res = check_all(&setup, 1).pop().expect("one hydrant");
        eprintln!(
            "required {req} L/s: available {:?} L/s, {:?}",
            res.available_m3s.map(|q| q * 1000.0),
            res.limited_by
        );
        let Some(got) = res.available_m3s else {
            failures.push(format!("required {req}: no available flow"));
            continue;
        };
        let low = reference - (0.005 * reference).max(M3S_PER_GPM);
        if got > reference * 1.001 || got < low {
            failures.push(format!(
                "required {req} L/s: available {:.3} L/s, brute force {:.4} L/s ({:+.1} %)",
                got * 1000.0,
                reference * 1000.0,
                100.0 * (got - reference) / reference
            ));
        }
    }
    assert_none(&failures);
}

// 3. The demo town: every answer re-solves (an invariant of the method; the demo's data is
// invented and no check value).

/// An `error` row must say why (common practice, no source).
fn error_row_without_note(id: &str, res: &HydrantResult) -> Option<String> {
    res.notes
        .is_empty()
        .then(|| format!("{id}: error row without a note"))
}

/// What the ordinary solver says about one hydrant's reported answer; `None` when it agrees.
fn demo_disagreement(setup: &FireFlowSetup<'_>, res: &HydrantResult) -> Option<String> {
    let net = setup.network();
    let id = &net.hydrants[res.hydrant].id;
    let at = res.junction;
    if res.outcome == Outcome::Error {
        return error_row_without_note(id, res);
    }
    let Some(q) = res.available_m3s else {
        return Some(format!("{id}: decided without an available flow"));
    };
    let gpm = q / M3S_PER_GPM;
    let violated_at_zero = res
        .notes
        .iter()
        .any(|n| matches!(n, HydrantNote::FloorViolatedWithoutFireFlow { .. }));
    if violated_at_zero {
        return meets(setup, at, 0.0)
            .then(|| format!("{id}: floor said violated without fire flow, but 0 gpm passes"));
    }
    match res.limited_by {
        Some(LimitedBy::HydrantPressure | LimitedBy::SystemPressure) => {
            if !meets(setup, at, q) {
                Some(format!(
                    "{id}: reported {gpm:.1} gpm ({:?}): {}",
                    res.limited_by,
                    verdict(setup, at, q)
                ))
            } else if meets(setup, at, 1.01 * q) {
                Some(format!("{id}: 1.01 x reported {gpm:.1} gpm still passes"))
            } else {
                None
            }
        }
        Some(LimitedBy::Cap) => {
            let cap = setup.criteria.search_cap_m3s;
            (!meets(setup, at, cap)).then(|| format!("{id}: the cap: {}", verdict(setup, at, cap)))
        }
        _ => (!meets(setup, at, q)).then(|| {
            format!(
                "{id}: reported {gpm:.1} gpm ({:?}): {}",
                res.limited_by,
                verdict(setup, at, q)
            )
        }),
    }
}

#[test]
fn demo_town_answers_resolve_with_the_ordinary_solver() {
    // Common practice, no source: an invariant of the method (docs/fire-flow-method.md §2,
    // "always a flow verified by a full solve"). For pressure-limited hydrants the reported
    // flow passes an ordinary solve and 1.01 x it fails; the cap passes where it binds; every
    // hydrant is decided (pass or fail), or is an error row with a note.
    let net = load_network(&repo("examples/demo-town"))
        .expect("demo town")
        .network;
    let criteria = shipped_criteria("cedar-county-demo.toml", &net);
    let hydraulics = Hydraulics::new(&net).expect("prepare");
    let setup = FireFlowSetup::new(&hydraulics, &criteria).expect("max-day");
    let results = check_all(&setup, 2);
    let failures: Vec<String> = results
        .iter()
        .filter_map(|r| demo_disagreement(&setup, r))
        .collect();
    eprintln!(
        "demo town: {} of {} hydrants disagree with the ordinary solver",
        failures.len(),
        results.len()
    );
    assert_none(&failures);
}

// 4. Random small networks with a pump, a PRV, a PSV and a check valve (US units).

#[derive(Clone, Debug)]
struct ControlledNet {
    grade_ft: f64,
    elevations_ft: Vec<f64>,
    demands_gpm: Vec<f64>,
    /// (length ft, diameter in, C) of the eight pipes, in the order of `files`.
    pipes: Vec<(f64, f64, f64)>,
    /// Suction grade (ft), shutoff head (ft) and design flow (gpm) of the booster, if any.
    pump: Option<(f64, f64, f64)>,
    prv_psi: Option<f64>,
    psv_psi: Option<f64>,
    /// Grade (ft) of a second reservoir behind a check valve, if any.
    check_grade_ft: Option<f64>,
}

/// The source grade (ft), eight junction elevations (ft) and demands (gpm), and `pipes`
/// pipes ((length ft, diameter in, C)) of a random small network.
#[allow(clippy::type_complexity)]
fn grade_junctions_pipes(
    pipes: usize,
) -> (
    std::ops::Range<f64>,
    prop::collection::VecStrategy<std::ops::Range<f64>>,
    prop::collection::VecStrategy<std::ops::Range<f64>>,
    prop::collection::VecStrategy<(
        std::ops::Range<f64>,
        prop::sample::Select<f64>,
        std::ops::Range<f64>,
    )>,
) {
    let pipe = (
        300.0..2500.0_f64,
        prop::sample::select(vec![6.0, 8.0, 10.0, 12.0]),
        80.0..130.0_f64,
    );
    (
        900.0..980.0_f64,
        prop::collection::vec(740.0..800.0_f64, 8),
        prop::collection::vec(0.0..80.0_f64, 8),
        prop::collection::vec(pipe, pipes),
    )
}

fn controlled_net() -> impl Strategy<Value = ControlledNet> {
    let (grade, elevations, demands, pipes) = grade_junctions_pipes(8);
    (
        grade,
        elevations,
        demands,
        pipes,
        prop::option::of((760.0..800.0_f64, 80.0..200.0_f64, 300.0..1500.0_f64)),
        prop::option::of(40.0..80.0_f64),
        prop::option::of(25.0..60.0_f64),
        prop::option::of(850.0..960.0_f64),
    )
        .prop_map(
            |(grade_ft, elevations_ft, demands_gpm, pipes, pump, prv_psi, psv_psi, check)| {
                ControlledNet {
                    grade_ft,
                    elevations_ft,
                    demands_gpm,
                    pipes,
                    pump,
                    prv_psi,
                    psv_psi,
                    check_grade_ft: check,
                }
            },
        )
}

impl ControlledNet {
    /// R1 → J1 → J2 → J3 and J1 → J4 → J3 (a loop); a booster from a suction reservoir into
    /// J3 (through J5); a PRV from J3 down to J6 → J7; a PSV from J2 to J8 → J7; a second
    /// reservoir behind a check-valve pipe into J4. Missing controls become plain pipes, so
    /// the zones stay supplied. Hydrants at J2, J3, J4, J6, J7.
    fn files(&self) -> NetFiles {
        let mut f = NetFiles::us_hw();
        f.max_day(1.5).reservoir("R1", self.grade_ft);
        for i in 0..8 {
            let zone_drop = if i >= 5 { 40.0 } else { 0.0 };
            f.junction(
                &format!("J{}", i + 1),
                self.elevations_ft[i] - zone_drop,
                self.demands_gpm[i],
            );
        }
        let p = &self.pipes;
        let pipe = |f: &mut NetFiles, id: &str, a: &str, b: &str, k: usize| {
            f.pipe(id, a, b, p[k].0, p[k].1, p[k].2);
        };
        pipe(&mut f, "P1", "R1", "J1", 0);
        pipe(&mut f, "P2", "J1", "J2", 1);
        pipe(&mut f, "P3", "J2", "J3", 2);
        pipe(&mut f, "P4", "J1", "J4", 3);
        pipe(&mut f, "P5", "J4", "J3", 4);
        pipe(&mut f, "P6", "J6", "J7", 5);
        pipe(&mut f, "P7", "J8", "J7", 6);
        pipe(&mut f, "P8", "J5", "J3", 7);
        match self.pump {
            Some((suction, shutoff, design)) => {
                f.reservoir("RS", suction)
                    .junction("JS", suction - 10.0, 0.0)
                    .pipe("PS", "RS", "JS", 50.0, 12.0, 120.0)
                    .pump(
                        "PU",
                        "JS",
                        "J5",
                        shutoff,
                        (design, 0.75 * shutoff),
                        (1.6 * design, 0.45 * shutoff),
                        1.0,
                    );
            }
            None => {
                f.pipe("PU", "J1", "J5", 500.0, 8.0, 110.0);
            }
        }
        match self.prv_psi {
            Some(s) => f.valve("PRV", "J3", "J6", "prv", 8.0, s, 3.0),
            None => f.pipe("PRV", "J3", "J6", 100.0, 8.0, 110.0),
        };
        match self.psv_psi {
            Some(s) => f.valve("PSV", "J2", "J8", "psv", 6.0, s, 3.0),
            None => f.pipe("PSV", "J2", "J8", 100.0, 6.0, 110.0),
        };
        if let Some(g) = self.check_grade_ft {
            f.reservoir("R3", g)
                .check_pipe("CV", "R3", "J4", 1500.0, 8.0, 110.0);
        }
        for j in ["J2", "J3", "J4", "J6", "J7"] {
            f.hydrant(&format!("F{j}"), j, Some(1000.0));
        }
        f
    }
}

/// The reported answer against the ordinary solver: it passes, and the next flow up by the
/// promised accuracy does not (unless the cap binds). Error rows need a note. A reported
/// flow whose ordinary solve finds no steady state fails too: it is not verified.
fn random_disagreement(setup: &FireFlowSetup<'_>, res: &HydrantResult) -> Option<String> {
    let net = setup.network();
    let id = &net.hydrants[res.hydrant].id;
    let at = res.junction;
    if res.outcome == Outcome::Error {
        return error_row_without_note(id, res);
    }
    let q = res.available_m3s?;
    let violated_at_zero = res.notes.iter().any(|n| {
        matches!(
            n,
            HydrantNote::FloorViolatedWithoutFireFlow { .. }
                | HydrantNote::VelocityExceededWithoutFireFlow { .. }
        )
    });
    if violated_at_zero {
        return meets(setup, at, 0.0).then(|| format!("{id}: 0 gpm passes after all"));
    }
    let gpm = q / M3S_PER_GPM;
    if !meets(setup, at, q) {
        return Some(format!(
            "{id}: reported {gpm:.1} gpm ({:?}): {}",
            res.limited_by,
            verdict(setup, at, q)
        ));
    }
    // Accurate to max(0.5 %, 1 gpm) means q ≥ exact − max(0.005·exact, 1 gpm), so the exact
    // limit is at most max(q/0.995, q + 1 gpm); 1e-4 more keeps the floor tolerance out of it.
    let absolute = promised_accuracy(0.0, net.units);
    let next = (q / 0.995).max(q + absolute) * (1.0 + 1e-4);
    let cap = setup.criteria.search_cap_m3s;
    // Where the failing flow above settles in other states (the note says so), flows in
    // between may settle either way, and the search reports the lower reading (safe side).
    let state_limited = res
        .notes
        .iter()
        .any(|n| matches!(n, HydrantNote::OtherStatesAbove { .. }));
    if res.limited_by != Some(LimitedBy::Cap)
        && !state_limited
        && next <= cap
        && clearly_meets(setup, at, next)
        && continues_to_pass(setup, at, q, next)
        && passes_throughout(&|f| meets(setup, at, q + f * (next - q)))
    {
        return Some(format!(
            "{id}: {:.1} gpm, above the reported {gpm:.1} gpm ({:?}) by the accuracy, passes; notes {:?}",
            next / M3S_PER_GPM,
            res.limited_by,
            res.notes
        ));
    }
    None
}

/// 10 cases from a fixed seed (see `netkit::seeded_config`), without a failure file.
fn config() -> ProptestConfig {
    ProptestConfig {
        failure_persistence: None,
        ..netkit::seeded_config(10, 0x7665_7269)
    }
}

/// Every hydrant's answer on `files` against the ordinary solver (`random_disagreement`), with
/// the common-practice criteria. A max-day state the solver cannot find is rejected as a case
/// when `max_day_required` is false, and fails the property when it is true.
fn answers_resolve(files: NetFiles, max_day_required: bool) -> Result<(), TestCaseError> {
    answers_resolve_under(
        files,
        &|net| shipped_criteria("common-practice-us.toml", net),
        max_day_required,
    )
}

/// [`answers_resolve`] with the criteria that `criteria` makes for the loaded network.
fn answers_resolve_under(
    files: NetFiles,
    criteria: &dyn Fn(&Network) -> Criteria,
    max_day_required: bool,
) -> Result<(), TestCaseError> {
    let net = files.load();
    let criteria = criteria(&net);
    let hydraulics = Hydraulics::new(&net).expect("prepare");
    let setup = FireFlowSetup::new(&hydraulics, &criteria);
    if max_day_required {
        prop_assert!(setup.is_ok(), "max-day: {:?}", setup.err());
    } else {
        prop_assume!(setup.is_ok(), "max-day: {:?}", setup.err());
    }
    let setup = setup.expect("max-day");
    let failures: Vec<String> = check_all(&setup, 1)
        .iter()
        .filter_map(|r| random_disagreement(&setup, r))
        .collect();
    prop_assert!(failures.is_empty(), "\n{}", failures.join("\n"));
    Ok(())
}

proptest! {
    #![proptest_config(config())]

    #[test]
    fn answers_on_networks_with_pumps_and_valves_resolve(n in controlled_net()) {
        // Common practice, no source: the method's promise (docs/fire-flow-method.md §2) that
        // the answer is a verified flow, accurate to max(0.5 %, 1 gpm). A max-day state the
        // solver cannot find makes the whole check an error, before any search: not this
        // property's concern.
        answers_resolve(n.files(), false)?;
    }

    #[test]
    fn answers_on_darcy_weisbach_networks_with_pumps_and_valves_resolve(
        n in controlled_net(),
        rougher in 0.5..2.0_f64,
    ) {
        // Common practice, no source: as above, with every pipe under Darcy-Weisbach, so that
        // pipes a fire flow wakes from near zero pass through the laminar and transition laws.
        answers_resolve(darcy_weisbach(n.files(), rougher), false)?;
    }

    #[test]
    fn answers_on_si_networks_with_pumps_and_valves_resolve(n in controlled_net()) {
        // Common practice, no source: as above, the same networks written in SI units and
        // checked with criteria/common-practice-si.toml (accuracy max(0.5 %, 0.1 L/s)).
        let si = |net: &Network| shipped_criteria("common-practice-si.toml", net);
        answers_resolve_under(in_si(n.files()), &si, false)?;
    }

    #[test]
    fn answers_on_networks_with_pumps_and_valves_under_a_velocity_limit_resolve(
        n in controlled_net(),
        limit_ft_s in 5.0..15.0_f64,
    ) {
        // Common practice, no source: as above, with a velocity limit in every pipe as well as
        // the 20 psi floor (1,000 gpm required, 8,000 gpm cap, as the shipped criteria).
        let velocity = |net: &Network| {
            netkit::criteria_with_limits(net, 20.0, 8000.0, 1000.0, "system", &[], limit_ft_s)
        };
        answers_resolve_under(n.files(), &velocity, false)?;
    }

    #[test]
    fn answers_on_networks_with_hydrant_leads_resolve(
        n in controlled_net(),
        leads in leads(),
        units in prop::sample::select(vec!["us", "si", "darcy-weisbach"]),
    ) {
        // Common practice, no source: as above, with leads on the hydrants (each hydrant's own
        // pressure taken after its lead's loss, docs/fire-flow-method.md "Laterals"), in US
        // units, in SI units, and with Darcy-Weisbach pipes and leads.
        let files = with_leads(n.files(), &leads);
        match units {
            "si" => {
                let si = |net: &Network| shipped_criteria("common-practice-si.toml", net);
                answers_resolve_under(in_si(files), &si, false)?;
            }
            "darcy-weisbach" => answers_resolve(darcy_weisbach(files, 1.0), false)?,
            _ => answers_resolve(files, false)?,
        }
    }
}

/// `files` (US units) rewritten in SI units: the same network, every number converted by the
/// factors of docs/network-format.md (ft → m, in → mm, gpm → L/s, psi → kPa).
fn in_si(files: NetFiles) -> NetFiles {
    const FT: f64 = M_PER_FT;
    const IN: f64 = M_PER_IN * 1000.0;
    const GPM: f64 = M3S_PER_GPM * 1000.0;
    let convert = |rows: &mut Vec<String>, factor_of: &dyn Fn(usize, &[&str]) -> f64| {
        for row in rows.iter_mut() {
            let cells: Vec<&str> = row.split(',').collect();
            let out: Vec<String> = cells
                .iter()
                .enumerate()
                .map(|(k, cell)| match cell.parse::<f64>() {
                    Ok(x) if k > 0 => format!("{}", x * factor_of(k, &cells)),
                    _ => cell.to_string(),
                })
                .collect();
            *row = out.join(",");
        }
    };
    let mut si = files;
    si.units = "si";
    // junctions: id, elevation, demand, zone
    convert(&mut si.junctions, &|k, _| [1.0, FT, GPM][k.min(2)]);
    // sources: id, kind, grade
    convert(&mut si.sources, &|_, _| FT);
    // pipes: id, from, to, length, diameter, roughness (C), minor loss, status
    convert(&mut si.pipes, &|k, _| match k {
        3 => FT,
        4 => IN,
        _ => 1.0,
    });
    // pumps: id, from, to, shutoff head, design flow, design head, runout flow, runout head, speed
    convert(&mut si.pumps, &|k, _| match k {
        3 | 5 | 7 => FT,
        4 | 6 => GPM,
        _ => 1.0,
    });
    // valves: id, from, to, kind, diameter, setting (psi or gpm), minor loss, status
    convert(&mut si.valves, &|k, cells| match (k, cells[3]) {
        (4, _) => IN,
        (5, "prv" | "psv") => KPA_PER_PSI,
        (5, "fcv") => GPM,
        _ => 1.0,
    });
    // hydrants: id, junction, required flow; leads: length, diameter, roughness (C)
    convert(&mut si.hydrants, &|_, _| GPM);
    for lead in &mut si.leads {
        let cells: Vec<&str> = lead.split(',').collect();
        if let [length, diameter, c] = cells[..] {
            if let (Ok(l), Ok(d)) = (length.parse::<f64>(), diameter.parse::<f64>()) {
                *lead = format!("{},{},{c}", l * FT, d * IN);
            }
        }
    }
    si
}

/// `files` with a lead on each hydrant that `leads` gives one ((length ft, diameter in,
/// Hazen-Williams C, or the default C 100), in the order the hydrants were added).
fn with_leads(mut files: NetFiles, leads: &[Option<(f64, f64, Option<f64>)>]) -> NetFiles {
    for (row, lead) in files.leads.iter_mut().zip(leads) {
        if let Some((length, diameter, c)) = lead {
            let c = c.map(|c| c.to_string()).unwrap_or_default();
            *row = format!("{length},{diameter},{c}");
        }
    }
    files
}

/// Up to five hydrant leads: 10-150 ft of 4-8 in, C 80-130 or the default.
fn leads() -> impl Strategy<Value = Vec<Option<(f64, f64, Option<f64>)>>> {
    let lead = (
        10.0..150.0_f64,
        prop::sample::select(vec![4.0, 6.0, 8.0]),
        prop::option::of(80.0..130.0_f64),
    );
    prop::collection::vec(prop::option::weighted(0.7, lead), 5)
}

/// `files` with Darcy-Weisbach pipes: each Hazen-Williams C of 80-130 becomes an absolute
/// roughness of 0.0001-0.0101 in (smooth plastic to old iron, roughly), times `rougher`.
fn darcy_weisbach(mut files: NetFiles, rougher: f64) -> NetFiles {
    files.headloss = "darcy-weisbach";
    for row in &mut files.pipes {
        let mut cells: Vec<String> = row.split(',').map(str::to_string).collect();
        let c: f64 = cells[5].parse().expect("a C factor");
        cells[5] = format!("{}", rougher * (0.0001 + (130.0 - c).max(0.0) * 0.0002));
        *row = cells.join(",");
    }
    // Leads: the same conversion, or the Darcy-Weisbach default where no C was given.
    for lead in &mut files.leads {
        let mut cells: Vec<String> = lead.split(',').map(str::to_string).collect();
        if let Ok(c) = cells[2].parse::<f64>() {
            cells[2] = format!("{}", rougher * (0.0001 + (130.0 - c).max(0.0) * 0.0002));
            *lead = cells.join(",");
        }
    }
    files
}

// 5. Controls that change state as the fire flow rises: the first crossing.

#[test]
fn first_crossing_below_controls_that_change_state() {
    // A hydrant in a PRV-fed zone that a booster pump also feeds once the zone's grade falls
    // below the pump's shutoff grade: R1 (950 ft) → 12-in main → A (elevation 820 ft, high
    // ground) → PRV (50 psi) → B (750 ft) → 8-in → H (745 ft); suction reservoir RS (760 ft) →
    // pump (shutoff 100 ft) → B. As the fire flow rises the PRV goes wide open and the pump
    // starts. Reference: a brute-force scan with the ordinary solver on a 5 gpm grid up to
    // 4000 gpm (common practice, no source): the reported flow must lie at or below the start
    // of the first failing window, and within the promised accuracy of it.
    // The scan finds no flow that passes again above the first failure, here or in the other
    // arrangements tried: every element law of the model (pipes, pumps, check valves, and the
    // PRV and PSV rules) passes a flow that rises with its upstream head and falls with its
    // downstream head, and then heads fall monotonically as any demand rises (common practice,
    // no source). So this case checks the first crossing below state changes; a failing
    // window, should a model change create one, is covered by the same assertion.
    let mut f = NetFiles::us_hw();
    f.max_day(1.5)
        .reservoir("R1", 950.0)
        .reservoir("RS", 800.0)
        .junction("A", 780.0, 50.0)
        .junction("B", 750.0, 50.0)
        .junction("H", 745.0, 20.0)
        .junction("S", 740.0, 0.0)
        .pipe("MAIN", "R1", "A", 6000.0, 12.0, 110.0)
        .valve("PRV", "A", "B", "prv", 10.0, 50.0, 3.0)
        .pipe("LAT", "B", "H", 800.0, 10.0, 110.0)
        .pipe("SUC", "RS", "S", 50.0, 12.0, 120.0)
        .pump("PU", "S", "B", 60.0, (800.0, 45.0), (1300.0, 27.0), 1.0)
        .hydrant("FH", "H", Some(1500.0));
    let net = f.load();
    let criteria = shipped_criteria("common-practice-us.toml", &net);
    let hydraulics = Hydraulics::new(&net).expect("prepare");
    let setup = FireFlowSetup::new(&hydraulics, &criteria).expect("max-day");
    let at = net.node_by_id("H").expect("H");
    let step = 5.0 * M3S_PER_GPM;
    let mut first_fail = None;
    let mut recovers_at = None;
    let mut states = Vec::new();
    let mut q = 0.0;
    while q <= 4000.0 * M3S_PER_GPM {
        let verdict = ordinary(&setup, at, q);
        let passes = matches!(&verdict, Ok((_, c)) if c.feasible());
        if let Ok((sol, _)) = &verdict {
            if states.last() != Some(&sol.states) {
                states.push(sol.states.clone());
            }
        }
        match (first_fail, passes) {
            (None, false) => first_fail = Some(q),
            (Some(_), true) if recovers_at.is_none() => recovers_at = Some(q),
            _ => {}
        }
        q += step;
    }
    let first_fail = first_fail.expect("the floor fails within the scan");
    eprintln!(
        "first failing flow {:.0} gpm; passes again at {:?} gpm; {} sets of states",
        first_fail / M3S_PER_GPM,
        recovers_at.map(|q| (q / M3S_PER_GPM).round()),
        states.len()
    );
    assert!(
        states.len() >= 3,
        "the PRV and the pump should change state below the limit"
    );
    let res = check_all(&setup, 1).pop().expect("one hydrant");
    eprintln!("{:?}, notes {:?}", res.limited_by, res.notes);
    let got = res.available_m3s.expect("available");
    let last_pass = first_fail - step;
    assert!(
        got <= first_fail && got >= last_pass - promised_accuracy(last_pass, net.units),
        "available {:.1} gpm, scan: passes at {:.0}, fails at {:.0} gpm",
        got / M3S_PER_GPM,
        last_pass / M3S_PER_GPM,
        first_fail / M3S_PER_GPM
    );
}

// 6. Random small networks with a zone behind two PRVs and a PSV (US units).

/// A looped main (R1 → M1; M1-M2-M3-M4) and a looped zone 40 ft lower (Z1-Z2-Z3-Z4), fed by
/// a PRV from M2 into Z1, by a second PRV (or a plain pipe) from M4 into Z3, and, when drawn,
/// by a PSV from M3 into Z2; when drawn, a plain pipe from Z4 back to M1 joins the zone to
/// the main. Hydrants at M2, M3 and every zone junction.
#[derive(Clone, Debug)]
struct ZoneNet {
    grade_ft: f64,
    elevations_ft: Vec<f64>,
    demands_gpm: Vec<f64>,
    /// (length ft, diameter in, C) of the ten pipes, in the order of `files`.
    pipes: Vec<(f64, f64, f64)>,
    prv_a_psi: f64,
    prv_b_psi: Option<f64>,
    psv_psi: Option<f64>,
    back_pipe: bool,
}

fn zone_net() -> impl Strategy<Value = ZoneNet> {
    let (grade, elevations, demands, pipes) = grade_junctions_pipes(10);
    (
        grade,
        elevations,
        demands,
        pipes,
        40.0..80.0_f64,
        prop::option::of(40.0..80.0_f64),
        prop::option::of(25.0..60.0_f64),
        any::<bool>(),
    )
        .prop_map(
            |(
                grade_ft,
                elevations_ft,
                demands_gpm,
                pipes,
                prv_a_psi,
                prv_b_psi,
                psv_psi,
                back_pipe,
            )| {
                ZoneNet {
                    grade_ft,
                    elevations_ft,
                    demands_gpm,
                    pipes,
                    prv_a_psi,
                    prv_b_psi,
                    psv_psi,
                    back_pipe,
                }
            },
        )
}

impl ZoneNet {
    fn files(&self) -> NetFiles {
        let mut f = NetFiles::us_hw();
        f.max_day(1.5).reservoir("R1", self.grade_ft);
        let names = ["M1", "M2", "M3", "M4", "Z1", "Z2", "Z3", "Z4"];
        for (i, name) in names.iter().enumerate() {
            let zone_drop = if i >= 4 { 40.0 } else { 0.0 };
            f.junction(name, self.elevations_ft[i] - zone_drop, self.demands_gpm[i]);
        }
        let p = &self.pipes;
        let pipes = [
            ("P1", "R1", "M1"),
            ("P2", "M1", "M2"),
            ("P3", "M2", "M3"),
            ("P4", "M3", "M4"),
            ("P5", "M4", "M1"),
            ("P6", "Z1", "Z2"),
            ("P7", "Z2", "Z3"),
            ("P8", "Z3", "Z4"),
            ("P9", "Z4", "Z1"),
        ];
        for (k, (id, a, b)) in pipes.iter().enumerate() {
            f.pipe(id, a, b, p[k].0, p[k].1, p[k].2);
        }
        f.valve("PRVA", "M2", "Z1", "prv", 8.0, self.prv_a_psi, 3.0);
        match self.prv_b_psi {
            Some(s) => f.valve("PRVB", "M4", "Z3", "prv", 8.0, s, 3.0),
            None => f.pipe("PRVB", "M4", "Z3", 100.0, 6.0, 110.0),
        };
        if let Some(s) = self.psv_psi {
            f.valve("PSV", "M3", "Z2", "psv", 6.0, s, 3.0);
        }
        if self.back_pipe {
            f.pipe("PB", "Z4", "M1", p[9].0, p[9].1, p[9].2);
        }
        for j in ["M2", "M3", "Z1", "Z2", "Z3", "Z4"] {
            f.hydrant(&format!("F{j}"), j, Some(1000.0));
        }
        f
    }
}

proptest! {
    #![proptest_config(config())]

    #[test]
    fn answers_on_zones_behind_two_prvs_and_a_psv_resolve(n in zone_net()) {
        // Common practice, no source: the method's promise (docs/fire-flow-method.md §2), as
        // above. Unlike above, a max-day state the solver cannot find fails the property: on
        // the case that first failed here the switching rules cycled, and the state-enumeration
        // reference (tests/reference/valve_zone, network valve_two_prv) found one steady state.
        answers_resolve(n.files(), true)?;
    }
}

proptest! {
    #![proptest_config(config())]

    #[test]
    fn answers_on_zones_with_a_flow_control_valve_resolve(
        n in zone_net(),
        fcv_gpm in 50.0..800.0_f64,
    ) {
        // Common practice, no source: as above, with a flow control valve from M1 into Z4 too.
        // Its first failing case (seed 2, 3,000 cases) reported 0 gpm at every hydrant: the
        // max-day controls did not settle where the state-enumeration method
        // (tests/reference/valve_zone's script) finds one steady state, and after the fix the
        // answers lie 0.10-0.15 % below that method's (tests/data/valve_fcv). Seeds 5151 and
        // 60606 at 60,000 cases found three more (valve_fcv_reopen, valve_fcv_open,
        // valve_prv_band; tests/fireflow_reference.rs).
        let mut files = n.files();
        files.valve("FCV", "M1", "Z4", "fcv", 6.0, fcv_gpm, 3.0);
        answers_resolve(files, true)?;
    }
}

proptest! {
    #![proptest_config(config())]

    #[test]
    fn answers_on_zones_checked_zone_by_zone_resolve(
        n in zone_net(),
        fcv_gpm in prop::option::of(50.0..800.0_f64),
    ) {
        // Common practice, no source: as above, with the floor kept only in the hydrant's own
        // pressure zone (`scope = "zone"`): the M junctions form one zone, the Z junctions
        // (behind the valves) another.
        let mut files = n.files();
        if let Some(q) = fcv_gpm {
            files.valve("FCV", "M1", "Z4", "fcv", 6.0, q, 3.0);
        }
        for row in &mut files.junctions {
            let zone = if row.starts_with('Z') { "low" } else { "main" };
            row.push_str(zone);
        }
        let by_zone =
            |net: &Network| netkit::criteria_with_limits(net, 20.0, 8000.0, 1000.0, "zone", &[], 0.0);
        answers_resolve_under(files, &by_zone, true)?;
    }
}

#[test]
fn velocity_limited_answers_hold_their_accuracy_beside_a_check_valve_source() {
    // Common practice, no source: the velocity property above, on its first failing case. A
    // 6-in main from R1 (900 ft) carries every hydrant's fire flow until it reaches 6.28 ft/s
    // (553.75 gpm by continuity, V·πD²/4); a second source behind a check valve stays closed.
    // The answers were 550.3 gpm while 553.2 gpm passes (0.52 % low, beyond the promised
    // max(0.5 %, 1 gpm)): a velocity within the flow tolerance's share of the limit was
    // judged failing. Velocities that close are now judged at a tighter flow tolerance.
    let p = |l: f64| (l, 6.0, 80.0);
    let n = ControlledNet {
        grade_ft: 900.0,
        elevations_ft: vec![740.0; 8],
        demands_gpm: vec![0.0; 8],
        pipes: std::iter::once(p(510.8771270129696))
            .chain(std::iter::repeat_n(p(300.0), 7))
            .collect(),
        pump: None,
        prv_psi: None,
        psv_psi: None,
        check_grade_ft: Some(850.0),
    };
    let limit = |net: &Network| {
        netkit::criteria_with_limits(net, 20.0, 8000.0, 1000.0, "system", &[], 6.283542921396893)
    };
    if let Err(e) = answers_resolve_under(n.files(), &limit, true) {
        panic!("{e}");
    }
}

#[test]
fn group_answers_hold_where_a_regulating_valve_moves_every_step() {
    // Common practice, no source: the group property on its case at seed 14 (60,000 cases).
    // FM2 and FZ1 with the equal-residual split (FM2 draws nothing): the answer, 2217.7 gpm at
    // FZ1, passed at the search's tolerance from both starts with 0.014 kPa to spare, while
    // the steady solve put M2 0.008 kPa below the floor. Its solve had ended on a chord step
    // of 1.3 mm whose ratio to the step before (0.11, a step after which PRVB's flow had
    // moved) was taken for the rate: 3.5 mm of head error remained. Such a ratio is no
    // longer trusted.
    let p = |l: f64, d: f64, c: f64| (l, d, c);
    let n = ZoneNet {
        grade_ft: 908.8597250698408,
        elevations_ft: vec![
            740.0,
            770.308879549988,
            740.0,
            740.0,
            746.0721946080495,
            771.431484292246,
            753.3294640821273,
            740.0,
        ],
        demands_gpm: vec![
            70.2820676565131,
            30.19659278597012,
            31.012257734717934,
            53.255690931737476,
            35.08962600572458,
            61.97081002244022,
            12.88572348376787,
            20.75840886727948,
        ],
        pipes: vec![
            p(477.302295863578, 10.0, 103.97266489406962),
            p(680.2612381483482, 6.0, 106.51874739605147),
            p(1113.3808889121146, 10.0, 111.0155376731108),
            p(517.139639092672, 8.0, 123.03679205074666),
            p(1062.1638317325933, 10.0, 108.60294824398616),
            p(965.6575960415564, 10.0, 106.92424130158992),
            p(1341.8687451214187, 6.0, 80.0),
            p(1110.515890922567, 6.0, 94.59300348844211),
            p(1708.6306532091023, 12.0, 103.9532128453298),
            p(300.0, 6.0, 80.0),
        ],
        prv_a_psi: 61.87342186898442,
        prv_b_psi: Some(40.10599193634413),
        psv_psi: None,
        back_pipe: false,
    };
    if let Err(e) = group_answers_resolve(n.files(), &[vec![0, 2]]) {
        panic!("{e}");
    }
    // The solve behind it: at the search's tolerance (2e-4 m) from the max-day state, every
    // head within ten times that tolerance of the steady solve (1e-6 m).
    let net = n.files().load();
    let criteria = shipped_criteria("common-practice-us.toml", &net);
    let hydraulics = Hydraulics::new(&net).expect("prepare");
    let setup = FireFlowSetup::new(&hydraulics, &criteria).expect("max-day");
    let extra = [(net.node_by_id("Z1").expect("Z1"), 0.13991367748176278)];
    let request = SolveRequest {
        demand_factor: setup.demand_factor,
        extra_demand: &extra,
        fixed_head: None,
    };
    let solve = |tolerance: Tolerance| {
        let mut ws = hydraulics.workspace();
        ws.set_tolerance(tolerance);
        hydraulics
            .solve(&mut ws, &request, &setup.base)
            .expect("a steady state")
    };
    let (search, steady) = (solve(Tolerance::SEARCH), solve(Tolerance::STEADY));
    let worst = search
        .heads_m
        .iter()
        .zip(&steady.heads_m)
        .map(|(a, b)| (a - b).abs())
        .fold(0.0, f64::max);
    assert!(
        worst < 10.0 * Tolerance::SEARCH.head_m,
        "head error {worst} m"
    );
}

#[test]
fn answers_hold_where_a_failing_state_overlaps_the_passing_one_at_a_change() {
    // Common practice, no source: the property above, on its case at seed 4 (60,000 cases).
    // Around 948.13 gpm at J2 two steady states overlap for a few thousandths of a gpm: PRV
    // closed and PSV open (J7 well above the floor), and PRV and PSV regulating (J7 11.2 kPa
    // below it). The answer, 948.137 gpm, passed from the static and cold starts at the
    // search's tolerance, but a cold start at the steady tolerance settled in the failing
    // state. The state-enumeration reference (tests/reference/valve_zone's script, run on
    // this network by hand) puts the first crossing at 948.135 gpm. The answer is now also
    // solved from the failing state above it, and steps down: 945.8 gpm.
    let p = |l: f64, d: f64, c: f64| (l, d, c);
    let n = ControlledNet {
        grade_ft: 978.5406648194086,
        elevations_ft: vec![
            740.0,
            788.8354974904837,
            740.0,
            740.0,
            740.0,
            740.1885601804855,
            792.4100828869224,
            740.0,
        ],
        demands_gpm: vec![
            21.39441600579416,
            46.27309183416745,
            27.892076530980674,
            61.27675459099774,
            16.82096354457263,
            33.27041096107936,
            64.96358279047183,
            22.861372186510863,
        ],
        pipes: vec![
            p(1129.5653113236565, 6.0, 115.41359560239479),
            p(1708.022185086209, 12.0, 98.80736967014622),
            p(1489.2651011628395, 6.0, 109.98497303501208),
            p(1482.953110783125, 8.0, 85.27929417252331),
            p(816.1481100027462, 10.0, 81.60963869683805),
            p(492.26826654892386, 12.0, 82.12693345665254),
            p(736.6561812512409, 10.0, 99.16345050788243),
            p(1347.553078550936, 8.0, 81.81772028538964),
        ],
        pump: None,
        prv_psi: Some(41.00433009718708),
        psv_psi: Some(30.38340706983905),
        check_grade_ft: Some(871.8938176720447),
    };
    let result = answers_resolve(n.files(), true);
    assert!(result.is_ok(), "{result:?}");
}

// 7. Groups of hydrants flowing together (`fireflow::combined_available_flow`).

/// A group's reported total against the ordinary solver, as [`random_disagreement`] does for
/// one hydrant: the reported shares pass from every start, and with the even split the next
/// total up by the promised accuracy does not (unless the cap binds or the notes say that
/// other states or a failing window lie above).
fn group_disagreement(setup: &FireFlowSetup<'_>, r: &GroupResult) -> Option<String> {
    let net = setup.network();
    let ids: Vec<&str> = r
        .hydrants
        .iter()
        .map(|&h| net.hydrants[h].id.as_str())
        .collect();
    let total = r.total_m3s?;
    let junctions: Vec<usize> = r
        .hydrants
        .iter()
        .map(|&h| net.hydrants[h].junction)
        .collect();
    let at = |shares: &[f64]| -> Vec<(usize, f64)> {
        junctions
            .iter()
            .copied()
            .zip(shares.iter().copied())
            .collect()
    };
    if r.notes.iter().any(|n| {
        matches!(
            n,
            GroupNote::FloorViolatedWithoutFireFlow { .. }
                | GroupNote::VelocityExceededWithoutFireFlow { .. }
        )
    }) {
        let nothing = at(&vec![0.0; junctions.len()]);
        return meets_with(setup, &nothing).then(|| format!("{ids:?}: 0 gpm passes after all"));
    }
    let gpm = total / M3S_PER_GPM;
    let answer = at(&r.shares_m3s);
    if !meets_with(setup, &answer) {
        let said = match ordinary_with(setup, &answer) {
            Ok((_, c)) => format!(
                "{:.3} kPa below the floor at {}",
                -c.pressure_margin_kpa, net.nodes[c.pressure_junction].id
            ),
            Err(e) => format!("does not solve: {e}"),
        };
        return Some(format!(
            "{ids:?} ({}): reported {gpm:.1} gpm, shares {:?}: {said}",
            r.split.name(),
            r.shares_m3s
        ));
    }
    let above_is_unsure = r.notes.iter().any(|n| {
        matches!(
            n,
            GroupNote::OtherStatesFail { .. }
                | GroupNote::NonMonotone { .. }
                | GroupNote::SolveFailedAbove { .. }
        )
    });
    let cap = setup.criteria.search_cap_m3s * junctions.len() as f64;
    let next = (total / 0.995).max(total + promised_accuracy(0.0, net.units)) * (1.0 + 1e-4);
    if r.split != Split::Even
        || r.limited_by == Some(LimitedBy::Cap)
        || above_is_unsure
        || next > cap
    {
        return None;
    }
    let even = at(&vec![next / junctions.len() as f64; junctions.len()]);
    let between = |f: f64| {
        let t = total + f * (next - total);
        meets_with(
            setup,
            &at(&vec![t / junctions.len() as f64; junctions.len()]),
        )
    };
    (meets_with_by(setup, &even, &clears)
        && continues_to_pass_with(setup, &answer, &even)
        && passes_throughout(&between))
    .then(|| {
        format!(
            "{ids:?} (even): {:.1} gpm, above the reported {gpm:.1} gpm ({:?}) by the \
                 accuracy, passes; notes {:?}",
            next / M3S_PER_GPM,
            r.limited_by,
            r.notes
        )
    })
}

/// Every group in `groups` (hydrant indices) of the network `files`, with both splits, against
/// the ordinary solver (`group_disagreement`), with the common-practice criteria. A max-day
/// state the solver cannot find rejects the case.
fn group_answers_resolve(files: NetFiles, groups: &[Vec<usize>]) -> Result<(), TestCaseError> {
    group_answers_resolve_under(
        files,
        &|net| shipped_criteria("common-practice-us.toml", net),
        groups,
    )
}

/// [`group_answers_resolve`] with the criteria that `criteria` makes for the loaded network.
fn group_answers_resolve_under(
    files: NetFiles,
    criteria: &dyn Fn(&Network) -> Criteria,
    groups: &[Vec<usize>],
) -> Result<(), TestCaseError> {
    let net = files.load();
    let criteria = criteria(&net);
    let hydraulics = Hydraulics::new(&net).expect("prepare");
    let setup = FireFlowSetup::new(&hydraulics, &criteria);
    prop_assume!(setup.is_ok(), "max-day: {:?}", setup.err());
    let setup = setup.expect("max-day");
    let mut ws = hydraulics.workspace();
    let mut failures = Vec::new();
    for group in groups {
        for split in [Split::Even, Split::EqualResidual] {
            let r = combined_available_flow(&setup, &mut ws, group, split)
                .map_err(|e| TestCaseError::fail(format!("{group:?}: {e}")))?;
            failures.extend(group_disagreement(&setup, &r));
        }
    }
    prop_assert!(failures.is_empty(), "\n{}", failures.join("\n"));
    Ok(())
}

/// Two or three distinct hydrants out of `n`.
fn hydrant_group(n: usize) -> impl Strategy<Value = Vec<usize>> {
    prop::sample::subsequence((0..n).collect::<Vec<_>>(), 2..=3)
}

proptest! {
    #![proptest_config(config())]

    #[test]
    fn group_answers_on_networks_with_pumps_and_valves_resolve(
        n in controlled_net(),
        group in hydrant_group(5),
    ) {
        // Common practice, no source: a group's total carries the single hydrant's promise
        // (docs/fire-flow-method.md §2a): verified by an ordinary solve at the reported shares,
        // accurate to max(0.5 %, 1 gpm).
        group_answers_resolve(n.files(), &[group])?;
    }

    #[test]
    fn group_answers_under_a_velocity_limit_resolve(
        n in controlled_net(),
        group in hydrant_group(5),
        limit_ft_s in 5.0..15.0_f64,
    ) {
        // Common practice, no source: as above, with a velocity limit in every pipe.
        let velocity = |net: &Network| {
            netkit::criteria_with_limits(net, 20.0, 8000.0, 1000.0, "system", &[], limit_ft_s)
        };
        group_answers_resolve_under(n.files(), &velocity, &[group])?;
    }

    #[test]
    fn group_answers_with_hydrant_leads_resolve(
        n in controlled_net(),
        leads in leads(),
        group in hydrant_group(5),
    ) {
        // Common practice, no source: as above, with leads on the hydrants.
        group_answers_resolve(with_leads(n.files(), &leads), &[group])?;
    }

    #[test]
    fn group_answers_on_zones_behind_valves_resolve(
        n in zone_net(),
        fcv_gpm in prop::option::of(50.0..800.0_f64),
        group in hydrant_group(6),
    ) {
        // Common practice, no source: as above, on the zones of the single-hydrant properties,
        // with or without their flow control valve from M1 into Z4.
        let mut files = n.files();
        if let Some(q) = fcv_gpm {
            files.valve("FCV", "M1", "Z4", "fcv", 6.0, q, 3.0);
        }
        group_answers_resolve(files, &[group])?;
    }
}

/// A case of `answers_on_networks_with_hydrant_leads_resolve`: a 4-in lead of 78.5 ft on FJ4,
/// whose loss rises faster with the flow than the junction's head falls. Holding the junction
/// at the loss of the flow last drawn oscillated (713 → 503 → 607 → 560 gpm) and stopped
/// off the limit, and the answer came out 0.5 % short (559.8 gpm where 562.6 gpm passes); the
/// secant steps settle it (common practice, no source: the method's promised accuracy).
#[test]
fn answers_hold_beside_a_lead_whose_loss_outruns_the_junction_head() {
    let n = ControlledNet {
        grade_ft: 900.0,
        elevations_ft: vec![740.0; 8],
        demands_gpm: vec![0.0, 0.0, 49.02, 41.59, 32.18, 68.19, 24.70, 54.28],
        pipes: vec![
            (1864.87, 8.0, 80.0),
            (300.0, 6.0, 80.0),
            (300.0, 6.0, 80.0),
            (300.0, 6.0, 129.72),
            (1480.19, 10.0, 84.83),
            (1684.83, 6.0, 111.52),
            (1755.08, 8.0, 102.64),
            (2437.48, 6.0, 84.90),
        ],
        pump: None,
        prv_psi: Some(72.38),
        psv_psi: Some(54.07),
        check_grade_ft: None,
    };
    let leads = [
        Some((26.83, 6.0, None)),
        Some((94.21, 8.0, Some(85.68))),
        Some((78.51, 4.0, None)),
        Some((64.53, 8.0, None)),
        Some((149.74, 8.0, None)),
    ];
    let si = |net: &Network| shipped_criteria("common-practice-si.toml", net);
    answers_resolve_under(in_si(with_leads(n.files(), &leads)), &si, true)
        .unwrap_or_else(|e| panic!("{e}"));
}

/// A case of the same property: FJ6, with a 110 ft 4-in lead, in the zone behind the PRV,
/// where the flow drawn with the junction held jumps with the head held (from 0 to 1,354
/// gpm), so the held solves find no fixed point. Its last one placed a flow 0.5 % short of
/// the limit; the flow is now left to the ordinary search (common practice, no source).
#[test]
fn answers_hold_behind_a_regulating_valve_beside_a_lead() {
    let n = ControlledNet {
        grade_ft: 900.0,
        elevations_ft: vec![740.0; 8],
        demands_gpm: vec![0.0; 8],
        pipes: vec![
            (300.0, 6.0, 80.0),
            (1498.28, 10.0, 129.68),
            (1261.47, 8.0, 80.0),
            (300.0, 6.0, 80.0),
            (300.0, 6.0, 80.0),
            (906.25, 6.0, 80.0),
            (300.0, 6.0, 80.0),
            (300.0, 6.0, 80.0),
        ],
        pump: None,
        prv_psi: Some(40.0),
        psv_psi: None,
        check_grade_ft: None,
    };
    let leads = [None, None, None, Some((109.94, 4.0, None)), None];
    answers_resolve(with_leads(n.files(), &leads), true).unwrap_or_else(|e| panic!("{e}"));
}

/// A case of the same property (seed 71, 60,000 cases): FJ7 on 17.6 ft of 6-in lead, past the
/// flow at which the PRV starts regulating. Its held solves counted as settled by a margin
/// worked out from the supply curve's slope at the required flow, 40 times steeper than the
/// junction's head near the limit, and the answer came out 0.5 % short (1,092.7 gpm where
/// 1,098.3 gpm passes); settling now counts on slopes measured between held solves (common
/// practice, no source).
#[test]
fn answers_hold_where_a_regulating_valve_flattens_the_head_beside_a_lead() {
    let n = ControlledNet {
        grade_ft: 938.504,
        elevations_ft: vec![740.0, 740.0, 740.0, 740.0, 740.0, 748.269, 794.095, 740.0],
        demands_gpm: vec![0.0, 35.406, 0.0, 24.222, 0.0, 23.636, 22.347, 29.852],
        pipes: vec![
            (2382.872, 10.0, 80.0),
            (300.0, 8.0, 116.4),
            (300.0, 6.0, 80.0),
            (300.0, 6.0, 80.0),
            (2468.11, 6.0, 80.0),
            (751.951, 10.0, 112.936),
            (2187.907, 8.0, 112.007),
            (300.0, 6.0, 80.0),
        ],
        pump: None,
        prv_psi: Some(40.999),
        psv_psi: None,
        check_grade_ft: Some(872.736),
    };
    let leads = [None, None, None, None, Some((17.559, 6.0, None))];
    answers_resolve(with_leads(n.files(), &leads), true).unwrap_or_else(|e| panic!("{e}"));
}

/// A case of the same property (seed 82, 60,000 cases, SI units): FJ7 on 94 ft of 4-in lead,
/// fed through the PSV, with no estimate from the required flow (it fails there). Its second
/// held solve counted as settled on the slope measured between the first two (17,800 m per
/// m³/s over 12.6 m of head held, where the PSV throttles), many times steeper than the
/// junction's head near the limit, and the answer came out 0.51 % short (781.8 gpm where 785.8
/// gpm passes). Held solves for leads now settle on the held solve's own head tolerance
/// (common practice, no source).
#[test]
fn answers_hold_where_a_sustaining_valve_steepens_the_head_beside_a_lead() {
    let n = ControlledNet {
        grade_ft: 943.521,
        elevations_ft: vec![740.0, 789.085, 740.0, 740.0, 740.0, 740.0, 798.277, 740.0],
        demands_gpm: vec![20.334, 37.73, 68.22, 77.836, 16.385, 16.135, 41.715, 29.487],
        pipes: vec![
            (2334.241, 8.0, 119.855),
            (1009.903, 6.0, 85.181),
            (300.0, 10.0, 80.0),
            (1450.851, 10.0, 84.208),
            (2090.463, 12.0, 97.933),
            (1752.241, 6.0, 80.0),
            (622.945, 10.0, 80.0),
            (1740.674, 6.0, 101.988),
        ],
        pump: None,
        prv_psi: None,
        psv_psi: Some(27.985),
        check_grade_ft: None,
    };
    let leads = [None, None, None, None, Some((94.417, 4.0, Some(114.963)))];
    let si = |net: &Network| shipped_criteria("common-practice-si.toml", net);
    answers_resolve_under(in_si(with_leads(n.files(), &leads)), &si, true)
        .unwrap_or_else(|e| panic!("{e}"));
}

/// A case of `answers_on_networks_with_hydrant_leads_resolve` (seed 82, 60,000 cases, US
/// units) found with the lead's held solve linearised in its flow: FJ2 behind the PSV, whose
/// state changes on the way to its limit; the answer came out 0.5 % short (989.8 gpm where
/// 994.9 gpm passes) (common practice, no source).
#[test]
fn answers_hold_where_a_sustaining_valve_closes_beside_a_lead() {
    let n = ControlledNet {
        grade_ft: 912.9332031798547,
        elevations_ft: vec![
            740.0,
            777.1003886248732,
            740.0,
            740.0,
            740.0,
            740.0,
            740.0,
            740.0,
        ],
        demands_gpm: vec![
            35.30478377343087,
            70.77043294396852,
            70.31281124909587,
            11.104874312212397,
            62.59955002957883,
            28.575252222251844,
            5.3633577929874505,
            32.35700230600989,
        ],
        pipes: vec![
            (1860.6526683972904, 10.0, 82.9221269471333),
            (2174.250714272917, 6.0, 85.72912892454866),
            (2295.2659857034505, 12.0, 84.17641755860069),
            (1415.9141827215508, 6.0, 107.57787676890435),
            (859.1315595491172, 6.0, 110.47197110289625),
            (300.0, 6.0, 80.0),
            (300.0, 6.0, 80.0),
            (2400.0593452082485, 10.0, 85.80178406386749),
        ],
        pump: None,
        prv_psi: None,
        psv_psi: Some(25.0),
        check_grade_ft: None,
    };
    let leads = [
        Some((40.58117413160738, 8.0, Some(124.71716969885337))),
        None,
        None,
        None,
        None,
    ];
    answers_resolve(with_leads(n.files(), &leads), false).unwrap_or_else(|e| panic!("{e}"));
}
