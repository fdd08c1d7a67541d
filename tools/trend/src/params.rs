//! The parameters of stance-trend and their check into a [`Config`].

use std::path::PathBuf;

use stance_core::error::{Error, Result};
use stance_core::multiple::Adjustment;
use stance_core::stance::{class_map_option, parse_class, parse_class_list, ClassMap, Stance};
use stance_core::time::{parse_utc_seconds, Period};

use crate::trend::Rule;
use stance_core::normal::quantile as normal_quantile;

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
    pub time_field: Option<String>,

    /// Counts already on the areas instead of point records: one field per class and period,
    /// named by this pattern with {class} (oppose, neutral, support) and {period} (the period
    /// as in layer names: 2026_03_04, 2026_w10, 2026_03, 2026_q1), e.g. "n_{class}_{period}";
    /// needs --periods.
    #[arg(long, value_name = "PATTERN")]
    pub count_fields: Option<String>,

    /// The periods of --count-fields: "FIRST..LAST", a date (or date-time) in the first and
    /// one in the last period, e.g. 2026-01-01..2026-09-30.
    #[arg(long, value_name = "FIRST..LAST")]
    pub periods: Option<String>,

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

/// Where the counts per area and period come from.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Source {
    /// Point records with a date-time field.
    Records {
        /// Field of the record times.
        time_field: String,
    },
    /// Counts on the areas, one field per class and period.
    Fields {
        /// Field-name pattern with {class} and {period}.
        pattern: String,
        /// First period index and number of periods.
        range: (i64, usize),
    },
}

/// The field of `pattern` holding the counts of `class` in period `index`.
pub fn count_field(pattern: &str, class: Stance, period: Period, index: i64) -> String {
    pattern
        .replace("{class}", class.label())
        .replace("{period}", &period.suffix(index))
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
    /// Records or count fields.
    pub source: Source,
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
    /// Checks the options once; `points_layer` tells whether `--layer` was given.
    ///
    /// # Errors
    /// [`Error::BadArgument`] naming the option.
    pub fn check(&self, points_layer: bool) -> Result<Config> {
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
        let source = self.source(points_layer)?;
        Ok(Config {
            areas: LayerRef {
                layer: self.areas.clone(),
                file: self.areas_file.clone(),
            },
            id_field: self.id_field.clone(),
            stance_field: self.stance_field.clone(),
            classes: class_map_option(self.classes.as_deref())?,
            source,
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

    fn source(&self, points_layer: bool) -> Result<Source> {
        let Some(pattern) = &self.count_fields else {
            if self.periods.is_some() {
                return Err(Error::argument("--periods", "needs --count-fields"));
            }
            let time_field = self.time_field.clone().ok_or_else(|| {
                Error::argument(
                    "--time-field",
                    "missing; give the date-time field of the records, or counts on the areas \
                     with --count-fields and --periods",
                )
            })?;
            return Ok(Source::Records { time_field });
        };
        for (given, option) in [
            (self.time_field.is_some(), "--time-field"),
            (points_layer, "--layer"),
            (self.clusters.is_some(), "--clusters"),
        ] {
            if given {
                return Err(Error::argument(
                    option,
                    "cannot be used with --count-fields (no point records are read)",
                ));
            }
        }
        if !(pattern.contains("{class}") && pattern.contains("{period}")) {
            return Err(Error::argument(
                "--count-fields",
                format!("'{pattern}' must contain {{class}} and {{period}}"),
            ));
        }
        let periods = self
            .periods
            .as_deref()
            .ok_or_else(|| Error::argument("--count-fields", "needs --periods FIRST..LAST"))?;
        Ok(Source::Fields {
            pattern: pattern.clone(),
            range: self.period_range(periods)?,
        })
    }

    fn period_range(&self, text: &str) -> Result<(i64, usize)> {
        let bad = |why: &str| {
            Error::argument(
                "--periods",
                format!("'{text}' {why} (expected FIRST..LAST, two dates such as 2026-01-01..2026-09-30)"),
            )
        };
        let (first, last) = text.split_once("..").ok_or_else(|| bad("has no '..'"))?;
        let index = |t: &str| {
            parse_utc_seconds(t)
                .and_then(|s| self.period.index(s))
                .ok_or_else(|| bad(&format!("holds '{}', not a date", t.trim())))
        };
        let (first, last) = (index(first)?, index(last)?);
        if last < first {
            return Err(bad("ends before it starts"));
        }
        let periods = usize::try_from(last - first + 1).map_err(|_| bad("is too long"))?;
        if periods > 100_000 {
            return Err(bad("spans more than 100 000 periods"));
        }
        Ok((first, periods))
    }
}
