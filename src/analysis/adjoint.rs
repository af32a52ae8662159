//! The gradient of every figure with respect to every element value of the linear network,
//! by the adjoint method (Director & Rohrer, IEEE Trans. Circuit Theory 16(3), 1969).
//!
//! For a network A(s)·x = b, y = cᵀx, the change of y with any element value θ is
//! ∂y/∂θ = −λᵀ (∂A/∂θ) x with Aᵀλ = c: one extra (transposed) solve per figure and
//! frequency gives the derivative for all elements at once, where differences need two
//! analyses per element. ∂A/∂θ of each element is its own stamp (see `mna.rs`), so
//! λᵀ(∂A/∂θ)x is a product of two branch differences. The figures follow by calculus:
//! |H| by d|H| = Re(H̄·dH)/|H|; an exact cut-off f_c, defined by |H(f_c)| = |A_mid|/√2, by the
//! implicit-function theorem, df_c = −(∂|H|/∂θ − ∂|A_mid|/∂θ /√2)/(∂|H|/∂f) with
//! ∂H/∂s = −λᵀCx; the band's flatness through its extremes, which do not move to first
//! order (the envelope theorem); R_in and R_out as ratios of solutions.
//!
//! In: the linear network and the figures of one evaluation. Out: [`Gradients`], each a
//! vector over the network's elements (zero for elements with no value). No I/O.

use std::f64::consts::{PI, SQRT_2};

use faer::linalg::solvers::Solve;
use faer::{Mat, c64};

use crate::analysis::mna::{self, Assembly, CapState, Mna};
use crate::analysis::response::BandResponse;
use crate::circuit::small_signal::{Linear, LinearNetwork};
use crate::design::Band;

/// ∂F/∂θ_k for each figure F and element k (`None` where the figure does not exist or its
/// derivative cannot be formed, e.g. a cut-off where |H| does not change with frequency).
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Gradients {
    /// |mid-band gain| (the exact gain at the band's centre when the design states a band).
    pub gain: Option<Vec<f64>>,
    /// Gain flatness over the band, dB.
    pub flatness_db: Option<Vec<f64>>,
    /// Exact upper cut-off, Hz.
    pub f_high: Option<Vec<f64>>,
    /// Exact lower cut-off, Hz.
    pub f_low: Option<Vec<f64>>,
    /// Input resistance, Ω.
    pub r_in: Option<Vec<f64>>,
    /// Output resistance, Ω.
    pub r_out: Option<Vec<f64>>,
}

/// What one evaluation found, for its gradients.
pub struct Inputs<'a> {
    /// The linear network.
    pub lin: &'a LinearNetwork,
    /// Each element's state in the mid-band network (capacitors shorted or open).
    pub mid_states: &'a [CapState],
    /// The operating band and |H| across it, when the design states one.
    pub band: Option<(Band, BandResponse)>,
    /// Exact cut-offs, Hz.
    pub f_high: Option<f64>,
    /// Exact lower cut-off, Hz.
    pub f_low: Option<f64>,
    /// Whether the figures exist (input and output resistance).
    pub has_r_in: bool,
    /// Whether the output resistance exists.
    pub has_r_out: bool,
}

/// A solved network: A = G + sC at one s, its solution x for the source (or another
/// right-hand side) and the adjoint λ for the output row (or another functional).
struct Solved {
    x: Vec<c64>,
    lambda: Vec<c64>,
}

/// Solves (G + sC)x = rhs and (G + sC)ᵀλ = functional with one factorisation: sparse for a
/// large mostly-zero network (as the response is), dense LU with partial pivoting otherwise.
fn solve(m: &Mna, s: c64, rhs: &[f64], functional: &[f64]) -> Option<Solved> {
    if let Some(sparse) = crate::analysis::response::sparse_form(&m.g, &m.c) {
        let (x, lambda) = sparse.solve_pair(s, rhs, functional)?;
        return Some(Solved { x, lambda });
    }
    let n = m.size();
    let (g, c) = (m.g.dense(), m.c.dense());
    let a = Mat::<c64>::from_fn(n, n, |i, j| c64::new(g[(i, j)], 0.0) + s * c[(i, j)]);
    let column = |v: &[f64]| Mat::<c64>::from_fn(n, 1, |i, _| c64::new(v[i], 0.0));
    // One factorisation serves both: Aᵀλ = c is solved with A's own LU.
    let lu = a.partial_piv_lu();
    let x = lu.solve(column(rhs));
    let lambda = lu.solve_transpose(column(functional));
    let x: Vec<c64> = (0..n).map(|i| x[(i, 0)]).collect();
    let lambda: Vec<c64> = (0..n).map(|i| lambda[(i, 0)]).collect();
    x.iter().chain(&lambda).all(|v| v.is_finite()).then_some(Solved { x, lambda })
}

