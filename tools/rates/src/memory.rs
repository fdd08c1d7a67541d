//! The memory a rates run needs (`--max-memory-mb`, `memory_estimate_mb` in the summary):
//! the point records as read and their assignment to areas, which grow with the records, and
//! the areas' polygons. Checked against the measured peak in BENCHMARKS.md and
//! `tests/tests/memory.rs` (within 1.0–1.5 ×).

use geo::CoordsIter;

use crate::input::{Areas, Points};

/// Resident bytes of a run apart from the records and the areas: the executable with GDAL,
/// PROJ and SQLite, their caches and the output's copy of the areas. Measured: 55.8 MiB for
/// 9,218 records in the 209 districts of the invented scenario (release build, 2026-12-03);
/// 54 MiB kept for the process without them.
pub const BASE_BYTES: f64 = 54.0 * 1024.0 * 1024.0;

/// Bytes per point record held while points are assigned to areas (the peak): the layer as
/// read — fid (i64, 8), x and y (f64, 16), the stance's text code (u32, 4) — the class (1),
/// and the assignment (area index `Option<u32>` and a boundary flag, 12; collected in place
/// into the areas of the points), and what the page reader leaves behind of the parts it reads
/// in parallel and joins into one column each (8; measured after the reader changed,
/// 2026-12-03: peaks of 88, 272 and 433 MiB at 0.92, 4.6 and 9.1 million records against 90,
/// 234 and 412 before). Re-measure after a change to the reader.
pub const RECORD_BYTES: f64 = 8.0 + 16.0 + 4.0 + 1.0 + 12.0 + 8.0;

/// Bytes per vertex of the areas: the polygons as read (two f64, 16) and up to three copies
/// of them (the projection into the working CRS, the contiguity's or the surface's copy, the
/// validity check).
pub const VERTEX_BYTES: f64 = 4.0 * 16.0;

/// Multiplier over the bytes counted (the allocator's arenas, run-to-run variation).
pub const HEADROOM: f64 = 1.15;

/// The estimated peak in bytes of a run on `areas` and `points` (None: counts on the areas).
pub fn estimate(areas: &Areas, points: Option<&Points>) -> f64 {
    let records = points.map_or(0, |p| p.layer.fids.len()) as f64;
    let vertices: usize = areas.layer.polygons.iter().map(|p| p.coords_count()).sum();
    HEADROOM * (BASE_BYTES + records * RECORD_BYTES + vertices as f64 * VERTEX_BYTES)
}
