//! The named tables a template inserts with `{{ table(name="…") }}`, as Markdown.
//!
//! In: the design, its analysis and the requirement checks. Out: a map from table name to
//! a Markdown table; numbers in engineering notation. User text (designators, notes) is
//! escaped for Markdown table cells.

use std::collections::BTreeMap;

use crate::analysis::requirements::RequirementCheck;
use crate::analysis::tolerance::{MonteCarlo, Study};
use crate::analysis::{Analysis, OperatingPointReport, RootHz};
use crate::circuit::operating_point::DeviceState;
use crate::design::{Design, Part, PartKind, Tolerance, Toleranced};
use crate::notation::{absent, plain, scientific, si};

/// The names `table()` accepts, with what each holds.
pub const TABLES: &[(&str, &str)] = &[
    ("parts", "every part with its value, tolerance and connections"),
    ("nodes", "node voltages at the operating point"),
    ("devices", "each transistor's region, bias, dissipation and small-signal model"),
    (
        "stress",
        "each rated resistor's dissipation and rated capacitor's DC voltage against its rating",
    ),
    ("capacitors", "every capacitor and the time-constant set it joined"),
    ("high_estimates", "upper cut-off: exact value and the estimates with their errors"),
    ("octc", "open-circuit time constants: R seen, τ, share, Miller factor"),
    ("low_estimates", "lower cut-off: exact value and the estimates with their errors"),
    ("sctc", "short-circuit time constants: R seen, τ, share"),
    ("poles_zeros", "poles and zeros of the whole response"),
    ("noise", "noise at the spot frequency: densities, noise figure, input generators, band rms"),
    (
        "noise_contributors",
        "each part's noise by mechanism: share at the spot frequency and in band",
    ),
    (
        "large_signal",
        "signal handling: swing limits, distortion beside its power-series estimate, compression",
    ),
    (
        "ports",
        "the stage at its ports and in time: impedances, S-parameters, stability, step, delay",
    ),
    (
        "requirements",
        "each requirement: nominal value, pass or fail, margin, worst-case corner, yield",
    ),
    (
        "suggestions",
        "part changes to series values that make every failing requirement pass, least change first",
    ),
    ("corners", "what-if operating corners: every figure at each, failing values marked"),
    ("limits", "what-if limits: how far each quantity can go, one sentence each"),
    ("sweeps", "what-if sweeps: the figures that move at every swept value"),
    ("what_if", "what-if: each limit as a sentence, each sweep's figures at every value"),
    ("sensitivity", "normalised sensitivities of gain and cut-offs to every lever, largest first"),
    ("worst_case", "linearised worst-case bound beside the evaluated corners"),
    ("monte_carlo", "Monte Carlo mean, spread and percentiles of each figure"),
];

/// Escapes text for a Markdown table cell.
pub fn cell(text: &str) -> String {
    crate::report::view::escape(&text.replace(['\r', '\n'], " "))
}

/// A Markdown table: `align` has one `l` or `r` per column.
pub fn markdown_table(header: &[&str], align: &str, rows: Vec<Vec<String>>) -> String {
    let mut out = format!("| {} |\n|", header.join(" | "));
    for c in align.chars() {
        out.push_str(if c == 'r' { "---:|" } else { ":---|" });
    }
    out.push('\n');
    for r in rows {
        out.push_str(&format!("| {} |\n", r.join(" | ")));
    }
    out
}

fn tolerance(t: &Option<Tolerance>) -> String {
    match t {
        None => "exact".into(),
        Some(t) => {
            let d = match t.distribution {
                crate::design::Distribution::Uniform => "uniform",
                crate::design::Distribution::Gaussian => "gaussian",
            };
            format!("±{} % {d}", plain(t.fraction * 100.0, 3))
        }
    }
}

fn value(v: &Toleranced, unit: &str) -> String {
    si(v.nominal, unit, 4)
}

fn pct(e: Option<f64>) -> String {
    e.map_or_else(absent, |e| crate::notation::signed_percent(e, 2))
}

fn opt(v: Option<f64>, unit: &str) -> String {
    v.map_or_else(absent, |v| si(v, unit, 4))
}

fn root(r: &RootHz) -> String {
    if r.im_hz == 0.0 {
        si(r.re_hz, "Hz", 4)
    } else {
        let sign = if r.im_hz < 0.0 { "−" } else { "+" };
        format!("{} {sign} j{}", si(r.re_hz, "Hz", 4), si(r.im_hz.abs(), "Hz", 4))
    }
}

