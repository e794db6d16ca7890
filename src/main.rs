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
    /// Screen every hydrant's available fire flow and every junction's service pressure.
    #[command(after_help = EXIT_CODES)]
    Check {
        /// Network folder.
        network: PathBuf,
        /// Criteria set (TOML), e.g. criteria/common-practice-us.toml.
        #[arg(long)]
        criteria: PathBuf,
        /// Also write fireflow.csv, service.csv, report.md and report.json here.
        #[arg(long)]
        out: Option<PathBuf>,
        /// Analyse only this hydrant (repeatable).
        #[arg(long = "hydrant", value_name = "ID")]
        hydrants: Vec<String>,
        /// Worker threads (default: all cores).
        #[arg(long)]
        threads: Option<usize>,
        /// No progress bar or messages on stderr.
        #[arg(long)]
        quiet: bool,
        /// Print the work done by the sweep (solves, factorizations, wall time).
        #[arg(long)]
        stats: bool,
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
        Command::Check {
            network,
            criteria,
            out,
            hydrants,
            threads,
            quiet,
            stats,
        } => check_command(&CheckArgs {
            network,
            criteria,
            out,
            hydrants,
            threads,
            quiet,
            stats,
        }),
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

struct CheckArgs {
    network: PathBuf,
    criteria: PathBuf,
    out: Option<PathBuf>,
    hydrants: Vec<String>,
    threads: Option<usize>,
    quiet: bool,
    stats: bool,
}

/// The analysis date: `SOURCE_DATE_EPOCH` (the reproducible-builds convention) when set, else now.
fn analysis_date() -> String {
    let time = std::env::var("SOURCE_DATE_EPOCH")
        .ok()
        .and_then(|s| s.parse::<u64>().ok())
        .map(|secs| std::time::UNIX_EPOCH + std::time::Duration::from_secs(secs))
        .unwrap_or_else(std::time::SystemTime::now);
    humantime::format_rfc3339_seconds(time).to_string()
}

/// A progress bar on stderr that appears only when the sweep lasts over a second, and never
/// when stderr is not a terminal or with --quiet.
fn progress_bar(total: usize, quiet: bool) -> Option<indicatif::ProgressBar> {
    use std::io::IsTerminal;
    if quiet || !std::io::stderr().is_terminal() {
        return None;
    }
    let bar = indicatif::ProgressBar::with_draw_target(
        Some(total as u64),
        indicatif::ProgressDrawTarget::hidden(),
    );
    if let Ok(style) = indicatif::ProgressStyle::with_template(
        "{msg} [{bar:40}] {pos}/{len} hydrants, {elapsed} elapsed, ETA {eta}",
    ) {
        bar.set_style(style.progress_chars("=> "));
    }
    bar.set_message("fire-flow sweep");
    Some(bar)
}

fn check_command(args: &CheckArgs) -> ExitStatus {
    use firemain::criteria::load_criteria;
    use firemain::fireflow::{sweep, FireFlowSetup, Outcome};
    use firemain::report::check::CheckReport;
    use firemain::service::service_check;

    let Some(loaded) = load(&args.network) else {
        return ExitStatus::InputError;
    };
    let net = &loaded.network;
    let criteria = match load_criteria(&args.criteria, net) {
        Ok(c) => c,
        Err(diags) => {
            eprint!("{}", report::validate::diagnostics(&diags));
            eprintln!("firemain: the criteria have errors; nothing was analysed");
            return ExitStatus::InputError;
        }
    };
    let mut indices = Vec::new();
    for id in &args.hydrants {
        match net.hydrant_by_id(id) {
            Some(h) => indices.push(h),
            None => {
                eprintln!("firemain: --hydrant {id}: no hydrant with this id in hydrants.csv (ids are compared exactly)");
                return ExitStatus::InputError;
            }
        }
    }
    let partial = !indices.is_empty();
    if !partial {
        indices = (0..net.hydrants.len()).collect();
    }
    if args.threads == Some(0) {
        eprintln!("firemain: --threads must be at least 1");
        return ExitStatus::InputError;
    }
    let hydraulics = match Hydraulics::new(net) {
        Ok(h) => h,
        Err(e) => {
            eprintln!("firemain: {e}");
            return ExitStatus::AnalysisError;
        }
    };
    let setup = match FireFlowSetup::new(&hydraulics, &criteria) {
        Ok(s) => s,
        Err(e) => {
            eprintln!("firemain: max-day condition: {e}");
            return ExitStatus::AnalysisError;
        }
    };
    let service = match service_check(&hydraulics, &criteria) {
        Ok(s) => s,
        Err(e) => {
            eprintln!("firemain: service-pressure conditions: {e}");
            return ExitStatus::AnalysisError;
        }
    };
    let bar = progress_bar(indices.len(), args.quiet);
    let started = std::time::Instant::now();
    let shown = std::sync::atomic::AtomicBool::new(false);
    let progress = |done: usize| {
        if let Some(bar) = &bar {
            if !shown.load(std::sync::atomic::Ordering::Relaxed)
                && started.elapsed() > std::time::Duration::from_secs(1)
            {
                shown.store(true, std::sync::atomic::Ordering::Relaxed);
                bar.set_draw_target(indicatif::ProgressDrawTarget::stderr());
            }
            bar.set_position(done as u64);
        }
    };
    let (results, stats) = match sweep(&setup, &indices, args.threads, &progress) {
        Ok(r) => r,
        Err(e) => {
            eprintln!("firemain: cannot start worker threads: {e}");
            return ExitStatus::AnalysisError;
        }
    };
    if let Some(bar) = &bar {
        bar.finish_and_clear();
    }
    let weak = firemain::weakmains::weak_mains(net, &criteria, &results);
    let report = CheckReport {
        network: net,
        criteria: &criteria,
        results: &results,
        service: &service,
        generated: analysis_date(),
        version: env!("CARGO_PKG_VERSION"),
        partial,
        weak_mains: &weak,
    };
    print!("{}", report.summary());
    print!("{}", report.terminal_table());
    print!("{}", report.terminal_weak_mains());
    if args.stats {
        eprintln!(
            "sweep: {} hydrants, {} solves, {} numeric factorizations ({:.2} per hydrant on average, {} at most), {:.2} s wall, {} thread(s)",
            stats.hydrants,
            stats.solves,
            stats.factorizations,
            stats.factorizations_per_hydrant_mean,
            stats.factorizations_per_hydrant_max,
            stats.wall_time.as_secs_f64(),
            stats.threads
        );
    }
    if let Some(out) = &args.out {
        let written = report
            .files(args.stats.then_some(&stats))
            .and_then(|files| write_outputs(out, &args.network, &files));
        match written {
            Ok(paths) => {
                if !args.quiet {
                    for p in paths {
                        eprintln!("wrote {}", p.display());
                    }
                }
            }
            Err(e) => {
                eprintln!("firemain: {e}");
                return ExitStatus::AnalysisError;
            }
        }
    }
    let findings =
        results.iter().any(|r| r.outcome != Outcome::Pass) || service.exceptions().next().is_some();
    if findings {
        ExitStatus::Findings
    } else {
        ExitStatus::Success
    }
}
