//! Writing the files of one run as one set, with a manifest naming the run.
//!
//! POSIX renames one file atomically, never several together, so a set cannot appear in one
//! step. What firemain guarantees instead (see docs/outputs.md, "How files are written"):
//!
//! 1. Every file is rendered in memory and written, flushed, to a hidden temporary file beside
//!    its final name (same folder, so the rename below cannot cross filesystems). A failure here
//!    removes the temporaries: no existing file has been touched.
//! 2. Then, in order: the previous manifest of the same command is moved aside; each previous
//!    file is moved aside and the new one renamed into its place; files that the previous
//!    manifest listed and this run does not write are moved aside; the new manifest is renamed
//!    into place last. A failure in this step puts every moved-aside file back and removes the
//!    new ones, so the folder is again as it was.
//! 3. Only when the new manifest is in place are the moved-aside files deleted.
//!
//! A reader therefore sees a whole set whenever the command's manifest is present, and the files
//! it lists carry its run id (report.md, report.json) or its byte count and checksum (every
//! file). While the manifest is absent the folder is changing (or a run was killed part-way).

use std::collections::BTreeSet;
use std::io::Write;
use std::path::{Component, Path, PathBuf};

use serde::{Deserialize, Serialize};

use super::{is_same_folder, ReportError};

/// The manifest of a command's set is `manifest-<command>.toml`.
pub const MANIFEST_PREFIX: &str = "manifest-";

/// Version of the manifest's layout; raised on any incompatible change.
pub const MANIFEST_SCHEMA_VERSION: u32 = 1;

/// A rendered output file; `name` is relative to the output folder (`/` separates folders).
pub struct OutputFile {
    pub name: String,
    pub bytes: Vec<u8>,
}

/// The files of one run, and what the manifest says about the run.
pub struct OutputSet {
    /// The command (`check`, `upsize`, `solve`): names the manifest, so that the sets of
    /// different commands can share a folder.
    pub command: &'static str,
    /// The run id, also printed in the run's reports (see [`new_run_id`]).
    pub run_id: String,
    /// Date and time of the analysis, as on the reports.
    pub generated: String,
    /// `firemain VERSION`.
    pub generator: String,
    pub files: Vec<OutputFile>,
}

/// The manifest file: the run and every file of its set, with byte counts and checksums.
#[derive(Debug, Serialize, Deserialize, PartialEq, Eq)]
pub struct Manifest {
    pub schema_version: u32,
    pub run_id: String,
    pub generated: String,
    pub generator: String,
    pub command: String,
    pub files: Vec<ManifestEntry>,
}

/// One file of a set.
#[derive(Debug, Serialize, Deserialize, PartialEq, Eq)]
pub struct ManifestEntry {
    pub name: String,
    pub bytes: u64,
    /// FNV-1a 64-bit hash of the file's bytes, 16 hex digits: detects a file that does not
    /// belong to the set (not a security measure).
    pub fnv1a64: String,
}

/// The manifest's file name for a command.
pub fn manifest_name(command: &str) -> String {
    format!("{MANIFEST_PREFIX}{command}.toml")
}

/// A run id: 16 hex digits, random (the standard library's randomly keyed hasher over the clock
/// and the process id). Unique in practice; it identifies a set, it carries no meaning.
pub fn new_run_id() -> String {
    use std::hash::{BuildHasher, Hasher};
    let mut h = std::collections::hash_map::RandomState::new().build_hasher();
    let nanos = std::time::SystemTime::now()
        .duration_since(std::time::UNIX_EPOCH)
        .map(|d| d.as_nanos())
        .unwrap_or(0);
    h.write_u128(nanos);
    h.write_u32(std::process::id());
    format!("{:016x}", h.finish())
}

