//! File output that never leaves a half-written review: single files are written to a
//! temporary file and renamed (mode 0644); a rendered folder is built whole beside the old
//! one and swapped in by one rename, so a full disk, a kill or an error leaves the previous
//! folder exactly as it was. Nothing is ever written through a symbolic link.

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

/// Why a rendered folder could not be replaced.
#[derive(Debug)]
pub enum FolderError {
    /// A file could not be written (the old folder is untouched).
    Write(WriteError),
    /// The target is not ours to replace: what it holds, and what to do.
    Refused {
        /// What was found.
        what: String,
        /// What to do.
        help: String,
    },
}

impl std::fmt::Display for FolderError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            FolderError::Write(e) => e.fmt(f),
            FolderError::Refused { what, .. } => f.write_str(what),
        }
    }
}

/// The names the last render into `dir` wrote, from its manifest: None when `dir` holds no
/// readable manifest.
fn owned_names(dir: &Path) -> Option<std::collections::BTreeSet<String>> {
    let text = std::fs::read_to_string(dir.join(crate::report::manifest::FILE)).ok()?;
    let m: crate::report::manifest::Manifest = serde_json::from_str(&text).ok()?;
    let mut names: std::collections::BTreeSet<String> =
        m.outputs.into_keys().chain(m.inputs.into_keys()).collect();
    names.insert(crate::report::manifest::FILE.to_string());
    Some(names)
}

/// Every entry under `dir` as a relative path with `/` separators, folders included, and
/// whether any is a symbolic link (never followed).
pub fn entries(dir: &Path) -> std::io::Result<Vec<(String, std::fs::FileType)>> {
    let mut out = Vec::new();
    let mut stack = vec![(dir.to_path_buf(), String::new())];
    while let Some((path, prefix)) = stack.pop() {
        for entry in std::fs::read_dir(&path)? {
            let entry = entry?;
            let name = entry.file_name().to_string_lossy().into_owned();
            let rel = if prefix.is_empty() { name } else { format!("{prefix}/{name}") };
            let kind = entry.file_type()?;
            if kind.is_dir() {
                stack.push((entry.path(), rel.clone()));
            }
            out.push((rel, kind));
        }
    }
    out.sort_by(|a, b| a.0.cmp(&b.0));
    Ok(out)
}

/// Checks that `dir` may be replaced by a render: it does not exist, is empty, or holds
/// only what the last render into it wrote (by its manifest), with no symbolic link.
fn check_owned(dir: &Path) -> Result<(), FolderError> {
    let refuse = |what: String, help: &str| FolderError::Refused { what, help: help.into() };
    let shown = dir.display();
    match std::fs::symlink_metadata(dir) {
        Err(_) => return Ok(()),
        Ok(m) if m.file_type().is_symlink() => {
            return Err(refuse(
                format!("`{shown}` is a symbolic link; tauweave never writes through one"),
                "give the real folder with --out",
            ));
        }
        Ok(m) if !m.is_dir() => {
            return Err(refuse(
                format!("`{shown}` is a file, not a folder"),
                "give a folder with --out",
            ));
        }
        Ok(_) => {}
    }
    let all = entries(dir)
        .map_err(|source| FolderError::Write(WriteError { path: dir.into(), source }))?;
    if all.is_empty() {
        return Ok(());
    }
    if let Some((link, _)) = all.iter().find(|(_, k)| k.is_symlink()) {
        return Err(refuse(
            format!("`{shown}` holds a symbolic link, `{link}`; tauweave never writes through one"),
            "remove the link, or render into a new folder with --out",
        ));
    }
    let Some(owned) = owned_names(dir) else {
        return Err(refuse(
            format!(
                "`{shown}` holds files and no {}: it is not a rendered review",
                crate::report::manifest::FILE
            ),
            "a render replaces its whole folder; give a new or empty folder with --out",
        ));
    };
    let foreign: Vec<&str> = all
        .iter()
        .filter(|(name, kind)| !kind.is_dir() && !owned.contains(name))
        .map(|(name, _)| name.as_str())
        .collect();
    if !foreign.is_empty() {
        let list = foreign.iter().take(5).map(|n| format!("`{n}`")).collect::<Vec<_>>().join(", ");
        return Err(refuse(
            format!("`{shown}` holds files the last render did not write: {list}"),
            "a render replaces its whole folder; move them out, or give a new folder with --out",
        ));
    }
    Ok(())
}

/// The hidden sibling names a render uses beside `dir` while it builds and swaps.
fn sibling(dir: &Path, kind: &str) -> std::path::PathBuf {
    let name = dir.file_name().map_or("out".into(), |n| n.to_string_lossy().into_owned());
    let parent = dir.parent().filter(|p| !p.as_os_str().is_empty()).unwrap_or(Path::new("."));
    parent.join(format!(".{name}.tauweave-{kind}-{}", std::process::id()))
}

