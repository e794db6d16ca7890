//! The search for one hydrant's available fire flow.
//!
//! 1. Static state: the shared max-day solution (no solve).
//! 2. One solve at the required flow: residual pressure, and a first bracket point.
//! 3. One solve with the hydrant's junction held at the floor pressure: the flow it draws is
//!    the hydrant-limited flow, exactly. If no other constraint fails there, that is the
//!    answer. When the supply curve fitted at the required flow reaches the floor well beyond
//!    the search cap (by [`CAP_FIRST_RATIO`]), the cap is verified first instead: if it passes
//!    it is the answer, and the held solve, which would place a flow far beyond it, is saved.
//! 4. Otherwise a safeguarded secant search between the largest flow known to pass and the
//!    smallest known to fail, on the binding constraint's margin modelled as A − K·Q^1.852 (the
//!    Hazen-Williams shape of a supply curve, which makes the secant nearly exact): each step
//!    probes just below and just above the estimate, so that two probes usually close the
//!    bracket to the required accuracy. Every answer is a flow verified by a full solve.
//! 5. With check valves, pumps or regulating valves whose state changed between static and
//!    fire conditions, flows below the answer are sampled to find an earlier crossing, and the
//!    flow at which each element changed state is located.

use super::{
    ConstraintCheck, FireFlowSetup, HydrantNote, HydrantResult, LimitedBy, Outcome,
    FLOOR_TOLERANCE_KPA,
};
use crate::hydraulics::{Solution, SolveError, SolveRequest, Tolerance, Workspace};
use crate::units::{UnitSystem, M3S_PER_GPM};

/// Exponent of the supply-curve model used by the secant step (Hazen-Williams, 1/0.54).
const SUPPLY_CURVE_EXPONENT: f64 = 1.852;
/// The cap is probed before the hydrant-limited flow when the supply-curve estimate of the
/// latter exceeds the cap by this factor. Measured on the 10k synthetic network (673 of 2,500
/// hydrants limited by the cap): 1.0 misdirects 209 hydrants whose held flow is below the cap,
/// 1.3 only 26, and from 1.2 to 1.5 the sweep's factorizations stay within 0.5 % of each other.
const CAP_FIRST_RATIO: f64 = 1.3;
/// Tolerance of a solve made only for its verdict at the cap: 0.05 m (0.07 psi) on the estimated
/// remaining head error, 0.005 m³/s on flows (which enter no verdict without velocity limits).
const VERDICT_TOLERANCE: Tolerance = Tolerance {
    head_m: 0.05,
    flow_m3s: 5.0e-3,
};
/// Pressure margin over the floor that a verdict at [`VERDICT_TOLERANCE`] needs to stand: 20
/// times the tolerance (0.05 m ≈ 0.49 kPa), about 1.4 psi.
const CLEAR_MARGIN_KPA: f64 = 10.0;
/// Relative accuracy of the available flow (0.5 %).
const RELATIVE_ACCURACY: f64 = 0.005;
/// Offset of a probe from the estimated root, as a fraction of the accuracy: two probes at
/// ± this offset close the bracket to half the accuracy when the estimate is good.
const PROBE_OFFSET: f64 = 0.25;
/// Probes allowed in the bracket search before it stops with the verified lower end.
const MAX_PROBES: u32 = 40;
/// Samples below the answer when controls changed state (first-crossing check).
const FIRST_CROSSING_SAMPLES: u32 = 8;
/// Bisection steps locating the flow at which an element changed state (1/32 of the range).
const STATE_CHANGE_STEPS: u32 = 5;
/// Elements whose state-change flow is located per hydrant.
const STATE_CHANGES_LOCATED: usize = 3;

/// A flow with its verified solution.
struct Point {
    q: f64,
    sol: Solution,
    check: ConstraintCheck,
}

struct Search<'s, 'a> {
    setup: &'s FireFlowSetup<'a>,
    ws: &'s mut Workspace,
    at: usize,
    solves: u32,
    iterations: u32,
    factorizations: u32,
}

impl Search<'_, '_> {
    /// A solve at fire flow `q`, to the tolerance of reported pressures.
    fn evaluate(&mut self, q: f64, start: &Solution) -> Result<Point, SolveError> {
        self.solve_at(q, start, Tolerance::SEARCH)
    }

