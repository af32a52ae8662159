//! From the located YAML tree to a validated [`Design`].
//!
//! In: the [`Node`] tree and the file's text. Out: the design, or every problem found in
//! one pass (unknown keys, bad quantities, wrong units, dangling references…), each located
//! and with a fix. The circuit-level checks (DC paths, lonely nodes) live in `topology`.
//! No I/O.

use std::collections::{BTreeMap, BTreeSet};

use crate::design::diagnostic::{Diagnostic, Span};
use crate::design::fields::{Fields, list};
use crate::design::quantity::{self, Dim, Mark, Value};
use crate::design::suggest::nearest;
use crate::design::types::*;
use crate::design::yaml::{Key, Node, NodeKind};

/// Keys of the top level.
pub const TOP_KEYS: &[&str] = &[
    "tauweave",
    "design",
    "environment",
    "params",
    "supplies",
    "signal",
    "output",
    "tolerances",
    "parts",
    "models",
    "requirements",
    "analysis",
];
/// Keys of `design`.
pub const META_KEYS: &[&str] = &["id", "title", "revision", "date", "author", "purpose"];
/// Keys of `environment`.
pub const ENVIRONMENT_KEYS: &[&str] = &["temperature"];
/// Keys of `signal`.
pub const SIGNAL_KEYS: &[&str] = &["at", "resistance"];
/// Keys of `output`.
pub const OUTPUT_KEYS: &[&str] = &["at", "load_resistance", "load_capacitance"];
/// Keys of a supply written as a mapping.
pub const SUPPLY_KEYS: &[&str] = &["voltage", "tolerance", "distribution"];
/// Keys of a toleranced model parameter written as a mapping.
pub const TOLERANCED_KEYS: &[&str] = &["value", "tolerance", "distribution"];
/// Keys of a default tolerance written as a mapping.
pub const DEFAULT_TOLERANCE_KEYS: &[&str] = &["tolerance", "distribution"];
/// Part kinds a default tolerance may be set for.
pub const TOLERANCE_KINDS: &[&str] =
    &["resistor", "capacitor", "inductor", "transconductance", "voltage_amplifier", "supply"];
/// Part kinds.
pub const PART_KINDS: &[&str] = &[
    "resistor",
    "capacitor",
    "inductor",
    "transconductance",
    "voltage_amplifier",
    "bjt",
    "mosfet",
];
/// Keys of a resistor or inductor.
pub const TWO_TERMINAL_KEYS: &[&str] =
    &["kind", "value", "between", "tolerance", "distribution", "note"];
/// Keys of a capacitor.
pub const CAPACITOR_KEYS: &[&str] =
    &["kind", "value", "between", "role", "tolerance", "distribution", "note"];
/// Keys of a controlled source.
pub const CONTROLLED_KEYS: &[&str] =
    &["kind", "value", "between", "control", "tolerance", "distribution", "note"];
/// Keys of a bjt part.
pub const BJT_KEYS: &[&str] = &["kind", "model", "c", "b", "e", "note"];
/// Keys of a mosfet part.
pub const MOSFET_KEYS: &[&str] = &["kind", "model", "d", "g", "s", "note"];
/// Capacitor roles.
pub const ROLES: &[&str] = &["coupling", "bypass", "parasitic", "load"];
/// Model types.
pub const MODEL_TYPES: &[&str] = &["npn", "pnp", "nmos", "pmos"];
/// Keys of a bipolar model.
pub const BIPOLAR_KEYS: &[&str] = &[
    "type",
    "beta",
    "beta_reverse",
    "early_voltage",
    "saturation_current",
    "base_resistance",
    "transit_time",
    "transition_frequency",
    "emitter_junction",
    "collector_junction",
    "max_power",
];
/// Keys of a MOSFET model.
pub const MOS_KEYS: &[&str] = &[
    "type",
    "process_transconductance",
    "width",
    "length",
    "threshold",
    "channel_length_modulation",
    "oxide_capacitance",
    "overlap_capacitance",
    "gate_source_capacitance",
    "gate_drain_capacitance",
    "drain_body_capacitance",
    "max_power",
];
/// Keys of a junction.
pub const JUNCTION_KEYS: &[&str] = &["capacitance", "potential", "grading"];
/// Keys of `transition_frequency`.
pub const FT_KEYS: &[&str] = &["frequency", "collector_current"];
/// Keys of `requirements`.
pub const REQUIREMENT_KEYS: &[&str] =
    &["midband_gain", "upper_cutoff", "lower_cutoff", "input_resistance", "output_resistance"];
/// Keys of one requirement.
pub const LIMIT_KEYS: &[&str] = &["min", "max"];
/// Keys of `analysis`.
pub const ANALYSIS_KEYS: &[&str] = &["sweep", "monte_carlo"];
/// Keys of `analysis.sweep`.
pub const SWEEP_KEYS: &[&str] = &["start", "stop", "points_per_decade"];
/// Keys of `analysis.monte_carlo`.
pub const MONTE_CARLO_KEYS: &[&str] = &["runs", "seed"];
/// Distributions.
pub const DISTRIBUTIONS: &[&str] = &["uniform", "gaussian"];

/// What a quantity's place expects.
#[derive(Clone, Copy)]
struct Place {
    /// "a resistance", "a capacitance"…
    what: &'static str,
    dim: Dim,
    /// Zero and negative values are refused.
    positive: bool,
    /// `dB` converts to a ratio here.
    decibels: bool,
}

const RESISTANCE: Place =
    Place { what: "a resistance", dim: Dim::OHM, positive: true, decibels: false };
const CAPACITANCE: Place =
    Place { what: "a capacitance", dim: Dim::FARAD, positive: true, decibels: false };
const INDUCTANCE: Place =
    Place { what: "an inductance", dim: Dim::HENRY, positive: true, decibels: false };
const VOLTAGE: Place =
    Place { what: "a voltage", dim: Dim::VOLT, positive: false, decibels: false };
const CURRENT: Place =
    Place { what: "a current", dim: Dim::AMPERE, positive: true, decibels: false };
const FREQUENCY: Place =
    Place { what: "a frequency", dim: Dim::HERTZ, positive: true, decibels: false };
const TIME: Place = Place { what: "a time", dim: Dim::SECOND, positive: false, decibels: false };
const POWER: Place = Place { what: "a power", dim: Dim::WATT, positive: true, decibels: false };
const LENGTH: Place = Place { what: "a length", dim: Dim::METRE, positive: true, decibels: false };
const TEMPERATURE: Place =
    Place { what: "a temperature", dim: Dim::KELVIN, positive: true, decibels: false };
const CONDUCTANCE: Place =
    Place { what: "a transconductance", dim: Dim::SIEMENS, positive: false, decibels: false };
const GAIN: Place =
    Place { what: "a voltage gain", dim: Dim::NONE, positive: false, decibels: true };
const RATIO: Place =
    Place { what: "a pure number", dim: Dim::NONE, positive: true, decibels: false };
const GAIN_LIMIT: Place =
    Place { what: "a voltage gain", dim: Dim::NONE, positive: true, decibels: true };

fn per_volt() -> Dim {
    Dim::VOLT.powi(-1)
}

/// What [`read`] found.
pub struct Read {
    /// The design, when its circuit read without errors. Sections outside the circuit
    /// (metadata, requirements, analysis) may still have errors: check `diagnostics`.
    pub design: Option<Design>,
    /// Every finding, errors and warnings, in order of discovery.
    pub diagnostics: Vec<Diagnostic>,
}

/// Reads a design from its tree. The design comes back whenever the circuit itself (parts,
/// models, supplies, signal, output, params) read cleanly, so circuit checks can run on it
/// even when, say, the date is malformed; it is usable only when `diagnostics` holds no
/// error.
pub fn read(text: &str, root: &Node) -> Read {
    let mut r = Reader {
        text,
        diagnostics: Vec::new(),
        params: BTreeMap::new(),
        params_used: BTreeSet::new(),
        failed_names: BTreeSet::new(),
        places: BTreeMap::new(),
    };
    let design = r.document(root);
    Read { design, diagnostics: r.diagnostics }
}

struct Reader<'t> {
    text: &'t str,
    diagnostics: Vec<Diagnostic>,
    params: BTreeMap<String, Value>,
    params_used: BTreeSet<String>,
    /// Params and models that are defined but failed to read: uses of them stay quiet, so
    /// one mistake gives one message.
    failed_names: BTreeSet<String>,
    places: BTreeMap<String, Span>,
}

/// Default tolerances per part kind.
type Defaults = BTreeMap<&'static str, Tolerance>;

