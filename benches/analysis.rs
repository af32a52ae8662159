//! Benchmarks of the analysis (run with `cargo bench --bench analysis`): the whole analysis
//! of each example design, its noise review alone, and an RC ladder of 100, 1,000 and 3,000 nodes (time constants
//! from one factorisation, and poles by QZ where that is affordable). Prints medians; it
//! asserts nothing, it measures.

use std::hint::black_box;
use std::time::{Duration, Instant};

use tauweave::analysis::linear::Factor;
use tauweave::analysis::mna::{self, Assembly, CapState};
use tauweave::analysis::{self, poles, time_constants, tolerance};
use tauweave::circuit::netlist::{CapReason, CapSet};
use tauweave::circuit::small_signal::{Linear, LinearNetwork};
use tauweave::design;
use tauweave::report::export::{self, Exporter};
use tauweave::report::{self, Inputs, template};
use tauweave::review::{self, Review, ReviewOptions};

/// The in-memory formats: HTML, Markdown with plots, results.json, sweep.csv.
const FORMATS: [&dyn Exporter; 4] = [&export::Html, &export::Markdown, &export::Json, &export::Csv];

fn median(mut f: impl FnMut(), budget: Duration, max_runs: usize) -> (Duration, usize) {
    let mut times = Vec::new();
    let start = Instant::now();
    while times.len() < max_runs && (times.len() < 3 || start.elapsed() < budget) {
        let t = Instant::now();
        f();
        times.push(t.elapsed());
    }
    times.sort();
    (times[times.len() / 2], times.len())
}

/// An RC ladder: R from each node to the next, C from each node to ground.
fn ladder(n: usize) -> LinearNetwork {
    let mut nodes = vec!["gnd".to_string()];
    nodes.extend((1..=n).map(|i| format!("n{i}")));
    nodes.push("source".into());
    let emf = n + 1;
    let mut elements = vec![Linear::Conductance { name: "source.r".into(), a: emf, b: 1, g: 1e-3 }];
    for i in 1..=n {
        if i < n {
            elements.push(Linear::Conductance { name: format!("R{i}"), a: i, b: i + 1, g: 1e-3 });
        }
        elements.push(Linear::Capacitor {
            name: format!("C{i}"),
            a: i,
            b: 0,
            c: 1e-12,
            set: CapSet::High,
            reason: CapReason::Role,
        });
    }
    elements.push(Linear::Conductance { name: "RT".into(), a: n, b: 0, g: 1e-4 });
    LinearNetwork {
        nodes,
        elements,
        source: (emf, 0),
        source_terminal: (1, 1e3),
        output: (n, 0),
        load_resistance: None,
        devices: Vec::new(),
    }
}

/// A design file for an RC ladder of `n` sections: R from each node to the next, C from each
/// node to ground, driven through 1 kΩ, loaded by 10 kΩ.
fn ladder_design(n: usize) -> String {
    let mut parts = String::new();
    for i in 1..=n {
        parts.push_str(&format!(
            "  R{i}: {{kind: resistor, value: 1k, between: [n{i}, n{}], tolerance: 1 %}}\n",
            i + 1
        ));
        parts.push_str(&format!(
            "  C{i}: {{kind: capacitor, value: 10p, between: [n{}, gnd], role: parasitic, tolerance: 5 %}}\n",
            i + 1
        ));
    }
    format!(
        "tauweave: 1\ndesign: {{id: ladder, title: RC ladder, revision: A, date: 2026-12-03}}\n\
         signal: {{at: n1, resistance: 1k}}\noutput: {{at: n{}, load_resistance: 10k}}\nparts:\n{parts}",
        n + 1
    )
}

