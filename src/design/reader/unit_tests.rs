//! Unit tests of the reader, by section of the format: each reads a small design through
//! [`read`](super::read) and checks the values or the diagnostics that come back.

pub(crate) mod testing {
    use super::super::{Read, read};
    use crate::design::diagnostic::Diagnostic;
    use crate::design::types::{Design, PartKind, Toleranced};
    use crate::design::yaml;

    /// A design with the given parts (one `NAME: {…}` each) and further top-level
    /// sections: the signal at `in` through 50 Ω, the output at `in`.
    pub(crate) fn design_text(parts: &[&str], rest: &str) -> String {
        let parts: String = parts.iter().map(|p| format!("  {p}\n")).collect();
        format!(
            "tauweave: 1\n\
             design: {{id: t, title: T, revision: A, date: 2026-01-01}}\n\
             signal: {{at: in, resistance: 50 Ω}}\n\
             output: {{at: in}}\n\
             parts:\n{parts}{rest}"
        )
    }

    /// Reads `text` as the loader does (without the topology checks).
    pub(crate) fn read_text(text: &str) -> Read {
        let root = yaml::parse(text).expect("the test's YAML parses");
        read(text, &root)
    }

    /// The design of a text that must read without errors.
    pub(crate) fn read_clean(text: &str) -> Design {
        let read = read_text(text);
        let errors = only_errors(&read);
        assert!(errors.is_empty(), "{errors:#?}\n{text}");
        read.design.expect("a design")
    }

    /// The errors found, in order of discovery.
    pub(crate) fn only_errors(read: &Read) -> Vec<&Diagnostic> {
        read.diagnostics.iter().filter(|d| d.is_error()).collect()
    }

    /// The one error a text must give.
    pub(crate) fn the_error(text: &str) -> Diagnostic {
        let read = read_text(text);
        let errors = only_errors(&read);
        assert_eq!(errors.len(), 1, "{errors:#?}\n{text}");
        errors[0].clone()
    }

    /// The value of a valued part.
    pub(crate) fn value_of(design: &Design, name: &str) -> Toleranced {
        let part = design.parts.iter().find(|p| p.name == name).expect("the part");
        match &part.kind {
            PartKind::Resistor { value, .. }
            | PartKind::Capacitor { value, .. }
            | PartKind::Inductor { value, .. }
            | PartKind::Transconductance { value, .. }
            | PartKind::VoltageAmplifier { value, .. } => *value,
            _ => panic!("`{name}` has no value"),
        }
    }

    /// `a` and `b` agree to 1e-12 relative.
    pub(crate) fn close(a: f64, b: f64) -> bool {
        (a - b).abs() <= 1e-12 * b.abs()
    }
}

mod values {
    use super::testing::*;
    use crate::design::types::Distribution;

    const R1: &str = "R1: {kind: resistor, value: 1k, between: [in, gnd]}";

    #[test]
    fn iec_60062_codes_read_as_their_values() {
        // IEC 60062 letter-and-digit codes: the letter stands for the decimal point and the
        // prefix (common practice on schematics and parts lists).
        let d = read_clean(&design_text(
            &[
                "R1: {kind: resistor, value: 4k7, between: [in, a]}",
                "C1: {kind: capacitor, value: 100n, between: [a, gnd]}",
                "R2: {kind: resistor, value: 4R7, between: [a, gnd]}",
            ],
            "",
        ));
        assert!(close(value_of(&d, "R1").nominal, 4700.0));
        assert!(close(value_of(&d, "C1").nominal, 100e-9));
        assert!(close(value_of(&d, "R2").nominal, 4.7));
    }

    #[test]
    fn a_tolerance_in_percent_is_a_fraction() {
        let d = read_clean(&design_text(
            &["R1: {kind: resistor, value: 1k, between: [in, gnd], tolerance: 5 %}"],
            "",
        ));
        let t = value_of(&d, "R1").tolerance.expect("a tolerance");
        assert!(close(t.fraction, 0.05));
        assert!(!t.absolute);
        assert_eq!(t.distribution, Distribution::Uniform);
    }

