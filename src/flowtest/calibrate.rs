//! Roughness calibration: one Hazen-Williams C (or Darcy-Weisbach roughness) per pipe group,
//! fitted as one factor on the group's roughness (so that the pipes of a group keep their
//! differences, and a group of equal pipes gets one fitted value) to the residual-pressure misfits of field tests by bounded Levenberg-Marquardt
//! (Levenberg 1944; Marquardt, "An algorithm for least-squares estimation of nonlinear
//! parameters", J. SIAM 11(2), 1963), the approach of hydrant-test calibration (Walski,
//! "Technique for calibrating network models", J. Water Resour. Plann. Manage. 109(4), 1983).
//!
//! Sensitivities come from the solver, not from finite differences of whole solves: after the
//! residual state of a test is solved, one solve with the factorization already made gives the
//! head response h of every node to a draw at the residual junction r
//! ([`Hydraulics::demand_response`]). The junction matrix is symmetric, so h\[n\] is also the
//! response of the head at r to a draw at n (the adjoint). Raising the head loss of pipe i
//! (a → b) by δ at fixed flow moves the head at r by g_i·δ·(h\[b\] − h\[a\]), g_i = 1/(dφ_i/dQ);
//! summing over a group's pipes gives its column of the Jacobian: one extra solve per test.
//! The pipe's own δ = ∂φ_i/∂θ at fixed flow comes from its head-loss law alone.

use std::cell::RefCell;

use nalgebra::{DMatrix, DVector};

use super::compare::{
    network_for_test, residual_point_kpa, solve_test_from, test_draws, FlowTestError,
};
use crate::hydraulics::laws::LinkLaw;
use crate::hydraulics::{Hydraulics, LinkState, Solution};
use crate::model::flowtests::FlowTest;
use crate::model::{HeadlossFormula, LinkKind, Network};
use crate::units::pressure_kpa_from_head_m;

/// Plausible Hazen-Williams C of pipes in service: 40 (badly tuberculated) to 160 (new plastic)
/// (common practice, no source; published C tables span about this range).
pub const HW_BOUNDS: (f64, f64) = (40.0, 160.0);
/// Plausible Darcy-Weisbach absolute roughness, m: 0.001 mm (drawn plastic) to 5 mm (heavily
/// tuberculated) (common practice, no source).
pub const DW_BOUNDS_M: (f64, f64) = (1.0e-6, 5.0e-3);
/// A group whose probe change (10 % of C, or a doubling of ε: both change a rough pipe's loss
/// by roughly a fifth) moves no test's residual pressure by this much (kPa; 0.05 psi,
/// well below a gauge's reading error) is not identifiable from the tests (common practice,
/// no source).
pub const IDENTIFIABLE_KPA: f64 = 0.05 * crate::units::KPA_PER_PSI;
/// Levenberg-Marquardt iterations at most.
pub const MAX_ITERATIONS: usize = 40;

/// A named group of pipes (by a column of pipes.csv).
#[derive(Clone, Debug, PartialEq)]
pub struct Group {
    pub name: String,
    /// Link indices of the group's pipes.
    pub pipes: Vec<usize>,
}

/// Groups the pipes by a label per link (`None`: in no group), in the order labels first
/// appear.
pub fn groups_by_label(labels: &[(usize, String)]) -> Vec<Group> {
    let mut groups: Vec<Group> = Vec::new();
    for (link, label) in labels {
        match groups.iter_mut().find(|g| &g.name == label) {
            Some(g) => g.pipes.push(*link),
            None => groups.push(Group {
                name: label.clone(),
                pipes: vec![*link],
            }),
        }
    }
    groups
}

/// The fit of one group. Values are SI: C, or roughness in m.
#[derive(Clone, Debug)]
pub struct GroupFit {
    pub name: String,
    pub pipes: usize,
    pub length_m: f64,
    /// Length-weighted mean roughness before.
    pub before: f64,
    /// Length-weighted mean roughness after the fit (every pipe's roughness times the group's
    /// fitted factor), or `before` when not identifiable.
    pub after: f64,
    /// One standard error of `after`; `None` without enough tests to estimate the noise.
    pub standard_error: Option<f64>,
    pub identifiable: bool,
    /// The fit stopped at a bound.
    pub at_bound: bool,
    /// Indices of the tests whose residual pressure the group moves measurably.
    pub tests: Vec<usize>,
}