/// `text` with the run id replaced by `<run-id>`, the analysis timestamp by `<generated>` and
/// the date the documents show (its `YYYY-MM-DD`) by `<date>`: two runs on the same input give
/// the same masked files, even across midnight.
pub fn mask_run(text: &str, run_id: &str, generated: &str) -> String {
    let mut out = text.to_string();
    if !run_id.is_empty() {
        out = out.replace(run_id, "<run-id>");
    }
    if !generated.is_empty() {
        out = out.replace(generated, "<generated>");
        let date = super::date_of(generated);
        if date != generated {
            out = out.replace(date, "<date>");
        }
    }
    out
}

/// FNV-1a, 64 bits (Fowler, Noll and Vo; offset basis and prime as published in
/// draft-eastlake-fnv, "The FNV Non-Cryptographic Hash Algorithm", section 2).
pub fn fnv1a64(bytes: &[u8]) -> u64 {
    const OFFSET_BASIS: u64 = 0xcbf2_9ce4_8422_2325;
    const PRIME: u64 = 0x0000_0100_0000_01b3;
    bytes
        .iter()
        .fold(OFFSET_BASIS, |h, &b| (h ^ u64::from(b)).wrapping_mul(PRIME))
}

impl OutputSet {
    /// The manifest of this set.
    pub fn manifest(&self) -> Manifest {
        Manifest {
            schema_version: MANIFEST_SCHEMA_VERSION,
            run_id: self.run_id.clone(),
            generated: self.generated.clone(),
            generator: self.generator.clone(),
            command: self.command.to_string(),
            files: self
                .files
                .iter()
                .map(|f| ManifestEntry {
                    name: f.name.clone(),
                    bytes: f.bytes.len() as u64,
                    fnv1a64: format!("{:016x}", fnv1a64(&f.bytes)),
                })
                .collect(),
        }
    }

    fn manifest_bytes(&self) -> Result<Vec<u8>, ReportError> {
        let body = toml::to_string(&self.manifest()).map_err(|e| ReportError::Render {
            what: manifest_name(self.command),
            message: e.to_string(),
        })?;
        Ok(format!(
            "# The files of one firemain run, written last: while this file is missing, the folder\n# is part-way between two runs. See docs/outputs.md, \"How files are written\".\n{body}"
        )
        .into_bytes())
    }
}

/// Reads a command's manifest in `dir`; `None` if absent or unreadable.
pub fn read_manifest(dir: &Path, command: &str) -> Option<Manifest> {
    let text = std::fs::read_to_string(dir.join(manifest_name(command))).ok()?;
    toml::from_str(&text).ok()
}

/// Writes the set into `dir` (created if missing): every file staged first, then all put in
/// place, the manifest `manifest-<command>.toml` last (see the module documentation for the
/// exact guarantee). Returns the paths written, the manifest last.
pub fn write_outputs(
    dir: &Path,
    input_dir: &Path,
    set: &OutputSet,
) -> Result<Vec<PathBuf>, ReportError> {
    write_set(dir, input_dir, set, None)
}

/// A staged file: its temporary and its final path.
struct Staged {
    tmp: PathBuf,
    path: PathBuf,
}

/// What step 2 did, to be undone on failure.
enum Done {
    /// A new file was put at `path`; the previous one, if any, is at `backup`.
    Placed {
        path: PathBuf,
        backup: Option<PathBuf>,
    },
    /// A previous file was moved from `path` to `backup`.
    MovedAside { path: PathBuf, backup: PathBuf },
}

/// Creates the output folder `dir` (and its parents) if it does not exist; a file at `dir` is
/// refused by name rather than with the system's terse "File exists".
pub fn create_output_folder(dir: &Path) -> Result<(), ReportError> {
    check_output_path(dir)?;
    std::fs::create_dir_all(dir).map_err(|source| ReportError::CreateDir {
        path: dir.to_path_buf(),
        source,
    })
}

