//! The `firemain` command line: parses arguments, dispatches to a command of `commands`, and maps
//! its outcome or error to the documented exit status in one place. No logic here.

use std::process::ExitCode;

use clap::{Parser, Subcommand};

mod commands;

use commands::{check, flowtest, import, merge, permit, solve, upsize, validate};

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
    Validate(validate::ValidateArgs),
    /// Screen every hydrant's available fire flow and every junction's service pressure.
    #[command(after_help = EXIT_CODES)]
    Check(check::CheckArgs),
    /// Propose the cheapest main upsizings that make failing hydrants pass.
    #[command(after_help = EXIT_CODES)]
    Upsize(upsize::UpsizeArgs),
    /// Reduce field hydrant flow tests, compare them with the model, calibrate roughness.
    #[command(after_help = EXIT_CODES)]
    Flowtest(flowtest::FlowtestArgs),
    /// Each building's needed fire flow against the hydrants within reach, flowing together.
    #[command(after_help = EXIT_CODES)]
    Permit(permit::PermitArgs),
    /// Solve the steady state at one demand condition.
    #[command(after_help = EXIT_CODES)]
    Solve(solve::SolveArgs),
    /// Make a network folder from GIS layers (GeoJSON), reporting every change.
    #[command(after_help = EXIT_CODES)]
    Import(import::ImportArgs),
    /// Assemble the files of a sharded check (`check --shard K/N`) from its partials.
    #[command(after_help = EXIT_CODES)]
    Merge(merge::MergeArgs),
}

fn main() -> ExitCode {
    let result = match Cli::parse().command {
        Command::Validate(args) => validate::run(&args),
        Command::Solve(args) => solve::run(&args),
        Command::Upsize(args) => upsize::run(&args),
        Command::Check(args) => check::run(&args),
        Command::Flowtest(args) => flowtest::run(&args),
        Command::Permit(args) => permit::run(&args),
        Command::Import(args) => import::run(&args),
        Command::Merge(args) => merge::run(&args),
    };
    if let Err(e) = &result {
        eprint!("{}", e.stderr_text());
    }
    ExitCode::from(firemain::cli::exit_status(&result) as u8)
}
