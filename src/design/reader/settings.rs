//! Requirements (limits on gain, cut-offs, port resistances, noise, signal handling, the
//! match and stability at the ports and the step response) and the analysis settings (sweep,
//! Monte Carlo runs and seed, derating, reference impedance, settling band).

use super::*;

/// The most points a sweep may have: 1000 a decade over 20 decades.
pub const MAX_SWEEP_POINTS: u32 = 20_000;

impl Reader<'_> {
    /// `has_band`, `has_amplitude`: whether the signal states an operating band and an
    /// amplitude (None when the signal section itself failed to read).
    pub(super) fn requirements(
        &mut self,
        entry: Option<(&Key, &Node)>,
        has_band: Option<bool>,
        has_amplitude: Option<bool>,
    ) -> Requirements {
        let mut out = Requirements::default();
        let Some((key, node)) = entry else { return out };
        let Some(mut f) = Fields::open(
            node,
            "the `requirements` section",
            REQUIREMENT_SECTION_KEYS,
            key.span,
            &mut self.diagnostics,
        ) else {
            return out;
        };
        for &name in REQUIREMENT_KEYS {
            let Some((k, n)) = f.get_entry(name) else { continue };
            let place = match name {
                "midband_gain" => GAIN_LIMIT,
                "gain_flatness" => FLATNESS,
                "upper_cutoff" | "lower_cutoff" => FREQUENCY,
                "noise_figure" => NOISE_FIGURE,
                "input_noise_density" => NOISE_DENSITY,
                "output_noise" => NOISE_VOLTAGE,
                "snr" => SNR,
                "supply_current" => CURRENT,
                "output_swing" | "input_compression" => PEAK_VOLTAGE,
                "thd" => DISTORTION,
                "input_return_loss" | "output_return_loss" => RETURN_LOSS,
                "stability" => STABILITY,
                "rise_time" | "group_delay_variation" => DURATION,
                "overshoot" => OVERSHOOT,
                _ => RESISTANCE,
            };
            let mut limits = self.limits(name, k, n, place);
            if name == "thd" || name == "overshoot" {
                // Read as a ratio (1 % or −40 dB is 0.01), kept in percent as reported.
                limits = limits.map(|l| Limits {
                    min: l.min.map(|v| 100.0 * v),
                    max: l.max.map(|v| 100.0 * v),
                });
            }
            if name == "gain_flatness" && has_band == Some(false) {
                self.push(
                    Diagnostic::error(
                        "missing_band",
                        "`gain_flatness` is measured over the operating band, and the design \
                         states none",
                    )
                    .at(k.span, "flatness over which band?")
                    .help("add `band: {from: 150 kHz, to: 500 kHz}` under `signal:`"),
                );
            }
            if name == "thd" && has_amplitude == Some(false) {
                self.push(
                    Diagnostic::error(
                        "missing_key",
                        "`thd` is the distortion at the stated signal amplitude, and the design \
                         states none",
                    )
                    .at(k.span, "distortion at which amplitude?")
                    .help("add `amplitude: 10 mV` (peak, at the source EMF) under `signal:`"),
                );
            }
            if name == "snr" && has_amplitude == Some(false) {
                self.push(
                    Diagnostic::error(
                        "missing_key",
                        "`snr` compares the signal with the noise, and the design states no \
                         signal amplitude",
                    )
                    .at(k.span, "the ratio of which signal?")
                    .help("add `amplitude: 10 mV` (peak, at the source EMF) under `signal:`"),
                );
            }
            out.set(name, limits);
        }
        if let Some((k, n)) = f.get_entry("include") {
            self.include_sets(k, n, &mut out, has_band, has_amplitude);
        }
        f.finish(&mut self.diagnostics);
        out
    }

    /// `include: [rf-input]`: the project file's requirement sets, each requirement taken
    /// unless the design states its own (the design's own wins).
    fn include_sets(
        &mut self,
        key: &Key,
        node: &Node,
        out: &mut Requirements,
        has_band: Option<bool>,
        has_amplitude: Option<bool>,
    ) {
        if self.in_project {
            self.push(
                Diagnostic::error("include", "a requirement set cannot include another")
                    .at(key.span, "here")
                    .help("write the requirements of the set out in full"),
            );
            return;
        }
        let names: Vec<&Node> = match &node.kind {
            NodeKind::Seq(items) => items.iter().collect(),
            NodeKind::Scalar(_) => vec![node],
            _ => {
                self.push(
                    Diagnostic::error("wrong_type", "`include` must name requirement sets")
                        .at(node.span, format!("found {}", node.shape()))
                        .help(
                            "write `include: [rf-input]` with the names of the project file's sets",
                        ),
                );
                return;
            }
        };
        let Some(project) = self.project else {
            self.push(
                Diagnostic::error(
                    "include",
                    format!(
                        "`include` names requirement sets of a project file, and none was found \
                         above the design ({})",
                        crate::design::project::FILE
                    ),
                )
                .at(key.span, "no project file")
                .help(format!(
                    "put a {} with `requirement_sets:` in the design's folder or above it, or \
                     write the requirements here",
                    crate::design::project::FILE
                )),
            );
            return;
        };
        let own: Vec<&str> =
            out.items().iter().filter(|(_, l)| l.is_some()).map(|(r, _)| *r).collect();
        for n in names {
            let name = n.scalar().unwrap_or("").trim().to_string();
            let Some(set) = project.requirement_sets.get(&name) else {
                let known: Vec<&str> =
                    project.requirement_sets.keys().map(String::as_str).collect();
                let help = match nearest(&name, &known) {
                    Some(k) => format!("did you mean `{k}`?"),
                    None if known.is_empty() => {
                        "the project file defines no requirement sets".into()
                    }
                    None => format!("the project file's sets are {}", list(&known)),
                };
                self.push(
                    Diagnostic::error(
                        "include",
                        format!("the project file has no requirement set `{name}`"),
                    )
                    .at(n.span, "unknown set")
                    .help(help),
                );
                continue;
            };
            for (requirement, limits) in set.items() {
                let Some(limits) = limits else { continue };
                if own.contains(&requirement) {
                    continue;
                }
                let needs = match requirement {
                    "gain_flatness" if has_band == Some(false) => {
                        Some("an operating band (`band:` under `signal:`)")
                    }
                    "thd" | "snr" if has_amplitude == Some(false) => {
                        Some("a signal amplitude (`amplitude:` under `signal:`)")
                    }
                    _ => None,
                };
                if let Some(needs) = needs {
                    self.push(
                        Diagnostic::error(
                            "include",
                            format!("the set `{name}` limits `{requirement}`, which needs {needs}, and the design states none"),
                        )
                        .at(n.span, "included here")
                        .help(format!("state {needs} in the design, or leave the set out")),
                    );
                    continue;
                }
                out.set(requirement, Some(limits));
            }
        }
    }

    pub(super) fn limits(
        &mut self,
        name: &str,
        key: &Key,
        node: &Node,
        place: Place,
    ) -> Option<Limits> {
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

    pub(super) fn analysis(&mut self, entry: Option<(&Key, &Node)>) -> Option<AnalysisSettings> {
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
                // log10 of each end, so a span of 300 decades cannot overflow on the way.
                let decades = out.sweep_stop_hz.log10() - out.sweep_start_hz.log10();
                let points = decades * f64::from(out.points_per_decade);
                if ok && points > MAX_SWEEP_POINTS as f64 {
                    self.push(
                        Diagnostic::error(
                            "out_of_range",
                            format!(
                                "the sweep would have {} points, more than the {MAX_SWEEP_POINTS} \
                                 allowed",
                                points.ceil()
                            ),
                        )
                        .at(
                            start_node.map_or(k.span, |n| n.span),
                            "too many decades at this density",
                        )
                        .help(
                            "sweep fewer decades (a stage's response fits in about 12) or fewer \
                               points a decade",
                        ),
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
                if let Some(n) = m.get("min_yield") {
                    match self.min_yield(n) {
                        Some(v) => out.min_yield = Some(v),
                        None => ok = false,
                    }
                }
                m.finish(&mut self.diagnostics);
            }
        }
        if let Some((k, n)) = f.get_entry("derating") {
            if let Some(mut d) =
                Fields::open(n, "`analysis.derating`", DERATING_KEYS, k.span, &mut self.diagnostics)
            {
                if let Some(n) = d.get("resistor_power") {
                    match self.fraction(n, "`resistor_power`") {
                        Some(v) => out.resistor_power_derating = v,
                        None => ok = false,
                    }
                }
                if let Some(n) = d.get("capacitor_voltage") {
                    match self.fraction(n, "`capacitor_voltage`") {
                        Some(v) => out.capacitor_voltage_derating = v,
                        None => ok = false,
                    }
                }
                d.finish(&mut self.diagnostics);
            }
        }
        if let Some(n) = f.get("reference_impedance") {
            match self.quantity(n, RESISTANCE) {
                Some(v) => out.reference_impedance_ohm = Some(v),
                None => ok = false,
            }
        }
        if let Some(n) = f.get("settling_band") {
            match self.settling_band(n) {
                Some(v) => out.settling_band = v,
                None => ok = false,
            }
        }
        f.finish(&mut self.diagnostics);
        ok.then_some(out)
    }

    /// The least Monte Carlo yield: a fraction in (0, 1], written as a percentage (`99 %`)
    /// or a plain number (`0.99`).
    fn min_yield(&mut self, node: &Node) -> Option<f64> {
        let value = self.unitless(node)?;
        if value > 0.0 && value <= 1.0 {
            return Some(value);
        }
        self.push(
            Diagnostic::error("out_of_range", "`min_yield` must be a fraction of the runs")
                .at(node.span, "not above 0 and up to 100 %")
                .help("give the share of Monte Carlo runs that must pass, e.g. `99 %`"),
        );
        None
    }

    /// The settling band of the step response: a fraction of the final value in (0, 50 %],
    /// written as a percentage (`0.1 %`) or a plain number (`0.001`).
    fn settling_band(&mut self, node: &Node) -> Option<f64> {
        let value = self.unitless(node)?;
        if value > 0.0 && value <= 0.5 {
            return Some(value);
        }
        self.push(
            Diagnostic::error(
                "out_of_range",
                "`settling_band` must be a fraction of the final value",
            )
            .at(node.span, "not above 0 and up to 50 %")
            .help("give the band the step must settle within, e.g. `1 %` or `0.1 %`"),
        );
        None
    }

    /// A number without a unit (`0.1 %` or `0.001`; NaN when a unit is written, for the caller's
    /// range check to refuse); None after reporting an unreadable value.
    pub(super) fn unitless(&mut self, node: &Node) -> Option<f64> {
        let text = node.scalar().unwrap_or("").to_string();
        match quantity::evaluate(&text, &self.params) {
            Ok(v) if v.dim.is_none_or(|d| d == Dim::NONE) => Some(v.si),
            Ok(_) => Some(f64::NAN),
            Err(e) => {
                self.quantity_error(node, &text, e);
                None
            }
        }
    }

    /// A fraction in (0, 1], written as a percentage (`50 %`) or a plain number (`0.5`).
    fn fraction(&mut self, node: &Node, what: &str) -> Option<f64> {
        let value = self.unitless(node)?;
        if value > 0.0 && value <= 1.0 {
            return Some(value);
        }
        self.push(
            Diagnostic::error("out_of_range", format!("{what} must be a fraction of the rating"))
                .at(node.span, "not between 0 and 100 %")
                .help("give the part of the rating to stay under, e.g. `50 %`"),
        );
        None
    }

    pub(super) fn integer(&mut self, node: &Node, lo: u64, hi: u64, what: &str) -> Option<u64> {
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
