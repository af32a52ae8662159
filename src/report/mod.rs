//! The report stage: results become files.
//!
//! In: a design, its [`crate::analysis::Analysis`] and the run's context (tool version,
//! input hashes). Out: results.json (the machine-readable results contract) written
//! atomically into the output folder. Knows nothing of how numbers were computed.

pub mod results;
pub mod write;