/// Removes what earlier renders into `dir` left beside it when they were killed.
fn remove_leftovers(dir: &Path) {
    let name = dir.file_name().map_or("out".into(), |n| n.to_string_lossy().into_owned());
    let parent = dir.parent().filter(|p| !p.as_os_str().is_empty()).unwrap_or(Path::new("."));
    let prefix = format!(".{name}.tauweave-");
    let Ok(list) = std::fs::read_dir(parent) else { return };
    for entry in list.flatten() {
        let n = entry.file_name().to_string_lossy().into_owned();
        let real_dir = entry.file_type().is_ok_and(|t| t.is_dir() && !t.is_symlink());
        if n.starts_with(&prefix) && real_dir {
            let _ = std::fs::remove_dir_all(entry.path());
        }
    }
}

/// Replaces the folder `dir` by one holding exactly `files`: built whole in a hidden sibling
/// folder, each file synced, then swapped in by one atomic exchange (Linux; elsewhere two
/// renames) and the old folder removed. A failure before the swap removes the new folder
/// and leaves the old one as it was. Refuses a folder that is not a rendered review (see
/// [`check_owned`]).
pub fn replace_folder(dir: &Path, files: &[crate::report::OutputFile]) -> Result<(), FolderError> {
    // `.`, `..` and the like have no name to build a sibling from: work on the full path.
    let full;
    let dir = if dir.file_name().is_none() || dir.as_os_str().is_empty() {
        full = std::path::absolute(dir)
            .and_then(|p| p.canonicalize())
            .map_err(|source| FolderError::Write(WriteError { path: dir.into(), source }))?;
        full.as_path()
    } else {
        dir
    };
    check_owned(dir)?;
    remove_leftovers(dir);
    let fresh = sibling(dir, "new");
    let write = |path: std::path::PathBuf, bytes: &[u8]| -> Result<(), WriteError> {
        let fail = |source| WriteError { path: path.clone(), source };
        if let Some(parent) = path.parent() {
            std::fs::create_dir_all(parent).map_err(fail)?;
        }
        let mut f = std::fs::File::create_new(&path).map_err(fail)?;
        f.write_all(bytes).map_err(fail)?;
        f.sync_all().map_err(fail)?;
        Ok(())
    };
    let built = (|| {
        std::fs::create_dir_all(&fresh)
            .map_err(|source| WriteError { path: fresh.clone(), source })?;
        for f in files {
            write(fresh.join(&f.path), &f.bytes)?;
        }
        Ok(())
    })();
    if let Err(e) = built {
        let _ = std::fs::remove_dir_all(&fresh);
        return Err(FolderError::Write(e));
    }
    let swapped = swap_in(&fresh, dir);
    if let Err(source) = swapped {
        let _ = std::fs::remove_dir_all(&fresh);
        return Err(FolderError::Write(WriteError { path: dir.into(), source }));
    }
    Ok(())
}

/// Puts `fresh` where `dir` is. After it, `fresh` no longer exists.
fn swap_in(fresh: &Path, dir: &Path) -> std::io::Result<()> {
    if std::fs::symlink_metadata(dir).is_err() {
        if let Some(parent) = dir.parent().filter(|p| !p.as_os_str().is_empty()) {
            std::fs::create_dir_all(parent)?;
        }
        return std::fs::rename(fresh, dir);
    }
    if exchange(fresh, dir).is_ok() {
        // `fresh` now names the old folder.
        let _ = std::fs::remove_dir_all(fresh);
        return Ok(());
    }
    let old = sibling(dir, "old");
    std::fs::rename(dir, &old)?;
    if let Err(e) = std::fs::rename(fresh, dir) {
        let _ = std::fs::rename(&old, dir);
        return Err(e);
    }
    let _ = std::fs::remove_dir_all(&old);
    Ok(())
}

/// Exchanges two paths in one step (renameat2 with RENAME_EXCHANGE).
#[cfg(target_os = "linux")]
fn exchange(a: &Path, b: &Path) -> std::io::Result<()> {
    use rustix::fs::{CWD, RenameFlags, renameat_with};
    renameat_with(CWD, a, CWD, b, RenameFlags::EXCHANGE).map_err(std::io::Error::from)
}

#[cfg(not(target_os = "linux"))]
fn exchange(_: &Path, _: &Path) -> std::io::Result<()> {
    Err(std::io::Error::from(std::io::ErrorKind::Unsupported))
}