/// A finished calibration.
#[derive(Clone, Debug)]
pub struct Calibration {
    pub groups: Vec<GroupFit>,
    pub bounds: (f64, f64),
    /// RMS residual-pressure misfit, kPa, of the network as given and as calibrated.
    pub rms_before_kpa: f64,
    pub rms_after_kpa: f64,
    pub iterations: usize,
    /// The network with the fitted roughness of the identifiable groups.
    pub calibrated: Network,
}

/// How a group's factor on its roughness enters the fit: the factor itself on C, or its
/// logarithm on ε (roughness heights span decades).
#[derive(Clone, Copy)]
struct Param(HeadlossFormula);

impl Param {
    fn to_theta(self, factor: f64) -> f64 {
        match self.0 {
            HeadlossFormula::HazenWilliams => factor,
            HeadlossFormula::DarcyWeisbach => factor.ln(),
        }
    }
    fn factor(self, theta: f64) -> f64 {
        match self.0 {
            HeadlossFormula::HazenWilliams => theta,
            HeadlossFormula::DarcyWeisbach => theta.exp(),
        }
    }
    /// The change in θ by which a group's identifiability is judged: 10 % of C changes a
    /// pipe's loss by 1.1^1.852 − 1 ≈ 19 %; ε must about double for the same in rough pipe
    /// (the friction factor grows about as ε^0.2 to ε^0.3 there, by the Colebrook-White
    /// equation), and a 10 % change of ε would call nearly every group unidentifiable.
    fn probe(self, theta: f64) -> f64 {
        match self.0 {
            HeadlossFormula::HazenWilliams => 0.1 * theta.abs(),
            HeadlossFormula::DarcyWeisbach => std::f64::consts::LN_2,
        }
    }
}

/// The tests as the fit sees them: the network's copy per test, the draws, the measurements.
struct Problem<'a> {
    net: &'a Network,
    tests: &'a [FlowTest],
    draws: Vec<Vec<(usize, f64)>>,
    groups: &'a [Group],
    param: Param,
    /// The last residual state of each test: the next evaluation starts from it (a change of
    /// roughness moves a state little, so a warm start saves most of the iterations).
    starts: RefCell<Vec<Option<Solution>>>,
}

impl<'a> Problem<'a> {
    /// The fit's view of `tests`, each with its reduced outlet flows (m³/s), on `net`; no
    /// test has a residual state yet.
    fn new(
        net: &'a Network,
        tests: &'a [FlowTest],
        outlet_flows: &[Vec<f64>],
        groups: &'a [Group],
        param: Param,
    ) -> Self {
        Problem {
            net,
            tests,
            draws: tests
                .iter()
                .zip(outlet_flows)
                .map(|(t, f)| test_draws(net, t, f))
                .collect(),
            groups,
            param,
            starts: RefCell::new(vec![None; tests.len()]),
        }
    }

    /// The network with the roughness of each free group's pipes times `factor(theta[k])`.
    fn apply(&self, free: &[usize], theta: &[f64]) -> Network {
        let mut net = self.net.clone();
        for (&g, &t) in free.iter().zip(theta) {
            let f = self.param.factor(t);
            for &i in &self.groups[g].pipes {
                if let LinkKind::Pipe(p) = &mut net.links[i].kind {
                    p.roughness *= f;
                }
            }
        }
        net
    }

