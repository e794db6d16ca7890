//! Bad input is refused cleanly: the real binary is run on small networks, each broken in one
//! way, and must exit with code 2 (input error) without panicking, name the file, the line and
//! (where it applies) the column of the problem, say how to fix it, write no output file, and
//! leave every input file as it was. Plausibility warnings must not stop `validate` (exit 0),
//! and the lenient CSV rules (BOM, CRLF, comments, any column order, quotes, exponents) must load.
//!
//! The expected messages, locations and exit codes come from firemain's own specification of
//! its input format and command line (docs/network-format.md, docs/criteria-format.md and
//! `firemain --help`); the plausibility limits are common practice, no source. The networks
//! below are invented test input, not check values.

use std::collections::BTreeMap;
use std::ffi::{OsStr, OsString};
use std::fs;
use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};

use firemain::model::table::MAX_INPUT_BYTES;
use tempfile::TempDir;

// ---------------------------------------------------------------------------------------------
// Test networks

const MODEL_US: &str = "name = \"bad input\"
units = \"us\"
headloss = \"hazen-williams\"
[demand]
max_day_factor = 1.5
peak_hour_factor = 2.5
";

const MODEL_SI: &str = "name = \"bad input SI\"
units = \"si\"
headloss = \"hazen-williams\"
[demand]
max_day_factor = 1.5
peak_hour_factor = 2.5
";

/// Junctions of the US network: J1 on line 2, J2 on line 3, J3 on line 4.
const JUNCTIONS_US: &str = "id,elevation,demand
J1,100,10
J2,105,20
J3,110,15
";
const SOURCES_US: &str = "id,kind,grade
R1,reservoir,300
";
/// A line R1 - J1 - J2 - J3 of 8 in mains: P1 on line 2, P2 on line 3, P3 on line 4.
const PIPES_US: &str = "id,from,to,length,diameter,roughness
P1,R1,J1,500,8,120
P2,J1,J2,500,8,120
P3,J2,J3,500,8,120
";
const HYDRANTS_US: &str = "id,junction
H1,J3
";

const JUNCTIONS_SI: &str = "id,elevation,demand
J1,30,1
J2,32,2
J3,34,1.5
";
const SOURCES_SI: &str = "id,kind,grade
R1,reservoir,90
";
const PIPES_SI: &str = "id,from,to,length,diameter,roughness
P1,R1,J1,150,200,120
P2,J1,J2,150,200,120
P3,J2,J3,150,200,120
";

/// Valid criteria for the US network. Line 3 `units`, line 7 `[fire]`, line 8 `residual_floor`.
const CRITERIA_US: &str = "name = \"bad-input tests\"
reference = \"test criteria\"
units = \"us\"
[service]
min_pressure = 40
max_pressure = 100
[fire]
residual_floor = 20
scope = \"system\"
search_cap = 8000
default_required_flow = 1000
";

/// Header of pumps.csv.
const PUMP_HEADER: &str =
    "id,from,to,shutoff_head,design_flow,design_head,runout_flow,runout_head,speed,status";
/// Header of valves.csv.
const VALVE_HEADER: &str = "id,from,to,kind,diameter,setting,minor_loss,status";

/// A temporary folder holding a network folder `net/`, a criteria file `criteria.toml` beside
/// it, and the place `out/` that commands are given as `--out` (never created by the test).
struct Net {
    root: TempDir,
}

impl Net {
    /// A small valid US network (three junctions on a line from one reservoir, one hydrant).
    fn us() -> Net {
        let net = Net::empty();
        net.write("model.toml", MODEL_US)
            .write("junctions.csv", JUNCTIONS_US)
            .write("sources.csv", SOURCES_US)
            .write("pipes.csv", PIPES_US)
            .write("hydrants.csv", HYDRANTS_US);
        net
    }

    /// The same shape in SI units, without hydrants.
    fn si() -> Net {
        let net = Net::empty();
        net.write("model.toml", MODEL_SI)
            .write("junctions.csv", JUNCTIONS_SI)
            .write("sources.csv", SOURCES_SI)
            .write("pipes.csv", PIPES_SI);
        net
    }

    fn empty() -> Net {
        let root = tempfile::tempdir().expect("temporary folder");
        fs::create_dir(root.path().join("net")).expect("network folder");
        fs::write(root.path().join("criteria.toml"), CRITERIA_US).expect("criteria");
        Net { root }
    }

    /// The network folder.
    fn dir(&self) -> PathBuf {
        self.root.path().join("net")
    }

    /// The default criteria file.
    fn criteria(&self) -> PathBuf {
        self.root.path().join("criteria.toml")
    }

    /// The output folder given to `--out`; it must never appear for bad input.
    fn out(&self) -> PathBuf {
        self.root.path().join("out")
    }

    /// Writes (or replaces) a file of the network folder.
    fn write(&self, file: &str, contents: impl AsRef<[u8]>) -> &Self {
        fs::write(self.dir().join(file), contents).expect("write test input");
        self
    }

    fn remove(&self, file: &str) -> &Self {
        fs::remove_file(self.dir().join(file)).expect("remove test input");
        self
    }

    /// Writes a criteria file beside the network and returns its path.
    fn write_criteria(&self, name: &str, contents: impl AsRef<[u8]>) -> PathBuf {
        let path = self.root.path().join(name);
        fs::write(&path, contents).expect("write criteria");
        path
    }

    /// Every file under the temporary folder with its contents (files over 1 MiB by length
    /// and modification time, so that a sparse giant file is never read).
    fn snapshot(&self) -> BTreeMap<PathBuf, Fingerprint> {
        let mut files = BTreeMap::new();
        let mut stack = vec![self.root.path().to_path_buf()];
        while let Some(dir) = stack.pop() {
            for entry in fs::read_dir(&dir).expect("read folder") {
                let path = entry.expect("folder entry").path();
                let meta = fs::metadata(&path).expect("metadata");
                if meta.is_dir() {
                    stack.push(path);
                } else if meta.len() > 1 << 20 {
                    let modified = meta.modified().expect("modification time");
                    files.insert(path, Fingerprint::Large(meta.len(), modified));
                } else {
                    files.insert(
                        path.clone(),
                        Fingerprint::Bytes(fs::read(&path).expect("read")),
                    );
                }
            }
        }
        files
    }
}

/// What is compared of a file to tell that it was not modified.
#[derive(Debug, PartialEq, Eq)]
enum Fingerprint {
    Bytes(Vec<u8>),
    Large(u64, std::time::SystemTime),
}

// ---------------------------------------------------------------------------------------------
// Running the binary and reading its diagnostics

/// What one run of the binary did.
struct Run {
    what: String,
    code: Option<i32>,
    stdout: String,
    stderr: String,
}

impl Run {
    /// Everything printed, stdout then stderr (`validate` prints findings on stdout, the other
    /// commands on stderr).
    fn text(&self) -> String {
        format!("{}{}", self.stdout, self.stderr)
    }

    fn assert_no_panic(&self) {
        assert!(
            self.code != Some(101) && !self.stderr.contains("panicked"),
            "`{}` panicked (exit {:?}):\n{}",
            self.what,
            self.code,
            self.text()
        );
    }

    fn assert_code(&self, code: i32) {
        self.assert_no_panic();
        assert_eq!(
            self.code,
            Some(code),
            "`{}` exit code; output:\n{}",
            self.what,
            self.text()
        );
    }
}

/// Runs the binary with `args`, without standard input.
fn firemain<S: AsRef<OsStr>>(args: &[S]) -> Run {
    let what = args
        .iter()
        .map(|a| a.as_ref().to_string_lossy().into_owned())
        .collect::<Vec<_>>()
        .join(" ");
    let output = Command::new(env!("CARGO_BIN_EXE_firemain"))
        .args(args)
        .stdin(Stdio::null())
        .output()
        .expect("run firemain");
    Run {
        what: format!("firemain {what}"),
        code: output.status.code(),
        stdout: String::from_utf8_lossy(&output.stdout).into_owned(),
        stderr: String::from_utf8_lossy(&output.stderr).into_owned(),
    }
}

/// `firemain validate NET`.
fn validate(net: &Net) -> Run {
    firemain(&[OsStr::new("validate"), net.dir().as_os_str()])
}

/// `firemain solve NET` (no `--out`).
fn solve(net: &Net) -> Run {
    firemain(&[OsStr::new("solve"), net.dir().as_os_str()])
}

/// One finding printed as `file[:line[:column]]: severity: message[; fix: fix]`.
#[derive(Debug)]
struct Finding<'a> {
    file: &'a str,
    line: Option<u64>,
    column: Option<u64>,
    severity: &'a str,
    message: &'a str,
    fix: Option<&'a str>,
}

