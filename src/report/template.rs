//! Templates: Markdown with Tera 2 directives, rendered against the view model.
//!
//! The template author gets every value of the view by name (`{{ high.f3db_hz }}`),
//! filters for numbers (`si(unit="Hz", digits=4)`, `db`, `percent`, `sig`) and functions
//! that insert computed blocks: `table(name=…)`, `plot(name=…)`, `explanation(side=…)`,
//! `cautions()`. Filters and functions are registered before any template is added, and a
//! template can include only templates tauweave added itself.

use std::collections::BTreeMap;
use std::sync::Arc;

use tera::{Context, Kwargs, State, Tera, TeraResult, Value};

use crate::notation::{absent, plain, si};

/// The built-in review template.
pub const BUILT_IN: &str = include_str!("../../templates/review.md");
/// Its name in messages.
pub const BUILT_IN_NAME: &str = "built-in review template";

/// A template to render, and the name to use for it in messages.
pub struct TemplateSource {
    /// File name or [`BUILT_IN_NAME`].
    pub name: String,
    /// The template text.
    pub text: String,
}

/// The computed blocks the template functions insert.
pub struct Blocks {
    /// Markdown tables by name.
    pub tables: BTreeMap<&'static str, String>,
    /// Every table name this kind of template may ask for; one of these that is not in
    /// `tables` (a tolerance table without a study) inserts nothing, any other is an error.
    pub known_tables: Vec<&'static str>,
    /// Plot names that exist.
    pub plots: Vec<&'static str>,
    /// Every plot name this kind of template may ask for (absent ones insert nothing).
    pub known_plots: Vec<&'static str>,
    /// Explanation paragraphs: (high, low).
    pub explanation: crate::report::explain::Explanation,
    /// Caution texts, Markdown.
    pub cautions: Vec<String>,
}

/// The private-use character (U+E000) plot markers are built around. [`escape`] replaces it
/// in free text, so no design text can spell a marker: only the `plot()` directive makes one.
/// It passes pulldown-cmark (neither whitespace nor punctuation), ammonia and typst's
/// paragraph detection unchanged.
///
/// [`escape`]: crate::report::view::escape
pub const MARKER: char = '\u{E000}';

/// The marker a plot directive leaves in the Markdown, a paragraph of its own
/// (`U+E000 plot:NAME U+E000`); the exporters replace it: html.rs and typst.rs a paragraph
/// that is exactly the marker, the Markdown output every occurrence.
pub fn plot_marker(name: &str) -> String {
    format!("{MARKER}plot:{name}{MARKER}")
}

/// The plot name when `text` is exactly a plot marker (see [`plot_marker`]).
pub fn plot_marker_name(text: &str) -> Option<&str> {
    let name = text.strip_prefix(MARKER)?.strip_prefix("plot:")?.strip_suffix(MARKER)?;
    let plain = !name.is_empty() && name.chars().all(|c| c.is_ascii_alphanumeric() || c == '_');
    plain.then_some(name)
}

/// A template that failed to render, with the template's place when known.
#[derive(Debug)]
pub struct TemplateError {
    /// The full message, with Tera's own excerpt of the template.
    pub message: String,
}

/// The number a filter formats. Null is a value that legitimately does not exist and prints
/// `—`; a name the view does not have (`midband.gian`) or a value that is not a number is a
/// mistake in the template, reported at its place.
fn number(v: &Value, filter: &str) -> TeraResult<Option<f64>> {
    if v.is_undefined() {
        return Err(tera::Error::message(format!(
            "`{filter}` was given a value the review does not have; check the name (docs/templates.md lists every value)"
        )));
    }
    if v.is_none() {
        return Ok(None);
    }
    match v.as_number() {
        Some(n) => Ok(Some(n.as_float())),
        None => Err(tera::Error::message(format!(
            "`{filter}` formats numbers, and this is a {}",
            v.name()
        ))),
    }
}

/// Refuses keyword arguments a filter does not take, naming the ones it does.
fn known_arguments(kwargs: &Kwargs, filter: &str, known: &[&str]) -> TeraResult<()> {
    for (key, _) in kwargs.iter() {
        let name = key.to_string();
        if !known.contains(&name.as_str()) {
            let takes = known.iter().map(|k| format!("`{k}`")).collect::<Vec<_>>().join(", ");
            return Err(tera::Error::message(format!(
                "`{filter}` takes {takes}; `{name}` is not one of them"
            )));
        }
    }
    Ok(())
}

