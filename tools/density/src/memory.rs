//! The memory a run needs (`--max-memory-mb`, `memory_estimate_mb` in the summary), counted
//! from what the code holds at its peak: the records and their index lists, the grid-sized
//! buffers of the class sums and comparisons, the FFT spectra, and the per-thread buffers of
//! the relabellings. Checked against the measured peak (GNU time's maximum resident set size)
//! in BENCHMARKS.md and in `tests/tests/memory.rs` (within 1.0–1.5 ×). Not counted: the
//! type probabilities' own sums and relabellings (`--type-probabilities`).

use stance_core::grid::Grid;
use stance_core::host::shard::Tiling;

use crate::convolve::{fast_size, radius_cells};
use crate::estimate::Method;
use crate::params::Config;
use crate::tiles;

/// Resident bytes of the process before it reads a record: the executable with GDAL, PROJ and
/// SQLite loaded, their caches and the input's checksum buffers. Measured: 37.5 MiB resident
/// just before the records are read (release build, 2026-12-03); 40 MiB kept.
pub const BASE_BYTES: f64 = 40.0 * 1024.0 * 1024.0;

/// Bytes held per record while the surfaces are made (the peak; reading holds less per
/// record — fid 8, x 8, y 8, text code 4 and the class 1 = 29 — and no grid, so the peak
/// comes later): x and y (f64, 16), the class (1), the slice's member indices (usize, 8), the
/// same indices split by class (usize, 8), and the abandoned halves of those class lists,
/// which grow by doubling and whose smaller copies the allocator keeps (up to 8), and what the
/// page reader leaves behind of the parts it reads in parallel and joins into one column each
/// (8; measured after the reader changed, 2026-12-03: peaks of 159, 332 and 483 MiB at 0.92,
/// 4.6 and 9.1 million records against 156, 287 and 434 before). Re-measure after a change to
/// the reader.
pub const RECORD_BYTES: f64 = 16.0 + 1.0 + 8.0 + 8.0 + 8.0 + 8.0;

/// Extra bytes per record with `--weight-field` (f64).
pub const WEIGHT_BYTES: f64 = 8.0;

/// Extra bytes per record with `--time-field` (`Option<i64>`).
pub const TIME_BYTES: f64 = 16.0;

/// Extra bytes per record of an adaptive estimate: its level (u16, 2) and, in every class sum,
/// the records split by level (usize, 8).
pub const ADAPTIVE_BYTES: f64 = 2.0 + 8.0;

/// Grid-sized f64 buffers that glibc keeps after they are freed: once a large block is freed
/// its mmap threshold rises to that block's size, so later blocks of the same order come from
/// the heap and stay resident when freed (measured: about 25 MiB, three f64 grids of 934,000
/// cells, above the live buffers).
pub const RETAINED_GRIDS: f64 = 3.0;

/// Multiplier over the bytes counted: the allocator's per-thread arenas and the order in
/// which threads free move the measured peak by a few per cent between runs; the guard stays
/// above it.
pub const HEADROOM: f64 = 1.15;

/// What the estimate depends on besides the configuration.
#[derive(Debug, Clone, Copy)]
pub struct Shape<'a> {
    /// The grid of the surfaces.
    pub grid: &'a Grid,
    /// Records held.
    pub records: usize,
    /// With a weight per record.
    pub weighted: bool,
    /// With a time per record.
    pub timed: bool,
    /// Bandwidth levels (1 unless adaptive).
    pub levels: usize,
    /// The bandwidth (m) of the surfaces' grid margin.
    pub h_m: f64,
    /// The largest bandwidth (m), which sets the FFT padding.
    pub h_max_m: f64,
    /// How the sums are computed.
    pub method: Method,
    /// With a mask on the grid.
    pub masked: bool,
}

/// Bytes of one spectrum (`pad_cols / 2 + 1` complex f64 per padded row) of a
/// `rows × cols` field convolved with kernels reaching `h_max_m`, as
/// [`crate::convolve::Convolver::new`] pads it.
fn spectrum_bytes(config: &Config, rows: usize, cols: usize, cell_m: f64, h_max_m: f64) -> f64 {
    let radius = radius_cells(config.kernel, h_max_m, cell_m);
    let pad_rows = fast_size(rows + radius + 1);
    let pad_cols = fast_size((cols + radius + 1).max(2)).next_multiple_of(2);
    (pad_rows * (pad_cols / 2 + 1) * 16) as f64
}

