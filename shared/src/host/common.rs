//! The options every tool shares (the contract every tool keeps).

use std::path::PathBuf;

/// Common options of every `stance-*` tool.
#[derive(Debug, Clone, clap::Args, serde::Serialize, schemars::JsonSchema)]
#[serde(rename_all = "kebab-case")]
pub struct CommonArgs {
    /// Input file (each tool says which kind it reads).
    #[arg(long, value_name = "FILE")]
    pub input: Option<PathBuf>,

    /// Input layer name (default: the only layer of the input, if there is exactly one).
    #[arg(long, value_name = "NAME")]
    pub layer: Option<String>,

    /// Output GeoPackage; created if missing; may be the input file.
    #[arg(long, value_name = "FILE")]
    pub output: PathBuf,

    /// Base name of the output layers (default: the tool's own).
    #[arg(long, value_name = "NAME")]
    pub name: Option<String>,

    /// Replace output layers of the same name (an input layer is never replaced).
    #[arg(long)]
    pub overwrite: bool,

    /// Working projected CRS: EPSG:n, WKT or a PROJ string, in metres (default: the input's
    /// projected CRS, or a Lambert azimuthal equal-area projection centred on geographic data).
    #[arg(long, value_name = "CRS")]
    pub crs: Option<String>,

    /// Seed of every random choice; the same seed gives the same outputs.
    #[arg(long, value_name = "N", default_value_t = 1)]
    pub seed: u64,

    /// Worker threads (0 = one per core); results do not depend on it.
    #[arg(long, value_name = "N", default_value_t = 0)]
    pub threads: usize,

    /// Refuse, before working, a run estimated to need more memory than this (default: three
    /// quarters of the machine's memory).
    #[arg(long, value_name = "MIB")]
    pub max_memory_mb: Option<u64>,

    /// Print the tool's OGC API – Processes description as JSON and exit.
    #[arg(long)]
    pub describe: bool,

    /// No log lines or progress on stderr.
    #[arg(long, short = 'q')]
    pub quiet: bool,

    /// More log lines on stderr.
    #[arg(long, short = 'v')]
    pub verbose: bool,
}
