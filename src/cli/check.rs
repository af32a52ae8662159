//! `tauweave check DESIGN`: validates a design file and prints a compact summary of it.
//!
//! Problems go to standard error with their place in the file; the summary and the
//! analysis (operating point, mid-band, both cut-offs with their estimates, the time-constant
//! tables, poles and zeros) go to standard output. Exit 0 when the design reads cleanly
//! (warnings allowed) and its analysis succeeds, 2 when it has errors.

use std::fmt::Write as _;
use std::path::{Path, PathBuf};

use clap::Args;

use crate::analysis::{Analysis, RootHz};
use crate::circuit::operating_point::DeviceState;
use crate::cli::batch::{self, Status};
use crate::cli::progress;
use crate::cli::report_flag;
use crate::cli::source::{analysis_failure, load_file, plural};
use crate::cli::table::{Align, render};
use crate::cli::{Failure, Outcome, out};
use crate::design::{Design, DeviceModel, PartKind};
use crate::notation::{absent, plain, scientific, si};
use crate::report::ci::{self, CheckedDesign};

/// Flags of `tauweave check`.
#[derive(Debug, Args)]
pub struct CheckArgs {
    /// Design files (YAML), folders holding them, or patterns such as `designs/*.yaml`. One
    /// file prints its whole analysis; several print one line each.
    #[arg(required = true, value_name = "DESIGN")]
    pub designs: Vec<PathBuf>,
    /// Monte Carlo runs (overrides the design's `analysis.monte_carlo.runs`; 0 skips it).
    #[arg(long)]
    pub runs: Option<u32>,
    /// Also write the requirement verdicts for CI: `junit FILE` (JUnit XML) or `json FILE`;
    /// `-` as FILE writes to standard output instead of the usual text.
    #[arg(long, num_args = 2, value_names = ["FORMAT", "FILE"])]
    pub report: Option<Vec<String>>,
    /// The template whose worked hand estimates are held against the exact values (default:
    /// the project file's, else the built-in one).
    #[arg(long)]
    pub template: Option<PathBuf>,
}

/// Runs the check: one design in full, several as a batch; then the CI report if asked.
pub fn run(args: &CheckArgs) -> Result<Outcome, Failure> {
    let report = report_flag::parse(&args.report, &["junit", "json"])?;
    let to_stdout = report.as_ref().is_some_and(|r| r.to_stdout());
    let (checked, result) = if batch::is_batch(&args.designs) {
        run_batch(args, to_stdout)?
    } else {
        let design = &args.designs[0];
        let (checked, result) =
            check_one(design, args.runs, !to_stdout, true, args.template.as_ref());
        if report.is_none() {
            return result;
        }
        // A design that cannot be checked is a test case in error in the report, and its
        // message is printed by `main` after the report is written.
        (vec![checked], result)
    };
    if let Some(report) = report {
        let text = if report.format == "junit" { ci::junit(&checked) } else { ci::json(&checked) };
        report.write(&text)?;
    }
    result
}

/// Checks one design: its full text on standard output when `verbose`, and what the CI
/// reports need. The result is the command's as for this design alone.
fn check_one(
    path: &Path,
    runs: Option<u32>,
    verbose: bool,
    shown: bool,
    template: Option<&PathBuf>,
) -> (CheckedDesign, Result<Outcome, Failure>) {
    let mut checked = CheckedDesign {
        path: path.display().to_string(),
        id: None,
        error: None,
        requirements: Vec::new(),
        monte_carlo_runs: 0,
        min_yield: None,
    };
    let result = check_into(path, runs, verbose, shown, &mut checked, template);
    if let Err(f) = &result {
        checked.error = Some((
            ci::without_colour(&batch::gist(f, &path.display().to_string())),
            ci::without_colour(&batch::full_message(f)),
        ));
    }
    (checked, result)
}

fn check_into(
    path: &Path,
    runs: Option<u32>,
    verbose: bool,
    shown: bool,
    checked: &mut CheckedDesign,
    template: Option<&PathBuf>,
) -> Result<Outcome, Failure> {
    let file = load_file(path)?;
    let design = file.design()?;
    checked.id = Some(design.meta.id.clone());
    checked.min_yield = design.analysis.min_yield;
    if verbose {
        eprint!("{}", file.report());
        out(&summary(design, file.loaded.warnings()))?;
        if let Some(p) = &file.project {
            let sets: Vec<&str> = p.project.requirement_sets.keys().map(String::as_str).collect();
            out(&format!(
                "  read under the project file {}{}\n",
                p.name,
                if sets.is_empty() {
                    String::new()
                } else {
                    format!(" (requirement sets: {})", sets.join(", "))
                }
            ))?;
        }
    }
    let runs = runs.unwrap_or(design.analysis.monte_carlo_runs);
    let review = progress::review_shown(design, runs, shown)
        .map_err(|e| Failure::Input(analysis_failure(&file, &e)))?;
    checked.requirements = review.requirements.clone();
    checked.monte_carlo_runs = review.study.monte_carlo.as_ref().map_or(0, |mc| mc.runs as usize);
    if verbose {
        out(&analysis_text(&review.analysis))?;
        out(&requirements_text(&review.requirements, &review.study))?;
        out(&yield_target_text(&review.requirements, design.analysis.min_yield))?;
        out(&what_if_text(&review.what_if))?;
        out(&suggestions_text(&review.what_if))?;
        out(&worked_text(&file, design, &review, template)?)?;
    }
    if review.failing() {
        if verbose {
            let failing = review.failing_names();
            eprintln!("{}: fails {} at nominal values", file.name, failing.join(", "));
        }
        return Ok(Outcome::Failing);
    }
    Ok(Outcome::Done)
}

