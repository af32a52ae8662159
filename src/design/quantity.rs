//! Quantities as a designer writes them: a number, an SI prefix, a unit, or an IEC 60062
//! letter-and-digit code (`4k7`), and expressions over named params.
//!
//! In: the text of one YAML scalar. Out: a [`Value`] in SI units with its dimension, or a
//! [`QuantityError`] with the character offset of the fault inside the text. No I/O and no
//! knowledge of where the text sits in the design file: the reader adds that.

use std::collections::BTreeMap;
use std::fmt;

/// Exponents of the SI base units kg, m, s, A, K, each stored doubled so that half powers
/// (the √Hz of a noise density, V/√Hz) are exact: volt is kg m² s⁻³ A⁻¹, stored
/// `[2, 4, -6, -2, 0]`.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub struct Dim(pub [i8; 5]);

impl Dim {
    /// A pure number.
    pub const NONE: Dim = Dim([0, 0, 0, 0, 0]);
    /// Metre.
    pub const METRE: Dim = Dim([0, 2, 0, 0, 0]);
    /// Second.
    pub const SECOND: Dim = Dim([0, 0, 2, 0, 0]);
    /// Ampere.
    pub const AMPERE: Dim = Dim([0, 0, 0, 2, 0]);
    /// Kelvin.
    pub const KELVIN: Dim = Dim([0, 0, 0, 0, 2]);
    /// Hertz (1/s).
    pub const HERTZ: Dim = Dim([0, 0, -2, 0, 0]);
    /// Volt (kg m² s⁻³ A⁻¹).
    pub const VOLT: Dim = Dim([2, 4, -6, -2, 0]);
    /// Ohm (kg m² s⁻³ A⁻²).
    pub const OHM: Dim = Dim([2, 4, -6, -4, 0]);
    /// Siemens (1/Ω).
    pub const SIEMENS: Dim = Dim([-2, -4, 6, 4, 0]);
    /// Farad (kg⁻¹ m⁻² s⁴ A²).
    pub const FARAD: Dim = Dim([-2, -4, 8, 4, 0]);
    /// Henry (kg m² s⁻² A⁻²).
    pub const HENRY: Dim = Dim([2, 4, -4, -4, 0]);
    /// Watt (kg m² s⁻³).
    pub const WATT: Dim = Dim([2, 4, -6, 0, 0]);
    /// Volt per root hertz, a noise density (kg m² s^−5/2 A⁻¹).
    pub const VOLT_PER_ROOT_HERTZ: Dim = Dim([2, 4, -5, -2, 0]);

    /// The product dimension.
    pub fn times(self, other: Dim) -> Dim {
        let mut out = self.0;
        for (o, b) in out.iter_mut().zip(other.0) {
            *o += b;
        }
        Dim(out)
    }

    /// The quotient dimension.
    pub fn per(self, other: Dim) -> Dim {
        self.times(other.powi(-1))
    }

    /// The dimension raised to an integer power.
    pub fn powi(self, n: i8) -> Dim {
        Dim(self.0.map(|e| e * n))
    }

    /// The square root of the dimension (Hz → √Hz); None where a quarter power would
    /// result.
    pub fn sqrt(self) -> Option<Dim> {
        self.0.iter().all(|e| e % 2 == 0).then(|| Dim(self.0.map(|e| e / 2)))
    }

    /// The conventional symbol of this dimension, for messages ("F", "A/V²", "F/m").
    pub fn symbol(self) -> String {
        for (dim, name) in NAMED_DIMS {
            if *dim == self {
                return (*name).to_string();
            }
        }
        // Fall back to base units, e.g. "kg·m²·s⁻³".
        let names = ["kg", "m", "s", "A", "K"];
        let parts: Vec<String> = self
            .0
            .iter()
            .zip(names)
            .filter(|(e, _)| **e != 0)
            .map(|(e, n)| match (e % 2 == 0, e / 2) {
                (true, 1) => n.to_string(),
                (true, whole) => format!("{n}^{whole}"),
                (false, _) => format!("{n}^({e}/2)"),
            })
            .collect();
        if parts.is_empty() { "1".to_string() } else { parts.join("·") }
    }
}

/// Dimensions with a familiar name, used when a message says what was written or needed.
const NAMED_DIMS: &[(Dim, &str)] = &[
    (Dim::NONE, "a pure number"),
    (Dim::OHM, "Ω"),
    (Dim::FARAD, "F"),
    (Dim::HENRY, "H"),
    (Dim::VOLT, "V"),
    (Dim::AMPERE, "A"),
    (Dim::HERTZ, "Hz"),
    (Dim::SECOND, "s"),
    (Dim::WATT, "W"),
    (Dim::SIEMENS, "S"),
    (Dim::KELVIN, "K"),
    (Dim::METRE, "m"),
    (Dim([-2, -6, 8, 4, 0]), "F/m"),
    (Dim([-2, -8, 8, 4, 0]), "F/m²"),
    (Dim([-4, -8, 12, 6, 0]), "A/V²"),
    (Dim([-2, -4, 6, 2, 0]), "1/V"),
    (Dim::VOLT_PER_ROOT_HERTZ, "V/√Hz"),
    (Dim([0, 0, -1, 0, 0]), "√Hz"),
];

/// How a value was marked beyond its dimension.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Mark {
    /// An ordinary value.
    Plain,
    /// Written with `%`; `si` holds the fraction (5 % → 0.05).
    Percent,
    /// Written in `dB`; `si` holds the decibel figure itself (20 dB → 20).
    Decibel,
    /// Written in °C; `si` already holds kelvin.
    Celsius,
}

