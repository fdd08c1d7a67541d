//! The parameters of stance-density as the user gives them, and their check into a [`Config`].

use stance_core::error::{Error, Result};
use stance_core::gpkg;
use stance_core::host::shard::{ShardArgs, Sharding, TileArgs, Tiling};
use stance_core::stance::{ClassMap, Stance};

use crate::kernel::Kernel;
use crate::slice::Slice;

/// How the bandwidth is chosen when `--bandwidth-m` is not given.
#[derive(
    Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum, serde::Serialize, schemars::JsonSchema,
)]
#[serde(rename_all = "kebab-case")]
pub enum BandwidthRule {
    /// 2-D normal-reference rule on the pooled projected coordinates (Bowman & Azzalini 1997).
    Rule,
    /// Likelihood cross-validation (Habbema et al. 1974) over 15 candidates from 1/4 to 2 × the rule, on binned data.
    Cv,
}

/// Unit of the per-class surfaces.
#[derive(
    Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum, serde::Serialize, schemars::JsonSchema,
)]
#[serde(rename_all = "kebab-case")]
pub enum Scale {
    /// Expected (weighted) points per km².
    Intensity,
    /// Probability density per km² (each class integrates to 1).
    Density,
}

/// How the kernel sums are computed.
#[derive(
    Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum, serde::Serialize, schemars::JsonSchema,
)]
#[serde(rename_all = "kebab-case")]
pub enum MethodChoice {
    /// Whichever is estimated faster.
    Auto,
    /// Linear binning (Wand 1994) and FFT convolution.
    Fft,
    /// Exact sums at every cell centre.
    Direct,
}

/// Parameters of stance-density.
#[derive(Debug, Clone, clap::Args, serde::Serialize, schemars::JsonSchema)]
#[serde(rename_all = "kebab-case")]
pub struct DensityParams {
    /// Field holding the stance label.
    #[arg(long, value_name = "FIELD", default_value = "stance")]
    pub stance_field: String,

    /// Mapping of labels to classes, "label=class,…" (default: oppose/neutral/support, -1/0/1).
    #[arg(long, value_name = "LABEL=CLASS,…")]
    pub classes: Option<String>,

    /// Numeric field weighting each record (non-negative; e.g. its reach).
    #[arg(long, value_name = "FIELD")]
    pub weight_field: Option<String>,

    /// Date-time field for time slices.
    #[arg(long, value_name = "FIELD")]
    pub time_field: Option<String>,

    /// Time slices (needs --time-field unless all): one set of surfaces per slice.
    #[arg(long, value_enum, value_name = "SLICE", default_value_t = Slice::All)]
    pub slice: Slice,

    /// Kernel; the bandwidth is the support radius (quartic, epanechnikov) or sigma (gaussian).
    #[arg(long, value_enum, value_name = "KERNEL", default_value_t = Kernel::Quartic)]
    pub kernel: Kernel,

    /// Fixed bandwidth in metres (overrides --bandwidth).
    #[arg(long, value_name = "METRES")]
    pub bandwidth_m: Option<f64>,

    /// Bandwidth selection when --bandwidth-m is not given.
    #[arg(long, value_enum, value_name = "RULE", default_value_t = BandwidthRule::Rule)]
    pub bandwidth: BandwidthRule,

    /// Multiplier applied to the selected or given bandwidth.
    #[arg(long, value_name = "FACTOR", default_value_t = 1.0)]
    pub bandwidth_scale: f64,

    /// Adaptive bandwidths by Abramson's (1982) square-root law from a pilot estimate.
    #[arg(long)]
    pub adaptive: bool,

    /// Cell size in metres (default: the longer side of the data's extent / 500, 2 digits).
    #[arg(long, value_name = "METRES")]
    pub cell_m: Option<f64>,

    /// Polygon layer of the input bounding the study area; cells outside are nodata.
    #[arg(long, value_name = "LAYER")]
    pub mask_layer: Option<String>,

    /// Divide by the kernel mass inside the mask (Diggle 1985; needs --mask-layer).
    #[arg(long)]
    pub edge_correct: bool,

    /// Largest grid accepted (cells).
    #[arg(long, value_name = "CELLS", default_value_t = 50_000_000)]
    pub max_cells: u64,

