//! The PDF route: finds the `typst` program and compiles report.typ into report.pdf with
//! deterministic settings.
//!
//! In: the report.typ and plots/*.svg of a render (in memory), the design's date. Out: the
//! PDF bytes and typst's warnings, or why there are none. typst runs in a private staging
//! folder holding only those files, which is also its `--root`; system fonts are ignored
//! (only the fonts typst embeds are used), and the creation timestamp is the design's date
//! at 00:00 UTC, so the same inputs give the same PDF bytes. The program is `--typst PATH`,
//! else `TAUWEAVE_TYPST`, else `typst` on PATH; a path (not a bare name) is made absolute
//! against the current folder.

use std::path::{Path, PathBuf};
use std::process::Command;

use crate::cli::{Level, problem};
use crate::report::OutputFile;

/// The environment variable that names the typst program.
pub const ENV: &str = "TAUWEAVE_TYPST";

/// How to install typst, for messages.
pub const INSTALL: &str = "cargo install typst-cli --locked";

/// A typst program that answered `--version`.
#[derive(Clone, Debug)]
pub struct Typst {
    /// The program.
    pub program: PathBuf,
    /// What it printed for `--version` (`typst 0.15.1 …`), trimmed.
    pub version: String,
}

/// Why no PDF was made.
#[derive(Clone, Debug)]
pub enum PdfProblem {
    /// No typst program was found (or it did not run).
    Missing(String),
    /// typst ran and reported errors (its own text, naming report.typ's line).
    Failed(String),
}

impl PdfProblem {
    /// Why there is no PDF, in a few words (typst's own text below them when it failed).
    pub fn reason(&self) -> String {
        match self {
            PdfProblem::Missing(why) => why.clone(),
            PdfProblem::Failed(text) => format!("typst could not compile report.typ\n{text}"),
        }
    }

    /// The message for the terminal: an `error:` when `fatal` (the command fails for it),
    /// else a `warning:` (the command goes on).
    pub fn message(&self, fatal: bool) -> String {
        let level = if fatal { Level::Error } else { Level::Warning };
        let help = match self {
            PdfProblem::Missing(_) => format!(
                "install typst with `{INSTALL}` (about 20 minutes, once), or name the program \
                 with --typst PATH or {ENV}"
            ),
            PdfProblem::Failed(_) => {
                "report.typ is written beside the other outputs; the line above names the place"
                    .to_string()
            }
        };
        problem(level, &format!("report.pdf was not made: {}", self.reason()), Some(&help))
    }
}

/// The command that installs the typst recorded in a manifest (`typst 0.15.1 (…)`), so
/// that a rebuilt PDF can match byte for byte; [`INSTALL`] when no version is recorded.
pub fn install_for(recorded: Option<&str>) -> String {
    let version = recorded
        .and_then(|r| r.strip_prefix("typst "))
        .and_then(|r| r.split_whitespace().next())
        .filter(|v| v.starts_with(|c: char| c.is_ascii_digit()));
    match version {
        Some(v) => format!("cargo install typst-cli --version {v} --locked"),
        None => INSTALL.to_string(),
    }
}

/// Finds the typst program: the flag, else the environment variable, else PATH.
pub fn find(flag: Option<&Path>) -> Result<Typst, PdfProblem> {
    let program = match flag {
        Some(p) => p.to_path_buf(),
        None => match std::env::var_os(ENV) {
            Some(p) if !p.is_empty() => PathBuf::from(p),
            _ => on_path("typst").ok_or_else(|| {
                PdfProblem::Missing("the `typst` program is not on PATH".to_string())
            })?,
        },
    };
    let does_not_run = |e: std::io::Error| {
        PdfProblem::Missing(format!("`{}` does not run: {e}", program.display()))
    };
    // `compile` runs typst in its staging folder, so a path is made absolute here; a bare
    // name stays a PATH lookup.
    let program = if program.parent().is_some_and(|p| !p.as_os_str().is_empty()) {
        program.canonicalize().map_err(does_not_run)?
    } else {
        program.clone()
    };
    let out = Command::new(&program).arg("--version").output().map_err(does_not_run)?;
    if !out.status.success() {
        return Err(PdfProblem::Missing(format!(
            "`{} --version` failed: {}",
            program.display(),
            String::from_utf8_lossy(&out.stderr).trim()
        )));
    }
    Ok(Typst { program, version: String::from_utf8_lossy(&out.stdout).trim().to_string() })
}

fn on_path(name: &str) -> Option<PathBuf> {
    let path = std::env::var_os("PATH")?;
    std::env::split_paths(&path).map(|d| d.join(name)).find(|p| p.is_file())
}

/// Seconds since 1970-01-01 UTC of a `YYYY-MM-DD` date at midnight (proleptic Gregorian).
pub fn unix_midnight(date: &str) -> Option<i64> {
    let mut it = date.splitn(3, '-').map(|p| p.parse::<i64>().ok());
    let (y, m, d) = (it.next()??, it.next()??, it.next()??);
    if !(1..=12).contains(&m) || !(1..=31).contains(&d) {
        return None;
    }
    // Days from civil, after H. Hinnant's `days_from_civil` (public-domain algorithm).
    let y = if m <= 2 { y - 1 } else { y };
    let era = y.div_euclid(400);
    let yoe = y - era * 400;
    let mp = (m + 9) % 12;
    let doy = (153 * mp + 2) / 5 + d - 1;
    let doe = yoe * 365 + yoe / 4 - yoe / 100 + doy;
    Some((era * 146_097 + doe - 719_468) * 86_400)
}