/// A parsed quantity or evaluated expression, in SI units.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Value {
    /// The magnitude in SI units (see [`Mark`] for % and dB).
    pub si: f64,
    /// The dimension, or `None` when no unit was written (the place supplies it).
    pub dim: Option<Dim>,
    /// Percent, decibel or Celsius marks.
    pub mark: Mark,
}

impl Value {
    fn plain(si: f64, dim: Option<Dim>) -> Value {
        Value { si, dim, mark: Mark::Plain }
    }
}

/// Why a quantity did not read, and where inside its text (a character offset).
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct QuantityError {
    /// Character offset of the fault within the text.
    pub offset: usize,
    /// Length in characters of the faulty piece (at least 1).
    pub len: usize,
    /// What is wrong.
    pub message: String,
    /// How to fix it.
    pub help: Option<String>,
    /// True when the fault is a name that is not a param (for the `unknown_param` code).
    pub unknown_name: bool,
}

impl fmt::Display for QuantityError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.message)
    }
}

/// SI prefixes tauweave accepts, with their powers of ten.
pub const PREFIXES: &[(char, i32)] = &[
    ('f', -15),
    ('p', -12),
    ('n', -9),
    ('u', -6),
    ('µ', -6),
    ('μ', -6),
    ('m', -3),
    ('k', 3),
    ('M', 6),
    ('G', 9),
    ('T', 12),
];

/// Unit symbols tauweave accepts, with their dimension.
const UNITS: &[(&str, Dim)] = &[
    ("Ω", Dim::OHM),
    ("ohm", Dim::OHM),
    ("F", Dim::FARAD),
    ("H", Dim::HENRY),
    ("V", Dim::VOLT),
    ("A", Dim::AMPERE),
    ("Hz", Dim::HERTZ),
    ("s", Dim::SECOND),
    ("W", Dim::WATT),
    ("S", Dim::SIEMENS),
    ("K", Dim::KELVIN),
    ("m", Dim::METRE),
    // The root of a hertz, for noise densities (`nV/√Hz`; `rtHz` where `√` is hard to type).
    ("√Hz", Dim([0, 0, -1, 0, 0])),
    ("rtHz", Dim([0, 0, -1, 0, 0])),
];

fn prefix_power(c: char) -> Option<i32> {
    PREFIXES.iter().find(|(p, _)| *p == c).map(|(_, e)| *e)
}

fn unit_dim(symbol: &str) -> Option<Dim> {
    UNITS.iter().find(|(s, _)| *s == symbol).map(|(_, d)| *d)
}

/// True when `name` would read as a unit, a prefixed unit or a prefix, so it cannot name a
/// param.
pub fn reads_as_unit(name: &str) -> bool {
    let lone_prefix = name.chars().count() == 1 && name.chars().all(|c| prefix_power(c).is_some());
    lone_prefix
        || resolve_symbol(name).is_some()
        || is_code_like(name)
        || matches!(name, "dB" | "degC")
}

fn is_code_like(name: &str) -> bool {
    let mut chars = name.chars();
    matches!(chars.next(), Some(c) if c == 'R' || prefix_power(c).is_some())
        && chars.clone().next().is_some()
        && chars.all(|c| c.is_ascii_digit())
}

/// A symbol such as `kΩ`, `pF`, `ms`, `m`: its scale and dimension.
fn resolve_symbol(token: &str) -> Option<(f64, Dim)> {
    if let Some(dim) = unit_dim(token) {
        return Some((1.0, dim));
    }
    let mut chars = token.chars();
    let first = chars.next()?;
    let rest = chars.as_str();
    let power = prefix_power(first)?;
    let dim = unit_dim(rest)?;
    Some((10f64.powi(power), dim))
}

/// The longest quantity or expression read, in characters: a hand-written expression is a
/// line, and the bound keeps a hostile file from costing time or stack.
pub const MAX_EXPRESSION_CHARS: usize = 1000;

/// The deepest nesting of parentheses and signs an expression may have.
pub const MAX_EXPRESSION_DEPTH: usize = 50;

/// Evaluates a quantity or an expression. `params` holds the params evaluated so far;
/// `lookup_failed` names are reported as unknown params.
pub fn evaluate(text: &str, params: &BTreeMap<String, Value>) -> Result<Value, QuantityError> {
    let chars: Vec<char> = text.chars().collect();
    if chars.len() > MAX_EXPRESSION_CHARS {
        return Err(err(
            MAX_EXPRESSION_CHARS,
            chars.len() - MAX_EXPRESSION_CHARS,
            format!("longer than {MAX_EXPRESSION_CHARS} characters"),
            Some("split it into named params".into()),
        ));
    }
    let mut parser = Parser { chars: &chars, pos: 0, params, names: None, depth: 0 };
    parser.expression_root()
}

/// The param names an expression mentions, in order of appearance (for dependency order).
pub fn referenced_names(text: &str) -> Vec<(String, usize)> {
    let chars: Vec<char> = text.chars().collect();
    let empty = BTreeMap::new();
    let mut names = Vec::new();
    if chars.len() <= MAX_EXPRESSION_CHARS {
        let mut parser =
            Parser { chars: &chars, pos: 0, params: &empty, names: Some(&mut names), depth: 0 };
        let _ = parser.expression_root();
    } else {
        // Too long to parse: every word counts as a use, so the params it names are not
        // reported unused beside the length error.
        let mut k = 0;
        while k < chars.len() {
            if chars[k].is_alphabetic() || chars[k] == '_' {
                let start = k;
                while k < chars.len() && (chars[k].is_alphanumeric() || chars[k] == '_') {
                    k += 1;
                }
                names.push((chars[start..k].iter().collect(), start));
            } else {
                k += 1;
            }
        }
    }
    names
}

struct Parser<'a> {
    chars: &'a [char],
    pos: usize,
    params: &'a BTreeMap<String, Value>,
    /// When set, names are collected instead of looked up (every name reads as 1).
    names: Option<&'a mut Vec<(String, usize)>>,
    /// How many parentheses and signs enclose the current position.
    depth: usize,
}

