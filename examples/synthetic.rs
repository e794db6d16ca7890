//! Seeded generator of synthetic water networks, for benchmarks and speed tests.
//!
//! It writes an invented but plausible city's distribution network in the firemain network
//! format (described in `docs/synthetic-networks.md`): a street grid with missing links, dead-end
//! courts, diagonal transmission mains radiating from the sources, 12-in arterial lines every 8-10
//! streets, old districts with small unlined cast-iron mains, industrial parks, a smooth terrain
//! and hydrants on a quarter of the junctions.
//!
//! It deliberately uses only `std`, `clap`, `rand` and `rand_chacha`, not the firemain library, so
//! it builds whatever state the library is in.
//!
//! Run it with
//!
//! ```text
//! cargo run --release --example synthetic -- --junctions 10000 --seed 1 --out /tmp/net-10k \
//!     [--units us|si] [--headloss hazen-williams|darcy-weisbach] [--hydrant-fraction 0.25]
//! ```
//!
//! The output folder is created; an existing non-empty folder is refused and no file is ever
//! overwritten. The same arguments give byte-identical files on the same build target. The
//! network (layout, sizes, demands) depends only on `--junctions` and `--seed`: `--units` and
//! `--headloss` only change how it is written, and `--hydrant-fraction` only which junctions carry
//! a hydrant.
//!
//! Everything is generated in SI (m, mm, L/s) and converted when written.

use std::f64::consts::PI;
use std::fs::{self, File, OpenOptions};
use std::io::{self, BufWriter, Write};
use std::path::{Path, PathBuf};
use std::process::ExitCode;
use std::time::Instant;

use clap::{Parser, ValueEnum};
use rand::seq::SliceRandom;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;

// ---------------------------------------------------------------------------------------------
// Command line
// ---------------------------------------------------------------------------------------------

/// Generate a seeded synthetic water network (an invented city) in the firemain format.
#[derive(Parser, Debug)]
#[command(name = "synthetic")]
struct Args {
    /// Number of junctions (at least 50).
    #[arg(long, value_parser = clap::value_parser!(u32).range(50..=5_000_000))]
    junctions: u32,

    /// Random seed; the same seed and junction count give the same network.
    #[arg(long)]
    seed: u64,

    /// Output folder; created, must not exist or be empty.
    #[arg(long)]
    out: PathBuf,

    /// Unit system of the written files.
    #[arg(long, value_enum, default_value_t = Units::Us)]
    units: Units,

    /// Head-loss formula named in model.toml; selects the roughness column's meaning.
    #[arg(long, value_enum, default_value_t = Headloss::HazenWilliams)]
    headloss: Headloss,

    /// Fraction of junctions that carry a hydrant (0 to 1).
    #[arg(long, default_value_t = 0.25, value_parser = parse_fraction)]
    hydrant_fraction: f64,
}

#[derive(Clone, Copy, Debug, PartialEq, Eq, ValueEnum)]
enum Units {
    Us,
    Si,
}

#[derive(Clone, Copy, Debug, PartialEq, Eq, ValueEnum)]
enum Headloss {
    HazenWilliams,
    DarcyWeisbach,
}

fn parse_fraction(s: &str) -> Result<f64, String> {
    let v: f64 = s.parse().map_err(|e| format!("{e}"))?;
    if (0.0..=1.0).contains(&v) {
        Ok(v)
    } else {
        Err(format!("{v} is not between 0 and 1"))
    }
}

// ---------------------------------------------------------------------------------------------
// Constants (SI inside; conversions as in the firemain format notes)
// ---------------------------------------------------------------------------------------------

const M_PER_FT: f64 = 0.3048;
const LPS_PER_GPM: f64 = 3.785_411_784 / 60.0;
const G: f64 = 9.806_65;
const NU: f64 = 1.0e-6; // kinematic viscosity, m^2/s

/// Demand factors written to model.toml.
const MAX_DAY_FACTOR: f64 = 1.5;
const PEAK_HOUR_FACTOR: f64 = 2.5;
const MIN_HOUR_FACTOR: f64 = 0.4;

/// Where the city's south-west corner sits, so that sources outside the grid keep x, y > 0.
const ORIGIN: f64 = 1000.0;

/// Stages draw from separate ChaCha streams of the same seed, so a change in one stage (for
/// example the hydrant fraction) leaves every other stage's numbers alone.
#[derive(Clone, Copy)]
enum Stage {
    Layout = 1,
    Terrain = 2,
    Topology = 3,
    Supply = 4,
    Districts = 5,
    Pipes = 6,
    Demand = 7,
    Hydrants = 8,
    Grades = 9,
}

fn rng_for(seed: u64, stage: Stage) -> ChaCha8Rng {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    rng.set_stream(stage as u64);
    rng
}

// ---------------------------------------------------------------------------------------------
// Network model
// ---------------------------------------------------------------------------------------------

/// Commercial pipe sizes: nominal inches and the metric DN written for `--units si`.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
struct Size {
    inch: u32,
    dn: u32,
}

const D4: Size = Size { inch: 4, dn: 100 };
const D6: Size = Size { inch: 6, dn: 150 };
const D8: Size = Size { inch: 8, dn: 200 };
const D12: Size = Size { inch: 12, dn: 300 };
/// Transmission and source main sizes, smallest first. The metric DN is the nearest preferred
/// size to the nominal inch size.
const BIG_SIZES: [Size; 12] = [
    Size { inch: 16, dn: 400 },
    Size { inch: 20, dn: 500 },
    Size { inch: 24, dn: 600 },
    Size { inch: 30, dn: 800 },
    Size { inch: 36, dn: 900 },
    Size { inch: 42, dn: 1100 },
    Size { inch: 48, dn: 1200 },
    Size { inch: 54, dn: 1400 },
    Size { inch: 60, dn: 1500 },
    Size { inch: 72, dn: 1800 },
    Size { inch: 84, dn: 2100 },
    Size { inch: 96, dn: 2400 },
];

impl Size {
    /// Diameter in metres used for the generator's own sums (the metric size).
    fn metres(self) -> f64 {
        f64::from(self.dn) / 1000.0
    }

    /// Smallest transmission size that carries `q` (m^3/s) at no more than `v_max` (m/s).
    fn for_flow(q: f64, v_max: f64) -> Size {
        BIG_SIZES
            .iter()
            .copied()
            .find(|s| velocity(q, s.metres()) <= v_max)
            .unwrap_or(BIG_SIZES[BIG_SIZES.len() - 1])
    }
}

#[derive(Clone, Copy, Debug, PartialEq, Eq)]
enum Material {
    /// Cast iron (old unlined mains, or cement-lined ones in older neighbourhoods).
    CastIron,
    /// Cement-lined ductile iron.
    DuctileIron,
    /// PVC pressure pipe.
    Pvc,
    /// Welded steel (transmission and source mains).
    Steel,
}

