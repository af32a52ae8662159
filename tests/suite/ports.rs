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

fn polar(magnitude: f64, degrees: f64) -> c64 {
    let a = degrees.to_radians();
    c64::new(magnitude * a.cos(), magnitude * a.sin())
}

fn device(s: [c64; 4]) -> tauweave::analysis::ports::PortPoint {
    let z = c64::new(50.0, 0.0);
    tauweave::analysis::ports::PortPoint { frequency_hz: 2e9, s, z_in: z, z_out: z }
}

#[test]
fn k_delta_and_mu_of_published_transistor_s_parameters() {
    // A GaAs FET at 2 GHz, S11 = 0.894∠−60.6°, S21 = 3.122∠123.6°, S12 = 0.020∠62.4°,
    // S22 = 0.781∠−27.6°: |Δ| = 0.696, K = 0.607, μ = 0.86 — potentially unstable (Pozar,
    // Microwave Engineering, the stability example of the amplifier chapter, from memory;
    // to the three figures printed there).
    let fet =
        device([polar(0.894, -60.6), polar(3.122, 123.6), polar(0.020, 62.4), polar(0.781, -27.6)]);
    assert!((fet.delta().norm() - 0.696).abs() < 5e-4, "{}", fet.delta().norm());
    assert!((fet.k().unwrap() - 0.607).abs() < 5e-4, "{:?}", fet.k());
    assert!((fet.mu().unwrap() - 0.86).abs() < 5e-3, "{:?}", fet.mu());
    // A bipolar transistor at 4 GHz, S11 = 0.72∠−116°, S21 = 2.60∠76°, S12 = 0.03∠57°,
    // S22 = 0.73∠−54°: K = 1.195, |Δ| = 0.488 — unconditionally stable (the same book's
    // conjugate-match design example, from memory); μ > 1 says the same (Edwards & Sinsky:
    // μ > 1 exactly when K > 1 and |Δ| < 1).
    let bjt =
        device([polar(0.72, -116.0), polar(2.60, 76.0), polar(0.03, 57.0), polar(0.73, -54.0)]);
    assert!((bjt.k().unwrap() - 1.195).abs() < 5e-4, "{:?}", bjt.k());
    assert!((bjt.delta().norm() - 0.488).abs() < 5e-4, "{}", bjt.delta().norm());
    assert!(bjt.mu().unwrap() > 1.0 && fet.mu().unwrap() < 1.0);
}

fn requirement(
    r: &tauweave::review::Review,
    name: &str,
) -> tauweave::analysis::requirements::RequirementCheck {
    r.requirements
        .iter()
        .find(|c| c.name == name)
        .unwrap_or_else(|| panic!("no check of {name}"))
        .clone()
}

fn reviewed(text: &str, runs: u32) -> tauweave::review::Review {
    let d = load(text);
    review(&d, &ReviewOptions::quiet(&d, Some(runs))).unwrap()
}

#[test]
fn a_return_loss_requirement_is_the_worst_of_the_band_by_the_shunt_capacitor_form() {
    // A shunt C (∥ 1 MΩ) across both ports: |S11| = |YZ₀/(2 + YZ₀)| grows with frequency, so
    // the least return loss across 1 … 100 MHz is at 100 MHz (Pozar, as above).
    let text = "tauweave: 1\ndesign: {id: rl, title: return loss, revision: A, date: 2026-12-05}\n\
        signal: {at: n, resistance: 50, band: {from: 1 MHz, to: 100 MHz}}\noutput: {at: n}\n\
        parts:\n  C1: {kind: capacitor, value: 10 pF, between: [n, gnd], role: load}\n\
        \x20 R1: {kind: resistor, value: 1M, between: [n, gnd]}\n\
        requirements:\n  input_return_loss: {min: 20 dB}\n  output_return_loss: {min: 10 dB}\n\
        analysis: {monte_carlo: {runs: 0}}\n";
    let r = reviewed(text, 0);
    let y = c64::new(1e-6, 2.0 * std::f64::consts::PI * 100e6 * 10e-12);
    let yz = y * 50.0;
    let want = -20.0 * (yz / (c64::new(2.0, 0.0) + yz)).norm().log10();
    let (input, output) =
        (requirement(&r, "input_return_loss"), requirement(&r, "output_return_loss"));
    for c in [&input, &output] {
        assert!((c.value.unwrap() - want).abs() < 1e-9, "{:?} vs {want} dB", c.value);
        assert_eq!(c.unit, "dB");
    }
    // By hand: ωCZ₀ = 0.314 at 100 MHz, |S11| = 0.314/√(4 + 0.314²) = 0.155, 16.2 dB —
    // under the 20 dB asked at the input, over the 10 dB asked at the output.
    assert!((want - 16.18).abs() < 0.01, "{want}");
    assert!(!input.pass && output.pass);
    assert!((input.margin_db.unwrap() - (want - 20.0)).abs() < 1e-9, "{:?}", input.margin_db);
    let band = r.analysis.ports.as_ref().unwrap().band.unwrap();
    assert_eq!(band.input_return_loss_db.unwrap().1, 100e6, "worst at the upper edge");
}

