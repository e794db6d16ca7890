//! Pressure-dependent demand in the solver (`Hydraulics::solve_pressure_dependent`): a closed
//! form on a single pipe, continuity and the demand relation at every junction of a looped
//! network, and the demand-driven state where every pressure reaches the service pressure.

#![allow(clippy::needless_range_loop)] // index loops over parallel arrays read more clearly here

mod netkit;

use firemain::hydraulics::{DemandRelation, Hydraulics, PressureDependence, SolveRequest};
use netkit::{bisect, hw_loss, hw_resistance, NetFiles};

/// Wagner, Shamir & Marks (J. Water Resour. Plann. Manage. 114(3), 1988; the form from
/// memory): the pressure head at which a junction delivers q of its demand d, between p_min
/// and p_serv, p = p_min + (p_serv − p_min)(q/d)², the inverse of q = d·√((p − p_min)/(p_serv −
/// p_min)). Written here, independent of firemain's smoothed relation; the tests choose
/// states whose fractions lie outside its smoothing bands (5 % of the range at each end).
fn wsm_pressure_m(q: f64, d: f64, p_min: f64, p_serv: f64) -> f64 {
    p_min + (p_serv - p_min) * (q / d).powi(2)
}

fn relation(p_min: f64, p_serv: f64) -> PressureDependence {
    let r = DemandRelation::new(p_min, p_serv);
    PressureDependence {
        customers: r,
        extra: r,
        extra_lead: None,
    }
}

#[test]
fn single_pipe_from_a_reservoir_delivers_the_closed_form_flow() {
    // Reservoir at 50 m, junction at 0 m asking 10 L/s through 1000 m of 100 mm pipe, C = 100;
    // p_min 5 m, p_serv 30 m. Demand-driven, the junction would sit near 19 m (below p_serv):
    // only part of the demand is delivered. Closed form: H − z − r q^1.852 = p(q) with the
    // relation above and r from Hazen-Williams (netkit::hw_resistance, Williams & Hazen,
    // Hydraulic Tables, 1920), solved by bisection.
    let (grade, d, p_min, p_serv) = (50.0, 0.010, 5.0, 30.0);
    let mut files = NetFiles::si_hw();
    files
        .junction("J", 0.0, d * 1000.0)
        .reservoir("R", grade)
        .pipe("P", "R", "J", 1000.0, 100.0, 100.0);
    let net = files.load();
    let r = hw_resistance(1000.0, 0.1, 100.0);
    let q_expected = bisect(0.0, d, |q| {
        grade - hw_loss(r, q) - wsm_pressure_m(q, d, p_min, p_serv)
    });
    let x = (wsm_pressure_m(q_expected, d, p_min, p_serv) - p_min) / (p_serv - p_min);
    assert!(
        (0.06..0.94).contains(&x),
        "outside the unsmoothed part: {x}"
    );

    let h = Hydraulics::new(&net).expect("prepare");
    let mut ws = h.workspace();
    let request = SolveRequest {
        demand_factor: 1.0,
        extra_demand: &[],
        fixed_head: None,
    };
    let pdd = relation(p_min, p_serv);
    let sol = h
        .solve_pressure_dependent(&mut ws, &request, &pdd, &h.cold_start())
        .expect("solve");
    let delivered = h.delivered_m3s(&request, &pdd, &sol)[0].0;
    assert!(
        (delivered - q_expected).abs() < 1e-6 * d,
        "delivered {delivered}, closed form {q_expected}"
    );
    assert!((sol.flows_m3s[0] - q_expected).abs() < 1e-6 * d);
    // The pressure is the relation's at the flow delivered.
    let p = sol.heads_m[0];
    assert!((p - wsm_pressure_m(q_expected, d, p_min, p_serv)).abs() < 1e-4);
}

/// A small looped network with a large extra demand at its far end: some junctions fall
/// between p_min and p_serv (checked), one below p_min.
fn looped() -> NetFiles {
    let mut f = NetFiles::si_hw();
    f.reservoir("R", 60.0)
        .junction("A", 10.0, 5.0)
        .junction("B", 15.0, 5.0)
        .junction("C", 20.0, 8.0)
        .junction("D", 12.0, 5.0)
        .junction("E", 25.0, 4.0)
        .pipe("P1", "R", "A", 500.0, 200.0, 110.0)
        .pipe("P2", "A", "B", 400.0, 150.0, 100.0)
        .pipe("P3", "B", "C", 400.0, 100.0, 100.0)
        .pipe("P4", "A", "D", 400.0, 150.0, 100.0)
        .pipe("P5", "D", "C", 500.0, 100.0, 100.0)
        .pipe("P6", "C", "E", 300.0, 100.0, 90.0);
    f
}

