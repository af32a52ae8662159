//! The schematic drawn from the netlist, checked by its geometry alone against the netlist.
//!
//! The check reads only what the drawing shows — line segments, junction dots, each symbol's
//! terminal points — and rebuilds the connectivity by the drafting rules the drawing states
//! (common practice: a wire ending on another joins it and carries a dot where three or more
//! ends meet or a wire ends on another's middle; wires crossing without a dot are not joined).
//! It then holds that connectivity to the design: every part drawn once with the right
//! terminals, every node one connected piece, no two nodes joined, supplies along the top,
//! ground along the bottom, the source at the left and the output at the right.

use tauweave::design::{self, Design, PartKind};
use tauweave::report::schematic::{self, Drawing, Point, Wire};

use crate::support::{files, root};

const EPS: f64 = 1e-6;

fn on(p: Point, w: &Wire) -> bool {
    let (x0, x1) = (w.a.0.min(w.b.0), w.a.0.max(w.b.0));
    let (y0, y1) = (w.a.1.min(w.b.1), w.a.1.max(w.b.1));
    p.0 >= x0 - EPS && p.0 <= x1 + EPS && p.1 >= y0 - EPS && p.1 <= y1 + EPS
}

fn same(p: Point, q: Point) -> bool {
    (p.0 - q.0).abs() < EPS && (p.1 - q.1).abs() < EPS
}

fn find(parent: &mut [usize], mut i: usize) -> usize {
    while parent[i] != i {
        parent[i] = parent[parent[i]];
        i = parent[i];
    }
    i
}

/// The nodes each part should be drawn joined to, in terminal order: a controlled source's
/// output pair (its control pair is written beside it).
fn netlist_terminals(kind: &PartKind) -> Vec<String> {
    match kind {
        PartKind::Transconductance { between, .. } | PartKind::VoltageAmplifier { between, .. } => {
            between.to_vec()
        }
        _ => kind.nodes().into_iter().map(String::from).collect(),
    }
}

