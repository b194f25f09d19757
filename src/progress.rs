//! Progress while a run steps: a bar on a terminal, a log line every few seconds otherwise.

use std::io::IsTerminal;
use std::time::{Duration, Instant};

use indicatif::{ProgressBar, ProgressDrawTarget, ProgressStyle};

/// Seconds between log lines when stderr is not a terminal.
const LOG_EVERY: Duration = Duration::from_secs(10);

/// Shows how far a run is.
pub struct Progress {
    bar: Option<ProgressBar>,
    log: bool,
    last_log: Instant,
    end: f64,
    steps: usize,
}

/// Resolution of the bar (simulated time is mapped to this many ticks).
const TICKS: u64 = 10_000;

impl Progress {
    /// Progress towards time `end`, starting at `t0`; silent when `quiet`.
    pub fn new(t0: f64, end: f64, quiet: bool) -> Self {
        let terminal = std::io::stderr().is_terminal();
        let bar = (!quiet && terminal).then(|| {
            let bar = ProgressBar::with_draw_target(Some(TICKS), ProgressDrawTarget::stderr());
            let style = ProgressStyle::with_template(
                "{bar:30} {percent:>3}%  {msg}  elapsed {elapsed_precise}  eta {eta}",
            )
            .unwrap_or_else(|_| ProgressStyle::default_bar());
            bar.set_style(style);
            bar.set_position(ticks(t0, end));
            bar
        });
        Self {
            bar,
            log: !quiet && !terminal,
            last_log: Instant::now(),
            end,
            steps: 0,
        }
    }

    /// After an accepted step.
    pub fn step(&mut self, t: f64, dt: f64) {
        self.steps += 1;
        let msg = format!("t = {t:.4e}  steps {}  dt {dt:.2e}", self.steps);
        if let Some(bar) = &self.bar {
            bar.set_position(ticks(t, self.end));
            bar.set_message(msg);
        } else if self.log && self.last_log.elapsed() >= LOG_EVERY {
            self.last_log = Instant::now();
            eprintln!("  {msg}");
        }
    }

    /// A line that must not be overdrawn by the bar.
    pub fn println(&self, line: &str) {
        match &self.bar {
            Some(bar) => bar.println(line),
            None if self.log => eprintln!("{line}"),
            None => {}
        }
    }

    /// Removes the bar.
    pub fn finish(&self) {
        if let Some(bar) = &self.bar {
            bar.finish_and_clear();
        }
    }
}

fn ticks(t: f64, end: f64) -> u64 {
    if end > 0.0 {
        ((t / end).clamp(0.0, 1.0) * TICKS as f64) as u64
    } else {
        TICKS
    }
}
