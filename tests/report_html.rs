//! report.html and report.md drawn from a run on a small network whose hydrant ids hold the
//! characters of markup (`<`, `&`, `"`, `*`): every id appears once in the compliance table and
//! once on the map, escaped; the page fetches nothing; the title block comes from --project.
//! Escaping rules: HTML Living Standard, "Serializing HTML fragments" (escape `&`, `<`, `>`,
//! `"`), and CommonMark 0.31, §2.4 (backslash escapes).

use std::path::Path;
use std::process::Command;

/// Writes the network: a reservoir feeding four junctions in a row (invented test data; the
/// checks below are about drawing, not hydraulics).
fn write_network(dir: &Path) {
    let files = [
        (
            "model.toml",
            "name = \"odd ids <&> test\"\nunits = \"si\"\nheadloss = \"hazen-williams\"\n[demand]\nmax_day_factor = 1.5\npeak_hour_factor = 2.5\n",
        ),
        (
            "junctions.csv",
            "id,elevation,demand,x,y\nJ1,10,0.5,100,0\nJ2,12,0.5,200,0\nJ3,14,0.5,300,0\nJ4,15,0.5,300,100\n",
        ),
        ("sources.csv", "id,kind,grade,x,y\nR1,reservoir,70,0,0\n"),
        (
            "pipes.csv",
            "id,from,to,length,diameter,roughness\nP1,R1,J1,100,300,120\nP2,J1,J2,100,200,110\nP3,J2,J3,100,150,100\nP4,J3,J4,100,100,100\n",
        ),
        (
            "hydrants.csv",
            "id,junction,required_flow\nH<1>,J1,30\nH&2,J2,30\n\"H\"\"3\",J3,30\nH*4,J4,30\n",
        ),
    ];
    for (name, text) in files {
        std::fs::write(dir.join(name), text).expect("write network file");
    }
}

/// Runs `check` with a project file whose name needs escaping too; returns (html, markdown).
fn run(dir: &Path) -> (String, String) {
    let net = dir.join("net");
    std::fs::create_dir(&net).expect("net folder");
    write_network(&net);
    let project = dir.join("project.toml");
    std::fs::write(
        &project,
        "name = \"Lot <7> & \\\"annex\\\"\"\nreference = \"BP-1\"\nprepared_by = \"A. Example\"\n",
    )
    .expect("project file");
    let out = dir.join("out");
    let run = Command::new(env!("CARGO_BIN_EXE_firemain"))
        .arg("check")
        .arg(&net)
        .arg("--criteria")
        .arg(concat!(
            env!("CARGO_MANIFEST_DIR"),
            "/criteria/common-practice-si.toml"
        ))
        .arg("--project")
        .arg(&project)
        // Every hydrant asked for by id: each is analysed and gets a sheet.
        .args(IDS.iter().flat_map(|(id, _, _)| ["--hydrant", id]))
        .arg("--out")
        .arg(&out)
        .arg("--quiet")
        .output()
        .expect("run firemain");
    assert!(run.status.code().is_some_and(|c| c <= 1), "{run:?}");
    let read = |name: &str| std::fs::read_to_string(out.join(name)).expect(name);
    (read("report.html"), read("report.md"))
}

const IDS: [(&str, &str, &str); 4] = [
    // (id, as HTML text, as Markdown text)
    ("H<1>", "H&lt;1&gt;", "H\\<1\\>"),
    ("H&2", "H&amp;2", "H\\&2"),
    ("H\"3", "H&quot;3", "H\"3"),
    ("H*4", "H*4", "H\\*4"),
];

#[test]
fn ids_with_markup_characters_are_escaped_and_each_hydrant_appears_once() {
    let dir = tempfile::tempdir().expect("temp dir");
    let (html, md) = run(dir.path());
    for (id, in_html, in_md) in IDS {
        assert_eq!(
            html.matches(&format!("<td>{in_html}</td>")).count(),
            1,
            "{id} in the compliance table"
        );
        assert_eq!(
            html.matches(&format!("<title>{in_html}: ")).count(),
            1,
            "{id} on the map"
        );
        assert!(md.contains(&format!("| {in_md} |")), "{id} in report.md");
    }
    for raw in ["H<1>", "H&2<", "Lot <7>"] {
        assert!(!html.contains(raw), "unescaped {raw}");
    }
    assert!(html.contains("Lot &lt;7&gt; &amp; &quot;annex&quot;"));
    assert!(md.contains("Lot \\<7\\> \\& \"annex\""));
    // A hydrant asked for gets a sheet even though it passes.
    assert!(html.contains("<h3>Hydrant H&amp;2: "));
}

#[test]
fn the_page_is_self_contained() {
    let dir = tempfile::tempdir().expect("temp dir");
    let (html, _) = run(dir.path());
    // Nothing is loaded from anywhere: no src attribute, no link element, every href and url()
    // points inside the page. (The SVG namespace attribute is a name, not a fetch.)
    assert!(!html.contains(" src="), "a src attribute");
    assert!(!html.contains("<link"), "a link element");
    assert!(!html.contains("@import"), "a style import");
    for (k, _) in html.match_indices("href=\"") {
        assert!(html[k + 6..].starts_with('#'), "an external href");
    }
    for (k, _) in html.match_indices("url(") {
        assert!(html[k + 4..].starts_with('#'), "an external url()");
    }
    assert_eq!(
        html.matches("http").count(),
        html.matches("xmlns=\"http://www.w3.org/2000/svg\"").count(),
        "an address other than the SVG namespace"
    );
}
