//! docs/errors.md is the list of these tests: every row of its tables is applied to the base
//! network the document shows, run through the real binary, and the finding must appear at the
//! row's location with the row's severity and text (errors with exit code 2). A row that no
//! longer matches fails here, so the catalogue cannot drift from the program.
//!
//! The expected texts are firemain's own specification of its messages (the catalogue itself);
//! common practice, no source.

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::process::Command;

const DOC: &str = include_str!("../docs/errors.md");

/// The base files: each `<!-- errors-base: NAME -->` followed by a fenced block.
fn base_files() -> Vec<(String, String)> {
    let mut files = Vec::new();
    let mut lines = DOC.lines();
    while let Some(line) = lines.next() {
        let Some(name) = line
            .strip_prefix("<!-- errors-base: ")
            .and_then(|r| r.strip_suffix(" -->"))
        else {
            continue;
        };
        let fence = lines.next().expect("a fenced block after the marker");
        assert!(fence.starts_with("```"), "no fence after {name}");
        let mut body = String::new();
        for l in lines.by_ref() {
            if l.starts_with("```") {
                break;
            }
            body.push_str(l);
            body.push('\n');
        }
        files.push((name.to_string(), body));
    }
    assert!(files.len() >= 6, "the base network is incomplete");
    files
}

/// One catalogue row, with the command of its table.
#[derive(Debug)]
struct Row {
    id: String,
    severity: String,
    file: String,
    edit: String,
    at: String,
    says: String,
    /// The arguments of the table's `<!-- errors-command: ... -->` marker (before NET and CRIT
    /// are replaced); empty for a table of command-line rows.
    command: String,
}

fn rows() -> Vec<Row> {
    let mut command = String::new();
    let mut rows = Vec::new();
    for l in DOC.lines() {
        if let Some(c) = l
            .strip_prefix("<!-- errors-command: ")
            .and_then(|r| r.strip_suffix(" -->"))
        {
            command = c.to_string();
            continue;
        }
        if l.starts_with("## ") {
            command.clear();
        }
        if !l.starts_with("| ") || l.starts_with("| id ") {
            continue;
        }
        let cells: Vec<String> = l
            .trim()
            .trim_matches('|')
            .split('|')
            .map(|c| c.trim().to_string())
            .collect();
        assert_eq!(
            cells.len(),
            6,
            "a row of docs/errors.md has not six cells: {l}"
        );
        let row = Row {
            id: cells[0].clone(),
            severity: cells[1].clone(),
            file: cells[2].clone(),
            edit: cells[3].clone(),
            at: cells[4].clone(),
            says: cells[5].clone(),
            command: command.clone(),
        };
        if row.id.len() == 3 && row.id.as_bytes()[0].is_ascii_uppercase() {
            assert!(
                row.file == "(command)" || !row.command.is_empty(),
                "{}: its table has no errors-command marker",
                row.id
            );
            rows.push(row);
        }
    }
    rows
}

/// Strips one pair of backticks and turns `\n` into line breaks and `\t` into tabs.
fn code(cell: &str) -> String {
    cell.strip_prefix('`')
        .and_then(|c| c.strip_suffix('`'))
        .unwrap_or(cell)
        .replace("\\n", "\n")
        .replace("\\t", "\t")
}

/// Applies a row's edit to the file's text; `None` when the file is to be removed.
fn apply(row: &Row, text: &str) -> Option<String> {
    match row.edit.as_str() {
        "*remove*" => None,
        "*empty*" => Some(String::new()),
        e if e.starts_with("`+ ") => Some(format!("{text}{}\n", &code(e)[2..])),
        e => {
            let (old, new) = e
                .split_once(" → ")
                .unwrap_or_else(|| panic!("{}: cannot read the edit {e}", row.id));
            let (old, new) = (code(old), code(new));
            assert!(
                text.contains(&old),
                "{}: the base {} has no `{old}`",
                row.id,
                row.file
            );
            Some(text.replacen(&old, &new, 1))
        }
    }
}

/// The files of the network folder `net/`; every other file is beside it.
const NETWORK_FILES: &[&str] = &[
    "model.toml",
    "junctions.csv",
    "sources.csv",
    "pipes.csv",
    "hydrants.csv",
    "pumps.csv",
    "valves.csv",
];

fn path_of(root: &Path, name: &str) -> PathBuf {
    if NETWORK_FILES.contains(&name) {
        root.join("net").join(name)
    } else {
        root.join(name)
    }
}

fn write_base(root: &Path) {
    std::fs::create_dir_all(root.join("net")).expect("mkdir");
    for (name, body) in base_files() {
        std::fs::write(path_of(root, &name), body).expect("write base");
    }
}