/// λᵀ (∂A/∂θ_k) x for every element k of `lin` in the network `m` (assembled with `states`
/// and `opts`) at complex frequency `s`. The derivative of y = cᵀx is minus this.
fn contractions(
    lin: &LinearNetwork,
    m: &Mna,
    states: &[CapState],
    opts: Assembly,
    s: c64,
    sol: &Solved,
) -> Vec<c64> {
    let zero = c64::new(0.0, 0.0);
    let at = |v: &[c64], node: usize| Mna::row(node).map_or(zero, |r| v[r]);
    let across = |v: &[c64], a: usize, b: usize| at(v, a) - at(v, b);
    let (x, l) = (&sol.x, &sol.lambda);
    lin.elements
        .iter()
        .enumerate()
        .map(|(k, el)| match *el {
            Linear::Conductance { a, b, .. } => {
                if opts.without_load && lin.load_resistance == Some(k) {
                    zero
                } else {
                    across(l, a, b) * across(x, a, b)
                }
            }
            Linear::Capacitor { a, b, .. } => match states[k] {
                CapState::Present => s * across(l, a, b) * across(x, a, b),
                CapState::Short | CapState::Open => zero,
            },
            // The branch row reads v_a − v_b − sL·i = 0.
            Linear::Inductor { .. } => match m.branch[k] {
                Some(r) if !opts.inductors_shorted => -s * l[r] * x[r],
                _ => zero,
            },
            Linear::Vccs { a, b, p, n, .. } => across(l, a, b) * across(x, p, n),
            // The branch row reads v_a − v_b − gain·(v_p − v_n) = 0.
            Linear::Vcvs { p, n, .. } => match m.branch[k] {
                Some(r) => -l[r] * across(x, p, n),
                None => zero,
            },
            Linear::Grounded { .. } => zero,
        })
        .collect()
}

/// λᵀ C x: with the sign flipped, ∂y/∂s.
fn c_contraction(m: &Mna, sol: &Solved) -> c64 {
    m.c.entries().fold(c64::new(0.0, 0.0), |acc, (i, j, c)| acc + sol.lambda[i] * c * sol.x[j])
}

/// |H| at `f` on the full network with its gradient over the elements and its derivative in
/// frequency: (|H|, ∂|H|/∂θ, ∂|H|/∂f).
fn magnitude(
    lin: &LinearNetwork,
    full: &Mna,
    states: &[CapState],
    f: f64,
) -> Option<(f64, Vec<f64>, f64)> {
    let s = c64::new(0.0, 2.0 * PI * f);
    let sol = solve(full, s, &full.b, &full.out)?;
    let h: c64 = sol.x.iter().zip(&full.out).map(|(x, o)| x * *o).sum();
    let size = h.norm();
    if size <= 0.0 || !size.is_finite() {
        return None;
    }
    let by_element = contractions(lin, full, states, Assembly::default(), s, &sol)
        .into_iter()
        .map(|k| (h.conj() * -k).re / size)
        .collect();
    let dh_df = -c_contraction(full, &sol) * c64::new(0.0, 2.0 * PI);
    Some((size, by_element, (h.conj() * dh_df).re / size))
}