/// A location `file[:line[:column]]` split into its parts.
fn split_location(at: &str) -> (&str, Option<u64>, Option<u64>) {
    let mut parts = at.split(':');
    let file = parts.next().unwrap_or_default();
    let line = parts.next().and_then(|p| p.parse().ok());
    let column = parts.next().and_then(|p| p.parse().ok());
    (file, line, column)
}

/// The findings in a command's output (other lines are ignored).
fn findings(text: &str) -> Vec<Finding<'_>> {
    let mut out = Vec::new();
    for line in text.lines() {
        for severity in ["error", "warning", "note"] {
            let Some((at, rest)) = line.split_once(&format!(": {severity}: ")) else {
                continue;
            };
            let (file, line_no, column) = split_location(at);
            let (message, fix) = match rest.split_once("; fix: ") {
                Some((m, f)) => (m, Some(f)),
                None => (rest, None),
            };
            out.push(Finding {
                file,
                line: line_no,
                column,
                severity,
                message,
                fix,
            });
            break;
        }
    }
    out
}

/// Asserts that `text` has a finding of `severity` at `at` (`file`, `file:line` or
/// `file:line:column`: every part given must match) whose message contains `says`; errors and
/// warnings must also say how to fix the problem. Returns the message.
fn assert_finding<'t>(text: &'t str, severity: &str, at: &str, says: &str) -> &'t str {
    let (file, line, column) = split_location(at);
    let all = findings(text);
    let found = all.iter().find(|f| {
        f.severity == severity
            && f.file == file
            && (line.is_none() || f.line == line)
            && (column.is_none() || f.column == column)
            && f.message.contains(says)
    });
    let Some(found) = found else {
        panic!("expected `{at}: {severity}: ...{says}...`; the output was:\n{text}");
    };
    if severity != "note" {
        assert!(
            found.fix.is_some_and(|f| f.trim().len() > 5),
            "the {severity} at {at} does not say how to fix it:\n{text}"
        );
    }
    found.message
}

/// Arguments of `check NET --criteria CRITERIA [extra...] --out OUT`.
fn check_args(net: &Net, criteria: &Path, extra: &[&str]) -> Vec<OsString> {
    let mut args: Vec<OsString> = vec![
        "check".into(),
        net.dir().into(),
        "--criteria".into(),
        criteria.into(),
    ];
    args.extend(extra.iter().map(OsString::from));
    args.extend(["--out".into(), net.out().into()]);
    args
}

/// Runs `validate`, `solve --out` and `check --out` on the network and asserts that each
/// refuses it as an input error with every `(location, message part)` in `expected`. Returns
/// the run of `validate`.
fn assert_refused(net: &Net, expected: &[(&str, &str)]) -> Run {
    let commands: [Vec<OsString>; 3] = [
        vec!["validate".into(), net.dir().into()],
        vec![
            "solve".into(),
            net.dir().into(),
            "--out".into(),
            net.out().into(),
        ],
        check_args(net, &net.criteria(), &[]),
    ];
    let [validate_run, _, _] = commands.map(|args| assert_refused_by(net, &args, expected));
    validate_run
}

/// Runs one command and asserts that it refuses its input: exit code 2, no panic, the expected
/// errors, no output folder, and input files unchanged.
fn assert_refused_by<S: AsRef<OsStr>>(net: &Net, args: &[S], expected: &[(&str, &str)]) -> Run {
    let before = net.snapshot();
    let run = firemain(args);
    run.assert_code(2);
    let text = run.text();
    for (at, says) in expected {
        assert_finding(&text, "error", at, says);
    }
    assert!(
        !net.out().exists(),
        "`{}` created the output folder for bad input",
        run.what
    );
    assert!(
        net.snapshot() == before,
        "`{}` modified or added files beside its input",
        run.what
    );
    run
}

/// Runs `check --out` with the given criteria file and asserts it is refused.
fn assert_criteria_refused(net: &Net, criteria: &Path, expected: &[(&str, &str)]) -> Run {
    assert_refused_by(net, &check_args(net, criteria, &[]), expected)
}

/// Runs `validate` and asserts it succeeds (exit 0) listing the warning at `at` with a fix,
/// and says that plausibility warnings are common practice; `solve` must not panic on it.
fn assert_warned(net: &Net, at: &str, says: &str) {
    let before = net.snapshot();
    let run = validate(net);
    run.assert_code(0);
    assert_finding(&run.stdout, "warning", at, says);
    assert!(
        run.stdout.contains("common practice"),
        "validate does not say the warnings are common practice:\n{}",
        run.stdout
    );
    assert!(
        findings(&run.stdout).iter().all(|f| f.severity != "error"),
        "a warning case printed errors:\n{}",
        run.stdout
    );
    solve(net).assert_no_panic();
    assert!(
        net.snapshot() == before,
        "validate or solve modified its input"
    );
}

// ---------------------------------------------------------------------------------------------
// Missing, empty and unreadable files

/// A network without model.toml is refused, naming model.toml.
#[test]
fn missing_model_toml() {
    let net = Net::us();
    net.remove("model.toml");
    assert_refused(&net, &[("model.toml", "cannot read")]);
}

/// A network without junctions.csv is refused, naming junctions.csv.
#[test]
fn missing_junctions_csv() {
    let net = Net::us();
    net.remove("junctions.csv");
    assert_refused(&net, &[("junctions.csv", "cannot read")]);
}

/// A network without sources.csv is refused, naming sources.csv.
#[test]
fn missing_sources_csv() {
    let net = Net::us();
    net.remove("sources.csv");
    assert_refused(&net, &[("sources.csv", "cannot read")]);
}

/// A network without pipes.csv is refused, naming pipes.csv.
#[test]
fn missing_pipes_csv() {
    let net = Net::us();
    net.remove("pipes.csv");
    assert_refused(&net, &[("pipes.csv", "cannot read")]);
}

/// A zero-byte file, and a file of only comments and blank lines, are "empty".
#[test]
fn empty_file() {
    for contents in ["", "# nothing here\n\n# still nothing\n"] {
        let net = Net::us();
        net.write("pipes.csv", contents);
        assert_refused(&net, &[("pipes.csv", "empty")]);
    }
}

/// junctions.csv with a header and no rows: "there are no junctions".
#[test]
fn header_only_junctions() {
    let net = Net::us();
    net.write("junctions.csv", "id,elevation,demand\n");
    assert_refused(&net, &[("junctions.csv", "no junctions")]);
}

/// sources.csv with a header and no rows: "there is no source".
#[test]
fn header_only_sources() {
    let net = Net::us();
    net.write("sources.csv", "id,kind,grade\n");
    assert_refused(&net, &[("sources.csv", "no source")]);
}

/// pipes.csv with a header and no rows: "there are no pipes".
#[test]
fn header_only_pipes() {
    let net = Net::us();
    net.write("pipes.csv", "id,from,to,length,diameter,roughness\n");
    assert_refused(&net, &[("pipes.csv", "no pipes")]);
}

/// A network whose only source rows are commented out has no source.
#[test]
fn no_source() {
    let net = Net::us();
    net.write(
        "sources.csv",
        "id,kind,grade\n# R1,reservoir,300 (taken out of service)\n",
    );
    assert_refused(&net, &[("sources.csv", "no source")]);
}

/// Bytes that are not UTF-8 are located to their cell (line 3, field 1).
#[test]
fn non_utf8_bytes() {
    let net = Net::us();
    net.write(
        "junctions.csv",
        b"id,elevation,demand\nJ1,100,10\nJ\xe92,105,20\nJ3,110,15\n",
    );
    assert_refused(&net, &[("junctions.csv:3:1", "UTF-8")]);
}

/// A file just over MAX_INPUT_BYTES (a sparse file: no disk used) is refused from its size
/// without being read.
#[test]
fn file_over_the_size_limit() {
    let net = Net::us();
    let file = fs::File::create(net.dir().join("pipes.csv")).expect("create");
    file.set_len(MAX_INPUT_BYTES + 1).expect("sparse file");
    drop(file);
    let started = std::time::Instant::now();
    assert_refused(&net, &[("pipes.csv", "bytes")]);
    assert!(
        started.elapsed() < std::time::Duration::from_secs(30),
        "refusing the giant file took {:?}: it was probably read",
        started.elapsed()
    );
}

// ---------------------------------------------------------------------------------------------
// CSV structure

/// A required column missing from the header is named, at the header's line (line 2 here,
/// after a comment line).
#[test]
fn missing_required_column() {
    let net = Net::us();
    net.write(
        "pipes.csv",
        "# diameter forgotten\nid,from,to,length,roughness\nP1,R1,J1,500,120\n",
    );
    assert_refused(&net, &[("pipes.csv:2", "`diameter` is missing")]);
}

