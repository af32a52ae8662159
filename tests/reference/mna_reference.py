#!/usr/bin/env python3
"""Independent reference for tauweave's small-signal analysis and its noise analysis.

Usage: mna_reference.py DESIGN.yaml [--bias RESULTS.json] [--noise] [--ports]   -> JSON on stdout

Parts of kind resistor, capacitor, inductor, transconductance and voltage_amplifier
(supplies may be present; they are AC ground). Shares no code with the Rust crate: it reads
the YAML with PyYAML, parses the quantities itself and builds its own modified-nodal-analysis
matrices with numpy; eigenvalues come from scipy (LAPACK QZ), integrals from scipy.integrate.

Transistors (bjt, mosfet) need --bias: the reference does NOT solve the nonlinear DC bias.
It takes each transistor's bias currents and small-signal parameters from tauweave's own
results.json (`operating_point.devices`, nothing else from that file) and builds the
small-signal network, and everything after it, itself. So for a design with transistors it
checks the small-signal analysis and the noise, not the operating point.

--noise adds the noise analysis (`noise`, as results.json has it); see noise_review().
--ports adds the stage at its ports (`ports`: S-parameters from the network's own
y-parameters, K and μ, the impedances solved directly); see ports_review().

The conventions (tauweave's definitions) are summarised in tests/reference/README.md.

Network building blocks used below:
  * the signal source is an EMF u in series with R_sig, written in its Norton form (a current
    u/R_sig into p and out of n, plus the conductance 1/R_sig between p and n): same H(s);
  * supplies and gnd are one node (index None);
  * a shorted capacitor or inductor merges its two nodes (union-find), so a short never adds
    an unknown and loops of shorts cannot make the matrix singular;
  * an open capacitor is left out; a dynamic one goes into C;
  * an inductor in the exact response is a branch unknown i: v(a) - v(b) - sL i = 0;
  * a voltage amplifier is a branch unknown i: v(a) - v(b) - A (v(cp) - v(cn)) = 0;
  * a bipolar transistor is the hybrid-π model (r_x to an internal base node b', rπ and Cπ
    from b' to e, Cμ from b' to c, gm·v(b'e) and r_o from c to e); a MOSFET is gm·v(gs) and
    r_o from d to s with C_gs, C_gd and C_db (drain to source: the body is tied to the
    source) — tauweave's models as docs/methods.md, "Small-signal models", states them.
"""

import cmath
import json
import math
import re
import sys
from decimal import Decimal

import numpy as np
import scipy.integrate
import scipy.linalg
import scipy.optimize
import yaml

# --------------------------------------------------------------------------------------------
# YAML: dates stay text; only true/false are booleans (so node names like `on`, `no` stay text)


class Loader(yaml.SafeLoader):
    """PyYAML SafeLoader with timestamps kept as strings and YAML-1.2-style booleans."""


Loader.add_constructor("tag:yaml.org,2002:timestamp", lambda ld, node: ld.construct_scalar(node))
Loader.yaml_implicit_resolvers = {
    k: [(tag, rx) for tag, rx in v if tag != "tag:yaml.org,2002:bool"]
    for k, v in yaml.SafeLoader.yaml_implicit_resolvers.items()
}
Loader.add_implicit_resolver(
    "tag:yaml.org,2002:bool", re.compile(r"^(?:true|True|TRUE|false|False|FALSE)$"), list("tTfF")
)

# --------------------------------------------------------------------------------------------
# Quantities and expressions

PREFIX = {"f": -15, "p": -12, "n": -9, "u": -6, "µ": -6, "μ": -6, "m": -3,
          "k": 3, "M": 6, "G": 9, "T": 12}  # powers of ten
BASE_UNITS = {"Ω", "ohm", "F", "H", "V", "A", "Hz", "s", "W", "S", "K", "°C", "degC", "m"}
POWERS = {"²": 2, "³": 3}
NUMBER = re.compile(r"(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?")
IEC_CODE = re.compile(r"(\d*)([pnuµμmkKMGTR])(\d+)(?![\w.])")  # 4k7 2R2 R47 4n7 1M5 4K7
UNIT_WORD = re.compile(r"(\s*)([A-Za-zΩµμ°%][A-Za-z0-9Ωµμ°%²³^/]*)")
NAME = re.compile(r"[A-Za-z_][A-Za-z0-9_]*")


class QuantityError(ValueError):
    pass


def _unit_exp(unit, spaced):
    """Power of ten of a unit word such as kΩ, pF/m, µA/V², %, or a bare prefix (47k)."""
    if unit == "%":
        return -2
    if not spaced and unit in PREFIX:
        return PREFIX[unit]  # "10m" is 0.01; "2.5 m" is the metre (handled below)
    exp = 0
    for i, part in enumerate(unit.split("/")):
        m = re.fullmatch(r"(.+?)(?:\^(\d)|([²³]))?", part)
        if not m:
            raise QuantityError(f"bad unit {unit!r}")
        base = m.group(1)
        power = int(m.group(2)) if m.group(2) else POWERS.get(m.group(3), 1)
        if base in BASE_UNITS:
            e = 0
        elif len(base) > 1 and base[0] in PREFIX and base[1:] in BASE_UNITS:
            e = PREFIX[base[0]]
        else:
            raise QuantityError(f"bad unit {unit!r}")
        exp += e * power if i == 0 else -e * power
    return exp


def _apply_unit(digits, word, spaced):
    """The number written as `digits` (decimal text) times its unit, correctly rounded."""
    if word == "dB":
        return 10.0 ** (float(digits) / 20.0)
    return float(Decimal(digits).scaleb(_unit_exp(word, spaced)))


def _tokens(text, params):
    """Tokens: ('num', value) | ('name', str) | ('op', ch)."""
    pos, out = 0, []
    while pos < len(text):
        ch = text[pos]
        if ch.isspace():
            pos += 1
        elif ch in "+-*/()":
            out.append(("op", ch))
            pos += 1
        elif ch.isdigit() or ch == ".":
            m = IEC_CODE.match(text, pos)
            if m and m.group(1):
                letter = m.group(2)
                digits = f"{m.group(1)}.{m.group(3)}"
                if letter != "R":
                    digits += f"e{PREFIX[letter.replace('K', 'k')]}"
            else:
                m = NUMBER.match(text, pos)
                digits = m.group(0)
            pos = m.end()
            value = float(Decimal(digits))
            u = UNIT_WORD.match(text, pos)
            if u:
                word, spaced = u.group(2), bool(u.group(1))
                while True:  # the longest unit word that reads as a unit ("kΩ/2" -> "kΩ")
                    try:
                        value = _apply_unit(digits, word, spaced)
                        pos = u.start(2) + len(word)
                        break
                    except QuantityError:
                        if "/" not in word:
                            break
                        word = word[: word.rindex("/")]
            if not math.isfinite(value):
                raise QuantityError(f"not finite: {text!r}")
            out.append(("num", value))
        elif NAME.match(text, pos):
            name = NAME.match(text, pos).group(0)
            pos += len(name)
            if name in params:
                out.append(("name", name))
            elif re.fullmatch(r"R\d+", name):  # IEC code R47 = 0.47
                out.append(("num", float("0." + name[1:])))
            else:
                raise QuantityError(f"unknown name {name!r} in {text!r}")
        else:
            raise QuantityError(f"unexpected {ch!r} in {text!r}")
    return out