    /// Residuals (model − measured residual pressure, kPa) of `net` and, for the groups in
    /// `free` at `theta`, their Jacobian (kPa per unit θ), tests × groups.
    fn evaluate(
        &self,
        net: &Network,
        free: &[usize],
        theta: &[f64],
    ) -> Result<(DVector<f64>, DMatrix<f64>), FlowTestError> {
        let m = self.tests.len();
        let mut r = DVector::zeros(m);
        let mut jac = DMatrix::zeros(m, free.len());
        // One solver set-up for the tests at the network's own source grades.
        let mut shared: Option<Hydraulics<'_>> = None;
        for (t, test) in self.tests.iter().enumerate() {
            let tnet = network_for_test(net, test);
            let failed = |source| FlowTestError::Solve {
                test: test.id.clone(),
                which: "residual",
                units: net.units,
                source,
            };
            let own;
            let h = if test.source_grades.is_empty() {
                if shared.is_none() {
                    shared = Some(Hydraulics::new(net).map_err(failed)?);
                }
                shared.as_ref().ok_or_else(|| {
                    FlowTestError::Calibration("internal: no solver set-up".into())
                })?
            } else {
                own = Hydraulics::new(&tnet).map_err(failed)?;
                &own
            };
            let mut ws = h.workspace();
            let start = self.starts.borrow()[t].clone();
            let sol =
                solve_test_from(h, &mut ws, test, &self.draws[t], "residual", start.as_ref())?;
            self.starts.borrow_mut()[t] = Some(sol.clone());
            r[t] = residual_point_kpa(&tnet, test, &sol)? - test.residual_kpa;
            let j = tnet.hydrants[test.residual_hydrant].junction;
            // A junction held by a PRV has no response: its column entries stay 0.
            let Some((resp, _)) = h.demand_response(&mut ws, j) else {
                continue;
            };
            for (k, (&g, &th)) in free.iter().zip(theta).enumerate() {
                let mut dh = 0.0;
                for &i in &self.groups[g].pipes {
                    if sol.states[i] != LinkState::Open {
                        continue;
                    }
                    let link = &tnet.links[i];
                    let q = sol.flows_m3s[i];
                    let (_, slope) = h.law(i).evaluate(q);
                    let dphi = self.loss_derivative(i, link, q, th);
                    dh += dphi / slope * (resp[link.to] - resp[link.from]);
                }
                jac[(t, k)] = pressure_kpa_from_head_m(dh);
            }
        }
        Ok((r, jac))
    }

    /// ∂φ/∂θ of pipe `link` at fixed flow `q`, by its law alone (central difference of the
    /// law, not of a solve).
    fn loss_derivative(&self, i: usize, link: &crate::model::Link, q: f64, theta: f64) -> f64 {
        let eta = 1e-4 * theta.abs().max(1.0);
        let original = self.net.links[i].as_pipe().map_or(0.0, |p| p.roughness);
        let mut l = link.clone();
        let mut phi = |t: f64| {
            if let LinkKind::Pipe(p) = &mut l.kind {
                p.roughness = original * self.param.factor(t);
            }
            LinkLaw::of(&l, self.net.headloss).evaluate(q).0
        };
        let (up, down) = (phi(theta + eta), phi(theta - eta));
        (up - down) / (2.0 * eta)
    }
}

/// Length-weighted mean roughness of a group's pipes.
fn group_mean(net: &Network, g: &Group) -> (f64, f64) {
    let (mut sum, mut len) = (0.0, 0.0);
    for &i in &g.pipes {
        if let LinkKind::Pipe(p) = &net.links[i].kind {
            sum += p.roughness * p.length_m;
            len += p.length_m;
        }
    }
    (if len > 0.0 { sum / len } else { 0.0 }, len)
}

fn rms(r: &DVector<f64>) -> f64 {
    if r.is_empty() {
        0.0
    } else {
        (r.norm_squared() / r.len() as f64).sqrt()
    }
}

/// Fits the roughness of `groups` to `tests` (each with its reduced outlet flows, m³/s).
/// `bounds` (SI: C, or roughness m; `None` for the plausible defaults) hold each group's
/// length-weighted mean roughness.
///
/// In steps: each group's bounds on its factor, the groups the tests can see (judged at the
/// start), Levenberg-Marquardt on those, then each group's fit as the report gives it.
pub fn calibrate(
    net: &Network,
    tests: &[FlowTest],
    outlet_flows: &[Vec<f64>],
    groups: &[Group],
    bounds: Option<(f64, f64)>,
) -> Result<Calibration, FlowTestError> {
    let param = Param(net.headloss);
    let bounds = bounds.unwrap_or(default_bounds(net.headloss));
    let problem = Problem::new(net, tests, outlet_flows, groups, param);
    let means: Vec<(f64, f64)> = groups.iter().map(|g| group_mean(net, g)).collect();
    let limits = factor_limits(param, &means, bounds);
    let all: Vec<usize> = (0..groups.len()).collect();
    let start: Vec<f64> = limits
        .iter()
        .map(|&(lo, hi)| param.to_theta(1.0).clamp(lo, hi))
        .collect();

    // Which groups the tests can see, judged at the start.
    let rms_before_kpa = rms(&problem.evaluate(net, &[], &[])?.0);
    let (r0, j0) = problem.evaluate(&problem.apply(&all, &start), &all, &start)?;
    let informs = informing_tests(param, &j0, &start, tests.len());
    let free: Vec<usize> = all
        .iter()
        .copied()
        .filter(|&k| !informs[k].is_empty())
        .collect();
    let free_limits: Vec<(f64, f64)> = free.iter().map(|&k| limits[k]).collect();
    let (mut theta, mut r, mut jac) = free_start(&problem, &free, all.len(), start, r0, j0)?;
    let iterations =
        levenberg_marquardt(&problem, &free, &free_limits, &mut theta, &mut r, &mut jac)?;

    let calibrated = problem.apply(&free, &theta);
    let rms_after_kpa = rms(&r);
    let fitted = Fitted {
        param,
        free: &free,
        theta: &theta,
        limits: &limits,
        standard_errors: standard_errors(&r, &jac),
    };
    let fits = groups
        .iter()
        .enumerate()
        .map(|(k, g)| fitted.group_fit(k, g, means[k], &informs[k]))
        .collect();
    Ok(Calibration {
        groups: fits,
        bounds,
        rms_before_kpa,
        rms_after_kpa,
        iterations,
        calibrated,
    })
}

