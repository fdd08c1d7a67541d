//! Shards of a Monte Carlo run: `--shard K/N` runs one block of the replicates and writes their
//! partial result as an attribute layer; `--merge-shards` gathers the N partial results and the
//! run finishes as if it had drawn every replicate itself.
//!
//! Replicate r always uses its own seed (`montecarlo::replicate_seed(seed, r)`), so the
//! replicates of shard K are exactly those of the one-machine run, and the merged outputs are
//! bit-identical to it. Counts (exceedances per cell or area) merge by summing, per-replicate
//! values (the largest ratio of each replicate, the statistic of each permutation) by
//! concatenating in shard order.
//!
//! A shard's layer `<name>_shard_<K>_of_<N>` holds rows `(part, item, value)`; its provenance
//! record says which replicates it holds and under which parameters and inputs, and the merge
//! refuses shards that are missing, duplicated or written under other parameters, naming the
//! shard.

use std::collections::BTreeMap;
use std::ops::Range;
use std::path::{Path, PathBuf};

use serde_json::{json, Value};

use crate::error::{Error, Result};
use crate::gpkg::stage::{FieldData, FieldDef, FieldKind, GeometryKind, Shape};
use crate::host::Run;

/// `--shard` and `--merge-shards`, for tools whose replicates can be split.
#[derive(Debug, Clone, Default, clap::Args, serde::Serialize, schemars::JsonSchema)]
#[serde(rename_all = "kebab-case")]
pub struct ShardArgs {
    /// Run only shard K of N of the Monte Carlo replicates (K from 1) and write their partial
    /// result as the attribute layer <name>_shard_K_of_N, for a later --merge-shards run with
    /// the same options. No other layer is written.
    #[arg(long, value_name = "K/N")]
    pub shard: Option<String>,

    /// GeoPackage files, or directories of them (comma-separated), holding every shard of this
    /// run (layers <name>_shard_K_of_N): the replicates are taken from them instead of drawn,
    /// and the outputs are those of a run on one machine with the same options and seed.
    #[arg(long, value_name = "FILES", conflicts_with = "shard")]
    pub merge_shards: Option<String>,
}

/// How a run treats its replicates.
#[derive(Debug, Clone, PartialEq)]
pub enum Sharding {
    /// Draw every replicate (the usual run).
    Whole,
    /// Draw the replicates of shard `index` (1-based) of `count` and write them.
    Shard {
        /// K.
        index: usize,
        /// N.
        count: usize,
    },
    /// Take every replicate from the shards in these files.
    Merge(Vec<PathBuf>),
}

impl ShardArgs {
    /// Checks the options.
    ///
    /// # Errors
    /// [`Error::BadArgument`] naming the option.
    pub fn sharding(&self) -> Result<Sharding> {
        if let Some(spec) = &self.shard {
            let (index, count) = parse_k_of_n("--shard", spec)?;
            return Ok(Sharding::Shard { index, count });
        }
        match &self.merge_shards {
            None => Ok(Sharding::Whole),
            Some(list) => Ok(Sharding::Merge(gpkg_files("--merge-shards", list)?)),
        }
    }
}

/// `K/N` with 1 ≤ K ≤ N, the value of `option`.
///
/// # Errors
/// [`Error::BadArgument`] naming the option and the value.
pub fn parse_k_of_n(option: &str, spec: &str) -> Result<(usize, usize)> {
    let parsed = spec.split_once('/').and_then(|(k, n)| {
        Some((
            k.trim().parse::<usize>().ok()?,
            n.trim().parse::<usize>().ok()?,
        ))
    });
    match parsed {
        Some((index, count)) if index >= 1 && index <= count => Ok((index, count)),
        _ => Err(Error::argument(
            option,
            format!("'{spec}' is not K/N with 1 ≤ K ≤ N (e.g. 2/8)"),
        )),
    }
}

