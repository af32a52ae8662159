//! A design group's workflow: many designs per call, the project file (house style,
//! archived with each render), and the CI reports (JUnit XML read by junitparser from PyPI,
//! JSON for scripts).

use std::path::{Path, PathBuf};

use crate::support::{files, python, root, run_in, scratch};

/// Every file under `dir`, relative path → bytes.
fn tree(dir: &Path) -> Vec<(String, Vec<u8>)> {
    fn walk(base: &Path, dir: &Path, out: &mut Vec<(String, Vec<u8>)>) {
        for e in std::fs::read_dir(dir).unwrap() {
            let p = e.unwrap().path();
            if p.is_dir() {
                walk(base, &p, out);
            } else {
                let rel = p.strip_prefix(base).unwrap().display().to_string();
                out.push((rel, std::fs::read(&p).unwrap()));
            }
        }
    }
    let mut out = Vec::new();
    walk(dir, dir, &mut out);
    out.sort();
    out
}

fn text(bytes: &[u8]) -> String {
    String::from_utf8_lossy(bytes).into_owned()
}

/// The four examples copied into `dir/designs`.
fn examples_into(dir: &Path) -> Vec<PathBuf> {
    let designs = dir.join("designs");
    std::fs::create_dir_all(&designs).unwrap();
    files(&root().join("designs"), "yaml")
        .into_iter()
        .map(|p| {
            let to = designs.join(p.file_name().unwrap());
            std::fs::copy(&p, &to).unwrap();
            to
        })
        .collect()
}

/// A copy of the demo design that fails its upper cut-off requirement at nominal values.
fn failing_copy(to: &Path) {
    let demo = std::fs::read_to_string(root().join("designs/rx-preamp-ce.yaml")).unwrap();
    assert!(demo.contains("upper_cutoff: {min: 900 kHz}"));
    let failing = demo
        .replace("upper_cutoff: {min: 900 kHz}", "upper_cutoff: {min: 9 MHz}")
        .replace("  id: rx-preamp-ce\n", "  id: rx-preamp-failing\n");
    std::fs::write(to, failing).unwrap();
}

#[test]
fn a_batch_writes_each_folder_as_a_single_render_would_and_exits_with_the_worst_status() {
    let dir = scratch("batch-render");
    let designs = examples_into(&dir);
    assert_eq!(designs.len(), 4, "the four examples");
    let o =
        run_in(&dir, &["render", "designs", "--format", "md", "--runs", "20", "--out", "batch"]);
    let stdout = text(&o.stdout);
    assert_eq!(o.status.code(), Some(0), "{stdout}{}", text(&o.stderr));
    assert!(stdout.contains("4 designs rendered: 4 pass, 0 fail"), "{stdout}");
    for design in &designs {
        let id = std::fs::read_to_string(design)
            .unwrap()
            .lines()
            .find_map(|l| l.strip_prefix("  id: ").map(str::to_string))
            .unwrap();
        let single = dir.join("single").join(&id);
        let o = run_in(
            &dir,
            &[
                "render",
                design.to_str().unwrap(),
                "--format",
                "md",
                "--runs",
                "20",
                "--out",
                single.to_str().unwrap(),
            ],
        );
        assert_eq!(o.status.code(), Some(0), "{}", text(&o.stderr));
        let (a, b) = (tree(&single), tree(&dir.join("batch").join(&id)));
        assert!(!a.is_empty());
        assert_eq!(
            a.iter().map(|(p, _)| p).collect::<Vec<_>>(),
            b.iter().map(|(p, _)| p).collect::<Vec<_>>()
        );
        for ((path, x), (_, y)) in a.iter().zip(&b) {
            assert!(x == y, "{id}/{path} differs between the batch and a single render");
        }
    }

    // A design failing a requirement makes the batch exit 1; a broken one, 2. The others are
    // still written, and the summary counts each kind.
    failing_copy(&dir.join("designs/failing.yaml"));
    let o = run_in(&dir, &["render", "designs", "--format", "json", "--runs", "0", "--out", "b2"]);
    let stdout = text(&o.stdout);
    assert_eq!(o.status.code(), Some(1), "{stdout}");
    assert!(stdout.contains("5 designs rendered: 4 pass, 1 fail"), "{stdout}");
    assert!(stdout.contains("fails   "), "{stdout}");
    std::fs::write(dir.join("designs/broken.yaml"), "tauweave: 1\ndesign: {id: x}\n").unwrap();
    let o = run_in(&dir, &["render", "designs", "--format", "json", "--runs", "0", "--out", "b3"]);
    let stdout = text(&o.stdout);
    assert_eq!(o.status.code(), Some(2), "{stdout}");
    assert!(
        stdout.contains(
            "6 designs rendered: 4 pass, 1 fail a requirement at nominal values, 1 not rendered"
        ),
        "{stdout}"
    );
    assert!(text(&o.stderr).contains("the design has no signal source"), "the message is shown");
    assert!(dir.join("b3/rx-preamp-ce/results.json").is_file());
    // A pattern the shell left alone is expanded by tauweave.
    let o = run_in(&dir, &["check", "designs/if-*.yaml", "designs/post*.yaml", "--runs", "0"]);
    let stdout = text(&o.stdout);
    assert_eq!(o.status.code(), Some(0), "{stdout}{}", text(&o.stderr));
    assert!(stdout.contains("2 designs checked: 2 pass"), "{stdout}");
}