/// A part's cells as plain text (unescaped): kind, value, tolerance, connections, note —
/// shared by the parts table and the change report.
pub fn part_cells(p: &Part, design: &Design) -> [String; 5] {
    let (kind, val, tol, conn) = match &p.kind {
        PartKind::Resistor { between, value: v } => {
            ("resistor".to_string(), value(v, "Ω"), tolerance(&v.tolerance), between.join("–"))
        }
        PartKind::Capacitor { between, value: v, role } => (
            match role {
                Some(r) => format!("capacitor ({})", format!("{r:?}").to_lowercase()),
                None => "capacitor".into(),
            },
            value(v, "F"),
            tolerance(&v.tolerance),
            between.join("–"),
        ),
        PartKind::Inductor { between, value: v } => {
            ("inductor".into(), value(v, "H"), tolerance(&v.tolerance), between.join("–"))
        }
        PartKind::Transconductance { between, control, value: v } => (
            "transconductance".into(),
            value(v, "S"),
            tolerance(&v.tolerance),
            format!("{} by v({})", between.join("→"), control.join(", ")),
        ),
        PartKind::VoltageAmplifier { between, control, value: v } => (
            "voltage amplifier".into(),
            format!("{} V/V", plain(v.nominal, 4)),
            tolerance(&v.tolerance),
            format!("{} = A·v({})", between.join("–"), control.join(", ")),
        ),
        PartKind::Bjt { c, b, e, model } => (
            "bjt".into(),
            design.models[*model].name.clone(),
            "model".into(),
            format!("c {c}, b {b}, e {e}"),
        ),
        PartKind::Mosfet { d, g, s, model } => (
            "mosfet".into(),
            design.models[*model].name.clone(),
            "model".into(),
            format!("d {d}, g {g}, s {s}"),
        ),
    };
    [kind, val, tol, conn, p.note.clone().unwrap_or_default()]
}

/// Every named table.
pub fn all(
    design: &Design,
    a: &Analysis,
    reqs: &[RequirementCheck],
    study: Option<&Study>,
) -> BTreeMap<&'static str, String> {
    let mut t = BTreeMap::new();
    t.insert("parts", parts_table(design));
    if let Some(op) = &a.operating_point {
        operating_point_tables(&mut t, op);
    }
    t.insert("capacitors", capacitors_table(a));
    cut_off_tables(&mut t, a);
    t.insert("poles_zeros", poles_zeros_table(a));
    if let Some(n) = &a.noise {
        t.insert("noise", noise_table(n));
        t.insert("noise_contributors", noise_contributors_table(n));
    }
    if let Some(l) = &a.large_signal {
        t.insert("large_signal", large_signal_table(l));
    }
    if a.ports.is_some() || a.step.is_some() {
        t.insert("ports", ports_table(a));
    }
    t.insert("requirements", requirements_table(reqs));
    if let Some(s) = study {
        study_tables(&mut t, s);
    }
    t
}

/// `noise`: the spot values, the input generators with the optimum source, the band's rms.
fn noise_table(n: &crate::analysis::noise::NoiseReport) -> String {
    let opt = |v: Option<f64>, unit: &str| v.map_or_else(absent, |v| si(v, unit, 4));
    let db = |v: Option<f64>| v.map_or_else(absent, |v| format!("{} dB", plain(v, 3)));
    let mut rows = vec![
        vec!["output noise density".into(), si(n.output_density_v_per_rthz, "V/√Hz", 4)],
        vec![
            "input-referred density (at the source EMF)".into(),
            opt(n.input_density_v_per_rthz, "V/√Hz"),
        ],
        vec![
            format!("noise figure (source {} at 290 K)", si(n.source_resistance_ohm, "Ω", 4)),
            db(n.noise_figure_db),
        ],
        vec!["equivalent input noise voltage e_n".into(), opt(n.e_n_v_per_rthz, "V/√Hz")],
        vec!["equivalent input noise current i_n".into(), opt(n.i_n_a_per_rthz, "A/√Hz")],
        vec!["optimum source resistance e_n/i_n".into(), opt(n.r_opt_ohm, "Ω")],
        vec!["noise figure at the optimum source".into(), db(n.nf_min_db)],
    ];
    if let Some(b) = &n.band {
        let band = format!("{} … {}", si(b.start_hz, "Hz", 3), si(b.stop_hz, "Hz", 3));
        rows.push(vec![
            format!("output noise, {band}"),
            format!("{} rms", si(b.output_rms_v, "V", 4)),
        ]);
        rows.push(vec![
            format!("input-referred noise, {band}"),
            format!("{} rms", si(b.input_rms_v, "V", 4)),
        ]);
    }
    if let (Some(signal), Some(snr)) = (n.signal_rms_v, n.snr_db) {
        rows.push(vec![
            format!("signal-to-noise ratio ({} rms signal)", si(signal, "V", 4)),
            format!("{} dB", plain(snr, 4)),
        ]);
    }
    markdown_table(&[&format!("at {}", si(n.spot_frequency_hz, "Hz", 4)), "value"], "lr", rows)
}

