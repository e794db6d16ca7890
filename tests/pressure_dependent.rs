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
