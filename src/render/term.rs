//! Terminal emphasis: bold for the one-sentence answer, bold blue for
//! warnings (and `check`'s problems). By default only on a terminal and never when NO_COLOR is set
//! (<https://no-color.org> convention: any non-empty value); `--color`
//! overrides both.

use std::io::IsTerminal;

/// When the terminal text gets emphasis (`--color`).
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub enum Colour {
    /// On a terminal, unless NO_COLOR is set to a non-empty value.
    #[default]
    Auto,
    /// Always, even into a pipe or with NO_COLOR set.
    Always,
    /// Never.
    Never,
}

/// Whether stdout gets colour under `choice`.
pub fn use_colour(choice: Colour) -> bool {
    colour_on(choice, std::io::stdout().is_terminal())
}

/// Whether stderr gets colour under `choice` (`schedule`'s warnings).
pub fn use_colour_on_stderr(choice: Colour) -> bool {
    colour_on(choice, std::io::stderr().is_terminal())
}

fn colour_on(choice: Colour, terminal: bool) -> bool {
    match choice {
        Colour::Always => true,
        Colour::Never => false,
        Colour::Auto => std::env::var_os("NO_COLOR").is_none_or(|v| v.is_empty()) && terminal,
    }
}

/// The terminal's width in columns: `COLUMNS` when set to a number, else
/// the width of the terminal on stdout; `None` when piped (no limit).
pub fn width() -> Option<usize> {
    if let Some(c) = std::env::var("COLUMNS")
        .ok()
        .and_then(|v| v.trim().parse::<usize>().ok())
        .filter(|&c| c > 0)
    {
        return Some(c);
    }
    if !std::io::stdout().is_terminal() {
        return None;
    }
    console::Term::stdout()
        .size_checked()
        .map(|(_, cols)| cols as usize)
}

/// Adds emphasis to a rendered report when `colour` is true.
pub fn emphasise(text: &str, colour: bool) -> String {
    if !colour {
        return text.to_string();
    }
    let mut out = String::with_capacity(text.len() + 64);
    for line in text.split_inclusive('\n') {
        let body = line.trim_end_matches('\n');
        let nl = &line[body.len()..];
        // A warning (analyze, rank, tune, schedule) or a problem `check`
        // found: each is behind an exit status 3.
        if body.starts_with("WARNING") || body.starts_with("Problem:") {
            out.push_str(&format!("\x1b[1;34m{body}\x1b[0m{nl}"));
        } else if body.contains(" were exposed to ") {
            out.push_str(&format!("\x1b[1m{body}\x1b[0m{nl}"));
        } else {
            out.push_str(line);
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn emphasis_only_when_asked() {
        let t = "head\nWARNING COVERAGE: x\n3 of 9 trades (33.3 %) were exposed to 2 of 4 used releases\nProblem: y\n";
        assert_eq!(emphasise(t, false), t);
        let c = emphasise(t, true);
        assert!(c.contains("\x1b[1;34mWARNING COVERAGE: x\x1b[0m\n"));
        assert!(c.contains("\x1b[1m3 of 9 trades"));
        assert!(c.starts_with("head\n"));
        assert!(c.ends_with("\x1b[1;34mProblem: y\x1b[0m\n"));
    }
}
