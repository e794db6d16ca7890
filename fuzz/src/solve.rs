//! The `solve` target: a small network drawn from the fuzzer's bytes (a tree of junctions
//! plus a few loops, one to three reservoirs or tanks, pipes and check-valve pipes, pumps,
//! control valves, hydrants), written as a network folder and loaded like any other. The load
//! must fail with located errors or give a network whose steady solve fails with an error or
//! gives finite heads and flows, and whose fire-flow search gives finite numbers.
//!
//! Numbers are drawn across their plausible ranges in the chosen unit system, with now and
//! then an edge value (zero, a range's end, or far outside it), so that both the solver and
//! the loader's limits are reached. Common practice, no source: the ranges are firemain's own
//! limits (docs/network-format.md), not data.

use std::fmt::Write as _;
use std::path::Path;
use std::sync::OnceLock;

use arbitrary::{Result, Unstructured};
use firemain::criteria::load_criteria;
use firemain::fireflow::{sweep, FireFlowSetup};
use firemain::hydraulics::Hydraulics;
use firemain::model::load_network;
use firemain::units::UnitSystem;

use crate::fuzzkit::{check_diagnostics, check_network};

/// A number in `lo..=hi`, or one time in sixteen an edge value.
fn number(u: &mut Unstructured<'_>, lo: f64, hi: f64) -> Result<f64> {
    if u.ratio(1, 16)? {
        let edges = [0.0, lo, hi, lo * 1e-3, hi * 1e3, -hi];
        return Ok(edges[u.choose_index(edges.len())?]);
    }
    let t = f64::from(u.arbitrary::<u16>()?) / f64::from(u16::MAX);
    Ok(lo + t * (hi - lo))
}

/// The ranges of one unit system: elevation, demand, length, diameter, pressure, flow.
struct Ranges {
    units: &'static str,
    elevation: (f64, f64),
    demand: (f64, f64),
    length: (f64, f64),
    diameters: [f64; 7],
    pressure: f64,
    flow: f64,
    /// Metres (or feet) of head per unit of pressure, for valve settings.
    head: (f64, f64),
}

const SI: Ranges = Ranges {
    units: "si",
    elevation: (0.0, 150.0),
    demand: (0.0, 20.0),
    length: (1.0, 3000.0),
    diameters: [25.0, 50.0, 100.0, 150.0, 200.0, 300.0, 600.0],
    pressure: 140.0,
    flow: 300.0,
    head: (10.0, 120.0),
};

const US: Ranges = Ranges {
    units: "us",
    elevation: (0.0, 500.0),
    demand: (0.0, 300.0),
    length: (3.0, 10000.0),
    diameters: [1.0, 2.0, 4.0, 6.0, 8.0, 12.0, 24.0],
    pressure: 20.0,
    flow: 5000.0,
    head: (30.0, 400.0),
};

