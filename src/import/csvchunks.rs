//! Delimited text read in blocks cut at record boundaries, so a large file
//! is parsed on every core while only a few blocks are held in memory.
//!
//! Quoting follows RFC 4180: a field may be quoted, `""` inside quotes is
//! one quote, and quoted fields may hold delimiters and line breaks. Lines
//! end in LF or CRLF; a leading byte-order mark is dropped; blank lines hold
//! no record and are skipped. Fields are handed out as raw bytes: callers
//! decide which fields must be UTF-8 text, so a stray byte in a column
//! nobody reads does not fail the file.

use memchr::{memchr, memchr2, memchr3, memrchr};

/// Longest record accepted: beyond it a quote is almost surely never closed.
pub const MAX_RECORD_BYTES: usize = 256 << 20;
use std::borrow::Cow;
use std::fs::File;
use std::io::Read;
use std::path::Path;

/// Bytes per block handed to one worker.
pub const BLOCK_BYTES: usize = 8 << 20;

/// Why a file could not be read as delimited text (file-level errors; the
/// caller names the file).
#[derive(Debug, thiserror::Error)]
#[allow(missing_docs)] // variant fields are named in each message
pub enum ScanError {
    /// The file could not be read.
    #[error("{0}")]
    Io(#[from] std::io::Error),
    /// No header row.
    #[error("the file is empty (expected a header row)")]
    Empty,
    /// A header row that is not UTF-8.
    #[error("the header row is not UTF-8 text; save the file as UTF-8")]
    HeaderEncoding,
    #[error(
        "column '{name}' appears twice in the header (columns {first} and {second}); rename one"
    )]
    /// A column name that appears twice.
    DuplicateColumn {
        name: String,
        first: usize,
        second: usize,
    },
    #[error(
        "row {row}: a quote opened in column {column} is never closed, so the rest of the file would be one field; fix the quoting"
    )]
    /// A quote that is never closed.
    UnclosedQuote { row: usize, column: String },
    #[error(
        "after row {row}: a record runs over {mib} MiB without ending; a quote is probably never closed"
    )]
    /// A record longer than a block can hold.
    RecordTooLong { row: usize, mib: usize },
    #[error(
        "the header is one column '{header}' when split at '{used}'; it looks delimited by '{likely}': give --delimiter '{likely}'"
    )]
    /// The header is one column holding another delimiter.
    OneColumnHeader {
        header: String,
        used: String,
        likely: String,
    },
}

/// One record's fields as byte ranges of its block; quoted fields keep a
/// flag so that `""` is unescaped only when needed.
#[derive(Debug, Default)]
pub struct Record {
    spans: Vec<(usize, usize, bool)>,
    /// A quoted field holds `""`: its text differs from its bytes.
    escaped: bool,
    /// The first field (from 0) with text between its closing quote and the
    /// delimiter, and that text's byte range: RFC 4180 allows none, so the
    /// record is malformed rather than trimmed.
    after_quote: Option<(usize, usize, usize)>,
}

impl Record {
    /// Fields in the record.
    pub fn len(&self) -> usize {
        self.spans.len()
    }
    /// Whether the record has no fields.
    pub fn is_empty(&self) -> bool {
        self.spans.is_empty()
    }
    /// Whether any field needs unescaping (see [`Record::field`]).
    pub fn has_escapes(&self) -> bool {
        self.escaped
    }

    /// The first field with text after its closing quote, as (field index
    /// from 0, the stray text's byte range in the block); spaces and a CR
    /// before the line end do not count.
    pub fn text_after_quote(&self) -> Option<(usize, usize, usize)> {
        self.after_quote
    }

    /// Field `k` as it lies in the block (quotes removed, `""` kept): the
    /// field's text when [`Record::has_escapes`] is false.
    pub fn raw<'a>(&self, block: &'a [u8], k: usize) -> &'a [u8] {
        let (a, b, _) = self.spans[k];
        &block[a..b]
    }

    /// Field `k` as bytes, `""` unescaped in quoted fields.
    pub fn field<'a>(&self, block: &'a [u8], k: usize) -> Cow<'a, [u8]> {
        let (a, b, quoted) = self.spans[k];
        let raw = &block[a..b];
        if quoted && memchr(b'"', raw).is_some() {
            let mut out = Vec::with_capacity(raw.len());
            let mut i = 0;
            while i < raw.len() {
                out.push(raw[i]);
                i += if raw[i] == b'"' { 2 } else { 1 };
            }
            Cow::Owned(out)
        } else {
            Cow::Borrowed(raw)
        }
    }
}

