//! report.html in a real browser: Debian's `chromium`, headless. The demo's report is rendered
//! to a PNG kept under target/ and its DOM dumped after the page's script ran; the DOM must hold
//! every hydrant, the map's legend and the title block, the script must have run to its end,
//! and the browser must have logged no console message (the page logs none of its own, so any
//! is an error).
//!
//! Without a browser the test says so and passes, so that plain `cargo test` runs anywhere;
//! `.ci/run` installs chromium and sets `FIREMAIN_BROWSER_TEST=required`, which turns a missing
//! browser into a failure.

use std::path::{Path, PathBuf};
use std::process::Command;

/// The browser to use: `FIREMAIN_CHROMIUM`, else `chromium` on the PATH.
fn browser() -> Option<PathBuf> {
    if let Some(path) = std::env::var_os("FIREMAIN_CHROMIUM") {
        return Some(PathBuf::from(path));
    }
    std::env::var_os("PATH").and_then(|paths| {
        std::env::split_paths(&paths)
            .map(|dir| dir.join("chromium"))
            .find(|p| p.is_file())
    })
}

/// Headless flags for a closed network (no background connections, a fresh profile), as root
/// in a container (no sandbox).
fn headless(chromium: &Path, profile: &Path) -> Command {
    let mut cmd = Command::new(chromium);
    cmd.args([
        "--headless",
        "--no-sandbox",
        "--disable-gpu",
        "--disable-quic",
        "--no-first-run",
        "--disable-background-networking",
        "--disable-component-update",
        "--disable-sync",
        "--hide-scrollbars",
        "--enable-logging=stderr",
        "--v=0",
    ])
    .arg(format!("--user-data-dir={}", profile.display()));
    cmd
}

/// Runs the browser to its end; it must succeed and log no console message. Returns stdout.
fn run_clean(mut cmd: Command) -> Vec<u8> {
    let out = cmd.output().expect("run chromium");
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(out.status.success(), "chromium failed: {stderr}");
    assert_eq!(
        console_lines(&stderr),
        Vec::<&str>::new(),
        "console messages"
    );
    out.stdout
}

/// Console messages among the browser's log lines.
fn console_lines(stderr: &str) -> Vec<&str> {
    stderr.lines().filter(|l| l.contains(":CONSOLE")).collect()
}

/// Writes the demo's report set with a title block and the field tests.
fn demo_report(out: &Path) -> PathBuf {
    // Run from the repository root with relative paths, as the README does, so that the page
    // (and the screenshot kept for the README) names the files as a user would see them.
    let status = Command::new(env!("CARGO_BIN_EXE_firemain"))
        .current_dir(env!("CARGO_MANIFEST_DIR"))
        .args([
            "check",
            "examples/demo-town",
            "--criteria",
            "criteria/cedar-county-demo.toml",
        ])
        .args(["--quiet", "--project", "examples/demo-town/project.toml"])
        .args(["--tests", "examples/demo-town/flowtests.csv"])
        .arg("--out")
        .arg(out)
        .env("SOURCE_DATE_EPOCH", "1796256000")
        .output()
        .expect("run firemain");
    // Exit status 1: the demo has findings, on purpose.
    assert_eq!(status.status.code(), Some(1), "{status:?}");
    out.join("report.html")
}

/// The hydrant ids of the run, from fireflow.csv's first column.
fn hydrant_ids(out: &Path) -> Vec<String> {
    let mut reader = csv::Reader::from_path(out.join("fireflow.csv")).expect("fireflow.csv");
    reader
        .records()
        .map(|r| r.expect("record")[0].to_string())
        .collect()
}

#[test]
fn the_demo_report_renders_in_chromium_with_every_hydrant_and_no_console_error() {
    let Some(chromium) = browser() else {
        let required = std::env::var("FIREMAIN_BROWSER_TEST").as_deref() == Ok("required");
        assert!(
            !required,
            "FIREMAIN_BROWSER_TEST=required but no chromium was found"
        );
        eprintln!("skipped: no chromium on the PATH (set FIREMAIN_CHROMIUM to use another)");
        return;
    };
    let dir = tempfile::tempdir().expect("temp dir");
    let out = dir.path().join("out");
    let page = demo_report(&out);
    let url = format!("file://{}", page.display());

    let mut cmd = headless(&chromium, &dir.path().join("profile-dom"));
    cmd.args(["--dump-dom", &url]);
    let dom = String::from_utf8(run_clean(cmd)).expect("UTF-8 DOM");

    assert!(
        dom.contains("data-script=\"ran\""),
        "the page's script did not finish"
    );
    for id in hydrant_ids(&out) {
        assert!(
            dom.contains(&format!("<td>{id}</td>")),
            "{id} not in the table"
        );
        assert!(
            dom.contains(&format!("<title>{id}: ")),
            "{id} not on the map"
        );
    }
    for needle in [
        "class=\"legend hydrant-legend\"",
        "class=\"legend legend-0\"",
        "<section id=\"project\"",
        "Orchard Row townhomes, phase 2",
        "BP-2026-0417",
        "id=\"hydrant-sheets\"",
    ] {
        assert!(dom.contains(needle), "{needle} missing from the DOM");
    }

    // The picture a reader sees, kept for a look (and for the README's screenshot).
    let shots = Path::new(env!("CARGO_TARGET_TMPDIR")).join("browser");
    std::fs::create_dir_all(&shots).expect("screenshot folder");
    let png = shots.join("demo-report.png");
    let mut cmd = headless(&chromium, &dir.path().join("profile-shot"));
    cmd.arg("--window-size=1280,2200")
        .arg(format!("--screenshot={}", png.display()))
        .arg(&url);
    run_clean(cmd);
    let bytes = std::fs::read(&png).expect("screenshot written");
    // A PNG file begins with its 8-byte signature (PNG specification, 3rd ed., §5.2).
    assert!(bytes.starts_with(b"\x89PNG\r\n\x1a\n") && bytes.len() > 10_000);

    // Printed to PDF, as a reviewer would file it: several pages (each major part starts one).
    let pdf = shots.join("demo-report.pdf");
    let mut cmd = headless(&chromium, &dir.path().join("profile-pdf"));
    cmd.arg("--no-pdf-header-footer")
        .arg(format!("--print-to-pdf={}", pdf.display()))
        .arg(&url);
    run_clean(cmd);
    let bytes = std::fs::read(&pdf).expect("PDF written");
    // A PDF file begins with `%PDF-` and lists each page as an object of type /Page (ISO
    // 32000-1:2008, §7.5.2 and §7.7.3.3).
    assert!(bytes.starts_with(b"%PDF-"));
    let pages = bytes
        .windows(12)
        .filter(|w| w.starts_with(b"/Type /Page") && w[11] != b's')
        .count()
        + bytes
            .windows(11)
            .filter(|w| w.starts_with(b"/Type/Page") && w[10] != b's')
            .count();
    assert!(pages >= 5, "{pages} pages");
}