/// The gradients of every figure the evaluation found.
pub fn gradients(inp: &Inputs) -> Gradients {
    let lin = inp.lin;
    let zero = c64::new(0.0, 0.0);
    let mid_states = inp.mid_states;
    let mid = mna::assemble(lin, |i| mid_states[i], Assembly::default());
    let Some(mid_sol) = solve(&mid, zero, &mid.b, &mid.out) else {
        return Gradients::default();
    };
    // The idealised mid-band gain y = cᵀx and ∂|y|/∂θ (the reference of both cut-offs).
    let y: f64 = mid_sol.x.iter().zip(&mid.out).map(|(x, o)| x.re * o).sum();
    let sign = y.signum();
    let d_mid: Vec<f64> = contractions(lin, &mid, mid_states, Assembly::default(), zero, &mid_sol)
        .into_iter()
        .map(|k| -sign * k.re)
        .collect();
    let present = vec![CapState::Present; lin.elements.len()];
    let full = mna::assemble(lin, |_| CapState::Present, Assembly::default());
    let cutoff = |f: Option<f64>| -> Option<Vec<f64>> {
        let (_, d_h, d_f) = magnitude(lin, &full, &present, f?)?;
        (d_f != 0.0 && d_f.is_finite())
            .then(|| d_h.iter().zip(&d_mid).map(|(dh, dm)| -(dh - dm / SQRT_2) / d_f).collect())
    };
    let band_gain = inp.band.map(|(b, _)| magnitude(lin, &full, &present, b.centre_hz()));
    let gain = match band_gain {
        Some(centre) => centre.map(|(_, d, _)| d),
        None => Some(d_mid.clone()),
    };
    let flatness_db = inp.band.and_then(|(_, r)| {
        let (hi, d_hi, _) = magnitude(lin, &full, &present, r.highest.0)?;
        let (lo, d_lo, _) = magnitude(lin, &full, &present, r.lowest.0)?;
        let to_db = 20.0 / std::f64::consts::LN_10;
        Some(d_hi.iter().zip(&d_lo).map(|(a, b)| to_db * (a / hi - b / lo)).collect())
    });
    Gradients {
        gain,
        flatness_db,
        f_high: cutoff(inp.f_high),
        f_low: cutoff(inp.f_low),
        r_in: inp.has_r_in.then(|| input_resistance(lin, &mid, mid_states, &mid_sol)).flatten(),
        r_out: inp.has_r_out.then(|| output_resistance(lin, mid_states)).flatten(),
    }
}

/// ∂R_in/∂θ: R_in = v_in/i_in with v_in = v(sp) − v(ret) and i_in = g_s·(v(emf) − v(sp)),
/// both linear in the mid-band solution; g_s, the source's conductance, also enters
/// directly.
fn input_resistance(
    lin: &LinearNetwork,
    mid: &Mna,
    states: &[CapState],
    sol: &Solved,
) -> Option<Vec<f64>> {
    let (sp, gs) = (lin.source_terminal.0, 1.0 / lin.source_terminal.1);
    let (emf, ret) = lin.source;
    let v = |node: usize| Mna::row(node).map_or(0.0, |r| sol.x[r].re);
    let (num, den) = (v(sp) - v(ret), v(emf) - v(sp));
    if den == 0.0 {
        return None;
    }
    let zero = c64::new(0.0, 0.0);
    let d = |p, n| -> Option<Vec<f64>> {
        let s = solve(mid, zero, &mid.b, &mid.incidence(p, n))?;
        Some(
            contractions(lin, mid, states, Assembly::default(), zero, &s)
                .iter()
                .map(|k| -k.re)
                .collect(),
        )
    };
    let (d_num, d_den) = (d(sp, ret)?, d(emf, sp)?);
    let r_in = num / (gs * den);
    let source = lin
        .elements
        .iter()
        .position(|e| matches!(e, Linear::Conductance { a, b, .. } if *a == emf && *b == sp));
    Some(
        d_num
            .iter()
            .zip(&d_den)
            .enumerate()
            .map(|(k, (dn, dd))| {
                let implicit = (dn * den - num * dd) / (gs * den * den);
                if Some(k) == source { implicit - r_in / gs } else { implicit }
            })
            .collect(),
    )
}

/// ∂R_out/∂θ: R_out = cᵀ A_u⁻¹ e_out for the mid-band network without its load, a unit
/// current into the output.
fn output_resistance(lin: &LinearNetwork, states: &[CapState]) -> Option<Vec<f64>> {
    let opts = Assembly { without_load: true, ..Assembly::default() };
    let unloaded = mna::assemble(lin, |i| states[i], opts);
    let inject = unloaded.incidence(lin.output.0, lin.output.1);
    let zero = c64::new(0.0, 0.0);
    let sol = solve(&unloaded, zero, &inject, &unloaded.out)?;
    Some(contractions(lin, &unloaded, states, opts, zero, &sol).iter().map(|k| -k.re).collect())
}
