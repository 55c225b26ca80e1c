//! ISO 3166-1 alpha-2 country codes (and `EU`) in a calendar's currency
//! field, read as the currency in force in that country on the release date
//! (ISO 4217). Euro-area members map to EUR from their adoption date and to
//! their own currency before it.
//!
//! The table was written from memory of the ISO 4217 entity list and checked
//! against the Unicode CLDR territory-currency data (as shipped by the
//! Python package babel 2.19.0): tests/reference/make_country_fixture.py
//! writes tests/fixtures/country_currency.json, and the test below holds
//! this table to it.

/// (country, [(first day in force as YYYYMMDD, ISO 4217 code)], oldest first).
const COUNTRIES: &[(&str, &[(u32, &str)])] = &[
    ("AE", &[(0, "AED")]),
    ("AR", &[(0, "ARS")]),
    ("AT", &[(0, "ATS"), (19990101, "EUR")]),
    ("AU", &[(0, "AUD")]),
    ("BE", &[(0, "BEF"), (19990101, "EUR")]),
    ("BG", &[(0, "BGN"), (20260101, "EUR")]),
    ("BR", &[(0, "BRL")]),
    ("CA", &[(0, "CAD")]),
    ("CH", &[(0, "CHF")]),
    ("CL", &[(0, "CLP")]),
    ("CN", &[(0, "CNY")]),
    ("CO", &[(0, "COP")]),
    ("CY", &[(0, "CYP"), (20080101, "EUR")]),
    ("CZ", &[(0, "CZK")]),
    ("DE", &[(0, "DEM"), (19990101, "EUR")]),
    ("DK", &[(0, "DKK")]),
    ("EE", &[(0, "EEK"), (20110101, "EUR")]),
    ("ES", &[(0, "ESP"), (19990101, "EUR")]),
    ("EU", &[(19990101, "EUR")]),
    ("FI", &[(0, "FIM"), (19990101, "EUR")]),
    ("FR", &[(0, "FRF"), (19990101, "EUR")]),
    ("GB", &[(0, "GBP")]),
    ("GR", &[(0, "GRD"), (20010101, "EUR")]),
    ("HK", &[(0, "HKD")]),
    ("HR", &[(0, "HRK"), (20230101, "EUR")]),
    ("HU", &[(0, "HUF")]),
    ("ID", &[(0, "IDR")]),
    ("IE", &[(0, "IEP"), (19990101, "EUR")]),
    ("IL", &[(0, "ILS")]),
    ("IN", &[(0, "INR")]),
    ("IS", &[(0, "ISK")]),
    ("IT", &[(0, "ITL"), (19990101, "EUR")]),
    ("JP", &[(0, "JPY")]),
    ("KR", &[(0, "KRW")]),
    ("LT", &[(0, "LTL"), (20150101, "EUR")]),
    ("LU", &[(0, "LUF"), (19990101, "EUR")]),
    ("LV", &[(0, "LVL"), (20140101, "EUR")]),
    ("MT", &[(0, "MTL"), (20080101, "EUR")]),
    ("MX", &[(0, "MXN")]),
    ("MY", &[(0, "MYR")]),
    ("NL", &[(0, "NLG"), (19990101, "EUR")]),
    ("NO", &[(0, "NOK")]),
    ("NZ", &[(0, "NZD")]),
    ("PH", &[(0, "PHP")]),
    ("PL", &[(0, "PLN")]),
    ("PT", &[(0, "PTE"), (19990101, "EUR")]),
    ("RO", &[(0, "RON")]),
    ("SA", &[(0, "SAR")]),
    ("SE", &[(0, "SEK")]),
    ("SG", &[(0, "SGD")]),
    ("SI", &[(0, "SIT"), (20070101, "EUR")]),
    ("SK", &[(0, "SKK"), (20090101, "EUR")]),
    ("TH", &[(0, "THB")]),
    ("TR", &[(0, "TRY")]),
    ("TW", &[(0, "TWD")]),
    ("US", &[(0, "USD")]),
    ("ZA", &[(0, "ZAR")]),
];

