//! One hydrant's result as one line of a journal, losslessly: every `f64` is stored as the 16
//! hex digits of its IEEE 754 bits, so that the files assembled from a journal are byte-identical
//! to those of an uninterrupted run (a decimal text would depend on the parser's rounding).
//!
//! The record mirrors [`HydrantResult`] field by field; the conversions below are exhaustive
//! (struct literals and `match`es without a catch-all), so a field or note added to the result
//! does not compile until the journal stores it too.

use serde::{Deserialize, Serialize};

use crate::criteria::RequiredSource;
use crate::fireflow::delivered::{DeliveredState, ShortJunction};
use crate::fireflow::supply_paths::PipeShare;
use crate::fireflow::{HydrantNote, HydrantResult, LimitedBy, Outcome, WorkByRole};
use crate::hydraulics::LinkState;
use crate::model::diagnostic::quoted;

/// An `f64` stored as the hex digits of its bits.
#[derive(Clone, Copy, Debug)]
pub struct Bits(pub f64);

impl Serialize for Bits {
    fn serialize<S: serde::Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        s.serialize_str(&format!("{:016x}", self.0.to_bits()))
    }
}

impl<'de> Deserialize<'de> for Bits {
    fn deserialize<D: serde::Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        let text = String::deserialize(d)?;
        if text.len() != 16 {
            return Err(serde::de::Error::custom(format!(
                "{} is not 16 hex digits",
                quoted(&text)
            )));
        }
        u64::from_str_radix(&text, 16)
            .map(|b| Bits(f64::from_bits(b)))
            .map_err(|_| {
                serde::de::Error::custom(format!("{} is not 16 hex digits", quoted(&text)))
            })
    }
}

fn bits(x: Option<f64>) -> Option<Bits> {
    x.map(Bits)
}

fn unbits(x: Option<Bits>) -> Option<f64> {
    x.map(|b| b.0)
}

/// One journal line: a hydrant's result.
#[derive(Debug, Serialize, Deserialize)]
pub struct Record {
    pub hydrant: usize,
    junction: usize,
    required_m3s: Bits,
    required_source: String,
    available_m3s: Option<Bits>,
    static_kpa: Option<Bits>,
    residual_kpa: Option<Bits>,
    min_pressure_kpa: Option<Bits>,
    min_pressure_junction: Option<usize>,
    critical_junction: Option<usize>,
    critical_link: Option<usize>,
    limited_by: Option<String>,
    outcome: String,
    notes: Vec<Note>,
    supply_paths: Vec<Share>,
    /// The pressure-dependent state at the required flow (`[fire] pressure_dependent`);
    /// absent in journals of runs without it.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    delivered: Option<Delivered>,
    solves: u32,
    iterations: u32,
    factorizations: u32,
}

#[derive(Debug, Serialize, Deserialize)]
struct Delivered {
    fire_flow_m3s: Bits,
    hydrant_kpa: Bits,
    min_customer: Option<(usize, Bits)>,
    short: Vec<Short>,
    customer_shortfall_m3s: Bits,
    supply_paths: Vec<Share>,
    iterations: u32,
    factorizations: u32,
}

#[derive(Debug, Serialize, Deserialize)]
struct Short {
    junction: usize,
    asked_m3s: Bits,
    delivered_m3s: Bits,
    pressure_kpa: Bits,
}

fn share_record(p: &PipeShare) -> Share {
    Share {
        link: p.link,
        share: Bits(p.share),
        weight: Bits(p.weight),
        headloss_m: Bits(p.headloss_m),
        unit_headloss: Bits(p.unit_headloss),
        velocity_m_per_s: Bits(p.velocity_m_per_s),
    }
}

fn share_result(p: Share) -> PipeShare {
    PipeShare {
        link: p.link,
        share: p.share.0,
        weight: p.weight.0,
        headloss_m: p.headloss_m.0,
        unit_headloss: p.unit_headloss.0,
        velocity_m_per_s: p.velocity_m_per_s.0,
    }
}

