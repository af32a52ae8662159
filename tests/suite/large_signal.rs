//! Signal handling against the classic large-signal results: the exponential law driven by a
//! sinusoid (harmonics as modified Bessel functions, scipy.special.iv the outside reference),
//! emitter degeneration, the MOSFET square law, swing limits and the compression point of a
//! resistor-loaded stage written out by hand, and the quasi-static transfer's slope against
//! the small-signal mid-band gain.

use tauweave::analysis::large_signal::LargeSignalReport;
use tauweave::design;
use tauweave::review::{ReviewOptions, review};

use crate::support::python;

/// Boltzmann's constant over the elementary charge, V/K (SI 2019 exact values).
const K_OVER_Q: f64 = 1.380649e-23 / 1.602176634e-19;
/// The thermal voltage at the 300 K the bipolar designs here state, V.
fn vt() -> f64 {
    K_OVER_Q * 300.0
}

fn load(text: &str) -> design::Design {
    let l = design::load(text);
    l.design.unwrap_or_else(|| panic!("{:?}", l.diagnostics))
}

fn large_signal(d: &design::Design) -> LargeSignalReport {
    let r = review(d, &ReviewOptions::quiet(d, Some(0))).unwrap();
    r.analysis.large_signal.clone().expect("a stage with a transistor has a large-signal review")
}

fn close(got: f64, want: f64, rel: f64, what: &str) {
    assert!((got - want).abs() <= rel * want.abs(), "{what}: {got} vs {want} (rel {rel})");
}

fn ratio(db: Option<f64>) -> f64 {
    10f64.powf(db.expect("a harmonic above the resolution") / 20.0)
}

/// A bipolar transistor whose base–emitter voltage is the source EMF on a fixed bias `vb`:
/// the source (1 mΩ, β = 10⁶ so the base current drops nothing) floats between the base and
/// the bias supply; the collector feeds 1 kΩ from 10 V; `re` in the emitter (0: none); no
/// Early effect, no base resistance; I_S stated at the 300 K the design runs at. A 1 MΩ across the source gives the bias node a part
/// (it loads the 1 mΩ source by 1e-9).
fn exponential_stage(vb: f64, re: f64, amplitude: f64) -> design::Design {
    let emitter = if re > 0.0 {
        format!("  RE: {{kind: resistor, value: {re} Ω, between: [e, gnd]}}\n")
    } else {
        String::new()
    };
    let e = if re > 0.0 { "e" } else { "gnd" };
    load(&format!(
        "tauweave: 1\ndesign: {{id: exp, title: exponential law, revision: A, date: 2026-12-04}}\n\
         environment: {{temperature: 300 K}}\n\
         supplies: {{vcc: 10 V, vb: {vb} V}}\n\
         signal: {{at: [b, vb], resistance: 1 mΩ, amplitude: {amplitude} V}}\noutput: {{at: c}}\n\
         parts:\n\
         \x20 RC: {{kind: resistor, value: 1k, between: [vcc, c]}}\n{emitter}\
         \x20 RB: {{kind: resistor, value: 1M, between: [vb, b]}}\n\
         \x20 Q1: {{kind: bjt, model: N, c: c, b: b, e: {e}}}\n\
         models:\n  N: {{type: npn, beta: 1e6, saturation_current: 1 fA, reference_temperature: 300 K}}\n\
         analysis: {{monte_carlo: {{runs: 0}}}}\n"
    ))
}

/// The bias for I_C ≈ 1 mA with I_S = 1 fA: V_T·ln(I_C/I_S).
fn vbe_for_1ma() -> f64 {
    vt() * (1e-3f64 / 1e-15).ln()
}