/// Checks every design named, in parallel: one line each and a total (on standard error
/// when the report takes standard output), the messages of those that could not be checked,
/// and the worst status.
fn run_batch(
    args: &CheckArgs,
    to_stdout: bool,
) -> Result<(Vec<CheckedDesign>, Result<Outcome, Failure>), Failure> {
    let designs = batch::designs(&args.designs)?;
    let results =
        batch::run_all(&designs, "checking", |d| check_one(d, args.runs, false, false, None));
    let mut lines = String::new();
    let mut messages = String::new();
    let mut statuses = Vec::new();
    let mut checked = Vec::new();
    for (c, result) in results {
        let status = Status::of(&result);
        let line = match &result {
            Ok(_) => {
                let failing: Vec<&str> =
                    c.requirements.iter().filter(|r| !r.pass).map(|r| r.name).collect();
                let corner = c.requirements.iter().filter(|r| r.corner_pass == Some(false)).count();
                let mut line = format!("{}  {} requirements", c.path, c.requirements.len());
                if !failing.is_empty() {
                    line.push_str(&format!(", failing at nominal values: {}", failing.join(", ")));
                }
                if corner > 0 {
                    line.push_str(&format!(", {corner} failing at a tolerance corner"));
                }
                let under = c.min_yield.map_or(0, |m| under_target(&c.requirements, m).len());
                if under > 0 {
                    line.push_str(&format!(", {under} under the yield target"));
                }
                line
            }
            Err(f) => {
                messages.push_str(&batch::full_message(f));
                format!("{}  not checked: {}", c.path, batch::gist(f, &c.path))
            }
        };
        let label = match status {
            Status::Pass => "pass",
            Status::Fails => "fails",
            Status::Error | Status::Internal => "error",
        };
        lines.push_str(&format!("{label:<8}{line}\n"));
        statuses.push(status);
        checked.push(c);
    }
    let count = |s: Status| statuses.iter().filter(|x| **x == s).count();
    let errors = count(Status::Error) + count(Status::Internal);
    lines.push_str(&format!(
        "{} design{} checked: {} pass, {} fail a requirement at nominal values, {} not checked\n",
        statuses.len(),
        plural(statuses.len()),
        count(Status::Pass),
        count(Status::Fails),
        errors
    ));
    eprint!("{messages}");
    if to_stdout {
        eprint!("{lines}");
    } else {
        out(&lines)?;
    }
    Ok((checked, batch::outcome(statuses.iter().copied().max(), errors, "design")))
}

/// The suggested part changes, when a requirement fails at nominal values.
pub fn suggestions_text(w: &crate::analysis::what_if::WhatIfReport) -> String {
    let mut out = String::new();
    if w.suggestions.is_empty() {
        return out;
    }
    let _ = writeln!(
        out,
        "\nsuggested changes  (series values by tolerance: E12 at ±10 %, E24 at ±2–10 %, E96 under ±2 %)"
    );
    let (header, rows) = crate::report::what_if::suggestion_rows(w);
    let cols: Vec<(&str, Align)> = header
        .iter()
        .enumerate()
        .map(|(i, h)| (h.as_str(), if i == 1 { Align::Right } else { Align::Left }))
        .collect();
    out.push_str(&render(2, &cols, &rows));
    out
}

