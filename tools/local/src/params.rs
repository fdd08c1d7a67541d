//! The parameters of stance-local and their check into a [`Config`].

use std::path::PathBuf;

use stance_core::error::{Error, Result};
use stance_core::host::neighbours::NeighbourArgs;
use stance_core::host::neighbours::WeightsSource;
use stance_core::host::shard::{ShardArgs, Sharding};
use stance_core::multiple::Adjustment;
use stance_core::stance::{class_map_option, parse_class, ClassMap, Stance};
use stance_core::weights::Method;

use crate::joincount::JoinKind;
use crate::rule::Rule;

/// The local statistic.
#[derive(
    Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum, serde::Serialize, schemars::JsonSchema,
)]
#[serde(rename_all = "kebab-case")]
pub enum StatisticArg {
    /// Local join count: places with the attribute among neighbours with it (Anselin & Li 2019).
    JoinCount,
    /// Bivariate local join count: places with attribute A (not B) next to places with B (not
    /// A) (Anselin & Li 2019).
    JoinCountBivariate,
    /// Co-location join count: A and B together, next to A and B together (Anselin & Li 2019).
    CoLocation,
    /// Getis–Ord Gi: the neighbours' share of the total, the area itself left out (Getis & Ord
    /// 1992).
    Gi,
    /// Getis–Ord Gi*: the same with the area among its own neighbours (Ord & Getis 1995).
    GiStar,
}

/// Weight scaling of Gi and Gi* (join counts always use binary weights).
#[derive(
    Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum, serde::Serialize, schemars::JsonSchema,
)]
#[serde(rename_all = "kebab-case")]
pub enum StandardiseArg {
    /// Every neighbour weighs 1 (Gi*: the self weight is 1).
    Binary,
    /// Each area's weights sum to 1 (Gi*: the area and its neighbours weigh 1 / (|N| + 1)).
    Row,
}

/// Parameters of stance-local.
#[derive(Debug, Clone, clap::Args, serde::Serialize, schemars::JsonSchema)]
#[serde(rename_all = "kebab-case")]
pub struct LocalParams {
    /// The local statistic.
    #[arg(long, value_enum)]
    pub statistic: StatisticArg,

    /// Numeric field of the areas: the values of Gi / Gi*, or with --rule attribute A.
    #[arg(long, value_name = "FIELD")]
    pub field: Option<String>,

    /// Rule making --field binary for join counts: "OP NUMBER", OP one of >, >=, <, <=, ==.
    #[arg(long, value_name = "RULE")]
    pub rule: Option<String>,

    /// Text field of the areas holding a stance label; with --class it gives attribute A.
    #[arg(long, value_name = "FIELD")]
    pub class_field: Option<String>,

    /// Stance class of attribute A: areas whose --class-field is this class, or without
    /// --field and --class-field, point records of this class (neighbours by knn or distance).
    #[arg(long, value_name = "CLASS")]
    pub class: Option<String>,

    /// Numeric field of attribute B, with --rule-b (default: --field).
    #[arg(long, value_name = "FIELD")]
    pub field_b: Option<String>,

    /// Rule making --field-b binary: attribute B of the bivariate and co-location counts.
    #[arg(long, value_name = "RULE")]
    pub rule_b: Option<String>,

    /// Stance class of attribute B (in --class-field, or in --stance-field for points).
    #[arg(long, value_name = "CLASS")]
    pub class_b: Option<String>,

    /// Field holding the stance of each point record.
    #[arg(long, value_name = "FIELD", default_value = "stance")]
    pub stance_field: String,

    /// Mapping of labels to classes, "label=class,…" (default: oppose/neutral/support, -1/0/1).
    #[arg(long, value_name = "LABEL=CLASS,…")]
    pub classes: Option<String>,

    /// Weights table from stance-weights (areas; default: neighbours built here with --method).
    #[arg(long, value_name = "TABLE")]
    pub weights: Option<String>,

