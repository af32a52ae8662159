//! Atomic file output: a temporary file in the same folder, then a rename, mode 0644, so a
//! failed render leaves the previous files untouched.

use std::io::Write;
use std::path::Path;

/// Writes `bytes` to `path` atomically.
pub fn atomic(path: &Path, bytes: &[u8]) -> std::io::Result<()> {
    let dir = path.parent().filter(|p| !p.as_os_str().is_empty()).unwrap_or(Path::new("."));
    std::fs::create_dir_all(dir)?;
    let mut tmp = tempfile::NamedTempFile::new_in(dir)?;
    tmp.write_all(bytes)?;
    tmp.as_file().sync_all()?;
    #[cfg(unix)]
    {
        use std::os::unix::fs::PermissionsExt;
        tmp.as_file().set_permissions(std::fs::Permissions::from_mode(0o644))?;
    }
    tmp.persist(path).map_err(|e| e.error)?;
    Ok(())
}

/// A file that could not be written.
#[derive(Debug)]
pub struct WriteError {
    /// The file.
    pub path: std::path::PathBuf,
    /// Why.
    pub source: std::io::Error,
}

impl std::fmt::Display for WriteError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "cannot write `{}`: {}", self.path.display(), self.source)
    }
}

/// Writes every file into `dir` (paths relative to it), each atomically; stops at the first
/// that fails.
pub fn all(dir: &Path, files: &[crate::report::OutputFile]) -> Result<(), WriteError> {
    for f in files {
        let path = dir.join(&f.path);
        atomic(&path, &f.bytes).map_err(|source| WriteError { path, source })?;
    }
    Ok(())
}