fn delivered_record(d: &DeliveredState) -> Delivered {
    Delivered {
        fire_flow_m3s: Bits(d.fire_flow_m3s),
        hydrant_kpa: Bits(d.hydrant_kpa),
        min_customer: d.min_customer_kpa.map(|(j, p)| (j, Bits(p))),
        short: d
            .short
            .iter()
            .map(|s| Short {
                junction: s.junction,
                asked_m3s: Bits(s.asked_m3s),
                delivered_m3s: Bits(s.delivered_m3s),
                pressure_kpa: Bits(s.pressure_kpa),
            })
            .collect(),
        customer_shortfall_m3s: Bits(d.customer_shortfall_m3s),
        supply_paths: d.supply_paths.iter().map(share_record).collect(),
        iterations: d.iterations,
        factorizations: d.factorizations,
    }
}

fn delivered_result(d: Delivered) -> DeliveredState {
    DeliveredState {
        fire_flow_m3s: d.fire_flow_m3s.0,
        hydrant_kpa: d.hydrant_kpa.0,
        min_customer_kpa: d.min_customer.map(|(j, p)| (j, p.0)),
        short: d
            .short
            .into_iter()
            .map(|s| ShortJunction {
                junction: s.junction,
                asked_m3s: s.asked_m3s.0,
                delivered_m3s: s.delivered_m3s.0,
                pressure_kpa: s.pressure_kpa.0,
            })
            .collect(),
        customer_shortfall_m3s: d.customer_shortfall_m3s.0,
        supply_paths: d.supply_paths.into_iter().map(share_result).collect(),
        iterations: d.iterations,
        factorizations: d.factorizations,
    }
}

#[derive(Debug, Serialize, Deserialize)]
struct Share {
    link: usize,
    share: Bits,
    weight: Bits,
    headloss_m: Bits,
    unit_headloss: Bits,
    velocity_m_per_s: Bits,
}

#[derive(Debug, Serialize, Deserialize)]
#[serde(tag = "note", rename_all = "snake_case")]
enum Note {
    FloorViolatedWithoutFireFlow {
        junction: usize,
        pressure_kpa: Bits,
    },
    VelocityExceededWithoutFireFlow {
        link: usize,
        velocity_m_per_s: Bits,
    },
    VelocityLimit {
        link: usize,
    },
    StateChanged {
        link: usize,
        from: String,
        to: String,
        at_flow_m3s: Bits,
    },
    SolveFailedAbove {
        flow_m3s: Bits,
        reason: String,
    },
    ResidualUnavailable {
        reason: String,
    },
    NonMonotone {
        passes_again_at_m3s: Bits,
    },
    RequiredAboveCap {
        cap_m3s: Bits,
    },
    UnsettledControls {
        links: Vec<usize>,
    },
    OtherStatesFail {
        reported_flow_m3s: Bits,
    },
    OtherStatesAbove {
        flow_m3s: Bits,
        links: Vec<usize>,
    },
    Error {
        reason: String,
    },
    DeliveredUnavailable {
        reason: String,
    },
}

const SOURCES: [RequiredSource; 3] = [
    RequiredSource::Hydrant,
    RequiredSource::Class,
    RequiredSource::Default,
];
const LIMITS: [LimitedBy; 5] = [
    LimitedBy::HydrantPressure,
    LimitedBy::SystemPressure,
    LimitedBy::Velocity,
    LimitedBy::Cap,
    LimitedBy::NoSolution,
];
const OUTCOMES: [Outcome; 3] = [Outcome::Pass, Outcome::Fail, Outcome::Error];
const STATES: [LinkState; 6] = [
    LinkState::Open,
    LinkState::Closed,
    LinkState::Regulating,
    LinkState::Running,
    LinkState::Off,
    LinkState::NoFlow,
];

fn source_name(s: RequiredSource) -> &'static str {
    match s {
        RequiredSource::Hydrant => "hydrant",
        RequiredSource::Class => "class",
        RequiredSource::Default => "default",
    }
}

