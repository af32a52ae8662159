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
pub mod ci;
pub mod decimal;
pub mod explain;
pub mod export;
pub mod headroom;
pub mod html;
pub mod manifest;
pub mod plots;
pub mod port_plots;
pub mod port_words;
pub mod results;
pub mod schematic;
pub mod signal_plots;
pub mod tables;
pub mod template;
pub mod typst;
pub mod view;
pub mod what_if;
pub mod worked;
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
    /// The design's schematic drawing, when it names one (as archived in the folder).
    pub schematic: Option<&'a plots::Supplied>,
    /// The project's logo, when its project file names one (as archived in the folder).
    pub logo: Option<&'a plots::Supplied>,
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
    let mut results = results::document(design, review, hashes, &design_name);
    let worked = worked::evaluate(&inputs.template.name, &inputs.template.text, design, &results)?;
    results.worked = worked.steps.clone();
    let page = if exporters.iter().any(|e| e.needs_page()) {
        Some(page(design, review, &results, inputs, &worked)?)
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
    inputs: &Inputs,
    worked: &worked::Worked,
) -> Result<Page, TemplateError> {
    let (template, schematic) = (inputs.template, inputs.schematic);
    let (a, checks, study) = (&review.analysis, &review.requirements, Some(&review.study));
    let mut plots = plots::all(a, checks, study);
    let drawn = match schematic {
        None if !schematic::drawn(design) => None,
        Some(f) => Some(plots::Plot {
            name: "schematic",
            caption: "Schematic, as supplied with the design.".into(),
            svg: String::new(),
            file: Some(f.clone()),
            max_width: None,
        }),
        None => {
            let drawing = schematic::draw(design);
            Some(plots::Plot {
            name: "schematic",
            caption: "Connectivity, drawn by tauweave from the netlist (the design names no schematic drawing): supplies along the top, ground along the bottom, the signal source at the left; wires that cross without a dot are not joined.".into(),
            svg: drawing.svg(plots::FONT),
            file: None,
            max_width: Some(drawing.width.ceil()),
        })
        }
    };
    if let Some(drawn) = drawn {
        plots.insert(0, drawn);
    }
    if let Some(logo) = inputs.logo {
        // The title block names the organisation beside it: the logo takes no caption.
        plots.insert(
            0,
            plots::Plot {
                name: "logo",
                caption: String::new(),
                svg: String::new(),
                file: Some(logo.clone()),
                max_width: Some(160.0),
            },
        );
    }
    for (name, s) in crate::report::what_if::SWEEP_PLOTS.iter().zip(&review.what_if.sweeps) {
        if let Some(svg) =
            crate::report::what_if::plot(s, &design.requirements, &review.what_if.limits)
        {
            let solved = review.what_if.limits.iter().any(|l| l.quantity == s.quantity);
            let caption = format!(
                "What if `{}` moves: each limited figure at every swept value (dots), its \
                 requirement's limits dashed{}.",
                s.quantity,
                if solved { ", the solved limit dotted" } else { "" }
            );
            plots.push(plots::Plot { name, caption, svg, file: None, max_width: None });
        }
    }
    let mut tables = tables::all(design, a, checks, study);
    let w = &review.what_if;
    for (name, table) in [
        ("what_if", crate::report::what_if::markdown(w)),
        ("corners", crate::report::what_if::corners_markdown(w)),
        ("limits", crate::report::what_if::limits_markdown(w)),
        ("sweeps", crate::report::what_if::sweeps_markdown(w)),
    ] {
        if let Some(t) = table {
            tables.insert(name, t);
        }
    }
    if let Some(t) = crate::report::what_if::suggestions_markdown(&review.what_if) {
        tables.insert("suggestions", t);
    }
    let blocks = Blocks {
        tables,
        known_tables: tables::TABLES.iter().map(|(n, _)| *n).collect(),
        plots: plots.iter().map(|p| p.name).collect(),
        known_plots: plots::PLOTS.to_vec(),
        explanation: review.explanation.clone(),
        cautions: review.cautions.iter().map(|c| view::escape(&c.text)).collect(),
    };
    let view = view::View::new(design, results, &review.explanation);
    let markdown = tidy_blank_lines(&worked.place(&template::render(template, &view, blocks)?));
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

/// Text whose subscripts are marked (a worked step's names): the word before each
/// [`worked::SUB_START`] is the base, the text up to [`worked::SUB_END`] its subscript.
fn marked_segments(text: &str) -> Vec<Segment<'_>> {
    let mut out = Vec::new();
    let mut rest = text;
    while let Some(open) = rest.find(worked::SUB_START) {
        let Some(close) = rest[open..].find(worked::SUB_END).map(|c| open + c) else { break };
        let base_start = rest[..open]
            .char_indices()
            .rev()
            .take_while(|(_, c)| c.is_alphanumeric())
            .last()
            .map_or(open, |(i, _)| i);
        if base_start > 0 {
            out.push(Segment::Plain(&rest[..base_start]));
        }
        let sub = &rest[open + worked::SUB_START.len_utf8()..close];
        out.push(Segment::Subscripted(&rest[base_start..open], sub));
        rest = &rest[close + worked::SUB_END.len_utf8()..];
    }
    if !rest.is_empty() {
        out.push(Segment::Plain(rest));
    }
    out
}

