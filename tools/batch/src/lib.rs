//! `stance plan-batch`: writes the Slurm scripts of a sharded (or tiled) run — a job array of
//! `--shard K/N` (`--tile K/N`) runs and a merge job that starts when every part has
//! succeeded — with each part's time and memory from two short calibration runs. The toolbox never talks to the scheduler: the
//! user submits the scripts with `sbatch` (or `submit.sh`).

pub mod args;
pub mod calibrate;
pub mod scripts;

use std::ffi::OsString;
use std::process::ExitCode;

use stance_core::host::{print_stderr, print_stdout};

/// Runs `stance plan-batch` with `args` (without the program and subcommand names).
pub fn main(args: Vec<OsString>, stance: &std::path::Path) -> ExitCode {
    match run(args, stance) {
        Ok(text) => print_stdout(&text),
        Err(message) => {
            print_stderr(&format!("stance plan-batch: error: {message}"));
            ExitCode::from(2)
        }
    }
}

/// A warning line on stderr (the plan is still written).
pub fn warn(message: &str) {
    print_stderr(&format!("stance plan-batch: warning: {message}"));
}

fn run(args: Vec<OsString>, stance: &std::path::Path) -> Result<String, String> {
    let plan = match args::parse(args)? {
        args::Parsed::Plan(plan) => plan,
        args::Parsed::Help(text) => return Ok(text),
    };
    args::check_shardable(stance, &plan.tool, plan.split)?;
    let budget = match plan.fixed {
        Some(fixed) => args::Budget {
            part: fixed,
            merge: fixed,
        },
        None => calibrate::calibrate(stance, &plan)?,
    };
    let written = scripts::write(stance, &plan, &budget)?;
    let word = plan.split.word();
    Ok(format!(
        "{{\"scripts\": {:?}, \"{word}s\": {}, \"minutes_per_{word}\": {}, \"memory_mb_per_{word}\": {}, \"minutes_merge\": {}, \"memory_mb_merge\": {}, \"calibrated\": {}}}\n",
        written
            .iter()
            .map(|p| p.display().to_string())
            .collect::<Vec<_>>(),
        plan.shards,
        budget.part.minutes,
        budget.part.memory_mb,
        budget.merge.minutes,
        budget.merge.memory_mb,
        plan.fixed.is_none()
    ))
}