/// The GeoPackages of `list` (comma-separated files, or directories whose `.gpkg` files are
/// taken in name order), the value of `option`.
///
/// # Errors
/// [`Error::BadArgument`] naming the option: an item that is neither, or no file at all.
pub fn gpkg_files(option: &str, list: &str) -> Result<Vec<PathBuf>> {
    let mut files = Vec::new();
    for item in list.split(',').map(str::trim).filter(|s| !s.is_empty()) {
        let path = PathBuf::from(item);
        if path.is_dir() {
            let mut found: Vec<PathBuf> = std::fs::read_dir(&path)
                .map_err(|e| Error::argument(option, format!("{item}: {e}")))?
                .filter_map(|e| e.ok().map(|e| e.path()))
                .filter(|p| {
                    p.extension()
                        .is_some_and(|x| x.eq_ignore_ascii_case("gpkg"))
                })
                .collect();
            found.sort();
            files.extend(found);
        } else if path.is_file() {
            files.push(path);
        } else {
            return Err(Error::argument(
                option,
                format!("'{item}' is neither a GeoPackage file nor a directory"),
            ));
        }
    }
    if files.is_empty() {
        return Err(Error::argument(
            option,
            format!("no GeoPackage found in '{list}'"),
        ));
    }
    Ok(files)
}

impl Sharding {
    /// The replicates this run draws out of `total`: all, the shard's contiguous block
    /// (⌊(K−1)·R/N⌋ .. ⌊K·R/N⌋), or none when merging.
    pub fn replicates(&self, total: usize) -> Range<usize> {
        match self {
            Sharding::Whole => 0..total,
            Sharding::Shard { index, count } => block(*index, *count, total),
            Sharding::Merge(_) => 0..0,
        }
    }
}

/// One tool run's sharding: which replicates it draws, the fingerprint its shards carry and,
/// when it merges, the shards read back.
#[derive(Debug)]
pub struct ShardRun {
    sharding: Sharding,
    total: usize,
    fingerprint: Value,
    merged: Option<Merged>,
}

impl ShardRun {
    /// Fingerprints a sharded run of `tool` with `total` replicates and, when merging, reads
    /// and checks its shards. Call after every input is read (their checksums are part of the
    /// fingerprint).
    ///
    /// # Errors
    /// A missing, duplicated or mismatched shard, named.
    pub fn prepare<P: serde::Serialize>(
        sharding: &Sharding,
        total: usize,
        tool: &str,
        params: &P,
        run: &mut Run,
    ) -> Result<Self> {
        let mut prepared = ShardRun {
            sharding: sharding.clone(),
            total,
            fingerprint: Value::Null,
            merged: None,
        };
        let option = match sharding {
            Sharding::Whole => return Ok(prepared),
            Sharding::Shard { .. } => "--shard",
            Sharding::Merge(_) => "--merge-shards",
        };
        if total == 0 {
            return Err(Error::argument(
                option,
                "this run draws no replicates (0 asked), so there is nothing to split",
            ));
        }
        prepared.fingerprint = fingerprint(run, tool, params)?;
        if let Sharding::Merge(files) = sharding {
            prepared.merged = Some(merge(files, &run.name, total, &prepared.fingerprint)?);
        }
        Ok(prepared)
    }

    /// The replicates this run draws itself.
    pub fn drawn(&self) -> Range<usize> {
        self.sharding.replicates(self.total)
    }

    /// Whether the run writes its outputs (every run but a shard's).
    pub fn publishing(&self) -> bool {
        !matches!(self.sharding, Sharding::Shard { .. })
    }

    /// The shards of a merging run.
    pub fn merged(&self) -> Option<&Merged> {
        self.merged.as_ref()
    }

