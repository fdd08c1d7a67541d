//! The parameters of stance-trend and their check into a [`Config`].

use std::path::PathBuf;

use stance_core::error::{Error, Result};
use stance_core::multiple::Adjustment;
use stance_core::stance::{class_map_option, parse_class, parse_class_list, ClassMap};
use stance_core::time::Period;

use crate::trend::Rule;
use crate::wilson::normal_quantile;

/// Parameters of stance-trend.
#[derive(Debug, Clone, clap::Args, serde::Serialize, schemars::JsonSchema)]
#[serde(rename_all = "kebab-case")]
pub struct TrendParams {
    /// Polygon layer of the areas; <name>_areas is a copy of it with the trend fields.
    #[arg(long, value_name = "LAYER")]
    pub areas: String,

    /// GeoPackage holding the areas (default: --input).
    #[arg(long, value_name = "FILE")]
    pub areas_file: Option<PathBuf>,

    /// Field of the areas holding a stable id per area, written as `unit` in the period table
    /// (default: the feature id).
    #[arg(long, value_name = "FIELD")]
    pub id_field: Option<String>,

    /// Field holding the stance of each point record.
    #[arg(long, value_name = "FIELD", default_value = "stance")]
    pub stance_field: String,

    /// Mapping of labels to classes, "label=class,…" (default: oppose/neutral/support, -1/0/1).
    #[arg(long, value_name = "LABEL=CLASS,…")]
    pub classes: Option<String>,

    /// Field holding the date-time of each record (RFC 3339 / ISO 8601, UTC when no zone is
    /// given); records without a usable time are left out and counted.
    #[arg(long, value_name = "FIELD")]
    pub time_field: String,

    /// Calendar period (UTC) of the counts and of the trend series.
    #[arg(long, value_enum, default_value_t = Period::Month)]
    pub period: Period,

    /// Stance class whose share is followed: oppose, neutral or support.
    #[arg(long, value_name = "CLASS")]
    pub case_class: String,

    /// Classes whose records are at risk (the denominator of the share), comma-separated, or
    /// "all"; must include --case-class.
    #[arg(long, value_name = "CLASSES|all", default_value = "all")]
    pub at_risk_classes: String,

    /// A period enters an area's series only with at least this many records at risk (periods
    /// with none never do).
    #[arg(long, value_name = "N", default_value_t = 5)]
    pub min_records: u64,

    /// An area with fewer usable periods than this is "too few records" (at least 3).
    #[arg(long, value_name = "N", default_value_t = 4)]
    pub min_periods: usize,

    /// Correct the variance of the Mann–Kendall score for serial correlation (Hamed & Rao 1998).
    #[arg(long)]
    pub autocorrelation: bool,

    /// Adjustment of the areas' trend p-values for the many areas tested.
    #[arg(long, value_enum, default_value_t = Adjustment::BenjaminiHochberg)]
    pub adjust: Adjustment,

    /// Significance level of the trend classes (on the adjusted p-values); the intervals are at
    /// 1 − alpha.
    #[arg(long, value_name = "P", default_value_t = 0.05)]
    pub alpha: f64,

    /// Polygon layer of clusters with a `cluster_no` field (e.g. a scan's <name>_clusters): the
    /// period table gets rows for the records inside each.
    #[arg(long, value_name = "LAYER")]
    pub clusters: Option<String>,

    /// GeoPackage holding the clusters (default: --input).
    #[arg(long, value_name = "FILE")]
    pub clusters_file: Option<PathBuf>,
}

/// A polygon layer and the file holding it (None: --input).
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct LayerRef {
    /// Layer name.
    pub layer: String,
    /// GeoPackage (None: --input).
    pub file: Option<PathBuf>,
}

/// The checked parameters.
#[derive(Debug, Clone, PartialEq)]
pub struct Config {
    /// The areas.
    pub areas: LayerRef,
    /// Field of the area ids.
    pub id_field: Option<String>,
    /// Field of the stance labels.
    pub stance_field: String,
    /// Labels → classes.
    pub classes: ClassMap,
    /// Field of the record times.
    pub time_field: String,
    /// The period.
    pub period: Period,
    /// Series, test and interval settings.
    pub rule: Rule,
    /// Multiple-testing adjustment across areas.
    pub adjustment: Adjustment,
    /// The clusters.
    pub clusters: Option<LayerRef>,
}

impl TrendParams {
    /// Checks the options once.
    ///
    /// # Errors
    /// [`Error::BadArgument`] naming the option.
    pub fn check(&self) -> Result<Config> {
        let case = parse_class("--case-class", &self.case_class)?;
        let at_risk = parse_class_list("--at-risk-classes", &self.at_risk_classes)?;
        if !at_risk.contains(&case) {
            return Err(Error::argument(
                "--at-risk-classes",
                format!("must include the case class '{case}' (a share counts cases among the records at risk)"),
            ));
        }
        if !(self.alpha > 0.0 && self.alpha < 1.0) {
            return Err(Error::argument(
                "--alpha",
                format!("{} must be between 0 and 1 (exclusive)", self.alpha),
            ));
        }
        if self.min_periods < 3 {
            return Err(Error::argument(
                "--min-periods",
                format!(
                    "{} is too small: a trend test needs at least 3 periods",
                    self.min_periods
                ),
            ));
        }
        if self.clusters.is_none() && self.clusters_file.is_some() {
            return Err(Error::argument("--clusters-file", "needs --clusters"));
        }
        Ok(Config {
            areas: LayerRef {
                layer: self.areas.clone(),
                file: self.areas_file.clone(),
            },
            id_field: self.id_field.clone(),
            stance_field: self.stance_field.clone(),
            classes: class_map_option(self.classes.as_deref())?,
            time_field: self.time_field.clone(),
            period: self.period,
            rule: Rule {
                case,
                at_risk,
                min_records: self.min_records,
                min_periods: self.min_periods,
                alpha: self.alpha,
                z: normal_quantile(1.0 - self.alpha / 2.0),
                autocorrelation: self.autocorrelation,
            },
            adjustment: self.adjust,
            clusters: self.clusters.as_ref().map(|layer| LayerRef {
                layer: layer.clone(),
                file: self.clusters_file.clone(),
            }),
        })
    }
}
