#!/usr/bin/env python3
"""Self-checks of mna_reference.py against outside closed forms and exact identities.

Run: python3 tests/reference/selftest.py   (exit 0 when every check holds, 1 otherwise)

Sources are named beside each check; the tags follow docs/methods.md: [pub] stated in
the named publication, [derived] follows from the algebra and is checked numerically here.
"""

import glob
import json
import math
import os
import sys

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import mna_reference as ref  # noqa: E402
import numpy as np  # noqa: E402

HERE = os.path.dirname(os.path.abspath(__file__))
FAILURES = []
COUNT = 0


def close(what, got, want, rel=1e-9):
    global COUNT
    COUNT += 1
    ok = got is not None and want is not None and abs(got - want) <= rel * max(abs(want), 1e-300)
    if not ok:
        FAILURES.append(f"{what}: got {got!r}, want {want!r} (rel {rel:g})")
    return ok


def truth(what, cond, detail=""):
    global COUNT
    COUNT += 1
    if not cond:
        FAILURES.append(f"{what}: {detail}")


def design(parts, at="in", rsig=50.0, out="out", load_r=None, load_c=None, supplies=None, params=None,
           temperature=None, band=None):
    doc = {"tauweave": 1,
           "design": {"id": "selftest", "title": "selftest", "revision": "A", "date": "2026-12-01"},
           "signal": {"at": at, "resistance": rsig}, "output": {"at": out}, "parts": parts}
    if temperature is not None:
        doc["environment"] = {"temperature": temperature}
    if band is not None:
        doc["signal"]["band"] = {"from": band[0], "to": band[1]}
    if load_r is not None:
        doc["output"]["load_resistance"] = load_r
    if load_c is not None:
        doc["output"]["load_capacitance"] = load_c
    if supplies:
        doc["supplies"] = supplies
    if params:
        doc["params"] = params
    return doc


def R(a, b, v):
    return {"kind": "resistor", "value": v, "between": [a, b]}


def Cap(a, b, v, role=None):
    d = {"kind": "capacitor", "value": v, "between": [a, b]}
    if role:
        d["role"] = role
    return d


def Gm(a, b, cp, cn, v):
    return {"kind": "transconductance", "value": v, "between": [a, b], "control": [cp, cn]}


def Amp(a, b, cp, cn, v):
    return {"kind": "voltage_amplifier", "value": v, "between": [a, b], "control": [cp, cn]}


def par(*rs):
    return 1.0 / sum(1.0 / r for r in rs)


def octc(res, part):
    return next(c for c in res["high"]["octc"]["caps"] if c["part"] == part)


def s_of(p):
    return complex(p["re_hz"], p["im_hz"]) * 2 * math.pi


# --------------------------------------------------------------------------------------------
def check_quantities():
    q = ref.Quantities({"r_bias": "10k", "c_a": "330 pF", "c_b": "140pF", "c_sum": "c_a + c_b",
                        "len_": "2.5 m", "c_per_m": "100 pF/m", "cable": "len_ * c_per_m"})
    # IEC 60062 letter-and-digit code: the letter stands in the decimal point [pub: IEC 60062].
    for text, want in [("4k7", 4.7e3), ("2R2", 2.2), ("R47", 0.47), ("4n7", 4.7e-9), ("1M5", 1.5e6),
                       ("4K7", 4.7e3)]:
        close(f"IEC code {text}", q.value(text), want, 1e-15)
    # SI prefixes and units [pub: BIPM SI Brochure, 9th ed.]; 'M' mega, 'm' milli, lone spaced
    # 'm' is the metre (design-format.md).
    for text, want in [("47k", 47e3), ("47 kΩ", 47e3), ("47e3", 47e3), ("47000 ohm", 47e3),
                       ("10m", 0.01), ("2.5 m", 2.5), ("2.2 uF", 2.2e-6), ("2.2 µF", 2.2e-6),
                       ("200 fF", 200e-15), ("38.7 mS", 38.7e-3), ("1 MΩ", 1e6), ("1 V/V", 1.0),
                       ("2.2 µH", 2.2e-6), ("10 %", 0.1), ("1 GHz", 1e9), ("1 THz", 1e12)]:
        close(f"quantity {text}", q.value(text), want, 1e-15)
    # dB for gains: 20 dB = 10 V/V (design-format.md; 20·log10 of a voltage ratio).
    close("quantity 20 dB", q.value("20 dB"), 10.0, 1e-15)
    # Expressions with + - * / and parentheses over params (design-format.md).
    close("expr c_a + c_b", q.value("c_sum"), 470e-12, 1e-15)
    close("expr 2 * r_bias + 100 Ω", q.value("2 * r_bias + 100 Ω"), 20100.0, 1e-15)
    close("expr (r_bias + 1k) * 2", q.value("(r_bias + 1k) * 2"), 22e3, 1e-15)
    close("expr -(1k - 3k) / 2", q.value("-(1k - 3k) / 2"), 1e3, 1e-15)
    close("expr pF/m * m", q.value("cable"), 250e-12, 1e-15)
    for bad in ["4.7kk", "10 pfarad", "nan", "inf", "1 +", "(1k"]:
        try:
            q.value(bad)
            truth(f"quantity {bad!r} refused", False, "was accepted")
        except (ref.QuantityError, ValueError, OverflowError):
            truth(f"quantity {bad!r} refused", True)


