//! `tauweave diff OLD NEW`: what changed between two revisions of a design — parts and
//! models first, then what moved in the results, with requirements whose status changed
//! called out at the top.
//!
//! Each side is a design file (analysed here) or a results.json from an earlier render.
//! Part and model changes need design files on both sides.

use std::fmt::Write as _;
use std::path::{Path, PathBuf};

use clap::Args;
use serde_json::Value;

use crate::cli::render::{Format, build};
use crate::cli::source::load_file;
use crate::cli::{Failure, Outcome};
use crate::design::{Design, PartKind, Toleranced};
use crate::notation::{plain, si};
use crate::report::template::{BUILT_IN, BUILT_IN_NAME, TemplateSource};

/// Flags of `tauweave diff`.
#[derive(Debug, Args)]
pub struct DiffArgs {
    /// The earlier revision: a design file or a results.json.
    pub old: PathBuf,
    /// The later revision: a design file or a results.json.
    pub new: PathBuf,
    /// Monte Carlo runs for designs analysed here (default: each design's own).
    #[arg(long)]
    pub runs: Option<u32>,
}

struct Side {
    design: Option<Design>,
    results: Value,
}

fn side(path: &Path, runs: Option<u32>) -> Result<Side, Failure> {
    if path.extension().is_some_and(|e| e == "json") {
        let text = std::fs::read_to_string(path).map_err(|e| {
            Failure::Input(format!("error: cannot read `{}`: {e}\n", path.display()))
        })?;
        let results = serde_json::from_str(&text).map_err(|e| {
            Failure::Input(format!(
                "error: `{}` is not a results.json: {e}\n  help: give a design file or the results.json of a render\n",
                path.display()
            ))
        })?;
        return Ok(Side { design: None, results });
    }
    let file = load_file(path)?;
    let template = TemplateSource { name: BUILT_IN_NAME.into(), text: BUILT_IN.into() };
    let (_, files) = build(&file, &template, true, Format::Json, runs)?;
    let json = files
        .iter()
        .find(|f| f.path == "results.json")
        .map(|f| f.bytes.clone())
        .unwrap_or_default();
    let results = serde_json::from_slice(&json).map_err(|e| Failure::Internal(e.to_string()))?;
    Ok(Side { design: file.loaded.design, results })
}

fn value_text(v: &Toleranced, unit: &str) -> String {
    let tol =
        v.tolerance.map_or(String::new(), |t| format!(" ±{} %", plain(t.fraction * 100.0, 3)));
    format!("{}{tol}", si(v.nominal, unit, 4))
}

fn part_summary(k: &PartKind, d: &Design) -> String {
    match k {
        PartKind::Resistor { between, value } => {
            format!("resistor {} {}", value_text(value, "Ω"), between.join("–"))
        }
        PartKind::Capacitor { between, value, .. } => {
            format!("capacitor {} {}", value_text(value, "F"), between.join("–"))
        }
        PartKind::Inductor { between, value } => {
            format!("inductor {} {}", value_text(value, "H"), between.join("–"))
        }
        PartKind::Transconductance { between, value, .. } => {
            format!("transconductance {} {}", value_text(value, "S"), between.join("→"))
        }
        PartKind::VoltageAmplifier { between, value, .. } => {
            format!("voltage amplifier {} V/V {}", plain(value.nominal, 4), between.join("–"))
        }
        PartKind::Bjt { c, b, e, model } => {
            format!("bjt {} c {c} b {b} e {e}", d.models[*model].name)
        }
        PartKind::Mosfet { d: dr, g, s, model } => {
            format!("mosfet {} d {dr} g {g} s {s}", d.models[*model].name)
        }
    }
}

fn parts_diff(old: &Design, new: &Design, out: &mut String) -> usize {
    let mut n = 0;
    for p in &new.parts {
        match old.parts.iter().find(|q| q.name == p.name) {
            None => {
                let _ = writeln!(out, "  + {}  {}", p.name, part_summary(&p.kind, new));
                n += 1;
            }
            Some(q) => {
                let (a, b) = (part_summary(&q.kind, old), part_summary(&p.kind, new));
                if a != b {
                    let _ = writeln!(out, "  ~ {}  {a}  →  {b}", p.name);
                    n += 1;
                }
            }
        }
    }
    for q in &old.parts {
        if !new.parts.iter().any(|p| p.name == q.name) {
            let _ = writeln!(out, "  − {}  {}", q.name, part_summary(&q.kind, old));
            n += 1;
        }
    }
    for m in &new.models {
        match old.models.iter().find(|o| o.name == m.name) {
            None => {
                let _ = writeln!(out, "  + model {}", m.name);
                n += 1;
            }
            Some(o) => {
                let (a, b) = (
                    serde_json::to_value(&o.device).unwrap_or_default(),
                    serde_json::to_value(&m.device).unwrap_or_default(),
                );
                let mut diffs = Vec::new();
                crate::report::manifest::json_differences(
                    &a,
                    &b,
                    &format!("model {}", m.name),
                    &mut diffs,
                );
                for d in diffs {
                    let _ = writeln!(out, "  ~ {d}");
                    n += 1;
                }
            }
        }
    }
    for o in &old.models {
        if !new.models.iter().any(|m| m.name == o.name) {
            let _ = writeln!(out, "  − model {}", o.name);
            n += 1;
        }
    }
    n
}

