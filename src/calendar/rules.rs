//! Title rules: a JSON file mapping title patterns (regular expressions) to
//! currency, tier and category, for calendars that lack those fields.
//!
//! Format: `[{"title": "(?i)payroll", "currency": "USD", "tier": "high",
//! "category": "employment"}, ...]`. The first rule whose pattern matches a
//! title sets every field it names, overriding the file's own value.

use super::{CalendarError, Tier};
use regex::Regex;
use std::path::Path;

#[derive(Debug, Clone)]
pub struct TitleRule {
    pub pattern: Regex,
    pub currency: Option<String>,
    pub tier: Option<Tier>,
    pub category: Option<String>,
}

#[derive(Debug, Clone, Default)]
pub struct TitleRules(pub Vec<TitleRule>);

#[derive(serde::Deserialize)]
#[serde(deny_unknown_fields)]
struct RawRule {
    title: String,
    currency: Option<String>,
    tier: Option<String>,
    category: Option<String>,
}

/// Fields of a release that rules may fill.
pub struct Draft<'a> {
    pub title: &'a str,
    pub currency: &'a mut Option<String>,
    pub tier: &'a mut Option<Tier>,
    pub category: &'a mut Option<String>,
}

impl TitleRules {
    pub fn load(path: &Path) -> Result<Self, CalendarError> {
        let fail = |message: String| CalendarError::Rules { path: path.to_path_buf(), message };
        let text = std::fs::read_to_string(path).map_err(|e| fail(e.to_string()))?;
        let raw: Vec<RawRule> = serde_json::from_str(&text)
            .map_err(|e| fail(format!("{e} (expected a JSON array of {{\"title\": regex, \"currency\", \"tier\", \"category\"}})")))?;
        let mut rules = Vec::with_capacity(raw.len());
        for (i, r) in raw.into_iter().enumerate() {
            let pattern = Regex::new(&r.title).map_err(|e| fail(format!("rule {}: bad title pattern: {e}", i + 1)))?;
            let tier = match r.tier.as_deref() {
                None => None,
                Some(t) => Some(Tier::parse(t).ok_or_else(|| fail(format!("rule {}: tier '{t}' is not high, medium or low", i + 1)))?),
            };
            let currency = match r.currency {
                None => None,
                Some(c) if super::is_currency(&c) => Some(c.to_ascii_uppercase()),
                Some(c) => return Err(fail(format!("rule {}: '{c}' is not an ISO 4217 currency code", i + 1))),
            };
            rules.push(TitleRule { pattern, currency, tier, category: r.category });
        }
        Ok(TitleRules(rules))
    }

    /// Applies the first matching rule to a draft release.
    pub fn fill(&self, d: Draft<'_>) {
        if let Some(rule) = self.0.iter().find(|r| r.pattern.is_match(d.title)) {
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
        rules.fill(Draft { title: "Nonfarm Payrolls", currency: &mut c, tier: &mut t, category: &mut k });
        assert_eq!((c.as_deref(), t, k.as_deref()), (Some("USD"), Some(Tier::High), Some("employment")));
        let (mut c, mut t, mut k) = (Some("EUR".to_string()), None, None);
        rules.fill(Draft { title: "Anything", currency: &mut c, tier: &mut t, category: &mut k });
        assert_eq!((c.as_deref(), t), (Some("EUR"), Some(Tier::Low)));
        std::fs::write(&p, r#"[{"title":"(","tier":"high"}]"#).unwrap();
        assert!(TitleRules::load(&p).unwrap_err().to_string().contains("rule 1"));
    }
}
