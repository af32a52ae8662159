//! Circuit-level checks on a read design: does every node reach ground at DC, is a node
//! touched by only one part, do the signal, output and supplies sit on nodes that exist.
//!
//! In: a [`Design`] that read without errors. Out: diagnostics located at the part that
//! touches the nodes concerned. No I/O.

use std::collections::BTreeMap;

use crate::design::diagnostic::{Diagnostic, Span};
use crate::design::suggest::nearest;
use crate::design::types::{Design, GROUND, PartKind};
use crate::union_find::UnionFind;

/// Runs every topology check.
pub fn check(design: &Design) -> Vec<Diagnostic> {
    let mut out = Vec::new();
    let touches = touch_counts(design);
    referenced_nodes_exist(design, &touches, &mut out);
    if out.iter().any(Diagnostic::is_error) {
        return out;
    }
    voltage_loops(design, &mut out);
    dc_paths(design, &mut out);
    lonely_nodes(design, &touches, &mut out);
    shorted_parts(design, &mut out);
    one_node_transistors(design, &mut out);
    ground_spellings(&touches, design, &mut out);
    out
}

/// Parts that fix a voltage between two nodes at DC — supplies (to ground), inductors (a
/// short at DC), voltage amplifiers — must not close a loop: the voltage around it would be
/// set twice and the bias has no solution. A resistor straight across two fixed nodes does
/// nothing but draw supply current; it is worth a warning.
fn voltage_loops(design: &Design, out: &mut Vec<Diagnostic>) {
    let mut names: Vec<&str> = vec![GROUND];
    let mut pairs = Vec::new();
    for part in &design.parts {
        let pair = match &part.kind {
            PartKind::Inductor { between, .. } | PartKind::VoltageAmplifier { between, .. } => {
                Some((between[0].as_str(), between[1].as_str(), true))
            }
            PartKind::Resistor { between, .. } => {
                Some((between[0].as_str(), between[1].as_str(), false))
            }
            _ => None,
        };
        if let Some((a, b, fixes)) = pair.filter(|(a, b, _)| a != b) {
            pairs.push((part, index(a, &mut names), index(b, &mut names), fixes));
        }
    }
    let supplies: Vec<usize> = design.supplies.iter().map(|s| index(&s.node, &mut names)).collect();
    let mut fixed = UnionFind::new(names.len());
    for s in supplies {
        fixed.join(s, 0);
    }
    for (part, a, b, _) in pairs.iter().filter(|p| p.3) {
        if fixed.find(*a) == fixed.find(*b) {
            out.push(
                Diagnostic::error(
                    "voltage_loop",
                    format!(
                        "`{}` closes a loop of parts that each fix a voltage (supplies, inductors \
                         at DC, voltage amplifiers): the voltage from `{}` to `{}` would be set \
                         twice",
                        part.name, names[*a], names[*b]
                    ),
                )
                .at(part_span(design, &part.name), "closes the loop")
                .help("remove it, or put the resistance that is really there in the loop (a winding's, a source's output resistance)"),
            );
        } else {
            fixed.join(*a, *b);
        }
    }
    let supply_nodes: Vec<&str> = design.supplies.iter().map(|s| s.node.as_str()).collect();
    let rail = |n: &str| n == GROUND || supply_nodes.contains(&n);
    for (part, a, b, _) in pairs.iter().filter(|p| !p.3) {
        let (na, nb) = (names[*a], names[*b]);
        if rail(na) && rail(nb) {
            out.push(
                Diagnostic::warning(
                    "across_supply",
                    format!(
                        "`{}` sits straight across the supply, from `{na}` to `{nb}`",
                        part.name
                    ),
                )
                .at(part_span(design, &part.name), "between two fixed voltages")
                .help(
                    "it only draws supply current and plays no part in the stage; check its nodes",
                ),
            );
        }
    }
}

/// The index of node `n` in `names`, added at the end when new.
fn index<'a>(n: &'a str, names: &mut Vec<&'a str>) -> usize {
    names.iter().position(|m| *m == n).unwrap_or_else(|| {
        names.push(n);
        names.len() - 1
    })
}

/// A transistor with every terminal on one node does nothing.
fn one_node_transistors(design: &Design, out: &mut Vec<Diagnostic>) {
    for part in &design.parts {
        let terminals = match &part.kind {
            PartKind::Bjt { c, b, e, .. } => [c, b, e],
            PartKind::Mosfet { d, g, s, .. } => [d, g, s],
            _ => continue,
        };
        if terminals[0] == terminals[1] && terminals[1] == terminals[2] {
            out.push(
                Diagnostic::warning(
                    "shorted_part",
                    format!("every terminal of `{}` is on node `{}`", part.name, terminals[0]),
                )
                .at(part_span(design, &part.name), "shorted")
                .help("it carries no signal; check its terminal nodes"),
            );
        }
    }
}

