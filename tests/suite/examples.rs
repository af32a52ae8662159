//! The example designs under designs/ all check cleanly and print their summary.

use tauweave::design;

use crate::support::{files, root, run_in, scratch};

#[test]
fn every_example_design_checks_with_exit_0() {
    let designs = files(&root().join("designs"), "yaml");
    assert!(designs.len() >= 4, "expected at least four example designs");
    for path in designs {
        let cwd = scratch("examples");
        let out = run_in(&cwd, &["check", path.to_str().unwrap()]);
        let stdout = String::from_utf8_lossy(&out.stdout);
        let stderr = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(0), "{}: {stderr}", path.display());
        for row in ["parts", "nodes", "models", "supplies", "signal", "output", "requirements"] {
            assert!(stdout.contains(row), "{}: summary lacks `{row}`\n{stdout}", path.display());
        }
        assert!(stdout.contains("0 errors"), "{stdout}");
        let loaded = design::load(&std::fs::read_to_string(&path).unwrap());
        assert!(loaded.diagnostics.is_empty(), "{}: {:?}", path.display(), loaded.diagnostics);
    }
}

#[test]
fn the_cable_capacitance_comes_from_params() {
    // The receive preamplifier's cable load is 2.5 m × 100 pF/m = 250 pF, computed from params.
    let text = std::fs::read_to_string(root().join("designs/rx-preamp-ce.yaml")).unwrap();
    let d = design::load(&text).design.expect("valid");
    let load = d.parts.iter().find(|p| p.name == "load.c").expect("load capacitance");
    let design::PartKind::Capacitor { value, .. } = &load.kind else { panic!("not a capacitor") };
    assert!((value.nominal - 250e-12).abs() < 1e-24, "{}", value.nominal);
}

#[test]
fn every_starter_checks_and_renders_as_it_stands() {
    for kind in ["plain", "common-emitter", "common-source", "cascode", "emitter-follower"] {
        let dir = scratch(&format!("new-{kind}"));
        let args: Vec<&str> = if kind == "plain" {
            vec!["new", "my-stage"]
        } else {
            vec!["new", "my-stage", "--kind", kind]
        };
        let o = run_in(&dir, &args);
        assert!(o.status.success(), "{kind}: {}", String::from_utf8_lossy(&o.stderr));
        let text = std::fs::read_to_string(dir.join("my-stage.yaml")).unwrap();
        assert!(text.contains("  id: my-stage\n"), "{kind}: id not set");
        // The author is the user's to fill in, never the example's.
        assert!(text.contains("  # author: your name\n"), "{kind}: author left to fill");
        for other in ["Okafor", "Brandt", "Haapala", "Moreau"] {
            assert!(!text.contains(other), "{kind}: carries another person's name");
        }
        let check = run_in(&dir, &["check", "my-stage.yaml", "--runs", "20"]);
        assert_eq!(
            check.status.code(),
            Some(0),
            "{kind}: {}",
            String::from_utf8_lossy(&check.stderr)
        );
        let render = run_in(&dir, &["render", "my-stage.yaml", "--runs", "20"]);
        assert!(render.status.success(), "{kind}: {}", String::from_utf8_lossy(&render.stderr));
        assert!(dir.join("out/my-stage/report.html").exists());
        // A second `new` with the same name refuses to overwrite.
        let again = run_in(&dir, &args);
        assert_eq!(again.status.code(), Some(2));
    }
    // An author and a date given on the command line are written in.
    let dir = scratch("new-author");
    let o = run_in(&dir, &["new", "s", "--author", "A. Reviewer", "--date", "2026-12-05"]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let text = std::fs::read_to_string(dir.join("s.yaml")).unwrap();
    assert!(text.contains("  author: \"A. Reviewer\"\n") && text.contains("  date: 2026-12-05\n"));
    let bad = run_in(&dir, &["new", "t", "--date", "5.12.2026"]);
    assert_eq!(bad.status.code(), Some(2));
}
