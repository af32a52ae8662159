//! The change report between two revisions of a design: requirements whose status changed,
//! parts and model parameters added, removed or changed, and every reviewed figure that
//! moved, old and new, in absolute and relative terms.
//!
//! In: each revision's [`ResultsDocument`] (from a fresh review, or an earlier results.json
//! read back into the same typed struct) and, when the
//! revision was a design file, its validated [`Design`]. Out: a [`Change`] — the view model of
//! the change template — and its named Markdown tables; `cli/diff.rs` prints the same rows
//! on the terminal. No analysis and no I/O here: the caller analyses and reads files.

use std::collections::BTreeMap;

use serde::Serialize;
use serde_json::Value;

use crate::analysis::response::SweepPoint;
use crate::design::{Design, Part, Toleranced};
use crate::notation::{ABSENT, absent, number, plain, si, signed_percent};
use crate::report::plots::{self, Plot};
use crate::report::results::{
    DeviceBiasResults, RequirementResults, ResultsDocument, RootResults, Tool, tool,
};
use crate::report::tables::{self, cell, markdown_table, part_cells};
use crate::report::template::plot_marker;
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
    ("parts", "parts, model parameters, settings and requirement limits that changed"),
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
    /// Its results document (reviewed here, or read from an earlier render).
    pub results: &'a ResultsDocument,
    /// Its exact frequency response (from the analysis, or the sweep.csv beside an earlier
    /// results.json), when known.
    pub sweep: Option<&'a [SweepPoint]>,
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
    /// The file given, as written (for the terminal).
    #[serde(skip)]
    pub source_text: String,
}

/// A requirement whose nominal pass/fail changed (or that appeared or went away).
#[derive(Clone, Debug, Serialize)]
pub struct StatusChange {
    /// Requirement name (`upper_cutoff`, …).
    pub requirement: String,
    /// What changed status: `nominal` (the value itself), `worst corner` (the tolerance
    /// corner) or `yield` (every Monte Carlo run passing, or not).
    pub aspect: &'static str,
    /// Pass at nominal values in the earlier revision; null when it did not exist there.
    pub old_pass: Option<bool>,
    /// Pass at nominal values in the later revision; null when it no longer exists.
    pub new_pass: Option<bool>,
    /// The value in the earlier revision, formatted.
    pub old_value: String,
    /// The value in the later revision, formatted.
    pub new_value: String,
    /// The limit in the earlier revision, formatted (`≥ 900 kHz`).
    pub old_limit: String,
    /// The limit in the later revision, formatted.
    pub new_limit: String,
}

/// A part, model parameter or setting that was added, removed or changed.
#[derive(Clone, Debug, Serialize)]
pub struct PartChange {
    /// `added`, `removed` or `changed`.
    pub change: &'static str,
    /// Designator, `model NAME` / `model NAME parameter`, or a setting (`supply vcc`,
    /// `signal`, `temperature`, `requirement upper_cutoff`, …).
    pub item: String,
    /// Before (absent when added).
    pub old: Option<String>,
    /// After (absent when removed).
    pub new: Option<String>,
}

/// One figure that moved.
#[derive(Clone, Debug, Serialize)]
pub struct Moved {
    /// What it is (`f_H exact`, `τ Q1.cmu`, `V(coll)`), escaped for Markdown.
    pub figure: String,
    /// What it is, as written (for the terminal).
    #[serde(skip)]
    pub label: String,
    /// Its identity across revisions (`/high/f3db_hz`, `tau high Q1.cmu`, `pole 2`).
    pub key: String,
    /// SI unit of the numbers (`""` for V/V, `dB`, `%` for a yield fraction).
    pub unit: &'static str,
    /// Earlier value (SI), null when absent.
    pub old: Option<f64>,
    /// Later value (SI), null when absent.
    pub new: Option<f64>,
    /// Earlier value as text (a pole as `|p|, Q` when complex); `—` when absent.
    pub old_text: String,
    /// Later value as text.
    pub new_text: String,
    /// new − old (SI; a fraction for yields).
    pub absolute: Option<f64>,
    /// new/old − 1 (null for yields and values in dB).
    pub relative: Option<f64>,
    /// Why it matters, when it bears on a requirement: `R_out worst corner: pass → FAIL`,
    /// `f_H margin +42 % → +30 %`; empty otherwise.
    pub bearing: String,
    /// Its rank group: 0 bears on a requirement whose status changed, 1 on another
    /// requirement, 2 on none.
    pub group: u8,
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
    /// Figures that moved, most important first: those of requirements whose status
    /// changed, then those of other requirements by the margin the change consumed, then
    /// the rest by the size of their relative change.
    pub moved: Vec<Moved>,
    /// How many figures were compared.
    pub figures_compared: usize,
    /// True when both responses are known and drawn over each other (`plot(name=
    /// "bode_overlay")`).
    pub has_overlay: bool,
    /// That drawing, SVG.
    #[serde(skip)]
    pub overlay: Option<String>,
}

