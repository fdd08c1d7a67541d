//! GeoPackage geometry blobs (OGC 12-128r18 §2.1.3: header + ISO WKB): decoding points,
//! envelopes of any simple-feature geometry, encoding points and multipolygons, and the
//! `ST_MinX`… SQL functions the R-tree triggers of a GeoPackage call (§F.3), so the toolbox can
//! write feature tables with plain SQLite.

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
    let Some((start, flags)) = header(blob) else {
        return PointBlob::Invalid;
    };
    let empty = flags & 0b1_0000 != 0;
    let wkb = &blob[start..];
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

/// Bounds of a geometry: [min x, max x, min y, max y] (the order of the header envelope).
pub type Envelope = [f64; 4];

/// The header length (8 + envelope) and flags of a blob, or None when it is not one.
fn header(blob: &[u8]) -> Option<(usize, u8)> {
    if blob.len() < 8 || &blob[..2] != b"GP" {
        return None;
    }
    let flags = blob[3];
    let envelope_len = match (flags >> 1) & 0b111 {
        0 => 0,
        1 => 32,
        2 | 3 => 48,
        4 => 64,
        _ => return None,
    };
    (blob.len() >= 8 + envelope_len).then_some((8 + envelope_len, flags))
}

/// The envelope of a GeoPackage geometry blob: the header's when it has one, else computed from
/// the WKB coordinates (NaN ordinates, as in empty points, are skipped). `Ok(None)` for an empty
/// geometry.
///
/// # Errors
/// A message when the bytes are not a blob of a simple-feature geometry (types 1–7).
pub fn envelope(blob: &[u8]) -> Result<Option<Envelope>, String> {
    let (start, flags) = header(blob).ok_or("not a GeoPackage geometry blob")?;
    if flags & 0b1_0000 != 0 {
        return Ok(None);
    }
    if start > 8 {
        let little = flags & 1 == 1;
        let mut e = [0.0; 4];
        for (k, v) in e.iter_mut().enumerate() {
            *v = read_f64(&blob[8 + 8 * k..], little).ok_or("short envelope")?;
        }
        return Ok(Some(e));
    }
    let mut e = [
        f64::INFINITY,
        f64::NEG_INFINITY,
        f64::INFINITY,
        f64::NEG_INFINITY,
    ];
    wkb_bounds(&blob[start..], &mut e, 0)?;
    Ok((e[0] <= e[1] && e[2] <= e[3]).then_some(e))
}

/// Widens `e` by the coordinates of one WKB geometry; returns the bytes it spans.
fn wkb_bounds(wkb: &[u8], e: &mut Envelope, depth: usize) -> Result<usize, String> {
    const SHORT: &str = "truncated WKB";
    if depth > 32 {
        return Err("WKB nested too deeply".into());
    }
    let little = *wkb.first().ok_or(SHORT)? == 1;
    let code = read_u32(&wkb[1..], little).ok_or(SHORT)?;
    // Extended WKB flags (Z 0x8000_0000, M 0x4000_0000, SRID 0x2000_0000) or ISO thousands.
    let mut dims = 2 + usize::from(code & 0x8000_0000 != 0) + usize::from(code & 0x4000_0000 != 0);
    let mut at = 5 + if code & 0x2000_0000 != 0 { 4 } else { 0 };
    let iso = code & 0x0fff_ffff;
    dims += match iso / 1000 {
        0 => 0,
        1 | 2 => 1,
        3 => 2,
        _ => return Err(format!("WKB type {code} is not a simple-feature geometry")),
    };
    let count = |at: usize| read_u32(wkb.get(at..).unwrap_or(&[]), little).ok_or(SHORT);
    let points = |at: usize, n: usize, e: &mut Envelope| -> Result<usize, String> {
        let end = at + n * dims * 8;
        if wkb.len() < end {
            return Err(SHORT.into());
        }
        for p in 0..n {
            let x = read_f64(&wkb[at + p * dims * 8..], little).ok_or(SHORT)?;
            let y = read_f64(&wkb[at + p * dims * 8 + 8..], little).ok_or(SHORT)?;
            if !x.is_nan() && !y.is_nan() {
                e[0] = e[0].min(x);
                e[1] = e[1].max(x);
                e[2] = e[2].min(y);
                e[3] = e[3].max(y);
            }
        }
        Ok(end)
    };
    match iso % 1000 {
        1 => points(at, 1, e),
        2 => {
            let n = count(at)? as usize;
            points(at + 4, n, e)
        }
        3 => {
            let rings = count(at)?;
            at += 4;
            for _ in 0..rings {
                let n = count(at)? as usize;
                at = points(at + 4, n, e)?;
            }
            Ok(at)
        }
        4..=7 => {
            let parts = count(at)?;
            at += 4;
            for _ in 0..parts {
                at += wkb_bounds(wkb.get(at..).ok_or(SHORT)?, e, depth + 1)?;
            }
            Ok(at)
        }
        other => Err(format!("WKB type {other} is not a simple-feature geometry")),
    }
}