/// Codes of earlier currencies the table maps to (no longer in ISO 4217's
/// current list, valid for releases before the euro).
pub const FORMER: &[&str] = &[
    "ATS", "BEF", "CYP", "DEM", "EEK", "ESP", "FIM", "FRF", "GRD", "HRK", "IEP", "ITL", "LTL",
    "LUF", "LVL", "MTL", "NLG", "PTE", "SIT", "SKK",
];

/// Country names (lower case) to codes: the ISO 3166-1 English short names
/// of the table's countries, with the common and official names the
/// iso-codes project records (checked against pycountry in
/// tests/reference/make_country_fixture.py), and `EU` under "euro area",
/// "euro zone" and "european union" (our own choice).
const NAMES: &[(&str, &str)] = &[
    ("argentina", "AR"),
    ("argentine republic", "AR"),
    ("australia", "AU"),
    ("austria", "AT"),
    ("belgium", "BE"),
    ("brazil", "BR"),
    ("bulgaria", "BG"),
    ("canada", "CA"),
    ("chile", "CL"),
    ("china", "CN"),
    ("colombia", "CO"),
    ("croatia", "HR"),
    ("cyprus", "CY"),
    ("czech republic", "CZ"),
    ("czechia", "CZ"),
    ("denmark", "DK"),
    ("estonia", "EE"),
    ("euro area", "EU"),
    ("euro zone", "EU"),
    ("european union", "EU"),
    ("federal republic of germany", "DE"),
    ("federative republic of brazil", "BR"),
    ("finland", "FI"),
    ("france", "FR"),
    ("french republic", "FR"),
    ("germany", "DE"),
    ("grand duchy of luxembourg", "LU"),
    ("greece", "GR"),
    ("hellenic republic", "GR"),
    ("hong kong", "HK"),
    ("hong kong special administrative region of china", "HK"),
    ("hungary", "HU"),
    ("iceland", "IS"),
    ("india", "IN"),
    ("indonesia", "ID"),
    ("ireland", "IE"),
    ("israel", "IL"),
    ("italian republic", "IT"),
    ("italy", "IT"),
    ("japan", "JP"),
    ("kingdom of belgium", "BE"),
    ("kingdom of denmark", "DK"),
    ("kingdom of norway", "NO"),
    ("kingdom of saudi arabia", "SA"),
    ("kingdom of spain", "ES"),
    ("kingdom of sweden", "SE"),
    ("kingdom of thailand", "TH"),
    ("kingdom of the netherlands", "NL"),
    ("korea, republic of", "KR"),
    ("latvia", "LV"),
    ("lithuania", "LT"),
    ("luxembourg", "LU"),
    ("malaysia", "MY"),
    ("malta", "MT"),
    ("mexico", "MX"),
    ("netherlands", "NL"),
    ("new zealand", "NZ"),
    ("norway", "NO"),
    ("people's republic of china", "CN"),
    ("philippines", "PH"),
    ("poland", "PL"),
    ("portugal", "PT"),
    ("portuguese republic", "PT"),
    ("republic of austria", "AT"),
    ("republic of bulgaria", "BG"),
    ("republic of chile", "CL"),
    ("republic of colombia", "CO"),
    ("republic of croatia", "HR"),
    ("republic of cyprus", "CY"),
    ("republic of estonia", "EE"),
    ("republic of finland", "FI"),
    ("republic of iceland", "IS"),
    ("republic of india", "IN"),
    ("republic of indonesia", "ID"),
    ("republic of latvia", "LV"),
    ("republic of lithuania", "LT"),
    ("republic of malta", "MT"),
    ("republic of poland", "PL"),
    ("republic of singapore", "SG"),
    ("republic of slovenia", "SI"),
    ("republic of south africa", "ZA"),
    ("republic of the philippines", "PH"),
    ("republic of türkiye", "TR"),
    ("romania", "RO"),
    ("saudi arabia", "SA"),
    ("singapore", "SG"),
    ("slovak republic", "SK"),
    ("slovakia", "SK"),
    ("slovenia", "SI"),
    ("south africa", "ZA"),
    ("south korea", "KR"),
    ("spain", "ES"),
    ("state of israel", "IL"),
    ("sweden", "SE"),
    ("swiss confederation", "CH"),
    ("switzerland", "CH"),
    ("taiwan", "TW"),
    ("taiwan, province of china", "TW"),
    ("thailand", "TH"),
    ("türkiye", "TR"),
    ("united arab emirates", "AE"),
    ("united kingdom", "GB"),
    ("united kingdom of great britain and northern ireland", "GB"),
    ("united mexican states", "MX"),
    ("united states", "US"),
    ("united states of america", "US"),
];