    /// GeoPackage holding the weights table (default: --input).
    #[arg(long, value_name = "FILE")]
    pub weights_file: Option<PathBuf>,

    /// How neighbours are built without --weights (points: knn or distance, in metres).
    #[command(flatten)]
    #[serde(flatten)]
    pub neighbours: NeighbourArgs,

    /// Field of the area ids used in the --weights table (default: the one the table records,
    /// else the feature id).
    #[arg(long, value_name = "FIELD")]
    pub id_field: Option<String>,

    /// Weight scaling of Gi and Gi*.
    #[arg(long, value_enum, default_value_t = StandardiseArg::Binary)]
    pub standardise: StandardiseArg,

    /// Conditional permutations for the pseudo p-values (0 = none).
    #[arg(long, value_name = "N", default_value_t = 999)]
    pub permutations: usize,

    /// Adjustment of the local p-values for the many places tested.
    #[arg(long, value_enum, default_value_t = Adjustment::BenjaminiHochberg)]
    pub adjust: Adjustment,

    /// Significance level of the cluster and hot/cold flags (on the adjusted p-values).
    #[arg(long, value_name = "P", default_value_t = 0.05)]
    pub alpha: f64,

    /// Sharding of the permutations over several runs (e.g. a cluster's job array).
    #[command(flatten)]
    #[serde(flatten)]
    pub shards: ShardArgs,
}

/// How a place gets a binary attribute.
#[derive(Debug, Clone, PartialEq)]
pub enum Attribute {
    /// A numeric field satisfies a rule.
    Threshold {
        /// The field.
        field: String,
        /// The rule.
        rule: Rule,
    },
    /// A text field holds a label of a stance class.
    Class {
        /// The field (the stance field for points).
        field: String,
        /// The class.
        class: Stance,
    },
}

impl Attribute {
    /// How the summary and messages describe it.
    pub fn describe(&self) -> String {
        match self {
            Attribute::Threshold { field, rule } => format!("{field} {rule}"),
            Attribute::Class { field, class } => format!("{field} is {class}"),
        }
    }
}

/// What is analysed.
#[derive(Debug, Clone, PartialEq)]
pub enum Analysis {
    /// Local join counts of binary attributes.
    Joins {
        /// Which count.
        kind: JoinKind,
        /// Attribute A.
        a: Attribute,
        /// Attribute B (bivariate and co-location).
        b: Option<Attribute>,
    },
    /// Getis–Ord Gi or Gi* of a numeric field.
    Getis {
        /// Gi* (true) or Gi.
        star: bool,
        /// The field.
        field: String,
        /// Row-standardised (true) or binary weights.
        row: bool,
    },
}

/// What the places are.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Places {
    /// Polygons of an area layer.
    Areas,
    /// Point records with a stance field.
    Points,
}

/// The checked parameters.
#[derive(Debug, Clone, PartialEq)]
pub struct Config {
    /// The statistic and its variables.
    pub analysis: Analysis,
    /// Areas or points.
    pub places: Places,
    /// Labels → classes.
    pub classes: ClassMap,
    /// The neighbours.
    pub weights: WeightsSource,
    /// Permutations.
    pub permutations: usize,
    /// `--seed`.
    pub seed: u64,
    /// Adjustment of the local p-values.
    pub adjustment: Adjustment,
    /// Significance level of the flags.
    pub alpha: f64,
    /// The whole run, one shard of its permutations, or the merge of the shards.
    pub sharding: Sharding,
}

