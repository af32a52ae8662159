//! Property tests (proptest): on random passive RC networks whose zeros are real, the
//! open-circuit time-constant estimate never exceeds the exact upper cut-off (with real poles
//! and zeros, Π(1 + ω²τ_i²) ≤ 2 at ω = 1/Στ — derived, docs/methods.md, Estimates; a
//! bridged RC network can have complex zeros, a notch, and then the bound does not hold, so
//! those are set aside); on random resistor–transistor bias networks the operating point
//! balances KCL to below 1e-12 A at every node; on both, the adjoint sensitivities of every
//! figure to every lever agree with fourth-order central differences of whole evaluations to 1e-6
//! (Director & Rohrer's adjoint method against the definition of the derivative).

use proptest::prelude::*;

use tauweave::circuit::netlist::Netlist;
use tauweave::circuit::operating_point;
use tauweave::{analysis, design};

fn header(id: &str) -> String {
    format!(
        "tauweave: 1\ndesign: {{id: {id}, title: property case, revision: A, date: 2026-11-30}}\n"
    )
}

prop_compose! {
    fn rc_network()(n in 2usize..6, seed in any::<u64>())
        (resistors in proptest::collection::vec((0..n, 100.0f64..1e5), n..=n),
         extra in proptest::collection::vec((0..=n, 0..=n, 100.0f64..1e5), 0..3),
         caps in proptest::collection::vec((0..=n, 0..=n, 0.1f64..50.0), 1..6),
         out in 1..=n, rs in 10.0f64..1e4, n in Just(n), _s in Just(seed)) -> String {
        let node = |i: usize| if i == 0 { "gnd".to_string() } else { format!("n{i}") };
        let mut parts = String::new();
        for (i, (j, r)) in resistors.iter().enumerate() {
            // Node i+1 hangs on an earlier node: the resistors form a tree from gnd.
            let parent = j % (i + 1);
            parts.push_str(&format!("  R{i}: {{kind: resistor, value: {r:.6e}, between: [{}, {}]}}\n", node(i + 1), node(parent)));
        }
        for (k, (a, b, r)) in extra.iter().enumerate() {
            if a != b {
                parts.push_str(&format!("  RX{k}: {{kind: resistor, value: {r:.6e}, between: [{}, {}]}}\n", node(*a), node(*b)));
            }
        }
        for (k, (a, b, c)) in caps.iter().enumerate() {
            if a != b {
                parts.push_str(&format!("  C{k}: {{kind: capacitor, value: {c:.6} pF, between: [{}, {}], role: parasitic}}\n", node(*a), node(*b)));
            }
        }
        let _ = n;
        format!("{}signal: {{at: n1, resistance: {rs:.6e}}}\noutput: {{at: {}}}\nparts:\n{parts}", header("rc"), node(out))
    }
}

prop_compose! {
    fn bias_network()(vcc in 3.0f64..15.0, r1 in 2e3f64..200e3, r2 in 1e3f64..100e3,
                      rc in 100.0f64..10e3, re in 10.0f64..5e3, beta in 50.0f64..400.0,
                      is_exp in -16.0f64..-13.0, second in any::<bool>(), r3 in 1e3f64..50e3)
                     -> String {
        let mut parts = format!(
            "  R1: {{kind: resistor, value: {r1:.6e}, between: [vcc, b]}}\n\
             \x20 R2: {{kind: resistor, value: {r2:.6e}, between: [b, gnd]}}\n\
             \x20 RC: {{kind: resistor, value: {rc:.6e}, between: [vcc, c]}}\n\
             \x20 RE: {{kind: resistor, value: {re:.6e}, between: [e, gnd]}}\n\
             \x20 Q1: {{kind: bjt, model: N, c: c, b: b, e: e}}\n\
             \x20 RS: {{kind: resistor, value: 1k, between: [in, b]}}\n"
        );
        let mut out = "c";
        if second {
            // A pnp level shifter hanging on the first collector.
            parts.push_str(&format!(
                "  Q2: {{kind: bjt, model: P, c: c2, b: c, e: e2}}\n\
                 \x20 RE2: {{kind: resistor, value: {r3:.6e}, between: [vcc, e2]}}\n\
                 \x20 RC2: {{kind: resistor, value: {r3:.6e}, between: [c2, gnd]}}\n"
            ));
            out = "c2";
        }
        format!(
            "{}supplies: {{vcc: {vcc:.6} V}}\nsignal: {{at: in, resistance: 50}}\noutput: {{at: {out}}}\nparts:\n{parts}\
             models:\n  N: {{type: npn, beta: {beta:.4}, saturation_current: {:.6e} A, early_voltage: 60 V}}\n\
             \x20 P: {{type: pnp, beta: 80, saturation_current: 2e-15 A, early_voltage: 40 V}}\n",
            header("bias"),
            10f64.powf(is_exp)
        )
    }
}