impl Material {
    fn code(self) -> &'static str {
        match self {
            Material::CastIron => "CI",
            Material::DuctileIron => "DI",
            Material::Pvc => "PVC",
            Material::Steel => "STL",
        }
    }

    /// Smallest absolute roughness (mm) written for Darcy-Weisbach, whatever the C-equivalent.
    fn min_roughness_mm(self) -> f64 {
        match self {
            Material::CastIron => 0.26,
            Material::DuctileIron => 0.03,
            Material::Pvc => 0.0015,
            Material::Steel => 0.045,
        }
    }
}

#[derive(Clone, Copy, Debug, PartialEq, Eq)]
enum LandUse {
    Residential,
    Commercial,
    Industrial,
}

impl LandUse {
    fn class(self) -> &'static str {
        match self {
            LandUse::Residential => "residential",
            LandUse::Commercial => "commercial",
            LandUse::Industrial => "industrial",
        }
    }
}

#[derive(Clone, Copy, Debug, PartialEq, Eq)]
enum SourceKind {
    Reservoir,
    Tank,
}

struct Source {
    kind: SourceKind,
    x: f64,
    y: f64,
    grade: f64,
    /// Grid junction the source's main connects to; transmission mains radiate from it.
    hub: usize,
}

/// Where a pipe end is: junction index, or `SOURCE_BASE + source index`.
type NodeRef = u32;
const SOURCE_BASE: NodeRef = u32::MAX / 2;

#[derive(Clone, Copy, Debug, PartialEq, Eq)]
enum PipeRole {
    /// Ordinary street main; the size is decided from the districts it runs through.
    Street,
    /// Street main along an arterial line.
    Arterial,
    /// Dead-end court off the grid.
    Court,
    /// Segment of a diagonal transmission main (sized when laid).
    Transmission,
    /// Short large main from a source to its hub (sized when laid).
    SourceMain,
}

struct Pipe {
    from: NodeRef,
    to: NodeRef,
    length: f64,
    role: PipeRole,
    size: Size,
    material: Material,
    /// Hazen-Williams C.
    c: f64,
}

/// Rectangular street grid, filled row by row; the last row may be partly filled.
struct Grid {
    nx: usize,
    ny: usize,
    last_row: usize,
    /// Street positions (m).
    xs: Vec<f64>,
    ys: Vec<f64>,
}

impl Grid {
    fn len(&self) -> usize {
        self.nx * (self.ny - 1) + self.last_row
    }

    fn cell(&self, k: usize) -> (usize, usize) {
        (k % self.nx, k / self.nx)
    }

    /// Junction index at column `i`, row `j`, if the grid has one there.
    fn at(&self, i: isize, j: isize) -> Option<usize> {
        if i < 0 || j < 0 {
            return None;
        }
        let (i, j) = (i as usize, j as usize);
        let width = if j + 1 == self.ny {
            self.last_row
        } else {
            self.nx
        };
        (j < self.ny && i < width).then_some(j * self.nx + i)
    }

    fn width(&self) -> f64 {
        self.xs[self.nx - 1] - self.xs[0]
    }

    fn height(&self) -> f64 {
        self.ys[self.ny - 1] - self.ys[0]
    }
}

struct Network {
    grid: Grid,
    /// Junction coordinates (m), elevations (m), average-day demands (L/s), land use.
    x: Vec<f64>,
    y: Vec<f64>,
    elevation: Vec<f64>,
    demand: Vec<f64>,
    land_use: Vec<LandUse>,
    sources: Vec<Source>,
    pipes: Vec<Pipe>,
    /// Junctions inside an old cast-iron district (for the summary).
    old: Vec<bool>,
    /// Number of transmission mains laid (for the summary).
    transmission_mains: usize,
}

// ---------------------------------------------------------------------------------------------
// Generation
// ---------------------------------------------------------------------------------------------

fn generate(n: usize, seed: u64) -> Network {
    // Two percent of the junctions hang off the grid in dead-end courts; the rest form the grid.
    let court_junctions = n / 50;
    let mut rng = rng_for(seed, Stage::Layout);
    let grid = layout_grid(n - court_junctions, &mut rng);
    let g = grid.len();

    // Grid junctions sit near the street crossings (streets are not perfectly straight).
    let mut x = Vec::with_capacity(n);
    let mut y = Vec::with_capacity(n);
    for k in 0..g {
        let (i, j) = grid.cell(k);
        x.push(grid.xs[i] + rng.gen_range(-4.0..4.0));
        y.push(grid.ys[j] + rng.gen_range(-4.0..4.0));
    }

    let mut rng = rng_for(seed, Stage::Topology);
    let row_arterial = arterial_lines(grid.ny, &mut rng);
    let col_arterial = arterial_lines(grid.nx, &mut rng);
    let mut pipes = street_links(&grid, &row_arterial, &col_arterial, &mut rng);
    let court_pipes = add_courts(&grid, court_junctions, &mut x, &mut y, &mut rng);

    let elevation = terrain(&grid, &x, &y, &mut rng_for(seed, Stage::Terrain));

    // Land use: commercial along the arterial lines and at some crossings one street off them,
    // residential elsewhere; industrial parks are laid over this once the transmission mains are
    // known.
    let mut rng = rng_for(seed, Stage::Districts);
    let near = |lines: &[bool], i: usize| {
        lines[i.saturating_sub(1)] || lines.get(i + 1).copied().unwrap_or(false)
    };
    let mut land_use: Vec<LandUse> = (0..n)
        .map(|k| {
            if k < g {
                let (i, j) = grid.cell(k);
                if row_arterial[j] || col_arterial[i] {
                    return LandUse::Commercial;
                }
                if (near(&row_arterial, j) || near(&col_arterial, i)) && rng.gen_bool(0.12) {
                    return LandUse::Commercial;
                }
            }
            LandUse::Residential
        })
        .collect();

    let mut supply_rng = rng_for(seed, Stage::Supply);
    let mut sources = place_sources(&grid, n, &x, &y, &elevation, &mut supply_rng);
    let mains = transmission_mains(&grid, &sources, n, &mut supply_rng);

    mark_industrial_parks(&grid, &mains, &mut land_use, &mut rng);
    let old = old_districts(&grid, n, &land_use, &court_pipes, &mut rng);

    let mut rng = rng_for(seed, Stage::Demand);
    let demand: Vec<f64> = land_use
        .iter()
        .map(|lu| {
            // Some junctions are plain crossings with no service connections.
            if rng.gen_bool(0.08) {
                return 0.0;
            }
            let (lo, hi) = match lu {
                LandUse::Residential => (0.08, 0.22),
                LandUse::Commercial => (0.15, 0.40),
                LandUse::Industrial => (0.30, 0.90),
            };
            round_to(rng.gen_range(lo..hi), 0.01)
        })
        .collect();

    // Transmission segments and source mains, sized for the peak-hour flow they carry.
    pipes.extend(court_pipes);
    let (segment_flows, source_flows) = trunk_flows(&mains, &pipes, sources.len(), &demand);
    for (main, flows) in mains.iter().zip(&segment_flows) {
        for (w, &q) in main.path.windows(2).zip(flows) {
            let mut p = pipe(w[0], w[1], PipeRole::Transmission);
            p.size = Size::for_flow(q, TRUNK_VELOCITY);
            pipes.push(p);
        }
    }
    for (s, src) in sources.iter_mut().enumerate() {
        let mut p = pipe(SOURCE_BASE as usize + s, src.hub, PipeRole::SourceMain);
        p.size = Size::for_flow(source_flows[s], TRUNK_VELOCITY);
        pipes.push(p);
    }

    let mut net = Network {
        grid,
        x,
        y,
        elevation,
        demand,
        land_use,
        sources,
        pipes,
        old,
        transmission_mains: mains.len(),
    };
    set_grades(&mut net, &mut rng_for(seed, Stage::Grades));
    size_pipes(&mut net, &mut rng_for(seed, Stage::Pipes));
    net
}

