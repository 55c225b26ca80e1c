//! `eventfence schedule`: the blackout windows a live strategy should obey,
//! as CSV, JSON, ICS, or a terminal view of the coming days.

use super::common::{self, CalendarArgs, InstrumentArgs, RowArgs, WindowArgs};
use super::outcome::Outcome;
use crate::analysis::schedule::{self, ScheduleSettings};
use crate::import::zones::{DAY_MS, naive_to_ms};
use anyhow::{Context, Result, bail};
use clap::Args;
use std::path::PathBuf;

/// Write the blackout windows for instruments over a date range.
///
/// Example: one month for EURUSD and an index mapped to USD, in the
/// server clock's time, as ICS:
///   eventfence schedule --calendar calendars/demo-usd.ics calendars/demo-eur.csv \
///     --calendar-tz Europe/Berlin --instruments EURUSD,US500 --instrument-map US500=USD \
///     --from 2024-03-01 --to 2024-03-31 --tz America/New_York+07:00 --format ics --output march.ics
#[derive(Debug, Args)]
#[command(verbatim_doc_comment)]
pub struct ScheduleArgs {
    #[command(flatten)]
    pub calendar: CalendarArgs,
    #[command(flatten)]
    pub instruments: InstrumentArgs,
    #[command(flatten)]
    pub rows: RowArgs,
    #[command(flatten)]
    pub windows: WindowArgs,
    /// Instruments to schedule (comma-separated).
    #[arg(long = "instruments", value_name = "CODES", value_delimiter = ',')]
    pub instruments_list: Vec<String>,
    /// Or the instruments traded in a back-test: its trade list(s), read as
    /// analyze reads them (--trades-tz, --map, ...); with --run, only the
    /// instruments those runs traded.
    #[command(flatten)]
    pub trades: common::TradeArgs,
    /// The flags every subcommand takes (schedule draws no progress bar,
    /// so --quiet changes nothing here).
    #[command(flatten)]
    pub terminal: common::TerminalArgs,
    /// Or currencies directly (comma-separated); each becomes its own row.
    #[arg(long, value_name = "CCYS", value_delimiter = ',')]
    pub currencies: Vec<String>,
    /// Zone the times are written in (any zone spec, shifted clocks included).
    #[arg(long, value_name = "ZONE", default_value = "UTC")]
    pub tz: String,
    /// Merge windows separated by at most this many minutes.
    #[arg(long, value_name = "MIN", default_value_t = 0)]
    pub merge_gap: i64,
    /// Flat rule: N minutes before to N minutes after every used release,
    /// replacing the tier windows.
    #[arg(long, value_name = "MIN")]
    pub flat: Option<i64>,
    /// Show the windows of the next DAYS days (from now) instead of --from/--to.
    #[arg(long, value_name = "DAYS")]
    pub next: Option<i64>,
    /// Output format.
    #[arg(long, value_enum, default_value_t = Format::Table)]
    pub format: Format,
    /// Write to this file (atomically) instead of stdout (`-`: stdout).
    #[arg(long, value_name = "FILE")]
    pub output: Option<PathBuf>,
}

#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum Format {
    Table,
    Csv,
    Json,
    Ics,
}