fn err(
    offset: usize,
    len: usize,
    message: impl Into<String>,
    help: Option<String>,
) -> QuantityError {
    QuantityError { offset, len: len.max(1), message: message.into(), help, unknown_name: false }
}

impl Parser<'_> {
    fn peek(&self) -> Option<char> {
        self.chars.get(self.pos).copied()
    }

    fn skip_spaces(&mut self) {
        while matches!(self.peek(), Some(c) if c.is_whitespace()) {
            self.pos += 1;
        }
    }

    fn expression_root(&mut self) -> Result<Value, QuantityError> {
        self.skip_spaces();
        if self.peek().is_none() {
            return Err(err(
                0,
                1,
                "empty value",
                Some("write a number, e.g. `47k` or `10 pF`".into()),
            ));
        }
        let value = self.sum()?;
        self.skip_spaces();
        if let Some(c) = self.peek() {
            let rest: String = self.chars[self.pos..].iter().collect();
            return Err(err(
                self.pos,
                rest.chars().count(),
                format!("unexpected `{rest}` after the value"),
                Some(if c.is_alphabetic() {
                    "a unit goes right after the number (`10 pF`); join terms with + - * /".into()
                } else {
                    "join terms with + - * / and balance the parentheses".into()
                }),
            ));
        }
        if !value.si.is_finite() {
            return Err(err(0, self.chars.len(), "the value is not a finite number", None));
        }
        Ok(value)
    }

    fn sum(&mut self) -> Result<Value, QuantityError> {
        let mut left = self.product()?;
        loop {
            self.skip_spaces();
            let op = match self.peek() {
                Some(c @ ('+' | '-')) => c,
                _ => return Ok(left),
            };
            let at = self.pos;
            self.pos += 1;
            let right = self.product()?;
            left = combine_add(left, right, op == '-', at)?;
        }
    }

    fn product(&mut self) -> Result<Value, QuantityError> {
        let mut left = self.parallel()?;
        loop {
            self.skip_spaces();
            let op = match self.peek() {
                Some(c @ ('*' | '/' | '·' | '×')) => c,
                _ => return Ok(left),
            };
            let at = self.pos;
            self.pos += 1;
            let right = self.parallel()?;
            reject_marks(&left, at)?;
            reject_marks(&right, at)?;
            let dim = match (left.dim, right.dim) {
                (None, None) => None,
                (a, b) => {
                    let a = a.unwrap_or(Dim::NONE);
                    let b = b.unwrap_or(Dim::NONE);
                    Some(if op == '/' { a.per(b) } else { a.times(b) })
                }
            };
            if op == '/' && right.si == 0.0 {
                return Err(err(
                    at,
                    1,
                    "division by zero",
                    Some("what follows `/` evaluates to zero; check the params it uses".into()),
                ));
            }
            let si = if op == '/' { left.si / right.si } else { left.si * right.si };
            left = Value::plain(si, dim);
        }
    }

    /// Impedances in parallel, `a ∥ b` (or `a || b`): ab/(a + b), binding tighter than `*`
    /// and `/`, both sides in the same unit.
    fn parallel(&mut self) -> Result<Value, QuantityError> {
        let mut left = self.unary()?;
        loop {
            self.skip_spaces();
            let at = self.pos;
            match (self.peek(), self.chars.get(self.pos + 1)) {
                (Some('∥'), _) => self.pos += 1,
                (Some('|'), Some('|')) => self.pos += 2,
                _ => return Ok(left),
            }
            let right = self.unary()?;
            left = parallel_of(&[(left, at), (right, at)])?;
        }
    }

    /// `name(a, b, …)`: the arguments of a function, after its name.
    fn arguments(&mut self) -> Result<Vec<(Value, usize)>, QuantityError> {
        let open = self.pos;
        self.pos += 1;
        let mut args = Vec::new();
        loop {
            self.skip_spaces();
            let at = self.pos;
            args.push((self.sum()?, at));
            self.skip_spaces();
            match self.peek() {
                Some(',') => self.pos += 1,
                Some(')') => {
                    self.pos += 1;
                    return Ok(args);
                }
                _ => return Err(err(open, 1, "this parenthesis is never closed", None)),
            }
        }
    }

    /// One level deeper, or an error at `self.pos` when that passes the bound.
    fn descend(&mut self) -> Result<(), QuantityError> {
        self.depth += 1;
        if self.depth > MAX_EXPRESSION_DEPTH {
            return Err(err(
                self.pos,
                1,
                format!("nested more than {MAX_EXPRESSION_DEPTH} deep"),
                Some("split it into named params".into()),
            ));
        }
        Ok(())
    }

    fn unary(&mut self) -> Result<Value, QuantityError> {
        self.skip_spaces();
        self.descend()?;
        let v = self.signed();
        self.depth -= 1;
        v
    }

    fn signed(&mut self) -> Result<Value, QuantityError> {
        match self.peek() {
            Some('-' | '−') => {
                self.pos += 1;
                let v = self.unary()?;
                // −40 °C is (−40) °C: the kelvin offset stays where it is.
                let si = if v.mark == Mark::Celsius { 2.0 * 273.15 - v.si } else { -v.si };
                Ok(Value { si, ..v })
            }
            Some('+') => {
                self.pos += 1;
                self.unary()
            }
            _ => self.atom(),
        }
    }

    fn atom(&mut self) -> Result<Value, QuantityError> {
        self.skip_spaces();
        let start = self.pos;
        match self.peek() {
            Some('(') => {
                self.pos += 1;
                let v = self.sum()?;
                self.skip_spaces();
                if self.peek() != Some(')') {
                    return Err(err(start, 1, "this parenthesis is never closed", None));
                }
                self.pos += 1;
                Ok(v)
            }
            Some(c) if c.is_ascii_digit() || c == '.' => self.number(),
            Some(c) if c.is_alphabetic() || c == '_' => {
                let mut word = self.take_while(|c| c.is_alphanumeric() || c == '_');
                let dotted = self.peek() == Some('.')
                    && matches!(self.chars.get(self.pos + 1), Some(c) if c.is_alphabetic() || *c == '_');
                // `M1.gm` is a device's value, not the IEC code M1 (0.1 M).
                if !dotted {
                    if let Some(v) = self.code_number(&word, start) {
                        return Ok(v);
                    }
                }
                // A dotted name (`Q1.gm`, `high.f3db_hz`): one name, never a param's.
                while self.peek() == Some('.')
                    && matches!(self.chars.get(self.pos + 1), Some(c) if c.is_alphanumeric() || *c == '_')
                {
                    self.pos += 1;
                    word.push('.');
                    word.push_str(&self.take_while(|c| c.is_alphanumeric() || c == '_'));
                }
                if self.peek() == Some('(') && FUNCTIONS.contains(&word.as_str()) {
                    self.descend()?;
                    let args = self.arguments();
                    self.depth -= 1;
                    return apply_function(&word, args?, start);
                }
                if !self.params.contains_key(&word) && self.names.is_none() {
                    if let Some(v) = constant(&word) {
                        return Ok(v);
                    }
                }
                if self.names.is_some() && constant(&word).is_some() {
                    return Ok(Value::plain(1.0, None));
                }
                self.name(word, start)
            }
            Some(c) => Err(err(start, 1, format!("unexpected `{c}`"), None)),
            None => Err(err(start, 1, "a value is missing at the end", None)),
        }
    }

    fn take_while(&mut self, keep: impl Fn(char) -> bool) -> String {
        let start = self.pos;
        while matches!(self.peek(), Some(c) if keep(c)) {
            self.pos += 1;
        }
        self.chars[start..self.pos].iter().collect()
    }

    /// A word such as `R47` or `n47`: the IEC 60062 code with the letter in front.
    fn code_number(&mut self, word: &str, start: usize) -> Option<Value> {
        if !is_code_like(word) {
            return None;
        }
        let mut chars = word.chars();
        let letter = chars.next()?;
        let digits: String = chars.collect();
        let scale = code_scale(letter)?;
        let frac: f64 = format!("0.{digits}").parse().ok()?;
        let unit = self.unit_after_number(true).ok()?;
        apply_unit(frac * scale, unit, start).ok()
    }

    fn name(&mut self, word: String, start: usize) -> Result<Value, QuantityError> {
        let lower = word.to_ascii_lowercase();
        if matches!(lower.as_str(), "nan" | "inf" | "infinity") {
            return Err(err(
                start,
                word.chars().count(),
                format!("`{word}` is not a finite number"),
                Some("give a finite value with its unit".into()),
            ));
        }
        if let Some(names) = self.names.as_deref_mut() {
            names.push((word, start));
            return Ok(Value::plain(1.0, None));
        }
        match self.params.get(&word) {
            Some(v) => Ok(*v),
            None => {
                let known: Vec<&str> = self.params.keys().map(String::as_str).collect();
                let help = match crate::design::suggest::nearest(&word, &known) {
                    Some(best) => Some(format!("did you mean `{best}`?")),
                    None if known.is_empty() => {
                        Some("no params are defined; add it under `params:`".into())
                    }
                    None => Some(format!("known params: {}", known.join(", "))),
                };
                let mut e =
                    err(start, word.chars().count(), format!("unknown param `{word}`"), help);
                e.unknown_name = true;
                Err(e)
            }
        }
    }

    /// A number with an optional prefix and unit, or an IEC 60062 code such as `4k7`.
    fn number(&mut self) -> Result<Value, QuantityError> {
        let start = self.pos;
        let mut text = self.take_while(|c| c.is_ascii_digit() || c == '.');
        if text.matches('.').count() > 1 {
            return Err(err(start, text.len(), format!("`{text}` has two decimal points"), None));
        }
        // IEC 60062 code: a letter standing in the decimal point, followed by digits.
        if let Some(letter) = self.peek() {
            let next = self.chars.get(self.pos + 1).copied();
            if !text.contains('.')
                && matches!(next, Some(d) if d.is_ascii_digit())
                && code_scale(letter).is_some()
            {
                self.pos += 1;
                let digits = self.take_while(|c| c.is_ascii_digit());
                let value: f64 = format!("{text}.{digits}").parse().map_err(|_| {
                    err(start, self.pos - start, "this code does not read as a number", None)
                })?;
                let scale = code_scale(letter).unwrap_or(1.0);
                let unit = self.unit_after_number(true)?;
                return apply_unit(value * scale, unit, start);
            }
        }
        // Exponent: e or E, optional sign, digits.
        if matches!(self.peek(), Some('e' | 'E')) {
            let mut look = self.pos + 1;
            if matches!(self.chars.get(look), Some('+' | '-')) {
                look += 1;
            }
            if matches!(self.chars.get(look), Some(c) if c.is_ascii_digit()) {
                let exp_start = self.pos;
                self.pos = look;
                let digits = self.take_while(|c| c.is_ascii_digit());
                let sign: String = self.chars[exp_start..look].iter().collect();
                text = format!("{text}{sign}{digits}");
            }
        }
        let value: f64 = text
            .parse()
            .map_err(|_| err(start, self.pos - start, format!("`{text}` is not a number"), None))?;
        let unit = self.unit_after_number(false)?;
        apply_unit(value, unit, start)
    }

    /// Reads what follows a number: nothing, a bare prefix (`47k`), a unit (`pF`, `µA/V²`),
    /// `%`, `dB` or `°C`.
    fn unit_after_number(&mut self, after_code: bool) -> Result<UnitSuffix, QuantityError> {
        let attached = !matches!(self.peek(), Some(c) if c.is_whitespace());
        let save = self.pos;
        self.skip_spaces();
        let start = self.pos;
        let per = |c: Option<&char>| matches!(c, Some(c) if is_symbol_char(*c));
        if !attached
            && self.peek() == Some('1')
            && self.chars.get(self.pos + 1) == Some(&'/')
            && per(self.chars.get(self.pos + 2))
        {
            // `0.04 1/V`
            self.pos += 1;
            let (scale, dim) = self.unit_expression()?;
            return Ok(UnitSuffix::Unit(scale, dim));
        }
        match self.peek() {
            Some('%') => {
                self.pos += 1;
                return Ok(UnitSuffix::Percent);
            }
            Some('°') => {
                self.pos += 1;
                if self.peek() == Some('C') {
                    self.pos += 1;
                    return Ok(UnitSuffix::Celsius);
                }
                return Err(err(
                    start,
                    1,
                    "`°` must be followed by `C`",
                    Some("write `27 °C`".into()),
                ));
            }
            Some('/') => {
                // `0.04 /V`: a unit only when a unit symbol follows at once.
                let next = self.chars.get(self.pos + 1).copied();
                if matches!(next, Some(c) if is_symbol_char(c)) {
                    let after = self.pos + 1;
                    let word: String =
                        self.chars[after..].iter().take_while(|c| is_symbol_char(**c)).collect();
                    if resolve_symbol(&word).is_some() {
                        let (scale, dim) = self.unit_expression()?;
                        return Ok(UnitSuffix::Unit(scale, dim));
                    }
                }
                self.pos = save;
                return Ok(UnitSuffix::None);
            }
            Some(c) if is_symbol_char(c) => {}
            _ => {
                self.pos = save;
                return Ok(UnitSuffix::None);
            }
        }
        let word: String =
            self.chars[self.pos..].iter().take_while(|c| is_symbol_char(**c)).collect();
        let word_len = word.chars().count();
        // A param name after a number (`2 r_bias`) is not a unit: leave it for the caller.
        let after_word = self.chars.get(self.pos + word_len).copied();
        if matches!(after_word, Some(c) if c.is_ascii_digit() || c == '_') && !after_code {
            return Err(err(
                start,
                word_len + 1,
                format!("`{word}` after a number is not a unit"),
                Some("put an operator between a number and a param: `2 * r_bias`".into()),
            ));
        }
        if word == "dB" {
            self.pos += word_len;
            return Ok(UnitSuffix::Decibel);
        }
        if word == "degC" {
            self.pos += word_len;
            return Ok(UnitSuffix::Celsius);
        }
        let mut chars = word.chars();
        let first = chars.next().unwrap_or(' ');
        let lone_prefix = word_len == 1 && prefix_power(first).is_some();
        // `10m` is 10 milli; `10 m` is ten metres (the SI never lets a prefix stand alone).
        let prefix_only = lone_prefix
            && (attached || first != 'm')
            && !matches!(self.chars.get(self.pos + 1), Some('/' | '^' | '²' | '³'));
        if prefix_only {
            self.pos += 1;
            return Ok(UnitSuffix::PrefixOnly(10f64.powi(prefix_power(first).unwrap_or(0))));
        }
        if resolve_symbol(&word).is_none() && !self.params.contains_key(&word) {
            return Err(unknown_unit(&word, start));
        }
        if resolve_symbol(&word).is_none() {
            // A param name following a number with a space: an operator is missing.
            return Err(err(
                start,
                word_len,
                format!("`{word}` right after a number"),
                Some(format!("write `* {word}` to multiply")),
            ));
        }
        let (scale, dim) = self.unit_expression()?;
        Ok(UnitSuffix::Unit(scale, dim))
    }

    /// `pF/m`, `µA/V²`, `fF/µm^2`, `V/V`, `/V`: symbols joined by `/` or `·` with powers.
    fn unit_expression(&mut self) -> Result<(f64, Dim), QuantityError> {
        let (mut scale, mut dim) = (1.0, Dim::NONE);
        let mut divide = false;
        if self.peek() == Some('/') {
            divide = true;
            self.pos += 1;
        }
        loop {
            let sym_start = self.pos;
            let word = self.take_while(is_symbol_char);
            let Some((s, d)) = resolve_symbol(&word) else {
                return Err(unknown_unit(&word, sym_start));
            };
            let power = self.power()?;
            let (s, d) = (s.powi(power as i32), d.powi(power));
            if divide {
                scale /= s;
                dim = dim.per(d);
            } else {
                scale *= s;
                dim = dim.times(d);
            }
            match self.peek() {
                Some('/') if matches!(self.chars.get(self.pos + 1), Some(c) if is_symbol_char(*c)) =>
                {
                    divide = true;
                    self.pos += 1;
                }
                Some('·') if matches!(self.chars.get(self.pos + 1), Some(c) if is_symbol_char(*c)) =>
                {
                    divide = false;
                    self.pos += 1;
                }
                _ => break,
            }
        }
        Ok((scale, dim))
    }

    fn power(&mut self) -> Result<i8, QuantityError> {
        match self.peek() {
            Some('²') => {
                self.pos += 1;
                Ok(2)
            }
            Some('³') => {
                self.pos += 1;
                Ok(3)
            }
            Some('^') => {
                let at = self.pos;
                self.pos += 1;
                let neg = if self.peek() == Some('-') {
                    self.pos += 1;
                    true
                } else {
                    false
                };
                let digits = self.take_while(|c| c.is_ascii_digit());
                let n: i8 = digits
                    .parse()
                    .map_err(|_| err(at, 1, "`^` needs a whole power, e.g. `V^2`", None))?;
                Ok(if neg { -n } else { n })
            }
            _ => Ok(1),
        }
    }
}

