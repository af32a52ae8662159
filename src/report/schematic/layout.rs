//! Where every node and part of the drawn schematic goes.
//!
//! Nodes sit on *levels* (rows 40 px apart) and in *columns* (left to right in the order the
//! signal reaches them from the source). Each transistor stands in a *stack*: its collector
//! (drain) two levels above its emitter (source), the body between; stacks join where one
//! transistor's emitter is another's collector (a cascode), and a resistor hanging from a
//! stack's end away from the device (emitter degeneration) continues it. Every other node is
//! a stack of one. A stack is moved up or down as a whole so that a coupling part between two
//! nodes runs level and a base sits level with its transistor's body.
//!
//! The layout is then built and checked: no two nodes' wires may touch, and no wire may run
//! through a part. A crowded layout is mended by moving single nodes to other levels; if
//! that fails, every node gets a level of its own (a staircase, which cannot collide), so the
//! drawing is always right even when it is not pretty. No I/O.

use std::collections::BTreeMap;

use super::{Drawing, Point, Shape, Symbol, Text, Wire, text_width, value_text};
use crate::design::{BipolarType, Design, DeviceModel, GROUND, MosType, PartKind};

/// Vertical distance between levels, px.
const LEVEL: f64 = 40.0;
/// y of level 0, px.
const TOP: f64 = 30.0;
/// Left and right margin, px.
const MARGIN: f64 = 16.0;
/// Length of a two-terminal part's body, px.
const BODY: f64 = 30.0;
/// Length of the signal source (series resistance and generator), px.
const SOURCE: f64 = 64.0;
/// Half the height of a transistor between its collector and emitter terminals, px.
const HALF_DEVICE: f64 = 24.0;
/// Room left of a transistor's collector–emitter line for its base lead, px.
const BASE_LEAD: f64 = 30.0;
/// Above this many parts, a crowded layout goes straight to the staircase.
const MEND_LIMIT: usize = 40;

/// Draws the design's connectivity.
pub fn draw(design: &Design) -> Drawing {
    let net = Net::of(design);
    let stacks = stacks(design, &net);
    let columns = columns(design, &net, &stacks);
    let levels = aligned_levels(design, &net, &stacks, &columns);
    let mut drawing = build(design, &net, &stacks, &columns, &levels);
    let mut trouble = collisions(&drawing);
    if trouble > 0 && design.parts.len() <= MEND_LIMIT {
        (drawing, trouble) = mend(design, &net, &stacks, &columns, levels, drawing, trouble);
    }
    if trouble > 0 {
        drawing = build(design, &net, &stacks, &columns, &staircase(&net, &stacks, &columns));
    }
    drawing
}

/// The nodes: rails (supplies and ground) and the rest, in the order the signal reaches them.
struct Net {
    /// Supplies above ground, highest first: level i.
    top: Vec<(String, f64)>,
    /// Ground, then supplies below it, nearest to 0 V first.
    bottom: Vec<(String, f64)>,
    /// Every other node, in discovery order from the signal node.
    inner: Vec<String>,
}

impl Net {
    fn of(design: &Design) -> Net {
        let mut top: Vec<(String, f64)> = design
            .supplies
            .iter()
            .filter(|s| s.voltage.nominal >= 0.0)
            .map(|s| (s.node.clone(), s.voltage.nominal))
            .collect();
        top.sort_by(|a, b| b.1.total_cmp(&a.1));
        let mut bottom = vec![(GROUND.to_string(), 0.0)];
        let mut below: Vec<(String, f64)> = design
            .supplies
            .iter()
            .filter(|s| s.voltage.nominal < 0.0)
            .map(|s| (s.node.clone(), s.voltage.nominal))
            .collect();
        below.sort_by(|a, b| b.1.total_cmp(&a.1));
        bottom.extend(below);
        let rail = |n: &str| top.iter().chain(&bottom).any(|(r, _)| r == n);
        // Breadth first from the signal node over every part, in file order.
        let mut inner: Vec<String> = Vec::new();
        let mut queue = std::collections::VecDeque::new();
        if !rail(&design.signal.positive) {
            inner.push(design.signal.positive.clone());
            queue.push_back(design.signal.positive.clone());
        }
        while let Some(n) = queue.pop_front() {
            for p in &design.parts {
                let nodes = drawn_nodes(&p.kind);
                if !nodes.contains(&n.as_str()) {
                    continue;
                }
                for m in nodes {
                    if !rail(m) && !inner.iter().any(|i| i == m) {
                        inner.push(m.to_string());
                        queue.push_back(m.to_string());
                    }
                }
            }
        }
        for p in &design.parts {
            for m in drawn_nodes(&p.kind) {
                if !rail(m) && !inner.iter().any(|i| i == m) {
                    inner.push(m.to_string());
                }
            }
        }
        for m in [&design.signal.negative, &design.output.positive, &design.output.negative] {
            if !rail(m) && !inner.iter().any(|i| i == m) {
                inner.push(m.clone());
            }
        }
        Net { top, bottom, inner }
    }

    fn is_rail(&self, n: &str) -> bool {
        self.top.iter().chain(&self.bottom).any(|(r, _)| r == n)
    }

    /// A rail's level, given the lowest level of the inner nodes' region.
    fn rail_level(&self, n: &str, bottom: i32) -> Option<i32> {
        if let Some(i) = self.top.iter().position(|(r, _)| r == n) {
            return Some(i as i32);
        }
        self.bottom.iter().position(|(r, _)| r == n).map(|i| bottom + i as i32)
    }

    /// The first level inner nodes may use: two below the lowest top rail.
    fn first_inner(&self) -> i32 {
        self.top.len() as i32 + 1
    }
}

/// The nodes a part is drawn joined to: a controlled source's output pair only (its control
/// pair is written beside it).
fn drawn_nodes(kind: &PartKind) -> Vec<&str> {
    match kind {
        PartKind::Transconductance { between, .. } | PartKind::VoltageAmplifier { between, .. } => {
            vec![&between[0], &between[1]]
        }
        _ => kind.nodes(),
    }
}

