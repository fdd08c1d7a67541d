//! One table of a GeoPackage read straight from the database file: the table b-tree's pages and
//! records decoded as the SQLite file format lays them out (<https://www.sqlite.org/fileformat2.html>:
//! §1.3 the database header, §1.6 b-tree pages and cell payloads with their overflow pages,
//! §2.1 the record format). Reading every row of a large layer through SQLite's statement
//! machine costs a few hundred nanoseconds a row; walking the leaf pages costs tens.
//!
//! The scan is only a faster way to read what SQLite would return, so it is taken only where it
//! sees exactly what SQLite sees:
//! - the caller's connection holds a read transaction on the file for the whole scan (a SHARED
//!   lock: no writer can commit meanwhile), see [`ReadLock`];
//! - the file is in rollback-journal mode (a write-ahead log may hold newer pages), UTF-8, and
//!   the table is an ordinary rowid table without generated columns;
//! - anything unexpected in a page (a bad page type, an offset outside its page, a page number
//!   past the end of the file) stops the scan with [`Unusable`].
//!
//! In every other case the caller reads through SQLite, which gives the same rows in the same
//! (rowid) order, or SQLite's own error.

use std::fs::File;
use std::os::unix::fs::FileExt;
use std::path::Path;

use rusqlite::types::ValueRef;

use crate::gpkg::quote_identifier as q;

/// Why the file cannot be read directly (said in debug logs only: the caller falls back).
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct Unusable(pub String);

fn unusable<T>(why: impl Into<String>) -> Result<T, Unusable> {
    Err(Unusable(why.into()))
}

/// A read transaction held on a connection for as long as this lives.
pub(crate) struct ReadLock<'c>(&'c rusqlite::Connection);

impl<'c> ReadLock<'c> {
    /// Begins a transaction and reads the schema, which takes SQLite's SHARED lock on the file
    /// until [`Drop`]: writers cannot commit while the pages are read.
    pub(crate) fn take(connection: &'c rusqlite::Connection) -> Result<Self, Unusable> {
        if !connection.is_autocommit() {
            return unusable("the connection is already in a transaction");
        }
        connection
            .execute_batch("BEGIN; SELECT count(*) FROM sqlite_master;")
            .map_err(|e| Unusable(e.to_string()))?;
        Ok(ReadLock(connection))
    }
}

impl Drop for ReadLock<'_> {
    fn drop(&mut self) {
        let _ = self.0.execute_batch("COMMIT");
    }
}

/// The value slots of the wanted columns of one record.
#[derive(Debug, Clone, Copy)]
enum Slot {
    Null,
    Integer(i64),
    Real(f64),
    Text(usize, usize),
    Blob(usize, usize),
}

/// The wanted columns of one row, as SQLite would return them.
pub(crate) struct Record<'a> {
    payload: &'a [u8],
    slots: &'a [Slot],
}

impl<'a> Record<'a> {
    /// The value of the `i`-th wanted column.
    pub(crate) fn value(&self, i: usize) -> ValueRef<'a> {
        match self.slots[i] {
            Slot::Null => ValueRef::Null,
            Slot::Integer(v) => ValueRef::Integer(v),
            Slot::Real(v) => ValueRef::Real(v),
            Slot::Text(a, b) => ValueRef::Text(&self.payload[a..b]),
            Slot::Blob(a, b) => ValueRef::Blob(&self.payload[a..b]),
        }
    }
}

/// Where a wanted column is found.
#[derive(Debug, Clone, Copy, PartialEq)]
enum Source {
    /// The rowid (an INTEGER PRIMARY KEY column is stored as NULL in the record).
    Rowid,
    /// The record's column at this index.
    Column(usize),
    /// The record's column at this index, of REAL affinity: SQLite stores whole numbers there
    /// as integers and returns them as reals (§3 of its datatype documentation), so does this.
    RealColumn(usize),
}

