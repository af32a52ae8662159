//! Hardening (issue 13): hostile or malformed inputs end in a clear, located error (exit 2)
//! or correct behaviour — never a panic, an abort or a hang — and a rendered folder is never
//! left half-written: a render swaps its whole folder in at the end, so a kill or a failed
//! write leaves the previous review verifying; `verify` trusts nothing the folder says.
//! Each test is named after the case it guards.

use std::path::{Path, PathBuf};
use std::process::{Command, Output, Stdio};
use std::time::Duration;

use crate::support::{binary, root, run_in, scratch};

fn demo() -> String {
    std::fs::read_to_string(root().join("designs/rx-preamp-ce.yaml")).unwrap()
}

/// The demo with `from` replaced by `to`, written into `dir` as `name`.
fn variant(dir: &Path, name: &str, from: &str, to: &str) -> PathBuf {
    let text = demo();
    assert!(text.contains(from), "the demo design no longer has `{from}`");
    let path = dir.join(name);
    std::fs::write(&path, text.replace(from, to)).unwrap();
    path
}

fn stderr(o: &Output) -> String {
    String::from_utf8_lossy(&o.stderr).to_string()
}

/// A located design error: `file:line:column` or the source excerpt's `╭─[file:line:col]`.
fn located(err: &str, file: &str) -> bool {
    err.contains(&format!("{file}:")) && err.lines().any(|l| l.contains(&format!("{file}:")))
}

const CABLE: &str = "cable_c: cable_length * cable_c_per_m";