/// `large_signal`: each signal-handling figure, its estimate from the power series at the
/// bias where there is one, and what sets it.
fn large_signal_table(l: &crate::analysis::large_signal::LargeSignalReport) -> String {
    let volts = |v: Option<f64>| v.map_or_else(absent, |v| si(v, "V", 4));
    let db = |v: Option<f64>| v.map_or_else(absent, |v| format!("{} dB", plain(v, 4)));
    let limit = |l: &Option<crate::analysis::large_signal::SwingLimit>| {
        l.as_ref().map_or_else(absent, |l| {
            let edge = l.edge.verb();
            format!("{} {edge} at `{}`, EMF {}", l.part, l.node, si(l.input_v, "V", 3))
        })
    };
    let s = &l.output_swing;
    let mut rows = vec![
        vec![
            "output swing, rising".into(),
            volts(s.positive_v),
            absent(),
            limit(&s.positive_limit),
        ],
        vec![
            "output swing, falling".into(),
            volts(s.negative_v),
            absent(),
            limit(&s.negative_limit),
        ],
        vec![
            "clipping input (peak EMF)".into(),
            volts(l.clipping_input_v),
            absent(),
            "the nearer limit".into(),
        ],
    ];
    if let Some(d) = &l.distortion {
        let a = d.amplitude_v;
        let est = |v: Option<f64>| v.filter(|v| *v > 0.0).map(|v| 20.0 * v.log10());
        let series = l.series.as_ref();
        let error = |exact: Option<f64>, est: Option<f64>| match (exact, est) {
            (Some(x), Some(e)) if (e - x).abs() < 0.01 => "estimate within 0.01 dB".into(),
            (Some(x), Some(e)) => format!("estimate {:+.2} dB off", e - x).replace('-', "−"),
            _ => absent(),
        };
        let (hd2_est, hd3_est) = (est(series.map(|s| s.hd2(a))), est(series.map(|s| s.hd3(a))));
        let at = si(a, "V", 3);
        rows.push(vec![
            format!("fundamental at {at} peak"),
            si(d.fundamental_v, "V", 4),
            series.map_or_else(absent, |s| si((s.a1 * a).abs(), "V", 4)),
            "estimate: the small-signal gain".into(),
        ]);
        rows.push(vec![
            format!("HD2 at {at}"),
            db(d.hd2_db),
            db(hd2_est),
            error(d.hd2_db, hd2_est),
        ]);
        rows.push(vec![
            format!("HD3 at {at}"),
            db(d.hd3_db),
            db(hd3_est),
            error(d.hd3_db, hd3_est),
        ]);
        rows.push(vec![
            format!("THD at {at}"),
            format!("{} %", plain(d.thd_percent, 4)),
            absent(),
            format!("harmonics 2 to {}", d.harmonics.len()),
        ]);
    }
    rows.push(vec![
        "input 1 dB compression (peak EMF)".into(),
        volts(l.compression_1db_input_v),
        absent(),
        absent(),
    ]);
    rows.push(vec![
        "input third-order intercept (peak EMF per tone)".into(),
        absent(),
        volts(l.iip3_v),
        "extrapolated from the power series".into(),
    ]);
    if let Some(dr) = l.dynamic_range_db {
        rows.push(vec![
            "dynamic range (band noise to compression)".into(),
            format!("{} dB", plain(dr, 4)),
            absent(),
            absent(),
        ]);
    }
    markdown_table(&["quantity", "exact", "power series", "set by"], "lrrl", rows)
}

/// `ports`: the impedances and the two-port at the spot frequency, stability over the
/// sweep, the step response and the group delay.
fn ports_table(a: &Analysis) -> String {
    let db = |v: Option<f64>| v.map_or_else(absent, |v| format!("{} dB", plain(v, 4)));
    let num = |v: Option<f64>| v.map_or_else(absent, |v| plain(v, 4));
    let z = |z: faer::c64| {
        let sign = if z.im < 0.0 { "−" } else { "+" };
        format!("{} {sign} j{}", si(z.re, "Ω", 4), si(z.im.abs(), "Ω", 4))
    };
    let mut rows: Vec<Vec<String>> = Vec::new();
    if let Some(p) = &a.ports {
        let reference = si(p.reference_ohm, "Ω", 4);
        let basis = if p.reference_stated { reference } else { format!("{reference} (default)") };
        rows.push(vec!["reference impedance Z₀".into(), basis]);
        if let Some(q) = &p.spot {
            let at = si(q.frequency_hz, "Hz", 4);
            rows.push(vec![format!("input impedance at {at} (the design's load)"), z(q.z_in)]);
            rows.push(vec![format!("output impedance at {at} (the design's source)"), z(q.z_out)]);
            let s21 = q.s[1].norm();
            rows.push(vec![
                cell(&format!("|S₂₁| at {at}")),
                db((s21 > 0.0).then(|| 20.0 * s21.log10())),
            ]);
            rows.push(vec![
                "return loss in / out".into(),
                format!("{} / {}", db(q.input_return_loss_db()), db(q.output_return_loss_db())),
            ]);
            rows.push(vec![
                "VSWR in / out".into(),
                format!(
                    "{} / {}",
                    num(crate::analysis::ports::vswr(q.s[0])),
                    num(crate::analysis::ports::vswr(q.s[3]))
                ),
            ]);
            rows.push(vec!["reverse isolation".into(), db(q.reverse_isolation_db())]);
            rows.push(vec![
                cell("K, |Δ|, μ"),
                format!("{}, {}, {}", num(q.k()), plain(q.delta().norm(), 4), num(q.mu())),
            ]);
        }
        if let Some(b) = &p.band {
            let worst = |v: Option<(f64, f64)>| {
                v.map_or_else(absent, |(d, f)| format!("{} dB at {}", plain(d, 4), si(f, "Hz", 4)))
            };
            let across = format!("{} … {}", si(b.from_hz, "Hz", 4), si(b.to_hz, "Hz", 4));
            rows.push(vec![
                format!("least return loss in, across {across}"),
                worst(b.input_return_loss_db),
            ]);
            rows.push(vec![
                format!("least return loss out, across {across}"),
                worst(b.output_return_loss_db),
            ]);
        }
        rows.push(vec![
            "K and μ, least over the sweep".into(),
            format!("{}, {}", num(p.k_min()), num(p.mu_min())),
        ]);
        let ranges = p.conditionally_stable();
        rows.push(vec![
            "only conditionally stable (μ < 1)".into(),
            if ranges.is_empty() {
                "nowhere in the sweep".into()
            } else {
                ranges
                    .iter()
                    .map(|(a, b)| format!("{} … {}", si(*a, "Hz", 3), si(*b, "Hz", 3)))
                    .collect::<Vec<_>>()
                    .join(", ")
            },
        ]);
    }
    if let Some(s) = &a.step {
        let rule = s.rule_of_thumb_s.map_or(String::new(), |r| {
            format!(
                " (0.35/f_H: {}, {})",
                si(r, "s", 4),
                crate::notation::signed_percent(r / s.rise_time_s - 1.0, 2)
            )
        });
        rows.push(vec![
            "step: 10–90 % rise time".into(),
            format!("{}{rule}", si(s.rise_time_s, "s", 4)),
        ]);
        rows.push(vec!["step: overshoot".into(), format!("{} %", plain(100.0 * s.overshoot, 3))]);
        rows.push(vec![
            format!("step: settling to ±{} %", plain(100.0 * s.settling_band, 2)),
            s.settling_time_s.map_or_else(absent, |t| si(t, "s", 4)),
        ]);
    }
    if let Some(g) = &a.group_delay {
        rows.push(vec![
            format!("group delay, {} … {}", si(g.from_hz, "Hz", 3), si(g.to_hz, "Hz", 3)),
            format!(
                "{} at the centre, varying {}",
                si(g.centre_s, "s", 4),
                si(g.variation_s(), "s", 3)
            ),
        ]);
    }
    markdown_table(&["at the ports and in time", "value"], "lr", rows)
}

