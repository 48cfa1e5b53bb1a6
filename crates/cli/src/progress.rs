//! Progress for people: a bar on a terminal, plain periodic lines in batch logs.

use indicatif::{ProgressBar, ProgressDrawTarget, ProgressStyle};
use spindrift_engine::Monitor;
use std::io::IsTerminal;
use std::time::{Duration, Instant};

/// Interval of log lines when stderr is not a terminal.
const LOG_EVERY: Duration = Duration::from_secs(15);

/// Shows progress on stderr.
pub struct Progress {
    quiet: bool,
    terminal: bool,
    bar: Option<ProgressBar>,
    stage: usize,
    kind: String,
    total: u64,
    unit: String,
    started: Instant,
    last_log: Instant,
}

impl Progress {
    /// Progress on stderr; nothing at all when `quiet`.
    pub fn new(quiet: bool) -> Self {
        Self {
            quiet,
            terminal: std::io::stderr().is_terminal(),
            bar: None,
            stage: 0,
            kind: String::new(),
            total: 0,
            unit: String::new(),
            started: Instant::now(),
            last_log: Instant::now(),
        }
    }
}

impl Monitor for Progress {
    fn stage_begin(&mut self, index: usize, kind: &str, total: u64, unit: &str) {
        self.stage = index;
        self.kind = kind.to_string();
        self.total = total;
        self.unit = unit.to_string();
        self.started = Instant::now();
        self.last_log = Instant::now();
        if self.quiet {
            return;
        }
        if self.terminal {
            let bar = ProgressBar::with_draw_target(Some(total), ProgressDrawTarget::stderr());
            let style = ProgressStyle::with_template(&format!(
                "stage {index} {kind:<16} [{{bar:30}}] {{pos}}/{{len}} {unit}  {{msg}}  {{per_sec}}  eta {{eta}}"
            ))
            .unwrap_or_else(|_| ProgressStyle::default_bar());
            bar.set_style(style.progress_chars("=> "));
            self.bar = Some(bar);
        } else {
            eprintln!("stage {index} {kind}: {total} {unit}");
        }
    }

    fn update(&mut self, done: u64, time: f64, m_abs: f64, charge: f64) {
        if self.quiet {
            return;
        }
        let msg = if time > 0.0 {
            format!("t = {time:.2} ps  |m| = {m_abs:.4}  Q = {charge:.2}")
        } else {
            format!("|m| = {m_abs:.4}  Q = {charge:.2}")
        };
        if let Some(bar) = &self.bar {
            bar.set_position(done.min(self.total));
            bar.set_message(msg);
        } else if self.last_log.elapsed() >= LOG_EVERY {
            self.last_log = Instant::now();
            let frac = if self.total > 0 { 100.0 * done as f64 / self.total as f64 } else { 0.0 };
            eprintln!(
                "stage {} {}: {done}/{} {} ({frac:.0}%), {msg}, {:.0} s",
                self.stage,
                self.kind,
                self.total,
                self.unit,
                self.started.elapsed().as_secs_f64()
            );
        }
    }

    fn stage_end(&mut self, index: usize) {
        if let Some(bar) = self.bar.take() {
            bar.finish_and_clear();
        }
        if !self.quiet {
            eprintln!("stage {index} {} done in {:.1} s", self.kind, self.started.elapsed().as_secs_f64());
        }
    }

    fn note(&mut self, message: &str) {
        if self.quiet {
            return;
        }
        match &self.bar {
            Some(bar) => bar.println(message),
            None => eprintln!("{message}"),
        }
    }
}
