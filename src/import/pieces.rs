//! Cutting a CSV byte stream into pieces that each start at a record
//! boundary, so that several threads can parse one file and still report
//! the lines and errors that one reader going through it in order reports.
//!
//! A line break ends a record exactly when an even number of `"` bytes
//! came before it since the last record boundary: RFC 4180 opens and
//! closes a quoted field with one quote each and escapes a quote by
//! doubling it, and [`Reader`](crate::csvread::Reader) refuses a quote
//! anywhere else, which stops the import at that record. Up to the first
//! such refusal the cuts are therefore the reader's own record boundaries;
//! after it nothing is used. A piece ends at the last boundary of what was
//! read; the rest is carried into the next piece.

use crate::csvread::{RowError, RECORD_BYTES_MAX};
use std::io::BufRead;

/// Carried bytes without a boundary beyond which the record in them is
/// certainly too long for the reader (which counts a CRLF line break as
/// one byte, so at least half of these bytes): they go out as a piece of
/// their own, and its reader refuses the record as it would have in order.
const CARRY_MAX: usize = 2 * (RECORD_BYTES_MAX + 2) + 8;

/// A run of whole records, or the read error that ended the input.
#[derive(Debug, Default)]
pub struct Piece {
    pub bytes: Vec<u8>,
    /// Physical lines of the file before the piece's first byte.
    pub lines_before: usize,
    /// The input failed after this piece's records.
    pub error: Option<RowError>,
}

/// Cuts its input into pieces of about `piece_bytes` bytes or more.
pub struct Splitter<R> {
    input: R,
    piece_bytes: usize,
    lines: usize,
    /// An odd number of quotes since the last boundary: inside a quoted field.
    odd: bool,
    carry: Vec<u8>,
    done: bool,
}

fn newlines(bytes: &[u8]) -> usize {
    memchr::memchr_iter(b'\n', bytes).count()
}

impl<R: BufRead> Splitter<R> {
    /// `lines_before`: physical lines of the file already read from `input`
    /// (the header), which must have ended at a record boundary.
    pub fn new(input: R, lines_before: usize, piece_bytes: usize) -> Splitter<R> {
        Splitter {
            input,
            piece_bytes: piece_bytes.max(1),
            lines: lines_before,
            odd: false,
            carry: Vec::new(),
            done: false,
        }
    }

    /// The end of the last record boundary in `part`, following the quote
    /// parity `odd` across it.
    fn last_boundary(odd: &mut bool, part: &[u8]) -> Option<usize> {
        if !part.contains(&b'"') {
            return if *odd {
                None
            } else {
                memchr::memrchr(b'\n', part).map(|i| i + 1)
            };
        }
        let mut last = None;
        for (i, &b) in part.iter().enumerate() {
            match b {
                b'"' => *odd = !*odd,
                b'\n' if !*odd => last = Some(i + 1),
                _ => {}
            }
        }
        last
    }

    fn out(&mut self, bytes: Vec<u8>) -> Piece {
        let lines_before = self.lines;
        self.lines += newlines(&bytes);
        Piece {
            bytes,
            lines_before,
            error: None,
        }
    }

