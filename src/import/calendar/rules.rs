//! Title rules: a JSON file mapping title patterns (regular expressions) to
//! currency, tier and category, for calendars that lack those fields.
//!
//! Format: `[{"title": "(?i)payroll", "currency": "USD", "tier": "high",
//! "category": "employment"}, ...]`. A rule may also require the release's
//! own fields: `"if_currency": "USD"`, `"if_country": "JP"` (code or ISO 3166
//! name, as the currency column wrote it) and `"if_region": "(?i)euro"`
//! (a pattern), so that a title two countries share ("CPI y/y") can be told
//! apart. The first rule whose conditions all hold sets every field it
//! names, overriding the file's own value.

use super::{CalendarError, Tier};
use regex::Regex;
use std::path::Path;

/// One title rule: a pattern, optional conditions, and what it fills in.
#[derive(Debug, Clone)]
pub struct TitleRule {
    /// Pattern matched against the title.
    pub pattern: Regex,
    /// Conditions on the release's own currency, country and region.
    pub if_currency: Option<String>,
    /// Condition on the country (ISO 3166 alpha-2).
    pub if_country: Option<String>,
    /// Condition on the region.
    pub if_region: Option<Regex>,
    /// Currency to fill in when the release has none.
    pub currency: Option<String>,
    /// Tier to fill in when the release has none.
    pub tier: Option<Tier>,
    /// Category to fill in when the release has none.
    pub category: Option<String>,
}

/// The rules of one file, tried in order.
#[derive(Debug, Clone, Default)]
pub struct TitleRules(pub Vec<TitleRule>);

#[derive(serde::Deserialize)]
#[serde(deny_unknown_fields)]
struct RawRule {
    #[serde(default = "any_title")]
    title: String,
    if_currency: Option<String>,
    if_country: Option<String>,
    if_region: Option<String>,
    currency: Option<String>,
    tier: Option<String>,
    category: Option<String>,
}

fn any_title() -> String {
    String::new()
}

/// Fields of a release that rules may fill.
pub struct Draft<'a> {
    /// The release's title.
    pub title: &'a str,
    /// The country the currency column named (ISO 3166 alpha-2), if any.
    pub country: Option<&'a str>,
    /// The region, as written.
    pub region: Option<&'a str>,
    /// Currency so far; a rule fills it when empty.
    pub currency: &'a mut Option<String>,
    /// Tier so far; a rule fills it when empty.
    pub tier: &'a mut Option<Tier>,
    /// Category so far; a rule fills it when empty.
    pub category: &'a mut Option<String>,
}

impl TitleRules {
    /// Reads a rules file (JSON).
    pub fn load(path: &Path) -> Result<Self, CalendarError> {
        let fail = |message: String| CalendarError::Rules {
            path: path.to_path_buf(),
            message,
        };
        let text = std::fs::read_to_string(path).map_err(|e| fail(e.to_string()))?;
        let raw: Vec<RawRule> = serde_json::from_str(&text)
            .map_err(|e| fail(format!("{e} (expected a JSON array of {{\"title\": regex, \"currency\", \"tier\", \"category\"}})")))?;
        let mut rules = Vec::with_capacity(raw.len());
        for (i, r) in raw.into_iter().enumerate() {
            let pattern = Regex::new(&r.title)
                .map_err(|e| fail(format!("rule {}: bad title pattern: {e}", i + 1)))?;
            let tier = match r.tier.as_deref() {
                None => None,
                Some(t) => Some(Tier::parse(t).ok_or_else(|| {
                    fail(format!(
                        "rule {}: tier '{t}' is not high, medium or low",
                        i + 1
                    ))
                })?),
            };
            let currency = match r.currency {
                None => None,
                Some(c) if super::is_currency(&c) => Some(c.to_ascii_uppercase()),
                Some(c) => {
                    return Err(fail(format!(
                        "rule {}: '{c}' is not an ISO 4217 currency code",
                        i + 1
                    )));
                }
            };
            let if_country = match r.if_country {
                None => None,
                Some(c) => Some(
                    super::countries::code_of(&c)
                        .ok_or_else(|| {
                            fail(format!(
                                "rule {}: if_country '{c}' is not a known ISO 3166 code or name",
                                i + 1
                            ))
                        })?
                        .to_string(),
                ),
            };
            let if_region = match r.if_region {
                None => None,
                Some(p) => Some(
                    Regex::new(&p)
                        .map_err(|e| fail(format!("rule {}: bad if_region pattern: {e}", i + 1)))?,
                ),
            };
            let if_currency = r.if_currency.map(|c| c.trim().to_ascii_uppercase());
            rules.push(TitleRule {
                pattern,
                if_currency,
                if_country,
                if_region,
                currency,
                tier,
                category: r.category,
            });
        }
        Ok(TitleRules(rules))
    }

