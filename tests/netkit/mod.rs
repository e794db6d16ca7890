//! Helpers for the analytic and property tests: small networks and criteria sets written as
//! folders of our CSV/TOML files in a temporary directory, plus independent closed-form
//! pieces (head-loss laws, Colebrook, bisection) that the tests compare firemain against.
#![allow(dead_code)]

use std::f64::consts::PI;
use std::fmt::Write as _;
use std::path::Path;

use firemain::criteria::{load_criteria, Criteria};
use firemain::fireflow::{sweep, FireFlowSetup, HydrantResult};
use firemain::hydraulics::{Hydraulics, Solution, SolveError, SolveRequest};
use firemain::model::{load_network, Network};

/// Standard gravity, m/s² (CGPM 1901, exact by definition); the project's g
/// (docs/fire-flow-method.md §1).
pub const G: f64 = 9.80665;
/// Unit weight of water, kPa per m of head: ρ g with ρ = 1000 kg/m³ (project convention,
/// docs/network-format.md §3 Units).
pub const KPA_PER_M: f64 = 9.80665;
/// Kinematic viscosity of water, m²/s (project convention, docs/network-format.md §8 pipes.csv).
pub const NU: f64 = 1.0e-6;

// Unit definitions, written here rather than taken from `firemain::units` so that a wrong
// constant there would show: 1 ft = 0.3048 m and 1 in = 25.4 mm (international yard and pound
// agreement, 1959); 1 US gal = 231 in³ = 3.785411784 L (same definitions); 1 psi =
// 6.894757 kPa (NFPA 24 (2019) Annex D, Table D.1.4).
pub const M_PER_FT: f64 = 0.3048;
pub const M_PER_IN: f64 = 0.0254;
pub const M3S_PER_GPM: f64 = 3.785411784e-3 / 60.0;
pub const KPA_PER_PSI: f64 = 6.894757;

/// The rows of a network folder, written in `units` ("si" or "us"); numbers are written with
/// Rust's shortest round-trip formatting, so the files carry exactly the f64 values given.
#[derive(Clone, Debug)]
pub struct NetFiles {
    pub units: &'static str,
    pub headloss: &'static str,
    pub max_day_factor: f64,
    pub junctions: Vec<String>,
    pub sources: Vec<String>,
    pub pipes: Vec<String>,
    pub pumps: Vec<String>,
    pub valves: Vec<String>,
    pub hydrants: Vec<String>,
    /// Each hydrant's lead as "length,diameter,roughness" (empty cells for none); written
    /// only when some hydrant has one.
    pub leads: Vec<String>,
}

impl NetFiles {
    pub fn new(units: &'static str, headloss: &'static str) -> Self {
        NetFiles {
            units,
            headloss,
            max_day_factor: 1.0,
            junctions: Vec::new(),
            sources: Vec::new(),
            pipes: Vec::new(),
            pumps: Vec::new(),
            valves: Vec::new(),
            hydrants: Vec::new(),
            leads: Vec::new(),
        }
    }

    /// SI units, Hazen-Williams.
    pub fn si_hw() -> Self {
        Self::new("si", "hazen-williams")
    }

    /// US units, Hazen-Williams.
    pub fn us_hw() -> Self {
        Self::new("us", "hazen-williams")
    }

    pub fn max_day(&mut self, factor: f64) -> &mut Self {
        self.max_day_factor = factor;
        self
    }

    pub fn junction(&mut self, id: &str, elevation: f64, demand: f64) -> &mut Self {
        self.junctions.push(format!("{id},{elevation},{demand},"));
        self
    }

    /// A junction of pressure zone `zone`.
    pub fn junction_in_zone(
        &mut self,
        id: &str,
        elevation: f64,
        demand: f64,
        zone: &str,
    ) -> &mut Self {
        self.junctions
            .push(format!("{id},{elevation},{demand},{zone}"));
        self
    }

    pub fn reservoir(&mut self, id: &str, grade: f64) -> &mut Self {
        self.sources.push(format!("{id},reservoir,{grade}"));
        self
    }

