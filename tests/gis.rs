//! `import geojson` and `--geojson`: a small network built here from GeoJSON and checked file by
//! file; the demo town exported as GeoJSON and imported again (same hydraulic results); the
//! GeoJSON that `solve` and `check` write, parsed back by the `geojson` crate.
//!
//! Expected values are coordinate geometry worked by hand beside each check (common practice,
//! no source); the demo town is used only for invariants (a round trip changes no result).

mod common;

use std::collections::HashMap;
use std::path::{Path, PathBuf};
use std::process::{Command, Output};

use geojson::{Feature, FeatureCollection, Geometry, GeometryValue, JsonObject, JsonValue};

fn firemain(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_firemain"))
        .args(args)
        .env("SOURCE_DATE_EPOCH", "1767225600")
        .output()
        .expect("firemain runs")
}

/// Asserts that `o` is an input error (exit code 2) whose standard error says `says`.
fn assert_refused(o: &Output, says: &str) {
    assert_eq!(o.status.code(), Some(2));
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(err.contains(says), "{err}");
}

/// `firemain import geojson` with each option's file (or folder) taken inside `dir`.
fn import(dir: &Path, options: &[(&str, &str)]) -> Output {
    let paths: Vec<String> = options
        .iter()
        .map(|(_, name)| dir.join(name).display().to_string())
        .collect();
    let mut args = vec!["import", "geojson"];
    for ((flag, _), path) in options.iter().zip(&paths) {
        args.push(flag);
        args.push(path);
    }
    firemain(&args)
}

fn ok(out: &Output) {
    assert!(
        out.status.success(),
        "exit {:?}\nstdout:\n{}\nstderr:\n{}",
        out.status.code(),
        String::from_utf8_lossy(&out.stdout),
        String::from_utf8_lossy(&out.stderr)
    );
}

fn props(pairs: &[(&str, JsonValue)]) -> JsonObject {
    pairs
        .iter()
        .map(|(k, v)| (k.to_string(), v.clone()))
        .collect()
}

fn feature(value: GeometryValue, properties: JsonObject) -> Feature {
    Feature {
        bbox: None,
        geometry: Some(Geometry::new(value)),
        id: None,
        properties: Some(properties),
        foreign_members: None,
    }
}

fn line(pts: &[[f64; 2]], properties: JsonObject) -> Feature {
    feature(
        GeometryValue::new_line_string(pts.iter().map(|p| p.to_vec())),
        properties,
    )
}

fn point(p: [f64; 2], properties: JsonObject) -> Feature {
    feature(GeometryValue::new_point(p.to_vec()), properties)
}

/// A FeatureCollection with `"crs": null` (local coordinates).
fn write_layer(path: &Path, features: Vec<Feature>) {
    write_layer_in(path, features, None);
}

/// A FeatureCollection whose `crs` member names `crs` (the 2008 form), or is null.
fn write_layer_in(path: &Path, features: Vec<Feature>, crs: Option<&str>) {
    let mut fc = FeatureCollection::from_iter(features);
    let mut members = JsonObject::new();
    let member = match crs {
        Some(name) => serde_json::json!({"type": "name", "properties": {"name": name}}),
        None => JsonValue::Null,
    };
    members.insert("crs".into(), member);
    fc.foreign_members = Some(members);
    std::fs::write(path, fc.to_string()).expect("layer written");
}

fn read(path: &Path) -> String {
    std::fs::read_to_string(path).unwrap_or_else(|e| panic!("{}: {e}", path.display()))
}

/// The data lines of a CSV file (comments dropped).
fn data_lines(path: &Path) -> Vec<String> {
    read(path)
        .lines()
        .filter(|l| !l.starts_with('#'))
        .map(str::to_string)
        .collect()
}

const SMALL_MAPPING: &str = r#"
[network]
name = "Small import"
units = "us"
headloss = "hazen-williams"
max_day_factor = 1.5
peak_hour_factor = 2.5

[coordinates]
crs = "local"
unit = "ft"
snap_tolerance = 0.5
attach_tolerance = 10
split_tolerance = 10

[pipes]
id = "ASSET"
diameter = "DIAM_IN"
diameter_unit = "in"
roughness = "C"
material = "MAT"
default_roughness = 100
zone = "ZONE"

[pipes.roughness_by_material]
DI = 130
PVC = 150

[hydrants]
id = "HYD"
class = "CLASS"

[sources]
id = "NAME"
default_kind = "reservoir"
grade = "HGL"

[elevations]
from = "attributes"
start = "Z0"
end = "Z1"
unit = "ft"
"#;

/// Writes the small network's layers and mapping into `dir`.
fn small_layers(dir: &Path) {
    small_layers_at(dir, [0.0, 0.0], None);
}

