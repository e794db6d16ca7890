//! The example outputs quoted in docs/outputs.md are firemain's real output for the demo town.
//!
//! Every fenced block of docs/outputs.md preceded by `<!-- demo-output: SOURCE -->` is compared,
//! line by line, with SOURCE: the terminal output (`check`), standard error (`check-stderr`) or
//! a file (`check/report.md`) of the demo run that the doc shows. A line `...` elides any number
//! of lines; `...` inside a line elides any text; lines starting with `$ ` are the command.
//! The run id is replaced by `DOC_RUN_ID` and the wall time and thread count of the `--stats`
//! line are not compared.
//!
//! `validate`, `solve` and `check` run here (a few seconds in a debug build). `upsize` takes
//! too long in a debug build, so its examples are compared with its output committed in
//! `tests/doc-examples/upsize/`, and the ignored test `committed_upsize_output_is_current`
//! checks that committed output against a fresh run.
//!
//! When the output changes, update the doc (and the committed upsize output) with
//!
//!     FIREMAIN_UPDATE_DOCS=1 cargo test --test doc_examples -- --include-ignored
//!
//! and review the diff. (The demo town is invented: these are checks of the documentation, not
//! of the numbers.)

mod common;

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::process::Command;
use std::sync::Mutex;

const DOC: &str = "docs/outputs.md";
/// The committed output of `upsize` on the demo town, with the run id replaced.
const UPSIZE_OUTPUT: &str = "tests/doc-examples/upsize";
/// The files of the upsize run that the doc quotes (besides the terminal output).
const UPSIZE_FILES: &[&str] = &[
    "upsize_plan.csv",
    "upsize_hydrants.csv",
    "upsize_report.md",
    "proposed-network/pipes.csv",
];
/// The date of the examples: 2025-12-02T00:00:00Z (`SOURCE_DATE_EPOCH`).
const EPOCH: &str = "1764633600";
/// The run id shown in the examples in place of the run's random one.
const DOC_RUN_ID: &str = "5e1c0d4a9b7f2368";
const MARKER: &str = "<!-- demo-output: ";
const UPDATE_COMMAND: &str =
    "FIREMAIN_UPDATE_DOCS=1 cargo test --test doc_examples -- --include-ignored";

/// Serialises the read-modify-write of docs/outputs.md between the tests of this file.
static DOC_LOCK: Mutex<()> = Mutex::new(());

fn repo(relative: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join(relative)
}

fn updating() -> bool {
    std::env::var_os("FIREMAIN_UPDATE_DOCS").is_some()
}

/// Runs firemain in the repository root, as the doc's commands do; returns stdout and stderr.
fn firemain(args: &[&str]) -> (String, String) {
    let out = Command::new(env!("CARGO_BIN_EXE_firemain"))
        .current_dir(repo(""))
        .env("SOURCE_DATE_EPOCH", EPOCH)
        .args(args)
        .output()
        .expect("run firemain");
    assert!(
        out.status.code().is_some_and(|c| c <= 1),
        "firemain {args:?} failed: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    (
        String::from_utf8_lossy(&out.stdout).into_owned(),
        String::from_utf8_lossy(&out.stderr).into_owned(),
    )
}

/// The files of the set `command` wrote into `dir`, with the run id replaced by `DOC_RUN_ID`.
fn files_of(dir: &Path, command: &str) -> BTreeMap<String, String> {
    let manifest = firemain::report::set::read_manifest(dir, command).expect("manifest");
    let mut out = BTreeMap::new();
    for f in &manifest.files {
        let text = std::fs::read_to_string(dir.join(&f.name)).expect("output file");
        out.insert(
            format!("{command}/{}", f.name),
            text.replace(&manifest.run_id, DOC_RUN_ID),
        );
    }
    let name = firemain::report::manifest_name(command);
    let text = std::fs::read_to_string(dir.join(&name)).expect("manifest");
    out.insert(
        format!("{command}/{name}"),
        text.replace(&manifest.run_id, DOC_RUN_ID),
    );
    out
}

