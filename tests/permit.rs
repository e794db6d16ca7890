//! `firemain permit` through the real binary: the storage check against a hand computation, the
//! hose-lay reach, a group of hydrants sharing a building's flow, and the demo's run.

use std::path::Path;
use std::process::Command;

/// A tank of known geometry feeding one hydrant through one pipe (invented test data; the
/// expected values below are computed by hand from the geometry).
fn write_network(dir: &Path) {
    let files = [
        (
            "model.toml",
            "name = \"one tank\"\nunits = \"si\"\nheadloss = \"hazen-williams\"\n[demand]\nmax_day_factor = 1.0\npeak_hour_factor = 2.0\n",
        ),
        ("junctions.csv", "id,elevation,demand,x,y\nJ1,0,0,100,0\nJ2,0,0,300,0\n"),
        (
            "sources.csv",
            "id,kind,grade,x,y,diameter,min_level,max_level\nT1,tank,100,0,0,10,90,110\n",
        ),
        (
            "pipes.csv",
            "id,from,to,length,diameter,roughness\nP1,T1,J1,100,300,120\nP2,J1,J2,200,300,120\n",
        ),
        ("hydrants.csv", "id,junction,required_flow,x,y\nH1,J1,,100,0\nH2,J2,,300,0\n"),
    ];
    for (name, text) in files {
        std::fs::write(dir.join(name), text).expect("write");
    }
}

fn criteria(dir: &Path, max_hose_lay: f64) -> std::path::PathBuf {
    let path = dir.join("criteria.toml");
    std::fs::write(
        &path,
        format!(
            "name = \"test\"\nreference = \"test\"\nunits = \"si\"\n[service]\nmin_pressure = 200\nmax_pressure = 1000\n[fire]\nresidual_floor = 140\nscope = \"system\"\nsearch_cap = 500\ndefault_required_flow = 10\n[needed_flow]\nmethod = \"criteria\"\nhose_lay_factor = 1.0\nmax_hose_lay = {max_hose_lay}\nmax_hydrants = 2\n[needed_flow.classes]\nshop = {{ flow = 10, duration = 1 }}\n"
        ),
    )
    .expect("criteria");
    path
}

fn permit(dir: &Path, buildings: &str, max_hose_lay: f64) -> (i32, serde_json::Value, String) {
    let net = dir.join("net");
    std::fs::create_dir_all(&net).expect("net");
    write_network(&net);
    let b = dir.join("buildings.csv");
    std::fs::write(&b, buildings).expect("buildings");
    let out = dir.join("out");
    let run = Command::new(env!("CARGO_BIN_EXE_firemain"))
        .arg("permit")
        .arg(&net)
        .arg("--buildings")
        .arg(&b)
        .arg("--criteria")
        .arg(criteria(dir, max_hose_lay))
        .arg("--out")
        .arg(&out)
        .arg("--quiet")
        .output()
        .expect("run firemain");
    let json = std::fs::read(out.join("report.json"))
        .unwrap_or_else(|_| panic!("no report.json: {}", String::from_utf8_lossy(&run.stderr)));
    (
        run.status.code().unwrap_or(-1),
        serde_json::from_slice(&json).expect("JSON"),
        String::from_utf8_lossy(&run.stdout).into_owned(),
    )
}

const HEADER: &str = "id,name,construction,fire_flow_area,stories,occupancy,exposure,separation,sprinklers,x,y,required_flow,duration,notes\n";

