//! firemain: hydrant-by-hydrant fire-flow and service-pressure screening of water distribution
//! networks.
//!
//! Data flows one way: [`model`] (read, validate, convert to SI) -> [`hydraulics`] (steady-state
//! solve) -> analyses -> report. The library never prints and never exits.

pub mod cli;
pub mod criteria;
pub mod fireflow;
pub mod flowtest;
pub mod hydraulics;
pub mod journal;
pub mod model;
pub mod needed;
pub mod permit;
pub mod report;
pub mod service;
pub mod steady;
pub mod storage;
pub mod units;
pub mod upsizing;
pub mod weakmains;

/// The process exit status of every command, documented in `--help` and the README.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum ExitStatus {
    /// The command ran and found nothing to report (every hydrant passes; the network is valid).
    Success = 0,
    /// The command ran and has findings (some hydrant or junction fails its criteria).
    Findings = 1,
    /// The input (command line, network or criteria files) has errors; nothing was analysed.
    InputError = 2,
    /// The analysis itself failed (no hydraulic solution, or an output file could not be written).
    AnalysisError = 3,
}