/// The plausible bounds of the network's roughness (C, or ε in m), when none are given.
fn default_bounds(headloss: HeadlossFormula) -> (f64, f64) {
    match headloss {
        HeadlossFormula::HazenWilliams => HW_BOUNDS,
        HeadlossFormula::DarcyWeisbach => DW_BOUNDS_M,
    }
}

/// Bounds on each group's factor: its length-weighted mean roughness stays within `bounds`.
fn factor_limits(param: Param, means: &[(f64, f64)], bounds: (f64, f64)) -> Vec<(f64, f64)> {
    means
        .iter()
        .map(|(m, _)| {
            let m = if *m > 0.0 { *m } else { 1.0 };
            (param.to_theta(bounds.0 / m), param.to_theta(bounds.1 / m))
        })
        .collect()
}

/// For each group (a column of `j0`, the Jacobian at the start), the tests whose residual
/// pressure its probe change moves by at least [`IDENTIFIABLE_KPA`]; a group with none is
/// not identifiable.
fn informing_tests(
    param: Param,
    j0: &DMatrix<f64>,
    start: &[f64],
    tests: usize,
) -> Vec<Vec<usize>> {
    (0..start.len())
        .map(|k| {
            (0..tests)
                .filter(|&t| (j0[(t, k)] * param.probe(start[k])).abs() >= IDENTIFIABLE_KPA)
                .collect()
        })
        .collect()
}

/// θ of the free groups with the residuals and the Jacobian there.
type FitPoint = (Vec<f64>, DVector<f64>, DMatrix<f64>);

/// θ, residuals and Jacobian of the `free` groups at the start: those already evaluated for
/// all `groups` when every group is free, else one more evaluation with the free ones alone.
fn free_start(
    problem: &Problem<'_>,
    free: &[usize],
    groups: usize,
    start: Vec<f64>,
    r0: DVector<f64>,
    j0: DMatrix<f64>,
) -> Result<FitPoint, FlowTestError> {
    if free.len() == groups {
        Ok((start, r0, j0))
    } else {
        let th: Vec<f64> = free.iter().map(|&k| start[k]).collect();
        let (r, j) = problem.evaluate(&problem.apply(free, &th), free, &th)?;
        Ok((th, r, j))
    }
}

/// The fit's outcome as each group's fit is read from it: the free groups' θ (positions in
/// `free`), every group's bounds on θ, and the standard errors of θ.
struct Fitted<'a> {
    param: Param,
    free: &'a [usize],
    theta: &'a [f64],
    limits: &'a [(f64, f64)],
    standard_errors: Option<Vec<f64>>,
}

impl Fitted<'_> {
    /// Group `k`'s fit, with its length-weighted mean roughness and length `(before,
    /// length_m)` and the tests that inform it; a group left out of the fit keeps `before`.
    fn group_fit(&self, k: usize, g: &Group, mean: (f64, f64), tests: &[usize]) -> GroupFit {
        let pos = self.free.iter().position(|&f| f == k);
        let (before, length_m) = mean;
        let (after, standard_error, at_bound) = match pos {
            Some(p) => self.fitted_value(p, before, self.limits[k]),
            None => (before, None, false),
        };
        GroupFit {
            name: g.name.clone(),
            pipes: g.pipes.len(),
            length_m,
            before,
            after,
            standard_error: standard_error.filter(|s| s.is_finite()),
            identifiable: pos.is_some(),
            at_bound,
            tests: tests.to_vec(),
        }
    }

    /// The mean roughness after the fit of the free group at position `p` (mean `before`,
    /// bounds `(lo, hi)` on θ), its standard error, and whether θ stopped at a bound.
    fn fitted_value(
        &self,
        p: usize,
        before: f64,
        (lo, hi): (f64, f64),
    ) -> (f64, Option<f64>, bool) {
        let f = self.param.factor(self.theta[p]);
        let v = before * f;
        // se(C) = mean·se(factor); for ln ε by the delta method, se(ε) ≈ ε·se(ln).
        let se = self.standard_errors.as_ref().map(|s| match self.param.0 {
            HeadlossFormula::HazenWilliams => before * s[p],
            HeadlossFormula::DarcyWeisbach => v * s[p],
        });
        let at = (self.theta[p] - lo).abs() < 1e-9 || (self.theta[p] - hi).abs() < 1e-9;
        (v, se, at)
    }
}

