//! The options of `stance plan-batch` and the tool run they plan.

use std::ffi::OsString;
use std::path::{Path, PathBuf};

use clap::Parser;

/// `stance plan-batch [OPTIONS] -- TOOL ARGS…`
#[derive(Debug, Parser)]
#[command(
    name = "stance plan-batch",
    about = "Writes Slurm scripts for a sharded or tiled run: a job array of --shard K/N (or \
             --tile K/N) runs of TOOL and a merge job (--dependency=afterok) giving the outputs \
             of one run on one machine",
    after_help = "Example: stance plan-batch --shards 8 --dir batch -- density --input big.gpkg \
                  --layer records --permutations 999 --output result.gpkg\n\
                  Then: sh batch/submit.sh (or sbatch batch/shards.sbatch, then sbatch \
                  --dependency=afterok:JOB batch/merge.sbatch). To redo one failed shard: \
                  sbatch --array=K batch/shards.sbatch, then sbatch batch/merge.sbatch.\n\
                  Tiles of a large grid: stance plan-batch --tiles 8 --dir batch -- density \
                  --input big.gpkg --layer records --bandwidth-m 2000 --permutations 0 \
                  --output result.gpkg (scripts tiles.sbatch, merge.sbatch, submit.sh)."
)]
#[command(group(clap::ArgGroup::new("split").required(true).args(["shards", "tiles"])))]
struct Cli {
    /// Number of shards N of the Monte Carlo replicates (array tasks 1..N, --shard K/N).
    #[arg(long, value_name = "N")]
    shards: Option<usize>,

    /// Number of tiles N of the grid (array tasks 1..N, --tile K/N): bands of grid rows merged
    /// into one coverage.
    #[arg(long, value_name = "N")]
    tiles: Option<usize>,

    /// Directory for the scripts, the shards' GeoPackages and the logs (created).
    #[arg(long, value_name = "DIR")]
    dir: PathBuf,

    /// CPUs per shard (--cpus-per-task; the tool's --threads).
    #[arg(long, value_name = "N", default_value_t = 1)]
    cpus: usize,

    /// Slurm partition (default: the cluster's default).
    #[arg(long, value_name = "NAME")]
    partition: Option<String>,

    /// Wall time per shard in minutes, instead of the calibration run (needs --memory-mb).
    #[arg(long, value_name = "MINUTES", requires = "memory_mb")]
    minutes: Option<u64>,

    /// Memory per shard in MiB, instead of the calibration run (needs --minutes).
    #[arg(long, value_name = "MIB", requires = "minutes")]
    memory_mb: Option<u64>,

    /// The tool (e.g. density, local) and its arguments, after `--`; they must include
    /// --output (where the merge job writes).
    #[arg(last = true, required = true, value_name = "TOOL ARGS")]
    run: Vec<String>,
}

/// Time and memory of one job.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Resources {
    /// Wall time, minutes.
    pub minutes: u64,
    /// Memory, MiB.
    pub memory_mb: u64,
}

/// Time and memory of each part (shard or tile) and of the merge.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Budget {
    /// One part.
    pub part: Resources,
    /// The merge job.
    pub merge: Resources,
}

/// What the run is split into.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Split {
    /// Blocks of Monte Carlo replicates (`--shard K/N`, `--merge-shards`).
    Shards,
    /// Bands of grid rows (`--tile K/N`, `--merge-tiles`).
    Tiles,
}

impl Split {
    /// `shard` or `tile`: script, directory and file names.
    pub fn word(self) -> &'static str {
        match self {
            Split::Shards => "shard",
            Split::Tiles => "tile",
        }
    }

    /// The option running one part.
    pub fn option(self) -> &'static str {
        match self {
            Split::Shards => "--shard",
            Split::Tiles => "--tile",
        }
    }

    /// The option merging the parts.
    pub fn merge_option(self) -> &'static str {
        match self {
            Split::Shards => "--merge-shards",
            Split::Tiles => "--merge-tiles",
        }
    }
}

/// A checked plan.
#[derive(Debug, Clone)]
pub struct Plan {
    /// N.
    pub shards: usize,
    /// Shards or tiles.
    pub split: Split,
    /// Where scripts, shards and logs go (absolute).
    pub dir: PathBuf,
    /// CPUs per shard.
    pub cpus: usize,
    /// Partition, if any.
    pub partition: Option<String>,
    /// Resources given instead of calibrated.
    pub fixed: Option<Resources>,
    /// The tool id.
    pub tool: String,
    /// The tool's arguments without --output, --threads, --overwrite.
    pub args: Vec<String>,
    /// The final --output.
    pub output: String,
    /// Whether the merge may replace layers of the final output (the run's --overwrite).
    pub overwrite: bool,
    /// Directory the run's relative paths are relative to (the current one, absolute).
    pub workdir: PathBuf,
}

/// What the command line asks for.
#[derive(Debug)]
pub enum Parsed {
    /// A plan to write.
    Plan(Box<Plan>),
    /// `--help`: the text to print.
    Help(String),
}

