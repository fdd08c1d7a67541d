//! The bytes of a text input as UTF-8: a UTF-8 byte-order mark skipped, UTF-16 (by its
//! byte-order mark) and the legacy encodings of `--encoding` (WHATWG Encoding Standard labels)
//! decoded, anything else checked to be UTF-8.

use std::io::{Cursor, Read};
use std::path::Path;

use encoding_rs::{Encoding, UTF_8};
use stance_core::error::{Error, Result};

/// Bytes read ahead to guess the dialect.
const SAMPLE_BYTES: usize = 64 * 1024;

/// A text input ready to parse.
pub struct Text {
    /// UTF-8 bytes of the content (without byte-order mark).
    pub reader: Box<dyn Read>,
    /// The first records as text, for guessing the dialect.
    pub sample: String,
    /// Whether `sample` is the whole content.
    pub complete: bool,
    /// The encoding read, as the summary shows it.
    pub encoding: String,
    /// Bytes of UTF-8 content (for progress).
    pub size: u64,
}

fn io_error(path: &Path, e: &std::io::Error) -> Error {
    Error::InputFile {
        path: path.to_owned(),
        reason: e.to_string(),
    }
}

/// The encoding a `--encoding` label names (WHATWG Encoding Standard labels).
///
/// # Errors
/// [`Error::BadArgument`] for an unknown label.
pub fn encoding_for_label(label: &str) -> Result<&'static Encoding> {
    Encoding::for_label(label.trim().as_bytes()).ok_or_else(|| {
        Error::argument(
            "--encoding",
            format!("'{label}' is not an encoding label of the WHATWG Encoding Standard (e.g. utf-8, windows-1252, iso-8859-1, iso-8859-15, utf-16le)"),
        )
    })
}

/// Opens `path` as text in `encoding`, or UTF-8 (or UTF-16 with a byte-order mark) when None.
///
/// # Errors
/// A read failure, or invalid UTF-8 in the first bytes when no encoding was given (naming the
/// line and suggesting `--encoding`).
pub fn open(path: &Path, encoding: Option<&'static Encoding>) -> Result<Text> {
    let mut file = std::fs::File::open(path).map_err(|e| io_error(path, &e))?;
    let mut head = Vec::with_capacity(SAMPLE_BYTES);
    (&mut file)
        .take(SAMPLE_BYTES as u64)
        .read_to_end(&mut head)
        .map_err(|e| io_error(path, &e))?;
    let complete = head.len() < SAMPLE_BYTES;
    let bom = Encoding::for_bom(&head);
    match (bom, encoding) {
        (Some((found, _)), _) if found != UTF_8 => decode_whole(path, head, file, found, true),
        (None, Some(given)) if given != UTF_8 => decode_whole(path, head, file, given, false),
        _ => {
            let skip = bom.map_or(0, |(_, len)| len);
            let size = file.metadata().map(|m| m.len()).unwrap_or(0);
            let sample = utf8_sample(path, &head[skip..], complete)?;
            head.drain(..skip);
            Ok(Text {
                reader: Box::new(Cursor::new(head).chain(file)),
                sample,
                complete,
                encoding: if skip > 0 {
                    "UTF-8 with byte-order mark".into()
                } else {
                    "UTF-8".into()
                },
                size,
            })
        }
    }
}

/// Reads the rest of `file` and decodes everything from `encoding`.
fn decode_whole(
    path: &Path,
    mut bytes: Vec<u8>,
    mut file: std::fs::File,
    encoding: &'static Encoding,
    by_bom: bool,
) -> Result<Text> {
    file.read_to_end(&mut bytes)
        .map_err(|e| io_error(path, &e))?;
    let (text, used, had_errors) = encoding.decode(&bytes);
    if had_errors {
        let line = text
            .find('\u{FFFD}')
            .map_or(1, |at| text[..at].matches('\n').count() + 1);
        return Err(Error::BadInput {
            path: path.to_owned(),
            message: format!(
                "line {line} is not valid {}; give the file's encoding with --encoding",
                used.name()
            ),
        });
    }
    let text = text.into_owned();
    let mut end = text.len().min(SAMPLE_BYTES);
    while !text.is_char_boundary(end) {
        end -= 1;
    }
    Ok(Text {
        sample: text[..end].to_owned(),
        complete: end == text.len(),
        encoding: if by_bom {
            format!("{} with byte-order mark", used.name())
        } else {
            used.name().to_owned()
        },
        size: text.len() as u64,
        reader: Box::new(Cursor::new(text.into_bytes())),
    })
}

/// The valid UTF-8 start of `head`; an invalid sequence before its cut end is an error.
fn utf8_sample(path: &Path, head: &[u8], complete: bool) -> Result<String> {
    match std::str::from_utf8(head) {
        Ok(text) => Ok(text.to_owned()),
        Err(e) if e.error_len().is_none() && !complete => {
            Ok(String::from_utf8_lossy(&head[..e.valid_up_to()]).into_owned())
        }
        Err(e) => {
            let line = head[..e.valid_up_to()]
                .iter()
                .filter(|b| **b == b'\n')
                .count()
                + 1;
            Err(not_utf8(path, line as u64))
        }
    }
}

/// The error for invalid UTF-8 at `line`.
pub fn not_utf8(path: &Path, line: u64) -> Error {
    Error::BadInput {
        path: path.to_owned(),
        message: format!(
            "line {line} is not valid UTF-8; give the file's encoding with --encoding (e.g. --encoding windows-1252 or --encoding iso-8859-1)"
        ),
    }
}
