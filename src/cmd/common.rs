//! Flags shared by several subcommands, defined once and flattened into each
//! subcommand's arguments, and their resolution into typed settings before
//! any data is read (so a bad flag fails at once).

use crate::engine::relevance::{self, InstrumentCurrencies, Unmapped};
use crate::import::calendar::{self, Calendar, CalendarOptions, rules::TitleRules};
use crate::import::timefmt::TimeFormat;
use crate::import::trades::{self, TradeOptions, TradeSummary, Trades};
use crate::import::zones::{DAY_MS, LocalPolicy, Zone};
use anyhow::{Context, Result, bail};
use clap::Args;
use std::collections::HashMap;
use std::path::PathBuf;

/// Where the trades come from and how to read them.
#[derive(Debug, Clone, Args, Default)]
pub struct TradeArgs {
    /// Trade list(s): CSV or Parquet files, or a glob in quotes. With several
    /// files and no run column, each file is one run.
    #[arg(long = "trades", value_name = "FILE|GLOB", num_args = 1..)]
    pub trades: Vec<String>,
    /// Zone of trade times written without an offset: UTC, an IANA name,
    /// +02:00, or a shifted server clock such as America/New_York+07:00.
    #[arg(long, value_name = "ZONE", default_value = "UTC")]
    pub trades_tz: String,
    /// Column names: field=Column pairs, comma-separated (fields: opened_at,
    /// closed_at, instrument, pnl, run, side, size, entry_price, exit_price,
    /// fees, equity_before, pnl_pct).
    #[arg(long = "map", value_name = "FIELD=COLUMN,...")]
    pub map: Vec<String>,
    /// JSON file {"field": "column"} with the same meaning as --map.
    #[arg(long, value_name = "JSON")]
    pub map_file: Option<PathBuf>,
    /// How trade times are written: auto (ISO 8601, YYYY.MM.DD HH:MM[:SS]),
    /// epoch-s, epoch-ms, or a strftime pattern such as '%d/%m/%Y %H:%M'.
    #[arg(long, value_name = "FORMAT", default_value = "auto")]
    pub time_format: String,
    /// Field delimiter of CSV inputs (default: guessed from the header).
    #[arg(long, value_name = "CHAR")]
    pub delimiter: Option<char>,
    /// Refuse trade inputs estimated to need more memory than this (e.g.
    /// 8G; default: the memory available when the run starts).
    #[arg(long, value_name = "SIZE")]
    pub max_memory: Option<String>,
    /// Only these runs (parameter sets), comma-separated: the same figures
    /// as a file holding only them.
    #[arg(long = "run", value_name = "NAME,...", value_delimiter = ',')]
    pub run: Vec<String>,
    /// Your own columns to carry unchanged into the per-trade outputs
    /// (trades.csv / trades.parquet), e.g. --keep TradeRef,Note.
    #[arg(long, value_name = "COLUMN,...", value_delimiter = ',')]
    pub keep: Vec<String>,
}

/// Where the release calendar comes from and how to read it.
#[derive(Debug, Clone, Args, Default)]
pub struct CalendarArgs {
    /// Release calendar file(s), ICS or CSV, merged (e.g. one per currency).
    #[arg(long = "calendar", value_name = "FILE", num_args = 1..)]
    pub calendar: Vec<PathBuf>,
    /// Zone of calendar times without an offset (CSV times, floating ICS
    /// times, and the day of all-day releases); default UTC, or an ICS
    /// file's own X-WR-TIMEZONE.
    #[arg(long, value_name = "ZONE")]
    pub calendar_tz: Option<String>,
    /// Calendar CSV column names: field=Column pairs (fields: released_at,
    /// date, time, title, currency, tier, category, region, all_day, id).
    #[arg(long = "calendar-map", value_name = "FIELD=COLUMN,...")]
    pub calendar_map: Vec<String>,
    /// strftime pattern of the calendar CSV's times, for `released_at` or
    /// for `date` and `time` joined by a space (e.g. '%d/%m/%Y %I:%M %p');
    /// the part before its first space reads a date alone.
    #[arg(long, value_name = "PATTERN")]
    pub calendar_time_format: Option<String>,
    /// The calendar CSV's own importance values and their tiers, e.g.
    /// 'Very important=high,Important=medium,***=high,1=low'; when given,
    /// an unmapped value rejects its row.
    #[arg(long, value_name = "VALUE=TIER,...")]
    pub tier_map: Vec<String>,
    /// The calendar CSV's own words for "no fixed time" (e.g. 'All Day,TBD'):
    /// such rows become all-day releases.
    #[arg(long, value_name = "WORD,...", value_delimiter = ',')]
    pub untimed: Vec<String>,
    /// The calendar's real coverage, FROM..TO (YYYY-MM-DD, UTC, inclusive):
    /// trades inside it count as judged even where a currency's first or
    /// last release lies further in (default: each currency's first to last
    /// release).
    #[arg(long, value_name = "FROM..TO")]
    pub calendar_span: Option<String>,
    /// JSON rules mapping title patterns to currency, tier and category.
    #[arg(long, value_name = "JSON")]
    pub rules: Option<PathBuf>,
    /// Start of the span over which recurring (RRULE) releases are expanded
    /// when no trades are given (YYYY-MM-DD, UTC).
    #[arg(long, value_name = "DATE")]
    pub from: Option<String>,
    /// End of that span (YYYY-MM-DD, UTC, inclusive).
    #[arg(long, value_name = "DATE")]
    pub to: Option<String>,
}