/// `noise_contributors`: each part's noise by mechanism, largest first.
fn noise_contributors_table(n: &crate::analysis::noise::NoiseReport) -> String {
    let rows = n
        .contributors
        .iter()
        .map(|c| {
            vec![
                cell(&c.part),
                c.mechanism.describe().to_string(),
                si(c.density_v2_per_hz.sqrt(), "V/√Hz", 3),
                format!("{} %", plain(100.0 * c.share, 3)),
                c.band_share.map_or_else(absent, |s| format!("{} %", plain(100.0 * s, 3))),
            ]
        })
        .collect();
    markdown_table(&["part", "mechanism", "at the output", "share", "share in band"], "llrrr", rows)
}

/// `parts`: every part with its kind, value, tolerance, connections and note.
fn parts_table(design: &Design) -> String {
    let parts = design
        .parts
        .iter()
        .map(|p| {
            let mut row = vec![cell(&p.name)];
            row.extend(part_cells(p, design).iter().map(|c| cell(c)));
            row
        })
        .collect();
    markdown_table(&["part", "kind", "value", "tolerance", "connects", "note"], "llllll", parts)
}

/// `nodes` and `devices`: node voltages and each transistor's bias and small-signal model.
fn operating_point_tables(t: &mut BTreeMap<&'static str, String>, op: &OperatingPointReport) {
    let nodes = op
        .nodes
        .iter()
        .filter(|(n, _)| !n.contains('.') && n.as_str() != "source")
        .map(|(n, v)| vec![cell(n), si(*v, "V", 4)])
        .collect();
    t.insert("nodes", markdown_table(&["node", "voltage"], "lr", nodes));
    if !op.stress.is_empty() {
        let rows = op
            .stress
            .iter()
            .map(|s| {
                let unit = if s.quantity == "power" { "W" } else { "V" };
                vec![
                    cell(&s.part),
                    if s.quantity == "power" { "dissipation" } else { "DC voltage" }.to_string(),
                    si(s.value, unit, 3),
                    si(s.rating, unit, 3),
                    format!("{} %", plain(s.fraction * 100.0, 3)),
                    if s.over() { "**over the derating**".into() } else { "within".into() },
                ]
            })
            .collect();
        t.insert(
            "stress",
            markdown_table(
                &["part", "at the operating point", "value", "rating", "of rating", "derated"],
                "llrrrl",
                rows,
            ),
        );
    }
    let devices = op
        .devices
        .iter()
        .map(|d| {
            let ss = &d.small_signal;
            let (region, bias, caps) = match &d.bias.state {
                DeviceState::Bjt { region, ic_a, vce_v, vbe_v, .. } => (
                    region.label().to_string(),
                    format!(
                        "I_C {}, V_CE {}, V_BE {}",
                        si(*ic_a, "A", 3),
                        si(*vce_v, "V", 3),
                        si(*vbe_v, "V", 4)
                    ),
                    format!("Cπ {}, Cμ {}", opt(ss.cpi_f, "F"), opt(ss.cmu_f, "F")),
                ),
                DeviceState::Mosfet { region, id_a, vds_v, vgs_v, .. } => (
                    region.label().to_string(),
                    format!(
                        "I_D {}, V_DS {}, V_GS {}",
                        si(*id_a, "A", 3),
                        si(*vds_v, "V", 3),
                        si(*vgs_v, "V", 4)
                    ),
                    format!(
                        "Cgs {}, Cgd {}, Cdb {}",
                        opt(ss.cgs_f, "F"),
                        opt(ss.cgd_f, "F"),
                        opt(ss.cdb_f, "F")
                    ),
                ),
            };
            let power = match d.bias.max_power_w {
                Some(m) => format!("{} of {}", si(d.bias.power_w, "W", 3), si(m, "W", 3)),
                None => si(d.bias.power_w, "W", 3),
            };
            let rpi = ss.rpi_ohm.map_or(String::new(), |r| format!(", rπ {}", si(r, "Ω", 3)));
            let ro = ss.ro_ohm.map_or("∞".into(), |r| si(r, "Ω", 3));
            vec![
                cell(&d.bias.part),
                region,
                bias,
                power,
                format!("gm {}{rpi}, ro {ro}", si(ss.gm_s, "S", 3)),
                caps,
            ]
        })
        .collect();
    t.insert(
        "devices",
        markdown_table(
            &["device", "region", "bias", "dissipation", "small signal", "capacitances"],
            "llllll",
            devices,
        ),
    );
}

