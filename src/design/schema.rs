//! A JSON Schema (draft 2020-12) of the design format, for editors that complete and check
//! YAML files against a schema.
//!
//! Built from the same key lists the reader accepts, so the two cannot drift apart. A
//! quantity is a number or a string (its unit and range are checked by `tauweave check`,
//! which knows far more than a schema can say). No I/O.

use serde_json::{Map, Value, json};

use crate::design::reader::*;

fn quantity(description: &str) -> Value {
    json!({
        "description": description,
        "anyOf": [{"type": "number"}, {"type": "string", "minLength": 1}]
    })
}

fn text(description: &str) -> Value {
    json!({"type": "string", "description": description})
}

fn node(description: &str) -> Value {
    json!({"description": description, "anyOf": [
        {"type": "string", "pattern": "^[A-Za-z0-9_]+$"},
        {"type": "integer", "minimum": 0}
    ]})
}

fn node_pair(description: &str) -> Value {
    json!({"description": description, "type": "array", "items": node("a node"), "minItems": 2, "maxItems": 2})
}

fn node_or_pair(description: &str) -> Value {
    json!({"description": description, "anyOf": [node("a node"), node_pair("[p, n]")]})
}

fn enumeration(description: &str, values: &[&str]) -> Value {
    json!({"description": description, "enum": values})
}

fn object(keys: &[&str], required: &[&str], property: impl Fn(&str) -> Value) -> Value {
    let mut props = Map::new();
    for &k in keys {
        props.insert(k.to_string(), property(k));
    }
    json!({"type": "object", "properties": props, "required": required, "additionalProperties": false})
}

fn toleranced(description: &str) -> Value {
    json!({"description": description, "anyOf": [
        {"type": "number"},
        {"type": "string", "minLength": 1},
        object(TOLERANCED_KEYS, &["value"], |k| match k {
            "distribution" => enumeration("uniform, or gaussian with σ = tolerance/3", DISTRIBUTIONS),
            "tolerance" => quantity("5 % or an absolute amount"),
            _ => quantity("nominal value"),
        })
    ]})
}

fn part(kind: &str) -> Value {
    let (keys, required): (&[&str], Vec<&str>) = match kind {
        "resistor" => (RESISTOR_KEYS, vec!["kind", "value", "between"]),
        "inductor" => (TWO_TERMINAL_KEYS, vec!["kind", "value", "between"]),
        "capacitor" => (CAPACITOR_KEYS, vec!["kind", "value", "between"]),
        "transconductance" | "voltage_amplifier" => {
            (CONTROLLED_KEYS, vec!["kind", "value", "between", "control"])
        }
        "bjt" => (BJT_KEYS, vec!["kind", "model", "c", "b", "e"]),
        _ => (MOSFET_KEYS, vec!["kind", "model", "d", "g", "s"]),
    };
    let mut schema = object(keys, &required, |k| match k {
        "kind" => json!({"const": kind}),
        "value" => quantity("the part's value (Ω, F, H, S or V/V)"),
        "between" => node_pair("the two terminals"),
        "control" => node_pair("controlling node pair [p, n]"),
        "role" => enumeration("which time-constant set the capacitor joins", ROLES),
        "tolerance" => quantity("5 % or an absolute amount"),
        "distribution" => enumeration("uniform, or gaussian with σ = tolerance/3", DISTRIBUTIONS),
        "model" => text("name of an entry in `models`"),
        "note" => text("free text for the part list"),
        "rating" => quantity(if kind == "resistor" {
            "power rating (W), checked against the dissipation at the operating point"
        } else {
            "voltage rating (V), checked against the DC voltage at the operating point"
        }),
        "fixed" => {
            json!({"type": "boolean", "description": "true for a part the design cannot change (a cable, the next stage's input): the review never advises changing it"})
        }
        _ => node("terminal node"),
    });
    schema["description"] = json!(format!("a {kind}"));
    schema
}

fn junction() -> Value {
    object(JUNCTION_KEYS, &["capacitance"], |k| match k {
        "capacitance" => toleranced("zero-bias capacitance"),
        "potential" => quantity("built-in potential (V), default 0.75 V"),
        _ => quantity("grading exponent m, default 0.33"),
    })
}

fn model(types: &[&str]) -> Value {
    let bipolar = types.contains(&"npn");
    let keys = if bipolar { BIPOLAR_KEYS } else { MOS_KEYS };
    let required: &[&str] = if bipolar {
        &["type", "beta", "saturation_current"]
    } else {
        &["type", "process_transconductance", "width", "length", "threshold"]
    };
    object(keys, required, |k| match k {
        "type" => enumeration("polarity", types),
        "emitter_junction" | "collector_junction" => junction(),
        "transition_frequency" => object(FT_KEYS, FT_KEYS, |k| match k {
            "frequency" => toleranced("f_T"),
            _ => quantity("the collector current f_T was measured at"),
        }),
        "reference_temperature" => {
            quantity("the temperature the parameters hold at, default 27 °C")
        }
        "saturation_current_exponent" => quantity("η of I_S ∝ T^η·exp(−E_g/kT), default 3"),
        "band_gap_voltage" => quantity("E_g/q of the I_S temperature law, default 1.11 V"),
        "beta_exponent" => quantity("x of β ∝ T^x, default 1.5"),
        "threshold_drift" => quantity("dV_th/dT of an n-channel device, default −2 mV/K"),
        "mobility_exponent" => quantity("x of k′ ∝ T^x, default −1.5"),
        _ => toleranced(k),
    })
}

