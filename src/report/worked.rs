//! Worked calculations in a template: a designer's hand reasoning, written once as steps in a
//! fenced block marked `worked`, filled in on every render, unit-checked, and held against
//! the exact computation.
//!
//! ````text
//! ```worked
//! R_out = RC ∥ load_r                        in Ω
//! τ_H   = R_out * cable_c                    in s
//! f_H   = 1 / (2 * π * τ_H)                  in Hz   estimates high.f3db_hz within 10 %
//! ```
//! ````
//!
//! Each step is `NAME = EXPRESSION`, optionally `in UNIT` and `estimates RESULT within
//! TOLERANCE`; a line starting with `#` is a note to the template's reader and is not shown.
//! Expressions are the design file's own (`quantity::evaluate`: units, `∥`, `sqrt`, `db`,
//! `min`, `max`, `π`) over the design's params and parts, each device's small-signal values
//! (`Q1.gm`), every number of results.json by its path (`high.f3db_hz`), the time constants by
//! capacitor (`open.C3.tau`, `short.CE.r`) and the other steps (in any order, no cycles).
//!
//! In: the template's text, the design and its results document. Out: the steps with their
//! values (results.json `worked`), the Markdown that replaces each block, or a located
//! template error. Nothing is printed.

use std::collections::{BTreeMap, BTreeSet};

use serde::{Deserialize, Serialize};

use crate::design::Design;
use crate::design::quantity::{self, Dim, Mark, Value};
use crate::notation::{plain, si};
use crate::report::results::ResultsDocument;
use crate::report::template::TemplateError;

/// The fence that opens a worked block.
pub const FENCE: &str = "```worked";

/// Opens a subscript in generated text; the exporters typeset what follows up to
/// [`SUB_END`] as a subscript (see `report::symbol_segments`).
pub const SUB_START: char = '\u{E001}';
/// Closes a subscript opened by [`SUB_START`].
pub const SUB_END: char = '\u{E002}';

/// One worked step as results.json reports it.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct WorkedStep {
    /// The step's name.
    pub name: String,
    /// The expression as written.
    pub expression: String,
    /// The expression with every name replaced by its value and unit.
    pub substituted: String,
    /// The value, in SI units (in dB for a decibel result).
    pub value: f64,
    /// Its unit symbol (`Hz`, `Ω`, `dB`; empty for a pure number).
    pub unit: String,
    /// The result it estimates, when it says so.
    pub estimates: Option<String>,
    /// That result's exact value.
    pub exact: Option<f64>,
    /// The tolerance it states: relative (0.1 for 10 %), or absolute in the value's unit.
    pub tolerance: Option<f64>,
    /// True when the tolerance is relative.
    pub tolerance_relative: Option<bool>,
    /// The error against the exact value: relative (value/exact − 1) for a relative
    /// tolerance, else the difference in the value's unit.
    pub error: Option<f64>,
    /// True when the error lies within the tolerance.
    pub within: Option<bool>,
}

/// A template's worked blocks, evaluated.
#[derive(Clone, Debug, Default)]
pub struct Worked {
    /// Every step of every block, in the order written.
    pub steps: Vec<WorkedStep>,
    /// Each block's opening line and body as written (between the fences), and the
    /// Markdown that replaces it (nothing for a block whose guard the design does not meet).
    pub blocks: Vec<(String, String, String)>,
}

impl Worked {
    /// `markdown` with each worked block (as the template renderer passed it through)
    /// replaced by its table.
    pub fn place(&self, markdown: &str) -> String {
        let mut out = markdown.to_string();
        for (open, body, table) in &self.blocks {
            let fenced = format!("{open}\n{body}```");
            out = out.replacen(&fenced, table, 1);
        }
        out
    }

    /// The steps whose estimate lies outside its stated tolerance.
    pub fn flagged(&self) -> Vec<&WorkedStep> {
        self.steps.iter().filter(|s| s.within == Some(false)).collect()
    }
}

