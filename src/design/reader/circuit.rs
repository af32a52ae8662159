//! The circuit: node names, supplies, the signal source, the output and its load, and every
//! part with its kind, value, tolerance, connections and model reference.

use super::*;
use crate::notation::{plain, si};

impl Reader<'_> {
    pub(super) fn node_name(&mut self, node: &Node, what: &str) -> Option<String> {
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

    pub(super) fn node_pair(&mut self, node: &Node, what: &str) -> Option<[String; 2]> {
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
    pub(super) fn node_or_pair(&mut self, node: &Node, what: &str) -> Option<(String, String)> {
        match &node.kind {
            NodeKind::Seq(_) => self.node_pair(node, what).map(|[a, b]| (a, b)),
            _ => self.node_name(node, what).map(|a| (a, GROUND.to_string())),
        }
    }

    pub(super) fn supplies(
        &mut self,
        entry: Option<(&Key, &Node)>,
        defaults: &Defaults,
    ) -> Vec<Supply> {
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

    pub(super) fn signal(&mut self, key: &Key, node: &Node) -> Option<Signal> {
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
        let band = match f.get_entry("band") {
            Some((k, n)) => self.band(k, n),
            None => Some(None),
        };
        let peak_place = Place { what: "a signal amplitude", positive: true, ..VOLTAGE };
        let peak = f.get("amplitude").and_then(|n| self.quantity(n, peak_place));
        let rms_entry = f.get_entry("amplitude_rms");
        let rms = rms_entry.and_then(|(_, n)| self.quantity(n, peak_place));
        if let (Some(_), Some((k, _))) = (peak, rms_entry) {
            self.push(
                Diagnostic::error(
                    "out_of_range",
                    "`signal` gives both `amplitude` (peak) and `amplitude_rms`",
                )
                .at(k.span, "one or the other")
                .help("keep one: the peak is √2 times the rms of a sine"),
            );
        }
        // A sine's peak is √2 times its rms.
        let amplitude_v = peak.or(rms.map(|v| v * std::f64::consts::SQRT_2));
        let frequency_hz = f.get("frequency").and_then(|n| self.quantity(n, FREQUENCY));
        f.finish(&mut self.diagnostics);
        let (positive, negative) = at?;
        Some(Signal {
            positive,
            negative,
            resistance: Toleranced::exact(r?),
            band: band?,
            amplitude_v,
            frequency_hz,
        })
    }

    /// `signal.band: {from: 150 kHz, to: 500 kHz}`. The outer None is a refused band.
    fn band(&mut self, key: &Key, node: &Node) -> Option<Option<Band>> {
        let mut f =
            Fields::open(node, "`signal.band`", BAND_KEYS, key.span, &mut self.diagnostics)?;
        let from_node = f.require("from", &mut self.diagnostics);
        let to_node = f.require("to", &mut self.diagnostics);
        let from = from_node.and_then(|n| self.quantity(n, FREQUENCY));
        let to = to_node.and_then(|n| self.quantity(n, FREQUENCY));
        f.finish(&mut self.diagnostics);
        let (from_hz, to_hz) = (from?, to?);
        if from_hz >= to_hz {
            let span = from_node.map_or(key.span, |n| n.span);
            self.push(
                Diagnostic::error("band", "`signal.band` ends below where it starts")
                    .at(span, "`from` is not below `to`")
                    .also(to_node.map_or(span, |n| n.span), "to")
                    .help("write the lower band edge as `from` and the upper as `to`"),
            );
            return None;
        }
        Some(Some(Band { from_hz, to_hz }))
    }

    pub(super) fn output(
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
                fixed: true,
                rating: None,
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
                fixed: true,
                rating: None,
            });
        }
        (Some(Output { positive, negative }), loads)
    }

    pub(super) fn parts(
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

    pub(super) fn part(
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
            "resistor" => RESISTOR_KEYS,
            "inductor" => TWO_TERMINAL_KEYS,
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
        let fixed = f.get("fixed").and_then(|n| self.flag(n, "fixed")).unwrap_or(false);
        let rating = match kind {
            "resistor" => f
                .get("rating")
                .and_then(|n| self.quantity(n, Place { what: "a power rating", ..POWER })),
            "capacitor" => f.get("rating").and_then(|n| {
                self.quantity(n, Place { what: "a voltage rating", positive: true, ..VOLTAGE })
            }),
            _ => None,
        };
        let part_kind = match kind {
            "bjt" | "mosfet" => self.device_part(&mut f, &name, kind, models),
            _ => self.valued_part(&mut f, &name, kind, defaults),
        };
        f.finish(&mut self.diagnostics);
        Some(Part { name, kind: part_kind?, note, fixed, rating })
    }

    /// `true` or `false`.
    pub(super) fn flag(&mut self, node: &Node, what: &str) -> Option<bool> {
        match node.scalar() {
            Some("true") => Some(true),
            Some("false") => Some(false),
            _ => {
                self.push(
                    Diagnostic::error("wrong_type", format!("`{what}` is `true` or `false`"))
                        .at(node.span, format!("found `{}`", self.show(node)))
                        .help(format!("write `{what}: true` for a part the design cannot change")),
                );
                None
            }
        }
    }

    pub(super) fn valued_part(
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
            let v = self.quantity(n, place)?;
            self.plausible(n, kind, v);
            Some(v)
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

    pub(super) fn role(&mut self, node: &Node) -> Option<CapacitorRole> {
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

    pub(super) fn device_part(
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

    pub(super) fn model_ref(&mut self, node: &Node, kind: &str, models: &[Model]) -> Option<usize> {
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

    /// Warns about a part value far outside what amplifier stages use, where a prefix is the
    /// likely slip: a resistor under 10 mΩ (`1m` for `1M`), a capacitor of 0.1 F or more
    /// (`10 F` for `10 µF`). A warning, not an error: such parts exist, rarely.
    pub(super) fn plausible(&mut self, node: &Node, kind: &str, value: f64) {
        let text = self.show(node);
        let (what, help) = match kind {
            "resistor" if value < 0.01 => {
                let upper = text.replacen('m', "M", 1);
                let help = if upper != text {
                    format!("`m` is milli; did you mean `{upper}` (mega)?")
                } else {
                    "check the value and its prefix".to_string()
                };
                (
                    format!("{}, far below any resistor in an amplifier stage", si(value, "Ω", 3)),
                    help,
                )
            }
            "capacitor" if value >= 0.1 => (
                format!("{}, far above any capacitor in a signal path", si(value, "F", 3)),
                format!("did you mean `{} µF`?", plain(value, 4)),
            ),
            _ => return,
        };
        self.push(
            Diagnostic::warning("implausible_value", format!("`{text}` is {what}"))
                .at(node.span, "unusual for this part")
                .help(help),
        );
    }
}