fn is_symbol_char(c: char) -> bool {
    c.is_alphabetic() || c == 'Ω' || c == 'µ' || c == 'μ' || c == '√'
}

fn code_scale(letter: char) -> Option<f64> {
    match letter {
        'R' | 'r' => Some(1.0),
        'K' => Some(1e3),
        'u' | 'µ' | 'μ' => Some(1e-6),
        c => prefix_power(c).map(|e| 10f64.powi(e)),
    }
}

fn unknown_unit(word: &str, at: usize) -> QuantityError {
    let lower = word.to_lowercase();
    let help = if lower.contains("farad") {
        "write `F` for farad, with a prefix: `10 pF`".to_string()
    } else if lower.contains("henr") {
        "write `H` for henry, with a prefix: `10 nH`".to_string()
    } else if lower.contains("volt") {
        "write `V` for volt".to_string()
    } else if lower.contains("amp") {
        "write `A` for ampere".to_string()
    } else if lower.contains("hz") || lower.contains("hertz") {
        "write `Hz` with an SI prefix: `kHz`, `MHz`, `GHz`".to_string()
    } else if word.chars().count() >= 2 && word.chars().all(|c| prefix_power(c).is_some()) {
        "use one prefix only: `4.7k`, `4.7 kΩ`".to_string()
    } else {
        "units: Ω ohm F H V A Hz √Hz s W S K °C m % dB, after a prefix f p n u µ m k M G T"
            .to_string()
    };
    QuantityError {
        offset: at,
        len: word.chars().count().max(1),
        message: format!("`{word}` is not a unit"),
        help: Some(help),
        unknown_name: false,
    }
}

