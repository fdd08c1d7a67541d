//! Tiles: one grid split into bands of rows, each computed apart (from the points within the
//! kernel's reach) and merged into one coverage; the checks are the shards' (`super::gather`).

use super::*;

/// `--tile` and `--merge-tiles`, for tools whose grid cells can be computed apart (each cell
/// from the points within the kernel's reach).
#[derive(Debug, Clone, Default, clap::Args, serde::Serialize, schemars::JsonSchema)]
#[serde(rename_all = "kebab-case")]
pub struct TileArgs {
    /// Compute only tile K of N of the grid (K from 1; tile K is the K-th of N bands of grid
    /// rows, north to south) and write its cells as the attribute layer <name>_tile_K_of_N,
    /// for a later --merge-tiles run with the same options. No other layer is written.
    #[arg(long, value_name = "K/N")]
    pub tile: Option<String>,

    /// GeoPackage files, or directories of them (comma-separated), holding every tile of this
    /// run (layers <name>_tile_K_of_N): the grid's cells are taken from them instead of
    /// computed, and the outputs are those of a run on one machine with the same options.
    #[arg(long, value_name = "FILES", conflicts_with = "tile")]
    pub merge_tiles: Option<String>,
}

/// How a run treats its grid.
#[derive(Debug, Clone, PartialEq)]
pub enum Tiling {
    /// Compute every cell (the usual run).
    Whole,
    /// Compute the rows of tile `index` (1-based) of `count` and write them.
    Tile {
        /// K.
        index: usize,
        /// N.
        count: usize,
    },
    /// Take every cell from the tiles in these files.
    Merge(Vec<PathBuf>),
}

impl TileArgs {
    /// Checks the options.
    ///
    /// # Errors
    /// [`Error::BadArgument`] naming the option.
    pub fn tiling(&self) -> Result<Tiling> {
        if let Some(spec) = &self.tile {
            let (index, count) = parse_k_of_n("--tile", spec)?;
            return Ok(Tiling::Tile { index, count });
        }
        match &self.merge_tiles {
            None => Ok(Tiling::Whole),
            Some(list) => Ok(Tiling::Merge(gpkg_files("--merge-tiles", list)?)),
        }
    }
}

impl Tiling {
    /// The grid rows this run computes out of `rows`: all, the tile's band
    /// (⌊(K−1)·rows/N⌋ .. ⌊K·rows/N⌋), or none when merging.
    pub fn rows(&self, rows: usize) -> Range<usize> {
        match self {
            Tiling::Whole => 0..rows,
            Tiling::Tile { index, count } => block(*index, *count, rows),
            Tiling::Merge(_) => 0..0,
        }
    }
}

/// Cell values of a band of grid rows: named parts, each `rows.len() × cols` values, row-major.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct TileData {
    /// Part name → values of the band's cells.
    pub parts: BTreeMap<String, Vec<f64>>,
}

/// One tiled run: its rows, the fingerprint its tiles carry and, when merging, its checked
/// tiles (whose parts are assembled one at a time, so a merge holds one whole-grid part, not
/// all of them).
#[derive(Debug)]
pub struct TileRun {
    tiling: Tiling,
    rows: usize,
    cols: usize,
    fingerprint: Value,
    tiles: Vec<Found>,
    parts: Vec<String>,
}

impl TileRun {
    /// Fingerprints a tiled run of `tool` on a grid of `rows × cols` cells and, when merging,
    /// reads, checks and assembles its tiles. `plan` (the grid, the bandwidth… as JSON) joins
    /// the fingerprint, so a tile planned otherwise is refused by name. Call after every input
    /// is read.
    ///
    /// # Errors
    /// A missing, duplicated or mismatched tile, named.
    pub fn prepare<P: serde::Serialize>(
        tiling: &Tiling,
        (rows, cols): (usize, usize),
        tool: &str,
        params: &P,
        plan: Value,
        run: &mut Run,
    ) -> Result<Self> {
        let mut prepared = TileRun {
            tiling: tiling.clone(),
            rows,
            cols,
            fingerprint: Value::Null,
            tiles: Vec::new(),
            parts: Vec::new(),
        };
        if *tiling == Tiling::Whole {
            return Ok(prepared);
        }
        let mut fingerprint = fingerprint(run, tool, params)?;
        fingerprint["plan"] = plan;
        if let Tiling::Merge(files) = tiling {
            let found = gather(TILES, files, &run.name, rows, &fingerprint)?;
            // Every tile holds every part, each with one row per grid row of its band (an
            // empty band holds none).
            let mut parts: Option<Vec<String>> = None;
            for f in &found {
                let band = block(f.index, f.count, rows);
                if band.is_empty() {
                    continue;
                }
                let counts = part_rows(f)?;
                if let Some((part, n)) = counts.iter().find(|(_, n)| *n != band.len()) {
                    return Err(Error::Failed(format!(
                        "{}: part '{part}' has {n} of its {} rows",
                        f.origin,
                        band.len()
                    )));
                }
                let names: Vec<String> = counts.into_iter().map(|(p, _)| p).collect();
                match &parts {
                    None => parts = Some(names),
                    Some(first) => {
                        if let Some(part) = first.iter().find(|p| !names.contains(p)) {
                            return Err(missing_part(&f.origin, part));
                        }
                        if let Some(part) = names.iter().find(|p| !first.contains(p)) {
                            return Err(Error::Failed(format!(
                                "{} holds part '{part}', which the other tiles lack",
                                f.origin
                            )));
                        }
                    }
                }
            }
            prepared.parts = parts.unwrap_or_default();
            prepared.tiles = found;
        }
        prepared.fingerprint = fingerprint;
        Ok(prepared)
    }

