//! `tauweave render DESIGN`: analyses a design and writes its review into a folder:
//! report.html, report.md with plots/*.svg, results.json and sweep.csv.
//!
//! Every file is written atomically (temporary file in the same folder, then rename);
//! nothing is written when the design, its analysis or the template fails. With `--watch`,
//! `watch.rs` calls [`render_and_write`] again on every change of the inputs.

use std::path::PathBuf;

use clap::{Args, ValueEnum};

use crate::cli::source::{analysis_failure, load_file};
use crate::cli::{Failure, Outcome};
use crate::report::template::{BUILT_IN, BUILT_IN_NAME, TemplateSource};
use crate::report::{self, Formats, Inputs, OutputFile, write};

/// Output formats.
#[derive(Clone, Copy, Debug, PartialEq, Eq, ValueEnum)]
pub enum Format {
    /// Everything: HTML, Markdown with plots, results.json and sweep.csv.
    All,
    /// report.html, self-contained (and results.json, sweep.csv).
    Html,
    /// report.md with plots/*.svg (and results.json, sweep.csv).
    Md,
    /// results.json and sweep.csv only.
    Json,
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
    Ok(Outcome::Done)
}

/// A render written to disk.
pub struct Written {
    /// The design id.
    pub id: String,
    /// The output folder.
    pub dir: PathBuf,
    /// The files written, paths relative to `dir`.
    pub files: Vec<OutputFile>,
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
    let (id, files) = build(&file, &template, built_in, args.format, args.runs)?;
    let dir = args.out.clone().unwrap_or_else(|| PathBuf::from("out").join(&id));
    for f in &files {
        let path = dir.join(&f.path);
        write::atomic(&path, &f.bytes).map_err(|e| {
            Failure::Input(format!("error: cannot write `{}`: {e}\n", path.display()))
        })?;
    }
    Ok(Written { id, dir, files })
}

/// Everything a render writes, in memory: analysis, tolerance study, the review files,
/// the input copies and the manifest. Returns the design id too. Shared with `verify`.
pub fn build(
    file: &crate::cli::source::LoadedFile,
    template: &TemplateSource,
    built_in: bool,
    format: Format,
    runs: Option<u32>,
) -> Result<(String, Vec<OutputFile>), Failure> {
    let design = file.design()?;
    eprint!("{}", file.report());
    let analysis = crate::analysis::analyze(design).map_err(|e| analysis_failure(file, &e))?;
    let formats = match format {
        Format::All => Formats { html: true, markdown: true, json: true },
        Format::Html => Formats { html: true, markdown: false, json: true },
        Format::Md => Formats { html: false, markdown: true, json: true },
        Format::Json => Formats { html: false, markdown: false, json: true },
    };
    let inputs = Inputs {
        design_name: &file.name,
        design_text: &file.text,
        template,
        built_in_template: built_in,
    };
    let runs = runs.unwrap_or(design.analysis.monte_carlo_runs);
    let study = run_study(design, &analysis, Some(runs))?;
    let files = report::render(design, &analysis, Some(&study), &inputs, formats)
        .map_err(|e| Failure::Input(format!("{}nothing was written\n", e.message)))?;
    let files = crate::report::manifest::seal(
        files,
        &file.name,
        &file.text,
        (!built_in).then_some((template.name.as_str(), template.text.as_str())),
        &format!("{format:?}").to_lowercase(),
        runs,
    );
    Ok((design.meta.id.clone(), files))
}