class Quantities:
    """Evaluates quantities and expressions over the design's params (any order; no cycles)."""

    def __init__(self, params):
        self.raw = dict(params or {})
        self.done = {}
        self.busy = set()

    def param(self, name):
        if name not in self.done:
            if name in self.busy:
                raise QuantityError(f"param cycle through {name!r}")
            self.busy.add(name)
            self.done[name] = self.value(self.raw[name])
            self.busy.discard(name)
        return self.done[name]

    def value(self, v):
        if isinstance(v, dict):
            v = v["value"] if "value" in v else v["voltage"]
        if isinstance(v, bool):
            raise QuantityError(f"not a quantity: {v!r}")
        if isinstance(v, (int, float)):
            return float(v)
        toks = _tokens(str(v), self.raw)
        pos = 0

        def peek():
            return toks[pos] if pos < len(toks) else (None, None)

        def expr():
            nonlocal pos
            acc = term()
            while peek() in (("op", "+"), ("op", "-")):
                op = toks[pos][1]
                pos += 1
                acc = acc + term() if op == "+" else acc - term()
            return acc

        def term():
            nonlocal pos
            acc = factor()
            while peek() in (("op", "*"), ("op", "/")):
                op = toks[pos][1]
                pos += 1
                acc = acc * factor() if op == "*" else acc / factor()
            return acc

        def factor():
            nonlocal pos
            kind, val = peek()
            pos += 1
            if (kind, val) == ("op", "-"):
                return -factor()
            if (kind, val) == ("op", "+"):
                return factor()
            if (kind, val) == ("op", "("):
                inner = expr()
                if peek() != ("op", ")"):
                    raise QuantityError(f"missing ')' in {v!r}")
                pos += 1
                return inner
            if kind == "num":
                return val
            if kind == "name":
                return self.param(val)
            raise QuantityError(f"unexpected token {val!r} in {v!r}")

        result = expr()
        if pos != len(toks):
            raise QuantityError(f"trailing tokens in {v!r}")
        return result


def load_design(path):
    with open(path, encoding="utf-8") as f:
        return yaml.load(f, Loader=Loader)


# --------------------------------------------------------------------------------------------
# The circuit and its MNA networks

BOLTZMANN = 1.380649e-23  # J/K, exact in the SI since 2019 (BIPM SI Brochure, 9th ed.)
ELEMENTARY_CHARGE = 1.602176634e-19  # C, exact likewise
T0 = 290.0  # K: the source's noise temperature the noise figure is defined at (IEEE Std 161)

WIDE = np.longdouble  # extended precision where the platform has it (x86: 64-bit mantissa)
TWO_PI_J = 2j * np.clongdouble(np.longdouble("3.14159265358979323846264338327950288"))


def _pair(at):
    return (str(at[0]), str(at[1])) if isinstance(at, list) else (str(at), "gnd")


def kelvin(text):
    """A temperature in K or °C (`27 °C`, `27 degC`, `300 K`) as kelvin; 0 °C = 273.15 K."""
    m = re.fullmatch(r"\s*([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*(K|°C|degC)\s*", str(text))
    if not m:
        raise QuantityError(f"not a temperature: {text!r}")
    value = float(Decimal(m.group(1)))
    return value if m.group(2) == "K" else value + 273.15


# tauweave puts 1 pS across every junction (docs/methods.md, "Operating point"); seen from the
# base it makes ∂I_B/∂V_CE = -1 pS in the active region (the reverse diffusion term beside it
# is of order e^(V_BC/V_T), nil there). Kept for exactness: leaving it out moves the examples'
# figures by up to 4e-8 relative, and the share of a contributor of 2e-8 by 2e-7.
JUNCTION_GMIN = 1e-12