    /// For a shard: writes `partial` (built only when needed) and returns the run's summary
    /// (`{"shard": …}`); otherwise None.
    ///
    /// # Errors
    /// `partial`'s, or staging failures.
    pub fn write(
        &self,
        run: &mut Run,
        partial: impl FnOnce() -> Result<Partial>,
    ) -> Result<Option<Value>> {
        let Sharding::Shard { index, count } = self.sharding else {
            return Ok(None);
        };
        let partial = partial()?;
        let entry = write(
            run,
            (index, count),
            self.total,
            self.fingerprint.clone(),
            &partial,
        )?;
        run.log(format!(
            "shard {index} of {count}: replicates {} written to {}",
            entry["replicates"], entry["layer"]
        ));
        Ok(Some(json!({ "shard": entry })))
    }
}

/// Replicates of shard `index` (1-based) of `count` out of `total`.
pub fn block(index: usize, count: usize, total: usize) -> Range<usize> {
    (index - 1) * total / count..index * total / count
}

/// The layer name of shard `index` of `count`.
pub fn layer_name(base: &str, index: usize, count: usize) -> String {
    format!("{base}_shard_{index}_of_{count}")
}

/// The partial result of a shard: named parts, each a vector of numbers (counts or values).
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Partial {
    /// Part name → values, in item order.
    pub parts: BTreeMap<String, Vec<f64>>,
}

impl Partial {
    /// Adds counts (exceedances per cell or area): they merge by summing.
    pub fn counts(&mut self, part: &str, counts: &[u32]) {
        self.parts.insert(
            part.to_owned(),
            counts.iter().map(|&c| f64::from(c)).collect(),
        );
    }

    /// Adds per-replicate values, in replicate order: they merge by concatenating.
    pub fn values(&mut self, part: &str, values: &[f64]) {
        self.parts.insert(part.to_owned(), values.to_vec());
    }
}

/// The merged shards: each part of every shard, in shard order.
#[derive(Debug, Clone)]
pub struct Merged {
    shards: Vec<Partial>,
    origin: Vec<String>,
    blocks: Vec<Range<usize>>,
}

impl Merged {
    /// Part `part` concatenated over the shards, each checked to hold one value per replicate
    /// of its block (per-replicate values, replicate order).
    ///
    /// # Errors
    /// A shard without the part, or with another number of values than its replicates.
    pub fn per_replicate(&self, part: &str) -> Result<Vec<f64>> {
        for ((shard, origin), block) in self.shards.iter().zip(&self.origin).zip(&self.blocks) {
            let values = shard
                .parts
                .get(part)
                .ok_or_else(|| missing_part(origin, part))?;
            if values.len() != block.len() {
                return Err(Error::Failed(format!(
                    "{origin}: part '{part}' has {} values for its {} replicates",
                    values.len(),
                    block.len()
                )));
            }
        }
        self.concat(part)
    }

    /// Part `part` summed over the shards (counts).
    ///
    /// # Errors
    /// A shard without the part, or with another length.
    pub fn sum(&self, part: &str) -> Result<Vec<u32>> {
        let mut total: Option<Vec<u32>> = None;
        for (shard, origin) in self.shards.iter().zip(&self.origin) {
            let values = shard
                .parts
                .get(part)
                .ok_or_else(|| missing_part(origin, part))?;
            let counts = values.iter().map(|&v| v as u32);
            match &mut total {
                None => total = Some(counts.collect()),
                Some(t) if t.len() == values.len() => {
                    t.iter_mut().zip(counts).for_each(|(a, b)| *a += b);
                }
                Some(t) => {
                    return Err(Error::Failed(format!(
                        "{origin}: part '{part}' has {} items, the first shard {}",
                        values.len(),
                        t.len()
                    )))
                }
            }
        }
        total.ok_or_else(|| Error::Failed("no shard to merge".into()))
    }

    /// Part `part` concatenated over the shards (per-replicate values, replicate order).
    ///
    /// # Errors
    /// A shard without the part.
    pub fn concat(&self, part: &str) -> Result<Vec<f64>> {
        let mut all = Vec::new();
        for (shard, origin) in self.shards.iter().zip(&self.origin) {
            let values = shard
                .parts
                .get(part)
                .ok_or_else(|| missing_part(origin, part))?;
            all.extend_from_slice(values);
        }
        Ok(all)
    }
}

