//! The dialect of a delimited text file, guessed from its first records (RFC 4180 quoting), and
//! the number forms of its coordinate columns. Pure: text in, decisions out.

/// The delimiters recognised, in the order ties are broken.
pub const DELIMITERS: [u8; 4] = [b',', b';', b'\t', b'|'];

/// Records looked at when guessing the delimiter.
const SAMPLE_RECORDS: usize = 50;

/// The name of a delimiter as the summary shows it.
pub fn delimiter_name(delimiter: u8) -> &'static str {
    match delimiter {
        b',' => "comma",
        b';' => "semicolon",
        b'\t' => "tab",
        b'|' => "pipe",
        _ => "other",
    }
}

/// Splits the start of a file into records, honouring double quotes (a quoted field may hold
/// delimiters and line breaks); the last, possibly cut, record is left out unless `complete`.
fn records(sample: &str, complete: bool) -> Vec<&str> {
    let mut out = Vec::new();
    let mut start = 0;
    let mut quoted = false;
    for (i, c) in sample.char_indices() {
        match c {
            '"' => quoted = !quoted,
            '\n' if !quoted => {
                out.push(sample[start..i].trim_end_matches('\r'));
                start = i + 1;
                if out.len() >= SAMPLE_RECORDS {
                    return out;
                }
            }
            _ => {}
        }
    }
    if complete && start < sample.len() {
        out.push(&sample[start..]);
    }
    out
}

/// Delimiters of `record` outside quotes.
fn count_outside_quotes(record: &str, delimiter: u8) -> usize {
    let mut quoted = false;
    let mut count = 0;
    for b in record.bytes() {
        if b == b'"' {
            quoted = !quoted;
        } else if b == delimiter && !quoted {
            count += 1;
        }
    }
    count
}

/// The delimiter of a file starting with `sample` (the header and the first records; `complete`
/// when the sample is the whole file): among `,` `;` tab `|`, the one found in the header that
/// splits every sampled record into the same number of fields, the most fields first; when none
/// is consistent, the one splitting the header most. None when the header has none of them (a
/// single column).
pub fn sniff_delimiter(sample: &str, complete: bool) -> Option<u8> {
    let records: Vec<&str> = records(sample, complete)
        .into_iter()
        .filter(|r| !r.trim().is_empty())
        .collect();
    let header = records.first()?;
    let mut best: Option<(bool, usize, u8)> = None;
    for delimiter in DELIMITERS {
        let in_header = count_outside_quotes(header, delimiter);
        if in_header == 0 {
            continue;
        }
        let consistent = records
            .iter()
            .all(|r| count_outside_quotes(r, delimiter) == in_header);
        let candidate = (consistent, in_header, delimiter);
        if best.is_none_or(|(c, n, _)| (consistent, in_header) > (c, n)) {
            best = Some(candidate);
        }
    }
    best.map(|(_, _, d)| d)
}

/// Why a coordinate text is not a number.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum NumberProblem {
    /// Not a number at all.
    NotANumber,
    /// Written with a decimal comma (`12,7`) while decimal points were expected.
    DecimalComma,
}

/// Whether `text` is a number written with a decimal comma: digits, one comma, digits.
pub fn looks_like_decimal_comma(text: &str) -> bool {
    let body = text.trim().trim_start_matches(['-', '+']);
    match body.split_once(',') {
        Some((whole, fraction)) => {
            !whole.is_empty()
                && !fraction.is_empty()
                && whole.bytes().all(|b| b.is_ascii_digit())
                && fraction.bytes().all(|b| b.is_ascii_digit())
        }
        None => false,
    }
}

/// Parses a coordinate written with a decimal point, or with a decimal comma when
/// `decimal_comma` (then a point is refused, as it would be a thousands separator).
///
/// # Errors
/// [`NumberProblem::DecimalComma`] when the text looks like a decimal comma and `decimal_comma`
/// is off, [`NumberProblem::NotANumber`] otherwise.
pub fn parse_coordinate(text: &str, decimal_comma: bool) -> Result<f64, NumberProblem> {
    let text = text.trim();
    if decimal_comma {
        if text.contains('.') {
            return Err(NumberProblem::NotANumber);
        }
        return text
            .replacen(',', ".", 1)
            .parse()
            .map_err(|_| NumberProblem::NotANumber);
    }
    match text.parse::<f64>() {
        Ok(v) => Ok(v),
        Err(_) if looks_like_decimal_comma(text) => Err(NumberProblem::DecimalComma),
        Err(_) => Err(NumberProblem::NotANumber),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn delimiters_are_found_from_header_and_rows() {
        // Hand-made samples: each delimiter, and quoted fields holding other delimiters.
        assert_eq!(sniff_delimiter("a,b,c\n1,2,3\n", false), Some(b','));
        assert_eq!(sniff_delimiter("a;b;c\r\n1,5;2,5;3\r\n", false), Some(b';'));
        assert_eq!(sniff_delimiter("a\tb\tc\n1\t2\t3\n", false), Some(b'\t'));
        assert_eq!(sniff_delimiter("a|b|c\n1|2|3", true), Some(b'|'));
        assert_eq!(
            sniff_delimiter(
                "id,text,x\n1,\"a;b;c;d\",2\n2,\"line\nbreak; here\",3\n",
                false
            ),
            Some(b',')
        );
        assert_eq!(sniff_delimiter("only\n1\n", false), None);
        assert_eq!(sniff_delimiter("", true), None);
    }

    #[test]
    fn decimal_commas_are_recognised_never_misread() {
        assert!(looks_like_decimal_comma("12,7"));
        assert!(looks_like_decimal_comma("-0,25"));
        assert!(!looks_like_decimal_comma("12.7"));
        assert!(!looks_like_decimal_comma("1,2,3"));
        assert!(!looks_like_decimal_comma(","));
        assert_eq!(parse_coordinate("12.5", false), Ok(12.5));
        assert_eq!(
            parse_coordinate("12,5", false),
            Err(NumberProblem::DecimalComma)
        );
        assert_eq!(parse_coordinate("-12,5", true), Ok(-12.5));
        assert_eq!(
            parse_coordinate("1.234,5", true),
            Err(NumberProblem::NotANumber)
        );
        assert_eq!(
            parse_coordinate("abc", false),
            Err(NumberProblem::NotANumber)
        );
    }
}
