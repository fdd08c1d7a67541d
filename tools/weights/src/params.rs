//! The parameters of stance-weights and their check into a [`Config`].

use stance_core::error::Result;
use stance_core::host::neighbours::NeighbourArgs;
use stance_core::weights::Method;

/// What to do with areas that have no neighbour.
#[derive(
    Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum, serde::Serialize, schemars::JsonSchema,
)]
#[serde(rename_all = "kebab-case")]
pub enum IslandsArg {
    /// Stop with an error listing them.
    Error,
    /// Keep them without neighbours (listed in the summary).
    Keep,
    /// Link each to its nearest area by centroid distance, both ways.
    Nearest,
}

/// Parameters of stance-weights.
#[derive(Debug, Clone, clap::Args, serde::Serialize, schemars::JsonSchema)]
#[serde(rename_all = "kebab-case")]
pub struct WeightsParams {
    #[command(flatten)]
    #[serde(flatten)]
    pub neighbours: NeighbourArgs,

    /// Field with a stable id per area (default: the feature id); ids must be unique.
    #[arg(long, value_name = "FIELD")]
    pub id_field: Option<String>,

    /// What to do with areas that have no neighbour.
    #[arg(long, value_enum, default_value_t = IslandsArg::Keep)]
    pub islands: IslandsArg,
}

/// The checked parameters.
#[derive(Debug, Clone, PartialEq)]
pub struct Config {
    /// How neighbours are found.
    pub method: Method,
    /// Snap tolerance of contiguity, metres.
    pub snap_m: f64,
    /// Field of the area ids (None: feature ids).
    pub id_field: Option<String>,
    /// What to do with islands.
    pub islands: IslandsArg,
}

impl WeightsParams {
    /// Checks the options once.
    ///
    /// # Errors
    /// [`stance_core::Error::BadArgument`] naming the option.
    pub fn check(&self) -> Result<Config> {
        Ok(Config {
            method: self.neighbours.method()?,
            snap_m: self.neighbours.snap_m,
            id_field: self.id_field.clone(),
            islands: self.islands,
        })
    }
}
