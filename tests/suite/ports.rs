//! The stage at its ports against the closed forms of textbook two-ports in a 50 Ω reference
//! (Pozar, Microwave Engineering, ch. 4, from memory): a series impedance Z has
//! S₁₁ = Z/(Z + 2Z₀), S₂₁ = 2Z₀/(Z + 2Z₀); a shunt admittance Y has S₁₁ = −YZ₀/(2 + YZ₀),
//! S₂₁ = 2/(2 + YZ₀); a matched T attenuator of ratio K (series arms Z₀(K − 1)/(K + 1), shunt
//! arm 2Z₀K/(K² − 1), common practice) has S₁₁ = 0 and S₂₁ = 1/K. And S₂₁ = 2·V_out/E of the
//! design itself when its source and load are the reference.

use faer::c64;
use tauweave::analysis::ports::PortsReport;
use tauweave::design;
use tauweave::review::{ReviewOptions, review};

fn load(text: &str) -> design::Design {
    let l = design::load(text);
    l.design.unwrap_or_else(|| panic!("{:?}", l.diagnostics))
}

fn ports(parts: &str, signal_at: &str, output_at: &str, z0: &str) -> PortsReport {
    let text = format!(
        "tauweave: 1\ndesign: {{id: tp, title: two-port, revision: A, date: 2026-12-04}}\n\
         signal: {{at: {signal_at}, resistance: 1k}}\noutput: {{at: {output_at}}}\n\
         parts:\n{parts}\
         analysis: {{monte_carlo: {{runs: 0}}, reference_impedance: {z0}, \
         sweep: {{start: 1 kHz, stop: 1 GHz, points_per_decade: 5}}}}\n"
    );
    let d = load(&text);
    let r = review(&d, &ReviewOptions::quiet(&d, Some(0))).unwrap();
    r.analysis.ports.clone().expect("ports")
}

fn near(got: c64, want: c64, what: &str) {
    assert!((got - want).norm() <= 1e-9 * (1.0 + want.norm()), "{what}: {got:?} vs {want:?}");
}

#[test]
fn a_series_resistor_has_the_textbook_s_parameters() {
    let p = ports("  R1: {kind: resistor, value: 100, between: [in, out]}\n", "in", "out", "50 Ω");
    assert!(p.conditionally_stable().is_empty(), "the boundary itself is not flagged");
    assert_eq!(p.reference_ohm, 50.0);
    assert!(p.reference_stated);
    assert!(!p.points.is_empty());
    let (z, z0) = (100.0, 50.0);
    for pt in &p.points {
        let [s11, s21, s12, s22] = pt.s;
        near(s11, c64::new(z / (z + 2.0 * z0), 0.0), "S11");
        near(s22, c64::new(z / (z + 2.0 * z0), 0.0), "S22");
        near(s21, c64::new(2.0 * z0 / (z + 2.0 * z0), 0.0), "S21");
        near(s12, s21, "S12 = S21 (reciprocal)");
        // By hand: Δ = S₁₁² − S₂₁² = 0 for Z = 2Z₀, so K = (1 − 2·¼)/(2·¼) = 1 and
        // μ = (1 − ¼)/(½ + ¼) = 1: a lone series element sits on the stability boundary.
        assert!((pt.k().unwrap() - 1.0).abs() < 1e-9 && (pt.mu().unwrap() - 1.0).abs() < 1e-9);
    }
}

#[test]
fn a_shunt_capacitor_has_the_textbook_s_parameters() {
    let c = 10e-12;
    let p = ports(
        "  C1: {kind: capacitor, value: 10 pF, between: [n, gnd]}\n\
                   \x20 R1: {kind: resistor, value: 1M, between: [n, gnd]}\n",
        "n",
        "n",
        "50 Ω",
    );
    assert!(p.points.len() > 20, "the sweep has {} points", p.points.len());
    for pt in &p.points {
        // The 1 MΩ in parallel is part of the shunt admittance.
        let y = c64::new(1e-6, 2.0 * std::f64::consts::PI * pt.frequency_hz * c);
        let yz = y * 50.0;
        let two = c64::new(2.0, 0.0);
        near(pt.s[0], -yz / (two + yz), "S11");
        near(pt.s[1], two / (two + yz), "S21");
        near(pt.s[3], -yz / (two + yz), "S22");
    }
}

#[test]
fn a_matched_t_attenuator_reflects_nothing_and_passes_one_over_k() {
    // 6 dB in 75 Ω.
    let (z0, k) = (75.0f64, 10f64.powf(6.0 / 20.0));
    let series = z0 * (k - 1.0) / (k + 1.0);
    let shunt = 2.0 * z0 * k / (k * k - 1.0);
    let parts = format!(
        "  R1: {{kind: resistor, value: {series}, between: [in, mid]}}\n\
         \x20 R2: {{kind: resistor, value: {shunt}, between: [mid, gnd]}}\n\
         \x20 R3: {{kind: resistor, value: {series}, between: [mid, out]}}\n"
    );
    let p = ports(&parts, "in", "out", "75 Ω");
    assert!(p.points.len() > 20, "the sweep has {} points", p.points.len());
    for pt in &p.points {
        near(pt.s[0], c64::new(0.0, 0.0), "S11");
        near(pt.s[3], c64::new(0.0, 0.0), "S22");
        near(pt.s[1], c64::new(1.0 / k, 0.0), "S21");
        // By hand: Δ = −1/K², so Rollett's K = (1 + 1/K⁴)/(2/K²) and μ = 1/(0 + 1/K²) = K².
        let kr = (1.0 + k.powi(-4)) / (2.0 * k.powi(-2));
        assert!((pt.k().unwrap() - kr).abs() <= 1e-9 * kr);
        assert!((pt.mu().unwrap() - k * k).abs() <= 1e-9 * k * k);
        // Matched: the input impedance with an open output is the pad's open-circuit one.
    }
    assert!(p.conditionally_stable().is_empty());
}

