//! The circuit's connectivity, drawn from the netlist when the design supplies no schematic.
//!
//! In: a validated [`Design`]. Out: a [`Drawing`] — wires, junction dots, part symbols with
//! their terminal points and the text beside them — and its SVG. Supplies are rails across the
//! top, ground (and any negative supply) across the bottom, the signal source at the left and
//! the output at the right; each transistor stands between its collector (drain) above and
//! its emitter (source) below; every other node is a horizontal line that the parts on it
//! touch. Wires that cross without a dot are not joined (common drafting practice). The
//! layout is [`layout`]'s; this module owns the geometry types and the SVG. No I/O.

mod layout;

use std::fmt::Write as _;

use crate::design::{Design, PartKind};

pub use layout::draw;

/// Parts up to which tauweave draws a design's connectivity itself. A drawing of more (a
/// ladder of extracted parasitics) would be a wall of symbols nobody reads, and the layout's
/// collision checks grow faster than the parts; such a design is reviewed without one unless
/// it names a drawing of its own.
pub const DRAWN_UP_TO: usize = 80;

/// Whether tauweave draws this design's connectivity (when it names no drawing).
pub fn drawn(design: &crate::design::Design) -> bool {
    design.parts.len() <= DRAWN_UP_TO
}

/// A point, in display pixels (y grows downward).
pub type Point = (f64, f64);

/// A wire: a horizontal or vertical segment of one node.
#[derive(Clone, Debug, PartialEq)]
pub struct Wire {
    /// The node it belongs to (for the layout's own collision check; the drawing shows it by
    /// geometry alone).
    pub net: String,
    /// One end.
    pub a: Point,
    /// The other end.
    pub b: Point,
}

/// What a symbol looks like.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Shape {
    /// A resistor (IEC rectangle).
    Resistor,
    /// A capacitor (two plates).
    Capacitor,
    /// An inductor (four arcs).
    Inductor,
    /// A controlled source (a diamond).
    Controlled,
    /// The signal source with its series resistance: a resistor, then a circle with a wave.
    Source,
    /// A bipolar transistor, NPN when `true`.
    Bjt(bool),
    /// A MOSFET, n-channel when `true`.
    Mosfet(bool),
}

/// A part (or the signal source) as drawn.
#[derive(Clone, Debug, PartialEq)]
pub struct Symbol {
    /// Reference designator (`RC`, `Q1`, `load.r`), or `signal` for the source.
    pub name: String,
    /// Its look.
    pub shape: Shape,
    /// Each terminal's node and where it is drawn, in the netlist's terminal order
    /// (`between`; collector, base, emitter; drain, gate, source; the source's positive first).
    pub terminals: Vec<(String, Point)>,
    /// The designator and value lines, each with where it starts.
    pub text: Vec<Text>,
}

/// A line of text.
#[derive(Clone, Debug, PartialEq)]
pub struct Text {
    /// Its left end on the baseline (or its middle, when `middle`).
    pub at: Point,
    /// What it says.
    pub text: String,
    /// Centred on `at` rather than starting there.
    pub middle: bool,
}

/// The drawing.
#[derive(Clone, Debug, PartialEq)]
pub struct Drawing {
    /// Width, display pixels.
    pub width: f64,
    /// Height, display pixels.
    pub height: f64,
    /// Every wire.
    pub wires: Vec<Wire>,
    /// Junction dots: where three or more wire ends meet or a wire ends on another.
    pub dots: Vec<Point>,
    /// Every part and the source.
    pub symbols: Vec<Symbol>,
    /// Node and rail names.
    pub labels: Vec<Text>,
    /// The output terminal, drawn as an open circle at the end of the output node's line.
    pub ports: Vec<Point>,
}

/// Character width of the drawing's text, display pixels (monospace at [`TEXT_SIZE`]).
const CHAR: f64 = 7.85;
/// Text size, display pixels.
const TEXT_SIZE: f64 = 13.0;

/// The width a line of text takes, display pixels.
fn text_width(text: &str) -> f64 {
    text.chars().count() as f64 * CHAR
}

/// A part's value as the drawing shows it (`18 kΩ`, `2.2 µF`, `gm 40 mS`), or its model's name.
fn value_text(design: &Design, kind: &PartKind) -> String {
    use crate::notation::si;
    match kind {
        PartKind::Resistor { value, .. } => si(value.nominal, "Ω", 3),
        PartKind::Capacitor { value, .. } => si(value.nominal, "F", 3),
        PartKind::Inductor { value, .. } => si(value.nominal, "H", 3),
        PartKind::Transconductance { value, control, .. } => {
            format!("{}·v({},{})", si(value.nominal, "S", 3), control[0], control[1])
        }
        PartKind::VoltageAmplifier { value, control, .. } => {
            format!("{}·v({},{})", crate::notation::plain(value.nominal, 3), control[0], control[1])
        }
        PartKind::Bjt { model, .. } | PartKind::Mosfet { model, .. } => {
            design.models[*model].name.clone()
        }
    }
}

fn escape(text: &str) -> String {
    text.replace('&', "&amp;").replace('<', "&lt;").replace('>', "&gt;").replace('"', "&quot;")
}

