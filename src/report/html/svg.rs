//! SVG figures for the HTML report: the network map, a histogram and a supply-curve chart.
//! Each takes plain data in display units (already converted and labelled by the caller) and
//! returns markup; nothing here knows about hydraulics.

use std::fmt::Write as _;

use super::escape;

/// Width of a figure's coordinate box; map coordinates are rounded to whole units of it, which
/// keeps a 10k-junction map small (a 10,000-unit box is finer than any screen or page).
const MAP_BOX: f64 = 10_000.0;

/// A pipe of the map: its ends in the network's coordinates, its width class, and its class in
/// each colouring (`None`: drawn grey, "no value").
#[derive(Clone, Debug)]
pub struct MapPipe {
    pub from: [f64; 2],
    pub to: [f64; 2],
    pub width: usize,
    pub classes: Vec<Option<usize>>,
}

/// One way of colouring the pipes, with its legend.
#[derive(Clone, Debug)]
pub struct Colouring {
    /// What the user picks, e.g. "diameter".
    pub label: String,
    /// Legend entries (text, colour), one per class index.
    pub classes: Vec<(String, &'static str)>,
    /// What the grey pipes mean in this colouring, if any are grey.
    pub no_value: String,
    /// A sentence under the legend (what the values are and under which condition).
    pub note: String,
}

/// The shape of a hydrant's symbol: the outcome is told by shape and outline, not by colour.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Shape {
    /// Passes: a circle, thin outline.
    Circle,
    /// Fails: a triangle, thick outline.
    Triangle,
    /// No verified answer: a square, dashed outline.
    Square,
}

/// A hydrant of the map.
#[derive(Clone, Debug)]
pub struct MapHydrant {
    pub at: [f64; 2],
    pub shape: Shape,
    pub fill: &'static str,
    /// Hover text: id, required, available, limited by.
    pub title: String,
}

/// A legend entry for the hydrants: symbol and text.
#[derive(Clone, Debug)]
pub struct SymbolKey {
    pub shape: Shape,
    pub fill: &'static str,
    pub text: String,
}

/// Everything the map draws.
#[derive(Clone, Debug, Default)]
pub struct MapData {
    pub pipes: Vec<MapPipe>,
    /// Stroke width in screen pixels of each width class, and its legend text.
    pub widths: Vec<(String, f64)>,
    pub colourings: Vec<Colouring>,
    pub hydrants: Vec<MapHydrant>,
    pub hydrant_keys: Vec<SymbolKey>,
    /// Sources (reservoirs, tanks): position and id.
    pub sources: Vec<([f64; 2], String)>,
    /// Length unit symbol of the scale bar, and how many coordinate units make one of it
    /// (`None`: no scale bar, with `scale_note` saying why).
    pub scale: Option<(String, f64)>,
    pub scale_note: String,
}

/// The colour of pipes without a value in a colouring.
const NO_VALUE_GREY: &str = "#b8b8b8";

/// Where coordinates land in the box: shift and scale, y up (map convention) turned to SVG's
/// y down.
struct Frame {
    min: [f64; 2],
    scale: f64,
    height: f64,
    pad: f64,
}

impl Frame {
    fn new(points: impl Iterator<Item = [f64; 2]>) -> Option<Frame> {
        let (mut lo, mut hi) = ([f64::INFINITY; 2], [f64::NEG_INFINITY; 2]);
        for p in points.filter(|p| p[0].is_finite() && p[1].is_finite()) {
            for k in 0..2 {
                lo[k] = lo[k].min(p[k]);
                hi[k] = hi[k].max(p[k]);
            }
        }
        if !lo[0].is_finite() {
            return None;
        }
        let span = (hi[0] - lo[0]).max(hi[1] - lo[1]).max(1e-9);
        let scale = MAP_BOX / span;
        Some(Frame {
            min: lo,
            scale,
            height: ((hi[1] - lo[1]) * scale).max(MAP_BOX * 0.05),
            pad: MAP_BOX * 0.06,
        })
    }

