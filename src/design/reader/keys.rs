//! Every key list of the design format, in the order the JSON Schema and the did-you-mean
//! suggestions use. Adding a key to the format starts here (DEVELOPERS.md).

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
    "what_if",
];
/// Keys of `what_if`.
pub const WHAT_IF_KEYS: &[&str] = &["corners", "tolerance_corners", "sweeps", "limits"];
/// Keys of one corner range.
pub const RANGE_KEYS: &[&str] = &["from", "to"];
/// Keys of one sweep.
pub const SWEEP_SPEC_KEYS: &[&str] = &["vary", "from", "to", "points", "spacing", "values"];
/// Keys of one limit.
pub const LIMIT_SPEC_KEYS: &[&str] = &["vary", "keeping", "up_to", "down_to", "precision"];
/// Keys of `design`.
pub const META_KEYS: &[&str] =
    &["id", "title", "revision", "date", "author", "purpose", "schematic"];
/// Keys of `environment`.
pub const ENVIRONMENT_KEYS: &[&str] = &["temperature", "mains_powered"];
/// Keys of `signal`.
pub const SIGNAL_KEYS: &[&str] =
    &["at", "resistance", "band", "amplitude", "amplitude_rms", "frequency"];
/// Keys of `signal.band`.
pub const BAND_KEYS: &[&str] = &["from", "to"];
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
/// Keys of an inductor.
pub const TWO_TERMINAL_KEYS: &[&str] =
    &["kind", "value", "between", "tolerance", "distribution", "note", "fixed"];
/// Keys of a resistor (`rating`: its power rating).
pub const RESISTOR_KEYS: &[&str] =
    &["kind", "value", "between", "tolerance", "distribution", "note", "fixed", "rating"];
/// Keys of a capacitor (`rating`: its voltage rating).
pub const CAPACITOR_KEYS: &[&str] =
    &["kind", "value", "between", "role", "tolerance", "distribution", "note", "fixed", "rating"];
/// Keys of a controlled source.
pub const CONTROLLED_KEYS: &[&str] =
    &["kind", "value", "between", "control", "tolerance", "distribution", "note", "fixed"];
/// Keys of a bjt part.
pub const BJT_KEYS: &[&str] = &["kind", "model", "c", "b", "e", "note", "fixed"];
/// Keys of a mosfet part.
pub const MOSFET_KEYS: &[&str] = &["kind", "model", "d", "g", "s", "note", "fixed"];
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
    "reference_temperature",
    "saturation_current_exponent",
    "band_gap_voltage",
    "beta_exponent",
    "flicker_corner",
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
    "reference_temperature",
    "threshold_drift",
    "mobility_exponent",
    "flicker_corner",
];
/// Keys of a junction.
pub const JUNCTION_KEYS: &[&str] = &["capacitance", "potential", "grading"];
/// Keys of `transition_frequency`.
pub const FT_KEYS: &[&str] = &["frequency", "collector_current"];
/// Keys of `requirements`.
pub const REQUIREMENT_KEYS: &[&str] = &[
    "midband_gain",
    "gain_flatness",
    "upper_cutoff",
    "lower_cutoff",
    "input_resistance",
    "output_resistance",
    "noise_figure",
    "input_noise_density",
    "output_noise",
    "snr",
    "supply_current",
    "output_swing",
    "thd",
    "input_compression",
    "input_return_loss",
    "output_return_loss",
    "stability",
    "rise_time",
    "overshoot",
    "group_delay_variation",
];
/// Keys of the `requirements` section: every requirement, and `include` (project sets).
pub const REQUIREMENT_SECTION_KEYS: &[&str] = &[
    "midband_gain",
    "gain_flatness",
    "upper_cutoff",
    "lower_cutoff",
    "input_resistance",
    "output_resistance",
    "noise_figure",
    "input_noise_density",
    "output_noise",
    "snr",
    "supply_current",
    "output_swing",
    "thd",
    "input_compression",
    "input_return_loss",
    "output_return_loss",
    "stability",
    "rise_time",
    "overshoot",
    "group_delay_variation",
    "include",
];
/// Keys of the project file (`tauweave-project.yaml`).
pub const PROJECT_KEYS: &[&str] = &[
    "tauweave",
    "organisation",
    "document_number",
    "approvals",
    "logo",
    "template",
    "paper",
    "tolerances",
    "requirement_sets",
];
/// Keys of one approval in the project file.
pub const APPROVAL_KEYS: &[&str] = &["role", "name"];
/// Papers a project file may name (typst's names, as `render --paper` takes them).
pub const PAPERS: &[&str] = &["a4", "us-letter"];
/// Keys of one requirement.
pub const LIMIT_KEYS: &[&str] = &["min", "max"];
/// Keys of `analysis`.
pub const ANALYSIS_KEYS: &[&str] =
    &["sweep", "monte_carlo", "derating", "reference_impedance", "settling_band"];
/// Keys of `analysis.derating`.
pub const DERATING_KEYS: &[&str] = &["resistor_power", "capacitor_voltage"];
/// Keys of `analysis.sweep`.
pub const SWEEP_KEYS: &[&str] = &["start", "stop", "points_per_decade"];
/// Keys of `analysis.monte_carlo`.
pub const MONTE_CARLO_KEYS: &[&str] = &["runs", "seed", "min_yield"];
/// Distributions.
pub const DISTRIBUTIONS: &[&str] = &["uniform", "gaussian"];
