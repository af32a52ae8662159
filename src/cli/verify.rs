//! `tauweave verify DIR`: rebuilds a rendered folder from the inputs it holds and compares
//! the whole folder with the rebuild byte for byte, both ways: a file the rebuild does not
//! make, a file missing, a symbolic link or a changed byte is a difference. The manifest
//! only says how to rebuild; its names must be plain paths inside the folder.
//!
//! Exit 0 when everything is identical, 1 when a file differs or an input was changed
//! (the report says which, and for results.json which values and by how much), 2 when the
//! folder has no usable manifest, or when all is identical but a report.pdf could not be
//! rebuilt here (no typst): the verification is incomplete, and the message names the typst
//! version to install.

use std::path::PathBuf;

use clap::Args;

use crate::cli::build::{BuildOptions, Drawings, Format, PaperSize, build};
use crate::cli::pdf;
use crate::cli::source::LoadedFile;
use crate::cli::{Failure, Level, Outcome, out, problem};
use crate::notation::ABSENT;
use crate::report::manifest::{self, Manifest, sha256};
use crate::report::template::{BUILT_IN, BUILT_IN_NAME, TemplateSource};
use crate::report::write;

/// Flags of `tauweave verify`.
#[derive(Debug, Args)]
pub struct VerifyArgs {
    /// Folders written by `tauweave render`, or folders holding them (searched through, so a
    /// whole archive is one command), or patterns.
    #[arg(required = true, value_name = "DIR")]
    pub dirs: Vec<PathBuf>,
    /// The typst program, to rebuild a report.pdf (default: $TAUWEAVE_TYPST, else PATH).
    #[arg(long, value_name = "PATH")]
    pub typst: Option<PathBuf>,
}

/// Runs the verification: one rendered folder as before, or every one the paths name.
pub fn run(args: &VerifyArgs) -> Result<Outcome, Failure> {
    let one = &args.dirs[0];
    // One rendered folder, or one path that is none (its verification says why): verified
    // alone. A folder without a manifest is searched through, as several paths are.
    let rendered = one.join(manifest::FILE).is_file();
    if args.dirs.len() == 1 && (rendered || !(one.is_dir() || crate::cli::batch::is_pattern(one))) {
        return print(verify_folder(one, args.typst.as_ref(), true));
    }
    if args.dirs.len() == 1
        && one.is_dir()
        && crate::cli::batch::rendered_folders(&args.dirs).is_err()
    {
        // A folder that is no render and holds none: say why it cannot be verified.
        return print(verify_folder(one, args.typst.as_ref(), true));
    }
    run_batch(args)
}

/// Prints one verification's report and returns its result.
fn print(v: Verified) -> Result<Outcome, Failure> {
    eprint!("{}", v.notes);
    out(&v.report)?;
    v.result
}

/// What one verification found.
#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord)]
enum Finding {
    Identical,
    Changed,
    Incomplete,
    Unverifiable,
}

/// One verification: its report (standard output), its notes (standard error), the
/// finding, and the result the command would end with for this folder alone.
struct Verified {
    report: String,
    notes: String,
    finding: Finding,
    result: Result<Outcome, Failure>,
}

/// Verifies every rendered folder the paths name, in parallel: each folder's report, then a
/// total of identical / changed / incomplete / not verifiable; the worst status decides.
fn run_batch(args: &VerifyArgs) -> Result<Outcome, Failure> {
    use crate::cli::batch::{self, Status};
    let folders = batch::rendered_folders(&args.dirs)?;
    let all =
        batch::run_all(&folders, "verifying", |d| verify_folder(d, args.typst.as_ref(), false));
    let mut statuses = Vec::new();
    let mut counts = [0usize; 4];
    let mut report = String::new();
    for v in all {
        eprint!("{}", v.notes);
        report.push_str(&v.report);
        if let Err(f) = &v.result {
            let message = crate::cli::batch::full_message(f);
            if v.finding == Finding::Unverifiable {
                report
                    .push_str(&format!("unverifiable: {}", message.trim_start_matches("error: ")));
            } else {
                eprint!("{message}");
            }
        }
        counts[v.finding as usize] += 1;
        statuses.push(Status::of(&v.result));
    }
    report.push_str(&format!(
        "{} folder{} verified: {} identical, {} changed, {} incomplete, {} not verifiable\n",
        folders.len(),
        crate::cli::source::plural(folders.len()),
        counts[0],
        counts[1],
        counts[2],
        counts[3]
    ));
    out(&report)?;
    let problems = counts[2] + counts[3];
    batch::outcome(statuses.iter().copied().max(), problems, "folder")
}

/// Verifies one rendered folder.
fn verify_folder(dir: &std::path::Path, typst: Option<&PathBuf>, progress: bool) -> Verified {
    let mut report = String::new();
    let mut notes = String::new();
    let result = verify_into(dir, typst, progress, &mut report, &mut notes);
    let finding = match &result {
        Ok(Outcome::Done) => Finding::Identical,
        Ok(Outcome::Failing) => Finding::Changed,
        Err(_) if report.starts_with("incomplete") => Finding::Incomplete,
        Err(_) => Finding::Unverifiable,
    };
    Verified { report, notes, finding, result }
}

