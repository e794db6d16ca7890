//! A hydrant's modelled supply curve: the pressure at the hydrant and at its critical junction
//! against fire flow, from static (zero fire flow) to beyond the available flow, for a chart on
//! the trade's Q^1.85 abscissa.
//!
//! Every point is solved, never extrapolated: an ordinary solve (no junction held, every
//! control settled by its own rules) at max-day demand plus the fire flow at the hydrant's
//! junction, to [`Tolerance::STEADY`], on the reporting grid ([`on_grid`]) — the same kind of
//! solve that verifies an available flow. A flow that cannot be solved, or whose controls do
//! not settle, is listed with the reason and not drawn.

use rayon::prelude::*;

use super::lateral::{lead_loss_kpa, lead_of};
use super::search::{on_grid, solve_or_from_base, unsettled_reason};
use super::sweep::SweepError;
use super::{FireFlowSetup, HydrantResult};
use crate::hydraulics::{Solution, SolveRequest, Tolerance, Workspace};
use crate::units::UnitSystem;

/// Exponent of the flow axis of hydraulic graph paper, N^1.85 (NFPA 291, *Recommended Practice
/// for Water Flow Testing and Marking of Hydrants*, the supply graph of its flow-test chapter;
/// from memory): points spaced evenly in Q^1.85 are spaced evenly on the chart.
pub const CHART_FLOW_EXPONENT: f64 = 1.85;
/// The curve runs to this multiple of the larger of the available and required flows, so that
/// the chart shows where the pressures go beyond the answer (common practice, no source).
const BEYOND_FACTOR: f64 = 1.25;
/// Guard on the curve's upper end: at most this multiple of the search's cap (the criteria's
/// cap, or the required flow when that is larger). Flows far beyond anything searched say
/// nothing about the hydrant and may not solve at all.
const CAP_GUARD_FACTOR: f64 = 2.0;

/// One solved point of a supply curve, SI.
#[derive(Clone, Debug, PartialEq)]
pub struct CurvePoint {
    /// Fire flow at the hydrant's junction, m³/s, on the reporting grid (the flow solved).
    pub flow_m3s: f64,
    /// Pressure at the hydrant, kPa: its junction's, less its lead's loss when it has one (a
    /// demand-driven model: below the floor, and even below zero, it is what the model gives,
    /// not what a hydrant would deliver).
    pub hydrant_kpa: f64,
    /// Pressure at the curve's critical junction, kPa; `None` without one, or where that
    /// junction is cut off by closed elements (its head means nothing).
    pub critical_kpa: Option<f64>,
    /// Lowest constrained pressure, kPa, and its junction.
    pub lowest_kpa: f64,
    pub lowest_junction: usize,
}

/// A hydrant's supply curve: solved points sorted by flow, and the flows that could not be
/// solved with the reason in plain words.
#[derive(Clone, Debug, PartialEq)]
pub struct SupplyCurve {
    /// Index into `Network::hydrants`.
    pub hydrant: usize,
    /// The junction whose pressure `critical_kpa` gives: the one that binds at the available
    /// flow, else the lowest constrained junction at the required flow.
    pub critical_junction: Option<usize>,
    pub points: Vec<CurvePoint>,
    /// Flows (m³/s) that gave no point, and why.
    pub unsolved: Vec<(f64, String)>,
}

/// The supply curve of the hydrant of `result` (its fire-flow search), with `points` flows
/// spaced evenly in Q^1.85 from zero to the upper end (at least 2), plus the required and
/// available flows themselves.
///
/// Each point is started from the previous point's solution (a fire flow that ramps up, the
/// reading the available flow's first crossing takes), falling back to the max-day state when
/// that fails. The workspace starts from the max-day factorization, so the curve does not
/// depend on what the workspace solved before.
pub fn supply_curve(
    setup: &FireFlowSetup<'_>,
    ws: &mut Workspace,
    result: &HydrantResult,
    points: usize,
) -> SupplyCurve {
    match &setup.base_factor {
        Some(snapshot) => ws.restore(snapshot),
        None => ws.forget_history(),
    }
    ws.set_tolerance(Tolerance::STEADY);
    let mut curve = SupplyCurve {
        hydrant: result.hydrant,
        critical_junction: result.critical_junction.or(result.min_pressure_junction),
        points: Vec::new(),
        unsolved: Vec::new(),
    };
    let mut start = setup.base.clone();
    for q in curve_flows(setup, result, points) {
        match solve_point(setup, ws, result.junction, q, &start) {
            Ok(sol) => match point_of(setup, &sol, result, curve.critical_junction, q) {
                Ok(p) => {
                    curve.points.push(p);
                    start = sol;
                }
                Err(reason) => curve.unsolved.push((q, reason)),
            },
            Err(reason) => curve.unsolved.push((q, reason)),
        }
    }
    curve
}

