//! `check --out DIR`: the sweep journalled in DIR, so that `--resume` goes on after a kill, and
//! `--shard K/N`, whose journal becomes a partial result for `firemain merge`.

use std::collections::HashMap;
use std::path::Path;

use firemain::cli::CliError;
use firemain::fireflow::{
    sweep_each, FireFlowSetup, HydrantResult, Outcome as Verdict, SweepStats,
};
use firemain::journal::{
    self, check_resumable, hash_file, hash_network, partial_name, read_journal, shard_journal_name,
    Header, InputRef, JournalError, JournalWriter, Shard, JOURNAL_FILE,
};

use super::check::{Assembly, CheckArgs, Inputs, SweepBar};
use super::{emit, Outcome, VERSION};

/// What a journal of this run records at its head.
fn header(args: &CheckArgs, inputs: &Inputs, total: usize) -> Result<Header, JournalError> {
    let file = |p: &Path| -> Result<InputRef, JournalError> { Ok(InputRef::new(p, hash_file(p)?)) };
    Ok(Header {
        firemain_journal: journal::JOURNAL_FORMAT,
        generator: format!("firemain {VERSION}"),
        network: InputRef::new(&args.network, hash_network(&args.network)?),
        criteria: file(&args.criteria)?,
        tests: args.tests.as_deref().map(file).transpose()?,
        project: args.project.as_deref().map(file).transpose()?,
        hydrants: inputs.selection_ids(),
        shard: args.shard,
        total,
    })
}

fn io(path: &Path) -> impl FnOnce(std::io::Error) -> CliError + '_ {
    move |source| {
        CliError::Journal(JournalError::Io {
            path: path.to_path_buf(),
            source,
        })
    }
}

/// In steps: this run's hydrants and journal, a shard already complete, the sweep of what
/// the journal does not hold yet, then the shard's partial or the whole run's files.
pub(super) fn run(
    args: &CheckArgs,
    out: &Path,
    inputs: &Inputs,
    setup: &FireFlowSetup<'_>,
    threads: Option<usize>,
) -> Result<Outcome, CliError> {
    let run = JournalledRun {
        args,
        out,
        inputs,
        setup,
        threads,
    };
    let mine = run.hydrants();
    let header = header(args, inputs, mine.len())?;
    firemain::report::create_output_folder(out)?;
    let journal_path = out.join(match args.shard {
        Some(s) => shard_journal_name(s),
        None => JOURNAL_FILE.to_string(),
    });
    let partial_path = args.shard.map(|s| out.join(partial_name(s)));

    if run.shard_already_complete(partial_path.as_deref(), &header)? {
        return Ok(Outcome::Success);
    }
    let (writer, earlier) = open_journal(args, &journal_path, partial_path.as_deref(), &header)?;
    let (results, stats) = run.sweep(&mine, &journal_path, &writer, earlier)?;
    let stats = all_counters(stats, &results);

    match (args.shard, partial_path) {
        (Some(shard), Some(partial)) => run.finish_shard(shard, &partial, writer, &results, &stats),
        _ => run.finish_whole(&journal_path, writer, &results, &stats),
    }
}

/// One journalled `check`: its command line, output folder, inputs and set-up.
struct JournalledRun<'r, 'a> {
    args: &'r CheckArgs,
    out: &'r Path,
    inputs: &'r Inputs,
    setup: &'r FireFlowSetup<'a>,
    threads: Option<usize>,
}

impl JournalledRun<'_, '_> {
    /// This run's hydrants: the shard's positions of the selection, or all of it.
    fn hydrants(&self) -> Vec<usize> {
        let inputs = self.inputs;
        match self.args.shard {
            Some(s) => s
                .positions(inputs.indices.len())
                .map(|p| inputs.indices[p])
                .collect(),
            None => inputs.indices.clone(),
        }
    }

    /// Under `--resume`, whether the shard's partial is already there (and of these inputs):
    /// then there is nothing left to do.
    fn shard_already_complete(
        &self,
        partial_path: Option<&Path>,
        header: &Header,
    ) -> Result<bool, CliError> {
        let args = self.args;
        if let (true, Some(shard), Some(partial)) = (args.resume, args.shard, partial_path) {
            if partial.exists() {
                let j = read_journal(partial)?;
                check_resumable(partial, &j, header)?;
                if !args.quiet {
                    eprintln!("shard {shard} is already complete: {}", partial.display());
                }
                return Ok(true);
            }
        }
        Ok(false)
    }

