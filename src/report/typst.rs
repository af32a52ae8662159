//! The typst exporter: the review's Markdown, walked as the same pulldown-cmark event stream
//! the HTML exporter renders (same options, [`crate::report::html::markdown_options`]), written
//! as typst markup (report.typ) for `typst compile --ignore-system-fonts`. Plot markers become
//! figures that reference plots/NAME.svg beside the file.
//!
//! In: the Markdown, the plots, the page setup. Out: one string. No I/O and no clock: the CLI
//! writes the file and passes any timestamp to typst itself.
//!
//! Every piece of text from the Markdown comes out as literal text, never as markup or code:
//! prose goes through [`escape`], URLs, code and languages through typst string literals, and
//! every function call this module writes ends with `;` so that no following text can extend
//! it (`#strong[x];(y)`, `#strong[x];.y`).

use std::collections::BTreeMap;

use crate::report::decimal;
use pulldown_cmark::TextMergeStream;
use pulldown_cmark::{Alignment, CodeBlockKind, Event, HeadingLevel, Parser, Tag, TagEnd};

use crate::report::html::markdown_options;
use crate::report::plots::Plot;

/// Paper size of the typst page.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Paper {
    /// ISO 216 A4, 210 mm × 297 mm.
    A4,
    /// US Letter, 8.5 in × 11 in.
    UsLetter,
}

impl Paper {
    /// The name typst's `page(paper: ...)` knows it by.
    pub fn typst_name(self) -> &'static str {
        match self {
            Paper::A4 => "a4",
            Paper::UsLetter => "us-letter",
        }
    }
}

/// What goes on every page besides the document.
#[derive(Clone, Copy, Debug)]
pub struct PageSetup<'a> {
    /// Paper size.
    pub paper: Paper,
    /// The PDF's document title (plain text).
    pub title: &'a str,
    /// Footer text beside the page number (plain text), e.g. `rx-preamp-ce · rev C`.
    pub footer: &'a str,
}

/// Escapes plain text so that typst markup shows it literally.
///
/// Always backslash-escaped: `` \ # $ * _ ` < > @ [ ] ~ `` and both quotes `" '` (typst would turn
/// them into curly quotes; the Markdown and HTML show them straight, so the PDF does too).
/// Escaped where they would start markup — and at either end of the string, since the
/// neighbour there is unknown:
/// `/` before `/`, `*` or a space (comments, term lists, `http://` links); `-` before `-`, `?`,
/// a digit or a space (dash, soft-hyphen and minus shorthands, list items); `.` before `.`
/// (ellipsis) or after a digit and before a space (`1. ` numbered items); `=` before `=` or a
/// space (headings); `+` before a space (numbered items). Line breaks and other control
/// characters become spaces, so text never ends a line or a paragraph. Everything else,
/// Unicode included, passes unchanged.
pub fn escape(text: &str) -> String {
    let chars: Vec<char> = text.chars().collect();
    let mut out = String::with_capacity(text.len() + text.len() / 8);
    for (i, &c) in chars.iter().enumerate() {
        if c.is_control() || is_newline(c) {
            out.push(' ');
            continue;
        }
        let prev = if i == 0 { None } else { Some(chars[i - 1]) };
        let next = chars.get(i + 1).copied();
        let before_space = next.is_none_or(char::is_whitespace);
        let special = match c {
            '\\' | '#' | '$' | '*' | '_' | '`' | '<' | '>' | '@' | '[' | ']' | '~' | '"' | '\'' => {
                true
            }
            '/' => before_space || matches!(next, Some('/' | '*')),
            '-' => {
                before_space
                    || matches!(next, Some('-' | '?'))
                    || next.is_some_and(char::is_numeric)
            }
            '.' => {
                prev.is_none()
                    || before_space && prev.is_some_and(|p| p.is_ascii_digit())
                    || matches!(next, None | Some('.'))
            }
            '=' => before_space || next == Some('='),
            '+' => before_space,
            _ => false,
        };
        if special {
            out.push('\\');
        }
        out.push(c);
    }
    out
}

/// The characters typst counts as line ends (typst-syntax `is_newline`).
fn is_newline(c: char) -> bool {
    matches!(c, '\n' | '\x0B' | '\x0C' | '\r' | '\u{0085}' | '\u{2028}' | '\u{2029}')
}

/// A typst string literal holding `text` exactly.
fn string_literal(text: &str) -> String {
    let mut out = String::with_capacity(text.len() + 2);
    out.push('"');
    for c in text.chars() {
        match c {
            '\\' => out.push_str("\\\\"),
            '"' => out.push_str("\\\""),
            '\n' => out.push_str("\\n"),
            '\r' => out.push_str("\\r"),
            '\t' => out.push_str("\\t"),
            c if c.is_control() || is_newline(c) => {
                out.push_str(&format!("\\u{{{:x}}}", c as u32));
            }
            c => out.push(c),
        }
    }
    out.push('"');
    out
}

/// The plot name of a plot-marker paragraph (see `template::plot_marker`).
fn marker_name(text: &str) -> Option<&str> {
    crate::report::template::plot_marker_name(text.trim())
}

/// Only these links become PDF links, as the HTML sanitiser allows; others keep their text.
fn linkable(url: &str) -> bool {
    let lower = url.trim_start().to_ascii_lowercase();
    ["https://", "http://", "mailto:"].iter().any(|s| lower.starts_with(s))
}