#[test]
fn the_exponential_law_gives_bessel_function_harmonics() {
    // i_C = I_S·exp((V_B + v̂cos θ)/V_T): its n-th harmonic is 2·I_n(x)·I_C0 with x = v̂/V_T
    // (the generating function of the modified Bessel functions; Gray & Meyer, distortion
    // section, from memory), so HD2 = I₂(x)/I₁(x) and HD3 = I₃(x)/I₁(x); the reference values
    // from scipy.special.iv.
    let xs = [0.04, 0.1, 0.3, 0.6, 1.0];
    let script = format!(
        "from scipy.special import iv\nfor x in {xs:?}:\n    print(iv(2, x) / iv(1, x), iv(3, x) / iv(1, x))"
    );
    let out = python(&["-c", &script]);
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let text = String::from_utf8(out.stdout).unwrap();
    let want: Vec<(f64, f64)> = text
        .lines()
        .map(|l| {
            let mut it = l.split_whitespace().map(|v| v.parse::<f64>().unwrap());
            (it.next().unwrap(), it.next().unwrap())
        })
        .collect();
    assert_eq!(want.len(), xs.len());
    for (&x, &(hd2, hd3)) in xs.iter().zip(&want) {
        let d = exponential_stage(vbe_for_1ma(), 0.0, x * vt());
        let l = large_signal(&d);
        let dist = l.distortion.as_ref().unwrap();
        close(ratio(dist.hd2_db), hd2, 1e-4, &format!("HD2 at x = {x}"));
        close(ratio(dist.hd3_db), hd3, 1e-4, &format!("HD3 at x = {x}"));
        if x == 0.04 {
            // The small-signal limits HD2 ≈ x/4, HD3 ≈ x²/24 (Gray & Meyer), to their own
            // accuracy: the next terms are x²/96 and x³/384 relative.
            close(ratio(dist.hd2_db), x / 4.0, 0.01, "HD2 ≈ x/4");
            close(ratio(dist.hd3_db), x * x / 24.0, 0.01, "HD3 ≈ x²/24");
        }
    }
}

#[test]
fn the_exponential_law_intercepts_at_two_root_two_thermal_voltages() {
    // exp(v/V_T) has a₁ = 1/V_T and a₃ = 1/(6V_T³) relative to I_C0, so the extrapolated
    // IIP3 = √(4/3·a₁/a₃) = 2√2·V_T (Razavi, RF Microelectronics, ch. 2, from memory).
    let l = large_signal(&exponential_stage(vbe_for_1ma(), 0.0, 1e-3));
    close(l.iip3_v.unwrap(), 2.0 * 2f64.sqrt() * vt(), 1e-5, "IIP3");
    // The power series' HD estimates beside the exact ones at x = 1e-3/V_T (≈ 0.039).
    let x = 1e-3 / vt();
    let s = l.series.unwrap();
    close(s.hd2(1e-3), x / 4.0, 1e-5, "series HD2 = x/4");
    close(s.hd3(1e-3), x * x / 24.0, 1e-4, "series HD3 = x²/24");
}

#[test]
fn emitter_degeneration_divides_hd2_by_the_loop_gain() {
    // v = V_T·ln(1 + u) + R_E·I_C0·u (u = i_c/I_C0, β → ∞) inverts to
    // u = w/(1+T) + w²/(2(1+T)³) + …, w = v/V_T, T = g_m·R_E: HD2 ≈ ŵ/(4(1+T)²) at the same
    // input, and at the same fundamental output (input × (1+T)) HD2 falls by (1+T)
    // (Gray & Meyer, feedback and distortion, from memory).
    let re = 100.0;
    // The bias for I_C0 = 1 mA through R_E, by hand: V_B = V_T·ln(I_C0/I_S) + I_C0·R_E.
    let vb = vbe_for_1ma() + 1e-3 * re;
    let t = 1e-3 / vt() * re;
    let w = 0.01;
    let plain = large_signal(&exponential_stage(vbe_for_1ma(), 0.0, w * vt()));
    let degenerated = large_signal(&exponential_stage(vb, re, w * vt() * (1.0 + t)));
    let same_input = large_signal(&exponential_stage(vb, re, w * vt()));
    // At w = 0.01 the next terms are 1e-4 of HD2 and of the ratio.
    let hd2 = |l: &LargeSignalReport| ratio(l.distortion.as_ref().unwrap().hd2_db);
    close(hd2(&same_input), w / (4.0 * (1.0 + t).powi(2)), 1e-4, "HD2 at the same input");
    close(hd2(&plain) / hd2(&degenerated), 1.0 + t, 1e-3, "HD2 reduction at the same output");
}