impl LocalParams {
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
        let places = self.places()?;
        let analysis = self.analysis(places)?;
        Ok(Config {
            analysis,
            places,
            classes: class_map_option(self.classes.as_deref())?,
            weights: self.weights_source(places)?,
            permutations: self.permutations,
            seed,
            adjustment: self.adjust,
            alpha: self.alpha,
            sharding: self.shards.sharding()?,
        })
    }

    /// Points when a join count names only a class (no --field, no --class-field).
    fn places(&self) -> Result<Places> {
        let joins = !matches!(self.statistic, StatisticArg::Gi | StatisticArg::GiStar);
        if joins && self.field.is_none() && self.class_field.is_none() && self.class.is_some() {
            if self.rule_b.is_some() || self.field_b.is_some() {
                return Err(Error::argument(
                    "--rule-b",
                    "point records take attribute B from --class-b (their stance class)",
                ));
            }
            return Ok(Places::Points);
        }
        Ok(Places::Areas)
    }

    fn analysis(&self, places: Places) -> Result<Analysis> {
        let kind = match self.statistic {
            StatisticArg::Gi | StatisticArg::GiStar => return self.getis(),
            StatisticArg::JoinCount => JoinKind::Univariate,
            StatisticArg::JoinCountBivariate => JoinKind::Bivariate,
            StatisticArg::CoLocation => JoinKind::CoLocation,
        };
        if self.standardise != StandardiseArg::Binary {
            return Err(Error::argument(
                "--standardise",
                "join counts use binary weights (Anselin & Li 2019); drop --standardise",
            ));
        }
        let class_field = match places {
            Places::Points => Some(self.stance_field.clone()),
            Places::Areas => self.class_field.clone(),
        };
        let a = attribute(
            (
                "--field",
                self.field.as_ref(),
                self.rule.as_deref(),
                "--rule",
            ),
            class_field.as_ref(),
            self.class.as_deref(),
            "--class",
        )?;
        let b = if kind == JoinKind::Univariate {
            if self.rule_b.is_some() || self.class_b.is_some() || self.field_b.is_some() {
                return Err(Error::argument(
                    "--rule-b",
                    "attribute B is for --statistic join-count-bivariate or co-location",
                ));
            }
            None
        } else {
            let field_b = self.field_b.as_ref().or(self.field.as_ref());
            let field_b = field_b.filter(|_| self.rule_b.is_some());
            Some(attribute(
                ("--field-b", field_b, self.rule_b.as_deref(), "--rule-b"),
                class_field.as_ref().filter(|_| self.class_b.is_some()),
                self.class_b.as_deref(),
                "--class-b",
            )?)
        };
        Ok(Analysis::Joins { kind, a, b })
    }

    fn getis(&self) -> Result<Analysis> {
        let extra = [
            ("--rule", self.rule.is_some()),
            ("--class", self.class.is_some()),
            ("--class-field", self.class_field.is_some()),
            ("--rule-b", self.rule_b.is_some()),
            ("--class-b", self.class_b.is_some()),
            ("--field-b", self.field_b.is_some()),
        ];
        if let Some((option, _)) = extra.iter().find(|(_, given)| *given) {
            return Err(Error::argument(
                *option,
                "is for join counts; Gi and Gi* analyse the numeric --field as it is",
            ));
        }
        let field = self.field.clone().ok_or_else(|| {
            Error::argument(
                "--field",
                "missing; name the numeric field (values ≥ 0) of Gi / Gi*",
            )
        })?;
        Ok(Analysis::Getis {
            star: self.statistic == StatisticArg::GiStar,
            field,
            row: self.standardise == StandardiseArg::Row,
        })
    }

    fn weights_source(&self, places: Places) -> Result<WeightsSource> {
        if places == Places::Points && self.weights.is_some() {
            return Err(Error::argument(
                "--weights",
                "point records take knn or distance neighbours built here (--method)",
            ));
        }
        let source = self
            .neighbours
            .source(self.weights.as_deref(), self.weights_file.as_deref())?;
        if let WeightsSource::Built { method, .. } = &source {
            if places == Places::Points
                && !matches!(method, Method::KNearest(_) | Method::DistanceBand(_))
            {
                return Err(Error::argument(
                    "--method",
                    "point records need --method knn (with --k) or distance (with --max-distance-m)",
                ));
            }
        }
        Ok(source)
    }
}

