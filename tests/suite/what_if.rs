//! What-if: limits against a hand formula and a dense sweep, a param sweep that reproduces
//! the nominal review at the param's own value, and the answers in results.json.

use tauweave::analysis::what_if::{self, Outcome};
use tauweave::design;

fn load(text: &str) -> design::Design {
    let l = design::load(text);
    l.design.unwrap_or_else(|| panic!("{:?}", l.diagnostics))
}

/// A single-pole RC: the source's 1 kΩ and R1 charge C1, f_c = 1/(2π(R_s + R1)C1).
fn rc(what_if: &str) -> design::Design {
    load(&format!(
        "tauweave: 1\ndesign: {{id: wi, title: what if, revision: A, date: 2026-12-05}}\n\
         signal: {{at: in, resistance: 1 kΩ}}\noutput: {{at: out}}\nparts:\n\
         \x20 R1: {{kind: resistor, value: 10 kΩ, between: [in, out]}}\n\
         \x20 C1: {{kind: capacitor, value: 100 pF, between: [out, gnd], role: load}}\n\
         requirements:\n  upper_cutoff: {{min: 50 kHz}}\n\
         what_if:\n{what_if}analysis: {{monte_carlo: {{runs: 0}}}}\n"
    ))
}

#[test]
fn a_limit_on_a_single_pole_meets_the_hand_formula() {
    // f_c = 50 kHz when R_s + R1 = 1/(2π·50 kHz·100 pF) = 31.831 kΩ, so R1 = 30.831 kΩ
    // (common practice: the RC corner).
    let d =
        rc("  limits:\n    - {vary: R1, keeping: upper_cutoff, up_to: 1 MΩ, precision: 0.01 %}\n");
    let r = what_if::review(&d);
    let l = &r.limits[0];
    let want = 1.0 / (2.0 * std::f64::consts::PI * 50e3 * 100e-12) - 1e3;
    assert_eq!(l.outcome, Outcome::Reached);
    let got = l.value.unwrap();
    assert!(got <= want && (want - got) <= 1e-4 * want, "{got} vs {want}");
    assert!((l.margin.unwrap() - (got / 10e3 - 1.0)).abs() < 1e-12);
}

#[test]
fn a_limit_lies_between_the_last_passing_and_first_failing_point_of_a_dense_sweep() {
    let d = rc("  sweeps:\n    - {vary: R1, from: 20 kΩ, to: 40 kΩ, points: 200}\n\
         \x20 limits:\n    - {vary: R1, keeping: upper_cutoff, up_to: 100 kΩ, precision: 0.1 %}\n");
    let r = what_if::review(&d);
    let s = &r.sweeps[0];
    let passing: Vec<bool> = s.failing.iter().map(|f| f.as_ref().unwrap().is_empty()).collect();
    let k = passing.iter().position(|p| !p).expect("the sweep crosses the limit");
    assert!(k > 0 && passing[..k].iter().all(|p| *p) && passing[k..].iter().all(|p| !*p));
    let (last_pass, first_fail) = (s.values[k - 1], s.values[k]);
    let v = r.limits[0].value.unwrap();
    // The solved value passes and lies within its precision of the crossing, which the dense
    // sweep brackets to one step (about 0.3 % here).
    assert!(v >= last_pass * (1.0 - 1e-3) && v <= first_fail, "{last_pass} ≤ {v} < {first_fail}");
}

#[test]
fn a_limit_that_is_not_reached_says_so_and_one_failing_already_too() {
    let d = rc("  limits:\n    - {vary: R1, keeping: upper_cutoff, up_to: 20 kΩ}\n");
    let l = &what_if::review(&d).limits[0];
    assert_eq!((l.outcome, l.value), (Outcome::NotReached, None));
    assert!(
        tauweave::report::what_if::limit_sentence(l).contains("not reached within the range"),
        "{}",
        tauweave::report::what_if::limit_sentence(l)
    );
    // 100 kΩ fails at once (f_c = 15.8 kHz): no room to move.
    let text = "  limits:\n    - {vary: C1, keeping: upper_cutoff, down_to: 1 pF}\n";
    let mut d = rc(text);
    if let Some(p) = d.parts.iter_mut().find(|p| p.name == "R1") {
        if let design::PartKind::Resistor { value, .. } = &mut p.kind {
            value.nominal = 100e3;
        }
    }
    let l = &what_if::review(&d).limits[0];
    assert_eq!(l.outcome, Outcome::FailsAtNominal);
}

