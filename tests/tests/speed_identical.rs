//! Issue 17 (speed): the outputs of the tools whose reading, writing and permutation kernels
//! were made faster are bit-identical to those of the code before the change, on
//! benchmark-like data: a jittered grid of 3,000 areas (the shape of tests/bench's 70,000-area
//! benchmark) and 60,000 stance-synth points. Each digest (SHA-256 over every output value, rows
//! in fid order, geometry blobs included; for rasters, the decoded cell values) was printed by
//! this test (`PRINT_PINS=1`) before reading, writing or density changed: from main at 84680ff
//! except the global permutation kernel of stance-moran, whose replicate values were already
//! shown equal to 84680ff's by tools/moran/tests/pinned_permutations.rs. When reading moved to
//! the table pages (2026-12-03), the areas' `value` field was cut to 15 significant digits (the
//! earlier reader took fields through GDAL's 15-digit text form, the page reader takes the stored
//! double) and the two `m` digests were printed again by the release binaries of main at cfc382d
//! (before the page reader); every other digest is unchanged.

use std::fmt::Write as _;
use std::path::Path;

use sha2::{Digest, Sha256};
use stance_tests::{out_dir, rows, run_in, synth};

/// SplitMix64 (Steele, Lea & Flood 2014): deterministic values for the fixture.
fn splitmix(state: &mut u64) -> f64 {
    *state = state.wrapping_add(0x9E37_79B9_7F4A_7C15);
    let mut z = *state;
    z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
    ((z ^ (z >> 31)) >> 11) as f64 / (1u64 << 53) as f64
}

/// A `rows × cols` grid of 1 km cells whose shared corners are jittered by up to 300 m (as
/// tests/bench/areal_peer.py makes the benchmark areas), with a `value` field, written by
/// ogr2ogr (Debian's gdal-bin) from a CSV of WKT in EPSG:3035.
fn jittered_grid(dir: &Path, rows: usize, cols: usize) -> String {
    let mut state = 7u64;
    let corner: Vec<(f64, f64)> = (0..(rows + 1) * (cols + 1))
        .map(|k| {
            let (r, c) = (k / (cols + 1), k % (cols + 1));
            let jx = splitmix(&mut state) * 0.6 - 0.3;
            let jy = splitmix(&mut state) * 0.6 - 0.3;
            (
                (c as f64 + jx) * 1000.0 + 4e6,
                (r as f64 + jy) * 1000.0 + 3e6,
            )
        })
        .collect();
    let mut csv = String::from("wkt,value\n");
    for r in 0..rows {
        for c in 0..cols {
            let at = |rr: usize, cc: usize| corner[rr * (cols + 1) + cc];
            let ring = [
                at(r, c),
                at(r, c + 1),
                at(r + 1, c + 1),
                at(r + 1, c),
                at(r, c),
            ];
            let text: Vec<String> = ring.iter().map(|(x, y)| format!("{x:?} {y:?}")).collect();
            let value = (r as f64 / 7.0).sin() + (c as f64 / 9.0).cos() + splitmix(&mut state);
            // 15 significant digits: the reader before the change took area fields through
            // GDAL's text form of a real (15 significant digits), the reader after reads the
            // stored double; on values of 15 digits both read the same number.
            let _ = writeln!(csv, "\"POLYGON(({}))\",{value:.14e}", text.join(","));
        }
    }
    std::fs::write(dir.join("grid.csv"), csv).expect("write CSV");
    let status = std::process::Command::new("ogr2ogr")
        .current_dir(dir)
        .args([
            "-f",
            "GPKG",
            "-nln",
            "areas",
            "-a_srs",
            "EPSG:3035",
            "-nlt",
            "MULTIPOLYGON",
        ])
        .args([
            "-oo",
            "GEOM_POSSIBLE_NAMES=wkt",
            "-oo",
            "KEEP_GEOM_COLUMNS=NO",
        ])
        .args(["-oo", "X_POSSIBLE_NAMES=none", "-oo", "AUTODETECT_TYPE=YES"])
        .args(["areas.gpkg", "grid.csv"])
        .status()
        .expect("run ogr2ogr");
    assert!(status.success(), "ogr2ogr failed");
    "areas.gpkg".to_owned()
}

/// SHA-256 of every row of `sql` (values as text, reals in full precision, blobs hashed).
fn digest(path: &Path, sql: &str) -> String {
    let mut hash = Sha256::new();
    for row in rows(path, sql) {
        hash.update(row.join("\u{1f}").as_bytes());
        hash.update(b"\n");
    }
    format!("{:x}", hash.finalize())
}

/// SHA-256 of every cell value (as stored bits) of every band of raster `table`.
fn raster_digest(path: &Path, table: &str) -> String {
    let name = format!("GPKG:{}:{table}", path.display());
    let dataset = gdal::Dataset::open(&name).expect("open raster");
    let mut hash = Sha256::new();
    for b in 1..=dataset.raster_count() {
        let band = dataset.rasterband(b).expect("band");
        let (cols, rows) = band.size();
        let buffer = band
            .read_as::<f64>((0, 0), (cols, rows), (cols, rows), None)
            .expect("read band");
        for v in buffer.data() {
            hash.update(v.to_bits().to_le_bytes());
        }
    }
    format!("{:x}", hash.finalize())
}

/// The non-provenance layers a run wrote (names, as `gpkg_contents` lists them).
fn layers(path: &Path) -> Vec<(String, String)> {
    rows(
        path,
        "SELECT table_name, data_type FROM gpkg_contents ORDER BY table_name",
    )
    .into_iter()
    .map(|r| (r[0].clone(), r[1].clone()))
    .collect()
}