/// A resistive stage with a transconductance: R1 and R2 from each port to ground, RF across,
/// g·v(in) injected into the output (positive feedback around RF when `into_output`).
fn feedback_stage(g_ms: f64, into_output: bool) -> String {
    let between = if into_output { "[gnd, out]" } else { "[out, gnd]" };
    format!(
        "tauweave: 1\ndesign: {{id: fb, title: feedback stage, revision: A, date: 2026-12-05}}\n\
         signal: {{at: in, resistance: 50}}\noutput: {{at: out}}\nparts:\n\
         \x20 R1: {{kind: resistor, value: 1k, between: [in, gnd]}}\n\
         \x20 R2: {{kind: resistor, value: 1k, between: [out, gnd]}}\n\
         \x20 RF: {{kind: resistor, value: 1k, between: [in, out]}}\n\
         \x20 G1: {{kind: transconductance, value: {g_ms} mS, between: {between}, control: [in, gnd]}}\n\
         \x20 CL: {{kind: capacitor, value: 1 pF, between: [out, gnd], role: load}}\n\
         requirements:\n  stability: {{min: 1}}\n\
         analysis: {{monte_carlo: {{runs: 0}}, sweep: {{start: 1 kHz, stop: 100 kHz, points_per_decade: 10}}}}\n"
    )
}

/// μ of the feedback stage at DC from its y-parameters: y11 = G1 + Gf, y12 = −Gf,
/// y21 = ±g − Gf, y22 = G2 + Gf, converted by S = (I − Z₀Y)(I + Z₀Y)⁻¹ (Pozar, table 4.2,
/// from memory), and μ by Edwards & Sinsky's formula written out here.
fn feedback_mu(g: f64, into_output: bool) -> f64 {
    let (g1, g2, gf, z0) = (1e-3, 1e-3, 1e-3, 50.0);
    let y21 = if into_output { -g } else { g } - gf;
    let (y11, y12, y22) = (z0 * (g1 + gf), -z0 * gf, z0 * (g2 + gf));
    let y21 = z0 * y21;
    let d = (1.0 + y11) * (1.0 + y22) - y12 * y21;
    let s11 = ((1.0 - y11) * (1.0 + y22) + y12 * y21) / d;
    let s22 = ((1.0 + y11) * (1.0 - y22) + y12 * y21) / d;
    let (s12, s21) = (-2.0 * y12 / d, -2.0 * y21 / d);
    let delta = s11 * s22 - s12 * s21;
    (1.0 - s11 * s11) / ((s22 - delta * s11).abs() + (s12 * s21).abs())
}

#[test]
fn a_stability_requirement_reads_mu_over_the_sweep_against_the_y_parameter_form() {
    // 10 mS fed back positively: μ = 0.702 by the closed form, conditionally stable; fed
    // back negatively μ = 1.22, unconditionally stable. The 1 pF load is the design's and
    // leaves the two-port, which is resistive: μ is the same at every point of the sweep.
    for (into_output, stable) in [(true, false), (false, true)] {
        let r = reviewed(&feedback_stage(10.0, into_output), 0);
        let want = feedback_mu(10e-3, into_output);
        assert!((want - if stable { 1.2222 } else { 0.7021 }).abs() < 1e-4, "{want}");
        let c = requirement(&r, "stability");
        assert!((c.value.unwrap() - want).abs() < 1e-9, "{:?} vs {want}", c.value);
        assert_eq!(c.pass, stable);
        let p = r.analysis.ports.as_ref().unwrap();
        assert_eq!(p.conditionally_stable().is_empty(), stable);
    }
}

fn rc_stage(requirements: &str, settling: &str) -> String {
    format!(
        "tauweave: 1\ndesign: {{id: td, title: time domain, revision: A, date: 2026-12-05}}\n\
         signal: {{at: in, resistance: 1 kΩ, band: {{from: 100 Hz, to: 1 kHz}}}}\noutput: {{at: out}}\n\
         parts:\n  C1: {{kind: capacitor, value: 100 pF, between: [out, gnd], role: load, tolerance: 5 %}}\n\
         \x20 R1: {{kind: resistor, value: 1 MΩ, between: [in, out], tolerance: 1 %}}\n\
         requirements:\n{requirements}\
         analysis: {{monte_carlo: {{runs: 40}}{settling}}}\n"
    )
}