/// Compares two revisions.
pub fn compare(old: &Revision, new: &Revision) -> Change {
    let status_changes = status_changes(old.results, new.results);
    let now_failing = status_changes.iter().any(|s| s.new_pass == Some(false));
    let mut part_changes = match (old.design, new.design) {
        (Some(a), Some(b)) => part_changes(a, b),
        _ => Vec::new(),
    };
    part_changes.extend(limit_changes(old.results, new.results));
    let (mut before, mut after) = (figures(old.results), figures(new.results));
    let (poles_before, poles_after) = pole_figures(&old.results.poles, &new.results.poles);
    before.extend(poles_before);
    after.extend(poles_after);
    // The later revision's order, then what only the earlier one had.
    let mut keys: Vec<&str> = after.iter().map(|f| f.key.as_str()).collect();
    keys.extend(
        before.iter().map(|f| f.key.as_str()).filter(|k| !after.iter().any(|f| f.key == *k)),
    );
    let find = |list: &'_ [Figure], key: &str| list.iter().find(|f| f.key == key).cloned();
    let mut moved = Vec::new();
    for key in &keys {
        let (a, b) = (find(&before, key), find(&after, key));
        let Some(any) = b.as_ref().or(a.as_ref()) else { continue };
        let (x, y) = (a.as_ref().map(|f| f.value), b.as_ref().map(|f| f.value));
        let text = |f: &Option<Figure>| f.as_ref().map_or_else(absent, Figure::text);
        let (old_text, new_text) = (text(&a), text(&b));
        if x == y && old_text == new_text {
            continue;
        }
        let relative = match (x, y) {
            (Some(x), Some(y)) if x != 0.0 && any.unit != "%" && any.unit != "dB" => {
                Some(y / x - 1.0)
            }
            _ => None,
        };
        moved.push(Moved {
            figure: escape(&any.label),
            label: any.label.clone(),
            key: key.to_string(),
            unit: any.unit,
            old: x,
            new: y,
            old_text,
            new_text,
            absolute: x.zip(y).map(|(x, y)| y - x),
            relative,
            bearing: String::new(),
            group: 2,
        });
    }
    rank(&mut moved, old.results, new.results, &status_changes);
    let label = |r: &Revision| {
        let d = &r.results.design;
        format!("rev {} ({})", d.revision, if std::ptr::eq(r, old) { "earlier" } else { "later" })
    };
    let overlay = old
        .sweep
        .zip(new.sweep)
        .and_then(|(a, b)| plots::bode_overlay(a, b, (&label(old), &label(new))));
    Change {
        tool: tool(),
        old: revision_view(old),
        new: revision_view(new),
        status_changes,
        now_failing,
        parts_compared: old.design.is_some() && new.design.is_some(),
        part_changes,
        moved,
        figures_compared: keys.len(),
        has_overlay: overlay.is_some(),
        overlay,
    }
}

/// The requirement a figure bears on: its own value, margin, corner or yield.
fn requirement_of(key: &str) -> Option<&str> {
    let own = match key {
        "gain" | "gain_db" | "band centre gain" => Some("midband_gain"),
        "band flatness" => Some("gain_flatness"),
        "/high/f3db_hz" => Some("upper_cutoff"),
        "/low/f3db_hz" => Some("lower_cutoff"),
        "/midband/input_resistance_ohm" => Some("input_resistance"),
        "/midband/output_resistance_ohm" => Some("output_resistance"),
        "/noise/noise_figure_db" => Some("noise_figure"),
        "/noise/input_density_v_per_rthz" => Some("input_noise_density"),
        "/noise/band/output_rms_v" => Some("output_noise"),
        "/noise/snr_db" => Some("snr"),
        "/large_signal/thd_percent" => Some("thd"),
        "/large_signal/compression_1db_input_v" => Some("input_compression"),
        "/large_signal/output_swing/positive_v" | "/large_signal/output_swing/negative_v" => {
            Some("output_swing")
        }
        "/ports/band/input_return_loss_min_db" => Some("input_return_loss"),
        "/ports/band/output_return_loss_min_db" => Some("output_return_loss"),
        "/ports/stability/mu_min" => Some("stability"),
        "/step/rise_time_s" => Some("rise_time"),
        "/step/overshoot" => Some("overshoot"),
        "/group_delay/variation_s" => Some("group_delay_variation"),
        _ => None,
    };
    // A what-if limit bears on the requirement it keeps: `limit QUANTITY REQUIREMENT`.
    let limit = key.strip_prefix("limit ").and_then(|rest| rest.rsplit(' ').next());
    own.or(limit).or_else(|| {
        ["margin ", "corner ", "yield "]
            .iter()
            .find_map(|p| key.strip_prefix(p))
            .filter(|name| *name != "all")
    })
}

/// A requirement's margin in its own terms (dB for a gain or a flatness, else a fraction),
/// and the same as a rough fraction so the two kinds rank together (1 dB ≈ 11.5 %).
fn margin_of(r: &RequirementResults) -> Option<(f64, f64)> {
    match r.margin_db {
        Some(db) => Some((db, 10f64.powf(db / 20.0) - 1.0)),
        None => r.margin.map(|m| (m, m)),
    }
}

fn margin_text(r: &RequirementResults) -> String {
    match (r.margin_db, r.margin) {
        (Some(db), _) => signed(format!("{} dB", plain(db, 3)), db > 0.0),
        (None, Some(m)) => signed_percent(m, 3),
        _ => absent(),
    }
}

