//! The audit's progress bar on a terminal: cells done, cells failed, elapsed time. Hidden when stderr
//! is not a terminal (indicatif's default), so logs and CI stay clean.

use indicatif::{ProgressBar, ProgressStyle};
use std::sync::atomic::{AtomicU64, Ordering};

pub struct Progress {
    bar: ProgressBar,
    failed: AtomicU64,
}

impl Progress {
    pub fn new(cells: u64) -> Self {
        let bar = ProgressBar::new(cells);
        bar.set_style(
            ProgressStyle::with_template("{elapsed_precise} [{bar:30}] {pos}/{len} cells, {msg}")
                .unwrap_or_else(|_| ProgressStyle::default_bar())
                .progress_chars("=> "),
        );
        bar.set_message("0 failed");
        Progress {
            bar,
            failed: AtomicU64::new(0),
        }
    }

    pub fn cell_done(&self, failed: bool) {
        if failed {
            let f = self.failed.fetch_add(1, Ordering::Relaxed) + 1;
            self.bar.set_message(format!("{f} failed"));
        }
        self.bar.inc(1);
    }

    pub fn finish(&self) {
        self.bar.finish_and_clear();
    }
}