/// A pipe with its role set and the other attributes left for `size_pipes`.
fn pipe(from: usize, to: usize, role: PipeRole) -> Pipe {
    Pipe {
        from: from as NodeRef,
        to: to as NodeRef,
        length: 0.0,
        role,
        size: D6,
        material: Material::DuctileIron,
        c: 130.0,
    }
}

/// Grid of about sqrt(g) x sqrt(g) junctions; streets 100-150 m apart.
fn layout_grid(g: usize, rng: &mut ChaCha8Rng) -> Grid {
    let nx = ((g as f64).sqrt().round() as usize).max(3);
    let ny = g.div_ceil(nx);
    let last_row = g - nx * (ny - 1);
    let mut streets = |count: usize| {
        let mut v = Vec::with_capacity(count);
        let mut at = ORIGIN;
        for _ in 0..count {
            v.push(at);
            at += rng.gen_range(100.0..150.0);
        }
        v
    };
    let xs = streets(nx);
    let ys = streets(ny);
    Grid {
        nx,
        ny,
        last_row,
        xs,
        ys,
    }
}

/// Marks every 8th to 10th street line as an arterial.
fn arterial_lines(count: usize, rng: &mut ChaCha8Rng) -> Vec<bool> {
    let mut lines = vec![false; count];
    let mut k = rng.gen_range(2..=6);
    while k < count {
        lines[k] = true;
        k += rng.gen_range(8..=10);
    }
    lines
}

/// Street links of the grid, with about a quarter removed.
///
/// A random spanning tree (randomised Kruskal, arterial links first) is always kept, so the grid
/// stays connected; the links to drop are drawn from the others, never from arterial lines.
fn street_links(
    grid: &Grid,
    row_arterial: &[bool],
    col_arterial: &[bool],
    rng: &mut ChaCha8Rng,
) -> Vec<Pipe> {
    let g = grid.len();
    let mut links: Vec<(usize, usize, bool)> = Vec::with_capacity(2 * g);
    for k in 0..g {
        let (i, j) = grid.cell(k);
        let (i, j) = (i as isize, j as isize);
        if let Some(r) = grid.at(i + 1, j) {
            links.push((k, r, row_arterial[j as usize]));
        }
        if let Some(u) = grid.at(i, j + 1) {
            links.push((k, u, col_arterial[i as usize]));
        }
    }

    let mut order: Vec<usize> = (0..links.len()).collect();
    order.shuffle(rng);
    order.sort_by_key(|&l| !links[l].2); // stable: arterials first, each group still shuffled
    let mut sets = DisjointSets::new(g);
    let mut candidates = Vec::new();
    for &l in &order {
        let (a, b, arterial) = links[l];
        if !sets.union(a, b) && !arterial {
            candidates.push(l);
        }
    }
    // `candidates` is in shuffled order already, so its head is a random choice.
    let drop = (links.len() / 4).min(candidates.len());
    let mut keep = vec![true; links.len()];
    for &l in &candidates[..drop] {
        keep[l] = false;
    }

    links
        .iter()
        .zip(keep)
        .filter(|(_, k)| *k)
        .map(|(&(a, b, arterial), _)| {
            let role = if arterial {
                PipeRole::Arterial
            } else {
                PipeRole::Street
            };
            pipe(a, b, role)
        })
        .collect()
}

/// Union-find with path halving, for the spanning tree.
struct DisjointSets {
    parent: Vec<u32>,
}

impl DisjointSets {
    fn new(n: usize) -> Self {
        Self {
            parent: (0..n as u32).collect(),
        }
    }

    fn find(&mut self, mut a: usize) -> usize {
        while self.parent[a] as usize != a {
            let up = self.parent[self.parent[a] as usize];
            self.parent[a] = up;
            a = up as usize;
        }
        a
    }

    /// Joins the sets of `a` and `b`; false if they were already one set.
    fn union(&mut self, a: usize, b: usize) -> bool {
        let (ra, rb) = (self.find(a), self.find(b));
        if ra == rb {
            return false;
        }
        self.parent[ra] = rb as u32;
        true
    }
}

/// Dead-end courts: chains of one to three junctions reaching into a block from a grid junction.
fn add_courts(
    grid: &Grid,
    count: usize,
    x: &mut Vec<f64>,
    y: &mut Vec<f64>,
    rng: &mut ChaCha8Rng,
) -> Vec<Pipe> {
    let g = grid.len();
    let mut pipes = Vec::with_capacity(count);
    let mut left = count;
    while left > 0 {
        let chain = rng.gen_range(1..=3).min(left);
        let mut at = rng.gen_range(0..g);
        let angle = PI / 4.0 + PI / 2.0 * f64::from(rng.gen_range(0..4)) + rng.gen_range(-0.3..0.3);
        for _ in 0..chain {
            let step = rng.gen_range(30.0..45.0);
            let k = x.len();
            x.push(x[at] + step * angle.cos());
            y.push(y[at] + step * angle.sin());
            pipes.push(pipe(at, k, PipeRole::Court));
            at = k;
        }
        left -= chain;
    }
    pipes
}

/// Smooth ground: a tilt, a few hills and hollows and two long waves, scaled to about 30 m of
/// relief.
fn terrain(grid: &Grid, x: &[f64], y: &[f64], rng: &mut ChaCha8Rng) -> Vec<f64> {
    let (w, h) = (grid.width().max(1.0), grid.height().max(1.0));
    let span = w.max(h);
    let tilt = rng.gen_range(0.0..2.0 * PI);
    let hills: Vec<(f64, f64, f64, f64)> = (0..rng.gen_range(3..=6))
        .map(|_| {
            (
                ORIGIN + w * rng.gen_range(-0.1..1.1),
                ORIGIN + h * rng.gen_range(-0.1..1.1),
                span * rng.gen_range(0.10..0.30),
                rng.gen_range(-0.6..0.9),
            )
        })
        .collect();
    let waves: Vec<(f64, f64, f64)> = (0..2)
        .map(|_| {
            let dir = rng.gen_range(0.0..2.0 * PI);
            let k = 2.0 * PI / (span * rng.gen_range(0.25..0.6));
            (k * dir.cos(), k * dir.sin(), rng.gen_range(0.0..2.0 * PI))
        })
        .collect();
    let relief = rng.gen_range(29.0..31.0);
    let base = rng.gen_range(40.0..250.0);

    let raw: Vec<f64> = x
        .iter()
        .zip(y)
        .map(|(&x, &y)| {
            let (u, v) = ((x - ORIGIN) / w, (y - ORIGIN) / h);
            let mut z = tilt.cos() * u + tilt.sin() * v;
            for &(cx, cy, r, a) in &hills {
                let d2 = ((x - cx) * (x - cx) + (y - cy) * (y - cy)) / (r * r);
                z += a * (-0.5 * d2).exp();
            }
            for &(kx, ky, phase) in &waves {
                z += 0.12 * (kx * (x - ORIGIN) + ky * (y - ORIGIN) + phase).sin();
            }
            z
        })
        .collect();
    let lo = raw.iter().copied().fold(f64::INFINITY, f64::min);
    let hi = raw.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    raw.iter()
        .map(|z| base + relief * (z - lo) / (hi - lo).max(1e-9))
        .collect()
}