/// A design file for `n` cascaded common-emitter stages, each divider-biased with a
/// bypassed emitter resistor, coupled by capacitors, with a little collector capacitance.
fn stages_design(n: usize) -> String {
    let mut parts =
        String::from("  CIN: {kind: capacitor, value: 1u, between: [in, b1], role: coupling}\n");
    for i in 1..=n {
        parts.push_str(&format!(
            "  RB1_{i}: {{kind: resistor, value: 47k, between: [vcc, b{i}]}}\n\
             \x20 RB2_{i}: {{kind: resistor, value: 10k, between: [b{i}, gnd]}}\n\
             \x20 RC{i}: {{kind: resistor, value: 4k7, between: [vcc, c{i}]}}\n\
             \x20 RE{i}: {{kind: resistor, value: 1k, between: [e{i}, gnd]}}\n\
             \x20 CE{i}: {{kind: capacitor, value: 10u, between: [e{i}, gnd], role: bypass}}\n\
             \x20 CP{i}: {{kind: capacitor, value: 5p, between: [c{i}, gnd], role: parasitic}}\n\
             \x20 Q{i}: {{kind: bjt, model: N, c: c{i}, b: b{i}, e: e{i}}}\n\
             \x20 CC{i}: {{kind: capacitor, value: 1u, between: [c{i}, {}], role: coupling}}\n",
            if i < n { format!("b{}", i + 1) } else { "out".into() }
        ));
    }
    format!(
        "tauweave: 1\ndesign: {{id: stages, title: stages, revision: A, date: 2026-12-03}}\n\
         supplies: {{vcc: 12 V}}\nsignal: {{at: in, resistance: 50}}\n\
         output: {{at: out, load_resistance: 10k}}\nparts:\n{parts}\
         models:\n  N: {{type: npn, beta: {{value: 150, tolerance: 30 %}}, early_voltage: 80 V, \
         saturation_current: 2 fA, base_resistance: 20, transit_time: 300 ps, \
         emitter_junction: {{capacitance: 2 pF, potential: 0.75 V, grading: 0.33}}, \
         collector_junction: {{capacitance: 1 pF, potential: 0.6 V, grading: 0.33}}}}\n"
    )
}

/// `n` cascaded common-emitter stages with unbypassed emitter resistors, each with a gain
/// near one (so a long chain neither overflows nor vanishes): four nodes a stage (collector,
/// base, emitter, internal base).
fn level_stages_design(n: usize) -> String {
    stages_design(n)
        .lines()
        .filter(|l| !l.trim_start().starts_with("CE"))
        .map(|l| l.replace("value: 4k7, between: [vcc", "value: 1k2, between: [vcc") + "\n")
        .collect()
}