    /// A solve at fire flow `q` whose use is to place a flow (bracket probes, samples).
    fn probe(&mut self, q: f64, start: &Solution) -> Result<Point, SolveError> {
        self.solve_at(q, start, Tolerance::BRACKET)
    }

    fn solve_at(
        &mut self,
        q: f64,
        start: &Solution,
        tolerance: Tolerance,
    ) -> Result<Point, SolveError> {
        self.ws.set_tolerance(tolerance);
        let extra = [(self.at, q)];
        let request = SolveRequest {
            demand_factor: self.setup.demand_factor,
            extra_demand: &extra,
            fixed_head: None,
        };
        self.solves += 1;
        let sol = self.setup.hydraulics.solve(self.ws, &request, start);
        if let Ok(s) = &sol {
            self.factorizations += s.factorizations;
            self.iterations += s.iterations;
        }
        let sol = sol?;
        let check = self.setup.constraints(&sol, self.at);
        Ok(Point { q, sol, check })
    }

    /// A solve at the cap whose only use is its verdict (pass or fail). Without velocity
    /// limits or controls, it is first made to [`VERDICT_TOLERANCE`]: if every constrained
    /// pressure clears the floor by [`CLEAR_MARGIN_KPA`], twenty times that tolerance, the
    /// verdict stands; otherwise the solve continues to the bracket tolerance.
    fn verify_cap(&mut self, cap: f64, start: &Solution) -> Result<Point, SolveError> {
        let criteria = self.setup.criteria;
        if criteria.max_velocity_m_per_s.is_some() || self.setup.has_controls {
            return self.probe(cap, start);
        }
        let coarse = self.solve_at(cap, start, VERDICT_TOLERANCE)?;
        if coarse.check.pressure_margin_kpa >= CLEAR_MARGIN_KPA {
            Ok(coarse)
        } else {
            self.probe(cap, &coarse.sol)
        }
    }

    /// Solves with the hydrant's junction held at the floor; returns the flow it draws.
    fn hydrant_limited(&mut self, start: &Solution) -> Result<Point, SolveError> {
        // The start is an extrapolation to a larger flow, where the pipes near the hydrant are
        // stiffer than in the last factorization: a fresh one serves the first step better.
        self.ws.forget_factor();
        self.ws.set_tolerance(Tolerance::BRACKET);
        let request = SolveRequest {
            demand_factor: self.setup.demand_factor,
            extra_demand: &[],
            fixed_head: Some((self.at, self.setup.floor_head_m(self.at))),
        };
        self.solves += 1;
        let sol = self.setup.hydraulics.solve(self.ws, &request, start);
        self.ws.set_tolerance(Tolerance::SEARCH);
        let sol = sol?;
        self.factorizations += sol.factorizations;
        self.iterations += sol.iterations;
        let q = sol.fixed_head_outflow_m3s.unwrap_or(0.0);
        let check = self.setup.constraints(&sol, self.at);
        Ok(Point { q, sol, check })
    }
}

/// Smallest flow difference the search resolves: 1 gpm or 0.1 L/s.
fn absolute_accuracy_m3s(units: UnitSystem) -> f64 {
    match units {
        UnitSystem::Us => M3S_PER_GPM,
        UnitSystem::Si => 1.0e-4,
    }
}

/// Which constraint a failing point violates: a junction's pressure or a pipe's velocity.
#[derive(Clone, Copy, PartialEq)]
enum Binding {
    Pressure(usize),
    Velocity(usize),
}

fn binding_of(check: &ConstraintCheck) -> Binding {
    if check.pressure_margin_kpa < -FLOOR_TOLERANCE_KPA {
        Binding::Pressure(check.pressure_junction)
    } else {
        match check.velocity {
            Some((_, link)) => Binding::Velocity(link),
            None => Binding::Pressure(check.pressure_junction),
        }
    }
}

fn margin(setup: &FireFlowSetup<'_>, sol: &Solution, binding: Binding) -> f64 {
    let net = setup.network();
    match binding {
        Binding::Pressure(j) => sol.pressure_kpa(net, j) - setup.criteria.residual_floor_kpa,
        Binding::Velocity(i) => {
            setup.criteria.max_velocity_m_per_s.unwrap_or(f64::INFINITY)
                - sol.velocity_m_per_s(net, i).abs()
        }
    }
}