/// A piece of running text as it is typeset: plain, or a symbol with a subscript.
#[derive(Clone, Debug, PartialEq)]
pub enum Segment<'a> {
    /// Text as it is.
    Plain(&'a str),
    /// A one-letter symbol and its subscript: `f_H`, `V_CE`, `R_π0`, `S_i`.
    Subscripted(&'a str, &'a str),
}

/// The symbols the review writes with an underscore, whose part after `_` is typeset as a
/// subscript. Only these: a designer's own `c_d` in a title stays as written.
pub const SUBSCRIPTED: &[&str] = &[
    "f_H", "f_L", "f_T", "f_p", "f_z", "V_CE", "V_BE", "V_BC", "V_GS", "V_DS", "V_T", "V_th",
    "V_ov", "I_C", "I_D", "I_B", "I_S", "R_in", "R_out", "R_s", "R_L", "R_π0", "R_μ0", "R_CL0",
    "r_o", "r_π", "g_m", "C_π", "C_μ", "C_L", "C_gs", "C_gd", "C_db", "S_i", "t_i", "E_g", "k_B",
];

/// Splits `text` at the engineering symbols of [`SUBSCRIPTED`] standing as a word of their
/// own, so the exporters can set the part after `_` as a subscript. Names that merely hold
/// an underscore (`early_voltage`, `midband_gain`, `Q1.bias_current`) stay plain.
pub fn symbol_segments(text: &str) -> Vec<Segment<'_>> {
    if text.contains(worked::SUB_START) {
        return marked_segments(text);
    }
    let chars: Vec<(usize, char)> = text.char_indices().collect();
    let word = |c: char| c.is_alphanumeric() || c == '_' || c == '.';
    let sub_char = |c: char| c.is_alphanumeric() || c == '\'';
    let mut out = Vec::new();
    let mut plain_from = 0;
    let mut k = 0;
    while k + 1 < chars.len() {
        let (at, c) = chars[k];
        let starts_word = k == 0 || !word(chars[k - 1].1);
        if starts_word && c.is_alphabetic() && chars[k + 1].1 == '_' {
            let mut end = k + 2;
            while end < chars.len() && sub_char(chars[end].1) && end - (k + 2) < 3 {
                end += 1;
            }
            let length = end - (k + 2);
            let ends_word = end == chars.len() || !(word(chars[end].1) && chars[end].1 != '.');
            let sub_end = chars.get(end).map_or(text.len(), |(i, _)| *i);
            let known = SUBSCRIPTED.contains(&&text[at..sub_end]);
            if length >= 1 && ends_word && known {
                if plain_from < at {
                    out.push(Segment::Plain(&text[plain_from..at]));
                }
                let sub_start = chars[k + 2].0;
                out.push(Segment::Subscripted(
                    &text[at..chars[k + 1].0],
                    &text[sub_start..sub_end],
                ));
                plain_from = sub_end;
                k = end;
                continue;
            }
        }
        k += 1;
    }
    if plain_from < text.len() {
        out.push(Segment::Plain(&text[plain_from..]));
    }
    out
}

#[cfg(test)]
mod symbol_tests {
    use super::Segment::{Plain, Subscripted};
    use super::*;

    #[test]
    fn engineering_symbols_get_subscripts_and_names_do_not() {
        assert_eq!(
            symbol_segments("f_H = 1 MHz, V_CE 6 V, R_π0."),
            vec![
                Subscripted("f", "H"),
                Plain(" = 1 MHz, "),
                Subscripted("V", "CE"),
                Plain(" 6 V, "),
                Subscripted("R", "π0"),
                Plain("."),
            ]
        );
        assert_eq!(
            symbol_segments("Σ|S_i|·t_i"),
            vec![Plain("Σ|"), Subscripted("S", "i"), Plain("|·"), Subscripted("t", "i")]
        );
        for plain in
            ["RFN1.early_voltage", "midband_gain", "Q1.bias_current", "x_long_name", "a_bcde"]
        {
            assert_eq!(symbol_segments(plain), vec![Plain(plain)], "{plain}");
        }
    }
}
