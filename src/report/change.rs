//! The change report between two revisions of a design: requirements whose status changed,
//! parts and model parameters added, removed or changed, and every reviewed figure that
//! moved, old and new, in absolute and relative terms.
//!
//! In: each revision's results document (results.json as a JSON value) and, when the
//! revision was a design file, its validated [`Design`]. Out: a [`Change`] — the view model of
//! the change template — and its named Markdown tables; `cli/diff.rs` prints the same rows
//! on the terminal. No analysis and no I/O here: the caller analyses and reads files.

use std::collections::BTreeMap;

use serde::Serialize;
use serde_json::Value;

use crate::design::{Design, PartKind, Toleranced};
use crate::notation::{plain, si};
use crate::report::results::{Tool, tool};
use crate::report::tables::{cell, markdown_table};
use crate::report::template::{self, Blocks, TemplateError, TemplateSource};
use crate::report::view::escape;
use crate::report::{OutputFile, html, tidy_blank_lines};

/// The built-in change template.
pub const BUILT_IN: &str = include_str!("../../templates/change.md");
/// Its name in messages.
pub const BUILT_IN_NAME: &str = "built-in change template";

/// The names `table()` accepts in a change template, with what each holds.
pub const TABLES: &[(&str, &str)] = &[
    ("status", "requirements whose pass/fail changed, with both values"),
    ("parts", "parts and model parameters added, removed or changed"),
    ("moved", "every reviewed figure that moved: old, new, change, relative change"),
];

/// One revision as given to the diff.
pub struct Revision<'a> {
    /// The path as given on the command line.
    pub source: &'a str,
    /// SHA-256 of the file given, hex.
    pub sha256: String,
    /// The validated design, when the revision is a design file.
    pub design: Option<&'a Design>,
    /// Its results document (analysed here, or read from an earlier render).
    pub results: &'a Value,
}

/// A revision as the change template sees it.
#[derive(Clone, Debug, Serialize)]
pub struct RevisionView {
    /// The file given (escaped).
    pub source: String,
    /// `design` or `results` (a results.json of an earlier render).
    pub kind: &'static str,
    /// SHA-256 of that file.
    pub sha256: String,
    /// Design id.
    pub id: String,
    /// Title (escaped).
    pub title: String,
    /// Revision (escaped).
    pub revision: String,
    /// The design's date.
    pub date: String,
    /// Revision as written (for the page title, which escapes on its own).
    #[serde(skip)]
    pub revision_text: String,
}

/// A requirement whose nominal pass/fail changed (or that appeared or went away).
#[derive(Clone, Debug, Serialize)]
pub struct StatusChange {
    /// Requirement name (`upper_cutoff`, …).
    pub requirement: String,
    /// Pass at nominal values in the earlier revision; null when it did not exist there.
    pub old_pass: Option<bool>,
    /// Pass at nominal values in the later revision; null when it no longer exists.
    pub new_pass: Option<bool>,
    /// The value in the earlier revision, formatted.
    pub old_value: String,
    /// The value in the later revision, formatted.
    pub new_value: String,
}

/// A part or model parameter that was added, removed or changed.
#[derive(Clone, Debug, Serialize)]
pub struct PartChange {
    /// `added`, `removed` or `changed`.
    pub change: &'static str,
    /// Designator, or `model NAME` / `model NAME parameter`.
    pub item: String,
    /// Before (absent when added).
    pub old: Option<String>,
    /// After (absent when removed).
    pub new: Option<String>,
}

/// One figure that moved.
#[derive(Clone, Debug, Serialize)]
pub struct Moved {
    /// What it is (`f_H exact`, `τ Q1.cmu`, `V(coll)`).
    pub figure: String,
    /// Its JSON pointer in results.json.
    pub key: String,
    /// SI unit (`""` for V/V, `%` for a yield fraction).
    pub unit: &'static str,
    /// Earlier value (SI), null when absent.
    pub old: Option<f64>,
    /// Later value (SI), null when absent.
    pub new: Option<f64>,
    /// new − old (SI; a fraction for yields).
    pub absolute: Option<f64>,
    /// new/old − 1: the change of the magnitude whatever the sign of the value.
    pub relative: Option<f64>,
}

