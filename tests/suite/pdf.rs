//! The PDF packet through typst: every example design renders to a PDF whose first page is
//! not blank (pdftoppm → PNG), two renders give the same PDF bytes, the paper setting
//! reaches the page size (pdfinfo), hostile design text stays literal text (pdftotext), and
//! without typst the other formats are still written with a message saying how to install
//! it. A relative `--typst` path works, a date before 1970 reaches the PDF, typst's warnings
//! are passed on, and verify without typst checks the rest and names the typst to install.
//! typst and poppler-utils are installed by scripts/test; a test never skips for lack
//! of them, it fails and says so.

use std::path::Path;
use std::process::{Command, Output};

use crate::support::{binary, files, root, run_in, scratch, typst};

/// A poppler-utils program's output (pdftoppm, pdfinfo, pdftotext).
fn poppler(program: &str, args: &[&str]) -> Output {
    Command::new(program).args(args).output().unwrap_or_else(|e| {
        panic!("{program} does not run ({e}): scripts/test installs poppler-utils")
    })
}

/// Runs `tauweave render` with typst named explicitly and no override in the environment.
fn render(dir: &Path, args: &[&str]) -> Output {
    Command::new(binary())
        .arg("render")
        .args(args)
        .arg("--typst")
        .arg(typst())
        .current_dir(dir)
        .env("NO_COLOR", "1")
        .env_remove("TAUWEAVE_TYPST")
        .output()
        .expect("the tauweave binary runs")
}

/// Fraction of dark pixels on page 1, rendered to PNG by pdftoppm.
fn dark_fraction_of_page_one(pdf: &Path) -> f64 {
    let stem = pdf.with_extension("");
    let o = poppler(
        "pdftoppm",
        &[
            "-png",
            "-r",
            "50",
            "-f",
            "1",
            "-l",
            "1",
            "-singlefile",
            pdf.to_str().unwrap(),
            stem.to_str().unwrap(),
        ],
    );
    assert!(o.status.success(), "pdftoppm: {}", String::from_utf8_lossy(&o.stderr));
    crate::support::dark_fraction(&stem.with_extension("png"), 128)
}

#[test]
fn every_example_renders_to_a_pdf_with_a_printed_first_page() {
    for design in files(&root().join("designs"), "yaml") {
        let stem = design.file_stem().unwrap().to_string_lossy().to_string();
        let dir = scratch(&format!("pdf-{stem}"));
        let o = render(
            &dir,
            &[design.to_str().unwrap(), "--format", "pdf", "--runs", "50", "--out", "a"],
        );
        assert_eq!(o.status.code(), Some(0), "{stem}: {}", String::from_utf8_lossy(&o.stderr));
        let pdf = dir.join("a/report.pdf");
        let bytes = std::fs::read(&pdf).unwrap_or_else(|e| panic!("{stem}: no report.pdf: {e}"));
        assert!(bytes.starts_with(b"%PDF-"), "{stem}: not a PDF");
        // Text, tables and rules cover a few per cent of an A4 page at 50 dpi; a blank
        // page has none.
        let dark = dark_fraction_of_page_one(&pdf);
        assert!(dark > 0.01, "{stem}: page 1 looks blank ({:.4} dark)", dark);
        // The page carries the design id and revision in its footer, and a page number.
        let text = poppler("pdftotext", &["-f", "1", "-l", "1", pdf.to_str().unwrap(), "-"]);
        let text = String::from_utf8_lossy(&text.stdout);
        let d = tauweave::design::load(&std::fs::read_to_string(&design).unwrap()).design.unwrap();
        assert!(
            text.contains(&format!("{} · rev {}", d.meta.id, d.meta.revision)),
            "{stem}: no footer in\n{text}"
        );
        // pdftotext drops the thin spaces around the slash of "1 / 6".
        let numbered = text.lines().any(|l| {
            let l = l.replace(' ', "");
            l.strip_prefix("1/")
                .is_some_and(|n| !n.is_empty() && n.bytes().all(|b| b.is_ascii_digit()))
        });
        assert!(numbered, "{stem}: no `1 / N` page number in\n{text}");
        // Same inputs, same PDF bytes.
        let again = render(
            &dir,
            &[design.to_str().unwrap(), "--format", "pdf", "--runs", "50", "--out", "b"],
        );
        assert_eq!(again.status.code(), Some(0));
        assert!(
            bytes == std::fs::read(dir.join("b/report.pdf")).unwrap(),
            "{stem}: PDF bytes differ"
        );
    }
}

