//! Time and memory of one shard (or tile) from two short runs of the same tool on small ones.
//!
//! A run's time is taken as t(f) = a + b·f, where f is the fraction of the replicates it draws
//! (a: reading, planning and writing; b: the replicates). Two calibration runs draw 1/(10 N)
//! and 1/(20 N) of them (shard 1 of 10 N and of 20 N), which gives a and b; a shard of the plan
//! draws 1/N. The memory is the larger of the two runs' peak resident sizes (measured by the
//! kernel for the finished child) and of the tool's own estimate of its peak
//! (`memory_estimate_mb` in the run's summary, where the tool makes one), which do not grow with
//! the replicates a run draws. The fixed part a repeats in every shard; when N shards cost much
//! more than one process because of it, a warning says so.
//!
//! Tiles: f is the fraction of the grid's rows; the calibration tiles are the middle ones of
//! 10 N and 20 N (the edges of a grid are often empty). A tile's memory grows with its band,
//! so memory too is taken as m(f) = c + d·f through the two peaks (the smaller tile runs
//! first: the kernel reports the largest peak of the children so far). The merge holds the
//! whole grid: its time and memory are the lines at f = 1 (a whole run's, an upper bound, as
//! the merge computes no sums).

use std::path::Path;
use std::time::Instant;

use crate::args::{Budget, Plan, Resources, Split};

/// Safety factor on the calibrated time and memory.
const MARGIN: f64 = 1.5;
/// Minutes added for a job's start on a busy node.
const START_MINUTES: u64 = 2;
/// Least memory asked for, MiB.
const MIN_MEMORY_MB: u64 = 256;

/// Runs the two calibration shards (or tiles) and returns the resources of one part of the
/// plan and of its merge.
///
/// # Errors
/// A calibration run that fails (its error line is passed on).
pub fn calibrate(stance: &Path, plan: &Plan) -> Result<Budget, String> {
    let dir = plan.dir.join("calibration");
    std::fs::create_dir_all(&dir).map_err(|e| format!("{}: {e}", dir.display()))?;
    let (word, option) = (plan.split.word(), plan.split.option());
    let factors = match plan.split {
        Split::Shards => [10, 20],
        Split::Tiles => [20, 10],
    };
    let mut timed = Vec::new();
    let mut peaks = Vec::new();
    let mut estimates = Vec::new();
    for factor in factors {
        let parts = plan.shards * factor;
        let index = match plan.split {
            Split::Shards => 1,
            Split::Tiles => parts.div_ceil(2),
        };
        let spec = format!("{index}/{parts}");
        let output = dir.join(format!("{word}_{index}_of_{parts}.gpkg"));
        let clock = Instant::now();
        let ran = std::process::Command::new(stance)
            .current_dir(&plan.workdir)
            .arg(&plan.tool)
            .args(&plan.args)
            .args([option, &spec, "--overwrite", "-q"])
            .args(["--threads", &plan.cpus.to_string()])
            .arg("--output")
            .arg(&output)
            .output()
            .map_err(|e| format!("running the calibration: {e}"))?;
        let seconds = clock.elapsed().as_secs_f64();
        if !ran.status.success() {
            let stderr = String::from_utf8_lossy(&ran.stderr);
            let last = stderr.lines().last().unwrap_or("no message");
            return Err(format!(
                "the calibration run ({word} {spec}) failed: {last}"
            ));
        }
        timed.push((1.0 / parts as f64, seconds));
        peaks.push((1.0 / parts as f64, peak_child_mb()));
        estimates.push((1.0 / parts as f64, memory_estimate_mb(&ran.stdout)));
        let _ = std::fs::remove_file(&output);
    }
    let _ = std::fs::remove_dir(&dir);
    let resources = |seconds: f64, mb: f64| Resources {
        minutes: (seconds * MARGIN / 60.0).ceil() as u64 + START_MINUTES,
        memory_mb: ((mb * MARGIN).ceil() as u64).max(MIN_MEMORY_MB),
    };
    let fraction = 1.0 / plan.shards as f64;
    let part_seconds = shard_seconds(&timed, fraction);
    let memory = |at: f64| shard_seconds(&peaks, at).max(shard_seconds(&estimates, at));
    if plan.split == Split::Shards {
        if let Some(share) = repeated_share(&timed, plan.shards) {
            crate::warn(&format!(
                "each shard repeats about {:.1} s of reading and set-up, so {} shards take about                  {:.0} % longer in all than one process; fewer shards (or more replicates) waste less",
                fixed_seconds(&timed),
                plan.shards,
                100.0 * share
            ));
        }
    }
    Ok(match plan.split {
        Split::Shards => {
            let most = estimates.iter().map(|e| e.1).fold(0.0, f64::max);
            let part = resources(part_seconds, peak_child_mb().max(most));
            Budget { part, merge: part }
        }
        Split::Tiles => Budget {
            part: resources(part_seconds, memory(fraction)),
            merge: resources(shard_seconds(&timed, 1.0), memory(1.0)),
        },
    })
}

