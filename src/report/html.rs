//! The HTML exporter: Markdown through pulldown-cmark (tables, footnotes, heading ids),
//! sanitised by ammonia, plots spliced in afterwards as inline SVG, wrapped in one
//! self-contained page with inline CSS, a print stylesheet and a table of contents.

use base64::Engine as _;
use pulldown_cmark::{Alignment, Event, HeadingLevel, Options, Parser, Tag, TagEnd, html};

use crate::report::decimal;

use crate::report::plots::Plot;
use crate::report::template::plot_marker;

/// The Markdown options, set in this one place.
pub fn markdown_options() -> Options {
    Options::ENABLE_TABLES
        | Options::ENABLE_FOOTNOTES
        | Options::ENABLE_HEADING_ATTRIBUTES
        | Options::ENABLE_STRIKETHROUGH
}

fn slug(text: &str) -> String {
    let mut s = String::new();
    for c in text.chars() {
        if c.is_alphanumeric() {
            s.extend(c.to_lowercase());
        } else if !s.ends_with('-') && !s.is_empty() {
            s.push('-');
        }
    }
    s.trim_end_matches('-').to_string()
}

/// Markdown → HTML body and the table of contents (level, id, text).
fn body(markdown: &str) -> (String, Vec<(u8, String, String)>) {
    let events: Vec<Event> = Parser::new_ext(markdown, markdown_options()).collect();
    let mut toc = Vec::new();
    let mut out_events = Vec::with_capacity(events.len());
    let mut used: Vec<String> = Vec::new();
    let mut i = 0;
    while i < events.len() {
        if let Event::Start(Tag::Heading { level, id, classes, attrs }) = &events[i] {
            let mut text = String::new();
            let mut j = i + 1;
            while j < events.len() && !matches!(events[j], Event::End(TagEnd::Heading(_))) {
                if let Event::Text(t) | Event::Code(t) = &events[j] {
                    text.push_str(t);
                }
                j += 1;
            }
            // A heading id from the text is trusted only when it is a plain slug.
            let given = id.as_ref().map(|s| s.to_string()).filter(|s| {
                !s.is_empty()
                    && s.chars().all(|c| c.is_ascii_alphanumeric() || c == '-' || c == '_')
            });
            let mut anchor = given.unwrap_or_else(|| slug(&text));
            if anchor.is_empty() {
                anchor = "section".to_string();
            }
            let base = anchor.clone();
            let mut n = 2;
            while used.contains(&anchor) {
                anchor = format!("{base}-{n}");
                n += 1;
            }
            used.push(anchor.clone());
            let lvl = match level {
                HeadingLevel::H1 => 1,
                HeadingLevel::H2 => 2,
                HeadingLevel::H3 => 3,
                _ => 4,
            };
            toc.push((lvl, anchor.clone(), text));
            out_events.push(Event::Start(Tag::Heading {
                level: *level,
                id: Some(anchor.into()),
                classes: classes.clone(),
                attrs: attrs.clone(),
            }));
        } else {
            out_events.push(events[i].clone());
        }
        i += 1;
    }
    let mut html_out = String::new();
    let out_events = decimal_tables(units_kept(out_events));
    html::push_html(&mut html_out, subscripts(out_events).into_iter());
    (html_out, toc)
}