/// One attribute from a numeric field with a rule, or a class field with a class.
fn attribute(
    (field_option, field, rule, rule_option): (&str, Option<&String>, Option<&str>, &str),
    class_field: Option<&String>,
    class: Option<&str>,
    class_option: &str,
) -> Result<Attribute> {
    match (field, rule, class_field, class) {
        (Some(field), Some(rule), None, None) => Ok(Attribute::Threshold {
            field: field.clone(),
            rule: Rule::parse(rule).map_err(|m| Error::argument(rule_option, m))?,
        }),
        (None, None, Some(field), Some(class)) => Ok(Attribute::Class {
            field: field.clone(),
            class: parse_class(class_option, class)?,
        }),
        (Some(_), None, None, None) => Err(Error::argument(
            rule_option,
            format!("missing; say when {field_option} makes the attribute, e.g. \"> 0.5\""),
        )),
        (None, None, None, Some(_)) => Err(Error::argument(
            "--class-field",
            "missing; name the text field holding the stance class",
        )),
        (None, Some(_), _, _) => Err(Error::argument(
            field_option,
            format!("missing; {rule_option} needs the numeric field it applies to"),
        )),
        (None, None, _, None) => Err(Error::argument(
            rule_option,
            format!(
                "missing; give {field_option} with {rule_option}, or --class-field with {class_option}"
            ),
        )),
        _ => Err(Error::argument(
            class_option,
            format!("give either {rule_option} or {class_option} for one attribute, not both"),
        )),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use clap::Parser;

    #[derive(Parser)]
    struct Cli {
        #[command(flatten)]
        params: LocalParams,
    }

    fn check(args: &[&str]) -> Result<Config> {
        let mut all = vec!["x"];
        all.extend(args);
        Cli::try_parse_from(all).expect("parses").params.check(1)
    }

    #[test]
    fn attribute_rules_and_places() {
        let c = check(&[
            "--statistic",
            "join-count",
            "--field",
            "share",
            "--rule",
            "> 0.5",
        ])
        .expect("valid");
        assert_eq!(c.places, Places::Areas);
        let c = check(&[
            "--statistic",
            "join-count",
            "--class",
            "oppose",
            "--method",
            "knn",
            "--k",
            "6",
        ])
        .expect("valid");
        assert_eq!(c.places, Places::Points);
        // Points need knn or distance.
        let e = check(&["--statistic", "join-count", "--class", "oppose"]).expect_err("queen");
        assert!(e.to_string().contains("--method"), "{e}");
        let c = check(&[
            "--statistic",
            "co-location",
            "--class-field",
            "majority",
            "--class",
            "oppose",
            "--field",
            "rate",
            "--rule-b",
            ">= 0.3",
        ]);
        assert!(c.is_err(), "field and class-field for attribute A");
        let c = check(&[
            "--statistic",
            "join-count-bivariate",
            "--class-field",
            "majority",
            "--class",
            "oppose",
            "--class-b",
            "support",
        ])
        .expect("valid");
        let Analysis::Joins {
            b: Some(Attribute::Class { class, .. }),
            ..
        } = c.analysis
        else {
            panic!("class B expected");
        };
        assert_eq!(class, Stance::Support);
        let e = check(&["--statistic", "join-count", "--field", "share"]).expect_err("no rule");
        assert!(e.to_string().contains("--rule"), "{e}");
        let e =
            check(&["--statistic", "gi-star", "--field", "r", "--rule", "> 1"]).expect_err("rule");
        assert!(e.to_string().contains("--rule"), "{e}");
        let e = check(&[
            "--statistic",
            "join-count",
            "--field",
            "r",
            "--rule",
            "> 1",
            "--standardise",
            "row",
        ])
        .expect_err("row");
        assert!(e.to_string().contains("binary"), "{e}");
        let e = check(&["--statistic", "gi", "--field", "r", "--alpha", "1.5"]).expect_err("alpha");
        assert!(e.to_string().contains("--alpha"), "{e}");
    }
}