/// Outcome of parsing one record.
#[allow(missing_docs)] // `next`: the offset after the record; `column`: from 1
pub enum Parsed {
    /// A record ends before `next`.
    Record { next: usize },
    /// A line holding nothing (skipped).
    Blank { next: usize },
    /// A quote in field `column` (from 1) runs to the end of the block.
    Unclosed { column: usize },
}

/// Parses the record starting at `pos` into `rec`.
pub fn parse_record(block: &[u8], pos: usize, delim: u8, rec: &mut Record) -> Parsed {
    rec.spans.clear();
    rec.escaped = false;
    rec.after_quote = None;
    let n = block.len();
    if block[pos] == b'\n' {
        return Parsed::Blank { next: pos + 1 };
    }
    if block[pos] == b'\r' && block.get(pos + 1) == Some(&b'\n') {
        return Parsed::Blank { next: pos + 2 };
    }
    let mut i = pos;
    loop {
        if i < n && block[i] == b'"' {
            // Quoted field: up to the quote not followed by another quote.
            let start = i + 1;
            let mut j = start;
            let end = loop {
                match memchr(b'"', &block[j..]) {
                    None => {
                        return Parsed::Unclosed {
                            column: rec.spans.len() + 1,
                        };
                    }
                    Some(q) if block.get(j + q + 1) == Some(&b'"') => {
                        rec.escaped = true;
                        j += q + 2
                    }
                    Some(q) => break j + q,
                }
            };
            rec.spans.push((start, end, true));
            // Anything between the closing quote and the delimiter other
            // than spaces (and the CR of a CRLF) makes the record malformed.
            i = memchr2(delim, b'\n', &block[end + 1..]).map_or(n, |k| end + 1 + k);
            if rec.after_quote.is_none()
                && block[end + 1..i]
                    .iter()
                    .any(|&b| !matches!(b, b' ' | b'\t' | b'\r'))
            {
                rec.after_quote = Some((rec.spans.len() - 1, end + 1, i));
            }
        } else {
            // Fields are short: a plain scan beats a vectorised search's
            // set-up cost per call.
            let k = block[i..]
                .iter()
                .position(|&b| b == delim || b == b'\n')
                .map_or(n, |k| i + k);
            let mut e = k;
            if (k == n || block[k] == b'\n') && e > i && block[e - 1] == b'\r' {
                e -= 1;
            }
            rec.spans.push((i, e, false));
            i = k;
        }
        if i >= n {
            return Parsed::Record { next: n };
        }
        if block[i] == b'\n' {
            return Parsed::Record { next: i + 1 };
        }
        i += 1; // the delimiter
        if i == n {
            // A trailing delimiter: one more, empty field.
            rec.spans.push((n, n, false));
            return Parsed::Record { next: n };
        }
    }
}

/// The records of one block, in order. A block holding no quote at all
/// (the common case) is cut with one vectorised search for delimiters and
/// line ends over the whole block; otherwise each record goes through
/// [`parse_record`]. Both give the same records.
pub struct Records<'a> {
    block: &'a [u8],
    delim: u8,
    pos: usize,
    /// Positions of delimiters and line ends, for a quote-free block.
    ends: Option<memchr::Memchr2<'a>>,
}