#[test]
fn verify_over_an_archive_tree_counts_identical_and_changed_folders() {
    let dir = scratch("batch-verify");
    examples_into(&dir);
    let o = run_in(
        &dir,
        &["render", "designs", "--format", "md", "--runs", "10", "--out", "archive/rev-a"],
    );
    assert_eq!(o.status.code(), Some(0), "{}", text(&o.stderr));
    let o = run_in(&dir, &["verify", "archive"]);
    let stdout = text(&o.stdout);
    assert_eq!(o.status.code(), Some(0), "{stdout}{}", text(&o.stderr));
    assert!(stdout.contains("4 folders verified: 4 identical, 0 changed"), "{stdout}");
    // One byte changed in one report: that folder is changed, the rest identical, exit 1.
    let report = dir.join("archive/rev-a/if-cascode/report.md");
    let mut bytes = std::fs::read(&report).unwrap();
    bytes[10] ^= 1;
    std::fs::write(&report, bytes).unwrap();
    let o = run_in(&dir, &["verify", "archive"]);
    let stdout = text(&o.stdout);
    assert_eq!(o.status.code(), Some(1), "{stdout}");
    assert!(
        stdout.contains("4 folders verified: 3 identical, 1 changed, 0 incomplete"),
        "{stdout}"
    );
    assert!(stdout.contains("report.md: differs from the rebuild"), "{stdout}");
}

/// junitparser's reading of a JUnit file.
fn junit(path: &Path) -> serde_json::Value {
    let out = python(&["tests/ci/junit_read.py", path.to_str().unwrap()]);
    assert!(
        out.status.success(),
        "junitparser could not read the report (run scripts/test, which installs it):\n{}",
        text(&out.stderr)
    );
    serde_json::from_slice(&out.stdout).unwrap()
}