/// A common-source MOSFET, gate on a 2 V bias behind the floating source: k′W/L = 4 mA/V²,
/// V_th = 1 V (V_ov = 1 V, I_D0 = 2 mA), λ = 0, R_D = 2 kΩ from 10 V (V_D0 = 6 V); 1 MΩ
/// across the 1 mΩ source.
fn square_law_stage(amplitude: f64) -> design::Design {
    load(&square_law_text(amplitude))
}

fn square_law_text(amplitude: f64) -> String {
    format!(
        "tauweave: 1\ndesign: {{id: sq, title: square law, revision: A, date: 2026-12-04}}\n\
         supplies: {{vdd: 10 V, vg: 2 V}}\n\
         signal: {{at: [g, vg], resistance: 1 mΩ, amplitude: {amplitude} V}}\noutput: {{at: d}}\n\
         parts:\n\
         \x20 RD: {{kind: resistor, value: 2k, between: [vdd, d]}}\n\
         \x20 RG: {{kind: resistor, value: 1M, between: [vg, g]}}\n\
         \x20 CL: {{kind: capacitor, value: 10 pF, between: [d, gnd], role: load}}\n\
         \x20 M1: {{kind: mosfet, model: N, d: d, g: g, s: gnd}}\n\
         models:\n  N: {{type: nmos, threshold: 1 V, process_transconductance: 200 µA/V², \
         width: 20 µm, length: 1 µm}}\n\
         analysis: {{monte_carlo: {{runs: 0}}}}\n"
    )
}

#[test]
fn the_square_law_stage_has_hd2_of_amplitude_over_four_overdrives_and_no_hd3() {
    // i_D = ½k(V_ov + v̂cos θ)²: fundamental k·V_ov·v̂, second harmonic ¼k·v̂², none above, so
    // HD2 = v̂/(4V_ov) exactly while the device stays in saturation (Razavi, Design of Analog
    // CMOS Integrated Circuits, ch. 14, from memory).
    for amplitude in [0.01, 0.1, 0.3] {
        let l = large_signal(&square_law_stage(amplitude));
        let d = l.distortion.as_ref().unwrap();
        close(ratio(d.hd2_db), amplitude / 4.0, 1e-6, &format!("HD2 at {amplitude} V"));
        assert!(d.hd3_db.is_none_or(|db| db < -180.0), "no third harmonic: {:?}", d.hd3_db);
    }
}

/// The square-law stage's output change at EMF `v`, by hand: cut-off below −V_ov (the drain
/// at 10 V), saturation while V_D ≥ V_GS − V_th, triode below that (V_D from the triode law
/// 10 − R_D·k·(V_ov·V_D − ½V_D²) = V_D).
fn square_law_by_hand(v: f64) -> f64 {
    let (k, rd, vdd) = (4e-3, 2e3, 10.0);
    let vov = 1.0 + v;
    if vov <= 0.0 {
        return vdd - 6.0;
    }
    let vd = vdd - rd * 0.5 * k * vov * vov;
    if vd >= vov {
        return vd - 6.0;
    }
    // R_D·k/2·V_D² − (1 + R_D·k·V_ov)·V_D + 10 = 0, the smaller root.
    let (a, b) = (rd * k / 2.0, -(1.0 + rd * k * vov));
    let vd = (-b - (b * b - 4.0 * a * vdd).sqrt()) / (2.0 * a);
    vd - 6.0
}

