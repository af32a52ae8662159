//! `tauweave check DESIGN`: validates a design file and prints a compact summary of it.
//!
//! Problems go to standard error with their place in the file; the summary goes to
//! standard output. Exit 0 when the design reads cleanly (warnings allowed), 2 when it has
//! errors.

use std::fmt::Write as _;
use std::path::PathBuf;

use clap::Args;

use crate::cli::source::{load_file, plural};
use crate::cli::{Failure, Outcome};
use crate::design::{Design, DeviceModel, Limits, PartKind};
use crate::notation::si;

/// Flags of `tauweave check`.
#[derive(Debug, Args)]
pub struct CheckArgs {
    /// The design file (YAML).
    pub design: PathBuf,
}

/// Runs the check.
pub fn run(args: &CheckArgs) -> Result<Outcome, Failure> {
    let file = load_file(&args.design)?;
    let design = file.design()?;
    eprint!("{}", file.report());
    print!("{}", summary(design, file.loaded.warnings()));
    Ok(Outcome::Done)
}

/// The summary block: identity, then one aligned row per aspect of the design.
pub fn summary(design: &Design, warnings: usize) -> String {
    let m = &design.meta;
    let mut out = String::new();
    let _ = writeln!(out, "{}  rev {}  ·  {}", m.id, m.revision, m.title);
    let mut byline = vec![m.date.clone()];
    if let Some(a) = &m.author {
        byline.push(a.clone());
    }
    byline.push(format!("{} °C", crate::notation::plain(design.temperature_k - 273.15, 4)));
    let _ = writeln!(out, "  {}", byline.join(" · "));
    let _ = writeln!(out);

    let mut rows: Vec<(&str, String, String)> = Vec::new();
    let user_parts: Vec<_> = design.parts.iter().filter(|p| !p.name.starts_with("load.")).collect();
    let mut kinds: Vec<(&str, usize)> = Vec::new();
    for p in &user_parts {
        let k = p.kind.name();
        match kinds.iter_mut().find(|(n, _)| *n == k) {
            Some((_, c)) => *c += 1,
            None => kinds.push((k, 1)),
        }
    }
    let kind_text: Vec<String> = kinds
        .iter()
        .map(|(k, c)| {
            let word = k.replace('_', " ");
            if *c == 1 { format!("1 {word}") } else { format!("{c} {}", plural_word(&word)) }
        })
        .collect();
    rows.push(("parts", user_parts.len().to_string(), kind_text.join(", ")));
    let nodes = design.nodes();
    rows.push(("nodes", nodes.len().to_string(), nodes.join(" ")));
    let models: Vec<String> = design
        .models
        .iter()
        .map(|m| {
            let ty = match &m.device {
                DeviceModel::Bipolar(b) => format!("{:?}", b.polarity).to_lowercase(),
                DeviceModel::Mos(x) => format!("{:?}", x.polarity).to_lowercase(),
            };
            format!("{} ({ty})", m.name)
        })
        .collect();
    rows.push(("models", models.len().to_string(), models.join(", ")));
    let supplies: Vec<String> = design
        .supplies
        .iter()
        .map(|s| format!("{} {}", s.node, si(s.voltage.nominal, "V", 4)))
        .collect();
    rows.push(("supplies", supplies.len().to_string(), supplies.join(", ")));
    let sig = &design.signal;
    let sig_at = if sig.negative == "gnd" {
        sig.positive.clone()
    } else {
        format!("{}−{}", sig.positive, sig.negative)
    };
    rows.push((
        "signal",
        String::new(),
        format!("{sig_at}, source resistance {}", si(sig.resistance.nominal, "Ω", 4)),
    ));
    let o = &design.output;
    let out_at = if o.negative == "gnd" {
        o.positive.clone()
    } else {
        format!("{}−{}", o.positive, o.negative)
    };
    let loads: Vec<String> = design
        .parts
        .iter()
        .filter(|p| p.name.starts_with("load."))
        .filter_map(|p| match &p.kind {
            PartKind::Resistor { value, .. } => Some(si(value.nominal, "Ω", 4)),
            PartKind::Capacitor { value, .. } => Some(si(value.nominal, "F", 4)),
            _ => None,
        })
        .collect();
    let load_text = if loads.is_empty() {
        "unloaded".to_string()
    } else {
        format!("load {}", loads.join(" ∥ "))
    };
    rows.push(("output", String::new(), format!("{out_at}, {load_text}")));
    if !design.params.is_empty() {
        let params: Vec<String> = design
            .params
            .iter()
            .map(|p| format!("{} = {}", p.name, si(p.value, &p.unit, 4)))
            .collect();
        rows.push(("params", params.len().to_string(), params.join(", ")));
    }
    let r = &design.requirements;
    let mut reqs = Vec::new();
    let mut add = |name: &str, l: &Option<Limits>, unit: &str, db: bool| {
        if let Some(l) = l {
            let show = |v: f64| {
                if db {
                    format!("{} dB", crate::notation::plain(20.0 * v.log10(), 3))
                } else {
                    si(v, unit, 4)
                }
            };
            let text = match (l.min, l.max) {
                (Some(a), Some(b)) => format!("{name} {} … {}", show(a), show(b)),
                (Some(a), None) => format!("{name} ≥ {}", show(a)),
                (None, Some(b)) => format!("{name} ≤ {}", show(b)),
                (None, None) => return,
            };
            reqs.push(text);
        }
    };
    add("|gain|", &r.midband_gain, "", true);
    add("f_high", &r.upper_cutoff, "Hz", false);
    add("f_low", &r.lower_cutoff, "Hz", false);
    add("R_in", &r.input_resistance, "Ω", false);
    add("R_out", &r.output_resistance, "Ω", false);
    rows.push(("requirements", reqs.len().to_string(), reqs.join(" · ")));

    let width = rows.iter().map(|(l, _, _)| l.len()).max().unwrap_or(0);
    for (label, count, text) in rows {
        let _ = writeln!(out, "  {label:<width$}  {count:>3}  {text}");
    }
    let _ = writeln!(out);
    let _ =
        writeln!(out, "  design reads cleanly: 0 errors, {warnings} warning{}", plural(warnings));
    out
}

fn plural_word(word: &str) -> String {
    match word {
        "bjt" => "bjts".into(),
        "mosfet" => "mosfets".into(),
        w if w.ends_with('s') => w.to_string(),
        w => format!("{w}s"),
    }
}
