//! The small CSV dialect of icefold's data files (forcing histories, OLR tables): one header
//! line of column names, then rows of numbers separated by commas; blank lines and lines
//! starting with `#` are skipped; fields are trimmed. Shared by [`crate::forcing`] and the OLR
//! table reader so both report problems the same way: the 1-based line, the column name and
//! the offending text.

use std::io::Read;
use std::path::Path;

/// A problem in a CSV file, at a 1-based line (0: the file as a whole).
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[error("line {line}: {message}")]
pub struct CsvError {
    /// 1-based line number (0: the file as a whole).
    pub line: usize,
    /// What is wrong, naming the column and what is allowed.
    pub message: String,
}

impl CsvError {
    /// An error at `line`.
    pub fn at(line: usize, message: impl Into<String>) -> CsvError {
        CsvError {
            line,
            message: message.into(),
        }
    }
}

/// The UTF-8 encoding of the byte-order mark U+FEFF.
const UTF8_BOM: &[u8] = b"\xef\xbb\xbf";

/// Read a data file as UTF-8 text (a leading byte-order mark is dropped), refusing files larger than `max_bytes` before reading them.
/// `what` names the file's role in messages (e.g. "forcing file (forcing.file)").
pub fn read_text(path: &Path, max_bytes: u64, what: &str) -> Result<String, String> {
    let meta = std::fs::metadata(path).map_err(|e| format!("cannot read {what}: {e}"))?;
    if meta.is_dir() {
        return Err(format!("cannot read {what}: it is a directory"));
    }
    if meta.len() > max_bytes {
        return Err(format!(
            "{what} is {} bytes; the limit is {} ({max_bytes} bytes)",
            meta.len(),
            human_bytes(max_bytes)
        ));
    }
    // Read at most one byte past the limit: a device or pipe (e.g. /dev/zero) reports length
    // 0 and never ends.
    let mut bytes = Vec::new();
    std::fs::File::open(path)
        .and_then(|f| f.take(max_bytes + 1).read_to_end(&mut bytes))
        .map_err(|e| format!("cannot read {what}: {e}"))?;
    if bytes.len() as u64 > max_bytes {
        return Err(format!(
            "{what} is longer than the limit of {} ({max_bytes} bytes)",
            human_bytes(max_bytes)
        ));
    }
    // A leading UTF-8 byte-order mark (spreadsheets write one) is not part of the first name.
    if bytes.starts_with(UTF8_BOM) {
        bytes.drain(..UTF8_BOM.len());
    }
    String::from_utf8(bytes).map_err(|e| {
        let at = e.utf8_error().valid_up_to();
        let line = e.as_bytes()[..at].iter().filter(|&&b| b == b'\n').count() + 1;
        format!("{what} is not UTF-8 text (invalid byte at line {line}, byte offset {at})")
    })
}

/// `1073741824` as "1 GiB", for limits in messages.
fn human_bytes(n: u64) -> String {
    const GIB: u64 = 1 << 30;
    const MIB: u64 = 1 << 20;
    if n % GIB == 0 {
        format!("{} GiB", n / GIB)
    } else if n % MIB == 0 {
        format!("{} MiB", n / MIB)
    } else {
        format!("{n} bytes")
    }
}

/// A CSV text being read: the header and an iterator over the data lines.
pub struct Reader<'a> {
    /// Line number of the header.
    pub header_line: usize,
    /// The header as written (trimmed).
    pub header: &'a str,
    /// Column names, trimmed, in file order.
    pub names: Vec<&'a str>,
    lines: Box<dyn Iterator<Item = (usize, &'a str)> + 'a>,
}

/// Data lines of `text`: 1-based number and trimmed text, skipping blank and `#` lines.
fn content_lines(text: &str) -> impl Iterator<Item = (usize, &str)> {
    text.lines()
        .enumerate()
        .map(|(i, l)| (i + 1, l.trim()))
        .filter(|(_, l)| !l.is_empty() && !l.starts_with('#'))
}

