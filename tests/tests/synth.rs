//! stance-synth end to end: the same seed gives identical layers; the planted zones and burst in
//! the ground-truth layer are where the records show them.

use stance_tests::{out_dir, rows, run_in, synth};

/// Every layer's rows, geometry blobs as SHA-256 (the provenance records differ by timestamp).
fn contents(path: &std::path::Path) -> Vec<Vec<Vec<String>>> {
    [
        "veldmark_records",
        "veldmark_districts",
        "veldmark_towns",
        "veldmark_truth",
    ]
    .iter()
    .map(|layer| rows(path, &format!("SELECT * FROM {layer} ORDER BY fid")))
    .collect()
}

#[test]
fn the_same_seed_gives_identical_layers() {
    let dir = out_dir("synth_seed");
    for (file, seed) in [("a.gpkg", "5"), ("b.gpkg", "5"), ("c.gpkg", "6")] {
        run_in(
            &dir,
            "stance-synth",
            &[
                "--output",
                file,
                "--points",
                "3000",
                "--seed",
                seed,
                "-q",
                "--csv",
                &file.replace("gpkg", "csv"),
            ],
        )
        .ok();
    }
    let a = contents(&dir.join("a.gpkg"));
    assert_eq!(a[0].len(), 3000);
    assert_eq!(a, contents(&dir.join("b.gpkg")));
    assert_ne!(
        a[0],
        contents(&dir.join("c.gpkg"))[0],
        "another seed gives other records"
    );
    let csv_a = std::fs::read(dir.join("a.csv")).expect("csv");
    assert_eq!(csv_a, std::fs::read(dir.join("b.csv")).expect("csv"));
    assert_eq!(String::from_utf8_lossy(&csv_a).lines().count(), 3001);
}

/// Great-circle distance on the sphere of radius 6,371,008.8 m (IUGG mean radius), haversine form.
fn metres(lon1: f64, lat1: f64, lon2: f64, lat2: f64) -> f64 {
    let (p1, p2) = (lat1.to_radians(), lat2.to_radians());
    let a = ((p2 - p1) / 2.0).sin().powi(2)
        + p1.cos() * p2.cos() * ((lon2 - lon1).to_radians() / 2.0).sin().powi(2);
    2.0 * 6_371_008.8 * a.sqrt().asin()
}

#[test]
fn planted_zones_and_burst_are_where_the_truth_layer_says() {
    let dir = out_dir("synth_truth");
    synth(&dir, "s.gpkg", 40000, 3);
    let path = dir.join("s.gpkg");
    // Exact coordinates come from the geometry blobs (the R-tree keeps 32-bit floats only).
    let records: Vec<(f64, f64, String, String)> = rows(
        &path,
        "SELECT fid, stance, time_utc FROM veldmark_records ORDER BY fid",
    )
    .into_iter()
    .zip(geometries(&path))
    .map(|(r, (x, y))| (x, y, r[1].clone(), r[2].clone()))
    .collect();
    let truth = rows(
        &path,
        "SELECT kind, favours, centre_lon, centre_lat, radius_m, month FROM veldmark_truth",
    );
    let zones: Vec<&Vec<String>> = truth.iter().filter(|t| t[0] == "stance_zone").collect();
    assert!(zones.iter().any(|z| z[1] == "support") && zones.iter().any(|z| z[1] == "oppose"));
    for zone in zones {
        let (lon, lat, radius): (f64, f64, f64) = (
            zone[2].parse().expect("lon"),
            zone[3].parse().expect("lat"),
            zone[4].parse().expect("radius"),
        );
        let inside: Vec<_> = records
            .iter()
            .filter(|r| metres(r.0, r.1, lon, lat) <= radius)
            .collect();
        let share_inside =
            inside.iter().filter(|r| r.2 == zone[1]).count() as f64 / inside.len() as f64;
        let share_all =
            records.iter().filter(|r| r.2 == zone[1]).count() as f64 / records.len() as f64;
        // Odds multiplied by 3 inside; with hundreds of records inside, a 0.08 gap is far beyond
        // sampling noise (binomial sd < 0.03 for n ≥ 300).
        assert!(
            inside.len() >= 300,
            "zone {zone:?}: only {} records inside",
            inside.len()
        );
        assert!(
            share_inside > share_all + 0.08,
            "zone {zone:?}: {share_inside:.3} inside vs {share_all:.3} overall"
        );
    }
    let burst = truth.iter().find(|t| t[0] == "time_burst").expect("burst");
    let (lon, lat, radius): (f64, f64, f64) = (
        burst[2].parse().expect("lon"),
        burst[3].parse().expect("lat"),
        burst[4].parse().expect("radius"),
    );
    let month = format!("2026-{:02}", burst[5].parse::<u32>().expect("month"));
    let near: Vec<_> = records
        .iter()
        .filter(|r| metres(r.0, r.1, lon, lat) <= radius)
        .collect();
    let in_month =
        near.iter().filter(|r| r.3.starts_with(&month)).count() as f64 / near.len() as f64;
    // Without a burst one month holds about 1/9 of the records.
    assert!(
        in_month > 2.0 / 9.0,
        "burst month holds {in_month:.3} of nearby records"
    );
}

fn geometries(path: &std::path::Path) -> Vec<(f64, f64)> {
    let connection =
        rusqlite::Connection::open_with_flags(path, rusqlite::OpenFlags::SQLITE_OPEN_READ_ONLY)
            .expect("open");
    let mut statement = connection
        .prepare("SELECT geom FROM veldmark_records ORDER BY fid")
        .expect("prepare");
    let blobs = statement
        .query_map([], |r| r.get::<_, Vec<u8>>(0))
        .expect("query");
    blobs
        .map(
            |b| match stance_core::gpkg::blob::decode_point(&b.expect("blob")) {
                stance_core::gpkg::blob::PointBlob::Point(x, y) => (x, y),
                other => panic!("not a point: {other:?}"),
            },
        )
        .collect()
}
