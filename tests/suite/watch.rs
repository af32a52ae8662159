//! `render --watch`: the real binary re-renders after an in-place save and after a save that
//! renames a temporary file over the design; its own output, written into the watched
//! folder, never triggers another rebuild, nor does a `touch` (the same bytes rewritten); the
//! note that report.pdf was not made is printed once, not on every rebuild; and a design
//! inside its own output folder (which a render replaces whole) is refused, without a loop.

use std::io::{BufRead, BufReader};
use std::path::Path;
use std::process::{Child, Command, Stdio};
use std::sync::mpsc::{self, Receiver};
use std::time::{Duration, Instant};

use crate::support::{binary, root, scratch};

/// How long a render may take before the test gives up (a debug build, two cores).
const PATIENCE: Duration = Duration::from_secs(60);

/// Kills the watching process however the test ends.
struct Watching(Child);

impl Drop for Watching {
    fn drop(&mut self) {
        let _ = self.0.kill();
        let _ = self.0.wait();
    }
}

/// Waits for a stderr line containing `wanted`; returns it, or panics with every line seen.
fn wait_for(lines: &Receiver<String>, wanted: &str, seen: &mut Vec<String>) -> String {
    let deadline = Instant::now() + PATIENCE;
    loop {
        let left = deadline.saturating_duration_since(Instant::now());
        match lines.recv_timeout(left) {
            Ok(line) => {
                seen.push(line.clone());
                if line.contains(wanted) {
                    return line;
                }
            }
            Err(e) => panic!("no line with `{wanted}` ({e}); stderr so far:\n{}", seen.join("\n")),
        }
    }
}

fn gain_db(out: &Path) -> f64 {
    let text = std::fs::read_to_string(out.join("results.json")).expect("results.json written");
    let results: serde_json::Value = serde_json::from_str(&text).unwrap();
    results["midband"]["gain_db"].as_f64().expect("a mid-band gain")
}

#[test]
fn watch_rebuilds_on_in_place_and_rename_saves_and_ignores_its_own_output() {
    let dir = scratch("watch");
    let design = dir.join("design.yaml");
    let original = std::fs::read_to_string(root().join("designs/rx-preamp-ce.yaml")).unwrap();
    let rc = "RC:  {kind: resistor, value: 1k0,";
    assert!(original.contains(rc), "the example design still has `{rc}`");
    std::fs::write(&design, &original).unwrap();
    // The output folder sits in the watched folder: each render builds it there beside the
    // design and swaps it in, so a watcher that did not filter its events would rebuild
    // forever.
    let out = &dir.join("out");

    // No typst: the PDF's note must come with the first render only.
    let (_watching, lines) =
        watch(&dir, &["design.yaml", "--out", "out"], &[("TAUWEAVE_TYPST", "/nonexistent/typst")]);
    let mut seen = Vec::new();

    wait_for(&lines, "warning: report.pdf was not made", &mut seen);
    wait_for(&lines, "watching design.yaml for changes", &mut seen);
    let first = gain_db(out);

    // (1) An in-place save with RC raised from 1 kΩ to 1.2 kΩ.
    let rc_1k2 = original.replace(rc, "RC:  {kind: resistor, value: 1k2,");
    std::fs::write(&design, &rc_1k2).unwrap();
    let line = wait_for(&lines, "rebuilt rx-preamp-ce in ", &mut seen);
    assert!(line.contains(" ms: gain ") && line.ends_with("requirements 9/9 pass"), "{line}");
    // The gain goes with RC ∥ R_load (common practice): 500 Ω -> 545 Ω, about +0.75 dB.
    let after_in_place = gain_db(out);
    assert!(after_in_place > first + 0.5, "gain {first} dB -> {after_in_place} dB");

    // (2) A save as many editors do it: a temporary file renamed over the design.
    let rc_1k5 = original.replace(rc, "RC:  {kind: resistor, value: 1k5,");
    let temp = dir.join(".design.yaml.tmp");
    std::fs::write(&temp, &rc_1k5).unwrap();
    std::fs::rename(&temp, &design).unwrap();
    wait_for(&lines, "rebuilt rx-preamp-ce in ", &mut seen);
    // 545 Ω -> 600 Ω: about +0.83 dB.
    let after_rename = gain_db(out);
    assert!(after_rename > after_in_place + 0.5, "gain {after_in_place} dB -> {after_rename} dB");

    // (3) The rebuild just wrote a dozen files into the watched folder: none of them may
    // start another rebuild, and the PDF's note is not repeated.
    expect_quiet(&lines, "after the rebuild, with no input changed");

    // (4) A `touch`: the same bytes written again start no rebuild.
    std::fs::write(&design, &rc_1k5).unwrap();
    expect_quiet(&lines, "after rewriting the design with the same bytes");
}