/// Orders the moved figures by how much they matter to the review (see [`Change::moved`])
/// and says why for each that bears on a requirement. Ties keep reading order.
fn rank(
    moved: &mut [Moved],
    old: &ResultsDocument,
    new: &ResultsDocument,
    status: &[StatusChange],
) {
    let mut score: Vec<f64> = Vec::with_capacity(moved.len());
    for m in moved.iter_mut() {
        let Some(name) = requirement_of(&m.key) else {
            // The size of the move: relative, or a dB or percentage-point change as a
            // rough fraction.
            let size = match (m.relative, m.absolute, m.unit) {
                (Some(r), _, _) => r.abs(),
                (None, Some(d), "dB") => 10f64.powf(d.abs() / 20.0) - 1.0,
                (None, Some(d), _) => d.abs(),
                _ => f64::INFINITY, // appeared or went away
            };
            score.push(size);
            continue;
        };
        let label = tables::figure_label(name);
        let turned: Vec<&StatusChange> = status.iter().filter(|s| s.requirement == name).collect();
        if !turned.is_empty() {
            m.group = 0;
            m.bearing = turned
                .iter()
                .map(|s| {
                    let aspect = if s.aspect == "nominal" { "" } else { s.aspect };
                    let aspect =
                        if aspect.is_empty() { String::new() } else { format!(" {aspect}") };
                    format!(
                        "{label}{aspect}: {} → {}",
                        pass_text(s.old_pass),
                        pass_text(s.new_pass)
                    )
                })
                .collect::<Vec<_>>()
                .join("; ");
            score.push(f64::INFINITY);
            continue;
        }
        let (a, b) =
            (find_requirement(&old.requirements, name), find_requirement(&new.requirements, name));
        m.group = 1;
        match (a.and_then(margin_of), b.and_then(margin_of)) {
            (Some((_, x)), Some((_, y))) => {
                m.bearing = format!(
                    "{label} margin {} → {}",
                    a.map_or_else(absent, margin_text),
                    b.map_or_else(absent, margin_text)
                );
                score.push(x - y); // the margin consumed; negative when it grew
            }
            _ => score.push(f64::NEG_INFINITY),
        }
    }
    let mut order: Vec<usize> = (0..moved.len()).collect();
    order.sort_by(|&i, &j| {
        moved[i].group.cmp(&moved[j].group).then(score[j].total_cmp(&score[i])).then(i.cmp(&j))
    });
    let sorted: Vec<Moved> = order.iter().map(|&i| moved[i].clone()).collect();
    moved.clone_from_slice(&sorted);
}

fn revision_view(r: &Revision) -> RevisionView {
    let d = &r.results.design;
    RevisionView {
        source: escape(r.source),
        source_text: r.source.to_string(),
        kind: if r.design.is_some() { "design" } else { "results" },
        sha256: r.sha256.clone(),
        id: escape(&d.id),
        title: escape(&d.title),
        revision: escape(&d.revision),
        date: escape(&d.date),
        revision_text: d.revision.clone(),
    }
}

/// A requirement's nominal value as text.
fn requirement_value(r: &RequirementResults) -> String {
    r.value.map_or("not found".into(), |v| tables::requirement_value(&r.name, &r.unit, v))
}

/// A requirement's limits as text (`—` without limits).
fn requirement_limit(r: &RequirementResults) -> String {
    let limit = tables::requirement_limit(&r.name, &r.unit, r.min, r.max);
    if limit.is_empty() { absent() } else { limit }
}

fn find_requirement<'a>(
    list: &'a [RequirementResults],
    name: &str,
) -> Option<&'a RequirementResults> {
    list.iter().find(|r| r.name == name)
}

/// Requirements whose limits changed, were added or were removed.
fn limit_changes(old: &ResultsDocument, new: &ResultsDocument) -> Vec<PartChange> {
    let (ro, rn) = (&old.requirements, &new.requirements);
    let mut out = Vec::new();
    for r in rn {
        let before = find_requirement(ro, &r.name).map(requirement_limit);
        let after = requirement_limit(r);
        if before.as_deref() != Some(after.as_str()) {
            out.push(PartChange {
                change: if before.is_some() { "changed" } else { "added" },
                item: format!("requirement {}", crate::report::tables::requirement_words(&r.name)),
                old: before,
                new: Some(after),
            });
        }
    }
    for r in ro.iter().filter(|r| find_requirement(rn, &r.name).is_none()) {
        out.push(PartChange {
            change: "removed",
            item: format!("requirement {}", crate::report::tables::requirement_words(&r.name)),
            old: Some(requirement_limit(r)),
            new: None,
        });
    }
    out
}

fn status_changes(old: &ResultsDocument, new: &ResultsDocument) -> Vec<StatusChange> {
    let (ro, rn) = (&old.requirements, &new.requirements);
    let mut out = Vec::new();
    for r in rn {
        let before = find_requirement(ro, &r.name);
        if before.map(|b| b.pass) != Some(r.pass) {
            out.push(status_change(before, Some(r)));
            continue;
        }
        // Still passing (or failing) at nominal values: a corner or a yield can still turn.
        let Some(b) = before else { continue };
        if let (Some(x), Some(y)) = (b.corner_pass, r.corner_pass) {
            if x != y {
                out.push(aspect_change(b, r, "worst corner", corner_value));
            }
        }
        let all_pass = |q: &RequirementResults| q.yield_fraction.map(|y| y >= 1.0);
        if let (Some(x), Some(y)) = (all_pass(b), all_pass(r)) {
            if x != y {
                let text = |q: &RequirementResults| {
                    q.yield_fraction.map_or_else(absent, |y| format!("{} %", plain(y * 100.0, 4)))
                };
                out.push(aspect_change(b, r, "yield", text));
            }
        }
    }
    for r in ro.iter().filter(|r| find_requirement(rn, &r.name).is_none()) {
        out.push(status_change(Some(r), None));
    }
    out
}

