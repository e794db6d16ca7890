//! A start for a fire-flow solve from a nonlinear solve of the hydrant's surroundings.
//!
//! A fire flow changes the network's state strongly only near the hydrant: there the max-day
//! state carries little flow, its linearization is far from the fire-flow state, and Newton's
//! first steps from the max-day state's linear response overshoot by metres. Solving the
//! junctions nearest the hydrant alone, with every other node held at its head in the linear
//! response, is a small nonlinear problem whose answer is close to the whole network's near the
//! hydrant (measurements in docs/performance.md). It only gives a start: the whole network's
//! solve from it decides every figure.

use super::{Hydraulics, Role, Solution};
use crate::hydraulics::factor::{
    OrderedPattern, SparseCholesky, SpdFactorization, SymbolicAnalysis,
};

/// Newton steps allowed in the region's solve.
const REGION_ITERATIONS: u32 = 12;
/// The region's solve stops when no head moves by more than this, m: a start needs no more.
const REGION_TOLERANCE_M: f64 = 0.01;
/// Marks a node outside the region.
const OUTSIDE: u32 = u32::MAX;

/// One link of the region: its index and the region indices of its ends (`OUTSIDE` for a
/// node held at its head).
struct RegionLink {
    link: usize,
    from: u32,
    to: u32,
}

/// The junctions nearest a hydrant with their links and Newton system, built once for a
/// hydrant and solved for each start its search asks for (the required flow, then the held
/// start): the breadth-first search, the links and the system's ordering and symbolic analysis
/// are the same for both.
pub struct Region {
    /// The region's junctions, the hydrant's first.
    nodes: Vec<usize>,
    links: Vec<RegionLink>,
    system: RegionSystem,
}

