//! `tauweave diff`: one resistor changed between two revisions shows exactly that part and
//! the results that moved, with the right signs, on the terminal and in change.md /
//! change.html; a requirement that starts failing is called out first and exits 1; either
//! side may be the results.json of an earlier render; the change template is replaceable.

use std::path::{Path, PathBuf};

use crate::support::{root, run_in, scratch};

/// Two revisions of the demo design in a scratch folder: rev-c as shipped, rev-d with the
/// collector resistor changed to `rc` (IEC 60062 code).
fn revisions(name: &str, rc: &str) -> PathBuf {
    let dir = scratch(name);
    let old = std::fs::read_to_string(root().join("designs/rx-preamp-ce.yaml")).unwrap();
    let new = old
        .replace(
            "RC:  {kind: resistor, value: 1k0,",
            &format!("RC:  {{kind: resistor, value: {rc},"),
        )
        .replace("revision: C", "revision: D");
    assert_ne!(old, new, "the example's RC line changed; update this test");
    std::fs::write(dir.join("rev-c.yaml"), &old).unwrap();
    std::fs::write(dir.join("rev-d.yaml"), &new).unwrap();
    dir
}

fn row(out: &str, label: &str) -> String {
    out.lines()
        .find(|l| l.trim_start().starts_with(label))
        .unwrap_or_else(|| panic!("no `{label}` in\n{out}"))
        .to_string()
}

fn read(dir: &Path, file: &str) -> String {
    std::fs::read_to_string(dir.join(file)).unwrap_or_else(|e| panic!("{file}: {e}"))
}

#[test]
fn one_resistor_changed_shows_that_part_and_what_moved() {
    let dir = revisions("diff", "1k2");
    let o = run_in(&dir, &["diff", "rev-c.yaml", "rev-d.yaml", "--runs", "50", "--out", "chg"]);
    let out = String::from_utf8_lossy(&o.stdout);
    assert_eq!(o.status.code(), Some(0), "{out}{}", String::from_utf8_lossy(&o.stderr));
    let part_lines: Vec<&str> = out
        .lines()
        .filter(|l| l.starts_with("  ~ ") || l.starts_with("  + ") || l.starts_with("  − "))
        .collect();
    assert_eq!(part_lines.len(), 1, "{out}");
    assert!(
        part_lines[0].contains("RC")
            && part_lines[0].contains("1 kΩ")
            && part_lines[0].contains("1.2 kΩ"),
        "{out}"
    );
    // A larger collector resistor: more gain, a lower upper cut-off (its load sees more R),
    // a higher output resistance (common practice for a common-emitter stage). The gain is
    // compared by magnitude, so its change and relative change agree in sign.
    let gain = row(&out, "mid-band gain |A|");
    assert!(gain.ends_with("+9 %") && gain.contains(" +0.9601 V/V"), "{gain}");
    let f_h = row(&out, "f_H exact");
    assert!(f_h.contains(" −105.8 kHz") && f_h.ends_with("−8.3 %"), "{f_h}");
    // The dominant high-frequency pole moves down with f_H (|p| by magnitude).
    let pole = row(&out, "pole 4 |p|");
    assert!(pole.contains("1.276 MHz") && pole.ends_with("−8.31 %"), "{pole}");
    assert!(row(&out, "R_out").contains("+19."), "{}", row(&out, "R_out"));
    assert!(!out.contains("requirements that changed status"), "{out}");

    // The same report, written through the change template.
    let md = read(&dir.join("chg"), "change.md");
    assert!(
        md.contains(
            "| changed | RC | resistor, 1 kΩ, ±1 % uniform, vcc–coll | resistor, 1.2 kΩ, ±1 % uniform, vcc–coll |"
        ),
        "{md}"
    );
    assert!(md.contains("| f\\_H exact | 1.275 MHz | 1.17 MHz | −105.8 kHz | −8.3 % |"), "{md}");
    assert!(md.contains("No requirement changed between pass and fail"), "{md}");
    let html = read(&dir.join("chg"), "change.html");
    assert!(
        html.contains("f_H exact</td><td style=\"text-align: right\">1.275 MHz</td>")
            && html.contains("Change review"),
        "{html}"
    );

    // Identical revisions: nothing moved.
    let same = run_in(&dir, &["diff", "rev-c.yaml", "rev-c.yaml", "--runs", "50", "--no-write"]);
    let out = String::from_utf8_lossy(&same.stdout);
    assert!(
        out.contains("no part, model or setting changed") && out.contains("what moved\n  nothing"),
        "{out}"
    );
}

#[test]
fn a_requirement_that_starts_failing_comes_first_and_exits_1() {
    // 2.2 kΩ lifts the gain past the design's 23 dB ceiling and R_out past 1.2 kΩ.
    let dir = revisions("diff-fail", "2k2");
    let o = run_in(&dir, &["diff", "rev-c.yaml", "rev-d.yaml", "--runs", "0", "--no-write"]);
    let out = String::from_utf8_lossy(&o.stdout);
    assert_eq!(o.status.code(), Some(1), "{out}{}", String::from_utf8_lossy(&o.stderr));
    let status = out.find("requirements that changed status").expect("status section");
    assert!(status < out.find("parts, models and settings").unwrap(), "{out}");
    assert!(row(&out, "midband gain").ends_with("FAIL"), "{out}");
    assert!(
        row(&out, "output resistance").contains("pass")
            && row(&out, "output resistance").ends_with("FAIL"),
        "{out}"
    );
    assert!(
        !out.contains("input resistance  "),
        "a requirement that still passes is listed\n{out}"
    );
}

