//! Operating states of check valves, pumps and control valves, and the rules that switch them.
//!
//! The rules are the usual complementarity conditions of each device (e.g. a check valve is
//! open only while its flow is forward, and closed only while the head behind it is not higher
//! than the head ahead). They are evaluated after the hydraulics have converged for the current
//! states; every switch is counted, and an element that has switched [`MAX_SWITCHES`] times
//! keeps its last state, so the outer loop always ends. Such an element is reported as one
//! whose control could not settle.

use crate::model::{Link, LinkKind, PipeStatus, ValveKind, ValveStatus};

/// Switches allowed per element and solve before its state is frozen.
pub const MAX_SWITCHES: u8 = 8;

/// Head margin for the switching rules, m: a state changes only when a rule is violated by
/// more than this (1 mm), so that round-off cannot flip it back and forth.
pub const SWITCH_HEAD_TOL_M: f64 = 1.0e-3;

/// Flow margin for the switching rules, m³/s (about 0.0016 gpm).
pub const SWITCH_FLOW_TOL_M3S: f64 = 1.0e-7;

/// The operating state of a link.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum LinkState {
    /// Pipes and valves: conducting by their head-loss law.
    Open,
    /// No flow (closed pipe or valve, check valve or control valve shut against reverse flow).
    Closed,
    /// Control valve holding its setting.
    Regulating,
    /// Pump on its curve.
    Running,
    /// Pump switched off by the user.
    Off,
    /// Pump asked for more head than its shutoff head: no flow.
    NoFlow,
}

impl LinkState {
    pub fn name(self) -> &'static str {
        match self {
            LinkState::Open => "open",
            LinkState::Closed => "closed",
            LinkState::Regulating => "regulating",
            LinkState::Running => "running",
            LinkState::Off => "off",
            LinkState::NoFlow => "no-flow",
        }
    }

    /// Whether the link carries flow by its law (a conductance in the matrix).
    pub fn conducts(self) -> bool {
        matches!(self, LinkState::Open | LinkState::Running)
    }
}

/// The state a link starts a cold solve in.
pub fn initial_state(link: &Link) -> LinkState {
    match &link.kind {
        LinkKind::Pipe(p) => match p.status {
            PipeStatus::Closed => LinkState::Closed,
            _ => LinkState::Open,
        },
        LinkKind::Pump(p) => {
            if p.on {
                LinkState::Running
            } else {
                LinkState::Off
            }
        }
        LinkKind::Valve(v) => match (v.status, v.kind) {
            (ValveStatus::Closed, _) => LinkState::Closed,
            (ValveStatus::Open, _) | (ValveStatus::Active, ValveKind::Throttle) => LinkState::Open,
            (ValveStatus::Active, _) => LinkState::Regulating,
        },
    }
}

/// Whether the user fixed the state (no rule ever changes it).
pub fn is_fixed(link: &Link) -> bool {
    match &link.kind {
        LinkKind::Pipe(p) => p.status != PipeStatus::Check,
        LinkKind::Pump(p) => !p.on,
        LinkKind::Valve(v) => v.status != ValveStatus::Active || v.kind == ValveKind::Throttle,
    }
}

/// What the rules see of a converged link.
pub struct LinkView {
    pub state: LinkState,
    /// Head at the from and to nodes, m.
    pub head_from: f64,
    pub head_to: f64,
    /// Flow from → to, m³/s.
    pub flow: f64,
    /// Set head of a PRV/PSV (m) or set flow of an FCV (m³/s).
    pub setting: f64,
    /// Loss of the wide-open valve at flow q (m), for valves.
    pub open_loss: fn(&Link, f64) -> f64,
    /// Shutoff head of a pump at its speed, m.
    pub shutoff_m: f64,
}

/// The state the rules ask for, given a converged solution in `view.state`.
pub fn next_state(link: &Link, v: &LinkView) -> LinkState {
    let (ht, hf, q) = (v.head_to, v.head_from, v.flow);
    match &link.kind {
        LinkKind::Pipe(_) => match v.state {
            LinkState::Open if q < -SWITCH_FLOW_TOL_M3S => LinkState::Closed,
            LinkState::Closed if hf - ht > SWITCH_HEAD_TOL_M => LinkState::Open,
            s => s,
        },
        LinkKind::Pump(_) => match v.state {
            LinkState::Running if q < -SWITCH_FLOW_TOL_M3S => LinkState::NoFlow,
            LinkState::NoFlow if ht - hf < v.shutoff_m - SWITCH_HEAD_TOL_M => LinkState::Running,
            s => s,
        },
        LinkKind::Valve(valve) => {
            let open_loss = |q: f64| (v.open_loss)(link, q);
            match valve.kind {
                ValveKind::Prv => prv_next_state(v, open_loss),
                ValveKind::Psv => psv_next_state(v, open_loss),
                ValveKind::Fcv => fcv_next_state(v, open_loss),
                ValveKind::Throttle => v.state,
            }
        }
    }
}