/// One source per ~20k junctions, at least two, alternately reservoirs and tanks.
///
/// Up to three sources sit just outside the city on its higher edges. Larger cities are too wide
/// to be fed from their rim, so there a third of the sources stand on the rim and the rest on
/// high ground spread over the city.
fn place_sources(
    grid: &Grid,
    n: usize,
    x: &[f64],
    y: &[f64],
    elevation: &[f64],
    rng: &mut ChaCha8Rng,
) -> Vec<Source> {
    let g = grid.len();
    let k = ((n as f64 / 20_000.0).round() as usize).max(2);
    let on_rim = if k <= 3 { k } else { (k / 3).max(2) };
    let lo = elevation[..g].iter().copied().fold(f64::INFINITY, f64::min);
    let hi = elevation[..g]
        .iter()
        .copied()
        .fold(f64::NEG_INFINITY, f64::max);
    let height = |j: usize| (elevation[j] - lo) / (hi - lo).max(1e-9);
    let dist = |a: usize, b: usize| (x[a] - x[b]).hypot(y[a] - y[b]);
    let (w, h) = (grid.width(), grid.height());

    // Outward direction of a grid junction: towards its missing neighbours.
    let outward = |k: usize| {
        let (i, j) = grid.cell(k);
        let (i, j) = (i as isize, j as isize);
        let mut d = (0.0, 0.0);
        for (di, dj) in [(1, 0), (-1, 0), (0, 1), (0, -1)] {
            if grid.at(i + di, j + dj).is_none() {
                d.0 += di as f64;
                d.1 += dj as f64;
            }
        }
        d
    };
    let corner_margin = 0.1 * w.min(h);
    let rim: Vec<usize> = (0..g)
        .filter(|&k| {
            let d = outward(k);
            let near_corner = [(0.0, 0.0), (w, 0.0), (0.0, h), (w, h)]
                .iter()
                .any(|c| (x[k] - ORIGIN - c.0).hypot(y[k] - ORIGIN - c.1) < corner_margin);
            (d.0 != 0.0 || d.1 != 0.0) && !near_corner
        })
        .collect();

    // Rim sources: the highest rim junctions, kept apart by about a third of the rim per source.
    let spread = 2.0 * (w + h) / (3.0 * on_rim as f64);
    let mut hubs: Vec<usize> = Vec::with_capacity(k);
    for _ in 0..on_rim {
        let best = rim
            .iter()
            .copied()
            .filter(|c| !hubs.contains(c))
            .max_by(|&a, &b| {
                let score = |c: usize| {
                    let near = hubs
                        .iter()
                        .map(|&s| dist(c, s))
                        .fold(f64::INFINITY, f64::min);
                    height(c) + 2.0 * (near / spread).min(1.0)
                };
                score(a).total_cmp(&score(b))
            });
        hubs.push(best.expect("the rim has enough junctions"));
    }

    // Inner sources: far from other sources and from the rim, preferring high ground.
    let cell = (w * h / k as f64).sqrt();
    let to_rim = |c: usize| {
        let (dx, dy) = (x[c] - ORIGIN, y[c] - ORIGIN);
        dx.min(w - dx).min(dy).min(h - dy).max(0.0)
    };
    while hubs.len() < k {
        let score = |c: usize| {
            let near = hubs
                .iter()
                .map(|&s| dist(c, s))
                .fold(f64::INFINITY, f64::min);
            near.min(1.5 * to_rim(c)) / cell + 0.3 * height(c)
        };
        let best = (0..g)
            .filter(|c| !hubs.contains(c))
            .max_by(|&a, &b| score(a).total_cmp(&score(b)))
            .expect("the grid has enough junctions");
        hubs.push(best);
    }

    hubs.iter()
        .enumerate()
        .map(|(s, &hub)| {
            let (dx, dy) = if s < on_rim {
                // Just outside the city, 150-400 m out from the hub.
                let d = outward(hub);
                let len = d.0.hypot(d.1);
                let r = rng.gen_range(150.0..400.0);
                (r * d.0 / len, r * d.1 / len)
            } else {
                // On a lot inside a block next to the hub.
                let a = rng.gen_range(0.0..2.0 * PI);
                let r = rng.gen_range(50.0..100.0);
                (r * a.cos(), r * a.sin())
            };
            Source {
                kind: if s % 2 == 0 {
                    SourceKind::Reservoir
                } else {
                    SourceKind::Tank
                },
                x: x[hub] + dx,
                y: y[hub] + dy,
                grade: 0.0,
                hub,
            }
        })
        .collect()
}

/// A diagonal transmission main: grid junctions two diagonal steps apart.
struct Main {
    path: Vec<usize>,
    /// Index of the source whose hub it starts from, directly or through its parent.
    source: usize,
    /// Parent main and the index in the parent's path where this one branches off; None when
    /// the main leaves the hub.
    parent: Option<(usize, usize)>,
}