/// The `digits` argument: significant digits, 1 to 12.
fn digits(kwargs: &Kwargs, default: usize) -> TeraResult<usize> {
    match kwargs.get::<i64>("digits")? {
        None => Ok(default),
        Some(d) if (1..=12).contains(&d) => Ok(d as usize),
        Some(d) => Err(tera::Error::message(format!(
            "`digits={d}` is out of range: give 1 to 12 significant digits"
        ))),
    }
}

/// The number filters: `si`, `db`, `percent`, `sig`. An absent (null) value prints `—`; an
/// unknown name, an unknown argument or digits out of range are template errors.
fn register_filters(tera: &mut Tera) {
    tera.register_filter("si", |v: &Value, kwargs: Kwargs, _: &State| -> TeraResult<String> {
        known_arguments(&kwargs, "si", &["unit", "digits"])?;
        let unit: String = kwargs.get("unit")?.unwrap_or_default();
        let digits = digits(&kwargs, 4)?;
        Ok(number(v, "si")?.map_or_else(absent, |x| si(x, &unit, digits)))
    });
    tera.register_filter("db", |v: &Value, kwargs: Kwargs, _: &State| -> TeraResult<String> {
        known_arguments(&kwargs, "db", &["digits"])?;
        let digits = digits(&kwargs, 4)?;
        Ok(number(v, "db")?
            .filter(|x| *x != 0.0)
            .map_or_else(absent, |x| format!("{} dB", plain(20.0 * x.abs().log10(), digits))))
    });
    tera.register_filter("percent", |v: &Value, kwargs: Kwargs, _: &State| -> TeraResult<String> {
        known_arguments(&kwargs, "percent", &["digits"])?;
        let digits = digits(&kwargs, 3)?;
        Ok(number(v, "percent")?.map_or_else(absent, |x| format!("{} %", plain(x * 100.0, digits))))
    });
    tera.register_filter("sig", |v: &Value, kwargs: Kwargs, _: &State| -> TeraResult<String> {
        known_arguments(&kwargs, "sig", &["digits"])?;
        let digits = digits(&kwargs, 4)?;
        Ok(number(v, "sig")?.map_or_else(absent, |x| plain(x, digits)))
    });
}

/// The largest template read, in bytes (the built-in one is under 10 KiB).
pub const MAX_TEMPLATE_BYTES: usize = 256 << 10;

/// The most values `range()` may hand out over one render, all calls together: loops over
/// the review's own lists are bounded by the design; this bounds the loops a template
/// makes up itself, however they nest.
pub const MAX_RANGE_STEPS: usize = 100_000;

/// The largest document a template may render to, in bytes.
pub const MAX_OUTPUT_BYTES: usize = 16 << 20;

/// The longest a template may take to render.
pub const MAX_RENDER_TIME: std::time::Duration = std::time::Duration::from_secs(30);

/// Where a render writes: refuses to grow past [`MAX_OUTPUT_BYTES`] or to keep going past
/// [`MAX_RENDER_TIME`], so a runaway loop ends in an error, not in all the memory.
struct Bounded {
    bytes: Vec<u8>,
    started: std::time::Instant,
}

impl std::io::Write for Bounded {
    fn write(&mut self, buf: &[u8]) -> std::io::Result<usize> {
        if self.bytes.len() + buf.len() > MAX_OUTPUT_BYTES {
            self.bytes.resize(MAX_OUTPUT_BYTES + 1, 0);
            return Err(std::io::Error::other("the output limit"));
        }
        if self.started.elapsed() > MAX_RENDER_TIME {
            return Err(std::io::Error::other("the time limit"));
        }
        self.bytes.extend_from_slice(buf);
        Ok(buf.len())
    }

    fn flush(&mut self) -> std::io::Result<()> {
        Ok(())
    }
}