/// The flows of `result`'s curve (see [`flow_grid`]); the search's cap is the criteria's, or
/// the required flow when that is larger, as in the search itself.
fn curve_flows(setup: &FireFlowSetup<'_>, result: &HydrantResult, points: usize) -> Vec<f64> {
    let required = result.required_m3s;
    let search_cap = setup.criteria.search_cap_m3s.max(required);
    flow_grid(
        required,
        result.available_m3s,
        search_cap,
        points,
        setup.network().units,
    )
}

/// The flows of a curve, m³/s, sorted, distinct and on the reporting grid: `points` flows
/// (at least 2) spaced evenly in Q^1.85 from zero to `BEYOND_FACTOR` × max(available,
/// required) (the required flow alone when there is no available flow), capped by
/// `CAP_GUARD_FACTOR` × `search_cap`, plus the required and available flows themselves.
fn flow_grid(
    required: f64,
    available: Option<f64>,
    search_cap: f64,
    points: usize,
    units: UnitSystem,
) -> Vec<f64> {
    let top =
        (BEYOND_FACTOR * available.unwrap_or(0.0).max(required)).min(CAP_GUARD_FACTOR * search_cap);
    let mut flows = vec![0.0];
    if top > 0.0 {
        let n = points.max(2) - 1;
        let u_top = top.powf(CHART_FLOW_EXPONENT);
        flows.extend((1..=n).map(|i| {
            let u = u_top * i as f64 / n as f64;
            on_grid(u.powf(1.0 / CHART_FLOW_EXPONENT), units)
        }));
    }
    // The search's own figures are already on the grid; taken onto it again so that an
    // off-grid value from elsewhere cannot slip in.
    flows.push(on_grid(required, units));
    if let Some(a) = available {
        flows.push(on_grid(a, units));
    }
    flows.sort_by(f64::total_cmp);
    flows.dedup();
    flows
}

/// An ordinary solve at fire flow `q` at junction `at`: the max-day state itself at zero flow,
/// else a solve from `start` (and from the max-day state when that fails). Errors are the
/// reason in plain words.
fn solve_point(
    setup: &FireFlowSetup<'_>,
    ws: &mut Workspace,
    at: usize,
    q: f64,
    start: &Solution,
) -> Result<Solution, String> {
    let sol = if q == 0.0 {
        // The max-day solution is the ordinary steady solve at zero fire flow.
        setup.base.clone()
    } else {
        let extra = [(at, q)];
        let request = SolveRequest {
            demand_factor: setup.demand_factor,
            extra_demand: &extra,
            fixed_head: None,
        };
        solve_or_from_base(setup, ws, &request, start)
            .0
            .map_err(|e| e.describe(setup.network().units))?
    };
    if !sol.unsettled.is_empty() {
        return Err(unsettled_reason(setup.network(), &sol.unsettled));
    }
    Ok(sol)
}

/// The point drawn from the solution `sol` at fire flow `q`, or why it cannot be drawn (a
/// pressure that is not a finite number: a value is never made up).
fn point_of(
    setup: &FireFlowSetup<'_>,
    sol: &Solution,
    result: &HydrantResult,
    critical: Option<usize>,
    q: f64,
) -> Result<CurvePoint, String> {
    let net = setup.network();
    let at = result.junction;
    // The hydrant's own pressure is taken after its lead, as the search takes it.
    let lead = lead_loss_kpa(lead_of(net, result.hydrant).as_ref(), q);
    if sol.isolated.contains(&at) {
        // Cut off with no demand, which only a zero fire flow allows: its head means nothing.
        return Err(
            "the hydrant's junction is cut off from every source by closed elements".into(),
        );
    }
    let not_finite = || "the solution's pressures are not finite numbers".to_string();
    let hydrant_kpa = sol.pressure_kpa(net, at) - lead;
    let check = setup.constraints(sol, at);
    // Read off the solution rather than margin + floor, which would differ in the last bits.
    let (lowest_kpa, lowest_junction) = match sol.pressure_kpa(net, check.pressure_junction) {
        p if hydrant_kpa < p => (hydrant_kpa, at),
        p => (p, check.pressure_junction),
    };
    let critical_kpa = critical
        .filter(|j| !sol.isolated.contains(j))
        .map(|j| sol.pressure_kpa(net, j) - if j == at { lead } else { 0.0 });
    // Every junction is checked, not only those drawn: a non-finite head anywhere means the
    // solve did not give a steady state.
    let all_finite = sol.heads_m[..net.n_junctions].iter().all(|h| h.is_finite());
    if !all_finite
        || !hydrant_kpa.is_finite()
        || !lowest_kpa.is_finite()
        || critical_kpa.is_some_and(|p| !p.is_finite())
    {
        return Err(not_finite());
    }
    Ok(CurvePoint {
        flow_m3s: q,
        hydrant_kpa,
        critical_kpa,
        lowest_kpa,
        lowest_junction,
    })
}