impl Source {
    fn column(self) -> Option<usize> {
        match self {
            Source::Rowid => None,
            Source::Column(i) | Source::RealColumn(i) => Some(i),
        }
    }
}

/// Whether a declared column type gives REAL affinity (SQLite's rules, in order: INT, then
/// CHAR/CLOB/TEXT, then BLOB or none, then REAL/FLOA/DOUB).
fn real_affinity(declared: &str) -> bool {
    let t = declared.to_ascii_uppercase();
    let has = |w: &str| t.contains(w);
    !(has("INT") || has("CHAR") || has("CLOB") || has("TEXT") || has("BLOB") || t.is_empty())
        && (has("REAL") || has("FLOA") || has("DOUB"))
}

/// A table ready to be scanned directly, for as long as the file's read lock is held.
pub(crate) struct TableScan<'l> {
    /// Borrows the read lock (its lifetime only: the connection is not shared across threads).
    _lock: std::marker::PhantomData<&'l ()>,
    file: File,
    page_size: usize,
    usable: usize,
    pages: u64,
    /// Leaf pages in rowid order.
    leaves: Vec<u32>,
    wanted: Vec<Source>,
}

/// Pages read at once when leaf pages follow each other in the file.
const RUN_BYTES: usize = 1 << 20;

impl<'l> TableScan<'l> {
    /// Prepares a direct scan of `table` for the columns `wanted` (names as in the table, or
    /// `rowid`), or says why it cannot be done. `lock` holds the file read-locked (its
    /// connection reads the schema) for as long as the scan lives.
    pub(crate) fn open(
        path: &Path,
        lock: &'l ReadLock<'l>,
        table: &str,
        wanted: &[&str],
    ) -> Result<Self, Unusable> {
        let connection = lock.0;
        let file = File::open(path).map_err(|e| Unusable(e.to_string()))?;
        let mut header = [0u8; 100];
        file.read_exact_at(&mut header, 0)
            .map_err(|e| Unusable(e.to_string()))?;
        if &header[..16] != b"SQLite format 3\0" {
            return unusable("not a SQLite 3 file");
        }
        let page_size = match u16::from_be_bytes([header[16], header[17]]) {
            1 => 65536,
            n => n as usize,
        };
        if !page_size.is_power_of_two() || !(512..=65536).contains(&page_size) {
            return unusable(format!("page size {page_size}"));
        }
        if header[18] != 1 || header[19] != 1 {
            return unusable("not in rollback-journal mode (a write-ahead log may hold pages)");
        }
        let usable = page_size - header[20] as usize;
        if usable < 480 {
            return unusable("reserved bytes leave too small pages");
        }
        if u32::from_be_bytes(header[56..60].try_into().expect("4 bytes")) != 1 {
            return unusable("text is not UTF-8");
        }
        let length = file.metadata().map_err(|e| Unusable(e.to_string()))?.len();
        let pages = length / page_size as u64;

        let (kind, root, sql): (String, i64, Option<String>) = connection
            .query_row(
                "SELECT type, rootpage, sql FROM sqlite_master WHERE name = ?1",
                [table],
                |r| Ok((r.get(0)?, r.get(1)?, r.get(2)?)),
            )
            .map_err(|e| Unusable(e.to_string()))?;
        if kind != "table" || root < 1 || root as u64 > pages {
            return unusable(format!("'{table}' is a {kind} with root page {root}"));
        }
        let sql = sql.unwrap_or_default().to_ascii_uppercase();
        if sql.contains("WITHOUT") && sql.contains("ROWID") {
            return unusable("a table without rowid");
        }
        // cid, name, type, notnull, dflt_value, pk, hidden
        let mut statement = connection
            .prepare(&format!("PRAGMA table_xinfo({})", q(table)))
            .map_err(|e| Unusable(e.to_string()))?;
        type Info = (String, String, bool, i64, i64);
        let columns: Vec<Info> = statement
            .query_map([], |r| {
                Ok((
                    r.get::<_, String>(1)?,
                    r.get::<_, Option<String>>(2)?.unwrap_or_default(),
                    r.get_ref(4)?.data_type() != rusqlite::types::Type::Null,
                    r.get::<_, i64>(5)?,
                    r.get::<_, i64>(6)?,
                ))
            })
            .and_then(|rows| rows.collect::<rusqlite::Result<Vec<_>>>())
            .map_err(|e| Unusable(e.to_string()))?;
        if columns.iter().any(|c| c.4 != 0) {
            return unusable("hidden or generated columns");
        }
        let keys: Vec<usize> = (0..columns.len()).filter(|&i| columns[i].3 > 0).collect();
        // A column declared `INTEGER PRIMARY KEY DESC` is not an alias for the rowid (SQLite's
        // documented quirk): its values are in the record and only SQLite reads it as a key.
        let words: Vec<&str> = sql.split_whitespace().collect();
        let descending = words.join(" ").contains("PRIMARY KEY DESC");
        let alias = match keys.as_slice() {
            [one] if columns[*one].1.eq_ignore_ascii_case("INTEGER") && !descending => Some(*one),
            _ => None,
        };
        let mut sources = Vec::with_capacity(wanted.len());
        for name in wanted {
            match columns.iter().position(|c| c.0 == *name) {
                Some(i) if Some(i) == alias => sources.push(Source::Rowid),
                // A record written before ALTER TABLE ADD COLUMN is short: the missing value is
                // the column's default, which only SQLite knows how to evaluate.
                Some(i) if columns[i].2 => return unusable(format!("'{name}' has a default")),
                Some(i) if keys.contains(&i) => {
                    return unusable(format!("'{name}' is a key that is not the rowid"))
                }
                Some(i) if real_affinity(&columns[i].1) => sources.push(Source::RealColumn(i)),
                Some(i) => sources.push(Source::Column(i)),
                None if name.eq_ignore_ascii_case("rowid") && alias.is_none() => {
                    sources.push(Source::Rowid)
                }
                None => return unusable(format!("no column '{name}'")),
            }
        }
        let mut scan = TableScan {
            _lock: std::marker::PhantomData,
            file,
            page_size,
            usable,
            pages,
            leaves: Vec::new(),
            wanted: sources,
        };
        let mut leaves = Vec::new();
        let mut page = vec![0u8; page_size];
        let mut visited = 0;
        scan.collect_leaves(root as u32, 0, &mut page, &mut leaves, &mut visited)?;
        scan.leaves = leaves;
        Ok(scan)
    }