#[test]
fn a_sweep_from_1e_300_hz_is_analysed_and_a_denser_one_refused() {
    let dir = scratch("hard-sweep");
    let sweep = "sweep: {start: 100 Hz, stop: 1 GHz, points_per_decade: 40}";
    // stop/start overflows f64; the grid is built from the logs of the ends.
    let far = variant(
        &dir,
        "far.yaml",
        sweep,
        "sweep: {start: 1e-300 Hz, stop: 1 GHz, points_per_decade: 40}",
    );
    let o = run_in(&dir, &["check", far.to_str().unwrap(), "--runs", "0"]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    // 1000 a decade over 309 decades is past the bound: a located error, not an allocation.
    let dense = variant(
        &dir,
        "dense.yaml",
        sweep,
        "sweep: {start: 1e-300 Hz, stop: 1 GHz, points_per_decade: 1000}",
    );
    let o = run_in(&dir, &["check", dense.to_str().unwrap(), "--runs", "0"]);
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
    assert!(stderr(&o).contains("more than the 20000 allowed"), "{}", stderr(&o));
    assert!(located(&stderr(&o), "dense.yaml"), "{}", stderr(&o));
}

#[test]
fn ten_thousand_nested_parentheses_and_a_hundred_thousand_minus_signs_are_located_errors() {
    let dir = scratch("hard-expression");
    let deep = format!(
        "cable_c: {}cable_length{} * cable_c_per_m",
        "(".repeat(10_000),
        ")".repeat(10_000)
    );
    let signs = format!("cable_c: {}cable_length * cable_c_per_m", "-".repeat(100_000));
    let nested =
        format!("cable_c: {}cable_length{} * cable_c_per_m", "(".repeat(60), ")".repeat(60));
    for (name, line, says) in [
        ("parens.yaml", deep, "longer than 1000 characters"),
        ("signs.yaml", signs, "longer than 1000 characters"),
        ("nested.yaml", nested, "nested more than 50 deep"),
    ] {
        let path = variant(&dir, name, CABLE, &line);
        let o = run_in(&dir, &["check", path.to_str().unwrap(), "--runs", "0"]);
        assert_eq!(o.status.code(), Some(2), "{name}: {}", stderr(&o));
        assert!(stderr(&o).contains(says), "{name}: {}", stderr(&o));
        assert!(located(&stderr(&o), name), "{name}: {}", stderr(&o));
        // A line of 20 000 characters is named, not printed.
        assert!(stderr(&o).len() < 5_000, "{name}: {} bytes of stderr", stderr(&o).len());
    }
}

/// Renders the demo through `template` (text) with no Monte Carlo and Markdown only.
fn render_template(dir: &Path, name: &str, template: &str) -> Output {
    let path = dir.join(name);
    std::fs::write(&path, template).unwrap();
    let design = root().join("designs/rx-preamp-ce.yaml");
    let out = dir.join(format!("out-{name}"));
    run_in(
        dir,
        &["render", design.to_str().unwrap(), "--template", path.to_str().unwrap()]
            .into_iter()
            .chain(["--runs", "0", "--format", "md", "--out", out.to_str().unwrap()])
            .collect::<Vec<_>>(),
    )
}

#[test]
fn template_filter_digits_out_of_range_are_located_errors() {
    let dir = scratch("hard-digits");
    for (k, call) in [
        "high.f3db_hz | sig(digits=1000000)",
        "midband.gain | db(digits=100000)",
        "high.f3db_hz | sig(digits=-1)",
        "high.f3db_hz | percent(digits=4294967296)",
        "high.f3db_hz | si(unit=\"Hz\", digits=-5)",
    ]
    .iter()
    .enumerate()
    {
        let o = render_template(&dir, &format!("t{k}.md"), &format!("# T\n\n{{{{ {call} }}}}\n"));
        assert_eq!(o.status.code(), Some(2), "{call}: {}", stderr(&o));
        assert!(stderr(&o).contains(&format!("t{k}.md:3:")), "{call}: {}", stderr(&o));
        assert!(stderr(&o).contains("digits"), "{call}: {}", stderr(&o));
    }
}

#[test]
fn nested_range_loops_are_stopped_by_the_range_budget() {
    let dir = scratch("hard-range");
    let loops = "# T\n{% for i in range(end=20000) %}{% for j in range(end=20000) %}\
                 xxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxx{% endfor %}{% endfor %}\n";
    let o = render_template(&dir, "loops.md", loops);
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
    assert!(stderr(&o).contains("more than 100000 values"), "{}", stderr(&o));
    assert!(stderr(&o).contains("loops.md:2:"), "{}", stderr(&o));
    // Loops over literal lists, no range() at all: the output bound stops them as they grow.
    let list = format!("[{}]", vec!["1"; 3000].join(","));
    let literal = format!(
        "# T\n{{% for a in {list} %}}{{% for b in {list} %}}{}{{% endfor %}}{{% endfor %}}\n",
        "x".repeat(100)
    );
    let o = render_template(&dir, "literal.md", &literal);
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
    assert!(stderr(&o).contains("rendered more than the 16777216 bytes"), "{}", stderr(&o));
    // A loop within the budget still works, with the engine's own arguments.
    let o = render_template(
        &dir,
        "small.md",
        "# T\n{% for i in range(end=0, start=10, step_by=-3) %}{{ i }} {% endfor %}\n",
    );
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    let md = std::fs::read_to_string(dir.join("out-small.md/report.md")).unwrap();
    assert!(md.contains("10 7 4 1"), "{md}");
}

/// Renders the demo into `dir/name` (everything but Monte Carlo) and checks it verifies.
fn rendered(dir: &Path, name: &str, format: &str) -> PathBuf {
    let design = root().join("designs/rx-preamp-ce.yaml");
    let out = dir.join(name);
    let o = run_in(
        dir,
        &["render", design.to_str().unwrap(), "--runs", "20", "--format", format, "--out", name],
    );
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    out
}

fn verify(dir: &Path) -> (Option<i32>, String, String) {
    let o = run_in(dir.parent().unwrap(), &["verify", dir.to_str().unwrap()]);
    (o.status.code(), String::from_utf8_lossy(&o.stdout).to_string(), stderr(&o))
}

fn edit_manifest(dir: &Path, f: impl FnOnce(&mut serde_json::Value)) {
    let path = dir.join("manifest.json");
    let mut m: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(&path).unwrap()).unwrap();
    f(&mut m);
    std::fs::write(&path, serde_json::to_string_pretty(&m).unwrap()).unwrap();
}

