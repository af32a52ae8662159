//! The YAML layer: turns the design file's text into a tree of located nodes.
//!
//! In: the file's text. Out: a [`Node`] tree in which every key and value knows its line,
//! column and byte span, with repeated keys kept (so the reader can report them with both
//! places), or the parser's own error at its location. The tree holds raw scalar text; it
//! knows nothing of the design format.

use serde::de::{Deserialize, Deserializer, MapAccess, SeqAccess, Visitor};
use serde_saphyr::Spanned;

use crate::design::diagnostic::{Diagnostic, Span};

/// One YAML node with the place it was written.
#[derive(Clone, Debug)]
pub struct Node {
    /// What the node holds.
    pub kind: NodeKind,
    /// Where it was written.
    pub span: Span,
}

/// The shape of a node.
#[derive(Clone, Debug)]
pub enum NodeKind {
    /// `~`, `null` or nothing.
    Null,
    /// A scalar, as the user wrote it (numbers keep their spelling: `4.70`, `47e3`).
    Scalar(String),
    /// A sequence.
    Seq(Vec<Node>),
    /// A mapping, in file order, with repeated keys kept.
    Map(Vec<(Key, Node)>),
}

/// A mapping key with its place.
#[derive(Clone, Debug)]
pub struct Key {
    /// The key text.
    pub name: String,
    /// Where it was written.
    pub span: Span,
}

impl Node {
    /// A short word for the node's shape, for "expected a mapping, found a list" messages.
    pub fn shape(&self) -> &'static str {
        match self.kind {
            NodeKind::Null => "nothing",
            NodeKind::Scalar(_) => "a single value",
            NodeKind::Seq(_) => "a list",
            NodeKind::Map(_) => "a mapping",
        }
    }

    /// The scalar text, if this node is a scalar.
    pub fn scalar(&self) -> Option<&str> {
        match &self.kind {
            NodeKind::Scalar(s) => Some(s),
            _ => None,
        }
    }
}

/// Parses `text` into a located tree.
pub fn parse(text: &str) -> Result<Node, Box<Diagnostic>> {
    let mut options = serde_saphyr::options::Options::default();
    options.duplicate_keys = serde_saphyr::options::DuplicateKeyPolicy::PassThrough;
    options.with_snippet = false;
    // `N`, `y`, `on`, `no` are names (a model, a node), not booleans.
    options.strict_booleans = true;
    let raw: Spanned<Raw> = serde_saphyr::from_str_with_options(text, options)
        .map_err(|e| Box::new(yaml_diagnostic(text, &e)))?;
    Ok(convert(text, raw))
}

fn yaml_diagnostic(text: &str, e: &serde_saphyr::Error) -> Diagnostic {
    let full = e.to_string();
    let first = full.lines().next().unwrap_or("the file is not valid YAML");
    // The parser prefixes "error: line N column M: "; the caret shows the place already.
    let message = first
        .trim_start_matches("error: ")
        .split_once(": ")
        .filter(|(head, _)| head.starts_with("line "))
        .map_or(first, |(_, rest)| rest)
        .to_string();
    let span = e
        .location()
        .filter(|l| l.line() > 0)
        .map(|l| Span::at_line_column(text, l.line() as u32, l.column() as u32))
        .unwrap_or_default();
    Diagnostic::error("yaml", format!("not valid YAML: {message}"))
        .at(span, "here")
        .help("check the indentation (spaces, not tabs) and that every bracket and quote is closed")
}

fn location_span(text: &str, loc: &serde_saphyr::Location) -> Span {
    let s = loc.span();
    match (s.byte_offset(), s.byte_len()) {
        (Some(offset), Some(len)) if loc.line() > 0 => Span {
            line: loc.line() as u32,
            column: loc.column() as u32,
            offset: offset as usize,
            len: (len as usize).min(text.len().saturating_sub(offset as usize)),
        },
        _ if loc.line() > 0 => Span::at_line_column(text, loc.line() as u32, loc.column() as u32),
        _ => Span::default(),
    }
}

fn convert(text: &str, raw: Spanned<Raw>) -> Node {
    let span = location_span(text, &raw.referenced);
    let kind = match raw.value {
        Raw::Null => NodeKind::Null,
        Raw::Str(s) => NodeKind::Scalar(s),
        // Numbers and booleans keep the spelling from the file.
        Raw::Other => {
            let end = (span.offset + span.len).min(text.len());
            let written = text.get(span.offset..end).unwrap_or("").trim().to_string();
            NodeKind::Scalar(written)
        }
        Raw::Seq(items) => NodeKind::Seq(items.into_iter().map(|i| convert(text, i)).collect()),
        Raw::Map(entries) => NodeKind::Map(
            entries
                .into_iter()
                .map(|(k, v)| {
                    let span = location_span(text, &k.referenced);
                    // A key that read as a number or boolean keeps its spelling from the file.
                    let name = match k.value {
                        Some(name) => name,
                        None => text
                            .get(span.offset..(span.offset + span.len).min(text.len()))
                            .unwrap_or("")
                            .trim()
                            .to_string(),
                    };
                    (Key { span, name }, convert(text, v))
                })
                .collect(),
        ),
    };
    Node { kind, span }
}

/// What serde-saphyr hands over, before spans are turned into [`Span`]s.
enum Raw {
    Null,
    Str(String),
    Other,
    Seq(Vec<Spanned<Raw>>),
    Map(Vec<(Spanned<Option<String>>, Spanned<Raw>)>),
}

