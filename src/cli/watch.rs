//! `tauweave render --watch`: renders, then renders again whenever the design file, the
//! template or the schematic drawing the design names changes, until the process is stopped
//! (Ctrl-C).
//!
//! Owns the watch loop: a debounced watcher on the folders holding the inputs (non-recursive,
//! so an editor that saves by renaming a temporary file over the original is seen), the filter
//! that keeps only changes to those exact files (so the review written into a watched folder
//! never triggers another render), and the one line printed per rebuild. Rendering and
//! writing stay in `build.rs`. A render that fails on its input is reported and watching
//! goes on; only a failing watcher or an internal error ends the loop, for `main` to report.
//!
//! The contents decide, not the events: the loop keeps the bytes of the design, template and
//! drawing as last rendered, and on an event re-reads them and rebuilds only when they differ. So a
//! `touch` rebuilds nothing, and neither does a render that copies its inputs over the watched
//! design itself (`render out/x/inputs/design.yaml --out out/x`): an edit there converges after
//! one rebuild instead of looping. After a render that wrote its files, the bytes kept are its
//! own input copies, exactly what was rendered. After a failed render they are the bytes this
//! loop read just before it; `render_and_write` reads the files again itself, so a save landing
//! between the two reads is compared against the older bytes (at worst one needless rebuild, or
//! a stale error message until the next save when an edit is undone within that instant).
//! The "report.pdf was not made" note is printed once, and again only when its message changes.

use std::collections::BTreeSet;
use std::path::{Path, PathBuf};
use std::sync::mpsc;
use std::time::{Duration, Instant};

use notify::event::{AccessKind, AccessMode};
use notify::{EventKind, RecursiveMode};
use notify_debouncer_full::{DebounceEventResult, new_debouncer};

use crate::cli::build::{Format, RenderJob, Written, pdf_fatal, render_and_write, schematic_copy};
use crate::cli::{Failure, Level, Outcome, problem};
use crate::notation::{absent, plain, si};
use crate::report::manifest::{DESIGN_COPY, PROJECT_COPY, TEMPLATE_COPY};
use crate::report::results;

/// How long the inputs must stay quiet before a rebuild: one save is often several writes.
const QUIET: Duration = Duration::from_millis(200);

/// Renders `job` and renders again on every change of its design, template or schematic
/// drawing; `format` decides whether a missing report.pdf is an error or a warning. Returns
/// only when watching becomes impossible or a render hits an internal error.
pub fn run(job: &RenderJob, format: Format) -> Result<Outcome, Failure> {
    let mut inputs = inputs_of(job)?;
    let (sender, events) = mpsc::channel();
    let mut debouncer = new_debouncer(QUIET, None, sender).map_err(watcher_failure)?;
    let mut folders: BTreeSet<PathBuf> = BTreeSet::new();
    let mut watch_folders = |inputs: &[Input]| -> Result<(), Failure> {
        for folder in inputs.iter().filter_map(|i| i.key.parent()) {
            if folders.insert(folder.to_path_buf()) {
                debouncer.watch(folder, RecursiveMode::NonRecursive).map_err(watcher_failure)?;
            }
        }
        Ok(())
    };
    watch_folders(&inputs)?;

    // The inputs' bytes as last rendered, and the last render's note on report.pdf.
    let mut rendered = read_inputs(&inputs);
    let mut pdf_shown = None;
    match render_and_write(job) {
        Ok(written) => {
            eprint!("{}", written.notes);
            eprintln!("{}", written.summary());
            inputs = inputs_of(job)?;
            rendered = input_copies(&written, &inputs);
            pdf_note(&written, format, &mut pdf_shown);
        }
        Err(failure) => report_input_failure(failure)?,
    }
    watch_folders(&inputs)?;
    eprintln!("{}", watching(&inputs));

    while let Ok(batch) = events.recv() {
        let keys: Vec<PathBuf> = inputs.iter().map(|i| i.key.clone()).collect();
        let mut changed = touches(batch, &keys);
        // Saves that landed during the last render make one rebuild, not one each.
        for more in events.try_iter() {
            changed |= touches(more, &keys);
        }
        if !changed {
            continue;
        }
        // A `touch`, or our own copy written over the design: the same bytes, no rebuild.
        let now = read_inputs(&inputs);
        if now == rendered {
            continue;
        }
        // The clock is read for this line only; nothing written depends on it.
        let started = Instant::now();
        let before: Vec<PathBuf> = keys;
        match render_and_write(job) {
            Ok(written) => {
                eprint!("{}", written.notes);
                eprintln!(
                    "rebuilt {} in {} ms: {}",
                    written.id,
                    started.elapsed().as_millis(),
                    headline(written.file("results.json").unwrap_or_default())
                );
                inputs = inputs_of(job)?;
                rendered = input_copies(&written, &inputs);
                pdf_note(&written, format, &mut pdf_shown);
            }
            Err(failure) => {
                inputs = inputs_of(job)?;
                let same = inputs.iter().map(|i| &i.key).eq(before.iter());
                rendered = if same { now } else { read_inputs(&inputs) };
                report_input_failure(failure)?;
                eprintln!("{}", watching(&inputs));
            }
        }
        watch_folders(&inputs)?;
        // A design that now names another drawing (or none) is watched for that one.
        if inputs.iter().map(|i| &i.key).ne(before.iter()) {
            eprintln!("{}", watching(&inputs));
        }
    }
    Err(Failure::Internal("the file watcher stopped".into()))
}

