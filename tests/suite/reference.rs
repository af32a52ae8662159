//! Cross-check against an independent reference: tests/reference/mna_reference.py builds
//! the nodal equations on its own (no code shared with tauweave) and uses numpy/scipy for
//! the response, the poles (scipy's QZ), the −3 dB points and the noise integrals. Every
//! number it reports must agree with results.json to 1e-6 relative, on the reference designs
//! (tests/reference/designs/) and on the examples (designs/).
//!
//! The reference does not solve the DC bias: for a design with transistors it takes each
//! transistor's bias currents and small-signal parameters from results.json
//! (`operating_point.devices`, through `--bias`) and builds the small-signal network, and
//! everything after it, itself. With `--noise` it adds the `noise` object, solving the
//! network directly for each noise source where tauweave uses one adjoint solve. With
//! `--ports` it adds the `ports` object: the scattering parameters from the network's own
//! y-parameters (an ideal source across each port), K, μ, and the impedances solved directly,
//! where tauweave terminates both ports in Z₀ and reads S from the port voltages.

use std::collections::BTreeMap;
use std::path::Path;

use serde_json::Value;

use crate::support::{files, python, reference_with, root, run_in, scratch};

/// Relative agreement required of every number.
const TOLERANCE: f64 = 1e-6;

/// Below this share of the total (a contributor's spot or band share, or its density over
/// the total output density) numbers are compared absolutely, as if they were this large:
/// a contributor of 1e-33 (one whose noise cancels at the output) is zero to both.
const SHARE_FLOOR: f64 = 1e-9;

/// The largest gap seen for each quantity (path without design, indices or contributor).
type Gaps = BTreeMap<String, f64>;

/// The path with array indices and contributor keys taken out: the quantity it names.
fn quantity(path: &str) -> String {
    let mut out = String::new();
    let mut depth = 0;
    for ch in path.chars() {
        match ch {
            '[' => depth += 1,
            ']' => depth -= 1,
            _ if depth == 0 => out.push(ch),
            _ => {}
        }
    }
    match out.split_once(".noise.contributors.") {
        Some((head, tail)) => {
            let field = tail.rsplit('.').next().unwrap_or(tail);
            format!("{head}.noise.contributors.*.{field}")
        }
        None => out,
    }
}

/// The absolute size below which the number at `path` is compared absolutely, given the
/// total output noise density `total` (V²/Hz). A figure in dB is compared to 1e-6 dB below
/// 1 dB (a return loss of 1e-15 dB is 0 dB to both).
fn floor(path: &str, total: f64) -> f64 {
    if path.ends_with("_db") {
        1.0
    } else if path.ends_with(".share") || path.ends_with(".band_share") {
        SHARE_FLOOR
    } else if path.ends_with(".density_v2_per_hz") {
        SHARE_FLOOR * total
    } else {
        0.0
    }
}

/// The magnitude of a complex number written as `{re_ohm, im_ohm}` or as `[re, im]` (an
/// S-parameter): each part is compared relative to it, the complex value's own relative
/// error (the resistance of a near-pure capacitor is rounding beside its reactance). An
/// S-parameter, a wave over a unit incident wave, is compared absolutely below 1e-9.
fn pair_scale(path: &str, v: &Value) -> f64 {
    let parts = match v {
        Value::Object(m) => m.get("re_ohm").zip(m.get("im_ohm")),
        Value::Array(a) if a.len() == 2 && path.contains(".s_parameters") => Some((&a[0], &a[1])),
        _ => None,
    };
    let Some((re, im)) = parts.and_then(|(a, b)| a.as_f64().zip(b.as_f64())) else { return 0.0 };
    let floor = if path.contains(".s_parameters") { SHARE_FLOOR } else { 0.0 };
    re.hypot(im).max(floor)
}

fn compare(
    reference: &Value,
    ours: &Value,
    path: &str,
    total: f64,
    out: &mut Vec<String>,
    gaps: &mut Gaps,
) {
    compare_within(reference, ours, path, total, 0.0, out, gaps);
}