impl Drawing {
    /// The drawing as an SVG document: black on white, lines 1.3 px, text in `font`.
    pub fn svg(&self, font: &str) -> String {
        let mut s = String::new();
        let (w, h) = (self.width.ceil(), self.height.ceil());
        let _ = write!(
            s,
            "<svg xmlns=\"http://www.w3.org/2000/svg\" width=\"{w}\" height=\"{h}\" viewBox=\"0 0 {w} {h}\">\n\
             <rect x=\"0\" y=\"0\" width=\"{w}\" height=\"{h}\" fill=\"#FFFFFF\"/>\n\
             <g fill=\"none\" stroke=\"#141414\" stroke-width=\"1.3\" stroke-linecap=\"square\">\n"
        );
        for wire in &self.wires {
            let _ = writeln!(
                s,
                "<path d=\"M{} {}L{} {}\"/>",
                n(wire.a.0),
                n(wire.a.1),
                n(wire.b.0),
                n(wire.b.1)
            );
        }
        for symbol in &self.symbols {
            draw_symbol(&mut s, symbol);
        }
        for p in &self.ports {
            let _ = writeln!(
                s,
                "<circle cx=\"{}\" cy=\"{}\" r=\"4\" fill=\"#FFFFFF\"/>",
                n(p.0),
                n(p.1)
            );
        }
        s.push_str("</g>\n<g fill=\"#141414\" stroke=\"none\">\n");
        for d in &self.dots {
            let _ = writeln!(s, "<circle cx=\"{}\" cy=\"{}\" r=\"3\"/>", n(d.0), n(d.1));
        }
        let _ = writeln!(
            s,
            "</g>\n<g fill=\"#141414\" font-family=\"{font}, monospace\" font-size=\"{TEXT_SIZE}\">"
        );
        for t in self.labels.iter().chain(self.symbols.iter().flat_map(|s| &s.text)) {
            let anchor = if t.middle { " text-anchor=\"middle\"" } else { "" };
            let _ = writeln!(
                s,
                "<text x=\"{}\" y=\"{}\"{anchor}>{}</text>",
                n(t.at.0),
                n(t.at.1),
                escape(&t.text)
            );
        }
        s.push_str("</g>\n</svg>\n");
        s
    }
}

/// A coordinate with at most two decimals, trailing zeros dropped.
fn n(v: f64) -> String {
    let t = format!("{:.2}", v);
    let t = t.trim_end_matches('0').trim_end_matches('.');
    if t == "-0" { "0".into() } else { t.to_string() }
}

/// A closed outline through `points`.
fn polygon(s: &mut String, points: &[Point]) {
    let mut d = String::new();
    for (k, p) in points.iter().enumerate() {
        let _ = write!(d, "{}{} {}", if k == 0 { 'M' } else { 'L' }, n(p.0), n(p.1));
    }
    let _ = writeln!(s, "<path d=\"{d}Z\"/>");
}

/// Draws a symbol between its terminals.
fn draw_symbol(s: &mut String, symbol: &Symbol) {
    let line = |s: &mut String, a: Point, b: Point| {
        let _ = writeln!(s, "<path d=\"M{} {}L{} {}\"/>", n(a.0), n(a.1), n(b.0), n(b.1));
    };
    match symbol.shape {
        Shape::Bjt(_) | Shape::Mosfet(_) => return draw_transistor(s, symbol),
        _ => {}
    }
    let (a, b) = (symbol.terminals[0].1, symbol.terminals[1].1);
    // Work along the axis from a to b: u is the unit vector, v its normal.
    let len = ((b.0 - a.0).powi(2) + (b.1 - a.1).powi(2)).sqrt();
    let u = ((b.0 - a.0) / len, (b.1 - a.1) / len);
    let v = (-u.1, u.0);
    let at = |t: f64, w: f64| (a.0 + u.0 * t + v.0 * w, a.1 + u.1 * t + v.1 * w);
    let mid = len / 2.0;
    match symbol.shape {
        Shape::Resistor => {
            let (p, q, r, t) = (at(0.0, 5.0), at(len, 5.0), at(len, -5.0), at(0.0, -5.0));
            polygon(s, &[p, q, r, t]);
        }
        Shape::Capacitor => {
            line(s, at(0.0, 0.0), at(mid - 3.5, 0.0));
            line(s, at(mid + 3.5, 0.0), at(len, 0.0));
            line(s, at(mid - 3.5, -10.0), at(mid - 3.5, 10.0));
            line(s, at(mid + 3.5, -10.0), at(mid + 3.5, 10.0));
        }
        Shape::Inductor => {
            let r = len / 8.0;
            let mut d = format!("M{} {}", n(a.0), n(a.1));
            for k in 0..4 {
                let end = at(2.0 * r * (k + 1) as f64, 0.0);
                let _ = write!(d, "A{} {} 0 0 1 {} {}", n(r), n(r), n(end.0), n(end.1));
            }
            let _ = writeln!(s, "<path d=\"{d}\"/>");
        }
        Shape::Controlled => {
            let (p, q, r, t) =
                (at(mid - 12.0, 0.0), at(mid, 10.0), at(mid + 12.0, 0.0), at(mid, -10.0));
            line(s, at(0.0, 0.0), p);
            line(s, r, at(len, 0.0));
            polygon(s, &[p, q, r, t]);
            line(s, at(mid - 6.0, 0.0), at(mid + 6.0, 0.0));
        }
        Shape::Source => {
            // The series resistance from the positive terminal, then the generator.
            let (p, q, r, t) = (at(0.0, 5.0), at(24.0, 5.0), at(24.0, -5.0), at(0.0, -5.0));
            polygon(s, &[p, q, r, t]);
            line(s, at(24.0, 0.0), at(len - 28.0, 0.0));
            let c = at(len - 14.0, 0.0);
            let _ = writeln!(s, "<circle cx=\"{}\" cy=\"{}\" r=\"14\"/>", n(c.0), n(c.1));
            let w0 = (c.0 - 8.0, c.1);
            let _ = writeln!(
                s,
                "<path d=\"M{} {}C{} {} {} {} {} {}S{} {} {} {}\"/>",
                n(w0.0),
                n(w0.1),
                n(w0.0 + 3.0),
                n(w0.1 - 8.0),
                n(w0.0 + 5.0),
                n(w0.1 - 8.0),
                n(c.0),
                n(c.1),
                n(c.0 + 5.0),
                n(c.1 + 8.0),
                n(c.0 + 8.0),
                n(c.1)
            );
        }
        Shape::Bjt(_) | Shape::Mosfet(_) => {}
    }
}

