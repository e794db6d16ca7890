//! `firemain solve`: the steady state at one demand condition, on stdout and in result files.

use std::path::PathBuf;

use clap::ValueEnum;

use firemain::cli::CliError;
use firemain::hydraulics::Hydraulics;
use firemain::report::{self, OutputSet};
use firemain::steady::{self, Condition};

use super::{analysis_date, check_output_folder, emit, load, write_set, Outcome, VERSION};

/// Arguments of `firemain solve`.
#[derive(clap::Args)]
pub struct SolveArgs {
    /// Network folder.
    network: PathBuf,
    /// Demand condition (demand x the factor in model.toml).
    #[arg(long, value_enum, default_value_t = ConditionArg::MaxDay)]
    condition: ConditionArg,
    /// Also write node_results.csv, pipe_results.csv (and pump/valve results) here.
    #[arg(long)]
    out: Option<PathBuf>,
    /// Also write a GeoJSON twin of each result table with positions (node, pipe, pump and valve results), in the network's
    /// CRS (see docs/gis.md). Needs --out.
    #[arg(long, requires = "out")]
    geojson: bool,
}

#[derive(Clone, Copy, ValueEnum)]
enum ConditionArg {
    Average,
    MaxDay,
    PeakHour,
    MinHour,
}

impl From<ConditionArg> for Condition {
    fn from(c: ConditionArg) -> Self {
        match c {
            ConditionArg::Average => Condition::Average,
            ConditionArg::MaxDay => Condition::MaxDay,
            ConditionArg::PeakHour => Condition::PeakHour,
            ConditionArg::MinHour => Condition::MinHour,
        }
    }
}

pub fn run(args: &SolveArgs) -> Result<Outcome, CliError> {
    let condition = Condition::from(args.condition);
    check_output_folder(args.out.as_deref(), &args.network)?;
    let loaded = load(&args.network)?;
    let net = &loaded.network;
    let hydraulics = Hydraulics::new(net).map_err(CliError::Hydraulics)?;
    let solution = steady::solve_condition(&hydraulics, condition)
        .map_err(|e| CliError::solve(format!("{} condition", condition.name()), net.units, e))?;
    let result = steady::steady_report(&hydraulics, condition, &solution);
    emit(report::solve::terminal(&result, net.units));
    if let Some(out) = &args.out {
        let set = report::solve::files(&result, net.units).map(|files| OutputSet {
            command: "solve",
            run_id: report::new_run_id(),
            generated: analysis_date(),
            generator: format!("firemain {VERSION}"),
            files,
        });
        let set = match args.geojson {
            true => set.and_then(|set| report::geojson::with_twins(set, net)),
            false => set,
        };
        write_set(out, &args.network, set, false)?;
    }
    Ok(Outcome::Success)
}