/// A PDF typst made.
#[derive(Clone, Debug)]
pub struct Compiled {
    /// The PDF bytes.
    pub bytes: Vec<u8>,
    /// typst's warnings, its own text indented by two spaces; empty when it had none.
    pub warnings: String,
}

/// Compiles `files` (report.typ and the plots it names) into PDF bytes.
pub fn compile(typst: &Typst, files: &[OutputFile], date: &str) -> Result<Compiled, PdfProblem> {
    let failed = |why: String| PdfProblem::Failed(format!("  {why}"));
    remove_stale_stages();
    let stage = tempfile::Builder::new()
        .prefix(&format!("{STAGE_PREFIX}{}-", std::process::id()))
        .tempdir()
        .map_err(|e| failed(format!("no staging folder: {e}")))?;
    for f in files {
        let path = stage.path().join(&f.path);
        if let Some(dir) = path.parent() {
            std::fs::create_dir_all(dir).map_err(|e| failed(format!("{}: {e}", dir.display())))?;
        }
        std::fs::write(&path, &f.bytes).map_err(|e| failed(format!("{}: {e}", f.path)))?;
    }
    let timestamp = unix_midnight(date)
        .ok_or_else(|| failed(format!("the design date `{date}` is not YYYY-MM-DD")))?;
    let out = Command::new(&typst.program)
        .current_dir(stage.path())
        .args(["compile", "--root", ".", "--ignore-system-fonts", "--diagnostic-format", "human"])
        // One argument, so that a date before 1970 is not read as a flag (typst 0.15.1 takes
        // negative timestamps and writes the right date).
        .arg(format!("--creation-timestamp={timestamp}"))
        .args(["report.typ", "report.pdf"])
        // Nothing from the caller's environment may change the bytes.
        .env_remove("TYPST_ROOT")
        .env_remove("TYPST_FONT_PATHS")
        .env_remove("TYPST_IGNORE_EMBEDDED_FONTS")
        .env_remove("TYPST_PACKAGE_PATH")
        .env_remove("TYPST_PACKAGE_CACHE_PATH")
        .env_remove("TYPST_FEATURES")
        .env_remove("SOURCE_DATE_EPOCH")
        .env("NO_COLOR", "1")
        .output()
        .map_err(|e| {
            PdfProblem::Missing(format!("`{}` does not run: {e}", typst.program.display()))
        })?;
    let stderr = indent(&String::from_utf8_lossy(&out.stderr));
    if !out.status.success() {
        return Err(PdfProblem::Failed(stderr));
    }
    let bytes = std::fs::read(stage.path().join("report.pdf"))
        .map_err(|e| failed(format!("typst wrote no report.pdf: {e}")))?;
    Ok(Compiled { bytes, warnings: stderr })
}

/// The name every typst staging folder starts with, followed by the owning process id.
const STAGE_PREFIX: &str = "tauweave-typst-";

/// Removes the staging folders of renders that were killed while typst ran: those whose
/// process no longer exists (Linux, where /proc says; elsewhere nothing is removed).
fn remove_stale_stages() {
    let tmp = std::env::temp_dir();
    let Ok(list) = std::fs::read_dir(&tmp) else { return };
    for entry in list.flatten() {
        let name = entry.file_name().to_string_lossy().into_owned();
        let Some(pid) = name.strip_prefix(STAGE_PREFIX).and_then(|r| r.split('-').next()) else {
            continue;
        };
        let is_dir = entry.file_type().is_ok_and(|t| t.is_dir() && !t.is_symlink());
        let gone = Path::new("/proc/self").exists() && !Path::new("/proc").join(pid).exists();
        if is_dir && pid.chars().all(|c| c.is_ascii_digit()) && gone {
            let _ = std::fs::remove_dir_all(entry.path());
        }
    }
}

/// `text` without trailing blank lines, each line indented by two spaces.
fn indent(text: &str) -> String {
    let lines: Vec<String> = text.trim_end().lines().map(|l| format!("  {l}")).collect();
    lines.join("\n")
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn midnight_timestamps() {
        // Reference values from GNU coreutils: `date -u -d 2026-11-20 +%s` prints 1795132800.
        assert_eq!(unix_midnight("1970-01-01"), Some(0));
        assert_eq!(unix_midnight("2000-03-01"), Some(951_868_800));
        assert_eq!(unix_midnight("2026-11-20"), Some(1_795_132_800));
        assert_eq!(unix_midnight("1969-12-31"), Some(-86_400));
        assert_eq!(unix_midnight("2026-13-01"), None);
        assert_eq!(unix_midnight("soon"), None);
    }

    #[test]
    fn pdf_install_command_names_the_recorded_typst() {
        assert_eq!(
            install_for(Some("typst 0.15.1 (unknown commit)")),
            "cargo install typst-cli --version 0.15.1 --locked"
        );
        assert_eq!(
            install_for(Some("typst 0.13.0")),
            "cargo install typst-cli --version 0.13.0 --locked"
        );
        assert_eq!(install_for(Some("something else")), INSTALL);
        assert_eq!(install_for(Some("typst")), INSTALL);
        assert_eq!(install_for(None), INSTALL);
    }

    #[test]
    fn pdf_problems_say_error_or_warning() {
        let missing = PdfProblem::Missing("the `typst` program is not on PATH".into());
        assert!(missing.message(true).starts_with("error: report.pdf was not made: the"));
        assert!(missing.message(false).starts_with("warning: report.pdf was not made: the"));
        assert!(missing.message(true).contains(INSTALL));
        let failed = PdfProblem::Failed("  error: unknown variable".into());
        assert!(failed.message(true).starts_with("error: report.pdf was not made: typst could"));
        assert!(failed.message(false).contains("\n  error: unknown variable\n  help: "));
    }
}
