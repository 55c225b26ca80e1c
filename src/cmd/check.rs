//! `eventfence check`: load trades and/or a calendar and show what was
//! understood, so a user can fix mappings and zones before analysing.

use super::common::{self, InputArgs, InstrumentArgs, RowArgs};
use crate::engine::relevance::{RelevanceError, Source, Unmapped};
use crate::import::calendar::Tier;
use crate::import::zones::format_utc;
use crate::report::check::{CalendarOverview, CheckReport, InstrumentLine, TradesOverview};
use crate::report::summary::{CAUTION, ToolInfo};
use anyhow::{Result, bail};
use clap::Args;
use std::collections::BTreeMap;

/// Show what eventfence understood of the inputs.
///
/// Example:
///   eventfence check --trades demo/trades.csv --trades-tz America/New_York+07:00 \
///     --calendar calendars/demo-usd.ics calendars/demo-eur.csv calendars/demo-gbp-jpy.ics \
///     --calendar-tz Europe/Berlin --instrument-map US500=USD
#[derive(Debug, Args)]
#[command(verbatim_doc_comment)]
pub struct CheckArgs {
    #[command(flatten)]
    pub input: InputArgs,
    #[command(flatten)]
    pub terminal: common::TerminalArgs,
    /// Print JSON instead of tables.
    #[arg(long)]
    pub json: bool,
}

/// Exit status 0 when every row imported and every instrument resolved.
pub fn run(args: CheckArgs) -> Result<std::process::ExitCode> {
    if args.input.trades.trades.is_empty() && args.input.calendar.calendar.is_empty() {
        bail!("nothing to check: give --trades and/or --calendar");
    }
    // check always reads past bad rows so it can list them all.
    let rows = RowArgs {
        skip_bad_rows: true,
        ..args.input.rows.clone()
    };
    let mut problems = Vec::new();
    let trade_opts = common::trade_options(&args.input.trades, &rows)?;
    let loaded = if args.input.trades.trades.is_empty() {
        None
    } else {
        let spin = common::spinner(&args.terminal, "reading trades");
        let read = common::load_trades(&args.input.trades, &trade_opts)?;
        spin.finish_and_clear();
        Some(read)
    };
    let span = loaded.as_ref().and_then(|(t, _)| t.span());
    let cal_opts = common::calendar_options(
        &args.input.calendar,
        &rows,
        args.input.trades.delimiter,
        span,
    )?;
    let cal = if args.input.calendar.calendar.is_empty() {
        None
    } else {
        Some(common::load_calendar(&args.input.calendar, &cal_opts)?)
    };
    let cal_currencies = cal
        .as_ref()
        .map(common::calendar_currencies)
        .unwrap_or_default();

    let mut trades = None;
    if let Some((t, import)) = loaded {
        let counts = crate::engine::relevance::trades_per_instrument(&t.instrument, &t.instruments);
        // Unmapped instruments are listed as a problem here, not fatal.
        let strict = args.input.instruments.unmapped == Unmapped::Error;
        let policy = InstrumentArgs {
            unmapped: if strict {
                Unmapped::None
            } else {
                args.input.instruments.unmapped
            },
            ..args.input.instruments.clone()
        };
        let resolved = common::instrument_currencies(&policy, &t.instruments, &cal_currencies)?;
        let mut missing: Vec<String> = resolved
            .iter()
            .filter(|c| c.source == Source::NoCurrencies)
            .map(|c| c.instrument.clone())
            .collect();
        if strict && !missing.is_empty() {
            missing.sort();
            problems.push(RelevanceError::Unmapped(missing.join(", ")).to_string());
        }
        // Coverage, as analyze reports it (its "exposed on the other
        // currency" counts use the default windows and rule: check takes no
        // window flags).
        if let Some(c) = &cal {
            let lists: Vec<Vec<String>> = resolved.iter().map(|r| r.currencies.clone()).collect();
            let defaults = crate::engine::windows::WindowSettings::default();
            let coverage = crate::engine::exposure::coverage_at(
                &c.releases,
                &t,
                &lists,
                &defaults,
                crate::engine::exposure::ExposureRule::Overlap,
                args.input.calendar.stated_span()?,
            );
            problems.extend(crate::report::summary::coverage_warnings(&coverage));
        }
        let zone = trade_opts.zone;
        trades = Some(TradesOverview {
            import,
            input_zone: zone,
            span_utc: t.span().map(|(a, b)| [format_utc(a), format_utc(b)]),
            span_input_zone: t.span().map(|(a, b)| [zone.format(a), zone.format(b)]),
            runs: t.runs.len(),
            instruments: resolved
                .into_iter()
                .map(|c| InstrumentLine {
                    trades: counts.get(&c.instrument).copied().unwrap_or(0),
                    currencies: c,
                })
                .collect(),
        });
    }
    let calendar = cal.map(|c| {
        let mut by: BTreeMap<String, BTreeMap<Tier, usize>> = BTreeMap::new();
        for r in &c.releases {
            *by.entry(r.currency.clone())
                .or_default()
                .entry(r.tier)
                .or_default() += 1;
        }
        CalendarOverview {
            span_utc: c
                .releases
                .first()
                .zip(c.releases.last())
                .map(|(a, b)| [format_utc(a.at), format_utc(b.at)]),
            releases_by_currency: by,
            all_day_releases: c.releases.iter().filter(|r| r.all_day).count(),
            import: c.summary,
        }
    });
    let report = CheckReport {
        tool: ToolInfo::current(),
        trades,
        calendar,
        problems,
        caution: CAUTION,
    };
    if args.json {
        crate::render::output::stdout(
            format!("{}\n", serde_json::to_string_pretty(&report)?).as_bytes(),
        )?;
    } else {
        args.terminal.print(&crate::render::table::check(&report))?;
    }
    let rejected = report
        .trades
        .as_ref()
        .map_or(0, |t| t.import.log.rows_rejected)
        + report
            .calendar
            .as_ref()
            .map_or(0, |c| c.import.log.rows_rejected);
    Ok(if rejected > 0 || !report.problems.is_empty() {
        std::process::ExitCode::from(3)
    } else {
        std::process::ExitCode::SUCCESS
    })
}