#[test]
fn swing_limits_of_the_resistor_loaded_stage_match_the_hand_calculation() {
    let l = large_signal(&square_law_stage(0.1));
    let s = &l.output_swing;
    // Rising: the drain reaches 10 V when the EMF takes V_GS to V_th (−1 V); 4 V of swing.
    let up = s.positive_limit.as_ref().unwrap();
    assert_eq!((up.part.as_str(), up.node.as_str()), ("M1", "d"));
    assert_eq!(format!("{:?}", up.edge), "CutOff");
    close(up.input_v, -1.0, 1e-6, "cut-off EMF");
    close(s.positive_v.unwrap(), 4.0, 1e-6, "rising swing");
    // Falling: the triode edge V_D = V_ov + v with V_D = 10 − 4·(1 + v)²: 4u² + u − 10 = 0
    // for u = 1 + v.
    let u = (-1.0 + (1.0f64 + 160.0).sqrt()) / 8.0;
    let down = s.negative_limit.as_ref().unwrap();
    assert_eq!(format!("{:?}", down.edge), "Triode");
    close(down.input_v, u - 1.0, 1e-6, "triode-edge EMF");
    close(s.negative_v.unwrap(), 6.0 - u, 1e-6, "falling swing");
    close(l.clipping_input_v.unwrap(), u - 1.0, 1e-6, "clipping input: the nearer edge");
    // The curve drawn follows the hand-written transfer everywhere, both edges included:
    // 30 points a side and the bias, out to 1.5 × the farther limit (−1 V).
    assert_eq!(l.curve.len(), 61);
    assert!((l.curve[0][0] + 1.5).abs() < 1e-6 && (l.curve[60][0] - 1.5).abs() < 1e-6);
    for p in &l.curve {
        let want = square_law_by_hand(p[0]);
        assert!(
            (p[1] - want).abs() <= 1e-6 * (1.0 + want.abs()),
            "at {} V: {} vs {want}",
            p[0],
            p[1]
        );
    }
}

#[test]
fn the_compression_point_matches_the_hand_written_transfer() {
    // The fundamental of the hand-written transfer by the trapezoid rule over one period
    // (20 000 points: the kinks at the edges cost 1e-8), its gain against the small-signal
    // k·V_ov·R_D = 8, and the amplitude where it is 1 dB down by bisection.
    let fundamental_gain = |a: f64| {
        let n = 20_000;
        let sum: f64 = (0..n)
            .map(|i| {
                let th = 2.0 * std::f64::consts::PI * i as f64 / n as f64;
                square_law_by_hand(a * th.cos()) * th.cos()
            })
            .sum();
        (2.0 * sum / n as f64).abs() / (a * 8.0)
    };
    let target = 10f64.powf(-1.0 / 20.0);
    let (mut lo, mut hi) = (0.3, 3.0);
    assert!(fundamental_gain(lo) > target && fundamental_gain(hi) < target);
    for _ in 0..60 {
        let mid = 0.5 * (lo + hi);
        if fundamental_gain(mid) > target { lo = mid } else { hi = mid }
    }
    let l = large_signal(&square_law_stage(0.1));
    close(l.compression_1db_input_v.unwrap(), lo, 2e-3, "1 dB compression EMF");
}

#[test]
fn the_quasi_static_slope_at_zero_is_the_small_signal_gain_on_every_example() {
    for name in ["rx-preamp-ce", "post-amp-cs", "if-cascode", "follower-cap-load"] {
        let text =
            std::fs::read_to_string(crate::support::root().join(format!("designs/{name}.yaml")))
                .unwrap();
        let d = load(&text);
        let r = review(&d, &ReviewOptions::quiet(&d, Some(0))).unwrap();
        let l = r.analysis.large_signal.as_ref().unwrap();
        // The series' a₁ is the slope of a fit through solves of the nonlinear circuit; the
        // mid-band gain comes from the linearised network's nodal analysis.
        close(l.series.unwrap().a1, r.analysis.midband.gain, 1e-6, &format!("{name}: slope"));
        // And a tiny amplitude's fundamental, from the distortion machinery, is the same gain.
        let tiny = l.clipping_input_v.unwrap() * 1e-4;
        let mut small = d.clone();
        small.signal.amplitude_v = Some(tiny);
        let rs = review(&small, &ReviewOptions::quiet(&small, Some(0))).unwrap();
        let f = rs.analysis.large_signal.unwrap().distortion.unwrap().fundamental_v;
        close(f / tiny, r.analysis.midband.gain.abs(), 1e-6, &format!("{name}: tiny fundamental"));
    }
}

