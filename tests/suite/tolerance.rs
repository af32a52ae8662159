//! Sensitivities and Monte Carlo against outside values: a single-pole cut-off's
//! sensitivity to R and C is −1 each (common practice); the frequency-scaling and
//! impedance-scaling identities (docs/methods.md, Sensitivity) hold on every example; Monte
//! Carlo of an RC low-pass reproduces the analytic mean and spread within the sampling error;
//! and runs are bit-identical on one thread and two.

use tauweave::analysis::metrics;
use tauweave::analysis::tolerance::{self, LeverClass, Study};
use tauweave::design;

use crate::support::{files, root};

fn load(text: &str) -> design::Design {
    let l = design::load(text);
    l.design.unwrap_or_else(|| panic!("{:?}", l.diagnostics))
}

fn study_of(d: &design::Design, runs: u32) -> Study {
    let m = metrics(d).unwrap();
    let names: Vec<String> = (0..m.bias.len()).map(|i| format!("dev{i}")).collect();
    tolerance::study(d, &m, &names, runs, &|_| {})
}

fn rc(r_tol: &str, c_tol: &str, runs: u32) -> String {
    format!(
        "tauweave: 1\ndesign: {{id: rc, title: RC low-pass, revision: A, date: 2026-11-30}}\n\
         signal: {{at: a, resistance: 1}}\noutput: {{at: b}}\n\
         analysis: {{monte_carlo: {{runs: {runs}, seed: 11}}, sweep: {{start: 1 kHz, stop: 1 GHz}}}}\nparts:\n\
         \x20 R1: {{kind: resistor, value: 10k, between: [a, b], {r_tol}}}\n\
         \x20 C1: {{kind: capacitor, value: 1 nF, between: [b, gnd], role: parasitic, {c_tol}}}\n"
    )
}

#[test]
fn single_pole_sensitivities_are_minus_one() {
    // f = 1/(2π(R + R_s)C): S_R = −R/(R + R_s), S_C = −1 (common practice).
    let d = load(&rc("tolerance: 1 %", "tolerance: 5 %", 0));
    let s = study_of(&d, 0);
    let lever = |n: &str| s.levers.iter().position(|l| l.lever.name == n).unwrap();
    let sc = s.s(lever("C1"), "upper_cutoff").unwrap();
    let sr = s.s(lever("R1"), "upper_cutoff").unwrap();
    let srs = s.s(lever("signal.resistance"), "upper_cutoff").unwrap();
    assert!((sc + 1.0).abs() < 1e-6, "S_C = {sc}");
    assert!((sr + 1e4 / (1e4 + 1.0)).abs() < 1e-6, "S_R = {sr}");
    assert!((sr + srs + 1.0).abs() < 1e-6, "S_R + S_Rs = {}", sr + srs);
}

#[test]
fn scaling_identities_hold_on_every_example() {
    // Frequency scaling (derived; docs/methods.md, Sensitivity): Σ over every capacitance
    // (and inductance, which scales with it) of S^f = −1 for any cut-off (a transition
    // frequency scales as 1/C and counts with the opposite sign).
    // Impedance scaling, for linear networks: Σ S_R + Σ S_L − Σ S_C − Σ S_gm = 0.
    let mut designs = files(&root().join("designs"), "yaml");
    designs.extend(files(&root().join("tests/reference/designs"), "yaml"));
    for path in designs {
        let name = path.file_name().unwrap().to_string_lossy().to_string();
        let d = load(&std::fs::read_to_string(&path).unwrap());
        let s = study_of(&d, 0);
        let linear = d.models.is_empty();
        for fig in ["upper_cutoff", "lower_cutoff"] {
            if !s.figures.iter().any(|f| f == fig) {
                continue;
            }
            let sum = |class: LeverClass| -> f64 {
                s.levers
                    .iter()
                    .enumerate()
                    .filter(|(_, l)| l.lever.class == class)
                    .filter_map(|(i, _)| s.s(i, fig))
                    .sum()
            };
            let c = sum(LeverClass::Capacitance) + sum(LeverClass::Inductance)
                - sum(LeverClass::InverseCapacitance);
            assert!((c + 1.0).abs() < 2e-5, "{name} {fig}: Σ S_C = {c}");
            if linear {
                let z = sum(LeverClass::Resistance) + sum(LeverClass::Inductance)
                    - sum(LeverClass::Capacitance)
                    - sum(LeverClass::Transconductance);
                assert!(z.abs() < 2e-5, "{name} {fig}: impedance scaling sum {z}");
            }
        }
        if linear {
            let g = |class: LeverClass| -> f64 {
                s.levers
                    .iter()
                    .enumerate()
                    .filter(|(_, l)| l.lever.class == class)
                    .filter_map(|(i, _)| s.s(i, "midband_gain"))
                    .sum()
            };
            // Capacitors move the gain only when it is the exact gain at a stated band's
            // centre; the idealised gain has S_C = 0, so one identity covers both.
            let z = g(LeverClass::Resistance) + g(LeverClass::Inductance)
                - g(LeverClass::Capacitance)
                - g(LeverClass::Transconductance);
            assert!(z.abs() < 2e-5, "{name} gain: impedance scaling sum {z}");
        }
    }
}