#[test]
fn time_domain_requirements_are_the_single_pole_forms_and_join_the_study() {
    // τ = (1 kΩ + 1 MΩ)·100 pF: t_r = τ·ln 9; no overshoot; the group delay
    // τ/(1 + (ωτ)²) falls across the band, so its spread is its value at 100 Hz less its
    // value at 1 kHz (common practice: the single RC).
    let tau = (1e6 + 1e3) * 100e-12;
    let r = reviewed(
        &rc_stage(
            "  rise_time: {max: 250 µs}\n  overshoot: {max: 1 %}\n  group_delay_variation: {max: 1 µs}\n",
            "",
        ),
        40,
    );
    let rise = requirement(&r, "rise_time");
    assert!((rise.value.unwrap() - tau * 9f64.ln()).abs() <= 1e-9 * tau);
    assert!(rise.pass && rise.unit == "s");
    let overshoot = requirement(&r, "overshoot");
    assert_eq!((overshoot.value, overshoot.pass, overshoot.unit), (Some(0.0), true, "%"));
    let delay = |f: f64| {
        let wt = 2.0 * std::f64::consts::PI * f * tau;
        tau / (1.0 + wt * wt)
    };
    let spread = requirement(&r, "group_delay_variation");
    let want = delay(100.0) - delay(1e3);
    assert!((spread.value.unwrap() - want).abs() <= 1e-9 * want, "{:?} vs {want}", spread.value);
    assert!(!spread.pass, "{want} s is over 1 µs");
    // The study follows them: the rise time has corners (τ moves with R1 and C1) and every
    // requirement a yield.
    let (lo, hi) = (rise.high_corner.unwrap(), rise.value.unwrap());
    assert!(lo > hi, "the high corner {lo} is above the nominal {hi}");
    for c in [&rise, &overshoot, &spread] {
        assert!(c.yield_fraction.is_some(), "{} has no yield", c.name);
    }
    assert_eq!(overshoot.yield_fraction, Some(1.0));
}

#[test]
fn the_settling_band_is_the_design_s() {
    // To 0.1 % a single pole settles at τ·ln 1000 (common practice).
    let tau = (1e6 + 1e3) * 100e-12;
    let r = reviewed(&rc_stage("  rise_time: {max: 1 ms}\n", ", settling_band: 0.1 %"), 0);
    let s = r.analysis.step.as_ref().unwrap();
    assert_eq!(s.settling_band, 1e-3);
    assert!((s.settling_time_s.unwrap() - tau * 1000f64.ln()).abs() <= 1e-9 * tau);
}

#[test]
fn the_explanation_sets_the_overshoot_beside_its_pole_pair_and_the_match_beside_its_range() {
    // The series RLC of ζ = 0.3: its one pole pair alone makes the step, so the overshoot
    // a lone pair of that damping would give, e^(−πζ/√(1 − ζ²)) = 37.2 % (Ogata, from
    // memory), is the exact one.
    let r = 0.6 * (1e-6f64 / 1e-9).sqrt();
    let text = format!(
        "tauweave: 1\ndesign: {{id: td, title: time domain, revision: A, date: 2026-12-05}}\n\
         signal: {{at: in, resistance: {r} Ω}}\noutput: {{at: out}}\nparts:\n\
         \x20 L1: {{kind: inductor, value: 1 µH, between: [in, out]}}\n\
         \x20 C1: {{kind: capacitor, value: 1 nF, between: [out, gnd], role: load}}\n\
         requirements:\n  input_return_loss: {{min: 10 dB}}\n\
         analysis: {{monte_carlo: {{runs: 0}}}}\n"
    );
    let review = reviewed(&text, 0);
    let words = review.explanation.ports.join("\n");
    assert!(
        words.contains("overshoots by **37.2 %**")
            && words.contains("damping ζ = 0.3,")
            && words.contains("would overshoot by 37.2 %"),
        "{words}"
    );
    // 10 dB in 50 Ω needs 26 … 96.2 Ω resistive (|Γ| = 10^(−1/2), by hand).
    // Matched at the spot, not across the band: the sentence is about the band's worst point.
    assert!(
        words.contains(": to reach the required 10 dB it would have to look like 26 Ω … 96.2 Ω, resistive there"),
        "{words}"
    );
    // A lossless two-port sits on μ = 1: not flagged.
    assert!(review.analysis.ports.as_ref().unwrap().conditionally_stable().is_empty(), "{words}");
}