/// max(5, n/2000) diagonal transmission mains (fewer if the city runs out of open ground).
///
/// The sources take turns. A source's first mains leave its hub along the diagonals that have
/// room; later ones branch at right angles off an earlier main, its own where possible, and
/// belong to the source that feeds their parent, so each source feeds a tree of mains. Among a
/// few random branch points the one with the most open ground ahead is taken, and a main stops
/// when it comes near another main, so mains spread over the city instead of bunching.
fn transmission_mains(
    grid: &Grid,
    sources: &[Source],
    n: usize,
    rng: &mut ChaCha8Rng,
) -> Vec<Main> {
    const DIAGONALS: [(isize, isize); 4] = [(1, 1), (-1, 1), (-1, -1), (1, -1)];
    const BRANCH_CANDIDATES: usize = 16;
    let k = sources.len();
    let count = (n / 2000).max(5);
    let reach = (grid.len() as f64 / k as f64).sqrt(); // service radius, in streets
    let mut coverage = Coverage::new(grid);
    let mut mains: Vec<Main> = Vec::with_capacity(count);
    // Per source: indices of its mains so far, and its unused hub diagonals.
    let mut owned: Vec<Vec<usize>> = vec![Vec::new(); k];
    let mut free: Vec<Vec<(isize, isize)>> = sources
        .iter()
        .map(|src| {
            let (i, j) = grid.cell(src.hub);
            let mut d: Vec<_> = DIAGONALS
                .iter()
                .copied()
                .filter(|&(di, dj)| grid.at(i as isize + 2 * di, j as isize + 2 * dj).is_some())
                .collect();
            d.shuffle(rng);
            d
        })
        .collect();

    let mut attempts = 0;
    while mains.len() < count && attempts < 20 * count {
        attempts += 1;
        let s = attempts % k;
        let me = mains.len();
        let (path, parent) = if let Some(dir) = free[s].pop() {
            let steps = (reach * rng.gen_range(0.5..0.8)).ceil() as usize;
            (
                coverage.walk(grid, sources[s].hub, dir, steps, me, None),
                None,
            )
        } else {
            // Try a few branch points, on this source's mains first and then on any main; keep
            // the one with the longest free run ahead.
            let steps = (reach * rng.gen_range(0.3..0.5)).ceil() as usize;
            let mut best: Option<(Vec<usize>, (usize, usize))> = None;
            for c in 0..BRANCH_CANDIDATES {
                let parent = if c < BRANCH_CANDIDATES / 2 && !owned[s].is_empty() {
                    *owned[s].choose(rng).expect("non-empty")
                } else {
                    rng.gen_range(0..mains.len())
                };
                let along = &mains[parent].path;
                if along.len() < 3 {
                    continue;
                }
                let at = (along.len() as f64 * rng.gen_range(0.2..0.8)) as usize;
                let ((i0, j0), (i1, j1)) = (grid.cell(along[0]), grid.cell(along[1]));
                let (di, dj) = (
                    (i1 as isize - i0 as isize) / 2,
                    (j1 as isize - j0 as isize) / 2,
                );
                let dir = if rng.gen_bool(0.5) {
                    (-dj, di)
                } else {
                    (dj, -di)
                };
                let path = coverage.walk(grid, along[at], dir, steps, me, Some(parent));
                if best.as_ref().is_none_or(|(b, _)| path.len() > b.len()) {
                    best = Some((path, (parent, at)));
                }
            }
            match best {
                Some((path, at)) if path.len() >= 4 => (path, Some(at)),
                _ => continue,
            }
        };
        if path.len() < 2 {
            continue;
        }
        for &node in &path {
            coverage.mark(grid, node, me);
        }
        // A branch belongs to the source that feeds its parent.
        let source = parent.map_or(s, |(p, _)| mains[p].source);
        owned[source].push(me);
        mains.push(Main {
            path,
            source,
            parent,
        });
    }
    mains
}

/// Which transmission main passes through each patch of 4 x 4 streets, to keep mains apart.
struct Coverage {
    cols: usize,
    rows: usize,
    owner: Vec<u32>,
}

impl Coverage {
    const PATCH: usize = 4;
    const NONE: u32 = u32::MAX;

    fn new(grid: &Grid) -> Self {
        let (cols, rows) = (grid.nx.div_ceil(Self::PATCH), grid.ny.div_ceil(Self::PATCH));
        Self {
            cols,
            rows,
            owner: vec![Self::NONE; cols * rows],
        }
    }

    fn patch(grid: &Grid, node: usize) -> (usize, usize) {
        let (i, j) = grid.cell(node);
        (i / Self::PATCH, j / Self::PATCH)
    }

    fn mark(&mut self, grid: &Grid, node: usize, main: usize) {
        let (pi, pj) = Self::patch(grid, node);
        let cell = &mut self.owner[pj * self.cols + pi];
        if *cell == Self::NONE {
            *cell = main as u32;
        }
    }

    /// True if no main other than `main` and `parent` passes within two patches of the node.
    fn clear(&self, grid: &Grid, node: usize, main: usize, parent: Option<usize>) -> bool {
        let (pi, pj) = Self::patch(grid, node);
        let rows = pj.saturating_sub(2)..=(pj + 2).min(self.rows - 1);
        rows.flat_map(|j| (pi.saturating_sub(2)..=(pi + 2).min(self.cols - 1)).map(move |i| (i, j)))
            .all(|(i, j)| {
                let o = self.owner[j * self.cols + i];
                o == Self::NONE || o == main as u32 || Some(o as usize) == parent
            })
    }

    /// Walks two diagonal steps at a time from `start` for at most `steps` segments; stops at
    /// the city's edge or near another main (the first three patches from the start are exempt,
    /// so that mains can leave a shared hub or a parent main).
    fn walk(
        &self,
        grid: &Grid,
        start: usize,
        dir: (isize, isize),
        steps: usize,
        main: usize,
        parent: Option<usize>,
    ) -> Vec<usize> {
        let (si, sj) = Self::patch(grid, start);
        let mut path = vec![start];
        let mut at = start;
        while path.len() <= steps {
            let (i, j) = grid.cell(at);
            let Some(next) = grid.at(i as isize + 2 * dir.0, j as isize + 2 * dir.1) else {
                break;
            };
            let (ni, nj) = Self::patch(grid, next);
            let near_start = ni.abs_diff(si).max(nj.abs_diff(sj)) <= 3;
            if !near_start && !self.clear(grid, next, main, parent) {
                break;
            }
            path.push(next);
            at = next;
        }
        path
    }
}

/// Peak-hour velocity (m/s) that transmission and source mains are sized for: 1.5 m/s (5 ft/s)
/// is a usual ceiling at normal demand (common practice, no source).
const TRUNK_VELOCITY: f64 = 1.5;

/// Peak-hour flow (m^3/s) in every transmission segment and in every source main.
///
/// Each junction is taken to draw from the transmission node nearest to it through the street
/// grid (a breadth-first search from all transmission nodes at once); a segment carries the
/// draw of every node beyond it on its main, including the mains that branch off there.
fn trunk_flows(
    mains: &[Main],
    street_pipes: &[Pipe],
    sources: usize,
    demand: &[f64],
) -> (Vec<Vec<f64>>, Vec<f64>) {
    let n = demand.len();
    let neighbours = Adjacency::new(n, street_pipes);

    // Breadth-first search from the transmission nodes; `owner` = (main, index in its path).
    let mut owner: Vec<Option<(u32, u32)>> = vec![None; n];
    let mut queue = std::collections::VecDeque::new();
    for (m, main) in mains.iter().enumerate() {
        for (t, &k) in main.path.iter().enumerate() {
            if owner[k].is_none() {
                owner[k] = Some((m as u32, t as u32));
                queue.push_back(k);
            }
        }
    }
    while let Some(k) = queue.pop_front() {
        for &j in neighbours.of(k) {
            if owner[j as usize].is_none() {
                owner[j as usize] = owner[k];
                queue.push_back(j as usize);
            }
        }
    }

    // Draw at each path node (L/s at peak hour), then totals from the leaves of each tree up:
    // a branch is created after its parent, so walking the mains backwards sees children first.
    let mut draw: Vec<Vec<f64>> = mains.iter().map(|m| vec![0.0; m.path.len()]).collect();
    for (k, o) in owner.iter().enumerate() {
        if let Some((m, t)) = o {
            draw[*m as usize][*t as usize] += demand[k] * PEAK_HOUR_FACTOR / 1000.0;
        }
    }
    let mut source_flows = vec![0.0; sources];
    let mut segments: Vec<Vec<f64>> = vec![Vec::new(); mains.len()];
    for m in (0..mains.len()).rev() {
        // Node 0 belongs to the parent main or to the hub, so it is not carried by this main.
        let mut carried = vec![0.0; mains[m].path.len() - 1];
        let mut beyond = 0.0;
        for t in (1..mains[m].path.len()).rev() {
            beyond += draw[m][t];
            carried[t - 1] = beyond;
        }
        match mains[m].parent {
            Some((p, at)) => draw[p][at] += beyond,
            None => source_flows[mains[m].source] += beyond + draw[m][0],
        }
        segments[m] = carried;
    }
    (segments, source_flows)
}