/// The small network moved by `offset`, its layers in `crs`.
fn small_layers_at(dir: &Path, offset: [f64; 2], crs: Option<&str>) {
    use serde_json::json;
    let line = |pts: &[[f64; 2]], p: JsonObject| {
        let moved: Vec<[f64; 2]> = pts
            .iter()
            .map(|q| [q[0] + offset[0], q[1] + offset[1]])
            .collect();
        line(&moved, p)
    };
    let point = |q: [f64; 2], p: JsonObject| point([q[0] + offset[0], q[1] + offset[1]], p);
    let write_layer = |path: &Path, features: Vec<Feature>| write_layer_in(path, features, crs);
    // Elevations follow z = 100 + 0.01 x + 0.02 y (ft) at every line end.
    let pipes = vec![
        // A, B and C meet at the vertex (100, 0).
        line(
            &[[0.0, 0.0], [100.0, 0.0]],
            props(&[
                ("ASSET", json!("A")),
                ("DIAM_IN", json!(12)),
                ("MAT", json!("DI")),
                ("Z0", json!(100)),
                ("Z1", json!(101)),
                ("ZONE", json!("town")),
            ]),
        ),
        line(
            &[[100.0, 0.0], [100.0, 100.0]],
            props(&[
                ("ASSET", json!("B")),
                ("DIAM_IN", json!(8)),
                ("C", json!(120)),
                ("Z0", json!(101)),
                ("Z1", json!(103)),
            ]),
        ),
        line(
            &[[100.0, 0.0], [200.0, 0.0]],
            props(&[
                ("ASSET", json!("C")),
                ("DIAM_IN", json!("8")),
                ("Z0", json!(101)),
                ("Z1", json!(102)),
            ]),
        ),
        // D starts 0.3 ft from C's end: a near miss within the 0.5 ft snap tolerance.
        line(
            &[[200.3, 0.0], [300.0, 0.0]],
            props(&[
                ("ASSET", json!("D")),
                ("DIAM_IN", json!(6)),
                ("MAT", json!("PVC")),
                ("Z0", json!(102)),
                ("Z1", json!(103)),
            ]),
        ),
        // E crosses C at (140, 0) without a vertex there: not joined.
        line(
            &[[100.0, 100.0], [160.0, -50.0]],
            props(&[
                ("ASSET", json!("E")),
                ("DIAM_IN", json!(6)),
                ("MAT", json!("PVC")),
                ("Z0", json!(103)),
                ("Z1", json!(100.6)),
            ]),
        ),
    ];
    write_layer(&dir.join("pipes.geojson"), pipes);
    // H1 is 3 ft from D, 50.09 ft from either of D's junctions: it splits D at (250, 0).
    write_layer(
        &dir.join("hydrants.geojson"),
        vec![point(
            [250.0, 3.0],
            props(&[("HYD", json!("H1")), ("CLASS", json!("residential"))]),
        )],
    );
    write_layer(
        &dir.join("sources.geojson"),
        vec![point(
            [0.0, 0.0],
            props(&[("NAME", json!("R1")), ("HGL", json!(300))]),
        )],
    );
    std::fs::write(dir.join("mapping.toml"), SMALL_MAPPING).expect("mapping written");
}

fn import_small(dir: &Path) -> (Output, PathBuf) {
    small_layers(dir);
    let out = dir.join("net");
    let s = |p: &str| dir.join(p).display().to_string();
    let o = firemain(&[
        "import",
        "geojson",
        "--pipes",
        &s("pipes.geojson"),
        "--hydrants",
        &s("hydrants.geojson"),
        "--sources",
        &s("sources.geojson"),
        "--mapping",
        &s("mapping.toml"),
        "--out",
        &out.display().to_string(),
    ]);
    (o, out)
}

#[test]
fn small_network_is_imported_file_by_file() {
    let tmp = tempfile::tempdir().expect("tempdir");
    let (o, net) = import_small(tmp.path());
    ok(&o);
    // Junctions in the order made: line ends in file order (the end at (0, 0) became R1), then
    // the split at (250, 0). Elevations: the end attributes; at the split, linear along D:
    // 102 + (103 - 102) × 50/100 = 102.5 ft (coordinate geometry by hand).
    assert_eq!(
        data_lines(&net.join("junctions.csv")),
        [
            "id,elevation,demand,zone,x,y",
            // A's zone reaches J-0001 (its other end is the source, which has none).
            "J-0001,101,0,town,100,0",
            "J-0002,103,0,,100,100",
            "J-0003,102,0,,200,0",
            "J-0004,103,0,,300,0",
            "J-0005,100.6,0,,160,-50",
            "J-0006,102.5,0,,250,0",
        ]
    );
    assert_eq!(
        data_lines(&net.join("sources.csv")),
        ["id,kind,grade,x,y", "R1,reservoir,300,0,0"]
    );
    // Lengths: straight lines; D moved to (200, 0) and split at 250; E = √(60² + 150²) =
    // 161.554944214 ft. Roughness: A from the table (DI 130), B its attribute, C the default
    // (guessed), D and E the table (PVC 150).
    assert_eq!(
        data_lines(&net.join("pipes.csv")),
        [
            "id,from,to,length,diameter,roughness,minor_loss,status,material",
            "A,R1,J-0001,100,12,130,0,open,DI",
            "B,J-0001,J-0002,100,8,120,0,open,",
            "C,J-0001,J-0003,100,8,100,0,open,",
            "D.1,J-0003,J-0006,50,6,150,0,open,PVC",
            "E,J-0002,J-0005,161.554944214,6,150,0,open,PVC",
            "D.2,J-0006,J-0004,50,6,150,0,open,PVC",
        ]
    );
    assert_eq!(
        data_lines(&net.join("hydrants.csv")),
        [
            "id,junction,required_flow,class,x,y",
            "H1,J-0006,,residential,250,3"
        ]
    );
    let model = read(&net.join("model.toml"));
    assert!(model.contains("name = \"Small import\""), "{model}");
    assert!(
        !model.contains("crs"),
        "a local network names no CRS: {model}"
    );
    // The report: every change with its feature.
    let csv = data_lines(&net.join("import.csv"));
    let has = |prefix: &str, detail: &str| {
        csv.iter()
            .any(|l| l.starts_with(prefix) && l.contains(detail))
    };
    assert!(
        has("snapped,pipes,3,D,200.3,0,", "first end moved 0.3"),
        "{csv:#?}"
    );
    assert!(
        has("not-joined,pipes,2,C,140,0,", "C and E cross"),
        "{csv:#?}"
    );
    assert!(
        has("split,hydrants,0,H1,250,3,", "hydrant 3 from pipe D"),
        "{csv:#?}"
    );
    assert!(
        has("attached,sources,0,R1,0,0,", "source 0 from the junction"),
        "{csv:#?}"
    );
    assert!(has("guessed,pipes,2,C,100,0,", "no roughness"), "{csv:#?}");
    assert_eq!(csv.len(), 6, "header and five changes: {csv:#?}");
    let md = read(&net.join("import.md"));
    assert!(md.contains("| not-joined | 1 |"), "{md}");
    // The folder is a network firemain reads without error.
    ok(&firemain(&["validate", &net.display().to_string()]));
}

