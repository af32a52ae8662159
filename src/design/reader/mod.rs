//! From the located YAML tree to a validated [`Design`].
//!
//! In: the [`Node`] tree and the file's text. Out: the design, or every problem found in
//! one pass (unknown keys, bad quantities, wrong units, dangling references…), each located
//! and with a fix. The circuit-level checks (DC paths, lonely nodes) live in `topology`.
//! No I/O.
//!
//! One [`Reader`] walks the document; its methods are split by the format's sections:
//! `keys.rs` (every key list), `values.rs` (quantities, tolerances, defaults), `params.rs`,
//! `circuit.rs` (nodes, supplies, signal, output, parts), `models.rs` and `settings.rs`
//! (requirements and analysis settings). This file holds the walk itself and the metadata.

mod circuit;
mod keys;
mod models;
mod params;
mod project;
mod settings;
#[cfg(test)]
mod unit_tests;
mod values;
mod what_if;

pub use keys::*;
pub use project::read_project;

use std::collections::{BTreeMap, BTreeSet};

use crate::design::diagnostic::{Diagnostic, Span};
use crate::design::fields::{Fields, list};
use crate::design::quantity::{self, Dim, Mark, Value};
use crate::design::suggest::nearest;
use crate::design::types::*;
use crate::design::yaml::{Key, Node, NodeKind};

/// What a quantity's place expects.
#[derive(Clone, Copy)]
struct Place {
    /// "a resistance", "a capacitance"…
    what: &'static str,
    dim: Dim,
    /// Zero and negative values are refused.
    positive: bool,
    /// What `dB` means here.
    decibels: Decibels,
}

impl Place {
    /// A pure ratio that reads naturally in percent (`1 %` of distortion, `5 %` of
    /// overshoot); everywhere else a `%` is a slip (a tolerance in a value's place).
    fn takes_percent(&self) -> bool {
        self.dim == Dim::NONE && matches!(self.what, "a distortion ratio" | "an overshoot")
    }
}

/// What a place does with a value written in `dB`.
#[derive(Clone, Copy, PartialEq)]
enum Decibels {
    /// dB is an error (a resistance, a frequency…).
    Refused,
    /// `20 dB` is the voltage ratio 10 (a gain limit).
    Ratio,
    /// The value must be written in dB and is kept as the dB figure (a flatness).
    Figure,
}

const RESISTANCE: Place =
    Place { what: "a resistance", dim: Dim::OHM, positive: true, decibels: Decibels::Refused };
const CAPACITANCE: Place =
    Place { what: "a capacitance", dim: Dim::FARAD, positive: true, decibels: Decibels::Refused };
const INDUCTANCE: Place =
    Place { what: "an inductance", dim: Dim::HENRY, positive: true, decibels: Decibels::Refused };
const VOLTAGE: Place =
    Place { what: "a voltage", dim: Dim::VOLT, positive: false, decibels: Decibels::Refused };
const CURRENT: Place =
    Place { what: "a current", dim: Dim::AMPERE, positive: true, decibels: Decibels::Refused };
const FREQUENCY: Place =
    Place { what: "a frequency", dim: Dim::HERTZ, positive: true, decibels: Decibels::Refused };
const TIME: Place =
    Place { what: "a time", dim: Dim::SECOND, positive: false, decibels: Decibels::Refused };
const POWER: Place =
    Place { what: "a power", dim: Dim::WATT, positive: true, decibels: Decibels::Refused };
const LENGTH: Place =
    Place { what: "a length", dim: Dim::METRE, positive: true, decibels: Decibels::Refused };
const TEMPERATURE: Place =
    Place { what: "a temperature", dim: Dim::KELVIN, positive: true, decibels: Decibels::Refused };
const CONDUCTANCE: Place = Place {
    what: "a transconductance",
    dim: Dim::SIEMENS,
    positive: false,
    decibels: Decibels::Refused,
};
const GAIN: Place =
    Place { what: "a voltage gain", dim: Dim::NONE, positive: false, decibels: Decibels::Ratio };
