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