/// Parses and checks the options.
///
/// # Errors
/// One line naming the option and what was expected.
pub fn parse(args: Vec<OsString>) -> Result<Parsed, String> {
    let mut all = vec![OsString::from("stance plan-batch")];
    all.extend(args);
    let cli = match Cli::try_parse_from(all) {
        Ok(cli) => cli,
        Err(e) if e.kind() == clap::error::ErrorKind::DisplayHelp => {
            return Ok(Parsed::Help(e.render().to_string()));
        }
        Err(e) => return Err(stance_core::host::one_line(&e.render().to_string())),
    };
    let (split, count, option) = match (cli.shards, cli.tiles) {
        (_, Some(n)) => (Split::Tiles, n, "--tiles"),
        (Some(n), None) => (Split::Shards, n, "--shards"),
        (None, None) => return Err("give --shards N or --tiles N".into()),
    };
    if count == 0 {
        return Err(format!("{option}: must be at least 1"));
    }
    if cli.cpus == 0 {
        return Err("--cpus: must be at least 1".into());
    }
    let (tool, rest) = cli
        .run
        .split_first()
        .ok_or("give the tool and its arguments after --")?;
    let (args, output) = split_output(rest)?;
    let workdir = std::env::current_dir().map_err(|e| format!("the current directory: {e}"))?;
    let dir = if cli.dir.is_absolute() {
        cli.dir.clone()
    } else {
        workdir.join(&cli.dir)
    };
    Ok(Parsed::Plan(Box::new(Plan {
        shards: count,
        split,
        dir,
        cpus: cli.cpus,
        partition: cli.partition,
        fixed: cli
            .minutes
            .zip(cli.memory_mb)
            .map(|(minutes, memory_mb)| Resources { minutes, memory_mb }),
        tool: tool.clone(),
        overwrite: rest.iter().any(|a| a == "--overwrite"),
        args,
        output,
        workdir,
    })))
}

/// The tool's arguments without `--output`, `--threads`, `--overwrite`, `--shard`,
/// `--merge-shards`, `--tile` and `--merge-tiles` (the scripts set them), and the value of
/// `--output`.
fn split_output(args: &[String]) -> Result<(Vec<String>, String), String> {
    let mut kept = Vec::new();
    let mut output = None;
    let mut i = 0;
    while i < args.len() {
        let a = &args[i];
        let (key, inline) = match a.split_once('=') {
            Some((k, v)) if k.starts_with("--") => (k, Some(v.to_owned())),
            _ => (a.as_str(), None),
        };
        let takes_value = [
            "--output",
            "--threads",
            "--shard",
            "--merge-shards",
            "--tile",
            "--merge-tiles",
        ]
        .contains(&key);
        if takes_value {
            let value = match inline {
                Some(v) => v,
                None => {
                    i += 1;
                    args.get(i).cloned().ok_or(format!("{key} needs a value"))?
                }
            };
            if key == "--output" {
                output = Some(value);
            }
        } else if key != "--overwrite" {
            kept.push(a.clone());
        }
        i += 1;
    }
    let output = output.ok_or("the tool's arguments need --output FILE (the merged result)")?;
    Ok((kept, output))
}

/// Checks that `stance <tool>` takes `--shard` (or `--tile`; its process description lists it).
///
/// # Errors
/// An unknown tool, or one that cannot be split so.
pub fn check_shardable(stance: &Path, tool: &str, split: Split) -> Result<(), String> {
    let described = std::process::Command::new(stance)
        .args([tool, "--describe"])
        .output()
        .map_err(|e| format!("running {} {tool} --describe: {e}", stance.display()))?;
    if !described.status.success() {
        return Err(format!(
            "'{tool}' is not a tool of this toolbox (see stance list)"
        ));
    }
    let text = String::from_utf8_lossy(&described.stdout);
    let word = split.word();
    let merge = &split.merge_option()[2..];
    if text.contains(&format!("\"{word}\"")) && text.contains(&format!("\"{merge}\"")) {
        Ok(())
    } else {
        let what = match split {
            Split::Shards => "its work into shards",
            Split::Tiles => "its grid into tiles",
        };
        Err(format!(
            "stance {tool} cannot split {what} (no {} option); run it on one machine",
            split.option()
        ))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn strings(a: &[&str]) -> Vec<String> {
        a.iter().map(|s| (*s).to_owned()).collect()
    }

    #[test]
    fn the_scripts_own_options_are_taken_out_of_the_run() {
        let (kept, output) = split_output(&strings(&[
            "--input",
            "a.gpkg",
            "--output=r.gpkg",
            "--threads",
            "4",
            "--overwrite",
            "--permutations",
            "999",
        ]))
        .expect("valid");
        assert_eq!(output, "r.gpkg");
        assert_eq!(
            kept,
            strings(&["--input", "a.gpkg", "--permutations", "999"])
        );
        assert!(split_output(&strings(&["--input", "a.gpkg"]))
            .expect_err("no output")
            .contains("--output"));
    }
}
