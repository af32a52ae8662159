//! `tauweave template show`: prints the built-in review template to start your own from.

use clap::{Args, Subcommand};

use crate::cli::{Failure, Outcome};
use crate::report::template::BUILT_IN;

/// Flags of `tauweave template`.
#[derive(Debug, Args)]
pub struct TemplateArgs {
    /// What to do with templates.
    #[command(subcommand)]
    pub action: TemplateAction,
}

/// Template actions.
#[derive(Debug, Subcommand)]
pub enum TemplateAction {
    /// Print the built-in review template (Markdown with directives).
    Show,
}

/// Runs the action.
pub fn run(args: &TemplateArgs) -> Result<Outcome, Failure> {
    match args.action {
        TemplateAction::Show => print!("{BUILT_IN}"),
    }
    Ok(Outcome::Done)
}