/// A step as parsed, with where it sits in the template.
struct Parsed {
    name: String,
    expression: String,
    unit: Option<(String, usize)>,
    estimates: Option<(String, String, usize)>,
    /// Line (1-based) and the character columns (0-based) of the name and the expression.
    line: usize,
    name_col: usize,
    expr_col: usize,
    block: usize,
}

/// Evaluates every worked block of `template` (named `name`) for the design and its results.
pub fn evaluate(
    name: &str,
    template: &str,
    design: &Design,
    results: &ResultsDocument,
) -> Result<Worked, TemplateError> {
    let lines: Vec<&str> = template.lines().collect();
    let mut parsed = Vec::new();
    let mut bodies = Vec::new();
    let mut k = 0;
    let names = known_names(design, results);
    while k < lines.len() {
        let Some(guard) = opening(lines[k]) else {
            k += 1;
            continue;
        };
        let open = k;
        // `if NAME, …`: the block is worked only for a design that has every name.
        let skipped = guard.iter().any(|g| !names.contains_key(g.as_str()));
        let mut body = String::new();
        k += 1;
        while k < lines.len() && lines[k].trim_end() != "```" {
            body.push_str(lines[k]);
            body.push('\n');
            let text = lines[k];
            if !(skipped || text.trim().is_empty() || text.trim_start().starts_with('#')) {
                parsed.push(parse_line(name, text, k + 1, bodies.len(), &lines)?);
            }
            k += 1;
        }
        if k == lines.len() {
            return Err(located(
                name,
                &lines,
                open + 1,
                0,
                3,
                "this worked block is never closed",
                "end the block with a line of three backticks",
            ));
        }
        bodies.push((lines[open].trim_end().to_string(), body, skipped));
        k += 1;
    }
    if parsed.is_empty() {
        let blocks = bodies.into_iter().map(|(o, b, _)| (o, b, String::new())).collect();
        return Ok(Worked { steps: Vec::new(), blocks });
    }
    // Step names are new names: not a param, part, device value or result.
    let mut seen: BTreeMap<&str, usize> = BTreeMap::new();
    for p in &parsed {
        if names.contains_key(&p.name) || quantity::reads_as_unit(&p.name) {
            let what = if quantity::reads_as_unit(&p.name) {
                "reads as a unit"
            } else {
                "is already a name of the design or its results"
            };
            return Err(located(
                name,
                &lines,
                p.line,
                p.name_col,
                p.name.chars().count(),
                &format!("the step name `{}` {what}", p.name),
                "give the step a name of its own, e.g. `f_H_est`",
            ));
        }
        if let Some(first) = seen.insert(&p.name, p.line) {
            return Err(located(
                name,
                &lines,
                p.line,
                p.name_col,
                p.name.chars().count(),
                &format!("the step `{}` is worked twice (first on line {first})", p.name),
                "give each step its own name",
            ));
        }
    }
    let order = order(name, &lines, &parsed)?;
    let mut env = names.clone();
    let mut values: BTreeMap<usize, Value> = BTreeMap::new();
    for &i in &order {
        let p = &parsed[i];
        let v = quantity::evaluate(&p.expression, &env).map_err(|e| {
            let known: Vec<&str> = env.keys().map(String::as_str).collect();
            let (message, help) = if e.unknown_name {
                let word: String = p.expression.chars().skip(e.offset).take(e.len).collect();
                let help = match crate::design::suggest::nearest(&word, &known) {
                    Some(best) => format!("did you mean `{best}`?"),
                    None => "the names are the design's params and parts, `Q1.gm`-style device values, results.json paths (`high.f3db_hz`), `open.C1.tau`/`short.C1.tau` and the steps".into(),
                };
                (format!("unknown name `{word}`"), help)
            } else {
                (e.message.clone(), e.help.clone().unwrap_or_else(|| "check the expression".into()))
            };
            located(name, &lines, p.line, p.expr_col + e.offset, e.len, &message, &help)
        })?;
        let v = Value { dim: Some(v.dim.unwrap_or(Dim::NONE)), ..v };
        if let Some((unit, col)) = &p.unit {
            let declared = declared_unit(unit).ok_or_else(|| {
                located(
                    name,
                    &lines,
                    p.line,
                    *col,
                    unit.chars().count(),
                    &format!("`{unit}` is not a unit tauweave reads"),
                    "write a unit symbol such as `Hz`, `Ω`, `s`, `F`, `V/V` or `dB`",
                )
            })?;
            let same = declared == v.dim.unwrap_or(Dim::NONE)
                && (declared_decibel(unit) == (v.mark == Mark::Decibel));
            if !same {
                return Err(located(
                    name,
                    &lines,
                    p.line,
                    p.expr_col,
                    p.expression.chars().count(),
                    &format!(
                        "the step `{}` comes out in {}, and it says `in {unit}`",
                        p.name,
                        unit_of(&v)
                    ),
                    "fix the expression, or the unit it declares",
                ));
            }
        }
        env.insert(p.name.clone(), v);
        values.insert(i, v);
    }
    let mut steps = Vec::new();
    for (i, p) in parsed.iter().enumerate() {
        let v = values[&i];
        let unit = p.unit.as_ref().map_or_else(|| unit_of(&v), |(u, _)| u.clone());
        let mut step = WorkedStep {
            name: p.name.clone(),
            expression: p.expression.clone(),
            substituted: substitute(&p.expression, &env, &parsed),
            value: v.si,
            unit,
            estimates: None,
            exact: None,
            tolerance: None,
            tolerance_relative: None,
            error: None,
            within: None,
        };
        if let Some((key, tolerance, col)) = &p.estimates {
            let exact = names.get(key).copied().ok_or_else(|| {
                let known: Vec<&str> = names.keys().map(String::as_str).collect();
                let help = crate::design::suggest::nearest(key, &known).map_or_else(
                    || "name a number of results.json by its path, e.g. `high.f3db_hz`".into(),
                    |b| format!("did you mean `{b}`?"),
                );
                located(
                    name,
                    &lines,
                    p.line,
                    *col,
                    key.chars().count(),
                    &format!("`{key}` is not a result of the review"),
                    &help,
                )
            })?;
            let exact_dim = exact.dim.unwrap_or(Dim::NONE);
            if exact_dim != v.dim.unwrap_or(Dim::NONE)
                || (exact.mark == Mark::Decibel) != (v.mark == Mark::Decibel)
            {
                return Err(located(
                    name,
                    &lines,
                    p.line,
                    *col,
                    key.chars().count(),
                    &format!(
                        "the step `{}` is in {}, and `{key}` in {}",
                        p.name,
                        unit_of(&v),
                        unit_of(&exact)
                    ),
                    "an estimate must come out in the unit of the result it estimates",
                ));
            }
            let t = quantity::evaluate(tolerance, &BTreeMap::new())
                .ok()
                .filter(|t| t.si.is_finite() && t.si > 0.0);
            let Some(t) = t else {
                return Err(located(
                    name,
                    &lines,
                    p.line,
                    *col,
                    key.chars().count(),
                    &format!("`within {tolerance}` is not a tolerance"),
                    "write a percentage (`within 10 %`) or an amount in the result's unit (`within 1 dB`)",
                ));
            };
            let relative = t.mark == Mark::Percent;
            if !relative
                && t.dim.is_some_and(|d| d != exact_dim)
                && !(t.mark == Mark::Decibel && exact.mark == Mark::Decibel)
            {
                return Err(located(
                    name,
                    &lines,
                    p.line,
                    *col,
                    key.chars().count(),
                    &format!("`within {tolerance}` is not in the unit of `{key}`"),
                    "write a percentage, or an amount in the result's unit",
                ));
            }
            let error = if relative { v.si / exact.si - 1.0 } else { v.si - exact.si };
            step.estimates = Some(key.clone());
            step.exact = Some(exact.si);
            step.tolerance = Some(t.si);
            step.tolerance_relative = Some(relative);
            step.error = Some(error);
            step.within = Some(error.abs() <= t.si * (1.0 + 1e-12));
        }
        steps.push(step);
    }
    let blocks = bodies
        .into_iter()
        .enumerate()
        .map(|(b, (open, body, skipped))| {
            let in_block: Vec<&WorkedStep> =
                parsed.iter().zip(&steps).filter(|(p, _)| p.block == b).map(|(_, s)| s).collect();
            let shown =
                if skipped || in_block.is_empty() { String::new() } else { table(&in_block) };
            (open, body, shown)
        })
        .collect();
    Ok(Worked { steps, blocks })
}

