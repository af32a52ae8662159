//! The project file's sections, read with the design's own readers (tolerances,
//! requirements), so `resistor: 0.5 %` or `upper_cutoff: {min: 1 MHz}` means in a project
//! file exactly what it means in a design.

use super::*;
use crate::design::project::{Approval, NUMBER_FIELDS, Project};

/// Reads a project file's parsed YAML: the project (None on an error that leaves nothing
/// to read) and every finding.
pub fn read_project(text: &str, root: &Node) -> (Option<Project>, Vec<Diagnostic>) {
    let overrides = BTreeMap::new();
    let mut r = Reader::new(text, &overrides, None);
    r.in_project = true;
    let project = r.project(root);
    (project, r.diagnostics)
}

impl Reader<'_> {
    fn project(&mut self, root: &Node) -> Option<Project> {
        let owner = Span::file_start();
        if let NodeKind::Null = root.kind {
            self.push(
                Diagnostic::error("missing_key", "the project file is empty")
                    .at(owner, "nothing here")
                    .help(
                        "start with `tauweave: 1` and the house defaults; see docs/project-file.md",
                    ),
            );
            return None;
        }
        let mut top =
            Fields::open(root, "the project file", PROJECT_KEYS, owner, &mut self.diagnostics)?;
        self.format_version(top.get_entry("tauweave"));
        let organisation = top.get("organisation").and_then(|n| self.text_value(n, "organisation"));
        let document_number = top.get("document_number").and_then(|n| self.document_number(n));
        let approvals = match top.get_entry("approvals") {
            Some((_, n)) => self.approvals(n),
            None => Vec::new(),
        };
        let logo = top.get("logo").and_then(|n| self.file_path(n, "logo", &[".svg", ".png"]));
        let template = top.get("template").and_then(|n| self.file_path(n, "template", &[".md"]));
        let paper = top.get("paper").and_then(|n| self.paper(n));
        let tolerances = self.defaults(top.get_entry("tolerances"));
        let requirement_sets = match top.get_entry("requirement_sets") {
            Some((_, n)) => self.requirement_sets(n),
            None => BTreeMap::new(),
        };
        let p = Project {
            organisation,
            document_number,
            approvals,
            logo,
            template,
            paper,
            tolerances,
            requirement_sets,
        };
        top.finish(&mut self.diagnostics);
        Some(p)
    }

    /// `HLR-{id}-{revision}`: one line, braces only around a known placeholder.
    fn document_number(&mut self, node: &Node) -> Option<String> {
        let text = self.text_value(node, "document_number")?;
        let mut rest = text.as_str();
        while let Some(open) = rest.find('{') {
            let after = &rest[open + 1..];
            let name = after.split('}').next().unwrap_or("");
            if !after.contains('}') || !NUMBER_FIELDS.contains(&name) {
                let hint = match nearest(name, NUMBER_FIELDS) {
                    Some(n) => format!(
                        "did you mean `{{{n}}}`? The placeholders are {}",
                        list(NUMBER_FIELDS)
                    ),
                    None => format!("the placeholders are {}, each in braces", list(NUMBER_FIELDS)),
                };
                self.push(
                    Diagnostic::error(
                        "document_number",
                        format!("`{{{name}` is not a placeholder of a document number"),
                    )
                    .at(node.span, "unknown placeholder")
                    .help(hint),
                );
                return None;
            }
            rest = &after[name.len() + 1..];
        }
        Some(text)
    }

    fn approvals(&mut self, node: &Node) -> Vec<Approval> {
        let NodeKind::Seq(items) = &node.kind else {
            self.push(
                Diagnostic::error("wrong_type", "`approvals` must be a list")
                    .at(node.span, format!("found {}", node.shape()))
                    .help(
                        "write `approvals: [{role: Checked, name: A. Reviewer}, {role: Approved}]`",
                    ),
            );
            return Vec::new();
        };
        let mut out = Vec::new();
        for item in items {
            let Some(mut f) =
                Fields::open(item, "an approval", APPROVAL_KEYS, item.span, &mut self.diagnostics)
            else {
                continue;
            };
            let role =
                f.require("role", &mut self.diagnostics).and_then(|n| self.text_value(n, "role"));
            // A name may be left empty: the line is then signed by hand.
            let name = match f.get("name") {
                Some(n) if n.scalar().is_some_and(|s| s.trim().is_empty()) => Some(String::new()),
                Some(n) if matches!(n.kind, NodeKind::Null) => Some(String::new()),
                Some(n) => self.text_value(n, "name"),
                None => Some(String::new()),
            };
            f.finish(&mut self.diagnostics);
            if let (Some(role), Some(name)) = (role, name) {
                out.push(Approval { role, name });
            }
        }
        out
    }

    /// A plain relative path ending in one of `endings`.
    fn file_path(&mut self, node: &Node, what: &str, endings: &[&str]) -> Option<String> {
        let text = self.text_value(node, what)?;
        let lower = text.to_ascii_lowercase();
        if crate::design::fields::plain_relative_path(&text)
            && endings.iter().any(|e| lower.ends_with(e))
        {
            return Some(text);
        }
        self.push(
            Diagnostic::error("path", format!("`{text}` is not a {what} file tauweave can use"))
                .at(node.span, format!("a {} file beside the project file", endings.join(" or ")))
                .help(format!(
                    "give the path relative to the project file, ending in {}, without `..`",
                    endings.join(" or ")
                )),
        );
        None
    }

    fn paper(&mut self, node: &Node) -> Option<String> {
        let text = self.text_value(node, "paper")?;
        if PAPERS.contains(&text.as_str()) {
            return Some(text);
        }
        self.push(
            Diagnostic::error("paper", format!("`{text}` is not a paper tauweave prints on"))
                .at(node.span, "unknown paper")
                .help(format!("write one of {}", list(PAPERS))),
        );
        None
    }

    fn requirement_sets(&mut self, node: &Node) -> BTreeMap<String, Requirements> {
        let mut out = BTreeMap::new();
        let NodeKind::Map(entries) = &node.kind else {
            self.push(
                Diagnostic::error(
                    "wrong_type",
                    "`requirement_sets` must map a name to requirements",
                )
                .at(node.span, format!("found {}", node.shape()))
                .help("write `requirement_sets: {rf-input: {input_return_loss: {min: 10 dB}}}`"),
            );
            return out;
        };
        for (k, n) in entries {
            let set = self.requirements(Some((k, n)), None, None);
            out.insert(k.name.clone(), set);
        }
        out
    }
}
