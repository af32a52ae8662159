//! The design stage: a design file's text in, a validated [`Design`] out.
//!
//! Owns the YAML layer, quantities with units, the format's keys, and every check that can
//! be made without solving the circuit. In: the file's name and text (the caller reads the
//! file). Out: [`Loaded`], the design when it has no errors plus every finding located in
//! the file. Must not solve anything or print anything.

pub mod diagnostic;
pub mod fields;
pub mod project;
pub mod quantity;
pub mod reader;
pub mod schema;
pub mod series;
pub mod suggest;
pub mod toleranced;
pub mod topology;
pub mod types;
pub mod yaml;

pub use diagnostic::{Diagnostic, Severity, Span};
pub use types::*;

/// The outcome of reading one design file.
#[derive(Debug)]
pub struct Loaded {
    /// The design, when no error was found.
    pub design: Option<Design>,
    /// Every finding, errors and warnings, ordered by place in the file.
    pub diagnostics: Vec<Diagnostic>,
}

impl Loaded {
    /// Number of errors.
    pub fn errors(&self) -> usize {
        self.diagnostics.iter().filter(|d| d.is_error()).count()
    }

    /// Number of warnings.
    pub fn warnings(&self) -> usize {
        self.diagnostics.len() - self.errors()
    }
}

/// Reads and checks a design from its text.
pub fn load(text: &str) -> Loaded {
    load_with(text, &std::collections::BTreeMap::new(), None)
}

/// [`load`] under a project file's house style.
pub fn load_in(text: &str, project: Option<&std::sync::Arc<project::Project>>) -> Loaded {
    load_with(text, &std::collections::BTreeMap::new(), project)
}

/// [`load_in`] with some params replaced by SI values, their units kept (a what-if point).
pub fn load_with(
    text: &str,
    overrides: &std::collections::BTreeMap<String, f64>,
    project: Option<&std::sync::Arc<project::Project>>,
) -> Loaded {
    let root = match yaml::parse(text) {
        Ok(root) => root,
        Err(d) => return Loaded { design: None, diagnostics: vec![*d] },
    };
    let reader::Read { design, mut diagnostics } =
        reader::read_with(text, &root, overrides, project);
    if let Some(d) = &design {
        diagnostics.extend(topology::check(d));
    }
    let design = design.filter(|_| !diagnostics.iter().any(Diagnostic::is_error));
    diagnostics.sort_by_key(|d| (d.span.line, d.span.column));
    Loaded { design, diagnostics }
}
