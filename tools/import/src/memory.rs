//! The memory an import needs (`--max-memory-mb`, `memory_estimate_mb` in the summary). The
//! rows stream from the input to the staging file, so what grows with the input is what the
//! run keeps per row: the duplicate keys, the per-author counts and the spatial index's
//! entries, which are packed (sorted) at the end. The peak is that packing. Checked against
//! the measured peak in BENCHMARKS.md and `tests/tests/memory.rs` (within 1.0–1.5 ×).

/// Resident bytes of an import apart from what it keeps per row: the executable with GDAL,
/// PROJ and SQLite, the reader's buffers and the staging file's page cache. Measured: 54.9 MiB
/// for an import of 10,000 CSV rows (release build, 2026-12-03).
pub const BASE_BYTES: f64 = 55.0 * 1024.0 * 1024.0;

/// Bytes per record written at the peak, the packing of the spatial index: its entries as
/// collected while writing (fid i64 + envelope 4 × f64 = 40), their 32-bit copy being sorted
/// (fid + 4 × f32 = 24) and the stable sort's scratch (half the copy, 12).
pub const INDEX_BYTES: f64 = 40.0 + 24.0 + 12.0;

/// Multiplier over the bytes counted (the allocator's arenas, run-to-run variation).
pub const HEADROOM: f64 = 1.15;

/// Bytes of a hash table (hashbrown, as std's `HashSet`/`HashMap`) holding `entries` of
/// `slot` bytes: a power-of-two number of buckets at least 8/7 of the entries, each with its
/// slot and one control byte.
pub fn table_bytes(entries: f64, slot: f64) -> f64 {
    if entries <= 0.0 {
        return 0.0;
    }
    let buckets = ((entries * 8.0 / 7.0).ceil() as u64)
        .next_power_of_two()
        .max(4);
    buckets as f64 * (slot + 1.0)
}

/// What an import holds at its peak.
#[derive(Debug, Clone, Copy)]
pub struct Held {
    /// Records written (their index entries are packed at the end).
    pub records: f64,
    /// Distinct (author, text) keys of the duplicate check (u128 each).
    pub duplicate_keys: f64,
    /// Distinct authors counted for `--max-per-author` (a `String` and a count each).
    pub authors: f64,
}

impl Held {
    /// The same held after `factor` times the rows read so far (a projection from the share
    /// of the input read).
    pub fn scaled(self, factor: f64) -> Held {
        Held {
            records: self.records * factor,
            duplicate_keys: self.duplicate_keys * factor,
            authors: self.authors * factor,
        }
    }

    /// The estimated peak in bytes.
    pub fn estimate(&self) -> f64 {
        // Author counts: the table's (String 24 + count 8) slots and each name's heap block
        // (about 32 bytes for the short ids of a typical export).
        let authors = table_bytes(self.authors, 32.0) + self.authors * 32.0;
        HEADROOM
            * (BASE_BYTES
                + self.records * INDEX_BYTES
                + table_bytes(self.duplicate_keys, 16.0)
                + authors)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn tables_grow_by_powers_of_two_at_seven_eighths() {
        // 917,504 = 7/8 of 2^20 fits 2^20 buckets; one more needs 2^21 (hashbrown's load
        // factor of 7/8).
        assert_eq!(table_bytes(917_504.0, 16.0), (1u64 << 20) as f64 * 17.0);
        assert_eq!(table_bytes(917_505.0, 16.0), (1u64 << 21) as f64 * 17.0);
        assert_eq!(table_bytes(0.0, 16.0), 0.0);
    }
}
