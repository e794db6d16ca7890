//! The `firemain` command line: parses arguments, calls the library, prints. No logic here.

use std::path::PathBuf;
use std::process::ExitCode;

use clap::{Parser, Subcommand, ValueEnum};

mod commands_flowtest;

use firemain::hydraulics::Hydraulics;
use firemain::model::{load_network, validate, Loaded};
use firemain::report::upsize::PROPOSED_NETWORK;
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
    Check(CheckArgs),
    /// Propose the cheapest main upsizings that make failing hydrants pass.
    #[command(after_help = EXIT_CODES)]
    Upsize(UpsizeArgs),
    /// Reduce field hydrant flow tests, compare them with the model, calibrate roughness.
    #[command(after_help = EXIT_CODES)]
    Flowtest(commands_flowtest::FlowtestArgs),
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

/// Writes to stdout; a closed pipe (e.g. `firemain validate NET | head`) is not an error.
fn emit(text: impl AsRef<str>) {
    use std::io::Write;
    let _ = std::io::stdout().lock().write_all(text.as_ref().as_bytes());
}

/// Refuses an output folder that is the network folder, before any analysis runs.
fn output_folder_ok(out: Option<&std::path::Path>, network: &std::path::Path) -> bool {
    match out {
        Some(out) if report::is_same_folder(out, network) => {
            eprintln!(
                "firemain: --out {} is the network folder; choose another folder so that no input file can be overwritten",
                out.display()
            );
            false
        }
        _ => true,
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
        Command::Upsize(args) => upsize_command(&args),
        Command::Check(args) => check_command(&args),
        Command::Flowtest(args) => commands_flowtest::run(&args),
    };
    ExitCode::from(status as u8)
}

