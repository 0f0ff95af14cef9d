//! A one-line progress bar on stderr for calls that report progress (`progress.subscribe`).
//!
//! Drawn only where someone watches: by default when stderr is a terminal, so that piped
//! and logged output stays clean.

use mobilis_client::ProgressEvent;
use std::io::{IsTerminal, Write};

/// When to draw the bar.
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum ProgressMode {
    /// When stderr is a terminal.
    Auto,
    Always,
    Never,
}

/// The bar of one call.
pub struct ProgressBar {
    enabled: bool,
    title: String,
    drawn: usize,
}

/// Characters of the bar itself, between the brackets.
const BAR_WIDTH: usize = 28;
/// Longest line drawn, so that the bar fits an 80-column terminal.
const LINE_WIDTH: usize = 79;

impl ProgressBar {
    pub fn new(mode: ProgressMode) -> ProgressBar {
        let enabled = match mode {
            ProgressMode::Always => true,
            ProgressMode::Never => false,
            ProgressMode::Auto => {
                std::io::stderr().is_terminal() && std::env::var("TERM").map_or(true, |t| t != "dumb")
            }
        };
        ProgressBar {
            enabled,
            title: String::new(),
            drawn: 0,
        }
    }

    /// Redraws the bar for an event; clears it when the call ends.
    pub fn update(&mut self, event: &ProgressEvent) {
        if !self.enabled {
            return;
        }
        match event {
            ProgressEvent::Begin { title, .. } => {
                self.title = title.clone();
                self.draw(&render_line(0.0, title));
            }
            ProgressEvent::Report { fraction, message, .. } => {
                let text = if message.is_empty() {
                    self.title.clone()
                } else {
                    message.clone()
                };
                self.draw(&render_line(*fraction, &text));
            }
            ProgressEvent::End { .. } => self.clear(),
        }
    }

    fn draw(&mut self, line: &str) {
        let mut stderr = std::io::stderr().lock();
        let padding = self.drawn.saturating_sub(line.chars().count());
        let _ = write!(stderr, "\r{line}{}", " ".repeat(padding));
        let _ = stderr.flush();
        self.drawn = line.chars().count();
    }

    fn clear(&mut self) {
        if self.drawn > 0 {
            let mut stderr = std::io::stderr().lock();
            let _ = write!(stderr, "\r{}\r", " ".repeat(self.drawn));
            let _ = stderr.flush();
            self.drawn = 0;
        }
    }
}

impl Drop for ProgressBar {
    fn drop(&mut self) {
        self.clear();
    }
}

/// `[##########..................]  36% message`, cut to [`LINE_WIDTH`] characters.
pub fn render_line(fraction: f64, message: &str) -> String {
    let fraction = if fraction.is_finite() {
        fraction.clamp(0.0, 1.0)
    } else {
        0.0
    };
    let filled = (fraction * BAR_WIDTH as f64).round() as usize;
    let line = format!(
        "[{}{}] {:>3.0}% {message}",
        "#".repeat(filled),
        ".".repeat(BAR_WIDTH - filled),
        fraction * 100.0
    );
    line.chars().take(LINE_WIDTH).collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_line_shows_the_fraction_as_bar_and_percent() {
        assert_eq!(render_line(0.0, "start"), format!("[{}]   0% start", ".".repeat(28)));
        assert_eq!(
            render_line(0.5, "half"),
            format!("[{}{}]  50% half", "#".repeat(14), ".".repeat(14))
        );
        assert_eq!(render_line(1.0, ""), format!("[{}] 100% ", "#".repeat(28)));
    }

    #[test]
    fn out_of_range_fractions_and_long_messages_are_tamed() {
        assert!(render_line(1.7, "x").contains("100%"));
        assert!(render_line(f64::NAN, "x").contains("  0%"));
        assert_eq!(render_line(0.2, &"m".repeat(300)).chars().count(), LINE_WIDTH);
    }
}