#[test]
fn a_param_swept_through_its_own_value_reproduces_the_nominal_review() {
    // The demo's cable: at 2.5 m (its own value) the sweep's point is the nominal design, read
    // again with the param replaced by the same number.
    let text = std::fs::read_to_string(crate::support::root().join("designs/rx-preamp-ce.yaml"))
        .unwrap()
        .replace(
            "    - {vary: cable_length, from: 1 m, to: 20 m, points: 9, spacing: log}\n",
            "    - {vary: cable_length, values: [2.5 m, 5 m]}\n",
        );
    let d = load(&text);
    let nominal = tauweave::analysis::metrics(&d).unwrap();
    let r = what_if::review(&d);
    let s = &r.sweeps[0];
    assert_eq!(s.values, [2.5, 5.0]);
    let f_h = &s.figures.iter().find(|(k, _)| k == "upper_cutoff").unwrap().1;
    assert_eq!(f_h[0], nominal.f_high, "the same number, bit for bit");
    // At twice the length the cable's 100 pF/m doubles the load capacitance: f_H, which the
    // cable sets (about 99.7 % of b1), falls to nearly half.
    let ratio = f_h[1].unwrap() / f_h[0].unwrap();
    assert!(ratio > 0.5 && ratio < 0.53, "{ratio}");
}

#[test]
fn what_if_answers_are_in_results_json() {
    let dir = crate::support::scratch("what-if-results");
    let out = crate::support::run_in(
        &dir,
        &[
            "render",
            crate::support::root().join("designs/rx-preamp-ce.yaml").to_str().unwrap(),
            "--format",
            "json",
            "--out",
            "out",
            "--runs",
            "0",
        ],
    );
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let doc: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.join("out/results.json")).unwrap())
            .unwrap();
    let limit = &doc["limits"][0];
    assert_eq!(limit["quantity"], "cable_length");
    assert_eq!(limit["requirement"], "upper_cutoff");
    assert_eq!(limit["outcome"], "reached");
    // By hand: f_H nearly ∝ 1/C_cable, 1.275 MHz at 2.5 m meets 900 kHz near 2.5·1.275/0.9 =
    // 3.54 m.
    let v = limit["value"].as_f64().unwrap();
    assert!((v - 3.54).abs() < 0.03, "{v}");
    let sweep = &doc["sweeps"][0];
    assert_eq!(sweep["values"].as_array().unwrap().len(), 9);
    assert_eq!(sweep["figures"]["upper_cutoff"].as_array().unwrap().len(), 9);
}

#[test]
fn each_operating_corner_is_the_design_read_at_that_temperature_and_supply() {
    // The demo's corners (−20 … 50 °C, vcc 11 … 13 V): each corner's figures must be the
    // numbers of the same design written with that temperature and that supply voltage.
    let text =
        std::fs::read_to_string(crate::support::root().join("designs/rx-preamp-ce.yaml")).unwrap();
    let d = load(&text);
    let r = what_if::review(&d);
    assert_eq!(r.corners.len(), 5, "nominal and the four combinations of two ranges");
    assert_eq!(r.corners[0].label, "nominal");
    for c in &r.corners {
        let vcc = c.supplies.iter().find(|(n, _)| n == "vcc").unwrap().1;
        let written = text
            .replace("  temperature: 27 °C\n", &format!("  temperature: {:?} K\n", c.temperature_k))
            .replace("  vcc: {voltage: 12 V,", &format!("  vcc: {{voltage: {vcc:?} V,"));
        assert!(
            written.contains(&format!("temperature: {:?} K", c.temperature_k))
                && written.contains(&format!("vcc: {{voltage: {vcc:?} V,")),
            "the temperature and the supply are written in"
        );
        let m = tauweave::analysis::metrics(&load(&written)).unwrap();
        let figure = |k: &str| c.figures.iter().find(|(n, _)| n == k).unwrap().1;
        assert_eq!(figure("upper_cutoff"), m.f_high, "{}", c.label);
        assert_eq!(figure("midband_gain"), Some(m.gain), "{}", c.label);
        assert_eq!(figure("Q1.bias_current"), m.bias.first().copied(), "{}", c.label);
    }
    // Colder means less collector current at the same base bias (V_BE rises about 2 mV/K,
    // common practice), so the cold corners run below nominal.
    let bias =
        |i: usize| r.corners[i].figures.iter().find(|(n, _)| n == "Q1.bias_current").unwrap().1;
    assert!(bias(1).unwrap() < bias(0).unwrap() && bias(2).unwrap() < bias(4).unwrap());
}

