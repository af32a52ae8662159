//! The command line: flags, subcommands, terminal output.
//!
//! In: the process arguments and the files they name. Out: an [`Outcome`] or a [`Failure`]
//! for `main` to turn into an exit code. One file per subcommand. This is the only layer
//! that reads files given by the user and prints to the terminal.

pub mod batch;
pub mod build;
pub mod check;
pub mod completions;
pub mod diff;
pub mod new;
pub mod pdf;
pub mod progress;
pub mod render;
pub mod report_flag;
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

impl Failure {
    /// Bad input that has no place in a file, rendered by [`problem`].
    pub fn input(what: impl std::fmt::Display, help: Option<&str>) -> Failure {
        Failure::Input(problem(Level::Error, &what.to_string(), help))
    }
}

/// Writes `text` to standard output. A reader that went away (a closed pipe, as in
/// `tauweave schema | head`) is no failure: the rest of the output is dropped quietly and the
/// command goes on to its own exit code. Any other write error is reported.
pub fn out(text: &str) -> Result<(), Failure> {
    use std::io::Write;
    let mut stdout = std::io::stdout().lock();
    let text = crate::notation::visible(text);
    match stdout.write_all(text.as_bytes()).and_then(|()| stdout.flush()) {
        Err(e) if e.kind() != std::io::ErrorKind::BrokenPipe => {
            Err(Failure::Internal(format!("cannot write to standard output: {e}")))
        }
        _ => Ok(()),
    }
}

/// How grave a problem is.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Level {
    /// The command fails for it.
    Error,
    /// The command goes on.
    Warning,
}

/// The one renderer of a problem that has no place in a file (a problem in a design file is
/// a located diagnostic, `design::Diagnostic`): `error: WHAT` or `warning: WHAT`, then
/// `  help: HELP` when there is one, each line ended.
pub fn problem(level: Level, what: &str, help: Option<&str>) -> String {
    let level = match level {
        Level::Error => "error",
        Level::Warning => "warning",
    };
    let what = crate::notation::visible(what);
    let help = help.map(crate::notation::visible);
    match help {
        Some(help) => format!("{level}: {what}\n  help: {help}\n"),
        None => format!("{level}: {what}\n"),
    }
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
    /// Validate designs and print their analysis (one line each when several are named).
    Check(check::CheckArgs),
    /// Analyse designs and write each review (HTML, Markdown, PDF, plots, JSON) into a folder.
    Render(render::RenderArgs),
    /// Show what changed between two revisions of a design: parts, models and results.
    Diff(diff::DiffArgs),
    /// Write a starter design to edit into your own.
    New(new::NewArgs),
    /// Work with report templates.
    Template(template::TemplateArgs),
    /// Rebuild rendered folders from their own inputs and compare every file byte for byte.
    Verify(verify::VerifyArgs),
    /// Print the JSON Schema of the design format (for editors).
    Schema(schema::SchemaArgs),
    /// Print shell completions (bash, zsh, fish, powershell).
    Completions(completions::CompletionsArgs),
    /// Print the manual page (roff), for `man`.
    Manual(completions::ManualArgs),
}

/// Parses the process arguments and runs the command.
pub fn run() -> Result<Outcome, Failure> {
    let cli = Cli::try_parse().map_err(Failure::Usage)?;
    match cli.command {
        Command::Check(args) => check::run(&args),
        Command::Render(args) if args.watch => match args.single() {
            Some(design) => watch::run(&args.job(design, args.out.clone()), args.format),
            None => Err(Failure::input(
                "--watch follows one design file, and several (or a folder) were named",
                Some("name one design file with --watch, or render the batch without it"),
            )),
        },
        Command::Render(args) => render::run(&args),
        Command::Schema(args) => schema::run(&args),
        Command::Diff(args) => diff::run(&args),
        Command::New(args) => new::run(&args),
        Command::Template(args) => template::run(&args),
        Command::Verify(args) => verify::run(&args),
        Command::Completions(args) => completions::run(&args),
        Command::Manual(args) => completions::run_manual(&args),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Each subcommand is a thin user of the library and of the shared cli modules; none
    /// reaches into another subcommand's file.
    #[test]
    fn no_subcommand_imports_another() {
        let subcommands = ["check", "diff", "new", "render", "schema", "template", "verify"];
        for entry in std::fs::read_dir("src/cli").unwrap() {
            let path = entry.unwrap().path();
            let text = std::fs::read_to_string(&path).unwrap();
            let own = path.file_stem().unwrap().to_string_lossy().to_string();
            if own == "mod" {
                continue;
            }
            for other in subcommands.iter().filter(|s| **s != own) {
                for pattern in [format!("cli::{other}::"), format!("cli::{other};")] {
                    assert!(!text.contains(&pattern), "{} uses {pattern}", path.display());
                }
            }
        }
    }

    #[test]
    fn a_problem_reads_error_then_help() {
        assert_eq!(
            problem(Level::Error, "cannot read `x`", Some("check the path")),
            "error: cannot read `x`\n  help: check the path\n"
        );
        assert_eq!(
            problem(Level::Warning, "file watcher: gone", None),
            "warning: file watcher: gone\n"
        );
    }
}
