//! The flags shared by several subcommands, defined once and flattened
//! into each subcommand's arguments (clap structs only; resolving them is
//! `settings`, reading the files they name is `load`).

use crate::engine::relevance::Unmapped;
use crate::import::zones::LocalPolicy;
use clap::Args;
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
    /// Tables handed over in memory by a library caller (the Python
    /// package), read in place of `--trades` files; never a flag.
    #[arg(skip)]
    pub tables: Vec<crate::import::table::Source>,
}

/// Where the release calendar comes from and how to read it.
#[derive(Debug, Clone, Args, Default)]
pub struct CalendarArgs {
    /// Release calendar file(s), ICS or CSV, merged (e.g. one per currency).
    #[arg(long = "calendar", value_name = "FILE", num_args = 1..)]
    pub calendar: Vec<PathBuf>,
    /// Calendar tables handed over in memory by a library caller, read
    /// after the `--calendar` files; never a flag.
    #[arg(skip)]
    pub tables: Vec<crate::import::table::Source>,
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
    /// Adds the stressed scenario: every trade kept, each exposed one charged
    /// amount:15 (per trade), per-size:7 (times its size) or pct:20 (% of
    /// its |P/L|) for worse fills around releases.
    #[arg(long, value_name = "RULE")]
    pub stress: Option<String>,
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

/// Placebo and bootstrap settings.
#[derive(Debug, Clone, Args)]
pub struct ChanceArgs {
    /// Placebo calendars for the p-value (0 turns the test off).
    #[arg(long, value_name = "N", default_value_t = 999)]
    pub placebo: usize,
    /// Bootstrap resamples for the intervals (0 turns them off).
    #[arg(long, value_name = "N", default_value_t = 2000)]
    pub bootstrap: usize,
    /// With runs: draws of the distortion reference (per run, as many
    /// random trades removed as it has exposed ones; 0 = off).
    #[arg(long, value_name = "N", default_value_t = 199)]
    pub distortion_draws: usize,
    /// Seed of the placebo shifts, bootstrap resamples and distortion draws.
    #[arg(long, value_name = "N", default_value_t = 1)]
    pub seed: u64,
}

/// Terminal behaviour, the same flags in every subcommand.
#[derive(Debug, Clone, Args, Default)]
pub struct TerminalArgs {
    /// No progress bars.
    #[arg(long, short)]
    pub quiet: bool,
    /// Emphasis in the terminal text (the answer in bold, warnings in
    /// blue): auto (on a terminal, unless NO_COLOR is set), always, never.
    #[arg(long, value_enum, value_name = "WHEN", default_value_t = crate::render::term::Colour::Auto)]
    pub color: crate::render::term::Colour,
}

/// What `rank` and `tune` print on stdout.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq, clap::ValueEnum)]
pub enum PrintFormat {
    /// The terminal table.
    #[default]
    Table,
    /// One JSON document (the same as --json).
    Json,
    /// One JSON object per line, one line per row (rank: each run; tune:
    /// each cell), so that a large result streams.
    Jsonl,
}

impl PrintFormat {
    /// The format asked for, `--json` standing for `--format json`.
    pub fn chosen(self, json: bool) -> PrintFormat {
        if json { PrintFormat::Json } else { self }
    }
}

impl TerminalArgs {
    /// Prints terminal text on stdout, emphasised as `--color` says.
    pub fn print(&self, text: &str) -> std::io::Result<()> {
        let colour = crate::render::term::use_colour(self.color);
        crate::render::output::stdout(crate::render::term::emphasise(text, colour).as_bytes())
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

/// Chart output options.
#[derive(Debug, Clone, Args, Default)]
pub struct ChartArgs {
    /// Also write each chart as PNG beside its SVG (needs a system font for
    /// the text, e.g. Debian's fonts-dejavu-core).
    #[arg(long)]
    pub png: bool,
}