/// The network folder's files drawn from `u`: (name, text).
fn draw(u: &mut Unstructured<'_>) -> Result<Vec<(&'static str, String)>> {
    let r = if u.arbitrary()? { &US } else { &SI };
    let darcy: bool = u.arbitrary()?;
    let headloss = if darcy {
        "darcy-weisbach"
    } else {
        "hazen-williams"
    };
    let max_day = number(u, 1.0, 3.0)?;
    let model = format!(
        "name = \"fuzzed network\"\nunits = \"{}\"\nheadloss = \"{headloss}\"\n[demand]\nmax_day_factor = {max_day}\npeak_hour_factor = {}\n",
        r.units,
        max_day.max(2.5)
    );
    let n = u.int_in_range(1..=14usize)?;
    let mut junctions = String::from("id,elevation,demand,zone\n");
    for j in 0..n {
        let zone = if u.ratio(1, 4)? { "high" } else { "" };
        let (e, d) = (
            number(u, r.elevation.0, r.elevation.1)?,
            number(u, r.demand.0, r.demand.1)?,
        );
        writeln!(junctions, "J{j},{e},{d},{zone}").unwrap();
    }
    let sources = u.int_in_range(1..=3usize)?;
    let mut source_rows = String::from("id,kind,grade,diameter,min_level,max_level\n");
    for s in 0..sources {
        let grade = number(u, r.head.0, r.head.1 + r.elevation.1)?;
        if u.ratio(1, 3)? {
            let diameter = number(u, r.length.0, r.length.0 * 30.0)?;
            let (lo, hi) = (grade - number(u, 0.0, 20.0)?, grade + number(u, 0.0, 20.0)?);
            writeln!(source_rows, "R{s},tank,{grade},{diameter},{lo},{hi}").unwrap();
        } else {
            writeln!(source_rows, "R{s},reservoir,{grade},,,").unwrap();
        }
    }
    let mut pipes = String::from("id,from,to,length,diameter,roughness,minor_loss,status\n");
    let mut p = 0;
    let mut pipe = |u: &mut Unstructured<'_>, a: String, b: String| -> Result<()> {
        let length = number(u, r.length.0, r.length.1)?;
        let diameter = r.diameters[u.choose_index(r.diameters.len())?];
        let roughness = if darcy {
            number(u, 0.001, 3.0)?
        } else {
            number(u, 40.0, 150.0)?
        };
        let minor = if u.ratio(1, 4)? {
            number(u, 0.0, 10.0)?.to_string()
        } else {
            String::new()
        };
        let status = *u.choose(&["", "", "", "check", "closed"])?;
        writeln!(
            pipes,
            "P{p},{a},{b},{length},{diameter},{roughness},{minor},{status}"
        )
        .unwrap();
        p += 1;
        Ok(())
    };
    for s in 0..sources {
        let j = u.choose_index(n)?;
        pipe(u, format!("R{s}"), format!("J{j}"))?;
    }
    for j in 1..n {
        let parent = u.choose_index(j)?;
        pipe(u, format!("J{parent}"), format!("J{j}"))?;
    }
    for _ in 0..u.int_in_range(0..=4)? {
        let (a, b) = (u.choose_index(n)?, u.choose_index(n)?);
        if a != b {
            pipe(u, format!("J{a}"), format!("J{b}"))?;
        }
    }
    let mut pumps = String::from(
        "id,from,to,shutoff_head,design_flow,design_head,runout_flow,runout_head,speed,status\n",
    );
    for k in 0..u.int_in_range(0..=2)? {
        let (a, b) = (u.choose_index(n)?, u.choose_index(n)?);
        let shutoff = number(u, 10.0, r.head.1)?;
        let design_flow = number(u, 0.0, r.flow)?;
        let design_head = shutoff * number(u, 0.5, 1.0)?;
        let runout_flow = design_flow * number(u, 1.0, 2.0)?;
        let runout_head = design_head * number(u, 0.2, 1.0)?;
        let speed = number(u, 0.5, 1.2)?;
        writeln!(
            pumps,
            "PU{k},J{a},J{b},{shutoff},{design_flow},{design_head},{runout_flow},{runout_head},{speed},on"
        )
        .unwrap();
    }
    let mut valves = String::from("id,from,to,kind,diameter,setting,minor_loss,status\n");
    for k in 0..u.int_in_range(0..=2)? {
        let (a, b) = (u.choose_index(n)?, u.choose_index(n)?);
        let kind = *u.choose(&["prv", "psv", "fcv", "throttle"])?;
        let diameter = r.diameters[u.choose_index(r.diameters.len())?];
        let setting = match kind {
            "fcv" => number(u, 0.0, r.flow)?,
            "throttle" => number(u, 0.0, 1000.0)?,
            _ => number(u, 0.0, r.pressure * 5.0)?,
        };
        let status = *u.choose(&["active", "active", "open", "closed"])?;
        writeln!(
            valves,
            "V{k},J{a},J{b},{kind},{diameter},{setting},0.5,{status}"
        )
        .unwrap();
    }
    let mut hydrants = String::from("id,junction,required_flow\n");
    for k in 0..u.int_in_range(0..=2)? {
        let j = u.choose_index(n)?;
        let q = number(u, 0.0, r.flow)?;
        writeln!(hydrants, "H{k},J{j},{q}").unwrap();
    }
    Ok(vec![
        ("model.toml", model),
        ("junctions.csv", junctions),
        ("sources.csv", source_rows),
        ("pipes.csv", pipes),
        ("pumps.csv", pumps),
        ("valves.csv", valves),
        ("hydrants.csv", hydrants),
    ])
}

