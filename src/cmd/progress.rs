//! Progress on stderr: spinners and bars, drawn only on a terminal and
//! never under --quiet.

use super::args::TerminalArgs;

/// A spinner on stderr (terminal only, not under --quiet) for steps of
/// unknown length such as reading a large file.
pub fn spinner(t: &TerminalArgs, what: &str) -> indicatif::ProgressBar {
    use std::io::IsTerminal;
    if t.quiet || !std::io::stderr().is_terminal() {
        return indicatif::ProgressBar::hidden();
    }
    let pb = indicatif::ProgressBar::new_spinner();
    pb.set_message(what.to_string());
    pb.enable_steady_tick(std::time::Duration::from_millis(120));
    pb
}

/// A progress bar on stderr when it is a terminal and --quiet is not given;
/// hidden otherwise.
pub fn progress_bar(t: &TerminalArgs, len: u64, what: &str) -> indicatif::ProgressBar {
    use std::io::IsTerminal;
    if t.quiet || !std::io::stderr().is_terminal() {
        return indicatif::ProgressBar::hidden();
    }
    let pb = indicatif::ProgressBar::new(len);
    pb.set_style(
        indicatif::ProgressStyle::with_template("{msg:>12} [{bar:30}] {pos}/{len} {eta}")
            .expect("static template")
            .progress_chars("=> "),
    );
    pb.set_message(what.to_string());
    pb
}

/// A library test's progress drawn as one bar per test on stderr (hidden
/// under --quiet or off a terminal).
pub struct Bars {
    terminal: TerminalArgs,
    bar: std::sync::Mutex<Option<indicatif::ProgressBar>>,
}

impl Bars {
    pub fn new(t: &TerminalArgs) -> Bars {
        Bars {
            terminal: t.clone(),
            bar: std::sync::Mutex::new(None),
        }
    }

    fn current(&self) -> Option<indicatif::ProgressBar> {
        self.bar.lock().map(|b| b.clone()).unwrap_or(None)
    }
}

impl crate::analysis::evidence::Progress for Bars {
    fn begin(&self, what: &'static str, total: u64) {
        let pb = progress_bar(&self.terminal, total, what);
        if let Ok(mut b) = self.bar.lock() {
            *b = Some(pb);
        }
    }
    fn step(&self) {
        if let Some(pb) = self.current() {
            pb.inc(1);
        }
    }
    fn end(&self) {
        if let Some(pb) = self.current() {
            pb.finish_and_clear();
        }
    }
}