/// A transistor's terminals as (upper, control, lower) by polarity, with whether it is of
/// the n kind (NPN, n-channel).
fn device(design: &Design, kind: &PartKind) -> Option<(String, String, String, bool)> {
    match kind {
        PartKind::Bjt { c, b, e, model } => {
            let n = !matches!(&design.models[*model].device, DeviceModel::Bipolar(m) if m.polarity == BipolarType::Pnp);
            Some(if n {
                (c.clone(), b.clone(), e.clone(), n)
            } else {
                (e.clone(), b.clone(), c.clone(), n)
            })
        }
        PartKind::Mosfet { d, g, s, model } => {
            let n = !matches!(&design.models[*model].device, DeviceModel::Mos(m) if m.polarity == MosType::Pmos);
            Some(if n {
                (d.clone(), g.clone(), s.clone(), n)
            } else {
                (s.clone(), g.clone(), d.clone(), n)
            })
        }
        _ => None,
    }
}

/// A column of nodes joined top to bottom.
#[derive(Clone, Debug, Default)]
struct Stack {
    nodes: Vec<String>,
    /// The part between `nodes[i]` and `nodes[i + 1]`.
    links: Vec<usize>,
    /// A transistor above the top node whose other end is a top rail.
    above: Option<usize>,
    /// A transistor below the bottom node whose other end is a bottom rail.
    below: Option<usize>,
}

impl Stack {
    fn parts(&self) -> impl Iterator<Item = usize> + '_ {
        self.above.iter().chain(&self.links).chain(&self.below).copied()
    }
}

fn stacks(design: &Design, net: &Net) -> Vec<Stack> {
    let mut stacks: Vec<Stack> = Vec::new();
    let find =
        |stacks: &[Stack], n: &str| stacks.iter().position(|s| s.nodes.iter().any(|m| m == n));
    for (i, p) in design.parts.iter().enumerate() {
        let Some((up, _, down, _)) = device(design, &p.kind) else { continue };
        let (ru, rd) = (net.is_rail(&up), net.is_rail(&down));
        let top_rail = |n: &str| net.top.iter().any(|(r, _)| r == n);
        match (ru, rd) {
            (false, false) if up != down => match (find(&stacks, &up), find(&stacks, &down)) {
                (None, None) => {
                    stacks.push(Stack { nodes: vec![up, down], links: vec![i], ..Stack::default() })
                }
                (Some(s), None)
                    if stacks[s].nodes.last() == Some(&up) && stacks[s].below.is_none() =>
                {
                    stacks[s].nodes.push(down);
                    stacks[s].links.push(i);
                }
                (None, Some(s)) if stacks[s].nodes[0] == down && stacks[s].above.is_none() => {
                    stacks[s].nodes.insert(0, up);
                    stacks[s].links.insert(0, i);
                }
                (Some(a), Some(b))
                    if a != b
                        && stacks[a].nodes.last() == Some(&up)
                        && stacks[b].nodes[0] == down
                        && stacks[a].below.is_none()
                        && stacks[b].above.is_none() =>
                {
                    let lower = stacks[b].clone();
                    stacks[a].nodes.extend(lower.nodes);
                    stacks[a].links.push(i);
                    stacks[a].links.extend(lower.links);
                    stacks[a].below = lower.below;
                    stacks.remove(b);
                }
                _ => {}
            },
            (true, false) if top_rail(&up) => match find(&stacks, &down) {
                None => {
                    stacks.push(Stack { nodes: vec![down], above: Some(i), ..Stack::default() })
                }
                Some(s) if stacks[s].nodes[0] == down && stacks[s].above.is_none() => {
                    stacks[s].above = Some(i)
                }
                _ => {}
            },
            (false, true) if !top_rail(&down) => match find(&stacks, &up) {
                None => stacks.push(Stack { nodes: vec![up], below: Some(i), ..Stack::default() }),
                Some(s) if stacks[s].nodes.last() == Some(&up) && stacks[s].below.is_none() => {
                    stacks[s].below = Some(i)
                }
                _ => {}
            },
            _ => {}
        }
    }
    // A resistor or inductor from a device stack's far end continues it (degeneration).
    let controls: Vec<String> =
        design.parts.iter().filter_map(|p| device(design, &p.kind)).map(|d| d.1).collect();
    let special = |n: &str| {
        controls.iter().any(|c| c == n)
            || n == design.output.positive
            || n == design.signal.positive
    };
    loop {
        let mut grew = false;
        for (i, p) in design.parts.iter().enumerate() {
            let (PartKind::Resistor { between, .. } | PartKind::Inductor { between, .. }) = &p.kind
            else {
                continue;
            };
            if stacks.iter().any(|s| s.links.contains(&i)) {
                continue;
            }
            for (a, b) in [(&between[0], &between[1]), (&between[1], &between[0])] {
                if net.is_rail(a) || net.is_rail(b) || special(b) || find(&stacks, b).is_some() {
                    continue;
                }
                let Some(s) = find(&stacks, a) else { continue };
                if stacks[s].nodes.last() == Some(a) && stacks[s].below.is_none() {
                    stacks[s].nodes.push(b.clone());
                    stacks[s].links.push(i);
                    grew = true;
                    break;
                }
            }
        }
        if !grew {
            break;
        }
    }
    for n in &net.inner {
        if find(&stacks, n).is_none() {
            stacks.push(Stack { nodes: vec![n.clone()], ..Stack::default() });
        }
    }
    stacks
}

