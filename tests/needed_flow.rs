//! The needed-fire-flow inputs of `firemain permit` as files: the `[needed_flow]` section of a
//! criteria file (method file resolved beside it, or the criteria's own classes, hose-lay
//! settings) and the demo's buildings file checked against the method the demo criteria choose.
//! The demo town and its buildings are invented: they are checked for invariants only.

use std::path::{Path, PathBuf};

use firemain::criteria::{load_criteria, DEFAULT_HOSE_LAY_FACTOR};
use firemain::model::buildings::load_buildings;
use firemain::model::{load_network, Network};
use firemain::needed::{check_buildings, needed_fire_flow};
use firemain::units::{UnitSystem, M3S_PER_GPM, M_PER_FT};

fn repo(relative: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join(relative)
}

fn demo() -> Network {
    load_network(&repo("examples/demo-town"))
        .expect("demo town")
        .network
}

const BASE: &str = "name = \"t\"\nreference = \"test ordinance\"\nunits = \"us\"\n\
    [service]\nmin_pressure = 40\nmax_pressure = 100\n\
    [fire]\nresidual_floor = 20\nscope = \"system\"\nsearch_cap = 8000\ndefault_required_flow = 1000\n\
    [fire.required_flow]\nresidential = 1000\ncommercial = 2500\nindustrial = 3500\n";

/// Writes a criteria file (and the shipped method files beside it) and loads it.
fn criteria_with(section: &str, net: &Network) -> Result<firemain::criteria::Criteria, String> {
    let dir = tempfile::tempdir().expect("tempdir");
    let methods = dir.path().join("methods");
    std::fs::create_dir(&methods).expect("mkdir");
    for entry in std::fs::read_dir(repo("criteria/methods")).expect("methods") {
        let p = entry.expect("entry").path();
        std::fs::copy(&p, methods.join(p.file_name().expect("name"))).expect("copy");
    }
    let path = dir.path().join("c.toml");
    std::fs::write(&path, format!("{BASE}{section}")).expect("write");
    load_criteria(&path, net).map_err(|d| d.to_string())
}

#[test]
fn demo_buildings_all_have_a_figure_by_the_demo_criteria() {
    let net = demo();
    let criteria =
        load_criteria(&repo("criteria/cedar-county-demo.toml"), &net).expect("demo criteria");
    let settings = criteria.needed_flow.expect("[needed_flow]");
    assert_eq!(settings.max_hydrants, 3);
    // 500 ft = 152.4 m (1 ft = 0.3048 m exactly).
    assert!((settings.max_hose_lay_m - 500.0 * M_PER_FT).abs() < 1e-9);
    let loaded = load_buildings(&repo("examples/demo-town/buildings.csv"), net.units)
        .expect("demo buildings");
    let d = check_buildings(&loaded.buildings, &settings.method);
    assert!(d.is_empty(), "{d}");
    let mut engineer = 0;
    for b in &loaded.buildings.buildings {
        let n = needed_fire_flow(b, &settings.method, net.units).expect("figure");
        assert!(n.flow_m3s > 0.0 && n.duration_s > 0.0, "{}", b.id);
        assert!(!n.steps.is_empty());
        // The shipped table is from memory: every figure says it is unverified.
        assert!(
            n.engineer || n.steps.iter().any(|s| s.text.contains("verified: no")),
            "{}",
            b.id
        );
        engineer += usize::from(n.engineer);
        assert!(b.position.is_some(), "{} has no position", b.id);
    }
    assert_eq!(engineer, 1);
}

/// Source: common practice, no source: the criteria's own classes are used as written.
#[test]
fn criteria_classes_as_the_method() {
    let net = demo();
    let c = criteria_with(
        "[needed_flow]\nmethod = \"criteria\"\nmax_hose_lay = 600\nmax_hydrants = 2\n\
         [needed_flow.classes]\nmercantile = { flow = 2500, duration = 2 }\n",
        &net,
    )
    .expect("loads");
    let s = c.needed_flow.expect("settings");
    assert!((s.hose_lay_factor - DEFAULT_HOSE_LAY_FACTOR).abs() < 1e-12);
    let text = "id,construction,fire_flow_area,occupancy\nB1,,,Mercantile\nB2,,,office\n";
    let loaded = firemain::model::buildings::parse_buildings(
        text.as_bytes(),
        "buildings.csv",
        UnitSystem::Us,
    )
    .expect("reads");
    let b = &loaded.buildings.buildings[0];
    let n = needed_fire_flow(b, &s.method, UnitSystem::Us).expect("figure");
    assert!((n.flow_m3s / M3S_PER_GPM - 2500.0).abs() < 1e-9);
    assert!((n.duration_s - 7200.0).abs() < 1e-9);
    let d = check_buildings(&loaded.buildings, &s.method).to_string();
    assert!(
        d.contains("buildings.csv:3:4: error: building `B2` has occupancy `office`"),
        "{d}"
    );
}

#[test]
fn needed_flow_section_errors_are_located() {
    let net = demo();
    let e = criteria_with(
        "[needed_flow]\nmethod = \"methods/nope.toml\"\nmax_hose_lay = 500\nmax_hydrants = 3\n",
        &net,
    )
    .unwrap_err();
    assert!(
        e.contains("c.toml:17:10: error: the method file `methods/nope.toml`"),
        "{e}"
    );
    let e = criteria_with(
        "[needed_flow]\nmethod = \"methods/insurance-guide-2014.toml\"\nhose_lay_factor = 0.8\nmax_hose_lay = 500\nmax_hydrants = 0\n",
        &net,
    )
    .unwrap_err();
    assert!(
        e.contains("c.toml:18:19: error: [needed_flow] hose_lay_factor"),
        "{e}"
    );
    assert!(
        e.contains("c.toml:20:16: error: [needed_flow] max_hydrants"),
        "{e}"
    );
    let e = criteria_with(
        "[needed_flow]\nmethod = \"methods/insurance-guide-2014.toml\"\nmax_hose_lay = 500\nmax_hydrants = 3\n\
         [needed_flow.classes]\nshop = { flow = 1500, duration = 2 }\n",
        &net,
    )
    .unwrap_err();
    assert!(e.contains("but method is a file"), "{e}");
    let e = criteria_with(
        "[needed_flow]\nmethod = \"criteria\"\nmax_hose_lay = 500\nmax_hydrants = 3\n",
        &net,
    )
    .unwrap_err();
    assert!(e.contains("needs [needed_flow.classes]"), "{e}");
}