    fn at(&self, p: [f64; 2]) -> (i64, i64) {
        let x = (p[0] - self.min[0]) * self.scale + self.pad;
        let y = self.height - (p[1] - self.min[1]) * self.scale + self.pad;
        (x.round() as i64, y.round() as i64)
    }

    fn view_box(&self) -> String {
        format!(
            "0 0 {} {}",
            (MAP_BOX + 2.0 * self.pad).round(),
            // One pad above the drawing, three below it for the scale bar.
            (self.height + 4.0 * self.pad).round()
        )
    }
}

/// The map's HTML: the colouring choice (radio buttons that work without script), the SVG,
/// and the legends. `symbol` is the hydrant symbol's half-size in coordinate units of the
/// network (`None`: chosen from the extent).
pub fn network_map(map: &MapData) -> String {
    let points = map
        .pipes
        .iter()
        .flat_map(|p| [p.from, p.to])
        .chain(map.hydrants.iter().map(|h| h.at))
        .chain(map.sources.iter().map(|s| s.0));
    let Some(frame) = Frame::new(points) else {
        return "<p>No map: no element of the network has coordinates (x, y).</p>\n".into();
    };
    let mut s = String::from("<div class=\"map\">\n");
    s.push_str("<div class=\"colouring\">Colour the pipes by:</div>\n");
    for (k, c) in map.colourings.iter().enumerate() {
        let checked = if k == 0 { " checked" } else { "" };
        let _ = writeln!(
            s,
            "<input type=\"radio\" name=\"colouring\" id=\"col-{k}\" class=\"no-print\"{checked}><label class=\"no-print\" for=\"col-{k}\">{}</label>",
            escape(&c.label)
        );
    }
    let _ = writeln!(
        s,
        "<svg xmlns=\"http://www.w3.org/2000/svg\" viewBox=\"{}\" role=\"img\" aria-label=\"network map\">",
        frame.view_box()
    );
    for k in 0..map.colourings.len() {
        s.push_str(&pipe_layer(map, &frame, k));
    }
    s.push_str(&sources_layer(map, &frame));
    s.push_str(&hydrant_layer(map, &frame));
    s.push_str(&scale_bar(map, &frame));
    s.push_str("</svg>\n<div class=\"legends\">\n");
    for (k, c) in map.colourings.iter().enumerate() {
        s.push_str(&colouring_legend(map, k, c));
    }
    s.push_str("</div>\n");
    s.push_str(&hydrant_legend(&map.hydrant_keys));
    if map.scale.is_none() && !map.scale_note.is_empty() {
        let _ = writeln!(s, "<p>{}</p>", escape(&map.scale_note));
    }
    s.push_str("</div>\n");
    s
}

/// The pipes of colouring `k`: one path per (colour, width) class, its segments chained where
/// one ends where the next begins, collinear middle points dropped.
fn pipe_layer(map: &MapData, frame: &Frame, k: usize) -> String {
    let mut groups: std::collections::BTreeMap<(usize, usize), Vec<&MapPipe>> = Default::default();
    for p in &map.pipes {
        // Grey ("no value") sorts first so that coloured pipes are drawn over it.
        let class = p.classes.get(k).copied().flatten().map_or(0, |c| c + 1);
        groups.entry((class, p.width)).or_default().push(p);
    }
    let colouring = &map.colourings[k];
    let mut s = format!("<g class=\"layer layer-{k}\" fill=\"none\" stroke-linecap=\"round\">\n");
    for ((class, width), pipes) in groups {
        let colour = match class {
            0 => NO_VALUE_GREY,
            c => colouring.classes.get(c - 1).map_or(NO_VALUE_GREY, |e| e.1),
        };
        let px = map.widths.get(width).map_or(1.0, |w| w.1);
        let _ = writeln!(
            s,
            "<path stroke=\"{colour}\" stroke-width=\"{px}\" vector-effect=\"non-scaling-stroke\" d=\"{}\"/>",
            chained_path(pipes.iter().map(|p| (frame.at(p.from), frame.at(p.to))))
        );
    }
    s.push_str("</g>\n");
    s
}

