//! One exporter per output format, behind one trait: results.json, sweep.csv, report.md with
//! its plots, report.html and report.typ (which the CLI compiles into report.pdf).
//!
//! In: a [`Document`] — the design, its review, the results document and, for the formats
//! written from the template, the rendered [`Page`]. Out: the format's files as bytes with
//! their relative paths. No I/O: writing is `write.rs`'s, running typst the CLI's.

use crate::design::Design;
use crate::report::plots::Plot;
use crate::report::results::{self, ResultsDocument};
use crate::report::template::plot_marker;
use crate::report::{OutputFile, TYPST_FILE, html, typst};
use crate::review::Review;

/// The template rendered into Markdown, plots standing as markers, and the plots.
pub struct Page {
    /// The review as Markdown; each plot is a marker line until a format places it.
    pub markdown: String,
    /// Every plot the template may place.
    pub plots: Vec<Plot>,
}

/// What an exporter reads.
pub struct Document<'a> {
    /// The design.
    pub design: &'a Design,
    /// Its review.
    pub review: &'a Review,
    /// The results contract of the review.
    pub results: &'a ResultsDocument,
    /// The rendered template, when an exporter asked for it ([`Exporter::needs_page`]).
    pub page: Option<&'a Page>,
}

impl Document<'_> {
    fn page(&self) -> &Page {
        self.page.expect("render() renders the page for every exporter that needs it")
    }
}

/// One output format.
pub trait Exporter {
    /// True when the format is written from the rendered template.
    fn needs_page(&self) -> bool;
    /// The format's files.
    fn export(&self, doc: &Document) -> Vec<OutputFile>;
}

/// results.json: the results contract.
pub struct Json;

/// sweep.csv: the exact frequency response, frequency_hz, magnitude_db, phase_deg, and the
/// noise: output and input-referred densities and the noise figure.
pub struct Csv;

/// report.md with plots/*.svg beside it.
pub struct Markdown;

/// report.html: one self-contained page, plots inline.
pub struct Html;

/// report.typ with plots/*.svg beside it, on the given paper.
pub struct Typst {
    /// The paper of the PDF packet.
    pub paper: typst::Paper,
}

impl Exporter for Json {
    fn needs_page(&self) -> bool {
        false
    }
    fn export(&self, doc: &Document) -> Vec<OutputFile> {
        vec![file("results.json", results::to_json(doc.results))]
    }
}

impl Exporter for Csv {
    fn needs_page(&self) -> bool {
        false
    }
    fn export(&self, doc: &Document) -> Vec<OutputFile> {
        let mut out = String::from(
            "frequency_hz,magnitude_db,phase_deg,output_noise_v_per_rthz,\
             input_noise_v_per_rthz,noise_figure_db,s11_re,s11_im,s21_re,s21_im,s12_re,s12_im,\
             s22_re,s22_im,z_in_re_ohm,z_in_im_ohm,z_out_re_ohm,z_out_im_ohm,k,mu\n",
        );
        let a = &doc.review.analysis;
        let noise: std::collections::HashMap<u64, &crate::analysis::noise::NoisePoint> =
            a.noise.iter().flat_map(|n| &n.sweep).map(|p| (p.frequency_hz.to_bits(), p)).collect();
        let ports: std::collections::HashMap<u64, &crate::analysis::ports::PortPoint> =
            a.ports.iter().flat_map(|p| &p.points).map(|p| (p.frequency_hz.to_bits(), p)).collect();
        // An empty cell where a value does not exist (never NaN).
        let cell = |v: Option<f64>| v.map_or(String::new(), |v| format!("{v:.9e}"));
        for p in &a.sweep {
            let n = noise.get(&p.frequency_hz.to_bits());
            out.push_str(&format!(
                "{:.9e},{:.9e},{:.9e},{},{},{}",
                p.frequency_hz,
                p.magnitude_db,
                p.phase_deg,
                cell(n.map(|n| n.output_density_v_per_rthz)),
                cell(n.and_then(|n| n.input_density_v_per_rthz)),
                cell(n.and_then(|n| n.noise_figure_db)),
            ));
            let port = ports.get(&p.frequency_hz.to_bits());
            let complex = |z: Option<faer::c64>| [cell(z.map(|z| z.re)), cell(z.map(|z| z.im))];
            let mut cells: Vec<String> = Vec::new();
            for k in 0..4 {
                cells.extend(complex(port.map(|q| q.s[k])));
            }
            cells.extend(complex(port.map(|q| q.z_in)));
            cells.extend(complex(port.map(|q| q.z_out)));
            cells.push(cell(port.and_then(|q| q.k())));
            cells.push(cell(port.and_then(|q| q.mu())));
            out.push(',');
            out.push_str(&cells.join(","));
            out.push('\n');
        }
        vec![file("sweep.csv", out)]
    }
}

impl Exporter for Markdown {
    fn needs_page(&self) -> bool {
        true
    }
    fn export(&self, doc: &Document) -> Vec<OutputFile> {
        let page = doc.page();
        let mut md = page.markdown.clone();
        for p in &page.plots {
            let path = p.file.as_ref().map_or(format!("plots/{}.svg", p.name), |f| f.path.clone());
            md = md.replace(&plot_marker(p.name), &format!("![{}]({path})", p.caption));
        }
        let mut files = plot_files(page);
        files.push(file("report.md", crate::report::worked::plain_subscripts(&md)));
        files
    }
}

impl Exporter for Html {
    fn needs_page(&self) -> bool {
        true
    }
    fn export(&self, doc: &Document) -> Vec<OutputFile> {
        let meta = &doc.design.meta;
        let title = format!("{} — rev {}", meta.title, meta.revision);
        let page = doc.page();
        vec![file("report.html", html::page(&title, &page.markdown, &page.plots))]
    }
}

impl Exporter for Typst {
    fn needs_page(&self) -> bool {
        true
    }
    fn export(&self, doc: &Document) -> Vec<OutputFile> {
        let meta = &doc.design.meta;
        let footer = format!("{} · rev {}", meta.id, meta.revision);
        let setup = typst::PageSetup { paper: self.paper, title: &meta.title, footer: &footer };
        let page = doc.page();
        let mut files = plot_files(page);
        files.push(file(TYPST_FILE, typst::document(&page.markdown, &page.plots, &setup)));
        files
    }
}

/// plots/NAME.svg of every plot tauweave draws: report.md and report.typ both reference
/// them (a supplied drawing is an input copy, written with the manifest).
fn plot_files(page: &Page) -> Vec<OutputFile> {
    page.plots
        .iter()
        .filter(|p| p.file.is_none())
        .map(|p| file(&format!("plots/{}.svg", p.name), p.svg.clone()))
        .collect()
}

fn file(path: &str, text: String) -> OutputFile {
    OutputFile { path: path.into(), bytes: text.into_bytes() }
}
