//! Which currencies an instrument answers to (docs/method.md §2, relevance).
//!
//! A six-letter FX or metal pair gives its two ISO 4217 codes, after
//! dropping separators (`/ _ -`) and broker suffixes (`.m`, `-pro`, trailing
//! lower-case letters). Anything else needs a user mapping; an instrument
//! left without currencies is an error unless the user says `all` or `none`.

use crate::import::calendar::is_currency;
use serde::Serialize;
use std::collections::{BTreeMap, HashMap};
use std::path::Path;

/// What to do with instruments that have no currencies.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Unmapped {
    /// Stop and list them.
    #[default]
    Error,
    /// Treat them as exposed to every currency in the calendar.
    All,
    /// Treat them as exposed to no release.
    None,
}

/// Where an instrument's currencies came from.
#[derive(Debug, Clone, PartialEq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Source {
    /// From a six-letter currency pair's code.
    Pair,
    /// From the user's instrument map.
    Mapped,
    /// Unmapped, read as exposed to every calendar currency (`--unmapped all`).
    AllCurrencies,
    /// Unmapped, read as exposed to none (`--unmapped none`).
    NoCurrencies,
}

/// One instrument's resolved currencies.
#[derive(Debug, Clone, Serialize)]
pub struct InstrumentCurrencies {
    /// Instrument name as in the trades.
    pub instrument: String,
    /// Sorted ISO codes; empty for `none`; every calendar currency for `all`.
    pub currencies: Vec<String>,
    /// Where the currencies came from.
    pub source: Source,
}

/// Why instruments could not be given currencies.
#[derive(Debug, thiserror::Error)]
pub enum RelevanceError {
    #[error(
        "no currencies known for instrument(s) {0}; map them with --instrument-map CODE=USD (several: CODE=USD/EUR) or an --instrument-map-file, or choose --unmapped all|none"
    )]
    /// Instruments without currencies, listed.
    Unmapped(String),
    /// The mapping itself is unusable.
    #[error("instrument mapping: {0}")]
    Mapping(String),
}

/// The two currencies of an FX/metal pair code, if it is one.
pub fn pair_currencies(code: &str) -> Option<[String; 2]> {
    let mut s = code.trim();
    if let Some(dot) = s.find('.') {
        s = &s[..dot];
    }
    let all_lower = !s.chars().any(|c| c.is_ascii_uppercase());
    let trimmed = if all_lower {
        s
    } else {
        s.trim_end_matches(|c: char| c.is_ascii_lowercase())
    };
    let letters: String = trimmed
        .chars()
        .filter(|c| !matches!(c, '/' | '_' | '-' | ' '))
        .collect::<String>()
        .to_ascii_uppercase();
    if letters.len() != 6 || !letters.chars().all(|c| c.is_ascii_uppercase()) {
        return None;
    }
    let (a, b) = letters.split_at(3);
    (is_currency(a) && is_currency(b) && a != b).then(|| [a.to_string(), b.to_string()])
}

/// Parses `CODE=USD` or `CODE=USD/EUR` pairs, comma-separated.
pub fn parse_instrument_map(
    specs: &[String],
) -> Result<HashMap<String, Vec<String>>, RelevanceError> {
    let mut out = HashMap::new();
    for spec in specs {
        for pair in spec.split(',').filter(|p| !p.trim().is_empty()) {
            let (code, curs) = pair
                .split_once('=')
                .ok_or_else(|| RelevanceError::Mapping(format!("'{pair}' is not CODE=CURRENCY")))?;
            let list = curs
                .split(['/', '+', ' '])
                .filter(|c| !c.is_empty())
                .map(|c| c.trim().to_ascii_uppercase())
                .collect::<Vec<_>>();
            check_codes(code, &list)?;
            out.insert(code.trim().to_string(), list);
        }
    }
    Ok(out)
}

/// Reads a JSON file `{"US500": "USD", "EU50": ["EUR"]}`.
pub fn load_instrument_map(path: &Path) -> Result<HashMap<String, Vec<String>>, RelevanceError> {
    #[derive(serde::Deserialize)]
    #[serde(untagged)]
    enum OneOrMany {
        One(String),
        Many(Vec<String>),
    }
    let text = std::fs::read_to_string(path)
        .map_err(|e| RelevanceError::Mapping(format!("{}: {e}", path.display())))?;
    let raw: HashMap<String, OneOrMany> = serde_json::from_str(&text).map_err(|e| {
        RelevanceError::Mapping(format!(
            "{}: {e} (expected {{\"CODE\": \"USD\"}})",
            path.display()
        ))
    })?;
    let mut out = HashMap::new();
    for (code, v) in raw {
        let list: Vec<String> = match v {
            OneOrMany::One(s) => vec![s.to_ascii_uppercase()],
            OneOrMany::Many(v) => v.into_iter().map(|s| s.to_ascii_uppercase()).collect(),
        };
        check_codes(&code, &list)?;
        out.insert(code, list);
    }
    Ok(out)
}