/// The same column twice in a header is refused at the second one.
#[test]
fn duplicate_column() {
    let net = Net::us();
    net.write("junctions.csv", "id,elevation,Elevation\nJ1,100,100\n");
    assert_refused(&net, &[("junctions.csv:1:3", "appears twice")]);
}

/// A row with more or fewer fields than the header is refused at its line.
#[test]
fn ragged_row() {
    let net = Net::us();
    net.write(
        "junctions.csv",
        "id,elevation,demand\nJ1,100,10,7\nJ2,105\nJ3,110,15\n",
    );
    assert_refused(
        &net,
        &[
            ("junctions.csv:2", "4 fields but the header has 3"),
            ("junctions.csv:3", "2 fields but the header has 3"),
        ],
    );
}

/// A quote that is never closed is an error at the line where it opens, and the message
/// says to close it: in the middle of a row, at the end of a row, and on the last row.
#[test]
fn unterminated_quote() {
    let cases = [
        "id,elevation,demand\nJ1,\"100,10\nJ2,105,20\nJ3,110,15\n",
        "id,elevation,demand\nJ1,100,\"10\nJ2,105,20\nJ3,110,15\n",
        "id,elevation,demand\nJ1,100,10\nJ2,105,20\nJ3,110,\"15\n",
    ];
    for (contents, line) in cases.iter().zip([2, 2, 4]) {
        let net = Net::us();
        net.write("junctions.csv", contents);
        assert_refused(&net, &[(&format!("junctions.csv:{line}"), "quote")]);
    }
}

/// A row refused whole (a quoted field over several lines, a wrong number of fields) is one
/// error: the pipes and hydrants that name its junction are not reported again as naming an
/// unknown one (common practice, no source: one finding per mistake).
#[test]
fn a_refused_row_is_reported_once() {
    for contents in [
        "id,elevation,demand\nJ1,100,10\nJ2,105,\"2\n0\"\nJ3,110,15\n",
        "id,elevation,demand\nJ1,100,10\nJ2,105,20,7\nJ3,110,15\n",
    ] {
        let net = Net::us();
        net.write("junctions.csv", contents);
        let run = assert_refused(&net, &[("junctions.csv:3", "")]);
        let text = run.text();
        let errors = findings(&text)
            .iter()
            .filter(|f| f.severity == "error")
            .count();
        assert_eq!(errors, 1, "one error expected:\n{text}");
    }
}

/// A file with old-style CR-only line ends is either refused as such or read with correct
/// line numbers; here a bad number on line 3 must not be reported on line 1.
#[test]
fn cr_only_line_ends() {
    let net = Net::us();
    net.write(
        "junctions.csv",
        "id,elevation,demand\rJ1,100,10\rJ2,1x5,20\rJ3,110,15\r",
    );
    let run = validate(&net);
    run.assert_code(2);
    let located = findings(&run.stdout).iter().any(|f| {
        f.file == "junctions.csv"
            && f.severity == "error"
            && ((f.line == Some(3) && f.column == Some(2)) || f.message.contains("line end"))
    });
    assert!(located, "{}", run.stdout);
}

/// A file delimited by semicolons or tabs (as spreadsheets write where the comma is the
/// decimal mark) is one error naming the delimiter at the header's line, not one "column
/// missing" error per required column.
#[test]
fn foreign_delimiter_is_named() {
    for (delimiter, named) in [(";", "';'"), ("\t", "a tab")] {
        let net = Net::us();
        net.write(
            "pipes.csv",
            format!("# exported\n{}", PIPES_US.replace(',', delimiter)),
        );
        let run = assert_refused(
            &net,
            &[(
                "pipes.csv:2",
                &format!(
                    "pipes.csv uses {named} as its delimiter; firemain reads comma-separated files"
                ),
            )],
        );
        assert_eq!(findings(&run.stdout).len(), 1, "{}", run.stdout);
    }
}

/// A file with lone-CR line ends (old Mac style) that starts with a comment is read, not
/// reported empty, and a note names its line ends.
#[test]
fn cr_only_line_ends_after_a_comment() {
    let net = Net::us();
    net.write(
        "junctions.csv",
        "# exported\rid,elevation,demand\rJ1,100,10\rJ2,105,20\rJ3,110,15\r",
    );
    let run = validate(&net);
    run.assert_code(0);
    assert_finding(
        &run.stdout,
        "note",
        "junctions.csv",
        "lone CR (old Mac style)",
    );
    assert!(!run.stdout.contains("empty"), "{}", run.stdout);
}

// ---------------------------------------------------------------------------------------------
// Numbers

/// A cell that is not a number is located to its line and field, past comment and blank
/// lines.
#[test]
fn unparsable_number() {
    let net = Net::us();
    net.write(
        "junctions.csv",
        "# elevations in ft\nid,elevation,demand\nJ1,100,10\n\n# next row\nJ2,1o5,20\nJ3,110,15\n",
    );
    assert_refused(
        &net,
        &[("junctions.csv:6:2", "`1o5` is not a finite number")],
    );
}

/// NaN and infinities are refused as not finite, in every spelling Rust's parser accepts.
#[test]
fn nan_and_inf() {
    for bad in ["nan", "NaN", "inf", "-inf", "Infinity"] {
        let net = Net::us();
        net.write(
            "junctions.csv",
            format!("id,elevation,demand\nJ1,100,10\nJ2,{bad},20\nJ3,110,15\n"),
        );
        assert_refused(
            &net,
            &[(
                "junctions.csv:3:2",
                &format!("`{bad}` is not a finite number"),
            )],
        );
    }
}

/// A negative pipe length is refused (a zero length is only a warning, see below).
#[test]
fn negative_length() {
    let net = Net::us();
    net.write(
        "pipes.csv",
        PIPES_US.replace("P2,J1,J2,500", "P2,J1,J2,-500"),
    );
    assert_refused(&net, &[("pipes.csv:3:4", "`length` must be zero or more")]);
}

/// A zero or negative pipe diameter is refused at its cell.
#[test]
fn non_positive_diameter() {
    for bad in ["0", "-8"] {
        let net = Net::us();
        net.write(
            "pipes.csv",
            PIPES_US.replace("P2,J1,J2,500,8", &format!("P2,J1,J2,500,{bad}")),
        );
        assert_refused(&net, &[("pipes.csv:3:5", "`diameter` must be positive")]);
    }
}

/// A zero or negative roughness is refused at its cell.
#[test]
fn non_positive_roughness() {
    for bad in ["0", "-120"] {
        let net = Net::us();
        net.write(
            "pipes.csv",
            PIPES_US.replace("P2,J1,J2,500,8,120", &format!("P2,J1,J2,500,8,{bad}")),
        );
        assert_refused(&net, &[("pipes.csv:3:6", "`roughness` must be positive")]);
    }
}

/// A negative minor-loss coefficient is refused at its cell.
#[test]
fn negative_minor_loss() {
    let net = Net::us();
    net.write(
        "pipes.csv",
        "id,from,to,length,diameter,roughness,minor_loss\nP1,R1,J1,500,8,120,\nP2,J1,J2,500,8,120,-0.5\nP3,J2,J3,500,8,120,2\n",
    );
    assert_refused(
        &net,
        &[("pipes.csv:3:7", "`minor_loss` must be zero or more")],
    );
}

/// A demand factor of model.toml that is not positive is refused at its line and column.
#[test]
fn non_positive_demand_factor() {
    let net = Net::us();
    net.write(
        "model.toml",
        MODEL_US.replace("max_day_factor = 1.5", "max_day_factor = -1"),
    );
    assert_refused(&net, &[("model.toml:5:18", "max_day_factor")]);
}

/// A demand factor beyond any demand pattern (1e300) is refused at its value, shown with an
/// exponent rather than 301 digits.
#[test]
fn absurd_demand_factor() {
    let net = Net::us();
    net.write(
        "model.toml",
        MODEL_US.replace("peak_hour_factor = 2.5", "peak_hour_factor = 1e300"),
    );
    let run = assert_refused(&net, &[("model.toml:6:20", "peak_hour_factor 1e300")]);
    assert!(!run.stdout.contains("000000000000"), "{}", run.stdout);
}

/// An unknown word for a model.toml setting is refused at its line and column.
#[test]
fn unknown_model_units() {
    let net = Net::us();
    net.write("model.toml", MODEL_US.replace("\"us\"", "\"imperial\""));
    assert_refused(&net, &[("model.toml:2:9", "imperial")]);
}

// ---------------------------------------------------------------------------------------------
// Ids and references

/// Two junctions with one id: the second is refused and the first is named.
#[test]
fn duplicate_junction_id() {
    let net = Net::us();
    net.write(
        "junctions.csv",
        "id,elevation,demand\nJ1,100,10\nJ2,105,20\nJ2,110,15\n",
    );
    assert_refused(
        &net,
        &[(
            "junctions.csv:4:1",
            "`J2` is used twice (also at junctions.csv:3)",
        )],
    );
}

