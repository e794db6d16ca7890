//! docs/errors.md is the list of these tests: every row of its tables is applied to the base
//! network the document shows, run through the real binary, and the finding must appear at the
//! row's location with the row's severity and text (errors with exit code 2). A row that no
//! longer matches fails here, so the catalogue cannot drift from the program.
//!
//! The expected texts are firemain's own specification of its messages (the catalogue itself);
//! common practice, no source.

use std::path::Path;
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

/// One catalogue row.
#[derive(Debug)]
struct Row {
    id: String,
    severity: String,
    file: String,
    edit: String,
    at: String,
    says: String,
}

fn rows() -> Vec<Row> {
    DOC.lines()
        .filter(|l| l.starts_with("| ") && !l.starts_with("| id "))
        .map(|l| {
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
            Row {
                id: cells[0].clone(),
                severity: cells[1].clone(),
                file: cells[2].clone(),
                edit: cells[3].clone(),
                at: cells[4].clone(),
                says: cells[5].clone(),
            }
        })
        .filter(|r| r.id.len() == 3 && r.id.as_bytes()[0].is_ascii_uppercase())
        .collect()
}

/// Strips one pair of backticks and turns `\n` into line breaks.
fn code(cell: &str) -> String {
    cell.strip_prefix('`')
        .and_then(|c| c.strip_suffix('`'))
        .unwrap_or(cell)
        .replace("\\n", "\n")
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

fn write_base(root: &Path) {
    let net = root.join("net");
    std::fs::create_dir_all(&net).expect("mkdir");
    for (name, body) in base_files() {
        let path = if name == "criteria.toml" || name == "project.toml" {
            root.join(&name)
        } else {
            net.join(&name)
        };
        std::fs::write(path, body).expect("write base");
    }
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
        let marker = format!(": {}: ", row.severity);
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

#[test]
fn every_row_of_the_error_catalogue_holds() {
    let rows = rows();
    assert!(rows.len() >= 30, "docs/errors.md lost rows: {}", rows.len());
    let mut failures = Vec::new();
    for row in &rows {
        let dir = tempfile::tempdir().expect("tempdir");
        let root = dir.path();
        write_base(root);
        let args: Vec<String> = if row.file == "(command)" {
            code(&row.edit)
                .split_whitespace()
                .map(|a| match a {
                    "NET" => "net".to_string(),
                    "CRIT" => "criteria.toml".to_string(),
                    a => a.replace("NET/", "net/"),
                })
                .collect()
        } else {
            let path = if row.file == "criteria.toml" || row.file == "project.toml" {
                root.join(&row.file)
            } else {
                root.join("net").join(&row.file)
            };
            let text = std::fs::read_to_string(&path).unwrap_or_default();
            match apply(row, &text) {
                Some(t) => std::fs::write(&path, t).expect("write"),
                None => std::fs::remove_file(&path).expect("remove"),
            }
            let args: &[&str] = match row.file.as_str() {
                "criteria.toml" => &["check", "net", "--criteria", "criteria.toml"],
                "project.toml" => &[
                    "check",
                    "net",
                    "--criteria",
                    "criteria.toml",
                    "--project",
                    "project.toml",
                ],
                _ => &["validate", "net"],
            };
            args.iter().map(|a| a.to_string()).collect()
        };
        let (code, text) = run(root, &args);
        let status_ok = row.severity != "error" || code == Some(2);
        if !status_ok || !has_finding(&text, row) {
            failures.push(format!(
                "{} (exit {code:?}): expected {} at {:?} saying {:?}; got:\n{text}",
                row.id, row.severity, row.at, row.says
            ));
        }
    }
    assert!(
        failures.is_empty(),
        "{} of {} rows of docs/errors.md do not hold:\n{}",
        failures.len(),
        rows.len(),
        failures.join("\n")
    );
}
