//! The ways a records export can be written (`--csv-dialect`): delimiter, character encoding,
//! byte-order mark, line ends and decimal separator, or JSON lines, as real exports come.

use std::io::Write;

/// A dialect of the records export.
#[derive(
    Debug,
    Clone,
    Copy,
    Default,
    PartialEq,
    Eq,
    clap::ValueEnum,
    serde::Serialize,
    schemars::JsonSchema,
)]
#[serde(rename_all = "kebab-case")]
pub enum CsvDialect {
    /// RFC 4180: comma, UTF-8 without byte-order mark, LF line ends, decimal point.
    #[default]
    CommaUtf8,
    /// Semicolon, ISO-8859-1 / windows-1252, LF, decimal point.
    SemicolonLatin1,
    /// Semicolon, UTF-8 with byte-order mark, CRLF, decimal comma (a common spreadsheet export
    /// where the comma is the decimal separator).
    SemicolonBomCrlfDecimalComma,
    /// Semicolon, windows-1252, CRLF, decimal comma.
    SemicolonLatin1CrlfDecimalComma,
    /// Tab, UTF-16LE with byte-order mark, CRLF ("Unicode text").
    TabUtf16,
    /// Pipe, UTF-8, LF, decimal point.
    Pipe,
    /// JSON lines: one JSON object per line (RFC 8259), coordinates nested as
    /// `location.lon` / `location.lat`.
    Jsonl,
}

/// Character encodings a dialect writes.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Charset {
    Utf8,
    Utf8Bom,
    Utf16LeBom,
    Windows1252,
}

impl CsvDialect {
    /// Field delimiter (None for JSON lines).
    pub fn delimiter(self) -> Option<u8> {
        match self {
            CsvDialect::CommaUtf8 => Some(b','),
            CsvDialect::SemicolonLatin1
            | CsvDialect::SemicolonBomCrlfDecimalComma
            | CsvDialect::SemicolonLatin1CrlfDecimalComma => Some(b';'),
            CsvDialect::TabUtf16 => Some(b'\t'),
            CsvDialect::Pipe => Some(b'|'),
            CsvDialect::Jsonl => None,
        }
    }

    /// Character encoding.
    pub fn charset(self) -> Charset {
        match self {
            CsvDialect::SemicolonLatin1 | CsvDialect::SemicolonLatin1CrlfDecimalComma => {
                Charset::Windows1252
            }
            CsvDialect::SemicolonBomCrlfDecimalComma => Charset::Utf8Bom,
            CsvDialect::TabUtf16 => Charset::Utf16LeBom,
            CsvDialect::CommaUtf8 | CsvDialect::Pipe | CsvDialect::Jsonl => Charset::Utf8,
        }
    }

    /// Whether lines end in CRLF.
    pub fn crlf(self) -> bool {
        matches!(
            self,
            CsvDialect::SemicolonBomCrlfDecimalComma
                | CsvDialect::SemicolonLatin1CrlfDecimalComma
                | CsvDialect::TabUtf16
        )
    }

    /// Whether coordinates are written with a decimal comma.
    pub fn decimal_comma(self) -> bool {
        matches!(
            self,
            CsvDialect::SemicolonBomCrlfDecimalComma | CsvDialect::SemicolonLatin1CrlfDecimalComma
        )
    }
}

/// A writer taking UTF-8 and writing it in `charset` (a byte-order mark first when it has one).
pub struct Encoded<W: Write> {
    inner: W,
    charset: Charset,
    /// UTF-8 bytes not yet written (an incomplete character at the end of a write).
    pending: Vec<u8>,
    started: bool,
}

impl<W: Write> Encoded<W> {
    pub fn new(inner: W, charset: Charset) -> Self {
        Encoded {
            inner,
            charset,
            pending: Vec::new(),
            started: false,
        }
    }

    fn emit(&mut self, text: &str) -> std::io::Result<()> {
        if !self.started {
            self.started = true;
            match self.charset {
                Charset::Utf8Bom => self.inner.write_all(b"\xEF\xBB\xBF")?,
                Charset::Utf16LeBom => self.inner.write_all(b"\xFF\xFE")?,
                _ => {}
            }
        }
        match self.charset {
            Charset::Utf8 | Charset::Utf8Bom => self.inner.write_all(text.as_bytes()),
            Charset::Utf16LeBom => {
                let bytes: Vec<u8> = text.encode_utf16().flat_map(u16::to_le_bytes).collect();
                self.inner.write_all(&bytes)
            }
            Charset::Windows1252 => {
                let (bytes, _, _) = encoding_rs::WINDOWS_1252.encode(text);
                self.inner.write_all(&bytes)
            }
        }
    }
}

impl<W: Write> Write for Encoded<W> {
    fn write(&mut self, buf: &[u8]) -> std::io::Result<usize> {
        self.pending.extend_from_slice(buf);
        let valid = match std::str::from_utf8(&self.pending) {
            Ok(_) => self.pending.len(),
            Err(e) if e.error_len().is_none() => e.valid_up_to(),
            Err(e) => return Err(std::io::Error::new(std::io::ErrorKind::InvalidData, e)),
        };
        let rest = self.pending.split_off(valid);
        let done = std::mem::replace(&mut self.pending, rest);
        let text = String::from_utf8(done)
            .map_err(|e| std::io::Error::new(std::io::ErrorKind::InvalidData, e))?;
        self.emit(&text)?;
        Ok(buf.len())
    }

    fn flush(&mut self) -> std::io::Result<()> {
        if !self.started {
            self.emit("")?;
        }
        self.inner.flush()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn encodings_write_the_bytes_of_their_standards() {
        // Expected bytes from the Unicode code charts and the windows-1252 table
        // (WHATWG Encoding Standard): 'é' = U+00E9 → E9 in windows-1252, E9 00 in UTF-16LE.
        let write = |charset| {
            let mut out = Encoded::new(Vec::new(), charset);
            out.write_all("é;1".as_bytes()).expect("write");
            out.flush().expect("flush");
            out.inner
        };
        assert_eq!(write(Charset::Utf8), "é;1".as_bytes());
        assert_eq!(write(Charset::Utf8Bom), b"\xEF\xBB\xBF\xC3\xA9;1");
        assert_eq!(write(Charset::Windows1252), b"\xE9;1");
        assert_eq!(write(Charset::Utf16LeBom), b"\xFF\xFE\xE9\x00;\x001\x00");
        // A character split over two writes is kept whole.
        let mut split = Encoded::new(Vec::new(), Charset::Windows1252);
        split.write_all(&[0xC3]).expect("first half");
        split.write_all(&[0xA9]).expect("second half");
        assert_eq!(split.inner, b"\xE9");
    }
}