    /// The rows this run computes itself.
    pub fn rows(&self) -> Range<usize> {
        self.tiling.rows(self.rows)
    }

    /// Whether this run computes one tile (and writes nothing else).
    pub fn is_tile(&self) -> bool {
        matches!(self.tiling, Tiling::Tile { .. })
    }

    /// Whether this run merges tiles.
    pub fn is_merge(&self) -> bool {
        matches!(self.tiling, Tiling::Merge(_))
    }

    /// The names of the parts every tile holds (merging runs).
    pub fn parts(&self) -> &[String] {
        &self.parts
    }

    /// Part `part` of the whole grid (`rows × cols` values), assembled from the tiles of a
    /// merging run.
    ///
    /// # Errors
    /// Not a merging run, a part the tiles do not hold, or an unreadable tile.
    pub fn merged(&self, part: &str) -> Result<Vec<f64>> {
        if !self.is_merge() {
            return Err(Error::Failed("tiles read outside a merging run".into()));
        }
        if !self.parts.iter().any(|p| p == part) {
            return Err(Error::Failed(format!(
                "the tiles hold no part '{part}': they were not written for this run"
            )));
        }
        let cols = self.cols;
        let mut whole = vec![f64::NAN; self.rows * cols];
        for f in &self.tiles {
            let band = block(f.index, f.count, self.rows);
            if band.is_empty() {
                continue;
            }
            let values = read_tile_part(f, part, band.clone(), cols)?;
            whole[band.start * cols..band.end * cols].copy_from_slice(&values);
        }
        Ok(whole)
    }

    /// For a tile: writes `data` (its band's cells) and returns the run's summary
    /// (`{"tile": …}`); otherwise None.
    ///
    /// # Errors
    /// A part of the wrong size, or staging failures.
    pub fn write(&self, run: &mut Run, data: &TileData) -> Result<Option<Value>> {
        let Tiling::Tile { index, count } = self.tiling else {
            return Ok(None);
        };
        let band = self.rows();
        let name = TILES.layer(&run.name, index, count);
        let fields = [
            FieldDef::new("part", FieldKind::Text),
            FieldDef::new("row", FieldKind::Integer),
            FieldDef::new("cells", FieldKind::Text),
        ];
        let mut writer = run
            .output()
            .create_vector(&name, GeometryKind::None, None, &fields)?;
        let mut text = String::new();
        for (part, values) in &data.parts {
            if values.len() != band.len() * self.cols {
                return Err(Error::Failed(format!(
                    "tile part '{part}' has {} values for {} rows of {} cells",
                    values.len(),
                    band.len(),
                    self.cols
                )));
            }
            for (offset, row) in values.chunks(self.cols.max(1)).enumerate() {
                text.clear();
                encode_f64s(row, &mut text);
                writer.add(
                    Shape::None,
                    &[
                        FieldData::Text(part),
                        FieldData::Integer((band.start + offset) as i64),
                        FieldData::Text(&text),
                    ],
                )?;
            }
        }
        writer.finish()?;
        run.log(format!(
            "tile {index} of {count}: rows {}..{} of {} written to {name}",
            band.start, band.end, self.rows
        ));
        Ok(Some(json!({ "tile": {
            "layer": name,
            "tile": format!("{index}/{count}"),
            "first_row": band.start,
            "rows": band.len(),
            "total_rows": self.rows,
            "cols": self.cols,
            "fingerprint": self.fingerprint,
        }})))
    }
}