/// report.typ: the preamble (page, fonts, styles) and the document. Plots are referenced as
/// `image("plots/NAME.svg", width: 100%)` in a captioned figure where the Markdown has the
/// plot marker paragraph; a marker without a matching plot produces nothing.
pub fn document(markdown: &str, plots: &[Plot], page: &PageSetup) -> String {
    let events: Vec<Event> =
        TextMergeStream::new(Parser::new_ext(markdown, markdown_options())).collect();
    let mut footnotes = BTreeMap::new();
    let mut i = 0;
    while i < events.len() {
        if let Event::Start(Tag::FootnoteDefinition(label)) = &events[i] {
            let end = definition_end(&events, i);
            let mut inner = Writer::new(plots, None);
            inner.run(&events[i + 1..end]);
            footnotes.insert(label.to_string(), inner.out.trim().to_string());
            i = end;
        }
        i += 1;
    }
    let mut body = Writer::new(plots, Some(&footnotes));
    body.run(&events);
    let mut out = preamble(page);
    out.push('\n');
    out.push_str(body.out.trim());
    out.push('\n');
    out
}

/// Index of the end of the footnote definition that starts at `start` (they do not nest).
fn definition_end(events: &[Event], start: usize) -> usize {
    (start..events.len())
        .find(|&j| matches!(events[j], Event::End(TagEnd::FootnoteDefinition)))
        .unwrap_or(events.len())
}

fn preamble(page: &PageSetup) -> String {
    let setup = format!(
        "// report.typ, written by tauweave. `tauweave render` compiles it with\n\
         // --ignore-system-fonts and the design's date as --creation-timestamp, so the \
         bytes match.\n\
         #set document(title: {title})\n\
         #set page(\n  paper: {paper},\n  margin: (x: 2.2cm, top: 2.2cm, bottom: 2.5cm),\n  \
         numbering: \"1 / 1\",\n  footer: context {{\n    \
         set text(size: 8pt, fill: luma(80))\n    \
         block(width: 100%, stroke: (top: 0.4pt + luma(160)), inset: (top: 5pt))[\n      \
         {footer} #h(1fr) #counter(page).display(both: true)\n    ]\n  }},\n)\n",
        title = string_literal(page.title),
        paper = string_literal(page.paper.typst_name()),
        footer = escape(page.footer),
    );
    setup + STYLE
}

/// The look: serif text, thin rules, tables a size smaller with a bold header over a rule.
/// Only fonts typst-cli embeds, because it runs with --ignore-system-fonts.
const STYLE: &str = r#"#set text(font: "Libertinus Serif", size: 10pt)
#set par(justify: true)
#show raw: set text(font: "DejaVu Sans Mono")
#show heading: set block(above: 1.5em, below: 0.8em)
#show heading.where(level: 1): it => block(
  width: 100%, below: 1.3em, stroke: (bottom: 0.8pt), inset: (bottom: 0.45em),
  text(size: 16pt, weight: "bold", it.body),
)
#show heading.where(level: 2): it => block(
  width: 100%, above: 1.8em, below: 0.8em, sticky: true,
  stroke: (bottom: 0.4pt + luma(150)), inset: (bottom: 0.3em),
  text(size: 12.5pt, weight: "bold", it.body),
)
#show heading.where(level: 3): set text(size: 11pt)
#show heading.where(level: 4): set text(size: 10pt, style: "italic")
#set table(
  inset: (x: 5pt, y: 3pt),
  stroke: (_, y) => if y == 0 { (top: 0.8pt, bottom: 0.5pt) } else { (bottom: 0.25pt + luma(205)) },
)
#show table: set text(size: 8.5pt)
#show table: set par(justify: false)
#show figure.caption: set text(size: 8.5pt)
#show quote.where(block: true): it => block(
  stroke: (left: 1.2pt + luma(170)), inset: (left: 0.9em, y: 0.2em), it.body,
)
#show link: set text(fill: rgb(29, 59, 102))
#show footnote.entry: set text(size: 8.5pt)
"#;

/// Rows up to which a table is kept on one page.
const SHORT_TABLE: usize = 12;

struct TableState {
    columns: usize,
    /// The columns aligned on the decimal point, each written as two ([`decimal`]).
    decimal: Vec<bool>,
    /// Kept on one page (a short table): no row left alone at a page's foot.
    whole: bool,
    in_head: bool,
    /// A header of empty cells is left out (the table starts with its first row).
    no_head: bool,
    cells: usize,
}

/// An open container: where it starts in the output, and whether it is an item of a tight
/// list (whose blocks are set apart by a line end, not a paragraph break).
struct Frame {
    start: usize,
    tight: bool,
}

/// True when the header of the table starting at `start` has no content.
fn table_head_empty(events: &[Event], start: usize) -> bool {
    events[start + 1..]
        .iter()
        .take_while(|e| !matches!(e, Event::End(TagEnd::TableHead)))
        .all(|e| matches!(e, Event::Start(Tag::TableHead | Tag::TableCell) | Event::End(_)))
}

/// True when the list starting at `start` is loose: a paragraph sits directly in an item
/// (pulldown-cmark leaves the paragraphs of tight lists out).
fn list_is_loose(events: &[Event], start: usize) -> bool {
    let mut depth = 0usize;
    for e in &events[start + 1..] {
        match e {
            Event::Start(Tag::Paragraph) if depth == 1 => return true,
            Event::Start(_) => depth += 1,
            Event::End(_) if depth == 0 => return false,
            Event::End(_) => depth -= 1,
            _ => {}
        }
    }
    false
}

