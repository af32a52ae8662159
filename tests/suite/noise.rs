//! Noise requirements against closed forms: a source resistance R_s loaded by a shunt
//! resistance R_p, both at T0 = 290 K, has noise factor F = 1 + R_s/R_p, an input-referred
//! density √(4kT0·R_s(1 + R_s/R_p)) and an output density √(4kT0·R_s∥R_p), white, so its rms
//! over a band is the density times √(bandwidth) (common practice: Johnson noise of the
//! Thévenin resistance; the noise factor's definition per IEEE Std 161, from memory). The
//! requirements read their limits in dB, V/√Hz and V, pass and fail on the right side, and
//! their sensitivities follow the closed form's derivative.

use tauweave::design;
use tauweave::review::{ReviewOptions, review};

/// Boltzmann's constant, J/K (SI 2019 exact value).
const K: f64 = 1.380_649e-23;
const T0: f64 = 290.0;
const RS: f64 = 1e3;
const RP: f64 = 4e3;
const BAND: (f64, f64) = (1e3, 101e3);

fn divider(requirements: &str) -> design::Design {
    divider_with(requirements, "")
}

/// The divider with more `signal` keys (`extra`, written with a leading comma).
fn divider_with(requirements: &str, extra: &str) -> design::Design {
    let text = format!(
        "tauweave: 1\ndesign: {{id: nz, title: noise divider, revision: A, date: 2026-12-04}}\n\
         environment: {{temperature: 290 K}}\n\
         signal: {{at: in, resistance: 1k, band: {{from: 1 kHz, to: 101 kHz}}{extra}}}\n\
         output: {{at: in}}\n\
         parts:\n\
         \x20 RP: {{kind: resistor, value: 4k, between: [in, gnd], tolerance: 5 %}}\n\
         \x20 CP: {{kind: capacitor, value: 1 fF, between: [in, gnd], role: parasitic}}\n\
         requirements:\n{requirements}\
         analysis: {{monte_carlo: {{runs: 0}}}}\n"
    );
    let l = design::load(&text);
    l.design.unwrap_or_else(|| panic!("{:?}", l.diagnostics))
}

fn close(got: f64, want: f64, rel: f64, what: &str) {
    assert!((got - want).abs() <= rel * want.abs(), "{what}: {got} vs {want}");
}

#[test]
fn noise_requirements_read_their_units_and_judge_the_closed_form() {
    let d = divider(
        "  noise_figure: {max: 1 dB}\n\
         \x20 input_noise_density: {max: 4 nV/√Hz}\n\
         \x20 output_noise: {max: 1.2 µV}\n",
    );
    assert_eq!(d.requirements.noise_figure.unwrap().max, Some(1.0));
    close(d.requirements.input_noise_density.unwrap().max.unwrap(), 4e-9, 1e-15, "limit");
    close(d.requirements.output_noise.unwrap().max.unwrap(), 1.2e-6, 1e-15, "limit");
    let r = review(&d, &ReviewOptions::quiet(&d, Some(0))).unwrap();
    let check = |name: &str| r.requirements.iter().find(|c| c.name == name).unwrap();
    // The 1 fF parasitic puts a pole near 200 GHz: its effect in the band is below 1e-12.
    let nf = 10.0 * (1.0 + RS / RP).log10();
    close(check("noise_figure").value.unwrap(), nf, 1e-6, "noise figure");
    let e_in = (4.0 * K * T0 * RS * (1.0 + RS / RP)).sqrt();
    close(check("input_noise_density").value.unwrap(), e_in, 1e-6, "input density");
    let parallel = RS * RP / (RS + RP);
    let rms = (4.0 * K * T0 * parallel * (BAND.1 - BAND.0)).sqrt();
    close(check("output_noise").value.unwrap(), rms, 1e-6, "output rms");
    // 0.969 dB < 1 dB; 4.55 nV/√Hz > 4 nV/√Hz; 1.13 µV < 1.2 µV.
    assert!(check("noise_figure").pass && check("output_noise").pass);
    assert!(!check("input_noise_density").pass);
    assert_eq!(check("noise_figure").unit, "dB");
    close(check("noise_figure").margin_db.unwrap(), 1.0 - nf, 1e-6, "margin in dB");
}