/// The stacks' left-to-right order: by when the signal first reaches them, a transistor's
/// base before the transistor, the output last.
fn columns(design: &Design, net: &Net, stacks: &[Stack]) -> Vec<usize> {
    let order = |n: &str| net.inner.iter().position(|m| m == n).unwrap_or(usize::MAX) as f64;
    let of = |n: &str| stacks.iter().position(|s| s.nodes.iter().any(|m| m == n));
    let mut key: Vec<f64> = stacks
        .iter()
        .map(|s| s.nodes.iter().map(|n| order(n)).fold(f64::INFINITY, f64::min))
        .collect();
    for _ in 0..3 {
        for (t, s) in stacks.iter().enumerate() {
            for p in s.parts() {
                let Some((_, base, _, _)) = device(design, &design.parts[p].kind) else { continue };
                if let Some(b) = of(&base).filter(|b| *b != t) {
                    key[b] = key[b].min(key[t] - 0.5);
                }
            }
        }
    }
    if let Some(o) = of(&design.output.positive).filter(|o| stacks[*o].nodes.len() == 1) {
        key[o] = f64::INFINITY;
    }
    let mut cols: Vec<usize> = (0..stacks.len()).collect();
    cols.sort_by(|a, b| key[*a].total_cmp(&key[*b]).then(a.cmp(b)));
    cols
}

/// Each node's level and each stack's offset.
type Levels = BTreeMap<String, i32>;

/// Pairs of nodes that would like one level: a part between two stacks, and a transistor's
/// base with its body (given as the node just above the body, one level up).
fn wishes(design: &Design, net: &Net, stacks: &[Stack]) -> Vec<(String, String, i32)> {
    let of = |n: &str| stacks.iter().position(|s| s.nodes.iter().any(|m| m == n));
    let mut out = Vec::new();
    for (i, p) in design.parts.iter().enumerate() {
        if let Some((up, base, _, _)) = device(design, &p.kind) {
            // (base, node, d): level(base) = level(node) + d.
            if let Some(s) = stacks.iter().find(|s| s.parts().any(|q| q == i)) {
                let (anchor, d) = if s.above == Some(i) {
                    (s.nodes[0].clone(), -1)
                } else if s.below == Some(i) {
                    (s.nodes.last().cloned().unwrap_or_default(), 1)
                } else {
                    (up.clone(), 1)
                };
                if !net.is_rail(&base) && of(&base) != of(&anchor) {
                    out.push((base, anchor, d));
                }
            }
            continue;
        }
        let nodes = drawn_nodes(&p.kind);
        let (a, b) = (nodes[0], nodes[1]);
        if !net.is_rail(a) && !net.is_rail(b) && of(a) != of(b) {
            out.push((a.to_string(), b.to_string(), 0));
        }
    }
    out
}

/// Levels that satisfy as many wishes as possible, stack by stack: stacks with transistors
/// first, then each stack most tied to those already placed.
fn aligned_levels(design: &Design, net: &Net, stacks: &[Stack], columns: &[usize]) -> Levels {
    let wishes = wishes(design, net, stacks);
    let of = |n: &str| stacks.iter().position(|s| s.nodes.iter().any(|m| m == n));
    let mut offset: Vec<Option<i32>> = vec![None; stacks.len()];
    let rel =
        |s: usize, n: &str| 2 * stacks[s].nodes.iter().position(|m| m == n).unwrap_or(0) as i32;
    while offset.iter().any(|o| o.is_none()) {
        // Votes for each unplaced stack's offset from wishes tying it to placed stacks.
        let mut best: Option<(usize, usize, i32)> = None; // (votes, stack, offset)
        for &s in columns {
            if offset[s].is_some() {
                continue;
            }
            let mut votes: Vec<(i32, usize)> = Vec::new();
            for (a, b, d) in &wishes {
                let (Some(sa), Some(sb)) = (of(a), of(b)) else { continue };
                // level(a) = level(b) + d
                let proposal = if sa == s {
                    offset[sb].map(|ob| ob + rel(sb, b) + d - rel(s, a))
                } else if sb == s {
                    offset[sa].map(|oa| oa + rel(sa, a) - d - rel(s, b))
                } else {
                    None
                };
                if let Some(o) = proposal {
                    match votes.iter_mut().find(|v| v.0 == o) {
                        Some(v) => v.1 += 1,
                        None => votes.push((o, 1)),
                    }
                }
            }
            let top = votes.iter().fold(None::<(i32, usize)>, |acc, v| match acc {
                Some(a) if a.1 >= v.1 => Some(a),
                _ => Some(*v),
            });
            if let Some((o, n)) = top {
                if best.is_none_or(|b| n > b.0) {
                    best = Some((n, s, o));
                }
            }
        }
        let (s, o) = match best {
            Some((_, s, o)) => (s, o),
            None => {
                // Nothing tied to what is placed: the first device stack, else the first.
                let free = columns.iter().copied().filter(|s| offset[*s].is_none());
                let s = free
                    .clone()
                    .find(|s| stacks[*s].parts().next().is_some())
                    .or_else(|| free.clone().next())
                    .unwrap_or(0);
                (s, 0)
            }
        };
        offset[s] = Some(o);
    }
    let mut levels = Levels::new();
    for (s, stack) in stacks.iter().enumerate() {
        for (k, n) in stack.nodes.iter().enumerate() {
            levels.insert(n.clone(), offset[s].unwrap_or(0) + 2 * k as i32);
        }
    }
    normalise(net, stacks, levels)
}

/// Shifts the levels so the highest thing (a node, or a transistor hanging above one) sits two
/// levels under the lowest top rail.
fn normalise(net: &Net, stacks: &[Stack], mut levels: Levels) -> Levels {
    let highest = stacks
        .iter()
        .filter_map(|s| {
            let l = *levels.get(&s.nodes[0])?;
            Some(if s.above.is_some() { l - 1 } else { l })
        })
        .min()
        .unwrap_or(0);
    let shift = net.first_inner() - highest;
    for l in levels.values_mut() {
        *l += shift;
    }
    levels
}

