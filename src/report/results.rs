//! results.json: the machine-readable results contract (keys snake_case, SI units in the
//! name; a value that does not exist is null, never NaN).

use serde::Serialize;

use crate::analysis::Analysis;
use crate::analysis::requirements::RequirementCheck;
use crate::design::Design;
use crate::report::cautions::Caution;

/// The tool that wrote the results.
#[derive(Clone, Debug, Serialize)]
pub struct Tool {
    /// `tauweave`.
    pub name: &'static str,
    /// Its version.
    pub version: &'static str,
}

/// Which design the results are for.
#[derive(Clone, Debug, Serialize)]
pub struct DesignId {
    /// Design id.
    pub id: String,
    /// Title.
    pub title: String,
    /// Revision.
    pub revision: String,
    /// The design's date.
    pub date: String,
}

/// Where the results came from.
#[derive(Clone, Debug, Serialize)]
pub struct Provenance {
    /// SHA-256 of the design file's bytes, hex.
    pub design_sha256: String,
    /// SHA-256 of the template, hex (null until templates render).
    pub template_sha256: Option<String>,
    /// The Monte Carlo seed.
    pub seed: u64,
    /// The command that rebuilds these results.
    pub rebuild_command: String,
}

/// SHA-256 of the inputs, hex.
#[derive(Clone, Debug)]
pub struct Hashes {
    /// Of the design file's bytes.
    pub design: String,
    /// Of the template's bytes.
    pub template: Option<String>,
    /// The user's template file, when not the built-in one.
    pub template_name: Option<String>,
}

/// The whole results document.
#[derive(Clone, Debug, Serialize)]
pub struct ResultsDocument<'a> {
    /// The tool.
    pub tool: Tool,
    /// The design.
    pub design: DesignId,
    /// Provenance.
    pub provenance: Provenance,
    /// Everything computed.
    #[serde(flatten)]
    pub analysis: &'a Analysis,
    /// Each requirement at nominal values, at the tolerance corners and its yield.
    pub requirements: &'a [RequirementCheck],
    /// Normalised sensitivities of every figure to every lever (null without a study).
    pub sensitivity: Option<Sensitivity<'a>>,
    /// Worst case and Monte Carlo (null without a study).
    pub tolerance: Option<ToleranceSummary<'a>>,
    /// The cautions that apply.
    pub cautions: &'a [Caution],
}

/// The `sensitivity` key.
#[derive(Clone, Debug, Serialize)]
pub struct Sensitivity<'a> {
    /// Relative step of the central differences.
    pub step: f64,
    /// Figure names, the order of each lever's `s`.
    pub figures: &'a [String],
    /// Every lever with S = ∂ln y/∂ln x for each figure.
    pub levers: &'a [crate::analysis::tolerance::LeverSensitivity],
}

/// The `tolerance` key.
#[derive(Clone, Debug, Serialize)]
pub struct ToleranceSummary<'a> {
    /// Linearised bound and evaluated corners of each figure.
    pub worst_case: &'a [crate::analysis::tolerance::WorstCase],
    /// Monte Carlo, when it ran.
    pub monte_carlo: Option<&'a crate::analysis::tolerance::MonteCarlo>,
}

/// The tool's identity.
pub fn tool() -> Tool {
    Tool { name: "tauweave", version: env!("CARGO_PKG_VERSION") }
}

/// Builds the document for `design` whose file bytes hash to `design_sha256`.
pub fn document<'a>(
    design: &Design,
    analysis: &'a Analysis,
    requirements: &'a [RequirementCheck],
    cautions: &'a [Caution],
    study: Option<&'a crate::analysis::tolerance::Study>,
    hashes: Hashes,
    design_name: &str,
) -> ResultsDocument<'a> {
    let m = &design.meta;
    ResultsDocument {
        tool: tool(),
        design: DesignId {
            id: m.id.clone(),
            title: m.title.clone(),
            revision: m.revision.clone(),
            date: m.date.clone(),
        },
        provenance: Provenance {
            design_sha256: hashes.design,
            template_sha256: hashes.template,
            seed: design.analysis.seed,
            rebuild_command: match &hashes.template_name {
                Some(t) => format!("tauweave render {design_name} --template {t}"),
                None => format!("tauweave render {design_name}"),
            },
        },
        analysis,
        requirements,
        sensitivity: study.map(|s| Sensitivity {
            step: s.step,
            figures: &s.figures,
            levers: &s.levers,
        }),
        tolerance: study.map(|s| ToleranceSummary {
            worst_case: &s.worst_case,
            monte_carlo: s.monte_carlo.as_ref(),
        }),
        cautions,
    }
}

/// The document as pretty JSON with a final newline.
pub fn to_json(doc: &ResultsDocument) -> String {
    let mut s =
        serde_json::to_string_pretty(doc).unwrap_or_else(|e| format!("{{\"error\": \"{e}\"}}"));
    s.push('\n');
    s
}