fn verify_into(
    dir: &std::path::Path,
    typst: Option<&PathBuf>,
    progress: bool,
    report: &mut String,
    notes: &mut String,
) -> Result<Outcome, Failure> {
    let help =
        format!("verify a folder written by `tauweave render` (it holds {})", manifest::FILE);
    let unusable = |why: String| {
        Failure::input(format_args!("`{}` cannot be verified: {why}", dir.display()), Some(&help))
    };
    let text = std::fs::read_to_string(dir.join(manifest::FILE))
        .map_err(|e| unusable(format!("no readable {}: {e}", manifest::FILE)))?;
    let m: Manifest = serde_json::from_str(&text)
        .map_err(|e| unusable(format!("{} does not read: {e}", manifest::FILE)))?;
    // Every name the manifest gives is a plain relative path inside the folder; anything
    // else (`/etc/passwd`, `../x`) is never opened.
    if let Some(bad) = m
        .inputs
        .keys()
        .chain(m.outputs.keys())
        .find(|p| !crate::design::fields::plain_relative_path(p))
    {
        return Err(unusable(format!(
            "{} names `{bad}`, which is not a file inside the folder",
            manifest::FILE
        )));
    }
    let mut problems = Vec::new();
    // The inputs must be the ones recorded.
    for (path, hash) in &m.inputs {
        match std::fs::read(dir.join(path)) {
            Ok(bytes) if sha256(&bytes) == *hash => {}
            Ok(_) => problems.push(format!("input {path} was changed after the render")),
            Err(e) if e.kind() == std::io::ErrorKind::NotFound => {
                // Without its inputs the folder cannot be rebuilt at all.
                return Err(unusable(format!(
                    "its archived input {path} is missing, so the review cannot be rebuilt \
                     (render the design again to archive it anew)"
                )));
            }
            Err(e) => problems.push(format!("input {path} cannot be read: {e}")),
        }
    }
    let design_text = std::fs::read_to_string(dir.join(manifest::DESIGN_COPY))
        .map_err(|e| unusable(format!("no design copy: {e}")))?;
    let recipe = &m.recipe;
    let template = match &recipe.template_name {
        None => (TemplateSource { name: BUILT_IN_NAME.into(), text: BUILT_IN.into() }, true),
        Some(name) => {
            let text = std::fs::read_to_string(dir.join(manifest::TEMPLATE_COPY))
                .map_err(|e| unusable(format!("no template copy: {e}")))?;
            (TemplateSource { name: name.clone(), text }, false)
        }
    };
    let options = BuildOptions {
        format: Format::from_name(&recipe.format).ok_or_else(|| {
            unusable(format!("unknown format `{}` in the manifest", recipe.format))
        })?,
        runs: Some(recipe.runs),
        paper: Some(PaperSize::from_name(&recipe.paper).ok_or_else(|| {
            unusable(format!("unknown paper `{}` in the manifest", recipe.paper))
        })?),
        typst: typst.cloned(),
        drawings: Drawings::Archived(dir.to_path_buf()),
        progress,
    };
    if m.version != env!("CARGO_PKG_VERSION") {
        notes.push_str(&format!(
            "note: rendered by tauweave {}, verifying with {}\n",
            m.version,
            env!("CARGO_PKG_VERSION")
        ));
    }
    // The project file as archived, never one found around the folder now.
    let project = match &recipe.project_name {
        Some(_) => Some(crate::cli::source::read_project(&dir.join(manifest::PROJECT_COPY))?),
        None => None,
    };
    let file = LoadedFile {
        name: recipe.design_name.clone(),
        loaded: crate::design::load_in(&design_text, project.as_ref().map(|p| &p.project)),
        text: design_text,
        project,
    };
    let built = build(&file, &template.0, template.1, &options)?;
    notes.push_str(&built.notes);
    // A report.pdf that cannot be rebuilt here (no typst, or it fails) is checked against
    // its SHA-256 only, and the verification is incomplete.
    let mut unverified = None;
    if m.outputs.contains_key(crate::report::PDF_FILE) {
        match built.pdf_problem {
            Some(problem) => unverified = Some(problem),
            None if built.typst_version != recipe.typst => notes.push_str(&format!(
                "note: report.pdf was made by {}, rebuilt by {}\n",
                recipe.typst.as_deref().unwrap_or("an unknown typst"),
                built.typst_version.as_deref().unwrap_or(ABSENT)
            )),
            None => {}
        }
    }
    let rebuilt = built.files;
    // The whole folder against the rebuild, both ways: every file there must be one the
    // rebuild makes, with the same bytes, and every file the rebuild makes must be there.
    let found =
        write::entries(dir).map_err(|e| unusable(format!("the folder cannot be read: {e}")))?;
    for (path, kind) in &found {
        if kind.is_symlink() {
            problems.push(format!("{path}: a symbolic link (a render never makes one)"));
        } else if kind.is_file() && !rebuilt.iter().any(|f| &f.path == path) {
            let unrebuilt_pdf = unverified.is_some() && path == crate::report::PDF_FILE;
            if !unrebuilt_pdf {
                problems
                    .push(format!("{path}: not part of the render (the rebuild does not make it)"));
            }
        }
    }
    let regular = |p: &str| found.iter().any(|(q, k)| q == p && k.is_file());
    for new in &rebuilt {
        let path = &new.path;
        if !regular(path) {
            problems.push(format!("{path}: missing from the folder"));
            continue;
        }
        let old = match std::fs::read(dir.join(path)) {
            Ok(b) => b,
            Err(e) => {
                problems.push(format!("{path}: cannot be read: {e}"));
                continue;
            }
        };
        if let Some(hash) = m.outputs.get(path).or_else(|| m.inputs.get(path)) {
            if sha256(&old) != *hash {
                problems.push(format!(
                    "{path}: changed after the render (its SHA-256 no longer matches the manifest)"
                ));
            }
        }
        let same = if unverified.is_some() && path == manifest::FILE {
            // Rebuilt without the PDF: the same manifest but for report.pdf and the typst
            // that made it.
            same_but_pdf(&old, &new.bytes)
        } else {
            old == new.bytes
        };
        if !same {
            problems.push(format!(
                "{path}: differs from the rebuild{}",
                difference(&old, &new.bytes, path)
            ));
        }
    }
    if unverified.is_some() {
        // The PDF that could not be rebuilt: checked against its recorded SHA-256 only.
        let pdf = crate::report::PDF_FILE;
        match (std::fs::read(dir.join(pdf)), m.outputs.get(pdf)) {
            (Ok(b), Some(hash)) if sha256(&b) == *hash => {}
            (Ok(_), _) => problems.push(format!(
                "{pdf}: changed after the render (its SHA-256 no longer matches the manifest)"
            )),
            (Err(e), _) => problems.push(format!("{pdf}: cannot be read: {e}")),
        }
    }
    let dir = dir.display();
    let compared = rebuilt.len();
    if !problems.is_empty() {
        let s = if problems.len() == 1 { "" } else { "s" };
        report.push_str(&format!("differs: {} problem{s} in {dir}\n", problems.len()));
        for p in &problems {
            report.push_str(&format!("  {p}\n"));
        }
    } else if unverified.is_some() {
        report.push_str(&format!(
            "incomplete: report.pdf not verified, the other {compared} files identical in {dir}\n"
        ));
    } else {
        report.push_str(&format!("identical: {compared} files rebuilt from {dir} byte for byte\n"));
        return Ok(Outcome::Done);
    }
    let Some(pdf_problem) = unverified else { return Ok(Outcome::Failing) };
    // Exit 1 when something differs, else 2: the verification is incomplete.
    let fatal = problems.is_empty();
    let level = if fatal { Level::Error } else { Level::Warning };
    let help = format!(
        "install the typst that made it with `{}`, or name the program with --typst PATH or {}",
        pdf::install_for(recipe.typst.as_deref()),
        pdf::ENV
    );
    let what = format!("report.pdf cannot be verified here: {}", pdf_problem.reason());
    let message = problem(level, &what, Some(&help));
    if fatal {
        return Err(Failure::Input(message));
    }
    notes.push_str(&message);
    Ok(Outcome::Failing)
}

