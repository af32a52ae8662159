//! `tauweave diff`: one resistor changed between two revisions shows exactly that part and
//! the results that moved, with the right signs, on the terminal and in change.md /
//! change.html — the values as the parts changed and the independent reference
//! (tests/reference/mna_reference.py, run on both revisions) give them; a requirement that starts failing is called out first and exits 1; either
//! side may be the results.json of an earlier render; the change template is replaceable.

use std::path::{Path, PathBuf};

use serde_json::Value;

use crate::support::{reference_results, root, run_in, scratch};

/// Two revisions of `design` (relative to the repository root) in a scratch folder: the
/// design as it stands, as `rev-<rev>.yaml`, and the next revision with the line fragment
/// `from` replaced by `to` (`rev-c.yaml` and `rev-d.yaml` for `rev` = 'C').
fn revisions(name: &str, design: &str, from: &str, to: &str, rev: char) -> PathBuf {
    let dir = scratch(name);
    let old = std::fs::read_to_string(root().join(design)).unwrap();
    let next = char::from(rev as u8 + 1);
    let new =
        old.replace(from, to).replace(&format!("revision: {rev}"), &format!("revision: {next}"));
    assert!(old.contains(from) && new.contains(to), "{design} changed; update this test");
    let file = |r: char| format!("rev-{}.yaml", r.to_ascii_lowercase());
    std::fs::write(dir.join(file(rev)), &old).unwrap();
    std::fs::write(dir.join(file(next)), &new).unwrap();
    dir
}

/// The demo design, rev C, and a rev D with the collector resistor changed to `rc` (an
/// IEC 60062 code).
fn demo_revisions(name: &str, rc: &str) -> PathBuf {
    revisions(
        name,
        "designs/rx-preamp-ce.yaml",
        "RC:  {kind: resistor, value: 1k0,",
        &format!("RC:  {{kind: resistor, value: {rc},"),
        'C',
    )
}

/// The linear common-emitter stage of the reference suite (hybrid-π equivalent, so the
/// independent reference can analyse both sides) with its collector resistor raised from
/// 4.7 kΩ to 5.6 kΩ.
fn linear_revisions(name: &str) -> PathBuf {
    revisions(
        name,
        "tests/reference/designs/ce-hybrid-pi.yaml",
        "RC:  {kind: resistor, value: 4k7,",
        "RC:  {kind: resistor, value: 5k6,",
        'A',
    )
}

fn row(out: &str, label: &str) -> String {
    out.lines()
        .find(|l| l.trim_start().starts_with(label))
        .unwrap_or_else(|| panic!("no `{label}` in\n{out}"))
        .to_string()
}

/// The cells of a terminal table row (columns are two or more spaces apart).
fn cells(out: &str, label: &str) -> Vec<String> {
    row(out, label).split("  ").map(str::trim).filter(|c| !c.is_empty()).map(String::from).collect()
}

/// The cells of the Markdown table row whose first cell is `label`.
fn md_cells(md: &str, label: &str) -> Vec<String> {
    let line = md
        .lines()
        .find(|l| l.starts_with(&format!("| {label} |")))
        .unwrap_or_else(|| panic!("no row `{label}` in\n{md}"));
    line.trim_matches('|').split('|').map(|c| c.trim().to_string()).collect()
}

fn read(dir: &Path, file: &str) -> String {
    std::fs::read_to_string(dir.join(file)).unwrap_or_else(|e| panic!("{file}: {e}"))
}