fn all_digests(dir: &Path, file: &str) -> Vec<(String, String)> {
    let path = dir.join(file);
    layers(&path)
        .into_iter()
        .map(|(name, kind)| {
            let d = if kind == "2d-gridded-coverage" || kind == "tiles" {
                raster_digest(&path, &name)
            } else {
                let quoted = name.replace('"', "\"\"");
                digest(&path, &format!("SELECT * FROM \"{quoted}\" ORDER BY rowid"))
            };
            (format!("{file}:{name}"), d)
        })
        .collect()
}

#[test]
fn outputs_match_the_values_pinned_before_the_speed_work() {
    let dir = out_dir("speed_identical");
    let areas = jittered_grid(&dir, 50, 60);
    let weights = [
        "--input",
        &areas,
        "--output",
        "separate.gpkg",
        "--name",
        "queen",
        "-q",
    ];
    run_in(&dir, "stance-weights", &weights).ok();
    let moran = |output: &str, extra: &[&str]| {
        let mut args = vec!["--input", &areas, "--output", output, "--field", "value"];
        args.extend(["--permutations", "999", "--seed", "11", "--name", "m", "-q"]);
        args.extend(extra);
        run_in(&dir, "stance-moran", &args).ok()
    };
    let separate = moran(
        "separate.gpkg",
        &["--weights", "queen", "--weights-file", "separate.gpkg"],
    );
    let inline = moran("inline.gpkg", &[]);
    synth(&dir, "points.gpkg", 60_000, 7);
    let density = [
        "--input",
        "points.gpkg",
        "--layer",
        "veldmark_records",
        "--output",
        "density.gpkg",
        "--bandwidth-m",
        "5000",
        "--cell-m",
        "500",
        "--permutations",
        "0",
        "-q",
    ];
    run_in(&dir, "stance-density", &density).ok();
    let mut got = Vec::new();
    for file in ["separate.gpkg", "inline.gpkg", "density.gpkg"] {
        got.extend(all_digests(&dir, file));
    }
    for (name, summary) in [("separate", &separate), ("inline", &inline)] {
        // Keys sorted here: serde_json keeps insertion order when another crate of the build
        // turns on its `preserve_order` feature (a workspace-wide build does), sorted otherwise.
        let global: std::collections::BTreeMap<String, String> = summary["results"]["global"]
            .as_object()
            .expect("global summary")
            .iter()
            .map(|(k, v)| (k.clone(), v.to_string()))
            .collect();
        let global = format!("{global:?}");
        got.push((
            format!("{name} summary global"),
            format!("{:x}", Sha256::digest(global)),
        ));
    }
    if std::env::var_os("PRINT_PINS").is_some() {
        for (name, d) in &got {
            println!("    (\"{name}\", \"{d}\"),");
        }
    }
    let got: Vec<(&str, &str)> = got.iter().map(|(a, b)| (a.as_str(), b.as_str())).collect();
    assert_eq!(got, PINS);
}

/// Digests printed before the change (see the module comment).
const PINS: &[(&str, &str)] = &[
    (
        "separate.gpkg:m",
        "70e1ec2180fccc0e56f9b01e3424acc5ab57b0b97a2741778ec17a896a52c664",
    ),
    (
        "separate.gpkg:queen",
        "c44dabf2965c2f838414c4bcf4b06c0955414f8ce6763e804e297bcacc6e1c46",
    ),
    (
        "inline.gpkg:m",
        "70e1ec2180fccc0e56f9b01e3424acc5ab57b0b97a2741778ec17a896a52c664",
    ),
    (
        "density.gpkg:density_diff",
        "975ed1e7a5fb18ca2e662ce377a5ee9b37f2062aac58371e14c2f502ec6270ea",
    ),
    (
        "density.gpkg:density_log_ratio",
        "6f8465875be58750550415f48ba9623a75e1e91a52ccaf80abc9e0f7f8ff9788",
    ),
    (
        "density.gpkg:density_neutral",
        "5599f839c0dbe7c0bb32830cb6d4be6b9b30b0fade2ee37d1e5228639ce93558",
    ),
    (
        "density.gpkg:density_oppose",
        "c93316caab6260b960487efb83e3d6008dcf378f1d59ba8102eb75152fb20625",
    ),
    (
        "density.gpkg:density_share",
        "07ae7820f27dab68f3aace0016c64ae9eceedadc88c63fd6b59fe95fc5296470",
    ),
    (
        "density.gpkg:density_sqrtdiff",
        "92ba1d7cd7707840e0877b50dc0bf47db5612e98e4fa6d940410a08aede90073",
    ),
    (
        "density.gpkg:density_support",
        "0ea86338b300cd13cebad80004872acab4f582c5d7736da6754c3b37e7331e26",
    ),
    // The two summary digests are of the global summary with its keys sorted and its numbers
    // parsed exactly (serde_json's float_roundtrip, now on for the whole workspace): re-pinned
    // when the digest stopped depending on how a build parses JSON. The tool prints the same
    // text as when the values were first pinned (compared by hand on both builds).
    (
        "separate summary global",
        "0f79aabac4a7756321adce81528b9e9180b21e7f3a38610212528bab0b7ddcc1",
    ),
    (
        "inline summary global",
        "0f79aabac4a7756321adce81528b9e9180b21e7f3a38610212528bab0b7ddcc1",
    ),
];