/// Estimate of the flow where the binding margin reaches zero, interpolating the margin in
/// u = Q^n (n = 1.852 for pressures: the Hazen-Williams shape of a supply curve, in which the
/// margin is nearly linear; n = 1 for velocities): quadratic through three points when a third
/// is known, else linear; the bisection point when neither lands inside the bracket.
fn estimate_root(
    setup: &FireFlowSetup<'_>,
    lo: &Point,
    hi: &Point,
    third: Option<&Point>,
    binding: Binding,
) -> f64 {
    let n = match binding {
        Binding::Pressure(_) => SUPPLY_CURVE_EXPONENT,
        Binding::Velocity(_) => 1.0,
    };
    let inside = |q: f64| q.is_finite() && q > lo.q && q < hi.q;
    let (u0, m0) = (lo.q.powf(n), margin(setup, &lo.sol, binding));
    let (u1, m1) = (hi.q.powf(n), margin(setup, &hi.sol, binding));
    let linear = {
        let u = u0 + m0 * (u1 - u0) / (m0 - m1);
        if m0 > m1 && u > 0.0 {
            u.powf(1.0 / n)
        } else {
            f64::NAN
        }
    };
    if let Some(t) = third {
        let (u2, m2) = (t.q.powf(n), margin(setup, &t.sol, binding));
        if let Some(u) = quadratic_root(u0, m0, u1, m1, u2, m2) {
            let q = u.max(0.0).powf(1.0 / n);
            if inside(q) {
                return q;
            }
        }
    }
    if inside(linear) {
        linear
    } else {
        0.5 * (lo.q + hi.q)
    }
}

/// The root between u0 and u1 of the parabola through three points (m0 ≥ 0 > m1).
fn quadratic_root(u0: f64, m0: f64, u1: f64, m1: f64, u2: f64, m2: f64) -> Option<f64> {
    // Newton's divided differences: m(u) = m0 + d01 (u − u0) + d012 (u − u0)(u − u1).
    let d01 = (m1 - m0) / (u1 - u0);
    let d12 = (m2 - m1) / (u2 - u1);
    let d012 = (d12 - d01) / (u2 - u0);
    if !(d01.is_finite() && d012.is_finite()) {
        return None;
    }
    // m(u) = a u² + b u + c
    let a = d012;
    let b = d01 - d012 * (u0 + u1);
    let c = m0 - d01 * u0 + d012 * u0 * u1;
    let (lo, hi) = (u0.min(u1), u0.max(u1));
    if a.abs() < 1e-300 {
        let u = -c / b;
        return (u > lo && u < hi).then_some(u);
    }
    let disc = b * b - 4.0 * a * c;
    if disc < 0.0 {
        return None;
    }
    let sq = disc.sqrt();
    // Numerically stable pair of roots.
    let qv = -0.5 * (b + b.signum() * sq);
    [qv / a, c / qv]
        .into_iter()
        .find(|u| u.is_finite() && *u > lo && *u < hi)
}

/// A starting point for a solve at flow q, interpolated (or extrapolated) from two solved
/// points: flows linearly in Q (superposition holds for flows near the hydrant), heads
/// linearly in Q^1.852 (the head-loss law).
fn predict(a: &Point, b: &Point, q: f64) -> Solution {
    let mut sol = if (q - a.q).abs() <= (q - b.q).abs() {
        a.sol.clone()
    } else {
        b.sol.clone()
    };
    if (b.q - a.q).abs() < 1e-12 {
        return sol;
    }
    let n = SUPPLY_CURVE_EXPONENT;
    let t = ((q - a.q) / (b.q - a.q)).clamp(-1.0, 3.0);
    let tu = ((q.powf(n) - a.q.powf(n)) / (b.q.powf(n) - a.q.powf(n))).clamp(-1.0, 3.0);
    for (h, (ha, hb)) in sol
        .heads_m
        .iter_mut()
        .zip(a.sol.heads_m.iter().zip(&b.sol.heads_m))
    {
        *h = ha + tu * (hb - ha);
    }
    for (f, (fa, fb)) in sol
        .flows_m3s
        .iter_mut()
        .zip(a.sol.flows_m3s.iter().zip(&b.sol.flows_m3s))
    {
        *f = fa + t * (fb - fa);
    }
    sol
}

