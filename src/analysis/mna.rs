//! Modified nodal analysis: the matrices G and C of (G + sC)x = b·u, y = cᵀx.
//!
//! In: a [`LinearNetwork`] and what to do with each capacitor (keep, short, open). Out: an
//! [`Mna`] with G and C in compressed-column form (Ho, Ruehli & Brennan, IEEE TCAS 22(6),
//! 1975), sized by the parts rather than by the square of the nodes. Unknowns
//! are the node voltages (ground excluded), then branch currents of voltage-defined
//! elements: the source, grounded supplies, voltage amplifiers, inductors, shorted
//! capacitors. No solving here.

use crate::analysis::matrix::Matrix;
use crate::circuit::small_signal::{Linear, LinearNetwork};
use crate::union_find::UnionFind;

/// What a capacitor is in one network.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum CapState {
    /// In the network, in C.
    Present,
    /// Replaced by a wire (a 0 V branch).
    Short,
    /// Removed.
    Open,
}

/// The assembled system.
#[derive(Clone, Debug)]
pub struct Mna {
    /// Conductance part.
    pub g: Matrix,
    /// Capacitance (and −inductance) part.
    pub c: Matrix,
    /// Input column (the source EMF).
    pub b: Vec<f64>,
    /// Output row: y = v(out_p) − v(out_n).
    pub out: Vec<f64>,
    /// Number of node unknowns (ground excluded).
    pub nodes: usize,
    /// Branch unknown of each element that has one, by element index.
    pub branch: Vec<Option<usize>>,
}

impl Mna {
    /// Number of unknowns.
    pub fn size(&self) -> usize {
        self.b.len()
    }

    /// The unknown of a node (None for ground).
    pub fn row(node: usize) -> Option<usize> {
        node.checked_sub(1)
    }

    /// The ±1 incidence vector of a two-terminal element between `a` and `b`.
    pub fn incidence(&self, a: usize, b: usize) -> Vec<f64> {
        let mut d = vec![0.0; self.size()];
        if let Some(r) = Mna::row(a) {
            d[r] += 1.0;
        }
        if let Some(r) = Mna::row(b) {
            d[r] -= 1.0;
        }
        d
    }
}

/// Options of one assembly.
#[derive(Clone, Copy, Debug, Default)]
pub struct Assembly {
    /// Leave the output's load resistance out (for the output resistance).
    pub without_load: bool,
    /// Treat inductors as wires (the time-constant view, in which only capacitors store
    /// energy; the exact response keeps them).
    pub inductors_shorted: bool,
}

