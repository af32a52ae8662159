//! `tauweave render DESIGN`: analyses a design and writes its review into a folder:
//! report.html, report.md with plots/*.svg, report.typ and report.pdf (through typst, see
//! `pdf.rs`), results.json and sweep.csv, with the input copies and the manifest.
//!
//! Every file is written atomically (temporary file in the same folder, then rename);
//! nothing is written when the design, its analysis or the template fails. With `--watch`,
//! `watch.rs` calls [`render_and_write`] again on every change of the inputs.

use std::path::PathBuf;

use clap::{Args, ValueEnum};

use crate::cli::pdf::{self, PdfProblem};
use crate::cli::source::{analysis_failure, load_file};
use crate::cli::{Failure, Outcome};
use crate::report::manifest::{self, Recipe};
use crate::report::template::{BUILT_IN, BUILT_IN_NAME, TemplateSource};
use crate::report::typst::Paper;
use crate::report::{self, Formats, Inputs, OutputFile, write};

/// Output formats.
#[derive(Clone, Copy, Debug, PartialEq, Eq, ValueEnum)]
pub enum Format {
    /// Everything: HTML, Markdown with plots, PDF (when typst is found), results.json, sweep.csv.
    All,
    /// report.html, self-contained (and results.json, sweep.csv).
    Html,
    /// report.md with plots/*.svg (and results.json, sweep.csv).
    Md,
    /// report.pdf through typst, with report.typ and plots/*.svg (and results.json, sweep.csv).
    Pdf,
    /// results.json and sweep.csv only.
    Json,
}

impl Format {
    /// Its name on the command line and in the manifest.
    pub fn name(self) -> &'static str {
        match self {
            Format::All => "all",
            Format::Html => "html",
            Format::Md => "md",
            Format::Pdf => "pdf",
            Format::Json => "json",
        }
    }

    /// The format named `name` (as in a manifest).
    pub fn from_name(name: &str) -> Option<Format> {
        Format::value_variants().iter().copied().find(|f| f.name() == name)
    }
}

/// Paper sizes of the PDF packet.
#[derive(Clone, Copy, Debug, PartialEq, Eq, ValueEnum)]
pub enum PaperSize {
    /// ISO A4 (210 mm × 297 mm).
    A4,
    /// US Letter (8.5 in × 11 in).
    UsLetter,
}

impl PaperSize {
    /// Its name on the command line and in the manifest: typst's own name for the paper
    /// (clap derives the same spelling for the flag).
    pub fn name(self) -> &'static str {
        self.paper().typst_name()
    }

    /// The paper named `name` (as in a manifest).
    pub fn from_name(name: &str) -> Option<PaperSize> {
        PaperSize::value_variants().iter().copied().find(|p| p.name() == name)
    }

    fn paper(self) -> Paper {
        match self {
            PaperSize::A4 => Paper::A4,
            PaperSize::UsLetter => Paper::UsLetter,
        }
    }
}

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

/// Runs the tolerance study with a progress bar on a terminal.
pub fn run_study(
    design: &crate::design::Design,
    analysis: &crate::analysis::Analysis,
    runs: Option<u32>,
) -> Result<crate::analysis::tolerance::Study, Failure> {
    use std::io::IsTerminal;
    let nominal = crate::analysis::metrics(design)
        .map_err(|e| Failure::Input(format!("error: {}\n  help: {}\n", e.message, e.help)))?;
    let names: Vec<String> = analysis
        .operating_point
        .as_ref()
        .map(|op| op.devices.iter().map(|d| d.bias.part.clone()).collect())
        .unwrap_or_default();
    let runs = runs.unwrap_or(design.analysis.monte_carlo_runs);
    let bar = if std::io::stderr().is_terminal() && runs >= 500 {
        let b = indicatif::ProgressBar::new(runs as u64);
        b.set_message("Monte Carlo");
        b
    } else {
        indicatif::ProgressBar::hidden()
    };
    let study =
        crate::analysis::tolerance::study(design, &nominal, &names, runs, &|n| bar.set_position(n));
    bar.finish_and_clear();
    Ok(study)
}