impl CalendarArgs {
    /// `--calendar-span FROM..TO` as [from, to + 1 day) in ms.
    pub fn stated_span(&self) -> Result<Option<(i64, i64)>> {
        let Some(spec) = &self.calendar_span else {
            return Ok(None);
        };
        let (a, b) = spec.split_once("..").with_context(|| {
            format!("--calendar-span '{spec}' is not FROM..TO, e.g. 2022-01-01..2024-09-30")
        })?;
        let (from, to) = (
            parse_day("calendar-span", a)?,
            parse_day("calendar-span", b)? + DAY_MS,
        );
        if to <= from {
            bail!("--calendar-span '{spec}': the end comes before the start");
        }
        Ok(Some((from, to)))
    }

    /// The zone named by `--calendar-tz`, or UTC.
    pub fn calendar_tz(&self) -> &str {
        self.calendar_tz.as_deref().unwrap_or("UTC")
    }
}

/// How instruments map to currencies.
#[derive(Debug, Clone, Args, Default)]
pub struct InstrumentArgs {
    /// Currencies of instruments that are not FX/metal pairs: CODE=USD, or
    /// CODE=USD/EUR for several; comma-separated.
    #[arg(long = "instrument-map", value_name = "CODE=CCY,...")]
    pub instrument_map: Vec<String>,
    /// JSON file {"US500": "USD", "EU50": ["EUR"]}.
    #[arg(long, value_name = "JSON")]
    pub instrument_map_file: Option<PathBuf>,
    /// Instruments with no known currency: error (default), all (exposed to
    /// every calendar currency) or none (never exposed).
    #[arg(long, value_enum, default_value_t = Unmapped::Error)]
    pub unmapped: Unmapped,
}

/// Row handling shared by every import.
#[derive(Debug, Clone, Args, Default)]
pub struct RowArgs {
    /// Local times that fall in a DST gap or overlap: error (default),
    /// earlier or later instant.
    #[arg(long, value_enum, default_value_t = LocalPolicy::Error)]
    pub local_policy: LocalPolicy,
    /// Continue past rejected rows; every report states how many were
    /// skipped and why.
    #[arg(long)]
    pub skip_bad_rows: bool,
}

/// Parses a zone flag, naming the flag on failure.
pub fn zone_flag(flag: &str, spec: &str) -> Result<Zone> {
    spec.parse::<Zone>().with_context(|| format!("--{flag}"))
}

fn delimiter_byte(d: Option<char>) -> Result<Option<u8>> {
    match d {
        None => Ok(None),
        Some(c) if c.is_ascii() => Ok(Some(c as u8)),
        Some(c) => bail!("--delimiter '{c}' must be a single ASCII character"),
    }
}

/// Resolved trade-reading settings.
pub fn trade_options(t: &TradeArgs, rows: &RowArgs) -> Result<TradeOptions> {
    let mut columns = HashMap::new();
    if let Some(p) = &t.map_file {
        columns = trades::load_mapping_file(p, trades::FIELDS).context("--map-file")?;
    }
    columns.extend(trades::parse_mapping(&t.map, trades::FIELDS).context("--map")?);
    Ok(TradeOptions {
        zone: zone_flag("trades-tz", &t.trades_tz)?,
        policy: rows.local_policy,
        time_format: TimeFormat::parse(&t.time_format).context("--time-format")?,
        columns,
        delimiter: delimiter_byte(t.delimiter)?,
        skip_bad_rows: rows.skip_bad_rows,
        keep: t
            .keep
            .iter()
            .map(|k| k.trim().to_string())
            .filter(|k| !k.is_empty())
            .collect(),
    })
}

fn parse_day(flag: &str, s: &str) -> Result<i64> {
    let d = chrono::NaiveDate::parse_from_str(s.trim(), "%Y-%m-%d")
        .with_context(|| format!("--{flag} '{s}' is not YYYY-MM-DD"))?;
    Ok(crate::import::zones::naive_to_ms(
        &d.and_time(chrono::NaiveTime::MIN),
    ))
}

