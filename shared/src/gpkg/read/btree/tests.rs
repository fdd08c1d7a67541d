//! The direct scan against SQLite's own answers (the reference: `SELECT … ORDER BY rowid` on the
//! same file through the SQLite library), on tables made to exercise the file format: every
//! serial type, payloads spilling into overflow pages, short records after ALTER TABLE, deleted
//! rows, page sizes from 512 to 65,536 bytes.

use super::*;

#[derive(Debug, Clone, PartialEq)]
enum V {
    Null,
    I(i64),
    R(u64),
    T(Vec<u8>),
    B(Vec<u8>),
}

fn own(v: ValueRef<'_>) -> V {
    match v {
        ValueRef::Null => V::Null,
        ValueRef::Integer(i) => V::I(i),
        ValueRef::Real(r) => V::R(r.to_bits()),
        ValueRef::Text(t) => V::T(t.to_vec()),
        ValueRef::Blob(b) => V::B(b.to_vec()),
    }
}

/// Rows as SQLite returns them.
fn by_sqlite(path: &Path, table: &str, columns: &[&str]) -> Vec<(i64, Vec<V>)> {
    let c = rusqlite::Connection::open(path).expect("test fixture");
    let list: Vec<String> = columns.iter().map(|c| q(c)).collect();
    let sql = format!(
        "SELECT rowid, {} FROM {} ORDER BY rowid",
        list.join(", "),
        q(table)
    );
    let mut s = c.prepare(&sql).expect("test fixture");
    let rows = s
        .query_map([], |r| {
            Ok((
                r.get::<_, i64>(0)?,
                (0..columns.len())
                    .map(|i| own(r.get_ref(i + 1).expect("test fixture")))
                    .collect(),
            ))
        })
        .expect("test fixture");
    rows.map(|r| r.expect("test fixture")).collect()
}

/// Rows as the direct scan returns them, in `parts` parts joined in order.
fn by_scan(
    path: &Path,
    table: &str,
    columns: &[&str],
    parts: usize,
) -> Result<Vec<(i64, Vec<V>)>, Unusable> {
    let c = rusqlite::Connection::open_with_flags(path, rusqlite::OpenFlags::SQLITE_OPEN_READ_ONLY)
        .expect("test fixture");
    let lock = ReadLock::take(&c)?;
    let scan = TableScan::open(path, &lock, table, columns)?;
    let n = columns.len();
    let parts = scan.scan(
        parts,
        |_| Vec::new(),
        |rows: &mut Vec<(i64, Vec<V>)>, rowid, record| -> Result<(), ()> {
            rows.push((rowid, (0..n).map(|i| own(record.value(i))).collect()));
            Ok(())
        },
    )?;
    Ok(parts
        .into_iter()
        .flat_map(|p| p.expect("test fixture"))
        .collect())
}

/// A SQLite file `name` in `dir` made by the statements `sql`.
fn file_from_sql(dir: &tempfile::TempDir, name: &str, sql: &str) -> std::path::PathBuf {
    let path = dir.path().join(name);
    let c = rusqlite::Connection::open(&path).expect("test fixture");
    c.execute_batch(sql).expect("test fixture");
    path
}

/// A table with every serial type, long texts and blobs (overflow pages), NULLs, deleted rows
/// and rows written before a column was added.
fn make(path: &Path, page_size: usize, rows: i64) {
    let c = rusqlite::Connection::open(path).expect("test fixture");
    c.execute_batch(&format!("PRAGMA page_size = {page_size};"))
        .expect("test fixture");
    c.execute_batch(
        "CREATE TABLE t (fid INTEGER PRIMARY KEY AUTOINCREMENT NOT NULL, geom BLOB, n INTEGER, r REAL, s TEXT);",
    )
    .expect("test fixture");
    let tx = c.unchecked_transaction().expect("test fixture");
    let numbers = [
        0i64,
        1,
        -1,
        127,
        -128,
        255,
        32767,
        -32768,
        8_388_607,
        -8_388_608,
        2_147_483_647,
        -2_147_483_648,
        140_737_488_355_327,
        -140_737_488_355_328,
        i64::MAX,
        i64::MIN,
    ];
    for i in 0..rows {
        let n = numbers[(i as usize) % numbers.len()];
        let long = (i % 97 == 0).then(|| "x".repeat((i as usize * 131) % (3 * page_size) + 1));
        let blob: Option<Vec<u8>> = match i % 5 {
            0 => None,
            1 => Some(vec![]),
            2 => Some(vec![7u8; (i as usize * 17) % (2 * page_size) + 1]),
            _ => Some((0..21).map(|b| (b as u8).wrapping_mul(i as u8)).collect()),
        };
        let real: Option<f64> = match i % 7 {
            3 => None,
            // Whole numbers in a REAL column are stored as integers and read back as reals.
            5 => Some(i as f64 - 3000.0),
            _ => Some(i as f64 * -0.37 + 1e-300),
        };
        let text: Option<String> = match i % 4 {
            0 => None,
            1 => Some(String::new()),
            2 => Some(format!("ständ {i} ✓")),
            _ => long.clone().or_else(|| Some("support".into())),
        };
        c.execute(
            "INSERT INTO t (geom, n, r, s) VALUES (?1, ?2, ?3, ?4)",
            rusqlite::params![blob, if i % 11 == 5 { None } else { Some(n) }, real, text],
        )
        .expect("test fixture");
    }
    tx.commit().expect("test fixture");
    c.execute_batch("DELETE FROM t WHERE fid % 13 = 0; ALTER TABLE t ADD COLUMN late TEXT;")
        .expect("test fixture");
    c.execute_batch("INSERT INTO t (geom, n, late) VALUES (x'0102', 5, 'added');")
        .expect("test fixture");
}

