//! `stance plan-batch`: writes the Slurm scripts of a sharded run — a job array of `--shard
//! K/N` runs and a merge job that starts when every shard has succeeded — with each shard's
//! time and memory from a short calibration run. The toolbox never talks to the scheduler: the
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

fn run(args: Vec<OsString>, stance: &std::path::Path) -> Result<String, String> {
    let plan = match args::parse(args)? {
        args::Parsed::Plan(plan) => plan,
        args::Parsed::Help(text) => return Ok(text),
    };
    args::check_shardable(stance, &plan.tool)?;
    let resources = match plan.fixed {
        Some(fixed) => fixed,
        None => calibrate::calibrate(stance, &plan)?,
    };
    let written = scripts::write(stance, &plan, &resources)?;
    Ok(format!(
        "{{\"scripts\": {:?}, \"shards\": {}, \"minutes_per_shard\": {}, \"memory_mb_per_shard\": {}, \"calibrated\": {}}}\n",
        written
            .iter()
            .map(|p| p.display().to_string())
            .collect::<Vec<_>>(),
        plan.shards,
        resources.minutes,
        resources.memory_mb,
        plan.fixed.is_none()
    ))
}
