//! Cross-check against an independent reference: tests/reference/mna_reference.py builds
//! the nodal equations on its own (no code shared with tauweave) and uses numpy/scipy for
//! the response, the poles (scipy's QZ) and the −3 dB points. Every number it reports must
//! agree with results.json to 1e-6 relative.

use serde_json::Value;

use crate::support::{files, python, reference_results, root, run_in, scratch};

fn compare(reference: &Value, ours: &Value, path: &str, out: &mut Vec<String>) {
    match reference {
        Value::Object(map) => {
            for (k, v) in map {
                match ours.get(k) {
                    Some(o) => compare(v, o, &format!("{path}.{k}"), out),
                    None => out.push(format!("{path}.{k}: missing from results.json")),
                }
            }
        }
        Value::Array(items) => match ours.as_array() {
            Some(o) if o.len() == items.len() => {
                for (i, (a, b)) in items.iter().zip(o).enumerate() {
                    compare(a, b, &format!("{path}[{i}]"), out);
                }
            }
            _ => out.push(format!(
                "{path}: {} items in the reference, results.json has {ours}",
                items.len()
            )),
        },
        Value::Number(n) => {
            let a = n.as_f64().unwrap();
            match ours.as_f64() {
                Some(b) if (a - b).abs() <= 1e-6 * a.abs().max(b.abs()) => {}
                _ => out.push(format!("{path}: reference {a}, results.json {ours}")),
            }
        }
        other => {
            if other != ours {
                out.push(format!("{path}: reference {other}, results.json {ours}"));
            }
        }
    }
}

#[test]
fn the_reference_passes_its_own_closed_form_checks() {
    let out = python(&["tests/reference/selftest.py"]);
    assert!(
        out.status.success(),
        "selftest failed (run scripts/test for numpy/scipy):\n{}\n{}",
        String::from_utf8_lossy(&out.stdout),
        String::from_utf8_lossy(&out.stderr)
    );
}

#[test]
fn results_json_agrees_with_the_independent_reference() {
    let designs = files(&root().join("tests/reference/designs"), "yaml");
    assert!(designs.len() >= 5);
    let mut mismatches = Vec::new();
    for design in designs {
        let name = design.file_stem().unwrap().to_string_lossy().to_string();
        let dir = scratch(&format!("reference-{name}"));
        let render =
            run_in(&dir, &["render", design.to_str().unwrap(), "--format", "json", "--out", "out"]);
        assert!(render.status.success(), "{name}: {}", String::from_utf8_lossy(&render.stderr));
        let ours: Value =
            serde_json::from_str(&std::fs::read_to_string(dir.join("out/results.json")).unwrap())
                .unwrap();
        let reference = reference_results(&design);
        let mut diffs = Vec::new();
        compare(&reference, &ours, "", &mut diffs);
        // The reference must actually have compared something substantial.
        assert!(
            reference["high"]["b1_s"].is_number()
                || reference["low"]["sctc"]["f_estimate_hz"].is_number(),
            "{name}"
        );
        mismatches.extend(diffs.into_iter().map(|d| format!("{name}: {d}")));
    }
    assert!(mismatches.is_empty(), "{}", mismatches.join("\n"));
}
