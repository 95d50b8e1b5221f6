//! A strict, streaming CSV reader that counts physical lines itself.
//!
//! Why our own: the `csv` crate reports one line too few for CRLF files, and
//! accepts NUL bytes and fields of any size (../shared/RELIABILITY.md, P18).
//! This reader follows RFC 4180 (comma separator, `"` quoting with `""` as
//! the escape, quoted fields may hold line breaks), reports the physical
//! line a record starts on, accepts LF and CRLF and a UTF-8 byte-order mark,
//! and enforces the limits below before it holds more than one line.

use std::fmt;
use std::io::BufRead;

/// Longest record accepted, in bytes (RELIABILITY.md R11).
pub const RECORD_BYTES_MAX: usize = 64 * 1024;
/// Longest field accepted, in bytes (RELIABILITY.md R11).
pub const FIELD_BYTES_MAX: usize = 4 * 1024;
/// Most columns accepted (RELIABILITY.md R11).
pub const COLUMNS_MAX: usize = 100;
/// How many row errors an import reports before it says "and N more".
pub const ERRORS_SHOWN_MAX: usize = 20;

/// A problem at a place in an input file. The file name is added on display.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct RowError {
    pub line: usize,
    /// 1-based column number, where the problem is in one field.
    pub column: Option<usize>,
    pub field: Option<String>,
    pub message: String,
}

impl RowError {
    pub fn line(line: usize, message: impl Into<String>) -> RowError {
        RowError {
            line,
            column: None,
            field: None,
            message: message.into(),
        }
    }

    /// A record whose field count is not the header's.
    pub fn field_count(record: &Record, expected: usize) -> Option<RowError> {
        (record.len() != expected).then(|| {
            RowError::line(
                record.line,
                format!("expected {expected} fields, found {}", record.len()),
            )
        })
    }

    pub fn at(line: usize, column: usize, field: &str, message: impl Into<String>) -> RowError {
        RowError {
            line,
            column: Some(column),
            field: Some(field.to_string()),
            message: message.into(),
        }
    }

    /// `file:line[:column]: [field NAME: ]message`
    pub fn display<'a>(&'a self, file: &'a str) -> impl fmt::Display + 'a {
        struct D<'a>(&'a RowError, &'a str);
        impl fmt::Display for D<'_> {
            fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
                let e = self.0;
                write!(f, "{}:{}", self.1, e.line)?;
                if let Some(c) = e.column {
                    write!(f, ":{c}")?;
                }
                f.write_str(": ")?;
                if let Some(name) = &e.field {
                    write!(f, "field {name}: ")?;
                }
                f.write_str(&e.message)
            }
        }
        D(self, file)
    }
}

/// Every row error of one file, rendered with the first 20 and a count of the rest.
#[derive(Debug)]
pub struct FileErrors {
    pub file: String,
    pub errors: Vec<RowError>,
    /// Errors counted but not kept, so a huge bad file cannot fill memory.
    pub omitted: usize,
}

impl FileErrors {
    pub fn new(file: &str, errors: Vec<RowError>) -> FileErrors {
        FileErrors {
            file: file.to_string(),
            errors,
            omitted: 0,
        }
    }
}

impl fmt::Display for FileErrors {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        for (i, e) in self.errors.iter().take(ERRORS_SHOWN_MAX).enumerate() {
            if i > 0 {
                writeln!(f)?;
            }
            write!(f, "{}", e.display(&self.file))?;
        }
        // Errors past those kept in memory are counted in `omitted`.
        let total = self.errors.len() + self.omitted;
        if total > ERRORS_SHOWN_MAX {
            write!(f, "\nand {} more errors", total - ERRORS_SHOWN_MAX)?;
        }
        Ok(())
    }
}

impl std::error::Error for FileErrors {}

/// Quote a value for an error message: escaped, and cut to 80 characters so
/// hostile text never reaches the terminal raw.
pub fn shown(value: &str) -> String {
    let mut out: String = value
        .chars()
        .take(80)
        .flat_map(char::escape_debug)
        .collect();
    if value.chars().count() > 80 {
        out.push('…');
    }
    format!("\"{out}\"")
}

/// One record: its starting physical line and its fields.
#[derive(Debug, Default)]
pub struct Record {
    pub line: usize,
    text: String,
    bounds: Vec<(usize, usize)>,
}

impl Record {
    pub fn len(&self) -> usize {
        self.bounds.len()
    }

    pub fn is_empty(&self) -> bool {
        self.bounds.is_empty()
    }

