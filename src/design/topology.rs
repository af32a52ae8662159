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
    dc_paths(design, &mut out);
    lonely_nodes(design, &touches, &mut out);
    shorted_parts(design, &mut out);
    out
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