/// Every node on a level of its own: stacks one under another, in column order.
fn staircase(net: &Net, stacks: &[Stack], columns: &[usize]) -> Levels {
    let mut levels = Levels::new();
    let mut next = 0;
    for &s in columns {
        let stack = &stacks[s];
        if stack.above.is_some() {
            next += 1;
        }
        for (k, n) in stack.nodes.iter().enumerate() {
            levels.insert(n.clone(), next + 2 * k as i32);
        }
        next += 2 * stack.nodes.len() as i32 + i32::from(stack.below.is_some());
    }
    normalise(net, stacks, levels)
}

/// Moves single nodes to other levels while that lowers the number of collisions.
fn mend(
    design: &Design,
    net: &Net,
    stacks: &[Stack],
    columns: &[usize],
    mut levels: Levels,
    mut drawing: Drawing,
    mut trouble: usize,
) -> (Drawing, usize) {
    let singles: Vec<String> = columns
        .iter()
        .filter(|s| stacks[**s].nodes.len() == 1 && stacks[**s].parts().next().is_none())
        .map(|s| stacks[*s].nodes[0].clone())
        .collect();
    for _ in 0..8 {
        let mut improved = false;
        for n in singles.iter().rev() {
            let (lo, hi) = (net.first_inner(), levels.values().copied().max().unwrap_or(0) + 2);
            let current = levels[n];
            for l in lo..=hi {
                if l == current {
                    continue;
                }
                let mut trial = levels.clone();
                trial.insert(n.clone(), l);
                let d = build(design, net, stacks, columns, &trial);
                let t = collisions(&d);
                if t < trouble {
                    (levels, drawing, trouble) = (trial, d, t);
                    improved = true;
                    if trouble == 0 {
                        return (drawing, trouble);
                    }
                }
            }
        }
        if !improved {
            break;
        }
    }
    (drawing, trouble)
}

/// One end of a placed part: its node and that node's level.
#[derive(Clone, Debug)]
struct End {
    node: String,
    level: i32,
}

/// A part or the source, placed in a column.
#[derive(Clone, Debug)]
enum Item {
    /// A stack's devices and links, drawn on one vertical line.
    Spine(usize),
    /// A two-terminal part standing between two levels.
    Upright { part: Option<usize>, upper: End, lower: End, flipped: bool },
    /// A two-terminal part lying on a level; each end drops to its node's level.
    Level { part: usize, left: End, right: End, level: i32, flipped: bool },
    /// A transistor outside any stack, its body level with its base.
    Loose(usize),
}

/// Builds the drawing for given levels.
fn build(
    design: &Design,
    net: &Net,
    stacks: &[Stack],
    columns: &[usize],
    levels: &Levels,
) -> Drawing {
    let of = |n: &str| stacks.iter().position(|s| s.nodes.iter().any(|m| m == n));
    let col = |n: &str| of(n).and_then(|s| columns.iter().position(|c| *c == s)).unwrap_or(0);
    let deepest = levels.values().copied().max().unwrap_or(net.first_inner());
    let ground = deepest + 2;
    let level = |n: &str| -> i32 {
        net.rail_level(n, ground).or_else(|| levels.get(n).copied()).unwrap_or(ground)
    };
    let end = |n: &str| End { node: n.to_string(), level: level(n) };
    let mut items: Vec<Vec<Item>> = vec![Vec::new(); columns.len()];
    // The source first, in the signal node's column.
    if !net.is_rail(&design.signal.positive) {
        let (a, b) = (end(&design.signal.positive), end(&design.signal.negative));
        let flipped = a.level > b.level;
        let (upper, lower) = if flipped { (b, a) } else { (a, b) };
        items[col(&design.signal.positive)].push(Item::Upright {
            part: None,
            upper,
            lower,
            flipped,
        });
    }
    for (k, &s) in columns.iter().enumerate() {
        if stacks[s].nodes.len() > 1 || stacks[s].parts().next().is_some() {
            items[k].push(Item::Spine(s));
        }
    }
    let mut level_items: Vec<Vec<Item>> = vec![Vec::new(); columns.len()];
    for (i, p) in design.parts.iter().enumerate() {
        if stacks.iter().any(|s| s.parts().any(|q| q == i)) {
            continue;
        }
        if device(design, &p.kind).is_some() {
            let base = &p.kind.nodes()[1];
            items[col(base)].push(Item::Loose(i));
            continue;
        }
        let nodes = drawn_nodes(&p.kind);
        let (a, b) = (end(nodes[0]), end(nodes[1]));
        let (ra, rb) = (net.is_rail(&a.node), net.is_rail(&b.node));
        let delta = (a.level - b.level).abs();
        if !ra && !rb && delta <= 1 && a.node != b.node {
            let flipped = col(&a.node) > col(&b.node);
            let (left, right) = if flipped { (b, a) } else { (a, b) };
            let k = col(&left.node);
            let at = left.level;
            level_items[k].push(Item::Level { part: i, left, right, level: at, flipped });
            continue;
        }
        let k = match (ra, rb) {
            (true, _) => col(&b.node),
            (_, true) => col(&a.node),
            _ => col(&a.node).max(col(&b.node)),
        };
        let flipped = a.level > b.level;
        let (upper, lower) = if flipped { (b, a) } else { (a, b) };
        if upper.level == lower.level {
            // Both ends on one node (or both on one rail): lie it one level below.
            let at = upper.level + 1;
            level_items[k].push(Item::Level {
                part: i,
                left: upper,
                right: lower,
                level: at,
                flipped,
            });
            continue;
        }
        items[k].push(Item::Upright { part: Some(i), upper, lower, flipped });
    }
    for (k, l) in level_items.into_iter().enumerate() {
        items[k].extend(l);
    }
    let mut pen =
        Pen { design, levels: &level, wires: Vec::new(), symbols: Vec::new(), x: MARGIN + 8.0 };
    for column in &items {
        pen.column(column, stacks);
        pen.x += 8.0;
    }
    pen.finish(design, net, ground)
}

/// Lays items out left to right.
struct Pen<'a, F: Fn(&str) -> i32> {
    design: &'a Design,
    levels: &'a F,
    wires: Vec<Wire>,
    symbols: Vec<Symbol>,
    /// The left edge of the next slot.
    x: f64,
}