    /// Applies the first matching rule to a draft release.
    pub fn fill(&self, d: Draft<'_>) {
        let holds = |r: &TitleRule| {
            r.pattern.is_match(d.title)
                && r.if_currency.as_ref().is_none_or(|c| {
                    d.currency
                        .as_deref()
                        .is_some_and(|x| x.eq_ignore_ascii_case(c))
                })
                && r.if_country
                    .as_ref()
                    .is_none_or(|c| d.country == Some(c.as_str()))
                && r.if_region
                    .as_ref()
                    .is_none_or(|p| d.region.is_some_and(|x| p.is_match(x)))
        };
        if let Some(rule) = self.0.iter().find(|r| holds(r)) {
            if let Some(c) = &rule.currency {
                *d.currency = Some(c.clone());
            }
            if let Some(t) = rule.tier {
                *d.tier = Some(t);
            }
            if let Some(c) = &rule.category {
                *d.category = Some(c.clone());
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn first_matching_rule_fills_fields() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("rules.json");
        std::fs::write(&p, r#"[{"title":"(?i)payroll","currency":"usd","tier":"high","category":"employment"},{"title":".*","tier":"low"}]"#).unwrap();
        let rules = TitleRules::load(&p).unwrap();
        let (mut c, mut t, mut k) = (None, Some(Tier::Medium), None);
        rules.fill(Draft {
            title: "Nonfarm Payrolls",
            country: None,
            region: None,
            currency: &mut c,
            tier: &mut t,
            category: &mut k,
        });
        assert_eq!(
            (c.as_deref(), t, k.as_deref()),
            (Some("USD"), Some(Tier::High), Some("employment"))
        );
        let (mut c, mut t, mut k) = (Some("EUR".to_string()), None, None);
        rules.fill(Draft {
            title: "Anything",
            country: None,
            region: None,
            currency: &mut c,
            tier: &mut t,
            category: &mut k,
        });
        assert_eq!((c.as_deref(), t), (Some("EUR"), Some(Tier::Low)));
        // A title two countries share, told apart by country and region.
        std::fs::write(&p, r#"[{"title":"(?i)^cpi","if_country":"Japan","tier":"medium"},{"title":"(?i)^cpi","if_currency":"usd","tier":"high"},{"if_region":"(?i)euro","category":"euro area"}]"#).unwrap();
        let rules = TitleRules::load(&p).unwrap();
        let apply = |country: Option<&str>, region: Option<&str>, cur: &str| {
            let (mut c, mut t, mut k) = (Some(cur.to_string()), None, None);
            rules.fill(Draft {
                title: "CPI y/y",
                country,
                region,
                currency: &mut c,
                tier: &mut t,
                category: &mut k,
            });
            (t, k)
        };
        assert_eq!(apply(Some("JP"), None, "JPY"), (Some(Tier::Medium), None));
        assert_eq!(apply(Some("US"), None, "USD"), (Some(Tier::High), None));
        assert_eq!(
            apply(None, Some("Euro area"), "EUR"),
            (None, Some("euro area".to_string()))
        );
        std::fs::write(&p, r#"[{"title":"x","if_country":"Atlantis"}]"#).unwrap();
        assert!(
            TitleRules::load(&p)
                .unwrap_err()
                .to_string()
                .contains("if_country 'Atlantis'")
        );
        std::fs::write(&p, r#"[{"title":"(","tier":"high"}]"#).unwrap();
        assert!(
            TitleRules::load(&p)
                .unwrap_err()
                .to_string()
                .contains("rule 1")
        );
    }
}