/// The worst-corner value of a requirement, as text.
fn corner_value(r: &RequirementResults) -> String {
    r.corner.map_or_else(absent, |v| tables::requirement_value(&r.name, &r.unit, v))
}

/// A requirement that keeps its nominal verdict but whose corner or yield turned: passing
/// here means every corner, or every Monte Carlo run, within the limits.
fn aspect_change(
    old: &RequirementResults,
    new: &RequirementResults,
    aspect: &'static str,
    value: impl Fn(&RequirementResults) -> String,
) -> StatusChange {
    let passes = |r: &RequirementResults| match aspect {
        "worst corner" => r.corner_pass,
        _ => r.yield_fraction.map(|y| y >= 1.0),
    };
    StatusChange {
        requirement: old.name.clone(),
        aspect,
        old_pass: passes(old),
        new_pass: passes(new),
        old_value: value(old),
        new_value: value(new),
        old_limit: requirement_limit(old),
        new_limit: requirement_limit(new),
    }
}

fn status_change(
    old: Option<&RequirementResults>,
    new: Option<&RequirementResults>,
) -> StatusChange {
    let name = old.or(new).map_or("?", |r| r.name.as_str());
    StatusChange {
        requirement: name.to_string(),
        aspect: "nominal",
        old_pass: old.map(|r| r.pass),
        new_pass: new.map(|r| r.pass),
        old_value: old.map_or_else(absent, requirement_value),
        new_value: new.map_or_else(absent, requirement_value),
        old_limit: old.map_or_else(absent, requirement_limit),
        new_limit: new.map_or_else(absent, requirement_limit),
    }
}

/// A part in one line: the cells of the parts table, joined.
fn part_summary(p: &Part, d: &Design) -> String {
    let cells = part_cells(p, d);
    cells.iter().filter(|c| !c.is_empty()).cloned().collect::<Vec<_>>().join(", ")
}

/// The circuit's settings besides its parts, as `item → text`.
fn settings(d: &Design) -> BTreeMap<String, String> {
    let tol = |v: &Toleranced, unit: &str| {
        let t =
            v.tolerance.map_or(String::new(), |t| format!(" ±{} %", plain(t.fraction * 100.0, 3)));
        format!("{}{t}", si(v.nominal, unit, 4))
    };
    let mut out = BTreeMap::new();
    out.insert("temperature".to_string(), format!("{} °C", plain(d.temperature_k - 273.15, 4)));
    for s in &d.supplies {
        out.insert(format!("supply {}", s.node), tol(&s.voltage, "V"));
    }
    let sig = &d.signal;
    out.insert(
        "signal".to_string(),
        format!("{}–{} through {}", sig.positive, sig.negative, tol(&sig.resistance, "Ω")),
    );
    if let Some(b) = sig.band {
        out.insert(
            "operating band".to_string(),
            format!("{} … {}", si(b.from_hz, "Hz", 4), si(b.to_hz, "Hz", 4)),
        );
    }
    out.insert("output".to_string(), format!("{}–{}", d.output.positive, d.output.negative));
    out.insert("Monte Carlo runs".to_string(), d.analysis.monte_carlo_runs.to_string());
    out.insert("Monte Carlo seed".to_string(), d.analysis.seed.to_string());
    out
}

/// A model's parameters as `name → text`, nested keys joined by dots; a toleranced value
/// reads `nominal ±t %`.
fn model_parameters(v: &Value) -> BTreeMap<String, String> {
    fn walk(v: &Value, path: &str, out: &mut BTreeMap<String, String>) {
        match v {
            Value::Object(m) if m.contains_key("nominal") => {
                let n = m["nominal"].as_f64().map_or_else(absent, |x| number(x, 4));
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
                out.insert(path.to_string(), n.as_f64().map_or_else(absent, |x| number(x, 4)));
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
    changed_parts(old, new, &mut out);
    changed_models(old, new, &mut out);
    changed_settings(old, new, &mut out);
    out
}

/// Parts added, removed or changed, by designator.
fn changed_parts(old: &Design, new: &Design, out: &mut Vec<PartChange>) {
    for p in &new.parts {
        let after = part_summary(p, new);
        match old.parts.iter().find(|q| q.name == p.name) {
            None => out.push(PartChange {
                change: "added",
                item: p.name.clone(),
                old: None,
                new: Some(after),
            }),
            Some(q) => {
                let before = part_summary(q, old);
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
            old: Some(part_summary(q, old)),
            new: None,
        });
    }
}

/// Models added or removed, and each parameter of a model on both sides that changed.
fn changed_models(old: &Design, new: &Design, out: &mut Vec<PartChange>) {
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
        let before = model_parameters(&serde_json::to_value(&o.device).unwrap_or_default());
        out.push(PartChange {
            change: "removed",
            item: format!("model {}", o.name),
            old: before.get("family").cloned(),
            new: None,
        });
    }
}

/// Supplies, signal, output, temperature and Monte Carlo settings that changed.
fn changed_settings(old: &Design, new: &Design, out: &mut Vec<PartChange>) {
    let (before, after) = (settings(old), settings(new));
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
                item: k.clone(),
                old: a.cloned(),
                new: b.cloned(),
            });
        }
    }
}

/// One reviewed figure of one revision.
#[derive(Clone, Debug)]
struct Figure {
    /// Identity across revisions.
    key: String,
    /// Label, as written.
    label: String,
    /// Unit of `value`.
    unit: &'static str,
    /// The number compared.
    value: f64,
    /// Text to show instead of the value alone (a pole in full).
    shown: Option<String>,
}

