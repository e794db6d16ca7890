//! `firemain check`: every hydrant's available fire flow and every junction's service pressure,
//! on stdout and in the report files.

use std::path::PathBuf;
use std::sync::atomic::{AtomicBool, Ordering};
use std::time::{Duration, Instant};

use indicatif::{ProgressBar, ProgressDrawTarget, ProgressStyle};

use firemain::cli::{available_cores, check_threads, select_hydrants, CliError};
use firemain::fireflow::{supply_curves, sweep, FireFlowSetup, SweepStats};
use firemain::hydraulics::Hydraulics;
use firemain::model::project::load_project;
use firemain::report;
use firemain::report::check::{CheckReport, FieldCurve, FieldTestSummary};
use firemain::service::service_check;
use firemain::weakmains::weak_mains;

use super::{
    analysis_date, check_output_folder, criteria_for, emit, load, show_progress, write_set,
    Outcome, VERSION,
};

/// Arguments of `firemain check`.
#[derive(clap::Args)]
pub struct CheckArgs {
    /// Network folder.
    network: PathBuf,
    /// Criteria set (TOML), e.g. criteria/common-practice-us.toml.
    #[arg(long)]
    criteria: PathBuf,
    /// Also write fireflow.csv, service.csv, weak_mains.csv, report.md, report.html and
    /// report.json here
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
    /// Field flow tests (flowtests.csv, see `firemain flowtest`): the report states how the
    /// model compares with them.
    #[arg(long, value_name = "FILE")]
    tests: Option<PathBuf>,
    /// Project file (project.toml, see docs/project-format.md): the title block of report.md and
    /// report.html (project, site, applicant, reference, prepared and checked by, revision).
    #[arg(long, value_name = "FILE")]
    project: Option<PathBuf>,
    /// Also write a GeoJSON twin of each result table with positions (fireflow, service, weak_mains), in the network's
    /// CRS (see docs/gis.md). Needs --out.
    #[arg(long, requires = "out")]
    geojson: bool,
}

/// Solved points of each supply curve on a hydrant sheet (the required and available flows are
/// added to them).
const CURVE_POINTS: usize = 12;

pub fn run(args: &CheckArgs) -> Result<Outcome, CliError> {
    let threads = check_threads(args.threads, available_cores())?;
    check_output_folder(args.out.as_deref(), &args.network)?;
    let project = match &args.project {
        Some(path) => {
            Some(load_project(path).map_err(|diagnostics| CliError::Project { diagnostics })?)
        }
        None => None,
    };
    let loaded = load(&args.network)?;
    let net = &loaded.network;
    let criteria = criteria_for(&args.criteria, net)?;
    let field_tests = match &args.tests {
        Some(path) => Some(field_test_summary(path, net, &criteria)?),
        None => None,
    };
    let selected = select_hydrants(net, &args.hydrants)?;
    let partial = !selected.is_empty();
    let indices = if partial {
        selected
    } else {
        (0..net.hydrants.len()).collect()
    };
    let hydraulics = Hydraulics::new(net).map_err(CliError::Hydraulics)?;
    let setup = FireFlowSetup::new(&hydraulics, &criteria)
        .map_err(|e| CliError::solve("max-day condition", e))?;
    let service = service_check(&hydraulics, &criteria)
        .map_err(|e| CliError::solve("service-pressure conditions", e))?;
    let bar = SweepBar::new(indices.len(), args.quiet);
    let (results, stats) =
        sweep(&setup, &indices, threads, &|done| bar.set(done)).map_err(CliError::Threads)?;
    bar.finish();
    let weak = weak_mains(net, &criteria, &results);
    // The sheets of report.html: failing hydrants, or every hydrant asked for.
    let curves = match &args.out {
        Some(_) => {
            let sheets: Vec<usize> = results
                .iter()
                .filter(|r| partial || r.outcome != firemain::fireflow::Outcome::Pass)
                .map(|r| r.hydrant)
                .collect();
            supply_curves(
                &setup,
                &sheets,
                &results,
                CURVE_POINTS,
                threads.unwrap_or(0),
            )
            .map_err(CliError::Threads)?
        }
        None => Vec::new(),
    };
    let warnings = report::input_warnings(&loaded.diagnostics, &criteria.warnings);
    let report = CheckReport {
        network: net,
        criteria: &criteria,
        results: &results,
        service: &service,
        generated: analysis_date(),
        run_id: report::new_run_id(),
        version: VERSION,
        input_warnings: &warnings,
        partial,
        weak_mains: &weak,
        field_tests: field_tests.as_ref(),
        project: project.as_ref(),
        curves: &curves,
    };
    emit(report.summary());
    emit(report.terminal_table());
    emit(report.terminal_weak_mains());
    if args.stats {
        eprintln!("{}", stats_line(&stats));
    }
    if let Some(out) = &args.out {
        let set = report.output_set(args.stats.then_some(&stats));
        let set = match args.geojson {
            true => set.and_then(|set| report::geojson::with_twins(set, net)),
            false => set,
        };
        write_set(out, &args.network, set, args.quiet)?;
    }
    Ok(Outcome::from_findings(report.has_findings()))
}