#[test]
fn continuity_and_the_relation_hold_at_every_junction() {
    // Continuity (inflow = delivered outflow) and delivered = asked × fraction(p) at every
    // junction: the equations the solve claims to satisfy (common practice, no source); the
    // fraction is the relation itself, so this checks the solve, not the relation.
    let net = looped().load();
    let c = net.node_by_id("C").expect("C");
    let extra = [(c, 0.060)];
    let h = Hydraulics::new(&net).expect("prepare");
    let mut ws = h.workspace();
    let request = SolveRequest {
        demand_factor: 1.5,
        extra_demand: &extra,
        fixed_head: None,
    };
    let (p_min, p_serv) = (7.0, 40.0);
    let pdd = relation(p_min, p_serv);
    let sol = h
        .solve_pressure_dependent(&mut ws, &request, &pdd, &h.cold_start())
        .expect("solve");
    let delivered = h.delivered_m3s(&request, &pdd, &sol);
    let mut partial = 0;
    for j in 0..net.n_junctions {
        let mut inflow = 0.0;
        for (i, l) in net.links.iter().enumerate() {
            if l.to == j {
                inflow += sol.flows_m3s[i];
            }
            if l.from == j {
                inflow -= sol.flows_m3s[i];
            }
        }
        let out = delivered[j].0 + delivered[j].1;
        assert!(
            (inflow - out).abs() < 1e-6,
            "continuity at {}: in {inflow}, out {out}",
            net.nodes[j].id
        );
        let p = sol.heads_m[j] - net.nodes[j].elevation_m;
        let asked = net.nodes[j].base_demand_m3s * 1.5;
        let fraction = if p <= p_min {
            0.0
        } else if p >= p_serv {
            1.0
        } else {
            partial += 1;
            delivered[j].0 / asked
        };
        if (0.06..0.94).contains(&((p - p_min) / (p_serv - p_min))) {
            // Outside the smoothing bands the fraction is the root itself (WSM 1988).
            let q = fraction * asked;
            assert!(
                (wsm_pressure_m(q, asked, p_min, p_serv) - p).abs() < 1e-6,
                "relation at {}",
                net.nodes[j].id
            );
        }
        assert!(delivered[j].0 <= asked + 1e-15);
    }
    assert!(
        partial >= 2,
        "the case should put junctions between p_min and p_serv"
    );
    // The far junction E (25 m up, beyond the large draw at C) gets nothing: its pressure is
    // at or below p_min (nothing is delivered there, so nothing pulls it lower).
    let e = net.node_by_id("E").expect("E");
    assert_eq!(delivered[e].0, 0.0);
}

#[test]
fn with_every_pressure_above_service_the_state_is_the_demand_driven_one() {
    // The relation delivers the whole demand at or above p_serv (module doc of
    // hydraulics::demand), so the equations are the demand-driven ones; the two solves agree
    // within their tolerance (1e-6 m on heads, Tolerance::STEADY; common practice, no source).
    let net = looped().load();
    let h = Hydraulics::new(&net).expect("prepare");
    let request = SolveRequest {
        demand_factor: 1.0,
        extra_demand: &[],
        fixed_head: None,
    };
    let dd = h
        .solve(&mut h.workspace(), &request, &h.cold_start())
        .expect("solve");
    let lowest = (0..net.n_junctions)
        .map(|j| dd.heads_m[j] - net.nodes[j].elevation_m)
        .fold(f64::INFINITY, f64::min);
    assert!(lowest > 10.0);
    let pdd = relation(0.0, lowest - 1.0);
    let sol = h
        .solve_pressure_dependent(&mut h.workspace(), &request, &pdd, &h.cold_start())
        .expect("solve");
    for j in 0..net.n_junctions {
        assert!((sol.heads_m[j] - dd.heads_m[j]).abs() < 1e-5, "head at {j}");
    }
    for (a, b) in sol.flows_m3s.iter().zip(&dd.flows_m3s) {
        assert!((a - b).abs() < 1e-7);
    }
    let delivered = h.delivered_m3s(&request, &pdd, &sol);
    for j in 0..net.n_junctions {
        assert_eq!(delivered[j].0, net.nodes[j].base_demand_m3s);
    }
}