#[test]
fn noise_figures_join_the_tolerance_study_when_a_requirement_limits_them() {
    let d = divider("  noise_figure: {max: 1 dB}\n  output_noise: {max: 1.2 µV}\n");
    let r = review(&d, &ReviewOptions::quiet(&d, Some(0))).unwrap();
    let s = &r.study;
    assert!(s.figures.iter().any(|f| f == "noise_figure"));
    assert!(!s.figures.iter().any(|f| f == "input_noise_density"), "not limited, not followed");
    let lever = s.levers.iter().position(|l| l.lever.name == "RP").unwrap();
    // NF = 10·log10(1 + R_s/R_p): ∂ln NF/∂ln R_p = −(10/ln 10)·(R_s/R_p)/(1 + R_s/R_p)/NF.
    let x = RS / RP;
    let nf = 10.0 * (1.0 + x).log10();
    let want = -(10.0 / std::f64::consts::LN_10) * x / (1.0 + x) / nf;
    close(s.s(lever, "noise_figure").unwrap(), want, 1e-6, "S of NF to R_p");
    // rms ∝ √(R_s∥R_p): ∂ln/∂ln R_p = ½·R_s/(R_s + R_p).
    close(s.s(lever, "output_noise").unwrap(), 0.5 * RS / (RS + RP), 1e-6, "S of rms to R_p");
    // The worst case takes R_p at its low corner (−5 %) for the highest noise figure.
    let w = s.worst_case.iter().find(|w| w.figure == "noise_figure").unwrap();
    let high = 10.0 * (1.0 + RS / (0.95 * RP)).log10();
    close(w.high_corner.unwrap(), high, 1e-6, "high corner of NF");
    let check = r.requirements.iter().find(|c| c.name == "noise_figure").unwrap();
    // 1.012 dB at the corner: over the 1 dB limit.
    assert_eq!(check.corner_pass, Some(false));
}

#[test]
fn the_explanation_names_the_dominant_source_and_what_removing_it_would_give() {
    let d = divider("  noise_figure: {max: 1 dB}\n");
    let r = review(&d, &ReviewOptions::quiet(&d, Some(0))).unwrap();
    let text = r.explanation.noise.join("\n");
    // R_p's share of the output noise is (R_s/R_p)/(1 + R_s/R_p) = 20 %, all of what the
    // stage adds; without it only the source is left, F = 1.
    assert!(
        text.contains("RP's thermal noise: 20 % of the output noise, 100 % of what the stage adds"),
        "{text}"
    );
    assert!(text.contains("without it the noise figure would be 0 dB"), "{text}");
    // ∂NF/∂ln R_p = −(10/ln 10)·x/(1 + x) with x = R_s/R_p; a 10 % rise moves it by that
    // times ln 1.1: −0.083 dB, so raising R_p reduces the noise.
    let x = RS / RP;
    let moved = -(10.0 / std::f64::consts::LN_10) * x / (1.0 + x) * 1.1f64.ln();
    assert!((moved + 0.0828).abs() < 5e-4, "{moved}");
    assert!(text.contains("about −0.083 dB; raising it reduces the noise"), "{text}");
    // A shunt resistor's noise is a current at the input: the optimum source is below R_s.
    assert!(text.contains("current noise i_n dominates"), "{text}");
}

#[test]
fn the_signal_to_noise_ratio_is_the_signal_through_the_gain_over_the_output_noise() {
    // A sine of 10 µV rms (14.14 µV peak) through the divider's gain R_p/(R_s + R_p), over
    // the output rms √(4kT0(R_s∥R_p)Δf): 20·log10 of the ratio (common practice).
    for extra in [", amplitude: 14.142136 µV", ", amplitude_rms: 10 µV"] {
        let d = divider_with("  snr: {min: 20 dB}\n", extra);
        let r = review(&d, &ReviewOptions::quiet(&d, Some(0))).unwrap();
        let check = r.requirements.iter().find(|c| c.name == "snr").unwrap();
        let gain = RP / (RS + RP);
        let noise = (4.0 * K * T0 * RS * RP / (RS + RP) * (BAND.1 - BAND.0)).sqrt();
        let want = 20.0 * (10e-6 * gain / noise).log10();
        close(check.value.unwrap(), want, 1e-6, extra);
        // 16.95 dB: short of 20 dB.
        assert!(!check.pass, "{extra}");
        assert_eq!(check.unit, "dB");
    }
}

#[test]
fn an_snr_requirement_without_a_signal_amplitude_is_refused() {
    let text = "tauweave: 1\ndesign: {id: nz, title: t, revision: A, date: 2026-12-04}\n\
                signal: {at: in, resistance: 1k}\noutput: {at: in}\n\
                parts:\n  RP: {kind: resistor, value: 4k, between: [in, gnd]}\n\
                requirements:\n  snr: {min: 20 dB}\n";
    let d = design::load(text).diagnostics;
    assert!(d.iter().any(|x| x.message.contains("states no signal amplitude")), "{d:?}");
}