def check_single_pole():
    # First-order RC low-pass: |H| = 1/sqrt(1 + (ωRC)²), so f_3dB = 1/(2πRC)
    # [pub: Sedra & Smith, Microelectronic Circuits, single-time-constant networks].
    for r_sig, r1, c in [(50.0, 950.0, 100e-12), (1e3, 0.0, 4.7e-9), (10.0, 1e6, 1e-15)]:
        parts = {"C1": Cap("out", "gnd", c, role="parasitic")}
        if r1:
            parts = {"R1": R("in", "out", r1), **parts}
        res = ref.analyze(design(parts, at="in" if r1 else "out", rsig=r_sig))
        f = 1 / (2 * math.pi * (r_sig + r1) * c)
        close(f"single pole R={r_sig + r1:g} C={c:g}: f3db", res["high"]["f3db_hz"], f)
        close(f"single pole R={r_sig + r1:g} C={c:g}: octc estimate", res["high"]["octc"]["f_estimate_hz"], f)
        close(f"single pole R={r_sig + r1:g} C={c:g}: pole", -res["poles"][0]["re_hz"], f)
        truth("single pole: no low cutoff", res["low"]["f3db_hz"] is None, res["low"]["f3db_hz"])
    # First-order RC high-pass: f_3dB = 1/(2π (R_sig + R_L) C) [pub: Sedra & Smith, same section].
    res = ref.analyze(design({"C1": Cap("in", "out", 1e-6, role="coupling"), "RL": R("out", "gnd", 9.95e3)},
                             rsig=50.0))
    close("single-pole high-pass: f3db", res["low"]["f3db_hz"], 1 / (2 * math.pi * 1e4 * 1e-6))
    close("single-pole high-pass: sctc", res["low"]["sctc"]["f_estimate_hz"], 1 / (2 * math.pi * 1e4 * 1e-6))


def check_ce_gray_meyer():
    # Common-emitter stage without r_x and r_o; emitter bypassed, coupling caps shorted at HF.
    rsig, rb1, rb2, rpi, gm, cpi, cmu, rc, rl, cl = 1e3, 100e3, 25e3, 2.5e3, 40e-3, 10e-12, 0.5e-12, 5e3, 10e3, 2e-12
    parts = {
        "C1": Cap("in", "b", 10e-6, "coupling"), "RB1": R("vcc", "b", rb1), "RB2": R("b", "gnd", rb2),
        "RPI": R("b", "e", rpi), "CPI": Cap("b", "e", cpi), "CMU": Cap("b", "c", cmu, "parasitic"),
        "GM": Gm("c", "e", "b", "e", gm), "RE": R("e", "gnd", 1e3), "CE": Cap("e", "gnd", 100e-6, "bypass"),
        "RC": R("vcc", "c", rc), "C2": Cap("c", "out", 10e-6, "coupling"),
    }
    res = ref.analyze(design(parts, rsig=rsig, load_r=rl, load_c=cl, supplies={"vcc": "12 V"}))
    rs1 = par(rsig, rb1, rb2)  # R_s' (no r_x)
    rs2 = par(rs1, rpi)        # R_s''
    rl1 = par(rc, rl)          # R_L'
    # [pub: Gray, Hurst, Lewis & Meyer, ch. 7, CE zero-value time constants]
    close("CE R_pi0 = R_s''", octc(res, "CPI")["r_ohm"], rs2)
    close("CE R_mu0 = R_s''(1 + gm R_L') + R_L'", octc(res, "CMU")["r_ohm"], rs2 * (1 + gm * rl1) + rl1)
    close("CE R_CL0 = R_L'", octc(res, "load.c")["r_ohm"], rl1)
    # Miller factor R_mu0/(R_a + R_b) with R_a = R_s'', R_b = R_L' the terminal resistances to
    # ground [derived from the Gray–Meyer R_mu0 above; docs/methods.md, Time constants].
    close("CE Cmu miller factor", octc(res, "CMU")["miller_factor"], (rs2 * (1 + gm * rl1) + rl1) / (rs2 + rl1))
    b1 = rs2 * (cpi + cmu * (1 + gm * rl1)) + rl1 * (cmu + cl)
    close("CE b1 = R_s''(Cpi + Cmu(1 + gm R_L')) + R_L'(Cmu + C_L)", res["high"]["b1_s"], b1)
    close("CE b2 = R_s'' R_L'(CpiCmu + CpiC_L + CmuC_L)", res["high"]["b2_s2"],
          rs2 * rl1 * (cpi * cmu + cpi * cl + cmu * cl))
    zeros = res["high"]["zeros_hz"]
    truth("CE HIGH network has one finite zero", len(zeros) == 1, zeros)
    close("CE zero at +gm/Cmu", s_of(zeros[0]).real, gm / cmu)
    # RSS with the Gray–Meyer b1, b2 and zero: for real poles Σ 1/p² = b1² - 2 b2 (Vieta), so
    # f_RSS = 1/(2π sqrt(b1² - 2 b2 - 2 (Cmu/gm)²)) [RSS form: memory, Sedra & Smith — section
    # not verified; the identity: derived].
    b2 = rs2 * rl1 * (cpi * cmu + cpi * cl + cmu * cl)
    truth("CE HIGH poles are real", all(p["im_hz"] == 0 for p in res["high"]["poles_hz"]), res["high"]["poles_hz"])
    close("CE RSS estimate", res["high"]["rss_f_estimate_hz"],
          1 / (2 * math.pi * math.sqrt(b1 * b1 - 2 * b2 - 2 * (cmu / gm) ** 2)), 1e-8)
    # Mid-band gain: -(R_in/(R_in + R_sig)) gm R_L' with R_in = R_B ∥ rπ and the source divider
    # taken as R_B ∥ rπ against R_sig [pub: Sedra & Smith, CE amplifier].
    rin = par(rb1, rb2, rpi)
    close("CE midband gain", res["midband"]["gain"], -(rin / (rin + rsig)) * gm * rl1)
    close("CE input resistance = R_B ∥ rπ", res["midband"]["input_resistance_ohm"], rin)
    close("CE output resistance = R_C", res["midband"]["output_resistance_ohm"], rc)
    # Frequency scaling: doubling every capacitor halves every cut-off [derived, docs/methods.md, Sensitivity].
    scaled = {k: ({**v, "value": 2 * v["value"]} if v["kind"] == "capacitor" else v) for k, v in parts.items()}
    res2 = ref.analyze(design(scaled, rsig=rsig, load_r=rl, load_c=2 * cl, supplies={"vcc": "12 V"}))
    close("CE capacitance scaling: f_H", res2["high"]["f3db_hz"], res["high"]["f3db_hz"] / 2, 1e-9)
    close("CE capacitance scaling: f_L", res2["low"]["f3db_hz"], res["low"]["f3db_hz"] / 2, 1e-9)