fn main() {
    // `cargo bench --bench analysis -- NAME` runs the sections whose name contains NAME:
    // analysis, noise, signal, render, what-if, monte-carlo, sensitivities, scale, ladder.
    let only: Option<String> = std::env::args().skip(1).find(|a| !a.starts_with('-'));
    let wanted = |section: &str| only.as_deref().is_none_or(|o| section.contains(o));
    let root = env!("CARGO_MANIFEST_DIR");
    let tpl = template::TemplateSource {
        name: template::BUILT_IN_NAME.into(),
        text: template::BUILT_IN.into(),
    };
    let mut names: Vec<_> = std::fs::read_dir(format!("{root}/designs"))
        .unwrap()
        .map(|e| e.unwrap().path())
        .filter(|p| p.extension().is_some_and(|e| e == "yaml"))
        .collect();
    names.sort();
    if wanted("analysis") {
        println!(
            "whole analysis of each example design (operating point, sweep, cut-offs, QZ, time constants)"
        );
        for path in &names {
            let text = std::fs::read_to_string(path).unwrap();
            let d = design::load(&text).design.expect("valid design");
            let (t, runs) = median(
                || drop(black_box(analysis::analyze(&d).unwrap())),
                Duration::from_secs(2),
                2000,
            );
            println!(
                "  {:<28} {:>10.3} ms  ({runs} runs)",
                path.file_name().unwrap().to_string_lossy(),
                t.as_secs_f64() * 1e3
            );
        }
    }
    if wanted("noise") {
        println!(
            "\nnoise review of each example design (sources, spot spectrum, input generators, band integral, the sweep's noise; bias and network built beforehand)"
        );
        for path in &names {
            use tauweave::circuit::{netlist::Netlist, operating_point, small_signal};
            let text = std::fs::read_to_string(path).unwrap();
            let d = design::load(&text).design.expect("valid design");
            let a = analysis::analyze(&d).unwrap();
            let net = Netlist::from_design(&d);
            let op = net.has_devices().then(|| operating_point::solve(&net).unwrap());
            let (lin, _) = small_signal::linearize(&net, op.as_ref());
            let full = mna::assemble(&lin, |_| CapState::Present, Assembly::default());
            let n = a.noise.as_ref().expect("noise");
            let band = n.band.as_ref().map(|b| (b.start_hz, b.stop_hz, b.basis));
            let frequencies: Vec<f64> = a.sweep.iter().map(|p| p.frequency_hz).collect();
            let corners = vec![0.0; op.as_ref().map_or(0, |o| o.devices.len())];
            let request = analysis::noise::Request {
                lin: &lin,
                op: op.as_ref(),
                mna: &full,
                kelvin: net.temperature_k,
                corners: &corners,
                amplitude_v: d.signal.amplitude_v,
                spot_hz: n.spot_frequency_hz,
                band,
                frequencies: &frequencies,
            };
            let (t, runs) = median(
                || drop(black_box(analysis::noise::review(&request))),
                Duration::from_secs(2),
                2000,
            );
            println!(
                "  {:<28} {:>10.3} ms  ({runs} runs, {} sweep points)",
                path.file_name().unwrap().to_string_lossy(),
                t.as_secs_f64() * 1e3,
                frequencies.len()
            );
        }
    }
    if wanted("signal") {
        println!(
            "\nsignal-handling review of each example design (swing limits, distortion at the stated amplitude, power series, compression, transfer curve; bias solved beforehand)"
        );
        for path in &names {
            use tauweave::circuit::{netlist::Netlist, operating_point};
            let text = std::fs::read_to_string(path).unwrap();
            let d = design::load(&text).design.expect("valid design");
            let a = analysis::analyze(&d).unwrap();
            let net = Netlist::from_design(&d);
            let op = operating_point::solve(&net).unwrap();
            let request = analysis::large_signal::Request {
                net: &net,
                op: &op,
                gain: a.midband.gain,
                amplitude_v: d.signal.amplitude_v,
                frequency_hz: a.midband.frequency_hz,
                cutoffs: (a.low.f3db_hz, a.high.f3db_hz),
                input_noise_rms_v: None,
            };
            let (t, runs) = median(
                || drop(black_box(analysis::large_signal::review(&request))),
                Duration::from_secs(2),
                2000,
            );
            println!(
                "  {:<28} {:>10.3} ms  ({runs} runs)",
                path.file_name().unwrap().to_string_lossy(),
                t.as_secs_f64() * 1e3
            );
        }
    }
    if wanted("render") {
        println!(
            "\nrender of each example design (analysis, requirement checks, cautions, explanation, tables, plots, HTML, Markdown, JSON; tolerance study done once beforehand; no disk)"
        );
        for path in &names {
            let text = std::fs::read_to_string(path).unwrap();
            let d = design::load(&text).design.expect("valid design");
            let inputs = Inputs {
                design_name: "d.yaml",
                design_text: &text,
                template: &tpl,
                built_in_template: true,
                schematic: None,
                logo: None,
            };
            let study =
                review::review(&d, &ReviewOptions { runs: 0, progress: &|_| {} }).unwrap().study;
            let fixed: Vec<String> =
                d.parts.iter().filter(|p| p.is_fixed()).map(|p| p.name.clone()).collect();
            // `with_signal` false: the same render with the signal-handling section dropped
            // after the analysis (its computation is still in the time; the bench above gives it).
            let render = |with_signal: bool| {
                let mut analysis = analysis::analyze(&d).unwrap();
                if !with_signal {
                    analysis.large_signal = None;
                }
                let mut requirements = analysis::requirements::check(&d.requirements, &analysis);
                analysis::requirements::with_study(&mut requirements, &study);
                let review = Review {
                    cautions: report::cautions::cautions(&d, &analysis),
                    explanation: report::explain::explain(
                        &analysis,
                        Some(&study),
                        &fixed,
                        report::port_words::Asked::of(&d.requirements),
                    ),
                    what_if: analysis::what_if::review(&d),
                    analysis,
                    study: study.clone(),
                    requirements,
                };
                drop(black_box(report::render(&d, &review, &inputs, &FORMATS).unwrap()))
            };
            let (t, runs) = median(|| render(true), Duration::from_secs(2), 500);
            let (t_without, _) = median(|| render(false), Duration::from_secs(2), 500);
            // The whole job of `render` but the PDF and the disk: the review with the design's
            // own Monte Carlo (on every core), then every in-memory format.
            let own = d.analysis.monte_carlo_runs;
            let (t_whole, _) = median(
                || {
                    let review =
                        review::review(&d, &ReviewOptions { runs: own, progress: &|_| {} })
                            .unwrap();
                    drop(black_box(report::render(&d, &review, &inputs, &FORMATS).unwrap()))
                },
                Duration::from_secs(3),
                50,
            );
            println!(
                "  {:<28} {:>10.3} ms  ({runs} runs; {:.3} ms without the signal-handling section's tables, plots and text; {:.1} ms with the review and its own {own}-run Monte Carlo on {} cores)",
                path.file_name().unwrap().to_string_lossy(),
                t.as_secs_f64() * 1e3,
                t_without.as_secs_f64() * 1e3,
                t_whole.as_secs_f64() * 1e3,
                rayon::current_num_threads()
            );
        }
    }
    if wanted("what-if") {
        println!(
            "\nwhat-if on the demo, one core: a 20-point sweep and a limit solve of cable_length"
        );
        {
            let text =
                std::fs::read_to_string(format!("{root}/designs/rx-preamp-ce.yaml")).unwrap();
            let base = design::load(&text).design.expect("valid design");
            let spec = |sweeps: bool, limits: bool| {
                let mut d = base.clone();
                if !sweeps {
                    d.what_if.sweeps.clear();
                } else {
                    let s = &mut d.what_if.sweeps[0];
                    s.values = (0..20).map(|k| 1.0 * 20f64.powf(k as f64 / 19.0)).collect();
                }
                if !limits {
                    d.what_if.limits.clear();
                }
                d
            };
            let one = rayon::ThreadPoolBuilder::new().num_threads(1).build().unwrap();
            for (label, d) in
                [("20-point sweep", spec(true, false)), ("limit solve", spec(false, true))]
            {
                let (t, runs) = median(
                    || one.install(|| drop(black_box(analysis::what_if::review(&d)))),
                    Duration::from_secs(2),
                    200,
                );
                println!("  {label:<28} {:>10.3} ms  ({runs} runs)", t.as_secs_f64() * 1e3);
            }
        }
    }
    if wanted("monte-carlo") {
        println!(
            "\nMonte Carlo: full evaluations (bias, mid-band, time constants, exact cut-offs, the noise and signal-handling figures the requirements ask for) per second"
        );
        for path in &names {
            let text = std::fs::read_to_string(path).unwrap();
            let d = design::load(&text).design.expect("valid design");
            let levers = tolerance::levers(&d);
            let nominal = analysis::metrics(&d).unwrap();
            let figs = tolerance::figures(&nominal);
            let runs = 20_000;
            let rate = |threads: usize| {
                let pool = rayon::ThreadPoolBuilder::new().num_threads(threads).build().unwrap();
                let t = Instant::now();
                let mc =
                    pool.install(|| tolerance::monte_carlo(&d, &levers, &figs, &[], runs, &|_| {}));
                (runs as f64 / t.elapsed().as_secs_f64(), mc.failed_runs.len())
            };
            let (one, failed) = rate(1);
            let (all, _) = rate(rayon::current_num_threads());
            println!(
                "  {:<28} {:>8.0} runs/s on one core, {:>8.0} on {} ({runs} runs, {failed} failed)",
                path.file_name().unwrap().to_string_lossy(),
                one,
                all,
                rayon::current_num_threads()
            );
        }
        let text = std::fs::read_to_string(format!("{root}/designs/rx-preamp-ce.yaml")).unwrap();
        let d = design::load(&text).design.unwrap();
        let t = Instant::now();
        let review =
            review::review(&d, &ReviewOptions { runs: 10_000, progress: &|_| {} }).unwrap();
        let inputs = Inputs {
            design_name: "d.yaml",
            design_text: &text,
            template: &tpl,
            built_in_template: true,
            schematic: None,
            logo: None,
        };
        let files = report::render(&d, &review, &inputs, &FORMATS).unwrap();
        println!(
            "\n  10,000-run render of rx-preamp-ce (analysis, sensitivities, worst case, Monte Carlo, all outputs): {:.3} s, {} files",
            t.elapsed().as_secs_f64(),
            files.len()
        );
    }
    if wanted("sensitivities") {
        println!(
            "\nsensitivities of every figure to every lever: adjoint method against central differences of whole evaluations"
        );
        for (what, text) in [
            ("RC ladder, 10 sections", ladder_design(10)),
            ("RC ladder, 30 sections", ladder_design(30)),
            ("RC ladder, 100 sections", ladder_design(100)),
            ("common-emitter stages, 3", stages_design(3)),
            ("common-emitter stages, 6", stages_design(6)),
        ] {
            let d = design::load(&text).design.expect("valid generated design");
            let levers = tolerance::levers(&d);
            let figs = tolerance::figures(&analysis::metrics(&d).unwrap());
            let (t_adjoint, _) = median(
                || drop(black_box(tolerance::sensitivities(&d, &levers, &figs))),
                Duration::from_secs(2),
                20,
            );
            let (t_diff, _) = median(
                || drop(black_box(tolerance::sensitivities_by_differences(&d, &levers, &figs))),
                Duration::from_secs(2),
                5,
            );
            println!(
                "  {what:<28} {:>4} levers: adjoint {:>9.2} ms, differences {:>9.2} ms ({:.1}×)",
                levers.len(),
                t_adjoint.as_secs_f64() * 1e3,
                t_diff.as_secs_f64() * 1e3,
                t_diff.as_secs_f64() / t_adjoint.as_secs_f64()
            );
        }
    }
    if wanted("scale") {
        println!(
            "\nscale: the whole review without Monte Carlo (what `check --runs 0` does: analysis, sensitivities, worst case) of generated networks"
        );
        for (what, nodes, text) in [
            ("RC ladder", 100, ladder_design(100)),
            ("RC ladder", 300, ladder_design(300)),
            ("RC ladder", 1000, ladder_design(1000)),
            ("RC ladder", 3000, ladder_design(3000)),
            ("common-emitter stages", 100, level_stages_design(25)),
            ("common-emitter stages", 300, level_stages_design(75)),
            ("common-emitter stages", 1000, level_stages_design(250)),
            ("common-emitter stages", 3000, level_stages_design(750)),
        ] {
            let d = design::load(&text).design.expect("valid generated design");
            let (t, runs) = median(
                || {
                    drop(black_box(review::review(
                        &d,
                        &ReviewOptions { runs: 0, progress: &|_| {} },
                    )))
                },
                Duration::from_secs(4),
                5,
            );
            println!("  {what:<24} {nodes:>5} nodes {:>10.3} s  ({runs} runs)", t.as_secs_f64());
        }
    }
    if wanted("ladder") {
        println!(
            "\nRC ladder: factorise the mid-band G once, then every open-circuit time constant"
        );
        for n in [100usize, 1000, 3000] {
            let net = ladder(n);
            let m = mna::assemble(&net, |_| CapState::Open, Assembly::default());
            let (t_lu, _) =
                median(|| drop(black_box(Factor::new(&m.g).unwrap())), Duration::from_secs(3), 50);
            let caps: Vec<time_constants::CapRef> = (1..=n)
                .map(|i| time_constants::CapRef {
                    name: format!("C{i}"),
                    c: 1e-12,
                    a: i,
                    b: 0,
                    branch: None,
                })
                .collect();
            let g = Factor::new(&m.g).unwrap();
            let (t_tc, _) = median(
                || drop(black_box(time_constants::open_circuit(&m, &g, &caps))),
                Duration::from_secs(3),
                50,
            );
            println!(
                "  {n:>5} nodes: factorisation {:>10.3} ms, time constants (all {n}) {:>10.3} ms",
                t_lu.as_secs_f64() * 1e3,
                t_tc.as_secs_f64() * 1e3
            );
            // The review's window for a network with no lower cut-off, about the estimate.
            let f_est = 1.0
                / (2.0 * std::f64::consts::PI * time_constants::open_circuit_sum(&m, &g, &caps));
            let window = poles::Window { from_hz: f_est / 1e3, to_hz: f_est * 100.0 };
            let full = mna::assemble(&net, |_| CapState::Present, Assembly::default());
            let (t_roots, _) = median(
                || drop(black_box(poles::poles(&full, window).unwrap())),
                Duration::from_secs(3),
                10,
            );
            let method = if poles::finds_all(&full.c) {
                "all, by QZ"
            } else {
                "near the band, by shift-and-invert"
            };
            println!("  {n:>5} nodes: poles ({method}) {:>10.3} ms", t_roots.as_secs_f64() * 1e3);
        }
    }
}