fn y(level: i32) -> f64 {
    TOP + LEVEL * level as f64
}

impl<F: Fn(&str) -> i32> Pen<'_, F> {
    fn wire(&mut self, net: &str, a: Point, b: Point) {
        if a != b {
            self.wires.push(Wire { net: net.to_string(), a, b });
        }
    }

    fn name_of(&self, part: Option<usize>) -> (String, String, Shape) {
        match part {
            None => (
                "signal".into(),
                crate::notation::si(self.design.signal.resistance.nominal, "Ω", 3),
                Shape::Source,
            ),
            Some(i) => {
                let p = &self.design.parts[i];
                let shape = match &p.kind {
                    PartKind::Resistor { .. } => Shape::Resistor,
                    PartKind::Capacitor { .. } => Shape::Capacitor,
                    PartKind::Inductor { .. } => Shape::Inductor,
                    _ => Shape::Controlled,
                };
                (p.name.clone(), value_text(self.design, &p.kind), shape)
            }
        }
    }

    /// An upright two-terminal part at `x` between `upper` and `lower`, its body one level
    /// from the node end (next to the rail end's node when the upper end is a top rail).
    fn upright(
        &mut self,
        x: f64,
        part: Option<usize>,
        upper: &End,
        lower: &End,
        flipped: bool,
        top_rail: bool,
    ) -> f64 {
        let (name, value, shape) = self.name_of(part);
        let length = if part.is_none() { SOURCE } else { BODY };
        let (yu, yl) = (y(upper.level), y(lower.level));
        let centre = if lower.level - upper.level < 2 {
            (yu + yl) / 2.0
        } else if part.is_none() {
            yu + 8.0 + length / 2.0
        } else if top_rail {
            yl - LEVEL
        } else {
            yu + LEVEL
        };
        let (a, b) = ((x, centre - length / 2.0), (x, centre + length / 2.0));
        self.wire(&upper.node, (x, yu), a);
        self.wire(&lower.node, b, (x, yl));
        let terminals = if flipped {
            vec![(lower.node.clone(), b), (upper.node.clone(), a)]
        } else {
            vec![(upper.node.clone(), a), (lower.node.clone(), b)]
        };
        let gap = match shape {
            Shape::Source => 20.0,
            Shape::Capacitor | Shape::Controlled => 15.0,
            _ => 13.0,
        };
        let text = vec![
            Text { at: (x + gap, centre - 2.0), text: name.clone(), middle: false },
            Text { at: (x + gap, centre + 11.0), text: value.clone(), middle: false },
        ];
        let width = gap + text_width(&name).max(text_width(&value));
        self.symbols.push(Symbol { name, shape, terminals, text });
        width
    }

    /// A transistor with its collector–emitter line at `x`, its body centred on `centre`, its
    /// base terminal `lead` px left of the line.
    fn transistor(
        &mut self,
        x: f64,
        centre: f64,
        part: usize,
        lead: f64,
        gap: f64,
    ) -> (Point, Point, Point, f64) {
        let p = &self.design.parts[part];
        let Some((up, base, down, n)) = device(self.design, &p.kind) else {
            return ((x, centre), (x, centre), (x, centre), 0.0);
        };
        let top = (x, centre - HALF_DEVICE);
        let bottom = (x, centre + HALF_DEVICE);
        let b = (x - lead, centre);
        let shape = match p.kind {
            PartKind::Bjt { .. } => Shape::Bjt(n),
            _ => Shape::Mosfet(n),
        };
        // Terminal order as the netlist: collector/drain, base/gate, emitter/source.
        let (c, e) = if n { (top, bottom) } else { (bottom, top) };
        let (cn, en) = if n { (up.clone(), down.clone()) } else { (down.clone(), up.clone()) };
        let value = value_text(self.design, &p.kind);
        let text = vec![
            Text { at: (x + gap, centre - 2.0), text: p.name.clone(), middle: false },
            Text { at: (x + gap, centre + 11.0), text: value.clone(), middle: false },
        ];
        self.symbols.push(Symbol {
            name: p.name.clone(),
            shape,
            terminals: vec![(cn, c), (base.clone(), b), (en, e)],
            text,
        });
        (top, b, bottom, gap + text_width(&p.name).max(text_width(&value)))
    }

    /// Joins a transistor's base terminal to its node's level.
    fn base_drop(&mut self, base: &str, b: Point) {
        let target = y((self.levels)(base));
        self.wire(base, b, (b.0, target));
    }

    /// The vertical extent an item takes in its lane: (top y, bottom y, top node, bottom
    /// node), or `None` for an item that takes a slot of its own.
    fn span(&self, item: &Item, stacks: &[Stack]) -> Option<Span> {
        let at = |n: &str| y((self.levels)(n));
        match item {
            Item::Upright { part: Some(_), upper, lower, .. } => {
                Some((y(upper.level), y(lower.level), upper.node.clone(), lower.node.clone()))
            }
            Item::Spine(s) => {
                let stack = &stacks[*s];
                let part = |i: usize| device(self.design, &self.design.parts[i].kind);
                let top = match stack.above.and_then(part) {
                    Some((up, ..)) => up,
                    None => stack.nodes[0].clone(),
                };
                let bottom = match stack.below.and_then(part) {
                    Some((_, _, down, _)) => down,
                    None => stack.nodes.last().cloned().unwrap_or_default(),
                };
                Some((at(&top), at(&bottom), top, bottom))
            }
            _ => None,
        }
    }

    /// Places one column's items. A standing part shares a lane (one x) with the column's
    /// stack or with other standing parts wherever their extents meet only at a common node:
    /// the collector resistor stands right above its transistor, the two halves of a bias
    /// divider one over the other.
    fn column(&mut self, items: &[Item], stacks: &[Stack]) {
        let mut lanes: Vec<(Vec<&Item>, Vec<Span>)> = Vec::new();
        let mut rest = Vec::new();
        for item in items {
            let Some(span) = self.span(item, stacks) else {
                rest.push(item);
                continue;
            };
            let spine = matches!(item, Item::Spine(_));
            let lane = lanes.iter_mut().find(|(taken, spans)| {
                !spine
                    && !matches!(taken[0], Item::Upright { part: None, .. })
                    && spans.iter().all(|s| apart(s, &span))
            });
            match lane {
                Some((taken, spans)) => {
                    taken.push(item);
                    spans.push(span);
                }
                None => lanes.push((vec![item], vec![span])),
            }
        }
        // The source stands in a lane of its own.
        for item in items {
            if matches!(item, Item::Upright { part: None, .. }) {
                lanes.insert(0, (vec![item], Vec::new()));
            }
        }
        for (taken, _) in lanes {
            let x = match taken[0] {
                Item::Spine(s) => self.x + self.spine_lead(&stacks[*s]) + 4.0,
                _ => self.x + 10.0,
            };
            let mut widest: f64 = 0.0;
            for item in taken {
                let w = match item {
                    Item::Spine(s) => self.spine(&stacks[*s], x),
                    Item::Upright { part, upper, lower, flipped } => {
                        let top_rail = part.is_some() && upper.level < lower.level && {
                            let d = self.design;
                            d.supplies
                                .iter()
                                .any(|s| s.node == upper.node && s.voltage.nominal >= 0.0)
                        };
                        self.upright(x, *part, upper, lower, *flipped, top_rail)
                    }
                    _ => 0.0,
                };
                widest = widest.max(w);
            }
            self.x = x + widest + 10.0;
        }
        for item in rest {
            self.place(item);
        }
    }

    fn place(&mut self, item: &Item) {
        match item {
            Item::Level { part, left, right, level, flipped } => {
                let (name, value, shape) = self.name_of(Some(*part));
                let span = text_width(&name).max(text_width(&value)).max(BODY);
                let x0 = self.x + 10.0;
                let (a, b) =
                    ((x0 + (span - BODY) / 2.0, y(*level)), (x0 + (span + BODY) / 2.0, y(*level)));
                // An end on its node's level meets the node's line there; another end turns
                // to its node's level at the slot's edge.
                if left.level != *level {
                    self.wire(&left.node, a, (x0, y(*level)));
                    self.wire(&left.node, (x0, y(*level)), (x0, y(left.level)));
                }
                if right.level != *level {
                    self.wire(&right.node, b, (x0 + span, y(*level)));
                    self.wire(&right.node, (x0 + span, y(*level)), (x0 + span, y(right.level)));
                }
                let terminals = if *flipped {
                    vec![(right.node.clone(), b), (left.node.clone(), a)]
                } else {
                    vec![(left.node.clone(), a), (right.node.clone(), b)]
                };
                let mid = x0 + span / 2.0;
                let text = vec![
                    Text { at: (mid, y(*level) - 13.0), text: name.clone(), middle: true },
                    Text { at: (mid, y(*level) + 21.0), text: value, middle: true },
                ];
                self.symbols.push(Symbol { name, shape, terminals, text });
                self.x = x0 + span + 8.0;
            }
            Item::Loose(i) => {
                let x = self.x + BASE_LEAD + 4.0;
                let p = &self.design.parts[*i];
                let centre = y((self.levels)(p.kind.nodes()[1]));
                let Some((up, _, down, _)) = device(self.design, &p.kind) else { return };
                let (yu, yd) = (y((self.levels)(&up)), y((self.levels)(&down)));
                // A terminal whose node lies the other way steps out and turns back in a lane
                // of its own beside the device, so it never runs along its partner.
                let (turn_up, turn_down) = (yu > centre - HALF_DEVICE, yd < centre + HALF_DEVICE);
                let gap = if turn_up || turn_down { 30.0 } else { 8.0 };
                let (top, _, bottom, w) = self.transistor(x, centre, *i, BASE_LEAD, gap);
                if turn_up {
                    let out = (x, top.1 - 8.0);
                    self.wire(&up, top, out);
                    self.wire(&up, out, (x + 12.0, out.1));
                    self.wire(&up, (x + 12.0, out.1), (x + 12.0, yu));
                } else {
                    self.wire(&up, top, (x, yu));
                }
                if turn_down {
                    let out = (x, bottom.1 + 8.0);
                    self.wire(&down, bottom, out);
                    self.wire(&down, out, (x + 20.0, out.1));
                    self.wire(&down, (x + 20.0, out.1), (x + 20.0, yd));
                } else {
                    self.wire(&down, bottom, (x, yd));
                }
                self.x = x + w + 14.0;
            }
            Item::Spine(_) | Item::Upright { .. } => {}
        }
    }

    /// A stack on one line: its links between its nodes, hanging devices to the rails.
    /// Room a stack's line needs on its left for its devices' base leads.
    fn spine_lead(&self, stack: &Stack) -> f64 {
        let devices = stack
            .parts()
            .filter(|p| device(self.design, &self.design.parts[*p].kind).is_some())
            .count();
        BASE_LEAD + 10.0 * devices.saturating_sub(1) as f64
    }

    /// A stack on the line at `x`: its links between its nodes, hanging devices to the rails.
    /// Returns the width its text takes right of the line.
    fn spine(&mut self, stack: &Stack, x: f64) -> f64 {
        let mut widest: f64 = 0.0;
        let mut k = 0;
        // `centre`: the body's y; the middle of its two nodes unless it hangs from a rail.
        let mut device_at = |pen: &mut Self,
                             part: usize,
                             upper: (String, f64),
                             lower: (String, f64),
                             centre: f64|
         -> f64 {
            let (top, b, bottom, w) =
                pen.transistor(x, centre, part, BASE_LEAD + 10.0 * k as f64, 8.0);
            k += 1;
            pen.wire(&upper.0, (x, upper.1), top);
            pen.wire(&lower.0, bottom, (x, lower.1));
            let base = pen.design.parts[part].kind.nodes()[1].to_string();
            pen.base_drop(&base, b);
            w
        };
        let first = &stack.nodes[0];
        let last = stack.nodes.last().cloned().unwrap_or_default();
        if let Some(p) = stack.above {
            let Some((up, _, _, _)) = device(self.design, &self.design.parts[p].kind) else {
                return 0.0;
            };
            let yl = y((self.levels)(first));
            // The body one level above its node, whatever the rail's distance.
            let w = device_at(
                self,
                p,
                (up.clone(), y((self.levels)(&up))),
                (first.clone(), yl),
                yl - LEVEL,
            );
            widest = widest.max(w);
        }
        for (i, &p) in stack.links.iter().enumerate() {
            let (u, l) = (&stack.nodes[i], &stack.nodes[i + 1]);
            let (yu, yl) = (y((self.levels)(u)), y((self.levels)(l)));
            if device(self.design, &self.design.parts[p].kind).is_some() {
                let w = device_at(self, p, (u.clone(), yu), (l.clone(), yl), (yu + yl) / 2.0);
                widest = widest.max(w);
            } else {
                let nodes = drawn_nodes(&self.design.parts[p].kind);
                let flipped = nodes[0] != u.as_str();
                let upper = End { node: u.clone(), level: (self.levels)(u) };
                let lower = End { node: l.clone(), level: (self.levels)(l) };
                let w = self.upright(x, Some(p), &upper, &lower, flipped, false);
                widest = widest.max(w);
            }
        }
        if let Some(p) = stack.below {
            let Some((_, _, down, _)) = device(self.design, &self.design.parts[p].kind) else {
                return 0.0;
            };
            let yu = y((self.levels)(&last));
            let w = device_at(
                self,
                p,
                (last.clone(), yu),
                (down.clone(), y((self.levels)(&down))),
                yu + LEVEL,
            );
            widest = widest.max(w);
        }
        widest
    }

    /// Node lines, rails, dots and names.
    fn finish(mut self, design: &Design, net: &Net, ground: i32) -> Drawing {
        // Wide enough for the output node's line and its port past the last part.
        let width = self.x + MARGIN + 44.0;
        let mut labels = Vec::new();
        let mut ports = Vec::new();
        // Each inner node: a line through every point that ends on its level.
        for n in &net.inner {
            let l = (self.levels)(n);
            let yy = y(l);
            let mut xs: Vec<f64> = self
                .wires
                .iter()
                .filter(|w| w.net == *n)
                .flat_map(|w| [w.a, w.b])
                .chain(
                    self.symbols
                        .iter()
                        .flat_map(|s| s.terminals.iter().filter(|t| t.0 == *n).map(|t| t.1)),
                )
                .filter(|p| (p.1 - yy).abs() < 1e-9)
                .map(|p| p.0)
                .collect();
            xs.sort_by(f64::total_cmp);
            xs.dedup();
            // The name above the line, in the first gap wide enough for it (the output's
            // stub to its port is no gap: the port's circle sits there).
            let w = text_width(n) + 8.0;
            let named = xs.windows(2).find(|g| g[1] - g[0] >= w).map(|g| g[0] + 4.0);
            if n == &design.output.positive {
                let end = xs.last().copied().unwrap_or(self.x) + 30.0;
                xs.push(end);
                ports.push((end + 4.0, yy));
            }
            let (Some(&lo), Some(&hi)) = (xs.first(), xs.last()) else { continue };
            if hi > lo {
                self.wires.push(Wire { net: n.clone(), a: (lo, yy), b: (hi, yy) });
            }
            let at =
                named.unwrap_or(if n == &design.output.positive { hi + 12.0 } else { hi + 4.0 });
            labels.push(Text { at: (at, yy - 4.0), text: n.clone(), middle: false });
        }
        // Rails across the whole width, each named at its left end.
        for (i, (r, v)) in net.top.iter().enumerate() {
            let yy = y(i as i32);
            self.wires.push(Wire { net: r.clone(), a: (MARGIN, yy), b: (width - MARGIN, yy) });
            labels.push(Text {
                at: (MARGIN, yy - 5.0),
                text: format!("{r}  {}", crate::notation::si(*v, "V", 3)),
                middle: false,
            });
        }
        for (i, (r, v)) in net.bottom.iter().enumerate() {
            let yy = y(ground + i as i32);
            self.wires.push(Wire { net: r.clone(), a: (MARGIN, yy), b: (width - MARGIN, yy) });
            let text = if r == GROUND {
                r.clone()
            } else {
                format!("{r}  {}", crate::notation::si(*v, "V", 3))
            };
            labels.push(Text { at: (MARGIN, yy + 14.0), text, middle: false });
        }
        let wires = merged(self.wires);
        let dots = dots(&wires, &self.symbols);
        let height = y(ground + net.bottom.len() as i32 - 1) + 26.0;
        Drawing { width, height, wires, dots, symbols: self.symbols, labels, ports }
    }
}