#[test]
fn the_junit_report_reads_in_a_common_parser_and_lists_a_failing_requirement_as_a_failure() {
    let dir = scratch("junit");
    std::fs::create_dir_all(dir.join("designs")).unwrap();
    std::fs::copy(root().join("designs/rx-preamp-ce.yaml"), dir.join("designs/demo.yaml")).unwrap();
    let failing = dir.join("designs/failing.yaml");
    failing_copy(&failing);
    // A yield target makes the yield cases judged: 0 % of runs reach 9 MHz.
    let with_target = std::fs::read_to_string(&failing)
        .unwrap()
        .replace("monte_carlo: {", "monte_carlo: {min_yield: 99 %, ");
    assert!(with_target.contains("min_yield: 99 %"));
    std::fs::write(&failing, with_target).unwrap();
    std::fs::write(dir.join("designs/broken.yaml"), "tauweave: 1\ndesign: {id: x}\n").unwrap();

    let report = dir.join("check.xml");
    let o = run_in(
        &dir,
        &["check", "designs", "--runs", "30", "--report", "junit", report.to_str().unwrap()],
    );
    // Exit codes are those of a batch: the broken design is the worst.
    assert_eq!(o.status.code(), Some(2), "{}", text(&o.stderr));
    let j = junit(&report);
    let suites = j["suites"].as_array().unwrap();
    assert_eq!(suites.len(), 3, "one suite per design");
    let suite = |name: &str| {
        suites.iter().find(|s| s["name"] == name).unwrap_or_else(|| panic!("{name}: {j}"))
    };
    let cases = |s: &serde_json::Value| s["cases"].as_array().unwrap().clone();
    let outcome = |s: &serde_json::Value, case: &str| {
        cases(s).into_iter().find(|c| c["name"] == case).unwrap_or_else(|| panic!("{case}"))["outcome"]
            .as_str()
            .unwrap()
            .to_string()
    };
    // The failing design: its upper cut-off fails at nominal values, at its corner and in
    // yield against the 99 % target; its gain passes all three.
    let bad = suite("rx-preamp-failing");
    assert_eq!(outcome(bad, "upper_cutoff at nominal values"), "failure");
    assert_eq!(outcome(bad, "upper_cutoff at the worst tolerance corner"), "failure");
    assert_eq!(outcome(bad, "upper_cutoff Monte Carlo yield"), "failure");
    assert_eq!(outcome(bad, "midband_gain at nominal values"), "passed");
    assert_eq!(outcome(bad, "midband_gain Monte Carlo yield"), "passed");
    // The demo passes everything; without a yield target its yields are reported, skipped.
    let good = suite("rx-preamp-ce");
    assert!(cases(good).iter().all(|c| c["outcome"] != "failure"), "{good}");
    assert_eq!(outcome(good, "upper_cutoff Monte Carlo yield"), "skipped");
    // Three cases per requirement; the suite's counts are those of its cases.
    let demo = std::fs::read_to_string(root().join("designs/rx-preamp-ce.yaml")).unwrap();
    let limited = demo
        .split("requirements:")
        .nth(1)
        .unwrap()
        .split("\n\n")
        .next()
        .unwrap()
        .lines()
        .filter(|l| l.contains("{"))
        .count();
    assert_eq!(cases(good).len(), 3 * limited);
    for s in suites {
        let count = |o: &str| cases(s).iter().filter(|c| c["outcome"] == o).count() as u64;
        assert_eq!(s["tests"].as_u64(), Some(cases(s).len() as u64));
        assert_eq!(s["failures"].as_u64(), Some(count("failure")));
        assert_eq!(s["errors"].as_u64(), Some(count("error")));
    }
    // The broken design is one case in error.
    let broken = suites.iter().find(|s| s["errors"] == 1).unwrap();
    assert_eq!(cases(broken).len(), 1);

    // The same verdicts as JSON for scripts, on standard output.
    let o =
        run_in(&dir, &["check", "designs/failing.yaml", "--runs", "30", "--report", "json", "-"]);
    assert_eq!(o.status.code(), Some(1));
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).expect("only JSON on stdout");
    let d = &v["designs"][0];
    assert_eq!(d["status"], "fails");
    assert_eq!(d["failing"], serde_json::json!(["upper_cutoff"]));
    assert_eq!(d["failing_yield"], serde_json::json!(["upper_cutoff"]));
    assert_eq!(v["total"]["fails"], 1);
}

#[test]
fn diff_writes_its_comparison_as_json_for_scripts() {
    let dir = scratch("diff-json");
    let old = root().join("designs/rx-preamp-ce.yaml");
    let new = dir.join("failing.yaml");
    failing_copy(&new);
    let o = run_in(
        &dir,
        &[
            "diff",
            old.to_str().unwrap(),
            new.to_str().unwrap(),
            "--runs",
            "0",
            "--no-write",
            "--report",
            "json",
            "-",
        ],
    );
    assert_eq!(o.status.code(), Some(1), "exit codes unchanged: a requirement now fails");
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).expect("only JSON on stdout");
    assert_eq!(v["now_failing"], true);
    assert_eq!(v["status_changes"][0]["requirement"], "upper_cutoff");
    assert_eq!(v["tool"]["name"], "tauweave");
}

const PROJECT: &str = "tauweave: 1
organisation: Example Works
document_number: \"EW-{year}-{id}-{revision}\"
approvals:
  - {role: Designed, name: A. Person}
  - {role: Approved}
logo: brand/logo.svg
template: templates/house.md
paper: us-letter
tolerances:
  resistor: 2 %
  capacitor: 20 %
requirement_sets:
  front-end:
    upper_cutoff: {min: 900 kHz}
    lower_cutoff: {max: 1 MHz}
";

const TEMPLATE: &str = "# {{ design.title }}

House review {{ design.title_block.document_number }} for {{ design.title_block.organisation }}.

