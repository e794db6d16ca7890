//! The `firemain` command line: parses arguments, calls the library, prints. No logic here.

use std::path::PathBuf;
use std::process::ExitCode;

use clap::{Parser, Subcommand, ValueEnum};

use firemain::hydraulics::Hydraulics;
use firemain::model::{load_network, validate, Loaded};
use firemain::report::{self, write_outputs};
use firemain::steady::{self, Condition};
use firemain::ExitStatus;

const EXIT_CODES: &str = "Exit codes: 0 = success (everything passes), 1 = findings (something fails its criteria), \
2 = input error (command line, network or criteria files), 3 = analysis error (no hydraulic solution, or output not written).";

/// Fire-flow and service-pressure screening of water distribution networks.
///
/// Results are screening estimates from a model: confirm them with field flow tests; the local
/// fire code official and a licensed professional engineer decide.
#[derive(Parser)]
#[command(name = "firemain", version, about, after_help = EXIT_CODES)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand)]
enum Command {
    /// Check a network folder and summarise it; lists every problem with file, line and column.
    #[command(after_help = EXIT_CODES)]
    Validate {
        /// Network folder (model.toml, junctions.csv, sources.csv, pipes.csv, ...).
        network: PathBuf,
    },
    /// Solve the steady state at one demand condition.
    #[command(after_help = EXIT_CODES)]
    Solve {
        /// Network folder.
        network: PathBuf,
        /// Demand condition (demand x the factor in model.toml).
        #[arg(long, value_enum, default_value_t = ConditionArg::MaxDay)]
        condition: ConditionArg,
        /// Also write node_results.csv, pipe_results.csv (and pump/valve results) here.
        #[arg(long)]
        out: Option<PathBuf>,
    },
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

fn main() -> ExitCode {
    let cli = Cli::parse();
    let status = match cli.command {
        Command::Validate { network } => validate_command(&network),
        Command::Solve {
            network,
            condition,
            out,
        } => solve_command(&network, condition.into(), out.as_deref()),
    };
    ExitCode::from(status as u8)
}

/// Loads a network, printing its findings to stderr; `None` on errors.
fn load(dir: &std::path::Path) -> Option<Loaded> {
    match load_network(dir) {
        Ok(loaded) => {
            if !loaded.diagnostics.is_empty() {
                eprint!("{}", report::validate::diagnostics(&loaded.diagnostics));
            }
            Some(loaded)
        }
        Err(diags) => {
            eprint!("{}", report::validate::diagnostics(&diags));
            eprintln!(
                "firemain: the network in {} has errors; nothing was analysed",
                dir.display()
            );
            None
        }
    }
}

fn validate_command(dir: &std::path::Path) -> ExitStatus {
    match load_network(dir) {
        Ok(loaded) => {
            print!("{}", report::validate::diagnostics(&loaded.diagnostics));
            println!();
            let summary = validate::summarize(&loaded.network);
            print!("{}", report::validate::summary(&loaded.network, &summary));
            ExitStatus::Success
        }
        Err(diags) => {
            print!("{}", report::validate::diagnostics(&diags));
            ExitStatus::InputError
        }
    }
}

fn solve_command(
    dir: &std::path::Path,
    condition: Condition,
    out: Option<&std::path::Path>,
) -> ExitStatus {
    let Some(loaded) = load(dir) else {
        return ExitStatus::InputError;
    };
    let net = &loaded.network;
    let hydraulics = match Hydraulics::new(net) {
        Ok(h) => h,
        Err(e) => {
            eprintln!("firemain: {e}");
            return ExitStatus::AnalysisError;
        }
    };
    let solution = match steady::solve_condition(&hydraulics, condition) {
        Ok(s) => s,
        Err(e) => {
            eprintln!("firemain: {} condition: {e}", condition.name());
            return ExitStatus::AnalysisError;
        }
    };
    let result = steady::steady_report(&hydraulics, condition, &solution);
    print!("{}", report::solve::terminal(&result, net.units));
    if let Some(out) = out {
        let written = report::solve::files(&result, net.units)
            .and_then(|files| write_outputs(out, dir, &files));
        match written {
            Ok(paths) => {
                for p in paths {
                    eprintln!("wrote {}", p.display());
                }
            }
            Err(e) => {
                eprintln!("firemain: {e}");
                return ExitStatus::AnalysisError;
            }
        }
    }
    ExitStatus::Success
}
