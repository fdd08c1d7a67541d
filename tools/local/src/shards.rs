//! The run's share of the permutations: all of them, one shard's block (written as a partial
//! result instead of the outputs), or every shard's counts merged.

use serde_json::Value;
use stance_core::error::Result;
use stance_core::host::shard::{Partial, ShardRun};
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
    run: ShardRun,
    permutations: usize,
    given: Option<Vec<Counts>>,
}

/// Reads the shards of a merging run; fingerprints a sharded run. Call after every input is
/// read (their checksums are part of the fingerprint).
///
/// # Errors
/// A missing, duplicated or mismatched shard, named.
pub fn prepare(params: &LocalParams, config: &Config, run: &mut Run) -> Result<Shards> {
    let prepared = ShardRun::prepare(
        &config.sharding,
        config.permutations,
        "stance-local",
        params,
        run,
    )?;
    let given = match prepared.merged() {
        Some(merged) => {
            let upper = merged.sum("upper")?;
            let lower = merged.sum("lower")?;
            Some(upper.into_iter().zip(lower).map(|(u, l)| [u, l]).collect())
        }
        None => None,
    };
    Ok(Shards {
        run: prepared,
        permutations: config.permutations,
        given,
    })
}

impl Shards {
    /// The permutations of the run.
    pub fn replicates(&self, config: &Config) -> Replicates {
        Replicates {
            drawn: self.run.drawn(),
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
        self.run.write(run, || {
            let counts = match stats {
                Stats::Joins { local, .. } => &local.counts,
                Stats::Getis { local, .. } => &local.counts,
            };
            let column = |k: usize| counts.iter().map(|c| c[k]).collect::<Vec<u32>>();
            let mut partial = Partial::default();
            partial.counts("upper", &column(0));
            partial.counts("lower", &column(1));
            Ok(partial)
        })
    }
}