/// Junction neighbours through the given pipes, in compressed rows.
struct Adjacency {
    start: Vec<u32>,
    next: Vec<u32>,
}

impl Adjacency {
    fn new(n: usize, pipes: &[Pipe]) -> Self {
        let mut start = vec![0u32; n + 1];
        for p in pipes {
            start[p.from as usize + 1] += 1;
            start[p.to as usize + 1] += 1;
        }
        for k in 0..n {
            start[k + 1] += start[k];
        }
        let mut fill = start.clone();
        let mut next = vec![0u32; start[n] as usize];
        for p in pipes {
            for (a, b) in [(p.from, p.to), (p.to, p.from)] {
                next[fill[a as usize] as usize] = b;
                fill[a as usize] += 1;
            }
        }
        Self { start, next }
    }

    fn of(&self, k: usize) -> &[u32] {
        &self.next[self.start[k] as usize..self.start[k + 1] as usize]
    }
}

/// Industrial parks (about 5 % of the grid), each beside a transmission main.
fn mark_industrial_parks(
    grid: &Grid,
    mains: &[Main],
    land_use: &mut [LandUse],
    rng: &mut ChaCha8Rng,
) {
    let g = grid.len();
    let parks = ((g as f64 / 10_000.0).round() as usize).max(1);
    let side = ((0.05 * g as f64 / parks as f64).sqrt().round() as isize).max(2);
    for _ in 0..parks {
        let main = &mains[rng.gen_range(0..mains.len())];
        let at = main.path[rng.gen_range(0..main.path.len())];
        let (ci, cj) = grid.cell(at);
        let (i0, j0) = (ci as isize - side / 2, cj as isize - side / 2);
        for j in j0..j0 + side {
            for i in i0..i0 + side {
                if let Some(k) = grid.at(i, j) {
                    land_use[k] = LandUse::Industrial;
                }
            }
        }
    }
}

/// Old districts (about a tenth of the grid) with small unlined cast-iron mains.
///
/// Each is a blob with a wavy edge around a random centre. Courts hanging off an old junction are
/// old too. Industrial parks are excluded (they were re-laid).
fn old_districts(
    grid: &Grid,
    n: usize,
    land_use: &[LandUse],
    courts: &[Pipe],
    rng: &mut ChaCha8Rng,
) -> Vec<bool> {
    let g = grid.len();
    let count = ((g as f64 / 5000.0).round() as usize).max(1);
    let mean_radius = (0.12 * g as f64 / (count as f64 * PI)).sqrt();
    let mut old = vec![false; n];
    for _ in 0..count {
        let r0 = mean_radius * rng.gen_range(0.7..1.3);
        // Centre far enough from the edge for the whole district to lie in the city, if it fits.
        let full_rows = grid.ny - 1;
        let mi = (r0 as usize).min((grid.nx - 1) / 2);
        let mj = (r0 as usize).min((full_rows - 1) / 2);
        let (ci, cj) = (
            rng.gen_range(mi..grid.nx - mi),
            rng.gen_range(mj..full_rows - mj),
        );
        let (lobes, phase) = (
            f64::from(rng.gen_range(2..=4)),
            rng.gen_range(0.0..2.0 * PI),
        );
        let reach = (1.3 * r0).ceil() as isize;
        for j in cj as isize - reach..=cj as isize + reach {
            for i in ci as isize - reach..=ci as isize + reach {
                let Some(k) = grid.at(i, j) else { continue };
                let (di, dj) = ((i - ci as isize) as f64, (j - cj as isize) as f64);
                let r = r0 * (1.0 + 0.25 * (lobes * dj.atan2(di) + phase).sin());
                if di.hypot(dj) <= r && land_use[k] != LandUse::Industrial {
                    old[k] = true;
                }
            }
        }
    }
    for p in courts {
        if old[p.from as usize] {
            old[p.to as usize] = true;
        }
    }
    old
}

/// Source grades: one hydraulic grade line 34-36 m above the highest junction, each source within
/// half a metre of it, so static pressures run from about 48 psi on the heights to about 93 psi
/// in the lowest hollows.
fn set_grades(net: &mut Network, rng: &mut ChaCha8Rng) {
    let top = net
        .elevation
        .iter()
        .copied()
        .fold(f64::NEG_INFINITY, f64::max);
    let hgl = top + rng.gen_range(34.0..36.0);
    for src in &mut net.sources {
        src.grade = hgl + rng.gen_range(-0.5..0.5);
    }
}

