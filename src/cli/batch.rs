//! Many designs per call: what the paths on the command line name (files, folders, glob
//! patterns), running one job per item in parallel with a progress bar on a terminal, one
//! summary line each, a total, and the worst status for `main`.
//!
//! In: the paths as typed. Out: the items, each job's result in the order given. The
//! subcommands own what a job does and what its line says.

use std::io::IsTerminal;
use std::path::{Path, PathBuf};

use indicatif::{ProgressBar, ProgressDrawTarget, ProgressStyle};
use rayon::prelude::*;

use crate::cli::{Failure, Outcome};
use crate::report::manifest;

/// The project file's name: never taken for a design when a folder is searched.
pub const PROJECT_FILE: &str = crate::design::project::FILE;

/// True when the paths ask for more than one run: several paths, a folder, or a pattern.
pub fn is_batch(paths: &[PathBuf]) -> bool {
    paths.len() > 1 || paths.iter().any(|p| p.is_dir() || is_pattern(p))
}

/// A path the shell left unexpanded: it holds a glob character and names no file.
pub fn is_pattern(path: &Path) -> bool {
    let text = path.to_string_lossy();
    text.contains(['*', '?', '[']) && !path.exists()
}

/// The design files the paths name: a file as given; a folder searched through (hidden
/// folders and rendered folders skipped) for YAML files that open with the format line
/// `tauweave: 1`; a glob pattern (`designs/*.yaml`, `**` for any depth) expanded, then each
/// match taken as a file or folder. Sorted within each path, in the order the paths were
/// given, each file once.
pub fn designs(paths: &[PathBuf]) -> Result<Vec<PathBuf>, Failure> {
    collect(paths, "design files", &|dir, out| design_files(dir, out))
}

/// The rendered folders the paths name: a folder holding a manifest as given; any other
/// folder searched through for them (a rendered folder is not searched inside).
pub fn rendered_folders(paths: &[PathBuf]) -> Result<Vec<PathBuf>, Failure> {
    let folders = collect(paths, "rendered folders", &|dir, out| {
        if dir.join(manifest::FILE).is_file() {
            out.push(dir.to_path_buf());
            Ok(())
        } else {
            folders_with_manifest(dir, out)
        }
    })?;
    // A pattern's matches that are files (`out/*` meeting a stray file) are no folders.
    Ok(folders.into_iter().filter(|f| f.is_dir() || !paths.iter().any(|p| is_pattern(p))).collect())
}

type Search = dyn Fn(&Path, &mut Vec<PathBuf>) -> std::io::Result<()>;

fn collect(paths: &[PathBuf], what: &str, search: &Search) -> Result<Vec<PathBuf>, Failure> {
    let mut out: Vec<PathBuf> = Vec::new();
    for path in paths {
        let matches = if is_pattern(path) { expand(path)? } else { vec![path.clone()] };
        let mut found = Vec::new();
        let pattern = is_pattern(path);
        for m in matches {
            if pattern && m.file_name().is_some_and(|n| n == PROJECT_FILE) {
                continue; // a pattern's match is a design, never the project file
            }
            if m.is_dir() {
                search(&m, &mut found).map_err(|e| {
                    Failure::input(format_args!("cannot search `{}`: {e}", m.display()), None)
                })?;
            } else {
                found.push(m);
            }
        }
        if found.is_empty() {
            return Err(Failure::input(
                format_args!("`{}` holds no {what}", path.display()),
                Some(
                    "name design files, folders that hold them, or a pattern such as `designs/*.yaml`",
                ),
            ));
        }
        found.sort();
        for f in found {
            // Each file once, however its path was written (`./x.yaml` and `x.yaml`).
            let same = |g: &PathBuf| match (g.canonicalize(), f.canonicalize()) {
                (Ok(a), Ok(b)) => a == b,
                _ => *g == f,
            };
            if !out.iter().any(same) {
                out.push(f);
            }
        }
    }
    Ok(out)
}