#[test]
fn s21_is_twice_the_transfer_when_source_and_load_are_the_reference() {
    // The post-amplifier example with a 50 Ω source and a 50 Ω load: S₂₁ = 2·V_out/E.
    let text =
        std::fs::read_to_string(crate::support::root().join("designs/post-amp-cs.yaml")).unwrap();
    let text = text
        .replace("  resistance: 1 kΩ\n", "  resistance: 50 Ω\n")
        .replace("  load_resistance: 10k\n", "  load_resistance: 50 Ω\n");
    assert!(text.contains("resistance: 50 Ω") && text.contains("load_resistance: 50 Ω"));
    let d = load(&text);
    let r = review(&d, &ReviewOptions::quiet(&d, Some(0))).unwrap();
    let p = r.analysis.ports.as_ref().unwrap();
    assert!(!p.reference_stated, "the example states no reference: 50 Ω by default");
    let mut compared = 0;
    for pt in &p.points {
        let Some(h) = r.analysis.sweep.iter().find(|s| s.frequency_hz == pt.frequency_hz) else {
            continue;
        };
        let want = 2.0 * 10f64.powf(h.magnitude_db / 20.0);
        assert!((pt.s[1].norm() - want).abs() <= 1e-6 * want, "|S21| at {} Hz", pt.frequency_hz);
        compared += 1;
    }
    assert!(compared > 100, "compared {compared} frequencies");
}

fn analysed(parts: &str, resistance: &str) -> tauweave::analysis::Analysis {
    let text = format!(
        "tauweave: 1\ndesign: {{id: td, title: time domain, revision: A, date: 2026-12-04}}\n\
         signal: {{at: in, resistance: {resistance}}}\noutput: {{at: out}}\n\
         parts:\n{parts}analysis: {{monte_carlo: {{runs: 0}}}}\n"
    );
    let d = load(&text);
    review(&d, &ReviewOptions::quiet(&d, Some(0))).unwrap().analysis
}

#[test]
fn an_rc_stage_rises_in_tau_ln_9_and_its_delay_is_the_first_order_form() {
    // One pole at 1/τ: t_r = τ·ln 9, no overshoot, 1 %
    // settling at τ·ln 100; τ_g = τ/(1 + (ωτ)²) (common practice: the single RC).
    let a = analysed(
        "  C1: {kind: capacitor, value: 100 pF, between: [out, gnd], role: load}\n\
         \x20 R1: {kind: resistor, value: 1 MΩ, between: [in, out]}\n",
        "1 kΩ",
    );
    // R_s and R1 in series charge C1: τ = (1 kΩ + 1 MΩ)·100 pF.
    let tau = (1e6 + 1e3) * 100e-12;
    let s = a.step.as_ref().unwrap();
    assert!((s.rise_time_s - tau * 9f64.ln()).abs() <= 1e-9 * tau, "{}", s.rise_time_s);
    assert_eq!(s.overshoot, 0.0);
    assert!((s.settling_time_s.unwrap() - tau * 100f64.ln()).abs() <= 1e-9 * tau);
    let g = a.group_delay.as_ref().unwrap();
    let w = 2.0 * std::f64::consts::PI * (g.from_hz * g.to_hz).sqrt();
    let want = tau / (1.0 + (w * tau).powi(2));
    assert!((g.centre_s - want).abs() <= 1e-9 * tau, "{} vs {want}", g.centre_s);
}

#[test]
fn a_series_rlc_overshoots_by_the_damping_formula() {
    // R_s = 18.97 Ω, L = 1 µH, C = 1 nF: ω₀ = 1/√(LC), ζ = (R/2)·√(C/L) = 0.3; overshoot
    // e^(−πζ/√(1 − ζ²)) (Ogata, second-order systems, from memory).
    let (r, l, c) = (0.6 * (1e-6f64 / 1e-9).sqrt(), 1e-6f64, 1e-9f64);
    let zeta = r / 2.0 * (c / l).sqrt();
    let a = analysed(
        "  L1: {kind: inductor, value: 1 µH, between: [in, out]}\n\
         \x20 C1: {kind: capacitor, value: 1 nF, between: [out, gnd], role: load}\n",
        &format!("{r} Ω"),
    );
    let s = a.step.as_ref().unwrap();
    let want = (-std::f64::consts::PI * zeta / (1.0 - zeta * zeta).sqrt()).exp();
    assert!((s.overshoot - want).abs() <= 1e-9, "{} vs {want}", s.overshoot);
}