/// The value of `all` whose name is `name`.
fn by_name<T: Copy>(
    all: &[T],
    name: &str,
    name_of: impl Fn(T) -> &'static str,
) -> Result<T, String> {
    all.iter()
        .copied()
        .find(|&v| name_of(v) == name)
        .ok_or_else(|| format!("unknown value `{name}`"))
}

impl Record {
    pub fn from_result(r: &HydrantResult) -> Record {
        Record {
            hydrant: r.hydrant,
            junction: r.junction,
            required_m3s: Bits(r.required_m3s),
            required_source: source_name(r.required_source).to_string(),
            available_m3s: bits(r.available_m3s),
            static_kpa: bits(r.static_kpa),
            residual_kpa: bits(r.residual_kpa),
            min_pressure_kpa: bits(r.min_pressure_kpa),
            min_pressure_junction: r.min_pressure_junction,
            critical_junction: r.critical_junction,
            critical_link: r.critical_link,
            limited_by: r.limited_by.map(|l| l.name().to_string()),
            outcome: r.outcome.name().to_string(),
            notes: r.notes.iter().map(note_record).collect(),
            supply_paths: r.supply_paths.iter().map(share_record).collect(),
            delivered: r.delivered.as_ref().map(delivered_record),
            solves: r.solves,
            iterations: r.iterations,
            factorizations: r.factorizations,
        }
    }

    /// The result this record stores; an error names the value that is not one of firemain's.
    pub fn into_result(self) -> Result<HydrantResult, String> {
        Ok(HydrantResult {
            hydrant: self.hydrant,
            junction: self.junction,
            required_m3s: self.required_m3s.0,
            required_source: by_name(&SOURCES, &self.required_source, source_name)?,
            available_m3s: unbits(self.available_m3s),
            static_kpa: unbits(self.static_kpa),
            residual_kpa: unbits(self.residual_kpa),
            min_pressure_kpa: unbits(self.min_pressure_kpa),
            min_pressure_junction: self.min_pressure_junction,
            critical_junction: self.critical_junction,
            critical_link: self.critical_link,
            limited_by: match &self.limited_by {
                Some(l) => Some(by_name(&LIMITS, l, LimitedBy::name)?),
                None => None,
            },
            outcome: by_name(&OUTCOMES, &self.outcome, Outcome::name)?,
            notes: self
                .notes
                .into_iter()
                .map(result_note)
                .collect::<Result<_, _>>()?,
            supply_paths: self.supply_paths.into_iter().map(share_result).collect(),
            delivered: self.delivered.map(delivered_result),
            solves: self.solves,
            iterations: self.iterations,
            factorizations: self.factorizations,
            // Not journalled: `--stats` gives the work by role of the hydrants analysed in
            // the run that prints it.
            work_by_role: WorkByRole::default(),
        })
    }
}

fn note_record(n: &HydrantNote) -> Note {
    match n {
        HydrantNote::FloorViolatedWithoutFireFlow {
            junction,
            pressure_kpa,
        } => Note::FloorViolatedWithoutFireFlow {
            junction: *junction,
            pressure_kpa: Bits(*pressure_kpa),
        },
        HydrantNote::VelocityExceededWithoutFireFlow {
            link,
            velocity_m_per_s,
        } => Note::VelocityExceededWithoutFireFlow {
            link: *link,
            velocity_m_per_s: Bits(*velocity_m_per_s),
        },
        HydrantNote::VelocityLimit { link } => Note::VelocityLimit { link: *link },
        HydrantNote::StateChanged {
            link,
            from,
            to,
            at_flow_m3s,
        } => Note::StateChanged {
            link: *link,
            from: from.name().to_string(),
            to: to.name().to_string(),
            at_flow_m3s: Bits(*at_flow_m3s),
        },
        HydrantNote::SolveFailedAbove { flow_m3s, reason } => Note::SolveFailedAbove {
            flow_m3s: Bits(*flow_m3s),
            reason: reason.clone(),
        },
        HydrantNote::ResidualUnavailable { reason } => Note::ResidualUnavailable {
            reason: reason.clone(),
        },
        HydrantNote::NonMonotone {
            passes_again_at_m3s,
        } => Note::NonMonotone {
            passes_again_at_m3s: Bits(*passes_again_at_m3s),
        },
        HydrantNote::RequiredAboveCap { cap_m3s } => Note::RequiredAboveCap {
            cap_m3s: Bits(*cap_m3s),
        },
        HydrantNote::UnsettledControls { links } => Note::UnsettledControls {
            links: links.clone(),
        },
        HydrantNote::OtherStatesFail { reported_flow_m3s } => Note::OtherStatesFail {
            reported_flow_m3s: Bits(*reported_flow_m3s),
        },
        HydrantNote::OtherStatesAbove { flow_m3s, links } => Note::OtherStatesAbove {
            flow_m3s: Bits(*flow_m3s),
            links: links.clone(),
        },
        HydrantNote::Error { reason } => Note::Error {
            reason: reason.clone(),
        },
        HydrantNote::DeliveredUnavailable { reason } => Note::DeliveredUnavailable {
            reason: reason.clone(),
        },
    }
}