/// A PRV's next state: closed on reverse flow; regulating while its downstream head would
/// exceed the setting; open when the upstream head cannot reach the setting plus its own loss;
/// a closed one reopens when the upstream head exceeds a downstream head below the setting.
fn prv_next_state(v: &LinkView, open_loss: impl Fn(f64) -> f64) -> LinkState {
    let (ht, hf, q) = (v.head_to, v.head_from, v.flow);
    match v.state {
        LinkState::Regulating => {
            if q < -SWITCH_FLOW_TOL_M3S {
                LinkState::Closed
            } else if hf < v.setting + open_loss(q) - SWITCH_HEAD_TOL_M {
                LinkState::Open
            } else {
                LinkState::Regulating
            }
        }
        LinkState::Open => {
            if q < -SWITCH_FLOW_TOL_M3S {
                LinkState::Closed
            } else if ht > v.setting + SWITCH_HEAD_TOL_M {
                LinkState::Regulating
            } else {
                LinkState::Open
            }
        }
        LinkState::Closed => {
            if hf > ht + SWITCH_HEAD_TOL_M && ht < v.setting - SWITCH_HEAD_TOL_M {
                if hf > v.setting + SWITCH_HEAD_TOL_M {
                    LinkState::Regulating
                } else {
                    LinkState::Open
                }
            } else {
                LinkState::Closed
            }
        }
        s => s,
    }
}

/// A PSV's next state: closed on reverse flow; regulating while its upstream head would fall
/// below the setting; open when the downstream head plus its own loss exceeds the setting; a
/// closed one reopens when its upstream head exceeds both the setting and the downstream head.
fn psv_next_state(v: &LinkView, open_loss: impl Fn(f64) -> f64) -> LinkState {
    let (ht, hf, q) = (v.head_to, v.head_from, v.flow);
    match v.state {
        LinkState::Regulating => {
            if q < -SWITCH_FLOW_TOL_M3S {
                LinkState::Closed
            } else if ht + open_loss(q) > v.setting + SWITCH_HEAD_TOL_M {
                LinkState::Open
            } else {
                LinkState::Regulating
            }
        }
        LinkState::Open => {
            if q < -SWITCH_FLOW_TOL_M3S {
                LinkState::Closed
            } else if hf < v.setting - SWITCH_HEAD_TOL_M {
                LinkState::Regulating
            } else {
                LinkState::Open
            }
        }
        LinkState::Closed => {
            if hf > v.setting + SWITCH_HEAD_TOL_M && hf > ht + SWITCH_HEAD_TOL_M {
                if ht < v.setting - SWITCH_HEAD_TOL_M {
                    LinkState::Regulating
                } else {
                    LinkState::Open
                }
            } else {
                LinkState::Closed
            }
        }
        s => s,
    }
}

/// An FCV's next state: regulating while the flow would exceed the setting, open when the
/// head across it cannot drive the setting through the open valve.
fn fcv_next_state(v: &LinkView, open_loss: impl Fn(f64) -> f64) -> LinkState {
    let (ht, hf, q) = (v.head_to, v.head_from, v.flow);
    match v.state {
        LinkState::Regulating => {
            if hf - ht < open_loss(v.setting) - SWITCH_HEAD_TOL_M {
                LinkState::Open
            } else {
                LinkState::Regulating
            }
        }
        LinkState::Open if q > v.setting + SWITCH_FLOW_TOL_M3S => LinkState::Regulating,
        s => s,
    }
}

/// The state of a PRV or PSV whose controlled junction (a PRV's downstream end, a PSV's
/// upstream end) is held at `held_head` by the fire-flow search, when it was regulating: the
/// valve cannot hold a head that the request fixes, so it is wide open where its setting asks
/// for more flow (a PRV whose downstream head is below its setting, a PSV whose upstream head
/// is above it) and closed otherwise.
pub fn held_end_state(kind: Option<ValveKind>, held_head: f64, setting: f64) -> LinkState {
    let open = match kind {
        Some(ValveKind::Prv) => held_head < setting,
        Some(ValveKind::Psv) => held_head > setting,
        _ => true,
    };
    if open {
        LinkState::Open
    } else {
        LinkState::Closed
    }
}

/// The rules of a PRV or PSV whose controlled junction is held by the request (see
/// [`held_end_state`]): open while the held head is on the side of the setting where the valve
/// would open fully and the flow is forward; closed against reverse flow or when the held head
/// passes its setting; reopened when both allow it. Other links follow [`next_state`].
pub fn next_state_with_held_end(link: &Link, v: &LinkView) -> LinkState {
    let LinkKind::Valve(valve) = &link.kind else {
        return next_state(link, v);
    };
    let (hf, ht, q) = (v.head_from, v.head_to, v.flow);
    // Whether the held head asks the valve to be wide open.
    let wants_open = |tol: f64| match valve.kind {
        ValveKind::Prv => ht < v.setting - tol,
        ValveKind::Psv => hf > v.setting + tol,
        _ => true,
    };
    match v.state {
        LinkState::Open | LinkState::Regulating => {
            if q < -SWITCH_FLOW_TOL_M3S || !wants_open(-SWITCH_HEAD_TOL_M) {
                LinkState::Closed
            } else {
                LinkState::Open
            }
        }
        LinkState::Closed => {
            if hf > ht + SWITCH_HEAD_TOL_M && wants_open(SWITCH_HEAD_TOL_M) {
                LinkState::Open
            } else {
                LinkState::Closed
            }
        }
        s => s,
    }
}