/// Path data for segments: `M` starts a chain, `L` continues it while each segment starts
/// where the previous one ended; a middle point on the straight line through its neighbours is
/// dropped.
fn chained_path(segments: impl Iterator<Item = ((i64, i64), (i64, i64))>) -> String {
    let mut chains: Vec<Vec<(i64, i64)>> = Vec::new();
    for (a, b) in segments {
        match chains.last_mut() {
            Some(chain) if chain.last() == Some(&a) => {
                let n = chain.len();
                if n >= 2 && collinear(chain[n - 2], chain[n - 1], b) {
                    chain[n - 1] = b;
                } else {
                    chain.push(b);
                }
            }
            _ => chains.push(vec![a, b]),
        }
    }
    let mut d = String::new();
    for chain in chains {
        for (i, (x, y)) in chain.iter().enumerate() {
            let _ = write!(d, "{}{x} {y}", if i == 0 { 'M' } else { 'L' });
        }
    }
    d
}

/// Whether `b` lies on the segment from `a` to `c`, pointing the same way (exact on integers).
fn collinear(a: (i64, i64), b: (i64, i64), c: (i64, i64)) -> bool {
    let (u, v) = ((b.0 - a.0, b.1 - a.1), (c.0 - b.0, c.1 - b.1));
    u.0 * v.1 - u.1 * v.0 == 0 && u.0 * v.0 + u.1 * v.1 > 0
}

/// Hydrant symbol half-size in box units: a fixed share of the box, so symbols stay visible on a
/// large network and do not swamp a small one.
fn symbol_size(count: usize) -> f64 {
    let share = if count > 500 { 0.004 } else { 0.008 };
    MAP_BOX * share
}

/// The SVG element of one symbol centred at (x, y) with half-size r.
fn symbol(shape: Shape, fill: &str, x: f64, y: f64, r: f64) -> String {
    match shape {
        Shape::Circle => format!(
            "<circle cx=\"{x}\" cy=\"{y}\" r=\"{r}\" fill=\"{fill}\" stroke=\"#222\" stroke-width=\"{}\"",
            (r * 0.18).round().max(1.0)
        ),
        Shape::Triangle => {
            let h = r * 1.25;
            format!(
                "<path d=\"M{x} {}L{} {}L{} {}Z\" fill=\"{fill}\" stroke=\"#000\" stroke-width=\"{}\"",
                y - h,
                x + h,
                y + h * 0.8,
                x - h,
                y + h * 0.8,
                (r * 0.4).round().max(1.0)
            )
        }
        Shape::Square => format!(
            "<rect x=\"{}\" y=\"{}\" width=\"{}\" height=\"{}\" fill=\"{fill}\" stroke=\"#000\" stroke-width=\"{}\" stroke-dasharray=\"{} {}\"",
            x - r,
            y - r,
            2.0 * r,
            2.0 * r,
            (r * 0.3).round().max(1.0),
            (r * 0.5).round().max(1.0),
            (r * 0.3).round().max(1.0)
        ),
    }
}

fn hydrant_layer(map: &MapData, frame: &Frame) -> String {
    let r = symbol_size(map.hydrants.len()).round();
    let mut s = String::from("<g class=\"hydrants\">\n");
    // Passing hydrants first, so that failing ones are drawn on top.
    let mut order: Vec<&MapHydrant> = map.hydrants.iter().collect();
    order.sort_by_key(|h| h.shape != Shape::Circle);
    for h in order {
        let (x, y) = frame.at(h.at);
        let _ = writeln!(
            s,
            "{}><title>{}</title></{}>",
            symbol(h.shape, h.fill, x as f64, y as f64, r),
            escape(&h.title),
            match h.shape {
                Shape::Circle => "circle",
                Shape::Triangle => "path",
                Shape::Square => "rect",
            }
        );
    }
    s.push_str("</g>\n");
    s
}

