//! Batch runs at screening scale: read a batch while the last one is fitted
//! on all cores, write in input order, report progress on a terminal. This
//! is the plumbing between a reader (`io`), the silent core (`analysis`) and
//! a view (`view`); it holds no numerics and no command-line flags.

pub mod ic50;
pub mod ki;
pub mod km;
pub mod mode;
pub mod onset;
pub mod plan;
pub mod rates;

use std::io::IsTerminal;

/// A progress bar on stderr, only for a terminal and only once the job has run a second.
pub struct Progress {
    enabled: bool,
    total: Option<u64>,
    started: std::time::Instant,
    bar: Option<indicatif::ProgressBar>,
}

impl Progress {
    /// A bar over `total` bytes (a spinner when unknown), shown only when `wanted` and on a terminal.
    pub fn new(wanted: bool, total: Option<u64>) -> Progress {
        let enabled = wanted && std::io::stderr().is_terminal();
        Progress { enabled, total, started: std::time::Instant::now(), bar: None }
    }

    /// `bytes` of the input have been read.
    pub fn update(&mut self, bytes: u64) {
        if !self.enabled || self.started.elapsed().as_secs_f64() < 1.0 {
            return;
        }
        let bar = self.bar.get_or_insert_with(|| {
            let bar = match self.total {
                Some(t) => indicatif::ProgressBar::new(t),
                None => indicatif::ProgressBar::new_spinner(),
            };
            let style = indicatif::ProgressStyle::with_template("{bar:40} {bytes}/{total_bytes} read, eta {eta}")
                .unwrap_or_else(|_| indicatif::ProgressStyle::default_bar());
            bar.set_style(style);
            bar
        });
        bar.set_position(bytes);
    }

    /// Clears the bar.
    pub fn finish(&mut self) {
        if let Some(bar) = self.bar.take() {
            bar.finish_and_clear();
        }
    }
}

/// A progress bar over a count of jobs (simulated matrices), on stderr and
/// only when it is a terminal.
pub struct CountProgress(Option<indicatif::ProgressBar>);

impl CountProgress {
    /// A bar over `total` jobs, labelled `what`.
    pub fn new(total: u64, what: &str) -> CountProgress {
        if !std::io::stderr().is_terminal() {
            return CountProgress(None);
        }
        let bar = indicatif::ProgressBar::new(total);
        let template = format!("{what} {{bar:40}} {{pos}}/{{len}} matrices, eta {{eta}}");
        let style = indicatif::ProgressStyle::with_template(&template)
            .unwrap_or_else(|_| indicatif::ProgressStyle::default_bar());
        bar.set_style(style);
        CountProgress(Some(bar))
    }

    /// Clears the bar.
    pub fn finish(self) {
        if let Some(bar) = self.0 {
            bar.finish_and_clear();
        }
    }
}

impl crate::analysis::plan::Tick for CountProgress {
    fn tick(&self) {
        if let Some(bar) = &self.0 {
            bar.inc(1);
        }
    }
}
