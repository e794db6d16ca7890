//! Speed benchmarks on seeded synthetic networks (examples/synthetic.rs): load + validate, one
//! steady solve, one numeric refactorization, and a fire-flow sweep of a slice of hydrants.
//!
//! `cargo bench` runs 1k, 10k and 100k junctions; `FIREMAIN_BENCH_LARGE=1 cargo bench` adds
//! 300k. The networks are written once to `target/bench-networks/` and reused. Figures and the
//! targets they are measured against: docs/performance.md.

#[allow(dead_code)]
#[path = "../examples/synthetic.rs"]
mod synthetic;

use std::path::PathBuf;
use std::time::Duration;

use criterion::{criterion_group, criterion_main, BenchmarkId, Criterion};

use firemain::criteria::load_criteria;
use firemain::fireflow::{sweep, FireFlowSetup};
use firemain::hydraulics::factor::{
    OrderedPattern, SparseCholesky, SpdFactorization, SymbolicAnalysis,
};
use firemain::hydraulics::solver::junction_pairs;
use firemain::hydraulics::{Hydraulics, SolveRequest};
use firemain::model::{load_network, Network};

/// The network of `junctions` junctions (seed 1), generated on first use.
fn network_dir(junctions: u32) -> PathBuf {
    let dir = PathBuf::from(env!("CARGO_MANIFEST_DIR"))
        .join("target/bench-networks")
        .join(format!("{}k-seed1", junctions / 1000));
    if !dir.join("hydrants.csv").exists() {
        let _ = std::fs::remove_dir_all(&dir);
        std::fs::create_dir_all(dir.parent().expect("parent")).expect("bench folder");
        synthetic::write_us_network(junctions, 1, &dir).expect("generate network");
    }
    dir
}

fn load(junctions: u32) -> Network {
    load_network(&network_dir(junctions))
        .expect("synthetic network loads")
        .network
}

fn sizes() -> Vec<u32> {
    let mut s = vec![1_000, 10_000, 100_000];
    if std::env::var_os("FIREMAIN_BENCH_LARGE").is_some() {
        s.push(300_000);
    }
    s
}

fn load_and_validate(c: &mut Criterion) {
    let mut g = c.benchmark_group("load_validate");
    g.sample_size(10).measurement_time(Duration::from_secs(10));
    for n in sizes() {
        let dir = network_dir(n);
        g.bench_with_input(BenchmarkId::from_parameter(n), &dir, |b, dir| {
            b.iter(|| load_network(dir).expect("loads"))
        });
    }
    g.finish();
}

fn steady_solve(c: &mut Criterion) {
    let mut g = c.benchmark_group("steady_solve");
    g.sample_size(10).measurement_time(Duration::from_secs(10));
    for n in sizes() {
        let net = load(n);
        let request = SolveRequest {
            demand_factor: net.demand_factors.max_day,
            extra_demand: &[],
            fixed_head: None,
        };
        // Preparation (pattern, ordering, symbolic analysis) and a cold-start solve, as
        // `firemain solve` does them.
        g.bench_with_input(BenchmarkId::new("prepare_and_solve", n), &net, |b, net| {
            b.iter(|| {
                let h = Hydraulics::new(net).expect("prepare");
                let mut ws = h.workspace();
                h.solve(&mut ws, &request, &h.cold_start()).expect("solve")
            })
        });
        let h = Hydraulics::new(&net).expect("prepare");
        g.bench_with_input(BenchmarkId::new("solve", n), &h, |b, h| {
            let mut ws = h.workspace();
            b.iter(|| h.solve(&mut ws, &request, &h.cold_start()).expect("solve"))
        });
    }
    g.finish();
}

