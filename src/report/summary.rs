//! Shared report furniture: the tool's identity and the caution every
//! output carries (docs/method.md §8).

use serde::Serialize;

/// The caution printed in every terminal report, summary.json and HTML page.
pub const CAUTION: &str = "Back-test figures are not forecasts. Release times come from the calendar you supplied: check them against the publisher. This is not investment advice.";

/// The JSON layout's version, raised on any breaking change (2: runs read
/// as alternatives — `account_figures`, account-path figures null in the
/// pooled scenarios of a multi-run input, per-run share columns renamed).
pub const SCHEMA_VERSION: u32 = 2;

/// What made an output: the tool, its JSON layout, and the tz database the
/// zones came from.
#[derive(Debug, Clone, Serialize)]
pub struct ToolInfo {
    pub name: &'static str,
    pub version: &'static str,
    pub schema_version: u32,
    /// IANA tz database release compiled in (chrono-tz).
    pub tzdb_version: &'static str,
}

impl ToolInfo {
    pub fn current() -> Self {
        ToolInfo {
            name: env!("CARGO_PKG_NAME"),
            version: env!("CARGO_PKG_VERSION"),
            schema_version: SCHEMA_VERSION,
            tzdb_version: chrono_tz::IANA_TZDB_VERSION,
        }
    }
}

use crate::analysis::attribution::Attribution;
use crate::analysis::run::{
    Analysis, AnalysisSettings, ExposureSummary, RunResult, ScenarioMetrics,
};
use crate::engine::exposure::CoverageLine;
use crate::import::calendar::CalendarSummary;
use crate::import::trades::TradeSummary;
use std::collections::BTreeMap;

/// `inputs.trades` (docs/method.md §8).
#[derive(Debug, Clone, Serialize)]
pub struct TradeInputs {
    pub files: Vec<String>,
    pub rows_read: usize,
    pub rows_imported: usize,
    pub rows_rejected: usize,
    pub rejected_by_reason: BTreeMap<String, usize>,
    pub input_tz: String,
    /// How each trade's P/L was formed from the input columns.
    pub pnl_formed_as: String,
    /// How each time column was read (zone rule per file and column).
    pub time_columns: Vec<crate::import::trades::TimeColumn>,
    /// Runs kept by `--run` (empty: all).
    pub runs_selected: Vec<String>,
}

/// `inputs.calendar` (docs/method.md §8).
#[derive(Debug, Clone, Serialize)]
pub struct CalendarInputs {
    pub files: Vec<String>,
    pub rows_read: usize,
    pub releases: usize,
    pub recurrences_expanded: usize,
    pub duplicates_merged: usize,
    pub rows_rejected: usize,
    pub rejected_by_reason: BTreeMap<String, usize>,
    pub calendar_tz: String,
    pub components_skipped: usize,
    pub occurrences_moved: usize,
    pub occurrences_cancelled: usize,
    /// What was read leniently or guessed, per file.
    pub notes: Vec<String>,
}

#[derive(Debug, Clone, Serialize)]
pub struct Inputs {
    pub trades: TradeInputs,
    pub calendar: CalendarInputs,
}

impl Inputs {
    pub fn new(
        t: &TradeSummary,
        trades_tz: String,
        c: &CalendarSummary,
        calendar_tz: String,
    ) -> Inputs {
        Inputs {
            trades: TradeInputs {
                files: t.files.clone(),
                rows_read: t.rows_read,
                rows_imported: t.rows_imported,
                rows_rejected: t.log.rows_rejected,
                rejected_by_reason: t.log.rejected_by_reason.clone(),
                input_tz: trades_tz,
                pnl_formed_as: t.pnl_formed_as.clone(),
                time_columns: t.time_columns.clone(),
                runs_selected: t.runs_selected.clone(),
            },
            calendar: CalendarInputs {
                files: c.files.clone(),
                rows_read: c.rows_read,
                releases: c.releases,
                recurrences_expanded: c.recurrences_expanded,
                duplicates_merged: c.duplicates_merged,
                rows_rejected: c.log.rows_rejected,
                rejected_by_reason: c.log.rejected_by_reason.clone(),
                calendar_tz,
                components_skipped: c.components_skipped,
                occurrences_moved: c.occurrences_moved,
                occurrences_cancelled: c.occurrences_cancelled,
                notes: c.notes.clone(),
            },
        }
    }
}

/// The documented layout of `--json` and `summary.json` (docs/method.md §8). Field
/// order and names are a stable interface.
#[derive(Debug, Clone, Serialize)]
pub struct Summary {
    pub tool: ToolInfo,
    pub inputs: Inputs,
    pub settings: AnalysisSettings,
    /// `one_account`, `per_run` (account-path figures only in `runs` and
    /// `across_runs`; null in `scenarios`) or `pooled` (`--pool`).
    pub account_figures: crate::analysis::run::AccountFigures,
    pub exposure: ExposureSummary,
    pub coverage: Vec<CoverageLine>,
    /// The cap C of the capped scenario (amount, or return fraction under
    /// compounding); null when it could not be computed.
    pub cap_value: Option<f64>,
    /// Σ stress charge over the exposed trades (`--stress`); absent
    /// without it.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub stress_charge: Option<f64>,
    pub initial_equity: Option<f64>,
    pub scenarios: ScenarioMetrics,
    pub tail: crate::analysis::run::TailSummary,
    /// Placebo-calendar test (docs/method.md §7); null when turned off.
    pub placebo: Option<crate::analysis::evidence::PlaceboResult>,
    /// Bootstrap intervals of removed − baseline; null when turned off.
    pub bootstrap: Option<crate::analysis::evidence::BootstrapResult>,
    pub headline: crate::analysis::attribution::Headline,
    pub attribution: AttributionOut,
    pub runs: Vec<RunResult>,
    /// With several runs (alternative parameter sets, never one account):
    /// the account-path figures as their spread across runs; null otherwise.
    pub across_runs: Option<crate::analysis::run::RunDistribution>,
    /// With several runs read as alternatives: how far removing the
    /// exposed trades reorders them by Sharpe (docs/method.md §10); null
    /// otherwise.
    pub distortion: Option<crate::analysis::distortion::Distortion>,
    pub warnings: Vec<String>,
    pub caution: &'static str,
}

