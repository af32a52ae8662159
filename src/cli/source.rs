//! Reading a design file from disk and reporting its diagnostics on the terminal.
//!
//! In: a path. Out: the loaded design and the rendered diagnostics. The CLI's commands all
//! start here, so every command reports design problems the same way.

use std::io::IsTerminal;
use std::path::{Path, PathBuf};
use std::sync::Arc;

use crate::analysis::AnalysisError;
use crate::cli::{Failure, Level, problem};
use crate::design::Diagnostic;
use crate::design::project::{self, Project};
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
    /// The project file the design was read under, when one was found above it.
    pub project: Option<ProjectFile>,
}

/// A project file, read.
pub struct ProjectFile {
    /// Its path as found (or its archived copy's).
    pub name: String,
    /// The folder its paths (template, logo) are relative to.
    pub dir: PathBuf,
    /// Its text.
    pub text: String,
    /// The house style.
    pub project: Arc<Project>,
}

/// Reads `path` and checks it, under the project file found above it. A file that cannot
/// be read, or a project file with errors, is a [`Failure::Input`].
pub fn load_file(path: &Path) -> Result<LoadedFile, Failure> {
    // A rendered folder's design copy is read under the project file archived beside it.
    let found = archived_project(path).or_else(|| find_project(path));
    let project = match found {
        Some(found) => Some(read_project(&found)?),
        None => None,
    };
    load_under(path, project)
}

/// `DIR/inputs/project.yaml` when `path` is `DIR/inputs/design.yaml` of a rendered folder
/// whose manifest says a project file applied.
fn archived_project(path: &Path) -> Option<PathBuf> {
    let inputs = path.parent()?;
    let folder = inputs.parent()?;
    if inputs.file_name()? != "inputs" || path.file_name()? != "design.yaml" {
        return None;
    }
    let manifest = std::fs::read_to_string(folder.join(crate::report::manifest::FILE)).ok()?;
    let m: crate::report::manifest::Manifest = serde_json::from_str(&manifest).ok()?;
    m.recipe.project_name.as_ref()?;
    Some(folder.join(crate::report::manifest::PROJECT_COPY))
}

/// Reads `path` and checks it under `project`.
pub fn load_under(path: &Path, project: Option<ProjectFile>) -> Result<LoadedFile, Failure> {
    let name = path.display().to_string();
    let text = std::fs::read_to_string(path).map_err(|e| {
        let hint = match e.kind() {
            std::io::ErrorKind::NotFound => "check the path; example designs are in designs/",
            std::io::ErrorKind::InvalidData => "the design file must be UTF-8 text",
            _ => "check that the file exists and can be read",
        };
        Failure::input(format_args!("cannot read `{name}`: {e}"), Some(hint))
    })?;
    let loaded = design::load_in(&text, project.as_ref().map(|p| &p.project));
    Ok(LoadedFile { name, text, loaded, project })
}

/// The project file nearest above the design: in its folder, else the folder above, up to
/// the root of the file system.
pub fn find_project(design: &Path) -> Option<PathBuf> {
    // Resolved, so `../other/d.yaml` walks up from `other`, not from the current folder.
    let absolute = design.canonicalize().or_else(|_| std::path::absolute(design)).ok()?;
    absolute.ancestors().skip(1).map(|dir| dir.join(project::FILE)).find(|p| p.is_file())
}

/// Reads a project file; its errors, located in it, are a [`Failure::Input`].
pub fn read_project(path: &Path) -> Result<ProjectFile, Failure> {
    let name = path.display().to_string();
    let text = std::fs::read_to_string(path).map_err(|e| {
        Failure::input(
            format_args!("cannot read the project file `{name}`: {e}"),
            Some("the project file must be readable UTF-8 text"),
        )
    })?;
    let loaded = project::load(&text);
    let color = std::io::stderr().is_terminal() && std::env::var_os("NO_COLOR").is_none();
    let mut report = String::new();
    for d in &loaded.diagnostics {
        report.push_str(&d.render(&name, &text, color));
        report.push('\n');
    }
    let Some(p) = loaded.project else {
        let e = loaded.diagnostics.iter().filter(|d| d.is_error()).count();
        report.push_str(&format!(
            "{name}: {e} error{} in the project file; nothing was written\n",
            plural(e)
        ));
        return Err(Failure::Input(report));
    };
    if !report.is_empty() {
        eprint!("{report}");
    }
    let dir = path.parent().map_or_else(|| PathBuf::from("."), Path::to_path_buf);
    Ok(ProjectFile { name, dir, text, project: Arc::new(p) })
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
