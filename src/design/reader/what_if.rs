//! The `what_if` section: sweeps of a param, a part value, the temperature or a supply, and
//! limits (how far one can go before a requirement stops passing), each checked against the
//! quantity's own unit.

use super::*;

/// The most points a sweep may have.
pub const MAX_SWEEP_SPEC_POINTS: u64 = 200;
/// The relative precision of a limit when the design states none (0.1 %).
pub const DEFAULT_LIMIT_PRECISION: f64 = 1e-3;

/// A quantity a what-if names, resolved: what it is, its unit and its nominal value.
struct Resolved {
    varied: Varied,
    dim: Dim,
    nominal: f64,
}

impl Reader<'_> {
    pub(super) fn what_if(
        &mut self,
        entry: Option<(&Key, &Node)>,
        parts: &[Part],
        supplies: &[Supply],
        requirements: &Requirements,
        temperature_k: f64,
    ) -> WhatIf {
        let mut out = WhatIf::default();
        let Some((key, node)) = entry else { return out };
        let Some(mut f) = Fields::open(
            node,
            "the `what_if` section",
            WHAT_IF_KEYS,
            key.span,
            &mut self.diagnostics,
        ) else {
            return out;
        };
        let ctx = Context { parts, supplies, requirements, temperature_k };
        if let Some((k, n)) = f.get_entry("corners") {
            out.corners = self.corner_ranges(k, n, &ctx);
        }
        if let Some(n) = f.get("tolerance_corners") {
            out.tolerance_corners = self.flag(n, "tolerance_corners").unwrap_or(false);
        }
        if let Some(n) = f.get("sweeps") {
            for item in self.items(n, "`what_if.sweeps`") {
                if let Some(s) = self.sweep_spec(item, &ctx) {
                    out.sweeps.push(s);
                }
            }
        }
        if let Some(n) = f.get("limits") {
            for item in self.items(n, "`what_if.limits`") {
                if let Some(l) = self.limit_spec(item, &ctx) {
                    out.limits.push(l);
                }
            }
        }
        f.finish(&mut self.diagnostics);
        out
    }

    /// `corners`: `temperature` and supply nodes, each `{from, to}` in its unit.
    fn corner_ranges(&mut self, key: &Key, node: &Node, ctx: &Context) -> Vec<Range> {
        let mut out = Vec::new();
        let NodeKind::Map(entries) = &node.kind else {
            self.push(
                Diagnostic::error("wrong_type", "`what_if.corners` must be a mapping")
                    .at(node.span, format!("found {}", node.shape()))
                    .help("write `temperature: {from: -20 °C, to: 60 °C}` or `vcc: {from: 10.8 V, to: 13.2 V}`"),
            );
            return out;
        };
        let _ = key;
        for (k, v) in entries {
            let name_node = Node { kind: NodeKind::Scalar(k.name.clone()), span: k.span };
            let Some(r) = self.varied(&name_node, ctx) else { continue };
            if !matches!(r.varied, Varied::Temperature | Varied::Supply(_)) {
                self.push(
                    Diagnostic::error("what_if", format!("`{}` has no operating range", k.name))
                        .at(k.span, "corners are of the temperature and the supplies")
                        .help("sweep a param or a part under `what_if.sweeps` instead"),
                );
                continue;
            }
            let Some(mut f) = Fields::open(
                v,
                format!("the range of `{}`", k.name),
                RANGE_KEYS,
                k.span,
                &mut self.diagnostics,
            ) else {
                continue;
            };
            let from = f.require("from", &mut self.diagnostics);
            let to = f.require("to", &mut self.diagnostics);
            f.finish(&mut self.diagnostics);
            let (Some(a), Some(b)) = (from, to) else { continue };
            let (Some(lo), Some(hi)) =
                (self.value_of(a, &r, &k.name), self.value_of(b, &r, &k.name))
            else {
                continue;
            };
            if lo >= hi {
                self.push(
                    Diagnostic::error(
                        "limits",
                        format!("the range of `{}` runs backwards or is empty", k.name),
                    )
                    .at(a.span, "`from` is not below `to`")
                    .help("write the low end as `from` and the high end as `to`"),
                );
                continue;
            }
            out.push(Range { varied: r.varied, name: k.name.clone(), ends: [lo, hi] });
        }
        out
    }

    /// The entries of a list, or an error when `node` is not one.
    fn items<'n>(&mut self, node: &'n Node, what: &str) -> Vec<&'n Node> {
        match &node.kind {
            NodeKind::Seq(items) => items.iter().collect(),
            _ => {
                self.push(
                    Diagnostic::error("wrong_type", format!("{what} must be a list"))
                        .at(node.span, format!("found {}", node.shape()))
                        .help("write one `- {vary: …}` entry per line"),
                );
                Vec::new()
            }
        }
    }

    /// The quantity `node` names.
    fn varied(&mut self, node: &Node, ctx: &Context) -> Option<Resolved> {
        let Some(name) = node.scalar() else {
            self.push(
                Diagnostic::error("wrong_type", "`vary` names one quantity")
                    .at(node.span, format!("found {}", node.shape()))
                    .help("a param, a part's designator, `temperature` or a supply's node"),
            );
            return None;
        };
        if let Some(v) = self.params.get(name) {
            return Some(Resolved {
                varied: Varied::Param(name.to_string()),
                dim: v.dim.unwrap_or(Dim::NONE),
                nominal: v.si,
            });
        }
        if name == "temperature" {
            return Some(Resolved {
                varied: Varied::Temperature,
                dim: Dim::KELVIN,
                nominal: ctx.temperature_k,
            });
        }
        if let Some(s) = ctx.supplies.iter().find(|s| s.node == name) {
            return Some(Resolved {
                varied: Varied::Supply(name.to_string()),
                dim: Dim::VOLT,
                nominal: s.voltage.nominal,
            });
        }
        if let Some(p) = ctx.parts.iter().find(|p| p.name == name) {
            let (value, dim) = match &p.kind {
                PartKind::Resistor { value, .. } => (value, Dim::OHM),
                PartKind::Capacitor { value, .. } => (value, Dim::FARAD),
                PartKind::Inductor { value, .. } => (value, Dim::HENRY),
                PartKind::Transconductance { value, .. } => (value, Dim::SIEMENS),
                PartKind::VoltageAmplifier { value, .. } => (value, Dim::NONE),
                _ => {
                    self.push(
                        Diagnostic::error("what_if", format!("`{name}` has no single value to vary"))
                            .at(node.span, "a transistor")
                            .help("vary one of its model's parameters through a param, or a part around it"),
                    );
                    return None;
                }
            };
            return Some(Resolved {
                varied: Varied::Part(name.to_string()),
                dim,
                nominal: value.nominal,
            });
        }
        let mut known: Vec<&str> = self.params.keys().map(String::as_str).collect();
        known.extend(ctx.parts.iter().map(|p| p.name.as_str()));
        known.extend(ctx.supplies.iter().map(|s| s.node.as_str()));
        known.push("temperature");
        let help = match nearest(name, &known) {
            Some(best) => format!("did you mean `{best}`?"),
            None => "name a param, a part's designator, `temperature` or a supply's node".into(),
        };
        self.push(
            Diagnostic::error(
                "unknown_name",
                format!("`{name}` is not something the design can vary"),
            )
            .at(node.span, "no param, part or supply of this name")
            .help(help),
        );
        None
    }

    /// A value of the quantity `r`, in its unit (a bare number is taken in it).
    fn value_of(&mut self, node: &Node, r: &Resolved, name: &str) -> Option<f64> {
        let text = node.scalar().unwrap_or("").to_string();
        let v = match quantity::evaluate(&text, &self.params) {
            Ok(v) => v,
            Err(e) => {
                self.quantity_error(node, &text, e);
                return None;
            }
        };
        let fits = match v.mark {
            Mark::Percent | Mark::Decibel => false,
            _ => v.dim.is_none_or(|d| d == r.dim),
        };
        if !fits {
            let unit =
                if r.dim == Dim::NONE { "a pure number".to_string() } else { r.dim.symbol() };
            self.push(
                Diagnostic::error("unit", format!("`{text}` is not in the unit of `{name}`"))
                    .at(node.span, "wrong unit here")
                    .help(format!("`{name}` is in {unit}; write the value in it")),
            );
            return None;
        }
        Some(v.si)
    }

    fn sweep_spec(&mut self, node: &Node, ctx: &Context) -> Option<SweepSpec> {
        let mut f =
            Fields::open(node, "a sweep", SWEEP_SPEC_KEYS, node.span, &mut self.diagnostics)?;
        let vary = f.require("vary", &mut self.diagnostics);
        let r = vary.and_then(|n| self.varied(n, ctx));
        let name = vary.and_then(Node::scalar).unwrap_or("").to_string();
        let (from, to, points, spacing, values) =
            (f.get("from"), f.get("to"), f.get("points"), f.get("spacing"), f.get("values"));
        f.finish(&mut self.diagnostics);
        let r = r?;
        let log = match spacing.map(|n| n.scalar().unwrap_or("")) {
            None | Some("linear") => false,
            Some("log") => true,
            Some(other) => {
                self.push(
                    Diagnostic::error(
                        "what_if",
                        format!("spacing `{other}` is not one tauweave knows"),
                    )
                    .at(spacing.map_or(node.span, |n| n.span), "`linear` or `log`")
                    .help("write `spacing: log` for values evenly spread in ratio"),
                );
                return None;
            }
        };
        let values = match (values, from, to) {
            (Some(list), None, None) => {
                let items = self.items(list, "`values`");
                let mut out = Vec::new();
                for item in items {
                    out.push(self.value_of(item, &r, &name)?);
                }
                if out.is_empty() {
                    self.push(
                        Diagnostic::error("what_if", "a sweep needs at least one value")
                            .at(list.span, "empty list")
                            .help("list the values to try, e.g. `values: [1 m, 2 m, 5 m]`"),
                    );
                    return None;
                }
                out
            }
            (None, Some(a), Some(b)) => {
                let lo = self.value_of(a, &r, &name)?;
                let hi = self.value_of(b, &r, &name)?;
                let n = match points {
                    Some(p) => self.integer(p, 2, MAX_SWEEP_SPEC_POINTS, "`points`")? as usize,
                    None => 11,
                };
                if log && (lo <= 0.0 || hi <= 0.0) {
                    self.push(
                        Diagnostic::error("what_if", "a log sweep cannot reach zero or cross it")
                            .at(if lo <= 0.0 { a.span } else { b.span }, "not above zero")
                            .help("start a log sweep above zero, or write `spacing: linear`"),
                    );
                    return None;
                }
                (0..n)
                    .map(|k| {
                        let t = k as f64 / (n - 1) as f64;
                        if k == n - 1 {
                            hi
                        } else if log {
                            lo * (hi / lo).powf(t)
                        } else {
                            lo + (hi - lo) * t
                        }
                    })
                    .collect()
            }
            _ => {
                self.push(
                    Diagnostic::error("what_if", "a sweep needs `from` and `to`, or `values`")
                        .at(node.span, "which values?")
                        .help("e.g. `{vary: cable_length, from: 1 m, to: 20 m, points: 20}`"),
                );
                return None;
            }
        };
        Some(SweepSpec { varied: r.varied, name, unit: unit_of(r.dim), values, log })
    }

    fn limit_spec(&mut self, node: &Node, ctx: &Context) -> Option<LimitSpec> {
        let mut f =
            Fields::open(node, "a limit", LIMIT_SPEC_KEYS, node.span, &mut self.diagnostics)?;
        let vary = f.require("vary", &mut self.diagnostics);
        let r = vary.and_then(|n| self.varied(n, ctx));
        let name = vary.and_then(Node::scalar).unwrap_or("").to_string();
        let keeping = f.require("keeping", &mut self.diagnostics);
        let (up, down, precision) = (f.get("up_to"), f.get("down_to"), f.get("precision"));
        f.finish(&mut self.diagnostics);
        let requirement = keeping.and_then(|k| self.kept_requirement(k, ctx.requirements));
        let r = r?;
        let (bound_node, upward) = match (up, down) {
            (Some(n), None) => (n, true),
            (None, Some(n)) => (n, false),
            _ => {
                self.push(
                    Diagnostic::error("what_if", "a limit needs one of `up_to` and `down_to`")
                        .at(node.span, "which way, and how far?")
                        .help("e.g. `{vary: cable_length, keeping: upper_cutoff, up_to: 50 m}`"),
                );
                return None;
            }
        };
        let bound = self.value_of(bound_node, &r, &name)?;
        if (upward && bound <= r.nominal) || (!upward && bound >= r.nominal) {
            let (key, side) = if upward { ("up_to", "above") } else { ("down_to", "below") };
            self.push(
                Diagnostic::error("what_if", format!("`{key}` must lie {side} the nominal value"))
                    .at(bound_node.span, format!("not {side} `{name}`'s nominal value"))
                    .help("the search runs from the nominal value toward this bound"),
            );
            return None;
        }
        let precision = match precision {
            Some(n) => {
                let v = self.unitless(n)?;
                if !(v > 0.0 && v <= 0.1) {
                    self.push(
                        Diagnostic::error("out_of_range", "`precision` is a fraction up to 10 %")
                            .at(n.span, "not between 0 and 10 %")
                            .help("e.g. `precision: 0.1 %`"),
                    );
                    return None;
                }
                v
            }
            None => DEFAULT_LIMIT_PRECISION,
        };
        Some(LimitSpec {
            varied: r.varied,
            name,
            unit: unit_of(r.dim),
            requirement: requirement?,
            bound,
            precision,
        })
    }

    /// The requirement `node` names, which the design must limit.
    fn kept_requirement(&mut self, node: &Node, req: &Requirements) -> Option<&'static str> {
        let written = node.scalar().unwrap_or("");
        let set: Vec<&'static str> =
            req.items().iter().filter(|(_, l)| l.is_some()).map(|(n, _)| *n).collect();
        if let Some(found) = set.iter().find(|n| **n == written) {
            return Some(found);
        }
        let help = match nearest(written, &set) {
            Some(best) => format!("did you mean `{best}`?"),
            None if set.is_empty() => {
                "the design limits no requirement; add one under `requirements:`".into()
            }
            None => format!("the design limits {}", list(&set)),
        };
        self.push(
            Diagnostic::error(
                "what_if",
                format!("`{written}` is not a requirement the design limits"),
            )
            .at(node.span, "keep which requirement passing?")
            .help(help),
        );
        None
    }
}

/// What a what-if entry may name.
struct Context<'a> {
    parts: &'a [Part],
    supplies: &'a [Supply],
    requirements: &'a Requirements,
    temperature_k: f64,
}

fn unit_of(d: Dim) -> String {
    if d == Dim::NONE { String::new() } else { d.symbol() }
}