/// Refuses, before any work, an output folder that could not be created: a file at `dir`, or a
/// file where one of its parent folders would be. A long analysis then does not end in an
/// error that an earlier look would have shown (the folder itself is created only when the
/// files are written).
pub fn check_output_path(dir: &Path) -> Result<(), ReportError> {
    if dir.exists() && !dir.is_dir() {
        return Err(ReportError::OutIsFile {
            path: dir.to_path_buf(),
        });
    }
    for ancestor in dir.ancestors().skip(1) {
        if ancestor.as_os_str().is_empty() {
            break;
        }
        if ancestor.exists() {
            if !ancestor.is_dir() {
                return Err(ReportError::CreateDir {
                    path: dir.to_path_buf(),
                    source: std::io::Error::other(format!("{} is a file", ancestor.display())),
                });
            }
            break;
        }
    }
    Ok(())
}

/// `write_outputs`, with a failure injected before the `fail_at`-th rename of step 2 (tests).
fn write_set(
    dir: &Path,
    input_dir: &Path,
    set: &OutputSet,
    fail_at: Option<usize>,
) -> Result<Vec<PathBuf>, ReportError> {
    create_output_folder(dir)?;
    if is_same_folder(dir, input_dir) {
        return Err(ReportError::OutputIsInput(dir.to_path_buf()));
    }
    let manifest = manifest_name(set.command);
    let names = checked_names(dir, input_dir, set, &manifest)?;
    let manifest_bytes = set.manifest_bytes()?;
    let all = set
        .files
        .iter()
        .map(|f| (f.name.as_str(), f.bytes.as_slice()))
        .chain(std::iter::once((
            manifest.as_str(),
            manifest_bytes.as_slice(),
        )));

    // Step 1: stage every file.
    let staged = stage_all(dir, all)?;
    let stale = stale_files(dir, &manifest, &names);

    // Step 2: put the set in place, or put everything back.
    let done = put_in_place(dir, &staged, &stale, fail_at)?;

    // Step 3: the set is whole; drop the previous files.
    remove_backups(&done);
    sync_folders(&staged);
    Ok(staged.into_iter().map(|s| s.path).collect())
}

/// The names of the set's files, each refused unless it is plain, unique, not the manifest's
/// and outside the network folder.
fn checked_names<'s>(
    dir: &Path,
    input_dir: &Path,
    set: &'s OutputSet,
    manifest: &str,
) -> Result<BTreeSet<&'s str>, ReportError> {
    let mut names = BTreeSet::new();
    for f in &set.files {
        if !is_plain_relative(&f.name) || f.name == manifest || !names.insert(f.name.as_str()) {
            return Err(ReportError::BadName {
                name: f.name.clone(),
            });
        }
        // No file may land in the network folder: checked for all before any is written.
        if let Some(parent) = dir.join(&f.name).parent() {
            if is_same_folder(parent, input_dir) {
                return Err(ReportError::OutputIsInput(parent.to_path_buf()));
            }
        }
    }
    Ok(names)
}

/// Step 1: stages every file (name, bytes) under `dir`. On a failure, removes the temporaries
/// and the folders made so far: no existing file has been touched.
fn stage_all<'b>(
    dir: &Path,
    files: impl IntoIterator<Item = (&'b str, &'b [u8])>,
) -> Result<Vec<Staged>, ReportError> {
    let mut staged = Vec::new();
    let mut created_dirs = Vec::new();
    for (name, bytes) in files {
        let path = dir.join(name);
        match stage(&path, bytes, &mut created_dirs) {
            Ok(tmp) => staged.push(Staged { tmp, path }),
            Err(e) => {
                for s in &staged {
                    let _ = std::fs::remove_file(&s.tmp);
                }
                for d in created_dirs.iter().rev() {
                    let _ = std::fs::remove_dir(d);
                }
                return Err(ReportError::SetNotWritten {
                    dir: dir.to_path_buf(),
                    cause: Box::new(e),
                });
            }
        }
    }
    Ok(staged)
}

