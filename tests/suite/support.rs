//! Helpers shared by the integration tests: running the real binary, reading fixtures.

use std::path::{Path, PathBuf};
use std::process::{Command, Output};

/// The repository root.
pub fn root() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

/// The built `tauweave` binary.
pub fn binary() -> PathBuf {
    PathBuf::from(env!("CARGO_BIN_EXE_tauweave"))
}

/// The typst program, on PATH or where `cargo install` puts it (scripts/test installs it).
pub fn find_typst() -> Option<PathBuf> {
    let home = std::env::var_os("HOME").map(PathBuf::from).unwrap_or_default();
    let on_path = std::env::var_os("PATH")
        .map(|p| std::env::split_paths(&p).map(|d| d.join("typst")).collect::<Vec<_>>())
        .unwrap_or_default();
    on_path.into_iter().chain([home.join(".cargo/bin/typst")]).find(|p| p.is_file())
}

/// The typst program; a test that needs it fails (never skips) when it is missing.
pub fn typst() -> PathBuf {
    find_typst().expect(
        "typst is not installed: scripts/test installs it (cargo install typst-cli --locked)",
    )
}

/// Runs `python3` with `args` in the repository root. A test that needs it fails, never
/// skips, when python3 or the packages of tests/requirements.txt are missing.
pub fn python(args: &[&str]) -> Output {
    Command::new("python3")
        .args(args)
        .current_dir(root())
        .output()
        .expect("python3 runs; run scripts/test, which installs numpy, scipy and PyYAML")
}

/// What the independent reference, tests/reference/mna_reference.py, computes for the
/// linear design at `design`: the results.json keys it knows, from its own nodal analysis.
pub fn reference_results(design: &Path) -> serde_json::Value {
    reference_with(design, &[])
}

/// [`reference_results`] with further arguments to the reference (`--bias FILE`, `--noise`).
pub fn reference_with(design: &Path, extra: &[&str]) -> serde_json::Value {
    let mut args = vec!["tests/reference/mna_reference.py", design.to_str().unwrap()];
    args.extend_from_slice(extra);
    let out = python(&args);
    assert!(
        out.status.success(),
        "{}: the reference failed (run scripts/test for numpy, scipy and PyYAML):\n{}",
        design.display(),
        String::from_utf8_lossy(&out.stderr)
    );
    serde_json::from_slice(&out.stdout).expect("the reference prints JSON")
}

/// Runs `tauweave` with `args` in the working directory `cwd`. The typst program found by
/// [`find_typst`] is named through `TAUWEAVE_TYPST`, so renders make their PDF.
pub fn run_in(cwd: &Path, args: &[&str]) -> Output {
    let mut command = Command::new(binary());
    if let Some(typst) = find_typst() {
        command.env("TAUWEAVE_TYPST", typst);
    }
    command
        .args(args)
        .current_dir(cwd)
        .env("NO_COLOR", "1")
        .env_remove("RUST_BACKTRACE")
        .output()
        .expect("the tauweave binary runs")
}

/// The files in `dir` with extension `ext`, sorted.
pub fn files(dir: &Path, ext: &str) -> Vec<PathBuf> {
    let mut out: Vec<PathBuf> = std::fs::read_dir(dir)
        .unwrap_or_else(|e| panic!("{}: {e}", dir.display()))
        .map(|e| e.expect("dir entry").path())
        .filter(|p| p.extension().is_some_and(|x| x == ext))
        .collect();
    out.sort();
    out
}

/// A fresh empty directory under the target folder, for runs that must write nothing.
pub fn scratch(name: &str) -> PathBuf {
    let dir = root().join("target").join("test-scratch").join(name);
    let _ = std::fs::remove_dir_all(&dir);
    std::fs::create_dir_all(&dir).expect("scratch dir");
    dir
}

/// The fraction of a PNG's pixels whose first channel is below `below` (dark ink on white).
pub fn dark_fraction(png: &Path, below: u8) -> f64 {
    let file = std::fs::File::open(png).unwrap_or_else(|e| panic!("{}: {e}", png.display()));
    let mut reader = png::Decoder::new(std::io::BufReader::new(file)).read_info().unwrap();
    let mut buf = vec![0; reader.output_buffer_size().unwrap()];
    let info = reader.next_frame(&mut buf).unwrap();
    let px = &buf[..info.buffer_size()];
    let channels = info.color_type.samples();
    let dark = px.chunks(channels).filter(|p| p[0] < below).count();
    dark as f64 / (px.len() / channels) as f64
}