/// Analyses hydrant `index` of the network. Never fails: a failed analysis is an `error` row.
pub fn analyse_hydrant(
    setup: &FireFlowSetup<'_>,
    ws: &mut Workspace,
    index: usize,
) -> HydrantResult {
    // Each hydrant starts from the max-day factorization, so that its result does not depend
    // on which thread analysed it or what that thread analysed before.
    ws.set_tolerance(Tolerance::SEARCH);
    match &setup.base_factor {
        Some(snapshot) => ws.restore(snapshot),
        None => ws.forget_history(),
    }
    let net = setup.network();
    let hydrant = &net.hydrants[index];
    let at = hydrant.junction;
    let mut result = HydrantResult {
        hydrant: index,
        junction: at,
        required_m3s: 0.0,
        required_source: crate::criteria::RequiredSource::Default,
        available_m3s: None,
        static_kpa: Some(setup.base.pressure_kpa(net, at)),
        residual_kpa: None,
        min_pressure_kpa: None,
        min_pressure_junction: None,
        critical_junction: None,
        critical_link: None,
        limited_by: None,
        outcome: Outcome::Error,
        notes: Vec::new(),
        supply_paths: Vec::new(),
        solves: 0,
        iterations: 0,
        factorizations: 0,
    };
    let Some((required, source)) = setup.criteria.required_flow(hydrant) else {
        result.notes.push(HydrantNote::Error {
            reason: "no required flow: the hydrant has none, its class is not in the criteria, and the criteria give no default".into(),
        });
        return result;
    };
    result.required_m3s = required;
    result.required_source = source;
    let mut search = Search {
        setup,
        ws,
        at,
        solves: 0,
        iterations: 0,
        factorizations: 0,
    };
    run(&mut search, required, &mut result);
    result.solves = search.solves;
    result.iterations = search.iterations;
    result.factorizations = search.factorizations;
    result
}

