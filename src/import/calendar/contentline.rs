//! RFC 5545 §3.1 content lines: unfolding, splitting `NAME;PARAM=V:VALUE`,
//! and §3.3.11 TEXT unescaping.
//!
//! Hand-written on purpose: the iCalendar crates on crates.io unfold line by
//! line after decoding text, which breaks a UTF-8 sequence split across a
//! fold (RFC 5545 §3.1 says it must be restored) and loses the physical line
//! numbers our error messages must name. Unfolding here works on bytes and
//! every logical line keeps the number of its first physical line.

/// One unfolded content line.
#[derive(Debug, Clone, PartialEq)]
pub struct ContentLine {
    /// Physical line (1-based) where the logical line starts.
    pub line: usize,
    /// Upper-cased property name.
    pub name: String,
    /// Parameters, names upper-cased, values unquoted.
    pub params: Vec<(String, String)>,
    /// Raw value (not unescaped: that depends on the value type).
    pub value: String,
}

impl ContentLine {
    /// The first value of a parameter, by upper-case name.
    pub fn param(&self, name: &str) -> Option<&str> {
        self.params
            .iter()
            .find(|(n, _)| n == name)
            .map(|(_, v)| v.as_str())
    }
}

/// A content line that could not be read.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[error("line {line}: {message}")]
pub struct LineError {
    /// Physical line where the problem starts, from 1.
    pub line: usize,
    /// What is wrong.
    pub message: String,
}

/// Unfolds and splits a whole iCalendar stream. A UTF-8 byte-order mark is
/// skipped; CRLF and bare LF line ends are both accepted.
pub fn parse_lines(bytes: &[u8]) -> Result<Vec<ContentLine>, LineError> {
    parse_lines_each(bytes).into_iter().collect()
}

/// [`parse_lines`] with each logical line's own outcome, so that a reader
/// can pass over broken lines inside components it does not use.
pub fn parse_lines_each(bytes: &[u8]) -> Vec<Result<ContentLine, LineError>> {
    let bytes = bytes.strip_prefix(b"\xEF\xBB\xBF").unwrap_or(bytes);
    let mut out = Vec::new();
    let mut logical: Vec<u8> = Vec::new();
    let mut start_line = 1;
    let mut physical = 0;
    for raw in bytes.split(|&b| b == b'\n') {
        physical += 1;
        let raw = raw.strip_suffix(b"\r").unwrap_or(raw);
        if let Some(cont) = raw.strip_prefix(b" ").or_else(|| raw.strip_prefix(b"\t")) {
            if logical.is_empty() && out.is_empty() {
                out.push(Err(LineError {
                    line: physical,
                    message: "continuation line (starts with a space) before any content line"
                        .into(),
                }));
                return out;
            }
            logical.extend_from_slice(cont);
            continue;
        }
        if !logical.is_empty() {
            out.push(split_line(&logical, start_line));
            logical.clear();
        }
        start_line = physical;
        logical.extend_from_slice(raw);
    }
    if !logical.is_empty() {
        out.push(split_line(&logical, start_line));
    }
    out
}

fn split_line(bytes: &[u8], line: usize) -> Result<ContentLine, LineError> {
    let text = std::str::from_utf8(bytes).map_err(|e| LineError {
        line,
        message: format!(
            "not valid UTF-8 at byte {} of the unfolded line (iCalendar text must be UTF-8)",
            e.valid_up_to()
        ),
    })?;
    let fail = |m: &str| LineError {
        line,
        message: format!("{m}: '{}'", text.chars().take(60).collect::<String>()),
    };
    // The name runs to the first ';' or ':'.
    let name_end = text
        .find([';', ':'])
        .ok_or_else(|| fail("no ':' separating name and value"))?;
    let name = text[..name_end].trim().to_ascii_uppercase();
    if name.is_empty() || !name.bytes().all(|b| b.is_ascii_alphanumeric() || b == b'-') {
        return Err(fail("bad property name"));
    }
    let mut params = Vec::new();
    let mut rest = &text[name_end..];
    while let Some(after) = rest.strip_prefix(';') {
        let eq = after
            .find('=')
            .ok_or_else(|| fail("parameter without '='"))?;
        let pname = after[..eq].trim().to_ascii_uppercase();
        let mut v = &after[eq + 1..];
        let value;
        if let Some(q) = v.strip_prefix('"') {
            let close = q
                .find('"')
                .ok_or_else(|| fail("unclosed quote in parameter"))?;
            value = q[..close].to_string();
            v = &q[close + 1..];
        } else {
            let end = v.find([';', ':', ',']).unwrap_or(v.len());
            value = v[..end].to_string();
            v = &v[end..];
        }
        // Multi-valued parameters: keep the first value, skip the rest.
        while let Some(more) = v.strip_prefix(',') {
            let end = if let Some(q) = more.strip_prefix('"') {
                q.find('"')
                    .map(|c| c + 2)
                    .ok_or_else(|| fail("unclosed quote in parameter"))?
            } else {
                more.find([';', ':', ',']).unwrap_or(more.len())
            };
            v = &more[end..];
        }
        params.push((pname, value));
        rest = v;
    }
    let value = rest
        .strip_prefix(':')
        .ok_or_else(|| fail("no ':' separating name and value"))?;
    Ok(ContentLine {
        line,
        name,
        params,
        value: value.to_string(),
    })
}

