//! The command line: flags, subcommands, terminal output.
//!
//! In: the process arguments and the files they name. Out: an [`Outcome`] or a [`Failure`]
//! for `main` to turn into an exit code. One file per subcommand. This is the only layer
//! that reads files given by the user and prints to the terminal.

pub mod check;
pub mod diff;
pub mod new;
pub mod pdf;
pub mod render;
pub mod schema;
pub mod source;
pub mod table;
pub mod template;
pub mod verify;
pub mod watch;

use clap::{Parser, Subcommand};

/// How a command ended, when it ran to completion.
#[derive(Debug, PartialEq, Eq)]
pub enum Outcome {
    /// All well.
    Done,
    /// The command ran, and the design fails a requirement or check.
    Failing,
}

/// Why a command could not run.
#[derive(Debug)]
pub enum Failure {
    /// Bad flags; clap's own message (also carries `--help` and `--version` output).
    Usage(clap::Error),
    /// Bad input: the text to print, already formatted (diagnostics, missing files).
    Input(String),
    /// A bug: something that should not happen did.
    Internal(String),
}

/// tauweave renders amplifier design-review documents from a YAML design file.
#[derive(Debug, Parser)]
#[command(name = "tauweave", version, about, long_about = None, propagate_version = true)]
pub struct Cli {
    /// What to do.
    #[command(subcommand)]
    pub command: Command,
}

/// The subcommands.
#[derive(Debug, Subcommand)]
pub enum Command {
    /// Validate a design file and print a summary of it.
    Check(check::CheckArgs),
    /// Analyse a design and write its review (HTML, Markdown, PDF, plots, JSON) into a folder.
    Render(render::RenderArgs),
    /// Show what changed between two revisions of a design: parts, models and results.
    Diff(diff::DiffArgs),
    /// Write a starter design to edit into your own.
    New(new::NewArgs),
    /// Work with report templates.
    Template(template::TemplateArgs),
    /// Rebuild a rendered folder from its own inputs and compare every file byte for byte.
    Verify(verify::VerifyArgs),
    /// Print the JSON Schema of the design format (for editors).
    Schema(schema::SchemaArgs),
}

/// Parses the process arguments and runs the command.
pub fn run() -> Result<Outcome, Failure> {
    let cli = Cli::try_parse().map_err(Failure::Usage)?;
    match cli.command {
        Command::Check(args) => check::run(&args),
        Command::Render(args) => render::run(&args),
        Command::Schema(args) => schema::run(&args),
        Command::Diff(args) => diff::run(&args),
        Command::New(args) => new::run(&args),
        Command::Template(args) => template::run(&args),
        Command::Verify(args) => verify::run(&args),
    }
}