/// The parts of a tile's layer with their numbers of rows.
fn part_rows(found: &Found) -> Result<Vec<(String, usize)>> {
    let connection = crate::gpkg::open_sqlite_read(&found.file)?;
    let context = format!("reading {}", found.origin);
    let sql = format!(
        "SELECT part, count(*) FROM \"{}\" GROUP BY part ORDER BY part",
        found.layer.replace('"', "\"\"")
    );
    let mut statement = connection.prepare(&sql).map_err(Error::sqlite(&context))?;
    let parts = statement
        .query_map([], |r| {
            Ok((r.get::<_, String>(0)?, r.get::<_, i64>(1)? as usize))
        })
        .map_err(Error::sqlite(&context))?
        .collect::<std::result::Result<Vec<_>, _>>()
        .map_err(Error::sqlite(&context))?;
    Ok(parts)
}

/// Part `part` of a tile: `band.len() × cols` values, each grid row of the band once, in order.
fn read_tile_part(found: &Found, part: &str, band: Range<usize>, cols: usize) -> Result<Vec<f64>> {
    let connection = crate::gpkg::open_sqlite_read(&found.file)?;
    let context = format!("reading {}", found.origin);
    let sql = format!(
        "SELECT row, cells FROM \"{}\" WHERE part = ?1 ORDER BY row",
        found.layer.replace('"', "\"\"")
    );
    let mut statement = connection.prepare(&sql).map_err(Error::sqlite(&context))?;
    let mut cursor = statement.query([part]).map_err(Error::sqlite(&context))?;
    let mut values = Vec::with_capacity(band.len() * cols);
    let mut expected = band.start;
    while let Some(row) = cursor.next().map_err(Error::sqlite(&context))? {
        let at: i64 = row.get(0).map_err(Error::sqlite(&context))?;
        let text: String = row.get(1).map_err(Error::sqlite(&context))?;
        let decoded = decode_f64s(&text).filter(|d| d.len() == cols);
        match decoded {
            Some(cells) if at >= 0 && at as usize == expected => values.extend(cells),
            _ => {
                return Err(Error::Failed(format!(
                    "{context}: part '{part}' row {at} is out of place or not {cols} cells"
                )))
            }
        }
        expected += 1;
    }
    if expected != band.end {
        return Err(Error::Failed(format!(
            "{context}: part '{part}' has {} of its {} rows",
            expected - band.start,
            band.len()
        )));
    }
    Ok(values)
}

const BASE64: &[u8; 64] = b"ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789+/";

/// Appends `values` as base64 of their little-endian bytes (exact: every bit of every double).
pub fn encode_f64s(values: &[f64], out: &mut String) {
    let bytes: Vec<u8> = values.iter().flat_map(|v| v.to_le_bytes()).collect();
    out.reserve(bytes.len().div_ceil(3) * 4);
    for chunk in bytes.chunks(3) {
        let b = [
            chunk[0],
            chunk.get(1).copied().unwrap_or(0),
            chunk.get(2).copied().unwrap_or(0),
        ];
        let n = (u32::from(b[0]) << 16) | (u32::from(b[1]) << 8) | u32::from(b[2]);
        for k in 0..=chunk.len() {
            out.push(char::from(BASE64[((n >> (18 - 6 * k)) & 63) as usize]));
        }
        for _ in chunk.len()..3 {
            out.push('=');
        }
    }
}

/// The doubles of [`encode_f64s`]; None for text that is not such base64.
pub fn decode_f64s(text: &str) -> Option<Vec<f64>> {
    let mut bytes = Vec::with_capacity(text.len() / 4 * 3);
    let mut table = [u8::MAX; 256];
    for (value, &c) in BASE64.iter().enumerate() {
        table[usize::from(c)] = value as u8;
    }
    let digit = |c: u8| match table[usize::from(c)] {
        u8::MAX => None,
        d => Some(u32::from(d)),
    };
    for chunk in text.as_bytes().chunks(4) {
        if chunk.len() != 4 {
            return None;
        }
        let pad = chunk.iter().rev().take_while(|&&c| c == b'=').count();
        if pad > 2 {
            return None;
        }
        let mut n = 0u32;
        for &c in &chunk[..4 - pad] {
            n = (n << 6) | digit(c)?;
        }
        n <<= 6 * pad as u32;
        let got = [(n >> 16) as u8, (n >> 8) as u8, n as u8];
        bytes.extend_from_slice(&got[..3 - pad]);
    }
    if bytes.len() % 8 != 0 {
        return None;
    }
    Some(
        bytes
            .chunks_exact(8)
            .map(|c| f64::from_le_bytes(c.try_into().unwrap_or([0; 8])))
            .collect(),
    )
}