pub fn run(args: ScheduleArgs) -> Result<std::process::ExitCode> {
    let (format, output, calendars, terminal) = (
        args.format,
        args.output.clone(),
        args.calendar.calendar.clone(),
        args.terminal.clone(),
    );
    let (outcome, windows) = execute(args)?;
    // On standard error, so that a piped schedule stays clean data.
    let colour = crate::render::term::use_colour_on_stderr(terminal.color);
    for w in &outcome.warnings {
        eprint!(
            "{}",
            crate::render::term::emphasise(&format!("WARNING {w}\n"), colour)
        );
    }
    let bytes = match format {
        Format::Table => outcome.text.as_bytes(),
        Format::Json => outcome.json.as_bytes(),
        Format::Csv => outcome.file("schedule.csv").unwrap_or_default(),
        Format::Ics => outcome.file("schedule.ics").unwrap_or_default(),
    };
    // `--output -` is standard output, as without --output.
    let output = output.filter(|p| p.as_os_str() != super::load::STDIN);
    match &output {
        Some(path) => {
            let dir = path
                .parent()
                .filter(|p| !p.as_os_str().is_empty())
                .map(PathBuf::from)
                .unwrap_or_else(|| PathBuf::from("."));
            let name = path
                .file_name()
                .context("--output needs a file name")?
                .to_string_lossy()
                .into_owned();
            crate::render::output::OutDir::new(&dir, &calendars)?.write(&name, bytes)?;
            eprintln!("wrote {windows} window(s) to {}", path.display());
        }
        None if format == Format::Table => terminal.print(&outcome.text)?,
        None => crate::render::output::stdout(bytes)?,
    }
    Ok(common::exit_status(&outcome.warnings))
}

/// The blackout list in every form it is written in (the table as text,
/// JSON, and `schedule.csv` / `schedule.ics` as files), with its warnings
/// and the number of windows.
pub fn execute(mut args: ScheduleArgs) -> Result<(Outcome, usize)> {
    if !args.calendar.given() {
        bail!("schedule needs --calendar");
    }
    if !args.trades.run.is_empty() && !args.trades.given() {
        bail!("--run picks runs of --trades: give the trade list too");
    }
    if !args.trades.keep.is_empty() {
        bail!("--keep carries columns into per-trade outputs; schedule writes none");
    }
    if args.trades.given() {
        let opts = common::trade_options(&args.trades, &args.rows)?;
        let (trades, _) = common::load_trades(&args.trades, &opts)?;
        // The instruments that actually traded, in name order, after any
        // named with --instruments.
        let mut traded: Vec<String> = trades
            .instrument
            .iter()
            .map(|&i| trades.instruments[i as usize].clone())
            .collect::<std::collections::BTreeSet<_>>()
            .into_iter()
            .collect();
        traded.retain(|i| !args.instruments_list.contains(i));
        args.instruments_list.extend(traded);
    }
    if args.instruments_list.is_empty() && args.currencies.is_empty() {
        bail!("name --instruments, --currencies or --trades");
    }
    let zone = common::zone_flag("tz", &args.tz)?;
    let now = chrono::Utc::now().timestamp_millis();
    let range = if let Some(days) = args.next {
        if !(1..=3660).contains(&days) {
            bail!("--next {days}: give 1 to 3660 days");
        }
        args.calendar.from = Some(crate::import::zones::format_utc(now)[..10].to_string());
        args.calendar.to =
            Some(crate::import::zones::format_utc(now + days * DAY_MS)[..10].to_string());
        (now, now + days * DAY_MS)
    } else {
        let (Some(f), Some(t)) = (&args.calendar.from, &args.calendar.to) else {
            bail!("give --from and --to (YYYY-MM-DD, UTC) or --next DAYS");
        };
        let day = |s: &str| -> Result<i64> {
            let d = chrono::NaiveDate::parse_from_str(s, "%Y-%m-%d")
                .with_context(|| format!("'{s}' is not YYYY-MM-DD"))?;
            Ok(naive_to_ms(&d.and_time(chrono::NaiveTime::MIN)))
        };
        (day(f)?, day(t)? + DAY_MS)
    };
    let windows = args.windows.settings()?;
    let cal_opts = common::calendar_options(&args.calendar, &args.rows, None, Some(range))?;
    let cal = common::load_calendar(&args.calendar, &cal_opts)?;
    let mut pairs: Vec<(String, Vec<String>)> = Vec::new();
    if !args.instruments_list.is_empty() {
        for c in common::instrument_currencies(
            &args.instruments,
            &args.instruments_list,
            &common::calendar_currencies(&cal),
        )? {
            pairs.push((c.instrument, c.currencies));
        }
    }
    for c in &args.currencies {
        let c = c.trim().to_ascii_uppercase();
        if !crate::import::calendar::is_currency(&c) {
            bail!("--currencies: '{c}' is not an ISO 4217 code");
        }
        pairs.push((c.clone(), vec![c]));
    }
    let warnings = schedule_warnings(
        &cal,
        &pairs,
        range,
        args.calendar.stated_span()?,
        windows.include_all_day,
    );
    let settings = ScheduleSettings {
        windows,
        merge_gap_min: args.merge_gap.max(0),
        flat_min: args.flat,
        range,
    };
    let list = schedule::build(&cal.releases, &pairs, &settings);
    let outcome = Outcome {
        json: crate::render::schedule::json(&list, &zone),
        text: crate::render::schedule::table(&list, &zone),
        files: vec![
            (
                "schedule.csv".into(),
                crate::render::schedule::csv(&list, &zone),
            ),
            (
                "schedule.ics".into(),
                crate::render::schedule::ics(&list, now),
            ),
        ],
        inputs: args.calendar.calendar.clone(),
        warnings,
        ..Outcome::default()
    };
    Ok((outcome, list.len()))
}