def check_ce_degenerated():
    # CE with an unbypassed emitter resistor R_E and r_x, r_o ignored.
    rsig, rpi, gm, re, rc = 2e3, 2.5e3, 40e-3, 200.0, 5e3
    beta = gm * rpi
    parts = {"RB": R("in", "gnd", 1e9), "RPI": R("in", "e", rpi), "CPI": Cap("in", "e", 10e-12),
             "CMU": Cap("in", "c", 0.5e-12), "GM": Gm("c", "e", "in", "e", gm), "RE": R("e", "gnd", re),
             "RC": R("vcc", "c", rc)}
    res = ref.analyze(design(parts, rsig=rsig, out="c", supplies={"vcc": 9}))
    rs1 = par(rsig, 1e9)
    # [pub: Sedra & Smith; derived exact, docs/methods.md, Closed forms]
    close("CE+RE R_pi0 = rπ ∥ (R_s' + R_E)/(1 + gm R_E)", octc(res, "CPI")["r_ohm"],
          par(rpi, (rs1 + re) / (1 + gm * re)))
    rb = par(rs1, rpi + (beta + 1) * re)
    gmeff = beta / (rpi + (beta + 1) * re)
    close("CE+RE R_mu0 = R_B(1 + G_m R_L') + R_L'", octc(res, "CMU")["r_ohm"], rb * (1 + gmeff * rc) + rc)


def check_cs_razavi():
    # Common-source stage, r_o folded into R_D; R_S the source resistance seen by the gate.
    rsig, rg, gm, rd, rl, cgs, cgd, cdb = 10e3, 1e6, 5e-3, 10e3, 40e3, 1e-12, 0.2e-12, 0.5e-12
    parts = {"C1": Cap("in", "g", 1e-6, "coupling"), "RG": R("g", "gnd", rg),
             "CGS": Cap("g", "gnd", cgs), "CGD": Cap("g", "d", cgd), "CDB": Cap("d", "gnd", cdb),
             "GM": Gm("d", "gnd", "g", "gnd", gm), "RD": R("vdd", "d", rd)}
    res = ref.analyze(design(parts, rsig=rsig, out="d", load_r=rl, supplies={"vdd": 5}))
    rs, rdp = par(rsig, rg), par(rd, rl)
    # [pub: Razavi, Design of Analog CMOS Integrated Circuits, ch. 6, CS frequency response]
    close("CS R_gs0 = R_S", octc(res, "CGS")["r_ohm"], rs)
    close("CS R_gd0 = R_S + R_D + gm R_D R_S", octc(res, "CGD")["r_ohm"], rs + rdp + gm * rdp * rs)
    close("CS R_db0 = R_D", octc(res, "CDB")["r_ohm"], rdp)
    close("CS b1", res["high"]["b1_s"], rs * (1 + gm * rdp) * cgd + rs * cgs + rdp * (cgd + cdb))
    close("CS b2", res["high"]["b2_s2"], rs * rdp * (cgs * cgd + cgs * cdb + cgd * cdb))
    zeros = res["high"]["zeros_hz"]
    truth("CS HIGH network has one finite zero", len(zeros) == 1, zeros)
    close("CS zero at +gm/Cgd", s_of(zeros[0]).real, gm / cgd)


def check_cs_published():
    # [pub: Sedra & Smith, CS amplifier problem, book answer]: R_sig = 100 kΩ, R_in = 100 kΩ,
    # Cgs = 1 pF, Cgd = 0.2 pF, gm = 5 mA/V, r_o = 25 kΩ, R_L = 20 kΩ -> A_M = -27.8 V/V and
    # f_H ≈ 259 kHz (Miller estimate). The OCTC sum adds R_L'·Cgd (2.2 ns of 618 ns) to the
    # Miller time constant, so it is held to the book's figure within 1 %.
    parts = {"RIN": R("g", "gnd", 100e3), "CGS": Cap("g", "gnd", 1e-12), "CGD": Cap("g", "d", 0.2e-12),
             "GM": Gm("d", "gnd", "g", "gnd", 5e-3), "RO": R("d", "gnd", 25e3)}
    res = ref.analyze(design(parts, at="g", rsig=100e3, out="d", load_r=20e3))
    truth("published CS: A_M = -27.8 V/V", round(res["midband"]["gain"], 1) == -27.8, res["midband"]["gain"])
    close("published CS: f_H ≈ 259 kHz", res["high"]["octc"]["f_estimate_hz"], 259e3, 0.01)


