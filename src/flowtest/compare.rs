//! Each field test simulated as the ordinary solver would run it, and the model's static and
//! residual pressures set against the field's.
//!
//! A test is two steady states of the network at the test's demand (average-day × its factor)
//! and source grades: without the test flow (static) and with the measured outlet flows drawn
//! at the flow hydrants' junctions (residual). Pressures are read at the residual hydrant's
//! junction, as in the field (NFPA 291 §4.13: all pressures at the residual hydrant).

use std::borrow::Cow;

use thiserror::Error;

use super::{reduce, reduce_test, Reduced};
use crate::hydraulics::{Hydraulics, Solution, SolveError, SolveRequest, Workspace};
use crate::model::flowtests::FlowTest;
use crate::model::Network;
use crate::units::{UnitSystem, KPA_PER_PSI};

/// A modelled pressure this far from the measured one is a large misfit: "the modelled residual
/// differs from the measured residual by more than ~5 psi at the test flow" suggests a closed
/// valve, C too high or a wrong diameter (a heuristic of common practice; see NFPA 24 Annex
/// D.1.3.2 on what flow tests reveal).
pub const LARGE_MISFIT_KPA: f64 = 5.0 * KPA_PER_PSI;

#[derive(Debug, Error)]
pub enum FlowTestError {
    /// A test's state could not be solved; the message in the network's `units`.
    #[error("test {test}: {which} state: {}", .source.describe(*.units))]
    Solve {
        test: String,
        which: &'static str,
        units: UnitSystem,
        source: SolveError,
    },
    #[error("test {test}: the residual hydrant's junction has no pressure in the model (cut off by closed elements)")]
    NoPressure { test: String },
    #[error("{0}")]
    Calibration(String),
}

/// One test: its reduction, and the model's pressures at the residual hydrant.
#[derive(Clone, Debug)]
pub struct Compared {
    /// Index into the tests.
    pub test: usize,
    pub reduced: Reduced,
    pub model_static_kpa: f64,
    pub model_residual_kpa: f64,
    /// The model's projection to the floor: the field's test flow with the model's static and
    /// residual (the two-run estimate of the same formula, NFPA 291 §4.13).
    pub model_projected_m3s: Option<f64>,
    /// What a large misfit usually means, in plain words.
    pub hint: Option<String>,
}

impl Compared {
    /// Modelled minus measured static pressure, kPa.
    pub fn static_diff_kpa(&self, test: &FlowTest) -> f64 {
        self.model_static_kpa - test.static_kpa
    }
    /// Modelled minus measured residual pressure, kPa.
    pub fn residual_diff_kpa(&self, test: &FlowTest) -> f64 {
        self.model_residual_kpa - test.residual_kpa
    }
}

/// All tests compared, with the RMS misfits.
#[derive(Clone, Debug)]
pub struct Comparison {
    pub rows: Vec<Compared>,
    pub floor_kpa: f64,
    pub rms_static_kpa: f64,
    pub rms_residual_kpa: f64,
}

impl Comparison {
    /// The test with the largest residual misfit, if any.
    pub fn worst(&self, tests: &[FlowTest]) -> Option<&Compared> {
        self.rows.iter().max_by(|a, b| {
            a.residual_diff_kpa(&tests[a.test])
                .abs()
                .total_cmp(&b.residual_diff_kpa(&tests[b.test]).abs())
        })
    }
}

/// The network as it stood during `test`: its sources at the test's grades.
pub fn network_for_test<'a>(net: &'a Network, test: &FlowTest) -> Cow<'a, Network> {
    if test.source_grades.is_empty() {
        return Cow::Borrowed(net);
    }
    let mut copy = net.clone();
    for &(node, grade) in &test.source_grades {
        copy.nodes[node].grade_m = Some(grade);
        copy.nodes[node].elevation_m = grade;
    }
    Cow::Owned(copy)
}

/// The outlet flows of a test drawn at their hydrants' junctions, m³/s.
pub fn test_draws(net: &Network, test: &FlowTest, outlet_flows: &[f64]) -> Vec<(usize, f64)> {
    let mut draws: Vec<(usize, f64)> = Vec::new();
    for (o, q) in test.outlets.iter().zip(outlet_flows) {
        let j = net.hydrants[o.hydrant].junction;
        match draws.iter_mut().find(|(k, _)| *k == j) {
            Some(d) => d.1 += q,
            None => draws.push((j, *q)),
        }
    }
    draws
}

/// Solves one state of a test: with the outlet draws (residual) or without (static).
pub fn solve_test(
    h: &Hydraulics<'_>,
    ws: &mut Workspace,
    test: &FlowTest,
    draws: &[(usize, f64)],
    which: &'static str,
) -> Result<Solution, FlowTestError> {
    solve_test_from(h, ws, test, draws, which, None)
}

/// As [`solve_test`], starting from `start` (a solution of the same network topology, e.g. the
/// same test before the roughness changed) instead of a cold start.
pub fn solve_test_from(
    h: &Hydraulics<'_>,
    ws: &mut Workspace,
    test: &FlowTest,
    draws: &[(usize, f64)],
    which: &'static str,
    start: Option<&Solution>,
) -> Result<Solution, FlowTestError> {
    let request = SolveRequest {
        demand_factor: test.demand_factor,
        extra_demand: draws,
        fixed_head: None,
    };
    let cold;
    let start = match start {
        Some(s) => s,
        None => {
            cold = h.cold_start();
            &cold
        }
    };
    h.solve(ws, &request, start)
        .map_err(|source| FlowTestError::Solve {
            test: test.id.clone(),
            which,
            units: h.network().units,
            source,
        })
}