/// The guard names of a worked block's opening line (`\`\`\`worked` or `\`\`\`worked if a, b`),
/// None for any other line.
fn opening(line: &str) -> Option<Vec<String>> {
    let rest = line.trim_end().strip_prefix(FENCE)?;
    if rest.is_empty() {
        return Some(Vec::new());
    }
    let names = rest.strip_prefix(" if ")?;
    Some(names.split(',').map(|n| n.trim().to_string()).filter(|n| !n.is_empty()).collect())
}

/// Splits one step line: `NAME = EXPRESSION [in UNIT] [estimates KEY within TOLERANCE]`.
fn parse_line(
    name: &str,
    text: &str,
    line: usize,
    block: usize,
    lines: &[&str],
) -> Result<Parsed, TemplateError> {
    let chars: Vec<char> = text.chars().collect();
    let Some(eq) = chars.iter().position(|c| *c == '=') else {
        return Err(located(
            name,
            lines,
            line,
            0,
            chars.len(),
            "a worked step is `NAME = EXPRESSION`",
            "write e.g. `f_H = 1 / (2 * π * τ_H)   in Hz`, or start a note with `#`",
        ));
    };
    let lead = chars[..eq].iter().take_while(|c| c.is_whitespace()).count();
    let step: String = chars[..eq].iter().collect::<String>().trim().to_string();
    let identifier = step.chars().next().is_some_and(|c| c.is_alphabetic())
        && step.chars().all(|c| c.is_alphanumeric() || c == '_');
    if !identifier {
        return Err(located(
            name,
            lines,
            line,
            lead,
            step.chars().count().max(1),
            &format!("`{step}` cannot name a step"),
            "a step's name is letters, digits and `_`, starting with a letter (`τ_H`, `R_out`)",
        ));
    }
    let rest: String = chars[eq + 1..].iter().collect();
    let offset = eq + 1;
    // The keywords stand as words of their own.
    let (before, estimates) = match find_word(&rest, "estimates") {
        Some(at) => {
            let tail = &rest[at + "estimates".len()..];
            let Some(w) = find_word(tail, "within") else {
                let col = offset + rest[..at].chars().count();
                return Err(located(
                    name,
                    lines,
                    line,
                    col,
                    9,
                    "`estimates` needs `within` and a tolerance",
                    "write `estimates high.f3db_hz within 10 %`",
                ));
            };
            let key = tail[..w].trim().to_string();
            let tolerance = tail[w + "within".len()..].trim().to_string();
            let key_col = offset
                + rest[..at + "estimates".len()].chars().count()
                + tail[..w].chars().take_while(|c| c.is_whitespace()).count();
            (&rest[..at], Some((key, tolerance, key_col)))
        }
        None => (rest.as_str(), None),
    };
    let (expression, unit) = match find_word(before, "in") {
        Some(at) => {
            let unit_text = &before[at + 2..];
            let col = offset
                + before[..at + 2].chars().count()
                + unit_text.chars().take_while(|c| c.is_whitespace()).count();
            (&before[..at], Some((unit_text.trim().to_string(), col)))
        }
        None => (before, None),
    };
    let expr_col = offset + expression.chars().take_while(|c| c.is_whitespace()).count();
    Ok(Parsed {
        name: step,
        expression: expression.trim().to_string(),
        unit,
        estimates,
        line,
        name_col: lead,
        expr_col,
        block,
    })
}

