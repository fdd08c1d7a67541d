//! Progress on stderr: a bar on a terminal, `progress: NN%` lines (at most one a second) otherwise.

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
    last_percent: u32,
}

impl Progress {
    /// A reporter for the current stderr; `quiet` silences it.
    pub fn new(quiet: bool) -> Self {
        let mode = if quiet {
            Mode::Silent
        } else if std::io::stderr().is_terminal() {
            let bar = indicatif::ProgressBar::new(100);
            if let Ok(style) = indicatif::ProgressStyle::with_template("{bar:40} {pos:>3}% {msg}") {
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
                last_percent: 0,
            }),
        }
    }

    /// A reporter that prints nothing (for tests and library use).
    pub fn silent() -> Self {
        Self::new(true)
    }

    /// Records that `fraction` (0..=1) of the work is done.
    pub fn set(&self, fraction: f64) {
        let percent = (fraction.clamp(0.0, 1.0) * 100.0).floor() as u32;
        let Ok(mut state) = self.state.lock() else {
            return;
        };
        if percent <= state.last_percent && percent != 0 {
            return;
        }
        state.last_percent = percent;
        match &self.mode {
            Mode::Silent => {}
            Mode::Bar(bar) => bar.set_position(u64::from(percent)),
            Mode::Lines => {
                let due = state
                    .last_line
                    .is_none_or(|t| t.elapsed() >= Duration::from_secs(1));
                if due || percent == 100 {
                    eprintln!("progress: {percent}%");
                    state.last_line = Some(Instant::now());
                }
            }
        }
    }

    /// Marks the work finished and clears the bar.
    pub fn finish(&self) {
        if let Mode::Bar(bar) = &self.mode {
            bar.finish_and_clear();
        }
    }
}
