//! The resampling progress bar: drawn on standard error when it is a terminal, else silent.

use fdtemp::common::Progress;
use std::io::IsTerminal;

/// An indicatif bar behind the library's [`Progress`] trait; `None` off a terminal.
pub struct Bar(Option<indicatif::ProgressBar>, &'static str);

impl Bar {
    pub fn new() -> Self {
        Self::labelled("resampling")
    }
    /// A bar whose line starts with `label`.
    pub fn labelled(label: &'static str) -> Self {
        Bar(
            std::io::stderr()
                .is_terminal()
                .then(indicatif::ProgressBar::hidden),
            label,
        )
    }
}

impl Progress for Bar {
    fn start(&self, total: u64) {
        if let Some(b) = &self.0 {
            b.set_length(total);
            b.set_style(
                indicatif::ProgressStyle::with_template(&format!(
                    "{} {{bar:40}} {{pos}}/{{len}} {{eta}}",
                    self.1
                ))
                .unwrap_or_else(|_| indicatif::ProgressStyle::default_bar()),
            );
            b.set_draw_target(indicatif::ProgressDrawTarget::stderr());
        }
    }
    fn advance(&self, n: u64) {
        if let Some(b) = &self.0 {
            b.inc(n);
        }
    }
    fn note(&self, text: &str) {
        eprintln!("{text}");
    }
    fn finish(&self) {
        if let Some(b) = &self.0 {
            b.finish_and_clear();
        }
    }
}