class Circuit:
    def __init__(self, doc, bias=None):
        """doc: the design; bias: {part: device} from results.json's operating_point.devices,
        needed only when the design has transistors."""
        q = Quantities(doc.get("params"))
        self.ground = {"gnd"} | {str(k) for k in (doc.get("supplies") or {})}
        temp = (doc.get("environment") or {}).get("temperature")
        self.kelvin = kelvin(temp) if temp is not None else 300.15  # default 27 °C (design-format.md)
        sig, out = doc["signal"], doc["output"]
        self.sig_p, self.sig_n = _pair(sig["at"])
        self.r_sig = q.value(sig["resistance"])
        band = sig.get("band")
        self.band = (q.value(band["from"]), q.value(band["to"])) if band else None
        # The signal's rms at the source EMF: `amplitude` is a sine's peak, √2 × its rms.
        if sig.get("amplitude") is not None:
            self.signal_rms = q.value(sig["amplitude"]) / math.sqrt(2)
        elif sig.get("amplitude_rms") is not None:
            self.signal_rms = q.value(sig["amplitude_rms"])
        else:
            self.signal_rms = None
        self.out_p, self.out_n = _pair(out["at"])
        # dicts: name, kind, a, b, value, cp, cn, set, and for resistors `noise`: the
        # (part, mechanism) its thermal noise is reported under, None when noiseless.
        self.parts = []
        # Transistor noise currents: (part, mechanism, a, b, A²/Hz, 1/f?) — a 1/f current's
        # density is given at 1 Hz.
        self.shot = []
        for name, p in doc["parts"].items():
            kind = p["kind"]
            if kind in ("bjt", "mosfet"):
                if bias is None or str(name) not in bias:
                    raise SystemExit(f"{name}: a transistor needs its bias from results.json (--bias)")
                model = (doc.get("models") or {}).get(str(p["model"])) or {}
                corner = q.value(model["flicker_corner"]) if "flicker_corner" in model else 0.0
                self._transistor(str(name), kind, p, bias[str(name)], corner)
                continue
            if kind not in ("resistor", "capacitor", "inductor", "transconductance", "voltage_amplifier"):
                raise SystemExit(f"{name}: kind {kind} is not handled by this reference")
            a, b = (str(x) for x in p["between"])
            e = {"name": str(name), "kind": kind, "a": a, "b": b, "value": q.value(p["value"])}
            if kind == "resistor":
                e["noise"] = (str(name), "thermal")
            if "control" in p:
                e["cp"], e["cn"] = (str(x) for x in p["control"])
            if kind == "capacitor":
                role = p.get("role")
                if role in ("coupling", "bypass"):
                    e["set"] = "low"
                elif role in ("parasitic", "load"):
                    e["set"] = "high"
                else:
                    e["set"] = "low" if e["value"] >= 1e-9 else "high"
            self.parts.append(e)
        if out.get("load_resistance") is not None:
            self.parts.append({"name": "load.r", "kind": "resistor", "a": self.out_p, "b": self.out_n,
                               "value": q.value(out["load_resistance"]), "noise": ("load", "thermal")})
        if out.get("load_capacitance") is not None:
            self.parts.append({"name": "load.c", "kind": "capacitor", "a": self.out_p, "b": self.out_n,
                               "value": q.value(out["load_capacitance"]), "set": "high"})
        caps = [e for e in self.parts if e["kind"] == "capacitor"]
        caps.sort(key=lambda e: e["name"] == "load.c")  # file order, load.c last (stable sort)
        self.low = [e for e in caps if e["set"] == "low"]
        self.high = [e for e in caps if e["set"] == "high"]

    def _transistor(self, name, kind, p, dev, corner):
        """The small-signal model of one transistor at the bias `dev` (results.json's entry:
        ic_a, ib_a and small_signal), and its noise currents; `corner` is the model's flicker
        corner frequency (0: none), where the 1/f noise equals the white noise it accompanies
        (the base current's shot noise, the channel noise; as a data sheet states a corner)."""
        ss = dev["small_signal"]
        kt = BOLTZMANN * self.kelvin

        def res(n, a, b, r, noise=None):
            self.parts.append({"name": f"{name}.{n}", "kind": "resistor", "a": a, "b": b, "value": r,
                               "noise": noise})

        def vccs(n, a, b, cp, cn, g):  # g·v(cp, cn) leaves a, enters b
            self.parts.append({"name": f"{name}.{n}", "kind": "transconductance", "a": a, "b": b,
                               "cp": cp, "cn": cn, "value": g})

        def cap(n, a, b, c):
            if c > 0:
                self.parts.append({"name": f"{name}.{n}", "kind": "capacitor", "a": a, "b": b, "value": c,
                                   "set": "high"})

        if kind == "bjt":
            c, b, e = str(p["c"]), str(p["b"]), str(p["e"])
            rx = ss.get("rx_ohm") or 0.0
            bi = b
            if rx > 0:  # a real resistor to an internal base node
                bi = f"{name}.b'"
                res("rx", b, bi, rx, noise=(name, "base_resistance"))
            res("rpi", bi, e, ss["rpi_ohm"])  # noiseless (the shot noise below stands for it)
            vccs("gm", c, e, bi, e, ss["gm_s"])
            if ss.get("ro_ohm") is not None:
                res("ro", c, e, ss["ro_ohm"])
            vccs("gmu", bi, e, c, e, -JUNCTION_GMIN)
            cap("cpi", bi, e, ss["cpi_f"])
            cap("cmu", bi, c, ss["cmu_f"])
            # Shot noise of the collector and base currents, 2q|I| (Schottky; Gray, Hurst, Lewis &
            # Meyer, noise chapter, from memory), taken as uncorrelated.
            self.shot.append((name, "collector_shot", c, e, 2 * ELEMENTARY_CHARGE * abs(dev["ic_a"]), False))
            base = 2 * ELEMENTARY_CHARGE * abs(dev["ib_a"])
            self.shot.append((name, "base_shot", bi, e, base, False))
            if corner > 0:
                self.shot.append((name, "flicker", bi, e, base * corner, True))
        else:
            d, g, s_ = str(p["d"]), str(p["g"]), str(p["s"])
            vccs("gm", d, s_, g, s_, ss["gm_s"])
            if ss.get("ro_ohm") is not None:
                res("ro", d, s_, ss["ro_ohm"])
            cap("cgs", g, s_, ss["cgs_f"])
            cap("cgd", g, d, ss["cgd_f"])
            cap("cdb", d, s_, ss["cdb_f"])
            # Channel thermal noise 4kTγg_m, γ = 2/3 (long channel in saturation; van der Ziel,
            # and Razavi's noise chapter, from memory).
            channel = 4 * kt * (2 / 3) * abs(ss["gm_s"])
            self.shot.append((name, "channel", d, s_, channel, False))
            if corner > 0:
                self.shot.append((name, "flicker", d, s_, channel * corner, True))

    def network(self, caps, inductors="short", rsig=True, loadr=True, r_sig=None):
        """MNA of one network. caps: name -> 'dyn' | 'short' | 'open' (absent = open);
        r_sig: the source resistance, if not the design's (rsig=False leaves it out)."""
        r_sig = self.r_sig if r_sig is None else r_sig
        root = {}

        def find(n):
            n = "gnd" if n in self.ground else n
            while root.get(n, n) != n:
                n = root[n]
            return n

        def union(a, b):
            ra, rb = find(a), find(b)
            if ra != rb:
                if rb == "gnd":
                    ra, rb = rb, ra
                root[rb] = ra

        for e in self.parts:
            if (e["kind"] == "capacitor" and caps.get(e["name"]) == "short") or (
                e["kind"] == "inductor" and inductors == "short"
            ):
                union(e["a"], e["b"])
        names = []
        for e in self.parts:
            for n in (e["a"], e["b"], e.get("cp", "gnd"), e.get("cn", "gnd")):
                names.append(n)
        names += [self.sig_p, self.sig_n, self.out_p, self.out_n]
        index = {}
        for n in names:
            r = find(n)
            if r != "gnd" and r not in index:
                index[r] = len(index)
        branches = [e for e in self.parts if e["kind"] == "voltage_amplifier"
                    or (e["kind"] == "inductor" and inductors == "dyn")]
        size = len(index) + len(branches)
        # Stamped in extended precision: a node where 100 nF meets 2 pF would otherwise lose
        # the small admittance's last digits in the sum (see solve()).
        G = np.zeros((size, size), dtype=WIDE)
        C = np.zeros((size, size), dtype=WIDE)
        b = np.zeros(size, dtype=WIDE)
        c = np.zeros(size, dtype=WIDE)

        def ix(n):
            return index.get(find(n))

        def admittance(M, n1, n2, y):
            i, j = ix(n1), ix(n2)
            if i is not None:
                M[i, i] += y
            if j is not None:
                M[j, j] += y
            if i is not None and j is not None:
                M[i, j] -= y
                M[j, i] -= y

        def add(M, row, col, v):
            if row is not None and col is not None:
                M[row, col] += v

        k = len(index)
        for e in self.parts:
            kind, a, bb = e["kind"], e["a"], e["b"]
            if kind == "resistor":
                if e["name"] == "load.r" and not loadr:
                    continue
                admittance(G, a, bb, 1 / WIDE(e["value"]))
            elif kind == "capacitor":
                if caps.get(e["name"]) == "dyn":
                    admittance(C, a, bb, e["value"])
            elif kind == "transconductance":  # value*v(cp,cn) leaves a, enters b
                g = e["value"]
                for row, sgn in ((ix(a), 1.0), (ix(bb), -1.0)):
                    add(G, row, ix(e["cp"]), sgn * g)
                    add(G, row, ix(e["cn"]), -sgn * g)
            elif kind in ("voltage_amplifier", "inductor"):
                if kind == "inductor" and inductors != "dyn":
                    continue
                add(G, ix(a), k, 1.0)
                add(G, ix(bb), k, -1.0)
                add(G, k, ix(a), 1.0)
                add(G, k, ix(bb), -1.0)
                if kind == "inductor":
                    C[k, k] -= e["value"]
                else:
                    add(G, k, ix(e["cp"]), -e["value"])
                    add(G, k, ix(e["cn"]), e["value"])
                k += 1
        if rsig:
            admittance(G, self.sig_p, self.sig_n, 1 / WIDE(r_sig))
            for n, sgn in ((self.sig_p, 1.0), (self.sig_n, -1.0)):
                if ix(n) is not None:
                    b[ix(n)] += sgn / WIDE(r_sig)
        for n, sgn in ((self.out_p, 1.0), (self.out_n, -1.0)):
            if ix(n) is not None:
                c[ix(n)] += sgn
        return {"G": G, "C": C, "b": b, "c": c, "ix": ix}


def solve(A, b):
    """Solves A x = b (A, b in extended precision) to about 1e-15 relative.

    LAPACK factorises A rounded to double; three steps of iterative refinement with the
    residual in extended precision then solve the system as stamped. MNA matrices that mix
    µF and pF at one frequency have condition numbers of 1e6–1e8, and a plain double solve
    leaves |H| and the resistances with errors near 1e-11. (Where longdouble is plain double
    the refinement changes little and the accuracy is that of a double solve.)
    """
    cplx = np.iscomplexobj(A) or np.iscomplexobj(b)
    wide, narrow = (np.clongdouble, np.complex128) if cplx else (WIDE, np.float64)
    Aw, bw = np.asarray(A).astype(wide), np.asarray(b).astype(wide)
    An = Aw.astype(narrow)
    x = np.linalg.solve(An, bw.astype(narrow))
    for _ in range(3):
        x = x + np.linalg.solve(An, (bw - Aw @ x.astype(wide)).astype(narrow))
    return x


