//! Release windows (docs/method.md §2): how long before and after each release a
//! trade counts as exposed, by tier, category or title pattern.
//!
//! Defaults: high 15 min before / 30 after, medium 5 / 10, low off. A title
//! pattern beats a category, which beats the tier. All-day releases are used
//! only when asked, and then cover their whole local day.

use crate::import::calendar::{Release, Tier};
use crate::import::setting::BadSetting;
use crate::import::zones::MINUTE_MS;
use regex::Regex;
use serde::Serialize;

/// Minutes before and after a release.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub struct Window {
    /// Minutes before the release.
    pub pre_min: i64,
    /// Minutes after the release.
    pub post_min: i64,
}

/// Window settings, resolved from flags.
#[derive(Debug, Clone, Serialize)]
pub struct WindowSettings {
    /// Window of high-tier releases (`None`: off).
    pub high: Option<Window>,
    /// Window of medium-tier releases (`None`: off).
    pub medium: Option<Window>,
    /// Window of low-tier releases (`None`: off).
    pub low: Option<Window>,
    /// category (lower case) → window; `None` turns the category off.
    pub by_category: Vec<(String, Option<Window>)>,
    /// title pattern → window; `None` turns matching releases off.
    #[serde(serialize_with = "ser_patterns")]
    pub by_title: Vec<(Regex, Option<Window>)>,
    /// Tiers to use at all (others are ignored even with a window).
    pub tiers: Vec<Tier>,
    /// Whether all-day releases count (their window is their local day).
    pub include_all_day: bool,
}

fn ser_patterns<S: serde::Serializer>(
    v: &[(Regex, Option<Window>)],
    s: S,
) -> Result<S::Ok, S::Error> {
    use serde::ser::SerializeSeq;
    let mut seq = s.serialize_seq(Some(v.len()))?;
    for (r, w) in v {
        seq.serialize_element(&(r.as_str(), w))?;
    }
    seq.end()
}

impl Default for WindowSettings {
    fn default() -> Self {
        WindowSettings {
            high: Some(Window {
                pre_min: 15,
                post_min: 30,
            }),
            medium: Some(Window {
                pre_min: 5,
                post_min: 10,
            }),
            low: None,
            by_category: Vec::new(),
            by_title: Vec::new(),
            tiers: vec![Tier::High, Tier::Medium, Tier::Low],
            include_all_day: false,
        }
    }
}

/// Parses `PRE/POST` minutes or `off`.
pub fn parse_window(s: &str) -> Result<Option<Window>, BadSetting> {
    let s = s.trim();
    if s.eq_ignore_ascii_case("off") {
        return Ok(None);
    }
    let (a, b) = s
        .split_once('/')
        .ok_or_else(|| format!("'{s}' is not PRE/POST minutes (e.g. 15/30) or off"))?;
    let parse = |x: &str| -> Result<i64, BadSetting> {
        let v: i64 = x
            .trim()
            .parse()
            .map_err(|_| format!("'{x}' is not a whole number of minutes"))?;
        if !(0..=7 * 24 * 60).contains(&v) {
            return Err(format!("{v} minutes is outside 0–10080 (one week)").into());
        }
        Ok(v)
    };
    Ok(Some(Window {
        pre_min: parse(a)?,
        post_min: parse(b)?,
    }))
}