/// `range(end=…, start=0, step_by=1)`, as the template engine's own, but counted against
/// [`MAX_RANGE_STEPS`] for the whole render.
fn register_range(tera: &mut Tera) {
    let used = Arc::new(std::sync::atomic::AtomicUsize::new(0));
    tera.register_function("range", move |kwargs: Kwargs, _: &State| -> TeraResult<Value> {
        known_arguments(&kwargs, "range", &["end", "start", "step_by"])?;
        let end: i64 = kwargs.must_get("end")?;
        let start: i64 = kwargs.get("start")?.unwrap_or(0);
        let step: i64 = kwargs.get("step_by")?.unwrap_or(1);
        if step == 0 {
            return Err(tera::Error::message("`range(step_by=0)`: the step must not be zero"));
        }
        // i128: no overflow for any i64 arguments.
        let (span, stride) = (i128::from(end) - i128::from(start), i128::from(step));
        let count = if span.signum() == stride.signum() && span != 0 {
            ((span.abs() - 1) / stride.abs() + 1) as u128
        } else {
            0
        };
        let count = usize::try_from(count).unwrap_or(usize::MAX).min(MAX_RANGE_STEPS + 1);
        let total = used.fetch_add(count, std::sync::atomic::Ordering::Relaxed) + count;
        if total > MAX_RANGE_STEPS {
            return Err(tera::Error::message(format!(
                "`range()` would hand out more than {MAX_RANGE_STEPS} values in this template \
                 (loops inside loops count together); loop over the review's own lists, or \
                 over fewer values"
            )));
        }
        let values: Vec<i64> = (0..count as i64).map(|k| start + k * step).collect();
        Ok(Value::from(values))
    });
}

/// Renders `source` against `view` (any serialisable view model) and `blocks`.
pub fn render(
    source: &TemplateSource,
    view: &impl serde::Serialize,
    blocks: Blocks,
) -> Result<String, TemplateError> {
    if source.text.len() > MAX_TEMPLATE_BYTES {
        return Err(TemplateError {
            message: format!(
                "error: the template `{}` is {} bytes, more than the {MAX_TEMPLATE_BYTES} a \
                 template may have\n",
                source.name,
                source.text.len()
            ),
        });
    }
    let mut tera = Tera::default();
    register_filters(&mut tera);
    register_range(&mut tera);
    let tables = Arc::new(blocks.tables);
    let known_tables = blocks.known_tables;
    tera.register_function("table", move |kwargs: Kwargs, _: &State| -> TeraResult<Value> {
        let name: String = kwargs.must_get("name")?;
        match tables.get(name.as_str()) {
            Some(t) => Ok(Value::safe_string(&format!("\n{t}\n"))),
            // Tolerance tables exist only when a study ran: absent, not an error.
            None if known_tables.contains(&name.as_str()) => Ok(Value::safe_string("")),
            None => Err(tera::Error::message(format!(
                "there is no table `{name}`; tables: {}",
                known_tables.join(", ")
            ))),
        }
    });
    let plots = Arc::new(blocks.plots);
    let known_plots = blocks.known_plots;
    tera.register_function("plot", move |kwargs: Kwargs, _: &State| -> TeraResult<Value> {
        let name: String = kwargs.must_get("name")?;
        if plots.iter().any(|p| *p == name) {
            Ok(Value::safe_string(&format!("\n{}\n", plot_marker(&name))))
        } else if known_plots.contains(&name.as_str()) {
            Ok(Value::safe_string(""))
        } else {
            let list = if known_plots.is_empty() { "none".into() } else { known_plots.join(", ") };
            Err(tera::Error::message(format!("there is no plot `{name}`; plots: {list}")))
        }
    });
    let explanation = Arc::new(blocks.explanation);
    tera.register_function("explanation", move |kwargs: Kwargs, _: &State| -> TeraResult<Value> {
        let side: String = kwargs.get("side")?.unwrap_or_else(|| "high".to_string());
        let paragraphs = match side.as_str() {
            "high" => &explanation.high,
            "low" => &explanation.low,
            "noise" => &explanation.noise,
            "signal" => &explanation.signal,
            "ports" => &explanation.ports,
            other => {
                return Err(tera::Error::message(format!(
                    "explanation side `{other}`: write `high`, `low`, `noise`, `signal` or \
                     `ports`"
                )));
            }
        };
        Ok(Value::safe_string(&paragraphs.join("\n\n")))
    });
    let cautions = Arc::new(blocks.cautions);
    tera.register_function("cautions", move |_: Kwargs, _: &State| -> Value {
        let list: Vec<String> = cautions.iter().map(|c| format!("- {c}")).collect();
        Value::safe_string(&list.join("\n"))
    });
    tera.add_raw_template(&source.name, &source.text)
        .map_err(|e| TemplateError { message: report(&source.name, &e) })?;
    let context = Context::from_serialize(view)
        .map_err(|e| TemplateError { message: report(&source.name, &e) })?;
    let mut sink = Bounded { bytes: Vec::new(), started: std::time::Instant::now() };
    if let Err(e) = tera.render_to(&source.name, &context, &mut sink) {
        let over = sink.bytes.len() > MAX_OUTPUT_BYTES;
        let slow = sink.started.elapsed() > MAX_RENDER_TIME;
        let message = if over || slow {
            format!(
                "error: the template `{}` {}; nothing was written\n  help: a loop over more \
                 values than the review holds is the usual cause\n",
                source.name,
                if over {
                    format!("rendered more than the {MAX_OUTPUT_BYTES} bytes a review may have")
                } else {
                    format!("ran longer than the {} s a render may take", MAX_RENDER_TIME.as_secs())
                }
            )
        } else {
            report(&source.name, &e)
        };
        return Err(TemplateError { message });
    }
    let out = String::from_utf8(sink.bytes).map_err(|e| TemplateError {
        message: format!(
            "error: the template `{}` rendered text that is not UTF-8: {e}\n",
            source.name
        ),
    })?;
    Ok(out)
}