/// `capacitors`: every capacitor, its set and why.
fn capacitors_table(a: &Analysis) -> String {
    let caps = a
        .capacitors
        .iter()
        .map(|c| {
            vec![
                cell(&c.part),
                si(c.c_f, "F", 4),
                format!("{:?}", c.set).to_lowercase(),
                match c.reason {
                    crate::circuit::netlist::CapReason::Role => "its role".into(),
                    crate::circuit::netlist::CapReason::ValueRule => "no role: 1 nF rule".into(),
                    crate::circuit::netlist::CapReason::Device => "device capacitance".into(),
                },
            ]
        })
        .collect();
    markdown_table(&["capacitor", "value", "set", "because"], "lrll", caps)
}

/// `high_estimates`, `octc`, `low_estimates` and `sctc`: both cut-offs with their estimates
/// and time-constant tables.
fn cut_off_tables(t: &mut BTreeMap<&'static str, String>, a: &Analysis) {
    let h = &a.high;
    let mut high_est =
        markdown_table(&["upper cut-off", "f_H", "error"], "lrr", high_estimate_rows(h));
    high_est.push_str(&format!(
        "\nb1 = {}, b2 = {}, pole separation |p2/p1| = {}.\n",
        h.b1_s.map_or_else(absent, |b| si(b, "s", 4)),
        h.b2_s2.map_or_else(absent, |b| scientific(b, "s²", 4)),
        h.dominance_ratio.map_or_else(absent, |d| plain(d, 3))
    ));
    // No capacitor on a side: nothing to estimate; the explanation says why.
    if !h.octc.caps.is_empty() {
        t.insert("high_estimates", high_est);
    }
    let escaped = |mut rows: Vec<Vec<String>>| {
        for r in rows.iter_mut() {
            r[0] = cell(&r[0]);
        }
        rows
    };
    t.insert(
        "octc",
        markdown_table(
            &["capacitor", "C", "R seen", "τ = RC", "share", "Miller factor"],
            "lrrrrr",
            escaped(octc_rows(h)),
        ),
    );
    let l = &a.low;
    if !l.sctc.caps.is_empty() {
        t.insert(
            "low_estimates",
            markdown_table(&["lower cut-off", "f_L", "error"], "lrr", low_estimate_rows(l)),
        );
    }
    t.insert(
        "sctc",
        markdown_table(
            &["capacitor", "C", "R seen", "τ = RC", "share of Σ 1/τ"],
            "lrrrr",
            escaped(sctc_rows(l)),
        ),
    );
}

/// `poles_zeros`: the whole network's poles and zeros side by side.
fn poles_zeros_table(a: &Analysis) -> String {
    let n = a.poles.len().max(a.zeros.len());
    let pz = (0..n)
        .map(|i| {
            vec![
                a.poles.get(i).map_or(String::new(), root),
                a.zeros.get(i).map_or(String::new(), root),
            ]
        })
        .collect();
    markdown_table(&["poles (s/2π)", "zeros (s/2π)"], "rr", pz)
}

/// `requirements`: each requirement, failures in bold.
fn requirements_table(reqs: &[RequirementCheck]) -> String {
    let req = reqs
        .iter()
        .map(|r| {
            let mut row = requirement_row(r);
            if !r.pass {
                row[3] = "**FAIL**".into();
            }
            if r.corner_pass == Some(false) {
                row[5] = row[5].replace(" fail", " **fail**");
            }
            row
        })
        .collect();
    markdown_table(
        &["requirement", "limit", "nominal", "result", "margin", "worst corner", "yield"],
        "llrlrrr",
        req,
    )
}