/// Step 2: [`commit`], or on its failure [`roll_back`] and the temporaries removed; the error
/// then says whether the folder is again as it was. Returns what was done, for step 3.
fn put_in_place(
    dir: &Path,
    staged: &[Staged],
    stale: &[PathBuf],
    fail_at: Option<usize>,
) -> Result<Vec<Done>, ReportError> {
    let mut done = Vec::new();
    if let Err(e) = commit(staged, stale, &mut done, fail_at) {
        let failures = roll_back(&done);
        for s in staged {
            let _ = std::fs::remove_file(&s.tmp);
        }
        let cause = Box::new(e);
        return Err(if failures.is_empty() {
            ReportError::SetNotWritten {
                dir: dir.to_path_buf(),
                cause,
            }
        } else {
            ReportError::SetMixed {
                dir: dir.to_path_buf(),
                cause,
                detail: failures.join("; "),
            }
        });
    }
    Ok(done)
}

/// Step 3: deletes the previous files that step 2 moved aside.
fn remove_backups(done: &[Done]) {
    for d in done {
        match d {
            Done::Placed {
                backup: Some(b), ..
            }
            | Done::MovedAside { backup: b, .. } => {
                let _ = std::fs::remove_file(b);
            }
            Done::Placed { backup: None, .. } => {}
        }
    }
}

/// Make the renames durable where the platform allows opening a folder (best effort).
fn sync_folders(staged: &[Staged]) {
    let mut parents = BTreeSet::new();
    for s in staged {
        if let Some(p) = s.path.parent() {
            parents.insert(p.to_path_buf());
        }
    }
    for p in parents {
        if let Ok(f) = std::fs::File::open(&p) {
            let _ = f.sync_all();
        }
    }
}

/// A name made only of ordinary components (no root, no `..`, no `.`), not empty.
fn is_plain_relative(name: &str) -> bool {
    let p = Path::new(name);
    // `Path::components` drops inner `.` and empty parts; the text is checked as well.
    !name.is_empty()
        && name
            .split('/')
            .all(|c| !c.is_empty() && c != "." && c != "..")
        && p.components().all(|c| matches!(c, Component::Normal(_)))
}

/// A hidden sibling of `path`: `.NAME.PID.EXT`.
fn sibling(path: &Path, ext: &str) -> PathBuf {
    let name = path
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_default();
    path.with_file_name(format!(".{name}.{}.{ext}", std::process::id()))
}

/// Writes `bytes` to a flushed temporary file beside `path`; returns the temporary's path.
fn stage(
    path: &Path,
    bytes: &[u8],
    created_dirs: &mut Vec<PathBuf>,
) -> Result<PathBuf, ReportError> {
    if let Some(parent) = path.parent() {
        if !parent.exists() {
            std::fs::create_dir_all(parent).map_err(|source| ReportError::CreateDir {
                path: parent.to_path_buf(),
                source,
            })?;
            created_dirs.push(parent.to_path_buf());
        }
    }
    if path.is_dir() {
        return Err(ReportError::InTheWay {
            path: path.to_path_buf(),
        });
    }
    let tmp = sibling(path, "tmp");
    let result = (|| {
        let mut f = std::fs::File::create(&tmp)?;
        f.write_all(bytes)?;
        f.sync_all()
    })();
    match result {
        Ok(()) => Ok(tmp),
        Err(source) => {
            let _ = std::fs::remove_file(&tmp);
            Err(ReportError::Write {
                path: path.to_path_buf(),
                source,
            })
        }
    }
}

/// Files that the command's previous manifest in `dir` lists and this set does not write:
/// they belong to the previous set and would otherwise be mistaken for part of this one.
fn stale_files(dir: &Path, manifest: &str, names: &BTreeSet<&str>) -> Vec<PathBuf> {
    let Some(old) = std::fs::read_to_string(dir.join(manifest))
        .ok()
        .and_then(|t| toml::from_str::<Manifest>(&t).ok())
    else {
        return Vec::new();
    };
    old.files
        .iter()
        .filter(|e| is_plain_relative(&e.name) && !names.contains(e.name.as_str()))
        .map(|e| dir.join(&e.name))
        .filter(|p| std::fs::symlink_metadata(p).is_ok_and(|m| m.is_file()))
        .collect()
}

