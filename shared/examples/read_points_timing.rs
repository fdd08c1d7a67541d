//! Times `read_points` on a layer: `cargo run --release -p stance-core --example read_points_timing -- FILE LAYER FIELD`.
//! Used by tests/bench/import_vs_ogr2ogr.sh; prints one JSON line.

use std::time::Instant;

use stance_core::gpkg::read::{read_points, FieldWant};

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let args: Vec<String> = std::env::args().collect();
    let [_, path, layer, field] = args.as_slice() else {
        return Err("usage: read_points_timing FILE LAYER FIELD".into());
    };
    let start = Instant::now();
    let points = read_points(
        path.as_ref(),
        Some(layer),
        &[(field.as_str(), FieldWant::Text)],
        None,
    )?;
    let seconds = start.elapsed().as_secs_f64();
    println!(
        "{{\"points\": {}, \"seconds\": {seconds:.3}}}",
        points.x.len()
    );
    Ok(())
}