#[test]
fn the_paper_setting_sets_the_page_size() {
    let dir = scratch("pdf-paper");
    let design = root().join("designs/post-amp-cs.yaml");
    for (paper, points) in [("a4", "595.276 x 841.89"), ("us-letter", "612 x 792")] {
        let out = format!("out-{paper}");
        let o = render(
            &dir,
            &[
                design.to_str().unwrap(),
                "--format",
                "pdf",
                "--runs",
                "0",
                "--paper",
                paper,
                "--out",
                &out,
            ],
        );
        assert_eq!(o.status.code(), Some(0), "{}", String::from_utf8_lossy(&o.stderr));
        let info = poppler("pdfinfo", &[dir.join(&out).join("report.pdf").to_str().unwrap()]);
        let info = String::from_utf8_lossy(&info.stdout);
        // ISO 216 A4 is 210 mm × 297 mm = 595.276 pt × 841.89 pt; US Letter 8.5 in × 11 in =
        // 612 pt × 792 pt (1 pt = 1/72 in).
        let size = info.lines().find(|l| l.starts_with("Page size:")).unwrap_or("");
        assert!(size.contains(points), "{paper}: {size}");
        // Verify rebuilds on the recorded paper.
        let v = Command::new(binary())
            .args(["verify", &out, "--typst"])
            .arg(typst())
            .current_dir(&dir)
            .output()
            .unwrap();
        assert_eq!(v.status.code(), Some(0), "{}", String::from_utf8_lossy(&v.stdout));
    }
}

#[test]
fn hostile_design_text_prints_literally() {
    let dir = scratch("pdf-hostile");
    let text = std::fs::read_to_string(root().join("designs/post-amp-cs.yaml")).unwrap();
    let title = "#sys.exit() $x^2$ @ref <lbl> // no [a](b) *b*";
    let hostile = text.replacen(
        "title: Ultrasonic receiver post-amplifier, common source",
        &format!("title: \"{title}\""),
        1,
    );
    assert_ne!(hostile, text);
    std::fs::write(dir.join("hostile.yaml"), &hostile).unwrap();
    let o = render(&dir, &["hostile.yaml", "--format", "pdf", "--runs", "0", "--out", "h"]);
    assert_eq!(o.status.code(), Some(0), "{}", String::from_utf8_lossy(&o.stderr));
    let pdf = dir.join("h/report.pdf");
    let text = poppler("pdftotext", &["-f", "1", "-l", "1", pdf.to_str().unwrap(), "-"]);
    let text = String::from_utf8_lossy(&text.stdout);
    assert!(text.contains(title), "the title did not print literally:\n{text}");
}

#[test]
fn typst_errors_come_through_with_the_typ_line() {
    use tauweave::cli::pdf::{self, PdfProblem};
    use tauweave::report::OutputFile;
    let t = pdf::find(Some(&typst())).expect("typst answers --version");
    let broken = OutputFile {
        path: "report.typ".into(),
        bytes: b"= Fine\n\nStill fine.\n#unknown-function(1)\n".to_vec(),
    };
    match pdf::compile(&t, &[broken], "2026-11-20") {
        Err(PdfProblem::Failed(text)) => {
            assert!(text.contains("report.typ:4"), "no line in\n{text}");
            assert!(text.contains("unknown variable"), "not typst's own message:\n{text}");
        }
        other => panic!("expected typst's error, got {other:?}"),
    }
}

#[test]
fn typst_warnings_are_passed_on() {
    use tauweave::cli::pdf;
    use tauweave::report::OutputFile;
    let t = pdf::find(Some(&typst())).expect("typst answers --version");
    let typ = OutputFile {
        path: "report.typ".into(),
        bytes: b"#set text(font: \"No Such Font\")\nFine.\n".to_vec(),
    };
    let made = pdf::compile(&t, &[typ], "2026-11-20").expect("typst compiles with a warning");
    assert!(made.bytes.starts_with(b"%PDF-"));
    assert!(made.warnings.starts_with("  warning: unknown font family"), "{}", made.warnings);
    // The render prints them under a heading of its own (a stand-in typst adds a warning).
    let dir = scratch("pdf-warnings");
    let wrapper = dir.join("typst-warns");
    let script = format!(
        "#!/bin/sh\n'{}' \"$@\" || exit $?\n\
         [ \"$1\" = compile ] && echo 'warning: a word' >&2\nexit 0\n",
        typst().display()
    );
    std::fs::write(&wrapper, script).unwrap();
    make_executable(&wrapper);
    let design = root().join("designs/post-amp-cs.yaml");
    let o = Command::new(binary())
        .args(["render", design.to_str().unwrap(), "--format", "pdf", "--runs", "0"])
        .args(["--out", "w", "--typst", "./typst-warns"])
        .current_dir(&dir)
        .env_remove("TAUWEAVE_TYPST")
        .output()
        .unwrap();
    let err = String::from_utf8_lossy(&o.stderr);
    assert_eq!(o.status.code(), Some(0), "{err}");
    assert!(err.contains("typst warnings while making report.pdf:\n  warning: a word\n"), "{err}");
}