/// E[x^−k] for k = 0…4 of a factor x with tolerance `t`: uniform on [1 − t, 1 + t], the
/// integrals of x^−k, ((1 − t)^(1−k) − (1 + t)^(1−k))/((k − 1)·2t) and ln((1 + t)/(1 − t))/(2t)
/// for k = 1; gaussian with σ = t/3, the Taylor moments of a normal variable,
/// E[(1 + e)^−k] = Σ_m C(k + 2m − 1, 2m)·(2m − 1)!!·σ^2m, to m = 4 (the next term is below
/// 1e-9 for σ ≤ 0.034, k ≤ 4).
fn inverse_moments(dist: &str, t: f64) -> [f64; 5] {
    let mut m = [1.0; 5];
    for (k, slot) in m.iter_mut().enumerate().skip(1) {
        *slot = if dist == "uniform" {
            if k == 1 {
                ((1.0 + t) / (1.0 - t)).ln() / (2.0 * t)
            } else {
                let e = 1 - k as i32;
                ((1.0 - t).powi(e) - (1.0 + t).powi(e)) / ((k as f64 - 1.0) * 2.0 * t)
            }
        } else {
            let s2 = (t / 3.0).powi(2);
            let choose =
                |n: u64, r: u64| (0..r).fold(1.0, |a, i| a * (n - i) as f64 / (i + 1) as f64);
            let double_factorial = [1.0, 1.0, 3.0, 15.0, 105.0];
            (0..=4u64)
                .map(|j| {
                    choose(k as u64 + 2 * j - 1, 2 * j)
                        * double_factorial[j as usize]
                        * s2.powi(j as i32)
                })
                .sum()
        };
    }
    m
}

#[test]
fn monte_carlo_reproduces_the_analytic_spread_of_an_rc_cutoff() {
    // f = f0/(x·y) with f0 = 1/(2π R C) (the 1 Ω source is counted in f0 exactly) and x, y
    // the independent factors of R and C, so E[f^k] = f0^k·E[x^−k]·E[y^−k]: the mean, the
    // variance σ² and the fourth central moment μ4 follow from the raw moments.
    let runs = 4000;
    let f0 = 1.0 / (2.0 * std::f64::consts::PI * (1e4 + 1.0) * 1e-9);
    for (dist, t) in [("uniform", 0.10f64), ("gaussian", 0.10f64)] {
        let d = load(&rc(
            &format!("tolerance: 10 %, distribution: {dist}"),
            &format!("tolerance: 10 %, distribution: {dist}"),
            runs,
        ));
        let s = study_of(&d, runs);
        let mc = s.monte_carlo.as_ref().unwrap();
        assert!(mc.failed_runs.is_empty());
        let spread = mc.spreads.iter().find(|x| x.figure == "upper_cutoff").unwrap();
        // The source resistance is exact and 1e-4 of R: fold it into the R factor's moments.
        let m = inverse_moments(dist, t);
        // Raw moments of f/f0 (R and C carry the same tolerance and distribution).
        let raw: Vec<f64> = m.iter().map(|x| x * x).collect();
        let mean = raw[1];
        let var = raw[2] - mean * mean;
        let mu4 = raw[4] - 4.0 * raw[3] * mean + 6.0 * raw[2] * mean * mean - 3.0 * mean.powi(4);
        let (mean, sd) = (f0 * mean, f0 * var.sqrt());
        let n = runs as f64;
        // Within four standard errors: of the mean, σ/√n; of the sample standard deviation,
        // √((μ4 − σ⁴)/n)/(2σ) — Var(s²) ≈ (μ4 − σ⁴)/n and s = √(s²) by the delta method
        // (common practice). This is σ/√(2n) for a normal figure; the spread of f is not
        // normal (nearly triangular in ln f for the uniform parts), so μ4 is taken exactly.
        let se_sd = f0 * ((mu4 - var * var) / n).sqrt() / (2.0 * var.sqrt());
        assert!(
            (spread.mean - mean).abs() < 4.0 * sd / n.sqrt(),
            "{dist}: mean {} vs {mean}",
            spread.mean
        );
        assert!(
            (spread.std_dev - sd).abs() < 4.0 * se_sd,
            "{dist}: sd {} vs {sd} (standard error {se_sd})",
            spread.std_dev
        );
    }
}

