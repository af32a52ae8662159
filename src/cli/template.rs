//! `tauweave template show [review|change]`: prints a built-in template to start your own
//! from — the review document's, or the change report's (`tauweave diff`).

use clap::{Args, Subcommand, ValueEnum};

use crate::cli::{Failure, Outcome};
use crate::report::{change, template};

/// Flags of `tauweave template`.
#[derive(Debug, Args)]
pub struct TemplateArgs {
    /// What to do with templates.
    #[command(subcommand)]
    pub action: TemplateAction,
}

/// The built-in templates.
#[derive(Clone, Copy, Debug, PartialEq, Eq, ValueEnum)]
pub enum Which {
    /// The review document (`tauweave render --template`).
    Review,
    /// The change report (`tauweave diff --template`).
    Change,
}

/// Template actions.
#[derive(Debug, Subcommand)]
pub enum TemplateAction {
    /// Print a built-in template (Markdown with directives).
    Show {
        /// Which template.
        #[arg(value_enum, default_value_t = Which::Review)]
        which: Which,
    },
}

/// Runs the action.
pub fn run(args: &TemplateArgs) -> Result<Outcome, Failure> {
    match args.action {
        TemplateAction::Show { which: Which::Review } => crate::cli::out(template::BUILT_IN)?,
        TemplateAction::Show { which: Which::Change } => crate::cli::out(change::BUILT_IN)?,
    }
    Ok(Outcome::Done)
}