/// Sizes, materials, C factors and lengths of all pipes.
///
/// The city is divided into patches of 6 x 6 blocks, each built in one era: older cement-lined
/// cast iron, ductile iron or PVC. Street mains are 6 in, or 8 in on about a third of the streets;
/// arterials and industrial streets are 12 in; in old districts the mains are unlined cast iron,
/// 4 in (85 %) or 6 in, with C 60-90.
fn size_pipes(net: &mut Network, rng: &mut ChaCha8Rng) {
    let grid = &net.grid;
    let (px, py) = (grid.nx.div_ceil(6), grid.ny.div_ceil(6));
    let eras: Vec<Material> = (0..px * py)
        .map(|_| match rng.gen_range(0..10) {
            0..=1 => Material::CastIron,
            2..=5 => Material::DuctileIron,
            _ => Material::Pvc,
        })
        .collect();
    // Patch of a junction by position, so that courts share their street's era.
    let era = |k: usize| {
        let i = grid.xs.partition_point(|&s| s < net.x[k]).min(grid.nx - 1);
        let j = grid.ys.partition_point(|&s| s < net.y[k]).min(grid.ny - 1);
        eras[(j / 6) * px + i / 6]
    };
    let modern_c = |m: Material, rng: &mut ChaCha8Rng| match m {
        Material::CastIron => rng.gen_range(90..=110),
        Material::DuctileIron => rng.gen_range(110..=130),
        Material::Pvc => rng.gen_range(130..=140),
        Material::Steel => rng.gen_range(115..=130),
    };
    let position = |r: NodeRef| -> (f64, f64) {
        if r >= SOURCE_BASE {
            let s = &net.sources[(r - SOURCE_BASE) as usize];
            (s.x, s.y)
        } else {
            (net.x[r as usize], net.y[r as usize])
        }
    };

    for p in &mut net.pipes {
        let (a, b) = (p.from as usize, p.to as usize);
        let old = p.role != PipeRole::SourceMain && net.old[a] && net.old[b];
        let industrial = p.role != PipeRole::SourceMain
            && net.land_use[a] == LandUse::Industrial
            && net.land_use[b] == LandUse::Industrial;
        let (size, material, c) = match p.role {
            PipeRole::SourceMain => (p.size, Material::Steel, rng.gen_range(120..=130)),
            PipeRole::Transmission => (p.size, Material::Steel, rng.gen_range(115..=130)),
            PipeRole::Arterial => {
                let m = era(a);
                (D12, m, modern_c(m, rng))
            }
            _ if industrial => (D12, Material::DuctileIron, rng.gen_range(115..=130)),
            _ if old => {
                if rng.gen_bool(0.85) {
                    (D4, Material::CastIron, rng.gen_range(60..=90))
                } else {
                    (D6, Material::CastIron, rng.gen_range(65..=85))
                }
            }
            PipeRole::Court => {
                let m = era(a);
                (D6, m, modern_c(m, rng))
            }
            PipeRole::Street => {
                let m = era(a);
                let size = if rng.gen_bool(0.35) { D8 } else { D6 };
                (size, m, modern_c(m, rng))
            }
        };
        let ((xa, ya), (xb, yb)) = (position(p.from), position(p.to));
        // Street mains bend a little and run a few metres past the crossings.
        let slack = match p.role {
            PipeRole::Street | PipeRole::Arterial => rng.gen_range(1.0..1.03),
            _ => 1.0,
        };
        p.length = (xa - xb).hypot(ya - yb) * slack;
        p.size = size;
        p.material = material;
        p.c = f64::from(c);
    }
}

// ---------------------------------------------------------------------------------------------
// Hydraulic helpers
// ---------------------------------------------------------------------------------------------

fn velocity(q: f64, d: f64) -> f64 {
    q / (PI * d * d / 4.0)
}

/// Darcy-Weisbach absolute roughness (mm) that gives the same head loss as Hazen-Williams C at
/// 1 m/s (the velocity near which C values are calibrated), via Colebrook-White inverted for the
/// roughness; never below the material's new-pipe value.
fn equivalent_roughness_mm(c: f64, d: f64, material: Material) -> f64 {
    let v = 1.0;
    let q = velocity_to_flow(v, d);
    // Hazen-Williams, SI: h/L = 10.67 Q^1.852 / (C^1.852 D^4.8704).
    let slope = 10.67 * q.powf(1.852) / (c.powf(1.852) * d.powf(4.8704));
    let f = slope * d * 2.0 * G / (v * v);
    let re = v * d / NU;
    let x = 1.0 / f.sqrt();
    let eps = 3.7 * d * (10f64.powf(-x / 2.0) - 2.51 * x / re);
    (eps * 1000.0).max(material.min_roughness_mm())
}

fn velocity_to_flow(v: f64, d: f64) -> f64 {
    v * PI * d * d / 4.0
}

fn round_to(v: f64, step: f64) -> f64 {
    (v / step).round() * step
}

// ---------------------------------------------------------------------------------------------
// Output
// ---------------------------------------------------------------------------------------------

/// Unit conversions from the SI values held in memory to the written unit system.
struct Out {
    units: Units,
    headloss: Headloss,
}

impl Out {
    fn length(&self, m: f64) -> f64 {
        match self.units {
            Units::Us => m / M_PER_FT,
            Units::Si => m,
        }
    }

    fn flow(&self, lps: f64) -> f64 {
        match self.units {
            Units::Us => lps / LPS_PER_GPM,
            Units::Si => lps,
        }
    }

    fn diameter(&self, s: Size) -> u32 {
        match self.units {
            Units::Us => s.inch,
            Units::Si => s.dn,
        }
    }

    /// Roughness column text: C, or the absolute roughness in the diameter unit.
    fn roughness(&self, p: &Pipe) -> String {
        match self.headloss {
            Headloss::HazenWilliams => format!("{}", p.c),
            Headloss::DarcyWeisbach => {
                let mm = equivalent_roughness_mm(p.c, p.size.metres(), p.material);
                match self.units {
                    Units::Si => format!("{mm:.4}"),
                    Units::Us => format!("{:.5}", mm / 25.4),
                }
            }
        }
    }
}

/// Id such as `J-000042`: prefix, dash, number zero-padded to `width` digits.
fn id(prefix: &str, k: usize, width: usize) -> String {
    format!("{prefix}-{k:0width$}")
}

fn digits(n: usize) -> usize {
    n.max(1).to_string().len()
}

fn create(dir: &Path, name: &str) -> io::Result<BufWriter<File>> {
    let file = OpenOptions::new()
        .write(true)
        .create_new(true)
        .open(dir.join(name))?;
    Ok(BufWriter::with_capacity(1 << 20, file))
}

fn source_id(sources: &[Source], s: usize) -> String {
    let kind = sources[s].kind;
    let number = sources[..=s].iter().filter(|o| o.kind == kind).count();
    match kind {
        SourceKind::Reservoir => format!("R-{number}"),
        SourceKind::Tank => format!("T-{number}"),
    }
}