/// The byte offset of `word` standing alone (spaces around it) in `text`, the last one.
fn find_word(text: &str, word: &str) -> Option<usize> {
    let padded = format!(" {word} ");
    text.rfind(&padded).map(|at| at + 1).or_else(|| {
        let end = format!(" {word}");
        text.ends_with(&end).then(|| text.len() - word.len())
    })
}

/// The steps in an order that evaluates each after those it names; a cycle is an error.
fn order(name: &str, lines: &[&str], parsed: &[Parsed]) -> Result<Vec<usize>, TemplateError> {
    let index: BTreeMap<&str, usize> =
        parsed.iter().enumerate().map(|(i, p)| (p.name.as_str(), i)).collect();
    let deps: Vec<Vec<usize>> = parsed
        .iter()
        .map(|p| {
            quantity::referenced_names(&p.expression)
                .iter()
                .filter_map(|(n, _)| index.get(n.as_str()).copied())
                .collect()
        })
        .collect();
    let mut out = Vec::new();
    let mut state = vec![0u8; parsed.len()]; // 0 new, 1 on the path, 2 done
    fn visit(
        i: usize,
        deps: &[Vec<usize>],
        state: &mut [u8],
        path: &mut Vec<usize>,
        out: &mut Vec<usize>,
    ) -> Result<(), Vec<usize>> {
        match state[i] {
            2 => return Ok(()),
            1 => {
                let from = path.iter().position(|&p| p == i).unwrap_or(0);
                let mut cycle = path[from..].to_vec();
                cycle.push(i);
                return Err(cycle);
            }
            _ => {}
        }
        state[i] = 1;
        path.push(i);
        for &d in &deps[i] {
            visit(d, deps, state, path, out)?;
        }
        path.pop();
        state[i] = 2;
        out.push(i);
        Ok(())
    }
    for i in 0..parsed.len() {
        let mut path = Vec::new();
        if let Err(cycle) = visit(i, &deps, &mut state, &mut path, &mut out) {
            let names: Vec<&str> = cycle.iter().map(|&c| parsed[c].name.as_str()).collect();
            let p = &parsed[cycle[0]];
            return Err(located(
                name,
                lines,
                p.line,
                p.name_col,
                p.name.chars().count(),
                &format!("the steps depend on each other in a loop: {}", names.join(" → ")),
                "work one of them out from the design's values instead",
            ));
        }
    }
    Ok(out)
}

