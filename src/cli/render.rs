//! `tauweave render DESIGN`: analyses a design and writes its outputs into a folder.
//!
//! For now the output is results.json (the results contract); the review document formats
//! join it as they land. Files are written atomically; nothing is written when the design
//! or its analysis fails.

use std::path::PathBuf;

use clap::{Args, ValueEnum};
use sha2::{Digest, Sha256};

use crate::cli::source::{analysis_failure, load_file};
use crate::cli::{Failure, Outcome};
use crate::report::{results, write};

/// Output formats.
#[derive(Clone, Copy, Debug, PartialEq, Eq, ValueEnum)]
pub enum Format {
    /// results.json: every computed value, machine-readable.
    Json,
}

/// Flags of `tauweave render`.
#[derive(Debug, Args)]
pub struct RenderArgs {
    /// The design file (YAML).
    pub design: PathBuf,
    /// What to write.
    #[arg(long, value_enum, default_value_t = Format::Json)]
    pub format: Format,
    /// Output folder (default: out/<design id>/).
    #[arg(long)]
    pub out: Option<PathBuf>,
}

/// Runs the render.
pub fn run(args: &RenderArgs) -> Result<Outcome, Failure> {
    let file = load_file(&args.design)?;
    let design = file.design()?;
    eprint!("{}", file.report());
    let analysis = crate::analysis::analyze(design).map_err(|e| analysis_failure(&file, &e))?;
    let hash = hex(&Sha256::digest(file.text.as_bytes()));
    let doc = results::document(design, &analysis, hash, &file.name);
    let dir = args.out.clone().unwrap_or_else(|| PathBuf::from("out").join(&design.meta.id));
    let path = dir.join("results.json");
    write::atomic(&path, results::to_json(&doc).as_bytes())
        .map_err(|e| Failure::Input(format!("error: cannot write `{}`: {e}\n", path.display())))?;
    eprintln!("wrote {}", path.display());
    Ok(Outcome::Done)
}

/// Lower-case hex of bytes.
pub fn hex(bytes: &[u8]) -> String {
    bytes.iter().map(|b| format!("{b:02x}")).collect()
}
