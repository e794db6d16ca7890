//! The commands' side of the library: rules for command-line values that are more than a type
//! (the bounds of `--threads`, `--hydrant` ids, the `upsize` options checked against a network),
//! the outcome of a command and its errors, each mapped to the documented exit status. The
//! binary (`src/main.rs`, `src/commands/`) parses the arguments, calls these and prints; the rules
//! live here so that they are tested and documented with the library.

use thiserror::Error;

use crate::model::Network;
use crate::ExitStatus;

mod error;
pub mod upsize;

pub use error::CliError;

/// How a command that ran to its end came out (errors are [`CliError`]).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Outcome {
    /// Nothing to report: everything passes, or the network is valid.
    Success,
    /// Something fails its criteria.
    Findings,
}

impl Outcome {
    /// [`Outcome::Findings`] when `findings`, else [`Outcome::Success`].
    pub fn from_findings(findings: bool) -> Self {
        if findings {
            Outcome::Findings
        } else {
            Outcome::Success
        }
    }
}

impl From<Outcome> for ExitStatus {
    fn from(outcome: Outcome) -> Self {
        match outcome {
            Outcome::Success => ExitStatus::Success,
            Outcome::Findings => ExitStatus::Findings,
        }
    }
}

/// The exit status of a command's result: its outcome, or its error's class.
pub fn exit_status(result: &Result<Outcome, CliError>) -> ExitStatus {
    match result {
        Ok(outcome) => (*outcome).into(),
        Err(e) => e.exit_status(),
    }
}

/// The hydrants named by `--hydrant`, each once, in the order first given; empty when none is.
pub fn select_hydrants(net: &Network, ids: &[String]) -> Result<Vec<usize>, CliError> {
    let mut selected = Vec::new();
    for id in ids {
        match net.hydrant_by_id(id) {
            Some(h) if selected.contains(&h) => {}
            Some(h) => selected.push(h),
            None => return Err(CliError::UnknownHydrant { id: id.clone() }),
        }
    }
    Ok(selected)
}

/// Worker threads allowed per available core. The sweep is compute-bound, so threads beyond the
/// cores only share them; a few per core still lets a user oversubscribe on purpose (common
/// practice, no source).
pub const THREADS_PER_CORE: usize = 4;
/// The most worker threads on any machine: each holds its own solver workspace and stack, so
/// an absurd count (`--threads 100000`) would exhaust memory before doing any work.
pub const MAX_THREADS: usize = 1024;

/// A command-line value that breaks its rule.
#[derive(Clone, Debug, Error, PartialEq, Eq)]
pub enum ArgumentError {
    #[error("--threads must be at least 1; fix: give a number of worker threads from 1 to {max}, or leave --threads out to use every core")]
    ZeroThreads { max: usize },
    #[error("--threads {given} is more than {max}, the most firemain starts on this machine ({per_core} per available core, {cores} core(s), and never more than {limit}); fix: give --threads from 1 to {max}, or leave it out to use every core", per_core = THREADS_PER_CORE, limit = MAX_THREADS)]
    TooManyThreads {
        given: usize,
        max: usize,
        cores: usize,
    },
}

/// The number of cores this process may use (1 when the system does not say).
pub fn available_cores() -> usize {
    std::thread::available_parallelism()
        .map(|n| n.get())
        .unwrap_or(1)
}

/// The most worker threads allowed with `cores` cores: min(4 × cores, 1024).
pub fn max_threads(cores: usize) -> usize {
    THREADS_PER_CORE
        .saturating_mul(cores.max(1))
        .min(MAX_THREADS)
}

/// Checks `--threads` (`None`: every core) against the machine's `cores`.
pub fn check_threads(
    requested: Option<usize>,
    cores: usize,
) -> Result<Option<usize>, ArgumentError> {
    let max = max_threads(cores);
    match requested {
        None => Ok(None),
        Some(0) => Err(ArgumentError::ZeroThreads { max }),
        Some(n) if n > max => Err(ArgumentError::TooManyThreads {
            given: n,
            max,
            cores: cores.max(1),
        }),
        Some(n) => Ok(Some(n)),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn threads_are_bounded_by_four_per_core_and_1024() {
        // The rule of docs/outputs.md (common practice, no source).
        assert_eq!(check_threads(None, 2), Ok(None));
        assert_eq!(check_threads(Some(8), 2), Ok(Some(8)));
        assert!(matches!(
            check_threads(Some(9), 2),
            Err(ArgumentError::TooManyThreads { max: 8, .. })
        ));
        assert!(matches!(
            check_threads(Some(0), 2),
            Err(ArgumentError::ZeroThreads { .. })
        ));
        assert_eq!(max_threads(512), 1024);
        assert_eq!(max_threads(0), 4);
        assert_eq!(max_threads(usize::MAX), 1024);
    }
}
