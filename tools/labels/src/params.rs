//! The parameters of stance-labels and their check into a [`Config`].

use std::path::PathBuf;

use stance_core::error::{Error, Result};
use stance_core::stance::{class_map_option, ClassMap};

use crate::kappa::Weighting;

/// Agreement weights of weighted kappa, as given on the command line.
#[derive(
    Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum, serde::Serialize, schemars::JsonSchema,
)]
#[serde(rename_all = "kebab-case")]
pub enum WeightingArg {
    /// 1 − |i − j| / (K − 1): one step apart counts half (Cohen 1968).
    Linear,
    /// 1 − (i − j)² / (K − 1)²: one step apart counts three quarters (Fleiss & Cohen 1973).
    Quadratic,
}

/// Parameters of stance-labels.
#[derive(Debug, Clone, clap::Args, serde::Serialize, schemars::JsonSchema)]
#[serde(rename_all = "kebab-case")]
pub struct LabelsParams {
    /// Two or more fields of the point layer holding stance labels from different labellers
    /// (e.g. classifiers), comma-separated; each is mapped to classes by --classes.
    #[arg(long, value_name = "FIELD,FIELD,…")]
    pub label_fields: String,

    /// Mapping of labels to classes, "label=class,…" (default: oppose/neutral/support, -1/0/1).
    #[arg(long, value_name = "LABEL=CLASS,…")]
    pub classes: Option<String>,

    /// Field holding the hand-coded (reference) label; records where it is missing are not
    /// hand-coded.
    #[arg(long, value_name = "FIELD")]
    pub reference_field: Option<String>,

    /// Field marking the hand-coded subset (a number, non-zero = hand-coded); without it, every
    /// record whose --reference-field is not missing is hand-coded.
    #[arg(long, value_name = "FIELD")]
    pub reference_flag_field: Option<String>,

    /// Keep only a simple random sample of this many hand-coded records as the reference (drawn
    /// with --seed); e.g. to simulate hand coding a subset when every record has a reference label.
    #[arg(long, value_name = "N")]
    pub reference_sample: Option<usize>,

    /// Agreement weights of weighted kappa.
    #[arg(long, value_enum, default_value_t = WeightingArg::Quadratic)]
    pub weighting: WeightingArg,

    /// Confidence level of the intervals (Wilson intervals of precision and recall, intervals of
    /// corrected shares).
    #[arg(long, value_name = "LEVEL", default_value_t = 0.95)]
    pub confidence: f64,

    /// Polygon layer of areas: agreement per area, and corrected shares with --correct-field.
    #[arg(long, value_name = "LAYER")]
    pub areas: Option<String>,

    /// GeoPackage holding the areas (default: --input).
    #[arg(long, value_name = "FILE")]
    pub areas_file: Option<PathBuf>,

    /// Fewest records in an area for its pairwise kappa (fewer: the field is left empty).
    #[arg(long, value_name = "N", default_value_t = 30)]
    pub min_records: u64,

    /// Label field whose class shares per area are corrected for its misclassification,
    /// estimated on the hand-coded subset (needs --areas and --reference-field).
    #[arg(long, value_name = "FIELD")]
    pub correct_field: Option<String>,

    /// Two or more polygon layers to compare (e.g. the clusters or tolerance regions found with
    /// each label field by other runs), comma-separated: the Jaccard index of their regions, and
    /// which features are found under every labeller or under only one.
    #[arg(long, value_name = "LAYER,LAYER,…")]
    pub compare_layers: Option<String>,

    /// GeoPackage holding the --compare-layers (default: --input).
    #[arg(long, value_name = "FILE")]
    pub compare_file: Option<PathBuf>,

    /// Field of the --compare-layers holding the side a feature leans to (e.g. leans_to of the
    /// scan's clusters): only features with the same value are matched.
    #[arg(long, value_name = "FIELD")]
    pub compare_side_field: Option<String>,

    /// Jaccard index from which a feature counts as found again in another compared layer.
    #[arg(long, value_name = "INDEX", default_value_t = 0.5)]
    pub match_jaccard: f64,
}

/// What `--compare-layers` compares.
#[derive(Debug, Clone, PartialEq)]
pub struct Compare {
    /// The layers.
    pub layers: Vec<String>,
    /// Their file (None: --input).
    pub file: Option<PathBuf>,
    /// The field of the side of each feature.
    pub side: Option<String>,
    /// Jaccard index of a match.
    pub threshold: f64,
}