def check_follower():
    # Emitter follower with r_x, collector at AC ground, load R_L at the emitter.
    rsig, rx, rpi, gm, rlo = 4.7e3, 35.0, 1.8e3, 67e-3, 820.0
    beta = gm * rpi
    parts = {"RX": R("in", "b", rx), "RPI": R("b", "out", rpi), "CPI": Cap("b", "out", 6.3e-12),
             "CMU": Cap("b", "vcc", 0.5e-12), "GM": Gm("vcc", "out", "b", "out", gm),
             "RE": R("out", "gnd", rlo)}
    res = ref.analyze(design(parts, rsig=rsig, supplies={"vcc": 5}, load_c=470e-12))
    rs1 = rsig + rx  # R_s' includes r_x
    # [pub: Sedra & Smith; derived, docs/methods.md, Closed forms]
    close("EF R_pi0 = rπ ∥ (R_s' + R_L)/(1 + gm R_L)", octc(res, "CPI")["r_ohm"],
          par(rpi, (rs1 + rlo) / (1 + gm * rlo)))
    close("EF R_mu0 = R_s' ∥ (rπ + (β+1)R_L)", octc(res, "CMU")["r_ohm"], par(rs1, rpi + (beta + 1) * rlo))
    truth("EF with 4.7 kΩ source and 470 pF: complex high poles",
          any(abs(p["im_hz"]) > 0 for p in res["high"]["poles_hz"]), res["high"]["poles_hz"])


def check_isolated_sections():
    # n identical isolated real poles at f_p: f_3dB = f_p sqrt(2^(1/n) - 1); time-constant sum
    # gives f_p/n [derived, docs/methods.md, Estimates: 0.6436, 0.5098, 0.4350 for n = 2, 3, 4].
    r, c = 1e3, 1e-9
    fp = 1 / (2 * math.pi * r * c)
    for n, table in [(1, 1.0), (2, 0.6436), (3, 0.5098), (4, 0.4350)]:
        parts, node = {}, "in"
        for k in range(n):
            if k:
                parts[f"E{k}"] = Amp(f"o{k}", "gnd", node, "gnd", 1)
                parts[f"R{k}"] = R(f"o{k}", f"n{k}", r)
                node = f"n{k}"
            parts[f"C{k}"] = Cap(node, "gnd", c, "parasitic")
        res = ref.analyze(design(parts, rsig=r, out=node))
        ratio = math.sqrt(2 ** (1 / n) - 1)
        close(f"{n} isolated sections: f3db = f_p sqrt(2^(1/n) - 1)", res["high"]["f3db_hz"], fp * ratio)
        close(f"{n} isolated sections: table value", round(ratio, 4), table, 1e-12)
        close(f"{n} isolated sections: OCTC = f_p/n", res["high"]["octc"]["f_estimate_hz"], fp / n)
        # RSS of n equal poles and no zeros: f_p/√n [memory: Sedra & Smith, frequency-response
        # chapter; section not verified — the check follows the formula as docs/methods.md, Estimates states it].
        close(f"{n} isolated sections: RSS = f_p/√n", res["high"]["rss_f_estimate_hz"], fp / math.sqrt(n))
    # Two isolated sections with different time constants and no zeros: H = 1/(1 + b1 s + b2 s²)
    # exactly, so the two-pole −3 dB formula is exact, b2 = τ1 τ2 and the poles are -1/τ1, -1/τ2
    # [derived, docs/methods.md, Estimates: the second-order estimate].
    t1, t2 = 1e3 * 1e-9, 3e3 * 10e-9
    parts = {"C0": Cap("in", "gnd", 1e-9, "parasitic"), "E1": Amp("o1", "gnd", "in", "gnd", 1),
             "R1": R("o1", "n1", 3e3), "C1": Cap("n1", "gnd", 10e-9, "parasitic")}
    res = ref.analyze(design(parts, rsig=1e3, out="n1"))
    close("two isolated poles: b2 = τ1 τ2", res["high"]["b2_s2"], t1 * t2)
    close("two isolated poles: second-order estimate = exact f3db", res["high"]["second_order_f_estimate_hz"],
          res["high"]["f3db_hz"])
    w = math.sqrt((-(t1 * t1 + t2 * t2) + math.sqrt((t1 * t1 + t2 * t2) ** 2 + 4 * t1 * t1 * t2 * t2))
                  / (2 * t1 * t1 * t2 * t2))  # |1/((1+jωτ1)(1+jωτ2))|² = 1/2 solved for ω²
    close("two isolated poles: f3db from (1+ω²τ1²)(1+ω²τ2²) = 2", res["high"]["f3db_hz"], w / (2 * math.pi))
    close("two isolated poles: dominance ratio = τ2/τ1", res["high"]["dominance_ratio"], t2 / t1)
    # A two-section loaded RC ladder has no finite zeros: the two-pole formula is exact there too.
    parts = {"C1": Cap("in", "gnd", 1e-9, "parasitic"), "R2": R("in", "out", 2e3),
             "C2": Cap("out", "gnd", 0.5e-9, "parasitic")}
    res = ref.analyze(design(parts, rsig=1e3))
    close("two-section ladder: second-order estimate = exact f3db", res["high"]["second_order_f_estimate_hz"],
          res["high"]["f3db_hz"])


def check_classification():
    # tauweave's rule (design-format.md, role): coupling/bypass -> LOW, parasitic/load -> HIGH,
    # no role -> LOW when C >= 1 nF, else HIGH; load.c is HIGH and listed last.
    parts = {"CA": Cap("in", "gnd", 1e-9), "CB": Cap("in", "x", 0.999e-9), "RX": R("x", "gnd", 1e3),
             "CC": Cap("x", "gnd", 10e-6, "parasitic"), "CD": Cap("in", "y", 1e-12, "coupling"),
             "RY": R("y", "gnd", 1e3), "CE": Cap("y", "gnd", 1e-6, "load")}
    res = ref.analyze(design(parts, out="y", load_c=1e-12))
    truth("classification: HIGH set", [c["part"] for c in res["high"]["octc"]["caps"]] == ["CB", "CC", "CE", "load.c"],
          res["high"]["octc"]["caps"])
    truth("classification: LOW set", [c["part"] for c in res["low"]["sctc"]["caps"]] == ["CA", "CD"],
          res["low"]["sctc"]["caps"])