/// A glob pattern's matches, sorted.
fn expand(pattern: &Path) -> Result<Vec<PathBuf>, Failure> {
    let text = pattern.to_string_lossy();
    let bad = |e: String| {
        Failure::input(
            format_args!("`{text}` is not a pattern tauweave reads: {e}"),
            Some("`*` matches within a name, `**` any depth of folders, `?` one character"),
        )
    };
    let mut out = Vec::new();
    for entry in glob::glob(&text).map_err(|e| bad(e.to_string()))? {
        out.push(entry.map_err(|e| bad(e.to_string()))?);
    }
    Ok(out)
}

/// The folder's entries, sorted, hidden ones left out.
fn entries(dir: &Path) -> std::io::Result<Vec<PathBuf>> {
    let mut out = Vec::new();
    for entry in std::fs::read_dir(dir)? {
        let entry = entry?;
        if !entry.file_name().to_string_lossy().starts_with('.') {
            out.push(entry.path());
        }
    }
    out.sort();
    Ok(out)
}

fn design_files(dir: &Path, out: &mut Vec<PathBuf>) -> std::io::Result<()> {
    if dir.join(manifest::FILE).is_file() {
        // A rendered folder: its inputs/design.yaml is an archived copy, not a design.
        return Ok(());
    }
    for path in entries(dir)? {
        if path.is_dir() {
            design_files(&path, out)?;
        } else if is_design_file(&path) {
            out.push(path);
        }
    }
    Ok(())
}

/// A YAML file with the format line at the top level (not the project file).
fn is_design_file(path: &Path) -> bool {
    let yaml = path.extension().is_some_and(|e| e == "yaml" || e == "yml");
    if !yaml || path.file_name().is_some_and(|n| n == PROJECT_FILE) {
        return false;
    }
    std::fs::read_to_string(path)
        .is_ok_and(|text| text.lines().any(|l| l.trim_end().starts_with("tauweave:")))
}

fn folders_with_manifest(dir: &Path, out: &mut Vec<PathBuf>) -> std::io::Result<()> {
    for path in entries(dir)? {
        if !path.is_dir() {
            continue;
        }
        if path.join(manifest::FILE).is_file() {
            out.push(path);
        } else {
            folders_with_manifest(&path, out)?;
        }
    }
    Ok(())
}

/// Runs `job` on every item in parallel, the results in the items' order. On a terminal a
/// bar counts the finished items (standard error); off a terminal nothing is drawn.
pub fn run_all<T: Send>(
    items: &[PathBuf],
    verb: &str,
    job: impl Fn(&Path) -> T + Sync + Send,
) -> Vec<T> {
    let target = if std::io::stderr().is_terminal() {
        ProgressDrawTarget::stderr()
    } else {
        ProgressDrawTarget::hidden()
    };
    let bar = ProgressBar::with_draw_target(Some(items.len() as u64), target);
    let style = ProgressStyle::with_template("{msg:>10} {wide_bar} {pos}/{len} {elapsed}")
        .unwrap_or_else(|_| ProgressStyle::default_bar());
    bar.set_style(style);
    bar.set_message(verb.to_string());
    let results = items
        .par_iter()
        .map(|item| {
            let r = job(item);
            bar.inc(1);
            r
        })
        .collect();
    bar.finish_and_clear();
    results
}

/// The status of one item, ordered from best to worst.
#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord)]
pub enum Status {
    /// Ran and passed (identical, for `verify`).
    Pass,
    /// Ran and fails (differs, for `verify`).
    Fails,
    /// Could not run: bad input.
    Error,
    /// Could not run: a bug.
    Internal,
}

impl Status {
    /// The status of a command's result.
    pub fn of(result: &Result<Outcome, Failure>) -> Status {
        match result {
            Ok(Outcome::Done) => Status::Pass,
            Ok(Outcome::Failing) => Status::Fails,
            Err(Failure::Internal(_)) => Status::Internal,
            Err(_) => Status::Error,
        }
    }
}

