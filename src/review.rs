//! The library's entry point: a validated design in, its whole [`Review`] out — the
//! analysis, the tolerance study (sensitivities, worst case, Monte Carlo), the requirement
//! checks with their corners and yields, the cautions that apply and the computed
//! explanation of both cut-offs.
//!
//! It drives the stages in order (analysis, then the report stage's cautions and
//! explanation) and does no I/O: no files, no terminal, no clock. Every command of the CLI
//! that needs a review (`check`, `render`, `diff`, `verify`, watch mode) gets it here, and
//! every output format is written from it.

use crate::analysis::requirements::{self, RequirementCheck};
use crate::analysis::tolerance::{self, Study};
use crate::analysis::{self, Analysis, AnalysisError, Progress, Stage};
use crate::design::Design;
use crate::report::cautions::{self, Caution};
use crate::report::explain::{self, Explanation};

/// How to review.
pub struct ReviewOptions<'a> {
    /// Monte Carlo runs (0 skips Monte Carlo; the sensitivities and worst case still run).
    pub runs: u32,
    /// Called at each stage and now and then within the counted ones (sensitivities,
    /// Monte Carlo) with how far the review is.
    pub progress: &'a (dyn Fn(Progress) + Sync),
}

impl ReviewOptions<'_> {
    /// The design's own Monte Carlo count, or `runs` when given, with no progress report.
    pub fn quiet(design: &Design, runs: Option<u32>) -> ReviewOptions<'static> {
        ReviewOptions { runs: runs.unwrap_or(design.analysis.monte_carlo_runs), progress: &|_| {} }
    }
}

/// Everything the review says of a design.
#[derive(Clone, Debug)]
pub struct Review {
    /// The nominal analysis.
    pub analysis: Analysis,
    /// Sensitivities, worst case and Monte Carlo.
    pub study: Study,
    /// Each requirement at nominal values, at its tolerance corner and as a yield.
    pub requirements: Vec<RequirementCheck>,
    /// The cautions that apply.
    pub cautions: Vec<Caution>,
    /// Which capacitor sets each cut-off, and which estimate to trust.
    pub explanation: Explanation,
    /// The what-if answers: the sweeps and limits the design asks.
    pub what_if: crate::analysis::what_if::WhatIfReport,
}

impl Review {
    /// True when a requirement fails at nominal values.
    pub fn failing(&self) -> bool {
        self.requirements.iter().any(|c| !c.pass)
    }

    /// The names of the requirements that fail at nominal values.
    pub fn failing_names(&self) -> Vec<&'static str> {
        self.requirements.iter().filter(|c| !c.pass).map(|c| c.name).collect()
    }
}

/// Reviews `design`: one nominal analysis, the tolerance study around it, the requirement
/// checks, the cautions and the explanation.
pub fn review(design: &Design, options: &ReviewOptions) -> Result<Review, AnalysisError> {
    (options.progress)(Progress { stage: Stage::Analysis, done: 0, total: 0 });
    let analysis = analysis::analyze(design)?;
    let nominal = analysis.metrics(&design.requirements);
    let names = analysis.device_names();
    let study = tolerance::study(design, &nominal, &names, options.runs, options.progress);
    let mut checks = requirements::check(&design.requirements, &analysis);
    requirements::with_study(&mut checks, &study);
    let cautions = cautions::cautions(design, &analysis);
    let fixed: Vec<String> =
        design.parts.iter().filter(|p| p.is_fixed()).map(|p| p.name.clone()).collect();
    let asked = crate::report::port_words::Asked::of(&design.requirements);
    let explanation = explain::explain(&analysis, Some(&study), &fixed, asked);
    let what_if = crate::analysis::what_if::review(design);
    Ok(Review { analysis, study, requirements: checks, cautions, explanation, what_if })
}

#[cfg(test)]
mod tests {

    /// The progress reports come stage by stage in order, each counted stage from 0 to its
    /// total: what a progress display relies on.
    #[test]
    fn progress_is_reported_stage_by_stage() {
        let text = std::fs::read_to_string("designs/rx-preamp-ce.yaml").unwrap();
        let d = crate::design::load(&text).design.unwrap();
        let seen = std::sync::Mutex::new(Vec::new());
        let record = |p: Progress| seen.lock().unwrap().push(p);
        review(&d, &ReviewOptions { runs: 200, progress: &record }).unwrap();
        let seen = seen.into_inner().unwrap();
        let stages: Vec<Stage> = seen.iter().map(|p| p.stage).fold(Vec::new(), |mut v, s| {
            if v.last() != Some(&s) {
                v.push(s);
            }
            v
        });
        assert_eq!(
            stages,
            [Stage::Analysis, Stage::Sensitivities, Stage::WorstCase, Stage::MonteCarlo]
        );
        let levers = tolerance::levers(&d).len() as u64;
        for p in &seen {
            assert!(p.done <= p.total || p.total == 0, "{p:?}");
            match p.stage {
                Stage::Sensitivities => assert_eq!(p.total, levers),
                Stage::MonteCarlo => assert_eq!(p.total, 200),
                Stage::Analysis | Stage::WorstCase => assert_eq!((p.done, p.total), (0, 0)),
            }
        }
        assert!(seen.iter().any(|p| p.stage == Stage::MonteCarlo && p.done == 192), "{seen:?}");
    }

    use super::*;

    /// The nominal figures the study starts from are read off the analysis; they must be the
    /// numbers the lean evaluation computes for the same design, on every example.
    #[test]
    fn the_analysis_and_the_lean_evaluation_agree_on_every_example() {
        for entry in std::fs::read_dir("designs").unwrap() {
            let path = entry.unwrap().path();
            if path.extension().is_none_or(|e| e != "yaml") {
                continue; // designs/house: read under its project file, tested in the suite
            }
            let design = crate::design::load(&std::fs::read_to_string(&path).unwrap())
                .design
                .unwrap_or_else(|| panic!("{} reads", path.display()));
            let full = analysis::analyze(&design).unwrap();
            let lean = analysis::metrics(&design).unwrap();
            assert_eq!(full.metrics(&design.requirements), lean, "{}", path.display());
            assert!(lean.f_high.is_some() && lean.gain > 0.0, "{}", path.display());
        }
    }
}
