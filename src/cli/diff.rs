//! `tauweave diff OLD NEW`: what changed between two revisions of a design — requirements
//! whose status changed first, then parts and model parameters, then every reviewed figure
//! that moved. Printed on the terminal and written as change.html and change.md through the
//! change template (the built-in one, or `--template`).
//!
//! Each side is a design file (analysed here) or a results.json from an earlier render.
//! Part and model changes need design files on both sides. The comparison itself lives in
//! `report/change.rs`; this file reads the inputs, prints and writes.

use std::fmt::Write as _;
use std::path::{Path, PathBuf};

use clap::Args;
use sha2::{Digest, Sha256};

use crate::analysis::response::SweepPoint;
use crate::cli::progress;
use crate::cli::source::{LoadedFile, analysis_failure, load_file, template_source};
use crate::cli::table::{Align, render};
use crate::cli::{Failure, Outcome, out};
use crate::report::change::{self, Change, Revision};
use crate::report::manifest::sha256;
use crate::report::results::{self, Hashes, ResultsDocument};
use crate::report::template::{self, TemplateSource};
use crate::report::{hex, write};

/// Flags of `tauweave diff`.
#[derive(Debug, Args)]
pub struct DiffArgs {
    /// The earlier revision: a design file or a results.json.
    pub old: PathBuf,
    /// The later revision: a design file or a results.json.
    pub new: PathBuf,
    /// Monte Carlo runs for designs analysed here (default: each design's own).
    #[arg(long)]
    pub runs: Option<u32>,
    /// Folder for change.html and change.md (default: out/<later design id>-change/).
    #[arg(long)]
    pub out: Option<PathBuf>,
    /// A change template of your own (start from `tauweave template show change`).
    #[arg(long)]
    pub template: Option<PathBuf>,
    /// Print on the terminal only; write no files.
    #[arg(long)]
    pub no_write: bool,
    /// Also write the comparison as JSON for scripts: `json FILE`; `-` as FILE writes it to
    /// standard output instead of the usual text.
    #[arg(long, num_args = 2, value_names = ["FORMAT", "FILE"])]
    pub report: Option<Vec<String>>,
}

/// One side, read and (for a design file) analysed.
struct Side {
    file: Option<LoadedFile>,
    sha256: String,
    results: ResultsDocument,
    sweep: Option<Vec<SweepPoint>>,
}

impl Side {
    fn revision<'a>(&'a self, source: &'a str) -> Revision<'a> {
        Revision {
            source,
            sha256: self.sha256.clone(),
            design: self.file.as_ref().and_then(|f| f.loaded.design.as_ref()),
            results: &self.results,
            sweep: self.sweep.as_deref(),
        }
    }
}

fn side(path: &Path, runs: Option<u32>) -> Result<Side, Failure> {
    if path.extension().is_some_and(|e| e == "json") {
        let bytes = std::fs::read(path).map_err(|e| {
            Failure::input(format_args!("cannot read `{}`: {e}", path.display()), None)
        })?;
        let help = Some("give a design file or the results.json of a render");
        let value: serde_json::Value = serde_json::from_slice(&bytes).map_err(|e| {
            Failure::input(format_args!("`{}` is not a results.json: {e}", path.display()), help)
        })?;
        if value.pointer("/tool/name").and_then(serde_json::Value::as_str) != Some("tauweave") {
            return Err(Failure::input(
                format_args!("`{}` is JSON but not a tauweave results.json", path.display()),
                help,
            ));
        }
        let results = results::from_json(&bytes).map_err(|e| {
            Failure::input(
                format_args!("`{}` does not read as a results.json of this version: {e}", path.display()),
                Some("render the design again with this version of tauweave, or give the design file"),
            )
        })?;
        let sweep = read_sweep(&path.with_file_name("sweep.csv"));
        return Ok(Side { file: None, sha256: sha256(&bytes), results, sweep });
    }
    let file = load_file(path)?;
    let design = file.design()?;
    eprint!("{}", file.report());
    let runs = runs.unwrap_or(design.analysis.monte_carlo_runs);
    let review =
        progress::review(design, runs).map_err(|e| Failure::Input(analysis_failure(&file, &e)))?;
    // The results document a render with the built-in template would write.
    let hashes = Hashes {
        design: hex(&Sha256::digest(file.text.as_bytes())),
        template: Some(hex(&Sha256::digest(template::BUILT_IN.as_bytes()))),
        template_name: None,
    };
    let results = results::document(design, &review, hashes, &file.name);
    let sweep = Some(review.analysis.sweep.clone());
    Ok(Side { sha256: sha256(file.text.as_bytes()), file: Some(file), results, sweep })
}

