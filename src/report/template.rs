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

use crate::notation::{plain, si};

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
    pub explanation: (Vec<String>, Vec<String>),
    /// Caution texts, Markdown.
    pub cautions: Vec<String>,
}

/// The marker a plot directive leaves in the Markdown; the exporters replace it.
pub fn plot_marker(name: &str) -> String {
    format!("@@plot:{name}@@")
}

/// A template that failed to render, with the template's place when known.
#[derive(Debug)]
pub struct TemplateError {
    /// The full message, with Tera's own excerpt of the template.
    pub message: String,
}

fn number(v: &Value) -> Option<f64> {
    v.as_number().map(|n| n.as_float())
}

/// Renders `source` against `view` (any serialisable view model) and `blocks`.
pub fn render(
    source: &TemplateSource,
    view: &impl serde::Serialize,
    blocks: Blocks,
) -> Result<String, TemplateError> {
    let mut tera = Tera::default();
    tera.register_filter("si", |v: &Value, kwargs: Kwargs, _: &State| -> TeraResult<String> {
        let unit: String = kwargs.get("unit")?.unwrap_or_default();
        let digits: Option<i64> = kwargs.get("digits")?;
        Ok(number(v)
            .map_or("—".into(), |x| si(x, &unit, digits.unwrap_or(4).clamp(1, 12) as usize)))
    });
    tera.register_filter("db", |v: &Value, kwargs: Kwargs, _: &State| -> TeraResult<String> {
        let digits: Option<i64> = kwargs.get("digits")?;
        Ok(number(v).filter(|x| *x != 0.0).map_or("—".into(), |x| {
            format!("{} dB", plain(20.0 * x.abs().log10(), digits.unwrap_or(4) as usize))
        }))
    });
    tera.register_filter("percent", |v: &Value, kwargs: Kwargs, _: &State| -> TeraResult<String> {
        let digits: Option<i64> = kwargs.get("digits")?;
        Ok(number(v).map_or("—".into(), |x| {
            format!("{} %", plain(x * 100.0, digits.unwrap_or(3) as usize))
        }))
    });
    tera.register_filter("sig", |v: &Value, kwargs: Kwargs, _: &State| -> TeraResult<String> {
        let digits: Option<i64> = kwargs.get("digits")?;
        Ok(number(v).map_or("—".into(), |x| plain(x, digits.unwrap_or(4) as usize)))
    });
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
            "high" => &explanation.0,
            "low" => &explanation.1,
            other => {
                return Err(tera::Error::message(format!(
                    "explanation side `{other}`: write `high` or `low`"
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
    tera.render(&source.name, &context)
        .map_err(|e| TemplateError { message: report(&source.name, &e) })
}

fn report(name: &str, e: &tera::Error) -> String {
    let mut text = format!("error: the template `{name}` did not render\n{e}\n");
    let mut source = std::error::Error::source(e);
    while let Some(s) = source {
        text.push_str(&format!("  caused by: {s}\n"));
        source = s.source();
    }
    text.push_str(
        "  help: `tauweave template show` prints the built-in template to start from; \
         docs/templates.md lists the values, filters and functions\n",
    );
    text
}
