//! Journals and partial results of a fire-flow sweep: what lets a long `check` resume after a
//! kill or a reboot, and spread over the machines of a cluster (`--shard K/N`, then `merge`).
//!
//! A journal is JSON Lines: the first line is a [`Header`] (the inputs' paths and SHA-256
//! hashes, the hydrant selection, the shard), then one [`record::Record`] per finished hydrant,
//! written and flushed as each hydrant finishes. A complete shard's journal gets a last line
//! `{"complete": N}` and is renamed to its partial's name ([`partial_name`]): a file by that
//! name is whole by construction, and a killed run leaves only a journal, which `merge` never
//! takes for a partial. A line cut short by a kill (no newline at its end) is ignored.
//!
//! Journals hold results, not reports: everything derived after the sweep (weak mains, service
//! pressures, supply curves, the reports) is recomputed from the network, criteria and results
//! when the files are assembled, so that they are byte-identical to those of one run.

pub mod record;
mod shard;

pub use shard::{gather, Gathered, Shard};

use std::fs::File;
use std::io::{BufWriter, Write};
use std::path::{Path, PathBuf};
use std::sync::Mutex;
use std::time::{Duration, Instant};

use serde::{Deserialize, Serialize};
use sha2::{Digest, Sha256};
use thiserror::Error;

use crate::fireflow::HydrantResult;
use crate::ExitStatus;
use record::Record;

/// Version of the journal's layout; raised on any incompatible change.
pub const JOURNAL_FORMAT: u32 = 1;

/// The journal of an unsharded `check --out DIR`, in DIR; removed once the set is in place.
pub const JOURNAL_FILE: &str = "check-journal.jsonl";

/// The journal of shard `shard` while it runs.
pub fn shard_journal_name(shard: Shard) -> String {
    format!("check-journal-{}-of-{}.jsonl", shard.index, shard.count)
}

/// The partial result of a finished shard.
pub fn partial_name(shard: Shard) -> String {
    format!("check-partial-{}-of-{}.jsonl", shard.index, shard.count)
}

/// At most this long between two syncs of a journal to disk: a reboot loses at most the
/// hydrants of the last second (a killed process loses none that finished, since each line is
/// handed to the system as it is written). Common practice, no source.
const SYNC_INTERVAL: Duration = Duration::from_secs(1);

/// An input file or folder as a journal records it.
#[derive(Clone, Debug, Serialize, Deserialize, PartialEq, Eq)]
pub struct InputRef {
    /// As given on the command line.
    pub path: String,
    /// Absolute, for a process started in another folder (a cluster job).
    pub absolute: String,
    /// SHA-256 of the content (see [`hash_network`], [`hash_file`]), hex.
    pub sha256: String,
}

impl InputRef {
    /// Records `path` with the hash `sha256` of its content.
    pub fn new(path: &Path, sha256: String) -> Self {
        let absolute = std::path::absolute(path).unwrap_or_else(|_| path.to_path_buf());
        InputRef {
            path: path.display().to_string(),
            absolute: absolute.display().to_string(),
            sha256,
        }
    }

    /// Where to read the input in this process: the path as given if it exists from here, else
    /// the absolute path recorded.
    pub fn resolve(&self) -> PathBuf {
        let given = PathBuf::from(&self.path);
        if given.exists() {
            given
        } else {
            PathBuf::from(&self.absolute)
        }
    }
}

/// The first line of a journal: what its results were computed from.
#[derive(Clone, Debug, Serialize, Deserialize, PartialEq, Eq)]
pub struct Header {
    pub firemain_journal: u32,
    /// `firemain VERSION`: results of different versions are never mixed.
    pub generator: String,
    pub network: InputRef,
    pub criteria: InputRef,
    /// `--tests` and `--project`, which the assembled reports show.
    pub tests: Option<InputRef>,
    pub project: Option<InputRef>,
    /// `--hydrant` ids in the order given (empty: every hydrant).
    pub hydrants: Vec<String>,
    pub shard: Option<Shard>,
    /// Hydrants this journal is for (its shard of the selection).
    pub total: usize,
}