#[test]
fn import_refuses_bad_input_with_a_located_message() {
    let tmp = tempfile::tempdir().expect("tempdir");
    let dir = tmp.path();
    small_layers(dir);
    // A JSON syntax error: line and column.
    std::fs::write(
        dir.join("bad.geojson"),
        "{\"type\": \"FeatureCollection\",\n \"features\": [,]}",
    )
    .expect("written");
    let s = |p: &str| dir.join(p).display().to_string();
    let o = import(
        dir,
        &[
            ("--pipes", "bad.geojson"),
            ("--mapping", "mapping.toml"),
            ("--out", "n1"),
        ],
    );
    assert_refused(&o, "bad.geojson:2:");
    assert!(!dir.join("n1").exists());
    // A geographic CRS is refused with the advice to project the data.
    let text = read(&dir.join("pipes.geojson")).replacen(
        "\"crs\":null",
        "\"crs\":{\"type\":\"name\",\"properties\":{\"name\":\"urn:ogc:def:crs:OGC:1.3:CRS84\"}}",
        1,
    );
    std::fs::write(dir.join("geo.geojson"), text).expect("written");
    let o = import(
        dir,
        &[
            ("--pipes", "geo.geojson"),
            ("--mapping", "mapping.toml"),
            ("--out", "n2"),
        ],
    );
    assert_eq!(o.status.code(), Some(2));
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(
        err.contains("geographic") && err.contains("project the data first"),
        "{err}"
    );
    // A mapping value checked after parsing is reported at its line and column (common
    // practice, no source): the optional split tolerance, line 14 of SMALL_MAPPING.
    let bad = SMALL_MAPPING.replacen("split_tolerance = 10", "split_tolerance = -1", 1);
    std::fs::write(dir.join("bad-mapping.toml"), bad).expect("written");
    let o = import(
        dir,
        &[
            ("--pipes", "pipes.geojson"),
            ("--mapping", "bad-mapping.toml"),
            ("--out", "n4"),
        ],
    );
    assert_refused(
        &o,
        "bad-mapping.toml:14:19: error: [coordinates] split_tolerance is -1",
    );
    // A missing diameter names the file, the feature and its id.
    let text = read(&dir.join("pipes.geojson")).replacen("\"DIAM_IN\":6", "\"DIAM_IN\":null", 1);
    std::fs::write(dir.join("nodiam.geojson"), text).expect("written");
    let o = import(
        dir,
        &[
            ("--pipes", "nodiam.geojson"),
            ("--mapping", "mapping.toml"),
            ("--out", "n3"),
        ],
    );
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(
        err.contains("nodiam.geojson: error: feature 3 (id `D`)"),
        "{err}"
    );
    // An existing non-empty --out is refused before anything is read.
    let o = firemain(&[
        "import",
        "geojson",
        "--pipes",
        &s("pipes.geojson"),
        "--mapping",
        &s("mapping.toml"),
        "--out",
        &dir.display().to_string(),
    ]);
    assert_eq!(o.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&o.stderr).contains("already holds files"));
}

/// Rows of a network CSV file (comments dropped) as maps of column → cell.
fn rows(path: &Path) -> Vec<HashMap<String, String>> {
    let text: String = data_lines(path).join("\n");
    let mut r = csv::Reader::from_reader(text.as_bytes());
    let header: Vec<String> = r
        .headers()
        .expect("header")
        .iter()
        .map(str::to_string)
        .collect();
    r.records()
        .map(|rec| {
            let rec = rec.expect("row");
            header
                .iter()
                .cloned()
                .zip(rec.iter().map(str::to_string))
                .collect()
        })
        .collect()
}

fn xy(row: &HashMap<String, String>) -> [f64; 2] {
    [row["x"].parse().expect("x"), row["y"].parse().expect("y")]
}

fn key(p: [f64; 2]) -> (i64, i64) {
    (
        (p[0] * 1000.0).round() as i64,
        (p[1] * 1000.0).round() as i64,
    )
}