fn make_executable(path: &Path) {
    use std::os::unix::fs::PermissionsExt;
    std::fs::set_permissions(path, std::fs::Permissions::from_mode(0o755)).unwrap();
}

#[test]
fn a_relative_typst_path_is_found_from_the_current_folder() {
    let dir = scratch("pdf-relative");
    std::fs::create_dir_all(dir.join("tools")).unwrap();
    std::os::unix::fs::symlink(typst(), dir.join("tools/typst")).unwrap();
    let design = root().join("designs/post-amp-cs.yaml");
    for (flag, out) in [("tools/typst", "a"), ("./tools/typst", "b")] {
        let o = Command::new(binary())
            .args(["render", design.to_str().unwrap(), "--format", "pdf", "--runs", "0"])
            .args(["--out", out, "--typst", flag])
            .current_dir(&dir)
            .env_remove("TAUWEAVE_TYPST")
            .output()
            .unwrap();
        assert_eq!(o.status.code(), Some(0), "{flag}: {}", String::from_utf8_lossy(&o.stderr));
        assert!(dir.join(out).join("report.pdf").is_file(), "{flag}");
    }
    // So does verify.
    let o = Command::new(binary())
        .args(["verify", "a", "--typst", "tools/typst"])
        .current_dir(&dir)
        .env_remove("TAUWEAVE_TYPST")
        .output()
        .unwrap();
    assert_eq!(o.status.code(), Some(0), "{}", String::from_utf8_lossy(&o.stdout));
}

#[test]
fn a_design_dated_before_1970_gets_its_date_in_the_pdf() {
    let dir = scratch("pdf-1969");
    let text = std::fs::read_to_string(root().join("designs/post-amp-cs.yaml")).unwrap();
    let old = text.replacen("date: 2026-11-06", "date: 1969-07-20", 1);
    assert_ne!(old, text);
    std::fs::write(dir.join("old.yaml"), old).unwrap();
    let o = render(&dir, &["old.yaml", "--format", "pdf", "--runs", "0", "--out", "o"]);
    assert_eq!(o.status.code(), Some(0), "{}", String::from_utf8_lossy(&o.stderr));
    let pdf = std::fs::read(dir.join("o/report.pdf")).unwrap();
    // PDF date strings (ISO 32000-1, 7.9.4): D:YYYYMMDDHHmmSS followed by Z for UTC.
    let date = b"D:19690720000000Z";
    assert!(pdf.windows(date.len()).any(|w| w == date), "no creation date of 1969-07-20");
}

#[test]
fn without_typst_the_other_formats_are_written_and_the_message_says_how_to_install_it() {
    let dir = scratch("pdf-missing");
    let design = root().join("designs/rx-preamp-ce.yaml");
    let run = |format: &str, out: &str| {
        Command::new(binary())
            .args([
                "render",
                design.to_str().unwrap(),
                "--format",
                format,
                "--runs",
                "0",
                "--out",
                out,
            ])
            .current_dir(&dir)
            .env("PATH", dir.join("empty-path"))
            .env_remove("TAUWEAVE_TYPST")
            .output()
            .expect("the tauweave binary runs")
    };
    // `all`: the PDF is one format among several; missing typst is a warning, exit 0.
    let o = run("all", "all");
    let err = String::from_utf8_lossy(&o.stderr);
    assert_eq!(o.status.code(), Some(0), "{err}");
    for f in ["report.html", "report.md", "results.json", "report.typ", "plots/bode.svg"] {
        assert!(dir.join("all").join(f).is_file(), "{f} missing");
    }
    assert!(!dir.join("all/report.pdf").exists());
    assert!(err.contains("warning: report.pdf was not made"), "{err}");
    assert!(err.contains("cargo install typst-cli --locked"), "{err}");
    // `pdf` asked for explicitly: the rest is written, exit 2, and the message is an error.
    let o = run("pdf", "pdf");
    let err = String::from_utf8_lossy(&o.stderr);
    assert_eq!(o.status.code(), Some(2), "{err}");
    assert!(dir.join("pdf/results.json").is_file() && dir.join("pdf/report.typ").is_file());
    assert!(!dir.join("pdf/report.pdf").exists());
    assert!(err.contains("error: report.pdf was not made"), "{err}");
    assert!(!err.contains("warning:"), "{err}");
    assert!(err.contains("cargo install typst-cli --locked"), "{err}");
    // A named program that does not exist is reported as such.
    let o = Command::new(binary())
        .args(["render", design.to_str().unwrap(), "--format", "pdf", "--runs", "0", "--out", "x"])
        .args(["--typst", "/nonexistent/typst"])
        .current_dir(&dir)
        .output()
        .unwrap();
    assert_eq!(o.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&o.stderr).contains("/nonexistent/typst"));
}

