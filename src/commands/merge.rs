//! `firemain merge`: the files of a sharded sweep (`check --shard K/N`), assembled from its
//! partials as one set, byte-identical to an unsharded run's (run id and date aside).

use std::path::{Path, PathBuf};

use firemain::cli::{available_cores, check_threads, CliError};
use firemain::fireflow::FireFlowSetup;
use firemain::hydraulics::Hydraulics;
use firemain::journal::{gather, verify_input, InputRef};

use super::check::{Assembly, Inputs};
use super::{check_output_folder, Outcome};

/// Arguments of `firemain merge`.
#[derive(clap::Args)]
pub struct MergeArgs {
    /// Folders holding the shards' partials (check-partial-K-of-N.jsonl), or the partial files.
    #[arg(required = true, value_name = "DIR")]
    dirs: Vec<PathBuf>,
    /// Write the check's files here (fireflow.csv ... report.json, manifest-check.toml).
    #[arg(long)]
    out: PathBuf,
    /// The network folder, if not where the partials say (shared storage mounted elsewhere);
    /// its files must be the ones the shards analysed.
    #[arg(long, value_name = "DIR")]
    network: Option<PathBuf>,
    /// The criteria file, if not where the partials say; it must be the one the shards used.
    #[arg(long, value_name = "FILE")]
    criteria: Option<PathBuf>,
    /// The flow tests file, if the shards had one and it is not where the partials say.
    #[arg(long, value_name = "FILE")]
    tests: Option<PathBuf>,
    /// The project file, if the shards had one and it is not where the partials say.
    #[arg(long, value_name = "FILE")]
    project: Option<PathBuf>,
    /// Worker threads for the supply curves, 1 to min(4 x cores, 1024) (default: all cores).
    #[arg(long)]
    threads: Option<usize>,
    /// Also write the GeoJSON twins of the result tables (as `check --geojson`).
    #[arg(long)]
    geojson: bool,
    /// No messages on stderr.
    #[arg(long)]
    quiet: bool,
}

/// Where to read an input: the override, else where the partials recorded it; its content is
/// checked against the recorded hash.
fn input(
    what: &'static str,
    given: Option<&Path>,
    recorded: &InputRef,
    network: bool,
) -> Result<PathBuf, CliError> {
    let path = given.map_or_else(|| recorded.resolve(), Path::to_path_buf);
    verify_input(what, &path, recorded, network)?;
    Ok(path)
}

pub fn run(args: &MergeArgs) -> Result<Outcome, CliError> {
    let threads = check_threads(args.threads, available_cores())?;
    let gathered = gather(&args.dirs)?;
    let h = &gathered.header;
    let network = input("network", args.network.as_deref(), &h.network, true)?;
    let criteria = input("criteria", args.criteria.as_deref(), &h.criteria, false)?;
    let tests = match &h.tests {
        Some(t) => Some(input("flow tests", args.tests.as_deref(), t, false)?),
        None => None,
    };
    let project = match &h.project {
        Some(p) => Some(input("project file", args.project.as_deref(), p, false)?),
        None => None,
    };
    check_output_folder(Some(&args.out), &network)?;
    if !args.quiet {
        eprintln!(
            "merging {} partial(s) of {} shard(s): {}",
            gathered.files.len(),
            gathered.count,
            gathered
                .files
                .iter()
                .map(|p| p.display().to_string())
                .collect::<Vec<_>>()
                .join(", ")
        );
    }
    let hydrants = h.hydrants.clone();
    let inputs = Inputs::read(
        &network,
        &criteria,
        tests.as_deref(),
        project.as_deref(),
        &hydrants,
    )?;
    let net = &inputs.loaded.network;
    let results = gathered.assemble(&inputs.indices, |i| net.hydrants[i].id.clone())?;
    let hydraulics = Hydraulics::new(net).map_err(CliError::Hydraulics)?;
    let setup = FireFlowSetup::new(&hydraulics, &inputs.criteria)
        .map_err(|e| CliError::solve("max-day condition", net.units, e))?;
    let assembly = Assembly {
        threads,
        out: Some(&args.out),
        network_dir: &network,
        quiet: args.quiet,
        stats: None,
        geojson: args.geojson,
    };
    assembly.report(&inputs, &setup, &results)
}