/// The demo town's pipes, hydrants and sources as GeoJSON layers, its junction elevations and
/// demands as point CSV files, and a mapping; pipes run straight from node to node.
fn export_demo(dir: &Path) {
    use serde_json::json;
    let demo = Path::new(env!("CARGO_MANIFEST_DIR")).join("examples/demo-town");
    let mut pos: HashMap<String, [f64; 2]> = HashMap::new();
    let mut elevations = String::from("x,y,elevation\n");
    let mut demands = String::from("x,y,demand\n");
    for j in rows(&demo.join("junctions.csv")) {
        let p = xy(&j);
        elevations += &format!("{},{},{}\n", p[0], p[1], j["elevation"]);
        demands += &format!("{},{},{}\n", p[0], p[1], j["demand"]);
        pos.insert(j["id"].clone(), p);
    }
    let mut sources = Vec::new();
    for s in rows(&demo.join("sources.csv")) {
        pos.insert(s["id"].clone(), xy(&s));
        sources.push(point(
            xy(&s),
            props(&[
                ("NAME", json!(s["id"])),
                ("KIND", json!(s["kind"])),
                ("HGL", json!(s["grade"])),
            ]),
        ));
    }
    let pipes = rows(&demo.join("pipes.csv"))
        .into_iter()
        .map(|p| {
            let num = |c: &str| -> JsonValue {
                p[c].parse::<f64>()
                    .map(|v| json!(v))
                    .unwrap_or(JsonValue::Null)
            };
            line(
                &[pos[&p["from"]], pos[&p["to"]]],
                props(&[
                    ("ASSET", json!(p["id"])),
                    ("LEN", num("length")),
                    ("DIAM", num("diameter")),
                    ("C", num("roughness")),
                    ("K", num("minor_loss")),
                    ("STATUS", json!(p["status"])),
                    ("MAT", json!(p["material"])),
                ]),
            )
        })
        .collect();
    let hydrants = rows(&demo.join("hydrants.csv"))
        .into_iter()
        .map(|h| {
            point(
                xy(&h),
                props(&[("HYD", json!(h["id"])), ("CLASS", json!(h["class"]))]),
            )
        })
        .collect();
    write_layer(&dir.join("pipes.geojson"), pipes);
    write_layer(&dir.join("hydrants.geojson"), hydrants);
    write_layer(&dir.join("sources.geojson"), sources);
    std::fs::write(dir.join("elevations.csv"), elevations).expect("written");
    std::fs::write(dir.join("demands.csv"), demands).expect("written");
    // The demo's nodes are at least 15 ft apart and its hydrants 19.2 ft from their junctions.
    std::fs::write(
        dir.join("mapping.toml"),
        r#"
[network]
name = "Cedar Hollow (invented demo town)"
units = "us"
headloss = "hazen-williams"
max_day_factor = 1.7
peak_hour_factor = 2.8
min_hour_factor = 0.4

[coordinates]
crs = "local"
unit = "ft"
snap_tolerance = 0.5
attach_tolerance = 20
split_tolerance = 0

[pipes]
id = "ASSET"
length = "LEN"
diameter = "DIAM"
diameter_unit = "in"
roughness = "C"
minor_loss = "K"
status = "STATUS"
material = "MAT"

[hydrants]
id = "HYD"
class = "CLASS"

[sources]
id = "NAME"
kind = "KIND"
grade = "HGL"

[elevations]
from = "points"
method = "idw"

[demands]
unit = "gpm"
"#,
    )
    .expect("written");
}

/// Copies pumps.csv and valves.csv of the demo into `net`, their node ids mapped by position
/// (the import makes pumps and valves from no layer).
fn add_pumps_and_valves(net: &Path) {
    let demo = Path::new(env!("CARGO_MANIFEST_DIR")).join("examples/demo-town");
    let mut demo_pos: HashMap<String, [f64; 2]> = HashMap::new();
    for f in ["junctions.csv", "sources.csv"] {
        for r in rows(&demo.join(f)) {
            demo_pos.insert(r["id"].clone(), xy(&r));
        }
    }
    let mut new_id: HashMap<(i64, i64), String> = HashMap::new();
    for f in ["junctions.csv", "sources.csv"] {
        for r in rows(&net.join(f)) {
            new_id.insert(key(xy(&r)), r["id"].clone());
        }
    }
    for f in ["pumps.csv", "valves.csv"] {
        let text = data_lines(&demo.join(f));
        let header: Vec<&str> = text[0].split(',').collect();
        let (from, to) = (
            header.iter().position(|h| *h == "from").expect("from"),
            header.iter().position(|h| *h == "to").expect("to"),
        );
        let mut out = vec![text[0].clone()];
        for l in &text[1..] {
            let mut cells: Vec<String> = l.split(',').map(str::to_string).collect();
            for c in [from, to] {
                cells[c] = new_id[&key(demo_pos[&cells[c]])].clone();
            }
            out.push(cells.join(","));
        }
        std::fs::write(net.join(f), out.join("\n") + "\n").expect("written");
    }
}