/// The wires with each node's overlapping collinear pieces joined into one.
fn merged(wires: Vec<Wire>) -> Vec<Wire> {
    let key = |w: &Wire| -> (String, bool, i64) {
        let level = (w.a.1 - w.b.1).abs() < 1e-9;
        let at = if level { w.a.1 } else { w.a.0 };
        (w.net.clone(), level, (at * 100.0).round() as i64)
    };
    let mut groups: BTreeMap<(String, bool, i64), Vec<(f64, f64)>> = BTreeMap::new();
    let mut fixed: BTreeMap<(String, bool, i64), f64> = BTreeMap::new();
    for w in &wires {
        let k = key(w);
        let level = k.1;
        let (p, q) = if level { (w.a.0, w.b.0) } else { (w.a.1, w.b.1) };
        fixed.insert(k.clone(), if level { w.a.1 } else { w.a.0 });
        groups.entry(k).or_default().push((p.min(q), p.max(q)));
    }
    let mut out = Vec::new();
    for (k, mut spans) in groups {
        spans.sort_by(|a, b| a.0.total_cmp(&b.0).then(a.1.total_cmp(&b.1)));
        let at = fixed[&k];
        let mut joined: Vec<(f64, f64)> = Vec::new();
        for (lo, hi) in spans {
            match joined.last_mut() {
                // Overlapping pieces join; pieces that only meet end to end stay two, so a
                // junction there is still seen (and dotted).
                Some(last) if lo < last.1 - 1e-9 => last.1 = last.1.max(hi),
                _ => joined.push((lo, hi)),
            }
        }
        for (lo, hi) in joined {
            let (a, b) = if k.1 { ((lo, at), (hi, at)) } else { ((at, lo), (at, hi)) };
            out.push(Wire { net: k.0.clone(), a, b });
        }
    }
    out
}

