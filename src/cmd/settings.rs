//! Shared flags resolved into the library's typed settings before any data
//! is read, so a bad flag fails at once.

use super::args::{CalendarArgs, RowArgs, ScenarioArgs, TradeArgs, WindowArgs};
use crate::import::calendar::{self, CalendarOptions, rules::TitleRules};
use crate::import::timefmt::TimeFormat;
use crate::import::trades::{self, TradeOptions};
use crate::import::zones::{DAY_MS, Zone};
use anyhow::{Context, Result, bail};
use std::collections::HashMap;

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
                stress: self
                    .stress
                    .as_deref()
                    .map(crate::analysis::scenarios::StressRule::parse)
                    .transpose()?,
            },
            report_tz: zone_flag("report-tz", &self.report_tz)?,
            tcr_p: self.tcr_p,
            tcr_threshold: self.tcr_threshold,
        })
    }
}

#[cfg(test)]
mod tests {
    use clap::Parser;

    /// The shared flags of `analyze`, parsed alone.
    #[derive(Parser)]
    struct Flags {
        #[command(flatten)]
        scenario: super::ScenarioArgs,
        #[command(flatten)]
        windows: super::WindowArgs,
    }

    #[test]
    fn library_defaults_are_the_command_lines() {
        let f = Flags::parse_from(["eventfence"]);
        let cli = f.scenario.settings(&f.windows).unwrap();
        let lib = crate::analysis::run::AnalysisSettings::default();
        assert_eq!(
            serde_json::to_value(&cli).unwrap(),
            serde_json::to_value(&lib).unwrap()
        );
    }
}
