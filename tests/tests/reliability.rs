//! Nothing lost, nothing half-written: SIGKILL in the middle of publishing, concurrent writers
//! into one GeoPackage, and leftovers of killed runs cleaned up.

use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

use stance_tests::{bin, out_dir, rows, run_in, tables};

/// Opens the file read-write once, as the next GIS user would: SQLite rolls back a hot journal
/// left by a killed writer (SQLite docs, "Atomic Commit In SQLite", §4.2 Hot Rollback Journals).
fn reopen(path: &std::path::Path) {
    let connection = rusqlite::Connection::open(path).expect("open read-write");
    let count: i64 = connection
        .query_row("SELECT count(*) FROM gpkg_contents", [], |r| r.get(0))
        .expect("read gpkg_contents");
    assert!(count > 0);
}

#[test]
fn sigkill_while_publishing_leaves_the_output_as_it_was() {
    let dir = out_dir("reliability_sigkill");
    run_in(
        &dir,
        "stance-synth",
        &["--output", "o.gpkg", "--points", "200", "-q"],
    )
    .ok();
    let before_tables = tables(&dir.join("o.gpkg"));
    let before_rows = rows(
        &dir.join("o.gpkg"),
        "SELECT * FROM veldmark_records ORDER BY fid",
    );
    let mut child = Command::new(bin("stance-synth"))
        .args([
            "--output", "o.gpkg", "--points", "150000", "--name", "big", "-q",
        ])
        .current_dir(&dir)
        .stdout(Stdio::null())
        .stderr(Stdio::null())
        .spawn()
        .expect("spawn");
    // Wait until the publishing transaction has started (SQLite's rollback journal of the output
    // appears), then kill without warning.
    let journal = dir.join("o.gpkg-journal");
    let started = Instant::now();
    let mut killed_in_transaction = false;
    while started.elapsed() < Duration::from_secs(300) {
        if journal.exists() {
            child.kill().expect("SIGKILL");
            killed_in_transaction = true;
            break;
        }
        if child.try_wait().expect("poll").is_some() {
            break;
        }
        std::thread::sleep(Duration::from_millis(2));
    }
    let status = child.wait().expect("wait");
    eprintln!("killed inside the publishing transaction: {killed_in_transaction}");
    reopen(&dir.join("o.gpkg"));
    let after = tables(&dir.join("o.gpkg"));
    if killed_in_transaction {
        assert!(!status.success());
        assert_eq!(
            after, before_tables,
            "a killed publish left a partial change"
        );
    } else {
        // The run finished before the journal was seen: then all four layers must be there.
        assert!(status.success());
        assert_eq!(after.len(), before_tables.len() + 4);
    }
    assert_eq!(
        rows(
            &dir.join("o.gpkg"),
            "SELECT * FROM veldmark_records ORDER BY fid"
        ),
        before_rows,
        "earlier layers intact"
    );
    // The next run removes the dead run's staging file.
    run_in(
        &dir,
        "stance-synth",
        &[
            "--output", "o.gpkg", "--points", "50", "--name", "after", "-q",
        ],
    )
    .ok();
    let leftovers = stance_tests::staging_leftovers(&dir);
    assert!(leftovers.is_empty(), "{leftovers:?}");
}

#[test]
fn two_writers_into_one_geopackage_both_finish() {
    let dir = out_dir("reliability_concurrent");
    run_in(
        &dir,
        "stance-synth",
        &["--output", "o.gpkg", "--points", "100", "-q"],
    )
    .ok();
    let spawn = |name: &str| {
        Command::new(bin("stance-synth"))
            .args([
                "--output", "o.gpkg", "--points", "20000", "--name", name, "--seed", "4", "-q",
            ])
            .current_dir(&dir)
            .stdout(Stdio::piped())
            .stderr(Stdio::piped())
            .spawn()
            .expect("spawn")
    };
    let (a, b) = (spawn("first"), spawn("second"));
    for child in [a, b] {
        let output = child.wait_with_output().expect("wait");
        assert!(
            output.status.success(),
            "a concurrent writer failed: {}",
            String::from_utf8_lossy(&output.stderr)
        );
    }
    let names = tables(&dir.join("o.gpkg"));
    for layer in ["first_records", "second_records", "veldmark_records"] {
        assert!(
            names.iter().any(|n| n == layer),
            "{layer} missing from {names:?}"
        );
    }
    // Same seed, same data: the two concurrent copies are identical.
    assert_eq!(
        rows(
            &dir.join("o.gpkg"),
            "SELECT * FROM first_records ORDER BY fid"
        ),
        rows(
            &dir.join("o.gpkg"),
            "SELECT * FROM second_records ORDER BY fid"
        )
    );
}

#[test]
fn sigint_while_writing_into_an_existing_file_rolls_back() {
    let dir = out_dir("reliability_sigint");
    run_in(
        &dir,
        "stance-synth",
        &["--output", "o.gpkg", "--points", "200", "-q"],
    )
    .ok();
    let before = rows(
        &dir.join("o.gpkg"),
        "SELECT * FROM veldmark_records ORDER BY fid",
    );
    let before_tables = tables(&dir.join("o.gpkg"));
    let child = Command::new(bin("stance-synth"))
        .args([
            "--output", "o.gpkg", "--points", "3000000", "--name", "big", "-q",
        ])
        .current_dir(&dir)
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("spawn");
    std::thread::sleep(Duration::from_millis(1500));
    let status = Command::new("kill")
        .args(["-INT", &child.id().to_string()])
        .status()
        .expect("kill");
    assert!(status.success());
    let output = child.wait_with_output().expect("wait");
    assert_ne!(
        output.status.code(),
        Some(0),
        "an interrupted run must not report success"
    );
    assert!(
        output.stdout.is_empty(),
        "an interrupted run printed a summary"
    );
    assert!(
        String::from_utf8_lossy(&output.stderr).contains("interrupted"),
        "{}",
        String::from_utf8_lossy(&output.stderr)
    );
    reopen(&dir.join("o.gpkg"));
    assert_eq!(tables(&dir.join("o.gpkg")), before_tables);
    assert_eq!(
        rows(
            &dir.join("o.gpkg"),
            "SELECT * FROM veldmark_records ORDER BY fid"
        ),
        before
    );
}
