//! The run's share of the relabellings: all of them, one shard's block (its counts written as
//! a partial result instead of the surfaces), or every shard's counts merged. Parts are named
//! by slice: `tolerance_<slice>_upper|lower` (per cell), `types_<slice>_statistic` (per
//! relabelling) and `types_<slice>_<class>` (per cell).

use std::cell::RefCell;
use std::ops::Range;

use serde_json::{json, Value};
use stance_core::error::Result;
use stance_core::host::shard::{self, Merged, Partial, Sharding};
use stance_core::host::Run;
use stance_core::stance::Stance;

use crate::params::{Config, DensityParams};
use crate::segregation::McCounts;
use crate::tolerance::Counts;

/// What this run draws, gathers or writes.
#[derive(Debug)]
pub struct Shards {
    sharding: Sharding,
    permutations: usize,
    fingerprint: Value,
    merged: Option<Merged>,
    partial: RefCell<Partial>,
}

/// Reads the shards of a merging run; fingerprints a sharded run. Call after every input is
/// read (their checksums are part of the fingerprint).
///
/// # Errors
/// A missing, duplicated or mismatched shard, named.
pub fn prepare(params: &DensityParams, config: &Config, run: &mut Run) -> Result<Shards> {
    let mut shards = Shards {
        sharding: config.sharding.clone(),
        permutations: config.permutations,
        fingerprint: Value::Null,
        merged: None,
        partial: RefCell::new(Partial::default()),
    };
    if shards.sharding == Sharding::Whole {
        return Ok(shards);
    }
    shards.fingerprint = shard::fingerprint(run, "stance-density", params)?;
    if let Sharding::Merge(files) = &shards.sharding {
        let merged = shard::merge(files, &run.name, config.permutations, &shards.fingerprint)?;
        shards.merged = Some(merged);
    }
    Ok(shards)
}

impl Shards {
    /// Whether the run writes its surfaces (every run but a shard's).
    pub fn publishing(&self) -> bool {
        !matches!(self.sharding, Sharding::Shard { .. })
    }

    /// The tolerance counts of slice `slice`: drawn by `compute` over this run's block, or
    /// merged from the shards.
    ///
    /// # Errors
    /// `compute`'s, or a shard without the part.
    pub fn tolerance(
        &self,
        slice: usize,
        compute: impl FnOnce(Range<usize>) -> Result<Counts>,
    ) -> Result<Counts> {
        let (upper, lower) = (
            format!("tolerance_{slice}_upper"),
            format!("tolerance_{slice}_lower"),
        );
        if let Some(merged) = &self.merged {
            return Ok(Counts {
                upper: merged.sum(&upper)?,
                lower: merged.sum(&lower)?,
            });
        }
        let counts = compute(self.sharding.replicates(self.permutations))?;
        let mut partial = self.partial.borrow_mut();
        partial.counts(&upper, &counts.upper);
        partial.counts(&lower, &counts.lower);
        Ok(counts)
    }

    /// The segregation test's statistics and counts of slice `slice`, likewise.
    ///
    /// # Errors
    /// `compute`'s, or a shard without the part.
    pub fn types(
        &self,
        slice: usize,
        compute: impl FnOnce(Range<usize>) -> Result<McCounts>,
    ) -> Result<McCounts> {
        let statistic = format!("types_{slice}_statistic");
        let class_part = |c: &Stance| format!("types_{slice}_{c}");
        if let Some(merged) = &self.merged {
            let mut counts = Vec::new();
            for class in Stance::ALL.iter() {
                counts.push(merged.sum(&class_part(class))?);
            }
            return Ok(McCounts {
                statistics: merged.concat(&statistic)?,
                counts,
            });
        }
        let mc = compute(self.sharding.replicates(self.permutations))?;
        let mut partial = self.partial.borrow_mut();
        partial.values(&statistic, &mc.statistics);
        for (class, counts) in Stance::ALL.iter().zip(&mc.counts) {
            partial.counts(&class_part(class), counts);
        }
        Ok(mc)
    }

    /// For a shard: writes what it drew and returns the run's summary; otherwise None.
    ///
    /// # Errors
    /// Staging failures.
    pub fn write_shard(&self, run: &mut Run) -> Result<Option<Value>> {
        let Sharding::Shard { index, count } = self.sharding else {
            return Ok(None);
        };
        let entry = shard::write(
            run,
            (index, count),
            self.permutations,
            self.fingerprint.clone(),
            &self.partial.borrow(),
        )?;
        run.log(format!(
            "shard {index} of {count}: relabellings {} written to {}",
            entry["replicates"], entry["layer"]
        ));
        Ok(Some(json!({ "shard": entry })))
    }
}