    /// The next piece, or `None` at the end of the input.
    pub fn next_piece(&mut self) -> Option<Piece> {
        if self.done {
            return None;
        }
        loop {
            let buf = match self.input.fill_buf() {
                Ok(b) => b,
                Err(e) if e.kind() == std::io::ErrorKind::Interrupted => continue,
                Err(e) => {
                    // The carried bytes hold no whole record: the reader
                    // in order would fail on the line after their last break.
                    self.done = true;
                    let line = self.lines + newlines(&self.carry) + 1;
                    return Some(Piece {
                        bytes: Vec::new(),
                        lines_before: self.lines,
                        error: Some(RowError::line(line, format!("could not read: {e}"))),
                    });
                }
            };
            if buf.is_empty() {
                self.done = true;
                if self.carry.is_empty() {
                    return None;
                }
                let bytes = std::mem::take(&mut self.carry);
                return Some(self.out(bytes));
            }
            let n = buf.len().min(self.piece_bytes);
            let part = &buf[..n];
            match Self::last_boundary(&mut self.odd, part) {
                Some(end) => {
                    let mut bytes = std::mem::take(&mut self.carry);
                    bytes.extend_from_slice(&part[..end]);
                    self.carry.extend_from_slice(&part[end..]);
                    self.input.consume(n);
                    return Some(self.out(bytes));
                }
                None => {
                    self.carry.extend_from_slice(part);
                    self.input.consume(n);
                    if self.carry.len() > CARRY_MAX {
                        // Whatever follows is not read: the import stops at this record.
                        self.odd = false;
                        let bytes = std::mem::take(&mut self.carry);
                        return Some(self.out(bytes));
                    }
                }
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::csvread::{Reader, Record};
    use proptest::prelude::*;

    /// Every record (line, fields) or the first error, one reader in order.
    fn in_order(input: &[u8]) -> (Vec<(usize, Vec<String>)>, Option<String>) {
        let mut reader = Reader::new(input);
        let mut rec = Record::default();
        let mut out = Vec::new();
        loop {
            match reader.next_into(&mut rec) {
                Ok(true) => out.push((rec.line, rec.iter().map(str::to_string).collect())),
                Ok(false) => return (out, None),
                Err(e) => return (out, Some(format!("{}", e.display("f")))),
            }
        }
    }

    /// The same through the splitter: the first line read in order (the
    /// header), then each piece by its own reader, stopping at the first error.
    fn in_pieces(
        input: &[u8],
        piece_bytes: usize,
        buffer: usize,
    ) -> (Vec<(usize, Vec<String>)>, Option<String>) {
        let mut buffered = std::io::BufReader::with_capacity(buffer, input);
        let mut reader = Reader::new(&mut buffered);
        let mut rec = Record::default();
        let mut out = Vec::new();
        match reader.next_into(&mut rec) {
            Ok(true) => out.push((rec.line, rec.iter().map(str::to_string).collect())),
            Ok(false) => return (out, None),
            Err(e) => return (out, Some(format!("{}", e.display("f")))),
        }
        let lines = reader.lines_read();
        let mut splitter = Splitter::new(reader.into_inner(), lines, piece_bytes);
        while let Some(piece) = splitter.next_piece() {
            let mut r = Reader::continuing(&piece.bytes[..], piece.lines_before);
            loop {
                match r.next_into(&mut rec) {
                    Ok(true) => out.push((rec.line, rec.iter().map(str::to_string).collect())),
                    Ok(false) => break,
                    Err(e) => return (out, Some(format!("{}", e.display("f")))),
                }
            }
            if let Some(e) = piece.error {
                return (out, Some(format!("{}", e.display("f"))));
            }
        }
        (out, None)
    }

    /// Bytes rich in what matters here: quotes, commas, LF, CR, letters.
    fn csvish() -> impl Strategy<Value = Vec<u8>> {
        proptest::collection::vec(
            prop_oneof![
                4 => Just(b'a'),
                2 => Just(b','),
                2 => Just(b'\n'),
                1 => Just(b'\r'),
                2 => Just(b'"'),
                1 => Just(0xFFu8),
            ],
            0..400,
        )
    }

    proptest! {
        #![proptest_config(ProptestConfig::with_cases(3000))]
        /// Same records, same lines, same first error as one reader in
        /// order, for any bytes and any piece and buffer size.
        #[test]
        fn pieces_parse_as_the_file_does(
            input in csvish(),
            piece_bytes in 1usize..40,
            buffer in 1usize..50,
        ) {
            prop_assert_eq!(in_pieces(&input, piece_bytes, buffer), in_order(&input));
        }
    }

    #[test]
    fn quoted_line_breaks_stay_in_one_piece() {
        let input = b"h1,h2\n\"a\nb\",c\n\"x\"\"\ny\",z\nlast,1";
        for piece_bytes in 1..input.len() + 2 {
            assert_eq!(in_pieces(input, piece_bytes, 3), in_order(input));
        }
        let (records, error) = in_order(input);
        assert_eq!(error, None);
        assert_eq!(records[1], (2, vec!["a\nb".to_string(), "c".to_string()]));
        assert_eq!(records[3], (6, vec!["last".to_string(), "1".to_string()]));
    }

    #[test]
    fn a_record_longer_than_accepted_is_refused_on_its_line() {
        let mut input = b"h\nok\n\"".to_vec();
        input.extend(std::iter::repeat_n(b'a', RECORD_BYTES_MAX + 10));
        input.extend_from_slice(b"\"\nafter\n");
        let expected = in_order(&input);
        assert!(expected
            .1
            .as_deref()
            .unwrap()
            .contains("record longer than"));
        assert_eq!(in_pieces(&input, 4096, 8192), expected);
        // The same with CRLF line breaks inside the quotes.
        let mut crlf = b"h\n\"".to_vec();
        for _ in 0..2 * RECORD_BYTES_MAX {
            crlf.extend_from_slice(b"\r\n");
        }
        crlf.extend_from_slice(b"\"\n");
        let expected = in_order(&crlf);
        assert!(
            expected
                .1
                .as_deref()
                .unwrap()
                .contains("record longer than"),
            "{expected:?}"
        );
        assert_eq!(in_pieces(&crlf, 1000, 1000), expected);
    }

    /// A reader that fails after some bytes.
    struct Failing<'a>(&'a [u8]);
    impl std::io::Read for Failing<'_> {
        fn read(&mut self, buf: &mut [u8]) -> std::io::Result<usize> {
            if self.0.is_empty() {
                return Err(std::io::Error::other("device gone"));
            }
            let n = buf.len().min(self.0.len());
            buf[..n].copy_from_slice(&self.0[..n]);
            self.0 = &self.0[n..];
            Ok(n)
        }
    }

    #[test]
    fn a_read_error_names_the_line_the_reader_in_order_names() {
        let input = b"h,i\n1,2\n\"3\n4\",5\n6,";
        let mut order = Reader::new(std::io::BufReader::with_capacity(4, Failing(input)));
        let mut rec = Record::default();
        let mut lines = Vec::new();
        let error = loop {
            match order.next_into(&mut rec) {
                Ok(true) => lines.push(rec.line),
                Ok(false) => panic!("the input fails"),
                Err(e) => break e,
            }
        };
        let mut buffered = std::io::BufReader::with_capacity(4, Failing(input));
        let mut header = Reader::new(&mut buffered);
        assert!(header.next_into(&mut rec).unwrap());
        let mut split_lines = vec![rec.line];
        let lines_before = header.lines_read();
        let mut splitter = Splitter::new(header.into_inner(), lines_before, 5);
        let mut split_error = None;
        while let Some(piece) = splitter.next_piece() {
            let mut r = Reader::continuing(&piece.bytes[..], piece.lines_before);
            while r.next_into(&mut rec).unwrap() {
                split_lines.push(rec.line);
            }
            split_error = piece.error.or(split_error);
        }
        assert_eq!(split_lines, lines);
        let split_error = split_error.expect("the read error");
        assert_eq!(
            (split_error.line, split_error.message),
            (error.line, error.message)
        );
        assert_eq!(error.line, 5);
    }
}
