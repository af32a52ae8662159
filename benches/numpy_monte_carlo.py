#!/usr/bin/env python3
"""Independent NumPy reference of the Monte Carlo "full evaluation" of rx-preamp-ce.

What it is: a self-contained re-implementation, written from the equations alone and sharing
no code with the Rust tool, of the figures one Monte Carlo run of designs/rx-preamp-ce.yaml
produces: the operating point (batched Newton), the exact small-signal transfer H(s) =
V(out)/E with every capacitor present, the mid-band gain at the band centre, the gain flatness
across the band, the exact -3 dB frequencies, the port resistances and Q1's collector current.
Everything is vectorised across samples (and frequencies): each Newton step and each
frequency point is one np.linalg.solve on a (samples, [freqs,] n, n) stack. It exists to put
a number on the speed of the Rust tool against a careful NumPy script, and to cross-check it.

Equations (cited from memory): Gray, Hurst, Lewis & Meyer, "Analysis and Design of Analog
Integrated Circuits", ch. 1 -- the transport Ebers-Moll model with the Early effect, the
hybrid-pi small-signal model (gm, r_pi, r_o, r_x, C_pi = tau_F gm + C_je, C_mu) and the
depletion capacitance C0 / (1 - V/phi)^m. The small-signal elements are the exact Jacobian
of the large-signal currents at the operating point.

Definitions: R_in and R_out come from the idealised mid-band network (coupling and bypass
capacitors shorted, device and load capacitors open), so they are real by construction;
R_in excludes the source's own 50 ohm, R_out the load resistor. By default (as briefed) the
-3 dB points are referred to the exact |H| at the band centre, the supply is +-2 % and the
load is exact. --as-tool switches to the tool's own reading of the design: -3 dB referred
to the idealised mid-band gain (the usual definition), supply +-5 % (the supply's own
tolerance beats the 2 % default), load R +-1 % uniform and load C +-10 % gaussian.

Run (from the repository root):
    python3 benches/numpy_monte_carlo.py [runs]     # Monte Carlo, default 2000 runs
    python3 benches/numpy_monte_carlo.py --nominal  # one evaluation at nominal values
    python3 benches/numpy_monte_carlo.py --as-tool [runs]
BLAS/OpenMP threads are forced to 1 below, before numpy is imported: one core.
"""
import os

for _var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ[_var] = "1"  # must precede the numpy import to take effect

import argparse  # noqa: E402
import time  # noqa: E402

import numpy as np  # noqa: E402

# Physics: exact SI constants, 27 degC.
VT = 1.380649e-23 * 300.15 / 1.602176634e-19  # thermal voltage kT/q, V
GMIN = 1e-12  # S, kept across each junction

# Design values, copied from designs/rx-preamp-ce.yaml (revision C).
RS = 50.0                    # signal source resistance, exact
F_LO, F_HI = 150e3, 500e3    # operating band, Hz
F_MID = np.sqrt(F_LO * F_HI)  # band centre, Hz
NOMINAL = dict(RB1=18e3, RB2=4.7e3, RE1=39.0, RE2=330.0, RC=1e3, RL=1e3,
               C1=100e-9, CE=2.2e-6, C3=220e-9, CL=250e-12, VCC=12.0, BF=110.0)
# Tolerances as briefed: (fraction, 'u' uniform on +-t | 'g' gaussian with sigma = t/3).
TOL = dict(RB1=(0.05, "u"), RB2=(0.05, "u"), RE1=(0.01, "u"), RE2=(0.01, "u"),
           RC=(0.01, "u"), C1=(0.10, "g"), CE=(0.20, "g"), C3=(0.10, "g"),
           VCC=(0.02, "u"), BF=(0.30, "u"))
# As the tool reads the file: the supply's own `tolerance: 5 %` overrides the 2 % default,
# and the load parts take the resistor and capacitor defaults.
TOL_AS_TOOL = dict(TOL, VCC=(0.05, "u"), RL=(0.01, "u"), CL=(0.10, "g"))

