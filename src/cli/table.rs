//! Aligned plain-text tables for the terminal.
//!
//! In: a header and rows of already formatted cells. Out: lines padded by character count,
//! numbers right-aligned, text left-aligned. No numbers are formatted here.

/// Column alignment.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Align {
    /// Text.
    Left,
    /// Numbers.
    Right,
}

/// Renders `rows` under `header`, each line indented by `indent` spaces.
pub fn render(indent: usize, header: &[(&str, Align)], rows: &[Vec<String>]) -> String {
    let cols = header.len();
    let mut widths: Vec<usize> = header.iter().map(|(h, _)| h.chars().count()).collect();
    for row in rows {
        for (i, cell) in row.iter().enumerate().take(cols) {
            widths[i] = widths[i].max(cell.chars().count());
        }
    }
    let pad = " ".repeat(indent);
    let line = |cells: Vec<&str>| {
        let mut s = pad.clone();
        for (i, cell) in cells.iter().enumerate() {
            let fill = " ".repeat(widths[i] - cell.chars().count());
            match header[i].1 {
                Align::Left => s.push_str(&format!("{cell}{fill}")),
                Align::Right => s.push_str(&format!("{fill}{cell}")),
            }
            if i + 1 < cols {
                s.push_str("  ");
            }
        }
        s.trim_end().to_string() + "\n"
    };
    let mut out = line(header.iter().map(|(h, _)| *h).collect());
    for row in rows {
        out.push_str(&line(row.iter().map(String::as_str).collect()));
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn aligns_by_characters() {
        let t = render(
            2,
            &[("part", Align::Left), ("R", Align::Right)],
            &[vec!["C1".into(), "4.7 kΩ".into()], vec!["load.c".into(), "50 Ω".into()]],
        );
        assert_eq!(t, "  part         R\n  C1      4.7 kΩ\n  load.c    50 Ω\n");
    }
}