def check_identities():
    # Over every reference design: b1 = -Σ 1/p_k and b2 = Σ_{i<j} 1/(p_i p_j) over the HIGH
    # network's poles (Vieta on 1 + b1 s + b2 s² + … = Π(1 - s/p_k)); Σ 1/τ_sctc = -Σ p_k over
    # the LOW network's poles [derived, docs/methods.md, Time constants; b1 = Σ R_i0 C_i: pub Hajimiri, IEEE TCAS-I
    # 57(6) 2010; b2 by Cochrun & Grabel, IEEE Trans. Circuit Theory CT-20(1) 1973].
    files = sorted(glob.glob(os.path.join(HERE, "designs", "*.yaml")))
    truth("at least 5 reference designs", len(files) >= 5, files)
    for path in files:
        name = os.path.basename(path)
        res = ref.analyze(ref.load_design(path))
        json.dumps(res, allow_nan=False)  # never NaN (PRODUCT.md, results contract)
        hp = [s_of(p) for p in res["high"]["poles_hz"]]
        if res["high"]["b1_s"] is not None:
            close(f"{name}: b1 = -Σ 1/p (HIGH)", res["high"]["b1_s"], (-sum(1 / p for p in hp)).real)
            e2 = sum(1 / (hp[i] * hp[j]) for i in range(len(hp)) for j in range(i + 1, len(hp)))
            close(f"{name}: b2 = Σ_(i<j) 1/(p_i p_j) (HIGH)", res["high"]["b2_s2"], e2.real, 1e-8)
            close(f"{name}: octc sum = b1", res["high"]["octc"]["sum_tau_s"], res["high"]["b1_s"])
            close(f"{name}: octc shares sum to 1", sum(c["share"] for c in res["high"]["octc"]["caps"]), 1.0)
        lp = [s_of(p) for p in res["low"]["poles_hz"]]
        sctc = res["low"]["sctc"]["caps"]
        if sctc:
            close(f"{name}: Σ 1/τ_sctc = -Σ p (LOW)", sum(1 / c["tau_s"] for c in sctc), (-sum(lp)).real)
            close(f"{name}: sctc shares sum to 1", sum(c["share"] for c in sctc), 1.0)
        # The exact −3 dB points are where |H| = |A_mid|/√2 (definition): re-evaluate there.
        ckt = ref.Circuit(ref.load_design(path))
        full = ckt.network({e["name"]: "dyn" for e in ckt.low + ckt.high}, inductors="dyn")
        for key in ("high", "low"):
            f = res[key]["f3db_hz"]
            if f is not None:
                h = full["c"] @ ref.solve(full["G"] + 2j * math.pi * f * full["C"], full["b"].astype(complex))
                close(f"{name}: |H({key} f3db)| = |A_mid|/√2", abs(h), abs(res["midband"]["gain"]) / math.sqrt(2), 1e-9)


def check_random_networks():
    # The same identities on seeded random R/C/gm/voltage-amplifier networks (stable ones with
    # positive time constants), so they are not tuned to the hand-made designs [derived,
    # docs/methods.md, Time constants].
    import random
    done = 0
    for seed in range(60):
        rnd = random.Random(seed)
        nodes = [f"n{i}" for i in range(1, 7)]
        parts = {f"RG{i}": R(n, "gnd", 10 ** rnd.uniform(2, 5)) for i, n in enumerate(nodes)}
        for k in range(6):
            a, b = rnd.sample(nodes, 2)
            parts[f"R{k}"] = R(a, b, 10 ** rnd.uniform(1, 5))
        for k in range(4):
            a, b = rnd.sample(nodes + ["gnd"], 2)
            parts[f"CH{k}"] = Cap(a, b, 10 ** rnd.uniform(-13, -11), "parasitic")
        for k in range(2):
            a, b = rnd.sample(nodes + ["gnd"], 2)
            parts[f"CL{k}"] = Cap(a, b, 10 ** rnd.uniform(-7, -5), "coupling")
        a, b, c, d = rnd.sample(nodes + ["gnd"], 4)
        parts["GM"] = Gm(a, b, c, d, 10 ** rnd.uniform(-3, -1.5))
        if seed % 2:
            a, c, d = rnd.sample(nodes, 3)
            parts["E1"] = Amp(a, "gnd", c, d, rnd.uniform(-3, 3))
        try:
            res = ref.analyze(design(parts, at="n1", rsig=50 + 1e3 * rnd.random(), out="n6"))
        except (SystemExit, ArithmeticError, ValueError, np.linalg.LinAlgError):
            continue  # an ill-posed draw (e.g. an amplifier output shorted by a coupling cap)
        taus = [c["tau_s"] for c in res["high"]["octc"]["caps"] + res["low"]["sctc"]["caps"]]
        if min(taus) <= 0 or any(p["re_hz"] >= 0 for p in res["poles"]):
            continue
        done += 1
        hp = [s_of(p) for p in res["high"]["poles_hz"]]
        lp = [s_of(p) for p in res["low"]["poles_hz"]]
        close(f"random network {seed}: b1 = -Σ 1/p", res["high"]["b1_s"], (-sum(1 / p for p in hp)).real)
        e2 = sum(1 / (hp[i] * hp[j]) for i in range(len(hp)) for j in range(i + 1, len(hp)))
        close(f"random network {seed}: b2 = Σ 1/(p_i p_j)", res["high"]["b2_s2"], e2.real)
        close(f"random network {seed}: Σ 1/τ_sctc = -Σ p", sum(1 / c["tau_s"] for c in res["low"]["sctc"]["caps"]),
              (-sum(lp)).real)
    truth("random networks: enough usable draws", done >= 10, done)


