//! What a subcommand produced, before anything is written or printed. The
//! command line's `run` writes it (the `--out` folder, stdout); a library
//! caller (the Python package) takes it as it is.

use super::args::{ChartArgs, PrintFormat, TerminalArgs};
use crate::render::output::OutDir;
use anyhow::Result;
use std::path::{Path, PathBuf};

/// One subcommand's outputs, in memory.
#[derive(Debug, Default)]
pub struct Outcome {
    /// The JSON the command prints with `--json` (analyze: summary.json).
    pub json: String,
    /// One JSON object per line, one per row, made only when `--format
    /// jsonl` asks for it (rank's runs, tune's cells); else empty.
    pub jsonl: String,
    /// The terminal table, without colour.
    pub text: String,
    /// The `--out` folder's files other than the charts, by name, in the
    /// order they are written (empty when files were not asked for).
    pub files: Vec<(String, Vec<u8>)>,
    /// The charts as SVG, by id (written as `chart-ID.svg`, and `.png`
    /// with `--png`).
    pub charts: Vec<(String, String)>,
    /// Every input file: the output folder never overwrites one.
    pub inputs: Vec<PathBuf>,
    /// Warnings about the inputs (exit status 3 when there are any).
    pub warnings: Vec<String>,
}

impl Outcome {
    /// Writes the charts, then the files, into `dir` (each atomically).
    pub fn write(&self, dir: &Path, chart_args: &ChartArgs) -> Result<()> {
        let out = OutDir::new(dir, &self.inputs)?;
        for (id, svg) in &self.charts {
            super::common::write_chart(&out, id, svg, chart_args)?;
        }
        for (name, bytes) in &self.files {
            out.write(name, bytes)?;
        }
        Ok(())
    }

    /// The command line's delivery for `rank` and `tune`: the `--out`
    /// folder when one is named, then the table, the JSON or the JSON
    /// lines on stdout; exit status 3 with warnings.
    pub fn deliver(
        &self,
        out: Option<&Path>,
        chart_args: &ChartArgs,
        format: PrintFormat,
        terminal: &TerminalArgs,
    ) -> Result<std::process::ExitCode> {
        if let Some(dir) = out {
            self.write(dir, chart_args)?;
        }
        match format {
            PrintFormat::Table => terminal.print(&self.text)?,
            PrintFormat::Json => {
                crate::render::output::stdout(format!("{}\n", self.json).as_bytes())?
            }
            PrintFormat::Jsonl => crate::render::output::stdout(self.jsonl.as_bytes())?,
        }
        Ok(super::common::exit_status(&self.warnings))
    }

    /// The file of this name, if the outcome has it.
    pub fn file(&self, name: &str) -> Option<&[u8]> {
        self.files
            .iter()
            .find(|(n, _)| n == name)
            .map(|(_, b)| b.as_slice())
    }
}

/// One JSON object per line for each row, compact, each line ending in a
/// newline (JSON Lines).
pub fn json_lines<T: serde::Serialize>(rows: &[T]) -> Result<String> {
    let mut out = String::new();
    for row in rows {
        out.push_str(&serde_json::to_string(row)?);
        out.push('\n');
    }
    Ok(out)
}