/// Every name a step may use, with its value and unit.
fn known_names(design: &Design, results: &ResultsDocument) -> BTreeMap<String, Value> {
    let mut out = BTreeMap::new();
    let with = |si: f64, dim: Dim| Value { si, dim: Some(dim), mark: Mark::Plain };
    for p in &design.params {
        let dim = quantity::evaluate(&format!("1 {}", p.unit), &BTreeMap::new())
            .ok()
            .and_then(|v| v.dim)
            .unwrap_or(Dim::NONE);
        out.insert(p.name.clone(), with(p.value, dim));
    }
    for part in &design.parts {
        use crate::design::PartKind;
        let (value, dim) = match &part.kind {
            PartKind::Resistor { value, .. } => (value.nominal, Dim::OHM),
            PartKind::Capacitor { value, .. } => (value.nominal, Dim::FARAD),
            PartKind::Inductor { value, .. } => (value.nominal, Dim::HENRY),
            PartKind::Transconductance { value, .. } => (value.nominal, Dim::SIEMENS),
            PartKind::VoltageAmplifier { value, .. } => (value.nominal, Dim::NONE),
            _ => continue,
        };
        out.insert(part.name.clone(), with(value, dim));
    }
    out.insert("signal.resistance".into(), with(design.signal.resistance.nominal, Dim::OHM));
    let json = serde_json::to_value(results).unwrap_or_default();
    flatten(&json, "", &mut out);
    // Devices by part: `Q1.gm`, `Q1.ic`.
    if let Some(devices) = json.pointer("/operating_point/devices").and_then(|d| d.as_array()) {
        for d in devices {
            let Some(part) = d.get("part").and_then(|p| p.as_str()) else { continue };
            for source in [Some(d), d.get("small_signal")].into_iter().flatten() {
                let Some(map) = source.as_object() else { continue };
                for (k, v) in map {
                    if let (Some(x), Some((stem, value))) =
                        (v.as_f64(), unit_suffix(k).map(|(s, _)| s).zip(leaf(k, v)))
                    {
                        let _ = x;
                        out.insert(format!("{part}.{stem}"), value);
                    }
                }
            }
        }
    }
    // Time constants by capacitor: `open.C3.tau`, `short.CE.r`; and the capacitor with the
    // largest share of each set as `dominant.…` (open-circuit) and `lowest.…` (short-circuit).
    for (side, pointer, largest) in
        [("open", "/high/octc/caps", "dominant"), ("short", "/low/sctc/caps", "lowest")]
    {
        let Some(caps) = json.pointer(pointer).and_then(|c| c.as_array()) else { continue };
        let share = |c: &serde_json::Value| c.get("share").and_then(|s| s.as_f64()).unwrap_or(0.0);
        let top = caps.iter().max_by(|a, b| share(a).total_cmp(&share(b)));
        for c in caps {
            let Some(part) = c.get("part").and_then(|p| p.as_str()) else { continue };
            let first = top.is_some_and(|t| std::ptr::eq(t, c));
            for (key, stem) in [
                ("tau_s", "tau"),
                ("r_ohm", "r"),
                ("c_f", "c"),
                ("share", "share"),
                ("miller_factor", "miller"),
            ] {
                if let Some(v) = c.get(key).and_then(|v| leaf(key, v)) {
                    out.insert(format!("{side}.{part}.{stem}"), v);
                    if first {
                        out.insert(format!("{largest}.{stem}"), v);
                    }
                }
            }
        }
    }
    out
}