#[test]
fn an_earlier_results_json_can_be_the_old_side() {
    let dir = revisions("diff-json", "1k2");
    let r =
        run_in(&dir, &["render", "rev-c.yaml", "--format", "json", "--runs", "50", "--out", "c"]);
    assert_eq!(r.status.code(), Some(0), "{}", String::from_utf8_lossy(&r.stderr));
    let o = run_in(&dir, &["diff", "c/results.json", "rev-d.yaml", "--runs", "50", "--no-write"]);
    let out = String::from_utf8_lossy(&o.stdout);
    assert_eq!(o.status.code(), Some(0), "{out}{}", String::from_utf8_lossy(&o.stderr));
    assert!(out.contains("not compared: one side is a results.json"), "{out}");
    assert!(row(&out, "f_H exact").ends_with("−8.3 %"), "{out}");
    // JSON that is not a tauweave results.json is refused, not compared.
    std::fs::write(dir.join("other.json"), "{\"a\": 1}").unwrap();
    let bad = run_in(&dir, &["diff", "other.json", "rev-d.yaml", "--no-write"]);
    assert_eq!(bad.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&bad.stderr).contains("not a tauweave results.json"));
}

#[test]
fn the_change_template_is_replaceable() {
    let dir = revisions("diff-template", "1k2");
    let shown = run_in(&dir, &["template", "show", "change"]);
    let built_in = String::from_utf8_lossy(&shown.stdout).to_string();
    assert!(built_in.contains("table(name=\"moved\")"), "{built_in}");
    std::fs::write(
        dir.join("mine.md"),
        "# {{ new.id }}: {{ part_changes | length }} part change\n\n{{ table(name=\"parts\") }}\n",
    )
    .unwrap();
    let o = run_in(
        &dir,
        &["diff", "rev-c.yaml", "rev-d.yaml", "--runs", "0", "--template", "mine.md", "--out", "m"],
    );
    assert_eq!(o.status.code(), Some(0), "{}", String::from_utf8_lossy(&o.stderr));
    let md = read(&dir.join("m"), "change.md");
    assert!(md.starts_with("# rx-preamp-ce: 1 part change\n"), "{md}");
    assert!(md.contains("| changed | RC |"), "{md}");
    // A mistake in the template names its line and writes nothing.
    std::fs::write(dir.join("bad.md"), "# x\n\n{{ table(name=\"moves\") }}\n").unwrap();
    let bad = run_in(
        &dir,
        &["diff", "rev-c.yaml", "rev-d.yaml", "--runs", "0", "--template", "bad.md", "--out", "b"],
    );
    let err = String::from_utf8_lossy(&bad.stderr);
    assert_eq!(bad.status.code(), Some(2), "{err}");
    assert!(err.contains("bad.md:3") && err.contains("tables: status, parts, moved"), "{err}");
    assert!(!dir.join("b").exists());
}

#[test]
fn settings_limits_and_pole_pairs_are_compared() {
    let dir = scratch("diff-settings");
    let old = std::fs::read_to_string(root().join("designs/follower-cap-load.yaml")).unwrap();
    // Three times the load capacitance, a tighter f_H requirement, a warmer stage.
    let new = old
        .replace("load_capacitance: c_load", "load_capacitance: 1.5 nF")
        .replace("c_load: c_cable + c_daq_input", "c_load_unused: c_cable + c_daq_input");
    let new = new.replacen("temperature:", "temperature: 45 °C # was:", 1);
    assert!(
        new.contains("1.5 nF") && new.contains("45 °C"),
        "the example changed; update this test"
    );
    std::fs::write(dir.join("a.yaml"), &old).unwrap();
    std::fs::write(dir.join("b.yaml"), &new).unwrap();
    let o = run_in(&dir, &["diff", "a.yaml", "b.yaml", "--runs", "0", "--no-write"]);
    let out = String::from_utf8_lossy(&o.stdout);
    // f_H falls below the design's 5 MHz floor: exit 1, status first, limit shown.
    assert_eq!(o.status.code(), Some(1), "{out}{}", String::from_utf8_lossy(&o.stderr));
    let status = row(&out, "upper cutoff");
    assert!(status.contains("≥ 5 MHz") && status.ends_with("FAIL"), "{status}");
    assert!(row(&out, "~ load.c").contains("→  capacitor (load), 1.5 nF"), "{out}");
    assert!(row(&out, "~ temperature").contains("→  45 °C"), "{out}");
    // The output pole pair (a follower into a capacitance, common practice: it may peak)
    // turns into two real poles: the pair (with its Q) is paired with the nearer of them,
    // and the other appears as new, without shifting the pairing of the rest.
    let cells = |label: &str| -> Vec<String> {
        row(&out, label)
            .split("  ")
            .map(str::trim)
            .filter(|c| !c.is_empty())
            .map(String::from)
            .collect()
    };
    let (appeared, pair) = (cells("pole 2 |p|"), cells("pole 3 |p|"));
    assert!(appeared[1] == "—" && appeared[2].ends_with("MHz"), "{appeared:?}");
    assert!(pair[1].contains(", Q ") && !pair[2].contains('Q'), "{pair:?}");
    // The low-frequency pole stays paired with itself.
    assert!(cells("pole 1 |p|")[1].ends_with(" Hz"), "{out}");
}