def _finite(r, what):
    if r is None:
        raise SystemExit(f"{what}: the network has no DC path (infinite resistance)")
    return r


def resistance(net, n1, n2="gnd"):
    """Driving-point resistance between n1 and n2: 1 A in at n1, out at n2, v(n1) - v(n2)."""
    d = np.zeros(len(net["b"]))
    for n, sgn in ((n1, 1.0), (n2, -1.0)):
        if net["ix"](n) is not None:
            d[net["ix"](n)] += sgn
    if not d.any():
        return 0.0
    try:
        if np.linalg.cond(net["G"].astype(np.float64)) > 1e15:
            raise np.linalg.LinAlgError
        return float(d @ solve(net["G"], d))
    except np.linalg.LinAlgError:
        return None  # no DC path in this network: the resistance is infinite


def resistances(net, pairs):
    """Driving-point resistances between each (n1, n2) of `pairs` in one network: the same
    as resistance() for each, with the conditioning checked once and one solve for all."""
    if not pairs:
        return []
    D = np.zeros((len(net["b"]), len(pairs)))
    for k, (n1, n2) in enumerate(pairs):
        for n, sgn in ((n1, 1.0), (n2, -1.0)):
            if net["ix"](n) is not None:
                D[net["ix"](n), k] += sgn
    try:
        if np.linalg.cond(net["G"].astype(np.float64)) > 1e15:
            raise np.linalg.LinAlgError
        X = solve(net["G"], D)
    except np.linalg.LinAlgError:
        return [None if D[:, k].any() else 0.0 for k in range(len(pairs))]
    return [float(D[:, k] @ X[:, k]) if D[:, k].any() else 0.0 for k in range(len(pairs))]


# --------------------------------------------------------------------------------------------
# Poles and zeros

FINITE_TOL = 1e-12  # |beta|·‖G‖ > FINITE_TOL·|alpha|·‖C‖  <=>  eigenvalue is finite


def _reduce(net):
    """Eliminates the unknowns no capacitance or inductance touches (exact Schur complement).

    Returns G_r, C_r, b_r, c_r, d_r (d_r the direct feedthrough). This removes most infinite
    eigenvalues before QZ, so the finite/infinite split is left to the few structural ones.
    """
    G, C, b, c = (net[k].astype(np.float64) for k in ("G", "C", "b", "c"))
    dyn = np.flatnonzero(np.any(C != 0, axis=0) | np.any(C != 0, axis=1))
    sta = np.setdiff1d(np.arange(len(b)), dyn)
    if len(sta) == 0:
        return G, C, b, c, 0.0
    G22 = G[np.ix_(sta, sta)]
    if np.linalg.cond(G22) > 1e13:
        return G, C, b, c, 0.0
    G12, G21 = G[np.ix_(dyn, sta)], G[np.ix_(sta, dyn)]
    X = np.linalg.solve(G22, np.column_stack([G21, b[sta]]))
    Gr = G[np.ix_(dyn, dyn)] - G12 @ X[:, :-1]
    br = b[dyn] - G12 @ X[:, -1]
    cr = c[dyn] - c[sta] @ X[:, :-1]
    dr = float(c[sta] @ X[:, -1])
    return Gr, C[np.ix_(dyn, dyn)], br, cr, dr


def _finite_eigs(M, N):
    """Finite s with det(M + s N) = 0, by QZ on the pencil (M, -N)."""
    if M.shape[0] == 0 or not N.any():
        return []
    w = scipy.linalg.eigvals(M, -N, homogeneous_eigvals=True)
    alpha, beta = w[0], w[1]
    nM, nN = np.linalg.norm(M), np.linalg.norm(N)
    keep = np.abs(beta) * nM > FINITE_TOL * np.abs(alpha) * nN
    return [complex(s) for s in alpha[keep] / beta[keep]]


def _sorted_hz(values, snap_below=0.0):
    out = []
    for s in values:
        if abs(s) <= snap_below:
            s = 0j
        out.append(s)
    out.sort(key=lambda s: (abs(s), s.imag))
    return [{"re_hz": s.real / (2 * math.pi), "im_hz": s.imag / (2 * math.pi)} for s in out]


def _polish(net, s):
    """Newton steps on det(G + sC) from a QZ pole: s -= 1/tr((G + sC)^-1 C).

    QZ on a network whose poles span 10 rad/s … 1e9 rad/s leaves the fast ones with relative
    errors near 1e-10; two or three steps on the extended-precision matrices take them to
    round-off. A step is taken only while it is a small correction (< 1e-6·|s|); real poles
    stay real.
    """
    G, C = net["G"], net["C"]
    for _ in range(4):
        try:
            X = solve(G + np.clongdouble(s) * C, C.astype(np.clongdouble))
        except np.linalg.LinAlgError:
            break  # exactly on the pole
        trace = complex(np.trace(X))
        if trace == 0 or not cmath.isfinite(trace):
            break
        step = 1 / trace
        if abs(step) >= 1e-6 * abs(s):
            break
        s_new = s - (step.real if s.imag == 0 else step)
        if s_new == s:
            break
        s = s_new
    return s


POLISH_UP_TO = 120


def poles_zeros(net):
    """Poles and zeros (rad/s, unsorted) of a network with dynamic elements."""
    Gr, Cr, br, cr, dr = _reduce(net)
    poles = []
    # Polishing is a dense extended-precision solve per pole: kept to networks of up to
    # POLISH_UP_TO unknowns (above, QZ alone is far inside the 1e-6 the tests compare at).
    polish = len(net["b"]) <= POLISH_UP_TO
    for p in _finite_eigs(Gr, Cr):  # polish the upper member of each pair, mirror the lower
        if p.imag >= 0:
            q = _polish(net, p) if polish else p
            poles += [q] if p.imag == 0 else [q, q.conjugate()]
    n = len(br)
    M = np.zeros((n + 1, n + 1))
    M[:n, :n], M[:n, n], M[n, :n], M[n, n] = Gr, -br, cr, dr
    N = np.zeros((n + 1, n + 1))
    N[:n, :n] = Cr
    # A real pencil's complex zeros come in conjugate pairs, which QZ returns a rounding
    # apart; as with the poles, the upper member is kept and mirrored, so a pair sorts the
    # same way (lower member first) however the rounding fell.
    zeros = []
    for z in _finite_eigs(M, N):
        if abs(z.imag) <= 1e-9 * abs(z):
            zeros.append(z)
        elif z.imag > 0:
            zeros += [z, z.conjugate()]
    return poles, zeros


def _pz_hz(poles, zeros):
    # Zeros at s = 0 (coupling capacitors) come out of QZ as round-off; a zero more than 1e7
    # times closer to the origin than the nearest pole is reported as exactly 0.
    pmin = min((abs(p) for p in poles), default=0.0)
    return _sorted_hz(poles), _sorted_hz(zeros, snap_below=1e-7 * pmin)


# --------------------------------------------------------------------------------------------
# The analysis


def _db(x):
    return 20 * math.log10(abs(x)) if x != 0 else None


def _f3db(H, f_start, target, upward, per_decade=100):
    """First f beyond f_start (up or down) where |H(j2πf)| falls below target, else None."""
    lo, hi = math.log10(1e-3), math.log10(1e13)
    x0 = math.log10(f_start)
    if not lo <= x0 <= hi:
        return None
    end = hi if upward else lo
    n = max(2, int(math.ceil(abs(end - x0) * per_decade)) + 1)
    xs = np.linspace(x0, end, n)
    g = lambda x: abs(H(10.0**x)) - target  # noqa: E731
    prev_x, prev_g = xs[0], g(xs[0])
    for x in xs[1:]:
        gx = g(x)
        if prev_g >= 0 > gx:
            a, b = sorted((prev_x, x))
            root = scipy.optimize.brentq(g, a, b, xtol=1e-14, rtol=4 * np.finfo(float).eps, maxiter=500)
            return 10.0**root
        prev_x, prev_g = x, gx
    return None


