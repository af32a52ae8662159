//! `tauweave diff`: one resistor changed between two revisions shows exactly that part and
//! the results that moved, with the right signs.

use crate::support::{root, run_in, scratch};

#[test]
fn one_resistor_changed_shows_that_part_and_what_moved() {
    let dir = scratch("diff");
    let old = std::fs::read_to_string(root().join("designs/rx-preamp-ce.yaml")).unwrap();
    let new = old.replace("RC:  {kind: resistor, value: 1k0,", "RC:  {kind: resistor, value: 1k2,");
    assert_ne!(old, new, "the example's RC line changed; update this test");
    std::fs::write(dir.join("rev-c.yaml"), &old).unwrap();
    std::fs::write(dir.join("rev-d.yaml"), &new).unwrap();
    let o = run_in(&dir, &["diff", "rev-c.yaml", "rev-d.yaml", "--runs", "50"]);
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
    let row = |label: &str| {
        out.lines()
            .find(|l| l.trim_start().starts_with(label))
            .unwrap_or_else(|| panic!("no `{label}` in\n{out}"))
            .to_string()
    };
    // A larger collector resistor: more gain, a lower upper cut-off (its load sees more R),
    // a higher output resistance (common practice for a common-emitter stage).
    assert!(
        row("mid-band gain").trim_end().ends_with('%') && row("mid-band gain").contains("+9."),
        "{}",
        row("mid-band gain")
    );
    assert!(row("f_H exact").contains("−8."), "{}", row("f_H exact"));
    assert!(row("R_out").contains("+19."), "{}", row("R_out"));
    // Identical revisions: nothing moved.
    let same = run_in(&dir, &["diff", "rev-c.yaml", "rev-c.yaml", "--runs", "50"]);
    let out = String::from_utf8_lossy(&same.stdout);
    assert!(
        out.contains("no part or model changed") && out.contains("what moved\n  nothing"),
        "{out}"
    );
}