/// The tool's estimate of its peak memory in a run's summary (`memory_estimate_mb`), MiB; 0
/// when it makes none.
fn memory_estimate_mb(stdout: &[u8]) -> f64 {
    serde_json::from_slice::<serde_json::Value>(stdout)
        .ok()
        .and_then(|v| v["memory_estimate_mb"].as_f64())
        .unwrap_or(0.0)
}

/// The fixed part a of t(f) = a + b·f through two timed runs.
fn fixed_seconds(timed: &[(f64, f64)]) -> f64 {
    let [(f1, t1), (f2, t2)] = [timed[0], timed[1]];
    let slope = if (f1 - f2).abs() > 0.0 {
        ((t1 - t2) / (f1 - f2)).max(0.0)
    } else {
        0.0
    };
    (t1 - slope * f1).max(0.0)
}

/// How much longer `shards` shards take in all than one process, as a share of the one
/// process's time ((N − 1)·a / (a + b)), when that exceeds a tenth; None otherwise.
pub fn repeated_share(timed: &[(f64, f64)], shards: usize) -> Option<f64> {
    let a = fixed_seconds(timed);
    let whole = shard_seconds(timed, 1.0);
    let share = (shards.saturating_sub(1)) as f64 * a / whole.max(f64::MIN_POSITIVE);
    (share > 0.1).then_some(share)
}

/// The time (or memory) of a run drawing `fraction` of the replicates (or rows), from the line
/// through two measured runs (never less than the larger of them).
pub fn shard_seconds(timed: &[(f64, f64)], fraction: f64) -> f64 {
    let longest = timed.iter().map(|t| t.1).fold(0.0, f64::max);
    let [(f1, t1), (f2, t2)] = [timed[0], timed[1]];
    let slope = if (f1 - f2).abs() > 0.0 {
        ((t1 - t2) / (f1 - f2)).max(0.0)
    } else {
        0.0
    };
    let fixed = (t1 - slope * f1).max(0.0);
    (fixed + slope * fraction).max(longest)
}

/// Largest peak resident size of the finished children, MiB (`getrusage`, kB on Linux).
fn peak_child_mb() -> f64 {
    // SAFETY: getrusage only writes the struct it is given.
    let mut usage: libc::rusage = unsafe { std::mem::zeroed() };
    let ok = unsafe { libc::getrusage(libc::RUSAGE_CHILDREN, &mut usage) } == 0;
    if ok {
        usage.ru_maxrss as f64 / 1024.0
    } else {
        0.0
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_line_through_two_runs_by_hand() {
        // t = 3 + 400 f: runs of f = 0.0125 (8 s) and 0.00625 (5.5 s); a shard of f = 0.125
        // takes 3 + 50 = 53 s.
        let t = shard_seconds(&[(0.0125, 8.0), (0.00625, 5.5)], 0.125);
        assert!((t - 53.0).abs() < 1e-9, "{t}");
        // Noise making the slope negative: the longer run is the estimate.
        assert_eq!(shard_seconds(&[(0.0125, 5.0), (0.00625, 6.0)], 0.125), 6.0);
    }

    #[test]
    fn repeated_start_by_hand() {
        // t = 3 + 400 f: one process 403 s; 8 shards repeat 3 s seven more times = 21 s, 5 %:
        // no warning. t = 30 + 400 f: 7 × 30 / 430 = 49 %.
        assert_eq!(repeated_share(&[(0.0125, 8.0), (0.00625, 5.5)], 8), None);
        let share = repeated_share(&[(0.0125, 35.0), (0.00625, 32.5)], 8).expect("warned");
        assert!((share - 210.0 / 430.0).abs() < 1e-9, "{share}");
    }

    #[test]
    fn the_tool_estimate_is_read_from_the_summary() {
        assert_eq!(
            memory_estimate_mb(br#"{"results": {}, "memory_estimate_mb": 612}"#),
            612.0
        );
        assert_eq!(memory_estimate_mb(br#"{"results": {}}"#), 0.0);
    }
}
