//! A progress bar on stderr for long work (mode solves), drawn only when
//! stderr is a terminal (cli.md: none otherwise).

use crate::process::solved::Progress;
use std::io::{IsTerminal, Write};
use std::sync::Mutex;
use std::time::{Duration, Instant};

struct State {
    label: String,
    total: usize,
    done: usize,
    started: Instant,
    drawn: Option<Instant>,
}

/// A bar that redraws at most ten times a second.
pub struct TerminalBar {
    state: Mutex<Option<State>>,
    enabled: bool,
}

impl TerminalBar {
    /// A bar on stderr when it is a terminal, else one that draws nothing.
    pub fn stderr() -> TerminalBar {
        TerminalBar {
            state: Mutex::new(None),
            enabled: std::io::stderr().is_terminal(),
        }
    }

    fn draw(st: &State) {
        let width = 30;
        let filled = (width * st.done) / st.total.max(1);
        let line = format!(
            "\r  {} [{}{}] {}/{}  {:.0} s ",
            st.label,
            "#".repeat(filled),
            ".".repeat(width - filled),
            st.done,
            st.total,
            st.started.elapsed().as_secs_f64()
        );
        let mut e = std::io::stderr().lock();
        let _ = e.write_all(line.as_bytes());
        let _ = e.flush();
    }
}

impl Progress for TerminalBar {
    fn start(&self, label: &str, total: usize) {
        if !self.enabled {
            return;
        }
        let st = State {
            label: label.to_owned(),
            total,
            done: 0,
            started: Instant::now(),
            drawn: Some(Instant::now()),
        };
        Self::draw(&st);
        *self.state.lock().unwrap_or_else(|e| e.into_inner()) = Some(st);
    }

    fn done_one(&self) {
        let mut g = self.state.lock().unwrap_or_else(|e| e.into_inner());
        if let Some(st) = g.as_mut() {
            st.done += 1;
            if st
                .drawn
                .is_none_or(|t| t.elapsed() > Duration::from_millis(100))
            {
                st.drawn = Some(Instant::now());
                Self::draw(st);
            }
        }
    }

    fn finish(&self) {
        let mut g = self.state.lock().unwrap_or_else(|e| e.into_inner());
        if g.take().is_some() {
            let mut e = std::io::stderr().lock();
            let _ = e.write_all(format!("\r{}\r", " ".repeat(78)).as_bytes());
            let _ = e.flush();
        }
    }
}
