//! The review with a progress bar: Monte Carlo can take seconds, so a terminal shows how far
//! it is (on standard error, and only for 500 runs or more); elsewhere nothing is drawn.

use std::io::IsTerminal;

use crate::analysis::AnalysisError;
use crate::design::Design;
use crate::review::{self, Review, ReviewOptions};

/// Reviews `design` with `runs` Monte Carlo runs, drawing a progress bar on a terminal.
pub fn review(design: &Design, runs: u32) -> Result<Review, AnalysisError> {
    let bar = if std::io::stderr().is_terminal() && runs >= 500 {
        let b = indicatif::ProgressBar::new(runs as u64);
        b.set_message("Monte Carlo");
        b
    } else {
        indicatif::ProgressBar::hidden()
    };
    let review =
        review::review(design, &ReviewOptions { runs, progress: &|n| bar.set_position(n) });
    bar.finish_and_clear();
    review
}