/// The figures a reviewer follows, by JSON pointer, with their unit.
fn figures(v: &Value) -> Vec<(String, String, &'static str)> {
    let mut out = vec![
        ("mid-band gain".to_string(), "/midband/gain".to_string(), ""),
        ("R_in".into(), "/midband/input_resistance_ohm".into(), "Ω"),
        ("R_out".into(), "/midband/output_resistance_ohm".into(), "Ω"),
        ("f_H exact".into(), "/high/f3db_hz".into(), "Hz"),
        ("f_H time-constant estimate".into(), "/high/octc/f_estimate_hz".into(), "Hz"),
        ("f_L exact".into(), "/low/f3db_hz".into(), "Hz"),
        ("f_L time-constant estimate".into(), "/low/sctc/f_estimate_hz".into(), "Hz"),
        ("yield, all requirements".into(), "/tolerance/monte_carlo/yield_all".into(), "%"),
    ];
    if let Some(nodes) = v.pointer("/operating_point/nodes").and_then(Value::as_object) {
        for k in nodes.keys().filter(|k| !k.contains('.') && *k != "source") {
            out.push((format!("V({k})"), format!("/operating_point/nodes/{k}"), "V"));
        }
    }
    if let Some(devs) = v.pointer("/operating_point/devices").and_then(Value::as_array) {
        for (i, d) in devs.iter().enumerate() {
            let part = d["part"].as_str().unwrap_or("?");
            let key = if d.get("ic_a").is_some() { "ic_a" } else { "id_a" };
            out.push((
                format!("{part} bias current"),
                format!("/operating_point/devices/{i}/{key}"),
                "A",
            ));
        }
    }
    for (side, list) in [("high", "octc"), ("low", "sctc")] {
        if let Some(caps) = v.pointer(&format!("/{side}/{list}/caps")).and_then(Value::as_array) {
            for (i, c) in caps.iter().enumerate() {
                let part = c["part"].as_str().unwrap_or("?");
                out.push((format!("τ {part}"), format!("/{side}/{list}/caps/{i}/tau_s"), "s"));
            }
        }
    }
    if let Some(p) = v.pointer("/poles").and_then(Value::as_array) {
        for i in 0..p.len() {
            out.push((format!("pole {}", i + 1), format!("/poles/{i}/re_hz"), "Hz"));
        }
    }
    out
}

fn show(v: f64, unit: &str) -> String {
    match unit {
        "%" => format!("{} %", plain(v * 100.0, 4)),
        "" => plain(v, 4),
        u => si(v, u, 4),
    }
}

/// Runs the diff.
pub fn run(args: &DiffArgs) -> Result<Outcome, Failure> {
    let old = side(&args.old, args.runs)?;
    let new = side(&args.new, args.runs)?;
    let mut out = String::new();
    let _ = writeln!(out, "{} → {}", args.old.display(), args.new.display());

    // Requirements whose status changed come first.
    let reqs = |v: &Value| -> Vec<(String, bool)> {
        v["requirements"].as_array().map_or_else(Vec::new, |a| {
            a.iter()
                .map(|r| {
                    (
                        r["name"].as_str().unwrap_or("?").to_string(),
                        r["pass"].as_bool().unwrap_or(false),
                    )
                })
                .collect()
        })
    };
    let (ro, rn) = (reqs(&old.results), reqs(&new.results));
    let mut flips = Vec::new();
    for (name, pass) in &rn {
        match ro.iter().find(|(n, _)| n == name) {
            Some((_, was)) if was != pass => flips.push(format!(
                "  {}: {} → {}",
                name.replace('_', " "),
                if *was { "pass" } else { "FAIL" },
                if *pass { "pass" } else { "FAIL" }
            )),
            None => flips.push(format!(
                "  {}: new requirement, {}",
                name.replace('_', " "),
                if *pass { "pass" } else { "FAIL" }
            )),
            _ => {}
        }
    }
    if !flips.is_empty() {
        let _ = writeln!(out, "\nrequirements that changed status");
        for f in &flips {
            let _ = writeln!(out, "{f}");
        }
    }

    match (&old.design, &new.design) {
        (Some(a), Some(b)) => {
            let _ = writeln!(out, "\nparts and models");
            if parts_diff(a, b, &mut out) == 0 {
                let _ = writeln!(out, "  no part or model changed");
            }
        }
        _ => {
            let _ = writeln!(out, "\nparts and models: not compared (one side is a results.json)");
        }
    }

    let _ = writeln!(out, "\nwhat moved");
    let mut rows = Vec::new();
    for (label, pointer, unit) in figures(&new.results) {
        let (a, b) = (
            old.results.pointer(&pointer).and_then(Value::as_f64),
            new.results.pointer(&pointer).and_then(Value::as_f64),
        );
        match (a, b) {
            (Some(a), Some(b)) if a != b => {
                // b/a − 1: the change of the magnitude, whatever the sign of the value.
                let rel = if a != 0.0 {
                    format!("{:+.3} %", (b / a - 1.0) * 100.0).replace('-', "−")
                } else {
                    String::new()
                };
                rows.push(vec![label, show(a, unit), show(b, unit), rel]);
            }
            (None, Some(b)) => rows.push(vec![label, "—".into(), show(b, unit), String::new()]),
            (Some(a), None) => rows.push(vec![label, show(a, unit), "—".into(), String::new()]),
            _ => {}
        }
    }
    if rows.is_empty() {
        let _ = writeln!(out, "  nothing");
    } else {
        use crate::cli::table::{Align, render};
        out.push_str(&render(
            2,
            &[
                ("", Align::Left),
                ("old", Align::Right),
                ("new", Align::Right),
                ("change", Align::Right),
            ],
            &rows,
        ));
    }
    print!("{out}");
    Ok(if flips.iter().any(|f| f.ends_with("FAIL")) { Outcome::Failing } else { Outcome::Done })
}