/// The sources the doc's blocks quote, except upsize's.
fn demo_sources() -> BTreeMap<String, String> {
    let tmp = tempfile::tempdir().expect("temporary folder");
    let (s, c) = (tmp.path().join("s"), tmp.path().join("c"));
    let mut sources = BTreeMap::new();
    let (validate, _) = firemain(&["validate", "examples/demo-town"]);
    sources.insert("validate".to_string(), validate);
    let (solve, _) = firemain(&[
        "solve",
        "examples/demo-town",
        "--condition",
        "peak-hour",
        "--out",
        s.to_str().expect("UTF-8 path"),
    ]);
    sources.insert("solve".to_string(), solve);
    // The result files as `head` shows several files.
    let mut heads = String::new();
    for name in [
        "node_results.csv",
        "pipe_results.csv",
        "pump_results.csv",
        "valve_results.csv",
    ] {
        let text = std::fs::read_to_string(s.join(name)).expect("result file");
        heads.push_str(&format!("==> {name} <==\n{text}\n"));
    }
    sources.insert("solve/*.csv".to_string(), heads);
    let (check, check_err) = firemain(&[
        "check",
        "examples/demo-town",
        "--criteria",
        "criteria/cedar-county-demo.toml",
        "--project",
        "examples/demo-town/project.toml",
        "--stats",
        "--out",
        c.to_str().expect("UTF-8 path"),
    ]);
    sources.insert("check".to_string(), check);
    sources.insert("check-stderr".to_string(), check_err);
    sources.extend(files_of(&c, "check"));
    sources
}

/// Runs upsize on the demo town: its terminal output and quoted files, run id replaced.
fn fresh_upsize() -> BTreeMap<String, String> {
    let tmp = tempfile::tempdir().expect("temporary folder");
    let u = tmp.path().join("u");
    let (stdout, _) = firemain(&[
        "upsize",
        "examples/demo-town",
        "--criteria",
        "criteria/cedar-county-demo.toml",
        "--quiet",
        "--out",
        u.to_str().expect("UTF-8 path"),
    ]);
    let mut out = files_of(&u, "upsize");
    out.retain(|name, _| UPSIZE_FILES.iter().any(|f| name == &format!("upsize/{f}")));
    out.insert("upsize".to_string(), stdout);
    out
}

/// The committed upsize output (`upsize` is `stdout.txt`).
fn committed_upsize() -> BTreeMap<String, String> {
    let dir = repo(UPSIZE_OUTPUT);
    let read = |name: &str| {
        std::fs::read_to_string(dir.join(name)).unwrap_or_else(|e| {
            panic!("{UPSIZE_OUTPUT}/{name}: {e}; regenerate it with `{UPDATE_COMMAND}`")
        })
    };
    let mut out = BTreeMap::new();
    out.insert("upsize".to_string(), read("stdout.txt"));
    for f in UPSIZE_FILES {
        out.insert(format!("upsize/{f}"), read(f));
    }
    out
}

fn write_committed_upsize(sources: &BTreeMap<String, String>) {
    let dir = repo(UPSIZE_OUTPUT);
    for (name, text) in sources {
        let file = match name.strip_prefix("upsize/") {
            Some(f) => f.to_string(),
            None => "stdout.txt".to_string(),
        };
        let path = dir.join(file);
        std::fs::create_dir_all(path.parent().expect("parent")).expect("create folder");
        std::fs::write(path, text).expect("write committed output");
    }
}

/// Where the wall time and thread count of a `--stats` line start (at the `, ` before them).
fn stats_cut(line: &str) -> Option<usize> {
    if !line.starts_with("sweep: ") || !line.ends_with(" thread(s)") {
        return None;
    }
    let wall = line.find(" s wall, ")?;
    line[..wall].rfind(", ")
}

/// Text that differs between identical runs: the wall time and threads of the `--stats` line.
fn mask(line: &str) -> String {
    match stats_cut(line) {
        Some(cut) => format!("{}, <wall time and threads>", &line[..cut]),
        None => line.to_string(),
    }
}

/// Whether `text` matches `pattern`, in which each `...` stands for any text.
fn wildcard(pattern: &str, text: &str) -> bool {
    let pieces: Vec<&str> = pattern.split("...").collect();
    if pieces.len() == 1 {
        return pattern == text;
    }
    let (first, last) = (pieces[0], pieces[pieces.len() - 1]);
    if !text.starts_with(first) || text.len() < first.len() + last.len() {
        return false;
    }
    let mut rest = &text[first.len()..];
    for piece in &pieces[1..pieces.len() - 1] {
        match rest.find(piece) {
            Some(i) => rest = &rest[i + piece.len()..],
            None => return false,
        }
    }
    rest.ends_with(last)
}

fn line_matches(doc: &str, actual: &str) -> bool {
    wildcard(&mask(doc), &mask(actual))
}

/// What identifies a line after an elision: its first cell (table, CSV) or its label.
fn key(line: &str) -> &str {
    let t = line.trim_start_matches([' ', '│', '|', '-']);
    let end = t.find(['│', '|', ',', ':']).unwrap_or(t.len());
    t[..end].trim()
}