/// The checked parameters.
#[derive(Debug, Clone)]
pub struct Config {
    /// The label fields, in order.
    pub labels: Vec<String>,
    /// Labels → classes.
    pub classes: ClassMap,
    /// The reference field.
    pub reference: Option<String>,
    /// The field flagging the reference subset.
    pub flag: Option<String>,
    /// Size of the random reference sample.
    pub sample: Option<usize>,
    /// Weights of weighted kappa.
    pub weighting: Weighting,
    /// Normal quantile of the intervals.
    pub z: f64,
    /// The areas: layer and file (None: --input).
    pub areas: Option<(String, Option<PathBuf>)>,
    /// Fewest records for a per-area kappa.
    pub min_records: u64,
    /// Index into `labels` of the labeller corrected.
    pub correct: Option<usize>,
    /// Layers compared (see [`Compare`]).
    pub compare: Option<Compare>,
}

fn list(text: &str) -> Vec<String> {
    text.split(',')
        .map(str::trim)
        .filter(|f| !f.is_empty())
        .map(str::to_owned)
        .collect()
}

impl LabelsParams {
    /// Checks the options once.
    ///
    /// # Errors
    /// [`stance_core::Error::BadArgument`] naming the option.
    pub fn check(&self) -> Result<Config> {
        let labels = list(&self.label_fields);
        if labels.len() < 2 {
            return Err(Error::argument(
                "--label-fields",
                format!(
                    "'{}' names fewer than two fields; expected two or more, comma-separated",
                    self.label_fields
                ),
            ));
        }
        if let Some(dup) = labels
            .iter()
            .enumerate()
            .find(|(i, f)| labels[..*i].contains(f))
        {
            return Err(Error::argument(
                "--label-fields",
                format!("'{}' is named twice", dup.1),
            ));
        }
        if self.reference_flag_field.is_some() && self.reference_field.is_none() {
            return Err(Error::argument(
                "--reference-flag-field",
                "needs --reference-field",
            ));
        }
        if self.reference_sample.is_some() && self.reference_field.is_none() {
            return Err(Error::argument(
                "--reference-sample",
                "needs --reference-field",
            ));
        }
        if self.reference_sample == Some(0) {
            return Err(Error::argument("--reference-sample", "must be at least 1"));
        }
        if !(self.confidence > 0.5 && self.confidence < 1.0) {
            return Err(Error::argument(
                "--confidence",
                format!(
                    "{} is not a level between 0.5 and 1 (e.g. 0.95)",
                    self.confidence
                ),
            ));
        }
        if self.areas_file.is_some() && self.areas.is_none() {
            return Err(Error::argument("--areas-file", "needs --areas"));
        }
        if self.min_records < 2 {
            return Err(Error::argument("--min-records", "must be at least 2"));
        }
        let compare = self.compare()?;
        let correct = self
            .correct_field
            .as_ref()
            .map(|f| correct_index(self, &labels, f))
            .transpose()?;
        let weighting = match self.weighting {
            WeightingArg::Linear => Weighting::Linear,
            WeightingArg::Quadratic => Weighting::Quadratic,
        };
        Ok(Config {
            classes: class_map_option(self.classes.as_deref())?,
            reference: self.reference_field.clone(),
            flag: self.reference_flag_field.clone(),
            sample: self.reference_sample,
            weighting,
            z: stance_core::normal::quantile(0.5 + self.confidence / 2.0),
            areas: self.areas.clone().map(|a| (a, self.areas_file.clone())),
            min_records: self.min_records,
            correct,
            compare,
            labels,
        })
    }
}

/// The index of `--correct-field` among the label fields; it needs areas and a reference.
fn correct_index(params: &LabelsParams, labels: &[String], field: &str) -> Result<usize> {
    if params.areas.is_none() || params.reference_field.is_none() {
        return Err(Error::argument(
            "--correct-field",
            "needs --areas and --reference-field",
        ));
    }
    labels.iter().position(|l| l == field).ok_or_else(|| {
        Error::argument(
            "--correct-field",
            format!(
                "'{field}' is not one of --label-fields ({})",
                labels.join(", ")
            ),
        )
    })
}

impl LabelsParams {
    /// `--compare-layers` with its file and threshold.
    fn compare(&self) -> Result<Option<Compare>> {
        if !(self.match_jaccard > 0.0 && self.match_jaccard <= 1.0) {
            return Err(Error::argument(
                "--match-jaccard",
                format!("{} is not in (0, 1]", self.match_jaccard),
            ));
        }
        let Some(text) = &self.compare_layers else {
            if self.compare_file.is_some() || self.compare_side_field.is_some() {
                return Err(Error::argument(
                    "--compare-layers",
                    "is needed by --compare-file and --compare-side-field",
                ));
            }
            return Ok(None);
        };
        let layers = list(text);
        if layers.len() < 2 {
            return Err(Error::argument(
                "--compare-layers",
                format!(
                    "'{text}' names fewer than two layers; expected two or more, comma-separated"
                ),
            ));
        }
        Ok(Some(Compare {
            layers,
            file: self.compare_file.clone(),
            side: self.compare_side_field.clone(),
            threshold: self.match_jaccard,
        }))
    }
}