    #[test]
    fn an_absolute_tolerance_is_a_fraction_of_the_value() {
        let d = read_clean(&design_text(
            &["C1: {kind: capacitor, value: 1.5 pF, between: [in, gnd], tolerance: ±0.25 pF}", R1],
            "",
        ));
        let t = value_of(&d, "C1").tolerance.expect("a tolerance");
        assert!(close(t.fraction, 0.25 / 1.5));
        assert!(t.absolute);
    }

    #[test]
    fn default_tolerances_apply_to_parts_without_one() {
        let parts = [
            "R1: {kind: resistor, value: 1k, between: [in, a]}",
            "R2: {kind: resistor, value: 1k, between: [a, gnd], tolerance: 5 %}",
            "C1: {kind: capacitor, value: 1n, between: [a, gnd]}",
        ];
        let given = "tolerances: {resistor: 2 %, \
                     capacitor: {tolerance: 20 %, distribution: gaussian}}\n";
        let d = read_clean(&design_text(&parts, given));
        let r1 = value_of(&d, "R1").tolerance.expect("the default");
        assert!(close(r1.fraction, 0.02));
        assert_eq!(r1.distribution, Distribution::Uniform);
        assert!(close(value_of(&d, "R2").tolerance.expect("its own").fraction, 0.05));
        let c1 = value_of(&d, "C1").tolerance.expect("the default");
        assert!(close(c1.fraction, 0.20));
        assert_eq!(c1.distribution, Distribution::Gaussian);

        // Without a `tolerances` section the built-in ones hold: 1 % for resistors, 10 %
        // for capacitors, none for supplies.
        let d = read_clean(&design_text(&parts, "supplies: {vcc: 12 V}\n"));
        assert!(close(value_of(&d, "R1").tolerance.expect("built in").fraction, 0.01));
        assert!(close(value_of(&d, "C1").tolerance.expect("built in").fraction, 0.10));
        assert_eq!(d.supplies[0].voltage.tolerance, None);
    }

    #[test]
    fn a_tolerance_without_a_unit_or_out_of_range_is_refused() {
        let with_tolerance = |t: &str| {
            let part =
                format!("R1: {{kind: resistor, value: 1k, between: [in, gnd], tolerance: {t}}}");
            design_text(&[&part], "")
        };
        let e = the_error(&with_tolerance("5"));
        assert_eq!(e.code, "tolerance");
        assert_eq!(e.message, "tolerance `5` has no unit");
        let e = the_error(&with_tolerance("150 %"));
        assert_eq!(e.code, "tolerance");
        assert!(e.message.contains("is 150 % of the value"), "{}", e.message);
        let e = the_error(&with_tolerance("2 V"));
        assert_eq!(e.message, "tolerance `2 V` is not in the unit of a resistance");
    }

    #[test]
    fn a_value_in_the_wrong_unit_names_the_unit_needed() {
        let e = the_error(&design_text(
            &["R1: {kind: resistor, value: 10 pF, between: [in, gnd]}"],
            "",
        ));
        assert_eq!(e.code, "unit");
        assert_eq!(e.message, "`10 pF` is in F, but a resistance is needed here");
        assert_eq!(e.label, "needs Ω");
    }

    #[test]
    fn a_default_tolerance_must_be_a_percentage() {
        let e = the_error(&design_text(&[R1], "tolerances: {capacitor: 1 pF}\n"));
        assert_eq!(e.code, "tolerance");
        assert_eq!(e.message, "a default tolerance must be a percentage; `1 pF` is not");
    }
}

mod meta {
    use super::testing::*;

    fn with_design(design: &str, rest: &str) -> String {
        design_text(&["R1: {kind: resistor, value: 1k, between: [in, gnd]}"], rest)
            .replace("design: {id: t, title: T, revision: A, date: 2026-01-01}", design)
    }