#[test]
fn signal_handling_requirements_pass_fail_and_follow_the_square_law_through_the_study() {
    // The square-law stage with V_th toleranced: the swing is the rising side's R_D·I_D =
    // 4 V (the falling side has 6 − u ≈ 4.54 V), so ∂ln swing/∂ln R_D = 1 and ∂ln/∂ln V_th =
    // −2·V_th/V_ov = −2; THD = HD2 = v̂/(4·V_ov) = 2.5 % at 0.1 V, so ∂ln THD/∂ln V_th =
    // V_th/V_ov = 1 and R_D moves nothing (common practice: the square law in saturation).
    let text = "tauweave: 1\ndesign: {id: sq, title: square law, revision: A, date: 2026-12-04}\n\
         supplies: {vdd: 10 V, vg: 2 V}\n\
         signal: {at: [g, vg], resistance: 1 mΩ, amplitude: 0.1 V}\noutput: {at: d}\n\
         parts:\n\
         \x20 RD: {kind: resistor, value: 2k, between: [vdd, d], tolerance: 5 %}\n\
         \x20 RG: {kind: resistor, value: 1M, between: [vg, g]}\n\
         \x20 M1: {kind: mosfet, model: N, d: d, g: g, s: gnd}\n\
         models:\n  N: {type: nmos, threshold: {value: 1 V, tolerance: 0.05 V}, \
         process_transconductance: 200 µA/V², width: 20 µm, length: 1 µm}\n\
         requirements:\n  output_swing: {min: 3 V}\n  thd: {max: -40 dB}\n\
         \x20 input_compression: {min: 0.5 V}\n\
         analysis: {monte_carlo: {runs: 0}}\n";
    let d = load(text);
    let r = review(&d, &ReviewOptions::quiet(&d, Some(0))).unwrap();
    let check = |n: &str| r.requirements.iter().find(|c| c.name == n).unwrap().clone();
    let swing = check("output_swing");
    close(swing.value.unwrap(), 4.0, 1e-6, "swing requirement value");
    assert!(swing.pass);
    let thd = check("thd");
    assert_eq!(thd.unit, "%");
    close(thd.max.unwrap(), 1.0, 1e-12, "−40 dB read as 1 %");
    close(thd.value.unwrap(), 2.5, 1e-6, "THD value");
    assert!(!thd.pass, "2.5 % is over 1 %");
    assert!(check("input_compression").pass, "the 1 dB point is near 0.66 V");
    let s = &r.study;
    let lever = |n: &str| s.levers.iter().position(|l| l.lever.name == n).unwrap();
    close(s.s(lever("RD"), "output_swing").unwrap(), 1.0, 1e-5, "S(swing, R_D)");
    close(s.s(lever("N.threshold"), "output_swing").unwrap(), -2.0, 1e-5, "S(swing, V_th)");
    close(s.s(lever("N.threshold"), "thd").unwrap(), 1.0, 1e-5, "S(THD, V_th)");
    assert!(s.s(lever("RD"), "thd").unwrap().abs() < 1e-6);
    // The worst corner of the THD: V_th at 1.05 V, V_ov = 0.95 V, 0.1/(4·0.95).
    let w = s.worst_case.iter().find(|w| w.figure == "thd").unwrap();
    close(w.high_corner.unwrap(), 100.0 * 0.1 / (4.0 * 0.95), 1e-6, "THD high corner");
}

#[test]
fn a_stated_frequency_is_judged_against_the_cut_offs() {
    // The square-law stage's only pole is R_D·C_L: f_H = 1/(2π·2 kΩ·10 pF) ≈ 7.96 MHz (common
    // practice: a single RC); the quasi-static view holds a decade below it.
    let with = |f: &str| {
        let text = square_law_text(0.1)
            .replace("amplitude: 0.1 V}", &format!("amplitude: 0.1 V, frequency: {f}}}"));
        large_signal(&load(&text))
    };
    let inside = with("100 kHz");
    assert_eq!(inside.frequency_hz, 100e3);
    assert!(inside.well_inside_band);
    let near = with("2 MHz");
    assert!(!near.well_inside_band, "2 MHz is within a decade of 7.96 MHz");
}