/// The upper cut-off's exact value and estimates: label, f_H, error (shared with the
/// terminal).
pub fn high_estimate_rows(h: &crate::analysis::High) -> Vec<Vec<String>> {
    vec![
        vec!["exact −3 dB".into(), opt(h.f3db_hz, "Hz"), String::new()],
        vec![
            "time-constant sum 1/(2π Στ)".into(),
            opt(h.octc.f_estimate_hz, "Hz"),
            pct(h.estimate_errors.time_constant),
        ],
        vec![
            "second order from b1, b2".into(),
            opt(h.second_order_f_estimate_hz, "Hz"),
            pct(h.estimate_errors.second_order),
        ],
        vec![
            "root-sum-square of poles and zeros".into(),
            opt(h.rss_f_estimate_hz, "Hz"),
            pct(h.estimate_errors.root_sum_square),
        ],
    ]
}

/// The lower cut-off's exact value and estimates: label, f_L, error.
pub fn low_estimate_rows(l: &crate::analysis::Low) -> Vec<Vec<String>> {
    vec![
        vec!["exact −3 dB".into(), opt(l.f3db_hz, "Hz"), String::new()],
        vec![
            "short-circuit sum Σ 1/(2π τ)".into(),
            opt(l.sctc.f_estimate_hz, "Hz"),
            pct(l.estimate_errors.time_constant),
        ],
        vec![
            "root-sum-square of poles and zeros".into(),
            opt(l.rss_f_estimate_hz, "Hz"),
            pct(l.estimate_errors.root_sum_square),
        ],
    ]
}

/// Open-circuit time constants: part (raw), C, R seen, τ, share, Miller factor.
pub fn octc_rows(h: &crate::analysis::High) -> Vec<Vec<String>> {
    h.octc
        .caps
        .iter()
        .map(|c| {
            vec![
                c.part.clone(),
                si(c.c_f, "F", 3),
                si(c.r_ohm, "Ω", 4),
                si(c.tau_s, "s", 3),
                format!("{} %", plain(c.share * 100.0, 3)),
                c.miller_factor.map_or_else(absent, |m| plain(m, 3)),
            ]
        })
        .collect()
}

/// Short-circuit time constants: part (raw), C, R seen, τ, share of Σ 1/τ.
pub fn sctc_rows(l: &crate::analysis::Low) -> Vec<Vec<String>> {
    l.sctc
        .caps
        .iter()
        .map(|c| {
            vec![
                c.part.clone(),
                si(c.c_f, "F", 3),
                si(c.r_ohm, "Ω", 4),
                si(c.tau_s, "s", 3),
                format!("{} %", plain(c.share * 100.0, 3)),
            ]
        })
        .collect()
}

/// A requirement's value as it is stated: the gain and the flatness in dB, anything else
/// in SI.
pub fn requirement_value(name: &str, unit: &str, v: f64) -> String {
    if name == "midband_gain" && v > 0.0 {
        format!("{} dB", plain(20.0 * v.log10(), 3))
    } else if unit == "dB" {
        format!("{} dB", plain(v, 3))
    } else if unit == "%" {
        format!("{} %", plain(v, 3))
    } else if unit.is_empty() {
        plain(v, 4)
    } else {
        si(v, unit, 4)
    }
}

/// A requirement's limits: `18 dB … 23 dB`, `≥ 900 kHz`, `≤ 1.2 kΩ`; empty without limits.
pub fn requirement_limit(name: &str, unit: &str, min: Option<f64>, max: Option<f64>) -> String {
    let show = |v: f64| requirement_value(name, unit, v);
    match (min, max) {
        (Some(a), Some(b)) => format!("{} … {}", show(a), show(b)),
        (Some(a), None) => format!("≥ {}", show(a)),
        (None, Some(b)) => format!("≤ {}", show(b)),
        (None, None) => String::new(),
    }
}

/// One requirement as text cells: name, limit, nominal, pass/FAIL, margin, worst corner,
/// yield — shared by the report's table and the terminal.
pub fn requirement_row(r: &RequirementCheck) -> Vec<String> {
    let show = |v: f64| requirement_value(r.name, r.unit, v);
    let limit = requirement_limit(r.name, r.unit, r.min, r.max);
    let margin = match (r.margin_db, r.margin, r.nearest_limit) {
        (Some(db), _, Some(side)) => format!("{} dB to {side}", signed(plain(db, 3), db)),
        (None, Some(m), Some(side)) => format!("{} to {side}", pct(Some(m))),
        _ => absent(),
    };
    vec![
        requirement_words(r.name),
        limit,
        r.value.map_or("not found".into(), show),
        if r.pass { "pass".into() } else { "FAIL".into() },
        margin,
        corner_text(r),
        r.yield_fraction.map_or_else(absent, |y| format!("{} %", plain(y * 100.0, 4))),
    ]
}

/// `+` before a positive number's text.
fn signed(text: String, value: f64) -> String {
    if value > 0.0 && text != "0" { format!("+{text}") } else { text }
}

/// The worst-corner cell: the corner (both, `low … high`, for a window), then `pass`, or
/// `fail by` how far the failing corner lies outside its limit (in dB for a gain); and a
/// warning when the corners do not bound the figure.
fn corner_text(r: &RequirementCheck) -> String {
    let verdict = corner_verdict(r);
    if r.corner_monotonic == Some(false) {
        format!("{verdict}; corners do not bound it, see yield")
    } else {
        verdict
    }
}

