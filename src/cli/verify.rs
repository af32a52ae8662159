//! `tauweave verify DIR`: rebuilds a rendered folder from the inputs it holds and compares
//! every output byte for byte.
//!
//! Exit 0 when everything is identical, 1 when a file differs or an input was changed
//! (the report says which, and for results.json which values and by how much), 2 when the
//! folder has no usable manifest.

use std::path::PathBuf;

use clap::Args;

use crate::cli::render::{BuildOptions, Format, PaperSize, build};
use crate::cli::source::LoadedFile;
use crate::cli::{Failure, Outcome};
use crate::report::manifest::{self, Manifest, sha256};
use crate::report::template::{BUILT_IN, BUILT_IN_NAME, TemplateSource};

/// Flags of `tauweave verify`.
#[derive(Debug, Args)]
pub struct VerifyArgs {
    /// A folder written by `tauweave render`.
    pub dir: PathBuf,
    /// The typst program, to rebuild a report.pdf (default: $TAUWEAVE_TYPST, else PATH).
    #[arg(long, value_name = "PATH")]
    pub typst: Option<PathBuf>,
}

/// Runs the verification.
pub fn run(args: &VerifyArgs) -> Result<Outcome, Failure> {
    let unusable = |why: String| {
        Failure::Input(format!(
            "error: `{}` cannot be verified: {why}\n  help: verify a folder written by `tauweave render` (it holds {})\n",
            args.dir.display(),
            manifest::FILE
        ))
    };
    let text = std::fs::read_to_string(args.dir.join(manifest::FILE))
        .map_err(|e| unusable(format!("no readable {}: {e}", manifest::FILE)))?;
    let m: Manifest = serde_json::from_str(&text)
        .map_err(|e| unusable(format!("{} does not read: {e}", manifest::FILE)))?;
    let mut problems = Vec::new();
    // The inputs must be the ones recorded.
    for (path, hash) in &m.inputs {
        match std::fs::read(args.dir.join(path)) {
            Ok(bytes) if sha256(&bytes) == *hash => {}
            Ok(_) => problems.push(format!("input {path} was changed after the render")),
            Err(e) => problems.push(format!("input {path} cannot be read: {e}")),
        }
    }
    let design_text = std::fs::read_to_string(args.dir.join(manifest::DESIGN_COPY))
        .map_err(|e| unusable(format!("no design copy: {e}")))?;
    let recipe = &m.recipe;
    let template = match &recipe.template_name {
        None => (TemplateSource { name: BUILT_IN_NAME.into(), text: BUILT_IN.into() }, true),
        Some(name) => {
            let text = std::fs::read_to_string(args.dir.join(manifest::TEMPLATE_COPY))
                .map_err(|e| unusable(format!("no template copy: {e}")))?;
            (TemplateSource { name: name.clone(), text }, false)
        }
    };
    let options = BuildOptions {
        format: Format::from_name(&recipe.format).ok_or_else(|| {
            unusable(format!("unknown format `{}` in the manifest", recipe.format))
        })?,
        runs: Some(recipe.runs),
        paper: PaperSize::from_name(&recipe.paper)
            .ok_or_else(|| unusable(format!("unknown paper `{}` in the manifest", recipe.paper)))?,
        typst: args.typst.clone(),
    };
    if m.version != env!("CARGO_PKG_VERSION") {
        eprintln!(
            "note: rendered by tauweave {}, verifying with {}",
            m.version,
            env!("CARGO_PKG_VERSION")
        );
    }
    let file = LoadedFile {
        name: recipe.design_name.clone(),
        loaded: crate::design::load(&design_text),
        text: design_text,
    };
    let built = build(&file, &template.0, template.1, &options)?;
    if m.outputs.contains_key(crate::report::PDF_FILE) {
        if let Some(problem) = &built.pdf_problem {
            return Err(unusable(format!(
                "its report.pdf cannot be rebuilt here:\n{}",
                problem.message()
            )));
        }
        let now = built.files.iter().find(|f| f.path == manifest::FILE).and_then(|f| {
            serde_json::from_slice::<Manifest>(&f.bytes).ok().and_then(|n| n.recipe.typst)
        });
        if now != recipe.typst {
            eprintln!(
                "note: report.pdf was made by {}, rebuilt by {}",
                recipe.typst.as_deref().unwrap_or("an unknown typst"),
                now.as_deref().unwrap_or("—")
            );
        }
    }
    let rebuilt = built.files;
    for (path, hash) in &m.outputs {
        let Some(new) = rebuilt.iter().find(|f| &f.path == path) else {
            problems.push(format!("{path}: not produced by the rebuild"));
            continue;
        };
        let old = match std::fs::read(args.dir.join(path)) {
            Ok(b) => b,
            Err(e) => {
                problems.push(format!("{path}: cannot be read: {e}"));
                continue;
            }
        };
        if sha256(&old) != *hash {
            problems.push(format!(
                "{path}: changed after the render (its SHA-256 no longer matches the manifest)"
            ));
        }
        if old != new.bytes {
            let mut detail = String::new();
            if path.ends_with(".json") {
                if let (Ok(a), Ok(b)) = (
                    serde_json::from_slice::<serde_json::Value>(&old),
                    serde_json::from_slice::<serde_json::Value>(&new.bytes),
                ) {
                    let mut diffs = Vec::new();
                    manifest::json_differences(&a, &b, "", &mut diffs);
                    for d in diffs.iter().take(20) {
                        detail.push_str(&format!("\n    {d}"));
                    }
                    if diffs.len() > 20 {
                        detail.push_str(&format!("\n    … and {} more", diffs.len() - 20));
                    }
                }
            }
            if detail.is_empty() {
                let at = old
                    .iter()
                    .zip(&new.bytes)
                    .position(|(a, b)| a != b)
                    .unwrap_or(old.len().min(new.bytes.len()));
                detail = format!(" (first difference at byte {at})");
            }
            problems.push(format!("{path}: differs from the rebuild{detail}"));
        }
    }
    if problems.is_empty() {
        println!(
            "identical: {} outputs rebuilt from {} byte for byte",
            m.outputs.len(),
            args.dir.display()
        );
        Ok(Outcome::Done)
    } else {
        println!(
            "differs: {} problem{} in {}",
            problems.len(),
            if problems.len() == 1 { "" } else { "s" },
            args.dir.display()
        );
        for p in &problems {
            println!("  {p}");
        }
        Ok(Outcome::Failing)
    }
}
