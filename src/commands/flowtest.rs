//! `firemain flowtest`: field hydrant flow tests reduced, compared with the model, and (with
//! `--calibrate-by`) the roughness of pipe groups fitted to them.

use std::path::PathBuf;

use firemain::cli::CliError;
use firemain::flowtest::calibrate::{calibrate, groups_by_label};
use firemain::flowtest::compare::compare;
use firemain::flowtest::DEFAULT_FLOOR_KPA;
use firemain::model::flowtests::{load_flowtests, pipe_labels};
use firemain::model::read_network_files;
use firemain::report::flowtest::{FlowTestReport, CALIBRATED_NETWORK};
use firemain::report::{self, validate::diagnostics_brief};

use super::{analysis_date, check_output_folder, criteria_for, emit, load, write_set, Outcome};

/// Arguments of `firemain flowtest`.
#[derive(clap::Args)]
pub struct FlowtestArgs {
    /// Network folder.
    network: PathBuf,
    /// Field tests (flowtests.csv; flowtest_sources.csv beside it is read too).
    #[arg(long)]
    tests: PathBuf,
    /// Criteria set (TOML) whose residual floor the projections use (default: 20 psi).
    #[arg(long)]
    criteria: Option<PathBuf>,
    /// Fit one roughness per group of pipes, grouped by this column of pipes.csv (e.g. material).
    #[arg(long, value_name = "COLUMN")]
    calibrate_by: Option<String>,
    /// Write flowtest_results.csv, calibration.csv, flowtest.md (and the calibrated network) here.
    #[arg(long)]
    out: Option<PathBuf>,
    /// No messages on stderr about the files written.
    #[arg(long)]
    quiet: bool,
}

/// Runs `firemain flowtest`: findings when some test misfits the model by more than 5 psi.
pub fn run(args: &FlowtestArgs) -> Result<Outcome, CliError> {
    check_output_folder(args.out.as_deref(), &args.network)?;
    let calibrated = args.out.as_ref().map(|o| o.join(CALIBRATED_NETWORK));
    check_output_folder(calibrated.as_deref(), &args.network)?;
    let loaded = load(&args.network)?;
    let net = &loaded.network;
    let tests = load_flowtests(&args.tests, net)
        .map_err(|diagnostics| CliError::FlowTests { diagnostics })?;
    if !tests.diagnostics.is_empty() {
        eprint!("{}", diagnostics_brief(&tests.diagnostics));
    }
    let criteria = match &args.criteria {
        Some(path) => Some(criteria_for(path, net)?),
        None => None,
    };
    let floor = criteria
        .as_ref()
        .map_or(DEFAULT_FLOOR_KPA, |c| c.residual_floor_kpa);
    let bounds = criteria.as_ref().and_then(|c| c.calibration_bounds);
    let criteria_name = args.criteria.as_ref().map(|p| p.display().to_string());
    let groups = match &args.calibrate_by {
        Some(column) => Some(groups_by_label(
            &pipe_labels(&args.network, column, net)
                .map_err(|diagnostics| CliError::CalibrationGroups { diagnostics })?,
        )),
        None => None,
    };
    let list = &tests.tests.tests;
    let comparison = compare(net, list, floor)?;
    let calibration = match &groups {
        Some(groups) => {
            let flows: Vec<Vec<f64>> = comparison
                .rows
                .iter()
                .map(|r| r.reduced.outlet_flows_m3s.clone())
                .collect();
            Some(calibrate(net, list, &flows, groups, bounds)?)
        }
        None => None,
    };
    let report = FlowTestReport {
        network: net,
        tests: &tests.tests,
        comparison: &comparison,
        calibration: calibration.as_ref().zip(args.calibrate_by.as_deref()),
        criteria: criteria_name,
        generated: analysis_date(),
        run_id: report::new_run_id(),
        version: super::VERSION,
    };
    emit(report.terminal());
    if let Some(out) = &args.out {
        let set = read_network_files(&args.network)
            .map_err(|e| report::ReportError::Write {
                path: args.network.clone(),
                source: e,
            })
            .and_then(|files| report.output_set(files));
        write_set(out, &args.network, set, args.quiet)?;
    }
    Ok(if report.has_large_misfit() {
        Outcome::Findings
    } else {
        Outcome::Success
    })
}