fn limits(description: &str) -> Value {
    let mut v = object(LIMIT_KEYS, &[], |k| {
        quantity(if k == "min" { "lowest allowed" } else { "highest allowed" })
    });
    v["description"] = json!(description);
    v["minProperties"] = json!(1);
    v
}

/// The `requirements` section; `include` (project requirement sets) only in a design.
fn requirements(with_include: bool) -> Value {
    let keys = if with_include { REQUIREMENT_SECTION_KEYS } else { REQUIREMENT_KEYS };
    object(keys, &[], |k| match k {
        "include" => json!({"type": "array", "items": {"type": "string"},
            "description": "requirement sets of the project file, by name (the design's own requirements win)"}),
        _ => limits(k),
    })
}

fn tolerance_default() -> Value {
    json!({"anyOf": [
        quantity("a percentage, e.g. 5 %"),
        object(DEFAULT_TOLERANCE_KEYS, &["tolerance"], |k| match k {
            "tolerance" => quantity("a percentage"),
            _ => enumeration("uniform, or gaussian with σ = tolerance/3", DISTRIBUTIONS),
        })
    ]})
}

/// The schema of the project file (`tauweave-project.yaml`) as a JSON value.
pub fn project_schema() -> Value {
    let mut schema = object(PROJECT_KEYS, &["tauweave"], |k| match k {
        "tauweave" => json!({"const": 1, "description": "format version"}),
        "organisation" => text("the organisation named in every review's title block"),
        "document_number" => {
            json!({"type": "string", "description": "document number pattern; {id}, {revision}, {date} and {year} are filled in",
                "pattern": "^([^{}]|\\{(id|revision|date|year)\\})*$"})
        }
        "approvals" => json!({"type": "array", "items": object(APPROVAL_KEYS, &["role"], |k| {
            text(if k == "role" { "Designed, Checked, Approved…" } else { "the person; leave out to sign by hand" })
        })}),
        "logo" => {
            json!({"type": "string", "pattern": "^[^/].*\\.([sS][vV][gG]|[pP][nN][gG])$", "description": "a logo (.svg or .png) relative to the project file"})
        }
        "template" => {
            json!({"type": "string", "pattern": "^[^/].*\\.md$", "description": "the default review template, relative to the project file"})
        }
        "paper" => enumeration("the default paper of the PDF", PAPERS),
        "tolerances" => object(TOLERANCE_KINDS, &[], |_| tolerance_default()),
        _ => {
            json!({"type": "object", "description": "requirement sets by name, included by designs",
            "additionalProperties": requirements(false)})
        }
    });
    let obj = schema.as_object_mut().expect("object");
    obj.insert("$schema".into(), json!("https://json-schema.org/draft/2020-12/schema"));
    obj.insert("$id".into(), json!("https://tauweave.invalid/project-file-1.json"));
    obj.insert("title".into(), json!("tauweave project file, format 1"));
    schema
}