/// Checks one drawing against its design; returns what is wrong.
fn faults(d: &Design, drawing: &Drawing) -> Vec<String> {
    let mut out = Vec::new();
    let wires = &drawing.wires;
    for w in wires {
        if (w.a.0 - w.b.0).abs() > EPS && (w.a.1 - w.b.1).abs() > EPS {
            out.push(format!("a slanted wire {:?}–{:?}", w.a, w.b));
        }
    }
    // Join wires where an end of one lies on the other; note where a dot is owed.
    let mut parent: Vec<usize> = (0..wires.len()).collect();
    let has_dot = |p: Point| drawing.dots.iter().any(|q| same(p, *q));
    for (i, w) in wires.iter().enumerate() {
        for end in [w.a, w.b] {
            let mut meeting = 0;
            for (j, v) in wires.iter().enumerate() {
                if i == j || !on(end, v) {
                    continue;
                }
                let (a, b) = (find(&mut parent, i), find(&mut parent, j));
                parent[a] = b;
                if same(end, v.a) || same(end, v.b) {
                    meeting += 1;
                } else if !has_dot(end) {
                    out.push(format!("a wire ends on another's middle at {end:?} with no dot"));
                }
            }
            let terminals = drawing
                .symbols
                .iter()
                .flat_map(|s| &s.terminals)
                .filter(|t| same(t.1, end))
                .count();
            if meeting + 1 + terminals >= 3 && !has_dot(end) {
                out.push(format!("three or more ends meet at {end:?} with no dot"));
            }
        }
    }
    // Every part drawn once, with the netlist's terminals, each on exactly one piece of wire.
    let mut names: Vec<&str> = drawing.symbols.iter().map(|s| s.name.as_str()).collect();
    names.sort();
    let mut expected: Vec<&str> =
        d.parts.iter().map(|p| p.name.as_str()).chain(["signal"]).collect();
    expected.sort();
    if names != expected {
        out.push(format!("parts drawn {names:?}, netlist {expected:?}"));
    }
    let mut piece_of_node: std::collections::BTreeMap<String, usize> = Default::default();
    for s in &drawing.symbols {
        let want: Vec<String> = match d.parts.iter().find(|p| p.name == s.name) {
            Some(p) => netlist_terminals(&p.kind),
            None => vec![d.signal.positive.clone(), d.signal.negative.clone()],
        };
        let got: Vec<String> = s.terminals.iter().map(|t| t.0.clone()).collect();
        if want != got {
            out.push(format!("{}: terminals {got:?}, netlist {want:?}", s.name));
        }
        for (node, p) in &s.terminals {
            let pieces: Vec<usize> = (0..wires.len())
                .filter(|j| on(*p, &wires[*j]))
                .map(|j| find(&mut parent, j))
                .collect::<std::collections::BTreeSet<_>>()
                .into_iter()
                .collect();
            match pieces.as_slice() {
                [] => out.push(format!("{}: terminal {node} at {p:?} touches no wire", s.name)),
                [one] => match piece_of_node.get(node) {
                    Some(k) if k != one => out
                        .push(format!("node {node} is drawn in two unjoined pieces ({})", s.name)),
                    _ => {
                        piece_of_node.insert(node.clone(), *one);
                    }
                },
                _ => out.push(format!("{}: terminal {node} touches two unjoined pieces", s.name)),
            }
        }
    }
    let mut seen: std::collections::BTreeMap<usize, &str> = Default::default();
    for (node, piece) in &piece_of_node {
        if let Some(other) = seen.insert(*piece, node) {
            out.push(format!("nodes {other} and {node} are joined in the drawing"));
        }
    }
    // Supplies above every terminal, ground below; source leftmost, output rightmost.
    let terminals: Vec<Point> =
        drawing.symbols.iter().flat_map(|s| s.terminals.iter().map(|t| t.1)).collect();
    let (top, bottom) = (
        terminals.iter().map(|p| p.1).fold(f64::INFINITY, f64::min),
        terminals.iter().map(|p| p.1).fold(f64::NEG_INFINITY, f64::max),
    );
    let rail_y = |node: &str| -> Option<f64> {
        let piece = *piece_of_node.get(node)?;
        wires
            .iter()
            .enumerate()
            .filter(|(j, w)| (w.a.1 - w.b.1).abs() < EPS && find(&mut parent.clone(), *j) == piece)
            .map(|(_, w)| w.a.1)
            .next()
    };
    for s in d.supplies.iter().filter(|s| s.voltage.nominal > 0.0) {
        if rail_y(&s.node).is_none_or(|y| y > top + EPS) {
            out.push(format!("supply {} is not a line above every part", s.node));
        }
    }
    if rail_y(design::GROUND).is_none_or(|y| y < bottom - EPS) {
        out.push("ground is not a line below every part".into());
    }
    let x_of = |name: &str| {
        drawing
            .symbols
            .iter()
            .find(|s| s.name == name)
            .map(|s| s.terminals[0].1.0)
            .unwrap_or(f64::NAN)
    };
    let leftmost = drawing.symbols.iter().map(|s| s.terminals[0].1.0).fold(f64::INFINITY, f64::min);
    if x_of("signal") > leftmost + EPS {
        out.push("the source is not at the left".into());
    }
    let rightmost = terminals.iter().map(|p| p.0).fold(f64::NEG_INFINITY, f64::max);
    if drawing.ports.len() != 1 || drawing.ports[0].0 < rightmost {
        out.push(format!("the output port {:?} is not at the right", drawing.ports));
    }
    out
}

fn check(name: &str, text: &str) {
    let d = design::load(text).design.unwrap_or_else(|| panic!("{name}: not a valid design"));
    let drawing = schematic::draw(&d);
    let found = faults(&d, &drawing);
    assert!(found.is_empty(), "{name}:\n  {}", found.join("\n  "));
    let svg = drawing.svg("DejaVu Sans Mono");
    for s in &drawing.symbols {
        assert!(svg.contains(&format!(">{}</text>", s.name)), "{name}: {} is not named", s.name);
    }
}

#[test]
fn every_example_is_drawn_with_the_connectivity_of_its_netlist() {
    let designs = files(&root().join("designs"), "yaml");
    assert!(designs.len() >= 4);
    for path in designs {
        check(&path.display().to_string(), &std::fs::read_to_string(&path).unwrap());
    }
}