fn missing_part(origin: &str, part: &str) -> Error {
    Error::Failed(format!(
        "{origin} has no part '{part}': it was not written for this run"
    ))
}

/// Options that do not change what a replicate draws or what the merge computes: left out of
/// the comparison of a shard's parameters with the merging run's.
/// The input's path is left out too: its checksum is compared instead.
const NOT_COMPARED: [&str; 12] = [
    "input",
    "output",
    "overwrite",
    "threads",
    "quiet",
    "verbose",
    "max-memory-mb",
    "describe",
    "shard",
    "merge-shards",
    "tile",
    "merge-tiles",
];

/// What must be equal between every shard and the merging run: the tool, its version, every
/// parameter that shapes the result, and the checksums of the inputs.
///
/// # Errors
/// An input that cannot be hashed.
pub fn fingerprint<P: serde::Serialize>(run: &mut Run, tool: &str, params: &P) -> Result<Value> {
    let mut parameters = serde_json::to_value(&run.common).unwrap_or(Value::Null);
    if let (Some(all), Ok(Value::Object(own))) =
        (parameters.as_object_mut(), serde_json::to_value(params))
    {
        all.extend(own);
        for key in NOT_COMPARED {
            all.remove(key);
        }
    }
    Ok(json!({
        "tool": tool,
        "version": crate::VERSION,
        "parameters": parameters,
        "inputs": run.input_checksums()?,
    }))
}

/// Writes `partial` as shard `index` of `count` (layer `<name>_shard_K_of_N`, rows part, item,
/// value). Returns the summary entry of the shard, which goes into the run's results (and so
/// into the layer's provenance record, where the merge reads it back).
///
/// # Errors
/// Staging failures.
pub fn write(
    run: &mut Run,
    (index, count): (usize, usize),
    total: usize,
    fingerprint: Value,
    partial: &Partial,
) -> Result<Value> {
    let name = layer_name(&run.name, index, count);
    let fields = [
        FieldDef::new("part", FieldKind::Text),
        FieldDef::new("item", FieldKind::Integer),
        FieldDef::new("value", FieldKind::Real),
    ];
    let mut writer = run
        .output()
        .create_vector(&name, GeometryKind::None, None, &fields)?;
    for (part, values) in &partial.parts {
        for (item, value) in values.iter().enumerate() {
            writer.add(
                Shape::None,
                &[
                    FieldData::Text(part),
                    FieldData::Integer(item as i64),
                    FieldData::Real(*value),
                ],
            )?;
        }
    }
    writer.finish()?;
    let range = block(index, count, total);
    Ok(json!({
        "layer": name,
        "shard": format!("{index}/{count}"),
        "first_replicate": range.start,
        "replicates": range.len(),
        "total_replicates": total,
        "fingerprint": fingerprint,
    }))
}

/// What a run is split into: the word in layer names and messages, the options, and the unit
/// each part holds a block of (replicates for shards, grid rows for tiles).
#[derive(Debug, Clone, Copy)]
pub struct Split {
    /// `shard` or `tile`: layers are `<name>_<word>_K_of_N`.
    pub word: &'static str,
    /// The option running one part (`--shard`).
    pub option: &'static str,
    /// The option merging the parts (`--merge-shards`).
    pub merge_option: &'static str,
    /// What the blocks count (`replicate`, `row`); the record keys are `first_<unit>` and
    /// `total_<unit>s`.
    pub unit: &'static str,
}

/// Shards of Monte Carlo replicates.
pub const SHARDS: Split = Split {
    word: "shard",
    option: "--shard",
    merge_option: "--merge-shards",
    unit: "replicate",
};

/// Tiles of a grid: blocks of rows.
pub const TILES: Split = Split {
    word: "tile",
    option: "--tile",
    merge_option: "--merge-tiles",
    unit: "row",
};

