//! `firemain upsize`: the cheapest verified main upsizings, on stdout and in the report files
//! with the proposed network.

use std::path::PathBuf;
use std::time::Duration;

use indicatif::ProgressBar;

use firemain::cli::upsize::{check_proposed, UpsizeArgs as Options};
use firemain::cli::{available_cores, check_threads, CliError};
use firemain::model::read_network_files;
use firemain::report::upsize::{UpsizeReport, PROPOSED_NETWORK};
use firemain::report::{self, check::CheckReport, ReportError};
use firemain::upsizing::{plan_upsizing, Progress};

use super::{
    analysis_date, check_output_folder, criteria_for, emit, load, show_progress, write_set,
    Outcome, VERSION,
};

/// Arguments of `firemain upsize`.
#[derive(clap::Args)]
pub struct UpsizeArgs {
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
    /// Also write a GeoJSON twin of each result table with positions (upsize_plan, upsize_hydrants, weak_mains_after), in the network's
    /// CRS (see docs/gis.md). Needs --out.
    #[arg(long, requires = "out")]
    geojson: bool,
    /// Worker threads, 1 to min(4 x cores, 1024) (default: all cores).
    #[arg(long)]
    threads: Option<usize>,
    /// No progress messages on stderr.
    #[arg(long)]
    quiet: bool,
}

pub fn run(args: &UpsizeArgs) -> Result<Outcome, CliError> {
    let threads = check_threads(args.threads, available_cores())?;
    // The proposed network goes to OUT/proposed-network, which must not be the network itself.
    let proposed_dir = args.out.as_ref().map(|o| o.join(PROPOSED_NETWORK));
    check_output_folder(args.out.as_deref(), &args.network)?;
    check_output_folder(proposed_dir.as_deref(), &args.network)?;
    let loaded = load(&args.network)?;
    let net = &loaded.network;
    let criteria = criteria_for(&args.criteria, net)?;
    let options = Options {
        hydrants: &args.hydrants,
        sizes: args.sizes.as_deref(),
        costs: args.costs.as_deref(),
        budget: args.budget,
        threads,
    };
    let config = options.to_config(net)?;
    let spinner = show_progress(args.quiet).then(|| {
        let s = ProgressBar::new_spinner();
        s.enable_steady_tick(Duration::from_millis(200));
        s
    });
    let progress = |p: Progress| {
        if let Some(s) = &spinner {
            s.set_message(progress_text(p));
        }
    };
    let plan = plan_upsizing(net, &criteria, &config, &progress)
        .map_err(|e| CliError::upsize(net.units, e))?;
    if let Some(s) = &spinner {
        s.finish_and_clear();
    }
    let proposed = check_proposed(&plan, &criteria)?;
    let generated = analysis_date();
    let warnings = report::input_warnings(&loaded.diagnostics, &criteria.warnings);
    let after = CheckReport {
        network: &plan.proposed,
        criteria: &criteria,
        results: &plan.after,
        service: &proposed.service,
        generated: generated.clone(),
        run_id: report::new_run_id(),
        version: VERSION,
        input_warnings: &warnings,
        partial: config.hydrants.is_some(),
        weak_mains: &proposed.weak_mains,
        field_tests: None,
        project: None,
        curves: &[],
    };
    let report = UpsizeReport {
        network: net,
        plan: &plan,
        costs: &config.costs,
        after: &after,
        generated,
        version: VERSION,
    };
    emit(report.terminal());
    if let Some(out) = &args.out {
        let set = read_network_files(&args.network)
            .map_err(|e| ReportError::Write {
                path: args.network.clone(),
                source: e,
            })
            .and_then(|files| report.output_set(files));
        let set = match args.geojson {
            true => set.and_then(|set| report::geojson::with_twins(set, net)),
            false => set,
        };
        write_set(out, &args.network, set, args.quiet)?;
    }
    Ok(Outcome::from_findings(after.has_findings()))
}

/// The spinner's message for a step of the search.
fn progress_text(p: Progress) -> String {
    match p {
        Progress::Initial => "checking the existing network".to_string(),
        Progress::Round { round, failing } => {
            format!("round {round}: {failing} targeted hydrant(s) still failing")
        }
        Progress::Pruning { index, of } => format!("pruning: upsizing {index} of {of}"),
        Progress::Verifying => "verifying the proposal".to_string(),
    }
}
