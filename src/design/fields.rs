//! Reading one YAML mapping against the keys it may hold.
//!
//! In: a located mapping node and the list of keys its place accepts. Out: the values asked
//! for, and — on [`Fields::finish`] — a diagnostic for every key nobody asked for, with the
//! nearest known key as the suggestion, plus one for every key written twice. Collects
//! problems instead of stopping at the first. No I/O.

use crate::design::diagnostic::{Diagnostic, Span};
use crate::design::suggest::nearest;
use crate::design::yaml::{Key, Node, NodeKind};

/// The keys of one mapping, tracked as they are read.
pub struct Fields<'n> {
    entries: &'n [(Key, Node)],
    used: Vec<bool>,
    known: &'static [&'static str],
    /// What the mapping is, for messages ("a resistor", "the `signal` section").
    what: String,
    /// The place to point at when a required key is missing.
    owner: Span,
}

impl<'n> Fields<'n> {
    /// Opens `node` as a mapping, or reports `wrong_type` and returns `None`.
    /// Repeated keys are reported here (the first one is used).
    pub fn open(
        node: &'n Node,
        what: impl Into<String>,
        known: &'static [&'static str],
        owner: Span,
        diagnostics: &mut Vec<Diagnostic>,
    ) -> Option<Fields<'n>> {
        let what = what.into();
        let NodeKind::Map(entries) = &node.kind else {
            diagnostics.push(
                Diagnostic::error("wrong_type", format!("{what} must be a mapping of keys"))
                    .at(node.span, format!("found {}", node.shape()))
                    .help(format!("write it as `key: value` lines; {what} takes {}", list(known))),
            );
            return None;
        };
        let mut used = vec![false; entries.len()];
        for (i, (key, _)) in entries.iter().enumerate() {
            if let Some(first) = entries[..i].iter().find(|(k, _)| k.name == key.name) {
                used[i] = true; // reported here, not again as unknown
                diagnostics.push(
                    Diagnostic::error("duplicate_key", format!("`{}` is written twice", key.name))
                        .at(key.span, "written again here")
                        .also(first.0.span, "first written here")
                        .help("keep one of them; a mapping holds each key once"),
                );
            }
        }
        Some(Fields { entries, used, known, what, owner })
    }

    /// The value of `key`, if written (the first one when repeated).
    pub fn get(&mut self, key: &str) -> Option<&'n Node> {
        debug_assert!(self.known.contains(&key), "{key} is not declared for {}", self.what);
        let i = self.entries.iter().position(|(k, _)| k.name == key)?;
        self.used[i] = true;
        Some(&self.entries[i].1)
    }

    /// The key and value of `key`, if written.
    pub fn get_entry(&mut self, key: &str) -> Option<(&'n Key, &'n Node)> {
        debug_assert!(self.known.contains(&key), "{key} is not declared for {}", self.what);
        let i = self.entries.iter().position(|(k, _)| k.name == key)?;
        self.used[i] = true;
        Some((&self.entries[i].0, &self.entries[i].1))
    }

    /// The value of `key`, or a `missing_key` diagnostic at the mapping's owner.
    pub fn require(&mut self, key: &str, diagnostics: &mut Vec<Diagnostic>) -> Option<&'n Node> {
        let found = self.get(key);
        if found.is_none() {
            diagnostics.push(
                Diagnostic::error("missing_key", format!("{} needs `{key}`", self.what))
                    .at(self.owner, format!("`{key}` is missing here"))
                    .help(format!("add `{key}:`; see docs/design-format.md")),
            );
        }
        found
    }

    /// True when `key` is written (does not mark it as read).
    pub fn has(&self, key: &str) -> bool {
        self.entries.iter().any(|(k, _)| k.name == key)
    }

    /// Reports every key that was not read as unknown, with a suggestion.
    pub fn finish(self, diagnostics: &mut Vec<Diagnostic>) {
        for ((key, _), used) in self.entries.iter().zip(&self.used) {
            if *used {
                continue;
            }
            let help = match nearest(&key.name, self.known) {
                Some(best) => format!("did you mean `{best}`?"),
                None => format!("{} takes {}", self.what, list(self.known)),
            };
            diagnostics.push(
                Diagnostic::error(
                    "unknown_key",
                    format!("unknown key `{}` in {}", key.name, self.what),
                )
                .at(key.span, "not a key here")
                .help(help),
            );
        }
    }
}

/// `a`, `b` and `c` — for help lines.
pub fn list(names: &[&str]) -> String {
    let quoted: Vec<String> = names.iter().map(|n| format!("`{n}`")).collect();
    match quoted.len() {
        0 => "nothing".to_string(),
        1 => quoted[0].clone(),
        n => format!("{} and {}", quoted[..n - 1].join(", "), quoted[n - 1]),
    }
}

/// True for a plain relative path inside a folder: `stage.svg`, `drawings/stage.svg`; false
/// for an absolute path, one that climbs (`..`), or one with an empty, `.` or drive-like
/// component or a backslash. The design's schematic and a rendered folder's manifest names
/// must be such paths.
pub fn plain_relative_path(path: &str) -> bool {
    !path.is_empty()
        && !path.contains('\\')
        && path.split('/').all(|c| !c.is_empty() && c != "." && c != ".." && !c.contains(':'))
}