# --------------------------------------------------------------------------------------------
# Noise. k and q are exact in the SI [pub: BIPM SI Brochure, 9th ed.]; T0 = 290 K [IEEE Std 161,
# from memory].
K, Q, T0 = 1.380649e-23, 1.602176634e-19, 290.0


def contributor(noise, part, mechanism="thermal"):
    return next(c for c in noise["contributors"] if (c["part"], c["mechanism"]) == (part, mechanism))


def check_noise_kt_over_c():
    # The kT/C identity [common practice; Johnson–Nyquist noise into a capacitor]: a resistance R
    # at temperature T into C gives 4kTR/(1 + (2πfRC)²) at the output, whose integral over
    # [f1, f2] is (2kT/(πC))·(atan(2πf2RC) − atan(2πf1RC)) → kT/C over all f. With the source's
    # Rs at T0 and R1 at T in series the density is 4k(T0·Rs + T·R1)/(1 + (ωRC)²): T is the
    # resistance-weighted mean [derived].
    rs, r1, c, t = 1e3, 9e3, 1e-9, 350.0
    r = rs + r1
    fc = 1 / (2 * math.pi * r * c)
    f1, f2 = fc * 1e-7, fc * 1e7
    res = ref.analyze(design({"R1": R("in", "out", r1), "C1": Cap("out", "gnd", c, "parasitic")}, rsig=rs,
                             temperature="350 K", band=(f1, f2)), noise=True)
    nz = res["noise"]
    t_mean = (T0 * rs + t * r1) / r
    want = 2 * K * t_mean / (math.pi * c) * (math.atan(f2 / fc) - math.atan(f1 / fc))
    close("kT/C: ∫ output noise over 14 decades", nz["band"]["output_rms_v"] ** 2, want, 1e-10)
    close("kT/C: within 1e-6 of kT_mean/C", nz["band"]["output_rms_v"] ** 2, K * t_mean / c, 1e-6)
    close("kT/C: R1's band share = T·R1/(T0·Rs + T·R1)", contributor(nz, "R1")["band_share"],
          t * r1 / (T0 * rs + t * r1), 1e-10)
    # Referred to the EMF the density is white, 4k(T0·Rs + T·R1): its integral is that times
    # the bandwidth [derived].
    close("kT/C: input-referred rms² = 4k(T0 Rs + T R1)(f2 − f1)", nz["band"]["input_rms_v"] ** 2,
          4 * K * (T0 * rs + t * r1) * (f2 - f1), 1e-10)
    close("kT/C: F = 1 + T·R1/(T0·Rs)", nz["noise_factor"], 1 + t * r1 / (T0 * rs), 1e-12)


def check_noise_divider():
    # 4kTR through a divider [Johnson–Nyquist, common practice; derived]: Rs at T0, R1 from in
    # to out and R2 from out to ground at T. Output: R2's current noise sees R2 ∥ (Rs + R1);
    # Rs's and R1's voltages are divided by R2/(Rs + R1 + R2).
    rs, r1, r2, t = 1e3, 2.2e3, 4.7e3, 350.0
    ckt = ref.Circuit(design({"R1": R("in", "out", r1), "R2": R("out", "gnd", r2)}, rsig=rs, temperature="76.85 °C"))
    close("divider: 76.85 °C = 350 K", ckt.kelvin, t, 1e-15)
    nz = ref.noise_review(ckt, 1e3, None)
    div = r2 / (rs + r1 + r2)
    want = 4 * K * (t * r2 * (rs + r1) ** 2 / (rs + r1 + r2) ** 2 + (T0 * rs + t * r1) * div * div)
    close("divider: output density", nz["output_density_v_per_rthz"] ** 2, want, 1e-12)
    close("divider: F", nz["noise_factor"], want / (4 * K * T0 * rs * div * div), 1e-12)
    close("divider: input density² = output/|H|²", nz["input_density_v_per_rthz"] ** 2, want / div ** 2, 1e-12)
    # Source shorted: out sees R1 ∥ R2, gain R2/(R1 + R2) -> e_n² = 4kT·R1(R1 + R2)/R2. Source
    # open: R1's noise circulates in R1 alone; R2's gives 4kT·R2 at out; a current into `in`
    # gives R2 volts -> i_n² = 4kT/R2. R_opt = √(R1(R1 + R2)) [derived]. The 1 µΩ "short" is
    # 1e-6/R1 relative off.
    e2, i2 = 4 * K * t * r1 * (r1 + r2) / r2, 4 * K * t / r2
    close("divider: e_n²", nz["e_n_v_per_rthz"] ** 2, e2, 1e-8)
    close("divider: i_n²", nz["i_n_a_per_rthz"] ** 2, i2, 1e-12)
    close("divider: R_opt", nz["r_opt_ohm"], math.sqrt(r1 * (r1 + r2)), 1e-8)
    close("divider: NF_min", nz["nf_min_db"], 10 * math.log10(1 + 2 * math.sqrt(e2 * i2) / (4 * K * T0)), 1e-8)