proptest! {
    // A fixed seed: CI sees the same 256 cases every run (a failure reproduces exactly);
    // change the seed to explore further.
    #![proptest_config(ProptestConfig {
        cases: 256,
        rng_seed: proptest::test_runner::RngSeed::Fixed(20_261_201),
        ..ProptestConfig::default()
    })]

    #[test]
    fn time_constant_estimate_never_exceeds_the_exact_cutoff(text in rc_network()) {
        let loaded = design::load(&text);
        prop_assume!(loaded.design.is_some());
        let d = loaded.design.unwrap();
        let a = analysis::analyze(&d).expect("a passive RC network analyses");
        prop_assume!(a.midband.gain.abs() > 1e-9);
        prop_assume!(a.zeros.iter().all(|z| z.im_hz == 0.0));
        if let (Some(est), Some(exact)) = (a.high.octc.f_estimate_hz, a.high.f3db_hz) {
            prop_assert!(est <= exact * (1.0 + 1e-9), "estimate {} above exact {}\n{}", est, exact, text);
        }
    }

    #[test]
    fn adjoint_sensitivities_match_differences_on_rc_networks(text in rc_network()) {
        let loaded = design::load(&text);
        prop_assume!(loaded.design.is_some());
        let d = loaded.design.unwrap();
        prop_assume!(analysis::metrics(&d).is_ok());
        let gaps = adjoint_gaps(&d);
        prop_assert!(!gaps.is_empty(), "nothing to compare\n{}", text);
        for (what, a, b) in gaps {
            prop_assert!((a - b).abs() <= 1e-6 * b.abs().max(1.0), "{}: adjoint {} vs differences {}\n{}", what, a, b, text);
        }
    }

    #[test]
    fn adjoint_sensitivities_match_differences_on_bias_networks(text in bias_network()) {
        let d = design::load(&text).design.unwrap();
        prop_assume!(analysis::metrics(&d).is_ok());
        let gaps = adjoint_gaps(&d);
        prop_assert!(!gaps.is_empty(), "nothing to compare\n{}", text);
        for (what, a, b) in gaps {
            prop_assert!((a - b).abs() <= 1e-6 * b.abs().max(1.0), "{}: adjoint {} vs differences {}\n{}", what, a, b, text);
        }
    }

    #[test]
    fn operating_point_balances_kcl(text in bias_network()) {
        let loaded = design::load(&text);
        let d = loaded.design.unwrap_or_else(|| panic!("{:?}\n{text}", loaded.diagnostics));
        let net = Netlist::from_design(&d);
        let op = operating_point::solve(&net).expect("the bias converges");
        prop_assert!(op.kcl_residual_a < 1e-12, "KCL residual {} A\n{}", op.kcl_residual_a, text);
    }
}

/// Every lever and figure of `d` with both sensitivities: (lever and figure, adjoint,
/// fourth-order differences of whole evaluations).
fn adjoint_gaps(d: &design::Design) -> Vec<(String, f64, f64)> {
    use analysis::tolerance::{
        figures, levers, sensitivities, sensitivities_by_precise_differences,
    };
    let Ok(nominal) = analysis::metrics(d) else { return Vec::new() };
    let (all, figs) = (levers(d), figures(&nominal));
    let (adjoint, reference) =
        (sensitivities(d, &all, &figs), sensitivities_by_precise_differences(d, &all, &figs));
    let mut out = Vec::new();
    for (i, lever) in all.iter().enumerate() {
        for (j, f) in figs.iter().enumerate() {
            // A sensitivity above 20 marks a stage at the edge of its bias (a transistor all
            // but cut off or saturated): there the reference's own truncation error, of order
            // (S·h)⁴ with its step h = 5e-4, nears 1e-6, so such levers are set aside.
            if let (Some(a), Some(b)) = (adjoint[i][j], reference[i][j]) {
                if b.abs() <= 20.0 {
                    out.push((format!("{} {:?}", lever.name, f), a, b));
                }
            }
        }
    }
    out
}