/// The change report: the change template's view model.
#[derive(Clone, Debug, Serialize)]
pub struct Change {
    /// The tool.
    pub tool: Tool,
    /// The earlier revision.
    pub old: RevisionView,
    /// The later revision.
    pub new: RevisionView,
    /// Requirements whose status changed.
    pub status_changes: Vec<StatusChange>,
    /// True when a requirement that passed (or did not exist) now fails.
    pub now_failing: bool,
    /// False when one side is a results.json (parts and models are then not compared).
    pub parts_compared: bool,
    /// Parts and model parameters that changed.
    pub part_changes: Vec<PartChange>,
    /// Figures that moved, in reading order.
    pub moved: Vec<Moved>,
    /// How many figures were compared.
    pub figures_compared: usize,
}

/// Compares two revisions.
pub fn compare(old: &Revision, new: &Revision) -> Change {
    let status_changes = status_changes(old.results, new.results);
    let now_failing = status_changes.iter().any(|s| s.new_pass == Some(false));
    let (parts_compared, part_changes) = match (old.design, new.design) {
        (Some(a), Some(b)) => (true, part_changes(a, b)),
        _ => (false, Vec::new()),
    };
    let figures = figures(new.results);
    let moved = figures
        .iter()
        .filter_map(|(figure, key, unit)| {
            let a = old.results.pointer(key).and_then(Value::as_f64);
            let b = new.results.pointer(key).and_then(Value::as_f64);
            let changed = match (a, b) {
                (Some(a), Some(b)) => a != b,
                (None, None) => false,
                _ => true,
            };
            changed.then(|| Moved {
                figure: figure.clone(),
                key: key.clone(),
                unit,
                old: a,
                new: b,
                absolute: a.zip(b).map(|(a, b)| b - a),
                // A yield moves in percentage points; its ratio says nothing more.
                relative: a
                    .zip(b)
                    .filter(|(a, _)| *a != 0.0 && *unit != "%")
                    .map(|(a, b)| b / a - 1.0),
            })
        })
        .collect();
    Change {
        tool: tool(),
        old: revision_view(old),
        new: revision_view(new),
        status_changes,
        now_failing,
        parts_compared,
        part_changes,
        moved,
        figures_compared: figures.len(),
    }
}

fn revision_view(r: &Revision) -> RevisionView {
    let text = |k: &str| r.results.pointer(&format!("/design/{k}")).and_then(Value::as_str);
    RevisionView {
        source: escape(r.source),
        kind: if r.design.is_some() { "design" } else { "results" },
        sha256: r.sha256.clone(),
        id: text("id").unwrap_or("—").to_string(),
        title: escape(text("title").unwrap_or("—")),
        revision: escape(text("revision").unwrap_or("—")),
        date: text("date").unwrap_or("—").to_string(),
        revision_text: text("revision").unwrap_or("—").to_string(),
    }
}

/// A requirement's nominal value as text: dB for the gain, SI otherwise.
fn requirement_value(r: &Value) -> String {
    let unit = r["unit"].as_str().unwrap_or("");
    match r["value"].as_f64() {
        None => "not found".into(),
        Some(v) if r["name"] == "midband_gain" && v > 0.0 => {
            format!("{} dB", plain(20.0 * v.log10(), 3))
        }
        Some(v) => si(v, unit, 4),
    }
}

fn status_changes(old: &Value, new: &Value) -> Vec<StatusChange> {
    let list =
        |v: &Value| -> Vec<Value> { v["requirements"].as_array().cloned().unwrap_or_default() };
    let (ro, rn) = (list(old), list(new));
    let find = |l: &[Value], name: &str| l.iter().find(|r| r["name"] == name).cloned();
    let mut out = Vec::new();
    for r in &rn {
        let name = r["name"].as_str().unwrap_or("?");
        let before = find(&ro, name);
        let (old_pass, new_pass) =
            (before.as_ref().and_then(|b| b["pass"].as_bool()), r["pass"].as_bool());
        if old_pass != new_pass {
            out.push(StatusChange {
                requirement: name.to_string(),
                old_pass,
                new_pass,
                old_value: before.as_ref().map_or("—".into(), requirement_value),
                new_value: requirement_value(r),
            });
        }
    }
    for r in ro.iter().filter(|r| find(&rn, r["name"].as_str().unwrap_or("?")).is_none()) {
        out.push(StatusChange {
            requirement: r["name"].as_str().unwrap_or("?").to_string(),
            old_pass: r["pass"].as_bool(),
            new_pass: None,
            old_value: requirement_value(r),
            new_value: "—".into(),
        });
    }
    out
}

