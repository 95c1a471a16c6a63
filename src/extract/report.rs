//! Progress bars and the peak-memory figure for summaries.

use std::time::Instant;

use indicatif::{ProgressBar, ProgressDrawTarget, ProgressStyle};

/// A progress bar on stderr (drawn only on a terminal) counting sentence pairs.
pub(crate) struct Progress {
    bar: ProgressBar,
    started: Instant,
}

impl Progress {
    /// `total_bytes` is the size of the input whose consumed bytes are reported to
    /// [`Progress::update`]; without it the bar is a spinner.
    pub(crate) fn new(label: &str, total_bytes: Option<u64>, visible: bool) -> Progress {
        let bar = match total_bytes {
            Some(n) => ProgressBar::new(n.max(1)).with_style(
                ProgressStyle::with_template(
                    "{prefix} [{elapsed_precise}] {wide_bar} {percent}% {msg} (ETA {eta})",
                )
                .expect("valid template"),
            ),
            None => ProgressBar::new_spinner().with_style(
                ProgressStyle::with_template("{prefix} [{elapsed_precise}] {spinner} {msg}")
                    .expect("valid template"),
            ),
        };
        bar.set_prefix(label.to_string());
        bar.set_draw_target(if visible {
            ProgressDrawTarget::stderr_with_hz(4)
        } else {
            ProgressDrawTarget::hidden()
        });
        Progress {
            bar,
            started: Instant::now(),
        }
    }

    pub(crate) fn update(&self, bytes: u64, sentences: u64) {
        let secs = self.started.elapsed().as_secs_f64().max(1e-9);
        self.bar.set_position(bytes);
        self.bar.set_message(format!(
            "{sentences} sentence pairs, {:.0}/s",
            sentences as f64 / secs
        ));
    }

    pub(crate) fn finish(&self) {
        self.bar.finish_and_clear();
    }
}

/// The process's peak resident memory in bytes (`VmHWM` in `/proc/self/status`), where the
/// system reports it.
pub fn peak_memory() -> Option<u64> {
    let status = std::fs::read_to_string("/proc/self/status").ok()?;
    let line = status.lines().find(|l| l.starts_with("VmHWM:"))?;
    let kb: u64 = line.split_whitespace().nth(1)?.parse().ok()?;
    Some(kb * 1024)
}