impl Split {
    /// The layer of part `index` of `count` of the run `base`.
    pub fn layer(&self, base: &str, index: usize, count: usize) -> String {
        format!("{base}_{}_{index}_of_{count}", self.word)
    }
}

/// One part (shard or tile) found in a file.
#[derive(Debug)]
pub struct Found {
    /// The file.
    pub file: PathBuf,
    /// Its layer.
    pub layer: String,
    /// K.
    pub index: usize,
    /// N.
    pub count: usize,
    /// The layer's provenance record.
    pub record: Value,
    /// `shard K of N (<layer> in <file>)`, for messages.
    pub origin: String,
}

/// Reads every shard of the run `base` from `files`, checks that shards 1..=N are each there
/// exactly once, hold the expected replicates and were written under `fingerprint`, and
/// returns them in shard order.
///
/// # Errors
/// A missing, duplicated or mismatched shard, named; unreadable files.
pub fn merge(files: &[PathBuf], base: &str, total: usize, fingerprint: &Value) -> Result<Merged> {
    let found = gather(SHARDS, files, base, total, fingerprint)?;
    let mut merged = Merged {
        shards: Vec::new(),
        origin: Vec::new(),
        blocks: Vec::new(),
    };
    for f in found {
        merged.shards.push(read_partial(&f)?);
        merged.blocks.push(block(f.index, f.count, total));
        merged.origin.push(f.origin);
    }
    Ok(merged)
}

/// Finds the parts of kind `split` of the run `base` in `files`, checks that parts 1..=N are
/// each there exactly once, hold their block of `total` units and were written under
/// `fingerprint`, and returns them in order.
///
/// # Errors
/// A missing, duplicated or mismatched part, named (one line, option `split.merge_option`).
pub fn gather(
    split: Split,
    files: &[PathBuf],
    base: &str,
    total: usize,
    fingerprint: &Value,
) -> Result<Vec<Found>> {
    let word = split.word;
    let mut found: Vec<Found> = Vec::new();
    for file in files {
        found.extend(parts_in(split, file, base)?);
    }
    let Some(count) = found.first().map(|f| f.count) else {
        return Err(Error::argument(
            split.merge_option,
            format!("no layer {base}_{word}_K_of_N in {}", list(files)),
        ));
    };
    if let Some(other) = found.iter().find(|f| f.count != count) {
        return Err(Error::argument(
            split.merge_option,
            format!(
                "{} in {} belongs to a run of {} {word}s, {} in {} to one of {count}",
                other.layer,
                other.file.display(),
                other.count,
                found[0].layer,
                found[0].file.display()
            ),
        ));
    }
    let mut by_index: BTreeMap<usize, Found> = BTreeMap::new();
    for f in found {
        if let Some(first) = by_index.get(&f.index) {
            return Err(Error::argument(
                split.merge_option,
                format!(
                    "{word} {} of {count} is there twice: {} in {} and in {}",
                    f.index,
                    f.layer,
                    first.file.display(),
                    f.file.display()
                ),
            ));
        }
        by_index.insert(f.index, f);
    }
    if let Some(missing) = (1..=count).find(|k| !by_index.contains_key(k)) {
        return Err(Error::argument(
            split.merge_option,
            format!(
                "{word} {missing} of {count} is missing (no layer {} in {}): rerun it with \
                 {} {missing}/{count}",
                split.layer(base, missing, count),
                list(files),
                split.option
            ),
        ));
    }
    let mut ordered = Vec::with_capacity(count);
    for (_, mut f) in by_index {
        f.origin = format!(
            "{word} {} of {count} ({} in {})",
            f.index,
            f.layer,
            f.file.display()
        );
        check_record(split, &f, total, fingerprint)?;
        ordered.push(f);
    }
    Ok(ordered)
}

fn list(files: &[PathBuf]) -> String {
    files
        .iter()
        .map(|f| f.display().to_string())
        .collect::<Vec<_>>()
        .join(", ")
}