fn value_text(v: &Toleranced, unit: &str) -> String {
    let tol =
        v.tolerance.map_or(String::new(), |t| format!(" ±{} %", plain(t.fraction * 100.0, 3)));
    format!("{}{tol}", si(v.nominal, unit, 4))
}

/// A part in one line: kind, value with tolerance, connections, model.
pub fn part_summary(k: &PartKind, d: &Design) -> String {
    match k {
        PartKind::Resistor { between, value } => {
            format!("resistor {} {}", value_text(value, "Ω"), between.join("–"))
        }
        PartKind::Capacitor { between, value, .. } => {
            format!("capacitor {} {}", value_text(value, "F"), between.join("–"))
        }
        PartKind::Inductor { between, value } => {
            format!("inductor {} {}", value_text(value, "H"), between.join("–"))
        }
        PartKind::Transconductance { between, value, .. } => {
            format!("transconductance {} {}", value_text(value, "S"), between.join("→"))
        }
        PartKind::VoltageAmplifier { between, value, .. } => {
            format!("voltage amplifier {} V/V {}", plain(value.nominal, 4), between.join("–"))
        }
        PartKind::Bjt { c, b, e, model } => {
            format!("bjt {} c {c} b {b} e {e}", d.models[*model].name)
        }
        PartKind::Mosfet { d: dr, g, s, model } => {
            format!("mosfet {} d {dr} g {g} s {s}", d.models[*model].name)
        }
    }
}

/// A model's parameters as `name → text`, nested keys joined by dots; a toleranced value
/// reads `nominal ±t %`.
fn model_parameters(v: &Value) -> BTreeMap<String, String> {
    fn walk(v: &Value, path: &str, out: &mut BTreeMap<String, String>) {
        match v {
            Value::Object(m) if m.contains_key("nominal") => {
                let n = m["nominal"].as_f64().map_or("—".into(), |x| plain(x, 4));
                let t = m
                    .get("tolerance")
                    .and_then(|t| t["fraction"].as_f64())
                    .map_or(String::new(), |f| format!(" ±{} %", plain(f * 100.0, 3)));
                out.insert(path.to_string(), format!("{n}{t}"));
            }
            Value::Object(m) => {
                for (k, w) in m {
                    let p = if path.is_empty() { k.clone() } else { format!("{path}.{k}") };
                    walk(w, &p, out);
                }
            }
            Value::Number(n) => {
                out.insert(path.to_string(), n.as_f64().map_or("—".into(), |x| plain(x, 4)));
            }
            Value::Null => {}
            other => {
                out.insert(path.to_string(), other.to_string().trim_matches('"').to_string());
            }
        }
    }
    let mut out = BTreeMap::new();
    walk(v, "", &mut out);
    out
}