/// A purpose-made failing stage: R1 = 33 kΩ with the source's 1 kΩ, across the 1 MΩ load ∥
/// R2's 2.2 MΩ (688 kΩ), on 100 pF corners at 1/(2π·(34 kΩ ∥ 688 kΩ)·100 pF) = 49.2 kHz, under
/// the 50 kHz asked (common practice: the RC corner); R2 is marked fixed.
const FAILING: &str = "tauweave: 1\ndesign: {id: sg, title: suggestion test, revision: A, date: 2026-12-05}\n\
    signal: {at: in, resistance: 1 kΩ}\noutput: {at: out, load_resistance: 1 MΩ}\n\
    tolerances: {resistor: 5 %, capacitor: 10 %}\nparts:\n\
    \x20 R1: {kind: resistor, value: 33 kΩ, between: [in, out]}\n\
    \x20 C1: {kind: capacitor, value: 100 pF, between: [out, gnd]}\n\
    \x20 R2: {kind: resistor, value: 2.2 MΩ, between: [out, gnd], fixed: true}\n\
    requirements:\n  upper_cutoff: {min: 50 kHz}\n  midband_gain: {min: -0.5 dB}\n\
    analysis: {monte_carlo: {runs: 0}}\n";

#[test]
fn a_suggested_change_applied_to_the_design_makes_it_pass() {
    let d = load(FAILING);
    let suggestions = tauweave::analysis::part_changes::suggest(&d);
    assert!(!suggestions.is_empty(), "a change within a decade fixes a 7 % shortfall");
    for s in &suggestions {
        for c in &s.changes {
            assert!(c.part != "R2" && !c.part.starts_with("load."), "{} is fixed", c.part);
            // The values come from the series the tolerance implies (E24 at 5 %, E12 at 10 %).
            let series = if c.part == "R1" {
                &tauweave::design::series::E24[..]
            } else {
                &tauweave::design::series::E12[..]
            };
            let mantissa = c.to / 10f64.powf(c.to.log10().floor());
            assert!(series.iter().any(|m| (m - mantissa).abs() < 1e-9), "{} = {}", c.part, c.to);
        }
        assert!(s.worst_margin >= 0.0);
    }
    // The first suggestion, written into the design file and checked as a user would.
    let first = &suggestions[0];
    let mut text = FAILING.to_string();
    for c in &first.changes {
        let old = match c.part.as_str() {
            "R1" => "value: 33 kΩ",
            "C1" => "value: 100 pF",
            other => panic!("unexpected part {other}"),
        };
        let unit = if c.part == "R1" { "Ω" } else { "F" };
        text = text.replace(old, &format!("value: {:?} {unit}", c.to));
    }
    let dir = crate::support::scratch("what-if-suggestion");
    std::fs::write(dir.join("fixed.yaml"), &text).unwrap();
    std::fs::write(dir.join("failing.yaml"), FAILING).unwrap();
    let before = crate::support::run_in(&dir, &["check", "failing.yaml"]);
    let after = crate::support::run_in(&dir, &["check", "fixed.yaml"]);
    assert_eq!(before.status.code(), Some(1), "the purpose-made design fails");
    assert_eq!(after.status.code(), Some(0), "{}", String::from_utf8_lossy(&after.stdout));
    // The least change: R1 to 30 kΩ (E24), 1/(2π·(31 kΩ ∥ 688 kΩ)·100 pF) = 53.7 kHz by hand.
    assert_eq!((first.changes[0].part.as_str(), first.changes[0].to), ("R1", 30e3));
}

#[test]
fn the_nominal_corner_with_tolerances_is_the_review_s_worst_corner() {
    // At the nominal point the worst tolerance corner of each requirement is the one the
    // review's requirement table shows (the same study, run for the corner's design).
    let text = std::fs::read_to_string(crate::support::root().join("designs/rx-preamp-ce.yaml"))
        .unwrap()
        .replace("what_if:\n", "what_if:\n  tolerance_corners: true\n");
    let d = load(&text);
    assert!(d.what_if.tolerance_corners);
    let r =
        tauweave::review::review(&d, &tauweave::review::ReviewOptions::quiet(&d, Some(0))).unwrap();
    let nominal = &r.what_if.corners[0];
    for check in &r.requirements {
        let at_corner = nominal.tolerance.iter().find(|(n, _)| *n == check.name).unwrap().1;
        assert_eq!(at_corner, check.corner, "{}", check.name);
    }
    // Colder and at 11 V the gain's worst corner falls furthest (less bias current).
    let gain = |i: usize| {
        r.what_if.corners[i]
            .tolerance
            .iter()
            .find(|(n, _)| *n == "midband_gain")
            .unwrap()
            .1
            .unwrap()
    };
    assert!(gain(1) < gain(0));
}
