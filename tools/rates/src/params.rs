//! The parameters of stance-rates and their check into a [`Config`].

use std::path::PathBuf;

use stance_core::error::{Error, Result};
use stance_core::stance::{class_map_option, parse_class, parse_class_list, ClassMap, Stance};

use crate::eb::Model;

/// The count model, as given on the command line.
#[derive(
    Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum, serde::Serialize, schemars::JsonSchema,
)]
#[serde(rename_all = "kebab-case")]
pub enum ModelArg {
    /// Poisson counts: rare cases per head of a population at risk.
    Poisson,
    /// Binomial counts: a share of the records at risk (e.g. oppose among all records).
    Binomial,
}

/// Parameters of stance-rates.
#[derive(Debug, Clone, clap::Args, serde::Serialize, schemars::JsonSchema)]
#[serde(rename_all = "kebab-case")]
pub struct RatesParams {
    /// Polygon layer of the areas; the output is a copy of it with the rate fields.
    #[arg(long, value_name = "LAYER")]
    pub areas: String,

    /// GeoPackage holding the areas (default: --input).
    #[arg(long, value_name = "FILE")]
    pub areas_file: Option<PathBuf>,

    /// Field holding the stance of each point record.
    #[arg(long, value_name = "FIELD", default_value = "stance")]
    pub stance_field: String,

    /// Mapping of labels to classes, "label=class,…" (default: oppose/neutral/support, -1/0/1).
    #[arg(long, value_name = "LABEL=CLASS,…")]
    pub classes: Option<String>,

    /// Stance class whose records are the cases: oppose, neutral or support (with points).
    #[arg(long, value_name = "CLASS")]
    pub case_class: Option<String>,

    /// Classes whose records are at risk (the denominator of a share), comma-separated, or
    /// "all"; must include --case-class (with points, without --at-risk-field).
    #[arg(long, value_name = "CLASSES|all", default_value = "all")]
    pub at_risk_classes: String,

    /// Field of the areas holding the population at risk: with points the rate is then cases
    /// per head; with --case-field it is the denominator of those counts.
    #[arg(long, value_name = "FIELD")]
    pub at_risk_field: Option<String>,

    /// Field of the areas holding case counts (no points are read; needs --at-risk-field).
    #[arg(long, value_name = "FIELD")]
    pub case_field: Option<String>,

    /// Count model (default: binomial for a share of records, poisson per head of a population
    /// at risk and for --case-field counts).
    #[arg(long, value_name = "MODEL")]
    pub model: Option<ModelArg>,

    /// Weights table of stance-weights for local EB (default: queen contiguity built here).
    #[arg(long, value_name = "TABLE")]
    pub weights: Option<String>,

    /// GeoPackage holding the weights table (default: the areas' file).
    #[arg(long, value_name = "FILE")]
    pub weights_file: Option<PathBuf>,

    /// Field of the areas holding the ids used in the weights table (default: the feature id, or
    /// the id field recorded in the table's provenance).
    #[arg(long, value_name = "FIELD")]
    pub id_field: Option<String>,

    /// Snap tolerance of the queen contiguity built here, in metres (the areas are projected to
    /// the working CRS first, whatever their own CRS).
    #[arg(long, value_name = "METRES", default_value_t = 0.0)]
    pub snap_m: f64,

    /// Skip local EB smoothing.
    #[arg(long)]
    pub no_local: bool,

    /// Surface (raster) to summarise within each area: mean, min and max.
    #[arg(long, value_name = "RASTER")]
    pub surface: Option<String>,

    /// GeoPackage holding the surface (default: --input).
    #[arg(long, value_name = "FILE")]
    pub surface_file: Option<PathBuf>,

    /// Weight surface cells by the exact fraction inside each area (default: cell centres inside).
    #[arg(long)]
    pub area_weighted: bool,
}

/// Where the cases and the population at risk of each area come from.
#[derive(Debug, Clone, PartialEq)]
pub enum Source {
    /// Point records counted per area.
    Points {
        /// The class counted as cases.
        case: Stance,
        /// What is at risk.
        at_risk: AtRisk,
        /// Field of the stance labels.
        stance_field: String,
        /// Labels → classes.
        classes: ClassMap,
    },
    /// Counts already on the areas.
    Fields {
        /// Field of the case counts.
        cases: String,
        /// Field of the population at risk.
        at_risk: String,
    },
}

/// The population at risk when points are counted.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum AtRisk {
    /// The records of these classes (a share).
    Classes(Vec<Stance>),
    /// A field of the areas (cases per head).
    Field(String),
}

/// Where local EB takes its neighbours from.
#[derive(Debug, Clone, PartialEq)]
pub enum LocalNeighbours {
    /// A stance-weights table in `file` (None: the areas' file).
    Table {
        /// Table name.
        name: String,
        /// GeoPackage holding it.
        file: Option<PathBuf>,
    },
    /// Queen contiguity built here on the areas in the working CRS.
    Queen {
        /// Snap tolerance, metres.
        snap_m: f64,
    },
}