const RATIO: Place =
    Place { what: "a pure number", dim: Dim::NONE, positive: true, decibels: Decibels::Refused };
const GAIN_LIMIT: Place =
    Place { what: "a voltage gain", dim: Dim::NONE, positive: true, decibels: Decibels::Ratio };
/// A spread of gain in dB (max − min over a band).
const FLATNESS: Place =
    Place { what: "a gain flatness", dim: Dim::NONE, positive: false, decibels: Decibels::Figure };

/// A noise figure, written in dB and kept as the dB figure.
const NOISE_FIGURE: Place =
    Place { what: "a noise figure", dim: Dim::NONE, positive: false, decibels: Decibels::Figure };
/// A spot noise density, V/√Hz.
const NOISE_DENSITY: Place = Place {
    what: "a noise density",
    dim: Dim::VOLT_PER_ROOT_HERTZ,
    positive: true,
    decibels: Decibels::Refused,
};
/// An rms noise voltage.
const NOISE_VOLTAGE: Place = Place {
    what: "an rms noise voltage",
    dim: Dim::VOLT,
    positive: true,
    decibels: Decibels::Refused,
};

/// A signal-to-noise ratio, written in dB and kept as the dB figure.
const SNR: Place = Place {
    what: "a signal-to-noise ratio",
    dim: Dim::NONE,
    positive: false,
    decibels: Decibels::Figure,
};

/// A peak signal voltage (an output swing, a compression point).
const PEAK_VOLTAGE: Place =
    Place { what: "a peak voltage", dim: Dim::VOLT, positive: true, decibels: Decibels::Refused };

/// A distortion ratio: `1 %`, `-40 dB` or the plain ratio `0.01`, kept as the ratio.
const DISTORTION: Place =
    Place { what: "a distortion ratio", dim: Dim::NONE, positive: true, decibels: Decibels::Ratio };

/// A return loss, written in dB and kept as the dB figure.
const RETURN_LOSS: Place =
    Place { what: "a return loss", dim: Dim::NONE, positive: false, decibels: Decibels::Figure };

/// A stability factor (μ): a pure number.
const STABILITY: Place = Place {
    what: "a stability factor",
    dim: Dim::NONE,
    positive: true,
    decibels: Decibels::Refused,
};

/// A duration: a rise time, a delay.
const DURATION: Place =
    Place { what: "a duration", dim: Dim::SECOND, positive: true, decibels: Decibels::Refused };

/// An overshoot: `10 %` or the plain ratio `0.1`, kept as the ratio.
const OVERSHOOT: Place =
    Place { what: "an overshoot", dim: Dim::NONE, positive: false, decibels: Decibels::Refused };

/// A temperature exponent: any sign, no unit.
const EXPONENT: Place =
    Place { what: "an exponent", dim: Dim::NONE, positive: false, decibels: Decibels::Refused };

/// The reference temperature of a model, K, when it gives none: 27 °C.
const REFERENCE_TEMPERATURE_K: f64 = 300.15;

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
    read_with(text, root, &BTreeMap::new(), None)
}

/// [`read`] with some params replaced by SI values (their units kept): what a param sweep
/// reads at each point.
pub fn read_with(
    text: &str,
    root: &Node,
    overrides: &BTreeMap<String, f64>,
    project: Option<&std::sync::Arc<crate::design::project::Project>>,
) -> Read {
    let mut r = Reader::new(text, overrides, project);
    let design = r.document(root);
    Read { design, diagnostics: r.diagnostics }
}

impl<'t> Reader<'t> {
    fn new(
        text: &'t str,
        overrides: &'t BTreeMap<String, f64>,
        project: Option<&'t std::sync::Arc<crate::design::project::Project>>,
    ) -> Reader<'t> {
        Reader {
            overrides,
            project,
            in_project: false,
            text,
            diagnostics: Vec::new(),
            params: BTreeMap::new(),
            params_used: BTreeSet::new(),
            failed_names: BTreeSet::new(),
            places: BTreeMap::new(),
        }
    }
}