/// The what-if block: each limit as a sentence, each sweep as a table.
pub fn what_if_text(w: &crate::analysis::what_if::WhatIfReport) -> String {
    use crate::report::what_if::{corner_rows, limit_sentence, sweep_rows};
    let mut out = String::new();
    if w.sweeps.is_empty() && w.limits.is_empty() && w.corners.is_empty() {
        return out;
    }
    out.push_str("\nwhat if\n");
    if !w.corners.is_empty() {
        let _ = writeln!(out, "  operating corners");
        let (header, rows) = corner_rows(&w.corners);
        let cols: Vec<(&str, Align)> = header
            .iter()
            .enumerate()
            .map(|(i, h)| (h.as_str(), if i == 0 { Align::Left } else { Align::Right }))
            .collect();
        out.push_str(&render(4, &cols, &rows));
    }
    for l in &w.limits {
        let _ = writeln!(out, "  {}", limit_sentence(l).replace("**", "").replace('`', ""));
    }
    for s in &w.sweeps {
        let _ = writeln!(out, "  {} swept", s.quantity);
        let (header, rows) = sweep_rows(s);
        let last = header.len() - 1;
        let cols: Vec<(&str, Align)> = header
            .iter()
            .enumerate()
            .map(|(i, h)| (h.as_str(), if i == last { Align::Left } else { Align::Right }))
            .collect();
        out.push_str(&render(4, &cols, &rows));
        let still = crate::report::what_if::unmoved(s);
        if !still.is_empty() {
            let _ = writeln!(out, "    within 0.1 % across the sweep: {}", still.join(", "));
        }
    }
    out
}

/// The requirement table: nominal, margin, worst corner, yield.
pub fn requirements_text(
    checks: &[crate::analysis::requirements::RequirementCheck],
    study: &crate::analysis::tolerance::Study,
) -> String {
    let mut out = String::new();
    if checks.is_empty() {
        return out;
    }
    let _ = writeln!(out, "\nrequirements");
    let rows: Vec<Vec<String>> =
        checks.iter().map(crate::report::tables::requirement_row).collect();
    out.push_str(&render(
        2,
        &[
            ("", Align::Left),
            ("limit", Align::Left),
            ("nominal", Align::Right),
            ("", Align::Left),
            ("margin", Align::Right),
            ("worst corner", Align::Right),
            ("yield", Align::Right),
        ],
        &rows,
    ));
    if let Some(mc) = &study.monte_carlo {
        let _ = writeln!(
            out,
            "  Monte Carlo: {} runs (seed {}), {} failed to converge; all requirements together: {}",
            mc.runs,
            mc.seed,
            mc.failed_runs.len(),
            mc.yield_all.map_or_else(absent, |y| format!("{} %", plain(y * 100.0, 4)))
        );
    }
    out
}

/// The template's worked hand estimates held against the exact values: each step that
/// estimates a result, and a flag on those outside their stated tolerance. The template is
/// `--template`, else the project file's, else the built-in one.
fn worked_text(
    file: &crate::cli::source::LoadedFile,
    design: &crate::design::Design,
    review: &crate::review::Review,
    template: Option<&PathBuf>,
) -> Result<String, Failure> {
    let house =
        file.project.as_ref().and_then(|p| p.project.template.as_ref().map(|t| p.dir.join(t)));
    let (source, _) = crate::cli::source::template_source(&template.cloned().or(house))?;
    let hashes = crate::report::results::Hashes {
        design: String::new(),
        template: None,
        template_name: None,
    };
    let results = crate::report::results::document(design, review, hashes, &file.name);
    let worked = crate::report::worked::evaluate(&source.name, &source.text, design, &results)
        .map_err(|e| Failure::Input(e.message))?;
    let estimates: Vec<_> = worked.steps.iter().filter(|s| s.estimates.is_some()).collect();
    if estimates.is_empty() {
        return Ok(String::new());
    }
    let mut out = String::from("\nhand estimates (worked in the template)\n");
    for s in estimates {
        let line = crate::report::worked::verdict_line(s);
        let flag = if s.within == Some(false) { "  ← flagged" } else { "" };
        out.push_str(&format!("  {line}{flag}\n"));
    }
    Ok(out)
}

/// The requirements whose Monte Carlo yield is under the design's `min_yield`.
fn under_target(
    checks: &[crate::analysis::requirements::RequirementCheck],
    min: f64,
) -> Vec<&'static str> {
    checks
        .iter()
        .filter(|r| r.yield_fraction.is_some_and(|y| !ci::meets(y, min)))
        .map(|r| r.name)
        .collect()
}

/// One line on the yield target, when the design sets one and a Monte Carlo ran.
fn yield_target_text(
    checks: &[crate::analysis::requirements::RequirementCheck],
    min_yield: Option<f64>,
) -> String {
    let Some(min) = min_yield else { return String::new() };
    if checks.iter().all(|r| r.yield_fraction.is_none()) {
        return String::new();
    }
    let target = format!("{} %", plain(min * 100.0, 4));
    match under_target(checks, min).as_slice() {
        [] => format!("  yield target {target}: every requirement reaches it\n"),
        under => format!("  yield target {target}: not reached by {}\n", under.join(", ")),
    }
}

fn opt_si(v: Option<f64>, unit: &str) -> String {
    v.map_or_else(absent, |v| si(v, unit, 4))
}