/// A surface to summarise per area.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct SurfaceSpec {
    /// Raster table.
    pub name: String,
    /// GeoPackage holding it (None: --input).
    pub file: Option<PathBuf>,
    /// Exact cell fractions instead of cell centres.
    pub area_weighted: bool,
}

/// The checked parameters.
#[derive(Debug, Clone, PartialEq)]
pub struct Config {
    /// Cases and population at risk.
    pub source: Source,
    /// The count model.
    pub model: Model,
    /// Area layer.
    pub areas: String,
    /// GeoPackage of the areas (None: --input).
    pub areas_file: Option<PathBuf>,
    /// Neighbours of local EB (None: `--no-local`).
    pub local: Option<LocalNeighbours>,
    /// Surface to summarise.
    pub surface: Option<SurfaceSpec>,
}

impl RatesParams {
    /// Checks the options once; `points_layer` tells whether `--layer` was given.
    ///
    /// # Errors
    /// [`Error::BadArgument`] naming the option.
    pub fn check(&self, points_layer: bool) -> Result<Config> {
        let source = self.source(points_layer)?;
        let model = match (self.model, &source) {
            (Some(ModelArg::Poisson), _) => Model::Poisson,
            (Some(ModelArg::Binomial), _) => Model::Binomial,
            (
                None,
                Source::Points {
                    at_risk: AtRisk::Classes(_),
                    ..
                },
            ) => Model::Binomial,
            (None, _) => Model::Poisson,
        };
        Ok(Config {
            source,
            model,
            areas: self.areas.clone(),
            areas_file: self.areas_file.clone(),
            local: self.local()?,
            surface: self.surface()?,
        })
    }

    fn source(&self, points_layer: bool) -> Result<Source> {
        let classes_given = !self.at_risk_classes.trim().eq_ignore_ascii_case("all");
        if let Some(cases) = &self.case_field {
            let Some(at_risk) = &self.at_risk_field else {
                return Err(Error::argument(
                    "--case-field",
                    "needs --at-risk-field (the population at risk of those counts)",
                ));
            };
            for (given, option) in [
                (self.case_class.is_some(), "--case-class"),
                (classes_given, "--at-risk-classes"),
                (points_layer, "--layer"),
            ] {
                if given {
                    return Err(Error::argument(
                        option,
                        "cannot be used with --case-field (no points are read)",
                    ));
                }
            }
            return Ok(Source::Fields {
                cases: cases.clone(),
                at_risk: at_risk.clone(),
            });
        }
        let case = self.case_class.as_deref().ok_or_else(|| {
            Error::argument(
                "--case-class",
                "missing; give the class counted as cases (oppose, neutral or support), or counts \
                 on the areas with --case-field and --at-risk-field",
            )
        })?;
        let case = parse_class("--case-class", case)?;
        let at_risk =
            match &self.at_risk_field {
                Some(_) if classes_given => return Err(Error::argument(
                    "--at-risk-classes",
                    "cannot be combined with --at-risk-field (the field is the population at risk)",
                )),
                Some(field) => AtRisk::Field(field.clone()),
                None => {
                    let classes = parse_class_list("--at-risk-classes", &self.at_risk_classes)?;
                    if !classes.contains(&case) {
                        return Err(Error::argument(
                            "--at-risk-classes",
                            format!(
                                "must include the case class '{case}' (a share counts cases among \
                             the records at risk)"
                            ),
                        ));
                    }
                    AtRisk::Classes(classes)
                }
            };
        Ok(Source::Points {
            case,
            at_risk,
            stance_field: self.stance_field.clone(),
            classes: class_map_option(self.classes.as_deref())?,
        })
    }

    fn local(&self) -> Result<Option<LocalNeighbours>> {
        if !(self.snap_m.is_finite() && self.snap_m >= 0.0) {
            return Err(Error::argument(
                "--snap-m",
                format!("{} must be a finite number ≥ 0 (metres)", self.snap_m),
            ));
        }
        match (&self.weights, self.no_local) {
            (Some(_), true) => Err(Error::argument(
                "--weights",
                "cannot be used with --no-local",
            )),
            (None, _) if self.weights_file.is_some() => Err(Error::argument(
                "--weights-file",
                "needs --weights (the table to read from it)",
            )),
            (Some(name), false) => Ok(Some(LocalNeighbours::Table {
                name: name.clone(),
                file: self.weights_file.clone(),
            })),
            (None, true) => Ok(None),
            (None, false) => Ok(Some(LocalNeighbours::Queen {
                snap_m: self.snap_m,
            })),
        }
    }

    fn surface(&self) -> Result<Option<SurfaceSpec>> {
        match &self.surface {
            Some(name) => Ok(Some(SurfaceSpec {
                name: name.clone(),
                file: self.surface_file.clone(),
                area_weighted: self.area_weighted,
            })),
            None if self.area_weighted => {
                Err(Error::argument("--area-weighted", "needs --surface"))
            }
            None if self.surface_file.is_some() => {
                Err(Error::argument("--surface-file", "needs --surface"))
            }
            None => Ok(None),
        }
    }
}