    pub fn pipe(
        &mut self,
        id: &str,
        from: &str,
        to: &str,
        length: f64,
        diameter: f64,
        roughness: f64,
    ) -> &mut Self {
        self.pipes.push(format!(
            "{id},{from},{to},{length},{diameter},{roughness},,"
        ));
        self
    }

    /// A check-valve pipe: flow only from `from` to `to`.
    pub fn check_pipe(
        &mut self,
        id: &str,
        from: &str,
        to: &str,
        length: f64,
        diameter: f64,
        roughness: f64,
    ) -> &mut Self {
        self.pipes.push(format!(
            "{id},{from},{to},{length},{diameter},{roughness},,check"
        ));
        self
    }

    /// A pump through its three curve points (shutoff head, design point, runout point).
    #[allow(clippy::too_many_arguments)]
    pub fn pump(
        &mut self,
        id: &str,
        from: &str,
        to: &str,
        shutoff_head: f64,
        design: (f64, f64),
        runout: (f64, f64),
        speed: f64,
    ) -> &mut Self {
        self.pumps.push(format!(
            "{id},{from},{to},{shutoff_head},{},{},{},{},{speed},on",
            design.0, design.1, runout.0, runout.1
        ));
        self
    }

    /// An active control valve (`kind` prv, psv, fcv or throttle).
    #[allow(clippy::too_many_arguments)]
    pub fn valve(
        &mut self,
        id: &str,
        from: &str,
        to: &str,
        kind: &str,
        diameter: f64,
        setting: f64,
        minor_loss: f64,
    ) -> &mut Self {
        self.valves.push(format!(
            "{id},{from},{to},{kind},{diameter},{setting},{minor_loss},active"
        ));
        self
    }

    pub fn hydrant(&mut self, id: &str, junction: &str, required_flow: Option<f64>) -> &mut Self {
        let q = required_flow.map(|q| q.to_string()).unwrap_or_default();
        self.hydrants.push(format!("{id},{junction},{q}"));
        self.leads.push(",,".into());
        self
    }

    /// A hydrant with a lead from its junction (`lateral_length`, `lateral_diameter`,
    /// `lateral_roughness` in the network's units; an empty roughness takes the default).
    pub fn hydrant_with_lead(
        &mut self,
        id: &str,
        junction: &str,
        required_flow: Option<f64>,
        lead: (f64, f64, Option<f64>),
    ) -> &mut Self {
        self.hydrant(id, junction, required_flow);
        let roughness = lead.2.map(|c| c.to_string()).unwrap_or_default();
        if let Some(last) = self.leads.last_mut() {
            *last = format!("{},{},{roughness}", lead.0, lead.1);
        }
        self
    }

    /// Writes the folder's files into `dir`.
    pub fn write_to(&self, dir: &Path) {
        let model = format!(
            "name = \"analytic test network\"\nunits = \"{}\"\nheadloss = \"{}\"\n[demand]\nmax_day_factor = {}\npeak_hour_factor = {}\n",
            self.units,
            self.headloss,
            self.max_day_factor,
            self.max_day_factor.max(2.5),
        );
        std::fs::write(dir.join("model.toml"), model).expect("write model.toml");
        let tables: [(&str, &str, &[String]); 5] = [
            ("junctions.csv", "id,elevation,demand,zone", &self.junctions),
            ("sources.csv", "id,kind,grade", &self.sources),
            (
                "pipes.csv",
                "id,from,to,length,diameter,roughness,minor_loss,status",
                &self.pipes,
            ),
            (
                "pumps.csv",
                "id,from,to,shutoff_head,design_flow,design_head,runout_flow,runout_head,speed,status",
                &self.pumps,
            ),
            (
                "valves.csv",
                "id,from,to,kind,diameter,setting,minor_loss,status",
                &self.valves,
            ),
        ];
        let with_leads = self.leads.iter().any(|l| l != ",,");
        let hydrants: Vec<String> = if with_leads {
            self.hydrants
                .iter()
                .zip(&self.leads)
                .map(|(h, l)| format!("{h},{l}"))
                .collect()
        } else {
            self.hydrants.clone()
        };
        let hydrant_header = if with_leads {
            "id,junction,required_flow,lateral_length,lateral_diameter,lateral_roughness"
        } else {
            "id,junction,required_flow"
        };
        let tables =
            tables
                .into_iter()
                .chain([("hydrants.csv", hydrant_header, hydrants.as_slice())]);
        for (file, header, rows) in tables {
            if rows.is_empty() && !matches!(file, "junctions.csv" | "sources.csv" | "pipes.csv") {
                continue;
            }
            let mut text = format!("{header}\n");
            for row in rows {
                writeln!(text, "{row}").unwrap();
            }
            std::fs::write(dir.join(file), text).expect("write table");
        }
    }