/// The model against the field flow tests in `path`, at the criteria's floor.
fn field_test_summary(
    path: &std::path::Path,
    net: &firemain::model::Network,
    criteria: &firemain::criteria::Criteria,
) -> Result<FieldTestSummary, CliError> {
    let tests = firemain::model::flowtests::load_flowtests(path, net)
        .map_err(|diagnostics| CliError::FlowTests { diagnostics })?;
    if !tests.diagnostics.is_empty() {
        eprint!(
            "{}",
            report::validate::diagnostics_brief(&tests.diagnostics)
        );
    }
    let list = &tests.tests.tests;
    let comparison = firemain::flowtest::compare::compare(net, list, criteria.residual_floor_kpa)?;
    let worst = comparison
        .worst(list)
        .map(|w| (list[w.test].id.clone(), w.residual_diff_kpa(&list[w.test])));
    let curves = comparison
        .rows
        .iter()
        .map(|row| {
            let t = &list[row.test];
            FieldCurve {
                test: t.id.clone(),
                hydrant: t.residual_hydrant,
                static_kpa: t.static_kpa,
                residual_kpa: t.residual_kpa,
                flow_m3s: row.reduced.total_flow_m3s,
                projected_m3s: row.reduced.projected_m3s,
            }
        })
        .collect();
    Ok(FieldTestSummary {
        curves,
        file: path.display().to_string(),
        tests: list.len(),
        rms_static_kpa: comparison.rms_static_kpa,
        rms_residual_kpa: comparison.rms_residual_kpa,
        worst,
    })
}

/// The `--stats` line.
fn stats_line(stats: &SweepStats) -> String {
    format!(
        "sweep: {} hydrants, {} solves, {} iterations, {} numeric factorizations ({:.2} per hydrant on average, {} at most), {:.2} s wall, {} thread(s)",
        stats.hydrants,
        stats.solves,
        stats.iterations,
        stats.factorizations,
        stats.factorizations_per_hydrant_mean,
        stats.factorizations_per_hydrant_max,
        stats.wall_time.as_secs_f64(),
        stats.threads
    )
}

/// A progress bar on stderr that appears only when the sweep lasts over a second, and never
/// when stderr is not a terminal or with --quiet.
struct SweepBar {
    bar: Option<ProgressBar>,
    started: Instant,
    shown: AtomicBool,
}

impl SweepBar {
    fn new(total: usize, quiet: bool) -> Self {
        let bar = show_progress(quiet).then(|| {
            let bar =
                ProgressBar::with_draw_target(Some(total as u64), ProgressDrawTarget::hidden());
            if let Ok(style) = ProgressStyle::with_template(
                "{msg} [{bar:40}] {pos}/{len} hydrants, {elapsed} elapsed, ETA {eta}",
            ) {
                bar.set_style(style.progress_chars("=> "));
            }
            bar.set_message("fire-flow sweep");
            bar
        });
        SweepBar {
            bar,
            started: Instant::now(),
            shown: AtomicBool::new(false),
        }
    }

    /// `done` hydrants analysed.
    fn set(&self, done: usize) {
        if let Some(bar) = &self.bar {
            if !self.shown.load(Ordering::Relaxed)
                && self.started.elapsed() > Duration::from_secs(1)
            {
                self.shown.store(true, Ordering::Relaxed);
                bar.set_draw_target(ProgressDrawTarget::stderr());
            }
            bar.set_position(done as u64);
        }
    }

    fn finish(&self) {
        if let Some(bar) = &self.bar {
            bar.finish_and_clear();
        }
    }
}