/// The whole call's result from the worst status: exit 0, 1, 2 or 3 as for one design.
/// `total` is the line already printed; the failure repeats only what `main` must say.
pub fn outcome(worst: Option<Status>, errors: usize, noun: &str) -> Result<Outcome, Failure> {
    match worst {
        None | Some(Status::Pass) => Ok(Outcome::Done),
        Some(Status::Fails) => Ok(Outcome::Failing),
        Some(Status::Error) => Err(Failure::input(
            format_args!(
                "{errors} {noun}{} could not be read or analysed (the messages are above)",
                crate::cli::source::plural(errors)
            ),
            None,
        )),
        Some(Status::Internal) => {
            Err(Failure::Internal(format!("a {noun} met a bug (the message is above)")))
        }
    }
}

/// The gist of a failure's message for a summary line: its last unindented line (the count
/// line after a design's diagnostics, or the one-line problem), without the `error: ` and
/// without a leading `NAME: ` (the summary line names the file already).
pub fn gist(failure: &Failure, name: &str) -> String {
    let text = match failure {
        Failure::Usage(e) => e.to_string(),
        Failure::Input(t) | Failure::Internal(t) => t.clone(),
    };
    let line = text
        .lines()
        .rfind(|l| !l.trim().is_empty() && !l.starts_with([' ', '\t']))
        .unwrap_or("")
        .trim();
    let line = line.trim_start_matches("error: ");
    let line = line.strip_prefix(&format!("{name}: ")).unwrap_or(line);
    let line = crate::notation::visible(line);
    let line: String = line.chars().take(120).collect();
    line
}

/// A failure's whole message, as `main` would print it.
pub fn full_message(failure: &Failure) -> String {
    match failure {
        Failure::Usage(e) => e.to_string(),
        Failure::Input(t) => t.clone(),
        Failure::Internal(t) => format!("internal error: {t}\n"),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_worst_status_decides() {
        let all = [Status::Pass, Status::Fails, Status::Error];
        assert_eq!(all.iter().max(), Some(&Status::Error));
        assert!(matches!(outcome(Some(Status::Fails), 0, "design"), Ok(Outcome::Failing)));
        assert!(matches!(outcome(Some(Status::Pass), 0, "design"), Ok(Outcome::Done)));
        assert!(matches!(outcome(Some(Status::Error), 1, "design"), Err(Failure::Input(_))));
        assert!(matches!(outcome(Some(Status::Internal), 0, "design"), Err(Failure::Internal(_))));
    }

    #[test]
    fn a_folder_yields_its_designs_but_not_archives_or_the_project_file() {
        let dir = tempfile::tempdir().unwrap();
        let root = dir.path();
        std::fs::write(root.join("a.yaml"), "tauweave: 1\ndesign: {}\n").unwrap();
        std::fs::write(root.join("notes.yaml"), "title: not a design\n").unwrap();
        std::fs::write(root.join(PROJECT_FILE), "tauweave: 1\n").unwrap();
        std::fs::create_dir_all(root.join("sub")).unwrap();
        std::fs::write(root.join("sub/b.yml"), "tauweave: 1\n").unwrap();
        std::fs::create_dir_all(root.join("out/a/inputs")).unwrap();
        std::fs::write(root.join("out/a").join(manifest::FILE), "{}").unwrap();
        std::fs::write(root.join("out/a/inputs/design.yaml"), "tauweave: 1\n").unwrap();
        std::fs::create_dir_all(root.join(".hidden")).unwrap();
        std::fs::write(root.join(".hidden/c.yaml"), "tauweave: 1\n").unwrap();
        let found = designs(&[root.to_path_buf()]).unwrap();
        assert_eq!(found, vec![root.join("a.yaml"), root.join("sub/b.yml")]);
        let folders = rendered_folders(&[root.to_path_buf()]).unwrap();
        assert_eq!(folders, vec![root.join("out/a")]);
        let pattern = root.join("**/*.yml");
        assert_eq!(designs(&[pattern]).unwrap(), vec![root.join("sub/b.yml")]);
        assert!(designs(&[root.join("sub/*.json")]).is_err());
    }
}