    pub fn get(&self, i: usize) -> &str {
        let (a, b) = self.bounds[i];
        &self.text[a..b]
    }

    pub fn iter(&self) -> impl Iterator<Item = &str> {
        self.bounds.iter().map(|&(a, b)| &self.text[a..b])
    }
}

/// Reads records from any buffered input, one at a time.
pub struct Reader<R> {
    input: R,
    /// Physical line number of the last line read.
    line: usize,
    raw: Vec<u8>,
    field: Vec<u8>,
    bom_checked: bool,
    done: bool,
}

impl<R: BufRead> Reader<R> {
    pub fn new(input: R) -> Reader<R> {
        Reader {
            input,
            line: 0,
            raw: Vec::new(),
            field: Vec::new(),
            bom_checked: false,
            done: false,
        }
    }

    /// A reader for input that goes on from physical line `lines_before`
    /// of a file whose start (and byte-order mark) another reader has
    /// read: line numbers count on from there.
    pub fn continuing(input: R, lines_before: usize) -> Reader<R> {
        let mut r = Reader::new(input);
        r.line = lines_before;
        r.bom_checked = true;
        r
    }

    /// Physical lines read so far.
    pub fn lines_read(&self) -> usize {
        self.line
    }

    /// The input, for reading on past what this reader has taken.
    pub fn into_inner(self) -> R {
        self.input
    }

    /// Read one physical line into `self.raw` without its line ending.
    /// Returns false at the end of input.
    fn read_line(&mut self, record_bytes: usize) -> Result<bool, RowError> {
        self.raw.clear();
        let next_line = self.line + 1;
        loop {
            let buf = match self.input.fill_buf() {
                Ok(b) => b,
                Err(e) if e.kind() == std::io::ErrorKind::Interrupted => continue,
                Err(e) => return Err(RowError::line(next_line, format!("could not read: {e}"))),
            };
            if buf.is_empty() {
                if self.raw.is_empty() {
                    return Ok(false);
                }
                break;
            }
            let (chunk, found) = match memchr::memchr(b'\n', buf) {
                Some(i) => (&buf[..=i], true),
                None => (buf, false),
            };
            if record_bytes + self.raw.len() + chunk.len() > RECORD_BYTES_MAX + 2 {
                return Err(RowError::line(
                    next_line,
                    format!("record longer than {RECORD_BYTES_MAX} bytes"),
                ));
            }
            self.raw.extend_from_slice(chunk);
            let n = chunk.len();
            self.input.consume(n);
            if found {
                break;
            }
        }
        self.line = next_line;
        if self.raw.last() == Some(&b'\n') {
            self.raw.pop();
            if self.raw.last() == Some(&b'\r') {
                self.raw.pop();
            }
        }
        if !self.bom_checked {
            self.bom_checked = true;
            if self.raw.starts_with(&[0xEF, 0xBB, 0xBF]) {
                self.raw.drain(..3);
            }
        }
        Ok(true)
    }

    /// Read the next record into `record`. Blank lines are skipped.
    /// Returns false at the end of input.
    pub fn next_into(&mut self, record: &mut Record) -> Result<bool, RowError> {
        if self.done {
            return Ok(false);
        }
        loop {
            if !self.read_line(0)? {
                self.done = true;
                return Ok(false);
            }
            if !self.raw.is_empty() {
                break;
            }
        }
        record.line = self.line;
        record.text.clear();
        record.bounds.clear();
        if !self.raw.contains(&b'"') {
            return self.split_plain(record).map(|()| true);
        }
        let start_line = self.line;
        let mut pos = 0usize;
        let mut quoted = false;
        let mut in_quotes = false;
        let mut after_quote = false;
        self.field.clear();
        let mut record_bytes = self.raw.len();
        loop {
            if pos == self.raw.len() {
                if in_quotes {
                    // A quoted field goes on over the line break.
                    if !self.read_line(record_bytes)? {
                        self.done = true;
                        return Err(RowError::line(
                            start_line,
                            "unclosed quote: a quoted field never ends",
                        ));
                    }
                    record_bytes += self.raw.len() + 1;
                    self.field.push(b'\n');
                    pos = 0;
                    continue;
                }
                self.push_field(record, start_line)?;
                return Ok(true);
            }
            let b = self.raw[pos];
            pos += 1;
            if in_quotes {
                if b == b'"' {
                    if self.raw.get(pos) == Some(&b'"') {
                        self.field.push(b'"');
                        pos += 1;
                    } else {
                        in_quotes = false;
                        after_quote = true;
                    }
                } else {
                    self.field.push(b);
                }
                continue;
            }
            match b {
                b',' => {
                    self.push_field(record, start_line)?;
                    quoted = false;
                    after_quote = false;
                }
                b'"' if !quoted && self.field.is_empty() => {
                    quoted = true;
                    in_quotes = true;
                }
                _ if after_quote => {
                    return Err(RowError::at(
                        start_line,
                        record.len() + 1,
                        &format!("#{}", record.len() + 1),
                        "text after a closing quote",
                    ))
                }
                b'"' => {
                    return Err(RowError::at(
                        start_line,
                        record.len() + 1,
                        &format!("#{}", record.len() + 1),
                        "a quote inside an unquoted field",
                    ))
                }
                _ => self.field.push(b),
            }
        }
    }