/// The number a printed cell such as `−190.7 kHz`, `+10.52 V/V` or `+11.7 %` stands for,
/// in SI units (per cent as printed), read with the SI prefixes of the BIPM SI Brochure.
fn printed(cell: &str, unit: &str) -> f64 {
    let text = cell.replace('\u{2212}', "-");
    let rest = text.strip_suffix(unit).unwrap_or_else(|| panic!("`{cell}` is not in {unit}"));
    let rest = rest.trim_end();
    let (number, scale) = match rest.chars().last() {
        Some(p) if "fpnµmkMGT".contains(p) => {
            let scale = match p {
                'f' => 1e-15,
                'p' => 1e-12,
                'n' => 1e-9,
                'µ' => 1e-6,
                'm' => 1e-3,
                'k' => 1e3,
                'M' => 1e6,
                'G' => 1e9,
                _ => 1e12,
            };
            (&rest[..rest.len() - p.len_utf8()], scale)
        }
        _ => (rest, 1.0),
    };
    let n: f64 = number.trim().parse().unwrap_or_else(|e| panic!("`{cell}`: {e}"));
    n * scale
}

/// Asserts that `cell` prints `want` to its `digits` significant digits: the printed number
/// is within half a unit of its last digit (plus a rounding hair).
fn prints(cell: &str, unit: &str, want: f64, digits: i32, what: &str) {
    let got = printed(cell, unit);
    let magnitude = want.abs().max(got.abs()).log10().floor() as i32;
    let half_unit = 0.5 * 10f64.powi(magnitude - (digits - 1));
    assert!(
        (got - want).abs() <= half_unit * (1.0 + 1e-9),
        "{what}: `{cell}` does not print {want:e} to {digits} digits"
    );
}

/// A before / after / change / relative row (and what it bears on, when the table has
/// room for it) against the values it should show.
fn row_shows(cells: &[String], unit: &str, before: f64, after: f64, what: &str) {
    assert!(cells.len() == 5 || cells.len() == 6, "{what}: {cells:?}");
    prints(&cells[1], unit, before, 4, &format!("{what} before"));
    prints(&cells[2], unit, after, 4, &format!("{what} after"));
    prints(&cells[3], unit, after - before, 4, &format!("{what} change"));
    prints(&cells[4], "%", (after / before - 1.0) * 100.0, 3, &format!("{what} relative"));
    let sign = if after > before { '+' } else { '\u{2212}' };
    assert!(cells[3].starts_with(sign) && cells[4].starts_with(sign), "{what}: {cells:?}");
}

fn par(a: f64, b: f64) -> f64 {
    a * b / (a + b)
}

fn f_high(r: &Value) -> f64 {
    r["high"]["f3db_hz"].as_f64().expect("an upper cut-off in the reference")
}

/// |p| of the reference's `k`-th pole (sorted by |s|), Hz.
fn pole(r: &Value, k: usize) -> f64 {
    let p = &r["poles"][k];
    p["re_hz"].as_f64().unwrap().hypot(p["im_hz"].as_f64().unwrap())
}