struct Reader<'t> {
    /// True while reading a project file (whose requirement sets cannot include others).
    in_project: bool,
    /// The project file's house style, when the design has one above it.
    project: Option<&'t std::sync::Arc<crate::design::project::Project>>,
    /// Params replaced by SI values.
    overrides: &'t BTreeMap<String, f64>,
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
        let (temperature_k, mains_powered) = self.environment(top.get_entry("environment"));
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
        let has_band = signal.as_ref().map(|s| s.band.is_some());
        let has_amplitude = signal.as_ref().map(|s| s.amplitude_v.is_some());
        let requirements =
            self.requirements(top.get_entry("requirements"), has_band, has_amplitude);
        let analysis = self.analysis(top.get_entry("analysis"));
        let what_if = self.what_if(
            top.get_entry("what_if"),
            &parts,
            &supplies,
            &requirements,
            temperature_k.unwrap_or(300.15),
        );
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
            schematic: None,
        };
        Some(Design {
            format: format.unwrap_or(1),
            meta: meta.unwrap_or(placeholder),
            temperature_k: temperature_k.unwrap_or(300.15),
            mains_powered,
            params: self.param_list(root),
            supplies,
            signal: signal?,
            output: output?,
            parts,
            models,
            requirements,
            analysis: analysis.unwrap_or_else(AnalysisSettings::defaults),
            what_if,
            source: std::sync::Arc::from(self.text),
            project: self.project.cloned(),
            places: std::sync::Arc::new(std::mem::take(&mut self.places)),
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
        // The number 1, not the text "1": a quoted version is a sign of a file from elsewhere.
        let written =
            self.text.get(node.span.offset..node.span.offset + node.span.len).unwrap_or("");
        let quoted = written.starts_with('"') || written.starts_with('\'');
        match node.scalar() {
            Some("1") if !quoted => Some(1),
            Some("1") => {
                self.push(
                    Diagnostic::error("format_version", "the format version is written as text")
                        .at(node.span, "quoted")
                        .help("write the number: `tauweave: 1`"),
                );
                None
            }
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
        let schematic = f.get("schematic").and_then(|n| self.schematic(n));
        f.finish(&mut self.diagnostics);
        Some(Meta {
            id: id?,
            title: title?,
            revision: revision?,
            date: date?,
            author,
            purpose,
            schematic,
        })
    }

    /// `schematic: stage.svg`: a plain relative path to an `.svg` or `.png` file.
    fn schematic(&mut self, node: &Node) -> Option<String> {
        let text = self.text_value(node, "schematic")?;
        let plain = crate::design::fields::plain_relative_path(&text);
        let lower = text.to_ascii_lowercase();
        if plain && (lower.ends_with(".svg") || lower.ends_with(".png")) {
            return Some(text);
        }
        self.push(
            Diagnostic::error("schematic", format!("`{text}` is not a schematic tauweave can show"))
                .at(node.span, "an .svg or .png file beside the design")
                .help("give the drawing's path relative to the design file, e.g. `schematic: stage.svg` (SVG or PNG, no `..`)"),
        );
        None
    }

    fn text_value(&mut self, node: &Node, what: &str) -> Option<String> {
        // Only `purpose` is a paragraph; the others head tables and pages, one line each.
        let allowed = |c: char| what == "purpose" && (c == '\n' || c == '\t');
        if let Some(c) =
            node.scalar().and_then(|s| s.trim().chars().find(|c| c.is_control() && !allowed(*c)))
        {
            let shown = if c == '\n' {
                "a line break".to_string()
            } else {
                format!("the control character U+{:04X}", c as u32)
            };
            self.push(
                Diagnostic::error("control_character", format!("`{what}` holds {shown}"))
                    .at(node.span, "not printable text")
                    .help(if what == "purpose" {
                        "write plain text; line breaks and tabs are the only control characters a purpose may hold".to_string()
                    } else {
                        format!("write `{what}` on one line of plain text")
                    }),
            );
            return None;
        }
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

    /// The temperature, K, and whether the stage is built into mains-powered equipment.
    fn environment(&mut self, entry: Option<(&Key, &Node)>) -> (Option<f64>, bool) {
        let default = 300.15; // 27 °C
        let Some((key, node)) = entry else { return (Some(default), false) };
        let Some(mut f) = Fields::open(
            node,
            "the `environment` section",
            ENVIRONMENT_KEYS,
            key.span,
            &mut self.diagnostics,
        ) else {
            return (None, false);
        };
        let mains =
            f.get("mains_powered").and_then(|n| self.flag(n, "mains_powered")).unwrap_or(false);
        let t = match f.get("temperature") {
            Some(n) => 'read: {
                let Some(t) = self.quantity(n, TEMPERATURE) else { break 'read None };
                if !(1.0..=1000.0).contains(&t) {
                    self.push(
                        Diagnostic::error(
                            "out_of_range",
                            "the temperature is outside 1 K … 1000 K",
                        )
                        .at(n.span, "out of range")
                        .help("give the junction temperature, e.g. `27 °C` or `330 K`"),
                    );
                    break 'read None;
                }
                Some(t)
            }
            None => Some(default),
        };
        f.finish(&mut self.diagnostics);
        (t, mains)
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
        "a gain flatness" => "1 dB",
        "a noise figure" => "3 dB",
        "a noise density" => "2 nV/√Hz",
        "an rms noise voltage" => "5 µV",
        "a signal-to-noise ratio" => "40 dB",
        "a signal amplitude" => "10 mV",
        "a peak voltage" => "2 V",
        "a distortion ratio" => "1 %",
        "a return loss" => "10 dB",
        "a stability factor" => "1",
        "a duration" => "50 ns",
        "an overshoot" => "5 %",
        "a power rating" => "250 mW",
        "a voltage rating" => "50 V",
        _ => "100",
    }
}

#[cfg(test)]
mod tests {
    use crate::design::{Distribution, PartKind, load};

    const HEAD: &str =
        "tauweave: 1\ndesign: {id: t, title: reader test, revision: A, date: 2026-12-01}\n";

    fn codes(text: &str) -> Vec<String> {
        load(text).diagnostics.iter().map(|d| d.code.to_string()).collect()
    }

    fn stage(parts: &str, extra: &str) -> String {
        format!(
            "{HEAD}{extra}signal: {{at: in, resistance: 50}}\noutput: {{at: out}}\nparts:\n{parts}"
        )
    }

    #[test]
    fn ratios_read_in_percent_where_they_are_ratios_and_nowhere_else() {
        let parts = "  R1: {kind: resistor, value: 1k, between: [in, out]}\n\
                     \x20 C1: {kind: capacitor, value: 1n, between: [out, gnd], role: load}\n";
        let text = stage(
            parts,
            "requirements: {thd: {max: 1 %}, overshoot: {max: 5 %}, rise_time: {max: 2 µs}}\n",
        )
        .replace("resistance: 50}", "resistance: 50, amplitude: 10 mV}");
        let l = load(&text);
        let d = l.design.unwrap_or_else(|| panic!("{:?}", l.diagnostics));
        // Kept in percent, as reported.
        assert_eq!(d.requirements.thd.unwrap().max, Some(1.0));
        assert_eq!(d.requirements.overshoot.unwrap().max, Some(5.0));
        assert_eq!(d.requirements.rise_time.unwrap().max, Some(2e-6));
        // A per cent where a duration or a return loss belongs is a unit error.
        for bad in ["rise_time: {max: 5 %}", "input_return_loss: {min: 5 %}"] {
            let text = stage(parts, &format!("requirements: {{{bad}}}\n"));
            assert_eq!(codes(&text), ["unit"], "{bad}");
        }
    }

    #[test]
    fn iec_60062_codes_and_prefixes_read_as_si_values() {
        // IEC 60062 letter-and-digit codes: `4k7` is 4.7 kΩ, `4n7` is 4.7 nF (the letter marks
        // the decimal point and the multiplier).
        let text = stage(
            "  R1: {kind: resistor, value: 4k7, between: [in, out]}\n\
             \x20 R2: {kind: resistor, value: 2R2, between: [out, gnd]}\n\
             \x20 C1: {kind: capacitor, value: 4n7, between: [out, gnd], role: load}\n",
            "",
        );
        let d = load(&text).design.expect("reads");
        let value = |name: &str| match &d.parts.iter().find(|p| p.name == name).unwrap().kind {
            PartKind::Resistor { value, .. } | PartKind::Capacitor { value, .. } => value.nominal,
            _ => unreachable!(),
        };
        assert!((value("R1") - 4700.0).abs() < 1e-9);
        assert!((value("R2") - 2.2).abs() < 1e-12);
        assert!((value("C1") - 4.7e-9).abs() < 1e-21);
    }

    #[test]
    fn a_percent_tolerance_is_a_fraction_and_defaults_fill_in() {
        let text = stage(
            "  R1: {kind: resistor, value: 1k, between: [in, out], tolerance: 5 %}\n\
             \x20 R2: {kind: resistor, value: 1k, between: [out, gnd]}\n",
            "tolerances:\n  resistor: {tolerance: 2 %, distribution: gaussian}\n",
        );
        let d = load(&text).design.expect("reads");
        let tolerance = |name: &str| match &d.parts.iter().find(|p| p.name == name).unwrap().kind {
            PartKind::Resistor { value, .. } => value.tolerance.unwrap(),
            _ => unreachable!(),
        };
        assert!((tolerance("R1").fraction - 0.05).abs() < 1e-15);
        assert!((tolerance("R2").fraction - 0.02).abs() < 1e-15);
        assert_eq!(tolerance("R2").distribution, Distribution::Gaussian);
    }

    #[test]
    fn an_unknown_key_is_named_with_the_nearest_known_one() {
        let text = stage(
            "  R1: {kind: resistor, value: 1k, between: [in, out], tolerence: 5 %}\n\
             \x20 R2: {kind: resistor, value: 1k, between: [out, gnd]}\n",
            "",
        );
        let loaded = load(&text);
        assert!(loaded.design.is_none());
        let d = loaded.diagnostics.iter().find(|d| d.code == "unknown_key").expect("reported");
        assert!(d.help.as_deref().unwrap_or("").contains("tolerance"), "{d:?}");
        // Line 6 (two head lines, signal, output, `parts:`), column 55: after
        // `  R1: {kind: resistor, value: 1k, between: [in, out], ` (54 characters).
        assert_eq!((d.span.line, d.span.column), (6, 55));
    }

    #[test]
    fn a_repeated_key_and_a_capacitance_in_ohms_are_each_reported_once() {
        let text = stage(
            "  R1: {kind: resistor, value: 1k, between: [in, out]}\n\
             \x20 R1: {kind: resistor, value: 2k, between: [in, out]}\n\
             \x20 C1: {kind: capacitor, value: 4.7 kΩ, between: [out, gnd], role: load}\n",
            "",
        );
        let found = codes(&text);
        assert_eq!(found.iter().filter(|c| *c == "duplicate_part").count(), 1, "{found:?}");
        assert_eq!(found.iter().filter(|c| *c == "unit").count(), 1, "{found:?}");
    }

    #[test]
    fn implausible_values_warn_with_the_likely_prefix_issue_12() {
        // Common practice: amplifier resistors run from ohms to megohms and signal-path
        // capacitors from picofarads to millifarads; `m` (milli) for `M` (mega) is the usual slip.
        let text = stage(
            "  R1: {kind: resistor, value: 1m, between: [in, out]}\n\
             \x20 R2: {kind: resistor, value: 1M, between: [out, gnd]}\n\
             \x20 C1: {kind: capacitor, value: 10 F, between: [out, gnd], role: load}\n",
            "",
        );
        let loaded = load(&text);
        assert!(loaded.design.is_some(), "warnings only");
        let found: Vec<_> =
            loaded.diagnostics.iter().filter(|d| d.code == "implausible_value").collect();
        assert_eq!(found.len(), 2, "{found:?}");
        assert!(found[0].help.as_deref().unwrap().contains("`1M`"), "{:?}", found[0]);
        assert!(found[1].help.as_deref().unwrap().contains("`10 µF`"), "{:?}", found[1]);
    }
}