fn check_codes(code: &str, list: &[String]) -> Result<(), RelevanceError> {
    if let Some(bad) = list.iter().find(|c| !is_currency(c)) {
        return Err(RelevanceError::Mapping(format!(
            "{code}: '{bad}' is not an ISO 4217 currency code"
        )));
    }
    Ok(())
}

/// Resolves every instrument; `calendar_currencies` is what `all` means.
pub fn resolve(
    instruments: &[String],
    map: &HashMap<String, Vec<String>>,
    unmapped: Unmapped,
    calendar_currencies: &[String],
) -> Result<Vec<InstrumentCurrencies>, RelevanceError> {
    let mut out = Vec::with_capacity(instruments.len());
    let mut missing = Vec::new();
    for inst in instruments {
        let (mut currencies, source) = if let Some(m) = map.get(inst) {
            (m.clone(), Source::Mapped)
        } else if let Some(p) = pair_currencies(inst) {
            (p.to_vec(), Source::Pair)
        } else {
            match unmapped {
                Unmapped::Error => {
                    missing.push(inst.clone());
                    (vec![], Source::NoCurrencies)
                }
                Unmapped::All => (calendar_currencies.to_vec(), Source::AllCurrencies),
                Unmapped::None => (vec![], Source::NoCurrencies),
            }
        };
        currencies.sort();
        currencies.dedup();
        out.push(InstrumentCurrencies {
            instrument: inst.clone(),
            currencies,
            source,
        });
    }
    if !missing.is_empty() {
        missing.sort();
        return Err(RelevanceError::Unmapped(missing.join(", ")));
    }
    Ok(out)
}

/// Counts trades per instrument, for reports.
pub fn trades_per_instrument(instrument: &[u32], names: &[String]) -> BTreeMap<String, usize> {
    let mut counts = vec![0usize; names.len()];
    for &i in instrument {
        counts[i as usize] += 1;
    }
    names.iter().cloned().zip(counts).collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn pairs_with_separators_and_suffixes() {
        let p = |s: &str| pair_currencies(s).map(|[a, b]| format!("{a}{b}"));
        assert_eq!(p("EURUSD").as_deref(), Some("EURUSD"));
        assert_eq!(p("EUR/USD").as_deref(), Some("EURUSD"));
        assert_eq!(p("eur_usd").as_deref(), Some("EURUSD"));
        assert_eq!(p("GBPJPY.m").as_deref(), Some("GBPJPY"));
        assert_eq!(p("XAUUSD-pro").as_deref(), Some("XAUUSD"));
        assert_eq!(p("USDJPYm").as_deref(), Some("USDJPY"));
        assert_eq!(p("eurusd").as_deref(), Some("EURUSD"));
        assert_eq!(p("US500"), None);
        assert_eq!(p("BTCUSD"), None, "BTC is not ISO 4217");
        assert_eq!(p("USDUSD"), None);
    }

    #[test]
    fn unmapped_policy() {
        let inst = vec!["EURUSD".to_string(), "US500".to_string()];
        let e = resolve(&inst, &HashMap::new(), Unmapped::Error, &[]).unwrap_err();
        assert!(e.to_string().contains("US500"));
        let map = parse_instrument_map(&["US500=USD".into()]).unwrap();
        let r = resolve(&inst, &map, Unmapped::Error, &[]).unwrap();
        assert_eq!(r[1].currencies, vec!["USD"]);
        let r = resolve(
            &inst,
            &HashMap::new(),
            Unmapped::All,
            &["JPY".into(), "USD".into()],
        )
        .unwrap();
        assert_eq!(r[1].currencies, vec!["JPY", "USD"]);
        let r = resolve(&inst, &HashMap::new(), Unmapped::None, &[]).unwrap();
        assert!(r[1].currencies.is_empty());
        assert!(parse_instrument_map(&["X=ABC".into()]).is_err());
        assert_eq!(
            parse_instrument_map(&["IDX2=EUR/USD".into()]).unwrap()["IDX2"],
            vec!["EUR", "USD"]
        );
    }
}