/// A source with a junction's id is refused: ids are unique over all nodes.
#[test]
fn source_with_a_junction_id() {
    let net = Net::us();
    net.write(
        "sources.csv",
        "id,kind,grade\nR1,reservoir,300\nJ1,tank,280\n",
    );
    assert_refused(
        &net,
        &[(
            "sources.csv:3:1",
            "`J1` is used twice (also at junctions.csv:2)",
        )],
    );
}

/// Two pipes with one id: the second is refused and the first is named.
#[test]
fn duplicate_pipe_id() {
    let net = Net::us();
    net.write("pipes.csv", PIPES_US.replace("P3,", "P2,"));
    assert_refused(
        &net,
        &[("pipes.csv:4:1", "`P2` is used twice (also at pipes.csv:3)")],
    );
}

/// A pipe naming a node that does not exist is refused at that cell.
#[test]
fn pipe_to_unknown_node() {
    let net = Net::us();
    net.write("pipes.csv", PIPES_US.replace("P2,J1,J2", "P2,J1,J9"));
    assert_refused(
        &net,
        &[("pipes.csv:3:3", "`J9` is not a junction or source id")],
    );
}

/// An unknown pipe status is refused at its cell, listing the allowed words.
#[test]
fn unknown_pipe_status() {
    let net = Net::us();
    net.write(
        "pipes.csv",
        "id,from,to,length,diameter,roughness,status\nP1,R1,J1,500,8,120,open\nP2,J1,J2,500,8,120,shut\nP3,J2,J3,500,8,120,\n",
    );
    let run = assert_refused(&net, &[("pipes.csv:3:7", "unknown status `shut`")]);
    assert!(run.stdout.contains("open, closed, check"), "{}", run.stdout);
}

/// An unknown source kind is refused at its cell.
#[test]
fn unknown_source_kind() {
    let net = Net::us();
    net.write("sources.csv", "id,kind,grade\nR1,lake,300\n");
    assert_refused(&net, &[("sources.csv:2:2", "unknown kind `lake`")]);
}

/// Junctions with no open path to a source are listed island by island, each with its size
/// and members, at the line of its first junction; the connected junctions are not listed.
#[test]
fn islands_without_a_source() {
    let net = Net::us();
    net.write(
        "junctions.csv",
        format!("{JUNCTIONS_US}J4,100,1\nJ5,100,1\nJ6,100,1\nJ7,100,1\nJ8,100,1\n"),
    );
    // Island {J4, J5}; island {J6, J7, J8}, tied to the network only by a closed pipe.
    net.write(
        "pipes.csv",
        "id,from,to,length,diameter,roughness,status\n\
         P1,R1,J1,500,8,120,\nP2,J1,J2,500,8,120,\nP3,J2,J3,500,8,120,\n\
         P4,J4,J5,500,8,120,\nP5,J6,J7,500,8,120,\nP6,J7,J8,500,8,120,\nP7,J3,J8,500,8,120,closed\n",
    );
    let run = assert_refused(
        &net,
        &[
            ("junctions.csv:5", "island of 2 junction(s)"),
            ("junctions.csv:7", "island of 3 junction(s)"),
        ],
    );
    let first = assert_finding(&run.stdout, "error", "junctions.csv:5", "island");
    let second = assert_finding(&run.stdout, "error", "junctions.csv:7", "island");
    // The ids quoted, as every message quotes input text (docs/network-format.md §5).
    assert!(first.ends_with("`J4`, `J5`"), "{first}");
    assert!(second.ends_with("`J6`, `J7`, `J8`"), "{second}");
    let islands = findings(&run.stdout)
        .iter()
        .filter(|f| f.message.contains("island"))
        .count();
    assert_eq!(islands, 2, "one error per island:\n{}", run.stdout);
}

// ---------------------------------------------------------------------------------------------
// Hydrants

/// A hydrant on a junction that does not exist is refused at its cell.
#[test]
fn hydrant_on_unknown_junction() {
    let net = Net::us();
    net.write("hydrants.csv", "id,junction\nH1,J9\n");
    assert_refused(&net, &[("hydrants.csv:2:2", "`J9` is not a junction id")]);
}

/// A hydrant on a source is refused at its cell.
#[test]
fn hydrant_on_a_source() {
    let net = Net::us();
    net.write("hydrants.csv", "id,junction\nH1,R1\n");
    assert_refused(&net, &[("hydrants.csv:2:2", "`R1` is a source")]);
}

/// Two hydrants with one id: the second is refused and the first one's line is named.
#[test]
fn duplicate_hydrant_id() {
    let net = Net::us();
    net.write("hydrants.csv", "id,junction\nH1,J3\nH1,J2\n");
    assert_refused(
        &net,
        &[("hydrants.csv:3:1", "`H1` is used twice (also at line 2)")],
    );
}

/// A zero or negative required fire flow is refused at its cell.
#[test]
fn non_positive_required_flow() {
    for bad in ["0", "-500"] {
        let net = Net::us();
        net.write(
            "hydrants.csv",
            format!("id,junction,required_flow\nH1,J3,{bad}\n"),
        );
        assert_refused(
            &net,
            &[("hydrants.csv:2:3", "`required_flow` must be positive")],
        );
    }
}

// ---------------------------------------------------------------------------------------------
// Pumps and valves

/// The US network with a pump row `pump` (R1 feeds J1 through the pump besides pipe P1).
fn net_with_pump(pump: &str) -> Net {
    let net = Net::us();
    net.write("pumps.csv", format!("{PUMP_HEADER}\n{pump}\n"));
    net
}

/// The pump row used as a valid baseline.
const GOOD_PUMP: &str = "PU1,R1,J1,220,1000,170,1600,110,,";

/// The baseline pump and valve networks are valid, so the errors below are the only ones.
#[test]
fn pump_and_valve_baselines_are_valid() {
    validate(&net_with_pump(GOOD_PUMP)).assert_code(0);
    validate(&net_with_valves(&[GOOD_PRV])).assert_code(0);
}

/// Pump heads that do not fall with flow (runout head above design head) are refused.
#[test]
fn pump_curve_heads_not_falling() {
    let net = net_with_pump("PU1,R1,J1,220,1000,170,1600,180,,");
    assert_refused(&net, &[("pumps.csv:2", "curve points are not usable")]);
}

/// Pump flows that do not increase (runout flow below design flow) are refused.
#[test]
fn pump_curve_flows_not_increasing() {
    let net = net_with_pump("PU1,R1,J1,220,1600,170,1000,110,,");
    assert_refused(&net, &[("pumps.csv:2", "curve points are not usable")]);
}

/// A pump whose suction and discharge are the same node is refused.
#[test]
fn pump_connected_to_itself() {
    let net = net_with_pump("PU1,J1,J1,220,1000,170,1600,110,,");
    assert_refused(&net, &[("pumps.csv:2", "same node at both ends")]);
}

/// The valve row used as a valid baseline: a PRV from J3 holding 40 psi at J4.
const GOOD_PRV: &str = "V1,J3,J4,prv,8,40,,active";

/// The US network with junction J4 reached only through the valves `rows`.
fn net_with_valves(rows: &[&str]) -> Net {
    let net = Net::us();
    net.write("junctions.csv", format!("{JUNCTIONS_US}J4,90,5\n"));
    net.write(
        "valves.csv",
        format!("{VALVE_HEADER}\n{}\n", rows.join("\n")),
    );
    net
}

/// A negative valve setting is refused at its cell.
#[test]
fn negative_valve_setting() {
    let net = net_with_valves(&["V1,J3,J4,prv,8,-40,,active"]);
    assert_refused(
        &net,
        &[("valves.csv:2:6", "`setting` must be zero or more")],
    );
}

/// A valve whose two ends are the same node is refused.
#[test]
fn valve_connected_to_itself() {
    let net = net_with_valves(&["V1,J3,J3,prv,8,40,,active"]);
    assert_refused(&net, &[("valves.csv:2", "same node at both ends")]);
}

/// An unknown valve kind is refused at its cell.
#[test]
fn unknown_valve_kind() {
    let net = net_with_valves(&["V1,J3,J4,gate,8,40,,active"]);
    assert_refused(&net, &[("valves.csv:2:4", "unknown kind `gate`")]);
}

/// An active PRV whose controlled (to) side is a source is refused.
#[test]
fn prv_controlling_a_source() {
    let net = net_with_valves(&[GOOD_PRV, "V2,J2,R1,prv,8,40,,active"]);
    assert_refused(&net, &[("valves.csv:3", "fixed-grade source")]);
}

