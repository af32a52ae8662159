//! Archive and verify: a rendered folder holds its inputs and a manifest, `verify` rebuilds
//! it from the folder alone and compares byte for byte, and a single changed byte in any
//! output — or a changed input — is caught and named.

use std::path::Path;

use crate::support::{root, run_in, scratch};

/// Copies a folder and everything in it.
pub fn copy_dir(from: &Path, to: &Path) {
    std::fs::create_dir_all(to).unwrap();
    for e in std::fs::read_dir(from).unwrap() {
        let e = e.unwrap();
        let target = to.join(e.file_name());
        if e.file_type().unwrap().is_dir() {
            copy_dir(&e.path(), &target);
        } else {
            std::fs::copy(e.path(), target).unwrap();
        }
    }
}

fn verify(dir: &Path) -> (Option<i32>, String) {
    let o = run_in(dir.parent().unwrap(), &["verify", dir.to_str().unwrap()]);
    (o.status.code(), String::from_utf8_lossy(&o.stdout).to_string())
}

#[test]
fn verify_passes_fresh_and_catches_every_changed_byte() {
    let base = scratch("archive");
    let rendered = base.join("rendered");
    let o = run_in(
        &root(),
        &[
            "render",
            "designs/follower-cap-load.yaml",
            "--runs",
            "64",
            "--out",
            rendered.to_str().unwrap(),
        ],
    );
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let (code, out) = verify(&rendered);
    assert_eq!(code, Some(0), "{out}");
    assert!(out.starts_with("identical"), "{out}");

    let manifest: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(rendered.join("manifest.json")).unwrap())
            .unwrap();
    let outputs: Vec<String> = manifest["outputs"].as_object().unwrap().keys().cloned().collect();
    assert!(outputs.len() >= 11, "{outputs:?}");
    // The PDF is archived too (typst is named by `run_in`; scripts/test installs it).
    crate::support::typst();
    assert!(outputs.iter().any(|o| o == "report.pdf"), "{outputs:?}");
    for (k, path) in outputs.iter().enumerate() {
        let copy = base.join(format!("flip-{k}"));
        copy_dir(&rendered, &copy);
        let file = copy.join(path);
        let mut bytes = std::fs::read(&file).unwrap();
        let at = bytes.len() / 2;
        bytes[at] ^= 0x01;
        std::fs::write(&file, bytes).unwrap();
        let (code, out) = verify(&copy);
        assert_eq!(code, Some(1), "{path}: {out}");
        assert!(out.contains(path.as_str()), "{path} not named in: {out}");
    }

    // A changed input is caught and named.
    let copy = base.join("tampered-input");
    copy_dir(&rendered, &copy);
    let design = copy.join("inputs/design.yaml");
    let text = std::fs::read_to_string(&design).unwrap();
    std::fs::write(&design, format!("{text}# edited after the render\n")).unwrap();
    let (code, out) = verify(&copy);
    assert_eq!(code, Some(1), "{out}");
    assert!(out.contains("input inputs/design.yaml was changed"), "{out}");

    // A changed number in results.json is reported by its key.
    let copy = base.join("edited-json");
    copy_dir(&rendered, &copy);
    let results = copy.join("results.json");
    let text = std::fs::read_to_string(&results).unwrap();
    let edited = text.replacen("\"frequency_hz\": ", "\"frequency_hz\": 1", 1);
    assert_ne!(edited, text);
    std::fs::write(&results, edited).unwrap();
    let (code, out) = verify(&copy);
    assert_eq!(code, Some(1), "{out}");
    assert!(out.contains(".midband.frequency_hz"), "{out}");

    // Without a manifest the folder is unusable: exit 2.
    let copy = base.join("no-manifest");
    copy_dir(&rendered, &copy);
    std::fs::remove_file(copy.join("manifest.json")).unwrap();
    let o = run_in(&base, &["verify", copy.to_str().unwrap()]);
    assert_eq!(o.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&o.stderr).contains("cannot be verified"));
}

/// Issue 14: a schematic the design names is shown near the top of the review (as an image,
/// so a script inside the SVG never runs), copied into the archive, recorded in the manifest
/// and checked by verify; a missing drawing or a path outside the design's folder is refused.
#[test]
fn a_supplied_schematic_is_shown_archived_and_verified() {
    let dir = scratch("schematic");
    let design = std::fs::read_to_string(root().join("designs/rx-preamp-ce.yaml")).unwrap();
    let with = design.replacen(
        "  author: M. Okafor\n",
        "  author: M. Okafor\n  schematic: drawings/stage.svg\n",
        1,
    );
    assert_ne!(with, design);
    std::fs::write(dir.join("d.yaml"), &with).unwrap();
    let svg = "<svg xmlns=\"http://www.w3.org/2000/svg\" width=\"80\" height=\"40\"><rect width=\"80\" \
               height=\"40\"/><script>alert(1)</script></svg>";
    std::fs::create_dir_all(dir.join("drawings")).unwrap();
    std::fs::write(dir.join("drawings/stage.svg"), svg).unwrap();
    let o = run_in(&dir, &["render", "d.yaml", "--runs", "0", "--format", "html", "--out", "o"]);
    assert_eq!(o.status.code(), Some(0), "{}", String::from_utf8_lossy(&o.stderr));
    let out = dir.join("o");
    assert_eq!(std::fs::read_to_string(out.join("inputs/schematic.svg")).unwrap(), svg);
    let manifest = std::fs::read_to_string(out.join("manifest.json")).unwrap();
    assert!(manifest.contains("\"inputs/schematic.svg\""), "{manifest}");
    let html = std::fs::read_to_string(out.join("report.html")).unwrap();
    assert!(html.contains("id=\"plot-schematic\"") && html.contains("data:image/svg+xml;base64,"));
    assert!(!html.contains("<script>alert"), "the drawing is an image, not inline markup");
    let (code, text) = verify(&out);
    assert_eq!(code, Some(0), "{text}");
    // One changed byte in the archived drawing is caught and named.
    let mut bytes = std::fs::read(out.join("inputs/schematic.svg")).unwrap();
    bytes[10] ^= 0x01;
    std::fs::write(out.join("inputs/schematic.svg"), bytes).unwrap();
    let (code, text) = verify(&out);
    assert_eq!(code, Some(1), "{text}");
    assert!(text.contains("inputs/schematic.svg"), "{text}");
    // A drawing that is not there, and one outside the design's folder.
    std::fs::remove_file(dir.join("drawings/stage.svg")).unwrap();
    let o = run_in(&dir, &["render", "d.yaml", "--runs", "0", "--format", "json", "--out", "p"]);
    assert_eq!(o.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&o.stderr).contains("cannot read the schematic"));
    std::fs::write(dir.join("e.yaml"), with.replace("drawings/stage.svg", "../stage.svg")).unwrap();
    let o = run_in(&dir, &["check", "e.yaml", "--runs", "0"]);
    assert_eq!(o.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&o.stderr).contains("tauweave::schematic"));
}
