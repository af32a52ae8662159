//! Reading a design file from disk and reporting its diagnostics on the terminal.
//!
//! In: a path. Out: the loaded design and the rendered diagnostics. The CLI's commands all
//! start here, so every command reports design problems the same way.

use std::io::IsTerminal;
use std::path::Path;

use crate::analysis::AnalysisError;
use crate::cli::{Failure, Level, problem};
use crate::design::Diagnostic;
use crate::design::{self, Design, Loaded};
use crate::report::template::{BUILT_IN, BUILT_IN_NAME, TemplateSource};

/// A design read from a file, with its findings rendered for the terminal.
pub struct LoadedFile {
    /// The path as the user gave it.
    pub name: String,
    /// The file's text.
    pub text: String,
    /// The design and its diagnostics.
    pub loaded: Loaded,
}

/// Reads `path` and checks it. A file that cannot be read is a [`Failure::Input`].
pub fn load_file(path: &Path) -> Result<LoadedFile, Failure> {
    let name = path.display().to_string();
    let text = std::fs::read_to_string(path).map_err(|e| {
        let hint = match e.kind() {
            std::io::ErrorKind::NotFound => "check the path; example designs are in designs/",
            std::io::ErrorKind::InvalidData => "the design file must be UTF-8 text",
            _ => "check that the file exists and can be read",
        };
        Failure::input(format_args!("cannot read `{name}`: {e}"), Some(hint))
    })?;
    let loaded = design::load(&text);
    Ok(LoadedFile { name, text, loaded })
}

impl LoadedFile {
    /// Every diagnostic rendered with its source excerpt, and a count line.
    pub fn report(&self) -> String {
        let color = std::io::stderr().is_terminal() && std::env::var_os("NO_COLOR").is_none();
        let mut out = String::new();
        for d in &self.loaded.diagnostics {
            out.push_str(&d.render(&self.name, &self.text, color));
            out.push('\n');
        }
        let (e, w) = (self.loaded.errors(), self.loaded.warnings());
        if e > 0 {
            out.push_str(&format!(
                "{}: {} error{}, {} warning{}; nothing was written\n",
                self.name,
                e,
                plural(e),
                w,
                plural(w)
            ));
        }
        out
    }

    /// The design, or the diagnostics as an input failure.
    pub fn design(&self) -> Result<&Design, Failure> {
        self.loaded.design.as_ref().ok_or_else(|| Failure::Input(self.report()))
    }
}

/// "s" unless one.
pub fn plural(n: usize) -> &'static str {
    if n == 1 { "" } else { "s" }
}

/// Reads the template named on the command line, or the built-in one; true when built in.
pub fn template_source(
    path: &Option<std::path::PathBuf>,
) -> Result<(TemplateSource, bool), Failure> {
    match path {
        None => Ok((TemplateSource { name: BUILT_IN_NAME.into(), text: BUILT_IN.into() }, true)),
        Some(p) => {
            let text = std::fs::read_to_string(p).map_err(|e| {
                Failure::input(
                    format_args!("cannot read template `{}`: {e}", p.display()),
                    Some("check the path"),
                )
            })?;
            Ok((TemplateSource { name: p.display().to_string(), text }, false))
        }
    }
}

/// An analysis failure as a located report when the design key at fault is known.
pub fn analysis_failure(file: &LoadedFile, e: &AnalysisError) -> String {
    let color = std::io::stderr().is_terminal() && std::env::var_os("NO_COLOR").is_none();
    let span = e
        .place
        .as_ref()
        .and_then(|p| file.loaded.design.as_ref().and_then(|d| d.places.get(p)).copied());
    let text = match span {
        Some(span) => Diagnostic::error("analysis", e.message.clone())
            .at(span, "here")
            .help(e.help.clone())
            .render(&file.name, &file.text, color),
        None => problem(Level::Error, &e.message, Some(&e.help)),
    };
    format!("{text}{}: the analysis failed; nothing was written\n", file.name)
}