# Model RFN1 (npn); beta_F is in NOMINAL because it is toleranced.
BR, VA, IS, RX, TF = 1.0, 70.0, 0.4e-15, 25.0, 18e-12
CJE = (1.1e-12, 0.8, 0.33)    # C0, phi, m of the emitter junction
CJC = (0.45e-12, 0.6, 0.33)   # and of the collector junction

# Unknown node voltages; vcc is an ideal supply (known at DC, ground for AC), BP = b'.
IN, BASE, BP, COLL, EMIT, EMIT2, OUT = range(7)
N = 7


def stamp(m, a, b, y):
    """Add admittance y (batched) between nodes a and b; None is ground."""
    for i, j, sign in ((a, a, 1), (b, b, 1), (a, b, -1), (b, a, -1)):
        if i is not None and j is not None:
            m[..., i, j] += sign * y


def bjt(vbe, vbc, bf):
    """Base and collector currents (into b' and c) and their partial derivatives."""
    ef, er = np.exp(vbe / VT), np.exp(vbc / VT)
    it = IS * (ef - er)
    early = 1.0 + (vbe - vbc) / VA
    ic = it * early - IS / BR * (er - 1.0) - GMIN * vbc
    ib = IS / bf * (ef - 1.0) + IS / BR * (er - 1.0) + GMIN * (vbe + vbc)
    dic = (IS * ef / VT * early + it / VA,                                # d/dvbe
           -IS * er / VT * early - it / VA - IS / BR * er / VT - GMIN)     # d/dvbc
    dib = (IS / bf * ef / VT + GMIN, IS / BR * er / VT + GMIN)
    return ib, ic, dib, dic


def stamp_bjt(m, dib, dic):
    """The device Jacobian on (b', c, e). With vbe = v_b' - v_e, vbc = v_b' - v_c this is
    the hybrid-pi: gm = dic_be + dic_bc, go = -dic_bc, g_pi = dib_be + dib_bc and the
    reverse transconductance -dib_bc from (c, e) into b'; the emitter takes -(ib + ic)."""
    die = (-dib[0] - dic[0], -dib[1] - dic[1])
    for row, (d_be, d_bc) in ((BP, dib), (COLL, dic), (EMIT, die)):
        m[..., row, BP] += d_be + d_bc
        m[..., row, COLL] -= d_bc
        m[..., row, EMIT] -= d_be


def c_dep(v, c0, phi, m):
    """Depletion capacitance C0/(1 - v/phi)^m, continued linearly above phi/2."""
    vc = np.minimum(v, 0.5 * phi)
    c = c0 * (1.0 - vc / phi) ** -m
    slope = c0 * m / phi * 2.0 ** (m + 1.0)  # dC/dv at phi/2
    return np.where(v < 0.5 * phi, c, c + slope * (v - 0.5 * phi))


def conductances(p):
    """Resistor conductance matrix (S, N, N) and the DC supply injections (S, N)."""
    g = np.zeros(p["VCC"].shape + (N, N))
    for a, b, r in ((IN, None, RS), (BASE, None, p["RB1"]), (BASE, None, p["RB2"]),
                    (BASE, BP, RX), (EMIT, EMIT2, p["RE1"]), (EMIT2, None, p["RE2"]),
                    (COLL, None, p["RC"]), (OUT, None, p["RL"])):
        stamp(g, a, b, 1.0 / r)
    rhs = np.zeros(p["VCC"].shape + (N,))
    rhs[:, BASE] = p["VCC"] / p["RB1"]  # RB1 and RC return to vcc
    rhs[:, COLL] = p["VCC"] / p["RC"]
    return g, rhs