def analyze(doc, bias=None, noise=False, ports=False):
    """results.json's linear keys for the design `doc`; with noise=True also `noise`, with
    ports=True also `ports`.
    bias: {part: device entry of results.json}, for designs with transistors."""
    ckt = Circuit(doc, bias)
    low, high = ckt.low, ckt.high
    short_low = {e["name"]: "short" for e in low}

    # Mid-band: low caps shorted, high caps open, inductors shorted.
    mid = ckt.network(short_low)
    gain = float(ckt_gain(mid))
    r_in = resistance(ckt.network(short_low, rsig=False), ckt.sig_p, ckt.sig_n)
    r_out = resistance(ckt.network(short_low, loadr=False), ckt.out_p, ckt.out_n)

    # High: open-circuit time constants (low shorted, other highs open, u = 0).
    octc, taus0 = [], {}
    for e in high:
        net = ckt.network(short_low)
        r = _finite(resistance(net, e["a"], e["b"]), e["name"])
        ra, rb = _finite(resistance(net, e["a"]), e["name"]), _finite(resistance(net, e["b"]), e["name"])
        tau = r * e["value"]
        taus0[e["name"]] = tau
        octc.append({"part": e["name"], "r_ohm": r, "tau_s": tau, "share": None,
                     "miller_factor": (r / (ra + rb)) if (ra + rb) != 0 else None})
    b1 = sum(taus0.values()) if high else None
    for row in octc:
        row["share"] = row["tau_s"] / b1 if b1 else None
    b2 = None
    if len(high) >= 2:  # Cochrun–Grabel: b2 = Σ_{i<j} τ_i^0 τ_j^i
        b2 = 0.0
        for i, ei in enumerate(high):
            net = ckt.network({**short_low, ei["name"]: "short"})
            later = high[i + 1:]
            for ej, r_ji in zip(later, resistances(net, [(ej["a"], ej["b"]) for ej in later])):
                b2 += taus0[ei["name"]] * _finite(r_ji, ej["name"]) * ej["value"]
    elif high:
        b2 = 0.0
    f_h_est = 1 / (2 * math.pi * b1) if b1 else None
    f2 = None
    if b1 and b2 is not None:
        B = b1 * b1 - 2 * b2
        w2 = 2 / (B + math.sqrt(B * B + 4 * b2 * b2))
        f2 = math.sqrt(w2) / (2 * math.pi)

    # Low: short-circuit time constants (high open, other lows shorted, u = 0). Low
    # capacitors on the same two nodes (supplies counted as ground) act as one, listed as
    # `C5 ∥ C6` where the first of them stands; one with both ends at ground (across a
    # supply) does nothing and is left out (tauweave's convention, docs/analysis.md).
    groups = {}
    for e in low:
        ends = frozenset("gnd" if n in ckt.ground else n for n in (e["a"], e["b"]))
        if len(ends) == 2:
            groups.setdefault(ends, []).append(e)
    sctc = []
    for members in groups.values():
        names = {m["name"] for m in members}
        e = members[0]
        net = ckt.network({n: "short" for n in short_low if n not in names})
        r = _finite(resistance(net, e["a"], e["b"]), e["name"])
        c = sum(m["value"] for m in members)
        sctc.append({"part": " ∥ ".join(m["name"] for m in members), "r_ohm": r, "tau_s": r * c, "share": None})
    inv = [1 / row["tau_s"] if row["tau_s"] != 0 else math.inf for row in sctc]
    f_l_est = sum(inv) / (2 * math.pi) if sctc and all(math.isfinite(x) for x in inv) else None
    for row, x in zip(sctc, inv):
        row["share"] = x / sum(inv) if f_l_est else None

    # Mid-band frequency from the estimates; none when an estimate needed is absent or not
    # positive (an active network can show a negative time constant).
    ok_l, ok_h = f_l_est is not None and f_l_est > 0, f_h_est is not None and f_h_est > 0
    if low and high:
        f_mid = math.sqrt(f_l_est * f_h_est) if ok_l and ok_h else None
    elif high:
        f_mid = f_h_est / 100 if ok_h else None
    elif low:
        f_mid = f_l_est * 100 if ok_l else None
    else:
        f_mid = None

    # Full network: every capacitor and inductor present.
    full = ckt.network({e["name"]: "dyn" for e in low + high}, inductors="dyn")
    G, Cm, bv, cv = full["G"], full["C"], full["b"], full["c"]

    def H(f):
        return complex((cv @ solve(G + TWO_PI_J * WIDE(f) * Cm, bv.astype(np.clongdouble))))

    target = abs(gain) / math.sqrt(2)
    f_hi = _f3db(H, f_mid, target, True) if f_mid and gain else None
    f_lo = _f3db(H, f_mid, target, False) if f_mid and gain else None
    poles_hz, zeros_hz = _pz_hz(*poles_zeros(full))

    # HIGH network (low caps shorted, high caps dynamic) and LOW network (high caps open).
    hp, hz = poles_zeros(ckt.network({**short_low, **{e["name"]: "dyn" for e in high}}))
    high_poles_hz, high_zeros_hz = _pz_hz(hp, hz)
    lp, _ = poles_zeros(ckt.network({e["name"]: "dyn" for e in low}))
    low_poles_hz, _ = _pz_hz(lp, [])

    hp_sorted = sorted(hp, key=abs)
    dominance = abs(hp_sorted[1]) / abs(hp_sorted[0]) if len(hp_sorted) >= 2 and abs(hp_sorted[0]) > 0 else None
    rss = None
    if hp:
        rad = sum(1 / abs(p) ** 2 for p in hp) - 2 * sum(1 / abs(z) ** 2 for z in hz if abs(z) > 0)
        rad *= (2 * math.pi) ** 2  # 1/f² = (2π)²/|s|²
        rss = 1 / math.sqrt(rad) if rad > 0 else None

    midband = {"frequency_hz": f_mid, "gain": gain, "gain_db": _db(gain),
               "input_resistance_ohm": r_in, "output_resistance_ohm": r_out}
    if ckt.band:
        midband["band"] = _band(H, *ckt.band)
        midband["frequency_hz"] = midband["band"]["centre_hz"]
    out = {
        "midband": midband,
        "high": {"f3db_hz": f_hi, "b1_s": b1, "b2_s2": b2, "dominance_ratio": dominance,
                 "second_order_f_estimate_hz": f2, "rss_f_estimate_hz": rss,
                 "octc": {"caps": octc, "sum_tau_s": b1, "f_estimate_hz": f_h_est},
                 "poles_hz": high_poles_hz, "zeros_hz": high_zeros_hz},
        "low": {"f3db_hz": f_lo, "sctc": {"caps": sctc, "f_estimate_hz": f_l_est},
                "poles_hz": low_poles_hz},
        "poles": poles_hz,
        "zeros": zeros_hz,
    }
    if ports:
        # The worst match across the stated band, else between the exact cut-offs (from the
        # sweep's start for a stage coupled down to DC).
        if ckt.band:
            review_band = ckt.band
        elif f_hi is not None:
            review_band = (f_lo if f_lo is not None else _sweep_grid(doc)[0][0], f_hi)
        else:
            review_band = None
        out["ports"] = ports_review(ckt, doc, midband["frequency_hz"], review_band)
    if noise:
        # Spot values at the band centre, else at the mid-band frequency; integrated over the
        # stated band, else between the exact −3 dB points (tauweave's definitions).
        if ckt.band:
            band = (*ckt.band, "stated")
        elif f_lo is not None and f_hi is not None and f_hi > f_lo:
            band = (f_lo, f_hi, "cutoffs")
        else:
            band = None
        spot = midband["frequency_hz"]
        out["noise"] = noise_review(ckt, spot, band) if spot else None
    return out


