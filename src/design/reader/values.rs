//! Values: quantities with units checked against their place, tolerances and distributions,
//! and the default tolerances per part kind.

use super::*;

impl Reader<'_> {
    pub(super) fn quantity_error(&mut self, node: &Node, text: &str, e: quantity::QuantityError) {
        let span = if self.written_plainly(node, text) {
            node.span.narrow(self.text, e.offset, e.len)
        } else {
            node.span
        };
        let code = if e.unknown_name { "unknown_param" } else { "quantity" };
        let mut d = Diagnostic::error(code, format!("`{}`: {}", excerpt(text), e.message))
            .at(span, e.message.clone());
        if let Some(h) = e.help {
            d = d.help(h);
        }
        self.push(d);
    }

    /// True when the node's text appears in the file exactly as parsed (not quoted or
    /// folded), so offsets inside it map to columns.
    pub(super) fn written_plainly(&self, node: &Node, text: &str) -> bool {
        let end = (node.span.offset + node.span.len).min(self.text.len());
        self.text.get(node.span.offset..end).is_some_and(|s| s.trim_end() == text)
    }

    /// Evaluates a quantity at a place: unit check, dB conversion, sign check.
    pub(super) fn quantity(&mut self, node: &Node, place: Place) -> Option<f64> {
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

    pub(super) fn fit(&mut self, node: &Node, text: &str, v: Value, place: Place) -> Option<f64> {
        match v.mark {
            Mark::Decibel if place.decibels == Decibels::Ratio => {
                return Some(10f64.powf(v.si / 20.0));
            }
            Mark::Decibel if place.decibels == Decibels::Figure => return Some(v.si),
            _ if place.decibels == Decibels::Figure => {
                self.push(
                    Diagnostic::error("unit", format!("`{text}`: {} is written in dB", place.what))
                        .at(node.span, "no dB here")
                        .help(format!("e.g. `{}`", example(place))),
                );
                return None;
            }
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
            Mark::Percent if place.takes_percent() => return Some(v.si),
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
    pub(super) fn toleranced(
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

    pub(super) fn tolerance(
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

    pub(super) fn distribution(&mut self, node: &Node) -> Option<Distribution> {
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

    pub(super) fn defaults(&mut self, entry: Option<(&Key, &Node)>) -> Defaults {
        let mut out: Defaults = BTreeMap::new();
        let builtin =
            |fraction| Tolerance { fraction, distribution: Distribution::Uniform, absolute: false };
        out.insert("resistor", builtin(0.01));
        out.insert("capacitor", builtin(0.10));
        out.insert("inductor", builtin(0.10));
        // A project's house defaults come under the design's own.
        if let Some(p) = self.project {
            out.extend(p.tolerances.iter().map(|(k, t)| (*k, *t)));
        }
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
}

/// `text` as a message quotes it: whole when short, else its first 40 characters and `…`.
fn excerpt(text: &str) -> String {
    if text.chars().count() <= 60 {
        text.to_string()
    } else {
        format!("{}…", text.chars().take(40).collect::<String>())
    }
}