impl Figure {
    fn text(&self) -> String {
        self.shown.clone().unwrap_or_else(|| show(Some(self.value), self.unit))
    }
}

/// A pole (s/2π) by its magnitude |p|, a complex pair with its Q (`15.97 MHz, Q 0.65`);
/// a right-half-plane pole says so.
fn pole_text(re: f64, im: f64) -> String {
    let mut text = si(re.hypot(im), "Hz", 4);
    if im != 0.0 {
        text.push_str(&format!(", Q {}", plain(re.hypot(im) / (2.0 * re.abs()), 3)));
    }
    if re > 0.0 {
        text.push_str(", right half-plane");
    }
    text
}

/// The figures a reviewer follows in a results document, keyed by what they are (a part,
/// a node, a requirement), so revisions that add or drop parts still line up.
fn figures(doc: &ResultsDocument) -> Vec<Figure> {
    let mut out = Vec::new();
    let mut push = |key: String, label: String, unit: &'static str, value: Option<f64>| {
        if let Some(value) = value.filter(|x| x.is_finite()) {
            out.push(Figure { key, label, unit, value, shown: None });
        }
    };
    let (m, h, l) = (&doc.midband, &doc.high, &doc.low);
    push("gain".into(), "mid-band gain |A|".into(), "", Some(m.gain.abs()));
    push("gain_db".into(), "mid-band gain".into(), "dB", m.gain_db);
    if let Some(b) = &m.band {
        push(
            "band centre gain".into(),
            "gain at the band centre".into(),
            "dB",
            Some(b.centre_gain_db),
        );
        push("band flatness".into(), "gain flatness".into(), "dB", Some(b.flatness_db));
    }
    for (key, label, unit, value) in [
        ("/midband/input_resistance_ohm", "R_in", "Ω", m.input_resistance_ohm),
        ("/midband/output_resistance_ohm", "R_out", "Ω", m.output_resistance_ohm),
        ("/high/f3db_hz", "f_H exact", "Hz", h.f3db_hz),
        ("/high/octc/f_estimate_hz", "f_H time-constant estimate", "Hz", h.octc.f_estimate_hz),
        (
            "/high/second_order_f_estimate_hz",
            "f_H second-order estimate",
            "Hz",
            h.second_order_f_estimate_hz,
        ),
        ("/low/f3db_hz", "f_L exact", "Hz", l.f3db_hz),
        ("/low/sctc/f_estimate_hz", "f_L time-constant estimate", "Hz", l.sctc.f_estimate_hz),
    ] {
        push(key.into(), label.into(), unit, value);
    }
    if let Some(n) = &doc.noise {
        let band = n.band.as_ref();
        for (key, label, unit, value) in [
            ("/noise/noise_figure_db", "noise figure", "dB", n.noise_figure_db),
            (
                "/noise/input_density_v_per_rthz",
                "input noise density",
                "V/√Hz",
                n.input_density_v_per_rthz,
            ),
            (
                "/noise/output_density_v_per_rthz",
                "output noise density",
                "V/√Hz",
                Some(n.output_density_v_per_rthz),
            ),
            ("/noise/e_n_v_per_rthz", "e_n", "V/√Hz", n.e_n_v_per_rthz),
            ("/noise/i_n_a_per_rthz", "i_n", "A/√Hz", n.i_n_a_per_rthz),
            (
                "/noise/band/output_rms_v",
                "output noise over the band",
                "V",
                band.map(|b| b.output_rms_v),
            ),
            (
                "/noise/band/input_rms_v",
                "input-referred noise over the band",
                "V",
                band.map(|b| b.input_rms_v),
            ),
            ("/noise/snr_db", "signal-to-noise ratio", "dB", n.snr_db),
        ] {
            push(key.into(), label.into(), unit, value);
        }
    }
    if let Some(ls) = &doc.large_signal {
        let swing = &ls.output_swing;
        for (key, label, unit, value) in [
            (
                "/large_signal/output_swing/positive_v",
                "output swing, rising",
                "V",
                swing.positive_v,
            ),
            (
                "/large_signal/output_swing/negative_v",
                "output swing, falling",
                "V",
                swing.negative_v,
            ),
            ("/large_signal/clipping_input_v", "clipping input", "V", ls.clipping_input_v),
            (
                "/large_signal/thd_percent",
                "THD at the stated amplitude",
                "%",
                ls.thd_percent.map(|p| p / 100.0),
            ),
            ("/large_signal/hd2_db", "HD2 at the stated amplitude", "dB", ls.hd2_db),
            ("/large_signal/hd3_db", "HD3 at the stated amplitude", "dB", ls.hd3_db),
            (
                "/large_signal/compression_1db_input_v",
                "input 1 dB compression",
                "V",
                ls.compression_1db_input_v,
            ),
            ("/large_signal/iip3_v", "input third-order intercept", "V", ls.iip3_v),
            ("/large_signal/dynamic_range_db", "dynamic range", "dB", ls.dynamic_range_db),
        ] {
            push(key.into(), label.into(), unit, value);
        }
    }
    if let Some(p) = &doc.ports {
        let band = p.band.as_ref();
        for (key, label, unit, value) in [
            (
                "/ports/band/input_return_loss_min_db",
                "least input return loss across the band",
                "dB",
                band.and_then(|b| b.input_return_loss_min_db),
            ),
            (
                "/ports/band/output_return_loss_min_db",
                "least output return loss across the band",
                "dB",
                band.and_then(|b| b.output_return_loss_min_db),
            ),
            ("/ports/stability/k_min", "K, least over the sweep", NUMBER, p.stability.k_min),
            ("/ports/stability/mu_min", "μ, least over the sweep", NUMBER, p.stability.mu_min),
        ] {
            push(key.into(), label.into(), unit, value);
        }
    }
    if let Some(st) = &doc.step {
        for (key, label, unit, value) in [
            ("/step/rise_time_s", "step rise time", "s", Some(st.rise_time_s)),
            ("/step/overshoot", "step overshoot", "%", Some(st.overshoot)),
            ("/step/settling_time_s", "step settling time", "s", st.settling_time_s),
        ] {
            push(key.into(), label.into(), unit, value);
        }
    }
    if let Some(g) = &doc.group_delay {
        for (key, label, unit, value) in [
            ("/group_delay/centre_s", "group delay at the band centre", "s", Some(g.centre_s)),
            ("/group_delay/variation_s", "group delay variation", "s", Some(g.variation_s)),
        ] {
            push(key.into(), label.into(), unit, value);
        }
    }
    for l in &doc.limits {
        let unit = match l.unit.as_str() {
            "m" => "m",
            "Ω" => "Ω",
            "F" => "F",
            "H" => "H",
            "K" => "K",
            "V" => "V",
            "S" => "S",
            _ => NUMBER,
        };
        let words = crate::report::tables::requirement_words(&l.requirement);
        push(
            format!("limit {} {}", l.quantity, l.requirement),
            format!("how far {} can go, keeping {words}", l.quantity),
            unit,
            l.value,
        );
    }
    if let Some(op) = &doc.operating_point {
        for (k, x) in op.nodes.iter().filter(|(k, _)| !k.contains('.') && *k != "source") {
            push(format!("node {k}"), format!("V({k})"), "V", Some(*x));
        }
        for d in &op.devices {
            let part = &d.part;
            let current = match &d.bias {
                DeviceBiasResults::Bjt { ic_a, .. } => *ic_a,
                DeviceBiasResults::Mosfet { id_a, .. } => *id_a,
            };
            push(
                format!("device {part} current"),
                format!("{part} bias current"),
                "A",
                Some(current),
            );
            push(
                format!("device {part} power"),
                format!("{part} dissipation"),
                "W",
                Some(d.power_w),
            );
        }
        for s in &op.supplies {
            let node = &s.node;
            push(
                format!("supply {node} current"),
                format!("{node} supply current"),
                "A",
                Some(s.current_a),
            );
            push(
                format!("supply {node} power"),
                format!("{node} supply power"),
                "W",
                Some(s.power_w),
            );
        }
    }
    let high_taus = h.octc.caps.iter().map(|c| ("high", &c.part, c.tau_s));
    let low_taus = l.sctc.caps.iter().map(|c| ("low", &c.part, c.tau_s));
    for (side, part, tau) in high_taus.chain(low_taus) {
        push(format!("tau {side} {part}"), format!("τ {part}"), "s", Some(tau));
    }
    for r in &doc.requirements {
        let name = &r.name;
        let spaced = crate::report::tables::requirement_words(name);
        // The margin in the requirement's own terms (dB for a gain), and the worst corner.
        match r.margin_db {
            Some(db) => push(format!("margin {name}"), format!("margin, {spaced}"), "dB", Some(db)),
            None => push(format!("margin {name}"), format!("margin, {spaced}"), "%", r.margin),
        }
        let unit = match r.unit.as_str() {
            "Hz" => "Hz",
            "Ω" => "Ω",
            "dB" => "dB",
            "V" => "V",
            "V/√Hz" => "V/√Hz",
            "A" => "A",
            "%" => "%",
            "s" => "s",
            "" if name == "stability" => NUMBER,
            _ => "",
        };
        // A figure in per cent (the THD) is carried as the fraction `show` expects.
        let corner = if unit == "%" { r.corner.map(|c| c / 100.0) } else { r.corner };
        push(format!("corner {name}"), format!("worst corner, {spaced}"), unit, corner);
        push(format!("yield {name}"), format!("yield, {spaced}"), "%", r.yield_fraction);
    }
    let all = doc.tolerance.as_ref().and_then(|t| t.monte_carlo.as_ref()).and_then(|m| m.yield_all);
    push("yield all".into(), "yield, all requirements".into(), "%", all);
    out
}