/// Decodes a TEXT value (RFC 5545 §3.3.11): `\\`, `\;`, `\,`, `\n`, `\N`.
/// An unknown escape keeps the character after the backslash.
pub fn unescape_text(v: &str) -> String {
    let mut out = String::with_capacity(v.len());
    let mut chars = v.chars();
    while let Some(c) = chars.next() {
        if c != '\\' {
            out.push(c);
            continue;
        }
        match chars.next() {
            Some('n') | Some('N') => out.push('\n'),
            Some(other) => out.push(other),
            None => out.push('\\'),
        }
    }
    out
}

/// Splits a TEXT list on unescaped commas, unescaping each item
/// (CATEGORIES, §3.8.1.2: an escaped `\,` is content, not a separator).
pub fn split_text_list(v: &str) -> Vec<String> {
    let mut items = Vec::new();
    let mut cur = String::new();
    let mut escaped = false;
    for c in v.chars() {
        if escaped {
            cur.push('\\');
            cur.push(c);
            escaped = false;
        } else if c == '\\' {
            escaped = true;
        } else if c == ',' {
            items.push(unescape_text(&cur));
            cur.clear();
        } else {
            cur.push(c);
        }
    }
    if escaped {
        cur.push('\\');
    }
    items.push(unescape_text(&cur));
    items
        .into_iter()
        .map(|s| s.trim().to_string())
        .filter(|s| !s.is_empty())
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    /// RFC 5545 §3.1 worked example: the second continuation has two leading
    /// spaces, one of which is content.
    #[test]
    fn rfc5545_folding_example() {
        let src =
            b"DESCRIPTION:This is a lo\r\n ng description\r\n  that exists on a long line.\r\n";
        let lines = parse_lines(src).unwrap();
        assert_eq!(lines.len(), 1);
        assert_eq!(
            lines[0].value,
            "This is a long description that exists on a long line."
        );
    }

    /// RFC 5545 §4 first example, DESCRIPTION decoded as REFERENCES.md §1.3 gives.
    #[test]
    fn rfc5545_folding_and_escaping_together() {
        let src = "DESCRIPTION:Networld+Interop Conference\r\n  and Exhibit\\nAtlanta World Congress Center\\n\r\n Atlanta\\, Georgia\r\n";
        let lines = parse_lines(src.as_bytes()).unwrap();
        assert_eq!(
            unescape_text(&lines[0].value),
            "Networld+Interop Conference and Exhibit\nAtlanta World Congress Center\nAtlanta, Georgia"
        );
    }

    #[test]
    fn utf8_split_by_a_fold_is_restored() {
        // "é" is C3 A9; fold between the two bytes.
        let src = b"SUMMARY:Caf\xC3\r\n \xA9 cr\xC3\xA8me\r\n";
        let lines = parse_lines(src).unwrap();
        assert_eq!(lines[0].value, "Café crème");
    }

    #[test]
    fn params_quoted_and_multi() {
        let l =
            &parse_lines(b"DTSTART;TZID=\"America/New_York\";VALUE=DATE-TIME:19980119T020000\n")
                .unwrap()[0];
        assert_eq!(l.name, "DTSTART");
        assert_eq!(l.param("TZID"), Some("America/New_York"));
        assert_eq!(l.param("VALUE"), Some("DATE-TIME"));
        assert_eq!(l.value, "19980119T020000");
        let l = &parse_lines(
            b"ATTENDEE;DELEGATED-TO=\"mailto:a@x\",\"mailto:b@x\";RSVP=TRUE:mailto:c@x\n",
        )
        .unwrap()[0];
        assert_eq!(l.param("RSVP"), Some("TRUE"));
        assert_eq!(l.value, "mailto:c@x");
    }

    /// RFC 5545 §3.8.1.2 examples; an escaped comma is content.
    #[test]
    fn categories_split() {
        assert_eq!(
            split_text_list("BUSINESS,HUMAN RESOURCES"),
            vec!["BUSINESS", "HUMAN RESOURCES"]
        );
        assert_eq!(
            split_text_list("ANNIVERSARY,PERSONAL,SPECIAL OCCASION").len(),
            3
        );
        assert_eq!(split_text_list("A\\,B,C"), vec!["A,B", "C"]);
    }

    #[test]
    fn errors_name_the_line() {
        let e = parse_lines(b"BEGIN:VCALENDAR\nNOVALUE\n").unwrap_err();
        assert_eq!(e.line, 2);
        let e = parse_lines(b"SUMMARY:\xFF\xFE\n").unwrap_err();
        assert!(e.message.contains("UTF-8"));
    }
}
