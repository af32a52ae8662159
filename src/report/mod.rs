//! The report stage: results become the review document.
//!
//! In: a design, its [`Review`] and the run's inputs (design text, template). Out: the files
//! of a render — results.json, report.md with plots/*.svg, report.html, report.typ,
//! sweep.csv — as bytes with their relative paths, one [`Exporter`] per format; the CLI
//! writes them (and has typst compile report.typ). The pipeline: review → results document
//! → view model → Tera template → Markdown → HTML / Markdown / typst, and JSON / CSV from
//! the results directly.
//! Knows nothing of how numbers were computed.

pub mod cautions;
pub mod change;
pub mod explain;
pub mod export;
pub mod html;
pub mod manifest;
pub mod plots;
pub mod results;
pub mod tables;
pub mod template;
pub mod typst;
pub mod view;
pub mod write;

use sha2::{Digest, Sha256};

use crate::design::Design;
use crate::review::Review;
use export::{Document, Exporter, Page};
use template::{Blocks, TemplateError, TemplateSource};

/// One file of a render.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct OutputFile {
    /// Path relative to the output folder (`report.html`, `plots/bode.svg`).
    pub path: String,
    /// Contents.
    pub bytes: Vec<u8>,
}

/// The inputs of a render, as bytes, so provenance can hash them.
pub struct Inputs<'a> {
    /// The design file name as given (for the rebuild command).
    pub design_name: &'a str,
    /// The design file's text.
    pub design_text: &'a str,
    /// The template.
    pub template: &'a TemplateSource,
    /// True when the template is the built-in one.
    pub built_in_template: bool,
}

/// The typst document of a render, compiled into [`PDF_FILE`] beside it.
pub const TYPST_FILE: &str = "report.typ";
/// The PDF packet.
pub const PDF_FILE: &str = "report.pdf";

/// Lower-case hex of bytes.
pub fn hex(bytes: &[u8]) -> String {
    bytes.iter().map(|b| format!("{b:02x}")).collect()
}

/// An input file's name as the outputs record it: its file name alone, so the review does
/// not depend on where the file was or how its path was written; and, when that name is not
/// a plain one (letters, digits, `.`, `_`, `+`, `-`), `fallback` (the archived copy's
/// path), so no name can carry markup or shell syntax into a report.
pub fn shown_name(path: &str, fallback: &str) -> String {
    let name = std::path::Path::new(path).file_name().map(|n| n.to_string_lossy().into_owned());
    match name {
        Some(n)
            if n.chars().next().is_some_and(|c| c.is_ascii_alphanumeric())
                && n.chars().all(|c| c.is_ascii_alphanumeric() || "._+-".contains(c)) =>
        {
            n
        }
        _ => fallback.to_string(),
    }
}

/// Renders the files of every exporter asked for: the results document first, then, when a
/// format is written from the template (Markdown, HTML, typst), the template once, shared by
/// all of them. Files are sorted by path; a plot two formats both write appears once.
pub fn render(
    design: &Design,
    review: &Review,
    inputs: &Inputs,
    exporters: &[&dyn Exporter],
) -> Result<Vec<OutputFile>, TemplateError> {
    let hashes = results::Hashes {
        design: hex(&Sha256::digest(inputs.design_text.as_bytes())),
        template: Some(hex(&Sha256::digest(inputs.template.text.as_bytes()))),
        template_name: (!inputs.built_in_template)
            .then(|| shown_name(&inputs.template.name, manifest::TEMPLATE_COPY)),
    };
    let design_name = shown_name(inputs.design_name, manifest::DESIGN_COPY);
    let results = results::document(design, review, hashes, &design_name);
    let page = if exporters.iter().any(|e| e.needs_page()) {
        Some(page(design, review, &results, inputs.template)?)
    } else {
        None
    };
    let document = Document { design, review, results: &results, page: page.as_ref() };
    let mut files: Vec<OutputFile> = exporters.iter().flat_map(|e| e.export(&document)).collect();
    files.sort_by(|a, b| a.path.cmp(&b.path));
    files.dedup_by(|a, b| a.path == b.path);
    Ok(files)
}

/// The template rendered into Markdown (plots as markers), with the plots it may place.
fn page(
    design: &Design,
    review: &Review,
    results: &results::ResultsDocument,
    template: &TemplateSource,
) -> Result<Page, TemplateError> {
    let (a, checks, study) = (&review.analysis, &review.requirements, Some(&review.study));
    let plots = plots::all(a, checks, study);
    let blocks = Blocks {
        tables: tables::all(design, a, checks, study),
        known_tables: tables::TABLES.iter().map(|(n, _)| *n).collect(),
        plots: plots.iter().map(|p| p.name).collect(),
        known_plots: plots::PLOTS.to_vec(),
        explanation: (review.explanation.high.clone(), review.explanation.low.clone()),
        cautions: review.cautions.iter().map(|c| view::escape(&c.text)).collect(),
    };
    let view = view::View::new(design, results, &review.explanation);
    let markdown = tidy_blank_lines(&template::render(template, &view, blocks)?);
    Ok(Page { markdown, plots })
}

/// At most one blank line in a row: directives leave gaps where blocks were absent.
pub fn tidy_blank_lines(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    let mut blank = 0;
    for line in text.lines() {
        if line.trim().is_empty() {
            blank += 1;
            if blank > 1 {
                continue;
            }
        } else {
            blank = 0;
        }
        out.push_str(line.trim_end());
        out.push('\n');
    }
    out
}