/// The poles of a results document, a conjugate pair once, by distance from the origin.
fn poles(list: &[RootResults]) -> Vec<(f64, f64)> {
    let mut poles: Vec<(f64, f64)> = list
        .iter()
        .map(|p| (p.re_hz, p.im_hz))
        .filter(|(re, im)| *im >= 0.0 && re.hypot(*im) > 0.0)
        .collect();
    poles.sort_by(|a, b| a.0.hypot(a.1).total_cmp(&b.0.hypot(b.1)));
    poles
}

/// The poles of both revisions as figures, each earlier pole paired with the later pole
/// nearest to it in log |p| (closest pairs first), so a pole that appears or goes away does
/// not shift the pairing of the others. Later poles are numbered by |p|; an earlier pole
/// left unpaired is listed as gone.
fn pole_figures(old: &[RootResults], new: &[RootResults]) -> (Vec<Figure>, Vec<Figure>) {
    let (a, b) = (poles(old), poles(new));
    let magnitude = |p: &(f64, f64)| p.0.hypot(p.1);
    let mut pairs: Vec<(f64, usize, usize)> = Vec::new();
    for (i, p) in a.iter().enumerate() {
        for (j, q) in b.iter().enumerate() {
            pairs.push(((magnitude(p) / magnitude(q)).ln().abs(), i, j));
        }
    }
    pairs.sort_by(|x, y| x.0.total_cmp(&y.0).then(x.1.cmp(&y.1)).then(x.2.cmp(&y.2)));
    let mut partner: Vec<Option<usize>> = vec![None; a.len()];
    let mut taken = vec![false; b.len()];
    for (_, i, j) in pairs {
        if partner[i].is_none() && !taken[j] {
            partner[i] = Some(j);
            taken[j] = true;
        }
    }
    let figure = |key: String, label: String, (re, im): (f64, f64)| Figure {
        key,
        label,
        unit: "Hz",
        value: re.hypot(im),
        shown: Some(pole_text(re, im)),
    };
    let later: Vec<Figure> = b
        .iter()
        .enumerate()
        .map(|(j, q)| figure(format!("pole {}", j + 1), format!("pole {} |p|", j + 1), *q))
        .collect();
    let earlier = a
        .iter()
        .enumerate()
        .map(|(i, p)| match partner[i] {
            Some(j) => figure(format!("pole {}", j + 1), format!("pole {} |p|", j + 1), *p),
            None => figure(format!("pole gone {}", i + 1), "pole |p|, earlier only".into(), *p),
        })
        .collect();
    (earlier, later)
}