impl Reader<'_> {
    fn push(&mut self, d: Diagnostic) {
        self.diagnostics.push(d);
    }

    fn document(&mut self, root: &Node) -> Option<Design> {
        let owner = Span::file_start();
        if let NodeKind::Null = root.kind {
            self.push(
                Diagnostic::error("missing_key", "the design file is empty")
                    .at(owner, "nothing here")
                    .help("start from `tauweave new` or an example in designs/"),
            );
            return None;
        }
        let mut top =
            Fields::open(root, "the design file", TOP_KEYS, owner, &mut self.diagnostics)?;
        self.check_repeated_signal(root);

        let format = self.format_version(top.get_entry("tauweave"));
        let meta = match top.get_entry("design") {
            Some((key, node)) => self.meta(key, node),
            None => {
                self.push(
                    Diagnostic::error("missing_key", "the design file needs a `design` section")
                        .at(owner, "`design:` is missing")
                        .help("add `design:` with `id`, `title`, `revision` and `date`"),
                );
                None
            }
        };
        let temperature_k = self.environment(top.get_entry("environment"));
        let before_circuit = self.error_count();
        if let Some((_, node)) = top.get_entry("params") {
            self.read_params(node);
        }
        let defaults = self.defaults(top.get_entry("tolerances"));
        let supplies = self.supplies(top.get_entry("supplies"), &defaults);
        let models = match top.get_entry("models") {
            Some((key, node)) => self.models(key, node),
            None => Vec::new(),
        };
        let signal = match top.get_entry("signal") {
            Some((key, node)) => self.signal(key, node),
            None => {
                self.push(
                    Diagnostic::error("missing_signal", "the design has no signal source")
                        .at(owner, "`signal:` is missing")
                        .help("add `signal:` with `at: <node>` and `resistance: 50 Ω`"),
                );
                None
            }
        };
        let (output, loads) = match top.get_entry("output") {
            Some((key, node)) => self.output(key, node, &defaults),
            None => {
                self.push(
                    Diagnostic::error("missing_output", "the design has no output")
                        .at(owner, "`output:` is missing")
                        .help("add `output:` with `at: <node>`"),
                );
                (None, Vec::new())
            }
        };
        let mut parts = match top.get_entry("parts") {
            Some((key, node)) => self.parts(key, node, &models, &defaults),
            None => {
                self.push(
                    Diagnostic::error("missing_key", "the design file needs a `parts` section")
                        .at(owner, "`parts:` is missing")
                        .help("add `parts:` with the circuit, keyed by reference designator"),
                );
                Vec::new()
            }
        };
        parts.extend(loads);
        let circuit_ok = self.error_count() == before_circuit;
        let requirements = self.requirements(top.get_entry("requirements"));
        let analysis = self.analysis(top.get_entry("analysis"));
        top.finish(&mut self.diagnostics);
        self.unused_models(root, &models, &parts);
        self.unused_params(root);

        if !circuit_ok {
            return None;
        }
        // Sections outside the circuit fall back to placeholders when they failed; the
        // errors already reported keep such a design from being used.
        let placeholder = Meta {
            id: String::new(),
            title: String::new(),
            revision: String::new(),
            date: String::new(),
            author: None,
            purpose: None,
        };
        Some(Design {
            format: format.unwrap_or(1),
            meta: meta.unwrap_or(placeholder),
            temperature_k: temperature_k.unwrap_or(300.15),
            params: self.param_list(root),
            supplies,
            signal: signal?,
            output: output?,
            parts,
            models,
            requirements,
            analysis: analysis.unwrap_or_else(AnalysisSettings::defaults),
            places: std::mem::take(&mut self.places),
        })
    }

    fn error_count(&self) -> usize {
        self.diagnostics.iter().filter(|d| d.is_error()).count()
    }

    /// A second `signal:` at the top level is a second source, not just a repeated key.
    fn check_repeated_signal(&mut self, root: &Node) {
        let NodeKind::Map(entries) = &root.kind else { return };
        let signals: Vec<&Key> =
            entries.iter().map(|(k, _)| k).filter(|k| k.name == "signal").collect();
        if signals.len() > 1 {
            // Fields::open reported a duplicate_key; say what it means here.
            self.diagnostics.retain(|d| !(d.code == "duplicate_key" && d.span == signals[1].span));
            for extra in &signals[1..] {
                self.push(
                    Diagnostic::error("second_signal", "a design has exactly one signal source")
                        .at(extra.span, "a second signal source")
                        .also(signals[0].span, "the first one")
                        .help("keep one `signal:`; a second input belongs in another design"),
                );
            }
        }
    }

    fn format_version(&mut self, entry: Option<(&Key, &Node)>) -> Option<u32> {
        let Some((_, node)) = entry else {
            self.push(
                Diagnostic::error("format_version", "the design file does not say its format")
                    .at(Span::file_start(), "`tauweave: 1` belongs here")
                    .help("put `tauweave: 1` as the first line"),
            );
            return None;
        };
        match node.scalar() {
            Some("1") => Some(1),
            _ => {
                self.push(
                    Diagnostic::error(
                        "format_version",
                        format!(
                            "format version `{}` is not one this tauweave reads",
                            self.show(node)
                        ),
                    )
                    .at(node.span, "expected 1")
                    .help("this tauweave reads format 1: write `tauweave: 1`"),
                );
                None
            }
        }
    }

    fn show(&self, node: &Node) -> String {
        match &node.kind {
            NodeKind::Scalar(s) => s.clone(),
            _ => node.shape().to_string(),
        }
    }

    fn meta(&mut self, key: &Key, node: &Node) -> Option<Meta> {
        let mut f =
            Fields::open(node, "the `design` section", META_KEYS, key.span, &mut self.diagnostics)?;
        let id = f.require("id", &mut self.diagnostics).and_then(|n| self.id(n));
        let title =
            f.require("title", &mut self.diagnostics).and_then(|n| self.text_value(n, "title"));
        let revision = f
            .require("revision", &mut self.diagnostics)
            .and_then(|n| self.text_value(n, "revision"));
        let date = f.require("date", &mut self.diagnostics).and_then(|n| self.date(n));
        let author = f.get("author").and_then(|n| self.text_value(n, "author"));
        let purpose = f.get("purpose").and_then(|n| self.text_value(n, "purpose"));
        f.finish(&mut self.diagnostics);
        Some(Meta { id: id?, title: title?, revision: revision?, date: date?, author, purpose })
    }

    fn text_value(&mut self, node: &Node, what: &str) -> Option<String> {
        match node.scalar() {
            Some(s) if !s.trim().is_empty() => Some(s.trim().to_string()),
            _ => {
                self.push(
                    Diagnostic::error("wrong_type", format!("`{what}` must be text"))
                        .at(node.span, format!("found {}", node.shape()))
                        .help(format!(
                            "write `{what}: ...` on one line, or use `>` for a paragraph"
                        )),
                );
                None
            }
        }
    }

    fn id(&mut self, node: &Node) -> Option<String> {
        let id = self.text_value(node, "id")?;
        let ok = id.chars().all(|c| c.is_ascii_alphanumeric() || "-_.".contains(c))
            && id.chars().next().is_some_and(|c| c.is_ascii_alphanumeric());
        if !ok {
            self.push(
                Diagnostic::error("name", format!("the id `{id}` can't name an output folder"))
                    .at(node.span, "letters, digits, '-', '_' and '.' only")
                    .help("for example `rx-preamp` or `if_stage.2`"),
            );
            return None;
        }
        Some(id)
    }

    fn date(&mut self, node: &Node) -> Option<String> {
        let text = self.text_value(node, "date")?;
        let parts: Vec<&str> = text.split('-').collect();
        let valid = parts.len() == 3
            && parts[0].len() == 4
            && parts[1].len() == 2
            && parts[2].len() == 2
            && parts.iter().all(|p| p.chars().all(|c| c.is_ascii_digit()))
            && {
                let y: u32 = parts[0].parse().unwrap_or(0);
                let m: u32 = parts[1].parse().unwrap_or(0);
                let d: u32 = parts[2].parse().unwrap_or(0);
                let leap = (y % 4 == 0 && y % 100 != 0) || y % 400 == 0;
                let days = [31, if leap { 29 } else { 28 }, 31, 30, 31, 30, 31, 31, 30, 31, 30, 31];
                (1..=12).contains(&m) && d >= 1 && d <= days[(m - 1) as usize]
            };
        if !valid {
            self.push(
                Diagnostic::error("date", format!("`{text}` is not a date in YYYY-MM-DD form"))
                    .at(node.span, "not a calendar date")
                    .help("write the report's date as e.g. `2026-11-20` (ISO 8601)"),
            );
            return None;
        }
        Some(text)
    }

    fn environment(&mut self, entry: Option<(&Key, &Node)>) -> Option<f64> {
        let default = 300.15; // 27 °C
        let Some((key, node)) = entry else { return Some(default) };
        let mut f = Fields::open(
            node,
            "the `environment` section",
            ENVIRONMENT_KEYS,
            key.span,
            &mut self.diagnostics,
        )?;
        let t = match f.get("temperature") {
            Some(n) => {
                let t = self.quantity(n, TEMPERATURE)?;
                if !(1.0..=1000.0).contains(&t) {
                    self.push(
                        Diagnostic::error(
                            "out_of_range",
                            "the temperature is outside 1 K … 1000 K",
                        )
                        .at(n.span, "out of range")
                        .help("give the junction temperature, e.g. `27 °C` or `330 K`"),
                    );
                    return None;
                }
                Some(t)
            }
            None => Some(default),
        };
        f.finish(&mut self.diagnostics);
        t
    }

    // ---- params ---------------------------------------------------------------------------

    fn read_params(&mut self, node: &Node) {
        let NodeKind::Map(entries) = &node.kind else {
            self.push(
                Diagnostic::error("wrong_type", "`params` must be a mapping of name: value")
                    .at(node.span, format!("found {}", node.shape()))
                    .help("write `cable_length: 2.5 m` lines under `params:`"),
            );
            return;
        };
        let mut texts: BTreeMap<String, (&Key, &Node)> = BTreeMap::new();
        for (key, value) in entries {
            if let Some((first, _)) = texts.get(&key.name) {
                let first = first.span;
                self.push(
                    Diagnostic::error(
                        "duplicate_key",
                        format!("param `{}` is defined twice", key.name),
                    )
                    .at(key.span, "defined again here")
                    .also(first, "first defined here")
                    .help("keep one definition"),
                );
                continue;
            }
            let valid = key.name.chars().next().is_some_and(|c| c.is_ascii_alphabetic())
                && key.name.chars().all(|c| c.is_ascii_alphanumeric() || c == '_');
            if !valid {
                self.push(
                    Diagnostic::error("param_name", format!("`{}` can't name a param", key.name))
                        .at(key.span, "letters, digits and '_', starting with a letter")
                        .help("for example `cable_length`"),
                );
                continue;
            }
            if quantity::reads_as_unit(&key.name) {
                self.push(
                    Diagnostic::error(
                        "param_name",
                        format!("param name `{}` reads as a unit or prefix", key.name),
                    )
                    .at(key.span, "ambiguous in an expression")
                    .help(format!(
                        "choose a longer name, e.g. `{}_value`",
                        key.name.to_lowercase()
                    )),
                );
                continue;
            }
            texts.insert(key.name.clone(), (key, value));
        }
        // Evaluate in dependency order; report cycles once.
        let mut state: BTreeMap<String, u8> = BTreeMap::new(); // 1 visiting, 2 done
        let order: Vec<String> = entries.iter().map(|(k, _)| k.name.clone()).collect();
        let mut failed: BTreeSet<String> = BTreeSet::new();
        for name in order {
            let mut stack = Vec::new();
            self.visit_param(&name, &texts, &mut state, &mut failed, &mut stack);
        }
        self.failed_names.extend(failed);
    }

    fn visit_param(
        &mut self,
        name: &str,
        texts: &BTreeMap<String, (&Key, &Node)>,
        state: &mut BTreeMap<String, u8>,
        failed: &mut BTreeSet<String>,
        stack: &mut Vec<String>,
    ) {
        let Some(&(key, node)) = texts.get(name) else { return };
        match state.get(name) {
            Some(2) => return,
            Some(1) => {
                let start = stack.iter().position(|s| s == name).unwrap_or(0);
                let mut cycle: Vec<String> = stack[start..].to_vec();
                cycle.push(name.to_string());
                self.push(
                    Diagnostic::error(
                        "param_cycle",
                        format!("params depend on each other in a loop: {}", cycle.join(" → ")),
                    )
                    .at(key.span, "part of the loop")
                    .help("give one of them a value that does not use the others"),
                );
                for c in &cycle {
                    failed.insert(c.clone());
                    state.insert(c.clone(), 2);
                }
                return;
            }
            _ => {}
        }
        state.insert(name.to_string(), 1);
        stack.push(name.to_string());
        let text = node.scalar().map(str::to_string);
        if let Some(text) = &text {
            for (dep, _) in quantity::referenced_names(text) {
                if texts.contains_key(&dep) {
                    self.params_used.insert(dep.clone());
                    self.visit_param(&dep, texts, state, failed, stack);
                }
            }
        }
        stack.pop();
        if state.get(name) == Some(&2) {
            return; // closed by a cycle report
        }
        state.insert(name.to_string(), 2);
        let Some(text) = text else {
            self.push(
                Diagnostic::error("wrong_type", format!("param `{name}` must be a single value"))
                    .at(node.span, format!("found {}", node.shape()))
                    .help("write `name: 2.5 m` or `name: other * 2`"),
            );
            failed.insert(name.to_string());
            return;
        };
        let deps = quantity::referenced_names(&text);
        if deps.iter().any(|(d, _)| failed.contains(d)) {
            failed.insert(name.to_string());
            return; // the failing dependency was reported already
        }
        match quantity::evaluate(&text, &self.params) {
            Ok(v) => {
                self.params.insert(name.to_string(), v);
                self.places.insert(format!("params.{name}"), key.span);
            }
            Err(e) => {
                self.quantity_error(node, &text, e);
                failed.insert(name.to_string());
            }
        }
    }

    fn param_list(&self, root: &Node) -> Vec<Param> {
        let mut out = Vec::new();
        let Some(node) = map_get(root, "params") else { return out };
        let NodeKind::Map(entries) = &node.kind else { return out };
        for (key, value) in entries {
            if let (Some(v), Some(text)) = (self.params.get(&key.name), value.scalar()) {
                if out.iter().any(|p: &Param| p.name == key.name) {
                    continue;
                }
                out.push(Param {
                    name: key.name.clone(),
                    value: v.si,
                    unit: v.dim.map(unit_symbol).unwrap_or_default(),
                    written: text.to_string(),
                });
            }
        }
        out
    }

    fn unused_params(&mut self, root: &Node) {
        let Some(node) = map_get(root, "params") else { return };
        let NodeKind::Map(entries) = &node.kind else { return };
        for (key, _) in entries {
            if self.params.contains_key(&key.name) && !self.params_used.contains(&key.name) {
                self.push(
                    Diagnostic::warning(
                        "unused_param",
                        format!("param `{}` is not used", key.name),
                    )
                    .at(key.span, "defined but never used")
                    .help("use it in a value or remove it"),
                );
            }
        }
    }

    // ---- quantities -----------------------------------------------------------------------

    fn quantity_error(&mut self, node: &Node, text: &str, e: quantity::QuantityError) {
        let span = if self.written_plainly(node, text) {
            node.span.narrow(self.text, e.offset, e.len)
        } else {
            node.span
        };
        let code = if e.unknown_name { "unknown_param" } else { "quantity" };
        let mut d =
            Diagnostic::error(code, format!("`{text}`: {}", e.message)).at(span, e.message.clone());
        if let Some(h) = e.help {
            d = d.help(h);
        }
        self.push(d);
    }

    /// True when the node's text appears in the file exactly as parsed (not quoted or
    /// folded), so offsets inside it map to columns.
    fn written_plainly(&self, node: &Node, text: &str) -> bool {
        let end = (node.span.offset + node.span.len).min(self.text.len());
        self.text.get(node.span.offset..end).is_some_and(|s| s.trim_end() == text)
    }

    /// Evaluates a quantity at a place: unit check, dB conversion, sign check.
    fn quantity(&mut self, node: &Node, place: Place) -> Option<f64> {
        let text = match node.scalar() {
            Some(t) => t.to_string(),
            None => {
                self.push(
                    Diagnostic::error(
                        "wrong_type",
                        format!("{} must be a single value", place.what),
                    )
                    .at(node.span, format!("found {}", node.shape()))
                    .help(format!(
                        "write {}, e.g. `{}`",
                        place.what,
                        example(place)
                    )),
                );
                return None;
            }
        };
        let mut uses_failed = false;
        for (name, _) in quantity::referenced_names(&text) {
            uses_failed |= self.failed_names.contains(&name);
            self.params_used.insert(name);
        }
        if uses_failed {
            return None; // the param's own error says it all
        }
        let v = match quantity::evaluate(&text, &self.params) {
            Ok(v) => v,
            Err(e) => {
                self.quantity_error(node, &text, e);
                return None;
            }
        };
        let si = self.fit(node, &text, v, place)?;
        if place.positive && si <= 0.0 {
            self.push(
                Diagnostic::error(
                    "not_positive",
                    format!("{} must be greater than zero; `{text}` is not", place.what),
                )
                .at(node.span, "zero or negative")
                .help(if place.dim == Dim::OHM {
                    "a short is a wire: join the nodes instead; an open is no part at all"
                        .to_string()
                } else {
                    format!("give a positive value, e.g. `{}`", example(place))
                }),
            );
            return None;
        }
        Some(si)
    }

    fn fit(&mut self, node: &Node, text: &str, v: Value, place: Place) -> Option<f64> {
        match v.mark {
            Mark::Decibel if place.decibels => return Some(10f64.powf(v.si / 20.0)),
            Mark::Decibel => {
                self.push(
                    Diagnostic::error(
                        "unit",
                        format!("`{text}`: dB is for gains, and {} is not one", place.what),
                    )
                    .at(node.span, "dB does not fit here")
                    .help(format!(
                        "write {} with its unit, e.g. `{}`",
                        place.what,
                        example(place)
                    )),
                );
                return None;
            }
            Mark::Celsius if place.dim != Dim::KELVIN => {}
            Mark::Percent => {
                self.push(
                    Diagnostic::error(
                        "unit",
                        format!("`{text}`: a percentage is not {}", place.what),
                    )
                    .at(node.span, "% does not fit here")
                    .help(format!(
                        "write {} with its unit, e.g. `{}`",
                        place.what,
                        example(place)
                    )),
                );
                return None;
            }
            _ => {}
        }
        match v.dim {
            None => Some(v.si),
            Some(d) if d == place.dim => Some(v.si),
            Some(d) => {
                let mut help = format!(
                    "{} is given in {}: e.g. `{}`",
                    place.what,
                    unit_symbol(place.dim),
                    example(place)
                );
                if d == Dim::KELVIN && place.dim != Dim::KELVIN {
                    help.push_str(" (`K` is the kelvin; kilo is a lowercase `k`)");
                }
                if d == Dim::METRE {
                    help.push_str(" (a lone `m` after a space is the metre; write `10m` or `10 m` + unit for milli)");
                }
                self.push(
                    Diagnostic::error(
                        "unit",
                        format!(
                            "`{text}` is in {}, but {} is needed here",
                            unit_symbol(d),
                            place.what
                        ),
                    )
                    .at(node.span, format!("needs {}", unit_symbol(place.dim)))
                    .help(help),
                );
                None
            }
        }
    }

    /// A value written as a quantity, or as `{value, tolerance, distribution}`.
    fn toleranced(
        &mut self,
        node: &Node,
        place: Place,
        owner: Span,
        what: &str,
    ) -> Option<Toleranced> {
        if let NodeKind::Map(_) = node.kind {
            let mut f = Fields::open(
                node,
                what.to_string(),
                TOLERANCED_KEYS,
                owner,
                &mut self.diagnostics,
            )?;
            let value = f.require("value", &mut self.diagnostics);
            let nominal = value.and_then(|n| self.quantity(n, place));
            let distribution = f.get("distribution").and_then(|n| self.distribution(n));
            let tolerance = match (f.get("tolerance"), nominal) {
                (Some(t), Some(nominal)) => {
                    self.tolerance(t, nominal, place, distribution.unwrap_or(Distribution::Uniform))
                }
                _ => None,
            };
            f.finish(&mut self.diagnostics);
            return Some(Toleranced { nominal: nominal?, tolerance });
        }
        self.quantity(node, place).map(Toleranced::exact)
    }

    fn tolerance(
        &mut self,
        node: &Node,
        nominal: f64,
        place: Place,
        distribution: Distribution,
    ) -> Option<Tolerance> {
        let Some(raw) = node.scalar() else {
            self.push(
                Diagnostic::error("wrong_type", "a tolerance must be a single value")
                    .at(node.span, format!("found {}", node.shape()))
                    .help("write `tolerance: 5 %` or an absolute amount like `0.25 pF`"),
            );
            return None;
        };
        let text =
            raw.trim().trim_start_matches('±').trim_start_matches("+/-").trim_start().to_string();
        let v = match quantity::evaluate(&text, &self.params) {
            Ok(v) => v,
            Err(e) => {
                self.quantity_error(node, raw, e);
                return None;
            }
        };
        let (fraction, absolute) = match (v.mark, v.dim) {
            (Mark::Percent, _) => (v.si, false),
            (Mark::Plain, Some(d)) if d == place.dim && place.dim != Dim::NONE => {
                (v.si / nominal.abs(), true)
            }
            (Mark::Plain, None) => {
                self.push(
                    Diagnostic::error("tolerance", format!("tolerance `{raw}` has no unit"))
                        .at(node.span, "percent or absolute?")
                        .help(format!("write `{raw} %` for a percentage or give {}'s unit for an absolute amount", place.what)),
                );
                return None;
            }
            _ => {
                self.push(
                    Diagnostic::error(
                        "tolerance",
                        format!("tolerance `{raw}` is not in the unit of {}", place.what),
                    )
                    .at(node.span, format!("needs % or {}", unit_symbol(place.dim)))
                    .help("write a percentage (`5 %`) or an absolute amount in the value's unit"),
                );
                return None;
            }
        };
        if !(fraction > 0.0 && fraction < 1.0) {
            let shown = format!("{:.4}", fraction * 100.0);
            let shown = shown.trim_end_matches('0').trim_end_matches('.');
            self.push(
                Diagnostic::error("tolerance", format!("tolerance `{raw}` is {shown} % of the value; it must lie between 0 and 100 %"))
                    .at(node.span, "outside (0, 100) %")
                    .help("a part known exactly has no `tolerance` key; common values are 1 %, 5 %, 10 %, 20 %"),
            );
            return None;
        }
        Some(Tolerance { fraction, distribution, absolute })
    }

    fn distribution(&mut self, node: &Node) -> Option<Distribution> {
        match node.scalar() {
            Some("uniform") => Some(Distribution::Uniform),
            Some("gaussian") => Some(Distribution::Gaussian),
            _ => {
                let written = self.show(node);
                let help = match nearest(&written, DISTRIBUTIONS) {
                    Some(best) => format!("did you mean `{best}`?"),
                    None => "write `uniform` or `gaussian` (σ = tolerance / 3)".to_string(),
                };
                self.push(
                    Diagnostic::error("unknown_kind", format!("`{written}` is not a distribution"))
                        .at(node.span, "uniform or gaussian")
                        .help(help),
                );
                None
            }
        }
    }

    fn defaults(&mut self, entry: Option<(&Key, &Node)>) -> Defaults {
        let mut out: Defaults = BTreeMap::new();
        let builtin =
            |fraction| Tolerance { fraction, distribution: Distribution::Uniform, absolute: false };
        out.insert("resistor", builtin(0.01));
        out.insert("capacitor", builtin(0.10));
        out.insert("inductor", builtin(0.10));
        let Some((key, node)) = entry else { return out };
        let Some(mut f) = Fields::open(
            node,
            "the `tolerances` section",
            TOLERANCE_KINDS,
            key.span,
            &mut self.diagnostics,
        ) else {
            return out;
        };
        for &kind in TOLERANCE_KINDS {
            let Some((k, n)) = f.get_entry(kind) else { continue };
            let place = match kind {
                "resistor" => RESISTANCE,
                "capacitor" => CAPACITANCE,
                "inductor" => INDUCTANCE,
                "transconductance" => CONDUCTANCE,
                "supply" => VOLTAGE,
                _ => GAIN,
            };
            let (tol_node, distribution) = if let NodeKind::Map(_) = n.kind {
                let Some(mut g) = Fields::open(
                    n,
                    format!("the default tolerance of a {kind}"),
                    DEFAULT_TOLERANCE_KEYS,
                    k.span,
                    &mut self.diagnostics,
                ) else {
                    continue;
                };
                let t = g.require("tolerance", &mut self.diagnostics);
                let d = g.get("distribution").and_then(|d| self.distribution(d));
                g.finish(&mut self.diagnostics);
                (t, d)
            } else {
                (Some(n), None)
            };
            let Some(tol_node) = tol_node else { continue };
            // A default applies to many values, so it must be a percentage.
            if let Some(text) = tol_node.scalar() {
                if !text.contains('%') {
                    self.push(
                        Diagnostic::error(
                            "tolerance",
                            format!("a default tolerance must be a percentage; `{text}` is not"),
                        )
                        .at(tol_node.span, "needs %")
                        .help("write e.g. `5 %`; give absolute tolerances on the parts themselves"),
                    );
                    continue;
                }
            }
            if let Some(t) =
                self.tolerance(tol_node, 1.0, place, distribution.unwrap_or(Distribution::Uniform))
            {
                out.insert(kind, t);
            }
        }
        f.finish(&mut self.diagnostics);
        out
    }

    // ---- nodes ----------------------------------------------------------------------------

    fn node_name(&mut self, node: &Node, what: &str) -> Option<String> {
        let Some(name) = node.scalar() else {
            self.push(
                Diagnostic::error("wrong_type", format!("{what} must be a node name"))
                    .at(node.span, format!("found {}", node.shape()))
                    .help("write the node's name, e.g. `base` or `gnd`"),
            );
            return None;
        };
        let ok = !name.is_empty() && name.chars().all(|c| c.is_ascii_alphanumeric() || c == '_');
        if !ok {
            self.push(
                Diagnostic::error("name", format!("`{name}` can't name a node"))
                    .at(node.span, "letters, digits and '_' only")
                    .help("for example `base`, `out_p`, `n3`; `gnd` is the reference"),
            );
            return None;
        }
        Some(name.to_string())
    }

    fn node_pair(&mut self, node: &Node, what: &str) -> Option<[String; 2]> {
        let NodeKind::Seq(items) = &node.kind else {
            self.push(
                Diagnostic::error("wrong_type", format!("{what} must be a pair of nodes"))
                    .at(node.span, format!("found {}", node.shape()))
                    .help("write `[a, b]`"),
            );
            return None;
        };
        if items.len() != 2 {
            self.push(
                Diagnostic::error(
                    "wrong_type",
                    format!("{what} takes two nodes, not {}", items.len()),
                )
                .at(node.span, "needs exactly two")
                .help("write `[a, b]`"),
            );
            return None;
        }
        let a = self.node_name(&items[0], what);
        let b = self.node_name(&items[1], what);
        Some([a?, b?])
    }

    /// `at: node` or `at: [p, n]`.
    fn node_or_pair(&mut self, node: &Node, what: &str) -> Option<(String, String)> {
        match &node.kind {
            NodeKind::Seq(_) => self.node_pair(node, what).map(|[a, b]| (a, b)),
            _ => self.node_name(node, what).map(|a| (a, GROUND.to_string())),
        }
    }

    // ---- sections -------------------------------------------------------------------------

    fn supplies(&mut self, entry: Option<(&Key, &Node)>, defaults: &Defaults) -> Vec<Supply> {
        let mut out = Vec::new();
        let Some((_, node)) = entry else { return out };
        let NodeKind::Map(entries) = &node.kind else {
            self.push(
                Diagnostic::error("wrong_type", "`supplies` must be a mapping of node: voltage")
                    .at(node.span, format!("found {}", node.shape()))
                    .help("write `vcc: 12 V` lines under `supplies:`"),
            );
            return out;
        };
        for (i, (key, value)) in entries.iter().enumerate() {
            if let Some((first, _)) = entries[..i].iter().find(|(k, _)| k.name == key.name) {
                self.push(
                    Diagnostic::error(
                        "duplicate_key",
                        format!("supply `{}` is written twice", key.name),
                    )
                    .at(key.span, "written again here")
                    .also(first.span, "first written here")
                    .help("a node holds one supply"),
                );
                continue;
            }
            let name_node = Node { kind: NodeKind::Scalar(key.name.clone()), span: key.span };
            let Some(name) = self.node_name(&name_node, "a supply") else { continue };
            if name == GROUND {
                self.push(
                    Diagnostic::error("name", "a supply cannot sit on `gnd`")
                        .at(key.span, "gnd is the reference, 0 V by definition")
                        .help("name the supply rail, e.g. `vcc: 12 V`, and connect parts to it"),
                );
                continue;
            }
            self.places.insert(format!("supplies.{name}"), key.span);
            let voltage = if let NodeKind::Map(_) = value.kind {
                let Some(mut f) = Fields::open(
                    value,
                    format!("supply `{name}`"),
                    SUPPLY_KEYS,
                    key.span,
                    &mut self.diagnostics,
                ) else {
                    continue;
                };
                let v = f
                    .require("voltage", &mut self.diagnostics)
                    .and_then(|n| self.quantity(n, VOLTAGE));
                let dist = f.get("distribution").and_then(|n| self.distribution(n));
                let tol = match (f.get("tolerance"), v) {
                    (Some(t), Some(v)) => {
                        self.tolerance(t, v, VOLTAGE, dist.unwrap_or(Distribution::Uniform))
                    }
                    _ => defaults.get("supply").copied(),
                };
                f.finish(&mut self.diagnostics);
                v.map(|nominal| Toleranced { nominal, tolerance: tol })
            } else {
                self.quantity(value, VOLTAGE).map(|nominal| Toleranced {
                    nominal,
                    tolerance: defaults.get("supply").copied(),
                })
            };
            if let Some(voltage) = voltage {
                out.push(Supply { node: name, voltage });
            }
        }
        out
    }

    fn signal(&mut self, key: &Key, node: &Node) -> Option<Signal> {
        let mut f = Fields::open(
            node,
            "the `signal` section",
            SIGNAL_KEYS,
            key.span,
            &mut self.diagnostics,
        )?;
        let at = f.require("at", &mut self.diagnostics).and_then(|n| {
            self.places.insert("signal.at".into(), n.span);
            self.node_or_pair(n, "`signal.at`")
        });
        let r = f
            .require("resistance", &mut self.diagnostics)
            .and_then(|n| self.quantity(n, RESISTANCE));
        f.finish(&mut self.diagnostics);
        let (positive, negative) = at?;
        Some(Signal { positive, negative, resistance: Toleranced::exact(r?) })
    }

    fn output(
        &mut self,
        key: &Key,
        node: &Node,
        defaults: &Defaults,
    ) -> (Option<Output>, Vec<Part>) {
        let mut loads = Vec::new();
        let Some(mut f) = Fields::open(
            node,
            "the `output` section",
            OUTPUT_KEYS,
            key.span,
            &mut self.diagnostics,
        ) else {
            return (None, loads);
        };
        let at = f.require("at", &mut self.diagnostics).and_then(|n| {
            self.places.insert("output.at".into(), n.span);
            self.node_or_pair(n, "`output.at`")
        });
        let rl = f.get_entry("load_resistance").and_then(|(k, n)| {
            self.places.insert("parts.load.r".into(), k.span);
            self.quantity(n, RESISTANCE)
        });
        let cl = f.get_entry("load_capacitance").and_then(|(k, n)| {
            self.places.insert("parts.load.c".into(), k.span);
            self.quantity(n, CAPACITANCE)
        });
        f.finish(&mut self.diagnostics);
        let Some((positive, negative)) = at else { return (None, loads) };
        let between = [positive.clone(), negative.clone()];
        if let Some(r) = rl {
            loads.push(Part {
                name: "load.r".into(),
                kind: PartKind::Resistor {
                    between: between.clone(),
                    value: Toleranced { nominal: r, tolerance: defaults.get("resistor").copied() },
                },
                note: Some("load resistance".into()),
            });
        }
        if let Some(c) = cl {
            loads.push(Part {
                name: "load.c".into(),
                kind: PartKind::Capacitor {
                    between,
                    value: Toleranced { nominal: c, tolerance: defaults.get("capacitor").copied() },
                    role: Some(CapacitorRole::Load),
                },
                note: Some("load capacitance".into()),
            });
        }
        (Some(Output { positive, negative }), loads)
    }

    fn models(&mut self, _key: &Key, node: &Node) -> Vec<Model> {
        let mut out = Vec::new();
        let NodeKind::Map(entries) = &node.kind else {
            self.push(
                Diagnostic::error("wrong_type", "`models` must be a mapping of name: parameters")
                    .at(node.span, format!("found {}", node.shape()))
                    .help("write each model as `NAME:` with `type:` and its parameters"),
            );
            return out;
        };
        for (i, (key, value)) in entries.iter().enumerate() {
            if let Some((first, _)) = entries[..i].iter().find(|(k, _)| k.name == key.name) {
                self.push(
                    Diagnostic::error(
                        "duplicate_key",
                        format!("model `{}` is defined twice", key.name),
                    )
                    .at(key.span, "defined again here")
                    .also(first.span, "first defined here")
                    .help("rename one of them or remove the copy"),
                );
                continue;
            }
            self.places.insert(format!("models.{}", key.name), key.span);
            match self.model(key, value) {
                Some(device) => out.push(Model { name: key.name.clone(), device }),
                None => {
                    self.failed_names.insert(key.name.clone());
                }
            }
        }
        out
    }

    fn model(&mut self, key: &Key, node: &Node) -> Option<DeviceModel> {
        let NodeKind::Map(_) = node.kind else {
            self.push(
                Diagnostic::error(
                    "wrong_type",
                    format!("model `{}` must be a mapping of parameters", key.name),
                )
                .at(node.span, format!("found {}", node.shape()))
                .help("start it with `type: npn` (or pnp, nmos, pmos)"),
            );
            return None;
        };
        let ty = map_get(node, "type");
        let ty_text = ty.and_then(Node::scalar).unwrap_or("");
        let keys = match ty_text {
            "npn" | "pnp" => BIPOLAR_KEYS,
            "nmos" | "pmos" => MOS_KEYS,
            _ => {
                let (span, label) = match ty {
                    Some(n) => (n.span, "not a model type"),
                    None => (key.span, "`type` is missing"),
                };
                let help = match nearest(ty_text, MODEL_TYPES) {
                    Some(best) if !ty_text.is_empty() => format!("did you mean `{best}`?"),
                    _ => format!("write `type:` as one of {}", list(MODEL_TYPES)),
                };
                let message = if ty.is_none() {
                    format!("model `{}` needs `type`", key.name)
                } else {
                    format!(
                        "model `{}` has type `{ty_text}`, which tauweave does not know",
                        key.name
                    )
                };
                let code = if ty.is_none() { "missing_key" } else { "unknown_kind" };
                self.push(Diagnostic::error(code, message).at(span, label).help(help));
                return None;
            }
        };
        let what = format!("model `{}`", key.name);
        let mut f = Fields::open(node, what.clone(), keys, key.span, &mut self.diagnostics)?;
        f.get("type");
        let name = key.name.clone();
        let model = if keys == BIPOLAR_KEYS {
            self.bipolar(&mut f, &name, key, ty_text == "npn").map(DeviceModel::Bipolar)
        } else {
            self.mos(&mut f, &name, key, ty_text == "nmos").map(DeviceModel::Mos)
        };
        f.finish(&mut self.diagnostics);
        model
    }

    fn param_at(
        &mut self,
        f: &mut Fields,
        model: &str,
        key: &'static str,
        place: Place,
    ) -> Option<Toleranced> {
        let (k, n) = f.get_entry(key)?;
        self.places.insert(format!("models.{model}.{key}"), n.span);
        self.toleranced(n, place, k.span, &format!("`{key}` of model `{model}`"))
    }

    fn required_param(
        &mut self,
        f: &mut Fields,
        model: &str,
        key: &'static str,
        place: Place,
    ) -> Option<Toleranced> {
        if !f.has(key) {
            f.require(key, &mut self.diagnostics);
            return None;
        }
        self.param_at(f, model, key, place)
    }

    fn bipolar(
        &mut self,
        f: &mut Fields,
        name: &str,
        key: &Key,
        npn: bool,
    ) -> Option<BipolarModel> {
        let beta = self.required_param(f, name, "beta", RATIO);
        let beta_reverse = self.param_at(f, name, "beta_reverse", RATIO).map_or(1.0, |t| t.nominal);
        let early = self.param_at(f, name, "early_voltage", Place { positive: true, ..VOLTAGE });
        let is = self.required_param(f, name, "saturation_current", CURRENT);
        let rb = self
            .param_at(f, name, "base_resistance", Place { positive: false, ..RESISTANCE })
            .unwrap_or(Toleranced::exact(0.0));
        if rb.nominal < 0.0 {
            self.negative_param(name, "base_resistance");
        }
        let tf = self.param_at(f, name, "transit_time", TIME);
        let ft = match f.get_entry("transition_frequency") {
            Some((k, n)) => self.transition_frequency(name, k, n),
            None => None,
        };
        if let (Some(_), Some(_)) = (tf, ft) {
            let span = self
                .places
                .get(&format!("models.{name}.transit_time"))
                .copied()
                .unwrap_or(key.span);
            self.push(
                Diagnostic::error(
                    "out_of_range",
                    format!("model `{name}` gives both `transit_time` and `transition_frequency`"),
                )
                .at(span, "one or the other")
                .help(
                    "keep the one from the datasheet; the other follows from it at the bias point",
                ),
            );
        }
        let transit = match (tf, ft) {
            (Some(t), None) => {
                if t.nominal < 0.0 {
                    self.negative_param(name, "transit_time");
                }
                Some(TransitSpec::TransitTime(t))
            }
            (None, Some(ft)) => Some(ft),
            _ => None,
        };
        let cje = match f.get_entry("emitter_junction") {
            Some((k, n)) => self.junction(name, "emitter_junction", k, n),
            None => None,
        };
        let cjc = match f.get_entry("collector_junction") {
            Some((k, n)) => self.junction(name, "collector_junction", k, n),
            None => None,
        };
        let max_power = self.param_at(f, name, "max_power", POWER).map(|t| t.nominal);
        Some(BipolarModel {
            polarity: if npn { BipolarType::Npn } else { BipolarType::Pnp },
            beta: beta?,
            beta_reverse,
            early_voltage: early,
            saturation_current: is?,
            base_resistance: rb,
            transit,
            emitter_junction: cje,
            collector_junction: cjc,
            max_power,
        })
    }

    fn negative_param(&mut self, model: &str, key: &str) {
        let span = self.places.get(&format!("models.{model}.{key}")).copied().unwrap_or_default();
        self.push(
            Diagnostic::error("not_positive", format!("`{key}` of model `{model}` is negative"))
                .at(span, "must not be negative")
                .help("give zero or a positive value"),
        );
    }

    fn transition_frequency(&mut self, model: &str, key: &Key, node: &Node) -> Option<TransitSpec> {
        let mut f = Fields::open(
            node,
            format!("`transition_frequency` of model `{model}`"),
            FT_KEYS,
            key.span,
            &mut self.diagnostics,
        )?;
        let freq = f.require("frequency", &mut self.diagnostics).and_then(|n| {
            self.places.insert(format!("models.{model}.transition_frequency.frequency"), n.span);
            self.toleranced(n, FREQUENCY, key.span, "`frequency`")
        });
        let ic = f
            .require("collector_current", &mut self.diagnostics)
            .and_then(|n| self.quantity(n, CURRENT));
        f.finish(&mut self.diagnostics);
        Some(TransitSpec::TransitionFrequency { frequency: freq?, collector_current: ic? })
    }

    fn junction(&mut self, model: &str, which: &str, key: &Key, node: &Node) -> Option<Junction> {
        let mut f = Fields::open(
            node,
            format!("`{which}` of model `{model}`"),
            JUNCTION_KEYS,
            key.span,
            &mut self.diagnostics,
        )?;
        let c = f.require("capacitance", &mut self.diagnostics).and_then(|n| {
            self.places.insert(format!("models.{model}.{which}.capacitance"), n.span);
            self.toleranced(n, Place { positive: false, ..CAPACITANCE }, key.span, "`capacitance`")
        });
        if let Some(c) = c {
            if c.nominal < 0.0 {
                self.negative_param(model, &format!("{which}.capacitance"));
            }
        }
        let phi = match f.get("potential") {
            Some(n) => {
                self.places.insert(format!("models.{model}.{which}.potential"), n.span);
                self.quantity(n, Place { positive: true, ..VOLTAGE })
            }
            None => Some(0.75),
        };
        let m = match f.get("grading") {
            Some(n) => {
                self.places.insert(format!("models.{model}.{which}.grading"), n.span);
                let m = self.quantity(n, RATIO)?;
                if !(m > 0.0 && m < 1.0) {
                    self.push(
                        Diagnostic::error(
                            "out_of_range",
                            format!("grading exponent {} is outside (0, 1)", self.show(n)),
                        )
                        .at(n.span, "out of range")
                        .help("abrupt junctions have 0.5, linearly graded ones 0.33"),
                    );
                    None
                } else {
                    Some(m)
                }
            }
            None => Some(0.33),
        };
        f.finish(&mut self.diagnostics);
        Some(Junction { capacitance: c?, potential: phi?, grading: m? })
    }

    fn mos(&mut self, f: &mut Fields, name: &str, key: &Key, nmos: bool) -> Option<MosModel> {
        let kp_dim = Dim::AMPERE.per(Dim::VOLT.powi(2));
        let kp = self.required_param(
            f,
            name,
            "process_transconductance",
            Place {
                what: "a process transconductance",
                dim: kp_dim,
                positive: true,
                decibels: false,
            },
        );
        let w = self.required_param(f, name, "width", LENGTH);
        let l = self.required_param(f, name, "length", LENGTH);
        let vth = self.required_param(f, name, "threshold", VOLTAGE);
        let lambda = self
            .param_at(
                f,
                name,
                "channel_length_modulation",
                Place {
                    what: "a channel-length modulation",
                    dim: per_volt(),
                    positive: false,
                    decibels: false,
                },
            )
            .unwrap_or(Toleranced::exact(0.0));
        if lambda.nominal < 0.0 {
            self.negative_param(name, "channel_length_modulation");
        }
        let cox = self.param_at(
            f,
            name,
            "oxide_capacitance",
            Place {
                what: "an oxide capacitance per area",
                dim: Dim::FARAD.per(Dim::METRE.powi(2)),
                positive: true,
                decibels: false,
            },
        );
        let cov = self.param_at(
            f,
            name,
            "overlap_capacitance",
            Place {
                what: "an overlap capacitance per width",
                dim: Dim::FARAD.per(Dim::METRE),
                positive: false,
                decibels: false,
            },
        );
        let cgs = self.param_at(
            f,
            name,
            "gate_source_capacitance",
            Place { positive: false, ..CAPACITANCE },
        );
        let cgd = self.param_at(
            f,
            name,
            "gate_drain_capacitance",
            Place { positive: false, ..CAPACITANCE },
        );
        let cdb = self.param_at(
            f,
            name,
            "drain_body_capacitance",
            Place { positive: false, ..CAPACITANCE },
        );
        for (k, v) in [
            ("overlap_capacitance", cov),
            ("gate_source_capacitance", cgs),
            ("gate_drain_capacitance", cgd),
            ("drain_body_capacitance", cdb),
        ] {
            if v.is_some_and(|v| v.nominal < 0.0) {
                self.negative_param(name, k);
            }
        }
        if cox.is_some() && cgs.is_some() {
            let span = self
                .places
                .get(&format!("models.{name}.gate_source_capacitance"))
                .copied()
                .unwrap_or(key.span);
            self.push(
                Diagnostic::error("out_of_range", format!("model `{name}` gives both `oxide_capacitance` and `gate_source_capacitance`"))
                    .at(span, "one or the other")
                    .help("C_gs either follows from C_ox·W·L or is given directly, not both"),
            );
        }
        if let Some(v) = vth {
            if (nmos && v.nominal < 0.0) || (!nmos && v.nominal > 0.0) {
                let span = self
                    .places
                    .get(&format!("models.{name}.threshold"))
                    .copied()
                    .unwrap_or(key.span);
                let (ty, sign) = if nmos { ("nmos", "positive") } else { ("pmos", "negative") };
                self.push(
                    Diagnostic::warning(
                        "out_of_range",
                        format!("an enhancement {ty} threshold is normally {sign}"),
                    )
                    .at(span, "check the sign")
                    .help(
                        "tauweave models enhancement devices; a depletion device keeps this sign",
                    ),
                );
            }
        }
        let max_power = self.param_at(f, name, "max_power", POWER).map(|t| t.nominal);
        Some(MosModel {
            polarity: if nmos { MosType::Nmos } else { MosType::Pmos },
            process_transconductance: kp?,
            width: w?.nominal,
            length: l?.nominal,
            threshold: vth?,
            channel_length_modulation: lambda,
            oxide_capacitance: cox,
            overlap_capacitance: cov,
            gate_source_capacitance: cgs,
            gate_drain_capacitance: cgd,
            drain_body_capacitance: cdb,
            max_power,
        })
    }

    fn parts(
        &mut self,
        _key: &Key,
        node: &Node,
        models: &[Model],
        defaults: &Defaults,
    ) -> Vec<Part> {
        let mut out = Vec::new();
        let NodeKind::Map(entries) = &node.kind else {
            self.push(
                Diagnostic::error(
                    "wrong_type",
                    "`parts` must be a mapping keyed by reference designator",
                )
                .at(node.span, format!("found {}", node.shape()))
                .help("write each part as `R1: {kind: resistor, value: 4k7, between: [a, b]}`"),
            );
            return out;
        };
        for (i, (key, value)) in entries.iter().enumerate() {
            if let Some((first, _)) = entries[..i].iter().find(|(k, _)| k.name == key.name) {
                self.push(
                    Diagnostic::error(
                        "duplicate_part",
                        format!("two parts are called `{}`", key.name),
                    )
                    .at(key.span, "second part with this designator")
                    .also(first.span, "first one")
                    .help("give each part its own designator, e.g. the next free number"),
                );
                continue;
            }
            let valid = key.name.chars().next().is_some_and(|c| c.is_ascii_alphabetic())
                && key.name.chars().all(|c| c.is_ascii_alphanumeric() || c == '_');
            if !valid {
                self.push(
                    Diagnostic::error(
                        "name",
                        format!("`{}` is not a reference designator", key.name),
                    )
                    .at(key.span, "starts with a letter; letters, digits, '_'")
                    .help("designators look like `R1`, `C12`, `Q2A`, `CBYP`"),
                );
                continue;
            }
            self.places.insert(format!("parts.{}", key.name), key.span);
            if let Some(part) = self.part(key, value, models, defaults) {
                out.push(part);
            }
        }
        out
    }

    fn part(
        &mut self,
        key: &Key,
        node: &Node,
        models: &[Model],
        defaults: &Defaults,
    ) -> Option<Part> {
        let name = key.name.clone();
        let NodeKind::Map(_) = node.kind else {
            self.push(
                Diagnostic::error("wrong_type", format!("part `{name}` must be a mapping"))
                    .at(node.span, format!("found {}", node.shape()))
                    .help(format!(
                        "write `{name}: {{kind: resistor, value: 4k7, between: [a, b]}}`"
                    )),
            );
            return None;
        };
        let kind_node = map_get(node, "kind");
        let kind = kind_node.and_then(Node::scalar).unwrap_or("");
        let keys = match kind {
            "resistor" | "inductor" => TWO_TERMINAL_KEYS,
            "capacitor" => CAPACITOR_KEYS,
            "transconductance" | "voltage_amplifier" => CONTROLLED_KEYS,
            "bjt" => BJT_KEYS,
            "mosfet" => MOSFET_KEYS,
            _ => {
                match kind_node {
                    None => self.push(
                        Diagnostic::error("missing_key", format!("part `{name}` needs `kind`"))
                            .at(key.span, "`kind` is missing")
                            .help(format!("add `kind:`, one of {}", list(PART_KINDS))),
                    ),
                    Some(n) => {
                        let help = match nearest(kind, PART_KINDS) {
                            Some(best) => format!("did you mean `{best}`?"),
                            None => format!("kinds: {}", list(PART_KINDS)),
                        };
                        self.push(
                            Diagnostic::error(
                                "unknown_kind",
                                format!("`{}` is not a kind of part", self.show(n)),
                            )
                            .at(n.span, "unknown kind")
                            .help(help),
                        );
                    }
                }
                return None;
            }
        };
        let mut f = Fields::open(
            node,
            format!("{} `{name}`", article(kind)),
            keys,
            key.span,
            &mut self.diagnostics,
        )?;
        f.get("kind");
        let note = f.get("note").and_then(|n| self.text_value(n, "note"));
        let part_kind = match kind {
            "bjt" | "mosfet" => self.device_part(&mut f, &name, kind, models),
            _ => self.valued_part(&mut f, &name, kind, defaults),
        };
        f.finish(&mut self.diagnostics);
        Some(Part { name, kind: part_kind?, note })
    }

    fn valued_part(
        &mut self,
        f: &mut Fields,
        name: &str,
        kind: &str,
        defaults: &Defaults,
    ) -> Option<PartKind> {
        let place = match kind {
            "resistor" => RESISTANCE,
            "capacitor" => CAPACITANCE,
            "inductor" => INDUCTANCE,
            "transconductance" => CONDUCTANCE,
            _ => GAIN,
        };
        let value = f.require("value", &mut self.diagnostics).and_then(|n| {
            self.places.insert(format!("parts.{name}.value"), n.span);
            self.quantity(n, place)
        });
        let between = f
            .require("between", &mut self.diagnostics)
            .and_then(|n| self.node_pair(n, "`between`"));
        let control = if keys_have_control(kind) {
            f.require("control", &mut self.diagnostics).and_then(|n| self.node_pair(n, "`control`"))
        } else {
            None
        };
        let role =
            if kind == "capacitor" { f.get("role").and_then(|n| self.role(n)) } else { None };
        let distribution = f.get("distribution").and_then(|n| self.distribution(n));
        let default = defaults.get(kind).copied();
        let tolerance = match (f.get("tolerance"), value) {
            (Some(t), Some(v)) => self.tolerance(
                t,
                v,
                place,
                distribution.or(default.map(|d| d.distribution)).unwrap_or(Distribution::Uniform),
            ),
            (Some(_), None) => None,
            (None, _) => default
                .map(|d| Tolerance { distribution: distribution.unwrap_or(d.distribution), ..d }),
        };
        let value = Toleranced { nominal: value?, tolerance };
        Some(match kind {
            "resistor" => PartKind::Resistor { between: between?, value },
            "capacitor" => PartKind::Capacitor { between: between?, value, role },
            "inductor" => PartKind::Inductor { between: between?, value },
            "transconductance" => {
                PartKind::Transconductance { between: between?, control: control?, value }
            }
            _ => PartKind::VoltageAmplifier { between: between?, control: control?, value },
        })
    }

    fn role(&mut self, node: &Node) -> Option<CapacitorRole> {
        match node.scalar() {
            Some("coupling") => Some(CapacitorRole::Coupling),
            Some("bypass") => Some(CapacitorRole::Bypass),
            Some("parasitic") => Some(CapacitorRole::Parasitic),
            Some("load") => Some(CapacitorRole::Load),
            _ => {
                let written = self.show(node);
                let help = match nearest(&written, ROLES) {
                    Some(best) => format!("did you mean `{best}`?"),
                    None => format!("roles: {}", list(ROLES)),
                };
                self.push(
                    Diagnostic::error(
                        "unknown_kind",
                        format!("`{written}` is not a capacitor role"),
                    )
                    .at(node.span, "unknown role")
                    .help(help),
                );
                None
            }
        }
    }

    fn device_part(
        &mut self,
        f: &mut Fields,
        name: &str,
        kind: &str,
        models: &[Model],
    ) -> Option<PartKind> {
        let terminals: [&str; 3] = if kind == "bjt" { ["c", "b", "e"] } else { ["d", "g", "s"] };
        let mut nodes = Vec::new();
        for t in terminals {
            let n = f
                .require(t, &mut self.diagnostics)
                .and_then(|n| self.node_name(n, &format!("terminal `{t}`")));
            nodes.push(n);
        }
        let model = f.require("model", &mut self.diagnostics).and_then(|n| {
            self.places.insert(format!("parts.{name}.model"), n.span);
            self.model_ref(n, kind, models)
        });
        let model = model?;
        let [a, b, c]: [Option<String>; 3] = nodes.try_into().ok()?;
        Some(if kind == "bjt" {
            PartKind::Bjt { c: a?, b: b?, e: c?, model }
        } else {
            PartKind::Mosfet { d: a?, g: b?, s: c?, model }
        })
    }

    fn model_ref(&mut self, node: &Node, kind: &str, models: &[Model]) -> Option<usize> {
        let wanted = node.scalar().unwrap_or("");
        if self.failed_names.contains(wanted) && !models.iter().any(|m| m.name == wanted) {
            return None; // the model's own error says it all
        }
        let Some(i) = models.iter().position(|m| m.name == wanted) else {
            let fitting: Vec<&str> = models
                .iter()
                .filter(|m| {
                    matches!(
                        (&m.device, kind),
                        (DeviceModel::Bipolar(_), "bjt") | (DeviceModel::Mos(_), "mosfet")
                    )
                })
                .map(|m| m.name.as_str())
                .collect();
            let all: Vec<&str> = models.iter().map(|m| m.name.as_str()).collect();
            let help = match (nearest(wanted, &fitting), fitting.is_empty()) {
                (Some(best), _) => {
                    format!("did you mean `{best}`? known {kind} models: {}", list(&fitting))
                }
                (None, false) => format!("known {kind} models: {}", list(&fitting)),
                (None, true) if all.is_empty() => format!(
                    "no models are defined; add one under `models:` with `type: {}`",
                    if kind == "bjt" { "npn" } else { "nmos" }
                ),
                (None, true) => {
                    format!("no {kind} models are defined (known models: {})", list(&all))
                }
            };
            self.push(
                Diagnostic::error(
                    "unknown_model",
                    format!("there is no model called `{}`", self.show(node)),
                )
                .at(node.span, "unknown model")
                .help(help),
            );
            return None;
        };
        let fits = matches!(
            (&models[i].device, kind),
            (DeviceModel::Bipolar(_), "bjt") | (DeviceModel::Mos(_), "mosfet")
        );
        if !fits {
            let (has, needs) = if kind == "bjt" {
                ("a MOSFET", "npn or pnp")
            } else {
                ("a bipolar", "nmos or pmos")
            };
            self.push(
                Diagnostic::error(
                    "model_type",
                    format!("`{wanted}` is {has} model; a {kind} part needs {needs}"),
                )
                .at(node.span, "wrong family")
                .help(format!("change the part's `kind` or point it at a model of type {needs}")),
            );
            return None;
        }
        Some(i)
    }

    fn unused_models(&mut self, root: &Node, models: &[Model], parts: &[Part]) {
        let Some(node) = map_get(root, "models") else { return };
        let NodeKind::Map(entries) = &node.kind else { return };
        let mut used = vec![false; models.len()];
        for p in parts {
            if let PartKind::Bjt { model, .. } | PartKind::Mosfet { model, .. } = p.kind {
                used[model] = true;
            }
        }
        // Parts that failed to read may still name a model: count those as uses.
        let named: BTreeSet<&str> = map_get(root, "parts")
            .and_then(|p| if let NodeKind::Map(e) = &p.kind { Some(e) } else { None })
            .map(|e| {
                e.iter().filter_map(|(_, v)| map_get(v, "model").and_then(Node::scalar)).collect()
            })
            .unwrap_or_default();
        for (i, m) in models.iter().enumerate() {
            if !used[i] && !named.contains(m.name.as_str()) {
                if let Some((key, _)) = entries.iter().find(|(k, _)| k.name == m.name) {
                    self.push(
                        Diagnostic::warning(
                            "unused_model",
                            format!("model `{}` is not used by any part", m.name),
                        )
                        .at(key.span, "unused")
                        .help("point a part's `model:` at it or remove it"),
                    );
                }
            }
        }
    }

    fn requirements(&mut self, entry: Option<(&Key, &Node)>) -> Requirements {
        let mut out = Requirements::default();
        let Some((key, node)) = entry else { return out };
        let Some(mut f) = Fields::open(
            node,
            "the `requirements` section",
            REQUIREMENT_KEYS,
            key.span,
            &mut self.diagnostics,
        ) else {
            return out;
        };
        for &name in REQUIREMENT_KEYS {
            let Some((k, n)) = f.get_entry(name) else { continue };
            let place = match name {
                "midband_gain" => GAIN_LIMIT,
                "upper_cutoff" | "lower_cutoff" => FREQUENCY,
                _ => RESISTANCE,
            };
            let limits = self.limits(name, k, n, place);
            match name {
                "midband_gain" => out.midband_gain = limits,
                "upper_cutoff" => out.upper_cutoff = limits,
                "lower_cutoff" => out.lower_cutoff = limits,
                "input_resistance" => out.input_resistance = limits,
                _ => out.output_resistance = limits,
            }
        }
        f.finish(&mut self.diagnostics);
        out
    }

    fn limits(&mut self, name: &str, key: &Key, node: &Node, place: Place) -> Option<Limits> {
        let mut f = Fields::open(
            node,
            format!("requirement `{name}`"),
            LIMIT_KEYS,
            key.span,
            &mut self.diagnostics,
        )?;
        let min_node = f.get("min");
        let max_node = f.get("max");
        if min_node.is_none() && max_node.is_none() {
            self.push(
                Diagnostic::error(
                    "missing_key",
                    format!("requirement `{name}` needs `min`, `max` or both"),
                )
                .at(key.span, "no limit given")
                .help(format!("e.g. `{name}: {{min: {}}}`", example(place))),
            );
        }
        let min = min_node.and_then(|n| self.quantity(n, place));
        let max = max_node.and_then(|n| self.quantity(n, place));
        f.finish(&mut self.diagnostics);
        if let (Some(lo), Some(hi), Some(n)) = (min, max, min_node) {
            if lo > hi {
                self.push(
                    Diagnostic::error(
                        "limits",
                        format!("requirement `{name}` has its min above its max"),
                    )
                    .at(n.span, "min is larger than max")
                    .also(max_node.map_or(n.span, |m| m.span), "max")
                    .help("swap them, or widen the window"),
                );
                return None;
            }
        }
        if (min_node.is_some() && min.is_none()) || (max_node.is_some() && max.is_none()) {
            return None;
        }
        if min.is_none() && max.is_none() {
            return None;
        }
        Some(Limits { min, max })
    }

    fn analysis(&mut self, entry: Option<(&Key, &Node)>) -> Option<AnalysisSettings> {
        let mut out = AnalysisSettings::defaults();
        let Some((key, node)) = entry else { return Some(out) };
        let mut f = Fields::open(
            node,
            "the `analysis` section",
            ANALYSIS_KEYS,
            key.span,
            &mut self.diagnostics,
        )?;
        let mut ok = true;
        if let Some((k, n)) = f.get_entry("sweep") {
            if let Some(mut s) =
                Fields::open(n, "`analysis.sweep`", SWEEP_KEYS, k.span, &mut self.diagnostics)
            {
                let start_node = s.get("start");
                if let Some(n) = start_node {
                    match self.quantity(n, FREQUENCY) {
                        Some(v) => out.sweep_start_hz = v,
                        None => ok = false,
                    }
                }
                if let Some(n) = s.get("stop") {
                    match self.quantity(n, FREQUENCY) {
                        Some(v) => out.sweep_stop_hz = v,
                        None => ok = false,
                    }
                }
                if let Some(n) = s.get("points_per_decade") {
                    match self.integer(n, 1, 1000, "`points_per_decade`") {
                        Some(v) => out.points_per_decade = v as u32,
                        None => ok = false,
                    }
                }
                if ok && out.sweep_stop_hz <= out.sweep_start_hz * 10.0 {
                    self.push(
                        Diagnostic::error("out_of_range", "the sweep must span at least one decade")
                            .at(start_node.map_or(k.span, |n| n.span), "start is not below stop/10")
                            .help("set `start` well below the low cut-off and `stop` well above the high one"),
                    );
                    ok = false;
                }
                s.finish(&mut self.diagnostics);
            }
        }
        if let Some((k, n)) = f.get_entry("monte_carlo") {
            if let Some(mut m) = Fields::open(
                n,
                "`analysis.monte_carlo`",
                MONTE_CARLO_KEYS,
                k.span,
                &mut self.diagnostics,
            ) {
                if let Some(n) = m.get("runs") {
                    match self.integer(n, 0, 1_000_000, "`runs`") {
                        Some(v) => out.monte_carlo_runs = v as u32,
                        None => ok = false,
                    }
                }
                if let Some(n) = m.get("seed") {
                    match self.integer(n, 0, u64::MAX, "`seed`") {
                        Some(v) => out.seed = v,
                        None => ok = false,
                    }
                }
                m.finish(&mut self.diagnostics);
            }
        }
        f.finish(&mut self.diagnostics);
        ok.then_some(out)
    }

    fn integer(&mut self, node: &Node, lo: u64, hi: u64, what: &str) -> Option<u64> {
        let text = node.scalar().unwrap_or("").replace('_', "");
        match text.parse::<i128>() {
            Ok(v) if (lo as i128..=hi as i128).contains(&v) => Some(v as u64),
            Ok(_) => {
                self.push(
                    Diagnostic::error(
                        "out_of_range",
                        format!("{what} must lie between {lo} and {hi}"),
                    )
                    .at(node.span, "out of range")
                    .help(format!("give a whole number from {lo} to {hi}")),
                );
                None
            }
            Err(_) => {
                self.push(
                    Diagnostic::error(
                        "quantity",
                        format!("{what} must be a whole number, not `{}`", self.show(node)),
                    )
                    .at(node.span, "not a whole number")
                    .help(format!("give a whole number from {lo} to {hi}")),
                );
                None
            }
        }
    }
}