fn refactorization(c: &mut Criterion) {
    let mut g = c.benchmark_group("refactorization");
    g.sample_size(20);
    for n in sizes() {
        let net = load(n);
        let nj = net.n_junctions;
        let pairs = junction_pairs(&net);
        let pattern = OrderedPattern::new(nj, &pairs).expect("pattern");
        // A weighted Laplacian plus a positive shift: the junction matrix's structure and
        // definiteness, with values that do not depend on a solve.
        let mut values = vec![0.0; pattern.nnz()];
        for (k, &(a, b)) in pairs.iter().enumerate() {
            let w = 1.0 + (k % 7) as f64;
            values[pattern.diagonal_slot(a)] += w;
            values[pattern.diagonal_slot(b)] += w;
            if let Some(s) = pattern.slot(a, b) {
                values[s] -= w;
            }
        }
        for j in 0..nj {
            values[pattern.diagonal_slot(j)] += 1e-3;
        }
        let analysis = SymbolicAnalysis::new(&pattern).expect("symbolic");
        let mut factor = SparseCholesky::new(analysis);
        g.bench_with_input(BenchmarkId::from_parameter(n), &values, |b, values| {
            b.iter(|| factor.refactor(values).expect("positive definite"))
        });
        // A pair of triangular solves on that factorization (one per Newton step).
        let rhs: Vec<f64> = (0..nj).map(|k| 1.0 + (k % 11) as f64).collect();
        let mut x = rhs.clone();
        g.bench_with_input(BenchmarkId::new("solve", n), &rhs, |b, rhs| {
            b.iter(|| {
                x.copy_from_slice(rhs);
                factor.solve_in_place(&mut x)
            })
        });
    }
    g.finish();
}

fn fire_flow_sweep(c: &mut Criterion) {
    let mut g = c.benchmark_group("fire_flow_sweep_100_hydrants");
    g.sample_size(10).measurement_time(Duration::from_secs(30));
    let net = load(10_000);
    let criteria_path =
        PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("criteria/common-practice-us.toml");
    let criteria = load_criteria(&criteria_path, &net).expect("criteria");
    let h = Hydraulics::new(&net).expect("prepare");
    let setup = FireFlowSetup::new(&h, &criteria).expect("max-day");
    // Every 25th hydrant: a spread sample of the 2,500.
    let hydrants: Vec<usize> = (0..net.hydrants.len()).step_by(25).collect();
    for threads in [1, 2] {
        g.bench_with_input(
            BenchmarkId::new("10000_threads", threads),
            &threads,
            |b, &t| b.iter(|| sweep(&setup, &hydrants, Some(t), &|_| {}).expect("sweep")),
        );
    }
    g.finish();
}

/// The cost of `[fire] pressure_dependent`: the 10k network's first 20 failing hydrants swept
/// with and without it (with it, each failing hydrant gets one more, pressure-dependent, solve;
/// docs/fire-flow-method.md §2b).
fn pressure_dependent_sweep(c: &mut Criterion) {
    let mut g = c.benchmark_group("failing_hydrants_10k");
    g.sample_size(10).measurement_time(Duration::from_secs(30));
    let net = load(10_000);
    let path = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("criteria/common-practice-us.toml");
    let text = std::fs::read_to_string(&path).expect("criteria");
    let dir = tempfile::tempdir().expect("tempdir");
    let with = dir.path().join("pdd.toml");
    let pdd_line =
        "default_required_flow = 1000\npressure_dependent = { minimum = 5, service = 20 }";
    std::fs::write(
        &with,
        text.replace("default_required_flow = 1000", pdd_line),
    )
    .expect("write");
    let h = Hydraulics::new(&net).expect("prepare");
    let plain = load_criteria(&path, &net).expect("criteria");
    let pdd = load_criteria(&with, &net).expect("criteria");
    let setup = FireFlowSetup::new(&h, &plain).expect("max-day");
    let all: Vec<usize> = (0..net.hydrants.len()).collect();
    let (results, _) = sweep(&setup, &all, None, &|_| {}).expect("sweep");
    let failing: Vec<usize> = results
        .iter()
        .filter(|r| r.outcome == firemain::fireflow::Outcome::Fail)
        .map(|r| r.hydrant)
        .take(20)
        .collect();
    for (name, criteria) in [("demand_driven", &plain), ("pressure_dependent", &pdd)] {
        let setup = FireFlowSetup::new(&h, criteria).expect("max-day");
        g.bench_function(name, |b| {
            b.iter(|| sweep(&setup, &failing, Some(1), &|_| {}).expect("sweep"))
        });
    }
    g.finish();
}

criterion_group!(
    benches,
    load_and_validate,
    steady_solve,
    refactorization,
    fire_flow_sweep,
    pressure_dependent_sweep
);
criterion_main!(benches);