enum UnitSuffix {
    None,
    PrefixOnly(f64),
    Unit(f64, Dim),
    Percent,
    Decibel,
    Celsius,
}

fn apply_unit(value: f64, unit: UnitSuffix, at: usize) -> Result<Value, QuantityError> {
    let v = match unit {
        UnitSuffix::None => Value::plain(value, None),
        UnitSuffix::PrefixOnly(scale) => Value::plain(value * scale, None),
        UnitSuffix::Unit(scale, dim) => Value::plain(value * scale, Some(dim)),
        UnitSuffix::Percent => {
            Value { si: value / 100.0, dim: Some(Dim::NONE), mark: Mark::Percent }
        }
        UnitSuffix::Decibel => Value { si: value, dim: Some(Dim::NONE), mark: Mark::Decibel },
        UnitSuffix::Celsius => {
            Value { si: value + 273.15, dim: Some(Dim::KELVIN), mark: Mark::Celsius }
        }
    };
    if !v.si.is_finite() {
        return Err(err(at, 1, "the value is not a finite number", None));
    }
    Ok(v)
}

/// The functions an expression may call: `sqrt`, `log10`, `ln`, `abs`, `db` (20·log10 of a
/// ratio's magnitude), `min`, `max` and `par` (impedances in parallel, as `∥`).
pub const FUNCTIONS: &[&str] = &["sqrt", "log10", "ln", "abs", "db", "min", "max", "par"];