    /// Unit of the class surfaces: intensity (points per km²) or density (per km², integrates to 1).
    #[arg(long, value_enum, value_name = "SCALE", default_value_t = Scale::Intensity)]
    pub scale: Scale,

    /// The two classes compared, "A,B": diff = A − B, log_ratio = ln(f_A/f_B) (Kelsall & Diggle 1995).
    #[arg(long, value_name = "A,B", default_value = "support,oppose")]
    pub compare: String,

    /// Random relabellings for the tolerance p-values (0 skips the tolerance outputs).
    #[arg(long, value_name = "N", default_value_t = 199)]
    pub permutations: usize,

    /// Significance level of the tolerance contours (one-sided, each direction).
    #[arg(long, value_name = "P", default_value_t = 0.05)]
    pub alpha: f64,

    /// How kernel sums are computed. Tiles (--tile, --merge-tiles) of direct sums merge into
    /// the surfaces of a run on one machine bit for bit; with the FFT each tile transforms its
    /// own band, which rounds differently: every merged cell is within 1e-6 of the surface's
    /// largest absolute value, with nodata in the same cells.
    #[arg(long, value_enum, value_name = "METHOD", default_value_t = MethodChoice::Auto)]
    pub method: MethodChoice,

    /// Also estimate the type probabilities p_k(x) = λ_k(x)/Σλ(x) of every class on the grid
    /// with one bandwidth (likelihood cross-validation of the type labels unless --bandwidth-m
    /// is given), test that they are constant over the region by --permutations random
    /// relabellings, and write per-cell p-values and tolerance contours at --alpha (Diggle,
    /// Zheng & Durr 2005).
    #[arg(long)]
    pub type_probabilities: bool,

    /// Sharding of the relabellings over several runs (e.g. a cluster's job array).
    #[command(flatten)]
    #[serde(flatten)]
    pub shards: ShardArgs,

    /// Tiling of the grid over several runs (bands of grid rows, each computed from the
    /// points within the kernel's reach), merged into one coverage (see --method for how
    /// closely). Needs --permutations 0; not with --shard, --adaptive, --edge-correct or
    /// --type-probabilities.
    #[command(flatten)]
    #[serde(flatten)]
    pub tiles: TileArgs,
}

/// The parameters after [`DensityParams::check`]: numbers in range, classes parsed.
#[derive(Debug, Clone)]
pub struct Config {
    /// The whole run, one shard of its relabellings, or the merge of the shards.
    pub sharding: Sharding,
    /// The whole grid, one tile of its rows, or the merge of the tiles.
    pub tiling: Tiling,
    /// Labels → classes.
    pub classes: ClassMap,
    /// Class A of `--compare` (the numerator).
    pub class_a: Stance,
    /// Class B of `--compare` (the denominator).
    pub class_b: Stance,
    /// The kernel.
    pub kernel: Kernel,
    /// Fixed bandwidth (m), if given.
    pub bandwidth_m: Option<f64>,
    /// Bandwidth selection when none is given.
    pub bandwidth: BandwidthRule,
    /// Multiplier of the bandwidth.
    pub bandwidth_scale: f64,
    /// Abramson-adaptive bandwidths.
    pub adaptive: bool,
    /// Cell size (m), if given.
    pub cell_m: Option<f64>,
    /// Divide by the kernel mass inside the mask.
    pub edge_correct: bool,
    /// Largest grid accepted (cells).
    pub max_cells: u64,
    /// Unit of the class surfaces.
    pub scale: Scale,
    /// Random relabellings (0: no tolerance outputs).
    pub permutations: usize,
    /// Level of the tolerance contours.
    pub alpha: f64,
    /// How kernel sums are computed.
    pub method: MethodChoice,
    /// Time slices.
    pub slice: Slice,
    /// Type probabilities and the segregation test.
    pub type_probabilities: bool,
}

