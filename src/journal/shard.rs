//! Shards of a sweep (`check --shard K/N`) and gathering their partials for `merge`.

use std::collections::{BTreeMap, BTreeSet};
use std::fmt;
use std::path::{Path, PathBuf};
use std::str::FromStr;

use serde::{Deserialize, Serialize};

use super::{partial_name, read_journal, Header, JournalError};
use crate::fireflow::HydrantResult;

/// Shard `index` of `count`: the hydrants at positions `index`, `index + count`, ... of the
/// selection. Interleaved rather than in blocks, so that the hard hydrants of one district do
/// not all land in one shard and every shard takes about as long. `index` counts from 0, as
/// `SLURM_ARRAY_TASK_ID` (with `--array=0-(N-1)`) and Kubernetes' `JOB_COMPLETION_INDEX` do.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct Shard {
    pub index: usize,
    pub count: usize,
}

impl Shard {
    /// Whether the hydrant at `position` in the selection belongs to this shard.
    pub fn picks(self, position: usize) -> bool {
        position % self.count == self.index
    }

    /// The positions in a selection of `len` hydrants that this shard analyses.
    pub fn positions(self, len: usize) -> impl Iterator<Item = usize> {
        (self.index..len).step_by(self.count)
    }
}

impl fmt::Display for Shard {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{}/{}", self.index, self.count)
    }
}

impl FromStr for Shard {
    type Err = String;

    fn from_str(s: &str) -> Result<Self, String> {
        let fix = "give K/N with N the number of shards and K from 0 to N-1 (e.g. --shard \
                   $SLURM_ARRAY_TASK_ID/$SLURM_ARRAY_TASK_COUNT with --array=0-(N-1))";
        let (k, n) = s
            .split_once('/')
            .ok_or_else(|| format!("`{s}` is not K/N; {fix}"))?;
        let number = |t: &str| t.trim().parse::<usize>().ok();
        match (number(k), number(n)) {
            (Some(index), Some(count)) if count >= 1 && index < count => Ok(Shard { index, count }),
            (Some(index), Some(count)) if count >= 1 => Err(format!(
                "shard {index} of {count}: K counts from 0 to {}; {fix}",
                count - 1
            )),
            _ => Err(format!(
                "`{s}` is not K/N with whole numbers, N at least 1; {fix}"
            )),
        }
    }
}

/// The partials of one sweep, checked to fit together.
#[derive(Debug)]
pub struct Gathered {
    /// The inputs and selection they share (the first partial's header, shard removed).
    pub header: Header,
    pub count: usize,
    /// Each shard's results, by shard index.
    pub shards: Vec<Vec<HydrantResult>>,
    pub files: Vec<PathBuf>,
}

/// A file name `check-partial-K-of-N.jsonl` or `check-journal-K-of-N.jsonl`: (kind, shard).
fn shard_file(name: &str) -> Option<(&str, Shard)> {
    let stem = name.strip_suffix(".jsonl")?;
    let (kind, rest) = stem
        .strip_prefix("check-partial-")
        .map(|r| ("partial", r))
        .or_else(|| stem.strip_prefix("check-journal-").map(|r| ("journal", r)))?;
    let (k, n) = rest.split_once("-of-")?;
    Some((kind, format!("{k}/{n}").parse().ok()?))
}

/// The partials in `dirs` (folders, or partial files themselves), checked to be of the same
/// inputs, with every shard present exactly once. The error lists what is missing or twice.
pub fn gather(dirs: &[PathBuf]) -> Result<Gathered, JournalError> {
    let found = find_shard_files(dirs)?;
    if found.partials.is_empty() {
        return Err(JournalError::Merge(format!(
            "no partial result (check-partial-K-of-N.jsonl) in {}; fix: give the folders that `check --shard K/N --out DIR` wrote into",
            list(dirs.iter())
        )));
    }
    let (by_shard, first) = read_partials(found.partials)?;
    let Some((_, mut header)) = first else {
        return Err(JournalError::Merge("no partial result".into()));
    };
    let count = header.shard.map_or(1, |s| s.count);
    refuse_twice(&by_shard, count)?;
    refuse_missing(&by_shard, count, &found.running)?;
    header.shard = None;
    let mut files = Vec::new();
    let shards = by_shard
        .into_values()
        .map(|mut v| {
            let (path, journal) = v.remove(0);
            files.push(path);
            journal.results
        })
        .collect();
    Ok(Gathered {
        header,
        count,
        shards,
        files,
    })
}