impl Header {
    /// The first difference between what two headers were computed from, in words; `None` when
    /// their results may be combined (paths may differ, the content may not).
    pub fn difference(&self, other: &Header) -> Option<String> {
        let input = |what: &str, a: &InputRef, b: &InputRef| {
            (a.sha256 != b.sha256).then(|| {
                format!(
                    "the {what} differ ({} has SHA-256 {}, {} has {})",
                    a.path,
                    short(&a.sha256),
                    b.path,
                    short(&b.sha256)
                )
            })
        };
        let optional = |what: &str, a: &Option<InputRef>, b: &Option<InputRef>| match (a, b) {
            (Some(a), Some(b)) => input(what, a, b),
            (None, None) => None,
            (Some(a), None) | (None, Some(a)) => {
                Some(format!("{what} {} given to one run only", a.path))
            }
        };
        if self.firemain_journal != other.firemain_journal || self.generator != other.generator {
            return Some(format!(
                "written by different firemain versions ({} and {})",
                self.generator, other.generator
            ));
        }
        input("network files", &self.network, &other.network)
            .or_else(|| input("criteria", &self.criteria, &other.criteria))
            .or_else(|| optional("flow tests", &self.tests, &other.tests))
            .or_else(|| optional("project file", &self.project, &other.project))
            .or_else(|| {
                (self.hydrants != other.hydrants).then(|| {
                    format!(
                        "the hydrant selection differs ({} and {})",
                        selection_words(&self.hydrants),
                        selection_words(&other.hydrants)
                    )
                })
            })
    }
}

fn short(hash: &str) -> &str {
    hash.get(..12).unwrap_or(hash)
}

fn selection_words(ids: &[String]) -> String {
    if ids.is_empty() {
        "every hydrant".to_string()
    } else {
        format!("--hydrant {}", ids.join(" --hydrant "))
    }
}

/// Why a journal or partial cannot be written, read or combined.
#[derive(Debug, Error)]
pub enum JournalError {
    #[error("{}: {source}", .path.display())]
    Io {
        path: PathBuf,
        source: std::io::Error,
    },
    #[error("{}, line {line}: {message}; fix: delete the file to start that part over", .path.display())]
    Corrupt {
        path: PathBuf,
        line: usize,
        message: String,
    },
    /// `--resume` over a journal of other inputs.
    #[error("{}: cannot resume: {difference}; fix: run without --resume to start over, or give the inputs the journal was started with", .path.display())]
    Changed { path: PathBuf, difference: String },
    /// `merge` over partials that do not fit together.
    #[error("cannot merge: {0}")]
    Merge(String),
    /// An input's content is not the one the results were computed from.
    #[error("{what} {}: SHA-256 {} is not the {} the results were computed from; fix: give the {what} the sweep used", .path.display(), short(.found), short(.expected))]
    InputChanged {
        what: &'static str,
        path: PathBuf,
        found: String,
        expected: String,
    },
}

impl JournalError {
    /// Refusals are input errors (exit 2); a file that cannot be read or written is an
    /// analysis error (exit 3), like any output.
    pub fn exit_status(&self) -> ExitStatus {
        match self {
            JournalError::Io { .. } => ExitStatus::AnalysisError,
            _ => ExitStatus::InputError,
        }
    }
}

fn io_error(path: &Path) -> impl FnOnce(std::io::Error) -> JournalError + '_ {
    move |source| JournalError::Io {
        path: path.to_path_buf(),
        source,
    }
}

/// SHA-256 of a network folder: each [`crate::model::NETWORK_FILES`] file present, in that
/// order, as its name, its length and its bytes (so that moving bytes between files changes the
/// hash). SHA-256 (FIPS 180-4) rather than the manifests' FNV-1a: a changed network must never
/// pass for the journal's, and `sha256sum` lets a person check a file by hand.
pub fn hash_network(dir: &Path) -> Result<String, JournalError> {
    let files = crate::model::read_network_files(dir).map_err(io_error(dir))?;
    let mut h = Sha256::new();
    for (name, bytes) in files {
        h.update((name.len() as u64).to_le_bytes());
        h.update(name.as_bytes());
        h.update((bytes.len() as u64).to_le_bytes());
        h.update(&bytes);
    }
    Ok(hex(&h.finalize()))
}