/// One file a render reads: where it is, the name the watcher knows it by, and where the
/// render archives its copy.
struct Input {
    path: PathBuf,
    key: PathBuf,
    copy: String,
}

/// The files a render of `job` reads: the design, the template when the job has one, the
/// schematic drawing the design names (read from the design as it is now: a design that does
/// not load, or a drawing whose folder is missing, adds none — the render says why), and
/// the project file above the design with the logo and template it names.
fn inputs_of(job: &RenderJob) -> Result<Vec<Input>, Failure> {
    let key = |p: &Path| {
        watch_key(p).map_err(|e| {
            Failure::input(
                format_args!("cannot watch `{}`: {e}", p.display()),
                Some("check that its folder exists"),
            )
        })
    };
    let mut out =
        vec![Input { path: job.design.clone(), key: key(&job.design)?, copy: DESIGN_COPY.into() }];
    if let Some(t) = &job.template {
        out.push(Input { path: t.clone(), key: key(t)?, copy: TEMPLATE_COPY.into() });
    }
    if let Some(found) = crate::cli::source::find_project(&job.design) {
        let project = std::fs::read_to_string(&found)
            .ok()
            .and_then(|text| crate::design::project::load(&text).project);
        let dir = found.parent().unwrap_or(Path::new("")).to_path_buf();
        out.push(Input { key: key(&found)?, path: found, copy: PROJECT_COPY.into() });
        if let Some(p) = project {
            let mut named: Vec<(PathBuf, String)> = Vec::new();
            if let Some(logo) = &p.logo {
                named.push((dir.join(logo), crate::report::manifest::logo_copy(logo)));
            }
            if let (None, Some(t)) = (&job.template, &p.template) {
                named.push((dir.join(t), TEMPLATE_COPY.into()));
            }
            for (path, copy) in named {
                if let Ok(k) = watch_key(&path) {
                    out.push(Input { path, key: k, copy });
                }
            }
        }
    }
    // Read under its project file, as the render reads it.
    let named = crate::cli::source::load_file(&job.design)
        .ok()
        .and_then(|f| f.loaded.design)
        .and_then(|d| d.meta.schematic);
    if let Some(name) = named {
        let path = job.design.parent().unwrap_or(Path::new("")).join(&name);
        if let Ok(k) = watch_key(&path) {
            out.push(Input { path, key: k, copy: schematic_copy(&name) });
        }
    }
    Ok(out)
}

/// `watching design.yaml, stage.svg and my.md for changes (Ctrl-C to stop)`.
fn watching(inputs: &[Input]) -> String {
    let names: Vec<String> = inputs.iter().map(|i| format!("{}", i.path.display())).collect();
    let list = match names.split_last() {
        Some((last, rest)) if !rest.is_empty() => format!("{} and {last}", rest.join(", ")),
        _ => names.join(""),
    };
    format!("watching {list} for changes (Ctrl-C to stop)")
}

/// The bytes of each input as they are now; `None` for a file that cannot be read.
fn read_inputs(inputs: &[Input]) -> Vec<Option<Vec<u8>>> {
    inputs.iter().map(|i| std::fs::read(&i.path).ok()).collect()
}

/// The bytes a render read from its inputs: the copies it wrote into the output folder.
fn input_copies(written: &Written, inputs: &[Input]) -> Vec<Option<Vec<u8>>> {
    inputs.iter().map(|i| written.file(&i.copy).map(<[u8]>::to_vec)).collect()
}

/// Says why report.pdf was not made, when it was not and the last render did not already say
/// the same; `shown` holds the last render's message. Watching goes on.
fn pdf_note(written: &Written, format: Format, shown: &mut Option<String>) {
    let message = written.pdf_problem.as_ref().map(|p| p.message(pdf_fatal(format, p)));
    if let Some(m) = message.as_ref().filter(|m| Some(*m) != shown.as_ref()) {
        eprint!("{m}");
    }
    *shown = message;
}

/// The name a watched file is known by: its folder, canonicalised, joined with its file
/// name. It holds while the file itself is replaced or briefly missing.
fn watch_key(path: &Path) -> std::io::Result<PathBuf> {
    let name = path.file_name().ok_or_else(|| {
        std::io::Error::new(std::io::ErrorKind::InvalidInput, "the path names no file")
    })?;
    let folder = path.parent().filter(|p| !p.as_os_str().is_empty()).unwrap_or(Path::new("."));
    Ok(folder.canonicalize()?.join(name))
}

