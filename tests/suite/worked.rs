//! Worked calculations in a template: published closed forms written as worked steps
//! reproduce the engine's numbers, an approximation shows its expected error, and mistakes
//! are located in the template.

use std::path::Path;

use crate::support::{run_in, scratch};

/// The common-emitter stage of Gray & Meyer's zero-value time-constant analysis with linear
/// equivalents standing for the transistor (as in closed_forms.rs), written as a design.
const CE: &str = "tauweave: 1
design: {id: ce-worked, title: worked steps, revision: A, date: 2026-12-05}
params:
  rs: 1 kΩ
signal: {at: b, resistance: rs}
output: {at: c}
parts:
  RPI: {kind: resistor, value: 2.5k, between: [b, gnd]}
  GM: {kind: transconductance, value: 40 mS, between: [c, gnd], control: [b, gnd]}
  RL: {kind: resistor, value: 2k, between: [c, gnd]}
  CPI: {kind: capacitor, value: 10 pF, between: [b, gnd], role: parasitic}
  CMU: {kind: capacitor, value: 0.5 pF, between: [b, c], role: parasitic}
  CL: {kind: capacitor, value: 2 pF, between: [c, gnd], role: load}
";

/// Gray & Meyer, ch. 7 (zero-value time constants of the CE stage), written as steps:
/// R_π0 = R_s ∥ r_π; R_μ0 = R_s''(1 + g_m R_L') + R_L'; b1 = Σ R·C; the mid-band gain
/// −g_m R_L r_π/(r_π + R_s); and the Miller view, f ≈ 1/(2π R_s''(C_π + C_μ(1 + g_m R_L))).
const TEMPLATE: &str = "# {{ design.title }}

```worked
R_s2  = rs ∥ RPI                                   in Ω    estimates open.CPI.r within 0.0000001 %
R_mu0 = R_s2 * (1 + GM * RL) + RL                  in Ω    estimates open.CMU.r within 0.0000001 %
b_1   = R_s2 * CPI + R_mu0 * CMU + RL * CL         in s    estimates high.b1_s within 0.0000001 %
A_v   = -GM * RL * RPI / (RPI + rs)                in V/V  estimates midband.gain within 0.0000001 %
# the Miller view: the input pole alone, the bridging capacitor multiplied by the gain
f_M   = 1 / (2 * pi * R_s2 * (CPI + CMU * (1 + GM * RL)))   in Hz   estimates high.f3db_hz within 30 %
```

