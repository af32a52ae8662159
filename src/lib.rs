//! tauweave: amplifier design-review documents from a YAML design file.
//!
//! The pipeline runs one way: [`design`] (YAML → validated design) → circuit → analysis →
//! report, with the command line on top in [`cli`]. Each stage is a module that owns one
//! step and never reaches back up. [`review`] is the library's entry point: it drives the
//! stages and returns a design's whole review as a value, with no I/O. [`notation`] is the
//! one place numbers become text.

pub mod analysis;
pub mod circuit;
pub mod cli;
pub mod design;
pub mod notation;
pub mod report;
pub mod review;
pub mod union_find;