/// Walks events and writes typst markup.
struct Writer<'p> {
    out: String,
    plots: &'p [Plot],
    /// Rendered footnote definitions by label; `None` inside a definition (no nesting).
    footnotes: Option<&'p BTreeMap<String, String>>,
    /// Labels of footnotes already written, in order; the index names the typst label.
    written_footnotes: Vec<String>,
    /// Open containers: root, list items, quotes, definitions.
    frames: Vec<Frame>,
    /// What each open inline tag's end writes.
    closers: Vec<&'static str>,
    /// Open lists: true for a loose one.
    lists: Vec<bool>,
    /// Found by looking ahead at the start of a list or table, used by `start`.
    next_list_loose: bool,
    next_table_head_empty: bool,
    next_table_decimal: Vec<bool>,
    next_table_rows: usize,
    in_heading: bool,
    table: Option<TableState>,
    /// A code block being gathered: language and text.
    code: Option<(Option<String>, String)>,
    /// Depth inside dropped content (images, metadata).
    skip: usize,
}

impl<'p> Writer<'p> {
    fn new(plots: &'p [Plot], footnotes: Option<&'p BTreeMap<String, String>>) -> Self {
        Writer {
            out: String::new(),
            plots,
            footnotes,
            written_footnotes: Vec::new(),
            frames: vec![Frame { start: 0, tight: false }],
            closers: Vec::new(),
            lists: Vec::new(),
            next_list_loose: false,
            next_table_head_empty: false,
            next_table_decimal: Vec::new(),
            next_table_rows: 0,
            in_heading: false,
            table: None,
            code: None,
            skip: 0,
        }
    }

    fn run(&mut self, events: &[Event]) {
        let mut i = 0;
        while i < events.len() {
            match &events[i] {
                Event::Start(Tag::FootnoteDefinition(_)) => {
                    i = definition_end(events, i) + 1;
                    continue;
                }
                Event::Start(Tag::Paragraph) if self.skip == 0 && self.code.is_none() => {
                    if let (Some(Event::Text(t)), Some(Event::End(TagEnd::Paragraph))) =
                        (events.get(i + 1), events.get(i + 2))
                    {
                        if let Some(name) = marker_name(t) {
                            self.figure(name);
                            i += 3;
                            continue;
                        }
                    }
                }
                Event::Start(Tag::List(_)) => self.next_list_loose = list_is_loose(events, i),
                Event::Start(Tag::Table(_)) => {
                    self.next_table_head_empty = table_head_empty(events, i);
                    self.next_table_decimal = decimal::columns(events, i);
                    self.next_table_rows = events[i..]
                        .iter()
                        .take_while(|e| !matches!(e, Event::End(TagEnd::Table)))
                        .filter(|e| matches!(e, Event::Start(Tag::TableRow)))
                        .count();
                }
                Event::Start(Tag::TableCell) if self.skip == 0 => {
                    if let Some(step) = self.decimal_cell(&events[i + 1..]) {
                        i += step + 1;
                        continue;
                    }
                }
                _ => {}
            }
            self.event(&events[i]);
            i += 1;
        }
    }

    fn figure(&mut self, name: &str) {
        let Some(plot) = self.plots.iter().find(|p| p.name == name) else { return };
        self.begin_block();
        let path = string_literal(
            &plot.file.as_ref().map_or(format!("plots/{}.svg", plot.name), |f| f.path.clone()),
        );
        let image = match plot.max_width {
            // No wider than its natural print size, nor than the text.
            Some(px) => format!(
                "layout(size => image({path}, width: calc.min(size.width, {}pt)))",
                crate::notation::plain(px * crate::report::plots::PRINT_PT_PER_PX, 4)
            ),
            None => format!("image({path}, width: 100%)"),
        };
        let caption: String = crate::report::symbol_segments(&plot.caption)
            .into_iter()
            .map(|seg| match seg {
                crate::report::Segment::Plain(p) => escape(p),
                crate::report::Segment::Subscripted(base, sub) => {
                    format!("{}#sub[{}]", escape(base), escape(sub))
                }
            })
            .collect();
        if caption.is_empty() {
            // An uncaptioned image (the project's logo) is no numbered figure.
            self.out.push_str(&format!("#align(left, {image})"));
        } else {
            self.out.push_str(&format!("#figure(\n  {image},\n  caption: [{caption}],\n);"));
        }
    }

    /// Separates a new block from what its container already holds.
    fn begin_block(&mut self) {
        let Some(frame) = self.frames.last() else { return };
        if self.out.len() > frame.start {
            self.out.push_str(if frame.tight { "\n" } else { "\n\n" });
        }
    }

    fn open_frame(&mut self) {
        self.frames.push(Frame { start: self.out.len(), tight: false });
    }

    fn close_frame(&mut self) {
        self.frames.pop();
    }

    /// Inside a heading or a table cell a line end would end the construct.
    fn one_line(&self) -> bool {
        self.in_heading || self.table.is_some()
    }