Hand value: {{ worked.f_M.value | si(unit=\"Hz\") }}.
";

fn worked(results: &Path) -> Vec<serde_json::Value> {
    let v: serde_json::Value = serde_json::from_slice(&std::fs::read(results).unwrap()).unwrap();
    v["worked"].as_array().expect("results.json has worked").clone()
}

fn step<'a>(steps: &'a [serde_json::Value], name: &str) -> &'a serde_json::Value {
    steps.iter().find(|s| s["name"] == name).unwrap_or_else(|| panic!("{name}"))
}

#[test]
fn published_closed_forms_as_worked_steps_reproduce_the_engine() {
    let dir = scratch("worked-closed");
    std::fs::write(dir.join("ce.yaml"), CE).unwrap();
    std::fs::write(dir.join("t.md"), TEMPLATE).unwrap();
    let o = run_in(
        &dir,
        &[
            "render",
            "ce.yaml",
            "--template",
            "t.md",
            "--format",
            "md",
            "--runs",
            "0",
            "--out",
            "out",
        ],
    );
    assert_eq!(o.status.code(), Some(0), "{}", String::from_utf8_lossy(&o.stderr));
    let steps = worked(&dir.join("out/results.json"));
    // The exact forms agree to 1e-9, and say so.
    let (rs, rpi, gm, rl, cpi, cmu, cl) = (1e3, 2.5e3, 40e-3, 2e3, 10e-12, 0.5e-12, 2e-12);
    let rs2 = rs * rpi / (rs + rpi);
    let rmu0 = rs2 * (1.0 + gm * rl) + rl;
    let expected = [
        ("R_s2", rs2),
        ("R_mu0", rmu0),
        ("b_1", rs2 * cpi + rmu0 * cmu + rl * cl),
        ("A_v", -gm * rl * rpi / (rpi + rs)),
    ];
    for (name, value) in expected {
        let s = step(&steps, name);
        let v = s["value"].as_f64().unwrap();
        assert!((v - value).abs() <= 1e-12 * value.abs(), "{name}: {v} vs {value}");
        assert!(s["error"].as_f64().unwrap().abs() < 1e-9, "{name}: {s}");
        assert_eq!(s["within"], true, "{name}");
    }
    // The Miller view is an approximation: its error is the closed form against the exact
    // f_H of results.json, as reported.
    let m = step(&steps, "f_M");
    let miller = 1.0 / (2.0 * std::f64::consts::PI * rs2 * (cpi + cmu * (1.0 + gm * rl)));
    assert!((m["value"].as_f64().unwrap() - miller).abs() <= 1e-9 * miller);
    let exact = m["exact"].as_f64().unwrap();
    assert!((m["error"].as_f64().unwrap() - (miller / exact - 1.0)).abs() < 1e-12);
    assert!(m["error"].as_f64().unwrap().abs() > 1e-3, "an approximation, not exact");
    // Rendered: the substituted values and the later use of a step's value.
    let md = std::fs::read_to_string(dir.join("out/report.md")).unwrap();
    assert!(md.contains("1 kΩ ∥ 2.5 kΩ"), "{md}");
    assert!(md.contains("Hand value: "), "{md}");
    // The same inputs rebuild byte for byte, custom template and all.
    let o = run_in(&dir, &["verify", "out"]);
    assert_eq!(o.status.code(), Some(0), "{}", String::from_utf8_lossy(&o.stdout));
}

#[test]
fn a_drifting_hand_estimate_is_flagged_in_the_review_and_by_check() {
    let dir = scratch("worked-drift");
    std::fs::write(dir.join("ce.yaml"), CE).unwrap();
    // The Miller view held to 1 %: it is further off than that.
    let tight = TEMPLATE.replace("within 30 %", "within 1 %");
    std::fs::write(dir.join("t.md"), tight).unwrap();
    let o = run_in(
        &dir,
        &[
            "render",
            "ce.yaml",
            "--template",
            "t.md",
            "--format",
            "md",
            "--runs",
            "0",
            "--out",
            "out",
        ],
    );
    assert_eq!(o.status.code(), Some(0));
    let steps = worked(&dir.join("out/results.json"));
    assert_eq!(step(&steps, "f_M")["within"], false);
    let md = std::fs::read_to_string(dir.join("out/report.md")).unwrap();
    assert!(md.contains("**outside ±1 %**"), "{md}");
    let o = run_in(&dir, &["check", "ce.yaml", "--template", "t.md", "--runs", "0"]);
    let stdout = String::from_utf8_lossy(&o.stdout);
    assert!(
        stdout.contains("hand estimates")
            && stdout.contains("f_M = ")
            && stdout.contains("flagged"),
        "{stdout}"
    );
}

#[test]
fn worked_step_mistakes_are_located_in_the_template_and_nothing_is_written() {
    let dir = scratch("worked-bad");
    std::fs::write(dir.join("ce.yaml"), CE).unwrap();
    let cases = [
        ("x = RL + CPI", "cannot add F to Ω", "t.md:4:"),
        ("x = RLL * 2", "did you mean `RL`", "t.md:4:5"),
        ("x = y + RL\ny = x + RL", "loop", "t.md:4:1"),
        ("x = RL / (RL - RL)", "division by zero", "t.md:4:"),
        ("x = RL * CPI   in Hz", "comes out in s", "t.md:4:"),
        (
            "x = RL   in Ω   estimates high.f3db_hz within 10 %",
            "is in Ω, and `high.f3db_hz` in Hz",
            "t.md:4:",
        ),
    ];
    for (steps, message, place) in cases {
        let template = format!("# {{{{ design.title }}}}\n\n```worked\n{steps}\n```\n");
        std::fs::write(dir.join("t.md"), template).unwrap();
        let out = dir.join("out");
        let _ = std::fs::remove_dir_all(&out);
        let o = run_in(
            &dir,
            &[
                "render",
                "ce.yaml",
                "--template",
                "t.md",
                "--format",
                "md",
                "--runs",
                "0",
                "--out",
                "out",
            ],
        );
        let stderr = String::from_utf8_lossy(&o.stderr);
        assert_eq!(o.status.code(), Some(2), "{steps}: {stderr}");
        assert!(stderr.contains(message), "{steps}: `{message}` missing:\n{stderr}");
        assert!(stderr.contains(place), "{steps}: `{place}` missing:\n{stderr}");
        assert!(!out.exists(), "{steps}: nothing is written");
    }
}
