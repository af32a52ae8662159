//! Reports for continuous integration: the requirement verdicts of one or many checked
//! designs as JUnit XML (the test-report format CI systems display) and as JSON for scripts.
//!
//! In: each design's requirement checks, or why it could not be checked. Out: the report's
//! text, the same bytes for the same inputs (no clock, no host name). One test case per
//! limited requirement and judgement: at nominal values, at its worst tolerance corner, and
//! its Monte Carlo yield against the design's `min_yield` (skipped, with the yield, when the
//! design sets none or the judgement was not made).

use serde::Serialize;

use crate::analysis::requirements::RequirementCheck;
use crate::report::results::{self, RequirementResults, Tool};
use crate::report::tables::{requirement_row, requirement_words};

/// One design as checked.
pub struct CheckedDesign {
    /// The design file as named on the command line.
    pub path: String,
    /// Its id, when it was read.
    pub id: Option<String>,
    /// Why it could not be checked: the gist and the whole message.
    pub error: Option<(String, String)>,
    /// Its requirement checks, when it was analysed.
    pub requirements: Vec<RequirementCheck>,
    /// Monte Carlo runs made (0 when none).
    pub monte_carlo_runs: usize,
    /// The design's least yield, when it sets one.
    pub min_yield: Option<f64>,
}

/// The verdict of one test case.
#[derive(Clone, Debug, PartialEq)]
enum Verdict {
    Pass,
    Fail(String),
    Skipped(String),
}

/// The three judgements of a requirement: (name, verdict, detail).
fn cases(d: &CheckedDesign, r: &RequirementCheck) -> [(String, Verdict, String); 3] {
    let row = requirement_row(r);
    let words = requirement_words(r.name);
    let limit = &row[1];
    let nominal = match (r.value, r.pass) {
        (_, true) => Verdict::Pass,
        (None, false) => Verdict::Fail(format!("{words}: not found; required {limit}")),
        (Some(_), false) => {
            Verdict::Fail(format!("{words}: {} at nominal values; required {limit}", row[2]))
        }
    };
    let corner = match r.corner_pass {
        None => Verdict::Skipped("no tolerance corner was evaluated".into()),
        Some(true) => Verdict::Pass,
        Some(false) => Verdict::Fail(format!("{words}: worst corner {}; required {limit}", row[5])),
    };
    let yields = match (r.yield_fraction, d.min_yield) {
        (None, _) => Verdict::Skipped("no Monte Carlo runs".into()),
        (Some(y), None) => Verdict::Skipped(format!(
            "yield {} over {} runs; the design sets no analysis.monte_carlo.min_yield to judge it",
            percent(y),
            d.monte_carlo_runs
        )),
        (Some(y), Some(min)) if meets(y, min) => Verdict::Pass,
        (Some(y), Some(min)) => Verdict::Fail(format!(
            "{words}: yield {} over {} runs, under the required {}",
            percent(y),
            d.monte_carlo_runs,
            percent(min)
        )),
    };
    let detail =
        format!("required {limit}; nominal {}; worst corner {}; yield {}", row[2], row[5], row[6]);
    [
        (format!("{} at nominal values", r.name), nominal, detail.clone()),
        (format!("{} at the worst tolerance corner", r.name), corner, detail.clone()),
        (format!("{} Monte Carlo yield", r.name), yields, detail),
    ]
}

/// True when a yield reaches its target; `99.9 %` reads as 0.9990000000000001, so a
/// yield of 999 runs in 1000 meets it.
pub fn meets(yield_fraction: f64, min: f64) -> bool {
    yield_fraction + 1e-9 >= min
}

/// Text with the terminal's colour codes (`ESC [ … m`) taken out.
pub fn without_colour(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    let mut chars = text.chars().peekable();
    while let Some(c) = chars.next() {
        if c == '\u{1b}' && chars.peek() == Some(&'[') {
            for d in chars.by_ref() {
                if d.is_ascii_alphabetic() {
                    break;
                }
            }
            continue;
        }
        out.push(c);
    }
    out
}

fn percent(fraction: f64) -> String {
    format!("{} %", crate::notation::plain(fraction * 100.0, 4))
}

/// Text escaped for an XML attribute or element.
fn xml(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    for c in text.chars() {
        match c {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&apos;"),
            // XML 1.0 allows no other control characters; the terminal's colour codes and
            // the like are dropped.
            c if c.is_control() && !matches!(c, '\n' | '\t' | '\r') => {}
            c => out.push(c),
        }
    }
    out
}