#[test]
fn demo_round_trip_gives_the_same_hydraulics() {
    let tmp = tempfile::tempdir().expect("tempdir");
    let dir = tmp.path();
    export_demo(dir);
    let net = dir.join("net");
    let s = |p: &str| dir.join(p).display().to_string();
    let o = firemain(&[
        "import",
        "geojson",
        "--pipes",
        &s("pipes.geojson"),
        "--hydrants",
        &s("hydrants.geojson"),
        "--sources",
        &s("sources.geojson"),
        "--elevations",
        &s("elevations.csv"),
        "--demands",
        &s("demands.csv"),
        "--mapping",
        &s("mapping.toml"),
        "--out",
        &net.display().to_string(),
    ]);
    add_pumps_and_valves(&net);
    // The import wrote the folder, then its own check found the pumped and reduced zones cut
    // off (exit 2): the layers carry no pumps or valves, which are added below.
    assert_eq!(
        o.status.code(),
        Some(2),
        "{}",
        String::from_utf8_lossy(&o.stderr)
    );
    assert!(String::from_utf8_lossy(&o.stdout)
        .contains("311 junctions, 3 sources, 434 pipes, 69 hydrants"));
    let demo = Path::new(env!("CARGO_MANIFEST_DIR")).join("examples/demo-town");
    let (a, b) = (dir.join("solve-demo"), dir.join("solve-net"));
    ok(&firemain(&[
        "solve",
        &demo.display().to_string(),
        "--out",
        &a.display().to_string(),
    ]));
    ok(&firemain(&[
        "solve",
        &net.display().to_string(),
        "--out",
        &b.display().to_string(),
    ]));
    // Every node's pressure and grade, matched by position; every pipe's flow, matched by id.
    let by_pos = |results: &Path, network: &Path| -> HashMap<(i64, i64), HashMap<String, String>> {
        let mut pos: HashMap<String, [f64; 2]> = HashMap::new();
        for f in ["junctions.csv", "sources.csv"] {
            for r in rows(&network.join(f)) {
                pos.insert(r["id"].clone(), xy(&r));
            }
        }
        rows(&results.join("node_results.csv"))
            .into_iter()
            .map(|r| (key(pos[&r["id"]]), r))
            .collect()
    };
    let (na, nb) = (by_pos(&a, &demo), by_pos(&b, &net));
    assert_eq!(na.len(), nb.len());
    let num = |r: &HashMap<String, String>, c: &str| r[c].parse::<f64>().unwrap_or(f64::NAN);
    for (k, ra) in &na {
        let rb = &nb[k];
        // The solver converges to 1e-3 ft of grade or better; results are printed to 0.001
        // psi and 0.01 ft: equal within two printed units (common practice, no source).
        for (c, tol) in [
            ("grade_ft", 0.02),
            ("pressure_psi", 0.002),
            ("elevation_ft", 1e-9),
        ] {
            assert!(
                (num(ra, c) - num(rb, c)).abs() <= tol,
                "{c} at {k:?}: {} vs {}",
                ra[c],
                rb[c]
            );
        }
    }
    let pa: HashMap<String, f64> = rows(&a.join("pipe_results.csv"))
        .into_iter()
        .map(|r| (r["id"].clone(), r["flow_gpm"].parse().unwrap_or(f64::NAN)))
        .collect();
    let pb: HashMap<String, f64> = rows(&b.join("pipe_results.csv"))
        .into_iter()
        .map(|r| (r["id"].clone(), r["flow_gpm"].parse().unwrap_or(f64::NAN)))
        .collect();
    assert_eq!(pa.len(), pb.len());
    for (id, qa) in &pa {
        assert!((qa - pb[id]).abs() <= 0.2, "pipe {id}: {qa} vs {}", pb[id]);
    }
    // Every hydrant is on the junction at its demo junction's position.
    let hyd: HashMap<String, String> = rows(&net.join("hydrants.csv"))
        .into_iter()
        .map(|r| (r["id"].clone(), r["junction"].clone()))
        .collect();
    let net_pos: HashMap<String, [f64; 2]> = rows(&net.join("junctions.csv"))
        .into_iter()
        .map(|r| (r["id"].clone(), xy(&r)))
        .collect();
    let demo_pos: HashMap<String, [f64; 2]> = rows(&demo.join("junctions.csv"))
        .into_iter()
        .map(|r| (r["id"].clone(), xy(&r)))
        .collect();
    for h in rows(&demo.join("hydrants.csv")) {
        assert_eq!(
            key(net_pos[&hyd[&h["id"]]]),
            key(demo_pos[&h["junction"]]),
            "hydrant {}",
            h["id"]
        );
    }
}

/// Parses a GeoJSON file with the `geojson` crate and returns its features.
fn parse(path: &Path) -> (FeatureCollection, Vec<Feature>) {
    let fc: FeatureCollection = read(path)
        .parse()
        .unwrap_or_else(|e| panic!("{}: {e}", path.display()));
    let features = fc.features.clone();
    (fc, features)
}

fn geometry_type(f: &Feature) -> &'static str {
    f.geometry.as_ref().map_or("null", |g| g.value.type_name())
}

fn property_names(f: &Feature) -> Vec<String> {
    f.properties
        .as_ref()
        .map_or(Vec::new(), |p| p.keys().cloned().collect())
}

#[test]
fn solve_geojson_is_valid_and_carries_every_column() {
    let tmp = tempfile::tempdir().expect("tempdir");
    let demo = Path::new(env!("CARGO_MANIFEST_DIR")).join("examples/demo-town");
    let out = tmp.path().join("out");
    ok(&firemain(&[
        "solve",
        &demo.display().to_string(),
        "--out",
        &out.display().to_string(),
        "--geojson",
    ]));
    let (fc, nodes) = parse(&out.join("node_results.geojson"));
    // The demo names no CRS: the 2008 form's "crs": null says so.
    assert_eq!(
        fc.foreign_members.as_ref().and_then(|m| m.get("crs")),
        Some(&JsonValue::Null)
    );
    assert_eq!(nodes.len(), rows(&out.join("node_results.csv")).len());
    assert!(nodes.iter().all(|f| geometry_type(f) == "Point"));
    let mut names = property_names(&nodes[0]);
    names.sort();
    let mut header: Vec<String> = data_lines(&out.join("node_results.csv"))[0]
        .split(',')
        .map(str::to_string)
        .collect();
    header.sort();
    assert_eq!(names, header);
    let (_, pipes) = parse(&out.join("pipe_results.geojson"));
    assert!(pipes.iter().all(|f| geometry_type(f) == "LineString"));
    assert!(property_names(&pipes[0]).contains(&"flow_gpm".to_string()));
    // Ids stay text, numbers are numbers.
    let p = pipes[0].properties.as_ref().expect("properties");
    assert!(p["id"].is_string() && p["flow_gpm"].is_number());
    assert!(!read(&out.join("node_results.geojson")).contains("NaN"));
    // Without --geojson the set is as before: no GeoJSON file.
    let plain = tmp.path().join("plain");
    ok(&firemain(&[
        "solve",
        &demo.display().to_string(),
        "--out",
        &plain.display().to_string(),
    ]));
    assert!(!plain.join("node_results.geojson").exists());
}

