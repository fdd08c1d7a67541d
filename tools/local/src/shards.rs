//! The run's share of the permutations: all of them, one shard's block (written as a partial
//! result instead of the outputs), or every shard's counts merged.

use serde_json::{json, Value};
use stance_core::error::Result;
use stance_core::host::shard::{self, Partial, Sharding};
use stance_core::host::Run;
use stance_core::montecarlo::mix64;

use crate::params::{Config, LocalParams};
use crate::permutation::{Counts, Replicates};
use crate::Stats;

/// Stream offset of the conditional permutations.
const STREAM: u64 = 0x4C4F_4341_4C5F_4A43;

/// What this run draws, gathers or writes.
#[derive(Debug)]
pub struct Shards {
    sharding: Sharding,
    permutations: usize,
    fingerprint: Value,
    given: Option<Vec<Counts>>,
}

/// Reads the shards of a merging run; fingerprints a sharded run. Call after every input is
/// read (their checksums are part of the fingerprint).
///
/// # Errors
/// A missing, duplicated or mismatched shard, named.
pub fn prepare(params: &LocalParams, config: &Config, run: &mut Run) -> Result<Shards> {
    let mut shards = Shards {
        sharding: config.sharding.clone(),
        permutations: config.permutations,
        fingerprint: Value::Null,
        given: None,
    };
    if shards.sharding == Sharding::Whole {
        return Ok(shards);
    }
    shards.fingerprint = shard::fingerprint(run, "stance-local", params)?;
    if let Sharding::Merge(files) = &shards.sharding {
        let merged = shard::merge(files, &run.name, config.permutations, &shards.fingerprint)?;
        let upper = merged.sum("upper")?;
        let lower = merged.sum("lower")?;
        shards.given = Some(upper.into_iter().zip(lower).map(|(u, l)| [u, l]).collect());
    }
    Ok(shards)
}

impl Shards {
    /// The permutations of the run.
    pub fn replicates(&self, config: &Config) -> Replicates {
        Replicates {
            drawn: self.sharding.replicates(self.permutations),
            given: self.given.clone(),
            ..Replicates::all(self.permutations, mix64(config.seed ^ STREAM))
        }
    }

    /// For a shard: writes its counts (parts `upper` and `lower`, one item per place) and
    /// returns the run's summary; otherwise None.
    ///
    /// # Errors
    /// Staging failures.
    pub fn write_shard(&self, stats: &Stats, run: &mut Run) -> Result<Option<Value>> {
        let Sharding::Shard { index, count } = self.sharding else {
            return Ok(None);
        };
        let counts = match stats {
            Stats::Joins { local, .. } => &local.counts,
            Stats::Getis { local, .. } => &local.counts,
        };
        let column = |k: usize| counts.iter().map(|c| c[k]).collect::<Vec<u32>>();
        let mut partial = Partial::default();
        partial.counts("upper", &column(0));
        partial.counts("lower", &column(1));
        let entry = shard::write(
            run,
            (index, count),
            self.permutations,
            self.fingerprint.clone(),
            &partial,
        )?;
        run.log(format!(
            "shard {index} of {count}: permutations {} written to {}",
            entry["replicates"], entry["layer"]
        ));
        Ok(Some(json!({ "shard": entry })))
    }
}