#[test]
fn verify_catches_a_file_dropped_from_the_manifest_and_edited() {
    let dir = scratch("hard-verify-dropped");
    let out = rendered(&dir, "r", "html");
    edit_manifest(&out, |m| {
        m["outputs"].as_object_mut().unwrap().remove("report.html");
    });
    let html = std::fs::read_to_string(out.join("report.html")).unwrap();
    std::fs::write(out.join("report.html"), html.replacen("Longwave", "Shortwave", 1)).unwrap();
    let (code, text, _) = verify(&out);
    assert_eq!(code, Some(1), "{text}");
    assert!(text.contains("report.html: differs from the rebuild"), "{text}");
    assert!(text.contains("manifest.json: differs from the rebuild"), "{text}");
}

#[test]
fn verify_catches_files_added_to_the_folder_and_symlinks() {
    let dir = scratch("hard-verify-added");
    let out = rendered(&dir, "r", "json");
    std::fs::write(out.join("notes.txt"), "added later").unwrap();
    std::fs::create_dir_all(out.join("plots")).unwrap();
    std::fs::write(out.join("plots/extra.svg"), "<svg/>").unwrap();
    let (code, text, _) = verify(&out);
    assert_eq!(code, Some(1), "{text}");
    assert!(text.contains("notes.txt: not part of the render"), "{text}");
    assert!(text.contains("plots/extra.svg: not part of the render"), "{text}");
    std::fs::remove_file(out.join("notes.txt")).unwrap();
    std::fs::remove_dir_all(out.join("plots")).unwrap();
    std::os::unix::fs::symlink("/tmp", out.join("link")).unwrap();
    let (code, text, _) = verify(&out);
    assert_eq!(code, Some(1), "{text}");
    assert!(text.contains("link: a symbolic link"), "{text}");
}

#[test]
fn verify_never_opens_a_manifest_path_outside_the_folder() {
    let dir = scratch("hard-verify-outside");
    let out = rendered(&dir, "r", "json");
    let outside = dir.join("secret.txt");
    std::fs::write(&outside, "not yours").unwrap();
    let mut messages = Vec::new();
    // One entry with the file's true SHA-256, one with a wrong one, one climbing out: the
    // answer is the same refusal, so it tells nothing about the file.
    let true_hash = {
        use sha2::Digest;
        let d = sha2::Sha256::digest(b"not yours");
        d.iter().map(|b| format!("{b:02x}")).collect::<String>()
    };
    for (path, hash) in [
        (outside.to_str().unwrap().to_string(), true_hash.clone()),
        (outside.to_str().unwrap().to_string(), "00".repeat(32)),
        ("../secret.txt".to_string(), true_hash.clone()),
    ] {
        let copy = dir.join(format!("copy-{}", messages.len()));
        crate::archive::copy_dir(&out, &copy);
        edit_manifest(&copy, |m| {
            m["outputs"][path.as_str()] = serde_json::Value::String(hash.clone());
        });
        let (code, _, err) = verify(&copy);
        assert_eq!(code, Some(2), "{err}");
        assert!(err.contains("which is not a file inside the folder"), "{err}");
        messages.push(err.replace(&format!("copy-{}", messages.len()), "copy"));
    }
    assert_eq!(messages[0], messages[1], "the message does not depend on the hash");
}

#[test]
fn a_json_render_over_an_all_render_leaves_no_stale_report() {
    let dir = scratch("hard-stale");
    let out = rendered(&dir, "r", "html");
    assert!(out.join("report.html").is_file());
    let changed = variant(
        &dir,
        "changed.yaml",
        "value: 1k0, between: [vcc, coll]",
        "value: 1k2, between: [vcc, coll]",
    );
    let o = run_in(
        &dir,
        &["render", changed.to_str().unwrap(), "--runs", "20", "--format", "json", "--out", "r"],
    );
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    assert!(!out.join("report.html").exists(), "the old report is gone with its render");
    let (code, text, err) = verify(&out);
    assert_eq!(code, Some(0), "{text}{err}");
}

