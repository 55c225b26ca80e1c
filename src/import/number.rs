//! The one rule for numbers written as text, applied to every numeric field
//! of every input (trade P/L, size, prices, fees, equity, P/L %).
//!
//! The rule (README "Numbers"):
//! - spaces around the number are ignored;
//! - an optional sign `+`/`-`, and at most one currency sign (`$ € £ ¥`)
//!   before or after the sign (`-$12.5`, `$-12.5`) or at the very end
//!   (`12.50 €`);
//! - the decimal mark is `.`; in a file not delimited by commas it may be
//!   `,` instead: when a number holds both marks the last one is the decimal
//!   mark (`1.234,5`), when it holds one comma and no point the comma is the
//!   decimal mark (`10,5`);
//! - digits before the decimal mark may be grouped in threes by one kind of
//!   separator: a space (also no-break or narrow no-break), `'`, `_`, or the
//!   mark that is not the decimal one (`1,234.50`, `1 000`, `1.234,50`); the
//!   first group has one to three digits, every later group exactly three;
//! - plain forms the standard float reader knows (`1e3`, `.5`) are read as
//!   it reads them; `NaN` and infinities are read and then refused by the
//!   caller as not finite.
//!
//! Anything else (`12 5`, `1,23.4`, `(12.50)`, `12.5.3`, two currency signs)
//! is not a number, so the row is rejected with its text, never guessed.
//!
//! Written by hand: the crates that read grouped or localised numbers take a
//! locale up front and accept forms this rule refuses (any grouping width),
//! while the rule here is one short function tied to the file's delimiter.

use crate::import::timefmt::trim_fast;

/// Reads `s` by the rule above. `comma_decimal_allowed`: the file is not
/// delimited by commas, so a comma may be the decimal mark.
pub fn parse_number(s: &str, comma_decimal_allowed: bool) -> Option<f64> {
    let t = trim_fast(s);
    if let Some(v) = parse_simple_decimal(t.as_bytes()) {
        return Some(v);
    }
    if let Ok(v) = t.parse::<f64>() {
        return Some(v);
    }
    parse_written(t, comma_decimal_allowed)
}

const CURRENCY_SIGNS: [char; 4] = ['$', '€', '£', '¥'];
const SPACES: [char; 3] = [' ', '\u{a0}', '\u{202f}'];

/// The general form: sign, currency sign, grouping and decimal mark.
fn parse_written(t: &str, comma_decimal_allowed: bool) -> Option<f64> {
    let mut rest = t;
    let mut negative = false;
    let mut currency = false;
    // Sign and currency sign in either order at the start.
    for _ in 0..2 {
        if let Some(r) = rest.strip_prefix(['-', '+']) {
            negative = rest.starts_with('-');
            rest = r;
            if rest.starts_with(['-', '+']) {
                return None;
            }
        } else if let Some(c) = rest.chars().next().filter(|c| CURRENCY_SIGNS.contains(c)) {
            if currency {
                return None;
            }
            currency = true;
            rest = rest[c.len_utf8()..].trim_start_matches(SPACES);
        }
    }
    if let Some(c) = rest.chars().last().filter(|c| CURRENCY_SIGNS.contains(c)) {
        if currency {
            return None;
        }
        rest = rest[..rest.len() - c.len_utf8()].trim_end_matches(SPACES);
    }
    if rest.is_empty()
        || !rest.starts_with(|c: char| c.is_ascii_digit())
            && !rest.starts_with('.')
            && !rest.starts_with(',')
    {
        return None;
    }
    let (points, commas) = (rest.matches('.').count(), rest.matches(',').count());
    let decimal = if !comma_decimal_allowed {
        '.'
    } else if points > 0 && commas > 0 {
        if rest.rfind(',') > rest.rfind('.') {
            ','
        } else {
            '.'
        }
    } else if commas == 1 {
        ','
    } else {
        '.'
    };
    let (int, frac) = match rest.split_once(decimal) {
        Some((i, f)) => (i, Some(f)),
        None => (rest, None),
    };
    if let Some(f) = frac
        && (f.is_empty() && int.is_empty() || !f.bytes().all(|b| b.is_ascii_digit()))
    {
        return None;
    }
    let digits = group_digits(int, if decimal == '.' { ',' } else { '.' })?;
    let text = match frac {
        Some(f) => format!("{}{digits}.{f}", if negative { "-" } else { "" }),
        None => format!("{}{digits}", if negative { "-" } else { "" }),
    };
    text.parse().ok()
}

