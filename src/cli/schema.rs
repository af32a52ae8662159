//! `tauweave schema`: prints the JSON Schema of the design format.

use clap::Args;

use crate::cli::{Failure, Outcome};
use crate::design::schema::design_schema;

/// Flags of `tauweave schema`.
#[derive(Debug, Args)]
pub struct SchemaArgs {}

/// Prints the schema on standard output.
pub fn run(_args: &SchemaArgs) -> Result<Outcome, Failure> {
    let text = serde_json::to_string_pretty(&design_schema())
        .map_err(|e| Failure::Internal(format!("schema did not serialise: {e}")))?;
    crate::cli::out(&format!("{text}\n"))?;
    Ok(Outcome::Done)
}
