//! Reading the inputs the shared flags name: trades, calendar, instrument
//! currencies, with a spinner while it runs.

use super::args::{CalendarArgs, InputArgs, InstrumentArgs, TerminalArgs, TradeArgs};
use super::progress::spinner;
use super::settings::{calendar_options, trade_options};
use crate::engine::relevance::{self, InstrumentCurrencies};
use crate::import::calendar::{self, Calendar, CalendarOptions};
use crate::import::table::Source;
use crate::import::trades::{self, TradeOptions, TradeSummary, Trades};
use anyhow::{Context, Result, bail};
use std::collections::HashMap;
use std::path::PathBuf;

/// The name `-` stands for standard input (README, "Standard input").
pub const STDIN: &str = "-";

/// Whether standard input has been taken by one `-` already.
static STDIN_TAKEN: std::sync::atomic::AtomicBool = std::sync::atomic::AtomicBool::new(false);

/// Standard input, read whole, as a source named `stdin`; refused the
/// second time (it can be read once: `-` for the trades or the calendar).
fn stdin_source() -> Result<Source> {
    use std::io::Read;
    if STDIN_TAKEN.swap(true, std::sync::atomic::Ordering::SeqCst) {
        bail!(
            "standard input (-) can be read once: give - to --trades or to --calendar, not to both or twice"
        );
    }
    let mut bytes = Vec::new();
    std::io::stdin()
        .lock()
        .read_to_end(&mut bytes)
        .context("cannot read standard input")?;
    Ok(Source::Bytes {
        name: "stdin".into(),
        bytes: bytes.into(),
    })
}

/// Loads trades named by the flags (or handed over as tables); `-` reads
/// them from standard input.
pub fn load_trades(t: &TradeArgs, opts: &TradeOptions) -> Result<(Trades, TradeSummary)> {
    let limit = t
        .max_memory
        .as_deref()
        .map(crate::import::budget::parse_size)
        .transpose()?;
    let (mut sources, mut paths) = (Vec::new(), Vec::new());
    for spec in &t.trades {
        if spec == STDIN {
            sources.push(stdin_source()?);
        } else {
            let files = trades::expand_paths(std::slice::from_ref(spec))?;
            sources.extend(Source::files(&files));
            paths.extend(files);
        }
    }
    crate::import::budget::check(&paths, limit)?;
    sources.extend(t.tables.iter().cloned());
    let (trades, mut summary) = trades::load_sources(&sources, opts)?;
    if t.run.is_empty() {
        return Ok((trades, summary));
    }
    let trades = trades.only_runs(&t.run)?;
    summary.runs_selected = trades.runs.clone();
    Ok((trades, summary))
}

/// Loads and merges the calendar files (and tables handed over); `-`
/// reads one from standard input (iCalendar or CSV, told by its first line).
pub fn load_calendar(c: &CalendarArgs, opts: &CalendarOptions) -> Result<Calendar> {
    let mut sources = Vec::new();
    for path in &c.calendar {
        if path.as_os_str() == STDIN {
            sources.push(stdin_source()?);
        } else {
            sources.push(Source::File(path.clone()));
        }
    }
    sources.extend(c.tables.iter().cloned());
    Ok(calendar::load_sources(&sources, opts)?)
}

/// Distinct calendar currencies, sorted.
pub fn calendar_currencies(cal: &Calendar) -> Vec<String> {
    let mut v: Vec<String> = cal.releases.iter().map(|r| r.currency.clone()).collect();
    v.sort();
    v.dedup();
    v
}

/// Resolves instrument currencies from the flags.
pub fn instrument_currencies(
    i: &InstrumentArgs,
    instruments: &[String],
    cal_currencies: &[String],
) -> Result<Vec<InstrumentCurrencies>> {
    let mut map = HashMap::new();
    if let Some(p) = &i.instrument_map_file {
        map = relevance::load_instrument_map(p)?;
    }
    map.extend(relevance::parse_instrument_map(&i.instrument_map)?);
    Ok(relevance::resolve(
        instruments,
        &map,
        i.unmapped,
        cal_currencies,
    )?)
}

