//! `tauweave schema` validates every example design, checked with the jsonschema package
//! from PyPI (an implementation independent of tauweave), and rejects malformed ones.

use std::process::Command;

use crate::support::{binary, files, root};

#[test]
fn schema_accepts_examples_and_rejects_bad_structure() {
    let mut args: Vec<String> = vec![
        root().join("tests/schema/validate.py").display().to_string(),
        binary().display().to_string(),
    ];
    for p in files(&root().join("designs"), "yaml") {
        args.push(p.display().to_string());
    }
    args.push("--".into());
    // Faults of structure a schema can see (values and units it cannot).
    for name in [
        "unknown-top-level-key",
        "unknown-part-key",
        "list-instead-of-map",
        "missing-signal",
        "missing-output",
        "misspelled-kind",
        "wrong-format-version",
        "bad-designator",
    ] {
        args.push(root().join(format!("tests/bad_input/{name}.yaml")).display().to_string());
    }
    let out = Command::new("python3").args(&args).output().expect(
        "python3 runs; install the test requirements with scripts/test (pip install -r tests/requirements.txt)",
    );
    let stdout = String::from_utf8_lossy(&out.stdout);
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(
        out.status.success(),
        "schema check failed (if jsonschema or PyYAML is missing, run scripts/test):\n{stdout}\n{stderr}"
    );
    assert!(stdout.contains("0 failure(s)"), "{stdout}");
}

/// The project file's schema (`tauweave schema --project`) accepts the example project and
/// refuses a misspelt one, checked with the jsonschema package; the house example design,
/// with its `include`, is a valid design file.
#[test]
fn project_schema_accepts_the_example_project_and_rejects_a_misspelt_one() {
    let run = |extra: &[String]| {
        let mut args = vec![
            root().join("tests/schema/validate.py").display().to_string(),
            binary().display().to_string(),
        ];
        args.extend_from_slice(extra);
        Command::new("python3").args(&args).output().expect("python3 runs (scripts/test)")
    };
    let project = vec![
        "--project".to_string(),
        root().join("designs/house/tauweave-project.yaml").display().to_string(),
        "--".into(),
        root().join("tests/schema/bad-project.yaml").display().to_string(),
    ];
    let design = vec![root().join("designs/house/post-amp-cs-house.yaml").display().to_string()];
    for args in [project, design] {
        let out = run(&args);
        let stdout = String::from_utf8_lossy(&out.stdout);
        assert!(out.status.success(), "{stdout}{}", String::from_utf8_lossy(&out.stderr));
        assert!(stdout.contains("0 failure(s)"), "{stdout}");
    }
}