/// `GND`, `Gnd`, `ground`: a node that reads as ground but is not `gnd`.
fn ground_spellings(
    touches: &BTreeMap<String, Vec<String>>,
    design: &Design,
    out: &mut Vec<Diagnostic>,
) {
    for (node, parts) in touches {
        let lower = node.to_lowercase();
        if node != GROUND && (lower == GROUND || lower == "ground") {
            out.push(
                Diagnostic::warning("not_ground", format!("node `{node}` is not ground"))
                    .at(part_span(design, &parts[0]), format!("`{node}` here"))
                    .help(format!("ground is `{GROUND}`, in lower case; did you mean `{GROUND}`?")),
            );
        }
    }
}

fn part_span(design: &Design, name: &str) -> Span {
    design.places.get(&format!("parts.{name}")).copied().unwrap_or_default()
}

/// How many parts touch each node (a part touching a node twice counts once).
fn touch_counts(design: &Design) -> BTreeMap<String, Vec<String>> {
    let mut touches: BTreeMap<String, Vec<String>> = BTreeMap::new();
    for part in &design.parts {
        for n in part.kind.nodes() {
            let list = touches.entry(n.to_string()).or_default();
            if !list.contains(&part.name) {
                list.push(part.name.clone());
            }
        }
    }
    touches
}

fn referenced_nodes_exist(
    design: &Design,
    touches: &BTreeMap<String, Vec<String>>,
    out: &mut Vec<Diagnostic>,
) {
    let known: Vec<&str> = touches.keys().map(String::as_str).collect();
    let mut check = |node: &str, what: &str, place: &str| {
        if node == GROUND || touches.contains_key(node) {
            return;
        }
        let help = match nearest(node, &known) {
            Some(best) => format!("did you mean `{best}`?"),
            None => format!("nodes the parts touch: {}", known.join(", ")),
        };
        let span = design.places.get(place).copied().unwrap_or_default();
        out.push(
            Diagnostic::error(
                "unknown_node",
                format!("{what} is on node `{node}`, which no part touches"),
            )
            .at(span, "no part connects here")
            .help(help),
        );
    };
    for s in &design.supplies {
        check(&s.node, "a supply", &format!("supplies.{}", s.node));
    }
    check(&design.signal.positive, "the signal source", "signal.at");
    check(&design.signal.negative, "the signal source", "signal.at");
    check(&design.output.positive, "the output", "output.at");
    check(&design.output.negative, "the output", "output.at");
}

/// Union–find over the parts that conduct at DC; every group must contain ground.
fn dc_paths(design: &Design, out: &mut Vec<Diagnostic>) {
    let nodes = design.nodes();
    let index: BTreeMap<&str, usize> =
        nodes.iter().enumerate().map(|(i, n)| (n.as_str(), i)).collect();
    let mut conducting = UnionFind::new(nodes.len());
    let mut join = |a: &str, b: &str| {
        conducting.join(index[a], index[b]);
    };
    for s in &design.supplies {
        join(&s.node, GROUND);
    }
    join(&design.signal.positive, &design.signal.negative);
    for part in &design.parts {
        match &part.kind {
            PartKind::Resistor { between, .. }
            | PartKind::Inductor { between, .. }
            | PartKind::VoltageAmplifier { between, .. } => join(&between[0], &between[1]),
            // Junctions conduct (one way or the other) between all three terminals.
            PartKind::Bjt { c, b, e, .. } => {
                join(b, e);
                join(b, c);
            }
            // The gate is insulated: only the channel conducts.
            PartKind::Mosfet { d, s, .. } => join(d, s),
            PartKind::Capacitor { .. } | PartKind::Transconductance { .. } => {}
        }
    }
    let ground_root = conducting.find(0);
    let mut groups: BTreeMap<usize, Vec<usize>> = BTreeMap::new();
    for i in 0..nodes.len() {
        let r = conducting.find(i);
        if r != ground_root {
            groups.entry(r).or_default().push(i);
        }
    }
    let mut groups: Vec<Vec<usize>> = groups.into_values().collect();
    groups.sort();
    for group in groups {
        let names: Vec<&str> = group.iter().map(|&i| nodes[i].as_str()).collect();
        let first_part = design
            .parts
            .iter()
            .find(|p| p.kind.nodes().iter().any(|n| names.contains(n)))
            .map(|p| p.name.clone());
        let span = first_part.as_deref().map(|p| part_span(design, p)).unwrap_or_default();
        let what = if names.len() == 1 {
            format!("node `{}` has no DC path to gnd", names[0])
        } else {
            format!(
                "nodes {} have no DC path to gnd",
                names.iter().map(|n| format!("`{n}`")).collect::<Vec<_>>().join(", ")
            )
        };
        out.push(
            Diagnostic::error("no_dc_path", what).at(span, "touches the floating nodes").help(
                "capacitors, MOSFET gates and current sources pass no DC: add a bias \
                     resistor (or an inductor) from these nodes to a supply or gnd",
            ),
        );
    }
}