impl DensityParams {
    /// Checks the parameters once, at the border.
    ///
    /// # Errors
    /// [`Error::BadArgument`] naming the option and the value expected.
    pub fn check(&self) -> Result<Config> {
        positive_metres("--bandwidth-m", self.bandwidth_m)?;
        positive_metres("--cell-m", self.cell_m)?;
        if !(self.bandwidth_scale.is_finite() && self.bandwidth_scale > 0.0) {
            return Err(Error::argument(
                "--bandwidth-scale",
                format!("is {}; expected a positive factor", self.bandwidth_scale),
            ));
        }
        if !(self.alpha > 0.0 && self.alpha < 1.0) {
            return Err(Error::argument(
                "--alpha",
                format!("is {}; expected a level between 0 and 1", self.alpha),
            ));
        }
        if self.max_cells == 0 {
            return Err(Error::argument("--max-cells", "is 0; expected at least 1"));
        }
        if self.edge_correct && self.mask_layer.is_none() {
            return Err(Error::argument("--edge-correct", "needs --mask-layer"));
        }
        if self.slice != Slice::All && self.time_field.is_none() {
            return Err(Error::argument("--slice", "needs --time-field"));
        }
        if let Some(mask) = &self.mask_layer {
            gpkg::check_layer_name(mask, "--mask-layer")?;
        }
        let classes = match &self.classes {
            Some(spec) => ClassMap::parse(spec).map_err(|m| Error::argument("--classes", m))?,
            None => ClassMap::default(),
        };
        let (class_a, class_b) = parse_compare(&self.compare)?;
        let tiling = self.tiles.tiling()?;
        if tiling != Tiling::Whole {
            self.check_tiled()?;
        }
        Ok(Config {
            tiling,
            sharding: self.shards.sharding()?,
            classes,
            class_a,
            class_b,
            kernel: self.kernel,
            bandwidth_m: self.bandwidth_m,
            bandwidth: self.bandwidth,
            bandwidth_scale: self.bandwidth_scale,
            adaptive: self.adaptive,
            cell_m: self.cell_m,
            edge_correct: self.edge_correct,
            max_cells: self.max_cells,
            scale: self.scale,
            permutations: self.permutations,
            alpha: self.alpha,
            method: self.method,
            slice: self.slice,
            type_probabilities: self.type_probabilities,
        })
    }
}

impl DensityParams {
    /// The options a tiled run does not take, refused naming the option: what needs the whole
    /// grid (or every point's pilot density) at once.
    fn check_tiled(&self) -> Result<()> {
        let option = if self.tiles.tile.is_some() {
            "--tile"
        } else {
            "--merge-tiles"
        };
        let refuse =
            |name: &str, why: &str| Err(Error::argument(name, format!("not with {option}: {why}")));
        if self.shards.shard.is_some() || self.shards.merge_shards.is_some() {
            let name = if self.shards.shard.is_some() {
                "--shard"
            } else {
                "--merge-shards"
            };
            return refuse(name, "a run is split into shards or into tiles, not both");
        }
        if self.permutations > 0 {
            return refuse(
                "--permutations",
                "the tolerance p-values compare every relabelling with a floor taken from the                  whole grid; give --permutations 0 (or split the relabellings with --shard)",
            );
        }
        if self.type_probabilities {
            return refuse(
                "--type-probabilities",
                "its bandwidth and test use the whole grid; run it whole or split it with --shard",
            );
        }
        if self.adaptive {
            return refuse(
                "--adaptive",
                "the bandwidth of every point comes from a pilot estimate over the whole grid",
            );
        }
        if self.edge_correct {
            return refuse(
                "--edge-correct",
                "the kernel mass inside the mask is computed over the whole grid",
            );
        }
        Ok(())
    }
}

fn positive_metres(option: &str, value: Option<f64>) -> Result<()> {
    match value {
        Some(v) if !(v.is_finite() && v > 0.0) => Err(Error::argument(
            option,
            format!("is {v}; expected a positive number of metres"),
        )),
        _ => Ok(()),
    }
}

/// `--compare A,B` → two different classes.
fn parse_compare(spec: &str) -> Result<(Stance, Stance)> {
    let parts: Vec<&str> = spec.split(',').map(str::trim).collect();
    let parse = |label: &str| {
        Stance::from_canonical(label).ok_or_else(|| {
            Error::argument(
                "--compare",
                format!("unknown class '{label}'; expected two of oppose, neutral, support as A,B"),
            )
        })
    };
    if parts.len() != 2 {
        return Err(Error::argument(
            "--compare",
            format!("'{spec}' is not A,B; expected e.g. support,oppose"),
        ));
    }
    let (a, b) = (parse(parts[0])?, parse(parts[1])?);
    if a == b {
        return Err(Error::argument(
            "--compare",
            format!("compares '{a}' with itself; expected two different classes"),
        ));
    }
    Ok((a, b))
}