def limit(v_new, v_old):
    """Junction-voltage limiting (logarithmic above v_crit): the allowed step fraction."""
    v_crit = VT * np.log(VT / (np.sqrt(2.0) * IS))
    dv = v_new - v_old
    arg = 1.0 + dv / VT
    lim = np.where(v_old > 0.0, v_old + VT * np.log(np.maximum(arg, 1e-300)),
                   VT * np.log(np.maximum(v_new, VT) / VT))
    lim = np.where((v_old > 0.0) & (arg <= 0.0), v_crit, lim)
    big = (v_new > v_crit) & (np.abs(dv) > 2.0 * VT)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.clip(np.where(big, (lim - v_old) / dv, 1.0), 1e-3, 1.0)


def operating_point(p, x0, max_iter=100, tol=1e-9):
    """Batched Newton on the DC nodal equations (capacitors open, source at 0 V)."""
    g, rhs = conductances(p)
    x = np.array(np.broadcast_to(x0, rhs.shape))
    done = np.zeros(len(x), bool)
    for k in range(max_iter):
        vbe, vbc = x[:, BP] - x[:, EMIT], x[:, BP] - x[:, COLL]
        ib, ic, dib, dic = bjt(vbe, vbc, p["BF"])
        f = np.einsum("sij,sj->si", g, x) - rhs
        f[:, BP] += ib
        f[:, COLL] += ic
        f[:, EMIT] -= ib + ic
        j = g.copy()
        stamp_bjt(j, dib, dic)
        dx = -np.linalg.solve(j, f[..., None])[..., 0]
        alpha = np.minimum(limit(vbe + dx[:, BP] - dx[:, EMIT], vbe),
                           limit(vbc + dx[:, BP] - dx[:, COLL], vbc))
        step = alpha[:, None] * dx
        x += step
        was_done = done
        done = np.max(np.abs(step), axis=1) < tol
        if np.all(was_done & done):  # one extra full Newton step after convergence
            break
    x[~(done & np.isfinite(x).all(axis=1))] = np.nan  # unconverged runs -> NaN figures
    vbe, vbc = x[:, BP] - x[:, EMIT], x[:, BP] - x[:, COLL]
    _, ic, dib, dic = bjt(vbe, vbc, p["BF"])
    j = g.copy()  # the small-signal G: resistors (vcc at AC ground) + device Jacobian
    stamp_bjt(j, dib, dic)
    gm = dic[0] + dic[1]
    c = np.zeros_like(g)
    for a, b, cap in ((IN, BASE, p["C1"]), (EMIT2, None, p["CE"]), (COLL, OUT, p["C3"]),
                      (OUT, None, p["CL"]), (BP, EMIT, TF * gm + c_dep(vbe, *CJE)),
                      (BP, COLL, c_dep(vbc, *CJC))):
        stamp(c, a, b, cap)
    return x, ic, j, c, k + 1


def transfer(g, c, f):
    """H = V(out)/E at frequencies f (S, K): one solve of the (S, K, N, N) complex stack,
    the source as its Norton equivalent E/RS into `in` (E = 1 V)."""
    y = g[:, None] + (2j * np.pi * f)[..., None, None] * c[:, None]
    b = np.zeros((N, 1))
    b[IN, 0] = 1.0 / RS
    return np.linalg.solve(y, b)[..., OUT, 0]