fn roots(list: &[RootHz]) -> String {
    if list.is_empty() {
        return "none".to_string();
    }
    // A conjugate pair prints once, as re ± j·im.
    list.iter()
        .filter(|r| r.im_hz >= 0.0)
        .map(|r| {
            if r.im_hz == 0.0 {
                si(r.re_hz, "Hz", 4)
            } else {
                format!("{} ± j{}", si(r.re_hz, "Hz", 4), si(r.im_hz, "Hz", 4))
            }
        })
        .collect::<Vec<_>>()
        .join(", ")
}

/// The analysis as aligned terminal text.
pub fn analysis_text(a: &Analysis) -> String {
    let mut out = String::new();
    if let Some(op) = &a.operating_point {
        let method = match op.method {
            Some(crate::circuit::operating_point::Method::Newton) | None => "Newton",
            Some(crate::circuit::operating_point::Method::GminStepping) => {
                "Newton with gmin stepping"
            }
            Some(crate::circuit::operating_point::Method::SourceStepping) => {
                "Newton with source stepping"
            }
        };
        let _ = writeln!(
            out,
            "\noperating point  ({method}, {} iterations, KCL residual {}, V_T {})",
            op.iterations,
            si(op.kcl_residual_a, "A", 2),
            si(op.thermal_voltage_v, "V", 5)
        );
        let nodes: Vec<Vec<String>> = op
            .nodes
            .iter()
            .filter(|(n, _)| !n.contains('.') && *n != "source")
            .map(|(n, v)| vec![n.clone(), si(*v, "V", 4)])
            .collect();
        out.push_str(&render(2, &[("node", Align::Left), ("voltage", Align::Right)], &nodes));
        if !op.supplies.is_empty() {
            let supplies: Vec<String> = op
                .supplies
                .iter()
                .map(|s| {
                    format!(
                        "{} {} delivers {} ({})",
                        s.node,
                        si(s.voltage_v, "V", 4),
                        si(s.current_a, "A", 4),
                        si(s.power_w, "W", 3)
                    )
                })
                .collect();
            let _ = writeln!(out, "\n  supplies  {}", supplies.join(" · "));
        }
        if !op.stress.is_empty() {
            let rows: Vec<Vec<String>> = op
                .stress
                .iter()
                .map(|s| {
                    let unit = if s.quantity == "power" { "W" } else { "V" };
                    vec![
                        s.part.clone(),
                        si(s.value, unit, 3),
                        si(s.rating, unit, 3),
                        format!("{} %", plain(s.fraction * 100.0, 3)),
                        if s.over() { "over the derating".into() } else { "ok".into() },
                    ]
                })
                .collect();
            out.push('\n');
            out.push_str(&render(
                2,
                &[
                    ("rated part", Align::Left),
                    ("at bias", Align::Right),
                    ("rating", Align::Right),
                    ("of rating", Align::Right),
                    ("", Align::Left),
                ],
                &rows,
            ));
        }
        let mut rows = Vec::new();
        for d in &op.devices {
            let ss = &d.small_signal;
            let (region, current, voltage, c1, c2) = match &d.bias.state {
                DeviceState::Bjt { region, ic_a, vce_v, .. } => (
                    region.label().to_string(),
                    format!("I_C {}", si(*ic_a, "A", 3)),
                    format!("V_CE {}", si(*vce_v, "V", 3)),
                    format!("Cπ {}", opt_si(ss.cpi_f, "F")),
                    format!("Cμ {}", opt_si(ss.cmu_f, "F")),
                ),
                DeviceState::Mosfet { region, id_a, vds_v, .. } => (
                    region.label().to_string(),
                    format!("I_D {}", si(*id_a, "A", 3)),
                    format!("V_DS {}", si(*vds_v, "V", 3)),
                    format!("Cgs {}", opt_si(ss.cgs_f, "F")),
                    format!("Cgd {}", opt_si(ss.cgd_f, "F")),
                ),
            };
            let region = region.replace("cutoff", "cut-off");
            let power = match d.bias.max_power_w {
                Some(max) => format!("{} of {}", si(d.bias.power_w, "W", 3), si(max, "W", 3)),
                None => si(d.bias.power_w, "W", 3),
            };
            rows.push(vec![
                d.bias.part.clone(),
                region,
                current,
                voltage,
                power,
                si(ss.gm_s, "S", 3),
                ss.rpi_ohm.map_or_else(absent, |r| si(r, "Ω", 3)),
                ss.ro_ohm.map_or("∞".into(), |r| si(r, "Ω", 3)),
                c1,
                c2,
            ]);
        }
        let _ = writeln!(out);
        out.push_str(&render(
            2,
            &[
                ("device", Align::Left),
                ("region", Align::Left),
                ("current", Align::Left),
                ("voltage", Align::Left),
                ("dissipation", Align::Left),
                ("gm", Align::Right),
                ("rπ", Align::Right),
                ("ro", Align::Right),
                ("", Align::Left),
                ("", Align::Left),
            ],
            &rows,
        ));
    }
    let m = &a.midband;
    let taken = match &m.band {
        Some(b) => format!(
            "taken at {}, the centre of the {} … {} band",
            si(m.frequency_hz, "Hz", 3),
            si(b.from_hz, "Hz", 3),
            si(b.to_hz, "Hz", 3)
        ),
        None => format!("taken at {}", si(m.frequency_hz, "Hz", 3)),
    };
    let _ = writeln!(out, "\nmid-band  ({taken})");
    let gain_db = m.gain_db.map_or(String::new(), |g| format!("  ({} dB)", plain(g, 4)));
    let _ = writeln!(
        out,
        "  gain    {} V/V{gain_db}  idealised: coupling and bypass shorted, device caps open",
        plain(m.gain, 4)
    );
    if let Some(exact) = m.exact_gain_db {
        let _ = writeln!(out, "  exact   {} dB with every capacitor present", plain(exact, 4));
    }
    if let Some(b) = &m.band {
        let _ = writeln!(
            out,
            "  band    {} dB at {} … {} dB at {}: flatness {} dB",
            plain(b.lowest_gain_db, 4),
            si(b.lowest_at_hz, "Hz", 3),
            plain(b.highest_gain_db, 4),
            si(b.highest_at_hz, "Hz", 3),
            plain(b.flatness_db, 3)
        );
    }
    let _ = writeln!(out, "  R_in    {}", opt_si(m.input_resistance_ohm, "Ω"));
    let _ = writeln!(out, "  R_out   {}", opt_si(m.output_resistance_ohm, "Ω"));

    let h = &a.high;
    let _ = writeln!(out, "\nupper cut-off");
    if h.octc.caps.is_empty() {
        let _ = writeln!(
            out,
            "  none: the design has no high-frequency capacitance, so nothing limits the \
             bandwidth at the high end"
        );
    } else {
        let est = crate::report::tables::high_estimate_rows(h);
        out.push_str(&render(
            2,
            &[("", Align::Left), ("f_high", Align::Right), ("error", Align::Right)],
            &est,
        ));
    }
    if let Some(d) = h.dominance_ratio {
        let _ = writeln!(
            out,
            "  |p2/p1| = {}   b1 = {}   b2 = {}",
            plain(d, 3),
            h.b1_s.map_or_else(absent, |b| si(b, "s", 4)),
            h.b2_s2.map_or_else(absent, |b| scientific(b, "s²", 4))
        );
    }
    if let Some(p) = &h.peaking {
        let _ = writeln!(out, "  peaking {} dB at {}", plain(p.peak_db, 3), si(p.at_hz, "Hz", 3));
    }
    let rows = crate::report::tables::octc_rows(h);
    if !rows.is_empty() {
        let _ = writeln!(out);
        out.push_str(&render(
            2,
            &[
                ("open-circuit", Align::Left),
                ("C", Align::Right),
                ("R seen", Align::Right),
                ("τ", Align::Right),
                ("share", Align::Right),
                ("Miller", Align::Right),
            ],
            &rows,
        ));
    }

    let l = &a.low;
    let _ = writeln!(out, "\nlower cut-off");
    if l.sctc.caps.is_empty() {
        let _ =
            writeln!(out, "  none: no coupling or bypass capacitor, so the response extends to DC");
    } else {
        let est = crate::report::tables::low_estimate_rows(l);
        out.push_str(&render(
            2,
            &[("", Align::Left), ("f_low", Align::Right), ("error", Align::Right)],
            &est,
        ));
    }
    let rows = crate::report::tables::sctc_rows(l);
    if !rows.is_empty() {
        let _ = writeln!(out);
        out.push_str(&render(
            2,
            &[
                ("short-circuit", Align::Left),
                ("C", Align::Right),
                ("R seen", Align::Right),
                ("τ", Align::Right),
                ("share", Align::Right),
            ],
            &rows,
        ));
    }
    if let Some(n) = &a.noise {
        out.push_str(&noise_block(n));
    }
    if let Some(l) = &a.large_signal {
        out.push_str(&signal_block(l));
    }
    if let Some(p) = &a.ports {
        out.push_str(&ports_block(p));
    }
    if let Some(s) = &a.step {
        let rule = s.rule_of_thumb_s.map_or(String::new(), |r| {
            format!(
                " (0.35/f_H = {}, {} off)",
                si(r, "s", 4),
                signed_share(r / s.rise_time_s - 1.0)
            )
        });
        let settle = s.settling_time_s.map_or_else(absent, |t| si(t, "s", 4));
        let _ = writeln!(
            out,
            "\nstep   rise {}{rule}; overshoot {} %; settles to {} % in {}",
            si(s.rise_time_s, "s", 4),
            plain(100.0 * s.overshoot, 3),
            plain(100.0 * s.settling_band, 2),
            settle
        );
    }
    if let Some(g) = &a.group_delay {
        let _ = writeln!(
            out,
            "delay  {} at the centre of {} … {}, varying {} across it",
            si(g.centre_s, "s", 4),
            si(g.from_hz, "Hz", 3),
            si(g.to_hz, "Hz", 3),
            si(g.variation_s(), "s", 3)
        );
    }
    let _ = writeln!(out, "\npoles  {}", roots(&a.poles));
    let _ = writeln!(out, "zeros  {}", roots(&a.zeros));
    out
}