fn sources_layer(map: &MapData, frame: &Frame) -> String {
    let r = symbol_size(map.hydrants.len()) * 1.2;
    let mut s = String::from("<g class=\"sources\">\n");
    for (at, id) in &map.sources {
        let (x, y) = frame.at(*at);
        let _ = writeln!(
            s,
            "<rect x=\"{}\" y=\"{}\" width=\"{}\" height=\"{}\" fill=\"#1f3a93\" stroke=\"#000\"><title>source {}</title></rect><text x=\"{}\" y=\"{}\" font-size=\"{}\">{}</text>",
            x as f64 - r,
            y as f64 - r,
            2.0 * r,
            2.0 * r,
            escape(id),
            x as f64 + 1.4 * r,
            y as f64 + 0.5 * r,
            (1.8 * r).round(),
            escape(id)
        );
    }
    s.push_str("</g>\n");
    s
}

/// A round length of about a fifth of the map's width (1, 2 or 5 times a power of ten).
fn scale_length(width_units: f64) -> f64 {
    let target = width_units / 5.0;
    let p = 10f64.powf(target.log10().floor());
    [5.0, 2.0, 1.0]
        .into_iter()
        .map(|m| m * p)
        .find(|&l| l <= target)
        .unwrap_or(p)
}

fn scale_bar(map: &MapData, frame: &Frame) -> String {
    let Some((unit, coords_per_unit)) = &map.scale else {
        return String::new();
    };
    let width_units = MAP_BOX / frame.scale / coords_per_unit;
    let length = scale_length(width_units);
    let w = length * coords_per_unit * frame.scale;
    let (x, y) = (frame.pad, frame.height + frame.pad * 2.6);
    let t = (MAP_BOX * 0.004).round();
    format!(
        "<g class=\"scale\"><rect x=\"{x}\" y=\"{y}\" width=\"{}\" height=\"{t}\" fill=\"#000\"/><text x=\"{x}\" y=\"{}\" font-size=\"{}\">{} {}</text></g>\n",
        w.round(),
        (y - t).round(),
        (MAP_BOX * 0.018).round(),
        crate::report::num(length, 0),
        escape(unit)
    )
}

fn colouring_legend(map: &MapData, k: usize, c: &Colouring) -> String {
    let mut s = format!(
        "<div class=\"legend legend-{k}\"><strong>Pipes by {}:</strong> ",
        escape(&c.label)
    );
    for (text, colour) in &c.classes {
        let _ = write!(
            s,
            "<span class=\"key\">{}{}</span>",
            line_swatch(colour, 4.0),
            escape(text)
        );
    }
    if !c.no_value.is_empty() {
        let _ = write!(
            s,
            "<span class=\"key\">{}{}</span>",
            line_swatch(NO_VALUE_GREY, 4.0),
            escape(&c.no_value)
        );
    }
    s.push_str("<br>Line width by diameter: ");
    for (text, px) in &map.widths {
        let _ = write!(
            s,
            "<span class=\"key\">{}{}</span>",
            line_swatch("#555", *px),
            escape(text)
        );
    }
    if !c.note.is_empty() {
        let _ = write!(s, "<br>{}", escape(&c.note));
    }
    s.push_str("</div>\n");
    s
}

fn line_swatch(colour: &str, px: f64) -> String {
    format!(
        "<svg width=\"28\" height=\"12\" aria-hidden=\"true\"><line x1=\"2\" y1=\"6\" x2=\"26\" y2=\"6\" stroke=\"{colour}\" stroke-width=\"{px}\" stroke-linecap=\"round\"/></svg>"
    )
}

fn hydrant_legend(keys: &[SymbolKey]) -> String {
    let mut s = String::from("<div class=\"legend hydrant-legend\"><strong>Hydrants:</strong> ");
    for key in keys {
        let _ = write!(
            s,
            "<span class=\"key\"><svg width=\"22\" height=\"22\" viewBox=\"0 0 22 22\" aria-hidden=\"true\">{}/></svg>{}</span>",
            symbol(key.shape, key.fill, 11.0, 11.0, 6.0),
            escape(&key.text)
        );
    }
    s.push_str("</div>\n");
    s
}

