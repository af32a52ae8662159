//! `tauweave completions SHELL` and `tauweave manual`: shell completions and the manual page,
//! generated from the same clap definitions the command line parses with (clap_complete,
//! clap_mangen), so they never drift from the flags.

use clap::{Args, CommandFactory, ValueEnum};

use crate::cli::{Cli, Failure, Outcome};

/// The shells completions are written for.
#[derive(Clone, Copy, Debug, PartialEq, Eq, ValueEnum)]
pub enum Shell {
    /// bash.
    Bash,
    /// zsh.
    Zsh,
    /// fish.
    Fish,
    /// PowerShell.
    Powershell,
}

/// Flags of `tauweave completions`.
#[derive(Debug, Args)]
pub struct CompletionsArgs {
    /// The shell to write completions for.
    #[arg(value_enum)]
    pub shell: Shell,
}

/// Flags of `tauweave manual`.
#[derive(Debug, Args)]
pub struct ManualArgs {}

/// The completion script for `shell`.
pub fn completions(shell: Shell) -> String {
    let mut cmd = Cli::command();
    let mut buf = Vec::new();
    let name = "tauweave";
    match shell {
        Shell::Bash => {
            clap_complete::generate(clap_complete::Shell::Bash, &mut cmd, name, &mut buf)
        }
        Shell::Zsh => clap_complete::generate(clap_complete::Shell::Zsh, &mut cmd, name, &mut buf),
        Shell::Fish => {
            clap_complete::generate(clap_complete::Shell::Fish, &mut cmd, name, &mut buf)
        }
        Shell::Powershell => {
            clap_complete::generate(clap_complete::Shell::PowerShell, &mut cmd, name, &mut buf)
        }
    }
    String::from_utf8_lossy(&buf).into_owned()
}

/// The manual page (roff), the main page with each subcommand's flags after it.
pub fn manual() -> Result<String, Failure> {
    let cmd = Cli::command();
    let mut buf = Vec::new();
    let fail =
        |e: std::io::Error| Failure::Internal(format!("the manual page did not render: {e}"));
    clap_mangen::Man::new(cmd.clone()).render(&mut buf).map_err(fail)?;
    for sub in cmd.get_subcommands().filter(|s| s.get_name() != "help") {
        let page = clap_mangen::Man::new(sub.clone().name(format!("tauweave-{}", sub.get_name())));
        page.render_name_section(&mut buf).map_err(fail)?;
        page.render_synopsis_section(&mut buf).map_err(fail)?;
        page.render_description_section(&mut buf).map_err(fail)?;
        page.render_options_section(&mut buf).map_err(fail)?;
    }
    Ok(String::from_utf8_lossy(&buf).into_owned())
}

/// Prints the completions.
pub fn run(args: &CompletionsArgs) -> Result<Outcome, Failure> {
    crate::cli::out(&completions(args.shell))?;
    Ok(Outcome::Done)
}

/// Prints the manual page.
pub fn run_manual(_args: &ManualArgs) -> Result<Outcome, Failure> {
    crate::cli::out(&manual()?)?;
    Ok(Outcome::Done)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn every_shell_gets_completions_that_know_every_subcommand() {
        for shell in [Shell::Bash, Shell::Zsh, Shell::Fish, Shell::Powershell] {
            let text = completions(shell);
            for sub in ["check", "render", "diff", "verify", "new", "schema", "completions"] {
                assert!(text.contains(sub), "{shell:?} lacks {sub}");
            }
            // The flag by its long name (fish writes `-l runs`, the others `--runs`).
            assert!(text.contains("runs"), "{shell:?} lacks the flags");
        }
    }

    #[test]
    fn the_manual_page_is_roff_with_every_subcommand() {
        let page = manual().unwrap();
        assert!(
            page.starts_with(".ie") || page.contains(".TH tauweave"),
            "{}",
            &page[..200.min(page.len())]
        );
        for sub in ["tauweave\\-check", "tauweave\\-render", "tauweave\\-diff"] {
            assert!(page.contains(sub), "no {sub} section");
        }
    }
}