    #[test]
    fn the_design_section_reads() {
        let d = read_clean(&with_design(
            "design: {id: rx-1.b, title: ' A title ', revision: 3, date: 2024-02-29, \
             author: N. N.}",
            "",
        ));
        assert_eq!(d.meta.id, "rx-1.b");
        assert_eq!(d.meta.title, "A title");
        assert_eq!(d.meta.revision, "3");
        assert_eq!(d.meta.date, "2024-02-29", "2024 is a leap year");
        assert_eq!(d.meta.author.as_deref(), Some("N. N."));
        assert_eq!(d.meta.purpose, None);
    }

    #[test]
    fn a_date_that_is_not_on_the_calendar_is_refused() {
        let e =
            the_error(&with_design("design: {id: t, title: T, revision: A, date: 2026-02-29}", ""));
        assert_eq!(e.code, "date");
        assert_eq!(e.message, "`2026-02-29` is not a date in YYYY-MM-DD form");
    }

    #[test]
    fn an_id_that_cannot_name_a_folder_is_refused() {
        let e = the_error(&with_design(
            "design: {id: my stage, title: T, revision: A, date: 2026-01-01}",
            "",
        ));
        assert_eq!(e.code, "name");
        assert_eq!(e.message, "the id `my stage` can't name an output folder");
    }

    #[test]
    fn the_temperature_reads_in_kelvin_or_celsius() {
        let with_temperature = |t: &str| {
            design_text(
                &["R1: {kind: resistor, value: 1k, between: [in, gnd]}"],
                &format!("environment: {{temperature: {t}}}\n"),
            )
        };
        assert!(close(read_clean(&with_temperature("85 °C")).temperature_k, 358.15));
        assert_eq!(read_clean(&with_temperature("330 K")).temperature_k, 330.0);
        let e = the_error(&with_temperature("2000 K"));
        assert_eq!(e.code, "out_of_range");
        assert_eq!(e.message, "the temperature is outside 1 K … 1000 K");
    }
}

mod params {
    use super::testing::*;

    #[test]
    fn params_evaluate_in_dependency_order_with_units() {
        let d = read_clean(&design_text(
            &["C1: {kind: capacitor, value: cable_c, between: [in, gnd]}"],
            "params: {cable_c: cable_length * c_per_m, cable_length: 2.5 m, \
             c_per_m: 100 pF/m}\n",
        ));
        assert!(close(value_of(&d, "C1").nominal, 250e-12));
        let c = &d.params[0];
        assert_eq!((c.name.as_str(), c.unit.as_str()), ("cable_c", "F"));
        assert!(close(c.value, 250e-12));
        assert_eq!(c.written, "cable_length * c_per_m");
    }

    #[test]
    fn a_loop_of_params_is_one_error_and_its_uses_stay_quiet() {
        let e = the_error(&design_text(
            &["R1: {kind: resistor, value: a, between: [in, gnd]}"],
            "params:\n  a: b * 2\n  b: a\n",
        ));
        assert_eq!(e.code, "param_cycle");
        assert_eq!(e.message, "params depend on each other in a loop: a → b → a");
    }

    #[test]
    fn an_unused_param_is_a_warning() {
        let read = read_text(&design_text(
            &["R1: {kind: resistor, value: 1k, between: [in, gnd]}"],
            "params:\n  spare: 3\n",
        ));
        assert!(only_errors(&read).is_empty());
        let codes: Vec<&str> = read.diagnostics.iter().map(|d| d.code).collect();
        assert_eq!(codes, ["unused_param"]);
    }
}

mod circuit {
    use super::testing::*;
    use crate::design::types::{CapacitorRole, PartKind};

    const R1: &str = "R1: {kind: resistor, value: 1k, between: [in, gnd]}";

    #[test]
    fn an_unknown_part_key_suggests_the_nearest() {
        let e = the_error(&design_text(
            &["R1: {kind: resistor, value: 1k, between: [in, gnd], tolerence: 5 %}"],
            "",
        ));
        assert_eq!(e.code, "unknown_key");
        assert_eq!(e.message, "unknown key `tolerence` in a resistor `R1`");
        assert_eq!(e.help.as_deref(), Some("did you mean `tolerance`?"));
    }