def _band(H, f1, f2):
    """The exact gain across [f1, f2]: at the geometric centre, and the lowest and highest
    |H| — a 400-point log grid, each extreme inside the band polished by scipy's bounded
    scalar minimiser between its grid neighbours."""
    x = np.linspace(math.log10(f1), math.log10(f2), 401)
    mag = lambda lf: abs(H(10.0 ** lf))
    y = np.array([mag(v) for v in x])

    def extreme(sign):
        k = int(np.argmax(sign * y))
        if 0 < k < len(x) - 1:
            r = scipy.optimize.minimize_scalar(lambda lf: -sign * mag(lf), bounds=(x[k - 1], x[k + 1]),
                                               method="bounded", options={"xatol": 1e-12})
            if sign * mag(r.x) >= sign * y[k]:
                return 10.0 ** r.x, mag(r.x)
        return 10.0 ** x[k], y[k]

    (f_lo, lo), (f_hi, hi) = extreme(-1.0), extreme(1.0)
    centre = math.sqrt(f1 * f2)
    out = {"from_hz": f1, "to_hz": f2, "centre_hz": centre,
           "centre_gain_db": _db(abs(H(centre))),
           "lowest_gain_db": _db(lo), "lowest_at_hz": f_lo,
           "highest_gain_db": _db(hi), "highest_at_hz": f_hi,
           "flatness_db": 20 * math.log10(hi / lo)}
    # Where a flat extreme inside the band lies is known only to about √ε of its height
    # (1e-7 … 1e-6 relative), too loose for the suite's 1e-6 agreement; its height is exact.
    for key, f in (("lowest_at_hz", f_lo), ("highest_at_hz", f_hi)):
        if f1 * (1 + 1e-9) < f < f2 * (1 - 1e-9):
            del out[key]
    return out


def ckt_gain(net):
    return net["c"].astype(np.float64) @ solve(net["G"], net["b"])


# --------------------------------------------------------------------------------------------
# Noise
#
# Every noise source is an uncorrelated white current between two nodes [common practice;
# Gray, Hurst, Lewis & Meyer, Analysis and Design of Analog Integrated Circuits, noise
# chapter, from memory]: 4kT/R for each physical resistor (Johnson–Nyquist), 2q|I| for the
# collector and base currents (Schottky), 4kT·(2/3)·g_m for a MOSFET channel. rπ, r_o and
# controlled sources are noiseless. Its output density is |Z_k(f)|²·S_k, Z_k the transfer
# from that current to the output voltage, and the densities add.
#
# tauweave finds every Z_k from one adjoint (transposed) solve per frequency. This reference
# does NOT use the adjoint: it solves the network directly for each source — one right-hand
# side per source (a unit current out of one node and into the other), all against the one
# matrix G + j2πf·C of that frequency — and reads each output voltage: the same numbers by
# another route.


def noise_sources(ckt, source=True):
    """Every noise current: (part, mechanism, a, b, S in A²/Hz, is_source, 1/f?), a 1/f
    current's S at 1 Hz. The signal source's resistance is at T0, every other part at the
    design temperature."""
    out = []
    for e in ckt.parts:
        if e["kind"] == "resistor" and e.get("noise") and e["value"] > 0:
            out.append((*e["noise"], e["a"], e["b"], 4 * BOLTZMANN * ckt.kelvin / e["value"], False, False))
    out += [(*shot[:5], False, shot[5]) for shot in ckt.shot]
    if source:
        out.append(("source", "thermal", ckt.sig_p, ckt.sig_n, 4 * BOLTZMANN * T0 / ckt.r_sig, True, False))
    return out


def _excitations(net, sources, inject_at=None):
    """Right-hand sides, one column each: the signal (u = 1), a unit current from a to b for
    each source, and last a unit current into `inject_at` from ground (zero without one)."""
    ix = net["ix"]
    D = np.zeros((len(net["b"]), 2 + len(sources)), dtype=WIDE)
    D[:, 0] = net["b"]
    for k, src in enumerate(sources, start=1):
        for node, sgn in ((src[2], -1.0), (src[3], 1.0)):
            if ix(node) is not None:
                D[ix(node), k] += sgn
    if inject_at is not None and ix(inject_at) is not None:
        D[ix(inject_at), -1] = 1.0
    return D


def _outputs(net, D, f):
    """The output voltage (complex) for each column of D at s = j2πf, from one direct solve."""
    X = solve(net["G"] + TWO_PI_J * WIDE(f) * net["C"], D.astype(np.clongdouble))
    return np.array([complex(v) for v in net["c"].astype(np.clongdouble) @ X])


def _spectrum(net, sources, D, f):
    """(|H|, each source's output density V²/Hz, |Z| of the extra column) at f."""
    z = _outputs(net, D, f)
    dens = np.array([s[4] / f if s[6] else s[4] for s in sources])
    return abs(z[0]), np.abs(z[1:-1]) ** 2 * dens, abs(z[-1])


def _integrate(g, f1, f2):
    """∫ g(f) df over [f1, f2] of a vector g of non-negative densities, in u = ln f as
    ∫ g(e^u)·e^u du, by scipy's adaptive Gauss–Kronrod rule for vector integrands
    (scipy.integrate.quad_vec, 21 points; the QUADPACK scheme of Piessens et al., 1983, from
    memory) to 1e-12 relative. A first fixed Gauss–Legendre pass (16 points on each of
    max(16, 4·decades) panels) gives each component's size, and the adaptive pass integrates
    every component divided by it, so that the tolerance holds for each component and not
    only for the largest (components below 1e-12 of the largest are held to 1e-24 of it)."""
    a, b = math.log(f1), math.log(f2)
    h = lambda u: g(math.exp(u)) * math.exp(u)  # noqa: E731
    panels = max(16, int(math.ceil(4 * (b - a) / math.log(10))))
    x, w = np.polynomial.legendre.leggauss(16)
    edges = np.linspace(a, b, panels + 1)
    rough = sum(0.5 * (hi - lo) * sum(wk * h(0.5 * (hi - lo) * xk + 0.5 * (hi + lo)) for xk, wk in zip(x, w))
                for lo, hi in zip(edges[:-1], edges[1:]))
    scale = np.maximum(np.abs(rough), 1e-12 * np.max(np.abs(rough)))
    scale[scale == 0] = 1.0
    res, err = scipy.integrate.quad_vec(lambda u: h(u) / scale, a, b, epsabs=0.0, epsrel=1e-12, norm="max",
                                        limit=100000, points=edges[1:-1])
    if not err <= 1e-10 * np.max(np.abs(res)):
        raise ArithmeticError(f"noise integral over {f1:g}…{f2:g} Hz did not converge (error {err:g})")
    return res * scale


