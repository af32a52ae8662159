//! The circuit stage: a validated design becomes a numbered netlist, its DC operating point
//! and its small-signal network.
//!
//! In: a [`crate::design::Design`]. Out: the [`netlist::Netlist`], the
//! [`operating_point::OperatingPoint`] and the [`small_signal::LinearNetwork`] the analysis
//! works on. Knows nothing of frequency responses, templates or files.

pub mod bias_response;
pub mod devices;
pub mod netlist;
pub mod operating_point;
pub mod quasi_static;
pub mod small_signal;