    fn event(&mut self, event: &Event) {
        if self.skip > 0 {
            match event {
                Event::Start(Tag::Image { .. } | Tag::MetadataBlock(_)) => self.skip += 1,
                Event::End(TagEnd::Image | TagEnd::MetadataBlock(_)) => self.skip -= 1,
                _ => {}
            }
            return;
        }
        if let Some((_, text)) = &mut self.code {
            match event {
                Event::Text(t) => text.push_str(t),
                Event::End(TagEnd::CodeBlock) => self.end_code_block(),
                _ => {}
            }
            return;
        }
        match event {
            Event::Start(tag) => self.start(tag),
            Event::End(tag) => self.end(*tag),
            Event::Text(t) => {
                let kept;
                let t = if self.table.is_some() {
                    kept = decimal::keep_units(t);
                    kept.as_str()
                } else {
                    t
                };
                for seg in crate::report::symbol_segments(t) {
                    match seg {
                        crate::report::Segment::Plain(p) => self.out.push_str(&escape(p)),
                        crate::report::Segment::Subscripted(base, sub) => {
                            self.out.push_str(&format!("{}#sub[{}]", escape(base), escape(sub)));
                        }
                    }
                }
            }
            Event::Code(t) => self.inline_raw(t),
            Event::InlineMath(t) => self.out.push_str(&escape(&format!("${t}$"))),
            Event::DisplayMath(t) => self.out.push_str(&escape(&format!("$${t}$$"))),
            // Raw HTML is shown as the literal text it is, never interpreted.
            Event::Html(t) | Event::InlineHtml(t) => self.out.push_str(&escape(t)),
            Event::FootnoteReference(label) => self.footnote(label),
            Event::SoftBreak => self.out.push(if self.one_line() { ' ' } else { '\n' }),
            Event::HardBreak => self.out.push_str(if self.one_line() { "\\ " } else { "\\\n" }),
            Event::Rule => {
                self.begin_block();
                self.out.push_str("#line(length: 100%, stroke: 0.4pt + luma(150));");
            }
            Event::TaskListMarker(done) => {
                self.out.push_str(&escape(if *done { "[x] " } else { "[ ] " }))
            }
        }
    }

    /// The typst markup that opens `tag`.
    ///
    /// Long because it is one match over pulldown-cmark's block and inline tags, most arms a
    /// line or two; the table arm is the one with state of its own.
    fn start(&mut self, tag: &Tag) {
        match tag {
            Tag::Paragraph | Tag::HtmlBlock | Tag::DefinitionList => self.begin_block(),
            Tag::Heading { level, .. } => {
                self.begin_block();
                let depth = match level {
                    HeadingLevel::H1 => 1,
                    HeadingLevel::H2 => 2,
                    HeadingLevel::H3 => 3,
                    HeadingLevel::H4 => 4,
                    HeadingLevel::H5 => 5,
                    HeadingLevel::H6 => 6,
                };
                self.out.push_str(&"=".repeat(depth));
                self.out.push(' ');
                self.in_heading = true;
            }
            Tag::BlockQuote(_) => {
                self.begin_block();
                self.out.push_str("#quote(block: true)[");
                self.open_frame();
            }
            Tag::CodeBlock(kind) => {
                self.begin_block();
                let lang = match kind {
                    CodeBlockKind::Fenced(info) => info
                        .split_whitespace()
                        .next()
                        .filter(|l| {
                            l.chars().all(|c| c.is_ascii_alphanumeric() || "+-_.".contains(c))
                        })
                        .map(str::to_string),
                    CodeBlockKind::Indented => None,
                };
                self.code = Some((lang, String::new()));
            }
            Tag::List(first) => {
                self.begin_block();
                let loose = self.next_list_loose;
                let mut opening = String::from(if first.is_some() { "#enum(" } else { "#list(" });
                if loose {
                    opening.push_str("tight: false, ");
                }
                if let Some(n) = first.filter(|&n| n != 1) {
                    opening.push_str(&format!("start: {n}, "));
                }
                self.out.push_str(opening.trim_end());
                self.out.push('\n');
                self.lists.push(loose);
            }
            Tag::Item => {
                self.out.push_str("  [");
                let tight = !self.lists.last().copied().unwrap_or(false);
                self.frames.push(Frame { start: self.out.len(), tight });
            }
            // Rendered where they are referenced; the main pass skips them.
            Tag::FootnoteDefinition(_) => {}
            Tag::DefinitionListTitle => {
                self.begin_block();
                self.out.push_str("#strong[");
            }
            Tag::DefinitionListDefinition => {
                self.begin_block();
                self.out.push_str("#pad(left: 1.5em)[");
                self.open_frame();
            }
            Tag::Table(alignments) => {
                self.begin_block();
                let decimal = std::mem::take(&mut self.next_table_decimal);
                let split = |k: usize| decimal.get(k).copied().unwrap_or(false);
                let mut align: Vec<&str> = Vec::new();
                // Output columns that lose their inner padding: (right of integer parts, left
                // of the rest).
                let (mut ints, mut rests) = (Vec::new(), Vec::new());
                for (k, a) in alignments.iter().enumerate() {
                    if split(k) {
                        ints.push(align.len().to_string());
                        rests.push((align.len() + 1).to_string());
                        align.extend(["right", "left"]);
                        continue;
                    }
                    align.push(match a {
                        Alignment::Right => "right",
                        Alignment::Center => "center",
                        Alignment::Left | Alignment::None => "left",
                    });
                }
                // A short table stays on one page rather than leave a row or two behind.
                let whole = self.next_table_rows <= SHORT_TABLE;
                if whole {
                    self.out.push_str("#block(breakable: false)[");
                }
                self.out.push_str(&format!(
                    "#table(\n  columns: {},\n  align: ({},),\n",
                    align.len(),
                    align.join(", ")
                ));
                if !ints.is_empty() {
                    self.out.push_str(&format!(
                        "  inset: (x, _) => (left: if x in ({},) {{ 0pt }} else {{ 5pt }}, \
                         right: if x in ({},) {{ 0pt }} else {{ 5pt }}, y: 3pt),\n",
                        rests.join(", "),
                        ints.join(", ")
                    ));
                }
                let no_head = self.next_table_head_empty;
                if no_head {
                    // Without a header the first row gets the top rule instead.
                    self.out.push_str("  stroke: (_, y) => ");
                    self.out.push_str("(top: if y == 0 { 0.8pt }, bottom: 0.25pt + luma(205)),\n");
                }
                self.table = Some(TableState {
                    columns: alignments.len(),
                    decimal,
                    whole,
                    in_head: false,
                    no_head,
                    cells: 0,
                });
            }
            Tag::TableHead => {
                if let Some(t) = &mut self.table {
                    t.in_head = true;
                    t.cells = 0;
                    if !t.no_head {
                        self.out.push_str("  table.header(repeat: true");
                    }
                }
            }
            Tag::TableRow => {
                self.out.push_str("  ");
                if let Some(t) = &mut self.table {
                    t.cells = 0;
                }
            }
            Tag::TableCell => {
                let (head, skip) = self.head_cell();
                let spans =
                    self.table.as_ref().is_some_and(|t| t.decimal.get(t.cells) == Some(&true));
                if !skip {
                    self.out.push_str(match (head, spans) {
                        (true, true) => ", table.cell(colspan: 2)[#strong[",
                        (true, false) => ", [#strong[",
                        (false, _) => "[",
                    });
                }
                if let Some(t) = &mut self.table {
                    t.cells += 1;
                }
            }
            Tag::Emphasis => self.open_inline("#emph["),
            Tag::Strong => self.open_inline("#strong["),
            Tag::Strikethrough => self.open_inline("#strike["),
            Tag::Superscript => self.open_inline("#super["),
            Tag::Subscript => self.open_inline("#sub["),
            Tag::Link { dest_url, .. } => {
                if linkable(dest_url) {
                    self.out.push_str(&format!("#link({})[", string_literal(dest_url)));
                    self.closers.push("];");
                } else {
                    self.closers.push("");
                }
            }
            // No images from the text: the document stays self-contained, as the HTML does.
            Tag::Image { .. } | Tag::MetadataBlock(_) => self.skip = 1,
        }
    }