    #[test]
    fn an_unknown_kind_suggests_the_nearest() {
        let e =
            the_error(&design_text(&["R1: {kind: resistr, value: 1k, between: [in, gnd]}"], ""));
        assert_eq!(e.code, "unknown_kind");
        assert_eq!(e.message, "`resistr` is not a kind of part");
        assert_eq!(e.help.as_deref(), Some("did you mean `resistor`?"));
    }

    #[test]
    fn two_parts_with_one_designator_are_reported() {
        let e = the_error(&design_text(
            &[R1, "R1: {kind: resistor, value: 2k, between: [in, gnd]}"],
            "",
        ));
        assert_eq!(e.code, "duplicate_part");
        assert_eq!(e.message, "two parts are called `R1`");
        assert_eq!(e.span.line, 7);
    }

    #[test]
    fn the_output_load_becomes_parts_with_default_tolerances() {
        let text = design_text(&[R1], "").replace(
            "output: {at: in}",
            "output: {at: in, load_resistance: 10k, load_capacitance: 22 pF}",
        );
        let d = read_clean(&text);
        let names: Vec<&str> = d.parts.iter().map(|p| p.name.as_str()).collect();
        assert_eq!(names, ["R1", "load.r", "load.c"]);
        assert!(close(value_of(&d, "load.r").nominal, 10e3));
        assert!(close(value_of(&d, "load.r").tolerance.expect("1 %").fraction, 0.01));
        assert!(close(value_of(&d, "load.c").nominal, 22e-12));
        assert!(matches!(
            d.parts[2].kind,
            PartKind::Capacitor { role: Some(CapacitorRole::Load), .. }
        ));
    }

    #[test]
    fn supplies_read_as_a_voltage_or_a_mapping() {
        let d = read_clean(&design_text(
            &[R1],
            "supplies: {vcc: 12 V, \
             vee: {voltage: -5 V, tolerance: 2 %, distribution: gaussian}}\n",
        ));
        assert_eq!(d.supplies.len(), 2);
        assert_eq!((d.supplies[0].node.as_str(), d.supplies[0].voltage.nominal), ("vcc", 12.0));
        assert_eq!(d.supplies[1].voltage.nominal, -5.0);
        assert!(close(d.supplies[1].voltage.tolerance.expect("2 %").fraction, 0.02));
        let e = the_error(&design_text(&[R1], "supplies: {gnd: 5 V}\n"));
        assert_eq!((e.code, e.message.as_str()), ("name", "a supply cannot sit on `gnd`"));
    }
}

mod models {
    use super::testing::*;
    use crate::design::types::{DeviceModel, PartKind};

    const Q1: &str = "Q1: {kind: bjt, model: QN, c: in, b: in, e: gnd}";

    /// The design with one model `QN` of the given fields (flow style).
    fn with_model(fields: &str) -> String {
        design_text(&[Q1], &format!("models:\n  QN: {{{fields}}}\n"))
    }

    #[test]
    fn a_bipolar_model_reads_with_its_defaults() {
        let d = read_clean(&with_model(
            "type: npn, beta: 100, saturation_current: 1 fA, \
             emitter_junction: {capacitance: 1 pF}",
        ));
        let DeviceModel::Bipolar(b) = &d.models[0].device else { panic!("bipolar") };
        assert_eq!(b.beta.nominal, 100.0);
        assert!(close(b.saturation_current.nominal, 1e-15));
        assert_eq!(b.beta_reverse, 1.0);
        assert_eq!(b.base_resistance.nominal, 0.0);
        assert!(b.early_voltage.is_none() && b.transit.is_none());
        let j = b.emitter_junction.expect("a junction");
        assert!(close(j.capacitance.nominal, 1e-12));
        assert_eq!((j.potential, j.grading), (0.75, 0.33));
        assert!(matches!(d.parts[0].kind, PartKind::Bjt { model: 0, .. }));
    }

    #[test]
    fn a_model_type_typo_suggests_the_nearest() {
        let e = the_error(&with_model("type: npm, beta: 100, saturation_current: 1 fA"));
        assert_eq!(e.code, "unknown_kind");
        assert_eq!(e.message, "model `QN` has type `npm`, which tauweave does not know");
        assert_eq!(e.help.as_deref(), Some("did you mean `npn`?"));
    }