    /// How many leaf pages the table has.
    pub(crate) fn leaf_count(&self) -> usize {
        self.leaves.len()
    }

    fn read_page(&self, number: u32, into: &mut [u8]) -> Result<(), Unusable> {
        if number == 0 || number as u64 > self.pages {
            return unusable(format!("page {number} is outside the file"));
        }
        self.file
            .read_exact_at(into, (number as u64 - 1) * self.page_size as u64)
            .map_err(|e| Unusable(e.to_string()))
    }

    /// Appends the leaf pages under `number` in key order; `visited` counts the pages read, so
    /// a damaged tree whose pages point back up cannot make the walk endless.
    fn collect_leaves(
        &self,
        number: u32,
        depth: usize,
        page: &mut [u8],
        leaves: &mut Vec<u32>,
        visited: &mut u64,
    ) -> Result<(), Unusable> {
        *visited += 1;
        if depth > 40 || *visited > self.pages {
            return unusable("the b-tree has more pages than the file");
        }
        self.read_page(number, page)?;
        let start = if number == 1 { 100 } else { 0 };
        match page[start] {
            0x0d => {
                leaves.push(number);
                Ok(())
            }
            0x05 => {
                let cells = be16(page, start + 3)? as usize;
                let mut children = Vec::with_capacity(cells + 1);
                for c in 0..cells {
                    let at = be16(page, start + 12 + 2 * c)? as usize;
                    children.push(be32(page, at)?);
                }
                children.push(be32(page, start + 8)?);
                for child in children {
                    self.collect_leaves(child, depth + 1, page, leaves, visited)?;
                }
                Ok(())
            }
            other => unusable(format!("page {number} has type {other}, not a table page")),
        }
    }

