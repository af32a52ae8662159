//! A bounded, seeded mutation fuzz of the two texts a user hands tauweave (issue 13): every
//! example design and the built-in template, mutated a few thousand times — characters
//! deleted, inserted and swapped, lines dropped and repeated, numbers replaced by extremes —
//! and run through the same calls `check` and `render` make. Each case must end as the
//! command line would: the design refused with located diagnostics (exit 2), or analysed
//! (exit 0 or 1) or failing with a message (exit 2); the template rendered or refused with a
//! message that names it. Never a panic. Seeded, so a failure names a case that repeats.

use std::panic::{AssertUnwindSafe, catch_unwind};

use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use tauweave::design::{self, Design};
use tauweave::report::export::Markdown;
use tauweave::report::template::{BUILT_IN, TemplateSource};
use tauweave::report::{Inputs, render};
use tauweave::review::{ReviewOptions, review};

use crate::support::{files, root};

/// Fragments a mutation inserts: YAML and expression syntax, units and prefixes, extreme
/// numbers, template directives, control characters.
const PIECES: &[&str] = &[
    "{",
    "}",
    "[",
    "]",
    ":",
    ",",
    "\"",
    "'",
    "-",
    "#",
    "\n",
    "\n  ",
    " ",
    "\t",
    "µ",
    "Ω",
    "°C",
    "0",
    "1",
    "9",
    ".",
    "e",
    "E",
    "k",
    "M",
    "m",
    "p",
    "(",
    ")",
    "*",
    "/",
    "+",
    "1e308",
    "1e-308",
    "-0",
    "nan",
    "inf",
    "0x1",
    "~",
    "null",
    "&a",
    "*a",
    "!!str",
    "\u{7}",
    "\u{1b}",
    "{{",
    "}}",
    "{%",
    "%}",
    "| sig(digits=",
    "| si(unit=",
    "| db",
    "| percent",
    ")",
    "=",
    "range(end=",
    "for x in",
    "endfor",
    "if",
    "endif",
    "midband.",
    "high.",
    "table(name=",
    "plot(name=",
    "explanation(side=",
    "cautions()",
    "999999",
    "-1",
];

fn mutate(text: &str, rng: &mut ChaCha8Rng) -> String {
    let mut chars: Vec<char> = text.chars().collect();
    for _ in 0..rng.random_range(1..=4) {
        let n = chars.len().max(1);
        let at = rng.random_range(0..n).min(chars.len());
        match rng.random_range(0..6) {
            0 if !chars.is_empty() => {
                let end = (at + rng.random_range(1..8)).min(chars.len());
                chars.drain(at..end);
            }
            1 | 2 => {
                let piece = PIECES[rng.random_range(0..PIECES.len())];
                chars.splice(at..at, piece.chars());
            }
            3 if chars.len() > 2 => {
                let other = rng.random_range(0..chars.len());
                let at = at.min(chars.len() - 1);
                chars.swap(at, other);
            }
            _ => {
                // A whole line dropped or repeated.
                let text: String = chars.iter().collect();
                let mut lines: Vec<&str> = text.lines().collect();
                if lines.is_empty() {
                    continue;
                }
                let k = rng.random_range(0..lines.len());
                if rng.random_bool(0.5) {
                    lines.remove(k);
                } else {
                    lines.insert(k, lines[k]);
                }
                chars = lines.join("\n").chars().collect();
            }
        }
    }
    chars.into_iter().collect()
}

/// What the command line would do with a design text: Some(exit code) or a panic message.
fn design_case(text: &str) -> Result<i32, String> {
    catch_unwind(AssertUnwindSafe(|| {
        let loaded = design::load(text);
        if loaded.errors() > 0 {
            // Exit 2, and every error must point into the file.
            for d in loaded.diagnostics.iter().filter(|d| d.is_error()) {
                assert!(d.span.line >= 1 && d.span.offset <= text.len(), "unlocated: {d:?}");
            }
            return 2;
        }
        let d = loaded.design.expect("a design without errors");
        match review(&d, &ReviewOptions::quiet(&d, Some(4))) {
            Ok(r) if !r.failing() => 0,
            Ok(_) => 1,
            Err(e) => {
                assert!(!e.message.is_empty() && !e.help.is_empty(), "{e:?}");
                2
            }
        }
    }))
    .map_err(|p| {
        p.downcast_ref::<String>()
            .cloned()
            .or_else(|| p.downcast_ref::<&str>().map(|s| s.to_string()))
            .unwrap_or_default()
    })
}

#[test]
fn mutated_designs_end_in_0_1_or_a_located_2_never_a_panic() {
    let examples: Vec<String> = files(&root().join("designs"), "yaml")
        .iter()
        .chain(files(&root().join("tests/reference/designs"), "yaml").iter())
        .map(|p| std::fs::read_to_string(p).unwrap())
        .collect();
    let mut rng = ChaCha8Rng::seed_from_u64(13);
    let mut counts = [0usize; 3];
    let cases = 5000;
    for case in 0..cases {
        let text = mutate(&examples[case % examples.len()], &mut rng);
        match design_case(&text) {
            Ok(code) => counts[code as usize] += 1,
            Err(panic) => panic!("case {case} panicked: {panic}\n--- design ---\n{text}"),
        }
    }
    println!(
        "{cases} mutated designs: {} exit 0, {} exit 1, {} exit 2",
        counts[0], counts[1], counts[2]
    );
    // The mutations must reach the analysis, not only the reader.
    assert!(counts[0] + counts[1] > cases / 10, "{counts:?}");
    assert!(counts[2] > cases / 10, "{counts:?}");
}

#[test]
fn mutated_templates_render_or_name_themselves_never_a_panic() {
    let text = std::fs::read_to_string(root().join("designs/rx-preamp-ce.yaml")).unwrap();
    let d: Design = design::load(&text).design.unwrap();
    let r = review(&d, &ReviewOptions::quiet(&d, Some(20))).unwrap();
    let mut rng = ChaCha8Rng::seed_from_u64(1313);
    let (mut rendered, mut refused) = (0, 0);
    for case in 0..1500 {
        let template = TemplateSource { name: "fuzz.md".into(), text: mutate(BUILT_IN, &mut rng) };
        let inputs = Inputs {
            design_name: "d.yaml",
            design_text: &text,
            template: &template,
            built_in_template: false,
            schematic: None,
            logo: None,
        };
        let outcome = catch_unwind(AssertUnwindSafe(|| render(&d, &r, &inputs, &[&Markdown])));
        match outcome {
            Ok(Ok(_)) => rendered += 1,
            Ok(Err(e)) => {
                assert!(e.message.contains("fuzz.md"), "case {case}: {}", e.message);
                refused += 1;
            }
            Err(_) => panic!("case {case} panicked\n--- template ---\n{}", template.text),
        }
    }
    println!("1500 mutated templates: {rendered} rendered, {refused} refused");
    assert!(rendered > 100 && refused > 100, "{rendered} rendered, {refused} refused");
}