/// What a schedule cannot promise: days of the requested range the calendar
/// does not cover (per currency: its first to last release, or the stated
/// `--calendar-span`), high-tier all-day releases left out, skipped rows.
fn schedule_warnings(
    cal: &crate::import::calendar::Calendar,
    pairs: &[(String, Vec<String>)],
    range: (i64, i64),
    stated: Option<(i64, i64)>,
    all_day_used: bool,
) -> Vec<String> {
    let mut w = Vec::new();
    let mut currencies: Vec<&String> = pairs.iter().flat_map(|p| &p.1).collect();
    currencies.sort();
    currencies.dedup();
    let day = |ms: i64| crate::import::zones::format_utc(ms)[..10].to_string();
    for c in currencies {
        let of: Vec<i64> = cal
            .releases
            .iter()
            .filter(|r| &r.currency == c)
            .map(|r| r.at)
            .collect();
        let covered = match (stated, of.iter().min(), of.iter().max()) {
            (Some(s), Some(_), _) => Some(s),
            (None, Some(&a), Some(&b)) => Some((
                a.div_euclid(DAY_MS) * DAY_MS,
                (b.div_euclid(DAY_MS) + 1) * DAY_MS,
            )),
            _ => None,
        };
        match covered {
            None => w.push(format!(
                "the calendar has no releases for {c}: the schedule holds no windows for it"
            )),
            Some((a, b)) if range.0 < a || range.1 > b => {
                let whole = range.1 <= a || range.0 >= b;
                w.push(format!(
                    "the calendar covers {} to {} for {c}{}; the requested {} to {} lies {} outside it, so windows there may be missing",
                    day(a),
                    day(b - DAY_MS),
                    if stated.is_some() { " (--calendar-span)" } else { " (first to last release)" },
                    day(range.0),
                    day(range.1 - 1),
                    if whole { "wholly" } else { "partly" }
                ));
            }
            Some(_) => {}
        }
    }
    if !all_day_used {
        let wanted: Vec<&String> = pairs.iter().flat_map(|p| &p.1).collect();
        let left = cal
            .releases
            .iter()
            .filter(|r| {
                r.all_day
                    && r.tier == crate::import::calendar::Tier::High
                    && r.end > range.0
                    && r.at < range.1
                    && wanted.contains(&&r.currency)
            })
            .count();
        if left > 0 {
            w.push(format!("{left} high-tier all-day release(s) in the range are left out (no fixed time); --all-day blocks their whole local day"));
        }
    }
    if cal.summary.log.rows_rejected > 0 {
        w.push(format!(
            "SKIPPED: {} calendar row(s) rejected and left out",
            cal.summary.log.rows_rejected
        ));
    }
    w
}