impl<'a> Reader<'a> {
    /// Start reading `text`; `empty` is the message for a text without a header.
    pub fn new(text: &'a str, empty: &str) -> Result<Reader<'a>, CsvError> {
        let mut lines = content_lines(text);
        let (header_line, header) = lines.next().ok_or_else(|| CsvError::at(1, empty))?;
        let names: Vec<&str> = header.split(',').map(str::trim).collect();
        if let Some(k) = names.iter().position(|n| n.is_empty()) {
            return Err(CsvError::at(
                header_line,
                format!("column {} of the header `{}` has no name", k + 1, shorten(header)),
            ));
        }
        Ok(Reader {
            header_line,
            header,
            names,
            lines: Box::new(lines),
        })
    }

    /// The next data row parsed into `out` (cleared first): exactly one finite number per
    /// column. Returns its line number, or `None` at the end of the text.
    pub fn next_row(&mut self, out: &mut Vec<f64>) -> Result<Option<usize>, CsvError> {
        let Some((ln, line)) = self.lines.next() else {
            return Ok(None);
        };
        out.clear();
        let ncol = self.names.len();
        let mut found = 0;
        for (k, field) in line.split(',').map(str::trim).enumerate() {
            found = k + 1;
            if k >= ncol {
                continue;
            }
            let name = self.names[k];
            let v: f64 = field.parse().map_err(|_| {
                CsvError::at(
                    ln,
                    format!("`{}` in column `{name}` is not a number", shorten(field)),
                )
            })?;
            if !v.is_finite() {
                return Err(CsvError::at(
                    ln,
                    format!(
                        "`{}` in column `{name}` is not finite (allowed: a finite number)",
                        shorten(field)
                    ),
                ));
            }
            out.push(v);
        }
        if found != ncol {
            return Err(CsvError::at(
                ln,
                format!("expected {ncol} fields ({}), found {found}", shorten(self.header)),
            ));
        }
        Ok(Some(ln))
    }
}

/// At most 40 characters of `s` for a message (long garbage is cut, marked with `...`), with
/// control characters escaped so the message stays one line.
pub fn shorten(s: &str) -> String {
    let cut: String = s.chars().take(40).collect();
    let cut = crate::text::one_line(&cut).into_owned();
    if s.chars().count() <= 40 {
        cut
    } else {
        format!("{cut}...")
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn rows_are_checked_and_lines_counted() {
        let text = "# comment\n\n a , b \n1, 2\n\n3,x\n";
        let mut r = Reader::new(text, "empty").unwrap();
        assert_eq!((r.header_line, r.names.clone()), (3, vec!["a", "b"]));
        let mut row = Vec::new();
        assert_eq!(r.next_row(&mut row).unwrap(), Some(4));
        assert_eq!(row, [1.0, 2.0]);
        let e = r.next_row(&mut row).unwrap_err();
        assert_eq!(e.line, 6);
        assert!(e.message.contains("`x` in column `b` is not a number"), "{e}");
    }

    #[test]
    fn field_counts_and_nonfinite_values_are_refused() {
        for (text, line, frag) in [
            ("a,b\n1\n", 2, "expected 2 fields (a,b), found 1"),
            ("a,b\n1,2,3\n", 2, "found 3"),
            ("a,b\n1,inf\n", 2, "`inf` in column `b` is not finite"),
            ("a,,b\n", 1, "column 2 of the header"),
            ("", 1, "EMPTY"),
        ] {
            let e = Reader::new(text, "EMPTY")
                .and_then(|mut r| r.next_row(&mut Vec::new()).map(|_| ()))
                .unwrap_err();
            assert_eq!(e.line, line, "{text:?}: {e}");
            assert!(e.message.contains(frag), "{text:?}: {e}");
        }
    }

    #[test]
    fn long_garbage_is_shortened() {
        let long = "x".repeat(1000);
        assert_eq!(shorten(&long).len(), 43);
        assert_eq!(shorten("abc"), "abc");
    }
}