/// An active PSV whose controlled (from) side is a source is refused.
#[test]
fn psv_controlling_a_source() {
    let net = net_with_valves(&[GOOD_PRV, "V2,R1,J2,psv,8,40,,active"]);
    assert_refused(&net, &[("valves.csv:3", "fixed-grade source")]);
}

/// Two active PRVs holding the pressure of one junction are refused at the second.
#[test]
fn two_prvs_controlling_one_junction() {
    let net = net_with_valves(&[GOOD_PRV, "V2,J2,J4,prv,8,45,,active"]);
    assert_refused(&net, &[("valves.csv:3", "both control the pressure")]);
}

// ---------------------------------------------------------------------------------------------
// What the solver cannot handle: no resistance, magnitudes beyond any water system

/// A pipe of zero length without a minor loss has no resistance at all: an error at its
/// length cell (line 3, field 4), not a warning.
#[test]
fn zero_length_pipe_without_minor_loss() {
    let net = Net::us();
    net.write("pipes.csv", PIPES_US.replace("P2,J1,J2,500", "P2,J1,J2,0"));
    assert_refused(
        &net,
        &[(
            "pipes.csv:3:4",
            "pipe `P2` has zero length and no minor loss",
        )],
    );
}

/// Magnitudes beyond any water system are errors at their cell, in the network's units, and
/// never printed as hundreds of digits. The limits are firemain's own (docs/network-format.md,
/// common practice, no source): diameter 1 mm = 0.0393701 in to 10 m = 393.7008 in = 10000 mm (1 in = 25.4 mm exactly),
/// length 100 km = 328083.99 ft (1 ft = 0.3048 m exactly), demand 100 m³/s = 1585032 gpm =
/// 100000 L/s (1 US gal = 3.785411784 L exactly), elevation 10 km. A bound is shown rounded
/// inward to its six digits (393.7 in, 328083 ft), so that the value shown is accepted.
#[test]
fn magnitudes_beyond_any_water_system() {
    let us_cases: [(&str, &str, &str, &str, &str); 6] = [
        ("pipes.csv", "P2,J1,J2,500,8", "P2,J1,J2,500,1e300", "pipes.csv:3:5", "`diameter` 1e300 in is beyond any water pipe (firemain accepts between 0.0393701 and 393.7 in)"),
        ("pipes.csv", "P2,J1,J2,500,8", "P2,J1,J2,500,0.001", "pipes.csv:3:5", "`diameter` 0.001 in is beyond any water pipe (firemain accepts between 0.0393701 and 393.7 in)"),
        ("pipes.csv", "P2,J1,J2,500", "P2,J1,J2,400000", "pipes.csv:3:4", "`length` 400000 ft is beyond any water main between two junctions (firemain accepts at most 328083 ft)"),
        ("junctions.csv", "J2,105,20", "J2,105,1e12", "junctions.csv:3:3", "`demand` 1e12 gpm is beyond any water system (firemain accepts between -1585032 and 1585032 gpm)"),
        ("junctions.csv", "J2,105,20", "J2,-40000,20", "junctions.csv:3:2", "`elevation` -40000 ft is beyond any water system"),
        ("sources.csv", "R1,reservoir,300", "R1,reservoir,1e6", "sources.csv:2:3", "`grade` 1000000 ft is beyond any water system"),
    ];
    for (file, from, to, at, says) in us_cases {
        let net = Net::us();
        let original = match file {
            "pipes.csv" => PIPES_US,
            "junctions.csv" => JUNCTIONS_US,
            _ => SOURCES_US,
        };
        net.write(file, original.replace(from, to));
        let run = assert_refused(&net, &[(at, says)]);
        assert!(!run.stdout.contains("0000000000"), "{}", run.stdout);
    }
    // The bounds as shown are accepted.
    for row in ["P2,J1,J2,328083,393.7", "P2,J1,J2,500,0.0393701"] {
        let net = Net::us();
        net.write("pipes.csv", PIPES_US.replace("P2,J1,J2,500,8", row));
        let run = validate(&net);
        assert!(run.stdout.contains("0 error(s)"), "{}", run.stdout);
    }
    // The same in an SI network: mm, m and L/s.
    let si_cases: [(&str, &str, &str, &str, &str); 2] = [
        ("pipes.csv", "P2,J1,J2,150,200", "P2,J1,J2,150,20000", "pipes.csv:3:5", "`diameter` 20000 mm is beyond any water pipe (firemain accepts between 1 and 10000 mm)"),
        ("junctions.csv", "J2,32,2", "J2,32,-2e5", "junctions.csv:3:3", "`demand` -200000 L/s is beyond any water system (firemain accepts between -100000 and 100000 L/s)"),
    ];
    for (file, from, to, at, says) in si_cases {
        let net = Net::si();
        let original = if file == "pipes.csv" {
            PIPES_SI
        } else {
            JUNCTIONS_SI
        };
        net.write(file, original.replace(from, to));
        assert_refused_by(
            &net,
            &[OsString::from("validate"), net.dir().into()],
            &[(at, says)],
        );
    }
}

/// Roughness outside any pipe's range is an error; merely unusual values stay warnings (see
/// `warning_hazen_williams_c_out_of_range`). A C of 0.011 (a Manning n) and of 1000; a
/// Darcy-Weisbach roughness above half the diameter.
#[test]
fn roughness_beyond_any_pipe() {
    for bad in ["0.011", "1000"] {
        let net = Net::us();
        net.write(
            "pipes.csv",
            PIPES_US.replace("P2,J1,J2,500,8,120", &format!("P2,J1,J2,500,8,{bad}")),
        );
        assert_refused(
            &net,
            &[(
                "pipes.csv:3:6",
                &format!("`roughness` {bad} is beyond any pipe's Hazen-Williams C"),
            )],
        );
    }
    let net = Net::si();
    net.write(
        "model.toml",
        MODEL_SI.replace("hazen-williams", "darcy-weisbach"),
    );
    net.write(
        "pipes.csv",
        "id,from,to,length,diameter,roughness\nP1,R1,J1,150,200,0.1\nP2,J1,J2,150,200,150\nP3,J2,J3,150,200,0.1\n",
    );
    assert_refused_by(
        &net,
        &[OsString::from("validate"), net.dir().into()],
        &[(
            "pipes.csv:3:6",
            "`roughness` 150 mm is more than half the diameter 200 mm",
        )],
    );
}

/// Pump, valve and hydrant magnitudes beyond any water system are errors at their cell.
#[test]
fn pump_valve_and_hydrant_magnitudes() {
    let net = net_with_pump("PU1,R1,J1,1e5,1000,80,1700,52,1,on");
    assert_refused(
        &net,
        &[(
            "pumps.csv:2:4",
            "`shutoff_head` 100000 ft is beyond any pump",
        )],
    );
    let net = net_with_pump("PU1,R1,J1,108,1000,80,1700,52,1e3,on");
    assert_refused(
        &net,
        &[("pumps.csv:2:9", "`speed` 1000 is beyond any pump drive")],
    );
    let net = net_with_valves(&["V1,J2,J4,prv,8,1e9,,active"]);
    assert_refused(
        &net,
        &[(
            "valves.csv:2:6",
            "`setting` 1e9 psi is beyond any water system",
        )],
    );
    let net = Net::us();
    net.write("hydrants.csv", "id,junction,required_flow\nH1,J3,5e6\n");
    assert_refused(
        &net,
        &[(
            "hydrants.csv:2:3",
            "`required_flow` 5000000 gpm is beyond any water system",
        )],
    );
}

// ---------------------------------------------------------------------------------------------
// Knock-on errors and the error cap

/// A node file that cannot be read, is empty, or has no rows gives its own error and no error
/// for each reference to its nodes from pipes.csv and hydrants.csv.
#[test]
fn no_knock_on_errors_from_an_unreadable_node_file() {
    let cases: [(&str, Option<&str>, &str); 4] = [
        ("junctions.csv", None, "cannot read"),
        ("junctions.csv", Some(""), "empty"),
        ("junctions.csv", Some("id,elevation\n"), "no junctions"),
        (
            "sources.csv",
            Some("id;kind;grade\nR1;reservoir;300\n"),
            "delimiter",
        ),
    ];
    for (file, contents, says) in cases {
        let net = Net::us();
        match contents {
            None => {
                net.remove(file);
            }
            Some(text) => {
                net.write(file, text);
            }
        }
        let run = assert_refused(&net, &[(file, says)]);
        let errors: Vec<_> = findings(&run.stdout)
            .into_iter()
            .filter(|f| f.severity == "error")
            .collect();
        assert_eq!(errors.len(), 1, "{file}: {}", run.stdout);
    }
}

