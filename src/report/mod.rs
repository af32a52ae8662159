//! The report stage: results become the review document.
//!
//! In: a design, its [`crate::analysis::Analysis`] and the run's inputs (design text,
//! template). Out: the files of a render — results.json, report.md with plots/*.svg,
//! report.html, report.typ, sweep.csv — as bytes with their relative paths; the CLI writes
//! them (and has typst compile report.typ). The pipeline: results → view model → Tera
//! template → Markdown → HTML / Markdown / typst / JSON.
//! Knows nothing of how numbers were computed.

pub mod cautions;
pub mod change;
pub mod explain;
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

use crate::analysis::tolerance::Study;
use crate::analysis::{Analysis, requirements};
use crate::design::Design;
use template::{Blocks, TemplateError, TemplateSource, plot_marker};

/// One file of a render.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct OutputFile {
    /// Path relative to the output folder (`report.html`, `plots/bode.svg`).
    pub path: String,
    /// Contents.
    pub bytes: Vec<u8>,
}

/// Which files to produce.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Formats {
    /// report.html.
    pub html: bool,
    /// report.md and plots/*.svg.
    pub markdown: bool,
    /// results.json and sweep.csv.
    pub json: bool,
    /// report.typ and plots/*.svg on this paper (the CLI compiles them into report.pdf).
    pub typst: Option<typst::Paper>,
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

/// The frequency response as CSV: frequency_hz, magnitude_db, phase_deg.
pub fn sweep_csv(a: &Analysis) -> String {
    let mut out = String::from("frequency_hz,magnitude_db,phase_deg\n");
    for p in &a.sweep {
        out.push_str(&format!(
            "{:.9e},{:.9e},{:.9e}\n",
            p.frequency_hz, p.magnitude_db, p.phase_deg
        ));
    }
    out
}

/// Renders every requested file.
pub fn render(
    design: &Design,
    analysis: &Analysis,
    study: Option<&Study>,
    inputs: &Inputs,
    formats: Formats,
) -> Result<Vec<OutputFile>, TemplateError> {
    let mut checks = requirements::check(&design.requirements, analysis);
    if let Some(s) = study {
        requirements::with_study(&mut checks, s);
    }
    let caution_list = cautions::cautions(design, analysis);
    let hashes = results::Hashes {
        design: hex(&Sha256::digest(inputs.design_text.as_bytes())),
        template: Some(hex(&Sha256::digest(inputs.template.text.as_bytes()))),
        template_name: (!inputs.built_in_template).then(|| inputs.template.name.clone()),
    };
    let doc = results::document(
        design,
        analysis,
        &checks,
        &caution_list,
        study,
        hashes,
        inputs.design_name,
    );
    let mut files = Vec::new();
    if formats.json {
        files.push(OutputFile {
            path: "results.json".into(),
            bytes: results::to_json(&doc).into_bytes(),
        });
        files
            .push(OutputFile { path: "sweep.csv".into(), bytes: sweep_csv(analysis).into_bytes() });
    }
    if !(formats.html || formats.markdown || formats.typst.is_some()) {
        return Ok(files);
    }
    let explanation = explain::explain(analysis, study);
    let plot_list = plots::all(analysis, &checks, study);
    let blocks = Blocks {
        tables: tables::all(design, analysis, &checks, study),
        known_tables: tables::TABLES.iter().map(|(n, _)| *n).collect(),
        plots: plot_list.iter().map(|p| p.name).collect(),
        known_plots: plots::PLOTS.to_vec(),
        explanation: (explanation.high.clone(), explanation.low.clone()),
        cautions: caution_list.iter().map(|c| view::escape(&c.text)).collect(),
    };
    let view = view::View::new(design, &doc, &explanation);
    let markdown = tidy_blank_lines(&template::render(inputs.template, &view, blocks)?);
    if formats.markdown || formats.typst.is_some() {
        // The Markdown and the typst document both reference plots/NAME.svg.
        for p in &plot_list {
            files.push(OutputFile {
                path: format!("plots/{}.svg", p.name),
                bytes: p.svg.clone().into_bytes(),
            });
        }
    }
    if formats.markdown {
        let mut md = markdown.clone();
        for p in &plot_list {
            md = md
                .replace(&plot_marker(p.name), &format!("![{}](plots/{}.svg)", p.caption, p.name));
        }
        files.push(OutputFile { path: "report.md".into(), bytes: md.into_bytes() });
    }
    if let Some(paper) = formats.typst {
        let footer = format!("{} · rev {}", design.meta.id, design.meta.revision);
        let page = typst::PageSetup { paper, title: &design.meta.title, footer: &footer };
        files.push(OutputFile {
            path: TYPST_FILE.into(),
            bytes: typst::document(&markdown, &plot_list, &page).into_bytes(),
        });
    }
    if formats.html {
        let title = format!("{} — rev {}", design.meta.title, design.meta.revision);
        files.push(OutputFile {
            path: "report.html".into(),
            bytes: html::page(&title, &markdown, &plot_list).into_bytes(),
        });
    }
    files.sort_by(|a, b| a.path.cmp(&b.path));
    Ok(files)
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