/// Step 2. `staged` ends with the manifest. Records each change in `done` as it is made.
fn commit(
    staged: &[Staged],
    stale: &[PathBuf],
    done: &mut Vec<Done>,
    fail_at: Option<usize>,
) -> Result<(), ReportError> {
    let Some((manifest, files)) = staged.split_last() else {
        return Ok(());
    };
    let mut step = 0;
    let mut rename = |from: &Path, to: &Path, named: &Path| {
        let this = step;
        step += 1;
        if fail_at == Some(this) {
            return Err(ReportError::Write {
                path: named.to_path_buf(),
                source: std::io::Error::other("failure injected by a test"),
            });
        }
        std::fs::rename(from, to).map_err(|source| ReportError::Write {
            path: named.to_path_buf(),
            source,
        })
    };
    // The previous manifest goes first: from here until the new one is in place, none exists.
    if std::fs::symlink_metadata(&manifest.path).is_ok() {
        move_aside(&manifest.path, done, &mut rename)?;
    }
    for s in files {
        let backup = if std::fs::symlink_metadata(&s.path).is_ok() {
            move_aside(&s.path, done, &mut rename)?;
            match done.pop() {
                Some(Done::MovedAside { backup, .. }) => Some(backup),
                _ => None,
            }
        } else {
            None
        };
        let placed = rename(&s.tmp, &s.path, &s.path);
        // Recorded either way: on failure, the roll-back puts the previous file back.
        done.push(match (&placed, backup) {
            (Ok(()), backup) => Done::Placed {
                path: s.path.clone(),
                backup,
            },
            (Err(_), Some(backup)) => Done::MovedAside {
                path: s.path.clone(),
                backup,
            },
            (Err(_), None) => return placed,
        });
        placed?;
    }
    for path in stale {
        move_aside(path, done, &mut rename)?;
    }
    rename(&manifest.tmp, &manifest.path, &manifest.path)?;
    done.push(Done::Placed {
        path: manifest.path.clone(),
        backup: None,
    });
    Ok(())
}

/// The renaming function of [`commit`] (with its test failure point).
type Rename<'a> = dyn FnMut(&Path, &Path, &Path) -> Result<(), ReportError> + 'a;

/// Moves a previous file aside to its hidden `.old` sibling, recording it in `done`.
fn move_aside(path: &Path, done: &mut Vec<Done>, rename: &mut Rename) -> Result<(), ReportError> {
    let backup = sibling(path, "old");
    rename(path, &backup, path)?;
    done.push(Done::MovedAside {
        path: path.to_path_buf(),
        backup,
    });
    Ok(())
}