def check_noise_transistors():
    # Common emitter, emitter grounded, no capacitance and no r_o, collector resistor RC to
    # the supply, output at the collector; the bias is written here as results.json would give
    # it. Input-referred, derived by hand from the hybrid-π model (r_x to b', rπ, gm):
    #   shorted source: e_n² = 4kT·r_x + 2qI_B·r_x² + (2qI_C + 4kT/RC)·((1 + r_x/rπ)/g_m)²
    #   open source:    i_n² = 2qI_B + (2qI_C + 4kT/RC)/β²,  β = g_m·rπ
    #   from Rs at T0:  F = 1 + [4kT·r_x + 2qI_B(Rs + r_x)² + (2qI_C + 4kT/RC)((Rs + r_x + rπ)/β)²]/(4kT0·Rs)
    t, ic, beta, rx, rc, rs = 300.0, 1e-3, 100.0, 10.0, 100e3, 1e3
    gm = ic * Q / (K * t)
    rpi, ib = beta / gm, ic / beta
    bias = {"Q1": {"part": "Q1", "ic_a": ic, "ib_a": ib,
                   "small_signal": {"gm_s": gm, "rpi_ohm": rpi, "rx_ohm": rx, "ro_ohm": None, "cpi_f": 0.0,
                                    "cmu_f": 0.0}}}
    parts = {"RC": R("vcc", "c", rc), "Q1": {"kind": "bjt", "model": "N", "c": "c", "b": "in", "e": "gnd"}}
    saved, ref.JUNCTION_GMIN = ref.JUNCTION_GMIN, 0.0  # the pure hybrid-π of the derivation
    try:
        ckt = ref.Circuit(design(parts, rsig=rs, out="c", supplies={"vcc": 12}, temperature="300 K"), bias)
    finally:
        ref.JUNCTION_GMIN = saved
    nz = ref.noise_review(ckt, 1e3, None)
    tail = 2 * Q * ic + 4 * K * t / rc
    e2 = 4 * K * t * rx + 2 * Q * ib * rx ** 2 + tail * ((1 + rx / rpi) / gm) ** 2
    i2 = 2 * Q * ib + tail / beta ** 2
    added = 4 * K * t * rx + 2 * Q * ib * (rs + rx) ** 2 + tail * ((rs + rx + rpi) / beta) ** 2
    close("CE noise: e_n² (hybrid-π, by hand)", nz["e_n_v_per_rthz"] ** 2, e2, 1e-7)
    close("CE noise: i_n² (hybrid-π, by hand)", nz["i_n_a_per_rthz"] ** 2, i2, 1e-12)
    close("CE noise: F from 1 kΩ (hybrid-π, by hand)", nz["noise_factor"], 1 + added / (4 * K * T0 * rs), 1e-12)
    close("CE noise: base shot density at the output", contributor(nz, "Q1", "base_shot")["density_v2_per_hz"],
          2 * Q * ib * (rs + rx) ** 2 * (gm * rc * rpi / (rs + rx + rpi)) ** 2, 1e-12)
    # [memory: Gray, Hurst, Lewis & Meyer, noise chapter] e_n² ≈ 4kT(r_x + 1/(2g_m)) and
    # i_n² ≈ 2qI_B, each neglecting terms of order r_x/rπ and 1/β.
    close("CE noise: e_n² ≈ 4kT(r_x + 1/(2g_m))", nz["e_n_v_per_rthz"] ** 2, 4 * K * t * (rx + 0.5 / gm), 0.01)
    close("CE noise: i_n² ≈ 2qI_B", nz["i_n_a_per_rthz"] ** 2, 2 * Q * ib, 0.02)

    # Common source, source grounded, drain resistor RD; e_n² = 4kTγ/g_m + 4kT/(RD·g_m²), γ = 2/3,
    # exactly for this circuit [derived; the first term: memory, Razavi, noise chapter]; the
    # gate draws nothing, so i_n² = 0 and R_opt, NF_min are absent.
    gm, rd = 5e-3, 2e3
    bias = {"M1": {"part": "M1", "small_signal": {"gm_s": gm, "ro_ohm": None, "cgs_f": 0.0, "cgd_f": 0.0,
                                                  "cdb_f": 0.0}}}
    parts = {"RG": R("in", "gnd", 1e6), "RD": R("vdd", "d", rd),
             "M1": {"kind": "mosfet", "model": "N", "d": "d", "g": "in", "s": "gnd"}}
    ckt = ref.Circuit(design(parts, rsig=1e3, out="d", supplies={"vdd": 5}, temperature="300 K"), bias)
    nz = ref.noise_review(ckt, 1e3, None)
    close("CS noise: e_n² = 4kT(γ/g_m + 1/(RD g_m²))", nz["e_n_v_per_rthz"] ** 2,
          4 * K * 300 * (2 / 3 / gm + 1 / (rd * gm * gm)), 1e-8)
    close("CS noise: channel density at the output = 4kTγg_m·RD²",
          contributor(nz, "M1", "channel")["density_v2_per_hz"], 4 * K * 300 * 2 / 3 * gm * rd * rd, 1e-12)


def check_noise_nyquist():
    # Nyquist's theorem for a passive reciprocal network at one temperature T: the noise at a
    # port is 4kT·Re Z(jω), Z the port's impedance [memory: Nyquist, Phys. Rev. 32, 1928, and
    # its extension to any passive reciprocal network]. The reference sums |Z_k|²·4kT/R_k over every resistor
    # instead; on seeded random RC networks at T = T0 (so the source is at the same
    # temperature) the two agree. Z comes from one more solve, a unit current into the output.
    import random
    done = 0
    for seed in range(20):
        rnd = random.Random(1000 + seed)
        nodes = [f"n{i}" for i in range(1, 6)]
        parts = {f"RG{i}": R(n, "gnd", 10 ** rnd.uniform(2, 5)) for i, n in enumerate(nodes)}
        for k in range(5):
            a, b = rnd.sample(nodes, 2)
            parts[f"R{k}"] = R(a, b, 10 ** rnd.uniform(1, 5))
        for k in range(3):
            a, b = rnd.sample(nodes + ["gnd"], 2)
            parts[f"CH{k}"] = Cap(a, b, 10 ** rnd.uniform(-12, -10), "parasitic")
        a, b = rnd.sample(nodes + ["gnd"], 2)
        parts["CL0"] = Cap(a, b, 10 ** rnd.uniform(-7, -6), "coupling")
        ckt = ref.Circuit(design(parts, at="n1", rsig=50 + 1e3 * rnd.random(), out="n5", load_r=1e4,
                                 temperature="290 K"))
        full = ckt.network({e["name"]: "dyn" for e in ckt.low + ckt.high}, inductors="dyn")
        for f in (10 ** rnd.uniform(2, 8), 10 ** rnd.uniform(2, 8)):
            nz = ref.noise_review(ckt, f, None)
            d = np.zeros(len(full["b"]))
            d[full["ix"]("n5")] = 1.0
            v = ref.solve(full["G"] + 2j * math.pi * f * full["C"], d.astype(complex))
            z = complex(full["c"].astype(complex) @ v)
            close(f"Nyquist, random RC {seed} at {f:.4g} Hz: Σ|Z_k|²·4kT/R_k = 4kT·Re Z_out",
                  nz["output_density_v_per_rthz"] ** 2, 4 * K * T0 * z.real, 1e-11)
            done += 1
    truth("Nyquist: every draw checked", done == 40, done)