fn report(name: &str, e: &tera::Error) -> String {
    let mut text = format!("error: the template `{name}` did not render\n{e}\n");
    let mut source = std::error::Error::source(e);
    while let Some(s) = source {
        text.push_str(&format!("  caused by: {s}\n"));
        source = s.source();
    }
    text.push_str(
        "  help: `tauweave template show` (or `template show change` for a change report) \
         prints the built-in template to start from; docs/templates.md lists the values, \
         filters and functions\n",
    );
    text
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::report::plots::Plot;
    use crate::report::typst::{PageSetup, Paper};
    use crate::report::view::escape;
    use crate::report::{html, typst};

    fn blocks() -> Blocks {
        Blocks {
            tables: BTreeMap::new(),
            known_tables: vec![],
            plots: vec!["bode"],
            known_plots: vec!["bode", "shares"],
            explanation: crate::report::explain::Explanation::default(),
            cautions: vec![],
        }
    }

    #[test]
    fn markers_round_trip() {
        assert_eq!(plot_marker_name(&plot_marker("pole_zero")), Some("pole_zero"));
        assert_eq!(plot_marker_name("@@plot:bode@@"), None);
        assert_eq!(plot_marker_name(&plot_marker("a b")), None);
        assert!(!escape(&plot_marker("bode")).contains(MARKER));
    }

    /// Only the directive makes a plot: design text that spells a marker, old or new, stays
    /// text in every exporter, and the directive's marker survives pulldown-cmark, ammonia
    /// and typst's paragraph detection.
    #[test]
    fn only_the_plot_directive_makes_a_plot() {
        let plots = [Plot {
            name: "bode",
            caption: "Bode".into(),
            svg: "<svg></svg>".into(),
            file: None,
            max_width: None,
        }];
        let page = PageSetup { paper: Paper::A4, title: "T", footer: "f" };
        let source = TemplateSource {
            name: "t".into(),
            text:
                "# T\n\n{{ purpose }}\n\n{{ plot(name=\"bode\") }}\n\n{{ plot(name=\"shares\") }}\n"
                    .into(),
        };
        let marker = plot_marker("bode");
        for text in ["@@plot:bode@@", &marker, &format!("  {marker}\n\n{marker}\n- {marker}")] {
            let view = BTreeMap::from([("purpose", escape(text))]);
            let md = render(&source, &view, blocks()).map_err(|e| e.message).unwrap();
            assert_eq!(md.matches(&marker).count(), 1, "{md}");
            let html = html::page("t", &md, &plots);
            assert_eq!(
                html.matches("<figure class=\"plot\" id=\"plot-bode\">").count(),
                1,
                "{html}"
            );
            assert!(html.contains("plot:bode"), "the text is shown: {html}");
            let doc = typst::document(&md, &plots, &page);
            assert_eq!(doc.matches("#figure(").count(), 1, "{doc}");
        }
    }
}
