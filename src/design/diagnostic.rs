//! Problems found in a design file: what is wrong, where, and how to fix it.
//!
//! In: the reader's and checker's findings. Out: [`Diagnostic`] values that carry a code, a
//! severity, a located span and a help line, and their rendering as miette reports with a
//! caret under the value. Rendering is the only formatting here; nothing is printed.

use std::fmt;

use miette::{GraphicalReportHandler, GraphicalTheme, LabeledSpan, NamedSource, SourceSpan};

/// A place in the design file: 1-based line and character column, plus the byte span.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct Span {
    /// 1-based line (0 when the place is unknown).
    pub line: u32,
    /// 1-based column in characters.
    pub column: u32,
    /// Byte offset into the file.
    pub offset: usize,
    /// Length in bytes.
    pub len: usize,
}

impl Span {
    /// The span of a line and column in `text`, one character long.
    pub fn at_line_column(text: &str, line: u32, column: u32) -> Span {
        let mut offset = 0;
        for (i, l) in text.split_inclusive('\n').enumerate() {
            if i + 1 == line as usize {
                let byte_in_line = l
                    .char_indices()
                    .nth(column.saturating_sub(1) as usize)
                    .map_or(l.len(), |c| c.0);
                offset += byte_in_line;
                let len = text[offset..].chars().next().map_or(0, char::len_utf8);
                return Span { line, column, offset, len };
            }
            offset += l.len();
        }
        Span { line, column, offset: text.len(), len: 0 }
    }

    /// The start of the file.
    pub fn file_start() -> Span {
        Span { line: 1, column: 1, offset: 0, len: 0 }
    }

    /// A sub-span starting `chars` characters into this span's text, `len_chars` long.
    /// Only exact for spans on one line whose text is written plainly in the file.
    pub fn narrow(self, text: &str, chars: usize, len_chars: usize) -> Span {
        let Some(piece) = text.get(self.offset..) else { return self };
        let mut indices = piece.char_indices().map(|(i, _)| i).chain(std::iter::once(piece.len()));
        let Some(start) = indices.nth(chars) else { return self };
        let end = piece[start..]
            .char_indices()
            .map(|(i, _)| i)
            .chain(std::iter::once(piece.len() - start))
            .nth(len_chars)
            .map_or(piece.len(), |e| start + e);
        if start > self.len {
            return self;
        }
        Span {
            line: self.line,
            column: self.column + chars as u32,
            offset: self.offset + start,
            len: (end - start).max(1).min(piece.len() - start),
        }
    }
}

/// How serious a finding is.
#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord)]
pub enum Severity {
    /// The design cannot be used until it is fixed.
    Error,
    /// Worth a look; the design still loads.
    Warning,
}

/// One finding about a design file.
#[derive(Clone, Debug, PartialEq)]
pub struct Diagnostic {
    /// Error or warning.
    pub severity: Severity,
    /// Stable code without the `tauweave::` prefix, e.g. `unknown_key`.
    pub code: &'static str,
    /// What is wrong, in one sentence.
    pub message: String,
    /// How to fix it.
    pub help: Option<String>,
    /// The place the caret points at.
    pub span: Span,
    /// The label under the caret.
    pub label: String,
    /// Further places that explain the finding ("first written here").
    pub related: Vec<(Span, String)>,
}

impl Diagnostic {
    /// An error with a code and message; place it with [`Diagnostic::at`].
    pub fn error(code: &'static str, message: impl Into<String>) -> Diagnostic {
        Diagnostic {
            severity: Severity::Error,
            code,
            message: message.into(),
            help: None,
            span: Span::file_start(),
            label: String::new(),
            related: Vec::new(),
        }
    }

    /// A warning with a code and message.
    pub fn warning(code: &'static str, message: impl Into<String>) -> Diagnostic {
        Diagnostic { severity: Severity::Warning, ..Diagnostic::error(code, message) }
    }

    /// Points the caret at `span` with `label` under it.
    pub fn at(mut self, span: Span, label: impl Into<String>) -> Diagnostic {
        self.span = span;
        self.label = label.into();
        self
    }

    /// Adds a help line.
    pub fn help(mut self, help: impl Into<String>) -> Diagnostic {
        self.help = Some(help.into());
        self
    }

    /// Adds a second place.
    pub fn also(mut self, span: Span, label: impl Into<String>) -> Diagnostic {
        self.related.push((span, label.into()));
        self
    }

    /// True for errors.
    pub fn is_error(&self) -> bool {
        self.severity == Severity::Error
    }