/// The sweep.csv a render wrote beside its results.json, when it is there and reads; the
/// change report then draws that revision's response too.
fn read_sweep(path: &Path) -> Option<Vec<SweepPoint>> {
    let text = std::fs::read_to_string(path).ok()?;
    let mut lines = text.lines();
    // The response's three columns lead; the noise columns after them (empty where absent)
    // are not drawn, and a file from before they were written reads the same.
    if !lines.next()?.starts_with("frequency_hz,magnitude_db,phase_deg") {
        return None;
    }
    lines
        .map(|line| {
            let v: Vec<f64> =
                line.split(',').take(3).map(|x| x.parse().ok()).collect::<Option<_>>()?;
            match v[..] {
                [frequency_hz, magnitude_db, phase_deg]
                    if v.iter().all(|x| x.is_finite()) && frequency_hz > 0.0 =>
                {
                    Some(SweepPoint { frequency_hz, magnitude_db, phase_deg })
                }
                _ => None,
            }
        })
        .collect()
}

/// The change report as terminal text, in the order of the written report.
pub fn terminal(c: &Change) -> String {
    let mut out = String::new();
    let _ = writeln!(out, "{} → {}", c.old.source_text, c.new.source_text);
    if !c.status_changes.is_empty() {
        let _ = writeln!(out, "\nrequirements that changed status");
        let header = [
            ("", Align::Left),
            ("limit", Align::Left),
            ("before", Align::Right),
            ("after", Align::Right),
        ];
        out.push_str(&render(2, &header, &change::status_rows(c)));
    }
    let _ = writeln!(out, "\nparts, models and settings");
    if !c.parts_compared {
        let _ = writeln!(out, "  parts and models not compared: one side is a results.json");
    } else if c.part_changes.is_empty() {
        let _ = writeln!(out, "  no part, model or setting changed");
    }
    {
        for p in &c.part_changes {
            let mark = match p.change {
                "added" => "+",
                "removed" => "−",
                _ => "~",
            };
            let text = match (&p.old, &p.new) {
                (Some(a), Some(b)) => format!("{a}  →  {b}"),
                (Some(a), None) => a.clone(),
                (None, Some(b)) => b.clone(),
                (None, None) => String::new(),
            };
            let _ = writeln!(out, "  {mark} {}  {text}", p.item);
        }
    }
    let _ = writeln!(out, "\nwhat moved");
    if c.moved.is_empty() {
        let _ = writeln!(out, "  nothing ({} figures compared)", c.figures_compared);
    } else {
        let header = [
            ("", Align::Left),
            ("before", Align::Right),
            ("after", Align::Right),
            ("change", Align::Right),
            ("relative", Align::Right),
            ("bears on", Align::Left),
        ];
        out.push_str(&render(2, &header, &change::moved_rows(c)));
    }
    out
}

/// `out/<later design id>-change/`; an id that is not a plain name (a results.json can say
/// anything) gives `out/change/`, so the report never lands outside `out/`.
fn default_folder(results: &ResultsDocument) -> PathBuf {
    let id = results.design.id.as_str();
    let plain = !id.is_empty()
        && !id.starts_with('.')
        && id.chars().all(|c| c.is_ascii_alphanumeric() || "._-".contains(c));
    PathBuf::from("out").join(if plain { format!("{id}-change") } else { "change".into() })
}

/// Runs the diff.
pub fn run(args: &DiffArgs) -> Result<Outcome, Failure> {
    let template = match &args.template {
        None => {
            TemplateSource { name: change::BUILT_IN_NAME.into(), text: change::BUILT_IN.into() }
        }
        Some(_) => template_source(&args.template)?.0,
    };
    let report = crate::cli::report_flag::parse(&args.report, &["json"])?;
    let old = side(&args.old, args.runs)?;
    let new = side(&args.new, args.runs)?;
    let (old_name, new_name) = (args.old.display().to_string(), args.new.display().to_string());
    let c = change::compare(&old.revision(&old_name), &new.revision(&new_name));
    match &report {
        Some(r) => {
            let mut text = serde_json::to_string_pretty(&c)
                .map_err(|e| Failure::Internal(format!("the change did not serialise: {e}")))?;
            text.push('\n');
            if !r.to_stdout() {
                out(&terminal(&c))?;
            }
            r.write(&text)?;
        }
        None => out(&terminal(&c))?,
    }
    // Rendered even with --no-write, so a broken change template is reported either way.
    let files = change::render(&c, &template)
        .map_err(|e| Failure::Input(format!("{}nothing was written\n", e.message)))?;
    if !args.no_write {
        let dir = args.out.clone().unwrap_or_else(|| default_folder(&new.results));
        write::all(&dir, &files).map_err(|e| Failure::input(e, None))?;
        let names: Vec<&str> = files.iter().map(|f| f.path.as_str()).collect();
        eprintln!("wrote {} into {}/", names.join(", "), dir.display());
    }
    Ok(if c.now_failing { Outcome::Failing } else { Outcome::Done })
}
