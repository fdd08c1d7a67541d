//! Time and memory of one shard from two short runs of the same tool on small shards.
//!
//! A run's time is taken as t(f) = a + b·f, where f is the fraction of the replicates it draws
//! (a: reading, planning and writing; b: the replicates). Two calibration runs draw 1/(10 N)
//! and 1/(20 N) of them (shard 1 of 10 N and of 20 N), which gives a and b; a shard of the plan
//! draws 1/N. The memory is the larger peak resident size of the two runs (measured by the
//! kernel for the finished child), which does not grow with the replicates a run draws.

use std::path::Path;
use std::time::Instant;

use crate::args::{Plan, Resources};

/// Safety factor on the calibrated time and memory.
const MARGIN: f64 = 1.5;
/// Minutes added for a job's start on a busy node.
const START_MINUTES: u64 = 2;
/// Least memory asked for, MiB.
const MIN_MEMORY_MB: u64 = 256;

/// Runs the two calibration shards and returns the resources of one shard of the plan.
///
/// # Errors
/// A calibration run that fails (its error line is passed on).
pub fn calibrate(stance: &Path, plan: &Plan) -> Result<Resources, String> {
    let dir = plan.dir.join("calibration");
    std::fs::create_dir_all(&dir).map_err(|e| format!("{}: {e}", dir.display()))?;
    let mut timed = Vec::new();
    for factor in [10, 20] {
        let shards = plan.shards * factor;
        let output = dir.join(format!("shard_1_of_{shards}.gpkg"));
        let clock = Instant::now();
        let ran = std::process::Command::new(stance)
            .current_dir(&plan.workdir)
            .arg(&plan.tool)
            .args(&plan.args)
            .args(["--shard", &format!("1/{shards}"), "--overwrite", "-q"])
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
                "the calibration run (shard 1/{shards}) failed: {last}"
            ));
        }
        timed.push((1.0 / shards as f64, seconds));
        let _ = std::fs::remove_file(&output);
    }
    let _ = std::fs::remove_dir(&dir);
    let seconds = shard_seconds(&timed, 1.0 / plan.shards as f64);
    Ok(Resources {
        minutes: (seconds * MARGIN / 60.0).ceil() as u64 + START_MINUTES,
        memory_mb: ((peak_child_mb() * MARGIN).ceil() as u64).max(MIN_MEMORY_MB),
    })
}

/// The time of a run drawing `fraction` of the replicates, from the line through two timed
/// runs (never less than the longer of them).
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
}