/// A histogram's bars: bin edges (display units, increasing; one more than counts) and counts.
#[derive(Clone, Debug)]
pub struct Histogram {
    pub edges: Vec<f64>,
    pub counts: Vec<usize>,
    pub x_label: String,
    /// Vertical marks with their labels (e.g. class boundaries).
    pub marks: Vec<(f64, String)>,
}

/// Chart area of the small charts, in SVG units.
const CHART_W: f64 = 720.0;
const CHART_H: f64 = 300.0;
const LEFT: f64 = 64.0;
const BOTTOM: f64 = 48.0;
const TOP: f64 = 16.0;
const RIGHT: f64 = 20.0;

pub fn histogram(h: &Histogram) -> String {
    let (Some(&x0), Some(&x1)) = (h.edges.first(), h.edges.last()) else {
        return String::new();
    };
    let top = h.counts.iter().copied().max().unwrap_or(0).max(1) as f64;
    let (pw, ph) = (CHART_W - LEFT - RIGHT, CHART_H - TOP - BOTTOM);
    let sx = |x: f64| LEFT + (x - x0) / (x1 - x0).max(1e-12) * pw;
    let sy = |c: f64| TOP + ph - c / top * ph;
    let mut s = svg_open("histogram");
    for (i, &count) in h.counts.iter().enumerate() {
        let (a, b) = (sx(h.edges[i]), sx(h.edges[i + 1]));
        let _ = writeln!(
            s,
            "<rect x=\"{:.1}\" y=\"{:.1}\" width=\"{:.1}\" height=\"{:.1}\" fill=\"#5b7fa6\" stroke=\"#fff\"><title>{} to {}: {count}</title></rect>",
            a,
            sy(count as f64),
            (b - a).max(0.5),
            sy(0.0) - sy(count as f64),
            crate::report::num(h.edges[i], 0),
            crate::report::num(h.edges[i + 1], 0)
        );
    }
    // Each mark's label one line lower than the previous one, so that close marks stay legible.
    for (k, (x, label)) in h.marks.iter().filter(|m| m.0 > x0 && m.0 < x1).enumerate() {
        let _ = writeln!(
            s,
            "<line x1=\"{0:.1}\" x2=\"{0:.1}\" y1=\"{1}\" y2=\"{2}\" stroke=\"#000\" stroke-dasharray=\"4 3\"/><text x=\"{3:.1}\" y=\"{4}\" font-size=\"11\">{5}</text>",
            sx(*x),
            TOP,
            TOP + ph,
            sx(*x) + 3.0,
            TOP + 11.0 + 13.0 * k as f64,
            escape(label)
        );
    }
    s.push_str(&axes(
        &ticks(x0, x1)
            .into_iter()
            .map(|t| (sx(t), t))
            .collect::<Vec<_>>(),
        &ticks(0.0, top)
            .into_iter()
            .map(|t| (sy(t), t))
            .collect::<Vec<_>>(),
        &h.x_label,
        "hydrants",
    ));
    s.push_str("</svg>\n");
    s
}

fn svg_open(label: &str) -> String {
    format!(
        "<svg xmlns=\"http://www.w3.org/2000/svg\" viewBox=\"0 0 {CHART_W} {CHART_H}\" width=\"{CHART_W}\" role=\"img\" aria-label=\"{}\">\n",
        escape(label)
    )
}

