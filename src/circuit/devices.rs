//! Device equations: the bipolar transistor (transport Ebers–Moll with Early effect) and the
//! MOSFET (square law with channel-length modulation, all regions), their currents and
//! derivatives at given junction voltages, and their small-signal capacitances.
//!
//! In: junction voltages normalised to npn / n-channel polarity, and resolved parameters.
//! Out: currents and partial derivatives. Pure functions; no netlist, no solving.

use crate::circuit::netlist::{BjtParams, MosParams, Transit};

/// Boltzmann constant, J/K (exact in the SI since 2019; BIPM SI Brochure, 9th ed.).
pub const BOLTZMANN: f64 = 1.380649e-23;
/// Elementary charge, C (exact in the SI since 2019; BIPM SI Brochure, 9th ed.).
pub const ELEMENTARY_CHARGE: f64 = 1.602176634e-19;
/// Conductance kept across every junction and channel so a device that is off never leaves
/// a node floating (1 pS; a common simulator convention, from memory).
pub const GMIN: f64 = 1e-12;
/// Forward-bias depletion-capacitance knee, as a fraction of the built-in potential; above
/// it the junction law is continued linearly (common practice, value 0.5 from memory).
pub const DEPLETION_KNEE: f64 = 0.5;

/// The thermal voltage kT/q at `kelvin`.
pub fn thermal_voltage(kelvin: f64) -> f64 {
    BOLTZMANN * kelvin / ELEMENTARY_CHARGE
}

/// Bipolar currents and their derivatives at normalised (npn) junction voltages.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct BjtEval {
    /// Collector current (into the collector), A.
    pub ic: f64,
    /// Base current (into the base), A.
    pub ib: f64,
    /// ∂ic/∂vbe at constant vbc.
    pub dic_dvbe: f64,
    /// ∂ic/∂vbc at constant vbe.
    pub dic_dvbc: f64,
    /// ∂ib/∂vbe.
    pub dib_dvbe: f64,
    /// ∂ib/∂vbc.
    pub dib_dvbc: f64,
}

/// Transport Ebers–Moll with the Early factor (1 + V_CE/V_A) on the transport current
/// (Gray, Hurst, Lewis & Meyer, ch. 1), plus [`GMIN`] across each junction.
pub fn bjt(p: &BjtParams, vbe: f64, vbc: f64, vt: f64) -> BjtEval {
    let ef = (vbe / vt).exp();
    let er = (vbc / vt).exp();
    let it = p.is * (ef - er);
    let vce = vbe - vbc;
    let (early, dearly) = if p.early_voltage.is_finite() {
        (1.0 + vce / p.early_voltage, 1.0 / p.early_voltage)
    } else {
        (1.0, 0.0)
    };
    let ic = it * early - p.is / p.beta_r * (er - 1.0) - GMIN * vbc;
    let ib = p.is / p.beta_f * (ef - 1.0) + p.is / p.beta_r * (er - 1.0) + GMIN * (vbe + vbc);
    BjtEval {
        ic,
        ib,
        dic_dvbe: p.is * ef / vt * early + it * dearly,
        dic_dvbc: -p.is * er / vt * early - it * dearly - p.is * er / (p.beta_r * vt) - GMIN,
        dib_dvbe: p.is * ef / (p.beta_f * vt) + GMIN,
        dib_dvbc: p.is * er / (p.beta_r * vt) + GMIN,
    }
}

/// The critical voltage above which junction steps are limited: V_T·ln(V_T/(√2·I_S)).
pub fn critical_voltage(is: f64, vt: f64) -> f64 {
    vt * (vt / (std::f64::consts::SQRT_2 * is)).ln()
}

/// Limits a junction-voltage step so the exponential cannot overflow: above the critical
/// voltage a step larger than 2·V_T follows the logarithm instead (Pillage, Rohrer &
/// Visweswariah, ch. 10, from memory). Returns the limited voltage and whether it limited.
pub fn limit_junction(new: f64, old: f64, vt: f64, vcrit: f64) -> (f64, bool) {
    if new > vcrit && (new - old).abs() > 2.0 * vt {
        if old > 0.0 {
            let arg = 1.0 + (new - old) / vt;
            if arg > 0.0 { (old + vt * arg.ln(), true) } else { (vcrit, true) }
        } else {
            (vt * (new / vt).ln(), true)
        }
    } else {
        (new, false)
    }
}

/// MOSFET drain current and derivatives at normalised (n-channel) voltages.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct MosEval {
    /// Drain current (into the drain), A.
    pub id: f64,
    /// ∂id/∂vgs.
    pub gm: f64,
    /// ∂id/∂vds.
    pub gds: f64,
}

