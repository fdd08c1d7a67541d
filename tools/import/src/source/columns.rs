//! Finding the requested fields among a source's column names (CSV headers, JSON paths,
//! spreadsheet columns or GDAL fields).

use std::path::Path;

use stance_core::error::{Error, Result};

use super::Request;

/// Names tried for x when `--x-field` is not given.
pub const X_NAMES: [&str; 5] = ["lon", "lng", "long", "longitude", "x"];
/// Names tried for y when `--y-field` is not given.
pub const Y_NAMES: [&str; 3] = ["lat", "latitude", "y"];

/// Where the geometry comes from.
#[derive(Debug, Clone)]
pub enum Geometry<K> {
    /// x and y columns.
    Columns { x: K, y: K },
    /// A column of WKT points.
    Wkt(K),
    /// The source's own geometry (GDAL layers with a geometry column).
    Native,
}

/// The columns read, as indices (or keys) into a source's columns.
#[derive(Debug, Clone)]
pub struct Columns<K> {
    pub geometry: Geometry<K>,
    pub stance: K,
    pub time: Option<K>,
    pub author: Option<K>,
    pub text: Option<K>,
    pub quality: Option<K>,
    pub keep: Vec<K>,
}

impl Columns<usize> {
    /// The same columns as the names they index in `names`.
    pub fn named(&self, names: &[String]) -> Columns<String> {
        let n = |i: &usize| names[*i].clone();
        Columns {
            geometry: match &self.geometry {
                Geometry::Columns { x, y } => Geometry::Columns { x: n(x), y: n(y) },
                Geometry::Wkt(w) => Geometry::Wkt(n(w)),
                Geometry::Native => Geometry::Native,
            },
            stance: n(&self.stance),
            time: self.time.as_ref().map(n),
            author: self.author.as_ref().map(n),
            text: self.text.as_ref().map(n),
            quality: self.quality.as_ref().map(n),
            keep: self.keep.iter().map(n).collect(),
        }
    }
}

/// Finds `name` among `names`: exactly, then ignoring ASCII case, then (for dotted paths) as
/// the last part of a path.
fn find(names: &[String], name: &str) -> Option<usize> {
    names
        .iter()
        .position(|h| h == name)
        .or_else(|| names.iter().position(|h| h.eq_ignore_ascii_case(name)))
        .or_else(|| {
            names.iter().position(|h| {
                h.rsplit_once('.')
                    .is_some_and(|(_, last)| last.eq_ignore_ascii_case(name))
            })
        })
}

/// Resolves the request against `names`; `native` when the source has its own geometry (used
/// unless x/y or WKT columns are named). `missing` builds the error for a named field absent.
///
/// # Errors
/// A named field that is absent; no x/y column found by the usual names.
pub fn resolve(
    path: &Path,
    names: &[String],
    request: &Request,
    native: bool,
    missing: &dyn Fn(&str) -> Error,
) -> Result<Columns<usize>> {
    let require = |name: &str| find(names, name).ok_or_else(|| missing(name));
    let first_of = |option: &str, candidates: &[&str]| {
        candidates
            .iter()
            .find_map(|c| find(names, c))
            .ok_or_else(|| {
                Error::argument(
                    option,
                    format!(
                        "{}: none of the columns {} found (columns: {}); name one with {option}",
                        path.display(),
                        candidates.join(", "),
                        names.join(", ")
                    ),
                )
            })
    };
    let columns = &request.geometry;
    let geometry = match (&columns.wkt, &columns.x, &columns.y) {
        (Some(wkt), None, None) => Geometry::Wkt(require(wkt)?),
        (Some(_), _, _) => {
            return Err(Error::argument(
                "--wkt-field",
                "give either --wkt-field or --x-field/--y-field, not both",
            ))
        }
        (None, None, None) if native => Geometry::Native,
        (None, x, y) => Geometry::Columns {
            x: match x {
                Some(x) => require(x)?,
                None => first_of("--x-field", &X_NAMES)?,
            },
            y: match y {
                Some(y) => require(y)?,
                None => first_of("--y-field", &Y_NAMES)?,
            },
        },
    };
    let fields = &request.fields;
    let optional = |name: &Option<String>| name.as_deref().map(require).transpose();
    Ok(Columns {
        geometry,
        stance: require(&fields.stance)?,
        time: optional(&fields.time)?,
        author: optional(&fields.author)?,
        text: optional(&fields.text)?,
        quality: optional(&fields.quality)?,
        keep: fields
            .keep
            .iter()
            .map(|k| require(k))
            .collect::<Result<_>>()?,
    })
}
