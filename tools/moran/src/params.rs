//! The parameters of stance-moran and their check into a [`Config`].

use std::path::PathBuf;

use stance_core::error::{Error, Result};
use stance_core::host::neighbours::{NeighbourArgs, WeightsSource};
use stance_core::host::shard::{ShardArgs, Sharding};
use stance_core::multiple::Adjustment;
use stance_core::weights::Standardisation;

use crate::maths::{Alternative, Inference};

/// Weight scaling.
#[derive(
    Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum, serde::Serialize, schemars::JsonSchema,
)]
#[serde(rename_all = "kebab-case")]
pub enum StandardiseArg {
    /// Each area's neighbour weights sum to 1.
    Row,
    /// Every neighbour weighs 1.
    Binary,
}

/// Direction of the tests.
#[derive(
    Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum, serde::Serialize, schemars::JsonSchema,
)]
#[serde(rename_all = "kebab-case")]
pub enum AlternativeArg {
    /// Either direction; permutation p = min(1, 2 × the smaller one-sided p).
    TwoSided,
    /// Positive association (like values together).
    Greater,
    /// Negative association (unlike values together).
    Less,
}

/// Parameters of stance-moran.
#[derive(Debug, Clone, clap::Args, serde::Serialize, schemars::JsonSchema)]
#[serde(rename_all = "kebab-case")]
pub struct MoranParams {
    /// Numeric field of the areas to analyse (not with --case-field and --at-risk-field).
    #[arg(long, value_name = "FIELD")]
    pub field: Option<String>,

    /// Field of case counts: with --at-risk-field, the analysed value is the empirical Bayes
    /// standardised rate (Assunção & Reis 1999) instead of --field.
    #[arg(long, value_name = "FIELD")]
    pub case_field: Option<String>,

    /// Field of the population at risk of the rate (with --case-field); every value > 0.
    #[arg(long, value_name = "FIELD")]
    pub at_risk_field: Option<String>,

    /// Weights table from stance-weights (default: neighbours built here with --method).
    #[arg(long, value_name = "TABLE")]
    pub weights: Option<String>,

    /// GeoPackage holding the weights table (default: --input).
    #[arg(long, value_name = "FILE")]
    pub weights_file: Option<PathBuf>,

    /// How neighbours are built without --weights.
    #[command(flatten)]
    #[serde(flatten)]
    pub neighbours: NeighbourArgs,

    /// Field of the area ids used in the --weights table (default: the one the table records,
    /// else the feature id).
    #[arg(long, value_name = "FIELD")]
    pub id_field: Option<String>,

    /// Weight scaling.
    #[arg(long, value_enum, default_value_t = StandardiseArg::Row)]
    pub standardise: StandardiseArg,

    /// Random relabellings for the permutation p-values (0 = none).
    #[arg(long, value_name = "N", default_value_t = 999)]
    pub permutations: usize,

    /// Direction of the tests (global and local).
    #[arg(long, value_enum, default_value_t = AlternativeArg::TwoSided)]
    pub alternative: AlternativeArg,

    /// Adjustment of the local p-values for the many areas tested.
    #[arg(long, value_enum, default_value_t = Adjustment::BenjaminiHochberg)]
    pub adjust: Adjustment,

    /// Significance level of the cluster types (on the adjusted local p-values).
    #[arg(long, value_name = "P", default_value_t = 0.05)]
    pub alpha: f64,

    /// Sharding of the permutations over several runs (e.g. a cluster's job array).
    #[command(flatten)]
    #[serde(flatten)]
    pub shards: ShardArgs,
}

/// What is analysed.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Variable {
    /// A numeric field as it is.
    Field(String),
    /// The empirical Bayes standardised rate of cases over the population at risk.
    Rate {
        /// Field of case counts.
        cases: String,
        /// Field of the population at risk.
        at_risk: String,
    },
}

impl Variable {
    /// The fields to read, in order.
    pub fn fields(&self) -> Vec<&str> {
        match self {
            Variable::Field(f) => vec![f],
            Variable::Rate { cases, at_risk } => vec![cases, at_risk],
        }
    }

    /// How errors about the analysed value name it.
    pub fn label(&self) -> String {
        match self {
            Variable::Field(f) => f.clone(),
            Variable::Rate { cases, at_risk } => format!("{cases} / {at_risk}"),
        }
    }
}

/// The checked parameters.
#[derive(Debug, Clone, PartialEq)]
pub struct Config {
    /// The analysed value.
    pub variable: Variable,
    /// The neighbours.
    pub weights: WeightsSource,
    /// Weight scaling.
    pub style: Standardisation,
    /// Permutations, seed, direction.
    pub inference: Inference,
    /// Adjustment of the local p-values.
    pub adjustment: Adjustment,
    /// Significance level of the cluster types.
    pub alpha: f64,
    /// The whole run, one shard of its permutations, or the merge of the shards.
    pub sharding: Sharding,
}

impl MoranParams {
    /// Checks the options once; `seed` is `--seed`.
    ///
    /// # Errors
    /// [`Error::BadArgument`] naming the option.
    pub fn check(&self, seed: u64) -> Result<Config> {
        if !(self.alpha > 0.0 && self.alpha < 1.0) {
            return Err(Error::argument(
                "--alpha",
                format!("{} must be between 0 and 1", self.alpha),
            ));
        }
        Ok(Config {
            variable: self.variable()?,
            weights: self.weights_source()?,
            style: match self.standardise {
                StandardiseArg::Row => Standardisation::Row,
                StandardiseArg::Binary => Standardisation::Binary,
            },
            inference: Inference {
                permutations: self.permutations,
                seed,
                alternative: match self.alternative {
                    AlternativeArg::TwoSided => Alternative::TwoSided,
                    AlternativeArg::Greater => Alternative::Greater,
                    AlternativeArg::Less => Alternative::Less,
                },
            },
            adjustment: self.adjust,
            alpha: self.alpha,
            sharding: self.shards.sharding()?,
        })
    }

    fn variable(&self) -> Result<Variable> {
        match (&self.field, &self.case_field, &self.at_risk_field) {
            (None, Some(cases), Some(at_risk)) => Ok(Variable::Rate {
                cases: cases.clone(),
                at_risk: at_risk.clone(),
            }),
            (Some(f), None, None) => Ok(Variable::Field(f.clone())),
            (Some(_), _, _) => Err(Error::argument(
                "--field",
                "give either --field or --case-field with --at-risk-field, not both",
            )),
            (None, Some(_), None) => Err(Error::argument(
                "--at-risk-field",
                "is required with --case-field",
            )),
            (None, None, Some(_)) => Err(Error::argument(
                "--case-field",
                "is required with --at-risk-field",
            )),
            (None, None, None) => Err(Error::argument(
                "--field",
                "missing; name the numeric field to analyse (or --case-field with --at-risk-field)",
            )),
        }
    }

    fn weights_source(&self) -> Result<WeightsSource> {
        self.neighbours
            .source(self.weights.as_deref(), self.weights_file.as_deref())
    }
}