#[test]
fn render_never_writes_through_a_symlinked_plots_folder() {
    let dir = scratch("hard-symlink");
    let out = rendered(&dir, "r", "md");
    let elsewhere = dir.join("elsewhere");
    std::fs::create_dir_all(&elsewhere).unwrap();
    std::fs::write(elsewhere.join("bode.svg"), "precious").unwrap();
    std::fs::remove_dir_all(out.join("plots")).unwrap();
    std::os::unix::fs::symlink(&elsewhere, out.join("plots")).unwrap();
    let design = root().join("designs/rx-preamp-ce.yaml");
    let o = run_in(
        &dir,
        &["render", design.to_str().unwrap(), "--runs", "0", "--format", "md", "--out", "r"],
    );
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
    assert!(stderr(&o).contains("symbolic link, `plots`"), "{}", stderr(&o));
    assert_eq!(std::fs::read_to_string(elsewhere.join("bode.svg")).unwrap(), "precious");
    // The output folder itself as a link is refused too.
    std::os::unix::fs::symlink(&elsewhere, dir.join("linked")).unwrap();
    let o = run_in(
        &dir,
        &["render", design.to_str().unwrap(), "--runs", "0", "--format", "md", "--out", "linked"],
    );
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
    assert_eq!(std::fs::read_dir(&elsewhere).unwrap().count(), 1, "nothing written there");
}

#[test]
fn render_refuses_a_folder_that_is_not_a_review() {
    let dir = scratch("hard-foreign");
    std::fs::create_dir_all(dir.join("work")).unwrap();
    std::fs::write(dir.join("work/notes.txt"), "mine").unwrap();
    let design = root().join("designs/rx-preamp-ce.yaml");
    let o = run_in(
        &dir,
        &["render", design.to_str().unwrap(), "--runs", "0", "--format", "json", "--out", "work"],
    );
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
    assert!(stderr(&o).contains("is not a rendered review"), "{}", stderr(&o));
    assert_eq!(std::fs::read_to_string(dir.join("work/notes.txt")).unwrap(), "mine");
}

/// A second render (RC changed) into the folder of a first, killed after `delay`.
fn killed_render(dir: &Path, out: &str, delay: Duration) {
    let changed = variant(
        dir,
        "changed.yaml",
        "value: 1k0, between: [vcc, coll]",
        "value: 1k1, between: [vcc, coll]",
    );
    let mut child = Command::new(binary())
        .args([
            "render",
            changed.to_str().unwrap(),
            "--runs",
            "2000",
            "--format",
            "html",
            "--out",
            out,
        ])
        .current_dir(dir)
        .stdout(Stdio::null())
        .stderr(Stdio::null())
        .spawn()
        .unwrap();
    std::thread::sleep(delay);
    let _ = child.kill();
    let _ = child.wait();
}

#[test]
fn a_killed_or_failed_render_leaves_the_previous_folder_verifying() {
    let dir = scratch("hard-kill");
    let out = rendered(&dir, "r", "html");
    // Killed before, during or after the swap: the folder is either the old review or the
    // new one, whole, and verifies either way.
    for ms in [5, 20, 50, 100, 200, 400] {
        killed_render(&dir, "r", Duration::from_millis(ms));
        let (code, text, err) = verify(&out);
        assert_eq!(code, Some(0), "killed after {ms} ms: {text}{err}");
    }
    // A write that fails (files limited to 1 KiB, the signal ignored: like a full disk)
    // leaves the old folder as it was, and nothing beside it.
    let design = root().join("designs/post-amp-cs.yaml");
    let o = Command::new("sh")
        .arg("-c")
        .arg(format!(
            "trap '' XFSZ; ulimit -f 1; exec '{}' render '{}' --runs 0 --format html --out r",
            binary().display(),
            design.display()
        ))
        .current_dir(&dir)
        .output()
        .unwrap();
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
    assert!(stderr(&o).contains("cannot write"), "{}", stderr(&o));
    let (code, text, err) = verify(&out);
    assert_eq!(code, Some(0), "after a failed write: {text}{err}");
    let beside: Vec<String> = std::fs::read_dir(&dir)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .filter(|n| n.contains("tauweave-"))
        .collect();
    assert!(beside.is_empty(), "left beside the folder: {beside:?}");
}