/// The supply curves of the hydrants `indices` (indices into `Network::hydrants`), each from
/// its fire-flow search's result in `results` (matched by `HydrantResult::hydrant`), with
/// `threads` workers (0: all cores) and one workspace per worker. One curve per index that has
/// a result, in the order of `indices`; every curve starts from the max-day factorization, so
/// the curves do not depend on the number of threads.
pub fn supply_curves(
    setup: &FireFlowSetup<'_>,
    indices: &[usize],
    results: &[HydrantResult],
    points: usize,
    threads: usize,
) -> Result<Vec<SupplyCurve>, SweepError> {
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(threads)
        .build()?;
    let mut by_hydrant: Vec<Option<&HydrantResult>> = vec![None; setup.network().hydrants.len()];
    for r in results {
        if let Some(slot) = by_hydrant.get_mut(r.hydrant) {
            *slot = Some(r);
        }
    }
    let wanted: Vec<&HydrantResult> = indices
        .iter()
        .filter_map(|&h| by_hydrant.get(h).copied().flatten())
        .collect();
    Ok(pool.install(|| {
        wanted
            .par_iter()
            .map_init(
                || setup.hydraulics.workspace(),
                |ws, r| supply_curve(setup, ws, r, points),
            )
            .collect()
    }))
}

#[cfg(test)]
mod tests {
    use super::*;

    /// L/s in m³/s (SI definition: 1 L = 1e-3 m³).
    const LPS: f64 = 1.0e-3;

    /// Source: the curve's definition (zero to 1.25 × the larger of available and required,
    /// evenly spaced in Q^1.85: the flows (i/n)^(1/1.85) of the upper end); the check values
    /// are computed here by that formula, with NFPA 291's N^1.85 chart exponent (from memory).
    #[test]
    fn flows_are_even_in_q_to_the_1_85_and_hold_required_and_available() {
        let flows = flow_grid(
            95.0 * LPS,
            Some(120.0 * LPS),
            500.0 * LPS,
            5,
            UnitSystem::Si,
        );
        let top = 150.0 * LPS;
        let mut expected: Vec<f64> = (0..5)
            .map(|i| top * (i as f64 / 4.0).powf(1.0 / 1.85))
            .collect();
        expected.extend([95.0 * LPS, 120.0 * LPS]);
        expected.sort_by(f64::total_cmp);
        assert_eq!(flows.len(), expected.len(), "{flows:?}");
        for (got, want) in flows.iter().zip(&expected) {
            // Rounded down onto the 0.0001 L/s reporting grid.
            assert!(
                got <= want && want - got < 1.0e-7 + 1e-15,
                "{got} vs {want}"
            );
        }
    }

    /// Source: the curve's definition (common practice, no source): without an available flow
    /// the curve runs to 1.25 × the required flow; with neither, only the static point is left;
    /// fewer than two points still give zero and the upper end.
    #[test]
    fn degenerate_inputs_give_short_curves() {
        let q = flow_grid(0.0, None, 500.0 * LPS, 12, UnitSystem::Si);
        assert_eq!(q, vec![0.0]);
        let q = flow_grid(100.0 * LPS, None, 500.0 * LPS, 0, UnitSystem::Si);
        assert_eq!(q.len(), 3, "{q:?}");
        assert!((q[2] - 125.0 * LPS).abs() < 1.0e-7);
        // The same flow twice is drawn once.
        let q = flow_grid(
            100.0 * LPS,
            Some(100.0 * LPS),
            500.0 * LPS,
            2,
            UnitSystem::Si,
        );
        assert_eq!(q.len(), 3, "{q:?}");
    }

    /// Source: the guard's definition (common practice, no source): the upper end is at most
    /// twice the search's cap, whatever the available flow handed in.
    #[test]
    fn the_upper_end_is_guarded_by_the_search_cap() {
        let q = flow_grid(
            50.0 * LPS,
            Some(900.0 * LPS),
            100.0 * LPS,
            4,
            UnitSystem::Si,
        );
        let above_guard: Vec<&f64> = q.iter().filter(|&&f| f > 200.0 * LPS).collect();
        // Only the available flow itself (on the reporting grid), which is always drawn.
        assert_eq!(
            above_guard,
            vec![&on_grid(900.0 * LPS, UnitSystem::Si)],
            "{q:?}"
        );
    }
}