impl WindowSettings {
    /// Applies `--window tier=PRE/POST`, `--window-category`, `--window-title`
    /// and `--tiers` flag values.
    pub fn from_flags(
        tier: &[String],
        category: &[String],
        title: &[String],
        tiers: Option<&str>,
        all_day: bool,
    ) -> Result<Self, BadSetting> {
        let mut w = WindowSettings {
            include_all_day: all_day,
            ..Default::default()
        };
        for spec in tier
            .iter()
            .flat_map(|s| s.split(','))
            .filter(|s| !s.trim().is_empty())
        {
            let (t, v) = spec
                .split_once('=')
                .ok_or_else(|| format!("--window '{spec}': expected TIER=PRE/POST"))?;
            let tier = Tier::parse(t)
                .ok_or_else(|| format!("--window '{spec}': '{t}' is not high, medium or low"))?;
            let win = parse_window(v).map_err(|e| format!("--window '{spec}': {e}"))?;
            match tier {
                Tier::High => w.high = win,
                Tier::Medium => w.medium = win,
                Tier::Low => w.low = win,
            }
        }
        for spec in category
            .iter()
            .flat_map(|s| s.split(','))
            .filter(|s| !s.trim().is_empty())
        {
            let (c, v) = spec
                .split_once('=')
                .ok_or_else(|| format!("--window-category '{spec}': expected CATEGORY=PRE/POST"))?;
            w.by_category.push((
                c.trim().to_lowercase(),
                parse_window(v).map_err(|e| format!("--window-category '{spec}': {e}"))?,
            ));
        }
        for spec in title {
            let (p, v) = spec
                .rsplit_once('=')
                .ok_or_else(|| format!("--window-title '{spec}': expected PATTERN=PRE/POST"))?;
            let re = Regex::new(p).map_err(|e| format!("--window-title '{spec}': {e}"))?;
            w.by_title.push((
                re,
                parse_window(v).map_err(|e| format!("--window-title '{spec}': {e}"))?,
            ));
        }
        if let Some(list) = tiers {
            w.tiers = list
                .split(',')
                .map(|t| {
                    Tier::parse(t)
                        .ok_or_else(|| format!("--tiers: '{t}' is not high, medium or low"))
                })
                .collect::<Result<_, _>>()?;
        }
        Ok(w)
    }

    /// The window for a release, or `None` when it is not used.
    pub fn window_for(&self, r: &Release) -> Option<Window> {
        if !self.tiers.contains(&r.tier) || (r.all_day && !self.include_all_day) {
            return None;
        }
        if let Some((_, w)) = self.by_title.iter().find(|(re, _)| re.is_match(&r.title)) {
            return *w;
        }
        if let Some(cat) = &r.category
            && let Some((_, w)) = self.by_category.iter().find(|(c, _)| c == cat)
        {
            return *w;
        }
        match r.tier {
            Tier::High => self.high,
            Tier::Medium => self.medium,
            Tier::Low => self.low,
        }
    }

    /// `(start, end, instant)` in ms for a used release. An all-day release
    /// spans its local day (end exclusive, so the last covered ms is end − 1).
    pub fn span_for(&self, r: &Release) -> Option<(i64, i64, i64)> {
        let w = self.window_for(r)?;
        if r.all_day {
            return Some((r.at, r.end - 1, r.at));
        }
        Some((
            r.at - w.pre_min * MINUTE_MS,
            r.at + w.post_min * MINUTE_MS,
            r.at,
        ))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn rel(tier: Tier, cat: Option<&str>, title: &str) -> Release {
        Release {
            id: "x".into(),
            at: 1_000_000_000,
            end: 1_000_000_000,
            all_day: false,
            title: title.into(),
            currency: "USD".into(),
            tier,
            category: cat.map(Into::into),
            region: None,
        }
    }

    #[test]
    fn defaults_and_precedence() {
        let d = WindowSettings::default();
        assert_eq!(
            d.window_for(&rel(Tier::High, None, "a")),
            Some(Window {
                pre_min: 15,
                post_min: 30
            })
        );
        assert_eq!(
            d.window_for(&rel(Tier::Medium, None, "a")),
            Some(Window {
                pre_min: 5,
                post_min: 10
            })
        );
        assert_eq!(d.window_for(&rel(Tier::Low, None, "a")), None);
        let w = WindowSettings::from_flags(
            &["low=2/3".into()],
            &["rates=60/120".into()],
            &["(?i)payroll=30/90".into()],
            Some("high,low"),
            false,
        )
        .unwrap();
        assert_eq!(
            w.window_for(&rel(Tier::Low, None, "a")),
            Some(Window {
                pre_min: 2,
                post_min: 3
            })
        );
        assert_eq!(
            w.window_for(&rel(Tier::High, Some("rates"), "Decision")),
            Some(Window {
                pre_min: 60,
                post_min: 120
            })
        );
        assert_eq!(
            w.window_for(&rel(Tier::High, Some("rates"), "Payrolls")),
            Some(Window {
                pre_min: 30,
                post_min: 90
            })
        );
        assert_eq!(
            w.window_for(&rel(Tier::Medium, None, "a")),
            None,
            "medium filtered out by --tiers"
        );
        assert!(WindowSettings::from_flags(&["huge=1/1".into()], &[], &[], None, false).is_err());
        assert!(parse_window("5/99999").is_err());
    }
}