    fn open_inline(&mut self, opening: &str) {
        self.out.push_str(opening);
        self.closers.push("];");
    }

    fn end(&mut self, tag: TagEnd) {
        match tag {
            TagEnd::Paragraph | TagEnd::HtmlBlock | TagEnd::DefinitionList => {}
            TagEnd::Heading(_) => self.in_heading = false,
            TagEnd::BlockQuote(_) | TagEnd::DefinitionListDefinition => {
                self.close_frame();
                self.out.push_str("];");
            }
            TagEnd::CodeBlock => self.end_code_block(),
            TagEnd::List(_) => {
                self.lists.pop();
                self.out.push_str(");");
            }
            TagEnd::Item => {
                self.close_frame();
                self.out.push_str("],\n");
            }
            TagEnd::FootnoteDefinition => {}
            TagEnd::DefinitionListTitle => self.out.push_str("];"),
            TagEnd::Table => {
                self.out.push_str("  table.hline(stroke: 0.8pt),\n);");
                if self.table.as_ref().is_some_and(|t| t.whole) {
                    self.out.push(']');
                }
                self.table = None;
            }
            TagEnd::TableHead => {
                if !self.head_cell().1 {
                    self.pad_row();
                    self.out.push_str("),\n");
                }
                if let Some(t) = &mut self.table {
                    t.in_head = false;
                }
            }
            TagEnd::TableRow => {
                self.pad_row();
                self.out.push('\n');
            }
            TagEnd::TableCell => {
                let (head, skip) = self.head_cell();
                if !skip {
                    self.out.push_str(if head { "];]" } else { "], " });
                }
            }
            TagEnd::Emphasis
            | TagEnd::Strong
            | TagEnd::Strikethrough
            | TagEnd::Superscript
            | TagEnd::Subscript
            | TagEnd::Link => {
                let closer = self.closers.pop().unwrap_or("");
                self.out.push_str(closer);
            }
            TagEnd::Image | TagEnd::MetadataBlock(_) => {}
        }
    }

    /// A body cell of a decimal column, written as its two cells; `after` holds the events
    /// after its `Start(TableCell)`. Returns how many of them it used, or `None` for any other
    /// cell (left to [`Writer::event`]).
    fn decimal_cell(&mut self, after: &[Event]) -> Option<usize> {
        let t = self.table.as_ref()?;
        if t.in_head || t.decimal.get(t.cells) != Some(&true) {
            return None;
        }
        let (int, rest, used) = match after {
            [Event::End(TagEnd::TableCell), ..] => (String::new(), String::new(), 1),
            [Event::Text(text), Event::End(TagEnd::TableCell), ..] => {
                // The space between number and unit stays, at the start of its own cell.
                let kept = decimal::keep_units(text);
                let (int, rest) = decimal::split(&kept)?;
                (int.to_string(), rest.to_string(), 2)
            }
            _ => return None,
        };
        self.out.push('[');
        self.event(&Event::Text(int.into()));
        self.out.push_str("], [");
        self.event(&Event::Text(rest.into()));
        self.out.push_str("], ");
        if let Some(t) = &mut self.table {
            t.cells += 1;
        }
        Some(used)
    }

    /// Whether the current cell is a header cell, and whether it is left out.
    fn head_cell(&self) -> (bool, bool) {
        let head = self.table.as_ref().is_some_and(|t| t.in_head);
        (head, head && self.table.as_ref().is_some_and(|t| t.no_head))
    }

    /// Fills a short row with empty cells so every row has the table's column count.
    fn pad_row(&mut self) {
        let Some(t) = &mut self.table else { return };
        while t.cells < t.columns {
            let spans = t.decimal.get(t.cells) == Some(&true);
            self.out.push_str(match (t.in_head, spans) {
                (true, true) => ", table.cell(colspan: 2)[]",
                (true, false) => ", []",
                (false, true) => "[], [], ",
                (false, false) => "[], ",
            });
            t.cells += 1;
        }
        if !t.in_head && self.out.ends_with(' ') {
            self.out.pop();
        }
    }