fn part_changes(old: &Design, new: &Design) -> Vec<PartChange> {
    let mut out = Vec::new();
    for p in &new.parts {
        let after = part_summary(&p.kind, new);
        match old.parts.iter().find(|q| q.name == p.name) {
            None => out.push(PartChange {
                change: "added",
                item: p.name.clone(),
                old: None,
                new: Some(after),
            }),
            Some(q) => {
                let before = part_summary(&q.kind, old);
                if before != after {
                    out.push(PartChange {
                        change: "changed",
                        item: p.name.clone(),
                        old: Some(before),
                        new: Some(after),
                    });
                }
            }
        }
    }
    for q in old.parts.iter().filter(|q| !new.parts.iter().any(|p| p.name == q.name)) {
        out.push(PartChange {
            change: "removed",
            item: q.name.clone(),
            old: Some(part_summary(&q.kind, old)),
            new: None,
        });
    }
    for m in &new.models {
        let after = model_parameters(&serde_json::to_value(&m.device).unwrap_or_default());
        let Some(o) = old.models.iter().find(|o| o.name == m.name) else {
            out.push(PartChange {
                change: "added",
                item: format!("model {}", m.name),
                old: None,
                new: after.get("family").cloned(),
            });
            continue;
        };
        let before = model_parameters(&serde_json::to_value(&o.device).unwrap_or_default());
        let keys: std::collections::BTreeSet<&String> = before.keys().chain(after.keys()).collect();
        for k in keys {
            let (a, b) = (before.get(k), after.get(k));
            if a != b {
                out.push(PartChange {
                    change: match (a, b) {
                        (None, _) => "added",
                        (_, None) => "removed",
                        _ => "changed",
                    },
                    item: format!("model {} {k}", m.name),
                    old: a.cloned(),
                    new: b.cloned(),
                });
            }
        }
    }
    for o in old.models.iter().filter(|o| !new.models.iter().any(|m| m.name == o.name)) {
        out.push(PartChange {
            change: "removed",
            item: format!("model {}", o.name),
            old: Some(String::new()),
            new: None,
        });
    }
    out
}

/// The figures a reviewer follows in a results document: label, JSON pointer, unit.
fn figures(v: &Value) -> Vec<(String, String, &'static str)> {
    let mut out = vec![
        ("mid-band gain".to_string(), "/midband/gain".to_string(), ""),
        ("R_in".into(), "/midband/input_resistance_ohm".into(), "Ω"),
        ("R_out".into(), "/midband/output_resistance_ohm".into(), "Ω"),
        ("f_H exact".into(), "/high/f3db_hz".into(), "Hz"),
        ("f_H time-constant estimate".into(), "/high/octc/f_estimate_hz".into(), "Hz"),
        ("f_H second-order estimate".into(), "/high/second_order_f_estimate_hz".into(), "Hz"),
        ("f_L exact".into(), "/low/f3db_hz".into(), "Hz"),
        ("f_L time-constant estimate".into(), "/low/sctc/f_estimate_hz".into(), "Hz"),
    ];
    if let Some(nodes) = v.pointer("/operating_point/nodes").and_then(Value::as_object) {
        for k in nodes.keys().filter(|k| !k.contains('.') && *k != "source") {
            out.push((format!("V({k})"), format!("/operating_point/nodes/{k}"), "V"));
        }
    }
    if let Some(devs) = v.pointer("/operating_point/devices").and_then(Value::as_array) {
        for (i, d) in devs.iter().enumerate() {
            let part = d["part"].as_str().unwrap_or("?");
            let key = if d.get("ic_a").is_some() { "ic_a" } else { "id_a" };
            let at = format!("/operating_point/devices/{i}");
            out.push((format!("{part} bias current"), format!("{at}/{key}"), "A"));
            out.push((format!("{part} dissipation"), format!("{at}/power_w"), "W"));
        }
    }
    for (side, list) in [("high", "octc"), ("low", "sctc")] {
        if let Some(caps) = v.pointer(&format!("/{side}/{list}/caps")).and_then(Value::as_array) {
            for (i, c) in caps.iter().enumerate() {
                let part = c["part"].as_str().unwrap_or("?");
                out.push((format!("τ {part}"), format!("/{side}/{list}/caps/{i}/tau_s"), "s"));
            }
        }
    }
    if let Some(p) = v.pointer("/poles").and_then(Value::as_array) {
        for i in 0..p.len() {
            out.push((format!("pole {}", i + 1), format!("/poles/{i}/re_hz"), "Hz"));
        }
    }
    if let Some(reqs) = v.pointer("/requirements").and_then(Value::as_array) {
        for (i, r) in reqs.iter().enumerate() {
            let name = r["name"].as_str().unwrap_or("?").replace('_', " ");
            out.push((format!("yield, {name}"), format!("/requirements/{i}/yield_fraction"), "%"));
        }
    }
    out.push(("yield, all requirements".into(), "/tolerance/monte_carlo/yield_all".into(), "%"));
    out
}