#[test]
fn monte_carlo_is_bit_identical_on_one_and_two_threads() {
    let d = load(&std::fs::read_to_string(root().join("designs/rx-preamp-ce.yaml")).unwrap());
    let run = |threads: usize| {
        rayon::ThreadPoolBuilder::new().num_threads(threads).build().unwrap().install(|| {
            let s = study_of(&d, 200);
            serde_json::to_string(&s).unwrap()
        })
    };
    let (one, two) = (run(1), run(2));
    assert_eq!(one, two);
    // The runs compared really differ from each other: all 200 converged and spread out.
    let s: serde_json::Value = serde_json::from_str(&one).unwrap();
    let mc = &s["monte_carlo"];
    assert_eq!(mc["failed_runs"].as_array().map(Vec::len), Some(0), "{mc}");
    let spreads = mc["spreads"].as_array().unwrap();
    assert!(spreads.iter().all(|x| x["count"] == 200 && x["std_dev"].as_f64() > Some(0.0)));
}

#[test]
fn results_json_is_bit_identical_for_one_and_two_threads() {
    let design = root().join("designs/follower-cap-load.yaml");
    let mut outputs = Vec::new();
    for threads in ["1", "2"] {
        let dir = crate::support::scratch(&format!("threads-{threads}"));
        let o = std::process::Command::new(crate::support::binary())
            .args([
                "render",
                design.to_str().unwrap(),
                "--format",
                "json",
                "--runs",
                "300",
                "--out",
                "out",
            ])
            .current_dir(&dir)
            .env("RAYON_NUM_THREADS", threads)
            .output()
            .unwrap();
        assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
        outputs.push(std::fs::read(dir.join("out/results.json")).unwrap());
    }
    assert!(outputs[0] == outputs[1], "results.json differs between 1 and 2 threads");
    let v: serde_json::Value = serde_json::from_slice(&outputs[0]).unwrap();
    assert_eq!(v["tolerance"]["monte_carlo"]["runs"], 300);
    assert!(v["sensitivity"]["levers"].as_array().unwrap().len() > 5);
    assert!(v["requirements"][0]["yield_fraction"].is_number());
}

#[test]
fn check_exits_1_when_a_nominal_requirement_fails() {
    let dir = crate::support::scratch("failing-requirement");
    let text = std::fs::read_to_string(root().join("designs/rx-preamp-ce.yaml")).unwrap();
    let tight = text.replace("upper_cutoff: {min: 900 kHz}", "upper_cutoff: {min: 20 MHz}");
    assert_ne!(tight, text, "the example's requirement line changed; update this test");
    std::fs::write(dir.join("tight.yaml"), tight).unwrap();
    let o = crate::support::run_in(&dir, &["check", "tight.yaml", "--runs", "50"]);
    assert_eq!(o.status.code(), Some(1), "{}", String::from_utf8_lossy(&o.stderr));
    let stdout = String::from_utf8_lossy(&o.stdout);
    assert!(stdout.contains("upper cutoff") && stdout.contains("FAIL"), "{stdout}");
    assert!(String::from_utf8_lossy(&o.stderr).contains("fails upper_cutoff"));
}