fn result_note(n: Note) -> Result<HydrantNote, String> {
    Ok(match n {
        Note::FloorViolatedWithoutFireFlow {
            junction,
            pressure_kpa,
        } => HydrantNote::FloorViolatedWithoutFireFlow {
            junction,
            pressure_kpa: pressure_kpa.0,
        },
        Note::VelocityExceededWithoutFireFlow {
            link,
            velocity_m_per_s,
        } => HydrantNote::VelocityExceededWithoutFireFlow {
            link,
            velocity_m_per_s: velocity_m_per_s.0,
        },
        Note::VelocityLimit { link } => HydrantNote::VelocityLimit { link },
        Note::StateChanged {
            link,
            from,
            to,
            at_flow_m3s,
        } => HydrantNote::StateChanged {
            link,
            from: by_name(&STATES, &from, LinkState::name)?,
            to: by_name(&STATES, &to, LinkState::name)?,
            at_flow_m3s: at_flow_m3s.0,
        },
        Note::SolveFailedAbove { flow_m3s, reason } => HydrantNote::SolveFailedAbove {
            flow_m3s: flow_m3s.0,
            reason,
        },
        Note::ResidualUnavailable { reason } => HydrantNote::ResidualUnavailable { reason },
        Note::NonMonotone {
            passes_again_at_m3s,
        } => HydrantNote::NonMonotone {
            passes_again_at_m3s: passes_again_at_m3s.0,
        },
        Note::RequiredAboveCap { cap_m3s } => HydrantNote::RequiredAboveCap { cap_m3s: cap_m3s.0 },
        Note::UnsettledControls { links } => HydrantNote::UnsettledControls { links },
        Note::OtherStatesFail { reported_flow_m3s } => HydrantNote::OtherStatesFail {
            reported_flow_m3s: reported_flow_m3s.0,
        },
        Note::OtherStatesAbove { flow_m3s, links } => HydrantNote::OtherStatesAbove {
            flow_m3s: flow_m3s.0,
            links,
        },
        Note::Error { reason } => HydrantNote::Error { reason },
        Note::DeliveredUnavailable { reason } => HydrantNote::DeliveredUnavailable { reason },
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Values whose decimal text is hard to read back exactly: 0.1 (not a binary fraction),
    /// the smallest subnormal, -0.0, the largest finite, 1/3 (common practice, no source).
    const AWKWARD: [f64; 5] = [0.1, 5e-324, -0.0, f64::MAX, 1.0 / 3.0];

    fn sample() -> HydrantResult {
        HydrantResult {
            hydrant: 7,
            junction: 3,
            required_m3s: AWKWARD[0],
            required_source: RequiredSource::Class,
            available_m3s: Some(AWKWARD[4]),
            static_kpa: Some(AWKWARD[1]),
            residual_kpa: None,
            min_pressure_kpa: Some(AWKWARD[2]),
            min_pressure_junction: Some(2),
            critical_junction: None,
            critical_link: Some(9),
            limited_by: Some(LimitedBy::Velocity),
            outcome: Outcome::Fail,
            notes: vec![
                HydrantNote::FloorViolatedWithoutFireFlow {
                    junction: 1,
                    pressure_kpa: AWKWARD[3],
                },
                HydrantNote::VelocityExceededWithoutFireFlow {
                    link: 2,
                    velocity_m_per_s: 3.5,
                },
                HydrantNote::VelocityLimit { link: 4 },
                HydrantNote::StateChanged {
                    link: 5,
                    from: LinkState::Running,
                    to: LinkState::NoFlow,
                    at_flow_m3s: 0.07,
                },
                HydrantNote::SolveFailedAbove {
                    flow_m3s: 0.2,
                    reason: "no convergence \"quoted\"\n".into(),
                },
                HydrantNote::ResidualUnavailable {
                    reason: "why".into(),
                },
                HydrantNote::NonMonotone {
                    passes_again_at_m3s: 0.3,
                },
                HydrantNote::RequiredAboveCap { cap_m3s: 0.5 },
                HydrantNote::UnsettledControls { links: vec![1, 2] },
                HydrantNote::OtherStatesFail {
                    reported_flow_m3s: 0.01,
                },
                HydrantNote::OtherStatesAbove {
                    flow_m3s: 0.02,
                    links: vec![3],
                },
                HydrantNote::Error {
                    reason: "é".into()
                },
                HydrantNote::DeliveredUnavailable {
                    reason: "no solution".into(),
                },
            ],
            supply_paths: vec![PipeShare {
                link: 1,
                share: 0.6,
                weight: 1.0,
                headloss_m: 2.2,
                unit_headloss: 0.3,
                velocity_m_per_s: 1.1,
            }],
            delivered: Some(DeliveredState {
                fire_flow_m3s: AWKWARD[4],
                hydrant_kpa: AWKWARD[2],
                min_customer_kpa: Some((5, AWKWARD[1])),
                short: vec![ShortJunction {
                    junction: 5,
                    asked_m3s: 0.1,
                    delivered_m3s: AWKWARD[3],
                    pressure_kpa: 12.5,
                }],
                customer_shortfall_m3s: 0.05,
                supply_paths: vec![PipeShare {
                    link: 2,
                    share: 0.4,
                    weight: 0.5,
                    headloss_m: 1.2,
                    unit_headloss: 0.7,
                    velocity_m_per_s: 0.9,
                }],
                iterations: 6,
                factorizations: 6,
            }),
            solves: 11,
            iterations: 40,
            factorizations: 12,
            work_by_role: WorkByRole::default(),
        }
    }

    #[test]
    fn a_result_survives_a_journal_line_bit_for_bit() {
        let r = sample();
        let line = serde_json::to_string(&Record::from_result(&r)).unwrap();
        assert!(!line.contains('\n'), "one line");
        let back = serde_json::from_str::<Record>(&line)
            .unwrap()
            .into_result()
            .unwrap();
        // Debug prints every field; `{:?}` of an f64 is its shortest round-trip text, and the
        // bit patterns are compared as well below.
        assert_eq!(format!("{r:?}"), format!("{back:?}"));
        assert_eq!(
            back.min_pressure_kpa.map(f64::to_bits),
            Some((-0.0f64).to_bits())
        );
        assert_eq!(back.static_kpa.map(f64::to_bits), Some(1));
        assert_eq!(back.notes, r.notes);
    }

    #[test]
    fn an_unknown_name_is_an_error_not_a_panic() {
        let r = sample();
        let line = serde_json::to_string(&Record::from_result(&r))
            .unwrap()
            .replace("\"fail\"", "\"maybe\"");
        let err = serde_json::from_str::<Record>(&line)
            .unwrap()
            .into_result()
            .unwrap_err();
        assert!(err.contains("maybe"), "{err}");
    }
}