impl Hydraulics<'_> {
    /// The `size` junctions nearest to junction `at` (breadth first over the links that
    /// conduct in `start`), their links and system; `None` when `at` is not a junction, `size`
    /// is 0, the region holds a link whose state is ruled by a control (a pump, a check valve,
    /// a regulating valve: only the whole network's solve applies those), or its pattern
    /// cannot be analysed.
    pub fn region(&self, start: &Solution, at: usize, size: usize) -> Option<Region> {
        let (nodes, local) = self.region_around(start, at, size)?;
        let links = self.region_links(start, &nodes, &local)?;
        let system = RegionSystem::new(&nodes, &links, &self.row_of)?;
        Some(Region {
            nodes,
            links,
            system,
        })
    }

    /// Replaces the heads and flows of `start` around junction `at` by a solve of the `size`
    /// junctions nearest to it (see [`Hydraulics::region`]) with every other node held at its
    /// head in `start`; the junctions draw their demand at `demand_factor` plus `extra` (m³/s)
    /// at `at`. Returns whether it did: `start` is left as it was when there is no such region
    /// or when its Newton iteration does not settle within its steps.
    pub fn refine_around(
        &self,
        start: &mut Solution,
        at: usize,
        demand_factor: f64,
        extra: f64,
        size: usize,
    ) -> bool {
        self.region(start, at, size)
            .is_some_and(|mut region| self.refine_in(&mut region, start, demand_factor, extra))
    }

    /// [`Hydraulics::refine_around`] on a region already built around its hydrant.
    pub fn refine_in(
        &self,
        region: &mut Region,
        start: &mut Solution,
        demand_factor: f64,
        extra: f64,
    ) -> bool {
        let at = region.nodes[0];
        let demand: Vec<f64> = region
            .nodes
            .iter()
            .map(|&j| self.base_demand_m3s[j] * demand_factor + if j == at { extra } else { 0.0 })
            .collect();
        self.solve_region(start, region, &demand, false)
    }

    /// [`Hydraulics::refine_around`] with junction `at` held at `held_head` (m) instead of
    /// drawing a given flow, its other junctions drawing their demand at `demand_factor`:
    /// returns the flow `at` then draws beyond its own demand, m³/s, or `None` (with `start`
    /// as it was) where the region cannot be solved or draws nothing.
    pub fn refine_held_around(
        &self,
        start: &mut Solution,
        at: usize,
        demand_factor: f64,
        held_head: f64,
        size: usize,
    ) -> Option<f64> {
        let mut region = self.region(start, at, size)?;
        self.refine_held_in(&mut region, start, demand_factor, held_head)
    }

    /// [`Hydraulics::refine_held_around`] on a region already built around its hydrant: the
    /// hydrant's junction is pinned at `held_head` (its row the identity, its links entering
    /// only their other end's row), which is the region without it, that junction held at
    /// its head like the nodes outside.
    pub fn refine_held_in(
        &self,
        region: &mut Region,
        start: &mut Solution,
        demand_factor: f64,
        held_head: f64,
    ) -> Option<f64> {
        let at = region.nodes[0];
        let demand: Vec<f64> = region
            .nodes
            .iter()
            .map(|&j| self.base_demand_m3s[j] * demand_factor)
            .collect();
        let mut trial = start.clone();
        trial.heads_m[at] = held_head;
        if !self.solve_region(&mut trial, region, &demand, true) {
            return None;
        }
        let drawn =
            self.net_inflow(at, &trial.flows_m3s) - self.base_demand_m3s[at] * demand_factor;
        (drawn > 0.0 && drawn.is_finite()).then(|| {
            *start = trial;
            drawn
        })
    }

    /// The region: up to `size` junctions, breadth first from `at`, and each node's index in
    /// it (`OUTSIDE` elsewhere); `None` when `at` is not a junction or `size` is 0. Controlled
    /// links are refused afterwards, by [`Hydraulics::region_links`].
    fn region_around(
        &self,
        start: &Solution,
        at: usize,
        size: usize,
    ) -> Option<(Vec<usize>, Vec<u32>)> {
        let nj = self.n_junctions;
        if at >= nj || size == 0 {
            return None;
        }
        let mut local = vec![OUTSIDE; self.net.nodes.len()];
        let mut region = Vec::with_capacity(size);
        local[at] = 0;
        region.push(at);
        let mut next = 0;
        while next < region.len() && region.len() < size {
            let n = region[next];
            next += 1;
            for &i in self.links_at(n) {
                let (a, b) = self.ends[i];
                let m = if a == n { b } else { a };
                if m < nj
                    && local[m] == OUTSIDE
                    && start.states[i].conducts()
                    && region.len() < size
                {
                    local[m] = region.len() as u32;
                    region.push(m);
                }
            }
        }
        Some((region, local))
    }

    /// The conducting links with an end in the region, once each; `None` when one is
    /// controlled.
    fn region_links(
        &self,
        start: &Solution,
        region: &[usize],
        local: &[u32],
    ) -> Option<Vec<RegionLink>> {
        let mut links = Vec::new();
        for (k, &j) in region.iter().enumerate() {
            for &i in self.links_at(j) {
                if self.roles[i] != Role::Plain {
                    return None;
                }
                let (a, b) = self.ends[i];
                if a == b || !start.states[i].conducts() {
                    continue;
                }
                let other = if a == j { b } else { a };
                // A link inside the region is taken from the end with the smaller index.
                if local[other] != OUTSIDE && (local[other] as usize) < k {
                    continue;
                }
                links.push(RegionLink {
                    link: i,
                    from: local[a],
                    to: local[b],
                });
            }
        }
        Some(links)
    }

    /// Newton's method (the global gradient algorithm of Todini & Pilati, 1988) on the region
    /// alone, its hydrant's junction pinned at its head in `start` when `pin_hydrant`; writes
    /// its heads and flows into `start` when it settles.
    fn solve_region(
        &self,
        start: &mut Solution,
        region: &mut Region,
        demand: &[f64],
        pin_hydrant: bool,
    ) -> bool {
        let Region {
            nodes,
            links,
            system,
        } = region;
        system.load(start, nodes, links);
        system.pinned = pin_hydrant.then_some(0);
        for _ in 0..REGION_ITERATIONS {
            system.assemble(self, start, links, demand);
            let Some(largest) = system.step(links) else {
                return false;
            };
            if largest < REGION_TOLERANCE_M {
                for (k, &j) in nodes.iter().enumerate() {
                    start.heads_m[j] = system.heads[k];
                }
                for (p, l) in links.iter().enumerate() {
                    start.flows_m3s[l.link] = system.flows[p];
                }
                return true;
            }
        }
        false
    }
}

/// Where one link of the region enters its system (see [`RegionSystem`]).
struct LinkPlaces {
    rows: [u32; 2],
    diagonals: [u32; 2],
    joining: u32,
}

/// The region's Newton system: its ordered pattern and factorization, and per step the matrix
/// values, right-hand side, each link's conductance and known flow change, and the iterate.
struct RegionSystem {
    pattern: OrderedPattern,
    /// Per link, the ordered rows of its ends and the slots of their diagonal entries and of
    /// the entry joining them (`OUTSIDE` where an end, or the entry, is not in the system):
    /// found once, used at every step.
    places: Vec<LinkPlaces>,
    factor: SparseCholesky,
    values: Vec<f64>,
    rhs: Vec<f64>,
    conductance: Vec<f64>,
    known: Vec<f64>,
    heads: Vec<f64>,
    flows: Vec<f64>,
    /// A junction of the region held at its head (its row the identity, its step zero).
    pinned: Option<u32>,
}