#[test]
fn a_tank_lasts_its_usable_volume_over_its_outflow() {
    // Hand computation (common practice: a cylinder's volume π/4·D²·h; mass balance): the tank
    // alone feeds 10 L/s with no other demand, so it drops from its grade of 100 m to its
    // minimum of 90 m in π/4·10²·10 m³ / 0.010 m³/s = 78,539.8 s = 21.817 h.
    let dir = tempfile::tempdir().expect("temp");
    let (code, json, _) = permit(
        dir.path(),
        &format!(
            "{HEADER}S1,shop,,,1,shop,,,none,110,0,,,\nS2,shop,,,1,shop,,,none,110,0,10,24,\n"
        ),
        50.0,
    );
    assert_eq!(code, 1, "S2 fails on storage");
    let b = json["buildings"].as_array().expect("buildings");
    let expected = std::f64::consts::PI / 4.0 * 100.0 * 10.0 / 0.010 / 3600.0;
    for building in &b[..2] {
        let tank = &building["tanks"][0];
        let lasts = tank["lasts_h"].as_f64().expect("lasts_h");
        assert!((lasts - expected).abs() < 1e-3 * expected, "{lasts}");
        assert!((tank["outflow"].as_f64().expect("outflow") - 10.0).abs() < 1e-6);
    }
    assert_eq!(b[0]["result"], "pass");
    assert_eq!(b[0]["storage"], "lasts");
    assert_eq!(b[1]["result"], "fail");
    assert_eq!(b[1]["limited_by"], "storage");
}

#[test]
fn the_hose_lay_decides_which_hydrants_share_the_flow() {
    // H1 is 10 m from the building and H2 210 m (straight line, factor 1): a 50 m reach takes
    // H1 alone, a 250 m reach both, nearest first; none within 5 m fails for want of a hydrant.
    // Geometry by hand: common practice, no source.
    let dir = tempfile::tempdir().expect("temp");
    let building = format!("{HEADER}S1,shop,,,1,shop,,,none,90,0,,,\n");
    let (_, near, _) = permit(&dir.path().join("a"), &building, 50.0);
    assert_eq!(near["buildings"][0]["hydrants"], serde_json::json!(["H1"]));
    let (_, both, _) = permit(&dir.path().join("b"), &building, 250.0);
    assert_eq!(
        both["buildings"][0]["hydrants"],
        serde_json::json!(["H1", "H2"])
    );
    // Two hydrants on one main in series draw at least what the nearer one draws alone (the
    // group's flow is never below its best member's: a group may always flow one hydrant).
    let alone = near["buildings"][0]["combined_available"].as_f64().unwrap();
    let together = both["buildings"][0]["combined_available"].as_f64().unwrap();
    assert!(together >= alone * (1.0 - 1e-3), "{together} < {alone}");
    let (code, none, _) = permit(&dir.path().join("c"), &building, 5.0);
    assert_eq!(code, 1);
    assert_eq!(none["buildings"][0]["limited_by"], "no hydrant in reach");
}

#[test]
fn the_demo_permit_run_shows_a_shared_flow_and_a_storage_failure() {
    // Invariants on the invented demo (not check values): B-01 passes only with its three
    // hydrants together, B-13 fails on its hilltop tank's storage.
    let root = env!("CARGO_MANIFEST_DIR");
    let out = tempfile::tempdir().expect("temp");
    let run = Command::new(env!("CARGO_BIN_EXE_firemain"))
        .current_dir(root)
        .args([
            "permit",
            "examples/demo-town",
            "--buildings",
            "examples/demo-town/buildings.csv",
        ])
        .args([
            "--criteria",
            "criteria/cedar-county-demo.toml",
            "--quiet",
            "--out",
        ])
        .arg(out.path())
        .output()
        .expect("run");
    assert_eq!(run.status.code(), Some(1));
    let json: serde_json::Value =
        serde_json::from_slice(&std::fs::read(out.path().join("report.json")).unwrap()).unwrap();
    let b = json["buildings"].as_array().unwrap();
    let b01 = b.iter().find(|b| b["id"] == "B-01").unwrap();
    assert_eq!(b01["hydrants"].as_array().unwrap().len(), 3);
    assert_eq!(b01["result"], "pass");
    let b13 = b.iter().find(|b| b["id"] == "B-13").unwrap();
    assert_eq!(b13["limited_by"], "storage");
    for name in [
        "permit.csv",
        "report.md",
        "report.html",
        "manifest-permit.toml",
    ] {
        assert!(out.path().join(name).is_file(), "{name}");
    }
    let stdout = String::from_utf8_lossy(&run.stdout);
    assert!(stdout.lines().all(|l| l.chars().count() <= 120), "{stdout}");
}