/// [`compare`], numbers below `scale` compared absolutely (the complex value they are part
/// of).
fn compare_within(
    reference: &Value,
    ours: &Value,
    path: &str,
    total: f64,
    scale: f64,
    out: &mut Vec<String>,
    gaps: &mut Gaps,
) {
    match reference {
        Value::Object(map) => {
            let scale = pair_scale(path, reference);
            for (k, v) in map {
                match ours.get(k) {
                    Some(o) => {
                        compare_within(v, o, &format!("{path}.{k}"), total, scale, out, gaps)
                    }
                    None => out.push(format!("{path}.{k}: missing from results.json")),
                }
            }
        }
        Value::Array(items) => match ours.as_array() {
            Some(o) if o.len() == items.len() => {
                let scale = pair_scale(path, reference);
                for (i, (a, b)) in items.iter().zip(o).enumerate() {
                    compare_within(a, b, &format!("{path}[{i}]"), total, scale, out, gaps);
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
                Some(b) => {
                    let size = a.abs().max(b.abs()).max(floor(path, total)).max(scale);
                    let gap = if size > 0.0 { (a - b).abs() / size } else { 0.0 };
                    let worst = gaps.entry(quantity(path)).or_insert(0.0);
                    *worst = worst.max(gap);
                    if gap > TOLERANCE {
                        out.push(format!(
                            "{path}: reference {a}, results.json {b} (gap {gap:.2e})"
                        ));
                    }
                }
                None => out.push(format!("{path}: reference {a}, results.json {ours}")),
            }
        }
        other => {
            if other != ours {
                out.push(format!("{path}: reference {other}, results.json {ours}"));
            }
        }
    }
}

/// `noise.contributors` as an object keyed `part/mechanism`, so that contributors are
/// matched by what they are rather than by their place in the ranking.
fn key_contributors(results: &mut Value) {
    let Some(list) = results.pointer_mut("/noise/contributors") else { return };
    let Some(items) = list.as_array() else { return };
    let keyed: serde_json::Map<String, Value> = items
        .iter()
        .map(|c| {
            let key = format!(
                "{}/{}",
                c["part"].as_str().unwrap_or("?"),
                c["mechanism"].as_str().unwrap_or("?")
            );
            (key, c.clone())
        })
        .collect();
    assert_eq!(keyed.len(), items.len(), "contributors are one per part and mechanism: {items:?}");
    *list = Value::Object(keyed);
}

/// The reference's results for `design`, with the transistors' bias read from `results`
/// and the noise and ports analyses on.
fn reference_with_noise(design: &Path, results: &Path) -> Value {
    reference_with(design, &["--bias", results.to_str().unwrap(), "--noise", "--ports"])
}

/// Renders `design`, runs the reference on it and compares: the mismatches, the largest gap
/// per quantity, and how many noise quantities were compared.
fn cross_check(design: &Path, label: &str) -> (Vec<String>, Gaps, usize) {
    let name = design.file_stem().unwrap().to_string_lossy().to_string();
    let dir = scratch(&format!("reference-{label}-{name}"));
    let render = run_in(
        &dir,
        &["render", design.to_str().unwrap(), "--format", "json", "--out", "out", "--runs", "0"],
    );
    assert!(render.status.success(), "{name}: {}", String::from_utf8_lossy(&render.stderr));
    let results = dir.join("out/results.json");
    let mut ours: Value =
        serde_json::from_str(&std::fs::read_to_string(&results).unwrap()).unwrap();
    let mut reference = reference_with_noise(design, &results);
    // The reference must actually have compared something substantial.
    assert!(
        reference["high"]["b1_s"].is_number()
            || reference["low"]["sctc"]["f_estimate_hz"].is_number(),
        "{name}"
    );
    // Where across the band the match is worst is compared by its value only: over a flat
    // stretch (a return loss near 0 dB at low frequencies) the place of the least is a near
    // tie that rounding settles.
    if let Some(band) = reference.pointer_mut("/ports/band").and_then(Value::as_object_mut) {
        band.remove("input_worst_hz");
        band.remove("output_worst_hz");
    }
    let noise = &reference["noise"];
    assert!(
        noise["noise_factor"].is_number()
            && noise["e_n_v_per_rthz"].is_number()
            && noise["contributors"].as_array().is_some_and(|c| c.len() >= 3),
        "{name}: the reference's noise is incomplete: {noise}"
    );
    // And its ports: S-parameters from its own y-parameters at every listed frequency.
    let listed = reference.pointer("/ports/s_parameters").and_then(Value::as_array);
    assert!(
        listed.is_some_and(|s| s.len() >= 10)
            && reference.pointer("/ports/stability").is_some_and(Value::is_object),
        "{name}: the reference's ports are incomplete: {}",
        reference["ports"]
    );
    let total = noise["output_density_v_per_rthz"].as_f64().unwrap().powi(2);
    key_contributors(&mut reference);
    key_contributors(&mut ours);
    let mut diffs = Vec::new();
    let mut gaps = Gaps::new();
    compare(&reference, &ours, "", total, &mut diffs, &mut gaps);
    // Every contributor tauweave lists, the reference lists too.
    if let (Some(theirs), Some(mine)) = (
        reference.pointer("/noise/contributors").and_then(Value::as_object),
        ours.pointer("/noise/contributors").and_then(Value::as_object),
    ) {
        for key in mine.keys().filter(|k| !theirs.contains_key(*k)) {
            diffs.push(format!(".noise.contributors.{key}: not a source the reference finds"));
        }
    }
    let compared = gaps.keys().filter(|k| k.starts_with(".noise")).count();
    (diffs.into_iter().map(|d| format!("{name}: {d}")).collect(), gaps, compared)
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
    let references = files(&root().join("tests/reference/designs"), "yaml");
    let examples = files(&root().join("designs"), "yaml");
    assert!(references.len() >= 5 && examples.len() >= 4);
    let jobs: Vec<(&Path, &str)> = references
        .iter()
        .map(|d| (d.as_path(), "ref"))
        .chain(examples.iter().map(|d| (d.as_path(), "example")))
        .collect();
    // Each check is a render and a Python run: two at a time.
    let outcomes: Vec<(Vec<String>, Gaps, usize)> = jobs
        .chunks(2)
        .flat_map(|pair| {
            std::thread::scope(|s| {
                let handles: Vec<_> = pair
                    .iter()
                    .map(|&(design, label)| s.spawn(move || cross_check(design, label)))
                    .collect();
                handles.into_iter().map(|h| h.join().unwrap()).collect::<Vec<_>>()
            })
        })
        .collect();
    let mut mismatches = Vec::new();
    let mut worst = Gaps::new();
    for (diffs, gaps, compared) in outcomes {
        mismatches.extend(diffs);
        assert!(compared >= 10, "too few noise quantities compared: {compared}");
        for (k, v) in gaps {
            let w = worst.entry(k).or_insert(0.0);
            *w = w.max(v);
        }
    }
    // The largest gap per quantity over every design (shown with --nocapture).
    for (k, v) in worst.iter().filter(|(k, _)| k.starts_with(".noise")) {
        println!("{v:9.2e}  {k}");
    }
    let rest = worst.iter().filter(|(k, _)| !k.starts_with(".noise")).map(|(_, v)| *v);
    println!("{:9.2e}  every other quantity", rest.fold(0.0, f64::max));
    assert!(mismatches.is_empty(), "{}", mismatches.join("\n"));
}

/// The noise of random RC and transconductance networks (the generator of identities.rs)
/// against the reference, like the designs above: six networks whose noise tauweave can
/// refer to the input (the source reaches the output, so the noise factor and the input
/// generators exist) and that have capacitors on either side, the first six such seeds.
#[test]
fn noise_of_random_networks_agrees_with_the_independent_reference() {
    let dir = scratch("reference-random");
    let mut checked = Vec::new();
    let mut mismatches = Vec::new();
    for seed in 1..=60u64 {
        if checked.len() == 6 {
            break;
        }
        let design = dir.join(format!("random-{seed}.yaml"));
        std::fs::write(&design, crate::identities::random_network(seed)).unwrap();
        let probe = dir.join(format!("probe-{seed}"));
        let render = run_in(
            &dir,
            &["render", design.to_str().unwrap(), "--format", "json", "--out"]
                .into_iter()
                .chain([probe.to_str().unwrap(), "--runs", "0"])
                .collect::<Vec<_>>(),
        );
        if !render.status.success() {
            continue;
        }
        let ours: Value =
            serde_json::from_str(&std::fs::read_to_string(probe.join("results.json")).unwrap())
                .unwrap();
        let n = &ours["noise"];
        let usable = n["noise_factor"].is_number()
            && n["e_n_v_per_rthz"].is_number()
            && n["contributors"].as_array().is_some_and(|c| c.len() >= 3)
            && (ours["high"]["b1_s"].is_number()
                || ours["low"]["sctc"]["f_estimate_hz"].is_number());
        if !usable {
            continue;
        }
        let (diffs, _, compared) = cross_check(&design, "random");
        assert!(compared >= 10, "random network {seed}: too few noise quantities compared");
        mismatches.extend(diffs);
        checked.push(seed);
    }
    assert_eq!(checked.len(), 6, "only {checked:?} of the first 60 seeds could be compared");
    assert!(mismatches.is_empty(), "{}", mismatches.join("\n"));
}