impl<'a> Records<'a> {
    /// Records of one block cut at record boundaries.
    pub fn new(block: &'a [u8], delim: u8) -> Records<'a> {
        let plain = delim != b'\r' && memchr(b'"', block).is_none();
        Records {
            block,
            delim,
            pos: 0,
            ends: plain.then(|| memchr::memchr2_iter(delim, b'\n', block)),
        }
    }

    /// The next record into `rec`, or `None` at the end of the block.
    pub fn next_into(&mut self, rec: &mut Record) -> Option<Parsed> {
        let (block, n, pos) = (self.block, self.block.len(), self.pos);
        if pos >= n {
            return None;
        }
        let Some(ends) = &mut self.ends else {
            let p = parse_record(block, pos, self.delim, rec);
            self.pos = match p {
                Parsed::Record { next } | Parsed::Blank { next } => next,
                Parsed::Unclosed { .. } => n,
            };
            return Some(p);
        };
        rec.spans.clear();
        rec.escaped = false;
        rec.after_quote = None;
        // A blank line: its line end is the next position found.
        let blank = match block[pos] {
            b'\n' => Some(pos + 1),
            b'\r' if block.get(pos + 1) == Some(&b'\n') => Some(pos + 2),
            _ => None,
        };
        if let Some(next) = blank {
            ends.next();
            self.pos = next;
            return Some(Parsed::Blank { next });
        }
        let mut start = pos;
        let trim_cr = |start: usize, e: usize| {
            if e > start && block[e - 1] == b'\r' {
                e - 1
            } else {
                e
            }
        };
        loop {
            match ends.next() {
                None => {
                    rec.spans.push((start, trim_cr(start, n), false));
                    self.pos = n;
                    return Some(Parsed::Record { next: n });
                }
                Some(k) if block[k] == b'\n' => {
                    rec.spans.push((start, trim_cr(start, k), false));
                    self.pos = k + 1;
                    return Some(Parsed::Record { next: k + 1 });
                }
                Some(k) => {
                    rec.spans.push((start, k, false));
                    start = k + 1;
                    if start == n {
                        // A trailing delimiter: one more, empty field.
                        rec.spans.push((n, n, false));
                        self.pos = n;
                        return Some(Parsed::Record { next: n });
                    }
                }
            }
        }
    }
}

/// Reads a file block by block, each block ending at a record boundary.
pub struct BlockReader {
    file: Box<dyn std::io::Read + Send>,
    delim: u8,
    carry: Vec<u8>,
    eof: bool,
    block_bytes: usize,
}

impl BlockReader {
    /// Opens a file to read in blocks.
    pub fn open(path: &Path, delim: u8) -> std::io::Result<BlockReader> {
        Ok(BlockReader::from_reader(Box::new(File::open(path)?), delim))
    }

    /// Reads blocks from any byte source (standard input, bytes in memory).
    pub fn from_reader(file: Box<dyn std::io::Read + Send>, delim: u8) -> BlockReader {
        BlockReader {
            file,
            delim,
            carry: Vec::new(),
            eof: false,
            block_bytes: BLOCK_BYTES,
        }
    }

    /// Smaller blocks, for tests of the boundary logic.
    pub fn with_block_bytes(mut self, n: usize) -> Self {
        self.block_bytes = n.max(1);
        self
    }