/// A lane's vertical extent: top y, bottom y and the nodes at those ends.
type Span = (f64, f64, String, String);

/// Whether two extents in one lane stay clear of each other, touching only at a common node.
fn apart(a: &Span, b: &Span) -> bool {
    let eps = 1e-9;
    if a.1 < b.0 - eps || b.1 < a.0 - eps {
        return true;
    }
    if (a.1 - b.0).abs() < eps && a.0 < b.0 {
        return a.3 == b.2;
    }
    if (b.1 - a.0).abs() < eps && b.0 < a.0 {
        return b.3 == a.2;
    }
    false
}

/// Whether `p` lies on the segment `w` (ends included).
fn on(p: Point, w: &Wire) -> bool {
    let eps = 1e-6;
    let (lo_x, hi_x) = (w.a.0.min(w.b.0), w.a.0.max(w.b.0));
    let (lo_y, hi_y) = (w.a.1.min(w.b.1), w.a.1.max(w.b.1));
    p.0 >= lo_x - eps && p.0 <= hi_x + eps && p.1 >= lo_y - eps && p.1 <= hi_y + eps && {
        // Segments are horizontal or vertical.
        (w.a.0 - w.b.0).abs() < eps || (w.a.1 - w.b.1).abs() < eps
    }
}

/// Junction dots: where three or more wire ends (and terminals) meet, counting a wire that
/// passes through as two.
fn dots(wires: &[Wire], symbols: &[Symbol]) -> Vec<Point> {
    let mut points: Vec<Point> = wires.iter().flat_map(|w| [w.a, w.b]).collect();
    points.sort_by(|a, b| a.0.total_cmp(&b.0).then(a.1.total_cmp(&b.1)));
    points.dedup();
    let terminals: Vec<Point> =
        symbols.iter().flat_map(|s| s.terminals.iter().map(|t| t.1)).collect();
    points
        .into_iter()
        .filter(|p| {
            let degree: usize = wires
                .iter()
                .filter(|w| on(*p, w))
                .map(|w| if w.a == *p || w.b == *p { 1 } else { 2 })
                .sum::<usize>()
                + terminals.iter().filter(|t| **t == *p).count();
            degree >= 3
        })
        .collect()
}

