//! `firemain check`: every hydrant's available fire flow and every junction's service pressure,
//! on stdout and in the report files.

use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicBool, AtomicUsize, Ordering};
use std::time::{Duration, Instant};

use indicatif::{ProgressBar, ProgressDrawTarget, ProgressStyle};

use firemain::cli::{available_cores, check_threads, select_hydrants, CliError};
use firemain::fireflow::{
    supply_curves, sweep, FireFlowSetup, HydrantResult, SolveRole, SweepStats,
};
use firemain::hydraulics::Hydraulics;
use firemain::journal::Shard;
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
    pub(super) network: PathBuf,
    /// Criteria set (TOML), e.g. criteria/common-practice-us.toml.
    #[arg(long)]
    pub(super) criteria: PathBuf,
    /// Also write fireflow.csv, service.csv, weak_mains.csv, report.md, report.html and
    /// report.json here
    /// (with their manifest, manifest-check.toml).
    #[arg(long)]
    pub(super) out: Option<PathBuf>,
    /// Analyse only this hydrant (repeatable).
    #[arg(long = "hydrant", value_name = "ID")]
    pub(super) hydrants: Vec<String>,
    /// Worker threads, 1 to min(4 x cores, 1024) (default: all cores).
    #[arg(long)]
    pub(super) threads: Option<usize>,
    /// No progress bar or messages on stderr.
    #[arg(long)]
    pub(super) quiet: bool,
    /// Print the work done by the sweep (solves, factorizations, wall time).
    #[arg(long)]
    pub(super) stats: bool,
    /// Field flow tests (flowtests.csv, see `firemain flowtest`): the report states how the
    /// model compares with them.
    #[arg(long, value_name = "FILE")]
    pub(super) tests: Option<PathBuf>,
    /// Project file (project.toml, see docs/project-format.md): the title block of report.md and
    /// report.html (project, site, applicant, reference, prepared and checked by, revision).
    #[arg(long, value_name = "FILE")]
    pub(super) project: Option<PathBuf>,
    /// Also write a GeoJSON twin of each result table with positions (fireflow, service,
    /// weak_mains), in the network's CRS (see docs/gis.md). Needs --out.
    #[arg(long, requires = "out")]
    pub(super) geojson: bool,
    /// Go on with the sweep journalled in --out (check-journal.jsonl), skipping the hydrants it
    /// holds; refused if the network, criteria or selection changed.
    #[arg(long, requires = "out")]
    pub(super) resume: bool,
    /// Analyse only shard K of N (K from 0 to N-1; interleaved hydrants) and write its partial
    /// result, check-partial-K-of-N.jsonl, into --out; `firemain merge` assembles the files.
    #[arg(long, value_name = "K/N", requires = "out")]
    pub(super) shard: Option<Shard>,
}

/// Solved points of each supply curve on a hydrant sheet (the required and available flows are
/// added to them).
const CURVE_POINTS: usize = 12;

/// The inputs of a check, read and checked: what `merge` reads again to assemble the files.
pub(super) struct Inputs {
    pub loaded: firemain::model::Loaded,
    pub criteria: firemain::criteria::Criteria,
    pub field_tests: Option<FieldTestSummary>,
    pub project: Option<firemain::model::project::Project>,
    /// The selected hydrants, in order (every hydrant without `--hydrant`).
    pub indices: Vec<usize>,
    /// Whether `--hydrant` selected some.
    pub partial: bool,
}

impl Inputs {
    /// Reads the network, criteria, flow tests and project file, and selects the hydrants.
    pub fn read(
        network: &Path,
        criteria: &Path,
        tests: Option<&Path>,
        project: Option<&Path>,
        hydrants: &[String],
    ) -> Result<Self, CliError> {
        let project = match project {
            Some(path) => {
                Some(load_project(path).map_err(|diagnostics| CliError::Project { diagnostics })?)
            }
            None => None,
        };
        let loaded = load(network)?;
        let net = &loaded.network;
        let criteria = criteria_for(criteria, net)?;
        let field_tests = match tests {
            Some(path) => Some(field_test_summary(path, net, &criteria)?),
            None => None,
        };
        let selected = select_hydrants(net, hydrants)?;
        let partial = !selected.is_empty();
        let indices = if partial {
            selected
        } else {
            (0..net.hydrants.len()).collect()
        };
        Ok(Inputs {
            loaded,
            criteria,
            field_tests,
            project,
            indices,
            partial,
        })
    }