impl<'de> Deserialize<'de> for Raw {
    fn deserialize<D: Deserializer<'de>>(deserializer: D) -> Result<Self, D::Error> {
        struct RawVisitor;
        impl<'de> Visitor<'de> for RawVisitor {
            type Value = Raw;
            fn expecting(&self, f: &mut std::fmt::Formatter) -> std::fmt::Result {
                f.write_str("any YAML value")
            }
            fn visit_unit<E>(self) -> Result<Raw, E> {
                Ok(Raw::Null)
            }
            fn visit_none<E>(self) -> Result<Raw, E> {
                Ok(Raw::Null)
            }
            fn visit_bool<E>(self, _: bool) -> Result<Raw, E> {
                Ok(Raw::Other)
            }
            fn visit_i64<E>(self, _: i64) -> Result<Raw, E> {
                Ok(Raw::Other)
            }
            fn visit_u64<E>(self, _: u64) -> Result<Raw, E> {
                Ok(Raw::Other)
            }
            fn visit_i128<E>(self, _: i128) -> Result<Raw, E> {
                Ok(Raw::Other)
            }
            fn visit_u128<E>(self, _: u128) -> Result<Raw, E> {
                Ok(Raw::Other)
            }
            fn visit_f64<E>(self, _: f64) -> Result<Raw, E> {
                Ok(Raw::Other)
            }
            fn visit_str<E>(self, v: &str) -> Result<Raw, E> {
                Ok(Raw::Str(v.to_string()))
            }
            fn visit_string<E>(self, v: String) -> Result<Raw, E> {
                Ok(Raw::Str(v))
            }
            fn visit_seq<A: SeqAccess<'de>>(self, mut seq: A) -> Result<Raw, A::Error> {
                let mut items = Vec::new();
                while let Some(item) = seq.next_element::<Spanned<Raw>>()? {
                    items.push(item);
                }
                Ok(Raw::Seq(items))
            }
            fn visit_map<A: MapAccess<'de>>(self, mut map: A) -> Result<Raw, A::Error> {
                let mut entries = Vec::new();
                while let Some(key) = map.next_key::<Spanned<KeyText>>()? {
                    let value = map.next_value::<Spanned<Raw>>()?;
                    let key = Spanned::new(key.value.0, key.referenced, key.defined);
                    entries.push((key, value));
                }
                Ok(Raw::Map(entries))
            }
        }
        deserializer.deserialize_any(RawVisitor)
    }
}

/// A mapping key: a string, or `None` for a number or boolean (its text is taken from the
/// file, so `1:` or `true:` still reads as a key, spelled as written).
struct KeyText(Option<String>);

impl<'de> Deserialize<'de> for KeyText {
    fn deserialize<D: Deserializer<'de>>(deserializer: D) -> Result<Self, D::Error> {
        struct KeyVisitor;
        impl Visitor<'_> for KeyVisitor {
            type Value = KeyText;
            fn expecting(&self, f: &mut std::fmt::Formatter) -> std::fmt::Result {
                f.write_str("a plain key")
            }
            fn visit_str<E>(self, v: &str) -> Result<KeyText, E> {
                Ok(KeyText(Some(v.to_string())))
            }
            fn visit_bool<E>(self, _: bool) -> Result<KeyText, E> {
                Ok(KeyText(None))
            }
            fn visit_i64<E>(self, _: i64) -> Result<KeyText, E> {
                Ok(KeyText(None))
            }
            fn visit_u64<E>(self, _: u64) -> Result<KeyText, E> {
                Ok(KeyText(None))
            }
            fn visit_f64<E>(self, _: f64) -> Result<KeyText, E> {
                Ok(KeyText(None))
            }
            fn visit_unit<E>(self) -> Result<KeyText, E> {
                Ok(KeyText(None))
            }
        }
        deserializer.deserialize_any(KeyVisitor)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn yes_no_and_single_letters_are_names() {
        let root = parse("N: {type: npn}\non: 1\n2: x\n").unwrap();
        let NodeKind::Map(entries) = &root.kind else { panic!("not a map") };
        let names: Vec<&str> = entries.iter().map(|(k, _)| k.name.as_str()).collect();
        assert_eq!(names, ["N", "on", "2"]);
        let NodeKind::Map(inner) = &entries[0].1.kind else { panic!() };
        assert_eq!(inner[0].1.scalar(), Some("npn"));
    }

    #[test]
    fn keeps_spelling_places_and_repeated_keys() {
        let text = "a: 4.70\nb:\n  c: 4k7\n  c: 47e3\nd: [x, 'y z']\n";
        let root = parse(text).unwrap();
        let NodeKind::Map(entries) = &root.kind else { panic!("not a map") };
        assert_eq!(entries[0].1.scalar(), Some("4.70"));
        assert_eq!((entries[0].1.span.line, entries[0].1.span.column), (1, 4));
        let NodeKind::Map(inner) = &entries[1].1.kind else { panic!() };
        assert_eq!(inner.len(), 2, "repeated key kept");
        assert_eq!((inner[1].0.span.line, inner[1].0.span.column), (4, 3));
        assert_eq!(inner[1].1.scalar(), Some("47e3"));
        let NodeKind::Seq(items) = &entries[2].1.kind else { panic!() };
        assert_eq!(items[1].scalar(), Some("y z"));
    }

    #[test]
    fn syntax_errors_are_located() {
        let e = parse("a: [1, 2\nb: 3\n").unwrap_err();
        assert_eq!(e.code, "yaml");
        assert!(e.span.line >= 1);
    }
}