/// What a polygon blob holds.
#[derive(Debug, Clone, PartialEq)]
pub enum PolygonBlob {
    /// A polygon (as a one-part multipolygon) or a multipolygon, x and y of each vertex as
    /// stored (Z and M dropped).
    Shape(geo_types::MultiPolygon<f64>),
    /// No vertex at all (header flag, or no rings).
    Empty,
    /// Another geometry type (the WKB type code, without Z/M modifiers).
    Other(u32),
    /// Not a GeoPackage geometry blob, or truncated WKB.
    Invalid,
}

/// Decodes a polygon or multipolygon from a GeoPackage geometry blob (header as in
/// [`decode_point`], then ISO or extended WKB, either byte order, with or without Z/M).
pub fn decode_polygons(blob: &[u8]) -> PolygonBlob {
    let Some((start, flags)) = header(blob) else {
        return PolygonBlob::Invalid;
    };
    if flags & 0b1_0000 != 0 {
        return PolygonBlob::Empty;
    }
    let wkb = &blob[start..];
    let Some((little, dims, base, at)) = wkb_type(wkb) else {
        return PolygonBlob::Invalid;
    };
    let parts = match base {
        3 => wkb_polygon(wkb, at, little, dims).map(|(p, _)| vec![p]),
        6 => (|| {
            let count = read_u32(wkb.get(at..)?, little)? as usize;
            let mut at = at + 4;
            // Each part is 9 bytes at least: do not reserve for a count the bytes cannot hold.
            let mut parts = Vec::with_capacity(count.min(wkb.len() / 9));
            for _ in 0..count {
                let part = wkb.get(at..)?;
                let (little, dims, base, start) = wkb_type(part)?;
                if base != 3 {
                    return None;
                }
                let (polygon, end) = wkb_polygon(part, start, little, dims)?;
                parts.push(polygon);
                at += end;
            }
            Some(parts)
        })(),
        other => return PolygonBlob::Other(other),
    };
    match parts {
        None => PolygonBlob::Invalid,
        Some(parts) if parts.iter().all(|p| p.exterior().0.is_empty()) => PolygonBlob::Empty,
        Some(parts) => PolygonBlob::Shape(geo_types::MultiPolygon::new(parts)),
    }
}

/// Byte order, coordinates per vertex, base type code and the offset after the type (and the
/// SRID of extended WKB) of the WKB geometry at the start of `wkb`.
fn wkb_type(wkb: &[u8]) -> Option<(bool, usize, u32, usize)> {
    let little = match *wkb.first()? {
        0 => false,
        1 => true,
        _ => return None,
    };
    let code = read_u32(wkb.get(1..)?, little)?;
    let mut dims = 2 + usize::from(code & 0x8000_0000 != 0) + usize::from(code & 0x4000_0000 != 0);
    let at = 5 + if code & 0x2000_0000 != 0 { 4 } else { 0 };
    let iso = code & 0x0fff_ffff;
    dims += match iso / 1000 {
        0 => 0,
        1 | 2 => 1,
        3 => 2,
        _ => return None,
    };
    Some((little, dims, iso % 1000, at))
}

/// The polygon whose ring count is at `at` of `wkb`, and the offset after it.
fn wkb_polygon(
    wkb: &[u8],
    mut at: usize,
    little: bool,
    dims: usize,
) -> Option<(geo_types::Polygon<f64>, usize)> {
    let rings = read_u32(wkb.get(at..)?, little)? as usize;
    at += 4;
    let mut all = Vec::with_capacity(rings.min(wkb.len() / 4));
    for _ in 0..rings {
        let n = read_u32(wkb.get(at..)?, little)? as usize;
        at += 4;
        let bytes = wkb.get(at..at.checked_add(n.checked_mul(dims * 8)?)?)?;
        let ring: Vec<geo_types::Coord<f64>> = bytes
            .chunks_exact(dims * 8)
            .map(|c| geo_types::Coord {
                x: read_f64(c, little).unwrap_or(f64::NAN),
                y: read_f64(&c[8..], little).unwrap_or(f64::NAN),
            })
            .collect();
        at += bytes.len();
        all.push(geo_types::LineString::new(ring));
    }
    let mut rings = all.into_iter();
    let exterior = rings
        .next()
        .unwrap_or_else(|| geo_types::LineString::new(Vec::new()));
    Some((geo_types::Polygon::new(exterior, rings.collect()), at))
}

