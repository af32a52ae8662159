//! The view model: what a template sees. This struct is the template API — its field names
//! are stable, and renaming one is an interface change (docs/templates.md lists them).
//!
//! It holds the whole results document (every key of results.json, same names, the same
//! report-owned types) plus the design's own description and the computed explanation. Free text from the design (title,
//! purpose, notes) is escaped here ([`escape`]), so it can never become markup, a block or a
//! plot.

use serde::Serialize;

use crate::design::Design;
use crate::notation::si;
use crate::report::explain::Explanation;
use crate::report::results::{
    CapacitorResults, CautionResults, CornerResults, GroupDelayResults, HighResults,
    LargeSignalResults, LimitResults, LowResults, MidbandResults, NoiseResults,
    OperatingPointResults, PortsResults, Provenance, RequirementResults, ResultsDocument,
    RootResults, RootWindowResults, SensitivityResults, StepResults, SuggestionResults,
    SweepResults, ToleranceSummary, Tool,
};
use crate::report::template::MARKER;

/// Escapes text so it reads as text in Markdown and HTML, inline and block alike.
///
/// Inline: HTML's `& < >` become entities, and Markdown's link, emphasis, code, table,
/// heading and attribute characters are backslash-escaped (CommonMark lets any ASCII
/// punctuation be escaped). The plot-marker character [`MARKER`] becomes U+FFFD, so only the
/// `plot()` directive makes a plot marker.
///
/// Blocks: every line (after `\n`, `\r` or `\r\n`, and the start of the string) loses its
/// leading blanks (spaces, tabs, and the vertical tab and form feed pulldown-cmark counts as
/// blanks too), so it can never be indented code or continue an indented construct, and a
/// character that would open a block there is backslash-escaped: `-` or `+` before a blank or
/// the line end (list items, `- - -` rules), `-` or `=` on a line of only those and blanks
/// (setext underlines, `---` rules), and the `.` or `)` after leading digits before a blank
/// or the line end (ordered items). `#`, `*`, `_`, `>`, `<`,
/// `` ` ``, `~`, `|` and `[` are escaped everywhere already. Other text, a `-5 V` or a
/// `1.5 kΩ` at a line start included, passes unchanged.
pub fn escape(text: &str) -> String {
    let mut out = String::with_capacity(text.len() + text.len() / 8);
    let mut rest = text;
    loop {
        let end = rest.find(['\n', '\r']).unwrap_or(rest.len());
        let (line, tail) = rest.split_at(end);
        escape_line(line.trim_start_matches(BLANKS), &mut out);
        let Some(line_end) = tail.chars().next() else { break };
        out.push(line_end);
        rest = &tail[line_end.len_utf8()..];
    }
    out
}

/// The characters pulldown-cmark counts as blanks within a line: CommonMark's space and tab,
/// and the line tabulation and form feed.
const BLANKS: [char; 4] = [' ', '\t', '\u{0B}', '\u{0C}'];

/// One line of [`escape`], its leading blanks already gone.
fn escape_line(line: &str, out: &mut String) {
    let blank_or_end = |s: &str| s.chars().next().is_none_or(|c| BLANKS.contains(&c));
    let only = |s: &str, c: char| s.chars().all(|x| x == c || BLANKS.contains(&x));
    // The byte index of the character that would open a block, if one would.
    let opener = match line.chars().next() {
        Some('-') if blank_or_end(&line[1..]) || only(line, '-') => Some(0),
        Some('+') if blank_or_end(&line[1..]) => Some(0),
        Some('=') if only(line, '=') => Some(0),
        Some('0'..='9') => {
            let digits = line.find(|c: char| !c.is_ascii_digit()).unwrap_or(line.len());
            let after = &line[digits..];
            (after.starts_with(['.', ')']) && blank_or_end(&after[1..])).then_some(digits)
        }
        _ => None,
    };
    for (i, c) in line.char_indices() {
        match c {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            MARKER => out.push('\u{FFFD}'),
            '\\' | '`' | '*' | '_' | '[' | ']' | '!' | '|' | '{' | '}' | '#' | '~' => {
                out.push('\\');
                out.push(c);
            }
            c if opener == Some(i) => {
                out.push('\\');
                out.push(c);
            }
            c => out.push(c),
        }
    }
}