#[test]
fn verify_needs_typst_to_rebuild_a_pdf_and_says_so() {
    let dir = scratch("pdf-verify");
    let design = root().join("designs/post-amp-cs.yaml");
    let o = run_in(&dir, &["render", design.to_str().unwrap(), "--runs", "0", "--out", "a"]);
    assert_eq!(o.status.code(), Some(0), "{}", String::from_utf8_lossy(&o.stderr));
    assert!(dir.join("a/report.pdf").is_file());
    let manifest: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.join("a/manifest.json")).unwrap())
            .unwrap();
    // "typst 0.15.1 (unknown commit)" → 0.15.1
    let version = manifest["typst"].as_str().unwrap().split(' ').nth(1).unwrap().to_string();
    let outputs = manifest["outputs"].as_object().unwrap().len();
    let inputs = manifest["inputs"].as_object().unwrap().len();
    let verify = |folder: &str| {
        Command::new(binary())
            .args(["verify", folder])
            .current_dir(&dir)
            .env("PATH", dir.join("empty-path"))
            .env_remove("TAUWEAVE_TYPST")
            .output()
            .unwrap()
    };
    let install = format!("cargo install typst-cli --version {version} --locked");
    // Everything else identical: incomplete, exit 2, one line saying so.
    let o = verify("a");
    let (out, err) = (String::from_utf8_lossy(&o.stdout), String::from_utf8_lossy(&o.stderr));
    assert_eq!(o.status.code(), Some(2), "{out}{err}");
    assert_eq!(
        out,
        format!(
            "incomplete: report.pdf not verified, the other {} files identical in a\n",
            // Every output but the PDF, the input copies and the manifest itself.
            outputs - 1 + inputs + 1
        )
    );
    assert!(err.starts_with("error: report.pdf cannot be verified here: "), "{err}");
    assert!(err.contains("the `typst` program is not on PATH"), "{err}");
    assert!(err.contains(&install), "{err}");
    assert!(!err.contains("warning:") && !err.contains("written by `tauweave render`"), "{err}");
    // Another output changed: exit 1, named, and report.pdf still said to be unverified.
    crate::archive::copy_dir(&dir.join("a"), &dir.join("b"));
    let flip = |path: &Path| {
        let mut bytes = std::fs::read(path).unwrap();
        let at = bytes.len() / 2;
        bytes[at] ^= 0x01;
        std::fs::write(path, bytes).unwrap();
    };
    flip(&dir.join("b/report.md"));
    let o = verify("b");
    let (out, err) = (String::from_utf8_lossy(&o.stdout), String::from_utf8_lossy(&o.stderr));
    assert_eq!(o.status.code(), Some(1), "{out}{err}");
    assert!(out.starts_with("differs: ") && out.contains("report.md"), "{out}");
    assert!(!out.contains("report.pdf"), "{out}");
    assert!(err.starts_with("warning: report.pdf cannot be verified here: "), "{err}");
    assert!(err.contains(&install), "{err}");
    // A changed report.pdf is still caught by its SHA-256.
    std::fs::copy(dir.join("a/report.md"), dir.join("b/report.md")).unwrap();
    flip(&dir.join("b/report.pdf"));
    let o = verify("b");
    let out = String::from_utf8_lossy(&o.stdout);
    assert_eq!(o.status.code(), Some(1), "{out}");
    assert!(out.starts_with("differs: 1 problem in b"), "{out}");
    assert!(out.contains("report.pdf: changed after the render"), "{out}");
}