    /// Scans the rows in `parts` consecutive ranges of leaf pages, in parallel: each part starts
    /// from `init(rows)`, `rows` its likely number of rows (its leaves times the cells on its
    /// first leaf), and calls `row(state, rowid, record)` for its rows in rowid order. Parts come
    /// back in order, each its state or the first error of its rows.
    ///
    /// # Errors
    /// [`Unusable`] when a page is not as the format says (the caller reads through SQLite).
    pub(crate) fn scan<S, E, I, F>(
        &self,
        parts: usize,
        init: I,
        row: F,
    ) -> Result<Vec<Result<S, E>>, Unusable>
    where
        S: Send,
        E: Send,
        I: Fn(usize) -> S + Sync,
        F: Fn(&mut S, i64, &Record<'_>) -> Result<(), E> + Sync,
    {
        use rayon::prelude::*;
        let parts = parts.clamp(1, self.leaves.len().max(1));
        let n = self.leaves.len();
        (0..parts)
            .into_par_iter()
            .map(|k| {
                let mine = &self.leaves[n * k / parts..n * (k + 1) / parts];
                let mut state = init(self.cells_on(mine.first().copied())? * mine.len());
                match self.scan_leaves(mine, &mut state, &row)? {
                    Ok(()) => Ok(Ok(state)),
                    Err(e) => Ok(Err(e)),
                }
            })
            .collect()
    }

    fn scan_leaves<S, E, F>(
        &self,
        leaves: &[u32],
        state: &mut S,
        row: &F,
    ) -> Result<Result<(), E>, Unusable>
    where
        F: Fn(&mut S, i64, &Record<'_>) -> Result<(), E>,
    {
        let per_run = (RUN_BYTES / self.page_size).max(1);
        let mut buffer = vec![0u8; per_run * self.page_size];
        let mut cursor = Cursor::new(self);
        let mut i = 0;
        while i < leaves.len() {
            // A run of leaves that follow each other in the file is read at once.
            let mut run = 1;
            while run < per_run
                && i + run < leaves.len()
                && leaves[i + run] == leaves[i] + run as u32
            {
                run += 1;
            }
            let bytes = &mut buffer[..run * self.page_size];
            self.read_page_run(leaves[i], bytes)?;
            for p in 0..run {
                let number = leaves[i] + p as u32;
                let page = &bytes[p * self.page_size..(p + 1) * self.page_size];
                if let Err(e) = cursor.leaf(number, page, state, row)? {
                    return Ok(Err(e));
                }
            }
            i += run;
        }
        Ok(Ok(()))
    }

    /// The number of cells on leaf page `number` (0 for none).
    fn cells_on(&self, number: Option<u32>) -> Result<usize, Unusable> {
        let Some(number) = number else {
            return Ok(0);
        };
        let mut page = vec![0u8; self.page_size];
        self.read_page(number, &mut page)?;
        Ok(be16(&page, if number == 1 { 103 } else { 3 })? as usize)
    }

    fn read_page_run(&self, first: u32, into: &mut [u8]) -> Result<(), Unusable> {
        let last = first as u64 + (into.len() / self.page_size) as u64 - 1;
        if first == 0 || last > self.pages {
            return unusable(format!("page {last} is outside the file"));
        }
        self.file
            .read_exact_at(into, (first as u64 - 1) * self.page_size as u64)
            .map_err(|e| Unusable(e.to_string()))
    }
}

/// Scratch of one scanning thread.
struct Cursor<'t> {
    table: &'t TableScan<'t>,
    /// The payload of a cell that spills into overflow pages, assembled.
    spilled: Vec<u8>,
    overflow_page: Vec<u8>,
    slots: Vec<Slot>,
}

impl<'t> Cursor<'t> {
    fn new(table: &'t TableScan<'t>) -> Self {
        Cursor {
            table,
            spilled: Vec::new(),
            overflow_page: vec![0u8; table.page_size],
            slots: vec![Slot::Null; table.wanted.len()],
        }
    }