/// The integer part's digits, with its grouping separators (all of one kind:
/// a space, `'`, `_` or `other_mark`) checked and removed.
fn group_digits(int: &str, other_mark: char) -> Option<String> {
    if int.bytes().all(|b| b.is_ascii_digit()) {
        return Some(if int.is_empty() {
            "0".into()
        } else {
            int.to_string()
        });
    }
    let sep = int.chars().find(|c| !c.is_ascii_digit())?;
    if !(SPACES.contains(&sep) || sep == '\'' || sep == '_' || sep == other_mark) {
        return None;
    }
    let groups: Vec<&str> = int.split(sep).collect();
    let first_ok = (1..=3).contains(&groups[0].len());
    let all_digits = groups.iter().all(|g| g.bytes().all(|b| b.is_ascii_digit()));
    if !first_ok || !all_digits || groups[1..].iter().any(|g| g.len() != 3) {
        return None;
    }
    Some(groups.concat())
}

/// `[+-]digits[.digits]` with at most 19 digits, read as an integer and
/// one division by a power of ten: when the integer is at most 2^53 and the
/// power at most 10^22 both are exact, so the one rounding of the division
/// gives the correctly rounded value, as `str::parse` does (W. D. Clinger,
/// "How to Read Floating Point Numbers Accurately", PLDI 1990, fast path).
/// Anything else is left to `str::parse`.
pub(crate) fn parse_simple_decimal(b: &[u8]) -> Option<f64> {
    const POW10: [f64; 23] = [
        1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10, 1e11, 1e12, 1e13, 1e14, 1e15, 1e16,
        1e17, 1e18, 1e19, 1e20, 1e21, 1e22,
    ];
    let (neg, digits) = match b.first()? {
        b'-' => (true, &b[1..]),
        b'+' => (false, &b[1..]),
        _ => (false, b),
    };
    if digits.len() > 20 {
        return None;
    }
    let (mut mant, mut frac, mut seen_dot, mut n) = (0u64, 0usize, false, 0);
    for &c in digits {
        match c {
            b'0'..=b'9' => {
                mant = mant.checked_mul(10)?.checked_add((c - b'0') as u64)?;
                n += 1;
                frac += usize::from(seen_dot);
            }
            b'.' if !seen_dot => seen_dot = true,
            _ => return None,
        }
    }
    if n == 0 || n > 19 || mant > 1 << 53 {
        return None;
    }
    let v = mant as f64 / POW10[frac];
    Some(if neg { -v } else { v })
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Every form the rule names, in a comma-delimited file (false) and in
    /// one delimited otherwise (true). Expected values written by hand.
    #[test]
    fn the_number_rule() {
        let cases: &[(&str, bool, Option<f64>)] = &[
            ("12.5", false, Some(12.5)),
            (" -12.5 ", false, Some(-12.5)),
            ("$5", false, Some(5.0)),
            ("-$12.5", false, Some(-12.5)),
            ("$-12.5", false, Some(-12.5)),
            ("12.50 €", false, Some(12.5)),
            ("£1,000.50", false, Some(1000.5)),
            ("1,000.50", false, Some(1000.5)),
            ("1 000", false, Some(1000.0)),
            ("1\u{a0}234.5", false, Some(1234.5)),
            ("1'234'567", false, Some(1_234_567.0)),
            ("1_000", false, Some(1000.0)),
            ("1e3", false, Some(1000.0)),
            (".5", false, Some(0.5)),
            // A decimal comma only where commas do not delimit.
            ("10,5", true, Some(10.5)),
            ("10,5", false, None),
            ("1.234,5", true, Some(1234.5)),
            ("1 234,5", true, Some(1234.5)),
            ("-1.234.567,25", true, Some(-1_234_567.25)),
            ("1,234.5", true, Some(1234.5)),
            ("1,234,567", true, Some(1_234_567.0)),
            // Outside the rule.
            ("12 5", false, None),
            ("1,23.4", false, None),
            ("1,2345", false, None),
            ("1234,567.1", false, None),
            ("(12.50)", false, None),
            ("12.5.3", false, None),
            ("$$5", false, None),
            ("$5€", false, None),
            ("--5", false, None),
            ("5-", false, None),
            ("abc", false, None),
            ("", false, None),
            ("$", false, None),
            ("1 000'000", false, None),
        ];
        for &(text, comma, want) in cases {
            assert_eq!(
                parse_number(text, comma),
                want,
                "{text:?} (comma decimal allowed: {comma})"
            );
        }
        assert!(parse_number("NaN", false).unwrap().is_nan());
    }
}
