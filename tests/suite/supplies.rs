//! What the supplies deliver, and the `supply_current` requirement, against the square law:
//! a common-source MOSFET whose gate sits on its own supply draws I_D = ½k′(W/L)(V_GS − V_th)²
//! from the drain supply (λ = 0, in saturation; Sedra & Smith, MOSFET chapter, from memory),
//! and its gate supply delivers nothing.

use tauweave::design;
use tauweave::review::{ReviewOptions, review};

fn stage(requirements: &str) -> design::Design {
    stage_rated(requirements, "", "")
}

/// The stage with `rd` and `cl` added to RD's and CL's keys (a `rating`).
fn stage_rated(requirements: &str, rd: &str, cl: &str) -> design::Design {
    let text = format!(
        "tauweave: 1\ndesign: {{id: sup, title: supply current, revision: A, date: 2026-12-04}}\n\
         supplies: {{vdd: 10 V, vg: 2 V}}\n\
         signal: {{at: in, resistance: 1k}}\noutput: {{at: d}}\n\
         parts:\n\
         \x20 C1: {{kind: capacitor, value: 1 µF, between: [in, vg], role: coupling}}\n\
         \x20 RD: {{kind: resistor, value: 2k, between: [vdd, d], tolerance: 5 %{rd}}}\n\
         \x20 CL: {{kind: capacitor, value: 10 pF, between: [d, gnd], role: load{cl}}}\n\
         \x20 M1: {{kind: mosfet, model: N, d: d, g: vg, s: gnd}}\n\
         models:\n  N: {{type: nmos, threshold: {{value: 1 V, tolerance: 0.1 V}}, \
         process_transconductance: 200 µA/V², width: 20 µm, length: 1 µm}}\n\
         requirements:\n{requirements}analysis: {{monte_carlo: {{runs: 0}}}}\n"
    );
    let l = design::load(&text);
    l.design.unwrap_or_else(|| panic!("{:?}", l.diagnostics))
}

fn close(got: f64, want: f64, rel: f64, what: &str) {
    assert!((got - want).abs() <= rel * want.abs(), "{what}: {got} vs {want}");
}

#[test]
fn the_drain_supply_delivers_the_square_law_current_and_the_requirement_follows_it() {
    let d = stage("  supply_current: {max: 2.2 mA}\n");
    let r = review(&d, &ReviewOptions::quiet(&d, Some(0))).unwrap();
    let op = r.analysis.operating_point.as_ref().unwrap();
    let id = 0.5 * 200e-6 * 20.0 * (2.0f64 - 1.0).powi(2);
    let vdd = op.supplies.iter().find(|s| s.node == "vdd").unwrap();
    // To 1e-8: the model's 1 pS across each junction adds 6 pA at V_DS = 6 V.
    close(vdd.current_a, id, 1e-8, "vdd current");
    close(vdd.power_w, 10.0 * id, 1e-8, "vdd power");
    let vg = op.supplies.iter().find(|s| s.node == "vg").unwrap();
    assert!(vg.current_a.abs() < 1e-15, "the gate draws nothing: {}", vg.current_a);
    let check = r.requirements.iter().find(|c| c.name == "supply_current").unwrap();
    close(check.value.unwrap(), id, 1e-8, "requirement value");
    assert!(check.pass);
    // ∂ln I_D/∂ln V_th = −2·V_th/(V_GS − V_th) = −2; R_D moves nothing in saturation.
    let s = &r.study;
    let lever = |n: &str| s.levers.iter().position(|l| l.lever.name == n).unwrap();
    close(s.s(lever("N.threshold"), "supply_current").unwrap(), -2.0, 1e-6, "S to V_th");
    assert!(s.s(lever("RD"), "supply_current").unwrap().abs() < 1e-6);
    // The high corner: V_th at 0.9 V gives ½k′(W/L)(1.1 V)² = 2.42 mA, over the limit.
    let w = s.worst_case.iter().find(|w| w.figure == "supply_current").unwrap();
    close(w.high_corner.unwrap(), 0.5 * 200e-6 * 20.0 * 1.1f64.powi(2), 1e-6, "high corner");
    assert_eq!(check.corner_pass, Some(false));
}

#[test]
fn rated_parts_are_held_against_their_derated_ratings() {
    // R_D carries I_D = 2 mA: (2 mA)²·2 kΩ = 8 mW, 80 % of a 10 mW rating, over the usual
    // half (common practice). CL sits at V_D = 10 V − 2 mA·2 kΩ = 6 V: 95 % of 6.3 V, over
    // 80 %; at 50 V it is 12 %.
    for (cl, over) in [(", rating: 6.3 V", true), (", rating: 50 V", false)] {
        let d = stage_rated("  supply_current: {max: 1 A}\n", ", rating: 10 mW", cl);
        let r = review(&d, &ReviewOptions::quiet(&d, Some(0))).unwrap();
        let op = r.analysis.operating_point.as_ref().unwrap();
        let rd = op.stress.iter().find(|s| s.part == "RD").unwrap();
        close(rd.value, 8e-3, 1e-8, "R_D dissipation");
        assert_eq!((rd.quantity, rd.over()), ("power", true));
        let c = op.stress.iter().find(|s| s.part == "CL").unwrap();
        close(c.value, 6.0, 1e-8, "C_L voltage");
        assert_eq!(c.over(), over, "{cl}");
        let cautions: Vec<&str> =
            r.cautions.iter().filter(|c| c.key == "part_stress").map(|c| c.text.as_str()).collect();
        assert_eq!(cautions.len(), 1 + usize::from(over), "{cautions:?}");
        assert!(cautions[0].starts_with("RD dissipates 8 mW"), "{cautions:?}");
    }
}

#[test]
fn the_design_can_set_its_own_derating() {
    // At 90 % for resistors R_D's 80 % is within; the capacitor's 95 % is not.
    let mut d = stage_rated("  supply_current: {max: 1 A}\n", ", rating: 10 mW", ", rating: 6.3 V");
    let text = "tauweave: 1\ndesign: {id: x, title: t, revision: A, date: 2026-12-04}\n\
                signal: {at: in, resistance: 1k}\noutput: {at: in}\n\
                parts:\n  R1: {kind: resistor, value: 1k, between: [in, gnd]}\n\
                analysis: {derating: {resistor_power: 90 %, capacitor_voltage: 0.95}}\n";
    let read = design::load(text).design.unwrap().analysis;
    assert_eq!((read.resistor_power_derating, read.capacitor_voltage_derating), (0.9, 0.95));
    d.analysis.resistor_power_derating = read.resistor_power_derating;
    let r = review(&d, &ReviewOptions::quiet(&d, Some(0))).unwrap();
    let op = r.analysis.operating_point.as_ref().unwrap();
    let rd = op.stress.iter().find(|s| s.part == "RD").unwrap();
    close(rd.derated_limit, 9e-3, 1e-12, "R_D's derated limit");
    assert!(!rd.over());
    assert!(op.stress.iter().find(|s| s.part == "CL").unwrap().over());
    let bad = text.replace("90 %", "150 %");
    let diagnostics = design::load(&bad).diagnostics;
    assert!(
        diagnostics.iter().any(|x| x.message.contains("must be a fraction")),
        "{diagnostics:?}"
    );
}