#[test]
fn check_geojson_hydrants_weak_mains_and_pressures() {
    let tmp = tempfile::tempdir().expect("tempdir");
    let demo = Path::new(env!("CARGO_MANIFEST_DIR")).join("examples/demo-town");
    let criteria = Path::new(env!("CARGO_MANIFEST_DIR")).join("criteria/cedar-county-demo.toml");
    let out = tmp.path().join("out");
    let o = firemain(&[
        "check",
        &demo.display().to_string(),
        "--criteria",
        &criteria.display().to_string(),
        "--out",
        &out.display().to_string(),
        "--geojson",
        "--hydrant",
        "HYD-101",
        "--hydrant",
        "HYD-102",
        "--quiet",
    ]);
    assert!(
        matches!(o.status.code(), Some(0 | 1)),
        "{}",
        String::from_utf8_lossy(&o.stderr)
    );
    let (_, hydrants) = parse(&out.join("fireflow.geojson"));
    assert_eq!(hydrants.len(), 2);
    assert!(hydrants.iter().all(|f| geometry_type(f) == "Point"));
    let header: Vec<String> = data_lines(&out.join("fireflow.csv"))[0]
        .split(',')
        .map(str::to_string)
        .collect();
    let mut names = property_names(&hydrants[0]);
    names.sort();
    let mut sorted = header.clone();
    sorted.sort();
    assert_eq!(names, sorted, "every fireflow.csv column");
    // HYD-101 is at (3238, 1004) in hydrants.csv.
    let g = hydrants
        .iter()
        .find(|f| {
            f.properties
                .as_ref()
                .is_some_and(|p| p["hydrant"] == "HYD-101")
        })
        .and_then(|f| f.geometry.as_ref())
        .map(|g| g.value.clone());
    assert_eq!(g, Some(GeometryValue::new_point(vec![3238.0, 1004.0])));
    let (_, weak) = parse(&out.join("weak_mains.geojson"));
    assert!(weak.iter().all(|f| geometry_type(f) == "LineString"));
    let (_, service) = parse(&out.join("service.geojson"));
    assert!(service.iter().all(|f| geometry_type(f) == "Point"));
    assert!(property_names(&service[0]).contains(&"pressure_peak_hour_psi".to_string()));
    let manifest = read(&out.join("manifest-check.toml"));
    assert!(manifest.contains("fireflow.geojson"));
}

#[test]
fn projected_crs_is_kept_and_results_are_written_in_wgs_84() {
    let tmp = tempfile::tempdir().expect("tempdir");
    let dir = tmp.path();
    // EPSG:2276 (NAD83 Texas North Central, US survey feet): its false origin x0 = 600000 m,
    // y0 = 2000000.0001016 m is the natural origin 98°30'W, 31°40'N (the CRS's definition).
    let us_ft = 1200.0 / 3937.0;
    let origin = [600_000.0 / us_ft, 2_000_000.0001016 / us_ft];
    small_layers_at(dir, origin, Some("urn:ogc:def:crs:EPSG::2276"));
    let s = |p: &str| dir.join(p).display().to_string();
    let args = |out: &str, mapping: &str| -> Vec<String> {
        [
            "import",
            "geojson",
            "--pipes",
            &s("pipes.geojson"),
            "--hydrants",
            &s("hydrants.geojson"),
            "--sources",
            &s("sources.geojson"),
            "--mapping",
            &s(mapping),
            "--out",
            &s(out),
        ]
        .iter()
        .map(|a| a.to_string())
        .collect()
    };
    // The mapping's `unit = "ft"` contradicts the CRS's US survey foot: refused.
    let o = firemain(
        &args("n0", "mapping.toml")
            .iter()
            .map(String::as_str)
            .collect::<Vec<_>>(),
    );
    assert_eq!(o.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&o.stderr).contains("[coordinates] unit"));
    std::fs::write(
        dir.join("mapping2.toml"),
        SMALL_MAPPING.replace("unit = \"ft\"\nsnap", "snap"),
    )
    .expect("written");
    ok(&firemain(
        &args("net", "mapping2.toml")
            .iter()
            .map(String::as_str)
            .collect::<Vec<_>>(),
    ));
    let net = dir.join("net");
    assert!(read(&net.join("model.toml")).contains("crs = \"EPSG:2276\""));
    // 100 US survey feet are 100 × 1200/3937 / 0.3048 = 100.0002 ft (the two feet's definitions).
    let pipes = data_lines(&net.join("pipes.csv"));
    assert!(pipes[1].starts_with("A,R1,J-0001,100.0002"), "{pipes:?}");
    let out = dir.join("out");
    ok(&firemain(&[
        "solve",
        &net.display().to_string(),
        "--out",
        &out.display().to_string(),
        "--geojson",
    ]));
    let (fc, nodes) = parse(&out.join("node_results.geojson"));
    assert!(
        fc.foreign_members
            .as_ref()
            .is_none_or(|m| !m.contains_key("crs")),
        "RFC 7946: no crs member"
    );
    let r1 = nodes
        .iter()
        .find(|f| f.properties.as_ref().is_some_and(|p| p["id"] == "R1"))
        .and_then(|f| f.geometry.as_ref())
        .map(|g| g.value.clone());
    let Some(GeometryValue::Point { coordinates }) = r1 else {
        panic!("R1 is a point: {r1:?}");
    };
    assert!((coordinates[0] + 98.5).abs() < 1e-6, "{coordinates:?}");
    assert!(
        (coordinates[1] - (31.0 + 40.0 / 60.0)).abs() < 1e-6,
        "{coordinates:?}"
    );
    // A CRS that cannot be transformed: the network's x/y, and the CRS named in the file.
    let model = read(&net.join("model.toml")).replace("EPSG:2276", "EPSG:99999");
    std::fs::write(net.join("model.toml"), model).expect("written");
    let out2 = dir.join("out2");
    ok(&firemain(&[
        "solve",
        &net.display().to_string(),
        "--out",
        &out2.display().to_string(),
        "--geojson",
    ]));
    let (fc, _) = parse(&out2.join("node_results.geojson"));
    let name = fc
        .foreign_members
        .as_ref()
        .and_then(|m| m.get("crs"))
        .and_then(|c| c.pointer("/properties/name"));
    assert_eq!(
        name,
        Some(&JsonValue::String("urn:ogc:def:crs:EPSG::99999".into()))
    );
}