/// The shard files found in the folders given to `merge`.
struct ShardFiles {
    /// Finished partials as (canonical path, path as found): a folder given twice yields each
    /// of its partials once.
    partials: BTreeSet<(PathBuf, PathBuf)>,
    /// Journals of shards not finished (killed, or still running), with their shard index.
    running: BTreeSet<(usize, PathBuf)>,
}

/// The partials and shard journals in `dirs`, each a folder or a file itself.
fn find_shard_files(dirs: &[PathBuf]) -> Result<ShardFiles, JournalError> {
    let mut found = ShardFiles {
        partials: BTreeSet::new(),
        running: BTreeSet::new(),
    };
    for dir in dirs {
        for path in entries(dir)? {
            let name = path.file_name().and_then(|n| n.to_str()).unwrap_or("");
            let key = std::fs::canonicalize(&path).unwrap_or(path.clone());
            match shard_file(name) {
                Some(("partial", _)) => {
                    found.partials.insert((key, path));
                }
                Some(("journal", shard)) => {
                    found.running.insert((shard.index, path));
                }
                _ => {}
            }
        }
    }
    Ok(found)
}

/// The files of the folder `dir`, or `dir` itself when it is a file.
fn entries(dir: &Path) -> Result<Vec<PathBuf>, JournalError> {
    if dir.is_dir() {
        Ok(std::fs::read_dir(dir)
            .map_err(|source| JournalError::Io {
                path: dir.to_path_buf(),
                source,
            })?
            .filter_map(|e| e.ok().map(|e| e.path()))
            .collect())
    } else if dir.is_file() {
        Ok(vec![dir.to_path_buf()])
    } else {
        Err(JournalError::Merge(format!(
            "{} is neither a folder nor a partial file",
            dir.display()
        )))
    }
}

/// The partials read, by shard index (more than one for a shard given twice).
type ByShard = BTreeMap<usize, Vec<(PathBuf, super::Journal)>>;

/// Reads the partials, each checked to be a whole partial of the same sweep and shard count as
/// the first; returns them by shard index, with the first's path and header.
fn read_partials(
    partials: BTreeSet<(PathBuf, PathBuf)>,
) -> Result<(ByShard, Option<(PathBuf, Header)>), JournalError> {
    let mut by_shard = ByShard::new();
    let mut first: Option<(PathBuf, Header)> = None;
    for (_, path) in partials {
        let journal = read_journal(&path)?;
        let shard = whole_partial(&path, &journal)?;
        match &first {
            None => first = Some((path.clone(), journal.header.clone())),
            Some((first_path, header)) => {
                same_sweep(first_path, header, &path, &journal.header, shard)?;
            }
        }
        by_shard
            .entry(shard.index)
            .or_default()
            .push((path, journal));
    }
    Ok((by_shard, first))
}

/// The shard of the partial at `path`, refused unless it is a shard's partial under its own
/// name and holds every result it announces (its last line).
fn whole_partial(path: &Path, journal: &super::Journal) -> Result<Shard, JournalError> {
    let name = path.file_name().and_then(|n| n.to_str()).unwrap_or("");
    let Some(shard) = journal.header.shard else {
        return Err(JournalError::Merge(format!(
            "{} is not a shard's partial",
            path.display()
        )));
    };
    if partial_name(shard) != name || journal.complete != Some(journal.results.len()) {
        return Err(JournalError::Merge(format!(
            "{} is not a whole partial of shard {shard}; fix: run that shard again",
            path.display()
        )));
    }
    Ok(shard)
}