fn push_header(out: &mut Vec<u8>, srs_id: i32, envelope: Option<Envelope>, empty: bool) {
    // Version 0; flags: little-endian header, envelope kind 1 (xy) or 0, empty bit.
    let flags = 1 | if envelope.is_some() { 0b10 } else { 0 } | if empty { 0b1_0000 } else { 0 };
    out.extend_from_slice(&[b'G', b'P', 0, flags]);
    out.extend_from_slice(&srs_id.to_le_bytes());
    for v in envelope.iter().flatten() {
        out.extend_from_slice(&v.to_le_bytes());
    }
}

/// Appends the blob of a point (no envelope, as the standard recommends for points; an empty
/// point, with NaN coordinates, when either coordinate is NaN); returns its envelope.
pub fn encode_point(out: &mut Vec<u8>, srs_id: i32, x: f64, y: f64) -> Option<Envelope> {
    let empty = x.is_nan() || y.is_nan();
    push_header(out, srs_id, None, empty);
    out.push(1);
    out.extend_from_slice(&1u32.to_le_bytes());
    let (x, y) = if empty { (f64::NAN, f64::NAN) } else { (x, y) };
    out.extend_from_slice(&x.to_le_bytes());
    out.extend_from_slice(&y.to_le_bytes());
    (!empty).then_some([x, x, y, y])
}

/// Appends the blob of a multipolygon, with its xy envelope in the header; returns the envelope.
pub fn encode_multipolygon(
    out: &mut Vec<u8>,
    srs_id: i32,
    shape: &geo_types::MultiPolygon<f64>,
) -> Option<Envelope> {
    let mut e = [
        f64::INFINITY,
        f64::NEG_INFINITY,
        f64::INFINITY,
        f64::NEG_INFINITY,
    ];
    for c in shape.0.iter().flat_map(|p| p.exterior().0.iter()) {
        e = [e[0].min(c.x), e[1].max(c.x), e[2].min(c.y), e[3].max(c.y)];
    }
    let empty = !(e[0] <= e[1] && e[2] <= e[3]);
    push_header(out, srs_id, (!empty).then_some(e), empty);
    out.push(1);
    out.extend_from_slice(&6u32.to_le_bytes());
    out.extend_from_slice(&(shape.0.len() as u32).to_le_bytes());
    for polygon in &shape.0 {
        out.push(1);
        out.extend_from_slice(&3u32.to_le_bytes());
        let rings = std::iter::once(polygon.exterior()).chain(polygon.interiors());
        out.extend_from_slice(&(1 + polygon.interiors().len() as u32).to_le_bytes());
        for ring in rings {
            out.extend_from_slice(&(ring.0.len() as u32).to_le_bytes());
            for c in &ring.0 {
                out.extend_from_slice(&c.x.to_le_bytes());
                out.extend_from_slice(&c.y.to_le_bytes());
            }
        }
    }
    (!empty).then_some(e)
}

/// Rewrites the srs_id in a blob's header (layers copied between files whose spatial reference
/// systems are numbered differently). Leaves bytes that are not a blob unchanged.
pub fn set_srs_id(blob: &mut [u8], srs_id: i32) {
    if let Some((_, flags)) = header(blob) {
        let bytes = if flags & 1 == 1 {
            srs_id.to_le_bytes()
        } else {
            srs_id.to_be_bytes()
        };
        blob[4..8].copy_from_slice(&bytes);
    }
}