fn lonely_nodes(
    design: &Design,
    touches: &BTreeMap<String, Vec<String>>,
    out: &mut Vec<Diagnostic>,
) {
    let mut external: BTreeMap<&str, usize> = BTreeMap::new();
    for s in &design.supplies {
        *external.entry(&s.node).or_default() += 1;
    }
    for n in [
        &design.signal.positive,
        &design.signal.negative,
        &design.output.positive,
        &design.output.negative,
    ] {
        *external.entry(n).or_default() += 1;
    }
    for (node, parts) in touches {
        if node == GROUND {
            continue;
        }
        let total = parts.len() + external.get(node.as_str()).copied().unwrap_or(0);
        if total < 2 {
            // A misspelling is the usual cause: name the well-connected node it is nearest to.
            let others: Vec<&str> = touches
                .iter()
                .filter(|(n, p)| {
                    *n != node && p.len() + external.get(n.as_str()).copied().unwrap_or(0) >= 2
                })
                .map(|(n, _)| n.as_str())
                .collect();
            let help = match nearest(node, &others) {
                Some(near) => {
                    format!("a node needs two connections to carry current: did you mean `{near}`?")
                }
                None => "a node needs two connections to carry current: check for a misspelt \
                         node name"
                    .to_string(),
            };
            out.push(
                Diagnostic::warning(
                    "single_connection",
                    format!("node `{node}` is touched only by `{}`", parts[0]),
                )
                .at(part_span(design, &parts[0]), format!("the only connection to `{node}`"))
                .help(help),
            );
        }
    }
}

fn shorted_parts(design: &Design, out: &mut Vec<Diagnostic>) {
    for part in &design.parts {
        let node = match &part.kind {
            PartKind::Resistor { between, .. }
            | PartKind::Capacitor { between, .. }
            | PartKind::Inductor { between, .. }
            | PartKind::Transconductance { between, .. }
            | PartKind::VoltageAmplifier { between, .. } => {
                Some(&between[0]).filter(|_| between[0] == between[1])
            }
            _ => None,
        };
        if let Some(node) = node {
            out.push(
                Diagnostic::warning(
                    "shorted_part",
                    format!("both ends of `{}` are on node `{node}`", part.name),
                )
                .at(part_span(design, &part.name), "shorted")
                .help("it carries no signal; check the node names in `between`"),
            );
        }
    }
}

#[cfg(test)]
mod tests {
    use crate::design::load;

    /// The codes `load` reports for a stage with `parts` added to a working divider.
    fn codes(parts: &str) -> Vec<&'static str> {
        let text = format!(
            "tauweave: 1\ndesign: {{id: t, title: T, revision: A, date: 2026-12-01}}\n\
             supplies: {{vcc: 9 V}}\nsignal: {{at: in, resistance: 50}}\noutput: {{at: out}}\n\
             models: {{N1: {{type: npn, beta: 100, saturation_current: 1 fA}}}}\n\
             parts:\n  R0: {{kind: resistor, value: 10k, between: [vcc, in]}}\n  \
             R1: {{kind: resistor, value: 1k, between: [in, out]}}\n  \
             R2: {{kind: resistor, value: 1k, between: [out, gnd]}}\n{parts}"
        );
        load(&text).diagnostics.iter().map(|d| d.code).collect()
    }

    #[test]
    fn a_resistor_straight_across_the_supply_is_a_warning() {
        let c = codes("  R9: {kind: resistor, value: 1e-12, between: [vcc, gnd]}\n");
        assert!(c.contains(&"across_supply"), "{c:?}");
    }

    #[test]
    fn a_transistor_with_every_terminal_on_one_node_is_a_warning() {
        let c = codes("  Q9: {kind: bjt, model: N1, c: out, b: out, e: out}\n");
        assert!(c.contains(&"shorted_part"), "{c:?}");
    }

    #[test]
    fn gnd_in_capitals_is_not_ground_and_says_so() {
        let c = codes(
            "  R8: {kind: resistor, value: 1k, between: [out, GND]}\n  \
             R7: {kind: resistor, value: 1k, between: [in, GND]}\n",
        );
        assert!(c.contains(&"not_ground"), "{c:?}");
    }

    #[test]
    fn an_inductor_in_series_with_a_resistor_is_no_loop() {
        let c = codes(
            "  L1: {kind: inductor, value: 1 µH, between: [vcc, mid]}\n  \
             R6: {kind: resistor, value: 1k, between: [mid, gnd]}\n",
        );
        assert!(!c.contains(&"voltage_loop"), "{c:?}");
    }
}
