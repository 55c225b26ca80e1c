//! What every subcommand shares: the exit status, chart writing, and (re-
//! exported) the shared flags, their settings, the input loading and the
//! progress bars.

pub use super::args::*;
pub use super::load::*;
pub use super::progress::*;
pub use super::settings::*;
use anyhow::Result;

/// Exit status 3 when the run completed but needs attention (warnings:
/// rows rejected, trades the calendar cannot judge), else 0 (README).
pub fn exit_status(warnings: &[String]) -> std::process::ExitCode {
    if warnings.is_empty() {
        std::process::ExitCode::SUCCESS
    } else {
        std::process::ExitCode::from(3)
    }
}

#[cfg(feature = "charts")]
/// Writes `chart-ID.svg` (and `.png` when asked) into the output folder.
pub fn write_chart(
    out: &crate::render::output::OutDir,
    id: &str,
    svg: &str,
    charts: &ChartArgs,
) -> Result<()> {
    out.write(&format!("chart-{id}.svg"), svg.as_bytes())?;
    if charts.png {
        if !crate::render::png::have_fonts() {
            eprintln!("eventfence: no system fonts found; chart-{id}.png has no text");
        }
        out.write(
            &format!("chart-{id}.png"),
            &crate::render::png::svg_to_png(svg)?,
        )?;
    }
    Ok(())
}

/// Without the `charts` feature there is no chart to write.
#[cfg(not(feature = "charts"))]
pub fn write_chart(
    _: &crate::render::output::OutDir,
    _: &str,
    _: &str,
    _: &ChartArgs,
) -> Result<()> {
    Ok(())
}