    #[test]
    fn transit_time_and_transition_frequency_exclude_each_other() {
        let text = with_model(
            "type: npn, beta: 100, saturation_current: 1 fA, transit_time: 20 ps, \
             transition_frequency: {frequency: 6 GHz, collector_current: 10 mA}",
        );
        let e = the_error(&text);
        assert_eq!(e.code, "out_of_range");
        assert_eq!(e.message, "model `QN` gives both `transit_time` and `transition_frequency`");
        assert_eq!(&text[e.span.offset..e.span.offset + e.span.len], "20 ps");
    }

    #[test]
    fn a_missing_required_parameter_is_named() {
        let e = the_error(&with_model("type: npn, beta: 100"));
        assert_eq!(e.code, "missing_key");
        assert_eq!(e.message, "model `QN` needs `saturation_current`");
    }

    #[test]
    fn an_unused_model_is_a_warning() {
        let read = read_text(&design_text(
            &["R1: {kind: resistor, value: 1k, between: [in, gnd]}"],
            "models:\n  QN: {type: npn, beta: 100, saturation_current: 1 fA}\n",
        ));
        assert!(only_errors(&read).is_empty());
        let codes: Vec<&str> = read.diagnostics.iter().map(|d| d.code).collect();
        assert_eq!(codes, ["unused_model"]);
    }
}

mod requirements {
    use super::testing::*;
    use crate::design::types::AnalysisSettings;

    const R1: &str = "R1: {kind: resistor, value: 1k, between: [in, gnd]}";

    #[test]
    fn limits_read_with_decibels_as_ratios() {
        let d = read_clean(&design_text(
            &[R1],
            "requirements: {midband_gain: {min: 20 dB, max: 30 V/V}, \
             upper_cutoff: {min: 1 MHz}}\n",
        ));
        let gain = d.requirements.midband_gain.expect("a gain limit");
        assert!(close(gain.min.expect("min"), 10.0), "20 dB is 10 V/V");
        assert_eq!(gain.max, Some(30.0));
        assert_eq!(d.requirements.upper_cutoff.expect("a limit").min, Some(1e6));
        assert_eq!(d.requirements.count(), 2);
    }

    /// A stated band turns `gain_flatness` on; the flatness is written and kept in dB.
    fn with_band(rest: &str) -> String {
        design_text(&[R1], rest).replace(
            "signal: {at: in, resistance: 50 Ω}",
            "signal: {at: in, resistance: 50 Ω, band: {from: 150 kHz, to: 500 kHz}}",
        )
    }

    #[test]
    fn a_band_and_a_flatness_in_db_read() {
        let d = read_clean(&with_band("requirements: {gain_flatness: {max: 1 dB}}\n"));
        let band = d.signal.band.expect("a band");
        assert_eq!((band.from_hz, band.to_hz), (150e3, 500e3));
        assert_eq!(d.requirements.gain_flatness.expect("a limit").max, Some(1.0));
    }

    #[test]
    fn a_flatness_without_a_band_is_refused() {
        let e = the_error(&design_text(&[R1], "requirements: {gain_flatness: {max: 1 dB}}\n"));
        assert_eq!(e.code, "missing_band");
    }

    #[test]
    fn a_flatness_not_in_db_is_refused() {
        let e = the_error(&with_band("requirements: {gain_flatness: {max: 1.1}}\n"));
        assert_eq!(e.code, "unit");
        assert!(e.message.contains("written in dB"), "{}", e.message);
    }

    #[test]
    fn a_band_that_ends_below_its_start_is_refused() {
        let text = with_band("").replace("from: 150 kHz, to: 500 kHz", "from: 5 MHz, to: 500 kHz");
        assert_eq!(the_error(&text).code, "band");
    }

    #[test]
    fn a_min_above_its_max_is_refused() {
        let e = the_error(&design_text(
            &[R1],
            "requirements: {lower_cutoff: {min: 2 kHz, max: 1 kHz}}\n",
        ));
        assert_eq!(e.code, "limits");
        assert_eq!(e.message, "requirement `lower_cutoff` has its min above its max");
    }