#[test]
fn the_starters_are_drawn_with_the_connectivity_of_their_netlists() {
    for kind in ["common-emitter", "common-source", "cascode", "emitter-follower"] {
        let dir = crate::support::scratch(&format!("schematic-{kind}"));
        let o = crate::support::run_in(&dir, &["new", "stage", "--kind", kind]);
        assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
        check(kind, &std::fs::read_to_string(dir.join("stage.yaml")).unwrap());
    }
}

/// A crowded network the stacking rules do not fit (a long-tailed pair with a negative supply,
/// a feedback resistor from a collector to a base, parallel parts, a controlled source and an
/// inductor): still drawn right.
#[test]
fn a_crowded_network_is_still_drawn_with_its_connectivity() {
    let text = r#"
tauweave: 1
design: {id: crowded, title: Pair, revision: A, date: 2026-12-03}
supplies:
  vcc: 10 V
  vee: -10 V
signal: {at: in, resistance: 600 Ω}
output: {at: out, load_resistance: 10k}
parts:
  C1: {kind: capacitor, value: 1u, between: [in, b1], role: coupling}
  C1B: {kind: capacitor, value: 10n, between: [in, b1], role: coupling}
  RB1: {kind: resistor, value: 10k, between: [b1, gnd]}
  RB2: {kind: resistor, value: 10k, between: [b2, gnd]}
  Q1: {kind: bjt, model: N, c: c1, b: b1, e: tail}
  Q2: {kind: bjt, model: N, c: c2, b: b2, e: tail}
  RT: {kind: resistor, value: 4k7, between: [tail, vee]}
  RC1: {kind: resistor, value: 4k7, between: [vcc, c1]}
  RC2: {kind: resistor, value: 4k7, between: [vcc, c2]}
  RF: {kind: resistor, value: 100k, between: [c2, b1]}
  L1: {kind: inductor, value: 10u, between: [c2, mid]}
  G1: {kind: transconductance, value: 1m, between: [mid, gnd], control: [c1, gnd]}
  C2: {kind: capacitor, value: 1u, between: [mid, out], role: coupling}
  CP: {kind: capacitor, value: 2p, between: [c1, c2], role: parasitic}
models:
  N: {type: npn, beta: 100, early_voltage: 80 V, saturation_current: 1 fA}
requirements:
  midband_gain: {min: 0 dB}
"#;
    check("crowded", text);
}

/// The check above is worth something only if it fails on a drawing that is wrong: a wire cut
/// out, a terminal moved onto another node's wire, a junction dot left off.
#[test]
fn the_check_catches_a_cut_wire_a_short_and_a_missing_dot() {
    let text = std::fs::read_to_string(root().join("designs/rx-preamp-ce.yaml")).unwrap();
    let d = design::load(&text).design.unwrap();
    let good = schematic::draw(&d);
    assert!(faults(&d, &good).is_empty());

    // Cut: drop the longest wire (a rail) — the parts on it lose their node.
    let mut cut = good.clone();
    let longest = (0..cut.wires.len())
        .max_by(|a, b| {
            let len = |w: &Wire| (w.a.0 - w.b.0).abs() + (w.a.1 - w.b.1).abs();
            len(&cut.wires[*a]).total_cmp(&len(&cut.wires[*b]))
        })
        .unwrap();
    cut.wires.remove(longest);
    assert!(!faults(&d, &cut).is_empty(), "a removed rail went unnoticed");

    // Short: move RC's lower terminal onto the ground rail.
    let mut short = good.clone();
    let ground_y = short.wires.iter().map(|w| w.a.1.max(w.b.1)).fold(f64::NEG_INFINITY, f64::max);
    let rc = short.symbols.iter_mut().find(|s| s.name == "RC").unwrap();
    rc.terminals[1].1.1 = ground_y;
    let found = faults(&d, &short);
    assert!(found.iter().any(|f| f.contains("joined") || f.contains("pieces")), "{found:?}");

    // A missing dot where a part meets the ground rail.
    let mut undotted = good.clone();
    undotted.dots.pop();
    let found = faults(&d, &undotted);
    assert!(found.iter().any(|f| f.contains("no dot")), "{found:?}");
}