/// Text in tables with each number held to its unit ([`decimal::keep_units`]).
fn units_kept(events: Vec<Event<'_>>) -> Vec<Event<'_>> {
    let mut depth = 0;
    events
        .into_iter()
        .map(|e| match e {
            Event::Start(Tag::Table(_)) => {
                depth += 1;
                e
            }
            Event::End(TagEnd::Table) => {
                depth -= 1;
                e
            }
            Event::Text(t) if depth > 0 => Event::Text(decimal::keep_units(&t).into()),
            e => e,
        })
        .collect()
}

/// Tables with a column aligned on the decimal point, written here (pulldown-cmark's writer
/// knows no column spans): such a column becomes two cells per row, the integer part and the
/// rest, under one header spanning both. Other tables pass through.
fn decimal_tables(events: Vec<Event<'_>>) -> Vec<Event<'_>> {
    let mut out = Vec::with_capacity(events.len());
    let mut i = 0;
    while i < events.len() {
        if let Event::Start(Tag::Table(alignments)) = &events[i] {
            let decimal = decimal::columns(&events, i);
            let end = events[i..].iter().position(|e| matches!(e, Event::End(TagEnd::Table)));
            if let (true, Some(end)) = (decimal.contains(&true), end) {
                let html = table_html(&events[i + 1..i + end], alignments, &decimal);
                out.push(Event::Html(html.into()));
                i += end + 1;
                continue;
            }
        }
        out.push(events[i].clone());
        i += 1;
    }
    out
}

/// One table's HTML, as pulldown-cmark writes it but with `decimal` columns split in two.
fn table_html(events: &[Event], alignments: &[Alignment], decimal: &[bool]) -> String {
    let mut html = String::from("<table>");
    let (mut in_head, mut column, mut cell): (bool, usize, Vec<Event>) = (false, 0, Vec::new());
    for e in events {
        match e {
            Event::Start(Tag::TableHead) => {
                in_head = true;
                html.push_str("<thead><tr>");
            }
            Event::End(TagEnd::TableHead) => {
                in_head = false;
                html.push_str("</tr></thead><tbody>");
            }
            Event::Start(Tag::TableRow) => {
                column = 0;
                html.push_str("<tr>");
            }
            Event::End(TagEnd::TableRow) => html.push_str("</tr>"),
            Event::Start(Tag::TableCell) => cell.clear(),
            Event::End(TagEnd::TableCell) => {
                let align = match alignments.get(column) {
                    Some(Alignment::Right) => " style=\"text-align: right\"",
                    Some(Alignment::Center) => " style=\"text-align: center\"",
                    _ => "",
                };
                let tag = if in_head { "th" } else { "td" };
                if decimal.get(column) == Some(&true) && !in_head {
                    let (int, rest) = match cell.as_slice() {
                        [Event::Text(t)] => decimal::split(t).unwrap_or((t, "")),
                        _ => ("", ""),
                    };
                    html.push_str(&format!(
                        "<td class=\"int\">{}</td><td class=\"frac\">{}</td>",
                        inline_html(vec![Event::Text(int.to_string().into())]),
                        inline_html(vec![Event::Text(rest.to_string().into())])
                    ));
                } else {
                    let span =
                        if decimal.get(column) == Some(&true) { " colspan=\"2\"" } else { "" };
                    html.push_str(&format!(
                        "<{tag}{span}{align}>{}</{tag}>",
                        inline_html(cell.clone())
                    ));
                }
                column += 1;
            }
            other => cell.push(other.clone()),
        }
    }
    html.push_str("</tbody></table>\n");
    html
}

/// Inline Markdown events as HTML, symbols subscripted.
fn inline_html(events: Vec<Event<'_>>) -> String {
    let mut s = String::new();
    html::push_html(&mut s, subscripts(events).into_iter());
    s
}

/// Running text with its engineering symbols set as subscripts (`f_H` → f<sub>H</sub>); code
/// blocks keep their text as written.
fn subscripts(events: Vec<Event<'_>>) -> Vec<Event<'_>> {
    let mut out = Vec::with_capacity(events.len());
    let mut in_code = false;
    for e in events {
        match e {
            Event::Start(Tag::CodeBlock(_)) => {
                in_code = true;
                out.push(e);
            }
            Event::End(TagEnd::CodeBlock) => {
                in_code = false;
                out.push(e);
            }
            Event::Text(t) if !in_code => {
                for seg in crate::report::symbol_segments(&t) {
                    match seg {
                        crate::report::Segment::Plain(p) => {
                            out.push(Event::Text(p.to_string().into()))
                        }
                        crate::report::Segment::Subscripted(base, sub) => {
                            out.push(Event::InlineHtml(
                                format!("{}<sub>{}</sub>", escape(base), escape(sub)).into(),
                            ))
                        }
                    }
                }
            }
            e => out.push(e),
        }
    }
    out
}

/// Text escaped for HTML with its engineering symbols subscripted (`f_H` → f<sub>H</sub>).
fn subscripted(text: &str) -> String {
    crate::report::symbol_segments(text)
        .into_iter()
        .map(|seg| match seg {
            crate::report::Segment::Plain(p) => escape(p),
            crate::report::Segment::Subscripted(base, sub) => {
                format!("{}<sub>{}</sub>", escape(base), escape(sub))
            }
        })
        .collect()
}

fn sanitise(html: &str) -> String {
    // No images from the text: the page stays self-contained (plots are spliced in after).
    ammonia::Builder::default()
        .rm_tags(&["img"])
        .add_generic_attributes(&["id", "class"])
        .add_tag_attributes("td", &["style"])
        .add_tag_attributes("th", &["style", "colspan"])
        .url_schemes(["https", "http", "mailto"].into_iter().collect())
        .link_rel(Some("noopener noreferrer"))
        .clean(html)
        .to_string()
}

fn escape(text: &str) -> String {
    text.replace('&', "&amp;").replace('<', "&lt;").replace('>', "&gt;").replace('"', "&quot;")
}

/// The whole page. `title` is plain text (escaped here).
pub fn page(title: &str, markdown: &str, plots: &[Plot]) -> String {
    let (raw, toc) = body(markdown);
    // A table wider than the text column scrolls on its own instead of running off the page.
    let mut main = sanitise(&raw)
        .replace("<table>", "<div class=\"wide\"><table>")
        .replace("</table>", "</table></div>");
    for p in plots {
        // A supplied drawing goes in as an image, never inline: its SVG could carry scripts.
        let drawing = match &p.file {
            Some(f) => format!(
                "<img alt=\"{}\" src=\"data:{};base64,{}\">",
                escape(&p.caption),
                f.mime,
                base64::engine::general_purpose::STANDARD.encode(&f.bytes)
            ),
            None => p
                .svg
                .trim_start_matches("<?xml version=\"1.0\" encoding=\"UTF-8\"?>")
                .trim()
                .to_string(),
        };
        // A drawing at its natural size is never blown up past it.
        let drawing = match p.max_width {
            Some(px) => format!("<div style=\"max-width: {}px\">{drawing}</div>", px.ceil()),
            None => drawing,
        };
        let figure = if p.caption.is_empty() {
            format!("<figure class=\"plot\" id=\"plot-{}\">{drawing}</figure>", p.name)
        } else {
            format!(
                "<figure class=\"plot\" id=\"plot-{}\">{drawing}<figcaption>{}</figcaption></figure>",
                p.name,
                subscripted(&p.caption)
            )
        };
        // Only the `plot()` directive makes this paragraph: escaped text never holds the
        // marker character, which pulldown-cmark and ammonia pass through unchanged.
        main = main.replace(&format!("<p>{}</p>", plot_marker(p.name)), &figure);
    }
    let mut nav = String::from("<nav class=\"toc\"><h2>Contents</h2><ol>");
    for (level, id, text) in toc.iter().filter(|(l, _, _)| *l == 2 || *l == 3) {
        nav.push_str(&format!(
            "<li class=\"l{level}\"><a href=\"#{id}\">{}</a></li>",
            escape(text)
        ));
    }
    nav.push_str("</ol></nav>");
    format!(
        "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n\
         <meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n\
         <meta name=\"generator\" content=\"tauweave {}\">\n<title>{}</title>\n<style>\n{}</style>\n</head>\n\
         <body>\n{nav}\n<main>\n{main}</main>\n</body>\n</html>\n",
        env!("CARGO_PKG_VERSION"),
        escape(title),
        CSS
    )
}

const CSS: &str = r#"
:root { --ink: #1a1a1a; --mid: #555; --rule: #c8c8c8; --pale: #f3f3f1; }
* { box-sizing: border-box; }
body { margin: 0; color: var(--ink); background: #fff;
  font: 15px/1.5 "DejaVu Sans", "Helvetica Neue", Arial, sans-serif;
  display: grid; grid-template-columns: 15rem minmax(0, 54rem); gap: 2.5rem; padding: 2rem; }
nav.toc { position: sticky; top: 1.5rem; align-self: start; font-size: 13px;
  border-left: 3px solid var(--ink); padding-left: 0.9rem; }
nav.toc h2 { font-size: 12px; letter-spacing: 0.08em; text-transform: uppercase; margin: 0 0 0.5rem; }
nav.toc ol { list-style: none; margin: 0; padding: 0; }
nav.toc li.l3 { padding-left: 0.9rem; }
nav.toc a { color: var(--ink); text-decoration: none; }
nav.toc a:hover { text-decoration: underline; }
h1 { font-size: 1.7rem; margin: 0 0 0.3rem; border-bottom: 3px solid var(--ink); padding-bottom: 0.3rem; }
h2 { font-size: 1.25rem; margin: 2.2rem 0 0.6rem; border-bottom: 1px solid var(--rule); padding-bottom: 0.2rem; }
h3 { font-size: 1.05rem; margin: 1.5rem 0 0.4rem; }
table { border-collapse: collapse; margin: 0.8rem 0; font-size: 13.5px; font-variant-numeric: tabular-nums; }
th, td { padding: 0.25rem 0.7rem; border-bottom: 1px solid var(--rule); vertical-align: top; }
td[style*="right"], th[style*="right"] { white-space: nowrap; }
.wide { overflow-x: auto; margin: 0.8rem 0; }
.wide table { margin: 0; }
td.int { text-align: right; padding-right: 0; white-space: nowrap; }
td.frac { text-align: left; padding-left: 0; white-space: pre-wrap; }
th { border-bottom: 2px solid var(--ink); text-align: left; font-weight: 600; }
tbody tr:nth-child(even) { background: var(--pale); }
figure.plot { margin: 1.2rem 0; }
figure.plot svg { width: 100%; height: auto; border: 1px solid var(--rule); }
figcaption { font-size: 12.5px; color: var(--mid); margin-top: 0.3rem; }
code { font-family: "DejaVu Sans Mono", monospace; font-size: 0.92em; }
strong { font-weight: 700; }
@media (max-width: 60rem) { body { display: block; } nav.toc { position: static; margin-bottom: 1.5rem; } }
@media print {
  body { display: block; padding: 0; font-size: 10.5pt; }
  nav.toc { position: static; border: none; padding: 0 0 0.6em; columns: 2; font-size: 9pt;
    border-bottom: 1px solid var(--rule); margin-bottom: 1em; }
  nav.toc h2 { column-span: all; }
  h2, h3 { break-after: avoid; }
  figure { break-inside: avoid; }
  thead { display: table-header-group; }
  tr, figcaption { break-inside: avoid; }
  .wide { overflow: visible; }
  .wide table { font-size: 8.5pt; }
  tbody tr:nth-child(even) { background: none; }
  a { color: inherit; text-decoration: none; }
}
"#;

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn headings_get_ids_and_scripts_are_inert() {
        let md = "# T\n\n## Upper cut-off\n\n## Upper cut-off\n\n&lt;script&gt;alert(1)&lt;/script&gt; <script>x()</script> [a](javascript:alert(1))\n";
        let html = page("t <b>", md, &[]);
        assert!(
            html.contains("id=\"upper-cut-off\"") && html.contains("id=\"upper-cut-off-2\""),
            "{html}"
        );
        assert!(!html.contains("<script>"), "{html}");
        assert!(!html.contains("javascript:"), "{html}");
        assert!(html.contains("&lt;script&gt;alert(1)"), "{html}");
        assert!(html.contains("<title>t &lt;b&gt;</title>"));
    }
}