/// The schema as a JSON value.
pub fn design_schema() -> Value {
    let tolerance_default = tolerance_default();
    let supply = json!({"anyOf": [
        quantity("DC voltage to gnd"),
        object(SUPPLY_KEYS, &["voltage"], |k| match k {
            "voltage" => quantity("DC voltage to gnd"),
            "tolerance" => quantity("5 % or an absolute amount"),
            _ => enumeration("uniform, or gaussian with σ = tolerance/3", DISTRIBUTIONS),
        })
    ]});
    let parts = json!({
        "type": "object",
        "description": "the circuit, keyed by reference designator",
        "propertyNames": {"pattern": "^[A-Za-z][A-Za-z0-9_]*$"},
        "additionalProperties": {"oneOf": PART_KINDS.iter().map(|k| part(k)).collect::<Vec<_>>()}
    });
    let models = json!({
        "type": "object",
        "description": "device models shared by name",
        "additionalProperties": {"oneOf": [model(&["npn", "pnp"]), model(&["nmos", "pmos"])]}
    });
    let mut schema = object(TOP_KEYS, &["tauweave", "design", "signal", "output", "parts"], |k| {
        match k {
            "tauweave" => json!({"const": 1, "description": "format version"}),
            "design" => object(META_KEYS, &["id", "title", "revision", "date"], |k| match k {
                "id" => json!({"type": "string", "pattern": "^[A-Za-z0-9][A-Za-z0-9._-]*$"}),
                "date" => json!({"type": "string", "pattern": "^[0-9]{4}-[0-9]{2}-[0-9]{2}$"}),
                "revision" => json!({"anyOf": [{"type": "string"}, {"type": "number"}]}),
                "schematic" => {
                    json!({"type": "string", "pattern": "^[^/].*\\.([sS][vV][gG]|[pP][nN][gG])$", "description": "a schematic drawing (.svg or .png) relative to the design file"})
                }
                _ => text(k),
            }),
            "environment" => object(ENVIRONMENT_KEYS, &[], |k| match k {
                "mains_powered" => {
                    json!({"type": "boolean", "description": "true when the stage is built into mains-powered equipment (the safety caution then applies)"})
                }
                _ => quantity("junction temperature, K or °C"),
            }),
            "params" => {
                json!({"type": "object", "additionalProperties": quantity("a quantity or an expression over params"),
                               "propertyNames": {"pattern": "^[A-Za-z][A-Za-z0-9_]*$"}})
            }
            "supplies" => json!({"type": "object", "additionalProperties": supply}),
            "signal" => object(SIGNAL_KEYS, &["at", "resistance"], |k| match k {
                "at" => node_or_pair("node the source drives"),
                "band" => object(BAND_KEYS, BAND_KEYS, |k| {
                    quantity(if k == "from" {
                        "lower edge of the operating band"
                    } else {
                        "upper edge of the operating band"
                    })
                }),
                _ => quantity("series resistance of the source"),
            }),
            "output" => object(OUTPUT_KEYS, &["at"], |k| match k {
                "at" => node_or_pair("output node, or [p, n]"),
                _ => quantity(k),
            }),
            "tolerances" => object(TOLERANCE_KINDS, &[], |_| tolerance_default.clone()),
            "parts" => parts.clone(),
            "models" => models.clone(),
            "requirements" => requirements(true),
            "analysis" => object(ANALYSIS_KEYS, &[], |k| match k {
                "sweep" => object(SWEEP_KEYS, &[], |k| match k {
                    "points_per_decade" => {
                        json!({"type": "integer", "minimum": 1, "maximum": 1000})
                    }
                    _ => quantity(k),
                }),
                "derating" => object(DERATING_KEYS, &[], |_| {
                    quantity("the fraction of the rating to stay under, e.g. 50 %")
                }),
                "reference_impedance" => {
                    quantity("reference impedance of the scattering parameters, e.g. 75 ohm")
                }
                "settling_band" => {
                    quantity("band the step response settles within, e.g. 1 % (default 1 %)")
                }
                _ => object(MONTE_CARLO_KEYS, &[], |k| match k {
                    "min_yield" => quantity(
                        "the Monte Carlo yield each requirement must reach, e.g. 99 % (CI reports fail below it)",
                    ),
                    _ => json!({"type": "integer", "minimum": 0}),
                }),
            }),
            "what_if" => object(WHAT_IF_KEYS, &[], |k| match k {
                "tolerance_corners" => {
                    json!({"type": "boolean", "description": "at each operating corner, also the worst tolerance corner of every limited requirement"})
                }
                "corners" => json!({
                    "type": "object",
                    "description": "operating ranges: `temperature` or a supply's node, each {from, to}",
                    "additionalProperties": object(RANGE_KEYS, &["from", "to"], |k| quantity(if k == "from" { "the low end" } else { "the high end" }))
                }),
                "sweeps" => {
                    json!({"type": "array", "items": object(SWEEP_SPEC_KEYS, &["vary"], |k| match k {
                        "vary" => text("a param, a part's designator, `temperature` or a supply's node"),
                        "points" => json!({"type": "integer", "minimum": 2, "maximum": 200}),
                        "spacing" => enumeration("how the points are spread between from and to", &["linear", "log"]),
                        "values" => json!({"type": "array", "items": quantity("a value in the quantity's unit")}),
                        _ => quantity(k),
                    })})
                }
                _ => {
                    json!({"type": "array", "items": object(LIMIT_SPEC_KEYS, &["vary", "keeping"], |k| match k {
                        "vary" => text("a param, a part's designator, `temperature` or a supply's node"),
                        "keeping" => enumeration("the requirement that must keep passing", REQUIREMENT_KEYS),
                        "precision" => quantity("relative precision of the answer, e.g. 0.1 %"),
                        _ => quantity("how far to search from the nominal value"),
                    })})
                }
            }),
            _ => json!({}),
        }
    });
    let obj = schema.as_object_mut().expect("object");
    obj.insert("$schema".into(), json!("https://json-schema.org/draft/2020-12/schema"));
    obj.insert("$id".into(), json!("https://tauweave.invalid/design-format-1.json"));
    obj.insert("title".into(), json!("tauweave design file, format 1"));
    schema
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn every_reader_key_is_in_the_schema() {
        let s = design_schema();
        let top = s["properties"].as_object().unwrap();
        assert_eq!(top.len(), TOP_KEYS.len());
        let parts = &s["properties"]["parts"]["additionalProperties"]["oneOf"];
        assert_eq!(parts.as_array().unwrap().len(), PART_KINDS.len());
        let cap = &parts[1]["properties"];
        for k in CAPACITOR_KEYS {
            assert!(cap.get(*k).is_some(), "{k}");
        }
    }
}
