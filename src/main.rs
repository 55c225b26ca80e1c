//! Command-line entry: parse, dispatch, map errors to exit codes.

use clap::{Parser, Subcommand};
use eventfence::cmd;
use std::process::ExitCode;

/// Find back-test trades exposed to economic releases and see the strategy
/// without them.
#[derive(Parser)]
#[command(name = "eventfence", version, about, long_about = None)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand)]
enum Command {
    Analyze(Box<cmd::analyze::AnalyzeArgs>),
    Check(Box<cmd::check::CheckArgs>),
    Rank(Box<cmd::rank::RankArgs>),
    Schedule(Box<cmd::schedule::ScheduleArgs>),
    Tune(Box<cmd::tune::TuneArgs>),
    /// Print a shell completion script, e.g. `eventfence completions bash > /etc/bash_completion.d/eventfence`.
    Completions {
        #[arg(value_enum)]
        shell: clap_complete::Shell,
    },
    /// Print the manual page (roff, from the same definitions as --help),
    /// e.g. `eventfence man > eventfence.1 && man ./eventfence.1`.
    Man,
}

fn main() -> ExitCode {
    eventfence::render::output::mark_process_start();
    let cli = parse();
    let result = match cli.command {
        Command::Analyze(a) => cmd::analyze::run(*a),
        Command::Check(a) => cmd::check::run(*a),
        Command::Rank(a) => cmd::rank::run(*a),
        Command::Schedule(a) => cmd::schedule::run(*a),
        Command::Tune(a) => cmd::tune::run(*a),
        Command::Man => {
            let mut buf = Vec::new();
            clap_mangen::Man::new(command())
                .render(&mut buf)
                .map_err(anyhow::Error::from)
                .and_then(|_| eventfence::render::output::stdout(&buf).map_err(anyhow::Error::from))
                .map(|_| ExitCode::SUCCESS)
        }
        Command::Completions { shell } => {
            let mut buf = Vec::new();
            clap_complete::generate(shell, &mut command(), "eventfence", &mut buf);
            eventfence::render::output::stdout(&buf)
                .map(|_| ExitCode::SUCCESS)
                .map_err(anyhow::Error::from)
        }
    };
    match result {
        Ok(code) => code,
        Err(e) => {
            if e.chain().any(|c| {
                c.downcast_ref::<std::io::Error>()
                    .is_some_and(|io| io.kind() == std::io::ErrorKind::BrokenPipe)
            }) {
                return ExitCode::SUCCESS;
            }
            eprintln!("eventfence: {e:#}");
            ExitCode::FAILURE
        }
    }
}

/// The command line, with the shared flags that do nothing in a subcommand
/// kept out of its help: `schedule` reads trades only for their
/// instruments, so `--keep` (columns for per-trade outputs) is hidden
/// there, and refused with a message if given.
fn command() -> clap::Command {
    use clap::CommandFactory;
    Cli::command().mut_subcommand("schedule", |s| s.mut_arg("keep", |a| a.hide(true)))
}

fn parse() -> Cli {
    use clap::FromArgMatches;
    Cli::from_arg_matches(&command().get_matches()).unwrap_or_else(|e| e.exit())
}

#[cfg(test)]
mod tests {
    #[test]
    fn cli_definition_is_consistent() {
        use clap::CommandFactory;
        super::Cli::command().debug_assert();
    }

    #[test]
    fn schedule_help_leaves_out_keep() {
        let help = super::command()
            .find_subcommand_mut("schedule")
            .unwrap()
            .render_long_help()
            .to_string();
        assert!(!help.contains("--keep") && help.contains("--instruments"));
    }
}