/// A named constant: `pi` or `π`.
fn constant(word: &str) -> Option<Value> {
    matches!(word, "pi" | "π").then(|| Value {
        si: std::f64::consts::PI,
        dim: Some(Dim::NONE),
        mark: Mark::Plain,
    })
}

/// Values in parallel: 1/Σ(1/x), all in one unit.
fn parallel_of(args: &[(Value, usize)]) -> Result<Value, QuantityError> {
    let mut dim: Option<Dim> = None;
    let mut sum = 0.0;
    for (v, at) in args {
        reject_marks(v, *at)?;
        match (dim, v.dim) {
            (Some(a), Some(b)) if a != b => {
                return Err(err(
                    *at,
                    1,
                    format!("cannot put {} in parallel with {}", b.symbol(), a.symbol()),
                    Some("values in parallel need the same unit (Ω with Ω)".into()),
                ));
            }
            (None, Some(b)) => dim = Some(b),
            _ => {}
        }
        if v.si == 0.0 {
            return Ok(Value::plain(0.0, dim.or(v.dim)));
        }
        sum += 1.0 / v.si;
    }
    if sum == 0.0 {
        return Err(err(args[0].1, 1, "these values in parallel cancel to an infinite one", None));
    }
    Ok(Value::plain(1.0 / sum, dim))
}