fn run(s: &mut Search<'_, '_>, required: f64, result: &mut HydrantResult) {
    let setup = s.setup;
    let net = setup.network();
    let at = s.at;
    let cap = setup.criteria.search_cap_m3s;
    let floor = setup.criteria.residual_floor_kpa;
    let base = Point {
        q: 0.0,
        sol: setup.base.clone(),
        check: setup.constraints(&setup.base, at),
    };

    // Residual pressure at the required flow.
    let at_required = match s.evaluate(required, &base.sol) {
        Ok(p) => {
            result.residual_kpa = Some(p.sol.pressure_kpa(net, at));
            result.min_pressure_kpa = Some(p.check.pressure_margin_kpa + floor);
            result.min_pressure_junction = Some(p.check.pressure_junction);
            Some(p)
        }
        Err(e) => {
            result.notes.push(HydrantNote::ResidualUnavailable {
                reason: e.to_string(),
            });
            None
        }
    };

    // Weak mains, for a hydrant that fails at its required flow.
    if let Some(p) = &at_required {
        if !p.check.feasible() || required > cap {
            result.supply_paths = super::supply_paths::supply_path_shares(
                net,
                &p.sol,
                p.check.pressure_junction,
                super::supply_paths::PIPES_PER_HYDRANT,
            );
        }
    }

    // Constraints already violated without fire flow.
    if !base.check.feasible() {
        result.available_m3s = Some(0.0);
        result.outcome = Outcome::Fail;
        match binding_of(&base.check) {
            Binding::Pressure(j) => {
                result.limited_by = Some(if j == at {
                    LimitedBy::HydrantPressure
                } else {
                    LimitedBy::SystemPressure
                });
                result.critical_junction = Some(j);
                result
                    .notes
                    .push(HydrantNote::FloorViolatedWithoutFireFlow {
                        junction: j,
                        pressure_kpa: base.sol.pressure_kpa(net, j),
                    });
            }
            Binding::Velocity(i) => {
                result.limited_by = Some(LimitedBy::Velocity);
                result.critical_link = Some(i);
                result
                    .notes
                    .push(HydrantNote::VelocityExceededWithoutFireFlow {
                        link: i,
                        velocity_m_per_s: base.sol.velocity_m_per_s(net, i).abs(),
                    });
            }
        }
        return;
    }

    let base_copy = Point {
        q: 0.0,
        sol: base.sol.clone(),
        check: base.check,
    };
    let at_required_copy = at_required.as_ref().map(|p| Point {
        q: p.q,
        sol: p.sol.clone(),
        check: p.check,
    });
    let mut lo = base;
    let mut hi: Option<Point> = None;
    let mut failed_above: Option<(f64, String)> = None;
    if let Some(p) = at_required {
        if p.check.feasible() && p.q <= cap {
            lo = p;
        } else if !p.check.feasible() {
            hi = Some(p);
        }
    }

    // The hydrant-limited flow, from one solve with the hydrant held at the floor.
    let mut answer: Option<LimitedBy> = None;
    // Start near the hydrant-limited flow. Its estimate is the supply-curve projection a field
    // flow test would make from the static and residual pressures (NFPA 291 §4.13:
    // Q = Q_t·((S − floor)/(S − R))^(1/n)), with the exponent n of this hydrant's own supply
    // curve, S − R = k·Q^n, fitted to the slope dH/dQ at the required flow (from the
    // factorization already made there) instead of the fixed 1/0.54. The start state extends
    // the required-flow state along the same curve: each head's fire-induced drop scaled by
    // (Q/Q_t)^n, flows by their linear response to the extra draw.
    let response = at_required_copy
        .as_ref()
        .and_then(|_| s.setup.hydraulics.demand_response(s.ws, at));
    let estimate = match (&at_required_copy, response) {
        (Some(p), Some((dh, dq))) => {
            let drop = base_copy.sol.heads_m[at] - p.sol.heads_m[at];
            let to_floor = base_copy.sol.heads_m[at] - s.setup.floor_head_m(at);
            let slope = -dh[at] * p.q;
            let n = if drop > 1e-9 && slope > 0.0 {
                (slope / drop).clamp(1.2, 2.5)
            } else {
                SUPPLY_CURVE_EXPONENT
            };
            (drop > 1e-9 && to_floor > drop).then(|| (p.q * (to_floor / drop).powf(1.0 / n), n, dq))
        }
        _ => None,
    };
    let fallback = nearest(&lo, hi.as_ref(), lo.q).clone();
    let predicted = |q: f64| -> Solution {
        match (&at_required_copy, &estimate) {
            (Some(p), Some((_, n, dq))) => {
                let scale = (q / p.q).powf(*n) - 1.0;
                let mut sol = p.sol.clone();
                for (h, (hb, hr)) in sol
                    .heads_m
                    .iter_mut()
                    .zip(base_copy.sol.heads_m.iter().zip(&p.sol.heads_m))
                {
                    *h = hr + (hr - hb) * scale;
                }
                for (f, d) in sol.flows_m3s.iter_mut().zip(dq) {
                    *f += d * (q - p.q);
                }
                sol
            }
            (Some(p), None) => p.sol.clone(),
            _ => fallback.clone(),
        }
    };
    let start = predicted(estimate.as_ref().map_or(0.0, |e| e.0.min(cap)));
    // A supply curve that reaches the floor well beyond the cap: the cap itself is the flow
    // to verify (one solve, where the held solve would place a flow far beyond it and a
    // probe of the cap would follow).
    let cap_first = hi.is_none()
        && lo.q < cap
        && estimate
            .as_ref()
            .is_some_and(|e| e.0 > CAP_FIRST_RATIO * cap);
    if cap_first {
        // The required-flow factorization is far from the cap's state: start afresh.
        s.ws.forget_factor();
        match s.verify_cap(cap, &predicted(cap)) {
            Ok(c) if c.check.feasible() => {
                lo = c;
                answer = Some(LimitedBy::Cap);
            }
            Ok(c) => hi = Some(c),
            Err(e) => failed_above = Some((cap, e.to_string())),
        }
    }
    if answer.is_none() {
        match s.hydrant_limited(&start) {
            Ok(p) if p.q <= lo.q => {
                // Already past the hydrant's floor at a passing flow: only round-off; keep lo.
                answer = Some(LimitedBy::HydrantPressure);
            }
            Ok(p) if p.q >= cap => {
                if hi.as_ref().is_none_or(|h| h.q > cap) {
                    // Between the required-flow state and the held one, the cap is best reached
                    // by interpolation.
                    let start = match &at_required_copy {
                        Some(r) if r.q < p.q => predict(r, &p, cap),
                        _ => p.sol.clone(),
                    };
                    match s.probe(cap, &start) {
                        Ok(c) if c.check.feasible() => {
                            lo = c;
                            answer = Some(LimitedBy::Cap);
                        }
                        Ok(c) => hi = Some(c),
                        Err(e) => failed_above = Some((cap, e.to_string())),
                    }
                }
            }
            Ok(p) => {
                if p.check.feasible() {
                    lo = p;
                    answer = Some(LimitedBy::HydrantPressure);
                } else if hi.as_ref().is_none_or(|h| p.q < h.q) {
                    hi = Some(p);
                }
            }
            Err(e) => failed_above = Some((lo.q, e.to_string())),
        }
    }
    if answer.is_none() && hi.is_none() {
        // No failing point known: try the cap; where a flow cannot be solved, bisect between
        // the largest verified flow and the smallest unsolvable one.
        let mut upper = cap;
        let mut unsolvable = f64::INFINITY;
        for _ in 0..MAX_PROBES {
            if upper - lo.q <= tolerance(lo.q, net.units) {
                break;
            }
            let start = lo.sol.clone();
            match s.probe(upper, &start) {
                Ok(p) if p.check.feasible() => {
                    let is_cap = p.q >= cap;
                    lo = p;
                    if is_cap {
                        answer = Some(LimitedBy::Cap);
                        break;
                    }
                    upper = 0.5 * (lo.q + unsolvable.min(cap));
                }
                Ok(p) => {
                    hi = Some(p);
                    break;
                }
                Err(e) => {
                    failed_above = Some((upper, e.to_string()));
                    unsolvable = upper;
                    upper = 0.5 * (lo.q + upper);
                }
            }
        }
    }

    if answer.is_none() {
        // The static point or the required-flow point is a useful third point for the first
        // estimate, whichever is not already an end of the bracket.
        let third = [Some(&base_copy), at_required_copy.as_ref()]
            .into_iter()
            .flatten()
            .find(|p| p.q != lo.q && hi.as_ref().is_none_or(|h| h.q != p.q))
            .map(|p| Point {
                q: p.q,
                sol: p.sol.clone(),
                check: p.check,
            });
        bracket_search(s, &mut lo, &mut hi, third, &mut failed_above);
    }

    // First crossing: with controls that changed state, look for an earlier failure.
    if setup.has_controls && lo.q > 0.0 && states_differ(&setup.base, &lo, hi.as_ref()) {
        let samples = FIRST_CROSSING_SAMPLES;
        let top = lo.q;
        let mut previous = Point {
            q: 0.0,
            sol: setup.base.clone(),
            check: setup.constraints(&setup.base, at),
        };
        for k in 1..samples {
            let q = top * f64::from(k) / f64::from(samples);
            match s.probe(q, &previous.sol) {
                Ok(p) if p.check.feasible() => previous = p,
                Ok(p) => {
                    result.notes.push(HydrantNote::NonMonotone {
                        passes_again_at_m3s: top,
                    });
                    let mut new_lo = previous;
                    let mut new_hi = Some(p);
                    bracket_search(s, &mut new_lo, &mut new_hi, None, &mut failed_above);
                    lo = new_lo;
                    hi = new_hi;
                    answer = None;
                    break;
                }
                Err(e) => {
                    failed_above = Some((q, e.to_string()));
                    lo = previous;
                    hi = None;
                    answer = None;
                    break;
                }
            }
        }
    }

    // What binds, and where.
    let limited_by = match answer {
        Some(LimitedBy::Cap) => LimitedBy::Cap,
        Some(LimitedBy::HydrantPressure) => {
            result.critical_junction = Some(at);
            LimitedBy::HydrantPressure
        }
        _ => match hi.as_ref().map(|h| binding_of(&h.check)) {
            Some(Binding::Velocity(i)) => {
                result.critical_link = Some(i);
                result.notes.push(HydrantNote::VelocityLimit { link: i });
                LimitedBy::Velocity
            }
            Some(Binding::Pressure(j)) => {
                result.critical_junction = Some(j);
                if j == at {
                    LimitedBy::HydrantPressure
                } else {
                    LimitedBy::SystemPressure
                }
            }
            // Only a flow that could not be solved is known above the answer.
            None => LimitedBy::NoSolution,
        },
    };
    if let Some((q, reason)) = failed_above {
        if q > lo.q && hi.as_ref().is_none_or(|h| h.q > q) {
            result.notes.push(HydrantNote::SolveFailedAbove {
                flow_m3s: q,
                reason,
            });
        }
    }
    locate_state_changes(s, &lo, result);
    result.available_m3s = Some(lo.q);
    result.limited_by = Some(limited_by);
    result.outcome = if lo.q >= required - 1e-12 {
        Outcome::Pass
    } else {
        Outcome::Fail
    };
}