def noise_review(ckt, spot_hz, band):
    """tauweave's `noise` object (results.json), on the full network (every capacitor and
    inductor present, u = 0). band: (from, to, basis) or None."""
    dyn = {e["name"]: "dyn" for e in ckt.low + ckt.high}
    full = ckt.network(dyn, inductors="dyn")
    srcs = noise_sources(ckt)
    D = _excitations(full, srcs)
    try:
        gain, each, _ = _spectrum(full, srcs, D, spot_hz)
    except np.linalg.LinAlgError:
        return None
    total = float(np.sum(each))
    from_source = float(sum(v for v, s in zip(each, srcs) if s[5]))
    factor = total / from_source if from_source > 0 else None

    # Equivalent input generators [Gray, Hurst, Lewis & Meyer, noise chapter, from memory]:
    # the stage's own sources (all but the source resistance) with the source shorted
    # (1 µΩ, as tauweave defines it) referred by that network's gain -> e_n²; with the source
    # open referred by the transimpedance from a current into the input node -> i_n².
    own = noise_sources(ckt, source=False)
    e2 = i2 = None
    try:
        short = ckt.network(dyn, inductors="dyn", r_sig=1e-6)
        g_short, each_short, _ = _spectrum(short, own, _excitations(short, own), spot_hz)
        opened = ckt.network(dyn, inductors="dyn", rsig=False)
        _, each_open, z_t = _spectrum(opened, own, _excitations(opened, own, inject_at=ckt.sig_p), spot_hz)
        if g_short > 0 and z_t > 0:
            e2, i2 = float(np.sum(each_short)) / g_short**2, float(np.sum(each_open)) / z_t**2
    except np.linalg.LinAlgError:
        pass
    # The optimum source resistance and the noise factor there, e_n and i_n uncorrelated:
    # R_opt = e_n/i_n, F_min = 1 + 2·e_n·i_n/(4kT0) [same source, from memory].
    r_opt = nf_min = None
    if e2 is not None and e2 > 0 and i2 > 0:
        r_opt = math.sqrt(e2 / i2)
        nf_min = 10 * math.log10(1 + 2 * math.sqrt(e2 * i2) / (4 * BOLTZMANN * T0))

    band_out, sums = None, None
    if band:
        f1, f2, basis = band

        def densities(f):
            g, ev, _ = _spectrum(full, srcs, D, f)
            if not g > 0:
                raise ZeroDivisionError(f"no gain at {f:g} Hz")  # nothing to refer the noise to
            return np.append(ev, np.sum(ev) / g**2)

        try:
            sums = _integrate(densities, f1, f2)
        except (ZeroDivisionError, np.linalg.LinAlgError):
            sums = None  # as tauweave: no band figures where the band cannot be integrated
        if sums is not None:
            band_out = {"start_hz": f1, "stop_hz": f2, "basis": basis,
                        "output_rms_v": math.sqrt(float(np.sum(sums[:-1]))),
                        "input_rms_v": math.sqrt(float(sums[-1]))}

    groups = {}  # (part, mechanism) -> [spot density, band integral]
    for k, src in enumerate(srcs):
        acc = groups.setdefault((src[0], src[1]), [0.0, 0.0])
        acc[0] += float(each[k])
        acc[1] += float(sums[k]) if sums is not None else 0.0
    band_total = float(np.sum(sums[:-1])) if sums is not None else None
    contributors = [{"part": part, "mechanism": mech, "density_v2_per_hz": v,
                     "share": v / total if total > 0 else 0.0,
                     "band_share": (b / band_total if band_total > 0 else 0.0) if sums is not None else None}
                    for (part, mech), (v, b) in groups.items()]
    contributors.sort(key=lambda c: (-c["share"], c["part"]))
    return {
        "temperature_k": ckt.kelvin,
        "source_resistance_ohm": ckt.r_sig,
        "spot_frequency_hz": spot_hz,
        "output_density_v_per_rthz": math.sqrt(total),
        "input_density_v_per_rthz": math.sqrt(total) / gain if gain > 0 else None,
        "noise_factor": factor,
        "noise_figure_db": 10 * math.log10(factor) if factor else None,
        "e_n_v_per_rthz": math.sqrt(e2) if e2 is not None else None,
        "i_n_a_per_rthz": math.sqrt(i2) if i2 is not None else None,
        "r_opt_ohm": r_opt,
        "nf_min_db": nf_min,
        "band": band_out,
        # SNR over the band: the signal's rms through |H| at the spot frequency, over the rms
        # output noise (the usual definition at the output, common practice).
        "signal_rms_v": ckt.signal_rms,
        "snr_db": (20 * math.log10(ckt.signal_rms * gain / band_out["output_rms_v"])
                   if ckt.signal_rms and band_out and gain > 0 else None),
        "contributors": contributors,
    }


# --------------------------------------------------------------------------------------------
# Ports: the stage as a two-port in a reference impedance Z0, from its own admittance matrix

MU_MARGIN = 1e-6  # μ this far under 1 counts as conditionally stable (tauweave's convention)
# A product of unit-order S-parameters at or under this is rounding (tauweave's convention):
# K needs |S12·S21| above it (else the stage is unilateral), μ its denominator above it (for a
# unilateral stage with a lossless input μ is 0/0), and a VSWR |Γ| below 1 by more than it.
NEGLIGIBLE = 1e-9
BAND_POINTS = 64  # log-spaced points, edges included, on which a band's worst match is found


def _sweep_grid(doc):
    """The sweep's frequencies: `steps` = ⌈decades·points_per_decade⌉ log-spaced steps from
    start to stop (defaults 1 Hz, 10 GHz, 40 a decade; docs/design-format.md)."""
    q = Quantities(doc.get("params"))
    sw = (doc.get("analysis") or {}).get("sweep") or {}
    start = q.value(sw["start"]) if "start" in sw else 1.0
    stop = q.value(sw["stop"]) if "stop" in sw else 10e9
    ppd = int(sw.get("points_per_decade", 40))
    decades = math.log10(stop) - math.log10(start)
    steps = max(math.ceil(decades * ppd), 1)
    return [start * 10 ** (decades * k / steps) for k in range(steps + 1)], ppd


def _port_admittance(net, ports, f):
    """The 2×2 admittance matrix of the ports at f: the network's own MNA extended with an
    ideal voltage source across each port; Y[j, k] is the current into port j for 1 V at
    port k with the other port shorted (the definition of the y-parameters)."""
    G, C = net["G"], net["C"]
    n = G.shape[0]
    A = np.zeros((n + 2, n + 2), dtype=np.clongdouble)
    A[:n, :n] = G + TWO_PI_J * WIDE(f) * C
    for k, (p, m) in enumerate(ports):
        for node, sgn in ((p, 1.0), (m, -1.0)):
            i = net["ix"](node)
            if i is not None:
                A[i, n + k] += sgn
                A[n + k, i] += sgn
    B = np.zeros((n + 2, 2), dtype=np.clongdouble)
    B[n, 0] = B[n + 1, 1] = 1
    X = solve(A, B)
    # The source's branch current flows from p through the source: the port current is its
    # negative.
    return np.array(-X[n:, :], dtype=np.complex128)


def _port_impedance(net, ports, f):
    """The 2×2 impedance matrix of the ports at f: Z[j, k] is the voltage at port j for 1 A
    into port k with the other port open (the definition of the z-parameters)."""
    n = net["G"].shape[0]
    D = np.zeros((n, 2), dtype=np.clongdouble)
    for k, (p, m) in enumerate(ports):
        for node, sgn in ((p, 1.0), (m, -1.0)):
            if net["ix"](node) is not None:
                D[net["ix"](node), k] += sgn
    X = solve(net["G"] + TWO_PI_J * WIDE(f) * net["C"], D)
    return np.array(D.T @ X, dtype=np.complex128)


def _impedance(net, p, m, f):
    """The impedance between p and m at f: 1 A in at p, out at m, v(p) − v(m)."""
    n = net["G"].shape[0]
    d = np.zeros(n, dtype=np.clongdouble)
    for node, sgn in ((p, 1.0), (m, -1.0)):
        if net["ix"](node) is not None:
            d[net["ix"](node)] += sgn
    x = solve(net["G"] + TWO_PI_J * WIDE(f) * net["C"], d)
    return complex(d @ x)


