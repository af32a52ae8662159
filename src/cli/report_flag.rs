//! `--report FORMAT FILE`, shared by `check` and `diff`: which machine-readable report to
//! write and where (`-` for standard output, which the usual text then leaves to scripts).

use std::path::PathBuf;

use crate::cli::{Failure, out};

/// A report asked for: its format (one of those the command writes) and its file (None for
/// standard output).
pub struct ReportTarget {
    /// The format, as written on the command line.
    pub format: String,
    /// The file, or None for standard output.
    pub file: Option<PathBuf>,
}

/// Reads `--report FORMAT FILE`; `formats` are those the command writes.
pub fn parse(
    values: &Option<Vec<String>>,
    formats: &[&str],
) -> Result<Option<ReportTarget>, Failure> {
    let Some(values) = values else { return Ok(None) };
    if values.len() != 2 {
        return Err(Failure::input(
            "`--report` is given more than once",
            Some("ask for one report per run: `--report FORMAT FILE`"),
        ));
    }
    let (format, file) = (&values[0], &values[1]);
    if !formats.contains(&format.as_str()) {
        let shown: Vec<String> = formats.iter().map(|f| format!("`--report {f} FILE`")).collect();
        return Err(Failure::input(
            format_args!("`--report {format}` is not a report this command writes"),
            Some(&format!("write {}", shown.join(" or "))),
        ));
    }
    Ok(Some(ReportTarget {
        format: format.clone(),
        file: (file != "-").then(|| PathBuf::from(file)),
    }))
}

impl ReportTarget {
    /// True when the report takes standard output.
    pub fn to_stdout(&self) -> bool {
        self.file.is_none()
    }

    /// Writes the report's text where it goes.
    pub fn write(&self, text: &str) -> Result<(), Failure> {
        match &self.file {
            None => out(text),
            Some(path) => std::fs::write(path, text).map_err(|e| {
                Failure::input(
                    format_args!("cannot write the report `{}`: {e}", path.display()),
                    Some("check that the folder exists and can be written"),
                )
            }),
        }
    }
}
