//! Analysis failures are messages, never panics: a singular network names what floats,
//! and the render writes nothing.

use crate::support::{run_in, scratch};

#[test]
fn a_singular_network_is_a_message_and_writes_nothing() {
    // A voltage amplifier drives `o` and a coupling capacitor, shorted at mid-band, ties `o`
    // to ground: the mid-band network is singular (a loop the DC topology check cannot see).
    let text = "tauweave: 1\ndesign: {id: loop, title: two drivers, revision: A, date: 2026-11-30}\n\
                signal: {at: a, resistance: 50}\noutput: {at: o}\nparts:\n\
                \x20 R1: {kind: resistor, value: 1k, between: [a, gnd]}\n\
                \x20 E1: {kind: voltage_amplifier, value: 2, between: [o, gnd], control: [a, gnd]}\n\
                \x20 CC: {kind: capacitor, value: 1 uF, between: [o, gnd], role: coupling}\n\
                \x20 RL: {kind: resistor, value: 1k, between: [o, gnd]}\n";
    let dir = scratch("singular");
    std::fs::write(dir.join("loop.yaml"), text).unwrap();
    let out = run_in(&dir, &["render", "loop.yaml", "--out", "result"]);
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{stderr}");
    assert!(stderr.contains("singular"), "{stderr}");
    assert!(stderr.contains("nothing was written"), "{stderr}");
    assert!(!stderr.contains("panicked"), "{stderr}");
    assert!(!dir.join("result").exists());
}

#[test]
fn render_writes_results_json_with_the_contract_keys() {
    let dir = scratch("render-contract");
    let design = crate::support::root().join("designs/rx-preamp-ce.yaml");
    let out = run_in(&dir, &["render", design.to_str().unwrap(), "--format", "json"]);
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    // Default folder: out/<design id>/.
    let text = std::fs::read_to_string(dir.join("out/rx-preamp-ce/results.json")).unwrap();
    assert!(!text.contains("NaN"));
    let v: serde_json::Value = serde_json::from_str(&text).unwrap();
    for key in [
        "/tool/name",
        "/tool/version",
        "/design/id",
        "/design/revision",
        "/design/date",
        "/provenance/design_sha256",
        "/provenance/seed",
        "/operating_point/converged",
        "/operating_point/nodes/coll",
        "/operating_point/devices/0/ic_a",
        "/operating_point/devices/0/vce_v",
        "/operating_point/devices/0/power_w",
        "/operating_point/devices/0/region",
        "/operating_point/devices/0/small_signal/gm_s",
        "/operating_point/devices/0/small_signal/rpi_ohm",
        "/operating_point/devices/0/small_signal/cpi_f",
        "/operating_point/devices/0/small_signal/cmu_f",
        "/midband/frequency_hz",
        "/midband/gain",
        "/midband/gain_db",
        "/midband/input_resistance_ohm",
        "/midband/output_resistance_ohm",
        "/high/f3db_hz",
        "/high/b1_s",
        "/high/b2_s2",
        "/high/dominance_ratio",
        "/high/octc/caps/0/miller_factor",
        "/high/octc/sum_tau_s",
        "/high/octc/f_estimate_hz",
        "/high/second_order_f_estimate_hz",
        "/high/rss_f_estimate_hz",
        "/low/f3db_hz",
        "/low/sctc/caps/0/r_ohm",
        "/low/sctc/f_estimate_hz",
        "/poles/0/re_hz",
        "/zeros/0/im_hz",
        "/capacitors/0/set",
    ] {
        assert!(v.pointer(key).is_some(), "results.json lacks {key}");
    }
    assert_eq!(v.pointer("/operating_point/devices/0/region").unwrap(), "active");
    // Device capacitances are addressed as <part>.<name>.
    let parts: Vec<&str> = v["high"]["octc"]["caps"]
        .as_array()
        .unwrap()
        .iter()
        .map(|c| c["part"].as_str().unwrap())
        .collect();
    assert!(
        parts.contains(&"Q1.cpi") && parts.contains(&"Q1.cmu") && parts.contains(&"load.c"),
        "{parts:?}"
    );
    // The same inputs give the same bytes.
    let again =
        run_in(&dir, &["render", design.to_str().unwrap(), "--format", "json", "--out", "again"]);
    assert!(again.status.success());
    assert_eq!(text, std::fs::read_to_string(dir.join("again/results.json")).unwrap());
}