/// A criteria set in US units with `[fire] pressure_dependent` (netkit's set plus the option).
fn pdd_criteria(
    net: &firemain::model::Network,
    minimum_psi: f64,
    service_psi: f64,
) -> firemain::criteria::Criteria {
    let text = format!(
        "name = \"pressure-dependent test criteria\"\nreference = \"tests\"\nunits = \"us\"\n\
         [service]\nmin_pressure = 40\nmax_pressure = 100\n\
         [fire]\nresidual_floor = 20\nscope = \"system\"\nsearch_cap = 8000\n\
         default_required_flow = 1000\n\
         pressure_dependent = {{ minimum = {minimum_psi}, service = {service_psi} }}\n"
    );
    let dir = tempfile::tempdir().expect("tempdir");
    let path = dir.path().join("criteria.toml");
    std::fs::write(&path, text).expect("write criteria");
    firemain::criteria::load_criteria(&path, net).unwrap_or_else(|d| panic!("{d}"))
}

/// The one hydrant's result, which must fail and carry a pressure-dependent state.
fn failing_with_a_delivered_state(
    net: &firemain::model::Network,
    criteria: &firemain::criteria::Criteria,
) -> firemain::fireflow::HydrantResult {
    let result = netkit::fire_sweep(net, criteria, 1)
        .pop()
        .expect("one hydrant");
    assert_eq!(result.outcome, firemain::fireflow::Outcome::Fail);
    assert!(result.delivered.is_some(), "a pressure-dependent state");
    result
}

/// A hydrant junction H 150 ft below reservoir R, fed by 2000 ft of 8-in pipe (C 120), with
/// `demand_gpm` of customer demand, hydrant FH requiring 3000 gpm, on `lead` when given.
fn single_pipe_hydrant(demand_gpm: f64, lead: Option<(f64, f64, Option<f64>)>) -> NetFiles {
    let mut f = NetFiles::us_hw();
    f.max_day(1.5)
        .reservoir("R", 950.0)
        .junction("H", 800.0, demand_gpm)
        .pipe("P", "R", "H", 2000.0, 8.0, 120.0);
    match lead {
        Some(lead) => f.hydrant_with_lead("FH", "H", Some(3000.0), lead),
        None => f.hydrant("FH", "H", Some(3000.0)),
    };
    f
}