/// Axes with tick labels: `xs` and `ys` are (position, value) pairs.
fn axes(xs: &[(f64, f64)], ys: &[(f64, f64)], x_label: &str, y_label: &str) -> String {
    let (x_end, y_end) = (CHART_W - RIGHT, CHART_H - BOTTOM);
    let mut s = format!(
        "<g stroke=\"#000\"><line x1=\"{LEFT}\" y1=\"{y_end}\" x2=\"{x_end}\" y2=\"{y_end}\"/><line x1=\"{LEFT}\" y1=\"{TOP}\" x2=\"{LEFT}\" y2=\"{y_end}\"/></g>\n<g font-size=\"11\">\n"
    );
    for &(x, v) in xs {
        let _ = writeln!(
            s,
            "<line x1=\"{x:.1}\" x2=\"{x:.1}\" y1=\"{y_end}\" y2=\"{}\" stroke=\"#000\"/><text x=\"{x:.1}\" y=\"{}\" text-anchor=\"middle\">{}</text>",
            y_end + 4.0,
            y_end + 16.0,
            tick_text(v)
        );
    }
    for &(y, v) in ys {
        let _ = writeln!(
            s,
            "<line x1=\"{}\" x2=\"{LEFT}\" y1=\"{y:.1}\" y2=\"{y:.1}\" stroke=\"#000\"/><line x1=\"{LEFT}\" x2=\"{x_end}\" y1=\"{y:.1}\" y2=\"{y:.1}\" stroke=\"#ddd\"/><text x=\"{}\" y=\"{:.1}\" text-anchor=\"end\">{}</text>",
            LEFT - 4.0,
            LEFT - 6.0,
            y + 4.0,
            tick_text(v)
        );
    }
    let _ = write!(
        s,
        "<text x=\"{:.1}\" y=\"{}\" text-anchor=\"middle\" font-size=\"12\">{}</text><text transform=\"translate(14 {:.1}) rotate(-90)\" text-anchor=\"middle\" font-size=\"12\">{}</text>\n</g>\n",
        LEFT + (x_end - LEFT) / 2.0,
        CHART_H - 8.0,
        escape(x_label),
        TOP + (y_end - TOP) / 2.0,
        escape(y_label)
    );
    s
}

fn tick_text(v: f64) -> String {
    let decimals = if v.abs() >= 10.0 || v.fract() == 0.0 {
        0
    } else if v.abs() >= 1.0 {
        1
    } else {
        2
    };
    crate::report::num(v, decimals)
}

/// Round tick values from `lo` to `hi`: steps of 1, 2 or 5 times a power of ten, about 5 to 10.
pub fn ticks(lo: f64, hi: f64) -> Vec<f64> {
    if hi <= lo || !lo.is_finite() || !hi.is_finite() {
        return vec![lo];
    }
    let raw = (hi - lo) / 6.0;
    let p = 10f64.powf(raw.log10().floor());
    let step = [1.0, 2.0, 5.0, 10.0]
        .into_iter()
        .map(|m| m * p)
        .find(|&s| s >= raw)
        .unwrap_or(10.0 * p);
    let first = (lo / step).ceil() as i64;
    let last = (hi / step).floor() as i64;
    (first..=last).map(|k| k as f64 * step).collect()
}

/// One line of a supply-curve chart: (flow, pressure) points in display units.
#[derive(Clone, Debug)]
pub struct Series {
    pub label: String,
    pub points: Vec<(f64, f64)>,
    pub colour: &'static str,
    /// Dash pattern ("" for a solid line); `None` draws markers only (field points).
    pub dash: Option<&'static str>,
    pub marker: Shape,
    /// A projection beyond the solved points: it does not widen the flow axis.
    pub projection: bool,
}

/// A supply-curve chart: pressures against fire flow, the abscissa proportional to Q^1.85 so
/// that a single-source supply curve (head loss ∝ Q^1.85) is a straight line (NFPA 291,
/// 2022 ed., §4.13.4: hydraulic graph paper).
#[derive(Clone, Debug)]
pub struct SupplyChart {
    pub series: Vec<Series>,
    pub flow_label: String,
    pub pressure_label: String,
    /// Horizontal line: the residual floor, and its label.
    pub floor: (f64, String),
    /// Vertical lines: (flow, label, dashed).
    pub flows: Vec<(f64, String, bool)>,
}