/// The relative-or-absolute accuracy at flow q.
fn tolerance(q: f64, units: UnitSystem) -> f64 {
    (RELATIVE_ACCURACY * q).max(absolute_accuracy_m3s(units))
}

fn nearest<'p>(lo: &'p Point, hi: Option<&'p Point>, q: f64) -> &'p Solution {
    match hi {
        Some(h) if (h.q - q).abs() < (q - lo.q).abs() => &h.sol,
        _ => &lo.sol,
    }
}

fn states_differ(base: &Solution, lo: &Point, hi: Option<&Point>) -> bool {
    base.states != lo.sol.states || hi.is_some_and(|h| h.sol.states != base.states)
}

/// Narrows [lo, hi] until its width is within the accuracy; `lo` stays a verified passing
/// flow and `hi` a verified failing one. Each estimate is probed just below (to raise `lo`)
/// or just above (to lower `hi`), so that an accurate estimate closes the bracket in two
/// probes; the bisection point is probed when the estimates stop shrinking the bracket.
fn bracket_search(
    s: &mut Search<'_, '_>,
    lo: &mut Point,
    hi: &mut Option<Point>,
    mut third: Option<Point>,
    failed_above: &mut Option<(f64, String)>,
) {
    let units = s.setup.network().units;
    // Consecutive probes whose outcome contradicted the estimate; two in a row mean the
    // estimates are not to be trusted here, and the next probe bisects.
    let mut surprises = 0;
    for _ in 0..MAX_PROBES {
        let Some(h) = hi.as_ref() else { return };
        let width = h.q - lo.q;
        if width <= tolerance(lo.q, units) {
            return;
        }
        let binding = binding_of(&h.check);
        let estimate = estimate_root(s.setup, lo, h, third.as_ref(), binding);
        let step = PROBE_OFFSET * tolerance(estimate, units);
        let guard = 0.1 * step;
        let below = estimate - step;
        let above = estimate + step;
        let (q, expect_pass) = if surprises >= 2 {
            surprises = 0;
            (0.5 * (lo.q + h.q), None)
        } else if below > lo.q + guard {
            (below, Some(true))
        } else if above < h.q - guard {
            (above, Some(false))
        } else {
            (0.5 * (lo.q + h.q), None)
        };
        let start = predict(lo, h, q);
        let passed = match s.probe(q, &start) {
            Ok(p) if p.check.feasible() => {
                third = Some(std::mem::replace(lo, p));
                true
            }
            Ok(p) => {
                third = hi.replace(p);
                false
            }
            Err(e) => {
                // An unsolvable flow counts as failing; the answer stays a verified one.
                *failed_above = Some((q, e.to_string()));
                let moved = Point {
                    q,
                    sol: h.sol.clone(),
                    check: h.check,
                };
                third = hi.replace(moved);
                false
            }
        };
        match expect_pass {
            Some(expected) if expected != passed => surprises += 1,
            _ => surprises = 0,
        }
    }
}

