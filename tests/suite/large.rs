//! A network too large for QZ (more than 200 unknowns a capacitor touches), reviewed through
//! the sparse paths — sparse LU of the mid-band network, time constants solved in chunks,
//! poles and zeros near the band by shift-and-invert Arnoldi — and checked against the
//! independent reference (tests/reference/mna_reference.py: numpy's dense solves and scipy's
//! QZ on the whole pencil, sharing no code with tauweave).

use serde_json::Value;

use crate::identities::Lcg;
use crate::support::{reference_results, run_in, scratch};

/// An uneven RC line of `sections` (values spread ±40 %), buffered halfway by a
/// transconductance into a resistor (a one-way stage: G is not symmetric), ending in a
/// unity buffer driving a series inductor into a capacitor and load (a complex pole pair,
/// Q ≈ 6 at 50 kHz), with a bridging capacitor across a few sections, a capacitor across one
/// section's resistor (a lead network: a real zero near 50 kHz) and one coupling capacitor at
/// the input (a low-frequency side, and a zero at the origin).
fn line_design(sections: usize) -> String {
    let mut r = Lcg(0x5eed);
    let mut parts = String::from(
        "  CIN: {kind: capacitor, value: 100n, between: [in, n1], role: coupling}\n\
         \x20 RIN: {kind: resistor, value: 100k, between: [n1, gnd]}\n",
    );
    let half = sections / 2;
    for i in 1..=sections {
        let (a, b) =
            (if i == half + 1 { "m".to_string() } else { format!("n{i}") }, format!("n{}", i + 1));
        parts.push_str(&format!(
            "  R{i}: {{kind: resistor, value: {:.6e}, between: [{a}, {b}]}}\n\
             \x20 C{i}: {{kind: capacitor, value: {:.6e}, between: [{b}, gnd], role: parasitic}}\n",
            1e3 * (0.6 + 0.8 * r.next()),
            10e-12 * (0.6 + 0.8 * r.next()),
        ));
    }
    parts.push_str(&format!(
        "  GM: {{kind: transconductance, value: 2 mS, between: [gnd, m], control: [n{half}, gnd]}}\n\
         \x20 RM: {{kind: resistor, value: 1k, between: [m, gnd]}}\n\
         \x20 CB: {{kind: capacitor, value: 2p, between: [n{}, n{}], role: parasitic}}\n\
         \x20 CZ: {{kind: capacitor, value: 3n3, between: [n{}, n{}], role: parasitic}}\n\
         \x20 E1: {{kind: voltage_amplifier, value: 1, between: [buf, gnd], control: [n{}, gnd]}}\n\
         \x20 L1: {{kind: inductor, value: 1m, between: [buf, out]}}\n\
         \x20 CL: {{kind: capacitor, value: 10n, between: [out, gnd], role: parasitic}}\n",
        half + 10,
        half + 14,
        half + 20,
        half + 21,
        sections + 1
    ));
    format!(
        "tauweave: 1\ndesign: {{id: long-line, title: Long RC line, revision: A, date: 2026-12-03}}\n\
         signal: {{at: in, resistance: 600}}\noutput: {{at: out, load_resistance: 2k}}\n\
         parts:\n{parts}"
    )
}

/// (re, im) of each root in a results list, Hz.
fn roots(list: &Value) -> Vec<(f64, f64)> {
    list.as_array()
        .unwrap()
        .iter()
        .map(|p| (p["re_hz"].as_f64().unwrap(), p["im_hz"].as_f64().unwrap()))
        .collect()
}

/// Whether `p` is within 1e-6 relative of some root in `list`.
fn matched(p: (f64, f64), list: &[(f64, f64)]) -> bool {
    let size = p.0.hypot(p.1);
    list.iter().any(|q| (p.0 - q.0).hypot(p.1 - q.1) <= 1e-6 * size)
}

#[test]
fn a_network_too_large_for_qz_agrees_with_the_reference_near_its_band() {
    let dir = scratch("large-line");
    let design = dir.join("line.yaml");
    std::fs::write(&design, line_design(206)).unwrap();
    let render = run_in(&dir, &["render", "line.yaml", "--format", "json", "--out", "out"]);
    assert!(render.status.success(), "{}", String::from_utf8_lossy(&render.stderr));
    let ours: Value =
        serde_json::from_str(&std::fs::read_to_string(dir.join("out/results.json")).unwrap())
            .unwrap();
    let window = &ours["root_window"];
    assert!(
        window["dynamic_unknowns"].as_u64().unwrap() > window["qz_up_to"].as_u64().unwrap(),
        "the design must take the large-network path: {window}"
    );
    let (from, to) = (window["from_hz"].as_f64().unwrap(), window["to_hz"].as_f64().unwrap());
    let reference = reference_results(&design);

    // Figures through the sparse mid-band solve and the chunked time constants (207
    // high-frequency capacitors, more than one chunk of 64).
    for (path, a, b) in [
        ("midband.gain", &reference["midband"]["gain"], &ours["midband"]["gain"]),
        ("high.f3db_hz", &reference["high"]["f3db_hz"], &ours["high"]["f3db_hz"]),
        ("high.b1_s", &reference["high"]["b1_s"], &ours["high"]["b1_s"]),
        ("high.b2_s2", &reference["high"]["b2_s2"], &ours["high"]["b2_s2"]),
        ("low.f3db_hz", &reference["low"]["f3db_hz"], &ours["low"]["f3db_hz"]),
    ] {
        let (a, b) = (a.as_f64().unwrap(), b.as_f64().unwrap());
        assert!((a - b).abs() <= 1e-6 * a.abs(), "{path}: reference {a}, tauweave {b}");
    }

    // Every pole and zero scipy's QZ finds inside the window (away from its edges by 1 %)
    // is one tauweave lists, and tauweave lists nothing else.
    let inside = |p: &(f64, f64)| {
        let size = p.0.hypot(p.1);
        size >= from * 1.01 && size <= to / 1.01
    };
    for key in ["poles", "zeros"] {
        let theirs: Vec<(f64, f64)> = roots(&reference[key]);
        let mine = roots(&ours[key]);
        let expected: Vec<(f64, f64)> = theirs.iter().copied().filter(inside).collect();
        let least = if key == "poles" { 3 } else { 1 };
        assert!(expected.len() >= least, "{key}: too few roots in the window: {expected:?}");
        for p in &expected {
            assert!(matched(*p, &mine), "{key}: scipy's {p:?} is missing from {mine:?}");
        }
        for p in mine.iter().filter(|p| inside(p)) {
            assert!(matched(*p, &theirs), "{key}: {p:?} is not a root scipy finds");
        }
        if key == "poles" {
            assert!(mine.iter().any(|p| p.1 != 0.0), "the tank's complex pair: {mine:?}");
        } else {
            // The coupling capacitor's zero at the origin, found from the lowest shift.
            assert!(theirs.contains(&(0.0, 0.0)), "scipy's zeros: {theirs:?}");
            assert!(mine.contains(&(0.0, 0.0)), "the zero at the origin: {mine:?}");
        }
    }
}
