//! The neighbour options shared by every tool that builds spatial weights on the fly, checked
//! once into a [`Method`].

use crate::error::{Error, Result};
use crate::weights::Method;

/// How neighbours are defined.
#[derive(
    Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum, serde::Serialize, schemars::JsonSchema,
)]
#[serde(rename_all = "kebab-case")]
pub enum MethodArg {
    /// Areas sharing a boundary point (vertex).
    Queen,
    /// Areas sharing a boundary edge.
    Rook,
    /// The --k nearest area centroids (not symmetric in general).
    Knn,
    /// Area centroids within --max-distance-m.
    Distance,
}

/// `--method`, `--k`, `--max-distance-m`, `--snap-m`.
#[derive(Debug, Clone, clap::Args, serde::Serialize, schemars::JsonSchema)]
#[serde(rename_all = "kebab-case")]
pub struct NeighbourArgs {
    /// How neighbours are defined.
    #[arg(long, value_enum, default_value_t = MethodArg::Queen)]
    pub method: MethodArg,

    /// Number of nearest neighbours (with --method knn).
    #[arg(long, value_name = "N")]
    pub k: Option<usize>,

    /// Largest centroid distance of a neighbour, in metres (with --method distance).
    #[arg(long, value_name = "METRES")]
    pub max_distance_m: Option<f64>,

    /// Vertices closer than this are one boundary point (closes digitising gaps), in metres.
    #[arg(long, value_name = "METRES", default_value_t = 0.0)]
    pub snap_m: f64,
}

impl NeighbourArgs {
    /// Checks the options into a [`Method`].
    ///
    /// # Errors
    /// [`Error::BadArgument`] naming the option.
    pub fn method(&self) -> Result<Method> {
        if !(self.snap_m.is_finite() && self.snap_m >= 0.0) {
            return Err(Error::argument(
                "--snap-m",
                format!("{} must be a number ≥ 0 (metres)", self.snap_m),
            ));
        }
        if self.k.is_some() && self.method != MethodArg::Knn {
            return Err(Error::argument("--k", "is used only with --method knn"));
        }
        if self.max_distance_m.is_some() && self.method != MethodArg::Distance {
            return Err(Error::argument(
                "--max-distance-m",
                "is used only with --method distance",
            ));
        }
        Ok(match self.method {
            MethodArg::Queen => Method::Queen,
            MethodArg::Rook => Method::Rook,
            MethodArg::Knn => match self.k {
                Some(k) if k >= 1 => Method::KNearest(k),
                Some(_) => return Err(Error::argument("--k", "must be at least 1")),
                None => return Err(Error::argument("--k", "is required with --method knn")),
            },
            MethodArg::Distance => match self.max_distance_m {
                Some(d) if d.is_finite() && d > 0.0 => Method::DistanceBand(d),
                Some(d) => {
                    return Err(Error::argument(
                        "--max-distance-m",
                        format!("{d} must be a positive number of metres"),
                    ))
                }
                None => {
                    return Err(Error::argument(
                        "--max-distance-m",
                        "is required with --method distance",
                    ))
                }
            },
        })
    }
}

/// Where the neighbours of a run come from: a weights table (`--weights`, in `--weights-file`)
/// or built here in the working CRS from the neighbour options.
#[derive(Debug, Clone, PartialEq)]
pub enum WeightsSource {
    /// A weights table, in `file` (None: the tool's default file).
    Table {
        /// Table name.
        name: String,
        /// GeoPackage holding it.
        file: Option<std::path::PathBuf>,
    },
    /// Built here.
    Built {
        /// How.
        method: Method,
        /// Snap tolerance, metres.
        snap_m: f64,
    },
}

impl NeighbourArgs {
    /// `--weights` / `--weights-file`, or these options, checked into a [`WeightsSource`]:
    /// a table brings its own neighbours, so `--k` and `--max-distance-m` are refused with it.
    ///
    /// # Errors
    /// [`Error::BadArgument`] naming the option.
    pub fn source(
        &self,
        weights: Option<&str>,
        weights_file: Option<&std::path::Path>,
    ) -> Result<WeightsSource> {
        match weights {
            Some(name) => {
                if self.k.is_some() || self.max_distance_m.is_some() {
                    return Err(Error::argument(
                        "--weights",
                        "takes its neighbours from the table; drop --k / --max-distance-m",
                    ));
                }
                Ok(WeightsSource::Table {
                    name: name.to_owned(),
                    file: weights_file.map(std::path::Path::to_owned),
                })
            }
            None if weights_file.is_some() => Err(Error::argument(
                "--weights-file",
                "needs --weights (the table to read from it)",
            )),
            None => Ok(WeightsSource::Built {
                method: self.method()?,
                snap_m: self.snap_m,
            }),
        }
    }
}