/// Finds, by bisection, the flow at which elements changed state between the static solution
/// and the solution at the available flow.
fn locate_state_changes(s: &mut Search<'_, '_>, at_answer: &Point, result: &mut HydrantResult) {
    let setup = s.setup;
    let base = &setup.base;
    let changed: Vec<usize> = (0..base.states.len())
        .filter(|&i| base.states[i] != at_answer.sol.states[i])
        .filter(|&i| !crate::hydraulics::controls::is_fixed(&setup.network().links[i]))
        .filter(|&i| {
            !matches!(
                setup.network().links[i].kind,
                crate::model::LinkKind::Pipe(_)
            )
        })
        .take(STATE_CHANGES_LOCATED)
        .collect();
    for i in changed {
        let (mut a, mut b) = (0.0, at_answer.q);
        let mut start = base.clone();
        for _ in 0..STATE_CHANGE_STEPS {
            let mid = 0.5 * (a + b);
            match s.probe(mid, &start) {
                Ok(p) => {
                    if p.sol.states[i] == base.states[i] {
                        a = mid;
                    } else {
                        b = mid;
                    }
                    start = p.sol;
                }
                Err(_) => break,
            }
        }
        result.notes.push(HydrantNote::StateChanged {
            link: i,
            from: base.states[i],
            to: at_answer.sol.states[i],
            at_flow_m3s: 0.5 * (a + b),
        });
    }
}