/// Resolved calendar-reading settings; `span` is the trades' span if known.
pub fn calendar_options(
    c: &CalendarArgs,
    rows: &RowArgs,
    delimiter: Option<char>,
    span: Option<(i64, i64)>,
) -> Result<CalendarOptions> {
    let columns =
        trades::parse_mapping(&c.calendar_map, calendar::csv::FIELDS).context("--calendar-map")?;
    let rules = match &c.rules {
        Some(p) => TitleRules::load(p)?,
        None => TitleRules::default(),
    };
    let flag_span = match (&c.from, &c.to) {
        (Some(a), Some(b)) => Some((parse_day("from", a)?, parse_day("to", b)? + DAY_MS)),
        (None, None) => None,
        _ => bail!("--from and --to go together"),
    };
    if let Some(p) = &c.calendar_time_format
        && chrono::format::StrftimeItems::new(p)
            .any(|item| matches!(item, chrono::format::Item::Error))
    {
        bail!("--calendar-time-format '{p}' is not a strftime pattern (e.g. '%d/%m/%Y %I:%M %p')");
    }
    Ok(CalendarOptions {
        zone: zone_flag("calendar-tz", c.calendar_tz())?,
        zone_given: c.calendar_tz.is_some(),
        policy: rows.local_policy,
        columns,
        delimiter: delimiter_byte(delimiter)?,
        rules,
        span: flag_span.or(span),
        skip_bad_rows: rows.skip_bad_rows,
        layout: calendar::csv::Layout {
            time_format: c.calendar_time_format.clone(),
            tier_map: calendar::csv::Layout::parse_tier_map(&c.tier_map)?,
            untimed: c
                .untimed
                .iter()
                .map(|w| w.trim().to_string())
                .filter(|w| !w.is_empty())
                .collect(),
        },
        ..Default::default()
    })
}

/// Loads trades named by the flags.
pub fn load_trades(t: &TradeArgs, opts: &TradeOptions) -> Result<(Trades, TradeSummary)> {
    let paths = trades::expand_paths(&t.trades)?;
    let limit = t
        .max_memory
        .as_deref()
        .map(crate::import::budget::parse_size)
        .transpose()?;
    crate::import::budget::check(&paths, limit)?;
    let (trades, mut summary) = trades::load(&paths, opts)?;
    if t.run.is_empty() {
        return Ok((trades, summary));
    }
    let trades = trades.only_runs(&t.run)?;
    summary.runs_selected = trades.runs.clone();
    Ok((trades, summary))
}

