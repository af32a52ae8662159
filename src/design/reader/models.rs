//! Device models: bipolar and MOSFET parameters (the toleranced ones listed in
//! `design/toleranced.rs`), junctions, transit time or transition frequency, unused models.

use super::*;

impl Reader<'_> {
    pub(super) fn models(&mut self, _key: &Key, node: &Node) -> Vec<Model> {
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

    pub(super) fn model(&mut self, key: &Key, node: &Node) -> Option<DeviceModel> {
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

    pub(super) fn param_at(
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

    pub(super) fn required_param(
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

    pub(super) fn bipolar(
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
        let plain =
            |r: &mut Self, f: &mut Fields, key: &'static str, place: Place, default: f64| {
                r.param_at(f, name, key, place).map_or(default, |t| t.nominal)
            };
        let reference_temperature_k =
            plain(self, f, "reference_temperature", TEMPERATURE, REFERENCE_TEMPERATURE_K);
        let saturation_current_exponent =
            plain(self, f, "saturation_current_exponent", EXPONENT, 3.0);
        let band_gap_v =
            plain(self, f, "band_gap_voltage", Place { positive: true, ..VOLTAGE }, 1.11);
        let beta_exponent = plain(self, f, "beta_exponent", EXPONENT, 1.5);
        let flicker_corner_hz =
            self.param_at(f, name, "flicker_corner", FREQUENCY).map(|t| t.nominal);
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
            reference_temperature_k,
            saturation_current_exponent,
            band_gap_v,
            beta_exponent,
            flicker_corner_hz,
        })
    }

    pub(super) fn negative_param(&mut self, model: &str, key: &str) {
        let span = self.places.get(&format!("models.{model}.{key}")).copied().unwrap_or_default();
        self.push(
            Diagnostic::error("not_positive", format!("`{key}` of model `{model}` is negative"))
                .at(span, "must not be negative")
                .help("give zero or a positive value"),
        );
    }

    pub(super) fn transition_frequency(
        &mut self,
        model: &str,
        key: &Key,
        node: &Node,
    ) -> Option<TransitSpec> {
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

    pub(super) fn junction(
        &mut self,
        model: &str,
        which: &str,
        key: &Key,
        node: &Node,
    ) -> Option<Junction> {
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

    pub(super) fn mos(
        &mut self,
        f: &mut Fields,
        name: &str,
        key: &Key,
        nmos: bool,
    ) -> Option<MosModel> {
        let kp_dim = Dim::AMPERE.per(Dim::VOLT.powi(2));
        let kp = self.required_param(
            f,
            name,
            "process_transconductance",
            Place {
                what: "a process transconductance",
                dim: kp_dim,
                positive: true,
                decibels: Decibels::Refused,
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
                    decibels: Decibels::Refused,
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
                decibels: Decibels::Refused,
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
                decibels: Decibels::Refused,
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
        let reference_temperature_k = self
            .param_at(f, name, "reference_temperature", TEMPERATURE)
            .map_or(REFERENCE_TEMPERATURE_K, |t| t.nominal);
        let drift = Place {
            what: "a temperature drift",
            dim: Dim::VOLT.per(Dim::KELVIN),
            positive: false,
            decibels: Decibels::Refused,
        };
        let threshold_drift_v_per_k =
            self.param_at(f, name, "threshold_drift", drift).map_or(-2e-3, |t| t.nominal);
        let mobility_exponent =
            self.param_at(f, name, "mobility_exponent", EXPONENT).map_or(-1.5, |t| t.nominal);
        let flicker_corner_hz =
            self.param_at(f, name, "flicker_corner", FREQUENCY).map(|t| t.nominal);
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
            reference_temperature_k,
            threshold_drift_v_per_k,
            mobility_exponent,
            flicker_corner_hz,
        })
    }

    pub(super) fn unused_models(&mut self, root: &Node, models: &[Model], parts: &[Part]) {
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
}