/// The exponent of the abscissa: Hazen-Williams' 1.85 (NFPA 291, 2022 ed., §4.13).
const ABSCISSA_EXPONENT: f64 = 1.85;

pub fn supply_chart(c: &SupplyChart) -> String {
    let all = || c.series.iter().flat_map(|s| s.points.iter().copied());
    // The flow axis spans the modelled curve (series with a line) and the marked flows; a field
    // projection far beyond is clipped, its value is in the caption.
    let q_max = c
        .series
        .iter()
        .filter(|s| s.dash.is_some() && !s.projection)
        .flat_map(|s| s.points.iter().map(|p| p.0))
        .chain(c.flows.iter().map(|f| f.0))
        .fold(0.0f64, f64::max)
        .max(1e-9);
    let p_hi = all().map(|p| p.1).chain([c.floor.0]).fold(0.0f64, f64::max) * 1.08;
    // A demand-driven model can compute pressures far below zero; the chart stops at minus the
    // floor and clips what lies below.
    let p_lo = all()
        .map(|p| p.1)
        .fold(0.0f64, f64::min)
        .max(-c.floor.0.abs());
    let (pw, ph) = (CHART_W - LEFT - RIGHT, CHART_H - TOP - BOTTOM);
    let sx = |q: f64| LEFT + (q.max(0.0) / q_max).powf(ABSCISSA_EXPONENT) * pw;
    let sy = |p: f64| TOP + ph - (p - p_lo) / (p_hi - p_lo).max(1e-9) * ph;
    let mut s = svg_open("supply curve");
    let _ = writeln!(
        s,
        "<defs><clipPath id=\"plot\"><rect x=\"{LEFT}\" y=\"{TOP}\" width=\"{pw}\" height=\"{ph}\"/></clipPath></defs>"
    );
    s.push_str(&axes(
        &flow_ticks(q_max)
            .into_iter()
            .map(|q| (sx(q), q))
            .collect::<Vec<_>>(),
        &ticks(p_lo, p_hi)
            .into_iter()
            .map(|p| (sy(p), p))
            .collect::<Vec<_>>(),
        &c.flow_label,
        &c.pressure_label,
    ));
    s.push_str("<g clip-path=\"url(#plot)\">\n");
    let _ = writeln!(
        s,
        "<line x1=\"{LEFT}\" x2=\"{0}\" y1=\"{1:.1}\" y2=\"{1:.1}\" stroke=\"#b00\" stroke-width=\"1.5\"/><text x=\"{2}\" y=\"{3:.1}\" font-size=\"11\" fill=\"#b00\" text-anchor=\"end\">{4}</text>",
        LEFT + pw,
        sy(c.floor.0),
        LEFT + pw - 4.0,
        sy(c.floor.0) - 4.0,
        escape(&c.floor.1)
    );
    for (q, label, dashed) in &c.flows {
        let _ = writeln!(
            s,
            "<line x1=\"{0:.1}\" x2=\"{0:.1}\" y1=\"{TOP}\" y2=\"{1}\" stroke=\"#333\"{2}/><text x=\"{3:.1}\" y=\"{4}\" font-size=\"11\" transform=\"rotate(-90 {3:.1} {4})\" text-anchor=\"end\">{5}</text>",
            sx(*q),
            TOP + ph,
            if *dashed { " stroke-dasharray=\"5 3\"" } else { "" },
            sx(*q) - 3.0,
            TOP + 2.0,
            escape(label)
        );
    }
    for series in &c.series {
        s.push_str(&series_marks(series, &sx, &sy));
    }
    s.push_str("</g>\n</svg>\n");
    s.push_str(&series_legend(&c.series));
    s
}

/// Tick flows for the Q^1.85 axis: round values, fewer near zero where they crowd together.
fn flow_ticks(q_max: f64) -> Vec<f64> {
    let all = ticks(0.0, q_max);
    let mut kept: Vec<f64> = Vec::new();
    for q in all {
        let at = (q / q_max).powf(ABSCISSA_EXPONENT);
        if kept
            .last()
            .is_none_or(|&p| at - (p / q_max).powf(ABSCISSA_EXPONENT) > 0.06)
        {
            kept.push(q);
        }
    }
    kept
}