    /// The ids of the `--hydrant` selection (empty: every hydrant), as a journal records them.
    pub fn selection_ids(&self) -> Vec<String> {
        if !self.partial {
            return Vec::new();
        }
        let net = &self.loaded.network;
        self.indices
            .iter()
            .map(|&h| net.hydrants[h].id.clone())
            .collect()
    }
}

pub fn run(args: &CheckArgs) -> Result<Outcome, CliError> {
    let threads = check_threads(args.threads, available_cores())?;
    check_output_folder(args.out.as_deref(), &args.network)?;
    let inputs = Inputs::read(
        &args.network,
        &args.criteria,
        args.tests.as_deref(),
        args.project.as_deref(),
        &args.hydrants,
    )?;
    let net = &inputs.loaded.network;
    let hydraulics = Hydraulics::new(net).map_err(CliError::Hydraulics)?;
    let setup = FireFlowSetup::new(&hydraulics, &inputs.criteria)
        .map_err(|e| CliError::solve("max-day condition", net.units, e))?;
    let Some(out) = &args.out else {
        let bar = SweepBar::new(inputs.indices.len(), 0, args.quiet);
        let (results, stats) = sweep(&setup, &inputs.indices, threads, &|done| bar.set(done))
            .map_err(CliError::Threads)?;
        bar.finish();
        let assembly = Assembly {
            threads,
            out: None,
            network_dir: &args.network,
            quiet: args.quiet,
            stats: args.stats.then_some(&stats),
            geojson: false,
        };
        return assembly.report(&inputs, &setup, &results);
    };
    super::journalled::run(args, out, &inputs, &setup, threads)
}

/// How a check's results become its report and files.
pub(super) struct Assembly<'a> {
    pub threads: Option<usize>,
    pub out: Option<&'a Path>,
    /// The network folder, which no output may overwrite.
    pub network_dir: &'a Path,
    pub quiet: bool,
    /// The sweep's work, with `--stats`.
    pub stats: Option<&'a SweepStats>,
    /// Also write the GeoJSON twins of the result tables.
    pub geojson: bool,
}

impl Assembly<'_> {
    /// Everything derived from the sweep's results (service pressures, weak mains, supply
    /// curves, reports), printed and written: the same bytes whether the results were computed
    /// in this process, read from a journal, or merged from shards.
    pub fn report(
        &self,
        inputs: &Inputs,
        setup: &FireFlowSetup<'_>,
        results: &[HydrantResult],
    ) -> Result<Outcome, CliError> {
        let net = &inputs.loaded.network;
        let criteria = &inputs.criteria;
        let service = service_check(setup.hydraulics, criteria)
            .map_err(|e| CliError::solve("service-pressure conditions", net.units, e))?;
        let weak = weak_mains(net, criteria, results);
        // The sheets of report.html: failing hydrants, or every hydrant asked for.
        let curves = match self.out {
            Some(_) => {
                let sheets: Vec<usize> = results
                    .iter()
                    .filter(|r| inputs.partial || r.outcome != firemain::fireflow::Outcome::Pass)
                    .map(|r| r.hydrant)
                    .collect();
                supply_curves(
                    setup,
                    &sheets,
                    results,
                    CURVE_POINTS,
                    self.threads.unwrap_or(0),
                )
                .map_err(CliError::Threads)?
            }
            None => Vec::new(),
        };
        let warnings = report::input_warnings(&inputs.loaded.diagnostics, &criteria.warnings);
        let report = CheckReport {
            network: net,
            criteria,
            results,
            service: &service,
            generated: analysis_date(),
            run_id: report::new_run_id(),
            version: VERSION,
            input_warnings: &warnings,
            partial: inputs.partial,
            weak_mains: &weak,
            field_tests: inputs.field_tests.as_ref(),
            project: inputs.project.as_ref(),
            curves: &curves,
        };
        emit(report.summary());
        emit(report.terminal_table());
        emit(report.terminal_weak_mains());
        if let Some(stats) = self.stats {
            eprintln!("{}", stats_line(stats));
        }
        if let Some(out) = self.out {
            let set = report.output_set(self.stats);
            let set = match self.geojson {
                true => set.and_then(|set| report::geojson::with_twins(set, net)),
                false => set,
            };
            write_set(out, self.network_dir, set, self.quiet)?;
        }
        Ok(Outcome::from_findings(report.has_findings()))
    }
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