    /// The common case, a line without quotes: check it whole, then split
    /// at the commas. Same rules and messages as the quoted path.
    fn split_plain(&mut self, record: &mut Record) -> Result<(), RowError> {
        let line = self.line;
        let text = match std::str::from_utf8(&self.raw) {
            Ok(t) => t,
            Err(e) => {
                let at = e.valid_up_to();
                let column = self.raw[..at].iter().filter(|&&b| b == b',').count() + 1;
                let start = self.raw[..at]
                    .iter()
                    .rposition(|&b| b == b',')
                    .map_or(0, |p| p + 1);
                return Err(RowError::at(
                    line,
                    column,
                    &format!("#{column}"),
                    format!("invalid UTF-8 at byte {} of the field", at - start),
                ));
            }
        };
        record.text.push_str(text);
        // Without control characters (the usual case, told without a branch
        // per byte) the fields are what lies between the commas.
        let control = self.raw.iter().fold(false, |any, &b| {
            any | ((b < 0x20) & (b != b'\t')) | (b == 0x7f)
        });
        if !control {
            let mut start = 0usize;
            for i in memchr::memchr_iter(b',', &self.raw) {
                record.bounds.push((start, i));
                start = i + 1;
            }
            record.bounds.push((start, self.raw.len()));
            return self.check_plain(record, line, text);
        }
        let mut start = 0usize;
        for (i, &b) in self.raw.iter().enumerate() {
            if b == b',' {
                record.bounds.push((start, i));
                start = i + 1;
            } else if b < 0x20 && b != b'\t' {
                let column = record.bounds.len() + 1;
                let c = char::from(b);
                return Err(RowError::at(
                    line,
                    column,
                    &format!("#{column}"),
                    format!("control character {c:?} is not accepted"),
                ));
            } else if b == 0x7f {
                let column = record.bounds.len() + 1;
                return Err(RowError::at(
                    line,
                    column,
                    &format!("#{column}"),
                    "control character '\\u{7f}' is not accepted",
                ));
            }
        }
        record.bounds.push((start, self.raw.len()));
        self.check_plain(record, line, text)
    }

    /// The limits and C1 control characters of a plain line split at its commas.
    fn check_plain(&self, record: &mut Record, line: usize, text: &str) -> Result<(), RowError> {
        if record.bounds.len() > COLUMNS_MAX {
            return Err(RowError::line(
                line,
                format!("more than {COLUMNS_MAX} columns"),
            ));
        }
        if let Some((i, _)) = record
            .bounds
            .iter()
            .enumerate()
            .find(|(_, (a, b))| b - a > FIELD_BYTES_MAX)
        {
            return Err(RowError::at(
                line,
                i + 1,
                &format!("#{}", i + 1),
                format!("longer than {FIELD_BYTES_MAX} bytes"),
            ));
        }
        // Non-ASCII control characters (C1) are refused as on the quoted path.
        if !text.is_ascii() {
            if let Some(c) = text.chars().find(|c| c.is_control() && *c != '\t') {
                let before = &text[..text.find(c).expect("found")];
                let column = before.matches(',').count() + 1;
                return Err(RowError::at(
                    line,
                    column,
                    &format!("#{column}"),
                    format!("control character {c:?} is not accepted"),
                ));
            }
        }
        Ok(())
    }