fn keys_have_control(kind: &str) -> bool {
    matches!(kind, "transconductance" | "voltage_amplifier")
}

fn article(kind: &str) -> String {
    let word = kind.replace('_', " ");
    if word.starts_with(['a', 'e', 'i', 'o', 'u']) {
        format!("an {word}")
    } else {
        format!("a {word}")
    }
}

fn map_get<'n>(node: &'n Node, key: &str) -> Option<&'n Node> {
    match &node.kind {
        NodeKind::Map(entries) => entries.iter().find(|(k, _)| k.name == key).map(|(_, v)| v),
        _ => None,
    }
}

/// The symbol for a dimension in messages ("Ω", "F", "pure number" → "V/V").
fn unit_symbol(d: Dim) -> String {
    if d == Dim::NONE { "V/V".to_string() } else { d.symbol() }
}

fn example(place: Place) -> &'static str {
    match place.what {
        "a resistance" => "4.7 kΩ",
        "a capacitance" => "100 nF",
        "an inductance" => "1 µH",
        "a voltage" => "12 V",
        "a current" => "1 mA",
        "a frequency" => "10 MHz",
        "a time" => "20 ps",
        "a power" => "250 mW",
        "a length" => "2 µm",
        "a temperature" => "27 °C",
        "a transconductance" => "20 mS",
        "a voltage gain" => "20 dB",
        _ => "100",
    }
}