/// A transistor: its terminals are collector/drain, base/gate, emitter/source, with the base
/// to the left of the other two, which share an x (the upper one first by polarity).
fn draw_transistor(s: &mut String, symbol: &Symbol) {
    let line = |s: &mut String, a: Point, b: Point| {
        let _ = writeln!(s, "<path d=\"M{} {}L{} {}\"/>", n(a.0), n(a.1), n(b.0), n(b.1));
    };
    let (c, b, e) = (symbol.terminals[0].1, symbol.terminals[1].1, symbol.terminals[2].1);
    let y = b.1;
    let x = c.0;
    let arrow = |s: &mut String, from: Point, to: Point| {
        // A filled arrowhead at `to`, pointing from `from`.
        let (dx, dy) = (to.0 - from.0, to.1 - from.1);
        let l = (dx * dx + dy * dy).sqrt();
        let (ux, uy) = (dx / l, dy / l);
        let back = (to.0 - ux * 7.0, to.1 - uy * 7.0);
        let (p, q) =
            ((back.0 - uy * 3.5, back.1 + ux * 3.5), (back.0 + uy * 3.5, back.1 - ux * 3.5));
        let _ = writeln!(
            s,
            "<path d=\"M{} {}L{} {}L{} {}Z\" fill=\"#141414\"/>",
            n(to.0),
            n(to.1),
            n(p.0),
            n(p.1),
            n(q.0),
            n(q.1)
        );
    };
    match symbol.shape {
        Shape::Bjt(npn) => {
            let bar = x - 14.0;
            line(s, b, (bar, y));
            let _ = writeln!(
                s,
                "<path d=\"M{} {}L{} {}\" stroke-width=\"3\"/>",
                n(bar),
                n(y - 11.0),
                n(bar),
                n(y + 11.0)
            );
            let sign = |p: Point| if p.1 < y { -1.0 } else { 1.0 };
            let (cs, es) = (sign(c), sign(e));
            line(s, (bar, y + cs * 5.0), (x, y + cs * 14.0));
            line(s, (x, y + cs * 14.0), c);
            line(s, (bar, y + es * 5.0), (x, y + es * 14.0));
            line(s, (x, y + es * 14.0), e);
            if npn {
                arrow(s, (bar, y + es * 5.0), (x, y + es * 14.0));
            } else {
                arrow(s, (x, y + es * 14.0), (bar + 2.0, y + es * 6.0));
            }
        }
        Shape::Mosfet(nch) => {
            let (gate, channel) = (x - 18.0, x - 12.0);
            line(s, b, (gate, y));
            line(s, (gate, y - 11.0), (gate, y + 11.0));
            let _ = writeln!(
                s,
                "<path d=\"M{} {}L{} {}\" stroke-width=\"2.5\"/>",
                n(channel),
                n(y - 13.0),
                n(channel),
                n(y + 13.0)
            );
            let sign = |p: Point| if p.1 < y { -1.0 } else { 1.0 };
            let (ds, ss) = (sign(c), sign(e));
            line(s, (channel, y + ds * 9.0), (x, y + ds * 9.0));
            line(s, (x, y + ds * 9.0), c);
            line(s, (channel, y + ss * 9.0), (x, y + ss * 9.0));
            line(s, (x, y + ss * 9.0), e);
            if nch {
                arrow(s, (channel, y + ss * 9.0), (x - 1.0, y + ss * 9.0));
            } else {
                arrow(s, (x, y + ss * 9.0), (channel + 1.0, y + ss * 9.0));
            }
        }
        _ => {}
    }
}