#[test]
fn one_resistor_changed_shows_that_part_and_what_moved() {
    let dir = linear_revisions("diff");
    let o = run_in(&dir, &["diff", "rev-a.yaml", "rev-b.yaml", "--runs", "50", "--out", "chg"]);
    let out = String::from_utf8_lossy(&o.stdout);
    assert_eq!(o.status.code(), Some(0), "{out}{}", String::from_utf8_lossy(&o.stderr));
    let part_lines: Vec<&str> = out
        .lines()
        .filter(|l| l.starts_with("  ~ ") || l.starts_with("  + ") || l.starts_with("  − "))
        .collect();
    assert_eq!(part_lines.len(), 1, "{out}");
    assert!(
        part_lines[0].contains("RC")
            && part_lines[0].contains("4.7 kΩ")
            && part_lines[0].contains("5.6 kΩ"),
        "{out}"
    );

    // Expected values, from the parts changed. At mid-band the coupling and bypass
    // capacitors are shorts and C_μ is open, so the collector sees R_L' = RC ∥ r_o ∥ R_load
    // (4.7 kΩ or 5.6 kΩ ∥ 80 kΩ ∥ 10 kΩ) and the input side does not see RC at all:
    // |A| = gm·R_L'·(input divider) moves by exactly the ratio of R_L'; R_out = RC ∥ r_o
    // (load excluded); the load capacitance's open-circuit time constant is R_L'·10 pF
    // (common practice, common-emitter stage). A larger RC: more gain, more R_out, a lower
    // upper cut-off.
    let (r_o, r_load, c_load) = (80e3, 10e3, 10e-12);
    let r_l = |rc: f64| par(par(rc, r_o), r_load);
    let ratio = r_l(5.6e3) / r_l(4.7e3);
    // Absolute values and the cut-off, from the independent reference run on both
    // revisions (tests/reference/mna_reference.py, its own nodal analysis).
    let (before, after) =
        (reference_results(&dir.join("rev-a.yaml")), reference_results(&dir.join("rev-b.yaml")));
    let gain = |r: &Value| r["midband"]["gain"].as_f64().unwrap().abs();
    let (gain_old, gain_new) = (gain(&before), gain(&after));
    assert!((gain_new / gain_old / ratio - 1.0).abs() < 1e-9, "the reference's gain ratio");
    row_shows(&cells(&out, "mid-band gain |A|"), "V/V", gain_old, gain_old * ratio, "|A|");
    row_shows(&cells(&out, "R_out"), "Ω", par(4.7e3, r_o), par(5.6e3, r_o), "R_out");
    row_shows(
        &cells(&out, "τ load.c"),
        "s",
        r_l(4.7e3) * c_load,
        r_l(5.6e3) * c_load,
        "τ of the load capacitance",
    );
    row_shows(&cells(&out, "f_H exact"), "Hz", f_high(&before), f_high(&after), "f_H");
    // The dominant high-frequency pole (the fourth by |p|: three low-frequency poles of C1,
    // CE and C2 come first) moves down with f_H.
    row_shows(&cells(&out, "pole 4 |p|"), "Hz", pole(&before, 3), pole(&after, 3), "pole 4");
    assert!(f_high(&after) < f_high(&before) && pole(&after, 3) < pole(&before, 3));
    assert!(!out.contains("requirements that changed status"), "{out}");

    // The same report, written through the change template.
    let md = read(&dir.join("chg"), "change.md");
    assert!(
        md.contains(
            "| changed | RC | resistor, 4.7 kΩ, ±1 % uniform, vcc–coll | resistor, 5.6 kΩ, ±1 % uniform, vcc–coll |"
        ),
        "{md}"
    );
    let f_h = md_cells(&md, "f\\_H exact");
    row_shows(&f_h, "Hz", f_high(&before), f_high(&after), "f_H in change.md");
    row_shows(
        &md_cells(&md, "R\\_out"),
        "Ω",
        par(4.7e3, r_o),
        par(5.6e3, r_o),
        "R_out in change.md",
    );
    assert!(md.contains("No requirement changed between pass and fail"), "{md}");
    let html = read(&dir.join("chg"), "change.html");
    // The HTML aligns the column on the decimal point: integer part and rest in two cells,
    // the number held to its unit by a no-break space.
    let at = f_h[1].find('.').unwrap_or(f_h[1].len());
    let (int, rest) = f_h[1].split_at(at);
    let cells = format!(
        "f_H exact</td><td class=\"int\">{int}</td><td class=\"frac\">{}</td>",
        rest.replace(' ', "&nbsp;")
    );
    assert!(html.contains(&cells) && html.contains("Change review"), "{cells}\n{html}");

    // Identical revisions: nothing moved.
    let same = run_in(&dir, &["diff", "rev-a.yaml", "rev-a.yaml", "--runs", "50", "--no-write"]);
    let out = String::from_utf8_lossy(&same.stdout);
    assert!(
        out.contains("no part, model or setting changed") && out.contains("what moved\n  nothing"),
        "{out}"
    );
}