/// A value in its unit: engineering notation, V/V plain, dB, a fraction as per cent.
/// The unit of a pure number (a stability factor), shown without one.
const NUMBER: &str = "number";

fn show(v: Option<f64>, unit: &str) -> String {
    match (v, unit) {
        (None, _) => absent(),
        (Some(v), "%") => format!("{} %", plain(v * 100.0, 4)),
        (Some(v), "") => format!("{} V/V", plain(v, 4)),
        (Some(v), NUMBER) => plain(v, 4),
        (Some(v), "dB") => format!("{} dB", plain(v, 4)),
        (Some(v), u) => si(v, u, 4),
    }
}

fn signed(text: String, positive: bool) -> String {
    if positive { format!("+{text}") } else { text }
}

/// The rows of the `moved` table: figure, before, after, change (absolute), relative change,
/// and what it bears on.
pub fn moved_rows(c: &Change) -> Vec<Vec<String>> {
    c.moved
        .iter()
        .enumerate()
        .map(|(i, m)| {
            // What a row bears on is said once for the run of rows it covers.
            let repeated = i > 0 && c.moved[i - 1].bearing == m.bearing;
            let bearing = if repeated { String::new() } else { m.bearing.clone() };
            let absolute = m.absolute.map_or_else(absent, |d| match m.unit {
                // A yield moves in percentage points.
                "%" => signed(format!("{} pt", plain(d * 100.0, 3)), d > 0.0),
                "dB" => signed(format!("{} dB", plain(d, 3)), d > 0.0),
                unit => signed(show(Some(d), unit), d > 0.0),
            });
            let relative = m.relative.map_or_else(absent, |r| signed_percent(r, 3));
            vec![
                m.label.clone(),
                m.old_text.clone(),
                m.new_text.clone(),
                absolute,
                relative,
                bearing,
            ]
        })
        .collect()
}

fn pass_text(p: Option<bool>) -> &'static str {
    match p {
        Some(true) => "pass",
        Some(false) => "FAIL",
        None => ABSENT,
    }
}

