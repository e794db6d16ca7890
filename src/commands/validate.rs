//! `firemain validate`: every problem of a network folder, then its summary, on stdout.

use std::path::PathBuf;

use firemain::cli::CliError;
use firemain::model::{load_network, validate};
use firemain::report;

use super::{emit, Outcome};

/// Arguments of `firemain validate`.
#[derive(clap::Args)]
pub struct ValidateArgs {
    /// Network folder (model.toml, junctions.csv, sources.csv, pipes.csv, ...).
    network: PathBuf,
}

pub fn run(args: &ValidateArgs) -> Result<Outcome, CliError> {
    // The listing is this command's output, so it goes to stdout even when it holds errors.
    match load_network(&args.network) {
        Ok(loaded) => {
            emit(report::validate::diagnostics(&loaded.diagnostics));
            emit("\n");
            let summary = validate::summarize(&loaded.network);
            emit(report::validate::summary(&loaded.network, &summary));
            Ok(Outcome::Success)
        }
        Err(diags) => {
            emit(report::validate::diagnostics(&diags));
            Err(CliError::NetworkListed {
                dir: args.network.clone(),
            })
        }
    }
}