/// Undoes step 2 in reverse order; returns what could not be undone.
fn roll_back(done: &[Done]) -> Vec<String> {
    let mut failures = Vec::new();
    for d in done.iter().rev() {
        let result = match d {
            Done::Placed {
                path,
                backup: Some(b),
            } => std::fs::rename(b, path),
            Done::Placed { path, backup: None } => std::fs::remove_file(path),
            Done::MovedAside { path, backup } => std::fs::rename(backup, path),
        };
        if let Err(e) = result {
            let path = match d {
                Done::Placed { path, .. } | Done::MovedAside { path, .. } => path,
            };
            failures.push(format!("{}: {e}", path.display()));
        }
    }
    failures
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::collections::BTreeMap;

    /// Every entry under `dir` (hidden ones included): relative path → bytes, or `None` for a
    /// folder.
    fn snapshot(dir: &Path) -> BTreeMap<PathBuf, Option<Vec<u8>>> {
        let mut out = BTreeMap::new();
        let mut todo = vec![dir.to_path_buf()];
        while let Some(d) = todo.pop() {
            for e in std::fs::read_dir(&d).unwrap() {
                let p = e.unwrap().path();
                let rel = p.strip_prefix(dir).unwrap().to_path_buf();
                if p.is_dir() {
                    out.insert(rel, None);
                    todo.push(p);
                } else {
                    out.insert(rel, Some(std::fs::read(&p).unwrap()));
                }
            }
        }
        out
    }

    fn set(run_id: &str, files: &[(&str, &str)]) -> OutputSet {
        OutputSet {
            command: "check",
            run_id: run_id.into(),
            generated: "2025-12-02T00:00:00Z".into(),
            generator: "firemain test".into(),
            files: files
                .iter()
                .map(|(n, b)| OutputFile {
                    name: n.to_string(),
                    bytes: b.as_bytes().to_vec(),
                })
                .collect(),
        }
    }

    const OLD: &[(&str, &str)] = &[
        ("a.csv", "old a\n"),
        ("b.csv", "old b\n"),
        ("sub/c.csv", "old c\n"),
        ("report.md", "old report\n"),
    ];
    const NEW: &[(&str, &str)] = &[
        ("a.csv", "new a\n"),
        ("b.csv", "new b, longer\n"),
        ("sub/c.csv", "new c\n"),
        ("sub/d.csv", "new d\n"),
        ("report.md", "new report\n"),
    ];

    /// A folder holding the set OLD of run `old`, and an unrelated file.
    fn previous() -> (tempfile::TempDir, PathBuf) {
        let root = tempfile::tempdir().unwrap();
        let out = root.path().join("out");
        write_outputs(&out, root.path(), &set("old", OLD)).unwrap();
        std::fs::write(out.join("mine.txt"), "not firemain's").unwrap();
        (root, out)
    }

    #[test]
    fn a_set_is_written_whole_with_its_manifest_last() {
        let (root, out) = previous();
        let paths = write_outputs(&out, root.path(), &set("new", NEW)).unwrap();
        assert_eq!(paths.last().unwrap(), &out.join("manifest-check.toml"));
        let snap = snapshot(&out);
        for (name, bytes) in NEW {
            assert_eq!(snap[Path::new(name)].as_deref(), Some(bytes.as_bytes()));
        }
        // Nothing hidden is left behind, and other files are untouched.
        assert!(snap
            .keys()
            .all(|p| !p.to_string_lossy().split('/').any(|c| c.starts_with('.'))));
        assert_eq!(
            snap[Path::new("mine.txt")].as_deref(),
            Some(&b"not firemain's"[..])
        );
        let m = read_manifest(&out, "check").unwrap();
        assert_eq!(m.run_id, "new");
        assert_eq!(m.files.len(), NEW.len());
        assert_eq!(m.files[1].name, "b.csv");
        assert_eq!(m.files[1].bytes, 14);
        assert_eq!(
            m.files[1].fnv1a64,
            format!("{:016x}", fnv1a64(b"new b, longer\n"))
        );
    }

    #[test]
    fn files_of_the_previous_set_that_this_run_does_not_write_are_removed() {
        let (root, out) = previous();
        write_outputs(&out, root.path(), &set("new", &NEW[..1])).unwrap();
        assert!(out.join("a.csv").exists());
        assert!(!out.join("b.csv").exists());
        assert!(!out.join("sub/c.csv").exists());
        // Not in the manifest: not firemain's to delete.
        assert!(out.join("mine.txt").exists());
    }

    /// Runs a write that must fail, and checks that the folder is byte for byte as before.
    fn assert_previous_set_kept(
        out: &Path,
        write: impl FnOnce() -> Result<Vec<PathBuf>, ReportError>,
    ) {
        let before = snapshot(out);
        let err = write().expect_err("the write must fail");
        let text = err.to_string();
        assert!(matches!(err, ReportError::SetNotWritten { .. }), "{text}");
        assert!(text.contains("no output file was replaced"), "{text}");
        assert_eq!(snapshot(out), before, "{text}");
    }

    #[test]
    fn a_folder_in_the_way_of_one_file_leaves_the_previous_set_untouched() {
        let root = tempfile::tempdir().unwrap();
        let out = root.path().join("out");
        write_outputs(&out, root.path(), &set("old", &OLD[..3])).unwrap();
        // report.md, the last file of the set, cannot replace a folder.
        std::fs::create_dir_all(out.join("report.md/x")).unwrap();
        assert_previous_set_kept(&out, || write_outputs(&out, root.path(), &set("new", NEW)));
    }

    #[test]
    fn an_unwritable_name_part_way_leaves_the_previous_set_untouched() {
        let (root, out) = previous();
        // `sub2` is a file, so `sub2/e.csv` (the fourth file) cannot be created.
        std::fs::write(out.join("sub2"), "a file, not a folder").unwrap();
        let mut files = NEW.to_vec();
        files.insert(3, ("sub2/e.csv", "e\n"));
        files.insert(4, ("new-folder/f.csv", "f\n"));
        files.push(("sub2/g.csv", "g\n"));
        assert_previous_set_kept(&out, || {
            write_outputs(&out, root.path(), &set("new", &files))
        });
        assert!(!out.join("new-folder").exists());
    }

    #[test]
    fn a_failure_at_any_rename_puts_the_previous_set_back() {
        // Step 2 of the OLD → NEW write makes: manifest aside, 4 × (aside + place), 1 place
        // (sub/d.csv is new), the manifest placed: 11 renames.
        for fail_at in 0..11 {
            let (root, out) = previous();
            assert_previous_set_kept(&out, || {
                write_set(&out, root.path(), &set("new", NEW), Some(fail_at))
            });
        }
        let (root, out) = previous();
        write_set(&out, root.path(), &set("new", NEW), Some(11)).expect("11 renames in all");
        // With stale files to remove as well: manifest aside, a.csv aside and placed, three
        // stale files aside, the manifest placed: 7 renames.
        for fail_at in 0..7 {
            let (root, out) = previous();
            assert_previous_set_kept(&out, || {
                write_set(&out, root.path(), &set("new", &NEW[..1]), Some(fail_at))
            });
        }
        let (root, out) = previous();
        write_set(&out, root.path(), &set("new", &NEW[..1]), Some(7)).expect("7 renames in all");
    }

    #[test]
    fn names_outside_the_folder_and_repeated_names_are_refused() {
        let root = tempfile::tempdir().unwrap();
        let out = root.path().join("out");
        for bad in [
            "../x.csv",
            "/tmp/x.csv",
            "",
            "a/./b",
            "a//b",
            "manifest-check.toml",
        ] {
            let err = write_outputs(&out, root.path(), &set("r", &[(bad, "x")])).unwrap_err();
            assert!(matches!(err, ReportError::BadName { .. }), "{bad}: {err}");
        }
        let err =
            write_outputs(&out, root.path(), &set("r", &[("a", "x"), ("a", "y")])).unwrap_err();
        assert!(matches!(err, ReportError::BadName { .. }), "{err}");
    }

    #[test]
    fn masking_removes_run_id_and_date() {
        let text = "Run id: 0123abcd0123abcd. Date: 2025-12-02T00:00:00Z. On 2025-12-02.";
        assert_eq!(
            mask_run(text, "0123abcd0123abcd", "2025-12-02T00:00:00Z"),
            "Run id: <run-id>. Date: <generated>. On <date>."
        );
        assert_ne!(new_run_id(), new_run_id());
        assert_eq!(new_run_id().len(), 16);
    }

    #[test]
    fn fnv1a64_matches_published_test_vectors() {
        // FNV test vectors (Fowler, Noll, Vo, FNV reference code test suite), from memory.
        assert_eq!(fnv1a64(b""), 0xcbf2_9ce4_8422_2325);
        assert_eq!(fnv1a64(b"a"), 0xaf63_dc4c_8601_ec8c);
        assert_eq!(fnv1a64(b"foobar"), 0x8594_4171_f739_67e8);
    }
}