    #[test]
    fn analysis_settings_default_and_are_checked() {
        let d = read_clean(&design_text(&[R1], ""));
        let defaults = AnalysisSettings::defaults();
        assert_eq!(d.analysis.points_per_decade, defaults.points_per_decade);
        assert_eq!(d.analysis.monte_carlo_runs, defaults.monte_carlo_runs);
        let d = read_clean(&design_text(
            &[R1],
            "analysis: {sweep: {start: 10 Hz, stop: 1 MHz, points_per_decade: 20}, \
             monte_carlo: {runs: 500, seed: 7}}\n",
        ));
        assert_eq!((d.analysis.sweep_start_hz, d.analysis.sweep_stop_hz), (10.0, 1e6));
        assert_eq!((d.analysis.points_per_decade, d.analysis.monte_carlo_runs), (20, 500));
        assert_eq!(d.analysis.seed, 7);
        let e = the_error(&design_text(&[R1], "analysis: {sweep: {points_per_decade: 0}}\n"));
        assert_eq!(e.code, "out_of_range");
        assert_eq!(e.message, "`points_per_decade` must lie between 1 and 1000");
        let e = the_error(&design_text(&[R1], "analysis: {sweep: {start: 1 kHz, stop: 5 kHz}}\n"));
        assert_eq!(e.message, "the sweep must span at least one decade");
    }
}

mod top {
    use super::testing::*;

    const R1: &[&str] = &["R1: {kind: resistor, value: 1k, between: [in, gnd]}"];

    #[test]
    fn a_minimal_design_reads() {
        let d = read_clean(&design_text(R1, ""));
        assert_eq!(d.meta.id, "t");
        assert_eq!(d.parts.len(), 1);
        assert_eq!((d.signal.positive.as_str(), d.signal.negative.as_str()), ("in", "gnd"));
        assert_eq!(d.signal.resistance.nominal, 50.0);
        assert_eq!(d.temperature_k, 300.15, "27 °C when no environment is given");
    }

    #[test]
    fn an_unknown_top_level_key_suggests_the_nearest() {
        let text = design_text(R1, "requirments: {midband_gain: {min: 10}}\n");
        let e = the_error(&text);
        assert_eq!(e.code, "unknown_key");
        assert_eq!(e.message, "unknown key `requirments` in the design file");
        assert_eq!(e.help.as_deref(), Some("did you mean `requirements`?"));
        assert_eq!((e.span.line, e.span.column), (7, 1));
        assert!(e.render("x.yaml", &text, false).contains("tauweave::unknown_key"));
    }

    #[test]
    fn a_repeated_key_is_reported_at_its_second_place() {
        let text =
            design_text(&["R1: {kind: resistor, value: 4k7, value: 10k, between: [in, gnd]}"], "");
        let e = the_error(&text);
        assert_eq!(e.code, "duplicate_key");
        assert_eq!(e.message, "`value` is written twice");
        assert_eq!((e.span.line, e.span.column), (6, 36));
        assert_eq!(e.related.len(), 1);
        assert_eq!((e.related[0].0.line, e.related[0].0.column), (6, 24));
    }

    #[test]
    fn a_second_signal_is_a_second_source_not_a_repeated_key() {
        let text = design_text(R1, "signal: {at: in, resistance: 75 Ω}\n");
        let e = the_error(&text);
        assert_eq!(e.code, "second_signal");
        assert_eq!(e.span.line, 7);
    }

    #[test]
    fn an_empty_file_says_so() {
        let e = the_error("");
        assert_eq!(e.code, "missing_key");
        assert_eq!(e.message, "the design file is empty");
    }

    #[test]
    fn missing_sections_are_each_reported() {
        let read =
            read_text("tauweave: 1\ndesign: {id: t, title: T, revision: A, date: 2026-01-01}\n");
        let codes: Vec<&str> = only_errors(&read).iter().map(|d| d.code).collect();
        assert_eq!(codes, ["missing_signal", "missing_output", "missing_key"]);
        assert!(read.design.is_none());
    }
}
