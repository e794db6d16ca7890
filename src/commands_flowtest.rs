//! `firemain flowtest`: arguments, and the calls into the library. Parses and prints only.

use std::path::{Path, PathBuf};

use firemain::flowtest::calibrate::{calibrate, groups_by_label};
use firemain::flowtest::compare::compare;
use firemain::flowtest::DEFAULT_FLOOR_KPA;
use firemain::model::flowtests::{load_flowtests, pipe_labels, read_network_files};
use firemain::model::load_network;
use firemain::report::flowtest::{FlowTestReport, CALIBRATED_NETWORK};
use firemain::report::{self, validate::diagnostics, validate::diagnostics_brief, write_outputs};
use firemain::ExitStatus;

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

fn emit(text: &str) {
    use std::io::Write;
    let _ = std::io::stdout().lock().write_all(text.as_bytes());
}

fn date() -> String {
    let time = std::env::var("SOURCE_DATE_EPOCH")
        .ok()
        .and_then(|s| s.parse::<u64>().ok())
        .map(|secs| std::time::UNIX_EPOCH + std::time::Duration::from_secs(secs))
        .unwrap_or_else(std::time::SystemTime::now);
    humantime::format_rfc3339_seconds(time).to_string()
}

fn same_folder(out: Option<&Path>, network: &Path) -> bool {
    let calibrated = out.map(|o| o.join(CALIBRATED_NETWORK));
    let same = [out, calibrated.as_deref()]
        .into_iter()
        .flatten()
        .any(|o| report::is_same_folder(o, network));
    same
}

/// Runs `firemain flowtest`. Exit 1 when some test misfits the model by more than 5 psi.
pub fn run(args: &FlowtestArgs) -> ExitStatus {
    if same_folder(args.out.as_deref(), &args.network) {
        eprintln!("firemain: --out is the network folder; choose another folder so that no input file can be overwritten");
        return ExitStatus::InputError;
    }
    let loaded = match load_network(&args.network) {
        Ok(l) => l,
        Err(d) => {
            eprint!("{}", diagnostics(&d));
            eprintln!(
                "firemain: the network in {} has errors; nothing was analysed",
                args.network.display()
            );
            return ExitStatus::InputError;
        }
    };
    if !loaded.diagnostics.is_empty() {
        eprint!("{}", diagnostics_brief(&loaded.diagnostics));
    }
    let net = &loaded.network;
    let tests = match load_flowtests(&args.tests, net) {
        Ok(t) => t,
        Err(d) => {
            eprint!("{}", diagnostics(&d));
            eprintln!("firemain: the flow tests have errors; nothing was analysed");
            return ExitStatus::InputError;
        }
    };
    if !tests.diagnostics.is_empty() {
        eprint!("{}", diagnostics_brief(&tests.diagnostics));
    }
    let (floor, criteria_name) = match &args.criteria {
        Some(path) => match firemain::criteria::load_criteria(path, net) {
            Ok(c) => (c.residual_floor_kpa, Some(path.display().to_string())),
            Err(d) => {
                eprint!("{}", diagnostics(&d));
                eprintln!("firemain: the criteria have errors; nothing was analysed");
                return ExitStatus::InputError;
            }
        },
        None => (DEFAULT_FLOOR_KPA, None),
    };
    let groups = match &args.calibrate_by {
        Some(column) => match pipe_labels(&args.network, column, net) {
            Ok(labels) => Some(groups_by_label(&labels)),
            Err(d) => {
                eprint!("{}", diagnostics(&d));
                return ExitStatus::InputError;
            }
        },
        None => None,
    };
    let list = &tests.tests.tests;
    let comparison = match compare(net, list, floor) {
        Ok(c) => c,
        Err(e) => {
            eprintln!("firemain: {e}");
            return ExitStatus::AnalysisError;
        }
    };
    let calibration = match &groups {
        Some(groups) => {
            let flows: Vec<Vec<f64>> = comparison
                .rows
                .iter()
                .map(|r| r.reduced.outlet_flows_m3s.clone())
                .collect();
            match calibrate(net, list, &flows, groups, None) {
                Ok(c) => Some(c),
                Err(e) => {
                    eprintln!("firemain: calibration: {e}");
                    return ExitStatus::AnalysisError;
                }
            }
        }
        None => None,
    };
    let report = FlowTestReport {
        network: net,
        tests: &tests.tests,
        comparison: &comparison,
        calibration: calibration.as_ref().zip(args.calibrate_by.as_deref()),
        criteria: criteria_name,
        generated: date(),
        run_id: report::new_run_id(),
        version: env!("CARGO_PKG_VERSION"),
    };
    emit(&report.terminal());
    if let Some(out) = &args.out {
        let written = read_network_files(&args.network)
            .map_err(|e| report::ReportError::Write {
                path: args.network.clone(),
                source: e,
            })
            .and_then(|files| report.output_set(files))
            .and_then(|set| write_outputs(out, &args.network, &set));
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
    if report.has_large_misfit() {
        ExitStatus::Findings
    } else {
        ExitStatus::Success
    }
}