#[test]
fn junctions_without_elevation_are_named_and_duplicate_hydrants_renamed() {
    let tmp = tempfile::tempdir().expect("tempdir");
    let dir = tmp.path();
    small_layers(dir);
    // Without an elevation source every junction lacks one: the error lists their positions.
    let mapping = SMALL_MAPPING.replace("from = \"attributes\"", "");
    std::fs::write(dir.join("noelev.toml"), mapping).expect("written");
    let o = import(
        dir,
        &[
            ("--pipes", "pipes.geojson"),
            ("--sources", "sources.geojson"),
            ("--mapping", "noelev.toml"),
            ("--out", "n1"),
        ],
    );
    assert_refused(
        &o,
        "5 junction(s) have no elevation, at (100, 0), (100, 100)",
    );
    // Two hydrants with one id: the second is renamed, and the report says so.
    use serde_json::json;
    write_layer(
        &dir.join("hydrants2.geojson"),
        vec![
            point([100.0, 2.0], props(&[("HYD", json!("H1"))])),
            point([200.0, 2.0], props(&[("HYD", json!("H1"))])),
        ],
    );
    ok(&import(
        dir,
        &[
            ("--pipes", "pipes.geojson"),
            ("--sources", "sources.geojson"),
            ("--hydrants", "hydrants2.geojson"),
            ("--mapping", "mapping.toml"),
            ("--out", "n2"),
        ],
    ));
    let hyd = data_lines(&dir.join("n2/hydrants.csv"));
    assert_eq!(
        hyd[1..],
        [
            "H1,J-0001,,,100,2".to_string(),
            "H1~2,J-0003,,,200,2".to_string()
        ]
    );
    assert!(read(&dir.join("n2/import.csv")).contains("renamed,hydrants,1,H1,200,2,"));
}

#[test]
fn upsize_geojson_proposed_upsizings_are_lines() {
    let tmp = tempfile::tempdir().expect("tempdir");
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let out = tmp.path().join("out");
    let o = firemain(&[
        "upsize",
        &root.join("tests/data/sweep_town").display().to_string(),
        "--criteria",
        &root
            .join("tests/data/criteria/us-20psi-1000gpm.toml")
            .display()
            .to_string(),
        "--out",
        &out.display().to_string(),
        "--geojson",
        "--quiet",
    ]);
    assert!(
        matches!(o.status.code(), Some(0 | 1)),
        "{}",
        String::from_utf8_lossy(&o.stderr)
    );
    let (_, plan) = parse(&out.join("upsize_plan.geojson"));
    assert_eq!(plan.len(), rows(&out.join("upsize_plan.csv")).len());
    assert!(!plan.is_empty() && plan.iter().all(|f| geometry_type(f) == "LineString"));
    let mut names = property_names(&plan[0]);
    names.sort();
    let mut header: Vec<String> = data_lines(&out.join("upsize_plan.csv"))[0]
        .split(',')
        .map(str::to_string)
        .collect();
    header.sort();
    assert_eq!(names, header);
    let (_, hydrants) = parse(&out.join("upsize_hydrants.geojson"));
    assert!(hydrants.iter().all(|f| geometry_type(f) == "Point"));
    parse(&out.join("weak_mains_after.geojson"));
}

#[test]
fn hydrant_leads_are_imported_in_the_networks_units_and_checked() {
    use serde_json::json;
    let tmp = tempfile::tempdir().expect("tempdir");
    let dir = tmp.path();
    small_layers(dir);
    let mapping = SMALL_MAPPING.replace(
        "class = \"CLASS\"",
        "class = \"CLASS\"\nlateral_length = \"LEAD_LEN\"\nlateral_length_unit = \"m\"\n\
         lateral_diameter = \"LEAD_DIA\"\nlateral_roughness = \"LEAD_C\"",
    );
    std::fs::write(dir.join("leads.toml"), &mapping).expect("written");
    let hydrants = |name: &str, lead: &[(&str, JsonValue)]| {
        let mut first = vec![("HYD", json!("H1"))];
        first.extend(lead.iter().cloned());
        write_layer(
            &dir.join(name),
            vec![
                point([100.0, 2.0], props(&first)),
                point([200.0, 2.0], props(&[("HYD", json!("H2"))])),
            ],
        );
    };
    let run = |layer: &str, out: &str| {
        import(
            dir,
            &[
                ("--pipes", "pipes.geojson"),
                ("--sources", "sources.geojson"),
                ("--hydrants", layer),
                ("--mapping", "leads.toml"),
                ("--out", out),
            ],
        )
    };
    // 12.192 m is 40 ft exactly (1 ft = 0.3048 m, the 1959 international foot); the diameter
    // is in the network's own inches, the C factor a plain number. A hydrant without lead
    // attributes gets empty cells: hydrants.csv reads it as having no lead.
    hydrants(
        "leads.geojson",
        &[
            ("LEAD_LEN", json!(12.192)),
            ("LEAD_DIA", json!("6")),
            ("LEAD_C", json!(120)),
        ],
    );
    ok(&run("leads.geojson", "n1"));
    assert_eq!(
        data_lines(&dir.join("n1/hydrants.csv")),
        [
            "id,junction,required_flow,class,x,y,lateral_length,lateral_diameter,lateral_roughness",
            "H1,J-0001,,,100,2,40,6,120",
            "H2,J-0003,,,200,2,,,",
        ]
    );
    ok(&firemain(&[
        "validate",
        &dir.join("n1").display().to_string(),
    ]));
    // With `default_lateral_diameter`, a hydrant without lead attributes gets a lead from its
    // junction on the main to its position: H2 at (200, 2) on the junction at (200, 0), 2 ft
    // (plane geometry; common practice, no source), reported as guessed. H1 keeps its own.
    std::fs::write(
        dir.join("default-lead.toml"),
        mapping.replace(
            "lateral_roughness = \"LEAD_C\"",
            "lateral_roughness = \"LEAD_C\"\ndefault_lateral_diameter = 6",
        ),
    )
    .expect("written");
    let o = import(
        dir,
        &[
            ("--pipes", "pipes.geojson"),
            ("--sources", "sources.geojson"),
            ("--hydrants", "leads.geojson"),
            ("--mapping", "default-lead.toml"),
            ("--out", "n2"),
        ],
    );
    ok(&o);
    assert_eq!(
        data_lines(&dir.join("n2/hydrants.csv"))[1..],
        ["H1,J-0001,,,100,2,40,6,120", "H2,J-0003,,,200,2,2,6,"]
    );
    let report = read(&dir.join("n2/import.md"));
    assert!(report.contains(
        "no lead attributes: a lead of 0.6096 m (the hydrant's distance to the main) and the default diameter 6 in"
    ), "{report}");
    // A default the network files would refuse is an error at its line and column.
    std::fs::write(
        dir.join("bad-default.toml"),
        mapping.replace(
            "lateral_roughness = \"LEAD_C\"",
            "lateral_roughness = \"LEAD_C\"\ndefault_lateral_diameter = 0",
        ),
    )
    .expect("written");
    let o = import(
        dir,
        &[
            ("--pipes", "pipes.geojson"),
            ("--hydrants", "leads.geojson"),
            ("--mapping", "bad-default.toml"),
            ("--out", "n3"),
        ],
    );
    assert_refused(
        &o,
        "bad-default.toml:36:28: error: [hydrants] default_lateral_diameter 0 in is not between 0.0393701 and 393.7 in",
    );
    assert!(!dir.join("n3").exists());
    // Errors name the layer's file and the feature, and nothing is written.
    for (lead, says) in [
        (
            vec![("LEAD_LEN", json!(12))],
            "feature 0 (id `H1`): the lead's diameter is empty while its length or roughness is given",
        ),
        (
            vec![("LEAD_LEN", json!(12)), ("LEAD_DIA", json!("six"))],
            "feature 0 (id `H1`): lateral diameter \"six\" is not a number",
        ),
        (
            vec![("LEAD_LEN", json!(12)), ("LEAD_DIA", json!(0))],
            "feature 0 (id `H1`): the lateral diameter 0 in is not between 0.0393701 and 393.7 in",
        ),
        (
            vec![
                ("LEAD_LEN", json!(12)),
                ("LEAD_DIA", json!(6)),
                ("LEAD_C", json!(5)),
            ],
            "feature 0 (id `H1`): the lateral roughness 5 is beyond",
        ),
    ] {
        hydrants("bad.geojson", &lead);
        let o = run("bad.geojson", "bad");
        assert_refused(&o, "bad.geojson: error: ");
        assert_refused(&o, says);
        assert!(!dir.join("bad").exists());
    }
}