/// The design as the template sees it.
#[derive(Clone, Debug, Serialize)]
pub struct DesignView {
    /// Id.
    pub id: String,
    /// Title (escaped).
    pub title: String,
    /// Revision (escaped).
    pub revision: String,
    /// Date.
    pub date: String,
    /// Author (escaped).
    pub author: Option<String>,
    /// Purpose (escaped).
    pub purpose: Option<String>,
    /// Temperature, K.
    pub temperature_k: f64,
    /// Temperature, °C.
    pub temperature_c: f64,
    /// Supplies, formatted (`vcc 12 V`).
    pub supplies: Vec<String>,
    /// Signal source, formatted.
    pub signal: String,
    /// Output, formatted.
    pub output: String,
    /// Parts.
    pub parts: usize,
    /// Whether the review holds a schematic: the design's own drawing, or tauweave's when
    /// the design has few enough parts to draw.
    pub has_schematic: bool,
    /// Parts up to which tauweave draws the connectivity itself.
    pub drawn_up_to: usize,
    /// The title block of the project file, when the design has one above it.
    pub title_block: Option<TitleBlockView>,
}

/// The project file's title block as the template sees it (escaped).
#[derive(Clone, Debug, Serialize)]
pub struct TitleBlockView {
    /// The organisation.
    pub organisation: Option<String>,
    /// The document number, its pattern filled in for this design.
    pub document_number: Option<String>,
    /// The approval lines: role and name (empty: signed by hand).
    pub approvals: Vec<ApprovalView>,
    /// Whether the project names a logo (placed by `plot(name="logo")`).
    pub has_logo: bool,
}

/// One approval line.
#[derive(Clone, Debug, Serialize)]
pub struct ApprovalView {
    /// The role (escaped).
    pub role: String,
    /// The name (escaped), or empty.
    pub name: String,
}

/// The template API: the keys of results.json, with `design` extended and escaped and the
/// explanation added. Every field is a report-owned type ([`crate::report::results`]), so
/// the template sees exactly the results contract, nothing internal.
#[derive(Clone, Debug, Serialize)]
pub struct View<'a> {
    /// The tool.
    pub tool: &'a Tool,
    /// The design's description.
    pub design: DesignView,
    /// Provenance.
    pub provenance: &'a Provenance,
    /// The bias (absent for a design without transistors).
    pub operating_point: &'a Option<OperatingPointResults>,
    /// Every capacitor and its set.
    pub capacitors: &'a [CapacitorResults],
    /// Mid-band gain and port resistances.
    pub midband: &'a MidbandResults,
    /// The upper cut-off.
    pub high: &'a HighResults,
    /// The lower cut-off.
    pub low: &'a LowResults,
    /// Poles of the whole network.
    pub poles: &'a [RootResults],
    /// Zeros from the source to the output.
    pub zeros: &'a [RootResults],
    /// Where the roots of a network too large for QZ were looked for.
    pub root_window: &'a Option<RootWindowResults>,
    /// True when the network has inductors.
    pub has_inductors: bool,
    /// Noise: spot densities, noise figure, input generators, band rms, contributors.
    pub noise: &'a Option<NoiseResults>,
    /// Signal handling: swing and its limits, distortion, compression, intercept.
    pub large_signal: &'a Option<LargeSignalResults>,
    /// The stage at its ports.
    pub ports: &'a Option<PortsResults>,
    /// The step response.
    pub step: &'a Option<StepResults>,
    /// The group delay across the band.
    pub group_delay: &'a Option<GroupDelayResults>,
    /// Suggested part changes.
    pub suggestions: &'a [SuggestionResults],
    /// What-if operating corners.
    pub corners: &'a [CornerResults],
    /// What-if sweeps.
    pub sweeps: &'a [SweepResults],
    /// What-if limits.
    pub limits: &'a [LimitResults],
    /// Requirements at nominal values, corners and yields.
    pub requirements: &'a [RequirementResults],
    /// Sensitivities.
    pub sensitivity: &'a Option<SensitivityResults>,
    /// Worst case and Monte Carlo.
    pub tolerance: &'a Option<ToleranceSummary>,
    /// Cautions.
    pub cautions: &'a [CautionResults],
    /// The template's worked steps by name (`worked.f_H.value`).
    pub worked: std::collections::BTreeMap<&'a str, &'a crate::report::worked::WorkedStep>,
    /// Explanation paragraphs (Markdown).
    pub explanation: &'a Explanation,
}

impl<'a> View<'a> {
    /// The view of a results document.
    pub fn new(
        design: &Design,
        doc: &'a ResultsDocument,
        explanation: &'a Explanation,
    ) -> View<'a> {
        View {
            tool: &doc.tool,
            design: design_view(design),
            provenance: &doc.provenance,
            operating_point: &doc.operating_point,
            capacitors: &doc.capacitors,
            midband: &doc.midband,
            high: &doc.high,
            low: &doc.low,
            poles: &doc.poles,
            zeros: &doc.zeros,
            root_window: &doc.root_window,
            has_inductors: doc.has_inductors,
            noise: &doc.noise,
            large_signal: &doc.large_signal,
            ports: &doc.ports,
            step: &doc.step,
            group_delay: &doc.group_delay,
            suggestions: &doc.suggestions,
            corners: &doc.corners,
            sweeps: &doc.sweeps,
            limits: &doc.limits,
            requirements: &doc.requirements,
            sensitivity: &doc.sensitivity,
            tolerance: &doc.tolerance,
            cautions: &doc.cautions,
            worked: doc.worked.iter().map(|s| (s.name.as_str(), s)).collect(),
            explanation,
        }
    }
}