/// How many faults the drawing has: wires of two nodes that touch, and wires through a body.
fn collisions(d: &Drawing) -> usize {
    let mut faults = 0;
    for (i, w) in d.wires.iter().enumerate() {
        for v in &d.wires[i + 1..] {
            if v.net != w.net && (on(v.a, w) || on(v.b, w) || on(w.a, v) || on(w.b, v)) {
                faults += 1;
            }
        }
    }
    for s in &d.symbols {
        let (lo, hi) = body_box(s);
        for w in &d.wires {
            let (wx0, wx1) = (w.a.0.min(w.b.0), w.a.0.max(w.b.0));
            let (wy0, wy1) = (w.a.1.min(w.b.1), w.a.1.max(w.b.1));
            if wx1 > lo.0 && wx0 < hi.0 && wy1 > lo.1 && wy0 < hi.1 {
                faults += 1;
            }
        }
        // Text of a part over a wire is a fault too: the value must be readable.
        for t in &s.text {
            let w = text_width(&t.text);
            let x0 = if t.middle { t.at.0 - w / 2.0 } else { t.at.0 };
            let (tx0, tx1, ty0, ty1) = (x0, x0 + w, t.at.1 - 9.0, t.at.1 + 2.0);
            for wire in &d.wires {
                let (wx0, wx1) = (wire.a.0.min(wire.b.0), wire.a.0.max(wire.b.0));
                let (wy0, wy1) = (wire.a.1.min(wire.b.1), wire.a.1.max(wire.b.1));
                if wx1 > tx0 && wx0 < tx1 && wy1 > ty0 && wy0 < ty1 {
                    faults += 1;
                }
            }
        }
    }
    faults
}

/// The box a symbol's body fills, shrunk by a pixel so wires ending on its terminals do not
/// count as crossing it.
fn body_box(s: &Symbol) -> (Point, Point) {
    let xs = s.terminals.iter().map(|t| t.1.0);
    let ys = s.terminals.iter().map(|t| t.1.1);
    let (mut x0, mut x1) =
        (xs.clone().fold(f64::INFINITY, f64::min), xs.fold(f64::NEG_INFINITY, f64::max));
    let (mut y0, mut y1) =
        (ys.clone().fold(f64::INFINITY, f64::min), ys.fold(f64::NEG_INFINITY, f64::max));
    let half = match s.shape {
        Shape::Source => 14.0,
        Shape::Bjt(_) | Shape::Mosfet(_) => 0.0,
        _ => 10.0,
    };
    if (x1 - x0).abs() < 1e-9 {
        x0 -= half;
        x1 += half;
    }
    if (y1 - y0).abs() < 1e-9 {
        y0 -= half;
        y1 += half;
    }
    ((x0 + 1.0, y0 + 1.0), (x1 - 1.0, y1 - 1.0))
}