/// The code of a country name (case-insensitive, spaces trimmed), or of a
/// code given as is.
pub fn code_of(text: &str) -> Option<&'static str> {
    let t = text.trim();
    if t.len() == 2 {
        let upper = t.to_ascii_uppercase();
        return COUNTRIES.iter().find(|(c, _)| *c == upper).map(|(c, _)| *c);
    }
    let lower = t.to_lowercase();
    NAMES
        .binary_search_by(|(n, _)| (*n).cmp(lower.as_str()))
        .ok()
        .map(|i| NAMES[i].1)
}

/// The currency of `country` on `date`; `None` for an unknown code or a
/// date before the table's first entry (EU before 1999).
pub fn currency_on(country: &str, date: chrono::NaiveDate) -> Option<&'static str> {
    use chrono::Datelike;
    let upper = country.to_ascii_uppercase();
    let i = COUNTRIES
        .binary_search_by(|(c, _)| (*c).cmp(upper.as_str()))
        .ok()?;
    let day = date.year() as u32 * 10_000 + date.month() * 100 + date.day();
    COUNTRIES[i]
        .1
        .iter()
        .rev()
        .find(|(from, _)| *from <= day)
        .map(|(_, code)| *code)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn table_is_sorted_and_matches_cldr() {
        assert!(COUNTRIES.windows(2).all(|w| w[0].0 < w[1].0));
        assert!(FORMER.windows(2).all(|w| w[0] < w[1]));
        let path = concat!(
            env!("CARGO_MANIFEST_DIR"),
            "/tests/fixtures/country_currency.json"
        );
        let cases: Vec<(String, String, Vec<String>)> =
            serde_json::from_str(&std::fs::read_to_string(path).unwrap()).unwrap();
        assert!(cases.len() > 100, "{}", cases.len());
        for (country, date, in_use) in &cases {
            let d = chrono::NaiveDate::parse_from_str(date, "%Y-%m-%d").unwrap();
            let ours = currency_on(country, d).unwrap_or("none");
            assert!(
                in_use.iter().any(|c| c == ours),
                "{country} on {date}: ours {ours}, CLDR {in_use:?}"
            );
        }
        for (country, _) in COUNTRIES {
            assert!(
                cases.iter().any(|c| c.0 == *country),
                "{country} has no CLDR check"
            );
        }
    }

    #[test]
    fn names_match_iso_3166_as_pycountry_has_them() {
        assert!(NAMES.windows(2).all(|w| w[0].0 < w[1].0));
        let path = concat!(
            env!("CARGO_MANIFEST_DIR"),
            "/tests/fixtures/country_names.json"
        );
        let names: Vec<(String, String)> =
            serde_json::from_str(&std::fs::read_to_string(path).unwrap()).unwrap();
        for (name, code) in &names {
            assert_eq!(code_of(name), Some(code.as_str()), "{name}");
        }
        assert_eq!(code_of("united states of america"), Some("US"));
        assert_eq!(code_of(" Euro Area "), Some("EU"));
        assert_eq!(code_of("de"), Some("DE"));
        assert_eq!(code_of("Atlantis"), None);
    }

    #[test]
    fn lookups() {
        let d = |s: &str| chrono::NaiveDate::parse_from_str(s, "%Y-%m-%d").unwrap();
        assert_eq!(currency_on("lt", d("2014-12-31")), Some("LTL"));
        assert_eq!(currency_on("LT", d("2015-01-01")), Some("EUR"));
        assert_eq!(currency_on("EU", d("1998-06-01")), None);
        assert_eq!(currency_on("XX", d("2020-01-01")), None);
        assert!(code_of("us") == Some("US") && code_of("USD").is_none() && code_of("XX").is_none());
    }
}
