//! Progress bars for long stages: one bar per stage, drawn on stderr only when it is a
//! terminal (indicatif hides itself otherwise), so logs and tests stay clean.

use indicatif::{ProgressBar, ProgressStyle};

/// A bar for a stage counted in `unit`s; `set(done, total)` updates it.
pub struct StageBar {
    bar: ProgressBar,
}

impl StageBar {
    pub fn new(label: &str, unit: &str) -> Self {
        let bar = ProgressBar::new(1);
        let template = format!("{{msg:>22}} [{{bar:32}}] {{pos}}/{{len}} {unit}, {{elapsed}}");
        bar.set_style(
            ProgressStyle::with_template(&template)
                .unwrap_or_else(|_| ProgressStyle::default_bar())
                .progress_chars("=> "),
        );
        bar.set_message(label.to_string());
        StageBar { bar }
    }

    pub fn set(&self, done: usize, total: usize) {
        self.bar.set_length(total.max(1) as u64);
        self.bar.set_position(done as u64);
    }

    pub fn finish(&self) {
        self.bar.finish_and_clear();
    }
}
