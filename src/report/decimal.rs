//! Decimal alignment of table columns: which columns align on the decimal point, and where
//! a cell splits.
//!
//! A right-aligned column whose every body cell is a single number-led text (`20.4 dB`,
//! `+42 % to min`, `−0.037 %`, or empty) is set as two columns without a gap: the integer part
//! right-aligned, the rest (decimals, unit, words) left-aligned, under one header. So the
//! decimal points line up exactly, whatever the font, in HTML and in the PDF alike. A number
//! with no decimal point aligns as if the point followed its last digit. Used by the HTML and
//! typst writers on pulldown-cmark events. No I/O.

use pulldown_cmark::{Alignment, Event, Tag, TagEnd};

/// Splits a cell's text before its decimal point: `20.4 dB` → (`20`, `.4 dB`),
/// `+42 % to min` → (`+42`, ` % to min`). `None` when the text does not start with a number
/// (a sign, then digits).
pub fn split(text: &str) -> Option<(&str, &str)> {
    let body = text.strip_prefix(['+', '−', '-', '±']).unwrap_or(text);
    let sign = text.len() - body.len();
    let digits = body.find(|c: char| !c.is_ascii_digit()).unwrap_or(body.len());
    if digits == 0 {
        return None;
    }
    Some(text.split_at(sign + digits))
}

/// A table cell's text with each number held to its unit and each comparison sign to its
/// number (`≥ 900 kHz` never breaks between `900` and `kHz`): the space after a word that is
/// a number (it starts with a digit, or a sign and a digit), one of `≥ ≤ < > ±` or a
/// quantity's symbol (`V_BE`, `gm`) becomes a no-break space. `R1 and` keeps its space.
pub fn keep_units(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    let mut word = String::new();
    for c in text.chars() {
        if c == ' ' {
            let number = split(&word).is_some_and(|(int, _)| {
                int.len() == word.len() || { word[int.len()..].starts_with('.') }
            });
            let sign = matches!(word.as_str(), "≥" | "≤" | "<" | ">" | "±");
            // A quantity's symbol stays with its value (`V_BE 773.6 mV`, `gm 164 mS`).
            let symbol = crate::report::SUBSCRIPTED.contains(&word.as_str())
                || matches!(word.as_str(), "gm" | "rπ" | "ro" | "rx" | "Cπ" | "Cμ" | "β");
            out.push(if number || sign || symbol { '\u{a0}' } else { ' ' });
            word.clear();
        } else {
            out.push(c);
            word.push(c);
        }
    }
    out
}

/// For the table whose `Start(Table)` is `events[start]`: for each column, whether it aligns
/// on the decimal point. Header cells do not count; a cell holding anything but one text
/// (code, emphasis, several pieces) keeps its column as it is.
pub fn columns(events: &[Event], start: usize) -> Vec<bool> {
    let Some(Event::Start(Tag::Table(alignments))) = events.get(start) else { return Vec::new() };
    let mut decimal: Vec<bool> = alignments.iter().map(|a| *a == Alignment::Right).collect();
    let mut numbers = vec![0usize; alignments.len()];
    let (mut in_head, mut column, mut cell): (bool, usize, Vec<&Event>) = (false, 0, Vec::new());
    for e in &events[start + 1..] {
        match e {
            Event::End(TagEnd::Table) => break,
            Event::Start(Tag::TableHead) => in_head = true,
            Event::End(TagEnd::TableHead) => in_head = false,
            Event::Start(Tag::TableRow) => column = 0,
            Event::Start(Tag::TableCell) => cell.clear(),
            Event::End(TagEnd::TableCell) => {
                if !in_head && column < decimal.len() {
                    match cell.as_slice() {
                        [] => {}
                        [Event::Text(t)] if split(t).is_some() => numbers[column] += 1,
                        _ => decimal[column] = false,
                    }
                }
                column += 1;
            }
            other => cell.push(other),
        }
    }
    decimal.iter().zip(numbers).map(|(d, n)| *d && n > 0).collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use pulldown_cmark::{Options, Parser};

    #[test]
    fn split_keeps_the_sign_with_the_integer_part() {
        assert_eq!(split("20.4 dB"), Some(("20", ".4 dB")));
        assert_eq!(split("+42 % to min"), Some(("+42", " % to min")));
        assert_eq!(split("−0.037 %"), Some(("−0", ".037 %")));
        assert_eq!(split("991.6 Ω"), Some(("991", ".6 Ω")));
        assert_eq!(split("100 %"), Some(("100", " %")));
        assert_eq!(split("≥ 900 kHz"), None);
        assert_eq!(split("—"), None);
        assert_eq!(split("+"), None);
    }

    #[test]
    fn numbers_stay_with_their_units() {
        assert_eq!(keep_units("≥ 900 kHz"), "≥\u{a0}900\u{a0}kHz");
        assert_eq!(keep_units("18 dB … 23 dB"), "18\u{a0}dB … 23\u{a0}dB");
        assert_eq!(keep_units("output resistance"), "output resistance");
        assert_eq!(keep_units("R1 and 2.5 m"), "R1 and 2.5\u{a0}m");
        assert_eq!(
            keep_units("I_C 4.24 mA, V_BE 773.6 mV"),
            "I_C\u{a0}4.24\u{a0}mA, V_BE\u{a0}773.6\u{a0}mV"
        );
    }

    #[test]
    fn only_right_aligned_all_number_columns_align() {
        let md = "| a | b | c | d |\n|---:|:---|---:|---:|\n| 1.5 | 2.5 | x | 3 |\n| 10 | 4 | 7 | `9` |\n|  | 1 | 2 |  |\n";
        let events: Vec<Event> = Parser::new_ext(md, Options::ENABLE_TABLES).collect();
        // a: numbers and an empty cell; b: left-aligned; c: a word; d: code.
        assert_eq!(columns(&events, 0), vec![true, false, false, false]);
    }
}