    /// Every cell of table leaf page `number`.
    fn leaf<S, E, F>(
        &mut self,
        number: u32,
        page: &[u8],
        state: &mut S,
        row: &F,
    ) -> Result<Result<(), E>, Unusable>
    where
        F: Fn(&mut S, i64, &Record<'_>) -> Result<(), E>,
    {
        let start = if number == 1 { 100 } else { 0 };
        if page[start] != 0x0d {
            return unusable(format!("page {number} is not a table leaf"));
        }
        let usable = self.table.usable;
        let cells = be16(page, start + 3)? as usize;
        for c in 0..cells {
            let at = be16(page, start + 8 + 2 * c)? as usize;
            let (size, n1) = varint(page, at)?;
            let (rowid, n2) = varint(page, at + n1)?;
            let body = at + n1 + n2;
            let size = usize::try_from(size).map_err(|_| Unusable("payload size".into()))?;
            let local = local_payload(size, usable);
            let payload: &[u8] = if local == size {
                page.get(body..body + size)
                    .ok_or_else(|| Unusable(format!("a cell of page {number} overruns it")))?
            } else {
                let first = page
                    .get(body..body + local)
                    .ok_or_else(|| Unusable(format!("a cell of page {number} overruns it")))?;
                let next = be32(page, body + local)?;
                self.spill(first, next, size)?;
                &self.spilled
            };
            decode_record(payload, &self.table.wanted, rowid as i64, &mut self.slots)?;
            let record = Record {
                payload,
                slots: &self.slots,
            };
            if let Err(e) = row(state, rowid as i64, &record) {
                return Ok(Err(e));
            }
        }
        Ok(Ok(()))
    }

    /// Assembles a payload of `size` bytes from its local part and the overflow chain from
    /// page `next`.
    fn spill(&mut self, local: &[u8], mut next: u32, size: usize) -> Result<(), Unusable> {
        self.spilled.clear();
        self.spilled.extend_from_slice(local);
        let usable = self.table.usable;
        let mut hops = 0u64;
        while self.spilled.len() < size {
            hops += 1;
            if next == 0 || hops > self.table.pages {
                return unusable("an overflow chain ends early");
            }
            self.table.read_page(next, &mut self.overflow_page)?;
            let take = (size - self.spilled.len()).min(usable - 4);
            self.spilled
                .extend_from_slice(&self.overflow_page[4..4 + take]);
            next = be32(&self.overflow_page, 0)?;
        }
        Ok(())
    }
}

/// Bytes of a table-leaf payload of `size` kept on the leaf page itself (§1.6).
fn local_payload(size: usize, usable: usize) -> usize {
    let max_local = usable - 35;
    if size <= max_local {
        return size;
    }
    let min_local = (usable - 12) * 32 / 255 - 23;
    let k = min_local + (size - min_local) % (usable - 4);
    if k <= max_local {
        k
    } else {
        min_local
    }
}

/// Fills `slots` with the wanted columns of a record (§2.1): a header of serial types, then the
/// values. Columns past the end of a short record are NULL (the table has no defaults for them).
fn decode_record(
    payload: &[u8],
    wanted: &[Source],
    rowid: i64,
    slots: &mut [Slot],
) -> Result<(), Unusable> {
    let bad = || Unusable("a record's header does not fit its payload".into());
    let (header_size, mut at) = varint(payload, 0)?;
    let header_size = usize::try_from(header_size).map_err(|_| bad())?;
    if header_size > payload.len() {
        return Err(bad());
    }
    let last = wanted.iter().filter_map(|s| s.column()).max();
    for slot in slots.iter_mut() {
        *slot = Slot::Null;
    }
    let mut offset = header_size;
    let mut column = 0;
    if let Some(last) = last {
        while at < header_size && column <= last {
            let (serial, n) = varint(payload, at)?;
            at += n;
            let (slot, length) = serial_value(payload, offset, serial)?;
            for (w, s) in wanted.iter().zip(slots.iter_mut()) {
                match (*w, slot) {
                    (Source::RealColumn(c), Slot::Integer(v)) if c == column => {
                        *s = Slot::Real(v as f64)
                    }
                    (w, _) if w.column() == Some(column) => *s = slot,
                    _ => {}
                }
            }
            offset += length;
            column += 1;
        }
    }
    for (w, s) in wanted.iter().zip(slots.iter_mut()) {
        if *w == Source::Rowid {
            *s = Slot::Integer(rowid);
        }
    }
    Ok(())
}

/// The value of serial type `serial` at `offset` of `payload`, and its length.
fn serial_value(payload: &[u8], offset: usize, serial: u64) -> Result<(Slot, usize), Unusable> {
    let bytes = |n: usize| {
        payload
            .get(offset..offset + n)
            .ok_or_else(|| Unusable("a record's value runs past its payload".into()))
    };
    let integer = |n: usize| -> Result<i64, Unusable> {
        let b = bytes(n)?;
        let mut v: i64 = if b[0] & 0x80 != 0 { -1 } else { 0 };
        for byte in b {
            v = (v << 8) | *byte as i64;
        }
        Ok(v)
    };
    Ok(match serial {
        0 => (Slot::Null, 0),
        1 => (Slot::Integer(integer(1)?), 1),
        2 => (Slot::Integer(integer(2)?), 2),
        3 => (Slot::Integer(integer(3)?), 3),
        4 => (Slot::Integer(integer(4)?), 4),
        5 => (Slot::Integer(integer(6)?), 6),
        6 => (Slot::Integer(integer(8)?), 8),
        7 => {
            let b: [u8; 8] = bytes(8)?.try_into().expect("8 bytes");
            (Slot::Real(f64::from_be_bytes(b)), 8)
        }
        8 => (Slot::Integer(0), 0),
        9 => (Slot::Integer(1), 0),
        10 | 11 => return unusable("a reserved serial type"),
        n => {
            let length = usize::try_from((n - 12) / 2).map_err(|_| Unusable("length".into()))?;
            bytes(length)?;
            let end = offset + length;
            if n % 2 == 0 {
                (Slot::Blob(offset, end), length)
            } else {
                (Slot::Text(offset, end), length)
            }
        }
    })
}

/// A SQLite varint at `at`: its value and length (1–9 bytes, big-endian groups of 7 bits, the
/// ninth byte whole).
fn varint(bytes: &[u8], at: usize) -> Result<(u64, usize), Unusable> {
    let mut value = 0u64;
    for i in 0..9 {
        let byte = *bytes
            .get(at + i)
            .ok_or_else(|| Unusable("a varint runs past its page".into()))?;
        if i == 8 {
            return Ok(((value << 8) | byte as u64, 9));
        }
        value = (value << 7) | (byte & 0x7f) as u64;
        if byte & 0x80 == 0 {
            return Ok((value, i + 1));
        }
    }
    unreachable!("nine bytes at most")
}

fn be16(bytes: &[u8], at: usize) -> Result<u16, Unusable> {
    let b = bytes
        .get(at..at + 2)
        .ok_or_else(|| Unusable("a page offset past its end".into()))?;
    Ok(u16::from_be_bytes([b[0], b[1]]))
}

fn be32(bytes: &[u8], at: usize) -> Result<u32, Unusable> {
    let b = bytes
        .get(at..at + 4)
        .ok_or_else(|| Unusable("a page offset past its end".into()))?;
    Ok(u32::from_be_bytes([b[0], b[1], b[2], b[3]]))
}

#[cfg(test)]
mod tests;
