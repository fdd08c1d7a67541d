//! The kinds of layers, geometries and fields a tool stages.

/// Kind of geometry of a vector layer.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum GeometryKind {
    /// No geometry: an attribute table.
    None,
    /// Points.
    Point,
    /// Polygons (written as multipolygons so mixed inputs fit).
    MultiPolygon,
}

/// Type of an attribute field.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum FieldKind {
    /// 64-bit integer.
    Integer,
    /// Double.
    Real,
    /// Text.
    Text,
    /// UTC date-time, given as seconds since 1970 and written with the `Z` suffix.
    DateTime,
}

/// A field of an output layer.
#[derive(Debug, Clone)]
pub struct FieldDef {
    /// Field name (snake_case, unit suffix).
    pub name: String,
    /// Field type.
    pub kind: FieldKind,
}

impl FieldDef {
    /// A field definition.
    pub fn new(name: &str, kind: FieldKind) -> Self {
        FieldDef {
            name: name.to_owned(),
            kind,
        }
    }
}

/// One attribute value to write.
#[derive(Debug, Clone, Copy)]
pub enum FieldData<'a> {
    /// NULL.
    Null,
    /// Integer.
    Integer(i64),
    /// Real (NaN is written as NULL).
    Real(f64),
    /// Text.
    Text(&'a str),
    /// UTC seconds since 1970.
    DateTime(i64),
}

/// A geometry to write, in the layer's CRS.
#[derive(Debug, Clone, Copy)]
pub enum Shape<'a> {
    /// No geometry.
    None,
    /// A point.
    Point(f64, f64),
    /// A polygon.
    Polygon(&'a geo_types::Polygon<f64>),
    /// A multipolygon.
    MultiPolygon(&'a geo_types::MultiPolygon<f64>),
}

/// Values of one extra field for [`Staging::copy_with_fields`], one per feature.
#[derive(Debug, Clone)]
pub enum ExtraColumn {
    /// Integers (None = NULL).
    Integer(Vec<Option<i64>>),
    /// Reals (None or non-finite = NULL).
    Real(Vec<Option<f64>>),
    /// Text (None = NULL).
    Text(Vec<Option<String>>),
}

impl ExtraColumn {
    /// Number of values.
    pub fn len(&self) -> usize {
        match self {
            ExtraColumn::Integer(v) => v.len(),
            ExtraColumn::Real(v) => v.len(),
            ExtraColumn::Text(v) => v.len(),
        }
    }

    /// True when it holds no values.
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }
}

/// A layer staged in this run.
#[derive(Debug, Clone)]
pub struct StagedLayer {
    /// Table name.
    pub name: String,
    /// `features`, `attributes` or `2d-gridded-coverage`.
    pub data_type: &'static str,
    /// Features, rows or cells.
    pub count: u64,
}
