//! The errors of a command, each in one of the two classes of the documented exit codes: input
//! (the command line, network or criteria files; nothing was analysed) and analysis (no hydraulic
//! solution, or an output not written).

use std::path::PathBuf;

use thiserror::Error;

use super::ArgumentError;
use crate::hydraulics::SolveError;
use crate::model::Diagnostics;
use crate::report::{self, ReportError};
use crate::units::UnitSystem;
use crate::upsizing::UpsizeError;
use crate::ExitStatus;

/// Why a command stopped before its end.
#[derive(Debug, Error)]
pub enum CliError {
    // Input errors (exit status 2).
    /// A command-line value breaks its rule (`--threads`).
    #[error(transparent)]
    Argument(#[from] ArgumentError),
    /// An output folder that is the network folder, refused before any analysis runs.
    #[error("--out {} is the network folder; choose another folder so that no input file can be overwritten", .0.display())]
    OutputIsNetworkFolder(PathBuf),
    /// An `import` output folder that already holds files.
    #[error("--out {} already holds files; give a new or empty folder (an import never writes over a network)", .0.display())]
    OutputNotEmpty(PathBuf),
    /// The network has errors, listed in `diagnostics`.
    #[error("the network in {} has errors; nothing was analysed", .dir.display())]
    Network {
        dir: PathBuf,
        diagnostics: Diagnostics,
    },
    /// The network has errors that `validate` has already listed as its output.
    #[error("the network in {} has errors", .dir.display())]
    NetworkListed { dir: PathBuf },
    /// The criteria have errors, listed in `diagnostics`.
    #[error("the criteria have errors; nothing was analysed")]
    Criteria { diagnostics: Diagnostics },
    /// The buildings file has errors, listed in `diagnostics`.
    #[error("the buildings file has errors; nothing was analysed")]
    Buildings { diagnostics: Diagnostics },
    /// `permit` needs a criteria set that says how to find a building's needed flow.
    #[error("{}: no [needed_flow] section; add one naming the method and the hose-lay reach (see docs/criteria-format.md)", .0.display())]
    NoNeededFlow(PathBuf),
    /// The project file has errors, listed in `diagnostics`.
    #[error("the project file has errors; nothing was analysed")]
    Project { diagnostics: Diagnostics },
    /// `--hydrant` names no hydrant.
    #[error("--hydrant {id}: no hydrant with this id in hydrants.csv (ids are compared exactly)")]
    UnknownHydrant { id: String },
    /// `--sizes` holds no size, or one that is not a positive number.
    #[error("--sizes must be positive diameters in {unit}, comma-separated")]
    Sizes { unit: &'static str },
    /// The cost table has errors, listed in `diagnostics` (each names the file).
    #[error("{}: the cost table has errors", .path.display())]
    CostTable {
        path: PathBuf,
        diagnostics: Diagnostics,
    },
    /// The cost table prices not every candidate size; `sizes` lists them in the network's unit.
    #[error("{}: no cost for the candidate size(s) {sizes} {unit}; add a row for each, or choose --sizes that the table prices", .path.display())]
    UnpricedSizes {
        path: PathBuf,
        sizes: String,
        unit: &'static str,
    },
    /// `--budget` is not a positive number.
    #[error("--budget must be a positive number")]
    Budget,
    /// The GIS layers or the mapping of `import geojson` have errors, listed in `diagnostics`.
    #[error("the GIS layers or the mapping have errors; nothing was written")]
    Import { diagnostics: Diagnostics },
    /// The field flow tests have errors, listed in `diagnostics`.
    #[error("the flow tests have errors; nothing was analysed")]
    FlowTests { diagnostics: Diagnostics },
    /// The `--calibrate-by` column cannot group the pipes; `diagnostics` say why.
    #[error("--calibrate-by: the pipes cannot be grouped; nothing was analysed")]
    CalibrationGroups { diagnostics: Diagnostics },

    // Analysis errors (exit status 3).
    /// The network's hydraulics could not be set up.
    #[error("{0}")]
    Hydraulics(SolveError),
    /// A solve failed; `context` names what was solved (e.g. `max-day condition`). The message
    /// is in the network's `units` (a convergence failure's head changes in ft for a US network).
    #[error("{context}: {}", .source.describe(*.units))]
    Solve {
        context: String,
        units: UnitSystem,
        source: SolveError,
    },
    /// The worker threads could not be started.
    #[error("cannot start worker threads: {0}")]
    Threads(crate::fireflow::SweepError),
    /// The upsizing search could not start its worker threads (a failed solve of the search is
    /// a [`CliError::Solve`], worded in the network's units: see [`CliError::upsize`]).
    #[error(transparent)]
    Upsize(UpsizeError),
    /// A field flow test could not be simulated, or the calibration failed.
    #[error(transparent)]
    FlowTest(#[from] crate::flowtest::compare::FlowTestError),
    /// An output file could not be written.
    #[error(transparent)]
    Report(#[from] ReportError),
    /// `--out` cannot be an output folder (seen before the analysis).
    #[error(transparent)]
    OutputFolder(ReportError),
    /// A journal or partial could not be read, written or combined (refusals are input errors).
    #[error(transparent)]
    Journal(#[from] crate::journal::JournalError),
}

impl CliError {
    /// A failed solve of what `context` names.
    pub fn solve(context: impl Into<String>, units: UnitSystem, source: SolveError) -> Self {
        CliError::Solve {
            context: context.into(),
            units,
            source,
        }
    }

    /// A failed upsizing search, its solver failure worded in the network's `units`.
    pub fn upsize(units: UnitSystem, error: UpsizeError) -> Self {
        match error {
            UpsizeError::Solve(source) => CliError::solve("upsizing search", units, source),
            other => CliError::Upsize(other),
        }
    }

    /// The documented exit status of this error's class.
    pub fn exit_status(&self) -> ExitStatus {
        match self {
            CliError::Argument(_)
            | CliError::OutputIsNetworkFolder(_)
            | CliError::OutputFolder(_)
            | CliError::OutputNotEmpty(_)
            | CliError::Network { .. }
            | CliError::NetworkListed { .. }
            | CliError::Criteria { .. }
            | CliError::Project { .. }
            | CliError::Buildings { .. }
            | CliError::NoNeededFlow(_)
            | CliError::UnknownHydrant { .. }
            | CliError::Sizes { .. }
            | CliError::CostTable { .. }
            | CliError::UnpricedSizes { .. }
            | CliError::Budget
            | CliError::FlowTests { .. }
            | CliError::Import { .. }
            | CliError::CalibrationGroups { .. } => ExitStatus::InputError,
            CliError::Hydraulics(_)
            | CliError::Solve { .. }
            | CliError::Threads(_)
            | CliError::Upsize(_)
            | CliError::FlowTest(_)
            | CliError::Report(_) => ExitStatus::AnalysisError,
            CliError::Journal(e) => e.exit_status(),
        }
    }

    /// What the command line prints on standard error: the diagnostics, if any, in full, then
    /// `firemain: ` and the message. A cost table's diagnostics say it all (each names the file);
    /// `validate` has listed the network's on standard output.
    pub fn stderr_text(&self) -> String {
        match self {
            CliError::Network { diagnostics, .. }
            | CliError::Criteria { diagnostics }
            | CliError::Project { diagnostics }
            | CliError::Buildings { diagnostics }
            | CliError::FlowTests { diagnostics }
            | CliError::Import { diagnostics } => {
                format!(
                    "{}firemain: {self}\n",
                    report::validate::diagnostics(diagnostics)
                )
            }
            CliError::CostTable { diagnostics, .. }
            | CliError::CalibrationGroups { diagnostics } => {
                report::validate::diagnostics(diagnostics)
            }
            CliError::NetworkListed { .. } => String::new(),
            _ => format!("firemain: {self}\n"),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn each_class_maps_to_its_documented_exit_status() {
        // The exit codes of README.md, "Exit codes" (common practice, no source).
        assert_eq!(CliError::Budget.exit_status(), ExitStatus::InputError);
        assert_eq!(
            CliError::from(ArgumentError::ZeroThreads { max: 8 }).exit_status(),
            ExitStatus::InputError
        );
        let write = ReportError::Write {
            path: PathBuf::from("out"),
            source: std::io::Error::other("disk full"),
        };
        assert_eq!(
            CliError::from(write).exit_status(),
            ExitStatus::AnalysisError
        );
    }

    #[test]
    fn messages_are_prefixed_once_and_validate_prints_nothing_more() {
        // common practice, no source: the wording tests/bad_input.rs checks through the binary.
        assert_eq!(
            CliError::Budget.stderr_text(),
            "firemain: --budget must be a positive number\n"
        );
        assert_eq!(
            CliError::NetworkListed {
                dir: PathBuf::from("net")
            }
            .stderr_text(),
            ""
        );
    }

    #[test]
    fn a_failed_solve_is_worded_in_the_network_units() {
        // 10.5156 m = 34.5 ft exactly (1 ft = 0.3048 m, international foot, 1959).
        let source = SolveError::NoConvergence {
            iterations: 200,
            junctions: vec![("J1".into(), 10.5156)],
            links: vec![],
        };
        let us = CliError::solve("max-day condition", UnitSystem::Us, source.clone());
        assert!(us.to_string().contains("`J1` (34.5 ft)"), "{us}");
        let upsize = CliError::upsize(UnitSystem::Us, UpsizeError::Solve(source));
        assert!(
            upsize.to_string().starts_with("upsizing search: "),
            "{upsize}"
        );
        assert!(!upsize.to_string().contains(" m)"), "{upsize}");
    }
}