def cutoffs(g, c, level):
    """Upper and lower frequencies (S, 2) where |H| first falls to `level` going outward
    from the band centre: bracketed on a factor-2 log grid, refined by the Illinois
    variant of false position on ln|H| against ln f."""
    s = len(level)
    ln_lvl = np.log(level)[:, None]

    def gap(x):  # ln|H(e^x)| - ln(level): positive inside the band
        return np.log(np.abs(transfer(g, c, np.exp(x)))) - ln_lvl

    a = np.full((s, 2), np.log(F_MID))
    fa = np.repeat(gap(a[:, :1]), 2, axis=1)
    b, fb = np.full((s, 2), np.nan), np.full((s, 2), np.nan)
    ln2 = np.array([1.0, -1.0]) * np.log(2.0)  # up for f_H, down for f_L
    for k in range(1, 40):  # at most 2^39 away from the centre
        open_ = np.isnan(b) & np.isfinite(fa)
        cols = np.flatnonzero(open_.any(axis=0))  # skip a side every run has bracketed
        if cols.size == 0:
            break
        x = np.broadcast_to(np.log(F_MID) + k * ln2, (s, 2))
        fx = np.full((s, 2), np.nan)
        fx[:, cols] = gap(x[:, cols])
        crossed, inside = open_ & (fx <= 0.0), open_ & (fx > 0.0)
        b, fb = np.where(crossed, x, b), np.where(crossed, fx, fb)
        a, fa = np.where(inside, x, a), np.where(inside, fx, fa)
    for _ in range(60):  # Illinois: a, b bracket the root, b is the newest point
        with np.errstate(invalid="ignore", divide="ignore"):
            x = b - fb * (b - a) / (fb - fa)
            x = np.where(np.isfinite(x), x, b)
        fx = gap(x)
        flip = fx * fb < 0.0
        a, fa = np.where(flip, b, a), np.where(flip, fb, 0.5 * fa)
        moved = np.abs(x - b)
        b, fb = x, fx
        if not np.any(moved > 1e-10):  # NaN (no bracket) compares False
            break
    return np.exp(b)


def evaluate(p, x0, as_tool=False):
    """All figures of one full evaluation for a batch of parameter sets."""
    x, ic, g, c, iters = operating_point(p, x0)
    # Mid-band network (idealised): coupling/bypass capacitors shorted by merging their
    # nodes (in+base, coll+out, emit2 to ground), device and load capacitors open.
    pm = np.zeros((N, 4))
    pm[[IN, BASE], 0] = pm[BP, 1] = pm[[COLL, OUT], 2] = pm[EMIT, 3] = 1.0
    z = np.linalg.solve(pm.T @ g @ pm, np.eye(4)[:, [0, 2]])  # unit currents at in, out
    gain_ideal = z[:, 2, 0] / RS                  # V(out)/E, signed
    r_in = 1.0 / (1.0 / z[:, 0, 0] - 1.0 / RS)    # the source's own RS removed
    r_out = 1.0 / (1.0 / z[:, 2, 1] - 1.0 / p["RL"])  # without the load resistor
    n_band = int(np.ceil(64 * np.log10(F_HI / F_LO))) + 1  # 64 a decade, edges included
    freqs = np.append(np.geomspace(F_LO, F_HI, n_band), F_MID)
    h = np.abs(transfer(g, c, np.broadcast_to(freqs, (len(x), freqs.size))))
    db = 20.0 * np.log10(h)
    ref = np.abs(gain_ideal) if as_tool else h[:, -1]  # -3 dB reference
    f_cut = cutoffs(g, c, ref / np.sqrt(2.0))
    return dict(gain_db=db[:, -1], flat_db=db.max(axis=1) - db.min(axis=1),
                f_h=f_cut[:, 0], f_l=f_cut[:, 1], r_in=r_in, r_out=r_out, ic=ic,
                gain_ideal=gain_ideal, x=x, iters=iters, cpi=-c[:, BP, EMIT],
                cmu=-c[:, BP, COLL])


def nominal_params(n=1):
    """The nominal values, n copies each."""
    return {k: np.full(n, v) for k, v in NOMINAL.items()}


def nominal_start():
    """A rough Newton start: base at the divider, 0.7 V junction, collector at vcc/2."""
    vb = 12.0 * 4.7 / 22.7
    return np.array([0.0, vb, vb, 6.0, vb - 0.7, (vb - 0.7) * 330.0 / 369.0, 0.0])


def draw(runs, tol, seed):
    """Each toleranced value as nominal x (1 + t U(-1, 1)) or x (1 + t/3 N(0, 1))."""
    rng = np.random.default_rng(seed)
    p = nominal_params(runs)
    for key in NOMINAL:
        if key in tol:
            t, dist = tol[key]
            z = rng.uniform(-1.0, 1.0, runs) if dist == "u" else rng.standard_normal(runs) / 3
            p[key] = p[key] * (1.0 + t * z)
    return p