/// Builds the design description.
pub fn design_view(design: &Design) -> DesignView {
    let m = &design.meta;
    let pair = |p: &str, n: &str| if n == "gnd" { p.to_string() } else { format!("{p}–{n}") };
    DesignView {
        id: m.id.clone(),
        title: escape(&m.title),
        revision: escape(&m.revision),
        date: m.date.clone(),
        author: m.author.as_deref().map(escape),
        purpose: m.purpose.as_deref().map(escape),
        temperature_k: design.temperature_k,
        temperature_c: design.temperature_k - 273.15,
        supplies: design
            .supplies
            .iter()
            .map(|s| format!("{} {}", s.node, si(s.voltage.nominal, "V", 4)))
            .collect(),
        signal: format!(
            "{} through {}",
            pair(&design.signal.positive, &design.signal.negative),
            si(design.signal.resistance.nominal, "Ω", 4)
        ),
        output: pair(&design.output.positive, &design.output.negative),
        parts: design.parts.len(),
        has_schematic: design.meta.schematic.is_some() || crate::report::schematic::drawn(design),
        drawn_up_to: crate::report::schematic::DRAWN_UP_TO,
        title_block: design.project.as_ref().map(|p| TitleBlockView {
            organisation: p.organisation.as_deref().map(escape),
            document_number: p.number(&m.id, &m.revision, &m.date).as_deref().map(escape),
            approvals: p
                .approvals
                .iter()
                .map(|a| ApprovalView { role: escape(&a.role), name: escape(&a.name) })
                .collect(),
            has_logo: p.logo.is_some(),
        }),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::report::html::markdown_options;
    use proptest::prelude::*;
    use pulldown_cmark::{Event, Parser, Tag};

    /// What the Markdown of `escape(text)` says, placed as a template places free text
    /// (after `prefix`): the block tags and inline markup that are not plain text, and the
    /// plain text itself with line and paragraph breaks as `\n`.
    fn parsed(prefix: &str, text: &str) -> (Vec<String>, String) {
        parsed_markdown(&format!("{prefix}{}\n", escape(text)))
    }

    fn parsed_markdown(md: &str) -> (Vec<String>, String) {
        let mut markup = Vec::new();
        let mut plain = String::new();
        for event in Parser::new_ext(md, markdown_options()) {
            match event {
                Event::Start(Tag::Paragraph) => {}
                Event::End(_) => plain.push('\n'),
                Event::Start(tag) => markup.push(format!("{tag:?}")),
                Event::Text(t) => plain.push_str(&t),
                Event::SoftBreak | Event::HardBreak => plain.push('\n'),
                other => markup.push(format!("{other:?}")),
            }
        }
        (markup, plain)
    }

    /// Lines without whitespace at either end (CommonMark drops trailing blanks of a line and
    /// of a paragraph, `escape` the leading ones), empty lines left out.
    fn lines(text: &str) -> String {
        let text = text.replace("\r\n", "\n").replace('\r', "\n").replace(MARKER, "\u{FFFD}");
        let kept: Vec<&str> = text.split('\n').map(str::trim).filter(|l| !l.is_empty()).collect();
        kept.join("\n")
    }

    const HOSTILE: &[&str] = &[
        "- item",
        "+ item",
        "* item",
        "1. item",
        "1) item",
        "123456789. item",
        "1.",
        "2)",
        "-",
        "+",
        "--",
        "---",
        "- - -",
        "***",
        "___",
        "=",
        "===",
        "Title\n===",
        "Title\n---",
        "Title\n  ---  ",
        "a\n- item\n- item",
        "a\n\n- item\n\n1. item\n2) item",
        "a\n    code block",
        "\n\n    code block",
        "\tcode block",
        "  \t  - nested\n      - deeper",
        "> quote",
        "# heading",
        "## heading {#id}",
        "```\nfenced\n```",
        "~~~\nfenced\n~~~",
        "<div>\nhtml\n</div>",
        "<script>alert(1)</script>",
        "[a]: https://x.org",
        "[a]\n\n[a]: https://x.org",
        "[^n]: note",
        "| a | b |\n|---|---|\n| 1 | 2 |",
        "a | b\n- | -",
        "a\r- item\r\n1. item\r===",
        "\u{E000}plot:bode\u{E000}",
        "@@plot:bode@@",
        "1.5 kΩ and -5 V and +3 dB",
        "cut-off = 3 dB, a - b, 2 + 2",
        "-x +y =z 1.x 1)x",
        "trailing two spaces  \nnext",
        "back\\\nslash",
    ];

    /// The words of `text`, one space apart.
    fn words(text: &str) -> String {
        text.replace(MARKER, "\u{FFFD}").split_whitespace().collect::<Vec<_>>().join(" ")
    }

    #[test]
    fn escaped_text_makes_no_block_and_no_markup() {
        // The check sees blocks: unescaped, most hostile texts make one.
        let inert: Vec<&&str> =
            HOSTILE.iter().filter(|t| parsed_markdown(&format!("{t}\n")).0.is_empty()).collect();
        // Inline text, setext underlines and indented lines with no paragraph before them,
        // and a link definition (no markup: it vanishes, which the text comparison catches).
        let no_markup_alone = [
            "--",
            "=",
            "===",
            "a\n    code block",
            "[a]: https://x.org",
            "\u{E000}plot:bode\u{E000}",
            "@@plot:bode@@",
            "1.5 kΩ and -5 V and +3 dB",
            "cut-off = 3 dB, a - b, 2 + 2",
            "-x +y =z 1.x 1)x",
            "trailing two spaces  \nnext",
            "back\\\nslash",
        ];
        assert_eq!(inert, no_markup_alone.iter().collect::<Vec<_>>());
        for text in HOSTILE {
            let (markup, plain) = parsed("", text);
            assert!(markup.is_empty(), "{text:?} -> {markup:?}");
            assert_eq!(lines(&plain), lines(text), "{text:?}");
            // Where templates put free text: inside a line, after a paragraph, in a list item
            // (the cautions). The context's own blocks only.
            for (prefix, words_before, blocks) in [
                ("Purpose: ", "Purpose:", &[][..]),
                ("Before.\n\n", "Before.", &[][..]),
                ("- ", "", &["List(None)", "Item"][..]),
            ] {
                let (markup, plain) = parsed(prefix, text);
                assert_eq!(markup, blocks, "{prefix:?} + {text:?}");
                assert_eq!(words(&plain), words(&format!("{words_before} {text}")), "{text:?}");
            }
        }
    }

    #[test]
    fn escape_examples() {
        assert_eq!(escape("- item"), "\\- item");
        assert_eq!(escape("+ item"), "\\+ item");
        assert_eq!(escape("1. item"), "1\\. item");
        assert_eq!(escape("12) item"), "12\\) item");
        assert_eq!(escape("1."), "1\\.");
        assert_eq!(escape("a\n==="), "a\n\\===");
        assert_eq!(escape("a\r\n  ---"), "a\r\n\\---");
        assert_eq!(escape("    code\n\tcode"), "code\ncode");
        assert_eq!(escape("  lead and  inner  "), "lead and  inner  ");
        assert_eq!(
            escape("a <b> & *c* [d](e) `f` #g |h| ~i~ \\"),
            "a &lt;b&gt; &amp; \\*c\\* \\[d\\](e) \\`f\\` \\#g \\|h\\| \\~i\\~ \\\\"
        );
        // Inline text and harmless line starts stay as they are.
        for same in ["1.5 kΩ", "-5 V", "+3 dB", "=x", "--x", "1.x", "a - b", "cut-off", "x\n2 + 2"]
        {
            assert_eq!(escape(same), same);
        }
        // The plot-marker character never survives: design text cannot make a plot.
        assert_eq!(escape("\u{E000}plot:bode\u{E000}"), "\u{FFFD}plot:bode\u{FFFD}");
        assert_eq!(escape("@@plot:bode@@"), "@@plot:bode@@");
    }

    proptest! {
        #[test]
        fn no_text_makes_a_block(
            text in "[-\u{0B}\u{0C}\u{A0}+=*_#>0-9.):|`~<\\[\\]!&\\\\ \t\n\r\u{E000}ab^$\"'(]{0,40}",
        ) {
            let (markup, plain) = parsed("", &text);
            prop_assert!(markup.is_empty(), "{:?} -> {:?}", text, markup);
            prop_assert_eq!(lines(&plain), lines(&text));
            for (prefix, before) in [("Purpose: ", "Purpose:"), ("Before.\n\n", "Before.")] {
                let (markup, plain) = parsed(prefix, &text);
                prop_assert!(markup.is_empty(), "{:?} + {:?} -> {:?}", prefix, text, markup);
                prop_assert_eq!(words(&plain), words(&format!("{before} {text}")));
            }
        }
    }
}
