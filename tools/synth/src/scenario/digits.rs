//! Decimal digits appended to a string without `format!`'s allocation slack (ten million records
//! carry two such strings each).

/// Appends `value` in decimal, left-padded with zeros to at least `width` digits.
pub fn push_zero_padded(out: &mut String, value: u64, width: usize) {
    let mut digits = [0_u8; 20];
    let mut start = digits.len();
    let mut rest = value;
    loop {
        start -= 1;
        digits[start] = b'0' + (rest % 10) as u8;
        rest /= 10;
        if rest == 0 {
            break;
        }
    }
    for _ in (digits.len() - start)..width {
        out.push('0');
    }
    out.extend(digits[start..].iter().map(|&d| char::from(d)));
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn zero_padding_matches_format() {
        for (value, width) in [
            (0, 1),
            (7, 1),
            (42, 5),
            (99_999, 5),
            (123_456, 5),
            (u64::MAX, 5),
        ] {
            let mut got = String::new();
            push_zero_padded(&mut got, value, width);
            assert_eq!(got, format!("{value:0width$}"));
        }
    }
}