/// A value in its unit: engineering notation, V/V plain, a fraction as per cent.
pub fn show(v: Option<f64>, unit: &str) -> String {
    match (v, unit) {
        (None, _) => "—".into(),
        (Some(v), "%") => format!("{} %", plain(v * 100.0, 4)),
        (Some(v), "") => plain(v, 4),
        (Some(v), u) => si(v, u, 4),
    }
}

fn signed(text: String, positive: bool) -> String {
    if positive { format!("+{text}") } else { text }
}

/// The rows of the `moved` table: figure, old, new, change (absolute), relative change.
pub fn moved_rows(c: &Change) -> Vec<Vec<String>> {
    c.moved
        .iter()
        .map(|m| {
            let absolute = m.absolute.map_or("—".into(), |d| match m.unit {
                // A yield moves in percentage points.
                "%" => signed(format!("{} pt", plain(d * 100.0, 3)), d > 0.0),
                unit => signed(show(Some(d), unit), d > 0.0),
            });
            let relative = m
                .relative
                .map_or("—".into(), |r| format!("{:+.3} %", r * 100.0).replace('-', "−"));
            vec![m.figure.clone(), show(m.old, m.unit), show(m.new, m.unit), absolute, relative]
        })
        .collect()
}

fn pass_text(p: Option<bool>) -> &'static str {
    match p {
        Some(true) => "pass",
        Some(false) => "FAIL",
        None => "—",
    }
}

/// The rows of the `status` table: requirement, before, after.
pub fn status_rows(c: &Change) -> Vec<Vec<String>> {
    c.status_changes
        .iter()
        .map(|s| {
            vec![
                s.requirement.replace('_', " "),
                format!("{} {}", s.old_value, pass_text(s.old_pass)),
                format!("{} {}", s.new_value, pass_text(s.new_pass)),
            ]
        })
        .collect()
}

/// The rows of the `parts` table: change, item, before, after.
pub fn part_rows(c: &Change) -> Vec<Vec<String>> {
    c.part_changes
        .iter()
        .map(|p| {
            vec![
                p.change.to_string(),
                p.item.clone(),
                p.old.clone().unwrap_or_else(|| "—".into()),
                p.new.clone().unwrap_or_else(|| "—".into()),
            ]
        })
        .collect()
}

/// The named Markdown tables of a change report (user text escaped for table cells).
pub fn tables(c: &Change) -> BTreeMap<&'static str, String> {
    let cells = |rows: Vec<Vec<String>>| -> Vec<Vec<String>> {
        rows.into_iter().map(|r| r.iter().map(|x| cell(x)).collect()).collect()
    };
    let mut t = BTreeMap::new();
    t.insert(
        "status",
        markdown_table(&["requirement", "before", "after"], "lll", cells(status_rows(c))),
    );
    t.insert(
        "parts",
        markdown_table(&["change", "item", "before", "after"], "llll", cells(part_rows(c))),
    );
    t.insert(
        "moved",
        markdown_table(
            &["figure", "before", "after", "change", "relative"],
            "lrrrr",
            cells(moved_rows(c)),
        ),
    );
    t
}

/// Renders the change report through `template` (the built-in one or the user's) into
/// change.md and change.html.
pub fn render(
    change: &Change,
    template: &TemplateSource,
) -> Result<Vec<OutputFile>, TemplateError> {
    let blocks = Blocks {
        tables: tables(change),
        known_tables: TABLES.iter().map(|(n, _)| *n).collect(),
        plots: Vec::new(),
        known_plots: Vec::new(),
        explanation: (Vec::new(), Vec::new()),
        cautions: Vec::new(),
    };
    let markdown = tidy_blank_lines(&template::render(template, change, blocks)?);
    let title =
        format!("Change review — {} → {}", change.old.revision_text, change.new.revision_text);
    Ok(vec![
        OutputFile {
            path: "change.html".into(),
            bytes: html::page(&title, &markdown, &[]).into_bytes(),
        },
        OutputFile { path: "change.md".into(), bytes: markdown.into_bytes() },
    ])
}