    /// Writes the folder to a temporary directory and loads it.
    pub fn load(&self) -> Network {
        let dir = tempfile::tempdir().expect("tempdir");
        self.write_to(dir.path());
        load_dir(dir.path())
    }
}

/// Loads a network folder, panicking with the diagnostics on error.
pub fn load_dir(dir: &Path) -> Network {
    match load_network(dir) {
        Ok(loaded) => loaded.network,
        Err(d) => panic!("{} did not load:\n{d}", dir.display()),
    }
}

/// A criteria set in the network's units: `floor` residual pressure (psi | kPa) at every
/// junction, search cap and default required flow (gpm | L/s), no velocity limit.
pub fn criteria(net: &Network, floor: f64, cap: f64, default_required: f64) -> Criteria {
    criteria_with_limits(net, floor, cap, default_required, "system", &[], 0.0)
}

/// As [`criteria`], with the `scope` ("system" | "zone"), the `exempt` junctions and a velocity
/// limit (ft/s | m/s; 0 for none) given.
pub fn criteria_with_limits(
    net: &Network,
    floor: f64,
    cap: f64,
    default_required: f64,
    scope: &str,
    exempt: &[&str],
    max_velocity: f64,
) -> Criteria {
    let exempt: Vec<String> = exempt.iter().map(|e| format!("\"{e}\"")).collect();
    let exempt = exempt.join(", ");
    let (units, service_min, service_max) = match net.units {
        firemain::units::UnitSystem::Us => ("us", 40.0, 100.0),
        firemain::units::UnitSystem::Si => ("si", 280.0, 700.0),
    };
    let text = format!(
        "name = \"analytic test criteria\"\nreference = \"tests\"\nunits = \"{units}\"\n\
         [service]\nmin_pressure = {service_min}\nmax_pressure = {service_max}\n\
         [fire]\nresidual_floor = {floor}\nscope = \"{scope}\"\nexempt = [{exempt}]\nmax_velocity = {max_velocity}\n\
         search_cap = {cap}\ndefault_required_flow = {default_required}\n"
    );
    let dir = tempfile::tempdir().expect("tempdir");
    let path = dir.path().join("criteria.toml");
    std::fs::write(&path, text).expect("write criteria");
    match load_criteria(&path, net) {
        Ok(c) => c,
        Err(d) => panic!("criteria did not load:\n{d}"),
    }
}

/// Solves `net` at `demand_factor` x average-day demand plus `extra` withdrawals, cold start.
pub fn try_solve(
    net: &Network,
    demand_factor: f64,
    extra: &[(usize, f64)],
) -> Result<Solution, SolveError> {
    let h = Hydraulics::new(net)?;
    let mut ws = h.workspace();
    let request = SolveRequest {
        demand_factor,
        extra_demand: extra,
        fixed_head: None,
    };
    h.solve(&mut ws, &request, &h.cold_start())
}

/// As [`try_solve`], panicking on a solver error.
pub fn solve(net: &Network, demand_factor: f64, extra: &[(usize, f64)]) -> Solution {
    try_solve(net, demand_factor, extra).unwrap_or_else(|e| panic!("solve failed: {e}"))
}

/// Runs the fire-flow sweep over every hydrant with `threads` workers.
pub fn fire_sweep(net: &Network, criteria: &Criteria, threads: usize) -> Vec<HydrantResult> {
    let hydraulics = Hydraulics::new(net).expect("prepare");
    let setup = FireFlowSetup::new(&hydraulics, criteria).expect("max-day solve");
    let all: Vec<usize> = (0..net.hydrants.len()).collect();
    sweep(&setup, &all, Some(threads), &|_| {})
        .expect("sweep")
        .0
}