/// Assembles the network with each capacitor as `state` says (by element index).
///
/// Long because it is one match over the element kinds, each arm the stamp of that element
/// into G, C and the branch rows; split, the stamps would lose sight of the shared unknown
/// numbering they all write into.
pub fn assemble(net: &LinearNetwork, state: impl Fn(usize) -> CapState, opts: Assembly) -> Mna {
    let nodes = net.nodes.len() - 1;
    let mut next = nodes;
    let mut branch = vec![None; net.elements.len()];
    let source_branch = next;
    next += 1;
    // Ideal wires (grounded supplies, shorted capacitors) joined so far: a short across
    // nodes already joined would close a loop of 0 V branches and make G singular, and
    // changes nothing, so it is left out (its branch stays None).
    let mut wires = UnionFind::new(net.nodes.len());
    for el in &net.elements {
        if let Linear::Grounded { node } = el {
            wires.join(*node, 0);
        }
    }
    // A supply node is ground to a small signal: its KCL row and column would couple every
    // part on the rail (one dense row that defeats a sparse ordering), so stamps into it are
    // left out. It keeps its unknown, held at 0 V by the supply's branch row; the supply's
    // branch current then balances only what is injected at the rail (zero for the source),
    // and every adjoint and injected solution is unchanged (both are 0 at the rail).
    let mut railed = wires.clone();
    let on_rail = |n: usize| n != 0 && railed.find(n) == railed.find(0);
    let rail: Vec<bool> = (0..net.nodes.len()).map(on_rail).collect();
    for (i, el) in net.elements.iter().enumerate() {
        let needs = match el {
            Linear::Grounded { .. } | Linear::Vcvs { .. } | Linear::Inductor { .. } => true,
            Linear::Capacitor { a, b, .. } if state(i) == CapState::Short => wires.join(*a, *b),
            _ => false,
        };
        if needs {
            branch[i] = Some(next);
            next += 1;
        }
    }
    let size = next;
    // At most six stamps a part (a voltage amplifier), and four for the source's branch.
    let mut g: Vec<(usize, usize, f64)> = Vec::with_capacity(6 * net.elements.len() + 4);
    let mut c: Vec<(usize, usize, f64)> = Vec::with_capacity(4 * net.elements.len());
    let mut b = vec![0.0; size];
    let row = |n: usize| if rail[n] { None } else { Mna::row(n) };
    let put = |m: &mut Vec<(usize, usize, f64)>, r: Option<usize>, k: Option<usize>, v: f64| {
        if let (Some(r), Some(k)) = (r, k) {
            m.push((r, k, v));
        }
    };
    // A voltage-defined branch between x and y: KCL incidence and the branch row.
    let incidence = |g: &mut Vec<(usize, usize, f64)>, br: usize, x: usize, y: usize| {
        put(g, row(x), Some(br), 1.0);
        put(g, row(y), Some(br), -1.0);
        put(g, Some(br), row(x), 1.0);
        put(g, Some(br), row(y), -1.0);
    };
    let (emf, ret) = net.source;
    incidence(&mut g, source_branch, emf, ret);
    b[source_branch] = 1.0;
    for (i, el) in net.elements.iter().enumerate() {
        match *el {
            Linear::Conductance { a, b: bb, g: value, .. } => {
                if opts.without_load && net.load_resistance == Some(i) {
                    continue;
                }
                put(&mut g, row(a), row(a), value);
                put(&mut g, row(bb), row(bb), value);
                put(&mut g, row(a), row(bb), -value);
                put(&mut g, row(bb), row(a), -value);
            }
            Linear::Capacitor { a, b: bb, c: value, .. } => match state(i) {
                CapState::Present => {
                    put(&mut c, row(a), row(a), value);
                    put(&mut c, row(bb), row(bb), value);
                    put(&mut c, row(a), row(bb), -value);
                    put(&mut c, row(bb), row(a), -value);
                }
                CapState::Short => {
                    if let Some(br) = branch[i] {
                        incidence(&mut g, br, a, bb);
                    }
                }
                CapState::Open => {}
            },
            Linear::Inductor { a, b: bb, l, .. } => {
                let br = branch[i].expect("branch");
                incidence(&mut g, br, a, bb);
                if !opts.inductors_shorted {
                    c.push((br, br, -l)); // v_a − v_b − sL·i = 0
                }
            }
            Linear::Vccs { a, b: bb, p, n, gm, .. } => {
                put(&mut g, row(a), row(p), gm);
                put(&mut g, row(a), row(n), -gm);
                put(&mut g, row(bb), row(p), -gm);
                put(&mut g, row(bb), row(n), gm);
            }
            Linear::Vcvs { a, b: bb, p, n, gain, .. } => {
                let br = branch[i].expect("branch");
                incidence(&mut g, br, a, bb);
                put(&mut g, Some(br), row(p), -gain);
                put(&mut g, Some(br), row(n), gain);
            }
            Linear::Grounded { node } => {
                let br = branch[i].expect("branch");
                let r = Mna::row(node);
                put(&mut g, r, Some(br), 1.0);
                put(&mut g, Some(br), r, 1.0);
            }
        }
    }
    let mut out = vec![0.0; size];
    if let Some(r) = Mna::row(net.output.0) {
        out[r] += 1.0;
    }
    if let Some(r) = Mna::row(net.output.1) {
        out[r] -= 1.0;
    }
    Mna { g: Matrix::from_stamps(size, g), c: Matrix::from_stamps(size, c), b, out, nodes, branch }
}