def check_noise_identities():
    # On every reference design (noise on): the shares sum to 1 at the spot frequency and over
    # the band, the densities sum to the output density, the input-referred density is the
    # output's over |H|, and NF = 10·log10 F [derived from the definitions, docs/methods.md, Noise].
    for path in sorted(glob.glob(os.path.join(HERE, "designs", "*.yaml"))):
        name = os.path.basename(path)
        nz = ref.analyze(ref.load_design(path), noise=True)["noise"]
        total = nz["output_density_v_per_rthz"] ** 2
        close(f"{name}: Σ contributor densities = output density²",
              sum(c["density_v2_per_hz"] for c in nz["contributors"]), total, 1e-12)
        close(f"{name}: Σ shares = 1", sum(c["share"] for c in nz["contributors"]), 1.0, 1e-12)
        if nz["band"]:
            close(f"{name}: Σ band shares = 1", sum(c["band_share"] for c in nz["contributors"]), 1.0, 1e-12)
        close(f"{name}: NF = 10 log10 F", nz["noise_figure_db"], 10 * math.log10(nz["noise_factor"]), 1e-12)
        close(f"{name}: F = total / source's", nz["noise_factor"],
              total / contributor(nz, "source")["density_v2_per_hz"], 1e-12)


def check_ports():
    """The reference's S-parameters against closed forms in Z0 = 50 Ω (Pozar, Microwave
    Engineering, ch. 4, from memory): a series R has S11 = R/(R + 2Z0), S21 = 2Z0/(R + 2Z0)
    (by y-parameters); a shunt R has S11 = −Z0/(2R + Z0), S21 = 2R/(2R + Z0) (ports on one
    node: by z-parameters); K = μ = 1 for both (a lone lossy element, derived); and a matched
    T attenuator (series arms Z0(k − 1)/(k + 1), shunt 2Z0k/(k² − 1), common practice)
    reflects nothing and passes 1/k."""
    z0, r = 50.0, 100.0
    doc = design({"R1": R("in", "out", r), "RB": R("out", "gnd", 1e15)}, rsig=1e3)
    doc["analysis"] = {"sweep": {"start": "1 kHz", "stop": "1 MHz", "points_per_decade": 10}}
    pr = ref.analyze(doc, ports=True)["ports"]
    for sp in pr["s_parameters"]:
        close("series R: S11", sp["s11"][0], r / (r + 2 * z0), 1e-9)
        close("series R: S21", sp["s21"][0], 2 * z0 / (r + 2 * z0), 1e-9)
    close("series R: μ min", pr["stability"]["mu_min"], 1.0, 1e-9)
    doc = design({"R1": R("n", "gnd", r)}, at="n", out="n", rsig=1e3)
    doc["analysis"] = {"sweep": {"start": "1 kHz", "stop": "1 MHz", "points_per_decade": 10}}
    pr = ref.analyze(doc, ports=True)["ports"]
    for sp in pr["s_parameters"]:
        close("shunt R: S11", sp["s11"][0], -z0 / (2 * r + z0), 1e-9)
        close("shunt R: S21", sp["s21"][0], 2 * r / (2 * r + z0), 1e-9)
    close("shunt R: K min", pr["stability"]["k_min"], 1.0, 1e-9)
    k = 10 ** (6 / 20)
    arm, leg = z0 * (k - 1) / (k + 1), 2 * z0 * k / (k * k - 1)
    doc = design({"R1": R("in", "m", arm), "R2": R("m", "out", arm), "R3": R("m", "gnd", leg)}, rsig=1e3)
    doc["analysis"] = {"sweep": {"start": "1 kHz", "stop": "1 MHz", "points_per_decade": 10}}
    pr = ref.analyze(doc, ports=True)["ports"]
    truth("matched T: S11 = 0", all(abs(complex(*sp["s11"])) < 1e-12 for sp in pr["s_parameters"]))
    for sp in pr["s_parameters"]:
        close("matched T: S21 = 1/k", sp["s21"][0], 1 / k, 1e-9)


def main():
    for check in (check_ports, check_quantities, check_single_pole, check_ce_gray_meyer, check_ce_degenerated,
                  check_cs_razavi, check_cs_published, check_follower, check_isolated_sections,
                  check_classification, check_identities, check_random_networks, check_noise_kt_over_c,
                  check_noise_divider, check_noise_transistors, check_noise_nyquist, check_noise_identities):
        try:
            check()
        except Exception as exc:  # a crash is a failure too
            FAILURES.append(f"{check.__name__} raised {type(exc).__name__}: {exc}")
    for f in FAILURES:
        print("FAIL", f)
    print(f"{COUNT - len(FAILURES)}/{COUNT} checks passed" if not FAILURES else f"{len(FAILURES)} failed of {COUNT}")
    return 1 if FAILURES else 0


if __name__ == "__main__":
    sys.exit(main())