fn corner_verdict(r: &RequirementCheck) -> String {
    let show = |v: f64| requirement_value(r.name, r.unit, v);
    let shown = match (r.low_corner, r.high_corner, r.corner) {
        (Some(lo), Some(hi), _) => format!("{} … {}", show(lo), show(hi)),
        (_, _, Some(v)) => show(v),
        _ => return absent(),
    };
    let Some(pass) = r.corner_pass else { return absent() };
    if pass {
        return format!("{shown} pass");
    }
    // How far outside: the worse of a low corner under the minimum and a high one over the
    // maximum, relative to that limit.
    let in_db = r.name == "midband_gain" || r.unit == "dB";
    let outside = |v: f64, limit: f64, below: bool| {
        if r.unit == "dB" {
            return if below { limit - v } else { v - limit };
        }
        let ratio = if below { limit / v } else { v / limit };
        if in_db { 20.0 * ratio.log10() } else { ratio - 1.0 }
    };
    let beyond = |v: f64| {
        let under = r.min.filter(|lo| v < *lo).map(|lo| outside(v, lo, true));
        let over = r.max.filter(|hi| v > *hi).map(|hi| outside(v, hi, false));
        under.or(over)
    };
    // Either corner can land past either limit (see `with_study`).
    let excess =
        [r.low_corner, r.high_corner].into_iter().flatten().filter_map(beyond).reduce(f64::max);
    match excess {
        Some(e) if in_db => format!("{shown} fail by {} dB", plain(e, 2)),
        Some(e) => format!("{shown} fail by {} %", plain(e * 100.0, 2)),
        None => format!("{shown} fail"),
    }
}

/// A requirement's name in words: `upper cutoff`, `signal-to-noise ratio`.
pub fn requirement_words(name: &str) -> String {
    match name {
        "snr" => "signal-to-noise ratio".into(),
        "thd" => "total harmonic distortion".into(),
        "input_compression" => "input 1 dB compression".into(),
        "stability" => "stability (μ)".into(),
        other => other.replace('_', " "),
    }
}

/// The short label of a figure or requirement: `gain`, `flatness`, `f_H`, `R_in`, `Q1 bias`.
pub fn figure_label(key: &str) -> String {
    match key {
        "midband_gain" => "gain".into(),
        "gain_flatness" => "flatness".into(),
        "upper_cutoff" => "f_H".into(),
        "lower_cutoff" => "f_L".into(),
        "input_resistance" => "R_in".into(),
        "output_resistance" => "R_out".into(),
        "noise_figure" => "NF".into(),
        "input_noise_density" => "input noise".into(),
        "output_noise" => "output noise".into(),
        "snr" => "SNR".into(),
        "supply_current" => "I_supply".into(),
        "output_swing" => "swing".into(),
        "thd" => "THD".into(),
        "input_compression" => "1 dB in".into(),
        "input_return_loss" => "RL in".into(),
        "output_return_loss" => "RL out".into(),
        "stability" => "μ".into(),
        "rise_time" => "t_r".into(),
        "overshoot" => "overshoot".into(),
        "group_delay_variation" => "Δτ_g".into(),
        other => other.replace(".bias_current", " bias"),
    }
}

/// A figure's value as text in its unit: `20.4 dB`, `1.275 MHz`, `3 %`.
pub fn figure_value(key: &str, v: f64) -> String {
    match key {
        "midband_gain" => format!("{} V/V", plain(v, 4)),
        "gain_flatness" => format!("{} dB", plain(v, 3)),
        "upper_cutoff" | "lower_cutoff" => si(v, "Hz", 4),
        "input_resistance" | "output_resistance" => si(v, "Ω", 4),
        "noise_figure" => format!("{} dB", plain(v, 3)),
        "input_noise_density" => si(v, "V/√Hz", 4),
        "output_noise" => si(v, "V", 4),
        "snr" => format!("{} dB", plain(v, 3)),
        "output_swing" | "input_compression" => si(v, "V", 4),
        "thd" | "overshoot" => format!("{} %", plain(v, 3)),
        "input_return_loss" | "output_return_loss" => format!("{} dB", plain(v, 3)),
        "stability" => plain(v, 4),
        "rise_time" | "group_delay_variation" => si(v, "s", 4),
        _ => si(v, "A", 4),
    }
}

fn study_tables(t: &mut BTreeMap<&'static str, String>, s: &Study) {
    t.insert("sensitivity", sensitivity_table(s));
    t.insert("worst_case", worst_case_table(s));
    if let Some(mc) = &s.monte_carlo {
        t.insert("monte_carlo", monte_carlo_table(mc));
    }
}