/// Writes the five files; returns the number of hydrants.
fn write_network(net: &Network, args: &Args, dir: &Path) -> io::Result<usize> {
    let out = Out {
        units: args.units,
        headloss: args.headloss,
    };
    let n = net.x.len();
    let jw = digits(n).max(6);
    let junction = |k: usize| id("J", k + 1, jw);
    let source_ids: Vec<String> = (0..net.sources.len())
        .map(|s| source_id(&net.sources, s))
        .collect();
    let node = |r: NodeRef| {
        if r >= SOURCE_BASE {
            source_ids[(r - SOURCE_BASE) as usize].clone()
        } else {
            junction(r as usize)
        }
    };

    let mut w = create(dir, "model.toml")?;
    writeln!(w, "# Synthetic network generated by examples/synthetic.rs")?;
    writeln!(
        w,
        "# --junctions {} --seed {} --units {} --headloss {} --hydrant-fraction {}",
        args.junctions,
        args.seed,
        units_name(args.units),
        headloss_name(args.headloss),
        args.hydrant_fraction
    )?;
    writeln!(
        w,
        "name = \"Synthetic city, {} junctions, seed {}\"",
        n, args.seed
    )?;
    writeln!(w, "units = \"{}\"", units_name(args.units))?;
    writeln!(w, "headloss = \"{}\"", headloss_name(args.headloss))?;
    writeln!(w, "[demand]")?;
    writeln!(w, "max_day_factor = {MAX_DAY_FACTOR:?}")?;
    writeln!(w, "peak_hour_factor = {PEAK_HOUR_FACTOR:?}")?;
    writeln!(w, "min_hour_factor = {MIN_HOUR_FACTOR:?}")?;
    w.flush()?;

    let mut w = create(dir, "junctions.csv")?;
    writeln!(w, "id,elevation,demand,x,y")?;
    for k in 0..n {
        writeln!(
            w,
            "{},{:.1},{:.2},{:.1},{:.1}",
            junction(k),
            out.length(net.elevation[k]),
            out.flow(net.demand[k]),
            out.length(net.x[k]),
            out.length(net.y[k])
        )?;
    }
    w.flush()?;

    let mut w = create(dir, "sources.csv")?;
    writeln!(w, "id,kind,grade,x,y")?;
    for (s, src) in net.sources.iter().enumerate() {
        let kind = match src.kind {
            SourceKind::Reservoir => "reservoir",
            SourceKind::Tank => "tank",
        };
        writeln!(
            w,
            "{},{kind},{:.1},{:.1},{:.1}",
            source_ids[s],
            out.length(src.grade),
            out.length(src.x),
            out.length(src.y)
        )?;
    }
    w.flush()?;

    let mut w = create(dir, "pipes.csv")?;
    writeln!(w, "id,from,to,length,diameter,roughness,material")?;
    let pw = digits(net.pipes.len()).max(6);
    for (k, p) in net.pipes.iter().enumerate() {
        writeln!(
            w,
            "{},{},{},{:.1},{},{},{}",
            id("P", k + 1, pw),
            node(p.from),
            node(p.to),
            out.length(p.length).max(0.1),
            out.diameter(p.size),
            out.roughness(p),
            p.material.code()
        )?;
    }
    w.flush()?;

    // Hydrants: an exact share of the junctions, drawn without replacement, in junction order.
    let count = (args.hydrant_fraction * n as f64).round() as usize;
    let mut rng = rng_for(args.seed, Stage::Hydrants);
    let mut chosen = rand::seq::index::sample(&mut rng, n, count).into_vec();
    chosen.sort_unstable();
    let mut w = create(dir, "hydrants.csv")?;
    writeln!(w, "id,junction,class,x,y")?;
    let hw = digits(count).max(5);
    for (h, &k) in chosen.iter().enumerate() {
        // The hydrant stands at the kerb a few metres from the main's junction.
        let a = rng.gen_range(0.0..2.0 * PI);
        let r = rng.gen_range(4.0..8.0);
        writeln!(
            w,
            "{},{},{},{:.1},{:.1}",
            id("H", h + 1, hw),
            junction(k),
            net.land_use[k].class(),
            out.length(net.x[k] + r * a.cos()),
            out.length(net.y[k] + r * a.sin())
        )?;
    }
    w.flush()?;
    Ok(count)
}

fn units_name(u: Units) -> &'static str {
    match u {
        Units::Us => "us",
        Units::Si => "si",
    }
}

fn headloss_name(h: Headloss) -> &'static str {
    match h {
        Headloss::HazenWilliams => "hazen-williams",
        Headloss::DarcyWeisbach => "darcy-weisbach",
    }
}

/// Creates `dir`, or accepts it if it exists and is empty.
fn prepare_dir(dir: &Path) -> Result<(), String> {
    match fs::read_dir(dir) {
        Ok(mut entries) => {
            if entries.next().is_some() {
                return Err(format!("{} exists and is not empty", dir.display()));
            }
            Ok(())
        }
        Err(e) if e.kind() == io::ErrorKind::NotFound => {
            fs::create_dir_all(dir).map_err(|e| format!("cannot create {}: {e}", dir.display()))
        }
        Err(e) => Err(format!("cannot use {}: {e}", dir.display())),
    }
}

/// One-paragraph summary on stderr, to check a generated network at a glance.
fn summarize(net: &Network, hydrants: usize, elapsed: f64) {
    let n = net.x.len();
    let total_demand: f64 = net.demand.iter().sum();
    let (lo, hi) = net
        .elevation
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(l, h), &e| {
            (l.min(e), h.max(e))
        });
    let hgl = net.sources.iter().map(|s| s.grade).sum::<f64>() / net.sources.len() as f64;
    let psi = |m: f64| m * G / 6.894_757;
    let count_size = |inch: u32| net.pipes.iter().filter(|p| p.size.inch == inch).count();
    let trunk: Vec<u32> = net
        .pipes
        .iter()
        .filter(|p| p.role == PipeRole::Transmission)
        .map(|p| p.size.inch)
        .collect();
    let old = net.old.iter().filter(|&&o| o).count();
    eprintln!(
        "{n} junctions ({} x {} grid), {} pipes, {} sources, {hydrants} hydrants in {elapsed:.2} s",
        net.grid.nx,
        net.grid.ny,
        net.pipes.len(),
        net.sources.len()
    );
    eprintln!(
        "  average-day demand {:.1} L/s ({:.3} L/s per junction); elevations {lo:.1}-{hi:.1} m; \
         static pressure {:.0}-{:.0} psi",
        total_demand,
        total_demand / n as f64,
        psi(hgl - hi),
        psi(hgl - lo)
    );
    eprintln!(
        "  street mains by size (in): 4: {}, 6: {}, 8: {}, 12: {}; old districts hold {:.1} % of \
         the junctions",
        count_size(4),
        count_size(6),
        count_size(8),
        count_size(12),
        100.0 * old as f64 / n as f64
    );
    eprintln!(
        "  {} transmission mains in {} segments, {} of them 16-24 in, the largest {} in",
        net.transmission_mains,
        trunk.len(),
        trunk.iter().filter(|&&d| d <= 24).count(),
        trunk.iter().max().unwrap_or(&0)
    );
}

/// Writes the US-unit, Hazen-Williams network of `junctions` junctions and `seed` into `out`
/// (which must not exist or be empty), as the command line would. Benchmarks include this file
/// as a module to make their networks.
pub fn write_us_network(junctions: u32, seed: u64, out: &Path) -> io::Result<()> {
    let args = Args {
        junctions,
        seed,
        out: out.to_path_buf(),
        units: Units::Us,
        headloss: Headloss::HazenWilliams,
        hydrant_fraction: 0.25,
    };
    prepare_dir(&args.out).map_err(io::Error::other)?;
    let net = generate(junctions as usize, seed);
    write_network(&net, &args, &args.out).map(|_| ())
}

fn main() -> ExitCode {
    let args = Args::parse();
    if let Err(e) = prepare_dir(&args.out) {
        eprintln!("error: {e}");
        return ExitCode::FAILURE;
    }
    let start = Instant::now();
    let net = generate(args.junctions as usize, args.seed);
    match write_network(&net, &args, &args.out) {
        Ok(hydrants) => {
            summarize(&net, hydrants, start.elapsed().as_secs_f64());
            ExitCode::SUCCESS
        }
        Err(e) => {
            eprintln!("error: writing {}: {e}", args.out.display());
            ExitCode::FAILURE
        }
    }
}