/// A junction row with an error (a bad elevation) gives one error, not one more for each pipe
/// and hydrant that names the junction.
#[test]
fn no_knock_on_errors_from_a_bad_node_row() {
    let net = Net::us();
    net.write("junctions.csv", JUNCTIONS_US.replace("J3,110", "J3,1x0"));
    let run = assert_refused(
        &net,
        &[("junctions.csv:4:2", "`1x0` is not a finite number")],
    );
    assert!(!run.stdout.contains("J3` is not"), "{}", run.stdout);
    assert_eq!(findings(&run.stdout).len(), 1, "{}", run.stdout);
}

/// Past 50 errors the rest are counted, not printed; the count stays exact.
#[test]
fn errors_are_capped_at_50() {
    let net = Net::us();
    let mut pipes = String::from(PIPES_US);
    for i in 0..120 {
        pipes.push_str(&format!("X{i},J1,J2,500,-8,120\n"));
    }
    net.write("pipes.csv", pipes);
    let run = validate(&net);
    run.assert_code(2);
    let errors = findings(&run.stdout)
        .iter()
        .filter(|f| f.severity == "error")
        .count();
    assert_eq!(errors, 50, "{}", run.stdout);
    assert!(
        run.stdout.contains("... and 70 more errors"),
        "{}",
        run.stdout
    );
    assert!(run.stdout.contains("120 error(s)"), "{}", run.stdout);
}

// ---------------------------------------------------------------------------------------------
// Criteria files

/// A criteria file without a required key is refused at its table (`[fire]`, line 7).
#[test]
fn criteria_missing_field() {
    let net = Net::us();
    let path = net.write_criteria("c.toml", CRITERIA_US.replace("search_cap = 8000\n", ""));
    let at = format!("{}:7", path.display());
    assert_criteria_refused(&net, &path, &[(&at, "missing field `search_cap`")]);
}

/// An unknown key in a criteria file is refused at the key.
#[test]
fn criteria_unknown_key() {
    let net = Net::us();
    let path = net.write_criteria(
        "c.toml",
        CRITERIA_US.replace("scope = ", "colour = \"red\"\nscope = "),
    );
    let at = format!("{}:9:1", path.display());
    assert_criteria_refused(&net, &path, &[(&at, "unknown field `colour`")]);
}

/// Criteria in other units than the network are refused at the `units` value.
#[test]
fn criteria_in_other_units() {
    let net = Net::us();
    let path = net.write_criteria("c.toml", CRITERIA_US.replace("\"us\"", "\"si\""));
    let at = format!("{}:3:9", path.display());
    assert_criteria_refused(
        &net,
        &path,
        &[(&at, "units \"si\" but the network is in \"us\"")],
    );
}

/// A byte-order mark does not shift the locations reported in a criteria file.
#[test]
fn criteria_with_bom_keeps_locations() {
    let net = Net::us();
    let path = net.write_criteria(
        "c.toml",
        format!("\u{feff}{}", CRITERIA_US.replace("\"us\"", "\"si\"")),
    );
    let at = format!("{}:3:9", path.display());
    assert_criteria_refused(&net, &path, &[(&at, "units \"si\"")]);
}

/// A hydrant class that the criteria do not list, with no default flow, is refused at the
/// hydrant's line, naming the class and the criteria file.
#[test]
fn criteria_unknown_class_without_default() {
    let net = Net::us();
    net.write("hydrants.csv", "id,junction,class\nH1,J3,commercial\n");
    let path = net.write_criteria(
        "c.toml",
        CRITERIA_US.replace("default_required_flow = 1000\n", ""),
    );
    let run = assert_criteria_refused(&net, &path, &[("hydrants.csv:2", "class `commercial`")]);
    let message = assert_finding(&run.stderr, "error", "hydrants.csv:2", "commercial");
    assert!(message.contains("c.toml"), "{message}");
}

/// A hydrant class the criteria do not list (a typing slip, `comercial`) is an error even when
/// the criteria give a default flow, at the class cell (line 2, field 3), naming the criteria
/// file and suggesting the nearest listed class (one edit away).
#[test]
fn criteria_unknown_class_with_did_you_mean() {
    let net = Net::us();
    net.write("hydrants.csv", "id,junction,class\nH1,J3,comercial\n");
    let path = net.write_criteria(
        "c.toml",
        format!("{CRITERIA_US}[fire.required_flow]\nresidential = 1000\ncommercial = 1500\n"),
    );
    let run = assert_criteria_refused(
        &net,
        &path,
        &[("hydrants.csv:2:3", "class `comercial`, which")],
    );
    let message = assert_finding(&run.stderr, "error", "hydrants.csv:2:3", "comercial");
    assert!(
        message.contains("c.toml") && message.contains("did you mean `commercial`?"),
        "{message}"
    );
    // upsize resolves classes the same way.
    let upsize: Vec<OsString> = vec![
        "upsize".into(),
        net.dir().into(),
        "--criteria".into(),
        path.clone().into(),
        "--out".into(),
        net.out().into(),
    ];
    assert_refused_by(&net, &upsize, &[("hydrants.csv:2:3", "comercial")]);
}

/// A blank class takes the criteria's default; an unlisted class beside the hydrant's own
/// required_flow is only a warning (the class decides nothing).
#[test]
fn criteria_blank_class_takes_the_default() {
    let net = Net::us();
    net.write(
        "hydrants.csv",
        "id,junction,required_flow,class\nH1,J3,,\nH2,J2,500,comercial\n",
    );
    let path = net.write_criteria(
        "c.toml",
        format!("{CRITERIA_US}[fire.required_flow]\ncommercial = 1500\n"),
    );
    let mut args = check_args(&net, &path, &["--quiet"]);
    args.truncate(args.len() - 2); // no --out
    let run = firemain(&args);
    run.assert_no_panic();
    assert!(matches!(run.code, Some(0) | Some(1)), "{}", run.text());
    assert_finding(
        &run.stderr,
        "warning",
        "hydrants.csv:3:4",
        "its own required_flow applies",
    );
    assert!(
        findings(&run.stderr).iter().all(|f| f.severity != "error"),
        "{}",
        run.stderr
    );
}

/// Criteria magnitudes beyond any water system are errors at their value, never printed as
/// hundreds of digits: a floor of 1e308 psi, a search cap of 1e9 gpm. Limits: the pressure of
/// 10 km of water and 100 m³/s (docs/criteria-format.md; common practice, no source).
#[test]
fn criteria_magnitudes_beyond_any_water_system() {
    let cases = [
        (
            "residual_floor = 20",
            "residual_floor = 1e308",
            "8:18",
            "[fire] residual_floor 1e308 psi is beyond any water system",
        ),
        (
            "search_cap = 8000",
            "search_cap = 1e9",
            "10:14",
            "[fire] search_cap 1e9 gpm is beyond any water system",
        ),
        (
            "search_cap = 8000",
            "search_cap = -8000",
            "10:14",
            "[fire] search_cap must be a positive number, got -8000",
        ),
    ];
    for (from, to, at, says) in cases {
        let net = Net::us();
        let path = net.write_criteria("c.toml", CRITERIA_US.replace(from, to));
        let at = format!("{}:{at}", path.display());
        let run = assert_criteria_refused(&net, &path, &[(&at, says)]);
        assert!(!run.stderr.contains("0000000000"), "{}", run.stderr);
        assert_eq!(
            findings(&run.stderr)
                .iter()
                .filter(|f| f.severity == "error")
                .count(),
            1,
            "one error per bad value:\n{}",
            run.stderr
        );
    }
}

/// A residual floor above the service maximum pressure is an error at the floor; a floor at
/// or above the service minimum, and a required flow above the search cap, are warnings.
#[test]
fn criteria_implausible_floor_and_required_flow() {
    let net = Net::us();
    let path = net.write_criteria(
        "c.toml",
        CRITERIA_US.replace("residual_floor = 20", "residual_floor = 120"),
    );
    let at = format!("{}:8:18", path.display());
    assert_criteria_refused(
        &net,
        &path,
        &[(&at, "is above [service] max_pressure 100 psi")],
    );

    let net = Net::us();
    let path = net.write_criteria(
        "c.toml",
        CRITERIA_US
            .replace("residual_floor = 20", "residual_floor = 45")
            .replace(
                "default_required_flow = 1000",
                "default_required_flow = 9000",
            ),
    );
    let mut args = check_args(&net, &path, &["--quiet"]);
    args.truncate(args.len() - 2); // no --out
    let run = firemain(&args);
    run.assert_no_panic();
    assert!(matches!(run.code, Some(0) | Some(1)), "{}", run.text());
    let at = format!("{}:8:18", path.display());
    assert_finding(
        &run.stderr,
        "warning",
        &at,
        "not below [service] min_pressure 40 psi",
    );
    let at = format!("{}:11:25", path.display());
    assert_finding(
        &run.stderr,
        "warning",
        &at,
        "above [fire] search_cap 8000 gpm",
    );
}