#[test]
fn a_requirement_that_starts_failing_comes_first_and_exits_1() {
    // 2.2 kΩ lifts the gain past the design's 23 dB ceiling and R_out past 1.2 kΩ. From the
    // parts (common practice, degenerated common emitter; I_C ≈ 4.2 mA and V_A = 70 V as in
    // the design, so r_o = (V_A + V_CE)/I_C ≈ 17 kΩ): the gain goes with R_L' = RC ∥ 1 kΩ ∥ r_o,
    // 486 Ω → 661 Ω, +2.7 dB on the 20.6 dB rev C renders at; R_out ≈ RC ∥ r_o goes from
    // 0.94 kΩ to 1.94 kΩ. V_CE falls to about 1.1 V: still active.
    let dir = demo_revisions("diff-fail", "2k2");
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
    let status_section = &out[status..out.find("parts, models and settings").unwrap()];
    assert!(
        !status_section.contains("input resistance"),
        "a requirement that still passes is listed\n{out}"
    );
}

#[test]
fn an_earlier_results_json_can_be_the_old_side() {
    let dir = linear_revisions("diff-json");
    let r =
        run_in(&dir, &["render", "rev-a.yaml", "--format", "json", "--runs", "50", "--out", "a"]);
    assert_eq!(r.status.code(), Some(0), "{}", String::from_utf8_lossy(&r.stderr));
    let o = run_in(&dir, &["diff", "a/results.json", "rev-b.yaml", "--runs", "50", "--no-write"]);
    let out = String::from_utf8_lossy(&o.stdout);
    assert_eq!(o.status.code(), Some(0), "{out}{}", String::from_utf8_lossy(&o.stderr));
    assert!(out.contains("not compared: one side is a results.json"), "{out}");
    // The cut-off on both sides, from the independent reference (mna_reference.py).
    let (before, after) =
        (reference_results(&dir.join("rev-a.yaml")), reference_results(&dir.join("rev-b.yaml")));
    row_shows(&cells(&out, "f_H exact"), "Hz", f_high(&before), f_high(&after), "f_H");
    // JSON that is not a tauweave results.json is refused, not compared.
    std::fs::write(dir.join("other.json"), "{\"a\": 1}").unwrap();
    let bad = run_in(&dir, &["diff", "other.json", "rev-b.yaml", "--no-write"]);
    assert_eq!(bad.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&bad.stderr).contains("not a tauweave results.json"));
}

#[test]
fn the_change_template_is_replaceable() {
    let dir = demo_revisions("diff-template", "1k2");
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
    // Exit 0 or 1 (whether a corner turned is not this test's business), never 2: the
    // user's template rendered.
    assert!(matches!(o.status.code(), Some(0 | 1)), "{}", String::from_utf8_lossy(&o.stderr));
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
    let (appeared, pair) = (cells(&out, "pole 2 |p|"), cells(&out, "pole 3 |p|"));
    assert!(appeared[1] == "—" && appeared[2].ends_with("MHz"), "{appeared:?}");
    assert!(pair[1].contains(", Q ") && !pair[2].contains('Q'), "{pair:?}");
    // The low-frequency pole stays paired with itself.
    assert!(cells(&out, "pole 1 |p|")[1].ends_with(" Hz"), "{out}");
}

