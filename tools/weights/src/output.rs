//! The neighbour table and the summary of a stance-weights run.

use serde_json::{json, Value};
use stance_core::gpkg::weights_table::AreaIds;
use stance_core::weights::Summary;

/// An area id as JSON: a number for feature ids and integer ids, else text.
pub fn id_json(ids: &AreaIds, i: usize) -> Value {
    match ids {
        AreaIds::Integer(v) => json!(v[i]),
        AreaIds::Text(v) => json!(v[i]),
    }
}

/// What the run found, for the summary.
pub struct Found<'a> {
    /// The area ids.
    pub ids: &'a AreaIds,
    /// Neighbour statistics after islands were handled.
    pub summary: &'a Summary,
    /// Islands before `--islands nearest` linked them.
    pub islands_before: &'a [usize],
    /// Links added by `--islands nearest`: (island, nearest area).
    pub linked: &'a [(usize, usize)],
    /// The working CRS, as text.
    pub crs: String,
}

/// The summary of a run that wrote `rows` links to `table`.
pub fn summary(table: &str, rows: u64, params: &crate::WeightsParams, found: &Found) -> Value {
    let id = |i: usize| id_json(found.ids, i);
    let s = found.summary;
    json!({
        "table": table,
        "rows": rows,
        "method": params.neighbours.method,
        "id_field": params.id_field,
        "areas": s.areas,
        "links": s.links,
        "min_neighbours": s.min_neighbours,
        "mean_neighbours": s.mean_neighbours,
        "max_neighbours": s.max_neighbours,
        "islands": s.islands.iter().map(|&i| id(i)).collect::<Vec<_>>(),
        "islands_before_linking": found.islands_before.iter().map(|&i| id(i)).collect::<Vec<_>>(),
        "islands_linked_to": found.linked.iter().map(|&(i, j)| json!([id(i), id(j)])).collect::<Vec<_>>(),
        "connected_components": s.components,
        "symmetric": s.symmetric,
        "crs": found.crs,
    })
}
