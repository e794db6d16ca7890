//! Shared wording: how reports name network elements and put control notes into words.

use crate::model::{LinkKind, Network};
use crate::steady::{ControlNote, SteadyReport};

/// Junctions named in a cut-off note; the count gives the rest.
const CUT_OFF_SHOWN: usize = 10;

/// An element's id after its kind ("PRV X", "pump X"), the kind left out when the id already
/// starts with it: "PRV PRV-1" reads badly.
pub fn id_with_kind(kind: &str, id: &str) -> String {
    if id.to_lowercase().starts_with(&kind.to_lowercase()) {
        id.to_string()
    } else {
        format!("{kind} {id}")
    }
}

/// The assumption about hydrants for which hydrants.csv gives no lead, where there are any: the
/// loss between the main and the outlet is then not counted, which overstates what such a
/// hydrant delivers (docs/fire-flow-method.md, "Laterals").
pub fn hydrants_without_leads(net: &Network) -> Option<String> {
    let without = net.hydrants.iter().filter(|h| h.lateral.is_none()).count();
    (without > 0).then(|| {
        format!(
            "Hydrants for which hydrants.csv gives no lead ({without} of {}) are taken at their junction on the main: the head loss in the lead is not counted, which states more flow than such a hydrant delivers through a long or narrow lead.",
            net.hydrants.len()
        )
    })
}

/// A link as notes name it: valves by their kind (`PRV X`), other links as `pipe X`, `pump X`.
pub fn link_label(net: &Network, i: usize) -> String {
    let l = &net.links[i];
    let kind = match &l.kind {
        LinkKind::Valve(v) => v.kind.name().to_uppercase(),
        _ => l.kind_name().to_string(),
    };
    id_with_kind(&kind, &l.id)
}

/// What a note needs to name elements by index: a [`Network`], or a [`SteadyReport`] (whose
/// nodes and links are the network's, in the same order).
pub trait ElementIds {
    fn link_id(&self, i: usize) -> &str;
    /// `pipe`, `pump` or `valve`.
    fn link_kind(&self, i: usize) -> &str;
    fn node_id(&self, j: usize) -> &str;
}

impl ElementIds for Network {
    fn link_id(&self, i: usize) -> &str {
        &self.links[i].id
    }
    fn link_kind(&self, i: usize) -> &str {
        self.links[i].kind_name()
    }
    fn node_id(&self, j: usize) -> &str {
        &self.nodes[j].id
    }
}

impl ElementIds for SteadyReport {
    fn link_id(&self, i: usize) -> &str {
        &self.links[i].id
    }
    fn link_kind(&self, i: usize) -> &str {
        self.links[i].kind
    }
    fn node_id(&self, j: usize) -> &str {
        &self.nodes[j].id
    }
}

/// A control note in plain words.
pub fn control_note(ids: &impl ElementIds, note: &ControlNote) -> String {
    match note {
        ControlNote::ValveWideOpen { link, valve } => format!(
            "{} cannot hold its setting and is wide open",
            id_with_kind(&valve.name().to_uppercase(), ids.link_id(*link))
        ),
        ControlNote::ValveShut { link, valve } => format!(
            "{} is shut: the grade downstream is above the grade upstream",
            id_with_kind(&valve.name().to_uppercase(), ids.link_id(*link))
        ),
        ControlNote::PumpNoFlow { link } => format!(
            "{} delivers no flow: the head asked of it is above its shutoff head",
            id_with_kind("pump", ids.link_id(*link))
        ),
        ControlNote::Unsettled { link, state } => format!(
            "the state of {} did not settle; it was frozen as {}",
            id_with_kind(ids.link_kind(*link), ids.link_id(*link)),
            state.name()
        ),
        ControlNote::CutOff { junctions } => format!(
            "{} junction(s) without demand are cut off by closed elements and have no pressure: {}",
            junctions.len(),
            junctions
                .iter()
                .take(CUT_OFF_SHOWN)
                .map(|&j| ids.node_id(j))
                .collect::<Vec<_>>()
                .join(", ")
        ),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    // The rule of the wording itself: common practice, no source.
    #[test]
    fn the_kind_is_left_out_when_the_id_starts_with_it() {
        assert_eq!(id_with_kind("PRV", "PRV-1"), "PRV-1");
        assert_eq!(id_with_kind("PRV", "prv7"), "prv7");
        assert_eq!(id_with_kind("PRV", "V-1"), "PRV V-1");
        assert_eq!(id_with_kind("pump", "PU-1"), "pump PU-1");
        assert_eq!(id_with_kind("pump", "Pump-2"), "Pump-2");
    }
}