#[test]
fn the_direct_scan_returns_what_sqlite_returns() {
    let dir = tempfile::tempdir().expect("test fixture");
    for (page_size, rows) in [(512, 2_000), (4096, 20_000), (65536, 3_000)] {
        let path = dir.path().join(format!("t{page_size}.sqlite"));
        make(&path, page_size, rows);
        let columns = ["fid", "geom", "n", "r", "s", "late"];
        let expected = by_sqlite(&path, "t", &columns);
        assert!(expected.len() > rows as usize * 9 / 10);
        for parts in [1, 2, 3, 7] {
            let got = by_scan(&path, "t", &columns, parts).expect("test fixture");
            assert_eq!(
                got.len(),
                expected.len(),
                "page size {page_size}, {parts} parts"
            );
            assert!(got == expected, "page size {page_size}, {parts} parts");
        }
        // A subset in another order: the values follow the order asked.
        let subset = ["s", "fid", "r"];
        assert_eq!(
            by_scan(&path, "t", &subset, 2).expect("test fixture"),
            by_sqlite(&path, "t", &subset)
        );
    }
}

#[test]
fn a_table_without_an_integer_key_is_scanned_by_its_rowid() {
    let dir = tempfile::tempdir().expect("test fixture");
    let path = file_from_sql(
        &dir,
        "r.sqlite",
        "CREATE TABLE t (a TEXT, b REAL); INSERT INTO t VALUES ('p', 1.5), (NULL, 2), ('q', NULL);",
    );
    let got = by_scan(&path, "t", &["rowid", "a", "b"], 1).expect("test fixture");
    let expected = by_sqlite(&path, "t", &["rowid", "a", "b"]);
    assert_eq!(got, expected);
    assert_eq!(got[1].1, vec![V::I(2), V::Null, V::R(2f64.to_bits())]);
}

#[test]
fn an_integer_key_declared_descending_is_not_taken_for_the_rowid() {
    // SQLite's documented quirk (https://www.sqlite.org/lang_createtable.html#rowid): a column
    // declared `INTEGER PRIMARY KEY DESC` is not an alias for the rowid; its values live in the
    // record. The scan must not answer the rowid for it.
    let dir = tempfile::tempdir().expect("test fixture");
    let path = file_from_sql(
        &dir,
        "desc.sqlite",
        "CREATE TABLE t (id  INTEGER  PRIMARY\n KEY   DESC, a TEXT);
         INSERT INTO t VALUES (5, 'x'), (9, 'y');",
    );
    let by_sqlite_rows = by_sqlite(&path, "t", &["id", "a"]);
    assert_eq!(by_sqlite_rows[0].1, vec![V::I(5), V::T(b"x".to_vec())]);
    // Wanted, the key is refused (SQLite reads the layer instead).
    let refused = by_scan(&path, "t", &["id", "a"], 1).expect_err("refused");
    assert!(
        refused.0.contains("is a key that is not the rowid"),
        "{}",
        refused.0
    );
    // Without the key among the wanted columns the rows are read by rowid as SQLite reads them.
    assert_eq!(
        by_scan(&path, "t", &["a"], 1).expect("test fixture"),
        by_sqlite(&path, "t", &["a"])
    );
}

