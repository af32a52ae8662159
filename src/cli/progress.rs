//! The review with a progress display: a long analysis (a large network, a big Monte Carlo)
//! shows on a terminal which stage it is in and how far, once it has run for a second; a
//! quick one, and any run off a terminal, draws nothing (standard error only).

use std::io::IsTerminal;
use std::sync::{Arc, Mutex};
use std::time::Duration;

use indicatif::{ProgressBar, ProgressDrawTarget, ProgressStyle};

use crate::analysis::{AnalysisError, Progress};
use crate::design::Design;
use crate::review::{self, Review, ReviewOptions};

/// How long a review runs before its progress is shown.
const QUIET: Duration = Duration::from_secs(1);

/// Reviews `design` with `runs` Monte Carlo runs, showing its progress on a terminal when it
/// takes longer than [`QUIET`].
pub fn review(design: &Design, runs: u32) -> Result<Review, AnalysisError> {
    review_shown(design, runs, true)
}

/// [`review`], showing no progress when `shown` is false (one of many designs, whose
/// progress the batch shows).
pub fn review_shown(design: &Design, runs: u32, shown: bool) -> Result<Review, AnalysisError> {
    let bar = ProgressBar::with_draw_target(None, ProgressDrawTarget::hidden());
    let counted = ProgressStyle::with_template("{msg:>14} {wide_bar} {pos}/{len} {elapsed}")
        .unwrap_or_else(|_| ProgressStyle::default_bar());
    let uncounted = ProgressStyle::with_template("{msg:>14} {spinner} {elapsed}")
        .unwrap_or_else(|_| ProgressStyle::default_spinner());
    // Finished before the second is up: the display never appears. The lock keeps the
    // showing and the clearing from crossing.
    let finished = Arc::new(Mutex::new(false));
    if shown && std::io::stderr().is_terminal() {
        let (bar, finished) = (bar.clone(), Arc::clone(&finished));
        std::thread::spawn(move || {
            std::thread::sleep(QUIET);
            if let Ok(done) = finished.lock() {
                if !*done {
                    bar.set_draw_target(ProgressDrawTarget::stderr());
                    bar.enable_steady_tick(Duration::from_millis(200));
                }
            }
        });
    }
    let show = |p: Progress| {
        // Each stage starts with a report of nothing done: the moment to restyle.
        if p.done == 0 {
            bar.set_length(p.total);
            bar.set_message(p.stage.name());
            bar.set_style(if p.total == 0 { uncounted.clone() } else { counted.clone() });
        }
        bar.set_position(p.done);
    };
    let review = review::review(design, &ReviewOptions { runs, progress: &show });
    if let Ok(mut f) = finished.lock() {
        *f = true;
        bar.finish_and_clear();
    }
    review
}