/// The `--stats` lines: the sweep's work, then its work by the role of each solve.
pub(super) fn stats_line(stats: &SweepStats) -> String {
    let mut text = sweep_line(stats);
    if stats.hydrants_by_role > 0 {
        text.push('\n');
        text.push_str(&by_role_line(stats));
    }
    text
}

/// The work by role of the hydrants analysed in this run: solves / iterations / factorizations.
fn by_role_line(stats: &SweepStats) -> String {
    let roles: Vec<String> = SolveRole::ALL
        .iter()
        .map(|&role| {
            let w = stats.by_role.of(role);
            format!(
                "{} {} / {} / {}",
                role.label(),
                w.solves,
                w.iterations,
                w.factorizations
            )
        })
        .collect();
    format!(
        "by role ({} hydrants; solves / iterations / factorizations): {}",
        stats.hydrants_by_role,
        roles.join(", ")
    )
}

/// The `--stats` line of the whole sweep.
fn sweep_line(stats: &SweepStats) -> String {
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

/// Progress of a sweep on stderr, never with --quiet. On a terminal: a bar, redrawn, that
/// appears only when the sweep lasts over a second. Elsewhere (a log file, as a cluster's
/// scheduler writes): once the sweep has lasted [`PLAIN_AFTER`], one plain line per
/// [`PLAIN_STEP_PERCENT`] % of the hydrants, and one at the end.
pub(super) struct SweepBar {
    bar: Option<ProgressBar>,
    plain: Option<PlainProgress>,
    started: Instant,
    shown: AtomicBool,
}

/// A sweep shorter than this prints no plain progress line (a log needs none).
const PLAIN_AFTER: Duration = Duration::from_secs(10);
/// Percent of the hydrants between two plain progress lines.
const PLAIN_STEP_PERCENT: usize = 5;

/// The plain lines' state: hydrants in all, done before this process (read from a journal),
/// and the next percent to print at.
struct PlainProgress {
    total: usize,
    before: usize,
    next_percent: AtomicUsize,
}

impl SweepBar {
    /// A sweep of `total` hydrants of which `before` were done by an earlier run.
    pub(super) fn new(total: usize, before: usize, quiet: bool) -> Self {
        use std::io::IsTerminal;
        let bar = show_progress(quiet).then(|| {
            let bar =
                ProgressBar::with_draw_target(Some(total as u64), ProgressDrawTarget::hidden());
            if let Ok(style) = ProgressStyle::with_template(
                "{msg} [{bar:40}] {pos}/{len} hydrants, {elapsed} elapsed, ETA {eta}",
            ) {
                bar.set_style(style.progress_chars("=> "));
            }
            bar.set_message("fire-flow sweep");
            bar.set_position(before as u64);
            bar.reset_eta();
            bar
        });
        let plain =
            (!quiet && !std::io::stderr().is_terminal() && total > 0).then(|| PlainProgress {
                total,
                before,
                next_percent: AtomicUsize::new(
                    (before * 100 / total / PLAIN_STEP_PERCENT + 1) * PLAIN_STEP_PERCENT,
                ),
            });
        SweepBar {
            bar,
            plain,
            started: Instant::now(),
            shown: AtomicBool::new(false),
        }
    }

    /// `done` hydrants analysed in all (this run's and the earlier ones').
    pub(super) fn set(&self, done: usize) {
        if let Some(bar) = &self.bar {
            if !self.shown.load(Ordering::Relaxed)
                && self.started.elapsed() > Duration::from_secs(1)
            {
                self.shown.store(true, Ordering::Relaxed);
                bar.set_draw_target(ProgressDrawTarget::stderr());
            }
            bar.set_position(done as u64);
        }
        if let Some(p) = &self.plain {
            let percent = done * 100 / p.total;
            let next = p.next_percent.load(Ordering::Relaxed);
            let elapsed = self.started.elapsed();
            if percent >= next
                && percent < 100
                && elapsed >= PLAIN_AFTER
                && p.next_percent
                    .compare_exchange(
                        next,
                        (percent / PLAIN_STEP_PERCENT + 1) * PLAIN_STEP_PERCENT,
                        Ordering::Relaxed,
                        Ordering::Relaxed,
                    )
                    .is_ok()
            {
                self.shown.store(true, Ordering::Relaxed);
                eprintln!("{}", progress_line(done, p.total, done - p.before, elapsed));
            }
        }
    }

    pub(super) fn finish(&self) {
        if let Some(bar) = &self.bar {
            bar.finish_and_clear();
        }
        if let Some(p) = &self.plain {
            if self.shown.load(Ordering::Relaxed) {
                let elapsed = self.started.elapsed();
                eprintln!(
                    "{}",
                    progress_line(p.total, p.total, p.total - p.before, elapsed)
                );
            }
        }
    }
}

/// A plain progress line: `fire-flow sweep: 1250/25000 hydrants (5 %), 11.2 hydrants/s, about
/// 35 min left`; `this_run` hydrants were analysed in `elapsed` (the rate is theirs).
fn progress_line(done: usize, total: usize, this_run: usize, elapsed: Duration) -> String {
    let percent = done * 100 / total.max(1);
    let rate = this_run as f64 / elapsed.as_secs_f64().max(1e-9);
    let tail = if done >= total {
        format!("done in {}", duration_words(elapsed.as_secs_f64()))
    } else if rate > 0.0 {
        format!(
            "about {} left",
            duration_words((total - done) as f64 / rate)
        )
    } else {
        "time left not known yet".to_string()
    };
    format!("fire-flow sweep: {done}/{total} hydrants ({percent} %), {rate:.1} hydrants/s, {tail}")
}

/// A duration in words a log reader takes in at a glance: seconds under 90 s, minutes under
/// 90 min, then hours and minutes.
fn duration_words(secs: f64) -> String {
    let secs = secs.max(0.0).round() as u64;
    if secs < 90 {
        format!("{secs} s")
    } else if secs < 90 * 60 {
        format!("{} min", (secs + 30) / 60)
    } else {
        let min = (secs + 30) / 60;
        format!("{} h {:02} min", min / 60, min % 60)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn plain_progress_line_reads_as_documented() {
        // 1250 of 25000 in 111.6 s: 11.2 hydrants/s, 23750 left, 2120 s = 35 min (arithmetic).
        let line = progress_line(1250, 25000, 1250, Duration::from_secs_f64(111.6));
        assert_eq!(
            line,
            "fire-flow sweep: 1250/25000 hydrants (5 %), 11.2 hydrants/s, about 35 min left"
        );
        let end = progress_line(10, 10, 4, Duration::from_secs(7200));
        assert!(end.ends_with("done in 2 h 00 min"), "{end}");
        assert_eq!(duration_words(89.0), "89 s");
        assert_eq!(duration_words(5399.0), "90 min");
        assert_eq!(duration_words(5400.0), "1 h 30 min");
    }
}