/// Issue 12, broken pipes: a reader that closes the pipe early (`tauweave schema | head`,
/// `tauweave check x.yaml | head -1`) ends the command quietly with its own exit code.
#[test]
fn a_closed_pipe_ends_quietly_issue_12() {
    use std::process::{Command, Stdio};
    let design = crate::support::root().join("designs/rx-preamp-ce.yaml");
    for args in [
        vec!["schema"],
        vec!["template", "show"],
        vec!["check", design.to_str().unwrap(), "--runs", "0"],
    ] {
        let mut child = Command::new(crate::support::binary())
            .args(&args)
            .stdout(Stdio::piped())
            .stderr(Stdio::piped())
            .spawn()
            .unwrap();
        // Close the reading end before the command writes: every write then fails with EPIPE.
        drop(child.stdout.take());
        let out = child.wait_with_output().unwrap();
        let stderr = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(0), "{args:?}: {stderr}");
        assert!(
            !stderr.contains("panicked") && !stderr.contains("Broken pipe"),
            "{args:?}: {stderr}"
        );
    }
}

/// Issue 12, item 4: `render` writes everything, then exits 1 when a requirement fails at
/// nominal values, with one line saying which (as `check` does).
#[test]
fn render_exits_1_after_writing_when_a_requirement_fails_issue_12() {
    // The demo drives 250 pF of cable from about 0.5 kΩ: R·C ≈ 125 ns puts the upper cut-off
    // near 1.3 MHz by hand (single pole, common practice), far below a 100 MHz minimum.
    let text = std::fs::read_to_string(crate::support::root().join("designs/rx-preamp-ce.yaml"))
        .unwrap()
        .replace("upper_cutoff: {min: 900 kHz}", "upper_cutoff: {min: 100 MHz}");
    assert!(text.contains("100 MHz"));
    let dir = scratch("render-failing");
    std::fs::write(dir.join("narrow.yaml"), text).unwrap();
    let out =
        run_in(&dir, &["render", "narrow.yaml", "--format", "md", "--runs", "0", "--out", "o"]);
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(1), "{stderr}");
    assert!(stderr.contains("narrow.yaml: fails upper_cutoff at nominal values"), "{stderr}");
    let report = std::fs::read_to_string(dir.join("o/report.md")).unwrap();
    assert!(report.contains("**FAIL**"), "the report is written and shows the failure");
    assert!(dir.join("o/results.json").exists() && dir.join("o/manifest.json").exists());
}

/// Issue 12, item 6: templates are strict. A misspelt name under a filter, an argument the
/// filter does not take and digits out of range are located errors (exit 2, nothing written),
/// never a silent `—` or a panic; a null value still prints `—`.
#[test]
fn template_mistakes_are_located_errors_issue_12() {
    let design = crate::support::root().join("designs/rx-preamp-ce.yaml");
    let dir = scratch("strict-template");
    for (line, expect) in [
        ("{{ midband.gian | si(unit=\"Ω\") }}", "the review does not have"),
        ("{{ high.f3db_hz | si(units=\"Hz\") }}", "`units` is not one of them"),
        ("{{ high.f3db_hz | sig(digits=1000000) }}", "out of range"),
        ("{{ high.f3db_hz | db(digits=0) }}", "out of range"),
        ("{{ design.title | percent }}", "formats numbers"),
    ] {
        std::fs::write(dir.join("mine.md"), format!("# Review\n\n{line}\n")).unwrap();
        let out = run_in(
            &dir,
            &["render", design.to_str().unwrap(), "--template", "mine.md", "--out", "o"],
        );
        let stderr = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(2), "{line}: {stderr}");
        assert!(stderr.contains(expect), "{line}: {stderr}");
        assert!(stderr.contains("--> mine.md:3:"), "{line}: the place is named: {stderr}");
        assert!(!stderr.contains("panicked") && !dir.join("o").exists(), "{line}");
    }
    // A value that legitimately does not exist (no peaking here) prints the dash.
    std::fs::write(dir.join("mine.md"), "# Review\n\npeak {{ high.peaking | si(unit=\"dB\") }}\n")
        .unwrap();
    let args = ["render", design.to_str().unwrap(), "--template", "mine.md", "--format", "md"];
    let out = run_in(&dir, &[&args[..], &["--runs", "0", "--out", "ok"]].concat());
    assert_eq!(out.status.code(), Some(0), "{}", String::from_utf8_lossy(&out.stderr));
    let md = std::fs::read_to_string(dir.join("ok/report.md")).unwrap();
    assert!(md.contains("peak —"), "{md}");
}