/// SHA-256 of a file's bytes (what `sha256sum FILE` prints).
pub fn hash_file(path: &Path) -> Result<String, JournalError> {
    let bytes = std::fs::read(path).map_err(io_error(path))?;
    Ok(hex(&Sha256::digest(&bytes)))
}

fn hex(bytes: &[u8]) -> String {
    bytes.iter().map(|b| format!("{b:02x}")).collect()
}

/// A journal read back.
#[derive(Debug)]
pub struct Journal {
    pub header: Header,
    pub results: Vec<HydrantResult>,
    /// `Some(n)` for a complete partial (its last line).
    pub complete: Option<usize>,
    /// Bytes of whole lines: appending resumes here, after dropping a line cut short.
    pub whole_len: u64,
}

#[derive(Serialize, Deserialize)]
struct Trailer {
    complete: usize,
}

/// Reads a journal or partial. A last line without its newline (a kill during the write) is
/// ignored; any other line that does not parse is an error naming it.
pub fn read_journal(path: &Path) -> Result<Journal, JournalError> {
    let bytes = std::fs::read(path).map_err(io_error(path))?;
    let corrupt = |line: usize, message: String| JournalError::Corrupt {
        path: path.to_path_buf(),
        line,
        message,
    };
    let whole_len = bytes.iter().rposition(|&b| b == b'\n').map_or(0, |i| i + 1);
    let text = std::str::from_utf8(&bytes[..whole_len])
        .map_err(|e| corrupt(0, format!("not UTF-8 text ({e})")))?;
    let mut lines = text.lines().enumerate();
    let header: Header = match lines.next() {
        Some((_, line)) => serde_json::from_str(line)
            .map_err(|e| corrupt(1, format!("not the header of a firemain journal ({e})")))?,
        None => return Err(corrupt(1, "no header: the run stopped as it began".into())),
    };
    if header.firemain_journal != JOURNAL_FORMAT {
        return Err(corrupt(
            1,
            format!(
                "journal format {} (this firemain reads {JOURNAL_FORMAT})",
                header.firemain_journal
            ),
        ));
    }
    let mut results = Vec::new();
    let mut complete = None;
    for (i, line) in lines {
        if complete.is_some() {
            return Err(corrupt(i + 1, "a line after the end of the partial".into()));
        }
        if let Ok(t) = serde_json::from_str::<Trailer>(line) {
            complete = Some(t.complete);
            continue;
        }
        let record: Record = serde_json::from_str(line)
            .map_err(|e| corrupt(i + 1, format!("not a hydrant's result ({e})")))?;
        results.push(record.into_result().map_err(|m| corrupt(i + 1, m))?);
    }
    Ok(Journal {
        header,
        results,
        complete,
        whole_len: whole_len as u64,
    })
}

/// Appends results to a journal, one flushed line each, from any thread.
pub struct JournalWriter {
    path: PathBuf,
    inner: Mutex<WriterState>,
}

struct WriterState {
    file: BufWriter<File>,
    synced: Instant,
    /// The first write error: the sweep goes on, the caller hears of it at [`JournalWriter::finish`].
    error: Option<std::io::Error>,
    lines: usize,
}

impl JournalWriter {
    /// Starts a new journal at `path` with `header`, replacing any previous one in one rename
    /// (so a previous journal is whole until the new one is).
    pub fn create(path: &Path, header: &Header) -> Result<Self, JournalError> {
        let tmp = path.with_extension("jsonl.tmp");
        let result = (|| {
            let mut f = File::create(&tmp)?;
            f.write_all(json_line(header).as_bytes())?;
            f.sync_all()?;
            std::fs::rename(&tmp, path)
        })();
        if let Err(e) = result {
            let _ = std::fs::remove_file(&tmp);
            return Err(io_error(path)(e));
        }
        Self::open(path, None, 0)
    }

    /// Goes on with the journal at `path` that [`read_journal`] read as `journal`: a line cut
    /// short by a kill is dropped first.
    pub fn resume(path: &Path, journal: &Journal) -> Result<Self, JournalError> {
        Self::open(path, Some(journal.whole_len), journal.results.len())
    }