/// Everything read from the inputs.
pub struct Loaded {
    pub trades: Trades,
    pub trade_summary: TradeSummary,
    pub calendar: Calendar,
    pub currencies: Vec<InstrumentCurrencies>,
}

impl Loaded {
    /// Each instrument's currencies, indexed like `trades.instruments`.
    pub fn currency_lists(&self) -> Vec<Vec<String>> {
        self.currencies
            .iter()
            .map(|c| c.currencies.clone())
            .collect()
    }

    /// The warnings of these inputs under these settings (coverage needs the
    /// exposure at the settings' windows: one pass of the engine).
    pub fn warnings(
        &self,
        input: &InputArgs,
        settings: &crate::analysis::run::AnalysisSettings,
    ) -> Vec<String> {
        let cur = self.currency_lists();
        let coverage = crate::engine::exposure::coverage_at(
            &self.calendar.releases,
            &self.trades,
            &cur,
            &settings.windows,
            settings.exposure_rule,
            settings.calendar_span,
        );
        let inputs = crate::report::summary::Inputs::new(
            &self.trade_summary,
            input.trades.trades_tz.clone(),
            &self.calendar.summary,
            input.calendar.calendar_tz().to_string(),
        );
        crate::report::summary::input_warnings(&inputs, &coverage)
    }
}

impl TradeArgs {
    /// Whether any trades are named or handed over.
    pub fn given(&self) -> bool {
        !self.trades.is_empty() || !self.tables.is_empty()
    }
}

impl CalendarArgs {
    /// Whether any calendar is named or handed over.
    pub fn given(&self) -> bool {
        !self.calendar.is_empty() || !self.tables.is_empty()
    }
}

impl InputArgs {
    /// Reads trades and the calendar (over the trades' span when it holds
    /// iCalendar files), then resolves instrument currencies. `command` names the subcommand in errors.
    pub fn load(&self, command: &str, terminal: &TerminalArgs) -> Result<Loaded> {
        if !self.trades.given() || !self.calendar.given() {
            bail!("{command} needs --trades and --calendar");
        }
        let trade_opts = trade_options(&self.trades, &self.rows)?;
        let spin = spinner(terminal, "reading trades");
        crate::import::phases::mark("start");
        // Only iCalendar files need the trades' span (to bound open-ended
        // recurrences); other calendars are read alongside the trades.
        // Errors keep their order: the trades' first.
        // Standard input may hold iCalendar: read it after the trades too.
        let needs_span = self
            .calendar
            .calendar
            .iter()
            .any(|p| calendar::is_ics(p) || p.as_os_str() == STDIN);
        let (trades, early) = if needs_span {
            (load_trades(&self.trades, &trade_opts), None)
        } else {
            let cal_opts =
                calendar_options(&self.calendar, &self.rows, self.trades.delimiter, None)?;
            let (t, c) = rayon::join(
                || load_trades(&self.trades, &trade_opts),
                || load_calendar(&self.calendar, &cal_opts),
            );
            (t, Some(c))
        };
        let (trades, trade_summary) = trades?;
        crate::import::phases::mark("trades");
        spin.finish_and_clear();
        let calendar = match early {
            Some(c) => c?,
            None => load_calendar(
                &self.calendar,
                &calendar_options(
                    &self.calendar,
                    &self.rows,
                    self.trades.delimiter,
                    trades.span(),
                )?,
            )?,
        };
        let currencies = instrument_currencies(
            &self.instruments,
            &trades.instruments,
            &calendar_currencies(&calendar),
        )?;
        Ok(Loaded {
            trades,
            trade_summary,
            calendar,
            currencies,
        })
    }

    /// Every input file, for the output folder's overwrite guard.
    pub fn input_paths(&self, loaded: &Loaded) -> Vec<PathBuf> {
        let mut v: Vec<PathBuf> = loaded
            .trade_summary
            .files
            .iter()
            .map(PathBuf::from)
            .collect();
        v.extend(self.calendar.calendar.iter().cloned());
        v
    }
}