/// Loads and merges the calendar files.
pub fn load_calendar(c: &CalendarArgs, opts: &CalendarOptions) -> Result<Calendar> {
    Ok(calendar::load(&c.calendar, opts)?)
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

/// Release windows and the exposure rule.
#[derive(Debug, Clone, Args, Default)]
pub struct WindowArgs {
    /// Window per tier as TIER=PRE/POST minutes or TIER=off (defaults:
    /// high=15/30, medium=5/10, low=off).
    #[arg(long = "window", value_name = "TIER=PRE/POST")]
    pub window: Vec<String>,
    /// Window per category, beating the tier: CATEGORY=PRE/POST or =off.
    #[arg(long = "window-category", value_name = "CATEGORY=PRE/POST")]
    pub window_category: Vec<String>,
    /// Window per title pattern (regex), beating category and tier.
    #[arg(long = "window-title", value_name = "REGEX=PRE/POST")]
    pub window_title: Vec<String>,
    /// Use only these tiers (comma-separated), e.g. high.
    #[arg(long, value_name = "TIERS")]
    pub tiers: Option<String>,
    /// Use all-day releases too; each then covers its whole local day.
    #[arg(long)]
    pub all_day: bool,
}

impl WindowArgs {
    pub fn settings(&self) -> Result<crate::engine::windows::WindowSettings> {
        crate::engine::windows::WindowSettings::from_flags(
            &self.window,
            &self.window_category,
            &self.window_title,
            self.tiers.as_deref(),
            self.all_day,
        )
        .map_err(anyhow::Error::from)
    }
}

/// Scenario and metric settings.
#[derive(Debug, Clone, Args)]
pub struct ScenarioArgs {
    /// When a trade counts as exposed: overlap (holding period meets the
    /// window), held (open at the release instant), entered (opened inside
    /// the window).
    #[arg(long, value_enum, default_value_t = crate::engine::exposure::ExposureRule::Overlap)]
    pub rule: crate::engine::exposure::ExposureRule,
    /// P/L sizing: fixed (sum as given) or compounding (needs equity).
    #[arg(long, value_enum, default_value_t = crate::analysis::scenarios::Sizing::Fixed)]
    pub sizing: crate::analysis::scenarios::Sizing,
    /// Cap for the capped scenario: q0.99 (quantile of unexposed |P/L|),
    /// median*3, amount:500, or equity:1.5 (% of equity).
    #[arg(long, value_name = "RULE", default_value = "q0.99")]
    pub cap: String,
    /// Starting account equity (adds drawdown % and daily returns).
    #[arg(long, value_name = "AMOUNT")]
    pub initial_equity: Option<f64>,
    /// Zone whose calendar days make the daily series.
    #[arg(long, value_name = "ZONE", default_value = "UTC")]
    pub report_tz: String,
    /// Percentage p of the tail concentration ratio.
    #[arg(long, value_name = "PERCENT", default_value_t = 1.0)]
    pub tcr_p: f64,
    /// Tail concentration above which the report says the result leans on a
    /// handful of trades (default 12 at 1 %: common practice, no published
    /// source).
    #[arg(long, value_name = "RATIO", default_value_t = 12.0)]
    pub tcr_threshold: f64,
}

impl ScenarioArgs {
    pub fn settings(&self, windows: &WindowArgs) -> Result<crate::analysis::run::AnalysisSettings> {
        if !(self.tcr_p > 0.0 && self.tcr_p <= 100.0) {
            bail!("--tcr-p {} must be in (0, 100]", self.tcr_p);
        }
        if let Some(e) = self.initial_equity
            && !(e.is_finite() && e > 0.0)
        {
            bail!("--initial-equity {e} must be a positive amount");
        }
        Ok(crate::analysis::run::AnalysisSettings {
            calendar_span: None,
            pool: false,
            exposure_rule: self.rule,
            windows: windows.settings()?,
            scenario: crate::analysis::scenarios::ScenarioSettings {
                sizing: self.sizing,
                cap: crate::analysis::scenarios::CapRule::parse(&self.cap)?,
                initial_equity: self.initial_equity,
            },
            report_tz: zone_flag("report-tz", &self.report_tz)?,
            tcr_p: self.tcr_p,
            tcr_threshold: self.tcr_threshold,
        })
    }
}

/// Placebo and bootstrap settings.
#[derive(Debug, Clone, Args)]
pub struct ChanceArgs {
    /// Placebo calendars for the p-value (0 turns the test off).
    #[arg(long, value_name = "N", default_value_t = 999)]
    pub placebo: usize,
    /// Bootstrap resamples for the intervals (0 turns them off).
    #[arg(long, value_name = "N", default_value_t = 2000)]
    pub bootstrap: usize,
    /// Seed of the placebo shifts and bootstrap resamples.
    #[arg(long, value_name = "N", default_value_t = 1)]
    pub seed: u64,
}

/// Terminal behaviour.
#[derive(Debug, Clone, Args, Default)]
pub struct TerminalArgs {
    /// No progress bars.
    #[arg(long, short)]
    pub quiet: bool,
}

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

/// Trades, calendar, instrument mapping and row handling: the inputs of
/// every analysing subcommand.
#[derive(Debug, Clone, Args)]
pub struct InputArgs {
    #[command(flatten)]
    pub trades: TradeArgs,
    #[command(flatten)]
    pub calendar: CalendarArgs,
    #[command(flatten)]
    pub instruments: InstrumentArgs,
    #[command(flatten)]
    pub rows: RowArgs,
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

/// Exit status 3 when the run completed but needs attention (warnings:
/// rows rejected, trades the calendar cannot judge), else 0 (README).
pub fn exit_status(warnings: &[String]) -> std::process::ExitCode {
    if warnings.is_empty() {
        std::process::ExitCode::SUCCESS
    } else {
        std::process::ExitCode::from(3)
    }
}

impl InputArgs {
    /// Reads trades and the calendar (over the trades' span when it holds
    /// iCalendar files), then resolves instrument currencies. `command` names the subcommand in errors.
    pub fn load(&self, command: &str, terminal: &TerminalArgs) -> Result<Loaded> {
        if self.trades.trades.is_empty() || self.calendar.calendar.is_empty() {
            bail!("{command} needs --trades and --calendar");
        }
        let trade_opts = trade_options(&self.trades, &self.rows)?;
        let spin = spinner(terminal, "reading trades");
        crate::import::phases::mark("start");
        // Only iCalendar files need the trades' span (to bound open-ended
        // recurrences); other calendars are read alongside the trades.
        // Errors keep their order: the trades' first.
        let needs_span = self.calendar.calendar.iter().any(|p| calendar::is_ics(p));
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

/// Chart output options.
#[derive(Debug, Clone, Args, Default)]
pub struct ChartArgs {
    /// Also write each chart as PNG beside its SVG (needs a system font for
    /// the text, e.g. Debian's fonts-dejavu-core).
    #[arg(long)]
    pub png: bool,
}

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