/// A criteria set for the drawn network: a residual floor and a search cap in its units.
fn criteria_text(units: &str) -> String {
    let (floor, cap, required, smin, smax) = match units {
        "us" => (US.pressure, US.flow, 1000.0, 40.0, 100.0),
        _ => (SI.pressure, SI.flow, 60.0, 280.0, 700.0),
    };
    format!(
        "name = \"fuzz criteria\"\nreference = \"fuzz\"\nunits = \"{units}\"\n\
         [service]\nmin_pressure = {smin}\nmax_pressure = {smax}\n\
         [fire]\nresidual_floor = {floor}\nscope = \"system\"\nmax_velocity = 0\n\
         search_cap = {cap}\ndefault_required_flow = {required}\n"
    )
}

/// One temporary folder per process, its files overwritten by each case.
fn folder() -> &'static Path {
    static DIR: OnceLock<tempfile::TempDir> = OnceLock::new();
    DIR.get_or_init(|| tempfile::tempdir().expect("tempdir"))
        .path()
}

/// Draws, loads, solves and sweeps one network; panics on a broken rule.
pub fn run(data: &[u8]) {
    let mut u = Unstructured::new(data);
    let Ok(files) = draw(&mut u) else {
        return;
    };
    let dir = folder();
    for (name, text) in &files {
        std::fs::write(dir.join(name), text).expect("write network file");
    }
    let fail = |e: String| -> ! { panic!("{e}\n{files:#?}") };
    let loaded = match load_network(dir) {
        Ok(loaded) => loaded,
        Err(diags) => {
            if let Err(e) = check_diagnostics(&diags, true) {
                fail(e);
            }
            return;
        }
    };
    let net = &loaded.network;
    if let Err(e) = check_diagnostics(&loaded.diagnostics, true).and_then(|()| check_network(net)) {
        fail(e);
    }
    if net.hydrants.is_empty() {
        return;
    }
    let criteria_path = dir.join("criteria.toml");
    std::fs::write(
        &criteria_path,
        criteria_text(match net.units {
            UnitSystem::Us => "us",
            UnitSystem::Si => "si",
        }),
    )
    .expect("write criteria");
    let Ok(criteria) = load_criteria(&criteria_path, net) else {
        return;
    };
    let Ok(hydraulics) = Hydraulics::new(net) else {
        return;
    };
    let Ok(setup) = FireFlowSetup::new(&hydraulics, &criteria) else {
        return;
    };
    let all: Vec<usize> = (0..net.hydrants.len()).collect();
    let Ok((results, _)) = sweep(&setup, &all, Some(1), &|_| {}) else {
        return;
    };
    for r in &results {
        let numbers = [
            r.available_m3s,
            r.static_kpa,
            r.residual_kpa,
            r.min_pressure_kpa,
        ];
        if numbers.iter().flatten().any(|v| !v.is_finite()) {
            fail(format!(
                "hydrant {}: a non-finite result {numbers:?}",
                r.hydrant
            ));
        }
        if r.available_m3s.is_some_and(|q| q < 0.0) {
            fail(format!("hydrant {}: a negative available flow", r.hydrant));
        }
    }
}