FIGURES = (("gain_db", "mid-band gain", "dB", 1.0), ("flat_db", "flatness", "dB", 1.0),
           ("f_h", "f_H", "kHz", 1e-3), ("f_l", "f_L", "kHz", 1e-3),
           ("r_in", "R_in", "ohm", 1.0), ("r_out", "R_out", "ohm", 1.0),
           ("ic", "I_C(Q1)", "mA", 1e3))


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("runs", nargs="?", type=int, default=2000)
    ap.add_argument("--nominal", action="store_true", help="one evaluation at nominal values")
    ap.add_argument("--as-tool", action="store_true",
                    help="tool definitions: -3 dB against the idealised gain, its tolerances")
    ap.add_argument("--seed", type=int, default=20261120)
    ap.add_argument("--chunk", type=int, default=1000, help="samples per batch")
    args = ap.parse_args()
    print("threads: OMP/OPENBLAS/MKL_NUM_THREADS=1 set before importing numpy "
          f"{np.__version__} (one core)")
    if args.nominal:
        r, t = (evaluate(nominal_params(), nominal_start(), a) for a in (False, True))
        x, gain = r["x"][0], r["gain_ideal"][0]
        for name, v, unit in (
                ("Newton iterations", r["iters"], ""), ("V(base)", x[BASE], "V"),
                ("V(b')", x[BP], "V"), ("V(coll)", x[COLL], "V"), ("V(emit)", x[EMIT], "V"),
                ("V(emit2)", x[EMIT2], "V"), ("I_C", r["ic"][0], "A"),
                ("C_pi", r["cpi"][0], "F"), ("C_mu", r["cmu"][0], "F"),
                ("gain, idealised", gain, "V/V"),
                ("gain, idealised", 20.0 * np.log10(abs(gain)), "dB"),
                ("gain, exact |H| at centre", r["gain_db"][0], "dB"),
                ("flatness", r["flat_db"][0], "dB"),
                ("f_H, ref. centre |H|", r["f_h"][0], "Hz"),
                ("f_L, ref. centre |H|", r["f_l"][0], "Hz"),
                ("f_H, ref. idealised gain", t["f_h"][0], "Hz"),
                ("f_L, ref. idealised gain", t["f_l"][0], "Hz"),
                ("R_in (idealised mid-band)", r["r_in"][0], "ohm"),
                ("R_out (idealised mid-band)", r["r_out"][0], "ohm")):
            print(f"  {name:<28}{v:>13.6g} {unit}")
        return
    tol = TOL_AS_TOOL if args.as_tool else TOL
    t0 = time.perf_counter()
    x0 = evaluate(nominal_params(), nominal_start())["x"][0]  # runs start at nominal OP
    p = draw(args.runs, tol, args.seed)
    parts = [evaluate({k: v[i:i + args.chunk] for k, v in p.items()}, x0, args.as_tool)
             for i in range(0, args.runs, args.chunk)]
    res = {k: np.concatenate([q[k] for q in parts]) for k, _, _, _ in FIGURES}
    wall = time.perf_counter() - t0
    failed = int(np.sum(~np.isfinite(np.column_stack(list(res.values()))).all(axis=1)))
    print(f"runs {args.runs} (seed {args.seed}, {'tool' if args.as_tool else 'brief'} "
          f"definitions), failed {failed}")
    print(f"wall time {wall:.3f} s (draws, nominal start, every run), "
          f"{args.runs / wall:.0f} evaluations/s on one core")
    print(f"{'figure':<14}{'mean':>12}{'p5':>12}{'p95':>12}")
    for key, name, unit, scale in FIGURES:
        v = res[key][np.isfinite(res[key])] * scale
        p5, p95 = np.percentile(v, [5, 95])
        print(f"{name + ' ' + unit:<14}{v.mean():>12.5g}{p5:>12.5g}{p95:>12.5g}")


if __name__ == "__main__":
    main()