/// Issue 13: a render replaces its whole output folder, so a design inside it (here the
/// folder's own input copy) is refused with its reason — and watching it neither loops nor
/// stops: an edit is refused again, once.
#[test]
fn watch_of_a_design_inside_its_own_output_folder_is_refused_and_keeps_watching() {
    let dir = scratch("watch-own-output");
    let original = std::fs::read_to_string(root().join("designs/rx-preamp-ce.yaml")).unwrap();
    let out = dir.join("out");
    let design = out.join("inputs/design.yaml");
    std::fs::create_dir_all(design.parent().unwrap()).unwrap();
    std::fs::write(&design, &original).unwrap();

    let args = ["out/inputs/design.yaml", "--format", "json", "--out", "out"];
    let (_watching, lines) = watch(&dir, &args, &[]);
    let mut seen = Vec::new();
    wait_for(&lines, "lies inside the output folder `out`", &mut seen);
    wait_for(&lines, "watching out/inputs/design.yaml for changes", &mut seen);
    expect_quiet(&lines, "after the refusal");
    assert!(!out.join("results.json").exists(), "nothing was written");

    let edited = original.replace("revision: C", "revision: D");
    std::fs::write(&design, &edited).unwrap();
    wait_for(&lines, "lies inside the output folder `out`", &mut seen);
    wait_for(&lines, "watching out/inputs/design.yaml for changes", &mut seen);
    expect_quiet(&lines, "after the second refusal");
    assert_eq!(std::fs::read_to_string(&design).unwrap(), edited, "the edit stays");
}

/// Starts `tauweave render ARGS --watch --runs 0` in `cwd` with `env` added; returns the
/// kill-on-drop guard and its stderr, line by line.
fn watch(cwd: &Path, args: &[&str], env: &[(&str, &str)]) -> (Watching, Receiver<String>) {
    let mut child = Command::new(binary())
        .arg("render")
        .args(args)
        .args(["--watch", "--runs", "0"])
        .current_dir(cwd)
        .env("NO_COLOR", "1")
        .envs(env.iter().copied())
        .stdin(Stdio::null())
        .stdout(Stdio::null())
        .stderr(Stdio::piped())
        .spawn()
        .expect("the tauweave binary runs");
    let stderr = child.stderr.take().unwrap();
    let watching = Watching(child);
    let (send, lines) = mpsc::channel();
    std::thread::spawn(move || {
        for line in BufReader::new(stderr).lines().map_while(Result::ok) {
            if send.send(line).is_err() {
                break;
            }
        }
    });
    (watching, lines)
}

/// Panics when the watcher prints anything within 2 s.
fn expect_quiet(lines: &Receiver<String>, when: &str) {
    if let Ok(line) = lines.recv_timeout(Duration::from_secs(2)) {
        panic!("a line {when}: {line}");
    }
}

/// Issue 14: the schematic drawing a design names is an input like the design: saving the
/// drawing rebuilds the review (and its archived copy), touching it does not.
#[test]
fn watch_rebuilds_when_the_schematic_drawing_changes() {
    let dir = scratch("watch-schematic");
    let text = std::fs::read_to_string(root().join("designs/follower-cap-load.yaml")).unwrap();
    let text = text.replacen("design:\n", "design:\n  schematic: stage.svg\n", 1);
    std::fs::write(dir.join("design.yaml"), &text).unwrap();
    let first = "<svg xmlns=\"http://www.w3.org/2000/svg\" width=\"10\" height=\"10\"/>\n";
    std::fs::write(dir.join("stage.svg"), first).unwrap();
    let (_watching, lines) = watch(&dir, &["design.yaml", "--out", "out", "--format", "md"], &[]);
    let mut seen = Vec::new();
    wait_for(&lines, "watching design.yaml and stage.svg for changes", &mut seen);
    let copy = dir.join("out/inputs/schematic.svg");
    assert_eq!(std::fs::read_to_string(&copy).unwrap(), first);

    let second = first.replace("width=\"10\"", "width=\"20\"");
    std::fs::write(dir.join("stage.svg"), &second).unwrap();
    wait_for(&lines, "rebuilt ", &mut seen);
    assert_eq!(std::fs::read_to_string(&copy).unwrap(), second);

    std::fs::write(dir.join("stage.svg"), &second).unwrap();
    expect_quiet(&lines, "after rewriting the drawing with the same bytes");
}