/// Square law with channel-length modulation in all regions (Razavi, ch. 2), symmetric in
/// drain and source, plus [`GMIN`] across the channel.
pub fn mosfet(p: &MosParams, vgs: f64, vds: f64) -> MosEval {
    let vth = p.sign * p.vth;
    let forward = |vgs: f64, vds: f64| -> (f64, f64, f64) {
        let vov = vgs - vth;
        if vov <= 0.0 {
            (0.0, 0.0, 0.0)
        } else if vds >= vov {
            let clm = 1.0 + p.lambda * vds;
            (0.5 * p.k * vov * vov * clm, p.k * vov * clm, 0.5 * p.k * vov * vov * p.lambda)
        } else {
            let clm = 1.0 + p.lambda * vds;
            let core = vov * vds - 0.5 * vds * vds;
            (p.k * core * clm, p.k * vds * clm, p.k * (vov - vds) * clm + p.k * core * p.lambda)
        }
    };
    let (id, gm, gds) = if vds >= 0.0 {
        forward(vgs, vds)
    } else {
        // Source and drain swap roles: f(u = vgd, w = −vds), id = −f.
        let (f, fu, fw) = forward(vgs - vds, -vds);
        (-f, -fu, fu + fw)
    };
    MosEval { id: id + GMIN * vds, gm, gds: gds + GMIN }
}

/// Region of a MOSFET.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum MosRegion {
    /// V_GS below threshold.
    CutOff,
    /// V_DS below the overdrive.
    Triode,
    /// V_DS at or above the overdrive.
    Saturation,
}

impl MosRegion {
    /// The region's name as reports print it.
    pub fn label(self) -> &'static str {
        match self {
            MosRegion::CutOff => "cut-off",
            MosRegion::Triode => "triode",
            MosRegion::Saturation => "saturation",
        }
    }
}

/// Region of a MOSFET at normalised voltages.
pub fn mos_region(p: &MosParams, vgs: f64, vds: f64) -> MosRegion {
    let vov = vgs - p.sign * p.vth;
    if vov <= 0.0 {
        MosRegion::CutOff
    } else if vds.abs() < vov {
        MosRegion::Triode
    } else {
        MosRegion::Saturation
    }
}

/// Region of a bipolar transistor.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum BjtRegion {
    /// Emitter junction forward, collector junction reverse (or barely forward).
    Active,
    /// Both junctions forward.
    Saturated,
    /// Emitter junction off.
    CutOff,
    /// Collector junction forward, emitter reverse.
    ReverseActive,
}

impl BjtRegion {
    /// The region's name as reports print it.
    pub fn label(self) -> &'static str {
        match self {
            BjtRegion::Active => "active",
            BjtRegion::Saturated => "saturated",
            BjtRegion::CutOff => "cut-off",
            BjtRegion::ReverseActive => "reverse-active",
        }
    }
}

/// Junction voltage above which a silicon junction counts as conducting (common practice).
pub const JUNCTION_ON_V: f64 = 0.4;

/// Region of a bipolar transistor at normalised junction voltages.
pub fn bjt_region(vbe: f64, vbc: f64) -> BjtRegion {
    match (vbe > JUNCTION_ON_V, vbc > JUNCTION_ON_V) {
        (true, false) => BjtRegion::Active,
        (true, true) => BjtRegion::Saturated,
        (false, true) => BjtRegion::ReverseActive,
        (false, false) => BjtRegion::CutOff,
    }
}

/// Depletion capacitance C0/(1 − V/φ)^m of a junction at forward voltage `v` (negative for
/// reverse bias), continued linearly above the knee [`DEPLETION_KNEE`]·φ.
pub fn depletion_capacitance((c0, phi, m): (f64, f64, f64), v: f64) -> f64 {
    if c0 == 0.0 {
        return 0.0;
    }
    let knee = DEPLETION_KNEE * phi;
    if v < knee {
        c0 / (1.0 - v / phi).powf(m)
    } else {
        let f = 1.0 - DEPLETION_KNEE;
        c0 / f.powf(1.0 + m) * (1.0 - DEPLETION_KNEE * (1.0 + m) + m * v / phi)
    }
}