#[test]
fn transistors_outside_their_normal_region_at_the_bias_are_named_not_watched() {
    // A bipolar transistor whose base takes 10 kΩ from the 10 V rail and whose collector has
    // 10 kΩ: I_B ≈ 0.93 mA would want I_C = 93 mA, far more than the 1 mA the collector
    // resistor passes, so it sits saturated (common practice: β·I_B > I_C,max). A MOSFET with
    // V_th = 0 and its gate on its source sits exactly on its cut-off edge. Neither is
    // watched; the saturated stage has no swing limits (so no symmetric swing), the second
    // keeps Q1's, and neither review hangs on the zero margin.
    let saturated = load(
        "tauweave: 1\ndesign: {id: sat, title: saturated, revision: A, date: 2026-12-04}\n\
         supplies: {vcc: 10 V}\nsignal: {at: in, resistance: 50, amplitude: 10 mV}\n\
         output: {at: c}\nparts:\n\
         \x20 C1: {kind: capacitor, value: 1u, between: [in, b], role: coupling}\n\
         \x20 RB: {kind: resistor, value: 10k, between: [vcc, b]}\n\
         \x20 RC: {kind: resistor, value: 10k, between: [vcc, c]}\n\
         \x20 Q1: {kind: bjt, model: N, c: c, b: b, e: gnd}\n\
         models:\n  N: {type: npn, beta: 100, saturation_current: 1 fA}\n\
         requirements:\n  output_swing: {min: 1 V}\nanalysis: {monte_carlo: {runs: 0}}\n",
    );
    let r = review(&saturated, &ReviewOptions::quiet(&saturated, Some(0))).unwrap();
    let l = r.analysis.large_signal.as_ref().unwrap();
    assert_eq!(l.unwatched, vec!["Q1".to_string()]);
    assert!(l.output_swing.positive_limit.is_none() && l.output_swing.negative_limit.is_none());
    let swing = r.requirements.iter().find(|c| c.name == "output_swing").unwrap();
    assert!(swing.value.is_none() && !swing.pass, "no swing is computed, and that fails");

    let edge = load(
        "tauweave: 1\ndesign: {id: edge, title: zero margin, revision: A, date: 2026-12-04}\n\
         environment: {temperature: 300 K}\nsupplies: {vcc: 12 V}\n\
         signal: {at: in, resistance: 50, amplitude: 10 mV}\noutput: {at: c}\nparts:\n\
         \x20 C1: {kind: capacitor, value: 1u, between: [in, b], role: coupling}\n\
         \x20 RB1: {kind: resistor, value: 18k, between: [vcc, b]}\n\
         \x20 RB2: {kind: resistor, value: 4k7, between: [b, gnd]}\n\
         \x20 RE: {kind: resistor, value: 470, between: [e, gnd]}\n\
         \x20 RC: {kind: resistor, value: 2k2, between: [vcc, c]}\n\
         \x20 Q1: {kind: bjt, model: N, c: c, b: b, e: e}\n\
         \x20 M2: {kind: mosfet, model: Z, d: vcc, g: gnd, s: gnd}\n\
         models:\n  N: {type: npn, beta: 100, saturation_current: 1 fA}\n\
         \x20 Z: {type: nmos, threshold: 0 V, threshold_drift: 0 V/K, reference_temperature: \
         300 K, process_transconductance: 50 µA/V², width: 10 µm, length: 1 µm}\n\
         analysis: {monte_carlo: {runs: 0}}\n",
    );
    let l = large_signal(&edge);
    assert_eq!(l.unwatched, vec!["M2".to_string()]);
    let limits = [&l.output_swing.positive_limit, &l.output_swing.negative_limit];
    assert!(limits.iter().all(|x| x.as_ref().is_some_and(|x| x.part == "Q1")));
    assert!(l.compression_1db_input_v.is_some_and(|c| c.is_finite() && c > 0.0));
}