/// Reads the template named on the command line, or the built-in one.
pub fn template_source(path: &Option<PathBuf>) -> Result<(TemplateSource, bool), Failure> {
    match path {
        None => Ok((TemplateSource { name: BUILT_IN_NAME.into(), text: BUILT_IN.into() }, true)),
        Some(p) => {
            let text = std::fs::read_to_string(p).map_err(|e| {
                Failure::Input(format!(
                    "error: cannot read template `{}`: {e}\n  help: check the path\n",
                    p.display()
                ))
            })?;
            Ok((TemplateSource { name: p.display().to_string(), text }, false))
        }
    }
}

/// Runs the render (and keeps watching with `--watch`).
pub fn run(args: &RenderArgs) -> Result<Outcome, Failure> {
    if args.watch {
        return crate::cli::watch::run(args);
    }
    let written = render_and_write(args)?;
    eprintln!("{}", written.summary());
    match &written.pdf_problem {
        None => Ok(Outcome::Done),
        Some(p) if !pdf_fatal(args.format, p) => {
            eprint!("{}", p.message(false));
            Ok(Outcome::Done)
        }
        Some(p) => Err(Failure::Input(p.message(true))),
    }
}

/// True when a PDF problem fails the render: always, except a missing typst when the PDF
/// was one format among several (`all`).
pub fn pdf_fatal(format: Format, problem: &PdfProblem) -> bool {
    !(format == Format::All && matches!(problem, PdfProblem::Missing(_)))
}

/// A render written to disk.
pub struct Written {
    /// The design id.
    pub id: String,
    /// The output folder.
    pub dir: PathBuf,
    /// The files written, paths relative to `dir`.
    pub files: Vec<OutputFile>,
    /// Why report.pdf was not made, when it was asked for and is missing.
    pub pdf_problem: Option<PdfProblem>,
}

impl Written {
    /// `wrote report.html, … into DIR/`.
    pub fn summary(&self) -> String {
        let names: Vec<&str> = self.files.iter().map(|f| f.path.as_str()).collect();
        format!("wrote {} into {}/", names.join(", "), self.dir.display())
    }

    /// The bytes written to `path` (relative to the output folder), if it was written.
    pub fn file(&self, path: &str) -> Option<&[u8]> {
        self.files.iter().find(|f| f.path == path).map(|f| f.bytes.as_slice())
    }
}

/// One render: reads the design and the template as they are now, builds the review and
/// writes every file into the output folder. Nothing is written when the build fails.
pub fn render_and_write(args: &RenderArgs) -> Result<Written, Failure> {
    let file = load_file(&args.design)?;
    let (template, built_in) = template_source(&args.template)?;
    let options = BuildOptions {
        format: args.format,
        runs: args.runs,
        paper: args.paper,
        typst: args.typst.clone(),
    };
    let built = build(&file, &template, built_in, &options)?;
    let dir = args.out.clone().unwrap_or_else(|| PathBuf::from("out").join(&built.id));
    for f in &built.files {
        let path = dir.join(&f.path);
        write::atomic(&path, &f.bytes).map_err(|e| {
            Failure::Input(format!("error: cannot write `{}`: {e}\n", path.display()))
        })?;
    }
    Ok(Written { id: built.id, dir, files: built.files, pdf_problem: built.pdf_problem })
}

/// How to build: what a rebuild must repeat (recorded in the manifest), and which typst.
#[derive(Clone, Debug)]
pub struct BuildOptions {
    /// What to write.
    pub format: Format,
    /// Monte Carlo runs (default: the design's own).
    pub runs: Option<u32>,
    /// Paper of the PDF packet.
    pub paper: PaperSize,
    /// The typst program, when named on the command line.
    pub typst: Option<PathBuf>,
}

