//! Engineering notation: SI-prefixed numbers for people to read.
//!
//! The one place floats become text outside results.json. In: a value in SI units and its
//! unit symbol. Out: `4.7 kΩ`, `12.5 MHz`, `250 pF`; a value that is absent or not finite
//! prints as [`ABSENT`], never `NaN`. No I/O.

/// What a value that does not exist (or is not finite) prints as, everywhere: an em dash.
pub const ABSENT: &str = "—";

/// [`ABSENT`] as a `String`: the default of `value.map_or_else(absent, |v| si(v, "Hz", 4))`.
pub fn absent() -> String {
    ABSENT.to_string()
}

/// Formats `value` with an SI prefix and `digits` significant digits, trailing zeros
/// dropped: `si(47e3, "Ω", 3)` → `47 kΩ`.
pub fn si(value: f64, unit: &str, digits: usize) -> String {
    if !value.is_finite() {
        return absent();
    }
    if value == 0.0 {
        let space = if unit.is_empty() { "" } else { " " };
        return format!("0{space}{unit}");
    }
    let digits = digits.clamp(1, 15);
    // Round first, then choose the prefix, so 999.96 k becomes 1 M and not 1000 k.
    let magnitude = value.abs().log10().floor() as i32;
    let rounded = round_significant(value, digits, magnitude);
    let magnitude = rounded.abs().log10().floor() as i32;
    let exponent = (magnitude.div_euclid(3) * 3).clamp(-15, 12);
    let prefix = match exponent {
        -15 => "f",
        -12 => "p",
        -9 => "n",
        -6 => "µ",
        -3 => "m",
        3 => "k",
        6 => "M",
        9 => "G",
        12 => "T",
        _ => "",
    };
    let mantissa = rounded / 10f64.powi(exponent);
    let decimals = (digits as i32 - 1 - (magnitude - exponent)).max(0) as usize;
    let mut text = format!("{mantissa:.decimals$}");
    if text.contains('.') {
        text = text.trim_end_matches('0').trim_end_matches('.').to_string();
    }
    if text == "-0" {
        text = "0".to_string();
    }
    let text = text.replacen('-', "−", 1);
    if prefix.is_empty() && unit.is_empty() { text } else { format!("{text} {prefix}{unit}") }
}

fn round_significant(value: f64, digits: usize, magnitude: i32) -> f64 {
    let scale = 10f64.powi(digits as i32 - 1 - magnitude);
    let r = (value * scale).round() / scale;
    if r.is_finite() { r } else { value }
}

/// Formats a plain number with `digits` significant digits, no prefix (`3.14`, `120`).
pub fn plain(value: f64, digits: usize) -> String {
    if !value.is_finite() {
        return absent();
    }
    if value == 0.0 {
        return "0".to_string();
    }
    let magnitude = value.abs().log10().floor() as i32;
    let decimals = (digits as i32 - 1 - magnitude).max(0) as usize;
    let mut text = format!("{:.decimals$}", round_significant(value, digits, magnitude));
    if text.contains('.') {
        text = text.trim_end_matches('0').trim_end_matches('.').to_string();
    }
    text.replacen('-', "−", 1)
}

/// A signed fraction as per cent with `digits` significant digits: `+9.001 %`, `−8.3 %`, `0 %`.
/// A fraction below 1e-9 is rounding, not a difference: it prints as `0 %` (never
/// `−0.0000000000000029 %`).
pub fn signed_percent(fraction: f64, digits: usize) -> String {
    let fraction = if fraction.abs() < 1e-9 { 0.0 } else { fraction };
    let text = plain(fraction * 100.0, digits);
    if text != "0" && fraction > 0.0 { format!("+{text} %") } else { format!("{text} %") }
}

/// A number without a unit, readable at any size: plain from 0.001 to 10⁶, else scientific.
pub fn number(value: f64, digits: usize) -> String {
    if value == 0.0 || (1e-3..1e6).contains(&value.abs()) {
        plain(value, digits)
    } else {
        scientific(value, "", digits)
    }
}