    /// The next block of whole records, or `None` at the end. The last
    /// block may end inside a quote; the record parser reports that. A
    /// record longer than [`MAX_RECORD_BYTES`] is refused (row 0 here; the
    /// caller knows how many rows came before).
    /// The next block, read into `reuse` when given (a spent block: its
    /// memory is kept rather than allocated afresh).
    pub fn next_block(&mut self, reuse: Option<Vec<u8>>) -> Result<Option<Vec<u8>>, ScanError> {
        let mut buf = reuse.unwrap_or_default();
        buf.clear();
        buf.reserve(self.carry.len() + self.block_bytes);
        buf.append(&mut self.carry);
        loop {
            if !self.eof {
                let want = self.block_bytes as u64;
                let got = (&mut self.file).take(want).read_to_end(&mut buf)?;
                if (got as u64) < want {
                    self.eof = true;
                }
            }
            if self.eof {
                return Ok((!buf.is_empty()).then_some(buf));
            }
            if let Some(cut) = last_boundary(&buf, self.delim) {
                self.carry.extend_from_slice(&buf[cut..]);
                buf.truncate(cut);
                return Ok(Some(buf));
            }
            // One record longer than the block: read on, within bounds.
            if buf.len() > MAX_RECORD_BYTES {
                return Err(ScanError::RecordTooLong {
                    row: 0,
                    mib: MAX_RECORD_BYTES >> 20,
                });
            }
        }
    }
}

/// The end of the last complete record (after its LF), outside quotes.
/// Same grammar as [`parse_record`]: a quote opens a quoted field only at
/// the start of a field; inside one, `""` toggles twice and changes nothing.
fn last_boundary(buf: &[u8], delim: u8) -> Option<usize> {
    if memchr(b'"', buf).is_none() {
        return memrchr(b'\n', buf).map(|k| k + 1);
    }
    let mut in_quote = false;
    let mut last = None;
    let mut i = 0;
    while let Some(k) = memchr3(b'"', b'\n', delim, &buf[i..]) {
        let at = i + k;
        match buf[at] {
            b'"' if in_quote && buf.get(at + 1) == Some(&b'"') => {
                i = at + 2;
                continue;
            }
            b'"' if in_quote => in_quote = false,
            b'"' if at == 0 || buf[at - 1] == delim || buf[at - 1] == b'\n' => in_quote = true,
            b'\n' if !in_quote => last = Some(at + 1),
            _ => {}
        }
        i = at + 1;
    }
    last
}

/// The header row: cleaned column names and where the data starts.
pub struct Header {
    /// Column names, trimmed.
    pub names: Vec<String>,
}

/// Reads the header from the first block and removes it (and a BOM) from
/// the block. Duplicate names are refused: a mapping could not tell them apart.
pub fn take_header(block: &mut Vec<u8>, delim: u8) -> Result<Header, ScanError> {
    let bom = if block.starts_with(b"\xEF\xBB\xBF") {
        3
    } else {
        0
    };
    let mut pos = bom;
    let mut rec = Record::default();
    loop {
        if pos >= block.len() {
            return Err(ScanError::Empty);
        }
        match parse_record(block, pos, delim, &mut rec) {
            Parsed::Blank { next } => pos = next,
            Parsed::Unclosed { column } => {
                return Err(ScanError::UnclosedQuote {
                    row: 0,
                    column: column.to_string(),
                });
            }
            Parsed::Record { next } => {
                let mut names: Vec<String> = Vec::with_capacity(rec.len());
                for k in 0..rec.len() {
                    let f = rec.field(block, k);
                    let s = std::str::from_utf8(&f).map_err(|_| ScanError::HeaderEncoding)?;
                    let name = s.trim().to_string();
                    if let Some(first) = names.iter().position(|n| !n.is_empty() && *n == name) {
                        return Err(ScanError::DuplicateColumn {
                            name,
                            first: first + 1,
                            second: k + 1,
                        });
                    }
                    names.push(name);
                }
                block.drain(..next);
                return Ok(Header { names });
            }
        }
    }
}

/// Guesses the delimiter from the header line: `,`, `;`, tab or `|`,
/// whichever occurs most outside quotes.
pub fn sniff_delimiter(bytes: &[u8]) -> u8 {
    let header = bytes.split(|&b| b == b'\n').next().unwrap_or(&[]);
    let mut best = (b',', 0usize);
    for cand in [b',', b';', b'\t', b'|'] {
        let mut in_quote = false;
        let mut n = 0;
        for &b in header {
            if b == b'"' {
                in_quote = !in_quote;
            } else if b == cand && !in_quote {
                n += 1;
            }
        }
        if n > best.1 {
            best = (cand, n);
        }
    }
    best.0
}

#[cfg(test)]
mod tests {
    use super::*;

    fn fields(text: &[u8], delim: u8) -> Vec<Vec<String>> {
        let mut out = Vec::new();
        let mut rec = Record::default();
        let mut pos = 0;
        while pos < text.len() {
            match parse_record(text, pos, delim, &mut rec) {
                Parsed::Record { next } => {
                    out.push(
                        (0..rec.len())
                            .map(|k| String::from_utf8(rec.field(text, k).into_owned()).unwrap())
                            .collect(),
                    );
                    pos = next;
                }
                Parsed::Blank { next } => pos = next,
                Parsed::Unclosed { column } => {
                    out.push(vec![format!("unclosed in {column}")]);
                    break;
                }
            }
        }
        out
    }

    /// A record as (kind, next, spans).
    type Cut = (u8, usize, Vec<(usize, usize, bool)>);