/// The signal-handling block: each side's swing and what ends it, the distortion at the
/// stated amplitude, compression, intercept and dynamic range.
fn signal_block(l: &crate::analysis::large_signal::LargeSignalReport) -> String {
    let mut out = String::new();
    let _ = writeln!(
        out,
        "\nsignal handling  (quasi-static at {}{})",
        si(l.frequency_hz, "Hz", 3),
        if l.well_inside_band { "" } else { ", within a decade of a cut-off" }
    );
    let s = &l.output_swing;
    for (label, swing, limit) in
        [("rising ", s.positive_v, &s.positive_limit), ("falling", s.negative_v, &s.negative_limit)]
    {
        let (Some(v), Some(limit)) = (swing, limit) else { continue };
        let _ = writeln!(
            out,
            "  swing {label}  {}  until {} {} at `{}` (source EMF {})",
            si(v, "V", 4),
            limit.part,
            limit.edge.verb(),
            limit.node,
            si(limit.input_v, "V", 4)
        );
    }
    if let Some(d) = &l.distortion {
        let db = |v: Option<f64>| v.map_or_else(absent, |v| format!("{} dB", plain(v, 4)));
        let _ = writeln!(
            out,
            "  at {} peak  THD {} %, HD2 {}, HD3 {}",
            si(d.amplitude_v, "V", 4),
            plain(d.thd_percent, 4),
            db(d.hd2_db),
            db(d.hd3_db)
        );
    }
    if !l.unwatched.is_empty() {
        let _ = writeln!(
            out,
            "  not watched    {} (outside the normal region at the bias)",
            l.unwatched.join(", ")
        );
    }
    let volts = |v: Option<f64>| v.map_or_else(absent, |v| si(v, "V", 4));
    let _ = writeln!(
        out,
        "  1 dB compression {} peak at the source; IIP3 {} (extrapolated)",
        volts(l.compression_1db_input_v),
        volts(l.iip3_v)
    );
    if let Some(dr) = l.dynamic_range_db {
        let _ = writeln!(out, "  dynamic range    {} dB (band noise to compression)", plain(dr, 4));
    }
    out
}

