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

impl Hydraulics<'_> {
    /// Replaces the heads and flows of `start` around junction `at` by a solve of the `size`
    /// junctions nearest to it (breadth first over conducting links) with every other node held
    /// at its head in `start`; the junctions draw their demand at `demand_factor` plus `extra`
    /// (m³/s) at `at`. Returns whether it did: `start` is left as it was when the region
    /// holds a link whose state is ruled by a control (a pump, a check valve, a regulating
    /// valve), or when the region's Newton iteration does not settle within its steps.
    pub fn refine_around(
        &self,
        start: &mut Solution,
        at: usize,
        demand_factor: f64,
        extra: f64,
        size: usize,
    ) -> bool {
        let Some((region, local)) = self.region_around(start, at, size) else {
            return false;
        };
        let Some(links) = self.region_links(start, &region, &local) else {
            return false;
        };
        let demand: Vec<f64> = region
            .iter()
            .map(|&j| self.base_demand_m3s[j] * demand_factor + if j == at { extra } else { 0.0 })
            .collect();
        self.solve_region(start, &region, &links, &demand)
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
        let (around, _) = self.region_around(start, at, size)?;
        // The held junction is a node held at its head like those outside.
        let region: Vec<usize> = around.into_iter().filter(|&j| j != at).collect();
        let mut local = vec![OUTSIDE; self.net.nodes.len()];
        for (k, &j) in region.iter().enumerate() {
            local[j] = k as u32;
        }
        let links = self.region_links(start, &region, &local)?;
        let demand: Vec<f64> = region
            .iter()
            .map(|&j| self.base_demand_m3s[j] * demand_factor)
            .collect();
        let mut trial = start.clone();
        trial.heads_m[at] = held_head;
        if !self.solve_region(&mut trial, &region, &links, &demand) {
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
    /// alone; writes its heads and flows into `start` when it settles.
    fn solve_region(
        &self,
        start: &mut Solution,
        region: &[usize],
        links: &[RegionLink],
        demand: &[f64],
    ) -> bool {
        let Some(mut system) = RegionSystem::new(start, region, links, &self.row_of) else {
            return false;
        };
        for _ in 0..REGION_ITERATIONS {
            system.assemble(self, start, links, demand);
            let Some(largest) = system.step(links) else {
                return false;
            };
            if largest < REGION_TOLERANCE_M {
                for (k, &j) in region.iter().enumerate() {
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
}

impl RegionSystem {
    /// The system of `region` and its `links`, the iterate taken from `start`, ordered as the
    /// whole network's matrix (`row_of`); `None` when its pattern cannot be analysed.
    fn new(
        start: &Solution,
        region: &[usize],
        links: &[RegionLink],
        row_of: &[usize],
    ) -> Option<Self> {
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
            heads: region.iter().map(|&j| start.heads_m[j]).collect(),
            flows: links.iter().map(|l| start.flows_m3s[l.link]).collect(),
            pattern,
        })
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
        for (p, l) in links.iter().enumerate() {
            let (a, b) = hydraulics.ends[l.link];
            let (phi, slope) = hydraulics.laws[l.link].evaluate(self.flows[p]);
            let g = 1.0 / slope;
            self.conductance[p] = g;
            self.known[p] = -g * (phi - (end_head(a, l.from) - end_head(b, l.to)));
            let carried = self.flows[p] + self.known[p];
            let place = &self.places[p];
            for (end, sign) in [(0, -1.0), (1, 1.0)] {
                if place.rows[end] != OUTSIDE {
                    self.rhs[place.rows[end] as usize] += sign * carried;
                    self.values[place.diagonals[end] as usize] += g;
                }
            }
            if place.joining != OUTSIDE {
                self.values[place.joining as usize] -= g;
            }
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
