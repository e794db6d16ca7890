//! The insurance-rating formula, applied as its method file states it
//! (fire-flow-facts §7.1; docs/needed-fire-flow.md):
//!
//! ```text
//! C   = k · F · √A          rounded to the nearest c_rounding; within c_minimum and c_maximum
//!                           (by construction class; c_maximum_one_storey for one storey)
//! NFF = C · O · (1 + (X+P)) (X+P) at most exposure_cap; rounded by nff_rounding;
//!                           within nff_minimum and nff_maximum
//! ```
//!
//! A in the method's area unit (ft² for the shipped file), C and NFF in its flow unit (gpm).
//! One- and two-family dwellings take the flow of their separation band instead.

use super::method::{Band, Factor, Insurance, SeparationDwelling};
use super::{band_for, grouped, round_half_up, same_class, Calc, Figure, NeededFlowError};
use crate::units::Quantity;

pub(super) fn figure(calc: &mut Calc<'_>, r: &Insurance) -> Result<Figure, NeededFlowError> {
    let b = calc.building;
    if let Some(d) = &r.dwelling {
        if b.occupancy
            .as_deref()
            .is_some_and(|o| same_class(o, &d.occupancy))
        {
            return dwelling(calc, r, d);
        }
    }
    let mut occupancies: Vec<&str> = r.occupancy.iter().map(|f| f.class.as_str()).collect();
    if let Some(d) = &r.dwelling {
        occupancies.push(&d.occupancy);
    }
    let o = &r.occupancy[calc.class("occupancy", b.occupancy.as_deref(), &occupancies)?];
    let constructions: Vec<&str> = r.construction.iter().map(|f| f.class.as_str()).collect();
    let f =
        &r.construction[calc.class("construction", b.construction.as_deref(), &constructions)?];
    let sprinklers = sprinkler_class(calc, r)?;
    let area = calc.area("effective area A")?;
    let Some(stories) = b.stories else {
        return Err(calc.missing(
            "stories",
            "give the number of storeys (a one-storey building has a lower limit on C)".into(),
        ));
    };
    let Some(exposure) = b.exposure else {
        return Err(calc.missing(
            "exposure",
            "give the exposure and communication charge (X+P), 0 when there is none".into(),
        ));
    };
    let c = construction_factor(calc, r, f, area, stories);
    let nff = needed(calc, r, c, o, exposure);
    calc.step(format!(
        "sprinklers `{sprinklers}`: {} gives no sprinkler credit; none applied",
        calc.method.file
    ));
    let hours = calc.duration(&r.durations, nff);
    Ok(Figure { flow: nff, hours })
}

/// The sprinkler class must be one the file lists, though the formula gives it no credit.
fn sprinkler_class(calc: &Calc<'_>, r: &Insurance) -> Result<String, NeededFlowError> {
    let names: Vec<&str> = r.sprinklers.iter().map(|(k, _)| k.as_str()).collect();
    let i = calc.class("sprinklers", Some(&calc.building.sprinklers), &names)?;
    Ok(names[i].to_string())
}

/// C = k · F · √A, rounded, then held within its limits.
fn construction_factor(
    calc: &mut Calc<'_>,
    r: &Insurance,
    f: &Factor,
    area: f64,
    stories: u32,
) -> f64 {
    let flow = calc.method.units.symbol(Quantity::Flow);
    let k = &r.area_coefficient;
    let raw = k.value * f.value * area.sqrt();
    calc.step(format!(
        "C = {} × F {} ({}) × √{} {} = {} {flow}",
        grouped(k.value),
        one(f.value),
        f.class,
        grouped(area),
        calc.area_unit(),
        grouped(raw)
    ));
    calc.used(&k.source);
    calc.used(&f.source);
    let step = r.c_step.value;
    let mut c = round_half_up(raw, step);
    calc.step(format!(
        "C rounded to the nearest {} {flow}: {}",
        grouped(step),
        calc.flow_text(c)
    ));
    calc.used(&r.c_step.source);
    let by_class = r
        .c_maximum
        .iter()
        .find(|(classes, _)| classes.iter().any(|x| same_class(x, &f.class)))
        .map(|(_, d)| d);
    let mut max = by_class.cloned();
    if stories == 1
        && max
            .as_ref()
            .is_none_or(|m| r.c_maximum_one_storey.value < m.value)
    {
        max = Some(r.c_maximum_one_storey.clone());
    }
    if let Some(m) = max {
        if c > m.value {
            let why = if stories == 1 && m == r.c_maximum_one_storey {
                "for a one-storey building".to_string()
            } else {
                format!("for construction `{}`", f.class)
            };
            c = m.value;
            calc.step(format!(
                "C limited to the maximum {why}: {}",
                calc.flow_text(c)
            ));
            calc.used(&m.source);
        }
    }
    if c < r.c_minimum.value {
        c = r.c_minimum.value;
        calc.step(format!("C raised to the minimum: {}", calc.flow_text(c)));
        calc.used(&r.c_minimum.source);
    }
    c
}