/// Every file under `dir` with its bytes, by path: what an error must leave as it was.
fn snapshot(dir: &Path) -> BTreeMap<PathBuf, Vec<u8>> {
    let mut files = BTreeMap::new();
    let mut todo = vec![dir.to_path_buf()];
    while let Some(d) = todo.pop() {
        for entry in std::fs::read_dir(&d).expect("read_dir").flatten() {
            let path = entry.path();
            if path.is_dir() {
                files.insert(path.clone(), Vec::new());
                todo.push(path);
            } else {
                files.insert(path.clone(), std::fs::read(&path).unwrap_or_default());
            }
        }
    }
    files
}

/// A row's arguments: NET and CRIT replaced, paths relative to the base folder.
fn arguments(command: &str) -> Vec<String> {
    command
        .split_whitespace()
        .map(|a| match a {
            "NET" => "net".to_string(),
            "CRIT" => "criteria.toml".to_string(),
            a => a.replace("NET/", "net/"),
        })
        .collect()
}

/// The finding lines of a run (stdout and stderr).
fn run(root: &Path, args: &[String]) -> (Option<i32>, String) {
    let out = Command::new(env!("CARGO_BIN_EXE_firemain"))
        .args(args)
        .current_dir(root)
        .output()
        .expect("run firemain");
    let text = format!(
        "{}\n{}",
        String::from_utf8_lossy(&out.stdout),
        String::from_utf8_lossy(&out.stderr)
    );
    (out.status.code(), text)
}

/// Whether `text` has a line with the row's location, severity and words.
fn has_finding(text: &str, row: &Row) -> bool {
    text.lines().any(|l| {
        if !l.contains(&row.says) {
            return false;
        }
        if row.at.is_empty() {
            return true;
        }
        // A location of a whole file matches any line of it; a path may precede the name.
        let marker = format!(": {}: ", row.severity.trim_start_matches("analysis "));
        match l.find(&marker) {
            Some(end) => {
                let location = &l[..end];
                location.ends_with(&row.at)
                    || (!row.at.contains(':')
                        && location
                            .rsplit('/')
                            .next()
                            .is_some_and(|f| f.starts_with(&row.at)))
            }
            None => false,
        }
    })
}

/// The exit status a row's severity stands for: 2 for an input error, 3 for an analysis error
/// (README.md, "Exit codes"); a warning leaves the status to the run.
fn expected_status(severity: &str) -> Option<i32> {
    match severity {
        "error" => Some(2),
        "analysis error" => Some(3),
        _ => None,
    }
}

/// Runs one row in a fresh copy of the base files; the failure, if any, in words.
fn check_row(row: &Row) -> Option<String> {
    let dir = tempfile::tempdir().expect("tempdir");
    let root = dir.path();
    write_base(root);
    let args = if row.file == "(command)" {
        arguments(&code(&row.edit))
    } else {
        let path = path_of(root, &row.file);
        let text = std::fs::read_to_string(&path).unwrap_or_default();
        match apply(row, &text) {
            Some(t) => {
                // A row's file may sit in a folder of its own (e.g. a folder in the way of an
                // output file), which the row creates.
                if let Some(parent) = path.parent() {
                    std::fs::create_dir_all(parent).expect("mkdir");
                }
                std::fs::write(&path, t).expect("write")
            }
            None => std::fs::remove_file(&path).expect("remove"),
        }
        arguments(&row.command)
    };
    let before = snapshot(root);
    let (code, text) = run(root, &args);
    let expected = expected_status(&row.severity);
    if expected.is_some() && code != expected {
        return Some(format!(
            "{}: exit {code:?}, expected {expected:?}:\n{text}",
            row.id
        ));
    }
    if !has_finding(&text, row) {
        return Some(format!(
            "{} (exit {code:?}): expected {} at {:?} saying {:?}; got:\n{text}",
            row.id, row.severity, row.at, row.says
        ));
    }
    // An error writes nothing and changes no input file (README.md, "Exit codes"; common
    // practice, no source): the folder is byte for byte as it was before the run.
    if expected.is_some() && snapshot(root) != before {
        return Some(format!(
            "{}: the error left the files changed or added",
            row.id
        ));
    }
    None
}

#[test]
fn every_row_of_the_error_catalogue_holds() {
    let rows = rows();
    assert!(
        rows.len() >= 190,
        "docs/errors.md lost rows: {}",
        rows.len()
    );
    let failures: Vec<String> = rows.iter().filter_map(check_row).collect();
    assert!(
        failures.is_empty(),
        "{} of {} rows of docs/errors.md do not hold:\n{}",
        failures.len(),
        rows.len(),
        failures.join("\n")
    );
}