/// The layers of kind `split` of run `base` in `file`, with their provenance records.
fn parts_in(split: Split, file: &Path, base: &str) -> Result<Vec<Found>> {
    let connection = crate::gpkg::open_sqlite_read(file)?;
    let context = format!("reading the {}s in {}", split.word, file.display());
    let mut statement = connection
        .prepare("SELECT table_name FROM gpkg_contents")
        .map_err(Error::sqlite(&context))?;
    let names: Vec<String> = statement
        .query_map([], |r| r.get(0))
        .map_err(Error::sqlite(&context))?
        .filter_map(std::result::Result::ok)
        .collect();
    let prefix = format!("{base}_{}_", split.word);
    let mut found = Vec::new();
    for layer in names {
        let Some(rest) = layer.strip_prefix(&prefix) else {
            continue;
        };
        let Some((k, n)) = rest.split_once("_of_") else {
            continue;
        };
        let (Ok(index), Ok(count)) = (k.parse::<usize>(), n.parse::<usize>()) else {
            continue;
        };
        let record = crate::gpkg::provenance_of(file, &layer).unwrap_or(Value::Null);
        found.push(Found {
            file: file.to_owned(),
            layer,
            index,
            count,
            record,
            origin: String::new(),
        });
    }
    Ok(found)
}

/// Checks a part's provenance: its block and its fingerprint.
fn check_record(split: Split, found: &Found, total: usize, fingerprint: &Value) -> Result<()> {
    let (word, unit, origin) = (split.word, split.unit, &found.origin);
    let entry = &found.record["results"][word];
    if entry.is_null() {
        return Err(Error::argument(
            split.merge_option,
            format!(
                "{origin} has no {word} record in its provenance; it was not written by {}",
                split.option
            ),
        ));
    }
    if let Some(difference) = first_difference(&entry["fingerprint"], fingerprint, "", word) {
        return Err(Error::argument(
            split.merge_option,
            format!("{origin} was written under other options or inputs: {difference}"),
        ));
    }
    let expected = block(found.index, found.count, total);
    let first = entry[format!("first_{unit}")].as_u64().map(|v| v as usize);
    let written_total = entry[format!("total_{unit}s")].as_u64().map(|v| v as usize);
    if written_total != Some(total) || first != Some(expected.start) {
        let written = written_total.map_or("an unknown number".to_owned(), |t| t.to_string());
        return Err(Error::argument(
            split.merge_option,
            format!("{origin} holds {unit}s of a run of {written} in all; this run has {total}"),
        ));
    }
    Ok(())
}

/// The first place where `written` and `expected` differ, as `key: written vs expected`.
fn first_difference(written: &Value, expected: &Value, at: &str, word: &str) -> Option<String> {
    match (written, expected) {
        (Value::Object(a), Value::Object(b)) => {
            let keys: std::collections::BTreeSet<&String> = a.keys().chain(b.keys()).collect();
            keys.into_iter().find_map(|k| {
                let path = if at.is_empty() {
                    k.clone()
                } else {
                    format!("{at}.{k}")
                };
                first_difference(
                    a.get(k).unwrap_or(&Value::Null),
                    b.get(k).unwrap_or(&Value::Null),
                    &path,
                    word,
                )
            })
        }
        (a, b) if a == b => None,
        (a, b) => Some(format!("{at} is {a} in the {word}, {b} in this run")),
    }
}

/// The rows of a shard's layer as a [`Partial`].
fn read_partial(found: &Found) -> Result<Partial> {
    let connection = crate::gpkg::open_sqlite_read(&found.file)?;
    let context = format!("reading {} in {}", found.layer, found.file.display());
    let sql = format!(
        "SELECT part, item, value FROM \"{}\" ORDER BY part, item",
        found.layer.replace('"', "\"\"")
    );
    let mut statement = connection.prepare(&sql).map_err(Error::sqlite(&context))?;
    let mut rows = statement.query([]).map_err(Error::sqlite(&context))?;
    let mut partial = Partial::default();
    while let Some(row) = rows.next().map_err(Error::sqlite(&context))? {
        let part: String = row.get(0).map_err(Error::sqlite(&context))?;
        let item: i64 = row.get(1).map_err(Error::sqlite(&context))?;
        let value: Option<f64> = row.get(2).map_err(Error::sqlite(&context))?;
        let values = partial.parts.entry(part).or_default();
        if item as usize != values.len() {
            return Err(Error::Failed(format!(
                "{context}: item {item} out of order"
            )));
        }
        values.push(value.unwrap_or(f64::NAN));
    }
    Ok(partial)
}