#[test]
fn failing_hydrant_delivers_the_closed_form_fire_flow() {
    // A hydrant junction 150 ft below a reservoir, fed by 2000 ft of 8-in pipe (C 120), with
    // 100 gpm of customer demand (150 gpm max-day) and 3000 gpm required: it fails. With
    // pressure-dependent demands the junction's pressure p satisfies
    //   G − z − r (q_c(p) + q_f(p))^1.852 = p,
    // q_c = 150 gpm·√((p − 5 psi)/(20 − 5 psi)) (customers, criteria minimum 5, service 20) and
    // q_f = 3000 gpm·√(p/20 psi) (the fire demand, between 0 and the floor): Hazen-Williams
    // (Williams & Hazen 1920, netkit::hw_resistance) and the Wagner-Shamir-Marks relation
    // (1988, from memory), solved by bisection on p.
    use netkit::{KPA_PER_M, KPA_PER_PSI, M3S_PER_GPM, M_PER_FT, M_PER_IN};
    let (grade_ft, z_ft) = (950.0, 800.0);
    let net = single_pipe_hydrant(100.0, None).load();
    let criteria = pdd_criteria(&net, 5.0, 20.0);
    let psi_m = KPA_PER_PSI / KPA_PER_M;
    let r = hw_resistance(2000.0 * M_PER_FT, 8.0 * M_PER_IN, 120.0);
    let (dc, qr) = (150.0 * M3S_PER_GPM, 3000.0 * M3S_PER_GPM);
    let (pc_min, pc_serv, floor) = (5.0 * psi_m, 20.0 * psi_m, 20.0 * psi_m);
    let qc = |p: f64| dc * ((p - pc_min) / (pc_serv - pc_min)).sqrt();
    let qf = |p: f64| qr * (p / floor).sqrt();
    let head = (grade_ft - z_ft) * M_PER_FT;
    let p = bisect(pc_min + 1e-9, floor, |p| {
        head - hw_loss(r, qc(p) + qf(p)) - p
    });
    let (xc, xf) = ((p - pc_min) / (pc_serv - pc_min), p / floor);
    assert!(
        (0.06..0.94).contains(&xc) && (0.06..0.94).contains(&xf),
        "{xc} {xf}"
    );

    let result = failing_with_a_delivered_state(&net, &criteria);
    let d = result.delivered.as_ref().expect("checked");
    // Tolerance: the search's solves converge heads to 2e-4 m (Tolerance::SEARCH); the flows
    // then agree to well under 0.1 %.
    assert!(
        (d.fire_flow_m3s - qf(p)).abs() < 1e-3 * qf(p),
        "fire flow delivered {} gpm, closed form {} gpm",
        d.fire_flow_m3s / M3S_PER_GPM,
        qf(p) / M3S_PER_GPM
    );
    assert!((d.hydrant_kpa - p * KPA_PER_M).abs() < 0.05);
    assert_eq!(d.short.len(), 1);
    assert!((d.customer_shortfall_m3s - (dc - qc(p))).abs() < 1e-3 * dc);

    // Demand-driven, the pressures would fall below the relation's minimum (the residual is
    // negative, below). In the pressure-dependent state no junction may: under the
    // Wagner-Shamir-Marks relation (Wagner, Shamir & Marks 1988, J. Water Resour. Plan. Manage.
    // 114(3)) a junction at or below p_min delivers nothing, so nothing draws its pressure
    // lower. The network's one junction is the hydrant's; every pressure the state reports
    // (the hydrant's, the lowest customer pressure, each short junction's) is held to
    // p_min − 0.01 kPa. Tolerance: heads converge to 2e-4 m (Tolerance::SEARCH), about
    // 0.002 kPa; 0.01 kPa leaves room for the rounding of the conversion.
    let p_min_kpa = pc_min * KPA_PER_M;
    let tol_kpa = 0.01;
    assert!(d.hydrant_kpa >= p_min_kpa - tol_kpa, "{}", d.hydrant_kpa);
    let (lowest_at, lowest_kpa) = d.min_customer_kpa.expect("a customer junction");
    assert!(lowest_kpa >= p_min_kpa - tol_kpa, "{lowest_kpa}");
    let h = net.node_by_id("H").expect("junction H");
    assert_eq!(lowest_at, h);
    // The junction asked for more than it gets is reported, with what it is short: asked the
    // max-day demand dc, delivered q_c(p) of the same relation (Wagner, Shamir & Marks 1988),
    // short dc − q_c(p) (m³/s, a volume per second). Tolerance as for the flows above: 0.1 %.
    let short = &d.short[0];
    assert_eq!(short.junction, h);
    assert!(
        short.pressure_kpa >= p_min_kpa - tol_kpa,
        "{}",
        short.pressure_kpa
    );
    assert!((short.pressure_kpa - p * KPA_PER_M).abs() < 0.05);
    assert!(
        (short.asked_m3s - dc).abs() < 1e-9 * dc,
        "{}",
        short.asked_m3s
    );
    assert!(
        (short.delivered_m3s - qc(p)).abs() < 1e-3 * dc,
        "delivered {} gpm, closed form {} gpm",
        short.delivered_m3s / M3S_PER_GPM,
        qc(p) / M3S_PER_GPM
    );
    let volume_short = short.asked_m3s - short.delivered_m3s;
    assert!(volume_short > 0.0);
    assert!((volume_short - (dc - qc(p))).abs() < 1e-3 * dc);
    // The demand-driven figures are unchanged beside it: the residual at 3000 gpm is far below
    // zero (the impossible number the pressure-dependent state replaces).
    assert!(result.residual_kpa.expect("residual") < 0.0);
}

#[test]
fn a_failing_hydrant_behind_a_lead_delivers_less_by_its_closed_form() {
    // As `failing_hydrant_delivers_the_closed_form_fire_flow`, with no customer demand and a
    // lead of 50 ft of 6-in pipe (C 100) to the hydrant: the fire demand follows the relation
    // at the hydrant, after the lead, so with the junction's pressure p the fire flow solves
    //   q_f = 3000 gpm·√((p − r_L q_f^1.852)/20 psi),
    // and p = G − z − r q_f^1.852: both Hazen-Williams (Williams & Hazen 1920,
    // netkit::hw_resistance) with the Wagner-Shamir-Marks relation (1988, from memory),
    // solved by nested bisection. The hydrant's own pressure is p − r_L q_f^1.852.
    use netkit::{KPA_PER_M, KPA_PER_PSI, M3S_PER_GPM, M_PER_FT, M_PER_IN};
    let (grade_ft, z_ft) = (950.0, 800.0);
    let net = single_pipe_hydrant(0.0, Some((50.0, 6.0, Some(100.0)))).load();
    let criteria = pdd_criteria(&net, 5.0, 20.0);
    let floor = 20.0 * KPA_PER_PSI / KPA_PER_M;
    let r = hw_resistance(2000.0 * M_PER_FT, 8.0 * M_PER_IN, 120.0);
    let r_lead = hw_resistance(50.0 * M_PER_FT, 6.0 * M_PER_IN, 100.0);
    let qr = 3000.0 * M3S_PER_GPM;
    let fire_at = |p: f64| {
        bisect(0.0, qr, |q| {
            qr * ((p - hw_loss(r_lead, q)) / floor).clamp(0.0, 1.0).sqrt() - q
        })
    };
    let head = (grade_ft - z_ft) * M_PER_FT;
    let p = bisect(1e-6, head, |p| head - hw_loss(r, fire_at(p)) - p);
    let q = fire_at(p);
    let outlet = p - hw_loss(r_lead, q);
    assert!(
        (0.06..0.94).contains(&(outlet / floor)),
        "{}",
        outlet / floor
    );
    let without_lead = qr * (p / floor).sqrt();
    assert!(q < 0.97 * without_lead, "the lead matters here");

    let result = failing_with_a_delivered_state(&net, &criteria);
    let d = result.delivered.as_ref().expect("checked");
    // Tolerance as in the test above: heads to 2e-4 m, flows to well under 0.1 %.
    assert!(
        (d.fire_flow_m3s - q).abs() < 1e-3 * q,
        "fire flow delivered {} gpm, closed form {} gpm",
        d.fire_flow_m3s / M3S_PER_GPM,
        q / M3S_PER_GPM
    );
    assert!(
        (d.hydrant_kpa - outlet * KPA_PER_M).abs() < 0.05,
        "{} vs {}",
        d.hydrant_kpa,
        outlet * KPA_PER_M
    );
}