def _s_from_y(Y, z0):
    """S = (I − Z0·Y)(I + Z0·Y)⁻¹, both ports in Z0 (Pozar, Microwave Engineering, table 4.2,
    from memory)."""
    y = z0 * Y
    eye = np.eye(2)
    return (eye - y) @ np.linalg.inv(eye + y)


def _s_from_z(Z, z0):
    """S = (Z − Z0·I)(Z + Z0·I)⁻¹ (Pozar, table 4.2, from memory): for ports that share a
    node, whose y-parameters do not exist."""
    eye = np.eye(2)
    return (Z - z0 * eye) @ np.linalg.inv(Z + z0 * eye)


def _k_delta_mu(S):
    """Rollett's K, |Δ| and Edwards–Sinsky μ (IEEE Trans. MTT 40(12), 1992) of S."""
    s11, s12, s21, s22 = S[0, 0], S[0, 1], S[1, 0], S[1, 1]
    delta = s11 * s22 - s12 * s21
    loop = abs(s12 * s21)
    k = (1 - abs(s11) ** 2 - abs(s22) ** 2 + abs(delta) ** 2) / (2 * loop) if loop > NEGLIGIBLE else None
    den = abs(s22 - delta * s11.conjugate()) + loop
    mu = (1 - abs(s11) ** 2) / den if den > NEGLIGIBLE else None
    return k, abs(delta), mu


def ports_review(ckt, doc, spot_hz, band):
    """results.json's `ports`: the stage without the source resistance and the design's load
    as a two-port (port 1 the source's terminals, port 2 the output), its S-parameters in Z0
    from its y-parameters, K and μ over the whole sweep; the input impedance with the design's
    load and the output impedance with the design's source resistance, each solved directly;
    the worst return loss across `band` (from, to)."""
    q = Quantities(doc.get("params"))
    analysis = doc.get("analysis") or {}
    z0 = q.value(analysis["reference_impedance"]) if "reference_impedance" in analysis else 50.0
    caps = [e for e in ckt.low + ckt.high]
    dyn = {e["name"]: "dyn" for e in caps}
    bare = ckt.network({k: v for k, v in dyn.items() if k != "load.c"}, inductors="dyn",
                       rsig=False, loadr=False)
    loaded = ckt.network(dyn, inductors="dyn", rsig=False)
    sourced = ckt.network({k: v for k, v in dyn.items() if k != "load.c"}, inductors="dyn",
                          loadr=False)
    ports = [(ckt.sig_p, ckt.sig_n), (ckt.out_p, ckt.out_n)]

    # Ports across the same two nodes (input and output at one node) have no y-parameters:
    # their z-parameters then.
    same = {bare["ix"](n) for n in ports[0]} == {bare["ix"](n) for n in ports[1]}

    def s_at(f):
        if same:
            return _s_from_z(_port_impedance(bare, ports, f), z0)
        return _s_from_y(_port_admittance(bare, ports, f), z0)

    grid, ppd = _sweep_grid(doc)
    every = [(f, s_at(f)) for f in grid]
    shown = every[:: max(ppd // 10, 1)]
    ks, mus, unstable, open_range = [], [], [], None
    for f, S in every:
        k, _, mu = _k_delta_mu(S)
        if k is not None:
            ks.append(k)
        if mu is not None:
            mus.append(mu)
        if mu is not None and mu < 1 - MU_MARGIN:
            open_range = [open_range[0], f] if open_range else [f, f]
        elif open_range:
            unstable.append(open_range)
            open_range = None
    if open_range:
        unstable.append(open_range)

    def pair(z):
        return [z.real, z.imag]

    def imp(f, z):
        return {"frequency_hz": f, "re_ohm": z.real, "im_ohm": z.imag}

    def db(x):
        return 20 * math.log10(x) if x > 0 else None

    def vswr(g):
        return (1 + abs(g)) / (1 - abs(g)) if abs(g) < 1 - NEGLIGIBLE else None

    def z_in(f):
        return _impedance(loaded, ckt.sig_p, ckt.sig_n, f)

    def z_out(f):
        return _impedance(sourced, ckt.out_p, ckt.out_n, f)

    def spot_at(f):
        S = s_at(f)
        k, delta, mu = _k_delta_mu(S)
        return {
            "frequency_hz": f,
            "input_impedance": imp(f, z_in(f)),
            "output_impedance": imp(f, z_out(f)),
            "s21_db": db(abs(S[1, 0])),
            "input_return_loss_db": None if abs(S[0, 0]) == 0 else -db(abs(S[0, 0])),
            "output_return_loss_db": None if abs(S[1, 1]) == 0 else -db(abs(S[1, 1])),
            "input_vswr": vswr(S[0, 0]),
            "output_vswr": vswr(S[1, 1]),
            "reverse_isolation_db": None if abs(S[0, 1]) <= NEGLIGIBLE else -db(abs(S[0, 1])),
            "k": k,
            "delta": delta,
            "mu": mu,
        }

    # No spot without a mid-band frequency (a network without capacitors, here).
    spot = None if spot_hz is None else spot_at(spot_hz)
    out = {
        "reference_ohm": z0,
        "spot": spot,
        "input_impedance": [imp(f, z_in(f)) for f, _ in shown],
        "output_impedance": [imp(f, z_out(f)) for f, _ in shown],
        "s_parameters": [{"frequency_hz": f, "s11": pair(S[0, 0]), "s21": pair(S[1, 0]),
                          "s12": pair(S[0, 1]), "s22": pair(S[1, 1])} for f, S in shown],
        "stability": {"k_min": min(ks) if ks else None, "mu_min": min(mus) if mus else None,
                      "conditionally_stable_hz": unstable},
    }
    if band:
        lo, hi = band
        n = BAND_POINTS - 1
        points = [hi if k == n else lo * (hi / lo) ** (k / n) for k in range(n + 1)]
        rl_in, rl_out = [], []
        for f in points:
            S = s_at(f)
            if abs(S[0, 0]) > 0:
                rl_in.append((-db(abs(S[0, 0])), f))
            if abs(S[1, 1]) > 0:
                rl_out.append((-db(abs(S[1, 1])), f))
        worst_in, worst_out = min(rl_in, default=None), min(rl_out, default=None)
        out["band"] = {
            "from_hz": lo, "to_hz": hi,
            "input_return_loss_min_db": worst_in[0] if worst_in else None,
            "input_worst_hz": worst_in[1] if worst_in else None,
            "output_return_loss_min_db": worst_out[0] if worst_out else None,
            "output_worst_hz": worst_out[1] if worst_out else None,
        }
    return out


def main(argv):
    args, bias_path, with_noise, with_ports = [], None, False, False
    rest = list(argv[1:])
    while rest:
        a = rest.pop(0)
        if a == "--bias" and rest:
            bias_path = rest.pop(0)
        elif a == "--noise":
            with_noise = True
        elif a == "--ports":
            with_ports = True
        else:
            args.append(a)
    if len(args) != 1:
        print(__doc__.strip().splitlines()[2], file=sys.stderr)
        return 2
    bias = None
    if bias_path:
        with open(bias_path, encoding="utf-8") as f:
            op = json.load(f).get("operating_point") or {}
        bias = {d["part"]: d for d in op.get("devices") or []}
    result = analyze(load_design(args[0]), bias=bias, noise=with_noise, ports=with_ports)
    print(json.dumps(result, indent=2, allow_nan=False))
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv))