/// The shape of a line: its key without digits (a row of the same table, the same label).
fn shape(line: &str) -> String {
    key(line).chars().filter(|c| !c.is_ascii_digit()).collect()
}

/// The doc's line rewritten from the output's line: a line cut short with a final `...`
/// stays cut at the same width.
fn rewrite(doc: &str, actual: &str) -> String {
    // The `--stats` line keeps the doc's wall time and threads (they are not compared).
    if let (Some(d), Some(a)) = (stats_cut(doc), stats_cut(actual)) {
        return format!("{}{}", &actual[..a], &doc[d..]);
    }
    if let Some(prefix) = doc.strip_suffix("...") {
        if !prefix.contains("...") {
            let width = prefix.chars().count();
            if actual.chars().count() > width {
                return format!("{}...", actual.chars().take(width).collect::<String>());
            }
        }
    }
    actual.to_string()
}

/// A marked block of the doc: its source and the range of its content lines.
struct Block {
    source: String,
    lines: std::ops::Range<usize>,
}

fn blocks(doc: &[String]) -> Vec<Block> {
    let mut out = Vec::new();
    let mut i = 0;
    while i < doc.len() {
        if let Some(rest) = doc[i].strip_prefix(MARKER) {
            let source = rest.trim_end().trim_end_matches("-->").trim().to_string();
            assert!(
                doc.get(i + 1).is_some_and(|l| l.starts_with("```")),
                "{DOC}:{}: a demo-output marker must be followed by a fenced block",
                i + 1
            );
            let start = i + 2;
            let end = (start..doc.len())
                .find(|&j| doc[j].starts_with("```"))
                .unwrap_or_else(|| panic!("{DOC}:{}: unclosed block", i + 2));
            out.push(Block {
                source,
                lines: start..end,
            });
            i = end;
        }
        i += 1;
    }
    out
}

/// Compares one block with its source; returns the mismatches, and rewrites the block's lines
/// in `doc` when updating.
fn compare_block(doc: &mut [String], block: &Block, source: &str, update: bool) -> Vec<String> {
    let actual: Vec<&str> = source.lines().collect();
    let mut problems = Vec::new();
    let mut cursor = 0;
    let mut searching = true;
    for i in block.lines.clone() {
        let line = doc[i].clone();
        if line.starts_with("$ ") {
            continue;
        }
        if line.trim() == "..." {
            searching = true;
            continue;
        }
        let found = if searching {
            (cursor..actual.len())
                .find(|&k| line_matches(&line, actual[k]))
                .map(|k| (k, true))
                .or_else(|| {
                    (cursor..actual.len())
                        .find(|&k| !key(&line).is_empty() && key(&line) == key(actual[k]))
                        .map(|k| (k, false))
                })
        } else {
            // Right after a quoted line: the next line of the output, if it is the same kind of
            // line (otherwise lines were added or removed, which needs an edit by hand).
            (cursor < actual.len())
                .then(|| (cursor, line_matches(&line, actual[cursor])))
                .filter(|&(k, ok)| ok || shape(&line) == shape(actual[k]))
        };
        match found {
            Some((_, true)) => {}
            Some((k, false)) => {
                problems.push(format!(
                    "{DOC}:{}: the example from `{}` says\n    {line}\n  but firemain now writes\n    {}",
                    i + 1,
                    block.source,
                    actual[k]
                ));
                if update {
                    doc[i] = rewrite(&line, actual[k]);
                }
            }
            None => problems.push(format!(
                "{DOC}:{}: the example from `{}` has a line that firemain no longer writes (edit by hand):\n    {line}",
                i + 1,
                block.source
            )),
        }
        // After a line that could not be placed, look for the next one anywhere below.
        searching = found.is_none();
        if let Some((k, _)) = found {
            cursor = k + 1;
        }
    }
    problems
}

/// Checks (or, when updating, rewrites) every block whose source is in `sources`.
fn check_doc(sources: &BTreeMap<String, String>) {
    let _guard = DOC_LOCK.lock().unwrap_or_else(|e| e.into_inner());
    let path = repo(DOC);
    let text = std::fs::read_to_string(&path).expect("docs/outputs.md");
    let mut doc: Vec<String> = text.lines().map(str::to_string).collect();
    let update = updating();
    let mut problems = Vec::new();
    let mut seen = 0;
    for block in blocks(&doc) {
        let family = block.source.split(['/', '-']).next().unwrap_or_default();
        let Some(source) = sources.get(&block.source) else {
            assert!(
                !sources.keys().any(|k| k.starts_with(family)),
                "{DOC}: unknown demo-output source `{}`",
                block.source
            );
            continue;
        };
        seen += 1;
        problems.extend(compare_block(&mut doc, &block, source, update));
    }
    assert!(seen > 0, "no demo-output block of {DOC} was checked");
    if update {
        let mut new = doc.join("\n");
        new.push('\n');
        if new != text {
            std::fs::write(&path, new).expect("write docs/outputs.md");
        }
        let unresolved: Vec<&String> = problems
            .iter()
            .filter(|p| p.contains("edit by hand"))
            .collect();
        assert!(unresolved.is_empty(), "{unresolved:#?}");
    } else {
        assert!(
            problems.is_empty(),
            "{} example line(s) in {DOC} no longer match the demo's output; update docs/outputs.md: run\n    {UPDATE_COMMAND}\nand review the diff.\n\n{}",
            problems.len(),
            problems.join("\n")
        );
    }
}