/// `sensitivity`: the levers that move a headline figure, strongest first.
fn sensitivity_table(s: &Study) -> String {
    let shown: Vec<usize> = s
        .figures
        .iter()
        .enumerate()
        .filter(|(_, f)| {
            matches!(f.as_str(), "midband_gain" | "upper_cutoff" | "lower_cutoff")
                || f.ends_with(".bias_current")
        })
        .map(|(k, _)| k)
        .collect();
    let mut rows: Vec<(f64, Vec<String>)> = s
        .levers
        .iter()
        .map(|l| {
            let biggest = shown.iter().filter_map(|&k| l.s[k]).fold(0.0f64, |m, v| m.max(v.abs()));
            let mut row = vec![
                cell(&l.lever.name),
                l.lever
                    .tolerance
                    .map_or("exact".into(), |t| format!("±{} %", plain(t.fraction * 100.0, 3))),
            ];
            row.extend(shown.iter().map(|&k| {
                l.s[k]
                    .map_or_else(absent, |v| if v.abs() < 5e-5 { "0".into() } else { plain(v, 3) })
            }));
            (biggest, row)
        })
        .filter(|(b, _)| *b >= 1e-4)
        .collect();
    rows.sort_by(|a, b| b.0.total_cmp(&a.0).then(a.1[0].cmp(&b.1[0])));
    let mut header: Vec<String> = vec!["lever".into(), "tolerance".into()];
    header.extend(shown.iter().map(|&k| format!("S of {}", figure_label(&s.figures[k]))));
    let header_refs: Vec<&str> = header.iter().map(String::as_str).collect();
    let align: String = "ll".chars().chain(std::iter::repeat_n('r', shown.len())).collect();
    let mut text = markdown_table(&header_refs, &align, rows.into_iter().map(|(_, r)| r).collect());
    text.push_str(&format!(
        "\nS = ∂ln y/∂ln x by the adjoint method: one transposed solve per figure gives its derivative to every element of the small-signal network; a lever that sets the bias moves those elements through the operating point (fourth-order differences of the bias alone, step {}).\n",
        plain(s.step, 2)
    ));
    text
}

/// `worst_case`: the linearised bound and the evaluated corners of each figure.
fn worst_case_table(s: &Study) -> String {
    let wc = s
        .worst_case
        .iter()
        .map(|w| {
            let rel = |v: Option<f64>| {
                v.map_or_else(absent, |v| {
                    format!("{} ({})", figure_value(&w.figure, v), pct(Some(v / w.nominal - 1.0)))
                })
            };
            vec![
                figure_label(&w.figure),
                figure_value(&w.figure, w.nominal),
                format!("±{} %", plain(w.linear_bound * 100.0, 3)),
                rel(w.low_corner),
                rel(w.high_corner),
            ]
        })
        .collect();
    markdown_table(
        &["figure", "nominal", "linear bound Σ\\|S\\|·t", "low corner", "high corner"],
        "lrrrr",
        wc,
    )
}

/// `monte_carlo`: the spread of each figure and the joint yield.
fn monte_carlo_table(mc: &MonteCarlo) -> String {
    let rows = mc
        .spreads
        .iter()
        .map(|sp| {
            let mut row = vec![
                figure_label(&sp.figure),
                figure_value(&sp.figure, sp.mean),
                format!("{} %", plain(sp.std_dev / sp.mean * 100.0, 3)),
            ];
            row.extend(sp.percentiles.iter().map(|p| figure_value(&sp.figure, *p)));
            row
        })
        .collect();
    let mut text = markdown_table(
        &["figure", "mean", "σ/mean", "1 %", "5 %", "50 %", "95 %", "99 %"],
        "lrrrrrrr",
        rows,
    );
    let failed = if mc.failed_runs.is_empty() {
        String::new()
    } else {
        let list: Vec<String> = mc.failed_runs.iter().take(20).map(|r| r.to_string()).collect();
        format!(" (runs {})", list.join(", "))
    };
    text.push_str(&format!(
        "\n{} runs, seed {}; {} run{} did not converge{failed}.{}\n",
        mc.runs,
        mc.seed,
        mc.failed_runs.len(),
        if mc.failed_runs.len() == 1 { "" } else { "s" },
        mc.yield_all.map_or(String::new(), |y| format!(
            " Yield of all requirements together: **{} %**.",
            plain(y * 100.0, 4)
        ))
    ));
    text
}

#[cfg(test)]
mod tests {
    use super::*;

    fn output_resistance(value: f64, corner: f64) -> RequirementCheck {
        RequirementCheck {
            name: "output_resistance",
            unit: "Ω",
            min: None,
            max: Some(1200.0),
            value: Some(value),
            pass: value <= 1200.0,
            margin: Some((1200.0 - value) / 1200.0),
            margin_db: None,
            nearest_limit: Some("max"),
            corner: Some(corner),
            corner_pass: Some(corner <= 1200.0),
            corner_monotonic: Some(true),
            low_corner: None,
            high_corner: Some(corner),
            yield_fraction: None,
        }
    }

    #[test]
    fn a_failing_corner_says_how_far_outside_its_limit_it_lies() {
        // 1260 Ω against a 1.2 kΩ maximum: 5 % over.
        let row = requirement_row(&output_resistance(1100.0, 1260.0));
        assert_eq!(row[4], "+8.3 % to max");
        assert_eq!(row[5], "1.26 kΩ fail by 5 %");
        let row = requirement_row(&output_resistance(1100.0, 1150.0));
        assert_eq!(row[5], "1.15 kΩ pass");
    }

    #[test]
    fn corners_that_do_not_bound_the_figure_point_to_the_yield() {
        // The high corner (1.05 kΩ) below the nominal 1.1 kΩ: it passes, but says so.
        let mut r = output_resistance(1100.0, 1050.0);
        r.corner_monotonic = Some(false);
        assert_eq!(requirement_row(&r)[5], "1.05 kΩ pass; corners do not bound it, see yield");
    }
}