/// The ports block: the impedances with the design's terminations, the scattering
/// parameters' headline figures at the spot frequency, and stability over the sweep.
fn ports_block(p: &crate::analysis::ports::PortsReport) -> String {
    let mut out = String::new();
    let reference = if p.reference_stated { "" } else { ", by default: the design states none" };
    let _ = writeln!(out, "\nports  (Z₀ = {}{reference})", si(p.reference_ohm, "Ω", 4));
    let z = |z: faer::c64| {
        let sign = if z.im < 0.0 { "−" } else { "+" };
        format!("{} {sign} j{}", si(z.re, "Ω", 4), si(z.im.abs(), "Ω", 4))
    };
    let db = |v: Option<f64>| v.map_or_else(absent, |v| format!("{} dB", plain(v, 4)));
    if let Some(q) = &p.spot {
        let _ = writeln!(out, "  at {}", si(q.frequency_hz, "Hz", 4));
        let _ = writeln!(out, "  Z_in          {}  (with the design's load)", z(q.z_in));
        let _ = writeln!(out, "  Z_out         {}  (with the design's source)", z(q.z_out));
        let s21 = q.s[1].norm();
        let _ = writeln!(
            out,
            "  |S21|         {}; return loss in {}, out {}; isolation {}",
            db((s21 > 0.0).then(|| 20.0 * s21.log10())),
            db(q.input_return_loss_db()),
            db(q.output_return_loss_db()),
            db(q.reverse_isolation_db())
        );
    }
    if let Some(b) = &p.band {
        let worst = |v: Option<(f64, f64)>| {
            v.map_or_else(absent, |(db, f)| format!("{} dB at {}", plain(db, 4), si(f, "Hz", 4)))
        };
        let _ = writeln!(
            out,
            "  worst match across {} … {}: return loss in {}, out {}",
            si(b.from_hz, "Hz", 4),
            si(b.to_hz, "Hz", 4),
            worst(b.input_return_loss_db),
            worst(b.output_return_loss_db)
        );
    }
    let num = |v: Option<f64>| v.map_or_else(absent, |v| plain(v, 4));
    let ranges = p.conditionally_stable();
    let verdict = if ranges.is_empty() {
        "unconditionally stable over the sweep (μ > 1)".to_string()
    } else {
        let list: Vec<String> = ranges
            .iter()
            .map(|(a, b)| format!("{} … {}", si(*a, "Hz", 3), si(*b, "Hz", 3)))
            .collect();
        format!("only conditionally stable (μ < 1) at {}", list.join(", "))
    };
    let _ = writeln!(out, "  K min {}, μ min {}: {verdict}", num(p.k_min()), num(p.mu_min()));
    out
}