/// Registers `ST_MinX`, `ST_MaxX`, `ST_MinY`, `ST_MaxY` and `ST_IsEmpty` on a connection, as
/// the GeoPackage R-tree extension requires of any writer (§F.3): the triggers GDAL creates on
/// feature tables call them. Also `stance_set_srs(blob, srs_id)` (see [`set_srs_id`]).
///
/// # Errors
/// SQLite failures.
pub fn register_functions(connection: &rusqlite::Connection) -> rusqlite::Result<()> {
    use rusqlite::functions::FunctionFlags;
    let flags = FunctionFlags::SQLITE_UTF8 | FunctionFlags::SQLITE_DETERMINISTIC;
    let bound = |k: usize| {
        move |ctx: &rusqlite::functions::Context<'_>| -> rusqlite::Result<Option<f64>> {
            let Some(blob) = ctx.get_raw(0).as_blob_or_null()? else {
                return Ok(None);
            };
            envelope(blob)
                .map(|e| e.map(|e| e[k]))
                .map_err(|m| rusqlite::Error::UserFunctionError(m.into()))
        }
    };
    connection.create_scalar_function("ST_MinX", 1, flags, bound(0))?;
    connection.create_scalar_function("ST_MaxX", 1, flags, bound(1))?;
    connection.create_scalar_function("ST_MinY", 1, flags, bound(2))?;
    connection.create_scalar_function("ST_MaxY", 1, flags, bound(3))?;
    // The toolbox's own: a blob with its header srs_id replaced (layers merged into a file that
    // numbers their spatial reference system differently).
    connection.create_scalar_function("stance_set_srs", 2, flags, |ctx| {
        let Some(blob) = ctx.get_raw(0).as_blob_or_null()? else {
            return Ok(None);
        };
        let mut blob = blob.to_vec();
        set_srs_id(&mut blob, ctx.get::<i32>(1)?);
        Ok(Some(blob))
    })?;
    connection.create_scalar_function("ST_IsEmpty", 1, flags, |ctx| {
        let Some(blob) = ctx.get_raw(0).as_blob_or_null()? else {
            return Ok(None);
        };
        envelope(blob)
            .map(|e| Some(e.is_none()))
            .map_err(|m| rusqlite::Error::UserFunctionError(m.into()))
    })?;
    Ok(())
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

    #[test]
    fn encoded_blobs_decode_and_bound() {
        let mut b = Vec::new();
        encode_point(&mut b, 4326, 2.5, -3.0);
        assert_eq!(decode_point(&b), PointBlob::Point(2.5, -3.0));
        assert_eq!(envelope(&b), Ok(Some([2.5, 2.5, -3.0, -3.0])));
        b.clear();
        encode_point(&mut b, 4326, f64::NAN, 1.0);
        assert_eq!(decode_point(&b), PointBlob::Empty);
        assert_eq!(envelope(&b), Ok(None));
        let square = |x0: f64| {
            geo_types::Polygon::new(
                vec![(x0, 0.0), (x0 + 1.0, 0.0), (x0 + 1.0, 2.0), (x0, 0.0)].into(),
                vec![],
            )
        };
        let shape = geo_types::MultiPolygon::new(vec![square(0.0), square(5.0)]);
        b.clear();
        encode_multipolygon(&mut b, 100000, &shape);
        assert_eq!(envelope(&b), Ok(Some([0.0, 6.0, 0.0, 2.0])));
        // The same geometry without the header envelope: bounds from the WKB walk.
        let mut bare = vec![b'G', b'P', 0, 1, 0, 0, 0, 0];
        bare.extend_from_slice(&b[8 + 32..]);
        assert_eq!(envelope(&bare), Ok(Some([0.0, 6.0, 0.0, 2.0])));
        set_srs_id(&mut b, 7);
        assert_eq!(i32::from_le_bytes([b[4], b[5], b[6], b[7]]), 7);
        assert!(envelope(b"not a blob").is_err());
        assert!(envelope(&bare[..bare.len() - 3]).is_err());
    }

    #[test]
    fn blobs_match_gdal() {
        // The WKB part of our blob must be byte-identical to GDAL's own WKB writer (an outside
        // implementation of ISO WKB), and the header must carry flags 0b11 (little endian, xy
        // envelope) as OGC 12-128r18 §2.1.3 defines them.
        let square = geo_types::Polygon::new(
            vec![(0.0, 0.0), (1.0, 0.0), (1.0, 2.0), (0.0, 0.0)].into(),
            vec![],
        );
        let mut b = Vec::new();
        encode_multipolygon(&mut b, 3035, &geo_types::MultiPolygon::new(vec![square]));
        let gdal = gdal::vector::Geometry::from_wkt("MULTIPOLYGON(((0 0,1 0,1 2,0 0)))")
            .and_then(|g| g.wkb())
            .expect("GDAL writes WKB");
        assert_eq!(&b[8 + 32..], &gdal[..]);
        assert_eq!(&b[..4], &[b'G', b'P', 0, 0b11]);
    }

    /// A GeoPackage blob (no envelope) around hand-made WKB.
    fn gp(wkb: &[u8]) -> Vec<u8> {
        let mut out = vec![b'G', b'P', 0, 1, 0, 0, 0, 0];
        out.extend_from_slice(wkb);
        out
    }

    /// WKB of a polygon (OGC 06-103r4 §8.2): byte order, type, rings, points per ring.
    fn polygon_wkb(little: bool, code: u32, rings: &[&[[f64; 4]]], dims: usize) -> Vec<u8> {
        let u = |v: u32| {
            if little {
                v.to_le_bytes()
            } else {
                v.to_be_bytes()
            }
        };
        let f = |v: f64| {
            if little {
                v.to_le_bytes()
            } else {
                v.to_be_bytes()
            }
        };
        let mut out = vec![u8::from(little)];
        out.extend_from_slice(&u(code));
        out.extend_from_slice(&u(rings.len() as u32));
        for ring in rings {
            out.extend_from_slice(&u(ring.len() as u32));
            for p in *ring {
                for v in &p[..dims] {
                    out.extend_from_slice(&f(*v));
                }
            }
        }
        out
    }

    #[test]
    fn polygons_decode_in_every_byte_order_and_dimension() {
        let ring: &[[f64; 4]] = &[
            [0.0, 0.0, 5.0, 9.0],
            [4.0, 0.0, 5.0, 9.0],
            [4.0, 3.0, 5.0, 9.0],
            [0.0, 0.0, 5.0, 9.0],
        ];
        let hole: &[[f64; 4]] = &[
            [1.0, 1.0, 0.0, 0.0],
            [2.0, 1.0, 0.0, 0.0],
            [2.0, 2.0, 0.0, 0.0],
            [1.0, 1.0, 0.0, 0.0],
        ];
        let expected = geo_types::MultiPolygon::new(vec![geo_types::Polygon::new(
            ring.iter().map(|p| (p[0], p[1])).collect::<Vec<_>>().into(),
            vec![hole.iter().map(|p| (p[0], p[1])).collect::<Vec<_>>().into()],
        )]);
        // ISO codes 3, 1003 (Z), 2003 (M), 3003 (ZM); extended 0x80000003 (Z).
        for (code, dims) in [(3, 2), (1003, 3), (2003, 3), (3003, 4), (0x8000_0003, 3)] {
            for little in [true, false] {
                let wkb = polygon_wkb(little, code, &[ring, hole], dims);
                assert_eq!(
                    decode_polygons(&gp(&wkb)),
                    PolygonBlob::Shape(expected.clone()),
                    "code {code}, little {little}"
                );
                // The same polygon twice in a multipolygon (type 6 + 1000s of the parts).
                let mut multi = vec![u8::from(little)];
                let outer = code + 3; // 6, 1006, 2006, 3006, 0x80000006
                multi.extend_from_slice(&if little {
                    outer.to_le_bytes()
                } else {
                    outer.to_be_bytes()
                });
                multi.extend_from_slice(&if little {
                    2u32.to_le_bytes()
                } else {
                    2u32.to_be_bytes()
                });
                multi.extend_from_slice(&wkb);
                multi.extend_from_slice(&polygon_wkb(!little, code, &[ring, hole], dims));
                let two = geo_types::MultiPolygon::new(vec![
                    expected.0[0].clone(),
                    expected.0[0].clone(),
                ]);
                assert_eq!(decode_polygons(&gp(&multi)), PolygonBlob::Shape(two));
                // Cut anywhere: unreadable, never a panic.
                for cut in 0..multi.len() {
                    assert_eq!(
                        decode_polygons(&gp(&multi[..cut])),
                        PolygonBlob::Invalid,
                        "cut {cut}"
                    );
                }
            }
        }
        assert_eq!(
            decode_polygons(&gp(&polygon_wkb(true, 3, &[], 2))),
            PolygonBlob::Empty
        );
        let mut point = vec![1u8];
        point.extend_from_slice(&1u32.to_le_bytes());
        point.extend_from_slice(&[0u8; 16]);
        assert_eq!(decode_polygons(&gp(&point)), PolygonBlob::Other(1));
        assert_eq!(decode_polygons(b"not a blob"), PolygonBlob::Invalid);
        let mut empty_flag = gp(&polygon_wkb(true, 3, &[ring], 2));
        empty_flag[3] |= 0b1_0000;
        assert_eq!(decode_polygons(&empty_flag), PolygonBlob::Empty);
    }
}