/// NFF = C · O · (1 + (X+P)), the exposure capped, rounded, then held within its limits.
fn needed(calc: &mut Calc<'_>, r: &Insurance, c: f64, o: &Factor, exposure: f64) -> f64 {
    let flow = calc.method.units.symbol(Quantity::Flow);
    let cap = &r.exposure_cap;
    let xp = if exposure > cap.value {
        calc.step(format!(
            "(X+P) {} is above the cap {}: {} used",
            two(exposure),
            two(cap.value),
            two(cap.value)
        ));
        calc.used(&cap.source);
        cap.value
    } else {
        exposure
    };
    let raw = c * o.value * (1.0 + xp);
    calc.step(format!(
        "NFF = {} × O {} ({}) × (1 + {}) = {} {flow}",
        grouped(c),
        two(o.value),
        o.class,
        two(xp),
        grouped(raw)
    ));
    calc.used(&o.source);
    let (band, bound) = band_for(&r.nff_rounding, raw);
    let band: &Band = band;
    let mut nff = round_half_up(raw, band.value);
    calc.step(format!(
        "NFF rounded to the nearest {} {flow} (NFF {bound} {flow}): {}",
        grouped(band.value),
        calc.flow_text(nff)
    ));
    calc.used(&band.source);
    if nff > r.nff_maximum.value {
        nff = r.nff_maximum.value;
        calc.step(format!(
            "NFF limited to the maximum: {}",
            calc.flow_text(nff)
        ));
        calc.used(&r.nff_maximum.source);
    }
    if nff < r.nff_minimum.value {
        nff = r.nff_minimum.value;
        calc.step(format!(
            "NFF raised to the minimum: {}",
            calc.flow_text(nff)
        ));
        calc.used(&r.nff_minimum.source);
    }
    nff
}

/// One- and two-family dwellings: the flow of the separation band.
fn dwelling(
    calc: &mut Calc<'_>,
    r: &Insurance,
    d: &SeparationDwelling,
) -> Result<Figure, NeededFlowError> {
    let b = calc.building;
    let m = calc.method;
    if let Some(s) = b.stories.filter(|&s| s > d.max_stories) {
        return Err(NeededFlowError::NotCovered {
            building: b.id.clone(),
            field: "occupancy",
            message: format!(
                "the `{}` rule of {} covers dwellings of up to {} storeys, and this one has {s}",
                d.occupancy, m.file, d.max_stories
            ),
            fix: "classify the building by construction and occupancy class instead".into(),
        });
    }
    let sprinklers = sprinkler_class(calc, r)?;
    let Some(sep_m) = b.separation_m else {
        return Err(calc.missing(
            "separation",
            "give the distance to the nearest building (the dwelling rule goes by it)".into(),
        ));
    };
    let sep = m.units.from_si(Quantity::Length, sep_m);
    let sep = super::snap(sep);
    let (band, bound) = band_for(&d.rows, sep);
    let length = m.units.symbol(Quantity::Length);
    calc.step(format!(
        "one- or two-family dwelling, separation {} {length} ({bound} {length}): {}",
        grouped(sep),
        calc.flow_text(band.value)
    ));
    calc.used(&band.source.clone());
    calc.step(format!(
        "sprinklers `{sprinklers}`: {} gives no sprinkler credit; none applied",
        m.file
    ));
    let flow = band.value;
    let hours = calc.duration(&r.durations, flow);
    Ok(Figure { flow, hours })
}

/// A construction factor as the guide prints it: one decimal, two when it has them.
fn one(x: f64) -> String {
    if ((x * 10.0).round() - x * 10.0).abs() < 1e-9 {
        format!("{x:.1}")
    } else {
        two(x)
    }
}

/// A factor as the guide prints it: two decimals (`1.00`, `0.85`, `0.20`).
fn two(x: f64) -> String {
    format!("{x:.2}")
}