/// A signed percentage: `+3.1 %`, `−0.42 %`.
fn signed_share(fraction: f64) -> String {
    crate::notation::signed_percent(fraction, 2)
}

/// How many contributors the noise block lists before summing the rest.
const NOISE_ROWS: usize = 6;

/// The noise block: spot densities, noise figure, the input generators and the optimum
/// source, the band's rms, and who contributes.
fn noise_block(n: &crate::analysis::noise::NoiseReport) -> String {
    let mut out = String::new();
    let _ = writeln!(
        out,
        "\nnoise  (at {}; the {} source resistance at 290 K, every other part at {} °C)",
        si(n.spot_frequency_hz, "Hz", 4),
        si(n.source_resistance_ohm, "Ω", 4),
        plain(n.temperature_k - 273.15, 4)
    );
    let density = |v: Option<f64>, unit: &str| v.map_or_else(absent, |v| si(v, unit, 4));
    let _ = writeln!(out, "  output        {}", si(n.output_density_v_per_rthz, "V/√Hz", 4));
    let _ = writeln!(
        out,
        "  input         {}  referred to the source EMF",
        density(n.input_density_v_per_rthz, "V/√Hz")
    );
    if let (Some(nf), Some(f)) = (n.noise_figure_db, n.noise_factor) {
        let _ = writeln!(out, "  noise figure  {} dB  (F = {})", plain(nf, 4), plain(f, 4));
    }
    if let (Some(e), Some(i)) = (n.e_n_v_per_rthz, n.i_n_a_per_rthz) {
        let optimum = match (n.r_opt_ohm, n.nf_min_db) {
            (Some(r), Some(nf)) => {
                format!("  optimum source {}, {} dB there", si(r, "Ω", 4), plain(nf, 4))
            }
            _ => String::new(),
        };
        let _ =
            writeln!(out, "  e_n, i_n      {}, {}{optimum}", si(e, "V/√Hz", 4), si(i, "A/√Hz", 4));
    }
    if let Some(b) = &n.band {
        let basis = match b.basis {
            crate::analysis::noise::BandBasis::Stated => "the operating band",
            crate::analysis::noise::BandBasis::Cutoffs => "between the cut-offs",
        };
        let _ = writeln!(
            out,
            "  band          {} … {} ({basis}): {} rms at the output, {} rms at the input",
            si(b.start_hz, "Hz", 3),
            si(b.stop_hz, "Hz", 3),
            si(b.output_rms_v, "V", 4),
            si(b.input_rms_v, "V", 4)
        );
    }
    if let (Some(signal), Some(snr)) = (n.signal_rms_v, n.snr_db) {
        let _ = writeln!(
            out,
            "  SNR           {} dB over the band, the signal {} rms at the source EMF",
            plain(snr, 4),
            si(signal, "V", 4)
        );
    }
    let percent = |v: f64| format!("{} %", plain(100.0 * v, 3));
    let mut rows: Vec<Vec<String>> = n
        .contributors
        .iter()
        .take(NOISE_ROWS)
        .map(|c| {
            vec![
                c.part.clone(),
                c.mechanism.describe().to_string(),
                percent(c.share),
                c.band_share.map_or_else(absent, percent),
            ]
        })
        .collect();
    if n.contributors.len() > NOISE_ROWS {
        let rest = &n.contributors[NOISE_ROWS..];
        let band: Option<f64> = rest.iter().map(|c| c.band_share).sum();
        rows.push(vec![
            format!("{} others", rest.len()),
            String::new(),
            percent(rest.iter().map(|c| c.share).sum()),
            band.map_or_else(absent, percent),
        ]);
    }
    let _ = writeln!(out);
    out.push_str(&render(
        2,
        &[
            ("contributor", Align::Left),
            ("mechanism", Align::Left),
            ("share", Align::Right),
            ("in band", Align::Right),
        ],
        &rows,
    ));
    out
}