    fn end_code_block(&mut self) {
        let Some((lang, mut text)) = self.code.take() else { return };
        if text.ends_with('\n') {
            text.pop();
        }
        let lang = lang.map(|l| format!("lang: {}, ", string_literal(&l))).unwrap_or_default();
        self.out.push_str(&format!("#raw(block: true, {lang}{});", string_literal(&text)));
    }

    /// Inline code: one-backtick raw when the code allows it (no backtick, no line end, not
    /// empty; typst takes it verbatim up to the next backtick), else the raw function with a
    /// string literal, which no content can break.
    fn inline_raw(&mut self, code: &str) {
        let plain = !code.is_empty() && !code.contains('`') && !code.chars().any(is_newline);
        if plain {
            self.out.push('`');
            self.out.push_str(code);
            self.out.push('`');
        } else {
            self.out.push_str(&format!("#raw({});", string_literal(code)));
        }
    }

    /// A footnote at its first reference, a reference to that footnote at later ones.
    fn footnote(&mut self, label: &str) {
        let Some(text) = self.footnotes.and_then(|f| f.get(label)) else {
            self.out.push_str(&escape(&format!("[^{label}]")));
            return;
        };
        match self.written_footnotes.iter().position(|l| l == label) {
            Some(n) => self.out.push_str(&format!("#footnote(<tauweave-fn-{}>);", n + 1)),
            None => {
                self.written_footnotes.push(label.to_string());
                let n = self.written_footnotes.len();
                self.out.push_str(&format!("#footnote[{text}]<tauweave-fn-{n}>"));
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::report::template::plot_marker;
    use proptest::prelude::*;

    const PAGE: PageSetup = PageSetup { paper: Paper::A4, title: "T", footer: "d · rev C" };

    fn body(markdown: &str) -> String {
        let doc = document(markdown, &[], &PAGE);
        let start = doc.find(STYLE).expect("style in the preamble") + STYLE.len();
        doc[start..].trim().to_string()
    }

    fn plot(name: &'static str, caption: &str) -> Plot {
        Plot { name, caption: caption.into(), svg: "<svg/>".into(), file: None, max_width: None }
    }

    /// A model of typst's markup lexer, after typst-syntax/src/lexer.rs (`Lexer::next`,
    /// `Lexer::markup`, `Lexer::backslash`, `Lexer::numbering`), made stricter than typst:
    /// every position counts as a line start and `*`, `_`, `<` are markup anywhere. Returns
    /// the literal text that `src` stands for, or the first thing in it that is not text.
    fn typst_text(src: &str) -> Result<String, String> {
        let c: Vec<char> = src.chars().collect();
        let space_or_end = |j: usize| j >= c.len() || c[j].is_whitespace();
        let at = |j: usize, s: &str| s.chars().enumerate().all(|(k, x)| c.get(j + k) == Some(&x));
        let mut out = String::new();
        let mut i = 0;
        while i < c.len() {
            let ch = c[i];
            let next = c.get(i + 1).copied();
            let markup = match ch {
                '\\' => match next {
                    None => Some("line break"),
                    Some(n) if n.is_whitespace() => Some("line break"),
                    Some('u') if c.get(i + 2) == Some(&'{') => Some("unicode escape"),
                    Some(n) => {
                        out.push(n);
                        i += 2;
                        continue;
                    }
                },
                c if is_newline(c) || c.is_control() => Some("line end"),
                '/' if matches!(next, Some('/' | '*')) => Some("comment"),
                '*' | '_' => Some("strong or emphasis"),
                '#' => Some("code"),
                '[' | ']' => Some("bracket"),
                '\'' | '"' => Some("smart quote"),
                '$' => Some("math"),
                '`' => Some("raw"),
                '@' => Some("reference"),
                '<' => Some("label"),
                '~' => Some("shorthand"),
                'h' if at(i + 1, "ttp://") || at(i + 1, "ttps://") => Some("link"),
                '.' if at(i + 1, "..") => Some("shorthand"),
                '-' if matches!(next, Some('-' | '?')) || next.is_some_and(char::is_numeric) => {
                    Some("shorthand")
                }
                '-' if space_or_end(i + 1) => Some("list marker"),
                '+' if space_or_end(i + 1) => Some("enum marker"),
                '/' if space_or_end(i + 1) => Some("term marker"),
                '=' => {
                    let mut j = i;
                    while c.get(j) == Some(&'=') {
                        j += 1;
                    }
                    space_or_end(j).then_some("heading marker")
                }
                '0'..='9' => {
                    let mut j = i;
                    while c.get(j).is_some_and(char::is_ascii_digit) {
                        j += 1;
                    }
                    (c.get(j) == Some(&'.') && space_or_end(j + 1)).then_some("enum marker")
                }
                _ => None,
            };
            if let Some(what) = markup {
                return Err(format!("{what} at {i} in {src:?}"));
            }
            out.push(ch);
            i += 1;
        }
        Ok(out)
    }

    /// What `escape` should keep: the text with line ends and controls as spaces.
    fn kept(text: &str) -> String {
        text.chars().map(|c| if c.is_control() || is_newline(c) { ' ' } else { c }).collect()
    }

    const HOSTILE: &[&str] = &[
        "#sys.exit()",
        "#let x = 1; #x",
        "$x^2$",
        "@ref",
        "<label>",
        "// comment",
        "/* x",
        "*/",
        "= heading",
        "== heading",
        "- item",
        "+ item",
        "/ term: description",
        "1. item",
        "12. item",
        "1.",
        "\\",
        "\\u{41}",
        "]",
        "[",
        "a ] b [ c",
        "*strong* _emph_",
        "`raw`",
        "```rust\nfn x()```",
        "~nbsp",
        "-- --- -? -5 5' 5\"",
        "...",
        "http://example.com/(a",
        "https://x.y",
        "\"quoted\" 'single'",
        "Ω µ ∥ − Στ ≥ ≤ ×10⁻¹⁷ °C",
        "a\nb\r\nc\u{2028}d\u{0085}e",
        "\n\n= not a heading",
        "tab\there",
        "end with slash/",
        "end with dash-",
        "end with equals=",
        "end with plus+",
        "RFN1.early_voltage",
        "|p2/p1| = 1520.",
        "1/(2π Στ)",
        "cut-off",
        "\\#x",
        "#[#strong[x]]",
    ];

    #[test]
    fn escape_keeps_hostile_strings_literal() {
        for s in HOSTILE {
            let e = escape(s);
            assert_eq!(typst_text(&e), Ok(kept(s)), "{s:?} -> {e:?}");
        }
    }

    #[test]
    fn escape_examples() {
        assert_eq!(escape("#sys.exit()"), "\\#sys.exit()");
        assert_eq!(escape("$x$"), "\\$x\\$");
        assert_eq!(escape("// c"), "\\/\\/ c");
        assert_eq!(escape("= h"), "\\= h");
        assert_eq!(escape("1. item"), "1\\. item");
        assert_eq!(escape("1.275 MHz"), "1.275 MHz");
        assert_eq!(escape("cut-off"), "cut-off");
        assert_eq!(escape("a_b"), "a\\_b");
        assert_eq!(escape("5' 6\""), "5\\' 6\\\"");
        assert_eq!(escape("Ω µ ∥ −"), "Ω µ ∥ −");
        assert_eq!(escape("a\nb"), "a b");
    }

    #[test]
    fn escaped_texts_side_by_side_stay_literal() {
        for a in HOSTILE {
            for b in HOSTILE {
                let joined = format!("{}{}", escape(a), escape(b));
                assert_eq!(typst_text(&joined), Ok(kept(a) + &kept(b)), "{a:?} + {b:?}");
            }
        }
    }

    proptest! {
        #[test]
        fn escape_is_literal_for_any_text(
            a in r"[-#$*_`<>@\[\]~/'=+.0-9 a-h:\\{}()Ω−\n\t\u{2028}]{0,24}",
            b in r"\PC{0,12}",
        ) {
            prop_assert_eq!(typst_text(&escape(&a)), Ok(kept(&a)));
            prop_assert_eq!(typst_text(&escape(&b)), Ok(kept(&b)));
            let joined = format!("{}{}", escape(&a), escape(&b));
            prop_assert_eq!(typst_text(&joined), Ok(kept(&a) + &kept(&b)));
        }
    }

    #[test]
    fn string_literals_escape_quotes_backslashes_and_line_ends() {
        assert_eq!(string_literal("a\"b\\c\nd\u{2028}"), "\"a\\\"b\\\\c\\nd\\u{2028}\"");
    }

    #[test]
    fn headings_paragraphs_and_inline_markup() {
        let b = body(
            "# Title\n\n## Section\n\n### Sub\n\n#### Deep\n\nSome *emph*, **strong**, \
             ~~gone~~ and `code`.\nNext line  \nhard break.\n",
        );
        assert_eq!(
            b,
            "= Title\n\n== Section\n\n=== Sub\n\n==== Deep\n\nSome #emph[emph];, \
             #strong[strong];, #strike[gone]; and `code`\\.\nNext line\\\nhard break\\."
        );
    }

    #[test]
    fn markdown_escapes_from_the_view_model_arrive_as_plain_text() {
        let hostile = "a < b & c_d [x](y) #z *w* `v` \\ | ~";
        let md = format!("{}\n", crate::report::view::escape(hostile));
        let text: Vec<Event> =
            TextMergeStream::new(Parser::new_ext(&md, markdown_options())).collect();
        assert_eq!(
            text,
            vec![
                Event::Start(Tag::Paragraph),
                Event::Text(hostile.into()),
                Event::End(TagEnd::Paragraph)
            ]
        );
        assert_eq!(body(&md), escape(hostile));
        assert_eq!(typst_text(&body(&md)), Ok(hostile.to_string()));
    }

    #[test]
    fn raw_html_is_literal_text() {
        let b = body("x <script>alert(1)</script> y\n\n<div>\n#sys.exit()\n</div>\n");
        assert_eq!(typst_text(&b.replace("\n\n", " ")).map(|_| ()), Ok(()), "{b}");
        assert!(b.contains("\\<script\\>alert(1)\\</script\\>"), "{b}");
    }

    #[test]
    fn links_keep_their_text_and_only_safe_urls() {
        let b = body(concat!(
            "[a \\] b](https://x.org/?q=\"x\"&r=\\\\) and [c](javascript:alert(1)) ",
            "<https://y.org>\n"
        ));
        assert!(b.starts_with("#link(\"https://x.org/?q=\\\"x\\\"&r=\\\\\")[a \\] b];"), "{b}");
        assert!(b.contains(" and c "), "{b}");
        assert!(!b.contains("javascript"), "{b}");
        assert!(b.contains("#link(\"https://y.org\")[https:\\//y.org];"), "{b}");
    }

    #[test]
    fn inline_code_can_hold_backticks_and_code_blocks_anything() {
        assert_eq!(body("`` a`b ``\n"), "#raw(\"a`b\");");
        assert_eq!(body("`#x \\ $`\n"), "`#x \\ $`");
        let b = body("```rust\nlet s = \"\\\"\"; // ```\n```\n");
        assert_eq!(b, "#raw(block: true, lang: \"rust\", \"let s = \\\"\\\\\\\"\\\"; // ```\");");
    }

    #[test]
    fn tables_repeat_their_header_and_keep_alignment() {
        let b = body("| name | value | note |\n|:---|---:|:---:|\n| R1 ] | 1 kΩ | #x |\n| R2 |\n");
        assert_eq!(
            b,
            // The value column holds numbers: it aligns on the decimal point as two columns
            // under one header, the number held to its unit by a no-break space; a table this
            // short is kept on one page.
            "#block(breakable: false)[#table(\n  columns: 4,\n  align: (left, right, left, center,),\n  \
             inset: (x, _) => (left: if x in (2,) { 0pt } else { 5pt }, \
             right: if x in (1,) { 0pt } else { 5pt }, y: 3pt),\n  \
             table.header(repeat: true, [#strong[name];], table.cell(colspan: 2)[#strong[value];], \
             [#strong[note];]),\n  \
             [R1 \\]], [1], [\u{a0}kΩ], [\\#x],\n  [R2], [], [], [],\n  \
             table.hline(stroke: 0.8pt),\n);]"
        );
    }

    #[test]
    fn lists_nest() {
        let b = body("- a\n  1. b\n  2. c\n- d\n\n3. e\n");
        assert_eq!(
            b,
            "#list(\n  [a\n#enum(\n  [b],\n  [c],\n);],\n  [d],\n);\n\n#enum(start: 3,\n  [e],\n);"
        );
    }

    #[test]
    fn loose_lists_keep_paragraph_breaks() {
        let b = body("- a\n\n  more\n- b\n");
        assert_eq!(b, "#list(tight: false,\n  [a\n\nmore],\n  [b],\n);");
    }

    #[test]
    fn a_header_of_empty_cells_is_left_out() {
        let b = body("| | |\n|:---|:---|\n| tool | x |\n");
        assert_eq!(
            b,
            "#block(breakable: false)[#table(\n  columns: 2,\n  align: (left, left,),\n  \
             stroke: (_, y) => (top: if y == 0 { 0.8pt }, bottom: 0.25pt + luma(205)),\n  \
             [tool], [x],\n  table.hline(stroke: 0.8pt),\n);]"
        );
    }

    #[test]
    fn block_quotes_rules_and_footnotes() {
        let b = body("> quoted *x*\n\n---\n\nSee[^n] and again[^n].\n\n[^n]: The note, #1.\n");
        assert_eq!(
            b,
            "#quote(block: true)[quoted #emph[x];];\n\n\
             #line(length: 100%, stroke: 0.4pt + luma(150));\n\n\
             See#footnote[The note, \\#1\\.]<tauweave-fn-1> and again#footnote(<tauweave-fn-1>);\\."
        );
    }

    #[test]
    fn plot_markers_become_figures_and_unknown_markers_vanish() {
        let plots = [plot("bode", "Bode plot: gain [dB] & phase #1")];
        let md =
            format!("Before.\n\n{}\n\n{}\n\nAfter.\n", plot_marker("bode"), plot_marker("other"));
        let doc = document(&md, &plots, &PAGE);
        let b = doc[doc.find(STYLE).unwrap() + STYLE.len()..].trim();
        assert_eq!(
            b,
            "Before\\.\n\n#figure(\n  image(\"plots/bode.svg\", width: 100%),\n  \
             caption: [Bode plot: gain \\[dB\\] & phase \\#1],\n);\n\nAfter\\."
        );
    }

    #[test]
    fn images_are_dropped() {
        assert_eq!(body("A ![alt *x*](https://x.org/i.png) b\n"), "A  b");
    }

    #[test]
    fn preamble_sets_page_fonts_and_escaped_footer() {
        let page =
            PageSetup { paper: Paper::UsLetter, title: "A \"B\" \\", footer: "id #1 ] · rev C" };
        let doc = document("# T\n", &[], &page);
        assert!(doc.contains("#set document(title: \"A \\\"B\\\" \\\\\")"), "{doc}");
        assert!(doc.contains("paper: \"us-letter\""), "{doc}");
        assert!(doc.contains("numbering: \"1 / 1\""), "{doc}");
        assert!(doc.contains("  id \\#1 \\] · rev C #h(1fr) #counter(page).display(both: true)\n"));
        assert!(
            !doc.contains("date:") && !doc.contains("datetime"),
            "the CLI passes the date: {doc}"
        );
        assert_eq!(Paper::A4.typst_name(), "a4");
        // Only fonts typst-cli embeds (it runs with --ignore-system-fonts).
        let embedded = ["Libertinus Serif", "New Computer Modern", "DejaVu Sans Mono"];
        for (i, _) in doc.match_indices("font: \"") {
            let name = doc[i + 7..].split('"').next().unwrap();
            assert!(embedded.contains(&name), "font {name}");
        }
    }

    #[test]
    fn output_is_deterministic() {
        let md = std::fs::read_to_string(concat!(
            env!("CARGO_MANIFEST_DIR"),
            "/tests/golden/rx-preamp-ce.md"
        ))
        .unwrap();
        let plots = [plot("bode", "x")];
        assert_eq!(document(&md, &plots, &PAGE), document(&md, &plots, &PAGE));
    }
}