/// Applies a function of [`FUNCTIONS`] to its arguments (`at`: where its name starts).
fn apply_function(
    name: &str,
    args: Vec<(Value, usize)>,
    at: usize,
) -> Result<Value, QuantityError> {
    let len = name.chars().count();
    let one = |args: &[(Value, usize)]| -> Result<(Value, usize), QuantityError> {
        match args {
            [a] => Ok(*a),
            _ => Err(err(at, len, format!("`{name}` takes one value, not {}", args.len()), None)),
        }
    };
    let unitless = |(v, p): (Value, usize)| -> Result<f64, QuantityError> {
        reject_marks(&v, p)?;
        match v.dim {
            Some(d) if d != Dim::NONE => Err(err(
                p,
                1,
                format!("`{name}` takes a pure number, and this is in {}", d.symbol()),
                Some("divide by a value in the same unit to make a ratio".into()),
            )),
            _ => Ok(v.si),
        }
    };
    let positive = |x: f64, p: usize| -> Result<f64, QuantityError> {
        if x > 0.0 {
            Ok(x)
        } else {
            Err(err(p, 1, format!("`{name}` of a value that is not positive ({x})"), None))
        }
    };
    match name {
        "sqrt" => {
            let (v, p) = one(&args)?;
            reject_marks(&v, p)?;
            if v.si < 0.0 {
                return Err(err(p, 1, "the square root of a negative value", None));
            }
            let dim = match v.dim {
                Some(d) => Some(d.sqrt().ok_or_else(|| {
                    err(p, 1, format!("{} has no square root among the units", d.symbol()), None)
                })?),
                None => None,
            };
            Ok(Value::plain(v.si.sqrt(), dim))
        }
        "log10" | "ln" => {
            let a = one(&args)?;
            let x = positive(unitless(a)?, a.1)?;
            Ok(Value::plain(if name == "ln" { x.ln() } else { x.log10() }, Some(Dim::NONE)))
        }
        "db" => {
            let a = one(&args)?;
            let x = unitless(a)?.abs();
            let x = positive(x, a.1)?;
            Ok(Value { si: 20.0 * x.log10(), dim: Some(Dim::NONE), mark: Mark::Decibel })
        }
        "abs" => {
            let (v, p) = one(&args)?;
            reject_marks(&v, p)?;
            Ok(Value { si: v.si.abs(), ..v })
        }
        "par" => parallel_of(&args),
        _ => {
            // min and max: every argument in one unit.
            let mut best = args[0];
            for a in &args[1..] {
                combine_add(best.0, a.0, false, a.1)?;
                let better = if name == "min" { a.0.si < best.0.si } else { a.0.si > best.0.si };
                if better {
                    best = *a;
                }
            }
            Ok(best.0)
        }
    }
}

fn reject_marks(v: &Value, at: usize) -> Result<(), QuantityError> {
    match v.mark {
        Mark::Plain | Mark::Percent => Ok(()),
        Mark::Decibel => {
            Err(err(at, 1, "decibels do not multiply", Some("convert to V/V first".into())))
        }
        Mark::Celsius => Err(err(
            at,
            1,
            "°C is an offset scale and does not take arithmetic",
            Some("write the temperature in K to compute with it".into()),
        )),
    }
}

fn combine_add(a: Value, b: Value, subtract: bool, at: usize) -> Result<Value, QuantityError> {
    reject_marks(&a, at)?;
    reject_marks(&b, at)?;
    let dim = match (a.dim, b.dim) {
        (Some(x), Some(y)) if x != y => {
            return Err(err(
                at,
                1,
                format!("cannot add {} to {}", y.symbol(), x.symbol()),
                Some("both sides of + or - need the same unit".into()),
            ));
        }
        (Some(x), _) | (_, Some(x)) => Some(x),
        (None, None) => None,
    };
    let si = if subtract { a.si - b.si } else { a.si + b.si };
    Ok(Value::plain(si, dim))
}

#[cfg(test)]
mod tests {
    use super::*;

    fn q(text: &str) -> Value {
        evaluate(text, &BTreeMap::new()).unwrap_or_else(|e| panic!("{text}: {e}"))
    }

    fn close(a: f64, b: f64) -> bool {
        (a - b).abs() <= 1e-12 * a.abs().max(b.abs())
    }

    #[test]
    fn prefixes_follow_the_si_rule() {
        // SI prefixes as the BIPM SI Brochure (9th ed., table 7) defines them; M mega, m milli.
        for (text, si) in [
            ("1f", 1e-15),
            ("1p", 1e-12),
            ("1n", 1e-9),
            ("1u", 1e-6),
            ("1µ", 1e-6),
            ("1m", 1e-3),
            ("1k", 1e3),
            ("1M", 1e6),
            ("1G", 1e9),
            ("1T", 1e12),
        ] {
            assert!(close(q(text).si, si), "{text}");
            assert_eq!(q(text).dim, None);
        }
    }

    #[test]
    fn one_value_many_spellings() {
        for text in ["47k", "47 kΩ", "47e3", "47000 ohm", "47 kohm", "4.7e4 Ω", "47kΩ", "47k0"] {
            assert!(close(q(text).si, 47e3), "{text}");
        }
        assert_eq!(q("47 kΩ").dim, Some(Dim::OHM));
        assert_eq!(q("47k").dim, None);
    }

    #[test]
    fn iec_60062_letter_and_digit_code() {
        // IEC 60062:2016, clause 4 (letter-and-digit code: the letter marks the decimal point
        // and the multiplier; R for unity).
        for (text, si) in [
            ("4k7", 4.7e3),
            ("2R2", 2.2),
            ("R47", 0.47),
            ("4n7", 4.7e-9),
            ("1M5", 1.5e6),
            ("4K7", 4.7e3),
            ("6p8", 6.8e-12),
            ("n47", 0.47e-9),
            ("2u2", 2.2e-6),
            ("4k7 Ω", 4.7e3),
        ] {
            assert!(close(q(text).si, si), "{text}: {}", q(text).si);
        }
        assert_eq!(q("4k7 Ω").dim, Some(Dim::OHM));
    }

    /// A noise density is volts per root hertz (common practice on data sheets): the half
    /// power must be exact, and read the same in both spellings.
    #[test]
    fn noise_densities_have_a_root_hertz() {
        let density = Dim::VOLT.per(Dim::HERTZ.sqrt().unwrap());
        for text in ["2 nV/√Hz", "2nV/√Hz", "2 nV/rtHz"] {
            assert!(close(q(text).si, 2e-9), "{text}");
            assert_eq!(q(text).dim, Some(density), "{text}");
        }
        assert_eq!(density.symbol(), "V/√Hz");
        assert_eq!(q("3 pA/√Hz").dim.unwrap().powi(2), Dim::AMPERE.powi(2).per(Dim::HERTZ));
        assert_eq!(Dim::SECOND.sqrt().unwrap().powi(2), Dim::SECOND);
        assert_eq!(Dim::HERTZ.sqrt().unwrap().sqrt(), None);
    }

