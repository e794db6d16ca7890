//! Tank storage (sources.csv `diameter`, `min_level`, `max_level`; `firemain::storage`): the
//! usable volume, the drawn-down level after a fire, the network with the tank drawn down, and
//! the loader's checks of the new columns.

mod netkit;

use std::f64::consts::PI;
use std::path::Path;

use firemain::model::{load_network, Network};
use firemain::storage::{
    drawn_down, end_level_m, end_levels, outflow_m3s, time_to_min_level_s, usable_storage_m3,
    StorageError,
};
use netkit::{hw_resistance, solve};

/// A tank T (grade 50 m) feeding junction J (elevation 0) through one pipe, 800 m, 300 mm,
/// C = 120, SI units; `sources` is the whole sources.csv.
fn write_tank_net(dir: &Path, sources: &str) {
    let files = [
        (
            "model.toml",
            "name = \"tank\"\nunits = \"si\"\nheadloss = \"hazen-williams\"\n[demand]\nmax_day_factor = 1.0\npeak_hour_factor = 2.5\n",
        ),
        ("junctions.csv", "id,elevation,demand\nJ,0,0\n"),
        ("sources.csv", sources),
        (
            "pipes.csv",
            "id,from,to,length,diameter,roughness\nP,T,J,800,300,120\n",
        ),
    ];
    for (name, text) in files {
        std::fs::write(dir.join(name), text).expect("write");
    }
}

fn tank_net(sources: &str) -> Network {
    let dir = tempfile::tempdir().expect("tempdir");
    write_tank_net(dir.path(), sources);
    netkit::load_dir(dir.path())
}

/// Source: volume of a cylinder, V = π/4 · D² · h (common practice): D = 20 m between levels
/// 45 m and 52 m holds π/4 · 400 · 7 = 2,199.11 m³.
#[test]
fn usable_storage_of_a_cylinder() {
    let net = tank_net("id,kind,grade,diameter,min_level,max_level\nT,tank,50,20,45,52\n");
    let t = net.node_by_id("T").unwrap();
    let v = usable_storage_m3(&net.nodes[t]).expect("storage");
    assert!((v - 700.0 * PI).abs() < 1e-9, "{v}");
    assert!((v - 2199.11).abs() < 0.01);
    // A junction is not a tank; a tank without levels has no usable storage.
    assert!(matches!(
        usable_storage_m3(&net.nodes[0]),
        Err(StorageError::NotATank(_))
    ));
    let bare = tank_net("id,kind,grade\nT,tank,50\n");
    assert!(usable_storage_m3(&bare.nodes[1]).is_err());
}

/// Source: mass balance of a cylinder at constant outflow (common practice): the level falls by
/// Q·T/A; at Q = 0.05 m³/s for 2 h from 50 m in a 20 m tank, 360 m³ / 314.159 m² = 1.1459 m,
/// to 48.854 m; for 10 h it would fall 5.73 m, below `min_level` 45 m, where it is clamped.
/// Hazen-Williams closed form (Williams & Hazen 1920, SI form) for the pressure at J with the
/// tank drawn down: grade − r Q^1.852.
#[test]
fn drawdown_after_a_fire_of_some_duration() {
    let net = tank_net("id,kind,grade,diameter,min_level,max_level\nT,tank,50,20,45,52\n");
    let (t, j) = (net.node_by_id("T").unwrap(), net.node_by_id("J").unwrap());
    let q = 0.05;
    let sol = solve(&net, 1.0, &[(j, q)]);
    let out = outflow_m3s(&net, &sol, t);
    assert!((out - q).abs() < 1e-9, "{out}");
    let area = PI * 100.0;
    let two_hours = end_level_m(&net.nodes[t], out, 7200.0).unwrap();
    assert!(
        (two_hours - (50.0 - q * 7200.0 / area)).abs() < 1e-6,
        "{two_hours}"
    );
    assert!((two_hours - 48.854).abs() < 1e-3);
    assert_eq!(end_level_m(&net.nodes[t], out, 36_000.0).unwrap(), 45.0);
    // Filling keeps the starting level.
    assert_eq!(end_level_m(&net.nodes[t], -q, 7200.0).unwrap(), 50.0);
    let empty_after = time_to_min_level_s(&net.nodes[t], q).unwrap().unwrap();
    assert!((empty_after - 5.0 * area / q).abs() < 1e-6);

    let levels = end_levels(&net, &sol, 7200.0).unwrap();
    assert_eq!(levels.len(), 1);
    let lowered = drawn_down(&net, &levels).unwrap();
    let after = solve(&lowered, 1.0, &[(j, q)]);
    let r = hw_resistance(800.0, 0.3, 120.0);
    let expected = two_hours - r * q.powf(1.852);
    assert!(
        (after.heads_m[j] - expected).abs() < 1e-4,
        "{}",
        after.heads_m[j]
    );
    assert!(drawn_down(&net, &[(j, 10.0)]).is_err());
}

/// The loader's checks (docs/network-format.md §7): levels in order, the grade between them,
/// reported at the cell to fix; storage columns on a reservoir are a warning.
#[test]
fn storage_columns_are_checked_at_their_cells() {
    let errors = |sources: &str| {
        let dir = tempfile::tempdir().expect("tempdir");
        write_tank_net(dir.path(), sources);
        match load_network(dir.path()) {
            Ok(loaded) => loaded.diagnostics.to_string(),
            Err(d) => d.to_string(),
        }
    };
    let text = errors("id,kind,grade,diameter,min_level,max_level\nT,tank,50,20,52,45\n");
    assert!(text.contains("sources.csv:2:6: error"), "{text}");
    let text = errors("id,kind,grade,diameter,min_level,max_level\nT,tank,60,20,45,52\n");
    assert!(text.contains("sources.csv:2:3: error"), "{text}");
    let text = errors("id,kind,grade,diameter,min_level,max_level\nT,tank,50,-3,45,52\n");
    assert!(text.contains("sources.csv:2:4: error"), "{text}");
    let text = errors("id,kind,grade,diameter\nT,reservoir,50,20\n");
    assert!(text.contains("sources.csv:2: warning"), "{text}");
}