/// A residual floor that is zero, negative or NaN is refused at its value.
#[test]
fn criteria_non_positive_floor() {
    for bad in ["0", "-5", "nan"] {
        let net = Net::us();
        let path = net.write_criteria(
            "c.toml",
            CRITERIA_US.replace("residual_floor = 20", &format!("residual_floor = {bad}")),
        );
        let at = format!("{}:8:18", path.display());
        assert_criteria_refused(&net, &path, &[(&at, "residual_floor must be a positive")]);
    }
}

/// A TOML syntax error, in model.toml or in a criteria file, is one located finding on one
/// line (`file:line:column: error: message; fix: ...`), like every other finding.
#[test]
fn toml_syntax_error() {
    let net = Net::us();
    net.write(
        "model.toml",
        MODEL_US.replace("max_day_factor = 1.5", "max_day_factor = "),
    );
    assert_refused(&net, &[("model.toml:5:18", "")]);

    let net = Net::us();
    let path = net.write_criteria(
        "c.toml",
        CRITERIA_US.replace("residual_floor = 20", "residual_floor = "),
    );
    let at = format!("{}:8:18", path.display());
    assert_criteria_refused(&net, &path, &[(&at, "")]);
}

/// A criteria file that does not exist is refused, naming it.
#[test]
fn criteria_file_missing() {
    let net = Net::us();
    let path = net.criteria().with_file_name("nope.toml");
    let at = path.display().to_string();
    assert_criteria_refused(&net, &path, &[(&at, "cannot read")]);
}

// ---------------------------------------------------------------------------------------------
// Command line

/// `--hydrant` with an id that is not in hydrants.csv is an input error naming the id.
#[test]
fn unknown_hydrant_on_the_command_line() {
    let net = Net::us();
    let args = check_args(&net, &net.criteria(), &["--hydrant", "H9"]);
    let run = assert_refused_by(&net, &args, &[]);
    assert!(
        run.stderr.contains("H9") && run.stderr.contains("hydrants.csv"),
        "{}",
        run.stderr
    );
}

/// `--threads 0` is an input error.
#[test]
fn zero_threads() {
    let net = Net::us();
    let args = check_args(&net, &net.criteria(), &["--threads", "0"]);
    let run = assert_refused_by(&net, &args, &[]);
    assert!(run.stderr.contains("--threads"), "{}", run.stderr);
}

/// `--threads` above min(4 x cores, 1024) is an input error for `check` and `upsize`, found
/// at once (not after minutes of starting threads), naming the bound and the fix. 100000 is
/// above the bound on any machine (the cap is 1024).
#[test]
fn too_many_threads() {
    let net = Net::us();
    let check = check_args(&net, &net.criteria(), &["--threads", "100000"]);
    let upsize: Vec<OsString> = vec![
        "upsize".into(),
        net.dir().into(),
        "--criteria".into(),
        net.criteria().into(),
        "--threads".into(),
        "100000".into(),
        "--out".into(),
        net.out().into(),
    ];
    for args in [check, upsize] {
        let started = std::time::Instant::now();
        let run = assert_refused_by(&net, &args, &[]);
        assert!(
            started.elapsed() < std::time::Duration::from_secs(30),
            "refusing --threads took {:?}",
            started.elapsed()
        );
        assert!(
            run.stderr.contains("--threads 100000 is more than")
                && run.stderr.contains("fix: give --threads from 1 to"),
            "{}",
            run.stderr
        );
    }
}

/// An unknown `--condition` is an input error that lists the accepted values.
#[test]
fn unknown_condition() {
    let net = Net::us();
    let args: [OsString; 6] = [
        "solve".into(),
        net.dir().into(),
        "--condition".into(),
        "midnight".into(),
        "--out".into(),
        net.out().into(),
    ];
    let run = assert_refused_by(&net, &args, &[]);
    assert!(run.stderr.contains("max-day"), "{}", run.stderr);
}

/// `--out` naming the network folder itself never overwrites or adds an input file.
#[test]
fn output_folder_is_the_network_folder_leaves_inputs_alone() {
    let net = Net::us();
    for args in [
        vec![
            "solve".into(),
            net.dir().into(),
            "--out".into(),
            net.dir().into(),
        ],
        vec![
            "check".into(),
            net.dir().into(),
            "--criteria".into(),
            net.criteria().into(),
            "--out".into(),
            net.dir().join(".").into(),
        ],
    ] as [Vec<OsString>; 2]
    {
        let before = net.snapshot();
        let run = firemain(&args);
        run.assert_no_panic();
        assert_ne!(run.code, Some(0), "{}", run.text());
        assert!(run.stderr.contains("network folder"), "{}", run.stderr);
        assert!(
            net.snapshot() == before,
            "`{}` touched the network folder",
            run.what
        );
    }
}

/// `--out` naming the network folder is a command-line input error (exit 2), found before
/// any analysis is run.
#[test]
fn output_folder_is_the_network_folder_is_an_input_error() {
    let net = Net::us();
    let solve: Vec<OsString> = vec![
        "solve".into(),
        net.dir().into(),
        "--out".into(),
        net.dir().into(),
    ];
    assert_refused_by(&net, &solve, &[]);
    let mut check = check_args(&net, &net.criteria(), &[]);
    *check.last_mut().expect("--out value") = net.dir().into();
    assert_refused_by(&net, &check, &[]);
}

/// `upsize` writes the proposed network into OUT/proposed-network: a network folder of that
/// name inside the output folder would be overwritten, so it is refused before any analysis.
#[test]
fn upsize_output_that_would_overwrite_the_network_is_an_input_error() {
    let root = tempfile::tempdir().expect("temporary folder");
    let net_dir = root.path().join("proposed-network");
    fs::create_dir(&net_dir).expect("network folder");
    for (file, text) in [
        ("model.toml", MODEL_US),
        ("junctions.csv", JUNCTIONS_US),
        ("sources.csv", SOURCES_US),
        ("pipes.csv", PIPES_US),
        ("hydrants.csv", HYDRANTS_US),
    ] {
        fs::write(net_dir.join(file), text).expect("write test input");
    }
    let criteria = root.path().join("criteria.toml");
    fs::write(&criteria, CRITERIA_US).expect("criteria");
    let before = fs::read(net_dir.join("pipes.csv")).expect("read");
    let run = firemain(&[
        OsString::from("upsize"),
        net_dir.clone().into(),
        "--criteria".into(),
        criteria.into(),
        "--out".into(),
        root.path().into(),
    ]);
    run.assert_code(2);
    assert!(run.text().contains("network folder"), "{}", run.text());
    assert_eq!(fs::read(net_dir.join("pipes.csv")).expect("read"), before);
}

/// Printing into a pipe that the reader has closed (as `firemain validate NET | head` does)
/// ends quietly, without a panic.
#[test]
fn closed_stdout_does_not_panic() {
    let net = Net::us();
    let mut child = Command::new(env!("CARGO_BIN_EXE_firemain"))
        .arg("validate")
        .arg(net.dir())
        .stdin(Stdio::null())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("run firemain");
    drop(child.stdout.take());
    let output = child.wait_with_output().expect("wait for firemain");
    let stderr = String::from_utf8_lossy(&output.stderr);
    assert!(
        output.status.code() != Some(101) && !stderr.contains("panicked"),
        "exit {:?}:\n{stderr}",
        output.status.code()
    );
}

// ---------------------------------------------------------------------------------------------
// Plausibility warnings and notes: validate succeeds

/// Hazen-Williams C outside 40-160 is a warning; 40 and 160 themselves are not.
#[test]
fn warning_hazen_williams_c_out_of_range() {
    for bad in ["39", "161"] {
        let net = Net::us();
        net.write(
            "pipes.csv",
            PIPES_US.replace("P2,J1,J2,500,8,120", &format!("P2,J1,J2,500,8,{bad}")),
        );
        assert_warned(&net, "pipes.csv:3", "Hazen-Williams C");
    }
    let net = Net::us();
    net.write(
        "pipes.csv",
        PIPES_US
            .replace("P2,J1,J2,500,8,120", "P2,J1,J2,500,8,40")
            .replace("P3,J2,J3,500,8,120", "P3,J2,J3,500,8,160"),
    );
    let run = validate(&net);
    run.assert_code(0);
    assert!(findings(&run.stdout).is_empty(), "{}", run.stdout);
}

