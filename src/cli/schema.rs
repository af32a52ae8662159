//! `tauweave schema`: prints the JSON Schema of the design format (`--project`: of the
//! project file).

use clap::Args;

use crate::cli::{Failure, Outcome};
use crate::design::schema::{design_schema, project_schema};

/// Flags of `tauweave schema`.
#[derive(Debug, Args)]
pub struct SchemaArgs {
    /// The schema of the project file (tauweave-project.yaml) instead of the design file's.
    #[arg(long)]
    pub project: bool,
}

/// Prints the schema on standard output.
pub fn run(args: &SchemaArgs) -> Result<Outcome, Failure> {
    let schema = if args.project { project_schema() } else { design_schema() };
    let text = serde_json::to_string_pretty(&schema)
        .map_err(|e| Failure::Internal(format!("schema did not serialise: {e}")))?;
    crate::cli::out(&format!("{text}\n"))?;
    Ok(Outcome::Done)
}