/// Bounded Levenberg-Marquardt on θ (Marquardt's scaling by the diagonal of JᵀJ; steps
/// projected onto the bounds). Updates θ, the residuals and the Jacobian in place; returns
/// the iterations taken.
fn levenberg_marquardt(
    problem: &Problem<'_>,
    free: &[usize],
    limits: &[(f64, f64)],
    theta: &mut Vec<f64>,
    r: &mut DVector<f64>,
    jac: &mut DMatrix<f64>,
) -> Result<usize, FlowTestError> {
    if free.is_empty() {
        return Ok(0);
    }
    let mut lambda = 1e-3;
    let mut cost = r.norm_squared();
    for iteration in 1..=MAX_ITERATIONS {
        let a = jac.transpose() * &*jac;
        let g = jac.transpose() * &*r;
        // Parameters at a bound that the gradient pushes outward stay there for this step
        // (their rows and columns are decoupled), so that the others get a true step.
        let held: Vec<bool> = (0..free.len())
            .map(|k| {
                let (lo, hi) = limits[k];
                (theta[k] <= lo + 1e-12 && g[k] > 0.0) || (theta[k] >= hi - 1e-12 && g[k] < 0.0)
            })
            .collect();
        let mut accepted = None;
        for _ in 0..12 {
            let mut n = a.clone();
            let mut rhs = -&g;
            for k in 0..free.len() {
                n[(k, k)] += lambda * a[(k, k)].max(1e-12);
                if held[k] {
                    n.row_mut(k).fill(0.0);
                    n.column_mut(k).fill(0.0);
                    n[(k, k)] = 1.0;
                    rhs[k] = 0.0;
                }
            }
            let Some(step) = n.cholesky().map(|c| c.solve(&rhs)) else {
                lambda *= 4.0;
                continue;
            };
            let trial: Vec<f64> = theta
                .iter()
                .zip(step.iter())
                .zip(limits)
                .map(|((t, s), &(lo, hi))| (t + s).clamp(lo, hi))
                .collect();
            let (rt, jt) = problem.evaluate(&problem.apply(free, &trial), free, &trial)?;
            let ct = rt.norm_squared();
            if ct < cost {
                accepted = Some((trial, rt, jt, ct));
                lambda = (lambda / 3.0).max(1e-12);
                break;
            }
            lambda *= 4.0;
        }
        let Some((trial, rt, jt, ct)) = accepted else {
            return Ok(iteration);
        };
        let moved = trial
            .iter()
            .zip(theta.iter())
            .map(|(a, b)| (a - b).abs() / b.abs().max(1e-3))
            .fold(0.0, f64::max);
        let gained = cost - ct;
        *theta = trial;
        *r = rt;
        *jac = jt;
        cost = ct;
        if moved < 1e-7 || gained <= 1e-12 * cost.max(1e-30) {
            return Ok(iteration);
        }
    }
    Ok(MAX_ITERATIONS)
}

/// Standard errors of θ from the covariance s²·(JᵀJ)⁺ (pseudo-inverse by SVD), with
/// s² = ‖r‖²/(m − n); `None` without more tests than groups.
fn standard_errors(r: &DVector<f64>, jac: &DMatrix<f64>) -> Option<Vec<f64>> {
    let (m, n) = jac.shape();
    if n == 0 || m <= n {
        return None;
    }
    let s2 = r.norm_squared() / (m - n) as f64;
    let a = jac.transpose() * jac;
    let svd = a.svd(true, true);
    let eps = 1e-12 * svd.singular_values.max();
    let pinv = svd.pseudo_inverse(eps).ok()?;
    Some(
        (0..n)
            .map(|k| (s2 * pinv[(k, k)]).max(0.0).sqrt())
            .collect(),
    )
}
