//! `tauweave render DESIGN…`: analyses a design and writes its review into a folder:
//! report.html, report.md with plots/*.svg, report.typ and report.pdf (through typst, see
//! `pdf.rs`), results.json and sweep.csv, with the input copies and the manifest.
//!
//! Several designs (files, folders, patterns) are rendered in parallel, each into its own
//! folder exactly as a render of it alone would write it, with one line each and a total.
//! The pipeline is `build.rs`'s; this file owns the flags and what the command prints. With
//! `--watch`, `cli::run` hands the same job to `watch.rs` instead.

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

use clap::Args;

use crate::cli::batch::{self, Status};
use crate::cli::build::{
    BuildOptions, Built, Drawings, Format, PaperSize, RenderJob, default_folder, pdf_fatal,
    prepare, render_and_write, write_built,
};
use crate::cli::{Failure, Outcome, out};

/// Flags of `tauweave render`.
#[derive(Debug, Args)]
pub struct RenderArgs {
    /// Design files (YAML), folders holding them, or patterns such as `designs/*.yaml`.
    #[arg(required = true, value_name = "DESIGN")]
    pub designs: Vec<PathBuf>,
    /// What to write.
    #[arg(long, value_enum, default_value_t = Format::All)]
    pub format: Format,
    /// Output folder (default: out/<design id>/); with several designs, the folder that
    /// receives one <design id>/ each.
    #[arg(long)]
    pub out: Option<PathBuf>,
    /// A Markdown template of your own (start from `tauweave template show`).
    #[arg(long)]
    pub template: Option<PathBuf>,
    /// Monte Carlo runs (overrides the design's `analysis.monte_carlo.runs`; 0 skips it).
    #[arg(long)]
    pub runs: Option<u32>,
    /// Paper of the PDF packet (default: the project file's, else a4).
    #[arg(long, value_enum)]
    pub paper: Option<PaperSize>,
    /// The typst program for the PDF (default: $TAUWEAVE_TYPST, else `typst` on PATH).
    #[arg(long, value_name = "PATH")]
    pub typst: Option<PathBuf>,
    /// After the first render, render again whenever the design or the template changes
    /// (one design only).
    #[arg(long)]
    pub watch: bool,
}

impl RenderArgs {
    /// The one design file named, when the flags name exactly one file.
    pub fn single(&self) -> Option<&Path> {
        (!batch::is_batch(&self.designs)).then(|| self.designs[0].as_path())
    }

    /// The render of `design` these flags ask for, written to `out`.
    pub fn job(&self, design: &Path, out: Option<PathBuf>) -> RenderJob {
        RenderJob {
            design: design.to_path_buf(),
            template: self.template.clone(),
            out,
            options: BuildOptions {
                format: self.format,
                runs: self.runs,
                paper: self.paper,
                typst: self.typst.clone(),
                drawings: Drawings::BesideDesign(
                    design
                        .parent()
                        .filter(|p| !p.as_os_str().is_empty())
                        .map_or_else(|| PathBuf::from("."), |p| p.to_path_buf()),
                ),
                progress: true,
            },
        }
    }
}

/// Runs the render: one design as before, several as a batch.
pub fn run(args: &RenderArgs) -> Result<Outcome, Failure> {
    match args.single() {
        Some(design) => run_one(args, design),
        None => run_batch(args),
    }
}

/// Runs one render. Everything is written first; then a requirement that fails at nominal
/// values makes the exit code 1, as `check`'s does, with one line saying which.
fn run_one(args: &RenderArgs, design: &Path) -> Result<Outcome, Failure> {
    let written = render_and_write(&args.job(design, args.out.clone()))?;
    eprint!("{}", written.notes);
    eprintln!("{}", written.summary());
    match &written.pdf_problem {
        Some(p) if pdf_fatal(args.format, p) => return Err(Failure::Input(p.message(true))),
        Some(p) => eprint!("{}", p.message(false)),
        None => {}
    }
    if written.failing.is_empty() {
        return Ok(Outcome::Done);
    }
    eprintln!("{}: fails {} at nominal values", design.display(), written.failing.join(", "));
    Ok(Outcome::Failing)
}

/// Renders every design named, in parallel, each into `--out`/<id>/ (default out/<id>/);
/// prints one line each and a total, and ends with the worst status. Two designs with the
/// same id would write the same folder: the second is refused.
fn run_batch(args: &RenderArgs) -> Result<Outcome, Failure> {
    let designs = batch::designs(&args.designs)?;
    let folder = |id: &str| match &args.out {
        Some(dir) => dir.join(id),
        None => default_folder(id),
    };
    let built: Vec<Result<Built, Failure>> = batch::run_all(&designs, "rendering", |d| {
        let mut job = args.job(d, None);
        job.options.progress = false;
        prepare(&job)
    });
    let mut taken: BTreeMap<PathBuf, &Path> = BTreeMap::new();
    let mut lines = String::new();
    let mut messages = String::new();
    let mut statuses = Vec::new();
    for (design, built) in designs.iter().zip(built) {
        let result = built.and_then(|b| {
            let dir = folder(&b.id);
            if let Some(first) = taken.get(&dir) {
                return Err(Failure::input(
                    format_args!(
                        "`{}` has the design id of `{}`, and both would be written to `{}`",
                        design.display(),
                        first.display(),
                        dir.display()
                    ),
                    Some("give each design its own `design.id`"),
                ));
            }
            taken.insert(dir.clone(), design);
            write_built(&args.job(design, Some(dir.clone())), b, dir)
        });
        let (status, line) = match result {
            Ok(w) => {
                messages.push_str(&w.notes);
                let pdf = match &w.pdf_problem {
                    Some(p) if pdf_fatal(args.format, p) => {
                        messages.push_str(&p.message(true));
                        Some(Status::Error)
                    }
                    Some(p) => {
                        messages.push_str(&p.message(false));
                        None
                    }
                    None => None,
                };
                let failing = !w.failing.is_empty();
                let status = pdf.unwrap_or(if failing { Status::Fails } else { Status::Pass });
                let what = if failing {
                    format!("  ({} at nominal values)", w.failing.join(", "))
                } else {
                    String::new()
                };
                (status, format!("{} → {}/{what}", design.display(), w.dir.display()))
            }
            Err(f) => {
                messages.push_str(&batch::full_message(&f));
                let why = batch::gist(&f, &design.display().to_string());
                (Status::of(&Err(f)), format!("{}  not rendered: {why}", design.display()))
            }
        };
        lines.push_str(&format!("{:<8}{line}\n", label(status)));
        statuses.push(status);
    }
    eprint!("{messages}");
    let count = |s: Status| statuses.iter().filter(|x| **x == s).count();
    let errors = count(Status::Error) + count(Status::Internal);
    lines.push_str(&format!(
        "{} design{} rendered: {} pass, {} fail a requirement at nominal values, {} not rendered\n",
        statuses.len(),
        crate::cli::source::plural(statuses.len()),
        count(Status::Pass),
        count(Status::Fails),
        errors
    ));
    out(&lines)?;
    batch::outcome(statuses.iter().copied().max(), errors, "design")
}

/// The first word of a summary line.
fn label(status: Status) -> &'static str {
    match status {
        Status::Pass => "pass",
        Status::Fails => "fails",
        Status::Error | Status::Internal => "error",
    }
}