/// The pressure at the residual hydrant's junction in `sol`, kPa.
pub fn residual_point_kpa(
    net: &Network,
    test: &FlowTest,
    sol: &Solution,
) -> Result<f64, FlowTestError> {
    let j = net.hydrants[test.residual_hydrant].junction;
    if sol.isolated.contains(&j) {
        return Err(FlowTestError::NoPressure {
            test: test.id.clone(),
        });
    }
    Ok(sol.pressure_kpa(net, j))
}

/// Reduces and simulates every test; `floor_kpa` is the residual floor of the projections.
pub fn compare(
    net: &Network,
    tests: &[FlowTest],
    floor_kpa: f64,
) -> Result<Comparison, FlowTestError> {
    let mut rows = Vec::with_capacity(tests.len());
    for (i, test) in tests.iter().enumerate() {
        let reduced = reduce_test(net, test, floor_kpa);
        let tnet = network_for_test(net, test);
        let h = Hydraulics::new(&tnet).map_err(|source| FlowTestError::Solve {
            test: test.id.clone(),
            which: "static",
            units: net.units,
            source,
        })?;
        let mut ws = h.workspace();
        let stat = solve_test(&h, &mut ws, test, &[], "static")?;
        let model_static_kpa = residual_point_kpa(&tnet, test, &stat)?;
        let draws = test_draws(&tnet, test, &reduced.outlet_flows_m3s);
        let resid = solve_test(&h, &mut ws, test, &draws, "residual")?;
        let model_residual_kpa = residual_point_kpa(&tnet, test, &resid)?;
        let model_projected_m3s = reduce::projected_flow(
            reduced.total_flow_m3s,
            model_static_kpa,
            model_residual_kpa,
            floor_kpa,
        );
        let hint = misfit_hint(
            model_static_kpa - test.static_kpa,
            model_residual_kpa - test.residual_kpa,
        );
        rows.push(Compared {
            test: i,
            reduced,
            model_static_kpa,
            model_residual_kpa,
            model_projected_m3s,
            hint,
        });
    }
    let rms = |f: &dyn Fn(&Compared) -> f64| {
        if rows.is_empty() {
            0.0
        } else {
            (rows.iter().map(|r| f(r).powi(2)).sum::<f64>() / rows.len() as f64).sqrt()
        }
    };
    let rms_static_kpa = rms(&|r| r.static_diff_kpa(&tests[r.test]));
    let rms_residual_kpa = rms(&|r| r.residual_diff_kpa(&tests[r.test]));
    Ok(Comparison {
        rows,
        floor_kpa,
        rms_static_kpa,
        rms_residual_kpa,
    })
}

/// What a large misfit usually means, judged from which of static or residual is off
/// (modelled minus measured, kPa). `None` when both are within [`LARGE_MISFIT_KPA`].
///
/// The static pressure depends on elevations and source levels only (little flow moves at
/// ordinary demand); the drop from static to residual depends on the carrying capacity of the
/// mains between the sources and the test (roughness, diameters, valves). So a static misfit
/// points at elevation or source level, a drop misfit at the mains (common practice, no source;
/// NFPA 24 Annex D.1.3.2 names tuberculation and closed valves as what tests reveal).
pub fn misfit_hint(static_diff_kpa: f64, residual_diff_kpa: f64) -> Option<String> {
    let static_off = static_diff_kpa.abs() > LARGE_MISFIT_KPA;
    let residual_off = residual_diff_kpa.abs() > LARGE_MISFIT_KPA;
    // Modelled drop minus measured drop (S_m − R_m) − (S_f − R_f): negative when the model
    // loses too little head under the test flow.
    let drop_diff = static_diff_kpa - residual_diff_kpa;
    let drop_off = drop_diff.abs() > LARGE_MISFIT_KPA;
    if !static_off && !residual_off {
        return None;
    }
    let mut parts = Vec::new();
    if static_off {
        parts.push(if static_diff_kpa > 0.0 {
            "the model's static pressure is too high: check the residual hydrant's elevation (too low in the model?), the source levels at the time of the test (tank lower than modelled?) and PRV settings"
        } else {
            "the model's static pressure is too low: check the residual hydrant's elevation (too high in the model?), the source levels at the time of the test and PRV settings"
        });
    }
    if drop_off || !static_off {
        parts.push(if drop_diff > 0.0 {
            "the model loses more pressure under the test flow than the field: roughness too pessimistic (C too low), a main missing from the model or modelled too small, or a valve modelled closed that is open"
        } else {
            "the model loses less pressure under the test flow than the field: a closed or partly closed valve, roughness too optimistic (C too high, e.g. tuberculated old mains), or a diameter smaller than modelled"
        });
    }
    Some(parts.join("; "))
}

#[cfg(test)]
mod tests {
    use super::*;

    fn psi(p: f64) -> f64 {
        p * KPA_PER_PSI
    }

    #[test]
    fn hints_follow_which_pressure_is_off() {
        // Heuristic of common practice (no source): static right, residual high -> the model's
        // mains carry too well.
        assert!(misfit_hint(psi(1.0), psi(2.0)).is_none());
        let h = misfit_hint(psi(0.5), psi(9.0)).unwrap();
        assert!(h.contains("roughness too optimistic"), "{h}");
        assert!(!h.contains("elevation"), "{h}");
        let h = misfit_hint(psi(0.5), psi(-9.0)).unwrap();
        assert!(h.contains("too pessimistic"), "{h}");
        // Both off by the same: the static level, not the mains.
        let h = misfit_hint(psi(8.0), psi(8.5)).unwrap();
        assert!(h.contains("elevation") && !h.contains("roughness"), "{h}");
    }
}