#[test]
fn values_the_network_reader_refuses_are_reported_before_anything_is_written() {
    // The bounds are the network reader's own (docs/network-format.md: diameters between 1 mm
    // and 10 m, lengths at most 100 km, grades within 10 km): common practice, no source.
    let tmp = tempfile::tempdir().expect("tempdir");
    let dir = tmp.path();
    small_layers(dir);
    let run = |pipes: &str, sources: &str, out: &str| {
        let o = import(
            dir,
            &[
                ("--pipes", pipes),
                ("--sources", sources),
                ("--mapping", "mapping.toml"),
                ("--out", out),
            ],
        );
        assert!(!dir.join(out).exists(), "{out} was written");
        o
    };
    // (layer changed, text replaced, by, file of the changed layer, what the error says):
    // - a diameter in the wrong unit, refused at its feature, once for the whole line;
    // - a line 400,000 ft long (coordinates in the wrong unit): the pipe the reader would
    //   refuse, named by its row at the pipes layer (as docs/gis.md §1 quotes it);
    // - a grade beyond any water system, at the sources layer.
    let cases = [
        (
            "pipes.geojson",
            "\"DIAM_IN\":6",
            "\"DIAM_IN\":2000",
            "big.geojson",
            "big.geojson: error: feature 3 (id `D`): the diameter 2000 in is not between",
        ),
        (
            "pipes.geojson",
            "[300.0,0.0]",
            "[400000.0,0.0]",
            "long.geojson",
            "long.geojson: error: the imported pipes.csv would be refused when read (its row `D,J-0003,J-0004,399800,6,150,0,open,PVC`): `length` 399800 ft is beyond any water main between two junctions (firemain accepts at most 328083 ft); fix: correct the feature in the GIS or the mapping; the reader says: ",
        ),
        (
            "sources.geojson",
            "\"HGL\":300",
            "\"HGL\":1e7",
            "grade.geojson",
            "grade.geojson: error: the imported sources.csv would be refused when read (its row `R1,",
        ),
    ];
    for (k, (layer, from, to, changed, says)) in cases.into_iter().enumerate() {
        let text = read(&dir.join(layer)).replacen(from, to, 1);
        std::fs::write(dir.join(changed), text).expect("written");
        let (pipes, sources) = if layer == "pipes.geojson" {
            (changed, "sources.geojson")
        } else {
            ("pipes.geojson", changed)
        };
        assert_refused(&run(pipes, sources, &format!("n{k}")), says);
    }
    // A point table's value is refused at its cell: 1e9 gpm (3.8e6 m³/s) at a junction.
    std::fs::write(dir.join("demands.csv"), "x,y,demand\n0,0,5\n100,0,1e9\n").expect("written");
    let o = import(
        dir,
        &[
            ("--pipes", "pipes.geojson"),
            ("--sources", "sources.geojson"),
            ("--demands", "demands.csv"),
            ("--mapping", "mapping.toml"),
            ("--out", "n4"),
        ],
    );
    assert_refused(
        &o,
        "demands.csv:3:3: error: `demand` 1e9 gpm is beyond any water system",
    );
    assert!(!dir.join("n4").exists());
}