    /// Renders this finding as a miette report for `file` (its name and text): the header
    /// line, the source excerpt with a caret and label, and the help line.
    pub fn render(&self, file_name: &str, text: &str, color: bool) -> String {
        // A line too long to show (a generated or hostile file) is named, not printed; the
        // excerpt shows each span's line and its neighbours.
        let lines: Vec<&str> = text.split('\n').collect();
        let line_of = |offset: usize| text[..offset.min(text.len())].matches('\n').count();
        let spans = std::iter::once(&self.span).chain(self.related.iter().map(|(s, _)| s));
        let too_long = spans.map(|s| line_of(s.offset)).any(|k| {
            (k.saturating_sub(1)..=k + 1)
                .any(|i| lines.get(i).is_some_and(|l| l.len() > MAX_SHOWN_LINE))
        });
        if too_long {
            let help = self.help.as_ref().map_or(String::new(), |h| format!("\n  help: {h}"));
            return format!("{} (the line is too long to show){help}\n", self.one_line(file_name));
        }
        // Control characters from the file are shown, never sent to the terminal: in the
        // source one byte for one (`?`, so the spans still fit), in the words as pictures.
        let source: String = text
            .chars()
            .map(|c| {
                if c.is_control() && !matches!(c, '\n' | '\t' | '\r') && c.len_utf8() == 1 {
                    '?'
                } else {
                    c
                }
            })
            .collect();
        let shown = Diagnostic {
            message: crate::notation::visible(&self.message).into_owned(),
            label: crate::notation::visible(&self.label).into_owned(),
            help: self.help.as_deref().map(|h| crate::notation::visible(h).into_owned()),
            related: self
                .related
                .iter()
                .map(|(s, l)| (*s, crate::notation::visible(l).into_owned()))
                .collect(),
            ..self.clone()
        };
        let file_name = crate::notation::visible(file_name);
        let report = Located { diagnostic: &shown, source: NamedSource::new(file_name, source) };
        let theme =
            if color { GraphicalTheme::unicode() } else { GraphicalTheme::unicode_nocolor() };
        let handler =
            GraphicalReportHandler::new_themed(theme).with_context_lines(1).with_width(100);
        let mut out = String::new();
        if handler.render_report(&mut out, &report).is_err() {
            out = format!("{}: {}\n", self.code, self.message);
        }
        out
    }

    /// `file:line:column: severity[code]: message` — one line, for logs and tests.
    pub fn one_line(&self, file_name: &str) -> String {
        let severity = match self.severity {
            Severity::Error => "error",
            Severity::Warning => "warning",
        };
        format!(
            "{file_name}:{}:{}: {severity}[tauweave::{}]: {}",
            self.span.line, self.span.column, self.code, self.message
        )
    }
}

/// The longest source line a diagnostic prints, in bytes.
const MAX_SHOWN_LINE: usize = 400;

/// A diagnostic paired with its source, as miette wants it.
struct Located<'a> {
    diagnostic: &'a Diagnostic,
    source: NamedSource<String>,
}

impl fmt::Debug for Located<'_> {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.diagnostic.message)
    }
}

impl fmt::Display for Located<'_> {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.diagnostic.message)
    }
}

impl std::error::Error for Located<'_> {}

impl miette::Diagnostic for Located<'_> {
    fn code<'a>(&'a self) -> Option<Box<dyn fmt::Display + 'a>> {
        Some(Box::new(format!("tauweave::{}", self.diagnostic.code)))
    }

    fn severity(&self) -> Option<miette::Severity> {
        Some(match self.diagnostic.severity {
            Severity::Error => miette::Severity::Error,
            Severity::Warning => miette::Severity::Warning,
        })
    }

    fn help<'a>(&'a self) -> Option<Box<dyn fmt::Display + 'a>> {
        self.diagnostic.help.as_ref().map(|h| Box::new(h) as Box<dyn fmt::Display>)
    }

    fn source_code(&self) -> Option<&dyn miette::SourceCode> {
        Some(&self.source)
    }

    fn labels(&self) -> Option<Box<dyn Iterator<Item = LabeledSpan> + '_>> {
        let d = self.diagnostic;
        let primary = LabeledSpan::new_primary_with_span(
            Some(d.label.clone()).filter(|l| !l.is_empty()),
            SourceSpan::new(d.span.offset.into(), d.span.len),
        );
        let others = d.related.iter().map(|(span, label)| {
            LabeledSpan::new_with_span(
                Some(label.clone()),
                SourceSpan::new(span.offset.into(), span.len),
            )
        });
        Some(Box::new(std::iter::once(primary).chain(others)))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn renders_place_code_caret_and_help() {
        let text = "parts:\n  R1: {kind: resistor, valeu: 47k}\n";
        let span = Span::at_line_column(text, 2, 24);
        let d = Diagnostic::error("unknown_key", "unknown key `valeu`")
            .at(Span { len: 5, ..span }, "not a key of a resistor")
            .help("did you mean `value`?");
        let out = d.render("x.yaml", text, false);
        assert!(out.contains("tauweave::unknown_key"), "{out}");
        assert!(out.contains("x.yaml:2:24"), "{out}");
        assert!(out.contains("did you mean `value`?"), "{out}");
        assert!(out.contains("──┬──"), "{out}");
        assert_eq!(
            d.one_line("x.yaml"),
            "x.yaml:2:24: error[tauweave::unknown_key]: unknown key `valeu`"
        );
    }

    #[test]
    fn narrow_moves_into_the_text() {
        let text = "v: len * cmp\n";
        let span = Span { line: 1, column: 4, offset: 3, len: 9 };
        let n = span.narrow(text, 6, 3);
        assert_eq!((n.column, n.offset, n.len), (10, 9, 3));
    }
}
