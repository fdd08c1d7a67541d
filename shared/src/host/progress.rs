//! Progress on stderr: a bar on a terminal; otherwise one JSON object per line, at most one a
//! second, in a format of our own that a GIS or the service can read:
//!
//! ```text
//! {"progress":0.42,"phase":"replicates","done":420,"total":999}
//! ```
//!
//! `progress` is the fraction of the whole run done (0..=1, never decreasing, the last line is
//! 1); `phase` names the current step; `done` and `total` count the phase's own units when the
//! tool knows them (they are left out otherwise).

use std::io::IsTerminal;
use std::sync::Mutex;
use std::time::{Duration, Instant};

/// Reports the fraction of work done. Cheap to call often; safe to share across threads.
pub struct Progress {
    mode: Mode,
    state: Mutex<State>,
}

enum Mode {
    Silent,
    Bar(indicatif::ProgressBar),
    Lines,
}

struct State {
    last_line: Option<Instant>,
    /// Fraction done in thousandths (the resolution of the lines).
    last_milli: u32,
    phase: String,
    counts: Option<(u64, u64)>,
    finished: bool,
}

/// One progress line, as printed when stderr is not a terminal.
pub fn progress_line(fraction: f64, phase: &str, counts: Option<(u64, u64)>) -> String {
    let mut line = serde_json::json!({
        "progress": (fraction.clamp(0.0, 1.0) * 1000.0).floor() / 1000.0,
        "phase": phase,
    });
    if let Some((done, total)) = counts {
        line["done"] = done.into();
        line["total"] = total.into();
    }
    line.to_string()
}

impl Progress {
    /// A reporter for the current stderr; `quiet` silences it.
    pub fn new(quiet: bool) -> Self {
        let mode = if quiet {
            Mode::Silent
        } else if std::io::stderr().is_terminal() {
            let bar = indicatif::ProgressBar::new(1000);
            if let Ok(style) =
                indicatif::ProgressStyle::with_template("{bar:40} {percent:>3}% {msg}")
            {
                bar.set_style(style);
            }
            Mode::Bar(bar)
        } else {
            Mode::Lines
        };
        Progress {
            mode,
            state: Mutex::new(State {
                last_line: None,
                last_milli: 0,
                phase: "start".into(),
                counts: None,
                finished: false,
            }),
        }
    }

    /// A reporter that prints nothing (for tests and library use).
    pub fn silent() -> Self {
        Self::new(true)
    }

    /// Names the step the tool is in (`reading`, `replicates`, `writing`, …); the next line shows
    /// it. Counts of the previous phase are cleared.
    pub fn phase(&self, name: &str) {
        let Ok(mut state) = self.state.lock() else {
            return;
        };
        if state.phase != name {
            state.phase = name.to_string();
            state.counts = None;
            if let Mode::Bar(bar) = &self.mode {
                bar.set_message(name.to_string());
            }
            // A new phase is worth a line even inside the one-second window.
            state.last_line = None;
        }
    }

    /// Records that `fraction` (0..=1) of the whole run is done.
    pub fn set(&self, fraction: f64) {
        self.update(fraction, None);
    }

    /// Records `fraction` of the whole run done, and `done` of `total` units of the phase.
    pub fn set_counted(&self, fraction: f64, done: u64, total: u64) {
        self.update(fraction, Some((done, total)));
    }

    fn update(&self, fraction: f64, counts: Option<(u64, u64)>) {
        let milli = (fraction.clamp(0.0, 1.0) * 1000.0).floor() as u32;
        let Ok(mut state) = self.state.lock() else {
            return;
        };
        if state.finished {
            return;
        }
        if counts.is_some() {
            state.counts = counts;
        }
        let fresh_phase = state.last_line.is_none();
        if milli <= state.last_milli && !fresh_phase {
            return;
        }
        let milli = milli.max(state.last_milli);
        state.last_milli = milli;
        match &self.mode {
            Mode::Silent => {}
            Mode::Bar(bar) => bar.set_position(u64::from(milli)),
            Mode::Lines => {
                let due = state
                    .last_line
                    .is_none_or(|t| t.elapsed() >= Duration::from_secs(1));
                if due {
                    let f = f64::from(milli) / 1000.0;
                    super::print_stderr(&progress_line(f, &state.phase, state.counts));
                    state.last_line = Some(Instant::now());
                }
            }
        }
    }

    /// Marks the work finished: the last line says 1 (`"phase":"done"`); the bar is cleared.
    pub fn finish(&self) {
        let Ok(mut state) = self.state.lock() else {
            return;
        };
        if state.finished {
            return;
        }
        state.finished = true;
        match &self.mode {
            Mode::Silent => {}
            Mode::Bar(bar) => bar.finish_and_clear(),
            Mode::Lines => super::print_stderr(&progress_line(1.0, "done", None)),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::progress_line;

    #[test]
    fn a_line_is_one_json_object_with_the_documented_keys() {
        let line = progress_line(0.4219, "replicates", Some((420, 999)));
        let v: serde_json::Value = serde_json::from_str(&line).expect("json");
        assert_eq!(v["progress"], 0.421);
        assert_eq!(v["phase"], "replicates");
        assert_eq!(v["done"], 420);
        assert_eq!(v["total"], 999);
        let v: serde_json::Value =
            serde_json::from_str(&progress_line(2.0, "writing", None)).expect("json");
        assert_eq!(v["progress"], 1.0);
        assert!(v.get("done").is_none());
    }
}
