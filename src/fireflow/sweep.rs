//! The sweep over hydrants, in parallel: one workspace per worker, the network, its symbolic
//! factorization and the max-day solution shared. Results are in hydrant order and do not
//! depend on the number of threads.

use std::sync::atomic::{AtomicUsize, Ordering};
use std::time::{Duration, Instant};

use rayon::prelude::*;
use thiserror::Error;

use super::{analyse_hydrant, FireFlowSetup, HydrantResult, WorkByRole};

/// Work done by a sweep, for `--stats`.
#[derive(Clone, Debug)]
pub struct SweepStats {
    pub hydrants: usize,
    pub solves: u64,
    pub iterations: u64,
    pub factorizations: u64,
    pub factorizations_per_hydrant_mean: f64,
    pub factorizations_per_hydrant_max: u32,
    pub wall_time: Duration,
    pub threads: usize,
    /// The work by the role of each solve, summed over the `hydrants_by_role` hydrants that
    /// carry it (those analysed in this run: a journal does not keep it).
    pub by_role: WorkByRole,
    pub hydrants_by_role: usize,
}

impl SweepStats {
    /// The work counters summed over `results` (each result carries its own), with the wall
    /// time and thread count of the run that reports them.
    pub fn of_results(results: &[HydrantResult], wall_time: Duration, threads: usize) -> Self {
        let factorizations: u64 = results.iter().map(|r| u64::from(r.factorizations)).sum();
        SweepStats {
            hydrants: results.len(),
            solves: results.iter().map(|r| u64::from(r.solves)).sum(),
            iterations: results.iter().map(|r| u64::from(r.iterations)).sum(),
            factorizations,
            factorizations_per_hydrant_mean: if results.is_empty() {
                0.0
            } else {
                factorizations as f64 / results.len() as f64
            },
            factorizations_per_hydrant_max: results
                .iter()
                .map(|r| r.factorizations)
                .max()
                .unwrap_or(0),
            wall_time,
            threads,
            by_role: results.iter().fold(WorkByRole::default(), |mut sum, r| {
                sum.add_all(&r.work_by_role);
                sum
            }),
            hydrants_by_role: results
                .iter()
                .filter(|r| r.work_by_role.total().solves > 0)
                .count(),
        }
    }
}

/// Why a sweep could not run. A hydrant whose analysis fails is a result of its own (an
/// `error` row), never a sweep error.
#[derive(Debug, Error)]
pub enum SweepError {
    /// The pool of worker threads could not be started (the message is the system's).
    #[error(transparent)]
    Threads(#[from] rayon::ThreadPoolBuildError),
}

/// Analyses the hydrants `indices` with `threads` workers (`None`: all cores). `progress` is
/// called with the number of hydrants done so far, from any thread.
pub fn sweep(
    setup: &FireFlowSetup<'_>,
    indices: &[usize],
    threads: Option<usize>,
    progress: &(dyn Fn(usize) + Sync),
) -> Result<(Vec<HydrantResult>, SweepStats), SweepError> {
    sweep_each(setup, indices, threads, &|_, done| progress(done))
}

/// [`sweep`], with `each` called with every result as it is found (in no particular order,
/// from any thread) and the number of hydrants done so far: a journal records them there.
pub fn sweep_each(
    setup: &FireFlowSetup<'_>,
    indices: &[usize],
    threads: Option<usize>,
    each: &(dyn Fn(&HydrantResult, usize) + Sync),
) -> Result<(Vec<HydrantResult>, SweepStats), SweepError> {
    let started = Instant::now();
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(threads.unwrap_or(0))
        .build()?;
    let done = AtomicUsize::new(0);
    let results: Vec<HydrantResult> = pool.install(|| {
        indices
            .par_iter()
            .map_init(
                || setup.hydraulics.workspace(),
                |ws, &h| {
                    let r = analyse_hydrant(setup, ws, h);
                    each(&r, done.fetch_add(1, Ordering::Relaxed) + 1);
                    r
                },
            )
            .collect()
    });
    let stats = SweepStats::of_results(&results, started.elapsed(), pool.current_num_threads());
    Ok((results, stats))
}
