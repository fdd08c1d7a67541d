//! The bad-input matrix: each case exits 2 with one error line naming what is wrong, leaves the
//! input byte-identical, adds no layer to the output, and leaves the output valid (`make test`
//! runs the GeoPackage validator over every file these tests write).

use std::path::{Path, PathBuf};

use stance_tests::{out_dir, run_in, sha256, tables};

struct Case {
    name: &'static str,
    tool: &'static str,
    args: Vec<String>,
    needles: Vec<&'static str>,
}

fn case(name: &'static str, tool: &'static str, args: &[&str], needles: &[&'static str]) -> Case {
    Case {
        name,
        tool,
        args: args.iter().map(|a| a.to_string()).collect(),
        needles: needles.to_vec(),
    }
}

/// Fixtures: the sample, a text file and a truncated GeoPackage (not named `.gpkg`-valid, so the
/// validator sweep skips the broken ones: they end in `.bad.gpkg`? no — they live in `broken/`).
fn fixtures(dir: &Path) -> (PathBuf, PathBuf, PathBuf) {
    let sample = dir.join("input.gpkg");
    std::fs::copy(stance_tests::sample_gpkg(), &sample).expect("copy sample");
    let broken = dir.join("broken");
    std::fs::create_dir_all(&broken).expect("mkdir");
    let text = broken.join("notes.txt.gpkg.fixture");
    std::fs::write(&text, "this is not a GeoPackage\n").expect("write");
    let bytes = std::fs::read(&sample).expect("read");
    let truncated = broken.join("truncated.gpkg.fixture");
    std::fs::write(&truncated, &bytes[..bytes.len() / 3]).expect("write");
    (sample, text, truncated)
}

#[test]
fn bad_inputs_exit_2_with_one_line_and_change_nothing() {
    let dir = out_dir("bad_input");
    let (sample, text, truncated) = fixtures(&dir);
    // An output that already holds a layer, to check nothing is added to it.
    run_in(
        &dir,
        "stance-synth",
        &[
            "--output", "out.gpkg", "--points", "100", "--name", "existing", "-q",
        ],
    )
    .ok();
    std::fs::write(
        dir.join("unknown.csv"),
        "lon,lat,stance\n-140.1,35.0,maybe\n-140.2,35.1,perhaps\n",
    )
    .expect("csv");
    std::fs::write(
        dir.join("times.csv"),
        "lon,lat,stance,t\n-140.1,35.0,support,soon\n",
    )
    .expect("csv");
    std::fs::write(
        dir.join("nan.csv"),
        "lon,lat,stance\nNaN,35.0,support\ninf,35.1,oppose\n",
    )
    .expect("csv");
    std::fs::write(
        dir.join("quote\"d.csv"),
        "lon,lat,\"my \"\"stance\"\"\"\n-140.1,35.0,support\n",
    )
    .expect("csv");
    // Point layers for the analysis tools: one class only, and a negative weight.
    std::fs::write(
        dir.join("one_class.csv"),
        "lon,lat,stance\n-140.1,35.0,support\n-140.2,35.1,support\n-140.3,35.0,support\n",
    )
    .expect("csv");
    std::fs::write(
        dir.join("weighted.csv"),
        "lon,lat,stance,w\n-140.1,35.0,support,1\n-140.2,35.1,oppose,-1\n-140.3,35.0,oppose,2\n",
    )
    .expect("csv");
    for (csv, layer, extra) in [
        ("one_class.csv", "one_class", None),
        ("weighted.csv", "weighted", Some("w")),
    ] {
        let mut args = vec![
            "--input",
            csv,
            "--output",
            "fixtures.gpkg",
            "--name",
            layer,
            "-q",
        ];
        if let Some(keep) = extra {
            args.extend(["--keep", keep]);
        }
        run_in(&dir, "stance-import", &args).ok();
    }
    let readonly = dir.join("readonly");
    std::fs::create_dir_all(&readonly).expect("mkdir");
    let (sample_s, text_s, truncated_s) = (
        sample.to_str().expect("utf-8"),
        text.to_str().expect("utf-8"),
        truncated.to_str().expect("utf-8"),
    );
    let readonly_out = readonly.join("o.gpkg");
    let readonly_out = readonly_out.to_str().expect("utf-8");
    let cases = vec![
        case(
            "missing file",
            "stance-import",
            &["--input", "missing.gpkg", "--output", "out.gpkg"],
            &["missing.gpkg", "No such file"],
        ),
        case(
            "not a GeoPackage",
            "stance-import",
            &["--input", text_s, "--output", "out.gpkg"],
            &["notes.txt.gpkg.fixture", "GDAL cannot read"],
        ),
        case(
            "truncated GeoPackage",
            "stance-import",
            &["--input", truncated_s, "--output", "out.gpkg"],
            &["truncated.gpkg.fixture"],
        ),
        case(
            "missing layer",
            "stance-import",
            &[
                "--input", sample_s, "--layer", "nope", "--output", "out.gpkg",
            ],
            &["'nope'", "veldmark_records"],
        ),
        case(
            "wrong geometry type",
            "stance-import",
            &[
                "--input",
                sample_s,
                "--layer",
                "veldmark_districts",
                "--stance-field",
                "name",
                "--output",
                "out.gpkg",
            ],
            &["veldmark_districts", "expected points"],
        ),
        case(
            "missing field",
            "stance-import",
            &[
                "--input",
                sample_s,
                "--layer",
                "veldmark_records",
                "--stance-field",
                "opinion",
                "--output",
                "out.gpkg",
            ],
            &["'opinion'", "stance"],
        ),
        case(
            "unknown stance values",
            "stance-import",
            &["--input", "unknown.csv", "--output", "out.gpkg"],
            &["unknown.csv", "'maybe' ×1"],
        ),
        case(
            "no parseable time",
            "stance-import",
            &[
                "--input",
                "times.csv",
                "--time-field",
                "t",
                "--output",
                "out.gpkg",
            ],
            &["'t'", "soon"],
        ),
        case(
            "NaN and infinite coordinates",
            "stance-import",
            &["--input", "nan.csv", "--output", "out.gpkg"],
            &["nan.csv", "coordinates_out_of_range: 2"],
        ),
        case(
            "bad class mapping",
            "stance-import",
            &[
                "--input",
                "unknown.csv",
                "--classes",
                "maybe=perhaps",
                "--output",
                "out.gpkg",
            ],
            &["--classes", "perhaps"],
        ),
        case(
            "output is an input layer",
            "stance-import",
            &[
                "--input",
                sample_s,
                "--layer",
                "veldmark_records",
                "--output",
                sample_s,
                "--name",
                "veldmark_records",
                "--overwrite",
            ],
            &["'veldmark_records'", "input layer"],
        ),
        case(
            "system table name",
            "stance-synth",
            &["--output", "out.gpkg", "--name", "gpkg_contents"],
            &["gpkg_contents", "reserved"],
        ),
        case(
            "rtree table name",
            "stance-synth",
            &["--output", "out.gpkg", "--name", "rtree_x"],
            &["rtree_x", "reserved"],
        ),
        case(
            "sqlite table name",
            "stance-synth",
            &["--output", "out.gpkg", "--name", "sqlite_master"],
            &["sqlite_master", "reserved"],
        ),
        case(
            "existing layer without --overwrite",
            "stance-synth",
            &["--output", "out.gpkg", "--name", "existing"],
            &["'existing_records' already exists"],
        ),
        case(
            "unwritable output directory",
            "stance-synth",
            &["--output", "no/such/dir/o.gpkg"],
            &["no/such/dir"],
        ),
        case(
            "output is a directory",
            "stance-synth",
            &["--output", "broken"],
            &["broken", "directory"],
        ),
        case(
            "output is not a GeoPackage",
            "stance-synth",
            &["--output", text_s],
            &["notes.txt.gpkg.fixture", "not a GeoPackage"],
        ),
        case(
            "read-only output directory",
            "stance-synth",
            &["--output", readonly_out],
            &["readonly", "cannot create files"],
        ),
        case(
            "zero points",
            "stance-synth",
            &["--output", "out.gpkg", "--points", "0"],
            &["--points"],
        ),
        case(
            "defect share above 1",
            "stance-synth",
            &["--output", "out.gpkg", "--csv-defects", "1.5"],
            &["--csv-defects"],
        ),
        case(
            "unknown option",
            "stance-synth",
            &["--output", "out.gpkg", "--bandwith-m", "5"],
            &["--bandwith-m"],
        ),
        case(
            "non-numeric value",
            "stance-synth",
            &["--output", "out.gpkg", "--points", "many"],
            &["many"],
        ),
        case(
            "bandwidth zero",
            "stance-density",
            &[
                "--input",
                sample_s,
                "--layer",
                "veldmark_records",
                "--output",
                "out.gpkg",
                "--bandwidth-m",
                "0",
            ],
            &["--bandwidth-m"],
        ),
        case(
            "bandwidth negative",
            "stance-density",
            &[
                "--input",
                sample_s,
                "--layer",
                "veldmark_records",
                "--output",
                "out.gpkg",
                "--bandwidth-m",
                "-500",
            ],
            &["--bandwidth-m"],
        ),
        case(
            "cell size absurd",
            "stance-density",
            &[
                "--input",
                sample_s,
                "--layer",
                "veldmark_records",
                "--output",
                "out.gpkg",
                "--cell-m",
                "0.01",
            ],
            &["--cell-m"],
        ),
        case(
            "memory guard",
            "stance-density",
            &[
                "--input",
                sample_s,
                "--layer",
                "veldmark_records",
                "--output",
                "out.gpkg",
                "--max-memory-mb",
                "1",
            ],
            &["--max-memory-mb", "--cell-m"],
        ),
        case(
            "polygons where points are expected",
            "stance-density",
            &[
                "--input",
                sample_s,
                "--layer",
                "veldmark_districts",
                "--output",
                "out.gpkg",
            ],
            &["veldmark_districts", "expected points"],
        ),
        case(
            "single class present",
            "stance-density",
            &[
                "--input",
                "fixtures.gpkg",
                "--layer",
                "one_class",
                "--output",
                "out.gpkg",
            ],
            &["oppose"],
        ),
        case(
            "negative weight",
            "stance-density",
            &[
                "--input",
                "fixtures.gpkg",
                "--layer",
                "weighted",
                "--weight-field",
                "w",
                "--output",
                "out.gpkg",
            ],
            &["'w'", "-1"],
        ),
        case(
            "unknown compare class",
            "stance-density",
            &[
                "--input",
                sample_s,
                "--layer",
                "veldmark_records",
                "--output",
                "out.gpkg",
                "--compare",
                "support,maybe",
            ],
            &["--compare", "maybe"],
        ),
        case(
            "islands refused",
            "stance-weights",
            &[
                "--input",
                sample_s,
                "--layer",
                "veldmark_districts",
                "--id-field",
                "code",
                "--islands",
                "error",
                "--output",
                "out.gpkg",
            ],
            &["VD-209"],
        ),
        case(
            "duplicate ids",
            "stance-weights",
            &[
                "--input",
                sample_s,
                "--layer",
                "veldmark_districts",
                "--id-field",
                "population",
                "--output",
                "out.gpkg",
            ],
            &["population", "more than once"],
        ),
        case(
            "knn without k",
            "stance-weights",
            &[
                "--input",
                sample_s,
                "--layer",
                "veldmark_districts",
                "--method",
                "knn",
                "--output",
                "out.gpkg",
            ],
            &["--k"],
        ),
        case(
            "text field for Moran's I",
            "stance-moran",
            &[
                "--input",
                sample_s,
                "--layer",
                "veldmark_districts",
                "--field",
                "code",
                "--output",
                "out.gpkg",
            ],
            &["'code'"],
        ),
        case(
            "alpha out of range",
            "stance-moran",
            &[
                "--input",
                sample_s,
                "--layer",
                "veldmark_districts",
                "--field",
                "population",
                "--alpha",
                "1.5",
                "--output",
                "out.gpkg",
            ],
            &["--alpha"],
        ),
        case(
            "rates without areas layer",
            "stance-rates",
            &[
                "--input",
                sample_s,
                "--layer",
                "veldmark_records",
                "--areas",
                "nope",
                "--case-class",
                "oppose",
                "--output",
                "out.gpkg",
            ],
            &["'nope'"],
        ),
        case(
            "missing surface",
            "stance-render",
            &[
                "--input",
                sample_s,
                "--output",
                "out.gpkg",
                "--surface",
                "nope",
                "--png",
                "x.png",
            ],
            &["'nope'"],
        ),
        case(
            "synth memory guard",
            "stance-synth",
            &[
                "--output",
                "out.gpkg",
                "--points",
                "1000000",
                "--max-memory-mb",
                "10",
            ],
            &["--max-memory-mb", "--points"],
        ),
        case(
            "bad CRS",
            "stance-import",
            &[
                "--input",
                "unknown.csv",
                "--source-crs",
                "EPSG:999999",
                "--output",
                "out.gpkg",
            ],
            &["EPSG:999999"],
        ),
    ];
    // Make the directory read-only only for the duration of the matrix (root ignores modes, so
    // the case is checked only when the permission actually applies).
    set_readonly(&readonly, true);
    let root_user = std::fs::File::create(readonly.join("probe")).is_ok();
    let _ = std::fs::remove_file(readonly.join("probe"));
    let input_hash = sha256(&sample);
    let output_hash = sha256(&dir.join("out.gpkg"));
    let output_tables = tables(&dir.join("out.gpkg"));
    for case in &cases {
        if root_user && case.name == "read-only output directory" {
            continue;
        }
        let args: Vec<&str> = case.args.iter().map(String::as_str).collect();
        let ran = run_in(&dir, case.tool, &args);
        assert_eq!(
            ran.code, 2,
            "{}: expected exit 2, got {}\n{}",
            case.name, ran.code, ran.stderr
        );
        let lines = ran.error_lines();
        assert_eq!(
            lines.len(),
            1,
            "{}: expected one error line:\n{}",
            case.name,
            ran.stderr
        );
        for needle in &case.needles {
            assert!(
                lines[0].contains(needle),
                "{}: error line lacks '{needle}': {}",
                case.name,
                lines[0]
            );
        }
        assert_eq!(sha256(&sample), input_hash, "{}: input changed", case.name);
        assert_eq!(
            sha256(&dir.join("out.gpkg")),
            output_hash,
            "{}: output changed",
            case.name
        );
        assert_eq!(
            tables(&dir.join("out.gpkg")),
            output_tables,
            "{}: layer added",
            case.name
        );
    }
    set_readonly(&readonly, false);
    assert!(cases.len() >= 30, "{} cases", cases.len());
    assert!(
        !dir.join("x.png").exists(),
        "a refused render wrote its PNG"
    );
}

fn set_readonly(dir: &Path, readonly: bool) {
    use std::os::unix::fs::PermissionsExt;
    let mode = if readonly { 0o555 } else { 0o755 };
    std::fs::set_permissions(dir, std::fs::Permissions::from_mode(mode)).expect("chmod");
}

#[test]
fn quotes_spaces_and_sql_in_names_are_quoted_not_executed() {
    let dir = out_dir("bad_input_names");
    let evil = "x\"; DROP TABLE gpkg_contents; --";
    let summary = run_in(
        &dir,
        "stance-synth",
        &["--output", "o.gpkg", "--points", "50", "--name", evil, "-q"],
    )
    .ok();
    assert_eq!(summary["layers"][0]["name"], format!("{evil}_records"));
    let names = tables(&dir.join("o.gpkg"));
    assert!(names.contains(&format!("{evil}_records")), "{names:?}");
    // A second run merges into the file (the SQL path) with another odd name.
    let odd = "my layer 'quoted' [x]";
    run_in(
        &dir,
        "stance-synth",
        &["--output", "o.gpkg", "--points", "50", "--name", odd, "-q"],
    )
    .ok();
    let names = tables(&dir.join("o.gpkg"));
    assert!(
        names.contains(&format!("{odd}_districts")) && names.contains(&format!("{evil}_truth")),
        "{names:?}"
    );
    // Field names with quotes reach the CSV reader intact.
    std::fs::write(
        dir.join("q.csv"),
        "lon,lat,\"my \"\"stance\"\"\"\n-140.1,35.0,support\n",
    )
    .expect("csv");
    let summary = run_in(
        &dir,
        "stance-import",
        &[
            "--input",
            "q.csv",
            "--stance-field",
            "my \"stance\"",
            "--output",
            "o.gpkg",
            "--name",
            "it's",
            "-q",
        ],
    )
    .ok();
    assert_eq!(summary["results"]["records_written"], 1);
    assert!(tables(&dir.join("o.gpkg")).contains(&"it's".to_owned()));
    // …and reading an odd layer name back through SQL works.
    let summary = run_in(
        &dir,
        "stance-import",
        &[
            "--input", "o.gpkg", "--layer", "it's", "--output", "o.gpkg", "--name", "copy", "-q",
        ],
    )
    .ok();
    assert_eq!(summary["results"]["records_written"], 1);
}