#[test]
fn reports_say_which_mode_produced_each_figure() {
    // The demo town (invented data) checked with `[fire] pressure_dependent`: invariants only,
    // no check values. Every failing hydrant has the pressure-dependent columns filled, with a
    // delivered fire flow at most the required one and finite figures; passing hydrants have
    // them empty; report.json marks the mode; report.md has the section and says the weak
    // mains come from that state; without the option the files have none of it (the
    // demand-driven files are compared byte for byte with docs/outputs.md by doc_examples.rs).
    let dir = tempfile::tempdir().expect("tempdir");
    let criteria = std::fs::read_to_string("criteria/cedar-county-demo.toml").expect("criteria");
    let criteria = criteria.replace(
        "default_required_flow = 1000",
        "default_required_flow = 1000\npressure_dependent = { minimum = 5, service = 20 }",
    );
    let methods = dir.path().join("methods");
    std::fs::create_dir_all(&methods).expect("mkdir");
    for entry in std::fs::read_dir("criteria/methods")
        .expect("methods")
        .flatten()
    {
        std::fs::copy(entry.path(), methods.join(entry.file_name())).expect("copy");
    }
    let path = dir.path().join("criteria.toml");
    std::fs::write(&path, criteria).expect("write");
    let out = dir.path().join("out");
    let status = std::process::Command::new(env!("CARGO_BIN_EXE_firemain"))
        .args(["check", "examples/demo-town", "--criteria"])
        .arg(&path)
        .arg("--out")
        .arg(&out)
        .arg("--quiet")
        .status()
        .expect("run");
    assert_eq!(status.code(), Some(1), "the demo has failing hydrants");
    let csv = std::fs::read_to_string(out.join("fireflow.csv")).expect("fireflow.csv");
    let mut lines = csv.lines();
    let header: Vec<&str> = lines.next().expect("header").split(',').collect();
    let col = |name: &str| header.iter().position(|h| *h == name).expect(name);
    let (required, result) = (col("required_flow_gpm"), col("result"));
    let delivered = col("pressure_dependent_fire_flow_delivered_gpm");
    let pressure = col("pressure_dependent_hydrant_pressure_psi");
    let mut failing = 0;
    for line in lines {
        // Notes may hold commas inside quotes; the demo's failing rows have none.
        let cells: Vec<&str> = line.split(',').collect();
        if cells.get(result) == Some(&"fail") && !line.contains('"') {
            failing += 1;
            let q: f64 = cells[delivered].parse().expect("delivered flow");
            let r: f64 = cells[required].parse().expect("required flow");
            let p: f64 = cells[pressure].parse().expect("pressure");
            assert!(q.is_finite() && p.is_finite() && q > 0.0 && q <= r + 1e-9);
        } else if cells.get(result) == Some(&"pass") {
            assert_eq!(cells[delivered], "");
        }
    }
    assert!(failing > 0);
    let json = std::fs::read_to_string(out.join("report.json")).expect("report.json");
    assert!(json.contains("\"mode\": \"pressure-dependent\""));
    assert!(!json.contains("NaN"));
    let md = std::fs::read_to_string(out.join("report.md")).expect("report.md");
    assert!(md.contains("## Failing hydrants as the system would deliver"));
    assert!(md.contains("with pressure-dependent demands"));
}