/// True when the batch changes one of the `watched` files. Reading a file is no change (our
/// own render opens the design); writes to any other file, the outputs included, are ignored.
fn touches(batch: DebounceEventResult, watched: &[PathBuf]) -> bool {
    match batch {
        Ok(events) => events.iter().any(|e| {
            let is_change = match e.kind {
                EventKind::Access(AccessKind::Close(AccessMode::Write)) => true,
                EventKind::Access(_) => false,
                _ => true,
            };
            is_change && e.paths.iter().any(|p| watch_key(p).is_ok_and(|k| watched.contains(&k)))
        }),
        Err(errors) => {
            for e in errors {
                eprint!("{}", problem(Level::Warning, &format!("file watcher: {e}"), None));
            }
            false
        }
    }
}

/// Prints a render's input failure, which watching survives; any other failure is returned.
fn report_input_failure(failure: Failure) -> Result<(), Failure> {
    match failure {
        Failure::Input(report) => {
            eprint!("{report}");
            Ok(())
        }
        other => Err(other),
    }
}

fn watcher_failure(e: notify::Error) -> Failure {
    Failure::input(
        format_args!("cannot watch for changes: {e}"),
        Some("render without `--watch`, or raise the system's limit on watched folders"),
    )
}

/// The headline numbers of a results.json: `gain 20.56 dB, f_high 1.275 MHz, f_low
/// 2.224 kHz, requirements 5/5 pass`. A missing value prints `—`.
fn headline(results_json: &[u8]) -> String {
    let doc = results::from_json(results_json).ok();
    // The gain the requirement is judged on: the exact gain at a stated band's centre.
    let gain = doc
        .as_ref()
        .and_then(|d| d.midband.band.as_ref().map(|b| b.centre_gain_db).or(d.midband.gain_db));
    let f_high = doc.as_ref().and_then(|d| d.high.f3db_hz);
    let f_low = doc.as_ref().and_then(|d| d.low.f3db_hz);
    let checks = doc.as_ref().map_or(&[][..], |d| d.requirements.as_slice());
    let passed = checks.iter().filter(|c| c.pass).count();
    format!(
        "gain {}, f_high {}, f_low {}, requirements {passed}/{} pass",
        gain.map_or_else(absent, |g| format!("{} dB", plain(g, 4))),
        f_high.map_or_else(absent, |f| si(f, "Hz", 4)),
        f_low.map_or_else(absent, |f| si(f, "Hz", 4)),
        checks.len()
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A results document of a real design with the headline values set by hand.
    fn document(gain_db: Option<f64>, f_high: Option<f64>, passes: &[bool]) -> Vec<u8> {
        let text = std::fs::read_to_string("designs/rx-preamp-ce.yaml").unwrap();
        let design = crate::design::load(&text).design.unwrap();
        let options = crate::review::ReviewOptions::quiet(&design, Some(0));
        let review = crate::review::review(&design, &options).unwrap();
        let hashes = results::Hashes { design: String::new(), template: None, template_name: None };
        let mut doc = results::document(&design, &review, hashes, "d.yaml");
        doc.midband.gain_db = gain_db;
        doc.midband.band = None;
        doc.high.f3db_hz = f_high;
        doc.low.f3db_hz = Some(2224.4);
        let template = doc.requirements[0].clone();
        doc.requirements = passes
            .iter()
            .map(|&pass| results::RequirementResults { pass, ..template.clone() })
            .collect();
        results::to_json(&doc).into_bytes()
    }

    #[test]
    fn headline_reads_the_numbers_and_counts_passes() {
        let json = document(Some(20.5634), Some(1275123.0), &[true, false]);
        assert_eq!(
            headline(&json),
            "gain 20.56 dB, f_high 1.275 MHz, f_low 2.224 kHz, requirements 1/2 pass"
        );
    }

    #[test]
    fn headline_prints_a_dash_for_missing_values() {
        let json = document(None, None, &[]);
        assert_eq!(headline(&json), "gain —, f_high —, f_low 2.224 kHz, requirements 0/0 pass");
        assert_eq!(headline(b"not json"), "gain —, f_high —, f_low —, requirements 0/0 pass");
    }

    #[test]
    fn watch_key_is_the_same_for_relative_and_absolute_names() {
        let here = std::env::current_dir().unwrap();
        assert_eq!(
            watch_key(Path::new("Cargo.toml")).unwrap(),
            watch_key(&here.join("Cargo.toml")).unwrap()
        );
        assert_eq!(
            watch_key(Path::new("src/../missing.yaml")).unwrap(),
            here.canonicalize().unwrap().join("missing.yaml")
        );
    }
}
