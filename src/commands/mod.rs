//! Each command's glue: call the library, print what it returns, and hand back the command's
//! [`Outcome`] or [`CliError`]; `main.rs` maps either to the exit status in one place. A new
//! command is one file here plus one variant of `main.rs`'s `Command`.

use std::path::{Path, PathBuf};

use firemain::cli::CliError;
use firemain::criteria::{load_criteria, Criteria};
use firemain::model::{load_network, Loaded, Network};
use firemain::report::{self, OutputSet};

pub mod check;
pub mod flowtest;
pub mod import;
mod journalled;
pub mod merge;
pub mod permit;
pub mod solve;
pub mod upsize;
pub mod validate;

pub use firemain::cli::Outcome;

/// The version that reports and manifests name.
pub const VERSION: &str = env!("CARGO_PKG_VERSION");

/// Writes to stdout; a closed pipe (e.g. `firemain validate NET | head`) is not an error.
pub fn emit(text: impl AsRef<str>) {
    use std::io::Write;
    let _ = std::io::stdout().lock().write_all(text.as_ref().as_bytes());
}

/// Refuses, before any analysis runs, an output folder that is the network folder or that could
/// not be created (a file at its path or at one of its parents').
pub fn check_output_folder(out: Option<&Path>, network: &Path) -> Result<(), CliError> {
    match out {
        Some(out) if report::is_same_folder(out, network) => {
            Err(CliError::OutputIsNetworkFolder(out.to_path_buf()))
        }
        Some(out) => report::check_output_path(out).map_err(CliError::OutputFolder),
        None => Ok(()),
    }
}

/// Loads a network, printing its warnings and notes to stderr.
pub fn load(dir: &Path) -> Result<Loaded, CliError> {
    let loaded = load_network(dir).map_err(|diagnostics| CliError::Network {
        dir: dir.to_path_buf(),
        diagnostics,
    })?;
    if !loaded.diagnostics.is_empty() {
        eprint!(
            "{}",
            report::validate::diagnostics_brief(&loaded.diagnostics)
        );
    }
    Ok(loaded)
}

/// Reads the criteria for `net`, printing their warnings to stderr.
pub fn criteria_for(path: &Path, net: &Network) -> Result<Criteria, CliError> {
    let criteria =
        load_criteria(path, net).map_err(|diagnostics| CliError::Criteria { diagnostics })?;
    if !criteria.warnings.is_empty() {
        eprint!(
            "{}",
            report::validate::diagnostics_brief(&criteria.warnings)
        );
    }
    Ok(criteria)
}

/// Writes a run's files as one set into `out` and lists them on stderr (unless `quiet`).
pub fn write_set(
    out: &Path,
    network: &Path,
    set: Result<OutputSet, report::ReportError>,
    quiet: bool,
) -> Result<(), CliError> {
    let paths: Vec<PathBuf> = set.and_then(|set| report::write_outputs(out, network, &set))?;
    if !quiet {
        for p in paths {
            eprintln!("wrote {}", p.display());
        }
    }
    Ok(())
}

/// The analysis date: `SOURCE_DATE_EPOCH` (the reproducible-builds convention) when set, else now.
pub fn analysis_date() -> String {
    let time = std::env::var("SOURCE_DATE_EPOCH")
        .ok()
        .and_then(|s| s.parse::<u64>().ok())
        .map(|secs| std::time::UNIX_EPOCH + std::time::Duration::from_secs(secs))
        .unwrap_or_else(std::time::SystemTime::now);
    humantime::format_rfc3339_seconds(time).to_string()
}

/// Whether progress may be drawn: stderr is a terminal and `--quiet` was not given.
pub fn show_progress(quiet: bool) -> bool {
    use std::io::IsTerminal;
    !quiet && std::io::stderr().is_terminal()
}
