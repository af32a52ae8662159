//! The integration suite: one binary, a module per feature, fixtures under tests/.

mod archive;
mod bad_input;
mod closed_forms;
mod diff;
mod examples;
mod failures;
mod fuzz;
mod hardening;
mod identities;
mod large;
mod large_signal;
mod noise;
mod pdf;
mod ports;
mod properties;
mod reference;
mod report;
mod schema;
mod schematic;
mod supplies;
mod support;
mod tolerance;
mod watch;
mod what_if;
mod worked;
mod workflow;
