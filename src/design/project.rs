//! The project file: a design group's house style, found by walking up from a design's
//! folder: default tolerances, the default template and paper, the title block of every
//! review (organisation, document number, approvals, a logo), and shared requirement sets a
//! design includes by name.
//!
//! In: the project file's text. Out: [`LoadedProject`], the [`Project`] when it reads
//! cleanly plus every finding located in the project file. The design reader applies the
//! tolerances and requirement sets (`reader`); the CLI finds the file, reads the template
//! and logo it names, and archives all of it with each render. Must not touch the disk.

use std::collections::BTreeMap;

use serde::Serialize;

use crate::design::{Diagnostic, Requirements, Tolerance};

/// The project file's name.
pub const FILE: &str = "tauweave-project.yaml";

/// Placeholders a document number pattern may hold.
pub const NUMBER_FIELDS: &[&str] = &["id", "revision", "date", "year"];

/// A project file, read.
#[derive(Clone, Debug, Default, Serialize)]
pub struct Project {
    /// The organisation named in every review's title block.
    pub organisation: Option<String>,
    /// The document number pattern: `HLR-{id}-{revision}`.
    pub document_number: Option<String>,
    /// Who approves a review: role and name (empty for a signature).
    pub approvals: Vec<Approval>,
    /// A logo (`.svg` or `.png`), relative to the project file.
    pub logo: Option<String>,
    /// The default template, relative to the project file.
    pub template: Option<String>,
    /// The default paper: `a4` or `us-letter`.
    pub paper: Option<String>,
    /// Default tolerances by part kind, under a design's own `tolerances`.
    #[serde(skip)]
    pub tolerances: BTreeMap<&'static str, Tolerance>,
    /// Requirement sets by name, with what each set needs of the design's signal.
    #[serde(skip)]
    pub requirement_sets: BTreeMap<String, Requirements>,
}

/// One approval line of the title block.
#[derive(Clone, Debug, PartialEq, Eq, Serialize)]
pub struct Approval {
    /// `Designed`, `Checked`, `Approved`.
    pub role: String,
    /// The person, or empty for a signature by hand.
    pub name: String,
}

impl Project {
    /// The document number of a design: the pattern with `{id}`, `{revision}`, `{date}` and
    /// `{year}` filled in.
    pub fn number(&self, id: &str, revision: &str, date: &str) -> Option<String> {
        let pattern = self.document_number.as_ref()?;
        let year = date.get(..4).unwrap_or(date);
        Some(
            pattern
                .replace("{id}", id)
                .replace("{revision}", revision)
                .replace("{date}", date)
                .replace("{year}", year),
        )
    }
}

/// The outcome of reading a project file.
#[derive(Debug)]
pub struct LoadedProject {
    /// The project, when no error was found.
    pub project: Option<Project>,
    /// Every finding, ordered by place in the file.
    pub diagnostics: Vec<Diagnostic>,
}

/// Reads and checks a project file from its text.
pub fn load(text: &str) -> LoadedProject {
    let root = match crate::design::yaml::parse(text) {
        Ok(root) => root,
        Err(d) => return LoadedProject { project: None, diagnostics: vec![*d] },
    };
    let (project, mut diagnostics) = crate::design::reader::read_project(text, &root);
    let project = project.filter(|_| !diagnostics.iter().any(Diagnostic::is_error));
    diagnostics.sort_by_key(|d| (d.span.line, d.span.column));
    LoadedProject { project, diagnostics }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_document_number_fills_its_placeholders() {
        let p = Project {
            document_number: Some("HLR-{year}-{id}/{revision}".into()),
            ..Default::default()
        };
        assert_eq!(p.number("pre-1", "C", "2026-11-20").as_deref(), Some("HLR-2026-pre-1/C"));
    }
}