{{ plot(name=\"logo\") }}

{{ table(name=\"requirements\") }}
";

#[test]
fn a_project_file_above_the_design_sets_the_house_style_and_is_archived_with_the_render() {
    let dir = scratch("project");
    let team = dir.join("team");
    std::fs::create_dir_all(team.join("brand")).unwrap();
    std::fs::create_dir_all(team.join("templates")).unwrap();
    std::fs::create_dir_all(team.join("stages/rx")).unwrap();
    std::fs::write(team.join("tauweave-project.yaml"), PROJECT).unwrap();
    std::fs::write(team.join("templates/house.md"), TEMPLATE).unwrap();
    let logo = "<svg xmlns=\"http://www.w3.org/2000/svg\" width=\"40\" height=\"20\"><rect width=\"40\" height=\"20\"/></svg>";
    std::fs::write(team.join("brand/logo.svg"), logo).unwrap();
    // The demo without its own requirements but for the gain, taking the project's set.
    let demo = std::fs::read_to_string(root().join("designs/rx-preamp-ce.yaml")).unwrap();
    let own = demo.split("requirements:\n").nth(1).unwrap().split("\n\n").next().unwrap();
    let gain = own.lines().find(|l| l.contains("midband_gain")).unwrap();
    // Its own resistor tolerance taken out (the house's applies), its capacitor one kept
    // (the design's own wins over the house's).
    let design = demo
        .replace(own, &format!("  include: [front-end]\n{gain}"))
        .replace("tolerances:\n  resistor: 1 %\n", "tolerances:\n");
    assert!(design.contains("include: [front-end]"));
    assert!(design.contains("tolerances:\n  capacitor: {tolerance: 10 %"));
    let design_path = team.join("stages/rx/stage.yaml");
    std::fs::write(&design_path, &design).unwrap();

    let out = dir.join("out/stage");
    let o = run_in(
        &dir,
        &[
            "render",
            design_path.to_str().unwrap(),
            "--format",
            "md",
            "--runs",
            "10",
            "--out",
            out.to_str().unwrap(),
        ],
    );
    assert_eq!(o.status.code(), Some(0), "{}", text(&o.stderr));
    // The house template, with the title block filled in (date 2026-11-20, revision C).
    let report = std::fs::read_to_string(out.join("report.md")).unwrap();
    assert!(report.contains("House review EW-2026-rx-preamp-ce-C for Example Works."), "{report}");
    assert!(report.contains("inputs/logo.svg"), "the logo is placed: {report}");
    let results: serde_json::Value =
        serde_json::from_slice(&std::fs::read(out.join("results.json")).unwrap()).unwrap();
    // The set's requirements are judged beside the design's own.
    let names: Vec<&str> = results["requirements"]
        .as_array()
        .unwrap()
        .iter()
        .map(|r| r["name"].as_str().unwrap())
        .collect();
    assert!(
        names.contains(&"upper_cutoff")
            && names.contains(&"lower_cutoff")
            && names.contains(&"midband_gain"),
        "{names:?}"
    );
    // The house resistor tolerance applies where the design gives none of its own; the
    // design's own capacitor tolerance wins over the house's.
    let levers = results["sensitivity"]["levers"].as_array().unwrap();
    // RC and C1 give no tolerance of their own; RB1 gives 5 %, which stays.
    let of = |name: &str| {
        levers.iter().find(|l| l["name"] == name).unwrap()["tolerance"]["fraction"].as_f64()
    };
    assert_eq!(of("RC"), Some(0.02));
    assert_eq!(of("RB1"), Some(0.05));
    assert_eq!(of("C1"), Some(0.10));
    // Everything the project contributed is archived and hashed.
    let manifest: serde_json::Value =
        serde_json::from_slice(&std::fs::read(out.join("manifest.json")).unwrap()).unwrap();
    assert_eq!(manifest["paper"], "us-letter");
    for input in
        ["inputs/project.yaml", "inputs/logo.svg", "inputs/template.md", "inputs/design.yaml"]
    {
        assert!(manifest["inputs"][input].is_string(), "{input} archived: {manifest}");
    }
    assert_eq!(std::fs::read_to_string(out.join("inputs/project.yaml")).unwrap(), PROJECT);

    // The project file, its template and logo gone: the folder still rebuilds byte for byte.
    std::fs::remove_dir_all(&team).unwrap();
    let o = run_in(&dir, &["verify", out.to_str().unwrap()]);
    assert_eq!(o.status.code(), Some(0), "{}{}", text(&o.stdout), text(&o.stderr));
    assert!(text(&o.stdout).starts_with("identical"));
}

#[test]
fn the_house_example_reads_under_its_project_file() {
    let example = root().join("designs/house/post-amp-cs-house.yaml");
    let o = run_in(&root(), &["check", example.to_str().unwrap(), "--runs", "0"]);
    let stdout = text(&o.stdout);
    assert_eq!(o.status.code(), Some(0), "{stdout}{}", text(&o.stderr));
    assert!(stdout.contains("read under the project file"), "{stdout}");
    // The set's three requirements join the design's own two.
    assert!(stdout.contains("requirements    5"), "{stdout}");
    // Copied away from its project file, the include has nothing to name.
    let dir = scratch("house-alone");
    let alone = dir.join("alone.yaml");
    std::fs::copy(&example, &alone).unwrap();
    let o = run_in(&dir, &["check", alone.to_str().unwrap()]);
    assert_eq!(o.status.code(), Some(2));
    assert!(text(&o.stderr).contains("no project file"), "{}", text(&o.stderr));
}

#[test]
fn project_file_mistakes_are_located_in_the_project_file_with_a_hint() {
    let dir = scratch("project-bad");
    let design = dir.join("stage.yaml");
    let demo = std::fs::read_to_string(root().join("designs/rx-preamp-ce.yaml")).unwrap();
    let cases = [
        // (project text, design change, what the message must hold)
        (
            "tauweave: 1\ndocument_number: \"X-{rev}\"\n",
            None,
            vec!["tauweave-project.yaml:2:", "did you mean `{revision}`"],
        ),
        ("tauweave: 1\npaper: a3\n", None, vec!["tauweave-project.yaml:2:", "a4", "us-letter"]),
        ("tauweave: 1\norganisaton: X\n", None, vec!["tauweave-project.yaml:2:", "organisation"]),
        (
            "tauweave: 1\nrequirement_sets:\n  front-end: {upper_cutoff: {min: 1 MHz}}\n",
            Some("  include: [frontend]\n"),
            vec!["stage.yaml:", "no requirement set `frontend`", "did you mean `front-end`"],
        ),
        (
            "tauweave: 1\nrequirement_sets:\n  wideband: {gain_flatness: {max: 1 dB}}\n",
            Some("  include: [wideband]\n"),
            vec!["stage.yaml:", "needs an operating band"],
        ),
    ];
    for (project, change, expect) in cases {
        std::fs::write(dir.join("tauweave-project.yaml"), project).unwrap();
        let mut text_of_design = demo.clone();
        if let Some(line) = change {
            text_of_design =
                text_of_design.replace("requirements:\n", &format!("requirements:\n{line}"));
            // The flatness case needs a design without a band.
            if line.contains("wideband") {
                let band = text_of_design
                    .lines()
                    .find(|l| l.trim_start().starts_with("band:"))
                    .unwrap()
                    .to_string();
                text_of_design = text_of_design.replace(&format!("{band}\n"), "");
                let own_flatness = text_of_design
                    .lines()
                    .find(|l| l.contains("gain_flatness"))
                    .map(str::to_string);
                if let Some(f) = own_flatness {
                    text_of_design = text_of_design.replace(&format!("{f}\n"), "");
                }
            }
        }
        std::fs::write(&design, &text_of_design).unwrap();
        let o = run_in(&dir, &["check", design.to_str().unwrap(), "--runs", "0"]);
        let stderr = text(&o.stderr);
        assert_eq!(o.status.code(), Some(2), "{project}: {stderr}");
        for fragment in expect {
            assert!(stderr.contains(fragment), "{project}: `{fragment}` missing from:\n{stderr}");
        }
    }
}

/// The house example's template is the built-in review with one section added (its hand
/// analysis of a common-source stage): kept in step with the built-in one.
#[test]
fn the_house_template_is_the_built_in_review_plus_its_hand_analysis() {
    let house = std::fs::read_to_string(root().join("designs/house/review-house.md")).unwrap();
    let built_in = std::fs::read_to_string(root().join("templates/review.md")).unwrap();
    let start = house.find("## Hand analysis").expect("the section");
    let end =
        start + house[start..].find("## Upper cut-off").expect("followed by the upper cut-off");
    let body = house.split_once("#}\n").expect("the header comment").1;
    let without = body.replace(&house[start..end], "");
    assert_eq!(without, built_in, "update designs/house/review-house.md from templates/review.md");
    // And it works: the house stage's gain by the usual formula agrees with the engine.
    let o = run_in(&root(), &["check", "designs/house/post-amp-cs-house.yaml", "--runs", "0"]);
    let stdout = text(&o.stdout);
    assert!(stdout.contains("A_v = ") && stdout.contains("midband.gain"), "{stdout}");
}