/// Every number of an object tree by its dotted path (arrays are left out: their members
/// are named by part above).
fn flatten(v: &serde_json::Value, path: &str, out: &mut BTreeMap<String, Value>) {
    let Some(map) = v.as_object() else { return };
    for (k, child) in map {
        let name = if path.is_empty() { k.clone() } else { format!("{path}.{k}") };
        if let Some(value) = leaf(k, child) {
            out.insert(name, value);
        } else if child.is_object() {
            flatten(child, &name, out);
        }
    }
}

/// A number of results.json as a value with the unit its key's suffix names.
fn leaf(key: &str, v: &serde_json::Value) -> Option<Value> {
    let x = v.as_f64().filter(|x| x.is_finite())?;
    if v.is_boolean() {
        return None;
    }
    let (_, (dim, mark)) = unit_suffix(key).unwrap_or((key, (Dim::NONE, Mark::Plain)));
    Some(Value { si: x, dim: Some(dim), mark })
}

/// A key's stem and the unit its suffix names (results.json's convention: `_hz`, `_ohm`,
/// `_s`, `_db`…); None for a key without a unit suffix.
fn unit_suffix(key: &str) -> Option<(&str, (Dim, Mark))> {
    const SUFFIXES: &[(&str, Dim)] = &[
        ("_v_per_rthz", Dim::VOLT_PER_ROOT_HERTZ),
        ("_a_per_rthz", Dim([0, 0, 1, 2, 0])),
        ("_hz", Dim::HERTZ),
        ("_ohm", Dim::OHM),
        ("_s2", Dim([0, 0, 4, 0, 0])),
        ("_s", Dim::SECOND),
        ("_f", Dim::FARAD),
        ("_v", Dim::VOLT),
        ("_a", Dim::AMPERE),
        ("_w", Dim::WATT),
        ("_k", Dim::KELVIN),
    ];
    // Transconductance is the one `_s` in siemens; every other `_s` is seconds.
    if key == "gm_s" {
        return Some(("gm", (Dim::SIEMENS, Mark::Plain)));
    }
    if let Some(stem) = key.strip_suffix("_db") {
        return Some((stem, (Dim::NONE, Mark::Decibel)));
    }
    SUFFIXES
        .iter()
        .find_map(|(suffix, dim)| key.strip_suffix(suffix).map(|stem| (stem, (*dim, Mark::Plain))))
}

/// The dimension a declared unit names, None when it does not read.
fn declared_unit(unit: &str) -> Option<Dim> {
    if declared_decibel(unit) || matches!(unit, "1" | "V/V" | "A/A" | "W/W" | "—" | "-") {
        return Some(Dim::NONE);
    }
    let v = quantity::evaluate(&format!("1 {unit}"), &BTreeMap::new()).ok()?;
    (v.mark == Mark::Plain).then_some(v.dim.unwrap_or(Dim::NONE))
}

