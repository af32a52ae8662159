//! `tauweave render DESIGN`: analyses a design and writes its review into a folder:
//! report.html, report.md with plots/*.svg, report.typ and report.pdf (through typst, see
//! `pdf.rs`), results.json and sweep.csv, with the input copies and the manifest.
//!
//! The pipeline is `build.rs`'s; this file owns the flags and what the command prints. With
//! `--watch`, `cli::run` hands the same job to `watch.rs` instead.

use std::path::PathBuf;

use clap::Args;

use crate::cli::build::{
    BuildOptions, Drawings, Format, PaperSize, RenderJob, pdf_fatal, render_and_write,
};
use crate::cli::{Failure, Outcome};

/// Flags of `tauweave render`.
#[derive(Debug, Args)]
pub struct RenderArgs {
    /// The design file (YAML).
    pub design: PathBuf,
    /// What to write.
    #[arg(long, value_enum, default_value_t = Format::All)]
    pub format: Format,
    /// Output folder (default: out/<design id>/).
    #[arg(long)]
    pub out: Option<PathBuf>,
    /// A Markdown template of your own (start from `tauweave template show`).
    #[arg(long)]
    pub template: Option<PathBuf>,
    /// Monte Carlo runs (overrides the design's `analysis.monte_carlo.runs`; 0 skips it).
    #[arg(long)]
    pub runs: Option<u32>,
    /// Paper of the PDF packet.
    #[arg(long, value_enum, default_value_t = PaperSize::A4)]
    pub paper: PaperSize,
    /// The typst program for the PDF (default: $TAUWEAVE_TYPST, else `typst` on PATH).
    #[arg(long, value_name = "PATH")]
    pub typst: Option<PathBuf>,
    /// After the first render, render again whenever the design or the template changes.
    #[arg(long)]
    pub watch: bool,
}

impl RenderArgs {
    /// The render these flags ask for.
    pub fn job(&self) -> RenderJob {
        RenderJob {
            design: self.design.clone(),
            template: self.template.clone(),
            out: self.out.clone(),
            options: BuildOptions {
                format: self.format,
                runs: self.runs,
                paper: self.paper,
                typst: self.typst.clone(),
                drawings: Drawings::BesideDesign(
                    self.design
                        .parent()
                        .filter(|p| !p.as_os_str().is_empty())
                        .map_or_else(|| std::path::PathBuf::from("."), |p| p.to_path_buf()),
                ),
            },
        }
    }
}

/// Runs one render. Everything is written first; then a requirement that fails at nominal
/// values makes the exit code 1, as `check`'s does, with one line saying which.
pub fn run(args: &RenderArgs) -> Result<Outcome, Failure> {
    let written = render_and_write(&args.job())?;
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
    eprintln!("{}: fails {} at nominal values", args.design.display(), written.failing.join(", "));
    Ok(Outcome::Failing)
}