/// The forward transit time at this bias: given directly, or from f_T at a stated
/// collector current, 1/(2π f_T) = τ_F + (C_je + C_μ)·V_T/I_C (Gray & Meyer ch. 1). The
/// junction capacitances are taken at the present bias. Never negative.
pub fn transit_time(p: &BjtParams, cje: f64, cmu: f64, vt: f64) -> f64 {
    match p.transit {
        Transit::Time(t) => t,
        Transit::Frequency(ft, ic) => {
            (1.0 / (2.0 * std::f64::consts::PI * ft) - (cje + cmu) * vt / ic).max(0.0)
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn npn() -> BjtParams {
        BjtParams {
            sign: 1.0,
            is: 1e-15,
            beta_f: 100.0,
            beta_r: 1.0,
            early_voltage: 50.0,
            rb: 0.0,
            rb_external: 0.0,
            transit: Transit::Time(0.0),
            cje: (0.0, 0.75, 0.33),
            cjc: (1e-12, 0.75, 0.5),
            max_power: None,
        }
    }

    #[test]
    fn thermal_voltage_at_300_k() {
        // V_T(300 K) = 25.852 mV from the exact SI constants (derived; docs/methods.md, Device
        // equations).
        assert!((thermal_voltage(300.0) - 0.025852).abs() < 5e-7);
    }

    #[test]
    fn forward_active_current_follows_the_exponential_law() {
        // I_C ≈ I_S exp(V_BE/V_T)(1 + V_CE/V_A) (Gray, Hurst, Lewis & Meyer, ch. 1).
        let p = npn();
        let vt = thermal_voltage(300.0);
        let (vbe, vce) = (0.7, 5.0);
        let e = bjt(&p, vbe, vbe - vce, vt);
        let expected = p.is * (vbe / vt).exp() * (1.0 + vce / p.early_voltage);
        assert!((e.ic / expected - 1.0).abs() < 1e-6, "{} vs {expected}", e.ic);
        // gm = I_C/V_T and r_o = (V_A + V_CE)/I_C at constant V_CE.
        let gm = e.dic_dvbe + e.dic_dvbc;
        assert!((gm * vt / e.ic - 1.0).abs() < 1e-6);
        let go = -e.dic_dvbc;
        assert!((go * (p.early_voltage + vce) / e.ic - 1.0).abs() < 1e-6);
    }

    #[test]
    fn derivatives_match_finite_differences() {
        let p = npn();
        let vt = thermal_voltage(300.0);
        for (vbe, vbc) in [(0.65, -3.0), (0.75, 0.6), (0.2, 0.1), (-1.0, 0.7)] {
            let e = bjt(&p, vbe, vbc, vt);
            let h = 1e-7;
            let dp = bjt(&p, vbe + h, vbc, vt);
            let dm = bjt(&p, vbe - h, vbc, vt);
            let num = (dp.ic - dm.ic) / (2.0 * h);
            assert!((num - e.dic_dvbe).abs() <= 1e-5 * e.dic_dvbe.abs() + 1e-12);
            let dp = bjt(&p, vbe, vbc + h, vt);
            let dm = bjt(&p, vbe, vbc - h, vt);
            let num = (dp.ib - dm.ib) / (2.0 * h);
            assert!((num - e.dib_dvbc).abs() <= 1e-5 * e.dib_dvbc.abs() + 1e-12);
        }
        let m = MosParams {
            sign: 1.0,
            k: 2e-3,
            vth: 0.7,
            lambda: 0.05,
            gate_oxide_f: 0.0,
            overlap_f: 0.0,
            cgs_direct: None,
            cgd_direct: None,
            cdb: 0.0,
            max_power: None,
        };
        for (vgs, vds) in [(1.5, 3.0), (1.5, 0.3), (0.5, 1.0), (1.5, -0.4), (2.0, 0.8)] {
            let e = mosfet(&m, vgs, vds);
            let h = 1e-7;
            let gm = (mosfet(&m, vgs + h, vds).id - mosfet(&m, vgs - h, vds).id) / (2.0 * h);
            let gds = (mosfet(&m, vgs, vds + h).id - mosfet(&m, vgs, vds - h).id) / (2.0 * h);
            assert!((gm - e.gm).abs() <= 1e-6 * e.gm.abs() + 1e-12, "{vgs} {vds}");
            assert!((gds - e.gds).abs() <= 1e-6 * e.gds.abs() + 1e-12, "{vgs} {vds}");
        }
        // Saturation: I_D = ½ k V_ov² (1 + λ V_DS) and gm = 2 I_D / V_ov (Razavi, ch. 2).
        let e = mosfet(&m, 1.5, 3.0);
        let vov = 0.8;
        assert!((e.id - GMIN * 3.0 - 0.5 * 2e-3 * vov * vov * 1.15).abs() < 1e-15);
        assert!((e.gm - 2.0 * (e.id - GMIN * 3.0) / vov).abs() < 1e-15);
    }

    #[test]
    fn junction_law() {
        // C = C0 / (1 + V_R/φ)^m (Thompson, Intuitive Analog Circuit Design, ch. 10).
        let c = depletion_capacitance((1e-12, 0.75, 0.5), -5.0);
        assert!((c - 1e-12 / (1.0 + 5.0 / 0.75f64).sqrt()).abs() < 1e-24);
        // Continuous at the knee.
        let below = depletion_capacitance((1e-12, 0.75, 0.33), 0.375 - 1e-9);
        let above = depletion_capacitance((1e-12, 0.75, 0.33), 0.375 + 1e-9);
        assert!((below - above).abs() < 1e-20);
    }
}