fn declared_decibel(unit: &str) -> bool {
    unit == "dB"
}

/// The unit a value is shown in.
fn unit_of(v: &Value) -> String {
    if v.mark == Mark::Decibel {
        return "dB".into();
    }
    match v.dim {
        Some(d) if d != Dim::NONE => d.symbol(),
        _ => "a pure number".into(),
    }
}

/// A value shown in engineering notation with its unit.
fn shown(v: f64, unit: &str) -> String {
    match unit {
        "dB" => format!("{} dB", plain(v, 4)),
        "a pure number" | "" | "1" | "V/V" => plain(v, 4),
        u => si(v, u, 4),
    }
}

/// Greek letters written out, as the formula shows them.
const GREEK: &[(&str, &str)] = &[
    ("alpha", "α"),
    ("beta", "β"),
    ("gamma", "γ"),
    ("delta", "δ"),
    ("Delta", "Δ"),
    ("omega", "ω"),
    ("Omega", "Ω"),
    ("tau", "τ"),
    ("mu", "μ"),
    ("phi", "φ"),
    ("theta", "θ"),
    ("lambda", "λ"),
    ("sigma", "σ"),
    ("pi", "π"),
    ("zeta", "ζ"),
];

/// A name as typeset: a Greek word as its letter, the part after the first `_` as a
/// subscript (`tau_H` → τ with subscript H); dotted names as written.
fn typeset_name(name: &str) -> String {
    if name.contains('.') {
        return name.to_string();
    }
    let (base, sub) = match name.split_once('_') {
        Some((b, s)) if !b.is_empty() && !s.is_empty() => (b, Some(s)),
        _ => (name, None),
    };
    let base = GREEK.iter().find(|(w, _)| *w == base).map_or(base, |(_, g)| *g);
    match sub {
        Some(s) => format!("{base}{SUB_START}{s}{SUB_END}"),
        None => base.to_string(),
    }
}

/// The expression as typeset: names typeset, `*` as `·`, `||` as `∥`, `sqrt` as `√`.
fn typeset(expression: &str) -> String {
    rewrite(expression, &mut |word| Some(typeset_name(word)))
}

/// The expression with each name of a value replaced by that value and its unit.
fn substitute(expression: &str, env: &BTreeMap<String, Value>, parsed: &[Parsed]) -> String {
    let _ = parsed;
    rewrite(expression, &mut |word| {
        let v = env.get(word)?;
        let text = shown(v.si, &unit_of(v));
        // A negative value is bracketed so the signs read.
        Some(if v.si < 0.0 { format!("({text})") } else { text })
    })
}

/// Walks an expression, replacing each name by what `name` returns for it (None keeps it),
/// and the operators by their typeset signs. Numbers and the units after them stay.
fn rewrite(expression: &str, name: &mut dyn FnMut(&str) -> Option<String>) -> String {
    let chars: Vec<char> = expression.chars().collect();
    let mut out = String::new();
    let mut k = 0;
    let mut after_number = false;
    while k < chars.len() {
        let c = chars[k];
        if c.is_ascii_digit() || (c == '.' && chars.get(k + 1).is_some_and(char::is_ascii_digit)) {
            // A number with its prefix, unit or IEC code: as written.
            while k < chars.len()
                && (chars[k].is_alphanumeric() || matches!(chars[k], '.' | 'µ' | 'Ω' | '°' | '%'))
            {
                out.push(chars[k]);
                k += 1;
            }
            after_number = true;
            continue;
        }
        if c.is_alphabetic() || c == '_' {
            let start = k;
            while k < chars.len()
                && (chars[k].is_alphanumeric()
                    || chars[k] == '_'
                    || (chars[k] == '.'
                        && chars.get(k + 1).is_some_and(|n| n.is_alphanumeric() || *n == '_')))
            {
                k += 1;
            }
            let word: String = chars[start..k].iter().collect();
            if after_number {
                // A unit written apart from its number (`10 pF`).
                out.push_str(&word);
            } else if word == "sqrt" && chars.get(k) == Some(&'(') {
                out.push('√');
            } else if quantity::FUNCTIONS.contains(&word.as_str()) && chars.get(k) == Some(&'(') {
                out.push_str(&word);
            } else if word == "pi" {
                out.push('π');
            } else {
                out.push_str(&name(&word).unwrap_or(word));
            }
            after_number = false;
            continue;
        }
        match c {
            '*' => out.push('·'),
            '|' if chars.get(k + 1) == Some(&'|') => {
                out.push('∥');
                k += 1;
            }
            c => out.push(c),
        }
        if !c.is_whitespace() {
            after_number = false;
        }
        k += 1;
    }
    out
}