fn series_marks(series: &Series, sx: &dyn Fn(f64) -> f64, sy: &dyn Fn(f64) -> f64) -> String {
    let mut s = String::new();
    if let Some(dash) = series.dash {
        let d: Vec<String> = series
            .points
            .iter()
            .map(|&(q, p)| format!("{:.1} {:.1}", sx(q), sy(p)))
            .collect();
        if d.len() >= 2 {
            let _ = writeln!(
                s,
                "<path d=\"M{}\" fill=\"none\" stroke=\"{}\" stroke-width=\"2\"{}/>",
                d.join("L"),
                series.colour,
                if dash.is_empty() {
                    String::new()
                } else {
                    format!(" stroke-dasharray=\"{dash}\"")
                }
            );
        }
    }
    for &(q, p) in &series.points {
        let _ = writeln!(
            s,
            "{}><title>{}: {} at {}</title></{}>",
            symbol(series.marker, series.colour, sx(q), sy(p), 3.5),
            escape(&series.label),
            crate::report::num(p, 1),
            crate::report::num(q, 0),
            match series.marker {
                Shape::Circle => "circle",
                Shape::Triangle => "path",
                Shape::Square => "rect",
            }
        );
    }
    s
}

fn series_legend(series: &[Series]) -> String {
    let keys: Vec<SymbolKey> = series
        .iter()
        .map(|s| SymbolKey {
            shape: s.marker,
            fill: s.colour,
            text: s.label.clone(),
        })
        .collect();
    hydrant_legend(&keys).replacen("<strong>Hydrants:</strong> ", "", 1)
}

#[cfg(test)]
mod tests {
    use super::*;

    // Geometry and tick rules of our own drawing: common practice, no source.
    #[test]
    fn chained_segments_share_points_and_drop_collinear_ones() {
        let d = chained_path(
            [
                ((0, 0), (5, 0)),
                ((5, 0), (10, 0)),
                ((10, 0), (10, 5)),
                ((20, 20), (30, 30)),
            ]
            .into_iter(),
        );
        assert_eq!(d, "M0 0L10 0L10 5M20 20L30 30");
    }

    #[test]
    fn a_reversal_is_not_collinear() {
        assert!(!collinear((0, 0), (5, 0), (2, 0)));
        assert!(collinear((0, 0), (5, 0), (9, 0)));
    }

    #[test]
    fn ticks_are_round_and_inside() {
        assert_eq!(
            ticks(0.0, 2600.0),
            vec![0.0, 500.0, 1000.0, 1500.0, 2000.0, 2500.0]
        );
        assert_eq!(scale_length(4300.0), 500.0);
    }

    #[test]
    fn a_map_without_coordinates_says_so() {
        assert!(network_map(&MapData::default()).contains("No map"));
    }

    #[test]
    fn the_abscissa_is_flow_to_the_1_85() {
        // Half the flow sits at 0.5^1.85 = 0.277 of the axis (NFPA 291 §4.13.4 graph paper).
        let chart = SupplyChart {
            series: vec![Series {
                label: "hydrant".into(),
                points: vec![(0.0, 80.0), (500.0, 60.0), (1000.0, 20.0)],
                colour: "#000",
                dash: Some(""),
                marker: Shape::Circle,
                projection: false,
            }],
            flow_label: "fire flow (gpm)".into(),
            pressure_label: "pressure (psi)".into(),
            floor: (20.0, "floor 20 psi".into()),
            flows: vec![],
        };
        let s = supply_chart(&chart);
        let x_half = LEFT + 0.5f64.powf(1.85) * (CHART_W - LEFT - RIGHT);
        assert!(
            s.contains(&format!("cx=\"{x_half}\"")) || s.contains(&format!("{x_half:.1} ")),
            "{s}"
        );
    }
}