    fn push_field(&mut self, record: &mut Record, line: usize) -> Result<(), RowError> {
        let column = record.len() + 1;
        let name = || format!("#{column}");
        if column > COLUMNS_MAX {
            return Err(RowError::line(
                line,
                format!("more than {COLUMNS_MAX} columns"),
            ));
        }
        if self.field.len() > FIELD_BYTES_MAX {
            return Err(RowError::at(
                line,
                column,
                &name(),
                format!("longer than {FIELD_BYTES_MAX} bytes"),
            ));
        }
        let text = std::str::from_utf8(&self.field).map_err(|e| {
            RowError::at(
                line,
                column,
                &name(),
                format!("invalid UTF-8 at byte {} of the field", e.valid_up_to()),
            )
        })?;
        if let Some(c) = text
            .chars()
            .find(|&c| c.is_control() && c != '\t' && c != '\n')
        {
            return Err(RowError::at(
                line,
                column,
                &name(),
                format!("control character {:?} is not accepted", c),
            ));
        }
        let start = record.text.len();
        record.text.push_str(text);
        record.bounds.push((start, record.text.len()));
        self.field.clear();
        Ok(())
    }
}

/// The columns of a file's header, mapped to the names an import expects.
#[derive(Debug)]
pub struct Columns {
    pub names: Vec<String>,
}

impl Columns {
    /// Check a header against the columns an import knows. Every required
    /// column must be present; no column may be unknown or repeated.
    pub fn from_header(
        record: &Record,
        required: &[&str],
        optional: &[&str],
    ) -> Result<Columns, Vec<RowError>> {
        let mut errors = Vec::new();
        let names: Vec<String> = record.iter().map(str::to_string).collect();
        let expected = || {
            let mut all = required.to_vec();
            all.extend_from_slice(optional);
            all.join(",")
        };
        for (i, n) in names.iter().enumerate() {
            if !required.contains(&n.as_str()) && !optional.contains(&n.as_str()) {
                errors.push(RowError::at(
                    record.line,
                    i + 1,
                    n,
                    format!(
                        "unknown column {} (expected columns: {})",
                        shown(n),
                        expected()
                    ),
                ));
            } else if names[..i].contains(n) {
                errors.push(RowError::at(record.line, i + 1, n, "column named twice"));
            }
        }
        for r in required {
            if !names.iter().any(|n| n == r) {
                errors.push(RowError::line(
                    record.line,
                    format!("missing column {r} (expected columns: {})", expected()),
                ));
            }
        }
        if errors.is_empty() {
            Ok(Columns { names })
        } else {
            Err(errors)
        }
    }

    pub fn index(&self, name: &str) -> Option<usize> {
        self.names.iter().position(|n| n == name)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn records(input: &[u8]) -> Result<Vec<(usize, Vec<String>)>, RowError> {
        let mut r = Reader::new(input);
        let mut rec = Record::default();
        let mut out = Vec::new();
        while r.next_into(&mut rec)? {
            out.push((rec.line, rec.iter().map(str::to_string).collect()));
        }
        Ok(out)
    }

    #[test]
    fn crlf_and_bom_keep_physical_line_numbers() {
        let lf = records(b"a,b\n1,2\n\n3,4\n").unwrap();
        let crlf = records(b"\xEF\xBB\xBFa,b\r\n1,2\r\n\r\n3,4\r\n").unwrap();
        assert_eq!(lf, crlf);
        assert_eq!(lf[2].0, 4);
        assert_eq!(lf[0].1, vec!["a", "b"]);
    }

    #[test]
    fn quoted_fields_hold_commas_quotes_and_line_breaks() {
        let r = records(b"a,b\n\"x,\"\"y\"\"\",\"two\nlines\"\n5,6\n").unwrap();
        assert_eq!(
            r[1],
            (2, vec!["x,\"y\"".to_string(), "two\nlines".to_string()])
        );
        assert_eq!(r[2].0, 4);
    }

    #[test]
    fn unclosed_quote_names_the_line_it_opened_on() {
        let e = records(b"a,b\n\"open,1\n2,3\n4,5\n").unwrap_err();
        assert_eq!(e.line, 2);
        assert!(e.message.contains("unclosed quote"));
    }

    #[test]
    fn limits_and_bad_bytes_are_refused() {
        let long = format!("a\n{}\n", "x".repeat(FIELD_BYTES_MAX + 1));
        assert!(records(long.as_bytes())
            .unwrap_err()
            .message
            .contains("longer than"));
        let huge = format!("a\n{}\n", "x,".repeat(RECORD_BYTES_MAX));
        assert!(records(huge.as_bytes())
            .unwrap_err()
            .message
            .contains("record longer"));
        let e = records(b"a\n\xff\n").unwrap_err();
        assert_eq!((e.line, e.column), (2, Some(1)));
        assert!(records(b"a\nx\x00y\n")
            .unwrap_err()
            .message
            .contains("control character"));
        assert!(records(b"a\nx\"y\n")
            .unwrap_err()
            .message
            .contains("quote inside"));
    }
}