    /// Sweeps the hydrants of `mine` that `earlier` (the journal's results) does not hold,
    /// journalling each result as it comes; returns every result of `mine`, in its order,
    /// with the counters of this sweep.
    fn sweep(
        &self,
        mine: &[usize],
        journal_path: &Path,
        writer: &JournalWriter,
        earlier: Vec<HydrantResult>,
    ) -> Result<(Vec<HydrantResult>, SweepStats), CliError> {
        let args = self.args;
        // Results already journalled (of this run's hydrants, once each), and what is left to do.
        let wanted: std::collections::HashSet<usize> = mine.iter().copied().collect();
        let mut have: HashMap<usize, HydrantResult> = earlier
            .into_iter()
            .filter(|r| wanted.contains(&r.hydrant))
            .map(|r| (r.hydrant, r))
            .collect();
        let todo: Vec<usize> = mine
            .iter()
            .copied()
            .filter(|h| !have.contains_key(h))
            .collect();
        if args.resume && !args.quiet {
            eprintln!(
                "resuming: {} of {} hydrants already in {}",
                have.len(),
                mine.len(),
                journal_path.display()
            );
        }
        let before = have.len();
        let bar = SweepBar::new(mine.len(), before, args.quiet);
        let (new, stats) = sweep_each(self.setup, &todo, self.threads, &|r, done| {
            writer.record(r);
            bar.set(before + done);
        })
        .map_err(CliError::Threads)?;
        bar.finish();
        for r in new {
            have.insert(r.hydrant, r);
        }
        let results: Vec<HydrantResult> = mine.iter().filter_map(|h| have.remove(h)).collect();
        Ok((results, stats))
    }

    /// A shard's end: its journal becomes its partial, and its summary goes to stdout.
    fn finish_shard(
        &self,
        shard: Shard,
        partial: &Path,
        writer: JournalWriter,
        results: &[HydrantResult],
        stats: &SweepStats,
    ) -> Result<Outcome, CliError> {
        writer.into_partial(partial)?;
        emit(shard_summary(shard, results));
        if self.args.stats {
            eprintln!("{}", super::check::stats_line(stats));
        }
        if !self.args.quiet {
            eprintln!("wrote {}", partial.display());
        }
        Ok(Outcome::Success)
    }

    /// A whole run's end: its files are written, and then its journal is removed.
    fn finish_whole(
        &self,
        journal_path: &Path,
        writer: JournalWriter,
        results: &[HydrantResult],
        stats: &SweepStats,
    ) -> Result<Outcome, CliError> {
        let args = self.args;
        // The results are in memory: a journal that could not be written costs only the
        // ability to resume, not this run's files.
        if let Err(e) = writer.finish() {
            eprintln!("firemain: warning: {e}; the run goes on without its journal");
        }
        let assembly = Assembly {
            threads: self.threads,
            out: Some(self.out),
            network_dir: &args.network,
            quiet: args.quiet,
            stats: args.stats.then_some(stats),
            geojson: args.geojson,
        };
        let outcome = assembly.report(self.inputs, self.setup, results)?;
        // The set is in place: the journal has served.
        let _ = std::fs::remove_file(journal_path);
        Ok(outcome)
    }
}

/// Opens the journal: goes on with it under `--resume` (when it exists and its inputs match),
/// else starts a new one (a shard's previous partial is removed first, so that a folder never
/// holds a partial of an older run beside this run's journal). Returns the writer and the
/// results it already holds.
fn open_journal(
    args: &CheckArgs,
    path: &Path,
    partial: Option<&Path>,
    header: &Header,
) -> Result<(JournalWriter, Vec<HydrantResult>), CliError> {
    if args.resume && path.exists() {
        let journal = read_journal(path)?;
        check_resumable(path, &journal, header)?;
        let writer = JournalWriter::resume(path, &journal)?;
        return Ok((writer, journal.results));
    }
    if args.resume && !args.quiet {
        eprintln!(
            "no journal {} to resume: the sweep starts from the first hydrant",
            path.display()
        );
    }
    if let Some(partial) = partial {
        match std::fs::remove_file(partial) {
            Ok(()) => {}
            Err(e) if e.kind() == std::io::ErrorKind::NotFound => {}
            Err(e) => return Err(io(partial)(e)),
        }
    }
    Ok((JournalWriter::create(path, header)?, Vec::new()))
}

/// What a shard prints on stdout: its counts, and what comes next.
fn shard_summary(shard: Shard, results: &[HydrantResult]) -> String {
    let count = |v: Verdict| results.iter().filter(|r| r.outcome == v).count();
    format!(
        "shard {shard}: {} hydrants analysed ({} pass, {} fail, {} error); `firemain merge` assembles the reports once every shard is done\n",
        results.len(),
        count(Verdict::Pass),
        count(Verdict::Fail),
        count(Verdict::Error)
    )
}

/// The work counters of every hydrant, journalled ones included (each result carries its
/// own): report.json's `sweep` is then that of an uninterrupted run; wall time and threads
/// stay this run's.
fn all_counters(stats: SweepStats, results: &[HydrantResult]) -> SweepStats {
    SweepStats::of_results(results, stats.wall_time, stats.threads)
}