#[test]
fn files_the_scan_cannot_see_as_sqlite_does_are_refused() {
    let dir = tempfile::tempdir().expect("test fixture");
    let wal = dir.path().join("wal.sqlite");
    let c = rusqlite::Connection::open(&wal).expect("test fixture");
    c.execute_batch("PRAGMA journal_mode = WAL; CREATE TABLE t (fid INTEGER PRIMARY KEY, a TEXT); INSERT INTO t (a) VALUES ('x');")
        .expect("test fixture");
    assert!(by_scan(&wal, "t", &["a"], 1)
        .expect_err("refused")
        .0
        .contains("journal"));
    drop(c);

    let other = file_from_sql(
        &dir,
        "other.sqlite",
        "CREATE TABLE k (id TEXT PRIMARY KEY, a TEXT) WITHOUT ROWID; INSERT INTO k VALUES ('a', 'b');
         CREATE TABLE d (fid INTEGER PRIMARY KEY, a TEXT DEFAULT 'none'); INSERT INTO d (a) VALUES ('x');
         CREATE VIEW v AS SELECT * FROM d;",
    );
    assert!(by_scan(&other, "k", &["a"], 1)
        .expect_err("refused")
        .0
        .contains("rowid"));
    assert!(by_scan(&other, "d", &["a"], 1)
        .expect_err("refused")
        .0
        .contains("default"));
    assert!(by_scan(&other, "v", &["a"], 1)
        .expect_err("refused")
        .0
        .contains("view"));
    assert!(by_scan(&other, "d", &["missing"], 1)
        .expect_err("refused")
        .0
        .contains("no column"));
}

#[test]
fn damaged_pages_stop_the_scan_without_a_panic() {
    // Every byte of every leaf page overwritten in turn with a few values: the scan either
    // returns rows or says it cannot read the file; it never panics or loops.
    let dir = tempfile::tempdir().expect("test fixture");
    let path = dir.path().join("d.sqlite");
    make(&path, 512, 300);
    let pristine = std::fs::read(&path).expect("test fixture");
    let columns = ["fid", "geom", "n", "r", "s", "late"];
    let mut refused = 0;
    let damaged = dir.path().join("damaged.sqlite");
    let mut rng: u64 = 0x9e37_79b9_7f4a_7c15;
    for _ in 0..3000 {
        rng ^= rng << 13;
        rng ^= rng >> 7;
        rng ^= rng << 17;
        let at = 512 + (rng as usize % (pristine.len() - 512));
        let mut bytes = pristine.clone();
        bytes[at] = (rng >> 32) as u8;
        std::fs::write(&damaged, &bytes).expect("test fixture");
        if let Ok(c) = rusqlite::Connection::open_with_flags(
            &damaged,
            rusqlite::OpenFlags::SQLITE_OPEN_READ_ONLY,
        ) {
            if let Ok(lock) = ReadLock::take(&c) {
                match TableScan::open(&damaged, &lock, "t", &columns) {
                    Ok(scan) => {
                        let result = scan.scan(
                            2,
                            |_| Vec::new(),
                            |rows: &mut Vec<i64>, rowid, record| -> Result<(), ()> {
                                for i in 0..columns.len() {
                                    std::hint::black_box(record.value(i));
                                }
                                rows.push(rowid);
                                Ok(())
                            },
                        );
                        if result.is_err() {
                            refused += 1;
                        }
                    }
                    Err(_) => refused += 1,
                }
            }
        }
    }
    assert!(refused > 0, "some damage must be noticed");
}

#[test]
fn an_interior_page_pointing_at_itself_is_refused() {
    // Every child pointer of the root (an interior page of a table of a few thousand rows) is
    // made to point at the root itself: without a count of pages visited, the walk would
    // never end.
    let dir = tempfile::tempdir().expect("test fixture");
    let path = dir.path().join("loop.sqlite");
    make(&path, 512, 2_000);
    let c = rusqlite::Connection::open(&path).expect("test fixture");
    let root: u32 = c
        .query_row(
            "SELECT rootpage FROM sqlite_master WHERE name = 't'",
            [],
            |r| r.get(0),
        )
        .expect("test fixture");
    drop(c);
    let mut bytes = std::fs::read(&path).expect("test fixture");
    let page = &mut bytes[(root as usize - 1) * 512..root as usize * 512];
    assert_eq!(page[0], 0x05, "the root is an interior table page");
    let cells = u16::from_be_bytes([page[3], page[4]]) as usize;
    for c in 0..cells {
        let at = u16::from_be_bytes([page[12 + 2 * c], page[13 + 2 * c]]) as usize;
        page[at..at + 4].copy_from_slice(&root.to_be_bytes());
    }
    page[8..12].copy_from_slice(&root.to_be_bytes());
    std::fs::write(&path, &bytes).expect("test fixture");
    let refused = by_scan(&path, "t", &["fid"], 1).expect_err("refused");
    assert!(refused.0.contains("more pages"), "{refused:?}");
}