    /// Every record through [`parse_record`] alone.
    fn by_parse_record(text: &[u8], delim: u8) -> Vec<Cut> {
        let (mut out, mut rec, mut pos) = (Vec::new(), Record::default(), 0);
        while pos < text.len() {
            match parse_record(text, pos, delim, &mut rec) {
                Parsed::Record { next } => {
                    out.push((b'r', next, rec.spans.clone()));
                    pos = next;
                }
                Parsed::Blank { next } => {
                    out.push((b'b', next, vec![]));
                    pos = next;
                }
                Parsed::Unclosed { .. } => break,
            }
        }
        out
    }

    #[test]
    fn quote_free_cursor_equals_parse_record() {
        // Random blocks over a small alphabet (delimiters, CR, LF, text):
        // the vectorised path must cut exactly as the record parser does.
        use rand::{RngExt, SeedableRng};
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(11);
        let alphabet = b",;\r\n\na1 ";
        for case in 0..5000 {
            let len = rng.random_range(1..40);
            let text: Vec<u8> = (0..len)
                .map(|_| alphabet[rng.random_range(0..alphabet.len())])
                .collect();
            for delim in [b',', b';'] {
                let mut r = Records::new(&text, delim);
                assert!(r.ends.is_some());
                let (mut got, mut rec) = (Vec::new(), Record::default());
                while let Some(p) = r.next_into(&mut rec) {
                    match p {
                        Parsed::Record { next } => got.push((b'r', next, rec.spans.clone())),
                        Parsed::Blank { next } => got.push((b'b', next, vec![])),
                        Parsed::Unclosed { .. } => unreachable!("no quotes"),
                    }
                }
                assert_eq!(
                    got,
                    by_parse_record(&text, delim),
                    "case {case}: {:?}",
                    String::from_utf8_lossy(&text)
                );
            }
        }
    }

    #[test]
    fn rfc4180_records() {
        // RFC 4180 §2: quoted fields with delimiters, line breaks and "" escapes.
        let t = b"a,b,c\r\n\"x,y\",\"two\r\nlines\",\"say \"\"hi\"\"\"\r\n\r\n1,,\n";
        assert_eq!(
            fields(t, b','),
            vec![
                vec!["a", "b", "c"],
                vec!["x,y", "two\r\nlines", "say \"hi\""],
                vec!["1", "", ""]
            ]
        );
        assert_eq!(
            fields(b"a;b\n\"open;x\n", b';'),
            vec![vec!["a", "b"], vec!["unclosed in 1"]]
        );
        assert_eq!(fields(b"last,row", b','), vec![vec!["last", "row"]]);
        assert_eq!(fields(b"\"q\"\r\n", b','), vec![vec!["q"]]);
    }

    #[test]
    fn blocks_end_on_record_boundaries() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("t.csv");
        let text = "h1,h2\n1,\"a\nb\"\n2,c\n3,\"d,\"\"e\"\"\"\n4,f";
        std::fs::write(&p, text).unwrap();
        for size in 1..12 {
            let mut r = BlockReader::open(&p, b',').unwrap().with_block_bytes(size);
            let mut all = Vec::new();
            while let Some(b) = r.next_block(None).unwrap() {
                let recs = fields(&b, b',');
                all.extend(recs);
            }
            assert_eq!(all.len(), 5, "block size {size}: {all:?}");
            assert_eq!(all[1], vec!["1", "a\nb"]);
            assert_eq!(all[3], vec!["3", "d,\"e\""]);
        }
    }

    #[test]
    fn header_with_bom_and_duplicates() {
        let mut b = b"\xEF\xBB\xBF name ,pnl\n1,2\n".to_vec();
        let h = take_header(&mut b, b',').unwrap();
        assert_eq!(h.names, vec!["name", "pnl"]);
        assert_eq!(b, b"1,2\n");
        let mut d = b"pnl,x,pnl\n".to_vec();
        assert!(matches!(
            take_header(&mut d, b','),
            Err(ScanError::DuplicateColumn {
                first: 1,
                second: 3,
                ..
            })
        ));
    }

    #[test]
    fn sniffs_delimiters() {
        assert_eq!(sniff_delimiter(b"a;b;c\n1;2;3"), b';');
        assert_eq!(sniff_delimiter(b"a\tb\n"), b'\t');
        assert_eq!(sniff_delimiter(b"\"x;y\",b,c\n"), b',');
    }
}
