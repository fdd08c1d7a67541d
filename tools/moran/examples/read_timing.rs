//! Times `read_points` (x, y and one text field, projected to the working CRS) and
//! `read_polygons`, three rounds each: the reading benchmark of issue 17.
//!
//! `cargo run --release -p stance-moran --example read_timing POINTS.gpkg LAYER FIELD [AREAS.gpkg]`

use std::path::Path;

use stance_core::gpkg::read::{read_points, read_polygons, FieldWant, PolygonCrs};

/// The process's peak resident memory so far (VmHWM).
fn peak() -> String {
    std::fs::read_to_string("/proc/self/status")
        .ok()
        .and_then(|s| {
            s.lines()
                .find(|l| l.starts_with("VmHWM"))
                .map(|l| l[6..].trim().to_owned())
        })
        .unwrap_or_default()
}

fn main() {
    let args: Vec<String> = std::env::args().skip(1).collect();
    let threads: usize = std::env::var("THREADS")
        .ok()
        .and_then(|t| t.parse().ok())
        .unwrap_or(2);
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(threads)
        .build()
        .expect("pool");
    pool.install(|| {
        for round in 0..3 {
            let start = std::time::Instant::now();
            let layer = read_points(
                Path::new(&args[0]),
                Some(&args[1]),
                &[(&args[2], FieldWant::Text)],
                None,
            )
            .expect("read points");
            println!(
                "round {round}: read_points {} points: {:.3} s (peak so far {})",
                layer.x.len(),
                start.elapsed().as_secs_f64(),
                peak()
            );
        }
        if let Some(areas) = args.get(3) {
            for round in 0..3 {
                let start = std::time::Instant::now();
                let layer = read_polygons(
                    Path::new(areas),
                    None,
                    &[("value", FieldWant::Real)],
                    PolygonCrs::Working(None),
                )
                .expect("read polygons");
                println!(
                    "round {round}: read_polygons {} areas: {:.3} s",
                    layer.polygons.len(),
                    start.elapsed().as_secs_f64()
                );
            }
        }
    });
}