/// Issue 12, item 5: a requirement that still passes at nominal values but whose tolerance
/// corner turns to fail is a status change, listed first, and the diff exits 1. Here the
/// output-resistance limit is moved to sit between the two revisions' worst corners, so the
/// verdict follows from the limit, not from a value copied from the tool: R_out ≈ RC ∥ r_o
/// rises with RC (common practice), and the later revision's corner lies above its nominal.
#[test]
fn a_corner_that_starts_failing_is_a_status_change_issue_12() {
    let dir = demo_revisions("diff-corner", "1k1");
    // Both nominal R_out values stay below 1.2 kΩ (RC ∥ r_o < RC ≤ 1.1 kΩ), so only a corner
    // can cross a limit set just above the later nominal value.
    let later =
        run_in(&dir, &["render", "rev-d.yaml", "--format", "json", "--runs", "0", "--out", "d"]);
    assert_eq!(later.status.code(), Some(0), "{}", String::from_utf8_lossy(&later.stderr));
    let results: serde_json::Value =
        serde_json::from_str(&read(&dir.join("d"), "results.json")).unwrap();
    let r_out = results["midband"]["output_resistance_ohm"].as_f64().unwrap();
    let req = results["requirements"].as_array().unwrap();
    let corner =
        req.iter().find(|r| r["name"] == "output_resistance").unwrap()["corner"].as_f64().unwrap();
    assert!(corner > r_out, "the high corner lies above the nominal value");
    let limit = (r_out + corner) / 2.0;
    for name in ["rev-c.yaml", "rev-d.yaml"] {
        let text = std::fs::read_to_string(dir.join(name)).unwrap();
        let moved = text.replace(
            "output_resistance: {max: 1.2 kΩ}",
            &format!("output_resistance: {{max: {limit}}}"),
        );
        assert_ne!(moved, text, "the limit line is in the design");
        std::fs::write(dir.join(name), moved).unwrap();
    }
    let o = run_in(&dir, &["diff", "rev-c.yaml", "rev-d.yaml", "--runs", "0", "--no-write"]);
    let out = String::from_utf8_lossy(&o.stdout);
    assert_eq!(o.status.code(), Some(1), "{out}");
    let status = out.find("requirements that changed status").expect("status section");
    let section = &out[status..out.find("parts, models and settings").unwrap()];
    let line = section.lines().find(|l| l.contains("output resistance, worst corner")).expect(&out);
    assert!(line.contains("pass") && line.ends_with("FAIL"), "{line}");
}

/// Issue 12, item 5: the change report draws both responses over each other — from the
/// analyses of two design files, or from the sweep.csv a render wrote beside its
/// results.json — and leaves the drawing out, quietly, when one side's response is unknown.
/// The traces are the two sweeps: the later one's largest |H| is the later sweep.csv's.
#[test]
fn the_change_report_overlays_both_responses() {
    let dir = linear_revisions("diff-overlay");
    let o = run_in(&dir, &["diff", "rev-a.yaml", "rev-b.yaml", "--runs", "0", "--out", "c"]);
    assert_eq!(o.status.code(), Some(0), "{}", String::from_utf8_lossy(&o.stderr));
    let html = read(&dir.join("c"), "change.html");
    assert!(html.contains("id=\"plot-bode_overlay\""), "the overlay is in change.html");
    assert!(html.contains("rev A (earlier)") && html.contains("rev B (later)"), "a legend");
    let md = read(&dir.join("c"), "change.md");
    assert!(md.contains("](plots/bode_overlay.svg)"), "{md}");
    assert!(dir.join("c/plots/bode_overlay.svg").is_file());

    // An earlier render as the old side: its sweep.csv is drawn; without it, no overlay.
    let r =
        run_in(&dir, &["render", "rev-a.yaml", "--format", "json", "--runs", "0", "--out", "a"]);
    assert_eq!(r.status.code(), Some(0), "{}", String::from_utf8_lossy(&r.stderr));
    let o = run_in(&dir, &["diff", "a/results.json", "rev-b.yaml", "--runs", "0", "--out", "j"]);
    assert_eq!(o.status.code(), Some(0), "{}", String::from_utf8_lossy(&o.stderr));
    assert!(read(&dir.join("j"), "change.html").contains("id=\"plot-bode_overlay\""));
    std::fs::remove_file(dir.join("a/sweep.csv")).unwrap();
    let o = run_in(&dir, &["diff", "a/results.json", "rev-b.yaml", "--runs", "0", "--out", "k"]);
    assert_eq!(o.status.code(), Some(0), "{}", String::from_utf8_lossy(&o.stderr));
    assert!(!read(&dir.join("k"), "change.html").contains("plot-bode_overlay"));
    assert!(!dir.join("k/plots").exists());
}
