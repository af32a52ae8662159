//! Identities that tie the time constants to the poles (derived; docs/methods.md, Time
//! constants): on every example design and on random networks,
//! Σ R_i0 C_i = b1 = −Σ 1/p over the high-frequency poles,
//! b2 = Σ_{i<j} 1/(p_i p_j) over the same poles,
//! Σ 1/(R_is C_i) = −Σ p over the low-frequency poles — all to 1e-9 relative.

use std::f64::consts::PI;

use tauweave::analysis::{self, Analysis, RootHz};
use tauweave::design;

use crate::support::{files, root};

fn s(p: &RootHz) -> (f64, f64) {
    (2.0 * PI * p.re_hz, 2.0 * PI * p.im_hz)
}

fn inv((re, im): (f64, f64)) -> (f64, f64) {
    let d = re * re + im * im;
    (re / d, -im / d)
}

fn mul((a, b): (f64, f64), (c, d): (f64, f64)) -> (f64, f64) {
    (a * c - b * d, a * d + b * c)
}

fn close(a: f64, b: f64, what: &str) {
    assert!(
        (a - b).abs() <= 1e-9 * a.abs().max(b.abs()),
        "{what}: {a} vs {b} (rel {:e})",
        (a - b) / b
    );
}

fn check_identities(a: &Analysis, name: &str) {
    let h = &a.high;
    let sum_tau: f64 = h.octc.caps.iter().map(|c| c.r_ohm * c.c_f).sum();
    match h.b1_s {
        None => assert!(h.octc.caps.is_empty(), "{name}: b1 missing with high capacitors"),
        Some(b1) => check_high(h, b1, sum_tau, name),
    }
    let l = &a.low;
    if !l.sctc.caps.is_empty() {
        let inverse_sum: f64 = l.sctc.caps.iter().map(|c| 1.0 / (c.r_ohm * c.c_f)).sum();
        let minus_sum: f64 = -l.poles_hz.iter().map(|p| s(p).0).sum::<f64>();
        close(inverse_sum, minus_sum, &format!("{name}: Σ 1/τ_s = −Σ p_low"));
    }
}

fn check_high(h: &analysis::High, b1: f64, sum_tau: f64, name: &str) {
    close(sum_tau, b1, &format!("{name}: Σ R_i0 C_i = b1"));
    if !h.poles_hz.is_empty() {
        let minus_sum_inv: f64 = -h.poles_hz.iter().map(|p| inv(s(p)).0).sum::<f64>();
        close(minus_sum_inv, b1, &format!("{name}: b1 = −Σ 1/p"));
        let mut b2 = 0.0;
        for i in 0..h.poles_hz.len() {
            for j in i + 1..h.poles_hz.len() {
                b2 += inv(mul(s(&h.poles_hz[i]), s(&h.poles_hz[j]))).0;
            }
        }
        close(b2, h.b2_s2.unwrap(), &format!("{name}: b2 = Σ 1/(p_i p_j)"));
    }
}

#[test]
fn identities_hold_on_every_example_and_reference_design() {
    let mut designs = files(&root().join("designs"), "yaml");
    designs.extend(files(&root().join("tests/reference/designs"), "yaml"));
    for path in designs {
        let text = std::fs::read_to_string(&path).unwrap();
        let d = design::load(&text).design.expect("valid design");
        let a = analysis::analyze(&d).expect("analysis");
        check_identities(&a, &path.file_name().unwrap().to_string_lossy());
    }
}

/// A small deterministic generator (64-bit LCG, Knuth's MMIX constants).
pub struct Lcg(pub u64);

impl Lcg {
    pub fn next(&mut self) -> f64 {
        self.0 = self.0.wrapping_mul(6364136223846793005).wrapping_add(1442695040888963407);
        (self.0 >> 11) as f64 / (1u64 << 53) as f64
    }
    fn pick(&mut self, n: usize) -> usize {
        ((self.next() * n as f64) as usize).min(n - 1)
    }
    fn log_uniform(&mut self, lo: f64, hi: f64) -> f64 {
        lo * (hi / lo).powf(self.next())
    }
}

/// A random connected network: a resistor tree from gnd, extra resistors, high-frequency
/// capacitors anywhere, coupling capacitors, and a transconductance or two.
pub fn random_network(seed: u64) -> String {
    let mut r = Lcg(seed);
    let n = 3 + r.pick(5);
    let node = |i: usize| if i == 0 { "gnd".to_string() } else { format!("n{i}") };
    let mut parts = String::new();
    let mut k = 0;
    let mut add = |line: String| {
        k += 1;
        parts.push_str(&format!("  P{k}: {line}\n"));
    };
    for i in 1..=n {
        let j = r.pick(i);
        add(format!(
            "{{kind: resistor, value: {:.6e}, between: [{}, {}]}}",
            r.log_uniform(100.0, 100e3),
            node(i),
            node(j)
        ));
    }
    for _ in 0..r.pick(3) {
        let (a, b) = (r.pick(n + 1), r.pick(n + 1));
        if a != b {
            add(format!(
                "{{kind: resistor, value: {:.6e}, between: [{}, {}]}}",
                r.log_uniform(100.0, 100e3),
                node(a),
                node(b)
            ));
        }
    }
    for _ in 0..2 + r.pick(4) {
        let (a, b) = (r.pick(n + 1), r.pick(n + 1));
        if a != b {
            add(format!(
                "{{kind: capacitor, value: {:.6e}, between: [{}, {}], role: parasitic}}",
                r.log_uniform(0.1e-12, 50e-12),
                node(a),
                node(b)
            ));
        }
    }
    for _ in 0..r.pick(3) {
        let (a, b) = (r.pick(n + 1), r.pick(n + 1));
        if a != b {
            add(format!(
                "{{kind: capacitor, value: {:.6e}, between: [{}, {}], role: coupling}}",
                r.log_uniform(0.1e-6, 10e-6),
                node(a),
                node(b)
            ));
        }
    }
    for _ in 0..r.pick(3) {
        let (a, b, p) = (r.pick(n + 1), r.pick(n + 1), 1 + r.pick(n));
        if a != b {
            add(format!(
                "{{kind: transconductance, value: {:.6e}, between: [{}, {}], control: [{}, gnd]}}",
                r.log_uniform(1e-4, 2e-2),
                node(a),
                node(b),
                node(p)
            ));
        }
    }
    let out = 1 + r.pick(n);
    format!(
        "tauweave: 1\ndesign: {{id: random-{seed}, title: random network, revision: A, date: 2026-11-30}}\n\
         signal: {{at: n1, resistance: {:.6e}}}\noutput: {{at: {}}}\nparts:\n{parts}",
        r.log_uniform(10.0, 10e3),
        node(out)
    )
}

#[test]
fn identities_hold_on_random_networks() {
    let mut checked = 0;
    for seed in 1..=200u64 {
        let text = random_network(seed);
        let loaded = design::load(&text);
        let Some(d) = loaded.design else { continue };
        let Ok(a) = analysis::analyze(&d) else { continue };
        check_identities(&a, &format!("random network {seed}"));
        checked += 1;
    }
    assert!(checked >= 150, "only {checked} of 200 random networks were analysable");
}