    fn open(path: &Path, truncate_to: Option<u64>, lines: usize) -> Result<Self, JournalError> {
        let file = std::fs::OpenOptions::new()
            .append(true)
            .open(path)
            .map_err(io_error(path))?;
        if let Some(len) = truncate_to {
            file.set_len(len).map_err(io_error(path))?;
        }
        Ok(JournalWriter {
            path: path.to_path_buf(),
            inner: Mutex::new(WriterState {
                file: BufWriter::new(file),
                synced: Instant::now(),
                error: None,
                lines,
            }),
        })
    }

    /// Appends one result and hands it to the system; syncs to disk at most once a second.
    pub fn record(&self, r: &HydrantResult) {
        let line = json_line(&Record::from_result(r));
        let Ok(mut s) = self.inner.lock() else {
            return;
        };
        if s.error.is_some() {
            return;
        }
        let result = (|| {
            s.file.write_all(line.as_bytes())?;
            s.file.flush()?;
            if s.synced.elapsed() >= SYNC_INTERVAL {
                s.file.get_ref().sync_data()?;
                s.synced = Instant::now();
            }
            Ok(())
        })();
        match result {
            Ok(()) => s.lines += 1,
            Err(e) => s.error = Some(e),
        }
    }

    /// Flushes and syncs the journal; the first error of any write, if there was one.
    pub fn finish(self) -> Result<(), JournalError> {
        let path = self.path;
        let mut s = self
            .inner
            .into_inner()
            .map_err(|_| io_error(&path)(std::io::Error::other("a writer thread panicked")))?;
        if let Some(e) = s.error.take() {
            return Err(io_error(&path)(e));
        }
        s.file.flush().map_err(io_error(&path))?;
        s.file.get_ref().sync_all().map_err(io_error(&path))
    }

    /// Finishes a shard's journal and turns it into the partial `partial`: the closing line,
    /// a sync, then one rename, so that a file by the partial's name is always whole.
    pub fn into_partial(self, partial: &Path) -> Result<(), JournalError> {
        let journal = self.path.clone();
        let lines =
            self.inner.lock().map(|s| s.lines).map_err(|_| {
                io_error(&journal)(std::io::Error::other("a writer thread panicked"))
            })?;
        {
            let mut s = self
                .inner
                .lock()
                .map_err(|_| io_error(&journal)(std::io::Error::other("poisoned")))?;
            if s.error.is_none() {
                let line = json_line(&Trailer { complete: lines });
                if let Err(e) = s.file.write_all(line.as_bytes()) {
                    s.error = Some(e);
                }
            }
        }
        self.finish()?;
        std::fs::rename(&journal, partial).map_err(io_error(partial))?;
        if let Some(dir) = partial.parent() {
            if let Ok(d) = File::open(dir) {
                let _ = d.sync_all();
            }
        }
        Ok(())
    }
}

/// `value` as one line of JSON with its newline. Serializing these plain structs cannot fail;
/// if it ever did, nothing is written (the hydrant is then redone on resume).
fn json_line<T: Serialize>(value: &T) -> String {
    match serde_json::to_string(value) {
        Ok(mut s) => {
            s.push('\n');
            s
        }
        Err(_) => String::new(),
    }
}

/// A journal's header must match `expected` to resume it.
pub fn check_resumable(
    path: &Path,
    journal: &Journal,
    expected: &Header,
) -> Result<(), JournalError> {
    let difference = journal.header.difference(expected).or_else(|| {
        (journal.header.shard != expected.shard).then(|| "it is of another shard".to_string())
    });
    match difference {
        Some(difference) => Err(JournalError::Changed {
            path: path.to_path_buf(),
            difference,
        }),
        None => Ok(()),
    }
}

/// Checks that the input at `path` still has the hash `expected` records.
pub fn verify_input(
    what: &'static str,
    path: &Path,
    expected: &InputRef,
    network: bool,
) -> Result<(), JournalError> {
    let found = if network {
        hash_network(path)?
    } else {
        hash_file(path)?
    };
    if found == expected.sha256 {
        Ok(())
    } else {
        Err(JournalError::InputChanged {
            what,
            path: path.to_path_buf(),
            found,
            expected: expected.sha256.clone(),
        })
    }
}

#[cfg(test)]
mod tests;
