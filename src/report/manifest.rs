//! The manifest of a rendered folder: what built it, from which inputs (copied beside the
//! outputs), and the SHA-256 of every file — so the folder alone can be rebuilt and
//! compared byte for byte years later.

use std::collections::BTreeMap;

use serde::{Deserialize, Serialize};
use sha2::{Digest, Sha256};

use crate::report::{OutputFile, hex};

/// File name of the manifest inside a rendered folder.
pub const FILE: &str = "manifest.json";
/// Where the design file is copied.
pub const DESIGN_COPY: &str = "inputs/design.yaml";
/// Where a user template is copied.
pub const TEMPLATE_COPY: &str = "inputs/template.md";
/// Where the project file is archived.
pub const PROJECT_COPY: &str = "inputs/project.yaml";

/// Where a project's logo named `name` is archived.
pub fn logo_copy(name: &str) -> String {
    let png = name.to_ascii_lowercase().ends_with(".png");
    format!("inputs/logo.{}", if png { "png" } else { "svg" })
}

/// How a folder was rendered: everything besides the inputs that a rebuild must repeat.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct Recipe {
    /// The design file's name as given (it appears in the provenance).
    pub design_name: String,
    /// The user template's name as given; absent for the built-in template.
    pub template_name: Option<String>,
    /// `all`, `html`, `md`, `pdf` or `json`.
    pub format: String,
    /// Monte Carlo runs used.
    pub runs: u32,
    /// Paper of the PDF packet, `a4` or `us-letter` (`a4` in folders from before it).
    #[serde(default = "default_paper")]
    pub paper: String,
    /// What the typst program said of its version, when it made report.pdf.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub typst: Option<String>,
    /// The project file's name as found, when the design had one above it (archived as
    /// [`PROJECT_COPY`], its logo beside it).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub project_name: Option<String>,
}

fn default_paper() -> String {
    "a4".into()
}

/// What a render recorded about itself.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct Manifest {
    /// `tauweave`.
    pub tool: String,
    /// The version that rendered.
    pub version: String,
    /// How it rendered.
    #[serde(flatten)]
    pub recipe: Recipe,
    /// SHA-256 of each copied input, by path in the folder.
    pub inputs: BTreeMap<String, String>,
    /// SHA-256 of each output, by path in the folder.
    pub outputs: BTreeMap<String, String>,
}

/// SHA-256 of bytes, hex.
pub fn sha256(bytes: &[u8]) -> String {
    hex(&Sha256::digest(bytes))
}

/// Adds the input copies and the manifest to a render's files. `template_text` is the
/// user template's text (absent for the built-in one); `extra` the other inputs (the
/// schematic drawing) by their path in the folder.
pub fn seal(
    mut files: Vec<OutputFile>,
    recipe: Recipe,
    design_text: &str,
    template_text: Option<&str>,
    extra: &[(String, Vec<u8>)],
) -> Vec<OutputFile> {
    let outputs: BTreeMap<String, String> =
        files.iter().map(|f| (f.path.clone(), sha256(&f.bytes))).collect();
    let mut inputs = BTreeMap::new();
    inputs.insert(DESIGN_COPY.to_string(), sha256(design_text.as_bytes()));
    files.push(OutputFile { path: DESIGN_COPY.into(), bytes: design_text.as_bytes().to_vec() });
    if let Some(text) = template_text {
        inputs.insert(TEMPLATE_COPY.to_string(), sha256(text.as_bytes()));
        files.push(OutputFile { path: TEMPLATE_COPY.into(), bytes: text.as_bytes().to_vec() });
    }
    for (path, bytes) in extra {
        inputs.insert(path.clone(), sha256(bytes));
        files.push(OutputFile { path: path.clone(), bytes: bytes.clone() });
    }
    let manifest = Manifest {
        tool: "tauweave".into(),
        version: env!("CARGO_PKG_VERSION").into(),
        recipe,
        inputs,
        outputs,
    };
    let mut json = serde_json::to_string_pretty(&manifest).unwrap_or_default();
    json.push('\n');
    files.push(OutputFile { path: FILE.into(), bytes: json.into_bytes() });
    files.sort_by(|a, b| a.path.cmp(&b.path));
    files
}

/// The values that differ between two JSON documents: `path: old → new`.
pub fn json_differences(
    old: &serde_json::Value,
    new: &serde_json::Value,
    path: &str,
    out: &mut Vec<String>,
) {
    use serde_json::Value;
    match (old, new) {
        (Value::Object(a), Value::Object(b)) => {
            for (k, v) in a {
                match b.get(k) {
                    Some(w) => json_differences(v, w, &format!("{path}.{k}"), out),
                    None => out.push(format!("{path}.{k}: missing in the rebuild")),
                }
            }
            for k in b.keys().filter(|k| !a.contains_key(*k)) {
                out.push(format!("{path}.{k}: new in the rebuild"));
            }
        }
        (Value::Array(a), Value::Array(b)) if a.len() == b.len() => {
            for (i, (v, w)) in a.iter().zip(b).enumerate() {
                json_differences(v, w, &format!("{path}[{i}]"), out);
            }
        }
        (Value::Number(x), Value::Number(y)) => {
            let (x, y) = (x.as_f64().unwrap_or(0.0), y.as_f64().unwrap_or(0.0));
            if x != y {
                let rel = if x != 0.0 {
                    format!(" ({:+.3e} relative)", (y - x) / x.abs())
                } else {
                    String::new()
                };
                out.push(format!("{path}: {x} → {y}{rel}"));
            }
        }
        (a, b) if a != b => out.push(format!("{path}: {a} → {b}")),
        _ => {}
    }
}
