//! The view model: what a template sees. This struct is the template API — its field names
//! are stable, and renaming one is an interface change (docs/templates.md lists them).
//!
//! It holds the whole results document (every key of results.json, same names) plus the
//! design's own description and the computed explanation. Free text from the design (title,
//! purpose, notes) is HTML-escaped here, so it can never become markup.

use serde::Serialize;

use crate::analysis::Analysis;
use crate::analysis::requirements::RequirementCheck;
use crate::design::Design;
use crate::notation::si;
use crate::report::cautions::Caution;
use crate::report::explain::Explanation;
use crate::report::results::{Provenance, ResultsDocument, Sensitivity, ToleranceSummary, Tool};

/// Escapes text so it reads as text in Markdown and HTML: HTML's `& < >` become entities,
/// and Markdown's link, emphasis, code, table, heading and attribute characters are
/// backslash-escaped (CommonMark lets any ASCII punctuation be escaped).
pub fn escape(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    for c in text.chars() {
        match c {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '\\' | '`' | '*' | '_' | '[' | ']' | '!' | '|' | '{' | '}' | '#' | '~' => {
                out.push('\\');
                out.push(c);
            }
            c => out.push(c),
        }
    }
    out
}

/// The design as the template sees it.
#[derive(Clone, Debug, Serialize)]
pub struct DesignView {
    /// Id.
    pub id: String,
    /// Title (escaped).
    pub title: String,
    /// Revision (escaped).
    pub revision: String,
    /// Date.
    pub date: String,
    /// Author (escaped).
    pub author: Option<String>,
    /// Purpose (escaped).
    pub purpose: Option<String>,
    /// Temperature, K.
    pub temperature_k: f64,
    /// Temperature, °C.
    pub temperature_c: f64,
    /// Supplies, formatted (`vcc 12 V`).
    pub supplies: Vec<String>,
    /// Signal source, formatted.
    pub signal: String,
    /// Output, formatted.
    pub output: String,
}

/// The template API: the keys of results.json, with `design` extended and escaped.
#[derive(Clone, Debug, Serialize)]
pub struct View<'a> {
    /// The tool.
    pub tool: &'a Tool,
    /// The design's description.
    pub design: DesignView,
    /// Provenance.
    pub provenance: &'a Provenance,
    /// Every computed value (operating_point, midband, high, low, poles, zeros, …).
    #[serde(flatten)]
    pub analysis: &'a Analysis,
    /// Requirements at nominal values, corners and yields.
    pub requirements: &'a [RequirementCheck],
    /// Sensitivities (absent without a study).
    pub sensitivity: Option<&'a Sensitivity<'a>>,
    /// Worst case and Monte Carlo (absent without a study).
    pub tolerance: Option<&'a ToleranceSummary<'a>>,
    /// Cautions.
    pub cautions: &'a [Caution],
    /// Explanation paragraphs (Markdown).
    pub explanation: &'a Explanation,
}

impl<'a> View<'a> {
    /// The view of a results document.
    pub fn new(
        design: &Design,
        doc: &'a ResultsDocument<'a>,
        explanation: &'a Explanation,
    ) -> View<'a> {
        View {
            tool: &doc.tool,
            design: design_view(design),
            provenance: &doc.provenance,
            analysis: doc.analysis,
            requirements: doc.requirements,
            sensitivity: doc.sensitivity.as_ref(),
            tolerance: doc.tolerance.as_ref(),
            cautions: doc.cautions,
            explanation,
        }
    }
}

/// Builds the design description.
pub fn design_view(design: &Design) -> DesignView {
    let m = &design.meta;
    let pair = |p: &str, n: &str| if n == "gnd" { p.to_string() } else { format!("{p}–{n}") };
    DesignView {
        id: m.id.clone(),
        title: escape(&m.title),
        revision: escape(&m.revision),
        date: m.date.clone(),
        author: m.author.as_deref().map(escape),
        purpose: m.purpose.as_deref().map(escape),
        temperature_k: design.temperature_k,
        temperature_c: design.temperature_k - 273.15,
        supplies: design
            .supplies
            .iter()
            .map(|s| format!("{} {}", s.node, si(s.voltage.nominal, "V", 4)))
            .collect(),
        signal: format!(
            "{} through {}",
            pair(&design.signal.positive, &design.signal.negative),
            si(design.signal.resistance.nominal, "Ω", 4)
        ),
        output: pair(&design.output.positive, &design.output.negative),
    }
}
