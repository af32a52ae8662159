//! `tauweave new NAME [--kind KIND]`: writes a starter design that checks and renders as it
//! stands — without a kind the plainest (one RC section), else one of the example stages,
//! renamed — to edit into your own. The author is the user's (`--author`, else left as a
//! comment to fill in), the date theirs (`--date`, else today's): never the example's.

use std::path::PathBuf;

use clap::{Args, ValueEnum};

use crate::cli::{Failure, Outcome};

/// The starter stages.
#[derive(Clone, Copy, Debug, PartialEq, Eq, ValueEnum)]
pub enum Kind {
    /// A degenerated common-emitter preamplifier driving a cable.
    CommonEmitter,
    /// A MOSFET common-source post-amplifier.
    CommonSource,
    /// A bipolar cascode IF stage.
    Cascode,
    /// An emitter follower into a capacitive load.
    EmitterFollower,
}

impl Kind {
    fn text(self) -> (&'static str, &'static str) {
        match self {
            Kind::CommonEmitter => {
                ("rx-preamp-ce", include_str!("../../designs/rx-preamp-ce.yaml"))
            }
            Kind::CommonSource => ("post-amp-cs", include_str!("../../designs/post-amp-cs.yaml")),
            Kind::Cascode => ("if-cascode", include_str!("../../designs/if-cascode.yaml")),
            Kind::EmitterFollower => {
                ("follower-cap-load", include_str!("../../designs/follower-cap-load.yaml"))
            }
        }
    }
}

/// The plainest starter: the source through one resistor into a capacitor and a load, one
/// requirement — every section of the format in its simplest form.
const PLAIN: &str = "\
tauweave: 1

design:
  id: plain
  title: One RC section between a source and a load
  revision: A
  date: 2026-01-01
  author: nobody
  purpose: >
    Replace this with what the stage is for. Add parts, a supply and models as the circuit
    needs them; docs/design-format.md lists every key.

signal:
  at: in
  resistance: 600 Ω

output:
  at: out
  load_resistance: 10 kΩ

tolerances:
  resistor: 1 %
  capacitor: 5 %

parts:
  R1: {kind: resistor, value: 10 kΩ, between: [in, out]}
  C1: {kind: capacitor, value: 1 nF, between: [out, gnd], role: load}

requirements:
  upper_cutoff: {min: 20 kHz}

analysis:
  sweep: {start: 10 Hz, stop: 100 MHz, points_per_decade: 20}
  monte_carlo: {runs: 500, seed: 1}
";

/// Flags of `tauweave new`.
#[derive(Debug, Args)]
pub struct NewArgs {
    /// The new design's id (letters, digits, `-`, `_`, `.`); the file is NAME.yaml.
    pub name: String,
    /// Which stage to start from (default: the plainest starter, one RC section).
    #[arg(long, value_enum)]
    pub kind: Option<Kind>,
    /// The design's author (default: left for you to fill in).
    #[arg(long)]
    pub author: Option<String>,
    /// The design's date, YYYY-MM-DD (default: today).
    #[arg(long)]
    pub date: Option<String>,
    /// Folder to write into (default: the current one).
    #[arg(long, default_value = ".")]
    pub dir: PathBuf,
}

/// Writes the starter.
pub fn run(args: &NewArgs) -> Result<Outcome, Failure> {
    let ok = args.name.chars().next().is_some_and(|c| c.is_ascii_alphanumeric())
        && args.name.chars().all(|c| c.is_ascii_alphanumeric() || "-_.".contains(c));
    if !ok {
        return Err(Failure::input(
            format_args!("`{}` cannot be a design id", args.name),
            Some("use letters, digits, '-', '_' and '.', e.g. `line-driver-2`"),
        ));
    }
    let path = args.dir.join(format!("{}.yaml", args.name));
    if path.exists() {
        return Err(Failure::input(
            format_args!("`{}` exists already; nothing was written", path.display()),
            Some("pick another name or remove the file"),
        ));
    }
    let (id, text) = args.kind.map_or(("plain", PLAIN), Kind::text);
    let date = match &args.date {
        Some(d) if is_date(d) => d.clone(),
        Some(d) => {
            return Err(Failure::input(
                format_args!("`{d}` is not a date"),
                Some("write it as YYYY-MM-DD, e.g. `--date 2026-12-05`"),
            ));
        }
        None => today(),
    };
    if args.author.as_deref().is_some_and(|a| a.trim().is_empty() || a.contains('\n')) {
        return Err(Failure::input("the author must be a name on one line", None));
    }
    let author = match &args.author {
        Some(a) => format!("  author: {}\n", serde_json::Value::String(a.clone())),
        None => "  # author: your name\n".to_string(),
    };
    let text: String = text
        .replacen(&format!("  id: {id}\n"), &format!("  id: {}\n", args.name), 1)
        .lines()
        .map(|l| {
            if l.starts_with("  author:") {
                author.clone()
            } else if l.starts_with("  date:") {
                format!("  date: {date}\n")
            } else {
                format!("{l}\n")
            }
        })
        .collect();
    crate::report::write::atomic(&path, text.as_bytes()).map_err(|e| {
        Failure::input(format_args!("cannot write `{}`: {e}", path.display()), None)
    })?;
    eprintln!(
        "wrote {} (a {} starter); check it with `tauweave check {}`",
        path.display(),
        args.kind
            .and_then(|k| k.to_possible_value())
            .map_or_else(|| "plain".to_string(), |v| v.get_name().to_string()),
        path.display()
    );
    Ok(Outcome::Done)
}

/// True for `YYYY-MM-DD` with a month 01–12 and a day 01–31.
fn is_date(s: &str) -> bool {
    let b = s.as_bytes();
    let digits = |r: std::ops::Range<usize>| b[r].iter().all(u8::is_ascii_digit);
    b.len() == 10
        && b[4] == b'-'
        && b[7] == b'-'
        && digits(0..4)
        && digits(5..7)
        && digits(8..10)
        && (1..=12).contains(&s[5..7].parse::<u32>().unwrap_or(0))
        && (1..=31).contains(&s[8..10].parse::<u32>().unwrap_or(0))
}

/// Today's date (UTC) as `YYYY-MM-DD`, from days since 1970 by the proleptic Gregorian
/// calendar (Hinnant's civil-from-days, common practice).
fn today() -> String {
    let secs = std::time::SystemTime::now()
        .duration_since(std::time::UNIX_EPOCH)
        .map_or(0, |d| d.as_secs());
    civil(secs.div_euclid(86_400) as i64)
}

fn civil(days: i64) -> String {
    let z = days + 719_468;
    let era = z.div_euclid(146_097);
    let doe = z - era * 146_097;
    let yoe = (doe - doe / 1460 + doe / 36_524 - doe / 146_096) / 365;
    let doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
    let mp = (5 * doy + 2) / 153;
    let d = doy - (153 * mp + 2) / 5 + 1;
    let m = if mp < 10 { mp + 3 } else { mp - 9 };
    let y = yoe + era * 400 + i64::from(m <= 2);
    format!("{y:04}-{m:02}-{d:02}")
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn days_since_1970_become_civil_dates() {
        // 1970-01-01 is day 0; 2000-03-01 day 11 017; 2026-12-05 day 20 792 (by hand from
        // 365-day years and leap days, common practice).
        assert_eq!(civil(0), "1970-01-01");
        assert_eq!(civil(11_017), "2000-03-01");
        assert_eq!(civil(20_792), "2026-12-05");
        assert!(is_date("2026-12-05") && !is_date("2026-13-01") && !is_date("5.12.2026"));
    }
}