/// The rows of the `status` table: requirement, limit, before, after (value and verdict).
pub fn status_rows(c: &Change) -> Vec<Vec<String>> {
    c.status_changes
        .iter()
        .map(|s| {
            let limit = if s.old_limit == s.new_limit {
                s.new_limit.clone()
            } else {
                format!("{} → {}", s.old_limit, s.new_limit)
            };
            let requirement = crate::report::tables::requirement_words(&s.requirement);
            vec![
                if s.aspect == "nominal" {
                    requirement
                } else {
                    format!("{requirement}, {}", s.aspect)
                },
                limit,
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
                p.old.clone().unwrap_or_else(absent),
                p.new.clone().unwrap_or_else(absent),
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
        markdown_table(&["requirement", "limit", "before", "after"], "llrr", cells(status_rows(c))),
    );
    t.insert(
        "parts",
        markdown_table(&["change", "item", "before", "after"], "llll", cells(part_rows(c))),
    );
    t.insert(
        "moved",
        markdown_table(
            &["figure", "before", "after", "change", "relative", "bears on"],
            "lrrrrl",
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
    let plot = change.overlay.as_ref().map(|svg| Plot {
        name: OVERLAY,
        caption: "Bode plot of both revisions: the earlier response grey and dashed, the later \
                  one black and solid."
            .into(),
        svg: svg.clone(),
        file: None,
        max_width: None,
    });
    let blocks = Blocks {
        tables: tables(change),
        known_tables: TABLES.iter().map(|(n, _)| *n).collect(),
        plots: plot.iter().map(|p| p.name).collect(),
        known_plots: vec![OVERLAY],
        explanation: crate::report::explain::Explanation::default(),
        cautions: Vec::new(),
    };
    let markdown = tidy_blank_lines(&template::render(template, change, blocks)?);
    let title =
        format!("Change review — {} → {}", change.old.revision_text, change.new.revision_text);
    let plots: Vec<Plot> = plot.into_iter().collect();
    let mut md = markdown.clone();
    let mut files = vec![OutputFile {
        path: "change.html".into(),
        bytes: html::page(&title, &markdown, &plots).into_bytes(),
    }];
    for p in &plots {
        let path = format!("plots/{}.svg", p.name);
        md = md.replace(&plot_marker(p.name), &format!("![{}]({path})", p.caption));
        files.push(OutputFile { path, bytes: p.svg.clone().into_bytes() });
    }
    files.push(OutputFile { path: "change.md".into(), bytes: md.into_bytes() });
    Ok(files)
}

/// The plot name of the before/after Bode overlay.
pub const OVERLAY: &str = "bode_overlay";

#[cfg(test)]
mod tests {
    use super::*;

    fn with_poles(poles: &[(f64, f64)]) -> Vec<RootResults> {
        poles
            .iter()
            .flat_map(|&(re, im)| {
                let mut v = vec![RootResults { re_hz: re, im_hz: im }];
                if im != 0.0 {
                    v.push(RootResults { re_hz: re, im_hz: -im });
                }
                v
            })
            .collect()
    }

    #[test]
    fn a_new_pole_does_not_shift_the_pairing_of_the_others() {
        let old = with_poles(&[(-100.0, 0.0), (-1e3, 0.0), (-1e4, 0.0)]);
        let new = with_poles(&[(-105.0, 0.0), (-400.0, 0.0), (-1.1e3, 0.0), (-1e4, 0.0)]);
        let (before, after) = pole_figures(&old, &new);
        let key = |list: &[Figure], v: f64| {
            list.iter().find(|f| f.value == v).map(|f| f.key.clone()).unwrap()
        };
        assert_eq!(key(&before, 100.0), key(&after, 105.0));
        assert_eq!(key(&before, 1e3), key(&after, 1.1e3));
        assert_eq!(key(&before, 1e4), key(&after, 1e4));
        assert!(!before.iter().any(|f| f.key == key(&after, 400.0)));
    }

    #[test]
    fn a_pair_shows_its_q_and_a_gone_pole_is_listed() {
        // |p| = 5 Hz, Q = |p|/(2|Re p|) = 5/6 (second-order section, common practice).
        let old = with_poles(&[(-3.0, 4.0), (-1e6, 0.0)]);
        let new = with_poles(&[(-3.0, 4.0)]);
        let (before, after) = pole_figures(&old, &new);
        assert_eq!(after.len(), 1);
        assert_eq!(before[0].text(), "5 Hz, Q 0.833");
        assert_eq!(before[1].key, "pole gone 2");
    }

    /// The demo's results document, reviewed without Monte Carlo.
    fn demo() -> ResultsDocument {
        let text = std::fs::read_to_string("designs/rx-preamp-ce.yaml").unwrap();
        let design = crate::design::load(&text).design.unwrap();
        let options = crate::review::ReviewOptions::quiet(&design, Some(0));
        let review = crate::review::review(&design, &options).unwrap();
        let hashes = crate::report::results::Hashes {
            design: String::new(),
            template: None,
            template_name: None,
        };
        crate::report::results::document(&design, &review, hashes, "d.yaml")
    }

    #[test]
    fn moved_figures_rank_by_status_then_margin_consumed_then_size() {
        let old = demo();
        let mut new = old.clone();
        fn edit(d: &mut ResultsDocument, name: &str, f: &dyn Fn(&mut RequirementResults)) {
            f(d.requirements.iter_mut().find(|r| r.name == name).unwrap())
        }
        // R_out's corner turns to fail: a status change, ranked first though read last.
        edit(&mut new, "output_resistance", &|r| {
            r.corner_pass = Some(false);
            r.margin = r.margin.map(|m| m - 0.001);
        });
        // f_H gives up 20 % of margin, the gain 1 dB (≈ 12 %), R_in 5 %, f_L gains 10 %.
        edit(&mut new, "upper_cutoff", &|r| r.margin = r.margin.map(|m| m - 0.20));
        edit(&mut new, "midband_gain", &|r| r.margin_db = r.margin_db.map(|m| m - 1.0));
        edit(&mut new, "input_resistance", &|r| r.margin = r.margin.map(|m| m - 0.05));
        edit(&mut new, "lower_cutoff", &|r| r.margin = r.margin.map(|m| m + 0.10));
        // Two figures on no requirement: a small and a large relative move.
        let nodes = &mut new.operating_point.as_mut().unwrap().nodes;
        *nodes.get_mut("base").unwrap() *= 1.01;
        *nodes.get_mut("coll").unwrap() *= 0.8;
        let revision = |r| Revision {
            source: "x",
            sha256: String::new(),
            design: None,
            results: r,
            sweep: None,
        };
        let c = compare(&revision(&old), &revision(&new));
        let keys: Vec<&str> = c.moved.iter().map(|m| m.key.as_str()).collect();
        assert_eq!(
            keys,
            [
                "margin output_resistance",
                "margin upper_cutoff",
                "margin midband_gain",
                "margin input_resistance",
                "margin lower_cutoff",
                "node coll",
                "node base",
            ]
        );
        assert_eq!(c.moved[0].bearing, "R_out worst corner: pass → FAIL");
        assert!(c.moved[1].bearing.starts_with("f_H margin +"), "{}", c.moved[1].bearing);
        assert_eq!(c.moved[5].bearing, "");
        assert!(!c.has_overlay, "no sweeps were given");
    }
}