/// Inflow minus withdrawal at every junction, m³/s (continuity: all zero).
pub fn junction_imbalances(
    net: &Network,
    sol: &Solution,
    demand_factor: f64,
    extra: &[(usize, f64)],
) -> Vec<f64> {
    let mut out: Vec<f64> = net
        .junctions()
        .iter()
        .map(|n| -n.base_demand_m3s * demand_factor)
        .collect();
    for &(j, q) in extra {
        out[j] -= q;
    }
    for (i, l) in net.links.iter().enumerate() {
        if l.from == l.to {
            continue;
        }
        if l.to < net.n_junctions {
            out[l.to] += sol.flows_m3s[i];
        }
        if l.from < net.n_junctions {
            out[l.from] -= sol.flows_m3s[i];
        }
    }
    out
}

/// Resistance r of h = r Q^1.852 (Hazen-Williams, SI form h = 10.67 L Q^1.852 / (C^1.852
/// D^4.8704), h, L, D in m, Q in m³/s; from the velocity form of Williams & Hazen, Hydraulic
/// Tables, 1920; the constants are the project's, docs/network-format.md §8 pipes.csv).
pub fn hw_resistance(length_m: f64, diameter_m: f64, c: f64) -> f64 {
    10.67 * length_m / (c.powf(1.852) * diameter_m.powf(4.8704))
}

/// Hazen-Williams loss r |Q|^0.852 Q, m.
pub fn hw_loss(r: f64, q: f64) -> f64 {
    r * q.abs().powf(0.852) * q
}

/// Minor loss K v²/(2g) with v = Q/(π D²/4), signed with the flow, m.
pub fn minor_loss(k: f64, diameter_m: f64, q: f64) -> f64 {
    let area = PI * diameter_m * diameter_m / 4.0;
    let v = q / area;
    k * v * v.abs() / (2.0 * G)
}

/// Darcy friction factor from the Colebrook-White equation
/// 1/√f = −2 log10(ε/(3.7 D) + 2.51/(Re √f)) (C. F. Colebrook, J. ICE 11(4), 1939), by plain
/// fixed-point iteration on x = 1/√f (a contraction for Re ≥ 4000), independent of firemain's
/// Newton iteration.
pub fn colebrook_f(re: f64, relative_roughness: f64) -> f64 {
    let mut x: f64 = 8.0;
    for _ in 0..200 {
        let next = -2.0 * (relative_roughness / 3.7 + 2.51 * x / re).log10();
        if (next - x).abs() <= 1e-15 * x {
            x = next;
            break;
        }
        x = next;
    }
    1.0 / (x * x)
}

/// Root of `f` in [lo, hi] by bisection (f(lo) and f(hi) of opposite signs), to the last bit.
pub fn bisect(mut lo: f64, mut hi: f64, f: impl Fn(f64) -> f64) -> f64 {
    let f_lo = f(lo);
    assert!(
        f_lo * f(hi) <= 0.0,
        "bisection bracket [{lo}, {hi}] does not hold a sign change"
    );
    for _ in 0..200 {
        let mid = 0.5 * (lo + hi);
        if mid <= lo || mid >= hi {
            break;
        }
        if (f(mid) > 0.0) == (f_lo > 0.0) {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    0.5 * (lo + hi)
}

/// Flow (m³/s, signed) through a Hazen-Williams pipe of resistance r under head difference dh.
pub fn hw_flow(r: f64, dh: f64) -> f64 {
    dh.signum() * (dh.abs() / r).powf(1.0 / 1.852)
}

/// A proptest configuration of `cases` cases from the fixed `seed`, unless `PROPTEST_CASES` /
/// `PROPTEST_RNG_SEED` say otherwise: the suite stays fast and repeatable, and a longer or
/// other run is one environment variable away.
pub fn seeded_config(cases: u32, seed: u64) -> proptest::test_runner::Config {
    use proptest::test_runner::{Config, RngSeed};
    let from_env = Config::default();
    Config {
        cases: if std::env::var_os("PROPTEST_CASES").is_some() {
            from_env.cases
        } else {
            cases
        },
        rng_seed: match from_env.rng_seed {
            RngSeed::Random => RngSeed::Fixed(seed),
            fixed => fixed,
        },
        ..from_env
    }
}