/// Attribution tables as written out (headline lifted to the top level).
#[derive(Debug, Clone, Serialize)]
pub struct AttributionOut {
    pub by_release: Vec<crate::analysis::attribution::ReleaseLine>,
    pub by_category: BTreeMap<String, crate::analysis::attribution::GroupLine>,
    pub by_currency: BTreeMap<String, crate::analysis::attribution::GroupLine>,
    pub by_tier: BTreeMap<String, crate::analysis::attribution::GroupLine>,
    pub by_series: Vec<crate::analysis::attribution::SeriesLine>,
}

impl Summary {
    pub fn new(
        inputs: Inputs,
        settings: AnalysisSettings,
        a: Analysis,
        placebo: Option<crate::analysis::evidence::PlaceboResult>,
        bootstrap: Option<crate::analysis::evidence::BootstrapResult>,
    ) -> Summary {
        let warnings = warnings(&inputs, &a);
        let settings_threshold = settings.tcr_threshold;
        let Attribution {
            by_release,
            by_category,
            by_currency,
            by_tier,
            by_series,
            headline,
        } = a.attribution;
        Summary {
            tool: ToolInfo::current(),
            inputs,
            settings,
            account_figures: a.account_figures,
            exposure: a.exposure,
            coverage: a.coverage,
            cap_value: a.cap_value,
            stress_charge: a.stress_charge,
            initial_equity: a.initial_equity,
            scenarios: a.scenarios,
            tail: a.tail,
            placebo,
            bootstrap,
            headline,
            attribution: AttributionOut {
                by_release,
                by_category,
                by_currency,
                by_tier,
                by_series,
            },
            across_runs: crate::analysis::run::across_runs(&a.runs, settings_threshold),
            distortion: None,
            runs: a.runs,
            warnings,
            caution: CAUTION,
        }
    }
}

/// Loud warnings every output repeats: trades the calendar cannot judge,
/// and skipped rows.
fn warnings(inputs: &Inputs, a: &Analysis) -> Vec<String> {
    input_warnings(inputs, &a.coverage)
}

/// The warnings every command shows (terminal, JSON, HTML) and that make
/// it exit with status 3: trades the calendar cannot judge, skipped rows.
pub fn input_warnings(
    inputs: &Inputs,
    coverage: &[crate::engine::exposure::CoverageLine],
) -> Vec<String> {
    let mut w = Vec::new();
    w.extend(coverage_warnings(coverage));
    if inputs.trades.rows_rejected > 0 {
        w.push(format!(
            "SKIPPED: {} trade row(s) rejected and left out ({})",
            inputs.trades.rows_rejected,
            reasons(&inputs.trades.rejected_by_reason)
        ));
    }
    if inputs.calendar.rows_rejected > 0 {
        w.push(format!(
            "SKIPPED: {} calendar row(s) rejected and left out ({})",
            inputs.calendar.rows_rejected,
            reasons(&inputs.calendar.rejected_by_reason)
        ));
    }
    w
}

/// One warning per currency the calendar does not cover for every trade:
/// how many trades (of which instruments) fall outside, how many of them
/// were exposed on another currency all the same, and how many count as
/// unexposed without being judged.
pub fn coverage_warnings(lines: &[crate::engine::exposure::CoverageLine]) -> Vec<String> {
    lines
        .iter()
        .filter(|c| c.trades_outside > 0)
        .map(|c| {
            let span = match (&c.calendar_from, &c.calendar_to) {
                (Some(f), Some(t)) if c.coverage_from == "releases" => {
                    format!("covers {f} to {t} (first to last release; state its real span with --calendar-span)")
                }
                (Some(f), Some(t)) => format!("covers {f} to {t} (--calendar-span)"),
                _ => "has no releases".to_string(),
            };
            let instruments = c.by_instrument.iter().map(|(i, n)| format!("{i} {n}")).collect::<Vec<_>>().join(", ");
            let unjudged = c.trades_outside - c.exposed_outside;
            let mut text = format!(
                "COVERAGE: the calendar {span} for {}; {} trade(s) with P/L {:.2} fall outside it ({instruments}) and could not be judged on {}",
                c.currency, c.trades_outside, c.pnl_outside, c.currency
            );
            if c.exposed_outside > 0 {
                text.push_str(&format!(
                    "; {} of them (P/L {:.2}) were exposed on the instrument's other currency, the other {unjudged} (P/L {:.2}) count as unexposed",
                    c.exposed_outside,
                    c.exposed_pnl_outside,
                    c.pnl_outside - c.exposed_pnl_outside
                ));
            } else {
                text.push_str(&format!("; all {unjudged} count as unexposed"));
            }
            text
        })
        .collect()
}

fn reasons(m: &BTreeMap<String, usize>) -> String {
    m.iter()
        .map(|(k, v)| format!("{k}: {v}"))
        .collect::<Vec<_>>()
        .join(", ")
}