/// The summary block: identity, then one aligned row per aspect of the design.
pub fn summary(design: &Design, warnings: usize) -> String {
    let m = &design.meta;
    let mut out = String::new();
    let _ = writeln!(out, "{}  rev {}  ·  {}", m.id, m.revision, m.title);
    let mut byline = vec![m.date.clone()];
    if let Some(a) = &m.author {
        byline.push(a.clone());
    }
    byline.push(format!("{} °C", crate::notation::plain(design.temperature_k - 273.15, 4)));
    let _ = writeln!(out, "  {}", byline.join(" · "));
    let _ = writeln!(out);

    let mut rows: Vec<(&str, String, String)> = Vec::new();
    let user_parts: Vec<_> = design.parts.iter().filter(|p| !p.name.starts_with("load.")).collect();
    let mut kinds: Vec<(&str, usize)> = Vec::new();
    for p in &user_parts {
        let k = p.kind.name();
        match kinds.iter_mut().find(|(n, _)| *n == k) {
            Some((_, c)) => *c += 1,
            None => kinds.push((k, 1)),
        }
    }
    let kind_text: Vec<String> = kinds
        .iter()
        .map(|(k, c)| {
            let word = k.replace('_', " ");
            if *c == 1 { format!("1 {word}") } else { format!("{c} {}", plural_word(&word)) }
        })
        .collect();
    rows.push(("parts", user_parts.len().to_string(), kind_text.join(", ")));
    let nodes = design.nodes();
    // A generated network can have thousands of nodes: the first ones and the last name it.
    let shown = if nodes.len() > 16 {
        format!("{} … {}", nodes[..12].join(" "), nodes[nodes.len() - 2..].join(" "))
    } else {
        nodes.join(" ")
    };
    rows.push(("nodes", nodes.len().to_string(), shown));
    let models: Vec<String> = design
        .models
        .iter()
        .map(|m| {
            let ty = match &m.device {
                DeviceModel::Bipolar(b) => format!("{:?}", b.polarity).to_lowercase(),
                DeviceModel::Mos(x) => format!("{:?}", x.polarity).to_lowercase(),
            };
            format!("{} ({ty})", m.name)
        })
        .collect();
    rows.push(("models", models.len().to_string(), models.join(", ")));
    let supplies: Vec<String> = design
        .supplies
        .iter()
        .map(|s| format!("{} {}", s.node, si(s.voltage.nominal, "V", 4)))
        .collect();
    rows.push(("supplies", supplies.len().to_string(), supplies.join(", ")));
    let sig = &design.signal;
    let sig_at = if sig.negative == "gnd" {
        sig.positive.clone()
    } else {
        format!("{}−{}", sig.positive, sig.negative)
    };
    rows.push((
        "signal",
        String::new(),
        format!("{sig_at}, source resistance {}", si(sig.resistance.nominal, "Ω", 4)),
    ));
    let o = &design.output;
    let out_at = if o.negative == "gnd" {
        o.positive.clone()
    } else {
        format!("{}−{}", o.positive, o.negative)
    };
    let loads: Vec<String> = design
        .parts
        .iter()
        .filter(|p| p.name.starts_with("load."))
        .filter_map(|p| match &p.kind {
            PartKind::Resistor { value, .. } => Some(si(value.nominal, "Ω", 4)),
            PartKind::Capacitor { value, .. } => Some(si(value.nominal, "F", 4)),
            _ => None,
        })
        .collect();
    let load_text = if loads.is_empty() {
        "unloaded".to_string()
    } else {
        format!("load {}", loads.join(" ∥ "))
    };
    rows.push(("output", String::new(), format!("{out_at}, {load_text}")));
    if !design.params.is_empty() {
        let params: Vec<String> = design
            .params
            .iter()
            .map(|p| format!("{} = {}", p.name, si(p.value, &p.unit, 4)))
            .collect();
        rows.push(("params", params.len().to_string(), params.join(", ")));
    }
    let reqs: Vec<String> = design
        .requirements
        .items()
        .into_iter()
        .filter_map(|(name, l)| {
            let l = l?;
            let unit = crate::analysis::requirements::unit_of(name);
            let limit = crate::report::tables::requirement_limit(name, unit, l.min, l.max);
            Some(format!("{} {limit}", crate::report::tables::figure_label(name)))
        })
        .collect();
    rows.push(("requirements", reqs.len().to_string(), reqs.join(" · ")));

    let width = rows.iter().map(|(l, _, _)| l.len()).max().unwrap_or(0);
    for (label, count, text) in rows {
        let _ = writeln!(out, "  {label:<width$}  {count:>3}  {text}");
    }
    let _ = writeln!(out);
    let _ =
        writeln!(out, "  design reads cleanly: 0 errors, {warnings} warning{}", plural(warnings));
    out
}

fn plural_word(word: &str) -> String {
    match word {
        "bjt" => "bjts".into(),
        "mosfet" => "mosfets".into(),
        w if w.ends_with('s') => w.to_string(),
        w => format!("{w}s"),
    }
}