mod tiles;
pub use tiles::{decode_f64s, encode_f64s, TileArgs, TileData, TileRun, Tiling};

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn blocks_cover_every_replicate_once_in_order() {
        for total in [0, 1, 7, 999, 1000] {
            for count in [1, 2, 3, 7] {
                let mut next = 0;
                for index in 1..=count {
                    let r = block(index, count, total);
                    assert_eq!(r.start, next);
                    next = r.end;
                }
                assert_eq!(next, total);
            }
        }
        // 999 replicates in 4 shards: 249, 250, 250, 250.
        assert_eq!(block(1, 4, 999), 0..249);
        assert_eq!(block(4, 4, 999), 749..999);
    }

    #[test]
    fn shard_options_are_checked() {
        let args = |shard: &str| ShardArgs {
            shard: Some(shard.into()),
            merge_shards: None,
        };
        assert_eq!(
            args("2/8").sharding().expect("valid"),
            Sharding::Shard { index: 2, count: 8 }
        );
        for bad in ["0/4", "5/4", "2", "a/b", "2/0"] {
            let e = args(bad).sharding().expect_err(bad).to_string();
            assert!(e.contains("--shard") && e.contains(bad), "{e}");
        }
        assert_eq!(
            ShardArgs::default().sharding().expect("none"),
            Sharding::Whole
        );
    }

    #[test]
    fn differences_name_the_parameter() {
        let a = json!({"parameters": {"permutations": 99, "seed": 1}});
        let b = json!({"parameters": {"permutations": 999, "seed": 1}});
        assert_eq!(
            first_difference(&a, &b, "", "shard").as_deref(),
            Some("parameters.permutations is 99 in the shard, 999 in this run")
        );
        assert_eq!(first_difference(&a, &a, "", "shard"), None);
    }

    #[test]
    fn cells_round_trip_bit_for_bit() {
        let values = [
            0.0,
            -0.0,
            1.0 / 3.0,
            f64::MIN_POSITIVE / 7.0,
            f64::NAN,
            f64::INFINITY,
            -1.25e300,
        ];
        for n in 0..=values.len() {
            let mut text = String::new();
            encode_f64s(&values[..n], &mut text);
            let back = decode_f64s(&text).expect("decodes");
            let bits = |v: &[f64]| v.iter().map(|x| x.to_bits()).collect::<Vec<_>>();
            assert_eq!(bits(&back), bits(&values[..n]));
        }
        // "AAAAAAAA8D8=" is 1.0 (bytes 00 00 00 00 00 00 f0 3f) in RFC 4648 base64.
        let mut one = String::new();
        encode_f64s(&[1.0], &mut one);
        assert_eq!(one, "AAAAAAAA8D8=");
        assert_eq!(decode_f64s("AAAA"), None);
    }

    #[test]
    fn tile_options_are_checked() {
        let args = TileArgs {
            tile: Some("3/7".into()),
            merge_tiles: None,
        };
        assert_eq!(
            args.tiling().expect("valid"),
            Tiling::Tile { index: 3, count: 7 }
        );
        assert_eq!(Tiling::Tile { index: 3, count: 7 }.rows(100), 28..42);
        let bad = TileArgs {
            tile: Some("8/7".into()),
            merge_tiles: None,
        };
        let e = bad.tiling().expect_err("8/7").to_string();
        assert!(e.contains("--tile") && e.contains("8/7"), "{e}");
    }
}