/// Refuses the partial at `path` (`header`, `shard`) unless it is of the same inputs and the
/// same number of shards as the first one read (`first_path`, `first`).
fn same_sweep(
    first_path: &Path,
    first: &Header,
    path: &Path,
    header: &Header,
    shard: Shard,
) -> Result<(), JournalError> {
    if let Some(d) = first.difference(header) {
        return Err(JournalError::Merge(format!(
            "{} and {} are of different sweeps: {d}",
            first_path.display(),
            path.display()
        )));
    }
    let n = first.shard.map_or(0, |s| s.count);
    if n != shard.count {
        return Err(JournalError::Merge(format!(
            "{} is one of {n} shards, {} one of {}",
            first_path.display(),
            path.display(),
            shard.count
        )));
    }
    Ok(())
}

/// Refuses a shard given by more than one partial, naming the files.
fn refuse_twice(by_shard: &ByShard, count: usize) -> Result<(), JournalError> {
    let twice: Vec<String> = by_shard
        .iter()
        .filter(|(_, v)| v.len() > 1)
        .map(|(k, v)| format!("shard {k}/{count} in {}", list(v.iter().map(|(p, _)| p))))
        .collect();
    if !twice.is_empty() {
        return Err(JournalError::Merge(format!(
            "{} given twice; fix: give each shard's partial once",
            twice.join("; ")
        )));
    }
    Ok(())
}

/// Refuses a sweep with shards that have no partial, naming the journals of those that were
/// started (`running`).
fn refuse_missing(
    by_shard: &ByShard,
    count: usize,
    running: &BTreeSet<(usize, PathBuf)>,
) -> Result<(), JournalError> {
    let missing: Vec<usize> = (0..count).filter(|k| !by_shard.contains_key(k)).collect();
    if missing.is_empty() {
        return Ok(());
    }
    let names: Vec<String> = missing.iter().map(|k| format!("{k}/{count}")).collect();
    let unfinished: Vec<&PathBuf> = running
        .iter()
        .filter(|(k, _)| missing.contains(k))
        .map(|(_, p)| p)
        .collect();
    let note = if unfinished.is_empty() {
        String::new()
    } else {
        format!(
            " (unfinished, killed or still running: {})",
            list(unfinished.into_iter())
        )
    };
    Err(JournalError::Merge(format!(
        "missing {} of {count} shard(s): {}{note}; fix: run `check --shard K/N` (or `--resume` it) for each, then merge again",
        missing.len(),
        names.join(", ")
    )))
}

fn list<'a>(paths: impl Iterator<Item = &'a PathBuf>) -> String {
    paths
        .map(|p| p.display().to_string())
        .collect::<Vec<_>>()
        .join(", ")
}

impl Gathered {
    /// The results in selection order (`indices`: the selected hydrants), checking that each
    /// shard holds exactly its hydrants; `id` names a hydrant in the error.
    pub fn assemble(
        self,
        indices: &[usize],
        id: impl Fn(usize) -> String,
    ) -> Result<Vec<HydrantResult>, JournalError> {
        let mut out = Vec::with_capacity(indices.len());
        let count = self.count;
        for (k, (results, file)) in self.shards.into_iter().zip(&self.files).enumerate() {
            let shard = Shard { index: k, count };
            let expected: Vec<usize> = shard.positions(indices.len()).collect();
            let wrong = || {
                JournalError::Merge(format!(
                    "{} does not hold the hydrants of shard {shard} of this selection",
                    file.display()
                ))
            };
            if results.len() != expected.len() {
                return Err(wrong());
            }
            let mut by_hydrant: BTreeMap<usize, HydrantResult> = BTreeMap::new();
            for r in results {
                let h = r.hydrant;
                if by_hydrant.insert(h, r).is_some() {
                    return Err(JournalError::Merge(format!(
                        "{} holds hydrant {} twice",
                        file.display(),
                        id(h)
                    )));
                }
            }
            for p in expected {
                let r = by_hydrant.remove(&indices[p]).ok_or_else(wrong)?;
                out.push((p, r));
            }
        }
        out.sort_by_key(|(p, _)| *p);
        Ok(out.into_iter().map(|(_, r)| r).collect())
    }
}