/// A diameter that looks like the wrong unit is a warning: US below 1 in or above 120 in,
/// SI below 25 mm or above 3000 mm; the limits themselves are not.
#[test]
fn warning_diameter_in_the_wrong_unit() {
    for bad in ["0.5", "200"] {
        let net = Net::us();
        net.write(
            "pipes.csv",
            PIPES_US.replace("P2,J1,J2,500,8", &format!("P2,J1,J2,500,{bad}")),
        );
        assert_warned(&net, "pipes.csv:3", "looks like the wrong unit");
    }
    for bad in ["8", "5000"] {
        let net = Net::si();
        net.write(
            "pipes.csv",
            PIPES_SI.replace("P2,J1,J2,150,200", &format!("P2,J1,J2,150,{bad}")),
        );
        assert_warned(&net, "pipes.csv:3", "looks like the wrong unit");
    }
    for (net, pipes) in [
        (
            Net::us(),
            PIPES_US.replace(",8,", ",1,").replacen(",1,", ",120,", 1),
        ),
        (
            Net::si(),
            PIPES_SI
                .replace(",200,", ",25,")
                .replacen(",25,", ",3000,", 1),
        ),
    ] {
        net.write("pipes.csv", pipes);
        let run = validate(&net);
        run.assert_code(0);
        assert!(
            !run.stdout.contains("wrong unit"),
            "a diameter at the limit was flagged:\n{}",
            run.stdout
        );
    }
}

/// A hydrant's lead is read as a pipe is (docs/network-format.md, hydrants.csv): length and
/// diameter go together, the diameter within 1 mm to 10 m (0.0393701 to 393.7 in shown: 1 in =
/// 25.4 mm exactly), the C factor within 10 to 200; each error at its cell. A lead diameter in
/// what looks like the wrong unit, or a C outside 40-160, is a warning, as for pipes (common
/// practice, no source).
#[test]
fn hydrant_leads_are_checked_as_pipes_are() {
    const HEADER: &str = "id,junction,lateral_length,lateral_diameter,lateral_roughness\n";
    for (row, at, says) in [
        (
            "H1,J3,20,,",
            "hydrants.csv:2:4",
            "`lateral_diameter` is empty while the hydrant's other lateral columns are given",
        ),
        (
            "H1,J3,20,0.001,",
            "hydrants.csv:2:4",
            "`lateral_diameter` 0.001 in is beyond any water pipe (firemain accepts between 0.0393701 and 393.7 in)",
        ),
        (
            "H1,J3,20,6,300",
            "hydrants.csv:2:5",
            "`lateral_roughness` 300 is beyond any pipe's Hazen-Williams C",
        ),
    ] {
        let net = Net::us();
        net.write("hydrants.csv", format!("{HEADER}{row}\n"));
        assert_refused(&net, &[(at, says)]);
    }
    for (row, says) in [
        (
            "H1,J3,20,0.5,",
            "lateral_diameter 0.5 in looks like the wrong unit",
        ),
        (
            "H1,J3,20,6,35",
            "the lead's Hazen-Williams C = 35 is outside the plausible 40-160",
        ),
    ] {
        let net = Net::us();
        net.write("hydrants.csv", format!("{HEADER}{row}\n"));
        assert_warned(&net, "hydrants.csv:2", says);
    }
}

/// A zero-length pipe with a minor loss is a warning, not an error (without a minor loss it is
/// an error: see `zero_length_pipe_without_minor_loss`).
#[test]
fn warning_zero_length_pipe() {
    let net = Net::us();
    net.write(
        "pipes.csv",
        "id,from,to,length,diameter,roughness,minor_loss\n\
         P1,R1,J1,500,8,120,\nP2,J1,J2,0,8,120,0.5\nP3,J2,J3,500,8,120,\n",
    );
    assert_warned(&net, "pipes.csv:3", "zero length");
}

/// A pipe from a node to itself is a warning, not an error.
#[test]
fn warning_pipe_from_a_node_to_itself() {
    let net = Net::us();
    net.write("pipes.csv", format!("{PIPES_US}P4,J3,J3,100,8,120\n"));
    assert_warned(&net, "pipes.csv:5", "same node");
}

/// A junction above every source grade it can reach is a warning.
#[test]
fn warning_junction_above_every_source() {
    let net = Net::us();
    net.write("junctions.csv", JUNCTIONS_US.replace("J3,110", "J3,400"));
    assert_warned(&net, "junctions.csv:4", "above every source grade");
}

/// A hydrant fed only by mains smaller than 6 in is a warning.
#[test]
fn warning_hydrant_on_a_small_main() {
    let net = Net::us();
    net.write(
        "pipes.csv",
        PIPES_US.replace("P3,J2,J3,500,8", "P3,J2,J3,500,4"),
    );
    assert_warned(&net, "hydrants.csv:2", "6 in");
}

/// A column the format does not know is a note, not an error, and the network loads.
#[test]
fn note_unknown_extra_column() {
    let net = Net::us();
    net.write(
        "junctions.csv",
        "id,elevation,demand,owner\nJ1,100,10,x\nJ2,105,20,y\nJ3,110,15,z\n",
    );
    let run = validate(&net);
    run.assert_code(0);
    assert_finding(&run.stdout, "note", "junctions.csv:1", "owner");
    assert!(
        findings(&run.stdout).iter().all(|f| f.severity == "note"),
        "{}",
        run.stdout
    );
}

/// A zone that nothing feeds (its only link leaves it through a check pipe) is a warning.
#[test]
fn warning_zone_without_feed() {
    let net = Net::us();
    net.write(
        "junctions.csv",
        "id,elevation,demand,zone\nJ1,100,10,a\nJ2,105,20,a\nJ3,110,15,a\nJ4,100,0,b\n",
    );
    net.write(
        "pipes.csv",
        "id,from,to,length,diameter,roughness,status\n\
         P1,R1,J1,500,8,120,\nP2,J1,J2,500,8,120,\nP3,J2,J3,500,8,120,\nP4,J4,J3,500,8,120,check\n",
    );
    assert_warned(&net, "junctions.csv", "zone `b` (1 junctions) has no feed");
}

// ---------------------------------------------------------------------------------------------
// The lenient CSV rules: the network loads and solves

/// BOM, CRLF line ends, comment and blank lines, columns in any order and any case, quoted
/// fields (with commas), exponents: the network loads without findings and solves to exactly
/// the same results as the plain twin.
#[test]
fn lenient_csv_loads_and_solves_like_the_plain_file() {
    let plain = Net::us();
    let fancy = Net::us();
    fancy
        .write(
            "junctions.csv",
            "\u{feff}# elevation ft, demand gpm\r\ndemand,ID,Elevation\r\n1e1,J1,1.0E2\r\n\r\n\
             # a comment between rows\r\n20,\"J2\",105\r\n1.5e+1,J3,  110.0  \r\n",
        )
        .write(
            "sources.csv",
            "\u{feff}grade,kind,id\r\n3.0e2,reservoir,R1\r\n",
        )
        .write(
            "pipes.csv",
            "# material is free text\r\nroughness,diameter,length,to,from,id,material\r\n\
             120,8,5e2,J1,R1,P1,\"ductile iron, class 52\"\r\n\
             1.2e2,8.0,500,J2,J1,P2,\"PVC, \"\"C900\"\"\"\r\n\
             120,8,500,J3,J2,P3,\r\n",
        )
        .write("hydrants.csv", "junction,id\r\n\"J3\",H1\r\n");
    let run = firemain(&[OsStr::new("validate"), fancy.dir().as_os_str()]);
    run.assert_code(0);
    assert!(
        findings(&run.stdout).is_empty(),
        "findings for a valid file:\n{}",
        run.stdout
    );
    let solved = solve(&fancy);
    solved.assert_code(0);
    let reference = solve(&plain);
    reference.assert_code(0);
    assert_eq!(solved.stdout, reference.stdout);
    let mut args = check_args(&fancy, &fancy.criteria(), &["--quiet"]);
    args.truncate(args.len() - 2); // no --out
    let checked = firemain(&args);
    checked.assert_code(0);
}

#[test]
fn criteria_calibration_bounds_must_be_ordered_and_plausible() {
    // `[calibration]` bounds of a fitted Hazen-Williams C: within the C factors of any pipe
    // (docs/network-format.md limits) and the lower below the upper (the format's rule).
    let cases = [
        (
            "[calibration]\nroughness_min = 160\nroughness_max = 40\n",
            "14:17",
            "[calibration] roughness_max must be above roughness_min",
        ),
        (
            "[calibration]\nroughness_min = 0.5\nroughness_max = 140\n",
            "13:17",
            "[calibration] roughness_min",
        ),
    ];
    for (table, at, says) in cases {
        let net = Net::us();
        let path = net.write_criteria("c.toml", format!("{CRITERIA_US}{table}"));
        let at = format!("{}:{at}", path.display());
        assert_criteria_refused(&net, &path, &[(&at, says)]);
    }
}
