//! `tauweave new NAME --kind KIND`: writes a starter design that checks and renders as it
//! stands — one of the example stages, renamed — to edit into your own.

use std::path::PathBuf;

use clap::{Args, ValueEnum};

use crate::cli::{Failure, Outcome};

/// The starter stages.
#[derive(Clone, Copy, Debug, PartialEq, Eq, ValueEnum)]
pub enum Kind {
    /// A degenerated common-emitter preamplifier driving a cable.
    CommonEmitter,
    /// A MOSFET common-source post-amplifier.
    CommonSource,
    /// A bipolar cascode IF stage.
    Cascode,
    /// An emitter follower into a capacitive load.
    EmitterFollower,
}

impl Kind {
    fn text(self) -> (&'static str, &'static str) {
        match self {
            Kind::CommonEmitter => {
                ("rx-preamp-ce", include_str!("../../designs/rx-preamp-ce.yaml"))
            }
            Kind::CommonSource => ("post-amp-cs", include_str!("../../designs/post-amp-cs.yaml")),
            Kind::Cascode => ("if-cascode", include_str!("../../designs/if-cascode.yaml")),
            Kind::EmitterFollower => {
                ("follower-cap-load", include_str!("../../designs/follower-cap-load.yaml"))
            }
        }
    }
}

/// Flags of `tauweave new`.
#[derive(Debug, Args)]
pub struct NewArgs {
    /// The new design's id (letters, digits, `-`, `_`, `.`); the file is NAME.yaml.
    pub name: String,
    /// Which stage to start from.
    #[arg(long, value_enum)]
    pub kind: Kind,
    /// Folder to write into (default: the current one).
    #[arg(long, default_value = ".")]
    pub dir: PathBuf,
}

/// Writes the starter.
pub fn run(args: &NewArgs) -> Result<Outcome, Failure> {
    let ok = args.name.chars().next().is_some_and(|c| c.is_ascii_alphanumeric())
        && args.name.chars().all(|c| c.is_ascii_alphanumeric() || "-_.".contains(c));
    if !ok {
        return Err(Failure::input(
            format_args!("`{}` cannot be a design id", args.name),
            Some("use letters, digits, '-', '_' and '.', e.g. `line-driver-2`"),
        ));
    }
    let path = args.dir.join(format!("{}.yaml", args.name));
    if path.exists() {
        return Err(Failure::input(
            format_args!("`{}` exists already; nothing was written", path.display()),
            Some("pick another name or remove the file"),
        ));
    }
    let (id, text) = args.kind.text();
    let text = text.replacen(&format!("  id: {id}\n"), &format!("  id: {}\n", args.name), 1);
    crate::report::write::atomic(&path, text.as_bytes()).map_err(|e| {
        Failure::input(format_args!("cannot write `{}`: {e}", path.display()), None)
    })?;
    eprintln!(
        "wrote {} (a {} starter); check it with `tauweave check {}`",
        path.display(),
        args.kind.to_possible_value().map_or_else(String::new, |v| v.get_name().to_string()),
        path.display()
    );
    Ok(Outcome::Done)
}