impl RegionSystem {
    /// The system of `region` and its `links`, ordered as the whole network's matrix
    /// (`row_of`); `None` when its pattern cannot be analysed. [`RegionSystem::load`] takes
    /// an iterate.
    fn new(region: &[usize], links: &[RegionLink], row_of: &[usize]) -> Option<Self> {
        let n = region.len();
        let pairs: Vec<(usize, usize)> = links
            .iter()
            .filter(|l| l.from != OUTSIDE && l.to != OUTSIDE)
            .map(|l| (l.from as usize, l.to as usize))
            .collect();
        // The whole network's fill-reducing order, restricted to the region.
        let rank: Vec<usize> = region.iter().map(|&j| row_of[j]).collect();
        let pattern = OrderedPattern::in_rank_order(n, &pairs, &rank);
        let analysis = SymbolicAnalysis::new(&pattern).ok()?;
        // A region index's place under `of`, or `OUTSIDE` for a node held at its head.
        let place = |end: u32, of: fn(&OrderedPattern, usize) -> usize| -> u32 {
            if end == OUTSIDE {
                OUTSIDE
            } else {
                of(&pattern, end as usize) as u32
            }
        };
        let places = links
            .iter()
            .map(|l| LinkPlaces {
                rows: [l.from, l.to].map(|end| place(end, OrderedPattern::position)),
                diagonals: [l.from, l.to].map(|end| place(end, OrderedPattern::diagonal_slot)),
                joining: if l.from != OUTSIDE && l.to != OUTSIDE {
                    pattern
                        .slot(l.from as usize, l.to as usize)
                        .map_or(OUTSIDE, |s| s as u32)
                } else {
                    OUTSIDE
                },
            })
            .collect();
        Some(RegionSystem {
            places,
            factor: SparseCholesky::new(analysis),
            values: vec![0.0; pattern.nnz()],
            rhs: vec![0.0; n],
            conductance: vec![0.0; links.len()],
            known: vec![0.0; links.len()],
            heads: vec![0.0; n],
            flows: vec![0.0; links.len()],
            pinned: None,
            pattern,
        })
    }

    /// Takes the iterate (heads of the region's junctions, flows of its links) from `start`.
    fn load(&mut self, start: &Solution, region: &[usize], links: &[RegionLink]) {
        for (h, &j) in self.heads.iter_mut().zip(region) {
            *h = start.heads_m[j];
        }
        for (f, l) in self.flows.iter_mut().zip(links) {
            *f = start.flows_m3s[l.link];
        }
    }

    /// Assembles the step's matrix and right-hand side at the current iterate (the solver's
    /// `assemble_step`, on the region; nodes outside it at their heads in `start`).
    fn assemble(
        &mut self,
        hydraulics: &Hydraulics<'_>,
        start: &Solution,
        links: &[RegionLink],
        demand: &[f64],
    ) {
        let pattern = &self.pattern;
        self.values.iter_mut().for_each(|v| *v = 0.0);
        for (k, d) in demand.iter().enumerate() {
            self.rhs[pattern.position(k)] = -d;
        }
        let heads = &self.heads;
        let end_head = |node: usize, end: u32| -> f64 {
            if end == OUTSIDE {
                start.heads_m[node]
            } else {
                heads[end as usize]
            }
        };
        // A pinned junction's links enter only their other end's row, as a node outside does
        // (with no junction pinned, `pin` is `OUTSIDE`, whose rows are skipped anyway).
        let pin = self.pinned.unwrap_or(OUTSIDE);
        for (p, l) in links.iter().enumerate() {
            let (a, b) = hydraulics.ends[l.link];
            let (phi, slope) = hydraulics.laws[l.link].evaluate(self.flows[p]);
            let g = 1.0 / slope;
            self.conductance[p] = g;
            self.known[p] = -g * (phi - (end_head(a, l.from) - end_head(b, l.to)));
            let carried = self.flows[p] + self.known[p];
            let place = &self.places[p];
            let ends = [l.from, l.to];
            for (end, sign) in [(0, -1.0), (1, 1.0)] {
                if place.rows[end] != OUTSIDE && ends[end] != pin {
                    self.rhs[place.rows[end] as usize] += sign * carried;
                    self.values[place.diagonals[end] as usize] += g;
                }
            }
            if place.joining != OUTSIDE && l.from != pin && l.to != pin {
                self.values[place.joining as usize] -= g;
            }
        }
        if let Some(k) = self.pinned {
            let k = k as usize;
            self.rhs[pattern.position(k)] = 0.0;
            self.values[pattern.diagonal_slot(k)] = 1.0;
        }
    }

    /// Factorizes, solves and applies the step; returns the largest head change, m, or `None`
    /// when the matrix is singular or the step not finite.
    fn step(&mut self, links: &[RegionLink]) -> Option<f64> {
        self.factor.refactor(&self.values).ok()?;
        self.factor.solve_in_place(&mut self.rhs);
        let pattern = &self.pattern;
        let rhs = &self.rhs;
        let step = |end: u32| -> f64 {
            if end == OUTSIDE {
                0.0
            } else {
                rhs[pattern.position(end as usize)]
            }
        };
        let mut largest = 0.0_f64;
        for (k, h) in self.heads.iter_mut().enumerate() {
            let d = rhs[pattern.position(k)];
            if !d.is_finite() {
                return None;
            }
            *h += d;
            largest = largest.max(d.abs());
        }
        for (p, l) in links.iter().enumerate() {
            self.flows[p] += self.known[p] + self.conductance[p] * (step(l.from) - step(l.to));
        }
        Some(largest)
    }
}
