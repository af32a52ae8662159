//! The PDF packet through typst: every example design renders to a PDF whose first page is
//! not blank (pdftoppm → PNG), two renders give the same PDF bytes, the paper setting
//! reaches the page size (pdfinfo), hostile design text stays literal text (pdftotext), and
//! without typst the other formats are still written with a message saying how to install
//! it. typst and poppler-utils are installed by scripts/test; a test never skips for lack
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
    assert!(err.contains("report.pdf was not made"), "{err}");
    assert!(err.contains("cargo install typst-cli --locked"), "{err}");
    // `pdf` asked for explicitly: the rest is written, exit 2.
    let o = run("pdf", "pdf");
    let err = String::from_utf8_lossy(&o.stderr);
    assert_eq!(o.status.code(), Some(2), "{err}");
    assert!(dir.join("pdf/results.json").is_file() && dir.join("pdf/report.typ").is_file());
    assert!(!dir.join("pdf/report.pdf").exists());
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
    let o = Command::new(binary())
        .args(["verify", "a"])
        .current_dir(&dir)
        .env("PATH", dir.join("empty-path"))
        .env_remove("TAUWEAVE_TYPST")
        .output()
        .unwrap();
    let err = String::from_utf8_lossy(&o.stderr);
    assert_eq!(o.status.code(), Some(2), "{err}");
    assert!(
        err.contains("report.pdf cannot be rebuilt here") && err.contains("typst-cli"),
        "{err}"
    );
}