#[test]
fn validate_solve_and_check_examples_match_the_demo() {
    check_doc(&demo_sources());
}

#[test]
fn upsize_examples_match_the_committed_upsize_output() {
    if updating() {
        let _guard = DOC_LOCK.lock().unwrap_or_else(|e| e.into_inner());
        write_committed_upsize(&fresh_upsize());
    }
    check_doc(&committed_upsize());
}

/// Slow in a debug build (about 20 s): run with `--include-ignored`.
#[test]
#[ignore]
fn committed_upsize_output_is_current() {
    let fresh = fresh_upsize();
    if updating() {
        return;
    }
    let committed = committed_upsize();
    for (name, text) in &fresh {
        assert!(
            committed.get(name) == Some(text),
            "{UPSIZE_OUTPUT}: {name} differs from a fresh upsize run; update it with\n    {UPDATE_COMMAND}"
        );
    }
}

#[test]
fn the_matcher_elides_and_masks() {
    assert!(wildcard("a ... c", "a b c"));
    assert!(wildcard("abc...", "abcdef"));
    assert!(!wildcard("abc...", "abd"));
    assert!(wildcard("x (...). y ...", "x (1). y 2"));
    assert_eq!(
        mask("sweep: 1 hydrants, 2 solves, 0.04 s wall, 2 thread(s)"),
        mask("sweep: 1 hydrants, 2 solves, 3.10 s wall, 1 thread(s)")
    );
    assert_eq!(key("│ HYD-124 │ main │"), "HYD-124");
    assert_eq!(key("P-002,6.00,10.00"), "P-002");
    assert_eq!(key("Plan:       14 failing"), "Plan");
    assert_eq!(rewrite("abcd...", "abcxyz123"), "abcx...");
    assert_eq!(
        rewrite(
            "sweep: 1 hydrants, 0.04 s wall, 2 thread(s)",
            "sweep: 3 hydrants, 5.10 s wall, 1 thread(s)"
        ),
        "sweep: 3 hydrants, 0.04 s wall, 2 thread(s)"
    );
}

/// Every line the demo commands print on standard output fits in 120 characters (counted as
/// characters, not bytes: the table borders are several bytes each). 120 columns is the width
/// firemain draws for (`report::table::TERMINAL_WIDTH`; common practice, no source). `upsize`
/// is read from its committed output, which `committed_upsize_output_is_current` keeps current.
#[test]
fn terminal_output_fits_120_columns() {
    let tmp = tempfile::tempdir().expect("temporary folder");
    let out = |name: &str| {
        tmp.path()
            .join(name)
            .to_str()
            .expect("UTF-8 path")
            .to_string()
    };
    let mut printed = demo_sources();
    printed.retain(|name, _| ["validate", "solve", "check"].contains(&name.as_str()));
    let (flowtest, _) = firemain(&[
        "flowtest",
        "examples/demo-town",
        "--tests",
        "examples/demo-town/flowtests.csv",
        "--criteria",
        "criteria/cedar-county-demo.toml",
        "--calibrate-by",
        "material",
        "--out",
        &out("f"),
    ]);
    printed.insert("flowtest".into(), flowtest);
    let (checked, _) = firemain(&[
        "check",
        "examples/demo-town",
        "--criteria",
        "criteria/cedar-county-demo.toml",
        "--tests",
        "examples/demo-town/flowtests.csv",
        "--out",
        &out("c"),
    ]);
    printed.insert("check --tests".into(), checked);
    printed.insert("upsize".into(), committed_upsize()["upsize"].clone());
    assert_eq!(printed.len(), 6, "every command's output is checked");
    for (command, text) in &printed {
        assert!(!text.is_empty(), "{command} printed nothing");
        for line in text.lines() {
            let width = line.chars().count();
            assert!(
                width <= 120,
                "firemain {command} printed a line of {width} characters:\n{line}"
            );
        }
    }
}
