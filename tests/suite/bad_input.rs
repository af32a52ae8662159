//! The bad-input suite: every malformed design under tests/bad_input/ must be refused with
//! the diagnostics its `# expect:` lines name (code, line:column, a message fragment), exit
//! 2, print no panic or backtrace, and write nothing.

use tauweave::design;

use crate::support::{files, root, run_in, scratch};

struct Expect {
    code: String,
    line: u32,
    column: u32,
    fragment: String,
}

fn expectations(text: &str) -> Vec<Expect> {
    text.lines()
        .filter_map(|l| l.strip_prefix("# expect: "))
        .map(|rest| {
            let mut parts = rest.splitn(3, ' ');
            let code = parts.next().unwrap().trim_start_matches("tauweave::").to_string();
            let (line, column) = parts.next().unwrap().split_once(':').unwrap();
            Expect {
                code,
                line: line.parse().unwrap(),
                column: column.parse().unwrap(),
                fragment: parts.next().unwrap_or("").trim().to_string(),
            }
        })
        .collect()
}

fn fixtures() -> Vec<std::path::PathBuf> {
    files(&root().join("tests/bad_input"), "yaml")
}

#[test]
fn there_are_at_least_thirty_bad_inputs() {
    assert!(fixtures().len() >= 30, "only {} fixtures", fixtures().len());
}

#[test]
fn each_bad_input_reports_its_expected_diagnostics() {
    let mut failures = Vec::new();
    for path in fixtures() {
        let text = std::fs::read_to_string(&path).unwrap();
        let expected = expectations(&text);
        assert!(!expected.is_empty(), "{}: no `# expect:` lines", path.display());
        let loaded = design::load(&text);
        assert!(loaded.design.is_none(), "{}: accepted", path.display());
        if loaded.diagnostics.len() != expected.len() {
            let got: Vec<String> = loaded.diagnostics.iter().map(|d| d.one_line("")).collect();
            failures.push(format!(
                "{}: expected exactly {} diagnostics, got {}:\n    {}",
                path.file_name().unwrap().to_string_lossy(),
                expected.len(),
                got.len(),
                got.join("\n    ")
            ));
        }
        for e in &expected {
            let hit = loaded.diagnostics.iter().any(|d| {
                let words =
                    format!("{} {} {}", d.message, d.label, d.help.clone().unwrap_or_default());
                d.code == e.code
                    && d.span.line == e.line
                    && d.span.column == e.column
                    && words.to_lowercase().contains(&e.fragment.to_lowercase())
            });
            if !hit {
                let got: Vec<String> = loaded.diagnostics.iter().map(|d| d.one_line("")).collect();
                failures.push(format!(
                    "{}: expected {} at {}:{} with `{}`; got:\n    {}",
                    path.file_name().unwrap().to_string_lossy(),
                    e.code,
                    e.line,
                    e.column,
                    e.fragment,
                    got.join("\n    ")
                ));
            }
        }
    }
    assert!(failures.is_empty(), "{} mismatches:\n{}", failures.len(), failures.join("\n"));
}

#[test]
fn each_bad_input_exits_2_without_panic_and_writes_nothing() {
    for path in fixtures() {
        let name = path.file_stem().unwrap().to_string_lossy().to_string();
        let cwd = scratch(&format!("bad-{name}"));
        let before = std::fs::read(&path).unwrap();
        let out = run_in(&cwd, &["check", path.to_str().unwrap()]);
        let stderr = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(2), "{name}: exit {:?}\n{stderr}", out.status.code());
        assert!(
            !stderr.contains("panicked") && !stderr.contains("stack backtrace"),
            "{name}: {stderr}"
        );
        assert!(out.stdout.is_empty(), "{name}: printed a summary for a bad design");
        // Every expected place is shown as file:line:column in the report.
        let text = std::fs::read_to_string(&path).unwrap();
        for e in expectations(&text) {
            let place = format!("{}:{}:{}", path.display(), e.line, e.column);
            assert!(stderr.contains(&place), "{name}: `{place}` not in\n{stderr}");
            assert!(stderr.contains(&format!("tauweave::{}", e.code)), "{name}: code {}", e.code);
        }
        assert!(stderr.contains("nothing was written"), "{name}: {stderr}");
        let left: Vec<_> = std::fs::read_dir(&cwd).unwrap().collect();
        assert!(left.is_empty(), "{name}: wrote files into the working directory");
        // Nor does it touch the design it refused.
        assert_eq!(std::fs::read(&path).unwrap(), before, "{name}: the design file changed");
    }
}

#[test]
fn missing_file_is_exit_2_with_a_hint() {
    let cwd = scratch("missing-file");
    let out = run_in(&cwd, &["check", "no-such-design.yaml"]);
    assert_eq!(out.status.code(), Some(2));
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(stderr.contains("cannot read `no-such-design.yaml`"), "{stderr}");
    assert!(stderr.contains("help:"), "{stderr}");
}

#[test]
fn bad_usage_is_exit_2() {
    let cwd = scratch("bad-usage");
    assert_eq!(run_in(&cwd, &["frobnicate"]).status.code(), Some(2));
    assert_eq!(run_in(&cwd, &["check"]).status.code(), Some(2));
    assert_eq!(run_in(&cwd, &["--version"]).status.code(), Some(0));
    assert_eq!(run_in(&cwd, &["check", "--help"]).status.code(), Some(0));
}