/// The JUnit XML report: one test suite per design (named by its id, else its path), one
/// test case per requirement and judgement; a design that could not be checked is one
/// test case in error.
pub fn junit(designs: &[CheckedDesign]) -> String {
    let mut suites = String::new();
    let (mut tests, mut failures, mut errors, mut skipped) = (0, 0, 0, 0);
    for d in designs {
        let name = d.id.clone().unwrap_or_else(|| d.path.clone());
        let mut body = String::new();
        let (mut t, mut f, mut e, mut s) = (0, 0, 0, 0);
        if let Some((gist, message)) = &d.error {
            t += 1;
            e += 1;
            body.push_str(&format!(
                "    <testcase classname=\"{}\" name=\"design reads and is analysed\">\n      <error message=\"{}\" type=\"design\">{}</error>\n    </testcase>\n",
                xml(&name),
                xml(gist),
                xml(message)
            ));
        }
        for r in &d.requirements {
            for (case, verdict, detail) in cases(d, r) {
                t += 1;
                let inner = match &verdict {
                    Verdict::Pass => String::new(),
                    Verdict::Fail(why) => {
                        f += 1;
                        format!(
                            "      <failure message=\"{}\" type=\"requirement\">{}</failure>\n",
                            xml(why),
                            xml(&detail)
                        )
                    }
                    Verdict::Skipped(why) => {
                        s += 1;
                        format!("      <skipped message=\"{}\"/>\n", xml(why))
                    }
                };
                let open =
                    format!("    <testcase classname=\"{}\" name=\"{}\"", xml(&name), xml(&case));
                if inner.is_empty() {
                    body.push_str(&format!("{open}/>\n"));
                } else {
                    body.push_str(&format!("{open}>\n{inner}    </testcase>\n"));
                }
            }
        }
        suites.push_str(&format!(
            "  <testsuite name=\"{}\" tests=\"{t}\" failures=\"{f}\" errors=\"{e}\" skipped=\"{s}\">\n    <properties>\n      <property name=\"design\" value=\"{}\"/>\n    </properties>\n{body}  </testsuite>\n",
            xml(&name),
            xml(&d.path)
        ));
        (tests, failures, errors, skipped) = (tests + t, failures + f, errors + e, skipped + s);
    }
    format!(
        "<?xml version=\"1.0\" encoding=\"UTF-8\"?>\n<testsuites name=\"tauweave check\" tests=\"{tests}\" failures=\"{failures}\" errors=\"{errors}\" skipped=\"{skipped}\">\n{suites}</testsuites>\n"
    )
}

/// The JSON report of `check --report json`.
#[derive(Serialize)]
pub struct CheckReport {
    /// The program that wrote it.
    pub tool: Tool,
    /// Each design in the order named.
    pub designs: Vec<DesignReport>,
    /// Counts over all designs.
    pub total: Total,
}

/// One design in the JSON report.
#[derive(Serialize)]
pub struct DesignReport {
    /// The design file as named.
    pub design: String,
    /// Its id, when it was read.
    pub id: Option<String>,
    /// `pass`, `fails` (a requirement fails at nominal values) or `error`.
    pub status: &'static str,
    /// Why it could not be checked (the whole message), when it could not.
    pub error: Option<String>,
    /// The requirements failing at nominal values.
    pub failing: Vec<String>,
    /// The requirements failing at their worst tolerance corner.
    pub failing_at_corner: Vec<String>,
    /// The requirements whose Monte Carlo yield is under `min_yield`.
    pub failing_yield: Vec<String>,
    /// Monte Carlo runs made.
    pub monte_carlo_runs: usize,
    /// The design's least yield, when set.
    pub min_yield: Option<f64>,
    /// Every limited requirement as in results.json's `requirements`.
    pub requirements: Vec<RequirementResults>,
}

/// Counts of the JSON report.
#[derive(Serialize)]
pub struct Total {
    /// Designs named.
    pub designs: usize,
    /// Passing at nominal values.
    pub pass: usize,
    /// Failing a requirement at nominal values.
    pub fails: usize,
    /// Not read or not analysed.
    pub errors: usize,
}

/// The JSON report, pretty-printed, ended by a newline.
pub fn json(designs: &[CheckedDesign]) -> String {
    let mut total = Total { designs: designs.len(), pass: 0, fails: 0, errors: 0 };
    let reports = designs
        .iter()
        .map(|d| {
            let failing_where = |judgement: usize| -> Vec<String> {
                d.requirements
                    .iter()
                    .filter(|r| matches!(cases(d, r)[judgement].1, Verdict::Fail(_)))
                    .map(|r| r.name.to_string())
                    .collect()
            };
            let failing = failing_where(0);
            let status = if d.error.is_some() {
                total.errors += 1;
                "error"
            } else if failing.is_empty() {
                total.pass += 1;
                "pass"
            } else {
                total.fails += 1;
                "fails"
            };
            DesignReport {
                design: d.path.clone(),
                id: d.id.clone(),
                status,
                error: d.error.as_ref().map(|(_, m)| m.clone()),
                failing,
                failing_at_corner: failing_where(1),
                failing_yield: failing_where(2),
                monte_carlo_runs: d.monte_carlo_runs,
                min_yield: d.min_yield,
                requirements: d.requirements.iter().map(results::requirement).collect(),
            }
        })
        .collect();
    let report = CheckReport { tool: results::tool(), designs: reports, total };
    let mut text = serde_json::to_string_pretty(&report).unwrap_or_default();
    text.push('\n');
    text
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn xml_text_is_escaped_and_control_characters_dropped() {
        assert_eq!(
            xml("a<b & \"c\" 'd'>\u{1b}[31m"),
            "a&lt;b &amp; &quot;c&quot; &apos;d&apos;&gt;[31m"
        );
    }
}
