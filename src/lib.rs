//! firemain: hydrant-by-hydrant fire-flow and service-pressure screening of water distribution
//! networks.
//!
//! Data flows one way: [`model`] (read, validate, convert to SI) -> [`hydraulics`] (steady-state
//! solve) -> analyses -> report. The library never prints and never exits.

pub mod hydraulics;
pub mod model;
pub mod units;
