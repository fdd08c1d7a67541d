//! Decoding GeoPackage geometry blobs (OGC 12-128r18 §2.1.3: header + ISO WKB) for points.

/// What a point blob holds.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum PointBlob {
    /// A point with finite or non-finite coordinates (checked by the caller).
    Point(f64, f64),
    /// An empty point (header flag, or NaN coordinates as WKB writes them).
    Empty,
    /// Any other geometry type (the WKB type code, without Z/M modifiers).
    Other(u32),
    /// Not a GeoPackage geometry blob.
    Invalid,
}

fn read_u32(bytes: &[u8], little: bool) -> Option<u32> {
    let array: [u8; 4] = bytes.get(..4)?.try_into().ok()?;
    Some(if little {
        u32::from_le_bytes(array)
    } else {
        u32::from_be_bytes(array)
    })
}

fn read_f64(bytes: &[u8], little: bool) -> Option<f64> {
    let array: [u8; 8] = bytes.get(..8)?.try_into().ok()?;
    Some(if little {
        f64::from_le_bytes(array)
    } else {
        f64::from_be_bytes(array)
    })
}

/// Decodes a point from a GeoPackage geometry blob.
///
/// Header: "GP", version, flags (bit 0 byte order, bits 1–3 envelope kind, bit 4 empty),
/// srs_id, envelope of 0/32/48/48/64 bytes; then WKB (ISO or extended Z/M codes).
pub fn decode_point(blob: &[u8]) -> PointBlob {
    if blob.len() < 8 || &blob[..2] != b"GP" {
        return PointBlob::Invalid;
    }
    let flags = blob[3];
    let envelope_len = match (flags >> 1) & 0b111 {
        0 => 0,
        1 => 32,
        2 | 3 => 48,
        4 => 64,
        _ => return PointBlob::Invalid,
    };
    let empty = flags & 0b1_0000 != 0;
    let Some(wkb) = blob.get(8 + envelope_len..) else {
        return PointBlob::Invalid;
    };
    let Some(&order) = wkb.first() else {
        return if empty {
            PointBlob::Empty
        } else {
            PointBlob::Invalid
        };
    };
    let little = order == 1;
    let Some(code) = read_u32(&wkb[1..], little) else {
        return PointBlob::Invalid;
    };
    // ISO codes add 1000/2000/3000 for Z/M/ZM; extended WKB sets high bits.
    let base = (code & 0x0fff_ffff) % 1000;
    if base != 1 {
        return PointBlob::Other(base);
    }
    match (read_f64(&wkb[5..], little), read_f64(&wkb[13..], little)) {
        (Some(x), Some(y)) if empty || (x.is_nan() && y.is_nan()) => {
            let _ = (x, y);
            PointBlob::Empty
        }
        (Some(x), Some(y)) => PointBlob::Point(x, y),
        _ if empty => PointBlob::Empty,
        _ => PointBlob::Invalid,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn blob(flags: u8, envelope: &[f64], wkb: &[u8]) -> Vec<u8> {
        let mut b = vec![b'G', b'P', 0, flags, 0, 0, 0, 0];
        for v in envelope {
            b.extend_from_slice(&v.to_le_bytes());
        }
        b.extend_from_slice(wkb);
        b
    }

    fn wkb_point(code: u32, x: f64, y: f64) -> Vec<u8> {
        let mut w = vec![1];
        w.extend_from_slice(&code.to_le_bytes());
        w.extend_from_slice(&x.to_le_bytes());
        w.extend_from_slice(&y.to_le_bytes());
        w
    }

    #[test]
    fn decodes_points_with_and_without_envelope() {
        assert_eq!(
            decode_point(&blob(1, &[], &wkb_point(1, 2.5, -3.0))),
            PointBlob::Point(2.5, -3.0)
        );
        assert_eq!(
            decode_point(&blob(3, &[2.5, 2.5, -3.0, -3.0], &wkb_point(1, 2.5, -3.0))),
            PointBlob::Point(2.5, -3.0)
        );
        // Point Z (ISO 1001): x and y are still the first two ordinates.
        let mut z = wkb_point(1001, 7.0, 8.0);
        z.extend_from_slice(&9.0f64.to_le_bytes());
        assert_eq!(decode_point(&blob(1, &[], &z)), PointBlob::Point(7.0, 8.0));
    }

    #[test]
    fn big_endian_wkb() {
        let mut w = vec![0];
        w.extend_from_slice(&1u32.to_be_bytes());
        w.extend_from_slice(&1.5f64.to_be_bytes());
        w.extend_from_slice(&(-2.0f64).to_be_bytes());
        assert_eq!(decode_point(&blob(1, &[], &w)), PointBlob::Point(1.5, -2.0));
    }

    #[test]
    fn empty_other_and_invalid() {
        assert_eq!(
            decode_point(&blob(0b1_0001, &[], &wkb_point(1, f64::NAN, f64::NAN))),
            PointBlob::Empty
        );
        assert_eq!(
            decode_point(&blob(1, &[], &wkb_point(1, f64::NAN, f64::NAN))),
            PointBlob::Empty
        );
        assert_eq!(
            decode_point(&blob(1, &[], &wkb_point(3, 0.0, 0.0))),
            PointBlob::Other(3)
        );
        assert_eq!(decode_point(b"XX\0\x01\0\0\0\0"), PointBlob::Invalid);
        assert_eq!(decode_point(&blob(1, &[], &[1, 1, 0])), PointBlob::Invalid);
    }
}
