//! Blackout schedule for live trading: for each instrument, the windows
//! around its relevant releases in a date range, merged when they overlap or
//! lie within a gap, each carrying the releases behind it.
//!
//! Invariant: every relevant used release in the range lies inside exactly
//! one merged window of each instrument it is relevant to.

use crate::engine::windows::WindowSettings;
use crate::import::calendar::Release;
use crate::import::zones::MINUTE_MS;
use serde::Serialize;

/// One release behind a blackout window.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct WindowRelease {
    /// Release id (file's UID or a derived one).
    pub id: String,
    /// Release title.
    pub title: String,
    /// ISO 4217 currency.
    pub currency: String,
    /// Tier (`high`, `medium`, `low`).
    pub tier: &'static str,
    /// Release instant, ms UTC.
    pub at: i64,
}

/// A merged blackout window for one instrument; `start`/`end` are ms UTC,
/// both inclusive (the trade rule `overlap` treats window edges as inside).
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct Blackout {
    /// Instrument the window applies to.
    pub instrument: String,
    /// First blocked instant.
    pub start: i64,
    /// Last blocked instant.
    pub end: i64,
    /// The releases merged into this window.
    pub releases: Vec<WindowRelease>,
}

impl Blackout {
    /// A stable identifier: instrument and the first release's instant, so
    /// re-exports of the same schedule update rather than duplicate entries.
    pub fn uid(&self) -> String {
        let first = self.releases.first().map(|r| r.at).unwrap_or(self.start);
        let inst: String = self
            .instrument
            .chars()
            .map(|c| if c.is_ascii_alphanumeric() { c } else { '-' })
            .collect();
        format!(
            "{}-{}@eventfence",
            inst,
            crate::import::zones::format_utc(first).replace([':', '-'], "")
        )
    }
}

/// How windows are formed.
#[derive(Debug, Clone)]
pub struct ScheduleSettings {
    /// Windows per tier, category and title.
    pub windows: WindowSettings,
    /// Merge windows whose gap is at most this many minutes.
    pub merge_gap_min: i64,
    /// When set: every used release gets N minutes before and after,
    /// replacing the per-tier windows (a simple flat-before-release rule).
    pub flat_min: Option<i64>,
    /// Range [from, to) in ms UTC: releases whose instant falls inside.
    pub range: (i64, i64),
}

/// Builds the merged windows for each (instrument, currencies) pair.
pub fn build(
    releases: &[Release],
    instruments: &[(String, Vec<String>)],
    s: &ScheduleSettings,
) -> Vec<Blackout> {
    let mut out = Vec::new();
    for (inst, currencies) in instruments {
        let mut spans: Vec<(i64, i64, &Release)> = releases
            .iter()
            .filter(|r| r.at >= s.range.0 && r.at < s.range.1 && currencies.contains(&r.currency))
            .filter_map(|r| {
                let (start, end, _) = s.windows.span_for(r)?;
                Some(match s.flat_min {
                    Some(n) if !r.all_day => (r.at - n * MINUTE_MS, r.at + n * MINUTE_MS, r),
                    _ => (start, end, r),
                })
            })
            .collect();
        spans.sort_by_key(|x| (x.0, x.1));
        let gap = s.merge_gap_min * MINUTE_MS;
        let mut cur: Option<Blackout> = None;
        for (a, b, r) in spans {
            let wr = WindowRelease {
                id: r.id.clone(),
                title: r.title.clone(),
                currency: r.currency.clone(),
                tier: r.tier.as_str(),
                at: r.at,
            };
            match cur.as_mut() {
                Some(w) if a <= w.end + gap => {
                    w.end = w.end.max(b);
                    w.releases.push(wr);
                }
                _ => {
                    out.extend(cur.take());
                    cur = Some(Blackout {
                        instrument: inst.clone(),
                        start: a,
                        end: b,
                        releases: vec![wr],
                    });
                }
            }
        }
        out.extend(cur);
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::import::calendar::Tier;

    fn rel(id: &str, at_min: i64, cur: &str, tier: Tier) -> Release {
        Release {
            id: id.into(),
            at: at_min * MINUTE_MS,
            end: at_min * MINUTE_MS,
            all_day: false,
            title: id.into(),
            currency: cur.into(),
            tier,
            category: None,
            region: None,
        }
    }

    #[test]
    fn overlapping_and_near_windows_merge() {
        // High windows [t−15, t+30]: r1 [985,1030], r2 [1025,1070] overlap;
        // r3 [1080,1125] is 10 min after → merges only with a gap ≥ 10.
        // Medium r4 at 2000 → [1995, 2010]; JPY release irrelevant to EURUSD.
        let rs = vec![
            rel("r1", 1000, "USD", Tier::High),
            rel("r2", 1040, "EUR", Tier::High),
            rel("r3", 1095, "USD", Tier::High),
            rel("r4", 2000, "USD", Tier::Medium),
            rel("r5", 1500, "JPY", Tier::High),
        ];
        let inst = vec![(
            "EURUSD".to_string(),
            vec!["EUR".to_string(), "USD".to_string()],
        )];
        let mut s = ScheduleSettings {
            windows: WindowSettings::default(),
            merge_gap_min: 0,
            flat_min: None,
            range: (0, i64::MAX),
        };
        let w = build(&rs, &inst, &s);
        let spans: Vec<(i64, i64, usize)> = w
            .iter()
            .map(|b| (b.start / MINUTE_MS, b.end / MINUTE_MS, b.releases.len()))
            .collect();
        assert_eq!(
            spans,
            vec![(985, 1070, 2), (1080, 1125, 1), (1995, 2010, 1)]
        );
        s.merge_gap_min = 10;
        let w = build(&rs, &inst, &s);
        assert_eq!(
            w.iter()
                .map(|b| (b.start / MINUTE_MS, b.end / MINUTE_MS))
                .collect::<Vec<_>>(),
            vec![(985, 1125), (1995, 2010)]
        );
        // Touching windows merge even with no gap: [985, 1030] and a
        // release at 1045 whose window starts exactly at 1030.
        let rs2 = vec![
            rel("a", 1000, "USD", Tier::High),
            rel("b", 1045, "USD", Tier::High),
        ];
        s.merge_gap_min = 0;
        assert_eq!(build(&rs2, &inst, &s).len(), 1);
        s.flat_min = Some(5);
        let w = build(&rs, &inst, &s);
        assert_eq!(w[0].start / MINUTE_MS, 995);
        assert_eq!(w[0].end / MINUTE_MS, 1005);
        // Instrument + first release instant (minute 1000 = 1970-01-01T16:40Z).
        assert_eq!(w[0].uid(), "EURUSD-19700101T164000Z@eventfence");
    }
}