/// The Markdown table of one block's steps.
fn table(steps: &[&WorkedStep]) -> String {
    let checked = steps.iter().any(|s| s.estimates.is_some());
    let mut out = String::from("| step | worked | result |");
    out.push_str(if checked {
        " against the exact |\n|:---|:---|---:|:---|\n"
    } else {
        "\n|:---|:---|---:|\n"
    });
    for s in steps {
        let result = shown(s.value, &s.unit);
        let worked = format!("{} = {}", typeset(&s.expression), s.substituted);
        out.push_str(&format!("| {} | {} | **{result}** |", typeset_name(&s.name), cell(&worked)));
        if checked {
            out.push_str(&format!(" {} |", cell(&verdict(s))));
        }
        out.push('\n');
    }
    out
}

/// One line for the terminal: `f_H1 = 11.35 MHz estimates high.f3db_hz = 14.71 MHz: …`.
pub fn verdict_line(s: &WorkedStep) -> String {
    let text = format!("{} = {}, {}", s.name, shown(s.value, &s.unit), verdict(s))
        .replace("**", "")
        .replace('`', "");
    plain_subscripts(&text)
}

/// What a step's estimate says against the exact value.
fn verdict(s: &WorkedStep) -> String {
    let (Some(key), Some(exact), Some(error), Some(tolerance), Some(relative), Some(within)) =
        (&s.estimates, s.exact, s.error, s.tolerance, s.tolerance_relative, s.within)
    else {
        return String::new();
    };
    // An error below a part in 10⁹ is the floating point's, not the estimate's.
    let error = if error.abs() < 1e-9 * exact.abs().max(1.0) { 0.0 } else { error };
    let (err, tol) = if relative {
        (format!("{} %", plain(error * 100.0, 3)), format!("{} %", plain(tolerance * 100.0, 3)))
    } else {
        (shown(error, &s.unit), shown(tolerance, &s.unit))
    };
    let exact = shown(exact, &s.unit);
    if within {
        format!("`{key}` = {exact}: error {err}, within ±{tol}")
    } else {
        format!("`{key}` = {exact}: error {err}, **outside ±{tol}**")
    }
}

/// Text safe in a Markdown table cell.
fn cell(text: &str) -> String {
    text.replace('|', "\\|")
}

/// A template error at `line` (1-based), `col` (0-based, characters), `len` characters long.
fn located(
    name: &str,
    lines: &[&str],
    line: usize,
    col: usize,
    len: usize,
    what: &str,
    help: &str,
) -> TemplateError {
    let text = lines.get(line.saturating_sub(1)).copied().unwrap_or("");
    let width = line.to_string().len();
    let pad = " ".repeat(width);
    let caret = format!("{}{}", " ".repeat(col), "^".repeat(len.max(1)));
    TemplateError {
        message: format!(
            "error: the template `{name}` did not render\nerror: {what}\n{pad}--> {name}:{line}:{}\n{pad} |\n{line} | {text}\n{pad} | {caret}\n  help: {help}\n",
            col + 1
        ),
    }
}

/// Markdown with the subscript marks of [`typeset_name`] written as `_` (for report.md).
pub fn plain_subscripts(text: &str) -> String {
    text.replace(SUB_START, "_").replace(SUB_END, "")
}

/// Names that a worked step may use, sorted (for docs and messages).
pub fn names_for(design: &Design, results: &ResultsDocument) -> BTreeSet<String> {
    known_names(design, results).into_keys().collect()
}
