//! The render pipeline in memory, shared by `render`, watch mode and `verify`: a loaded
//! design and a template in, every file of the review out — the review (from
//! [`crate::review`]), each format's exporter, report.pdf through typst (`pdf.rs`), the input
//! copies and the manifest — and then, for `render` and watch mode, the folder written.
//!
//! Prints nothing: what a build has to say (the design's warnings, typst's warnings) comes
//! back in [`Built::notes`] or inside the [`Failure`], for the command to print.

use std::path::{Path, PathBuf};

use clap::ValueEnum;

use crate::cli::Failure;
use crate::cli::pdf::{self, PdfProblem};
use crate::cli::progress;
use crate::cli::source::{LoadedFile, analysis_failure, load_file, template_source};
use crate::report::export::{self, Exporter};
use crate::report::manifest::{self, Recipe};
use crate::report::plots::Supplied;
use crate::report::template::TemplateSource;
use crate::report::typst::Paper;
use crate::report::{self, Inputs, OutputFile, write};

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

    /// True when report.pdf is one of the outputs.
    pub fn has_pdf(self) -> bool {
        matches!(self, Format::All | Format::Pdf)
    }

    /// The exporters that write this format's files; results.json and sweep.csv come with
    /// every format.
    fn exporters(self, paper: Paper) -> Vec<Box<dyn Exporter>> {
        let mut out: Vec<Box<dyn Exporter>> = vec![Box::new(export::Json), Box::new(export::Csv)];
        if matches!(self, Format::All | Format::Md) {
            out.push(Box::new(export::Markdown));
        }
        if matches!(self, Format::All | Format::Html) {
            out.push(Box::new(export::Html));
        }
        if self.has_pdf() {
            out.push(Box::new(export::Typst { paper }));
        }
        out
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

/// How to build: what a rebuild must repeat (recorded in the manifest), and which typst.
#[derive(Clone, Debug)]
pub struct BuildOptions {
    /// What to write.
    pub format: Format,
    /// Monte Carlo runs (default: the design's own).
    pub runs: Option<u32>,
    /// Paper of the PDF packet (default: the project file's, else A4).
    pub paper: Option<PaperSize>,
    /// The typst program, when named on the command line.
    pub typst: Option<PathBuf>,
    /// Where the design's schematic drawing is read from.
    pub drawings: Drawings,
    /// Whether a long analysis shows its progress (false in a batch, which shows its own).
    pub progress: bool,
}

/// Where a design's schematic drawing is read from.
#[derive(Clone, Debug)]
pub enum Drawings {
    /// The folder holding the design file: the path the design gives is relative to it.
    BesideDesign(PathBuf),
    /// A rendered folder: its archived copy, `inputs/schematic.svg` or `.png`.
    Archived(PathBuf),
}

/// Where a schematic named `name` is archived in a rendered folder.
pub fn schematic_copy(name: &str) -> String {
    let png = name.to_ascii_lowercase().ends_with(".png");
    format!("inputs/schematic.{}", if png { "png" } else { "svg" })
}

/// The design's schematic, read from where `drawings` says, or the failure to read it.
fn read_schematic(
    design: &crate::design::Design,
    drawings: &Drawings,
) -> Result<Option<Supplied>, Failure> {
    let Some(name) = &design.meta.schematic else { return Ok(None) };
    let path = schematic_copy(name);
    let from = match drawings {
        Drawings::BesideDesign(dir) => dir.join(name),
        Drawings::Archived(folder) => folder.join(&path),
    };
    let bytes = std::fs::read(&from).map_err(|e| {
        Failure::input(
            format_args!("cannot read the schematic `{}`: {e}", from.display()),
            Some("put the drawing where `design.schematic` says (relative to the design file), or remove the key"),
        )
    })?;
    let mime = if path.ends_with(".png") { "image/png" } else { "image/svg+xml" };
    Ok(Some(Supplied { path, mime, bytes }))
}

/// The project's logo, read from beside the project file or from the rendered folder.
fn read_logo(file: &LoadedFile, drawings: &Drawings) -> Result<Option<Supplied>, Failure> {
    let Some(p) = &file.project else { return Ok(None) };
    let Some(name) = &p.project.logo else { return Ok(None) };
    let path = manifest::logo_copy(name);
    let from = match drawings {
        Drawings::BesideDesign(_) => p.dir.join(name),
        Drawings::Archived(folder) => folder.join(&path),
    };
    let bytes = std::fs::read(&from).map_err(|e| {
        Failure::input(
            format_args!("cannot read the logo `{}`: {e}", from.display()),
            Some("put the logo where the project file's `logo` says (relative to the project file), or remove the key"),
        )
    })?;
    let mime = if path.ends_with(".png") { "image/png" } else { "image/svg+xml" };
    Ok(Some(Supplied { path, mime, bytes }))
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
    /// What to tell the user: the design's warnings, typst's warnings.
    pub notes: String,
    /// The requirements that fail at nominal values.
    pub failing: Vec<&'static str>,
}

/// Everything a render writes, in memory. A missing or failing typst leaves the PDF out and
/// says why in the result; nothing else is left out.
pub fn build(
    file: &LoadedFile,
    template: &TemplateSource,
    built_in: bool,
    options: &BuildOptions,
) -> Result<Built, Failure> {
    let design = file.design()?;
    let mut notes = file.report();
    let runs = options.runs.unwrap_or(design.analysis.monte_carlo_runs);
    let review = progress::review_shown(design, runs, options.progress)
        .map_err(|e| Failure::Input(format!("{notes}{}", analysis_failure(file, &e))))?;
    let schematic = read_schematic(design, &options.drawings)?;
    let logo = read_logo(file, &options.drawings)?;
    let house_paper = file.project.as_ref().and_then(|p| p.project.paper.as_deref());
    let paper = options
        .paper
        .or_else(|| house_paper.and_then(PaperSize::from_name))
        .unwrap_or(PaperSize::A4);
    let inputs = Inputs {
        design_name: &file.name,
        design_text: &file.text,
        template,
        built_in_template: built_in,
        schematic: schematic.as_ref(),
        logo: logo.as_ref(),
    };
    let exporters = options.format.exporters(paper.paper());
    let exporters: Vec<&dyn Exporter> = exporters.iter().map(Box::as_ref).collect();
    let mut files = report::render(design, &review, &inputs, &exporters)
        .map_err(|e| Failure::Input(format!("{notes}{}nothing was written\n", e.message)))?;
    let mut pdf_problem = None;
    let mut typst_version = None;
    if options.format.has_pdf() {
        match make_pdf(&files, [&schematic, &logo], options, &design.meta.date) {
            Ok((version, pdf)) => {
                if !pdf.warnings.is_empty() {
                    notes.push_str(&format!(
                        "typst warnings while making report.pdf:\n{}\n",
                        pdf.warnings
                    ));
                }
                typst_version = Some(version);
                files.push(OutputFile { path: report::PDF_FILE.into(), bytes: pdf.bytes });
                files.sort_by(|a, b| a.path.cmp(&b.path));
            }
            Err(problem) => pdf_problem = Some(problem),
        }
    }
    let recipe = Recipe {
        design_name: report::shown_name(&file.name, manifest::DESIGN_COPY),
        template_name: (!built_in)
            .then(|| report::shown_name(&template.name, manifest::TEMPLATE_COPY)),
        format: options.format.name().into(),
        runs,
        paper: paper.name().into(),
        typst: typst_version.clone(),
        project_name: file.project.as_ref().map(|_| crate::design::project::FILE.to_string()),
    };
    let mut extra: Vec<(String, Vec<u8>)> =
        schematic.into_iter().chain(logo).map(|s| (s.path, s.bytes)).collect();
    if let Some(p) = &file.project {
        extra.push((manifest::PROJECT_COPY.into(), p.text.as_bytes().to_vec()));
    }
    let files =
        manifest::seal(files, recipe, &file.text, (!built_in).then_some(&*template.text), &extra);
    let failing = review.failing_names();
    Ok(Built { id: design.meta.id.clone(), files, pdf_problem, typst_version, notes, failing })
}

/// report.pdf from the render's report.typ and plots, with the version of the typst that
/// made it.
fn make_pdf(
    files: &[OutputFile],
    images: [&Option<Supplied>; 2],
    options: &BuildOptions,
    date: &str,
) -> Result<(String, pdf::Compiled), PdfProblem> {
    let typst = pdf::find(options.typst.as_deref())?;
    let mut sources: Vec<OutputFile> = files
        .iter()
        .filter(|f| f.path == report::TYPST_FILE || f.path.starts_with("plots/"))
        .cloned()
        .collect();
    // The schematic and the logo are referenced by their archived paths, so typst reads the
    // same bytes.
    sources.extend(
        images
            .into_iter()
            .flatten()
            .map(|s| OutputFile { path: s.path.clone(), bytes: s.bytes.clone() }),
    );
    let pdf = pdf::compile(&typst, &sources, date)?;
    Ok((typst.version, pdf))
}

/// True when a PDF problem fails the render: always, except a missing typst when the PDF
/// was one format among several (`all`).
pub fn pdf_fatal(format: Format, problem: &PdfProblem) -> bool {
    !(format == Format::All && matches!(problem, PdfProblem::Missing(_)))
}

/// A render to do: the files it reads as they are when it runs, and where it writes.
#[derive(Clone, Debug)]
pub struct RenderJob {
    /// The design file.
    pub design: PathBuf,
    /// The user's template, if any.
    pub template: Option<PathBuf>,
    /// The output folder (default: out/<design id>/).
    pub out: Option<PathBuf>,
    /// How to build.
    pub options: BuildOptions,
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
    /// What the build had to say (warnings), printed before the summary.
    pub notes: String,
    /// The requirements that fail at nominal values.
    pub failing: Vec<&'static str>,
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
pub fn render_and_write(job: &RenderJob) -> Result<Written, Failure> {
    let built = prepare(job)?;
    let dir = job.out.clone().unwrap_or_else(|| default_folder(&built.id));
    write_built(job, built, dir)
}

/// Where a review is written when no folder is named: out/<design id>/.
pub fn default_folder(id: &str) -> PathBuf {
    PathBuf::from("out").join(id)
}

/// A render in memory: reads the design and the template as they are now and builds.
pub fn prepare(job: &RenderJob) -> Result<Built, Failure> {
    let file = load_file(&job.design)?;
    // No template named: the project file's, when it names one.
    let house =
        file.project.as_ref().and_then(|p| p.project.template.as_ref().map(|t| p.dir.join(t)));
    let (template, built_in) = template_source(&job.template.clone().or(house))?;
    build(&file, &template, built_in, &job.options)
}

/// Writes a render built by [`prepare`] into `dir`, replacing the folder whole.
pub fn write_built(job: &RenderJob, built: Built, dir: PathBuf) -> Result<Written, Failure> {
    // A render replaces its whole folder, so its own inputs cannot live there.
    let inside = |input: &Path| {
        let (Ok(a), Ok(d)) = (input.canonicalize(), std::path::absolute(&dir)) else {
            return false;
        };
        d.canonicalize().is_ok_and(|d| a.starts_with(d))
    };
    if let Some(input) =
        [Some(&job.design), job.template.as_ref()].into_iter().flatten().find(|p| inside(p))
    {
        return Err(Failure::input(
            format_args!(
                "`{}` lies inside the output folder `{}`, which a render replaces whole",
                input.display(),
                dir.display()
            ),
            Some("keep designs and templates outside the folder a review is written to (--out)"),
        ));
    }
    write::replace_folder(&dir, &built.files).map_err(|e| match e {
        write::FolderError::Refused { what, help } => Failure::input(what, Some(&help)),
        e => Failure::input(e, None),
    })?;
    Ok(Written {
        id: built.id,
        dir,
        files: built.files,
        pdf_problem: built.pdf_problem,
        notes: built.notes,
        failing: built.failing,
    })
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