/// Scientific notation for values whose unit takes no prefix (s², 1/V²): `1.083×10⁻¹⁴ s²`.
pub fn scientific(value: f64, unit: &str, digits: usize) -> String {
    if !value.is_finite() {
        return absent();
    }
    if value == 0.0 {
        return format!("0 {unit}").trim_end().to_string();
    }
    let exponent = value.abs().log10().floor() as i32;
    let mut mantissa = value / 10f64.powi(exponent);
    let mut exponent = exponent;
    let rounded = plain(mantissa, digits);
    if rounded.trim_start_matches('−') == "10" {
        mantissa /= 10.0;
        exponent += 1;
    }
    let superscript: String = exponent
        .to_string()
        .chars()
        .map(|c| match c {
            '-' => '⁻',
            '0' => '⁰',
            '1' => '¹',
            '2' => '²',
            '3' => '³',
            '4' => '⁴',
            '5' => '⁵',
            '6' => '⁶',
            '7' => '⁷',
            '8' => '⁸',
            _ => '⁹',
        })
        .collect();
    let body = if exponent == 0 {
        plain(mantissa, digits)
    } else {
        format!("{}×10{superscript}", plain(mantissa, digits))
    };
    if unit.is_empty() { body } else { format!("{body} {unit}") }
}

/// `text` with every control character but line breaks and tabs made visible, so nothing
/// from a file can move the cursor, ring the bell or recolour a terminal: C0 characters as
/// their control pictures (ESC → ␛), DEL and C1 characters as U+FFFD.
pub fn visible(text: &str) -> std::borrow::Cow<'_, str> {
    if !text.chars().any(|c| c.is_control() && c != '\n' && c != '\t') {
        return std::borrow::Cow::Borrowed(text);
    }
    text.chars()
        .map(|c| match c {
            '\n' | '\t' => c,
            c if (c as u32) < 0x20 => char::from_u32(0x2400 + c as u32).unwrap_or('\u{FFFD}'),
            c if c.is_control() => '\u{FFFD}',
            c => c,
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_rounding_level_fraction_prints_as_zero_per_cent() {
        assert_eq!(signed_percent(-2.9e-17, 2), "0 %");
        assert_eq!(signed_percent(-2.9e-7, 2), "−0.000029 %");
        assert_eq!(signed_percent(0.0833, 3), "+8.33 %");
    }

    #[test]
    fn scientific_form() {
        assert_eq!(scientific(1.0834e-14, "s²", 4), "1.083×10⁻¹⁴ s²");
        assert_eq!(scientific(-2.5e6, "", 3), "−2.5×10⁶");
        assert_eq!(scientific(9.9999e-3, "s²", 3), "1×10⁻² s²");
        assert_eq!(scientific(f64::NAN, "s²", 3), "—");
    }

    #[test]
    fn prefixes_and_rounding() {
        assert_eq!(si(47e3, "Ω", 3), "47 kΩ");
        assert_eq!(si(4.7e-12, "F", 3), "4.7 pF");
        assert_eq!(si(12.5e6, "Hz", 3), "12.5 MHz");
        assert_eq!(si(999.96e3, "Hz", 3), "1 MHz");
        assert_eq!(si(0.25, "W", 3), "250 mW");
        assert_eq!(si(12.0, "V", 3), "12 V");
        assert_eq!(si(-5.0, "V", 3), "−5 V");
        assert_eq!(si(1.0e-6, "A", 3), "1 µA");
        assert_eq!(si(123456.0, "Ω", 4), "123.5 kΩ");
        assert_eq!(si(0.0, "V", 3), "0 V");
        assert_eq!(si(f64::NAN, "V", 3), "—");
        assert_eq!(si(f64::INFINITY, "Ω", 3), "—");
        assert_eq!(si(1500.0, "", 3), "1.5 k");
    }

    #[test]
    fn signed_percentages_and_bare_numbers() {
        assert_eq!(signed_percent(0.09001, 4), "+9.001 %");
        assert_eq!(signed_percent(-0.083, 3), "−8.3 %");
        assert_eq!(signed_percent(1e-9, 2), "+0.0000001 %");
        assert_eq!(signed_percent(0.0, 3), "0 %");
        assert_eq!(number(100.0, 4), "100");
        assert_eq!(number(4e-16, 3), "4×10⁻¹⁶");
        assert_eq!(number(0.0, 3), "0");
    }

    #[test]
    fn plain_numbers() {
        assert_eq!(plain(120.0, 3), "120");
        assert_eq!(plain(0.3333333, 3), "0.333");
        assert_eq!(plain(-2.5, 3), "−2.5");
        assert_eq!(plain(f64::NAN, 3), "—");
    }
}