    #[test]
    fn units_and_compound_units() {
        assert_eq!(q("10 pF").dim, Some(Dim::FARAD));
        assert!(close(q("10 pF").si, 10e-12));
        assert!(close(q("100 pF/m").si, 100e-12));
        assert_eq!(q("100 pF/m").dim, Some(Dim::FARAD.per(Dim::METRE)));
        assert!(close(q("200 µA/V²").si, 200e-6));
        assert_eq!(q("200 uA/V^2").dim, Some(Dim::AMPERE.per(Dim::VOLT.powi(2))));
        assert!(close(q("4.6 fF/µm²").si, 4.6e-15 / 1e-12));
        assert_eq!(q("0.04 /V").dim, Some(Dim::VOLT.powi(-1)));
        assert_eq!(q("0.04 1/V").dim, Some(Dim::VOLT.powi(-1)));
        assert_eq!(q("10 V/V").dim, Some(Dim::NONE));
        assert_eq!(q("20 mS").dim, Some(Dim::SIEMENS));
        assert!(close(q("1.2 GHz").si, 1.2e9));
        assert!(close(q("15 ps").si, 15e-12));
        assert!(close(q("250 mW").si, 0.25));
        assert!(close(q("2.5 m").si, 2.5));
        assert_eq!(q("2.5 m").dim, Some(Dim::METRE));
        assert!(close(q("10m").si, 0.01));
        assert_eq!(q("10m").dim, None);
        assert_eq!(q("3 mm").dim, Some(Dim::METRE));
    }

    #[test]
    fn percent_decibel_and_celsius() {
        let p = q("5 %");
        assert_eq!(p.mark, Mark::Percent);
        assert!(close(p.si, 0.05));
        let d = q("20 dB");
        assert_eq!(d.mark, Mark::Decibel);
        assert!(close(d.si, 20.0));
        // 0 °C = 273.15 K by definition of the Celsius scale (SI Brochure, 9th ed., 2.3.7).
        for t in ["27 °C", "27 degC", "27°C"] {
            assert!(close(q(t).si, 300.15), "{t}");
            assert_eq!(q(t).dim, Some(Dim::KELVIN));
        }
        assert!(close(q("300 K").si, 300.0));
    }

    #[test]
    fn expressions_carry_units() {
        let mut params = BTreeMap::new();
        params.insert("len".to_string(), q("2.5 m"));
        params.insert("cpm".to_string(), q("100 pF/m"));
        let v = evaluate("len * cpm", &params).unwrap();
        assert!(close(v.si, 250e-12));
        assert_eq!(v.dim, Some(Dim::FARAD));
        let v = evaluate("2 * (len * cpm) + 10 pF", &params).unwrap();
        assert!(close(v.si, 510e-12));
        let v = evaluate("-5 V", &params).unwrap();
        assert!(close(v.si, -5.0));
        assert!(evaluate("len + cpm", &params).unwrap_err().message.contains("cannot add"));
        let e = evaluate("len * cmp", &params).unwrap_err();
        assert!(e.unknown_name);
        assert_eq!(e.offset, 6);
        assert_eq!(e.help.as_deref(), Some("did you mean `cpm`?"));
        assert_eq!(
            referenced_names("2 * a_b + (c / 3)"),
            vec![("a_b".to_string(), 4), ("c".to_string(), 11)]
        );
    }

    #[test]
    fn parallel_functions_and_pi() {
        // Two resistors in parallel: R1 R2 / (R1 + R2) (common practice).
        assert!(close(q("1k ∥ 1k").si, 500.0));
        assert!(close(q("3k || 6k").si, 2000.0));
        assert!(close(q("par(1k, 1k, 1k)").si, 1000.0 / 3.0));
        // ∥ binds tighter than *: (1k ∥ 1k) · 2 pF.
        assert!(close(q("1k ∥ 1k * 2 pF").si, 1e-9));
        assert!(close(q("sqrt(4 Hz * 1 Hz)").si, 2.0));
        assert!(close(q("db(10)").si, 20.0));
        assert!(close(q("1 / (2 * pi * 1 s)").si, 1.0 / (2.0 * std::f64::consts::PI)));
        assert!(close(q("max(1k, 2k) + min(1, 2) * 1 Ω").si, 2001.0));
        assert!(evaluate("1 kΩ ∥ 2 pF", &BTreeMap::new()).is_err());
        assert!(evaluate("log10(2 Ω)", &BTreeMap::new()).is_err());
    }

    #[test]
    fn junk_is_refused() {
        for text in [
            "4.7kk",
            "10 pfarad",
            "NaN",
            "nan",
            "inf",
            "-inf",
            "Infinity",
            "",
            "1.2.3",
            "47 k Ω",
            "10 pF pF",
            "10 °F",
            "4.7 kohms",
            "1e400",
            "abc",
            "10 )",
            "(10",
            "1/0",
            "10 dB * 2",
        ] {
            assert!(evaluate(text, &BTreeMap::new()).is_err(), "{text:?} was accepted");
        }
        let e = evaluate("4.7kk", &BTreeMap::new()).unwrap_err();
        assert_eq!(e.message, "`kk` is not a unit");
        assert_eq!(e.offset, 3);
        let e = evaluate("10 pfarad", &BTreeMap::new()).unwrap_err();
        assert!(e.help.unwrap().contains("`F` for farad"));
    }

    #[test]
    fn names_that_read_as_units_are_flagged() {
        for name in ["F", "m", "k", "kHz", "pF", "R47", "dB", "ohm"] {
            assert!(reads_as_unit(name), "{name}");
        }
        for name in ["r_bias", "cable_length", "gain", "Rs"] {
            assert!(!reads_as_unit(name), "{name}");
        }
    }
}