/// Two manifests equal once report.pdf and the typst version are left out of both.
fn same_but_pdf(a: &[u8], b: &[u8]) -> bool {
    let strip = |bytes: &[u8]| {
        serde_json::from_slice::<Manifest>(bytes).ok().map(|mut m| {
            m.outputs.remove(crate::report::PDF_FILE);
            m.recipe.typst = None;
            m
        })
    };
    matches!((strip(a), strip(b)), (Some(x), Some(y)) if x == y)
}

/// Where two versions of an output differ: for JSON the values that changed, else the first
/// byte that differs.
fn difference(old: &[u8], new: &[u8], path: &str) -> String {
    let mut detail = String::new();
    if path.ends_with(".json") {
        if let (Ok(a), Ok(b)) = (
            serde_json::from_slice::<serde_json::Value>(old),
            serde_json::from_slice::<serde_json::Value>(new),
        ) {
            let mut diffs = Vec::new();
            manifest::json_differences(&a, &b, "", &mut diffs);
            for d in diffs.iter().take(20) {
                detail.push_str(&format!("\n    {d}"));
            }
            if diffs.len() > 20 {
                detail.push_str(&format!("\n    … and {} more", diffs.len() - 20));
            }
        }
    }
    if detail.is_empty() {
        let at = old.iter().zip(new).position(|(a, b)| a != b).unwrap_or(old.len().min(new.len()));
        detail = format!(" (first difference at byte {at})");
    }
    detail
}