/// The estimated peak in bytes (times [`HEADROOM`]).
pub fn estimate(config: &Config, shape: &Shape<'_>) -> f64 {
    let grid = shape.grid;
    let n = shape.records as f64;
    let mut per_record = RECORD_BYTES;
    if shape.weighted {
        per_record += WEIGHT_BYTES;
    }
    if shape.timed {
        per_record += TIME_BYTES;
    }
    if shape.levels > 1 {
        per_record += ADAPTIVE_BYTES;
    }
    let records = n * per_record;
    let cells = grid.len() as f64;
    let g8 = cells * 8.0;
    let g4 = cells * 4.0;
    let levels = shape.levels as f64;
    let grid_bytes = match config.tiling {
        Tiling::Whole => {
            let fft = shape.method == Method::Fft || (shape.masked && config.edge_correct);
            let spectrum = match fft {
                true => spectrum_bytes(config, grid.rows, grid.cols, grid.cell_m, shape.h_max_m),
                false => 0.0,
            };
            // The estimator's kernel spectra, one per level, and with edge correction the
            // kernel mass inside the mask per level (f64 per cell); the mask flags (1 byte).
            let held = levels * spectrum
                + if shape.masked && config.edge_correct {
                    levels * g8
                } else {
                    0.0
                }
                + if shape.masked { cells } else { 0.0 };
            // The last class sum: the two earlier classes' sums (f64 grids), one field
            // spectrum per level, their product and the result (an FFT sum), or the level and
            // the result (direct sums).
            let last_sum = match shape.method {
                Method::Fft => 3.0 * g8 + (levels + 1.0) * spectrum,
                Method::Direct => 4.0 * g8,
            };
            // The comparisons: three class sums, the two compared classes scaled, the
            // surface being made, and while it is written its f32 copy and encoded tiles.
            let comparisons = 6.0 * g8 + 2.0 * g4;
            let relabelling = relabelling_bytes(config, shape, spectrum);
            held + last_sum.max(comparisons) + relabelling + RETAINED_GRIDS * g8
        }
        Tiling::Tile { index, count } => {
            // A tile keeps its band's sums of every class (f64), and convolves the band's
            // window (band + the kernel's reach) on its own: a spectrum for the kernel, one
            // for the field and their product, the window's binned field and result; the
            // records near the window (usize, at most every record).
            let band = tiles::band(grid, index, count).len() as f64 * grid.cols as f64;
            let window = tiles::window(grid, config.kernel, shape.h_m, index, count);
            let window_cells = window.len() as f64 * grid.cols as f64;
            let work = match shape.method {
                Method::Fft => {
                    3.0 * spectrum_bytes(
                        config,
                        window.len(),
                        grid.cols,
                        grid.cell_m,
                        shape.h_max_m,
                    ) + 2.0 * window_cells * 8.0
                }
                Method::Direct => band * 8.0,
            };
            let mask = if shape.masked { cells } else { 0.0 };
            3.0 * band * 8.0 + work + mask + n * 8.0 + RETAINED_GRIDS * band * 8.0
        }
        // A merge reads every tile's sums (three f64 grids) and makes the comparisons as a
        // whole run does, without transforms.
        Tiling::Merge(_) => 3.0 * g8 + 6.0 * g8 + 2.0 * g4 + RETAINED_GRIDS * g8,
    };
    HEADROOM * (BASE_BYTES + records + grid_bytes)
}

/// Per-thread buffers of the relabellings (`--permutations`): each worker thread holds its
/// counts (two u32 per cell), its copy of the pooled labels (usize per record, at most every
/// record) and the working set of a class sum (the field spectra and product, the binned field
/// and result); the run holds the pooled sum, the testable flags and the p-values.
fn relabelling_bytes(config: &Config, shape: &Shape<'_>, spectrum: f64) -> f64 {
    if config.permutations == 0 {
        return 0.0;
    }
    let cells = shape.grid.len() as f64;
    let threads = rayon::current_num_threads() as f64;
    let sum = match shape.method {
        Method::Fft => (shape.levels as f64 + 1.0) * spectrum + 2.0 * cells * 8.0,
        Method::Direct => 2.0 * cells * 8.0,
    };
    let per_thread = 2.0 * cells * 4.0 + shape.records as f64 * 8.0 + sum;
    threads * per_thread + cells * (8.0 + 1.0 + 2.0 * 4.0 + 2.0 * 8.0)
}

/// What a refusal names: the grid (or the tile) and the levels.
pub fn what(config: &Config, shape: &Shape<'_>) -> String {
    let grid = shape.grid;
    let levels = match shape.levels {
        1 => String::new(),
        l => format!(", {l} bandwidth levels"),
    };
    match config.tiling {
        Tiling::Tile { index, count } => format!(
            "{} records and a tile of {}×{} cells{levels}",
            shape.records,
            grid.cols,
            tiles::band(grid, index, count).len()
        ),
        _ => format!(
            "{} records and a {}×{} grid{levels}",
            shape.records, grid.cols, grid.rows
        ),
    }
}