impl BuildOptions {
    /// Results only (results.json, sweep.csv): what `diff` needs.
    pub fn json(runs: Option<u32>) -> BuildOptions {
        BuildOptions { format: Format::Json, runs, paper: PaperSize::A4, typst: None }
    }
}

/// A render in memory.
pub struct Built {
    /// The design id.
    pub id: String,
    /// Every file, the manifest and the input copies included, sorted by path.
    pub files: Vec<OutputFile>,
    /// Why report.pdf is not among them, when it was asked for.
    pub pdf_problem: Option<PdfProblem>,
    /// What the typst that made report.pdf said of its version (as in the manifest).
    pub typst_version: Option<String>,
}

/// Everything a render writes, in memory: analysis, tolerance study, the review files,
/// report.pdf through typst, the input copies and the manifest. Shared with `verify` and
/// `diff`. A missing or failing typst leaves the PDF out and says why in the result.
pub fn build(
    file: &crate::cli::source::LoadedFile,
    template: &TemplateSource,
    built_in: bool,
    options: &BuildOptions,
) -> Result<Built, Failure> {
    let design = file.design()?;
    eprint!("{}", file.report());
    let analysis = crate::analysis::analyze(design).map_err(|e| analysis_failure(file, &e))?;
    let pdf = matches!(options.format, Format::All | Format::Pdf);
    let formats = Formats {
        html: matches!(options.format, Format::All | Format::Html),
        markdown: matches!(options.format, Format::All | Format::Md),
        json: true,
        typst: pdf.then(|| options.paper.paper()),
    };
    let inputs = Inputs {
        design_name: &file.name,
        design_text: &file.text,
        template,
        built_in_template: built_in,
    };
    let runs = options.runs.unwrap_or(design.analysis.monte_carlo_runs);
    let study = run_study(design, &analysis, Some(runs))?;
    let mut files = report::render(design, &analysis, Some(&study), &inputs, formats)
        .map_err(|e| Failure::Input(format!("{}nothing was written\n", e.message)))?;
    let mut pdf_problem = None;
    let mut typst_version = None;
    if pdf {
        let made = pdf::find(options.typst.as_deref()).and_then(|typst| {
            let sources: Vec<OutputFile> = files
                .iter()
                .filter(|f| f.path == report::TYPST_FILE || f.path.starts_with("plots/"))
                .cloned()
                .collect();
            pdf::compile(&typst, &sources, &design.meta.date).map(|pdf| (typst.version, pdf))
        });
        match made {
            Ok((version, pdf)) => {
                if !pdf.warnings.is_empty() {
                    eprintln!("typst warnings while making report.pdf:\n{}", pdf.warnings);
                }
                typst_version = Some(version);
                files.push(OutputFile { path: report::PDF_FILE.into(), bytes: pdf.bytes });
                files.sort_by(|a, b| a.path.cmp(&b.path));
            }
            Err(problem) => pdf_problem = Some(problem),
        }
    }
    let recipe = Recipe {
        design_name: file.name.clone(),
        template_name: (!built_in).then(|| template.name.clone()),
        format: options.format.name().into(),
        runs,
        paper: options.paper.name().into(),
        typst: typst_version.clone(),
    };
    let files = manifest::seal(files, recipe, &file.text, (!built_in).then_some(&*template.text));
    Ok(Built { id: design.meta.id.clone(), files, pdf_problem, typst_version })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn paper_names_match_the_flag_and_round_trip() {
        for p in PaperSize::value_variants() {
            let flag = p.to_possible_value().unwrap();
            assert_eq!(flag.get_name(), p.name());
            assert_eq!(PaperSize::from_name(p.name()), Some(*p));
        }
        for f in Format::value_variants() {
            assert_eq!(f.to_possible_value().unwrap().get_name(), f.name());
            assert_eq!(Format::from_name(f.name()), Some(*f));
        }
    }
}