#[test]
fn the_design_path_neither_changes_the_outputs_nor_reaches_them_unescaped() {
    let dir = scratch("hard-path");
    std::fs::create_dir_all(dir.join("sub/deeper")).unwrap();
    std::fs::write(dir.join("sub/x.yaml"), demo()).unwrap();
    let render = |cwd: &Path, path: &str, out: &str| {
        let o = run_in(cwd, &["render", path, "--runs", "0", "--format", "md", "--out", out]);
        assert_eq!(o.status.code(), Some(0), "{path}: {}", stderr(&o));
    };
    render(&dir, "sub/x.yaml", "a");
    render(&dir.join("sub/deeper"), "../x.yaml", "../../b");
    render(&dir.join("sub"), "./x.yaml", "../c");
    for file in ["results.json", "report.md", "manifest.json"] {
        let a = std::fs::read(dir.join("a").join(file)).unwrap();
        for other in ["b", "c"] {
            assert!(
                a == std::fs::read(dir.join(other).join(file)).unwrap(),
                "{file} differs in {other}"
            );
        }
    }
    // A file name with markup and shell syntax is not written into the review at all.
    let odd = "x`<img src=a onerror=b>`.yaml";
    std::fs::write(dir.join(odd), demo()).unwrap();
    let o = run_in(&dir, &["render", odd, "--runs", "0", "--format", "html", "--out", "d"]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    for file in ["report.html", "results.json", "manifest.json"] {
        let text = std::fs::read_to_string(dir.join("d").join(file)).unwrap();
        assert!(!text.contains("<img") && !text.contains("onerror"), "{file}");
    }
    let html = std::fs::read_to_string(dir.join("d/report.html")).unwrap();
    assert!(html.contains("tauweave render inputs/design.yaml"), "the archived copy is named");
}

#[test]
fn control_characters_from_a_file_never_reach_the_terminal_raw() {
    let dir = scratch("hard-control");
    // An unknown key holding ESC [ 2 J (clear screen) and a bell, in a valid YAML string key.
    let path = variant(
        &dir,
        "esc.yaml",
        "  cable_length: 2.5 m",
        "  cable_length: 2.5 m\n  \"x\\e[2J\\a\": 1 m",
    );
    let o = run_in(&dir, &["check", path.to_str().unwrap(), "--runs", "0"]);
    let (out, err) = (String::from_utf8_lossy(&o.stdout), stderr(&o));
    assert!(!out.contains('\u{1b}') && !err.contains('\u{1b}') && !err.contains('\u{7}'), "{err}");
    assert!(err.contains('\u{241b}'), "ESC is shown as its control picture: {err}");
}

#[test]
fn the_typst_staging_folder_of_a_killed_render_is_removed_by_the_next() {
    crate::support::typst();
    // A process id above Linux's largest (2^22) never exists: this folder's owner is gone.
    let stale = std::env::temp_dir().join("tauweave-typst-999999999-left");
    std::fs::create_dir_all(&stale).unwrap();
    std::fs::write(stale.join("report.typ"), "left by a killed render").unwrap();
    let dir = scratch("hard-stage");
    let design = root().join("designs/post-amp-cs.yaml");
    let o = run_in(
        &dir,
        &["render", design.to_str().unwrap(), "--runs", "0", "--format", "pdf", "--out", "p"],
    );
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    assert!(!stale.exists(), "the stale staging folder is gone");
}