/// Loads a network, printing its findings to stderr; `None` on errors.
fn load(dir: &std::path::Path) -> Option<Loaded> {
    match load_network(dir) {
        Ok(loaded) => {
            if !loaded.diagnostics.is_empty() {
                eprint!(
                    "{}",
                    report::validate::diagnostics_brief(&loaded.diagnostics)
                );
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
            emit(report::validate::diagnostics(&loaded.diagnostics));
            emit(
                "
",
            );
            let summary = validate::summarize(&loaded.network);
            emit(report::validate::summary(&loaded.network, &summary));
            ExitStatus::Success
        }
        Err(diags) => {
            emit(report::validate::diagnostics(&diags));
            ExitStatus::InputError
        }
    }
}

fn solve_command(
    dir: &std::path::Path,
    condition: Condition,
    out: Option<&std::path::Path>,
) -> ExitStatus {
    if !output_folder_ok(out, dir) {
        return ExitStatus::InputError;
    }
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
    emit(report::solve::terminal(&result, net.units));
    if let Some(out) = out {
        let written = report::solve::files(&result, net.units).and_then(|files| {
            let set = report::OutputSet {
                command: "solve",
                run_id: report::new_run_id(),
                generated: analysis_date(),
                generator: format!("firemain {}", env!("CARGO_PKG_VERSION")),
                files,
            };
            write_outputs(out, dir, &set)
        });
        if !report_written(written, false) {
            return ExitStatus::AnalysisError;
        }
    }
    ExitStatus::Success
}

/// `--threads` checked against this machine's cores; `None` after printing the error.
fn threads_arg(requested: Option<usize>) -> Option<Option<usize>> {
    match firemain::cli::check_threads(requested, firemain::cli::available_cores()) {
        Ok(threads) => Some(threads),
        Err(e) => {
            eprintln!("firemain: {e}");
            None
        }
    }
}

/// Reads the criteria for `net`, printing their warnings or errors; `None` on errors.
fn criteria_for(
    path: &std::path::Path,
    net: &firemain::model::Network,
) -> Option<firemain::criteria::Criteria> {
    match firemain::criteria::load_criteria(path, net) {
        Ok(c) => {
            if !c.warnings.is_empty() {
                eprint!("{}", report::validate::diagnostics_brief(&c.warnings));
            }
            Some(c)
        }
        Err(diags) => {
            eprint!("{}", report::validate::diagnostics(&diags));
            eprintln!("firemain: the criteria have errors; nothing was analysed");
            None
        }
    }
}

/// The hydrants named by `--hydrant` (each once), or `None` after reporting an unknown id.
fn selected_hydrants(net: &firemain::model::Network, ids: &[String]) -> Option<Vec<usize>> {
    let mut selected = Vec::new();
    for id in ids {
        match net.hydrant_by_id(id) {
            Some(h) if selected.contains(&h) => {}
            Some(h) => selected.push(h),
            None => {
                eprintln!("firemain: --hydrant {id}: no hydrant with this id in hydrants.csv (ids are compared exactly)");
                return None;
            }
        }
    }
    Some(selected)
}

/// Reports the files written (unless quiet), or the error; `false` on error.
fn report_written(written: Result<Vec<PathBuf>, report::ReportError>, quiet: bool) -> bool {
    match written {
        Ok(paths) => {
            if !quiet {
                for p in paths {
                    eprintln!("wrote {}", p.display());
                }
            }
            true
        }
        Err(e) => {
            eprintln!("firemain: {e}");
            false
        }
    }
}

/// Arguments of `firemain check`.
#[derive(clap::Args)]
struct CheckArgs {
    /// Network folder.
    network: PathBuf,
    /// Criteria set (TOML), e.g. criteria/common-practice-us.toml.
    #[arg(long)]
    criteria: PathBuf,
    /// Also write fireflow.csv, service.csv, weak_mains.csv, report.md and report.json here
    /// (with their manifest, manifest-check.toml).
    #[arg(long)]
    out: Option<PathBuf>,
    /// Analyse only this hydrant (repeatable).
    #[arg(long = "hydrant", value_name = "ID")]
    hydrants: Vec<String>,
    /// Worker threads, 1 to min(4 x cores, 1024) (default: all cores).
    #[arg(long)]
    threads: Option<usize>,
    /// No progress bar or messages on stderr.
    #[arg(long)]
    quiet: bool,
    /// Print the work done by the sweep (solves, factorizations, wall time).
    #[arg(long)]
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
    use firemain::fireflow::{sweep, FireFlowSetup, Outcome};
    use firemain::report::check::CheckReport;
    use firemain::service::service_check;

    let Some(threads) = threads_arg(args.threads) else {
        return ExitStatus::InputError;
    };
    if !output_folder_ok(args.out.as_deref(), &args.network) {
        return ExitStatus::InputError;
    }
    let Some(loaded) = load(&args.network) else {
        return ExitStatus::InputError;
    };
    let net = &loaded.network;
    let Some(criteria) = criteria_for(&args.criteria, net) else {
        return ExitStatus::InputError;
    };
    let Some(mut indices) = selected_hydrants(net, &args.hydrants) else {
        return ExitStatus::InputError;
    };
    let partial = !indices.is_empty();
    if !partial {
        indices = (0..net.hydrants.len()).collect();
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
    let (results, stats) = match sweep(&setup, &indices, threads, &progress) {
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
    let warnings = report::input_warnings(&loaded.diagnostics, &criteria.warnings);
    let report = CheckReport {
        network: net,
        criteria: &criteria,
        results: &results,
        service: &service,
        generated: analysis_date(),
        run_id: report::new_run_id(),
        version: env!("CARGO_PKG_VERSION"),
        input_warnings: &warnings,
        partial,
        weak_mains: &weak,
    };
    emit(report.summary());
    emit(report.terminal_table());
    emit(report.terminal_weak_mains());
    if args.stats {
        eprintln!(
            "sweep: {} hydrants, {} solves, {} iterations, {} numeric factorizations ({:.2} per hydrant on average, {} at most), {:.2} s wall, {} thread(s)",
            stats.hydrants,
            stats.solves,
            stats.iterations,
            stats.factorizations,
            stats.factorizations_per_hydrant_mean,
            stats.factorizations_per_hydrant_max,
            stats.wall_time.as_secs_f64(),
            stats.threads
        );
    }
    if let Some(out) = &args.out {
        let written = report
            .output_set(args.stats.then_some(&stats))
            .and_then(|set| write_outputs(out, &args.network, &set));
        if !report_written(written, args.quiet) {
            return ExitStatus::AnalysisError;
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

/// Arguments of `firemain upsize`.
#[derive(clap::Args)]
struct UpsizeArgs {
    /// Network folder.
    network: PathBuf,
    /// Criteria set (TOML).
    #[arg(long)]
    criteria: PathBuf,
    /// Candidate diameters in the network's diameter unit, comma-separated
    /// (default: 6,8,10,12,14,16,18,20,24 in, or 150,...,600 mm).
    #[arg(long, value_delimiter = ',')]
    sizes: Option<Vec<f64>>,
    /// Cost table: CSV with columns diameter, cost_per_length (network units). Without it,
    /// length x diameter is used as a cost proxy.
    #[arg(long)]
    costs: Option<PathBuf>,
    /// Consider only this hydrant (repeatable).
    #[arg(long = "hydrant", value_name = "ID")]
    hydrants: Vec<String>,
    /// Largest total cost (cost-table units, or the proxy's units).
    #[arg(long)]
    budget: Option<f64>,
    /// Write upsize_plan.csv, upsize_hydrants.csv, weak_mains_after.csv, upsize_report.md and
    /// proposed-network/ here.
    #[arg(long)]
    out: Option<PathBuf>,
    /// Worker threads, 1 to min(4 x cores, 1024) (default: all cores).
    #[arg(long)]
    threads: Option<usize>,
    /// No progress messages on stderr.
    #[arg(long)]
    quiet: bool,
}

/// The input network's files, to copy into the proposed network's folder.
fn network_files(dir: &std::path::Path) -> std::io::Result<Vec<(String, Vec<u8>)>> {
    let mut out = Vec::new();
    for name in [
        "model.toml",
        "junctions.csv",
        "sources.csv",
        "pipes.csv",
        "hydrants.csv",
        "pumps.csv",
        "valves.csv",
    ] {
        let path = dir.join(name);
        if path.exists() {
            out.push((name.to_string(), std::fs::read(&path)?));
        }
    }
    Ok(out)
}

fn upsize_command(args: &UpsizeArgs) -> ExitStatus {
    use firemain::fireflow::Outcome;
    use firemain::model::costs::load_cost_table;
    use firemain::report::check::CheckReport;
    use firemain::report::upsize::UpsizeReport;
    use firemain::service::service_check;
    use firemain::units::{Quantity, UnitSystem};
    use firemain::upsizing::{
        plan_upsizing, CostModel, Progress, UpsizeConfig, DEFAULT_SIZES_IN, DEFAULT_SIZES_MM,
    };

    // The proposed network goes to OUT/proposed-network, which must not be the network itself.
    let Some(threads) = threads_arg(args.threads) else {
        return ExitStatus::InputError;
    };
    let proposed_dir = args.out.as_ref().map(|o| o.join(PROPOSED_NETWORK));
    if !output_folder_ok(args.out.as_deref(), &args.network)
        || !output_folder_ok(proposed_dir.as_deref(), &args.network)
    {
        return ExitStatus::InputError;
    }
    let Some(loaded) = load(&args.network) else {
        return ExitStatus::InputError;
    };
    let net = &loaded.network;
    let Some(criteria) = criteria_for(&args.criteria, net) else {
        return ExitStatus::InputError;
    };
    let Some(selected) = selected_hydrants(net, &args.hydrants) else {
        return ExitStatus::InputError;
    };
    let units = net.units;
    let given: Vec<f64> = match &args.sizes {
        Some(v) => v.clone(),
        None => match units {
            UnitSystem::Us => DEFAULT_SIZES_IN.to_vec(),
            UnitSystem::Si => DEFAULT_SIZES_MM.to_vec(),
        },
    };
    if given.is_empty() || given.iter().any(|d| !(d.is_finite() && *d > 0.0)) {
        eprintln!(
            "firemain: --sizes must be positive diameters in {}, comma-separated",
            units.symbol(Quantity::Diameter)
        );
        return ExitStatus::InputError;
    }
    let mut sizes_m: Vec<f64> = given
        .iter()
        .map(|d| units.to_si(Quantity::Diameter, *d))
        .collect();
    sizes_m.sort_by(f64::total_cmp);
    sizes_m.dedup_by(|a, b| (*a - *b).abs() < 1e-9);
    let costs = match &args.costs {
        Some(path) => match load_cost_table(path, units) {
            Ok(table) => {
                let missing: Vec<String> = sizes_m
                    .iter()
                    .filter(|&&d| !table.iter().any(|(t, _)| (t - d).abs() < 1e-6 * d))
                    .map(|&d| report::num(units.from_si(Quantity::Diameter, d), 1))
                    .collect();
                if !missing.is_empty() {
                    eprintln!(
                        "firemain: {}: no cost for the candidate size(s) {} {}; add a row for each, or choose --sizes that the table prices",
                        path.display(),
                        missing.join(", "),
                        units.symbol(Quantity::Diameter)
                    );
                    return ExitStatus::InputError;
                }
                CostModel::Table(table)
            }
            Err(diags) => {
                eprint!("{}", report::validate::diagnostics(&diags));
                return ExitStatus::InputError;
            }
        },
        None => CostModel::LengthTimesDiameter,
    };
    if let Some(b) = args.budget {
        if !(b.is_finite() && b > 0.0) {
            eprintln!("firemain: --budget must be a positive number");
            return ExitStatus::InputError;
        }
    }
    let config = UpsizeConfig {
        sizes_m,
        costs: costs.clone(),
        hydrants: (!selected.is_empty()).then(|| selected.clone()),
        budget: args.budget,
        threads,
    };
    let spinner = (!args.quiet && {
        use std::io::IsTerminal;
        std::io::stderr().is_terminal()
    })
    .then(|| {
        let s = indicatif::ProgressBar::new_spinner();
        s.enable_steady_tick(std::time::Duration::from_millis(200));
        s
    });
    let progress = |p: Progress| {
        if let Some(s) = &spinner {
            s.set_message(match p {
                Progress::Initial => "checking the existing network".to_string(),
                Progress::Round { round, failing } => {
                    format!("round {round}: {failing} targeted hydrant(s) still failing")
                }
                Progress::Pruning { index, of } => format!("pruning: upsizing {index} of {of}"),
                Progress::Verifying => "verifying the proposal".to_string(),
            });
        }
    };
    let plan = match plan_upsizing(net, &criteria, &config, &progress) {
        Ok(p) => p,
        Err(e) => {
            eprintln!("firemain: {e}");
            return ExitStatus::AnalysisError;
        }
    };
    if let Some(s) = &spinner {
        s.finish_and_clear();
    }
    let service = match Hydraulics::new(&plan.proposed).and_then(|h| service_check(&h, &criteria)) {
        Ok(s) => s,
        Err(e) => {
            eprintln!("firemain: service-pressure conditions of the proposed network: {e}");
            return ExitStatus::AnalysisError;
        }
    };
    let weak_after = firemain::weakmains::weak_mains(&plan.proposed, &criteria, &plan.after);
    let generated = analysis_date();
    let warnings = report::input_warnings(&loaded.diagnostics, &criteria.warnings);
    let after = CheckReport {
        network: &plan.proposed,
        criteria: &criteria,
        results: &plan.after,
        service: &service,
        generated: generated.clone(),
        run_id: report::new_run_id(),
        version: env!("CARGO_PKG_VERSION"),
        input_warnings: &warnings,
        partial: !selected.is_empty(),
        weak_mains: &weak_after,
    };
    let report = UpsizeReport {
        network: net,
        plan: &plan,
        costs: &costs,
        after: &after,
        generated,
        version: env!("CARGO_PKG_VERSION"),
    };
    emit(report.terminal());
    if let Some(out) = &args.out {
        let written = network_files(&args.network)
            .map_err(|e| report::ReportError::Write {
                path: args.network.clone(),
                source: e,
            })
            .and_then(|files| report.output_set(files))
            .and_then(|set| write_outputs(out, &args.network, &set));
        if !report_written(written, args.quiet) {
            return ExitStatus::AnalysisError;
        }
    }
    let all_pass = plan.after.iter().all(|r| r.outcome == Outcome::Pass)
        && service.exceptions().next().is_none();
    if all_pass {
        ExitStatus::Success
    } else {
        ExitStatus::Findings
    }
}
