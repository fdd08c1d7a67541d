//! stance-density: kernel density surfaces of stance classes, the log ratio of two classes'
//! densities (Kelsall & Diggle 1995) and its tolerance contours (Hazelton & Davies 2009) from
//! Monte Carlo p-values by random relabelling (Diggle 2013, *Statistical Analysis of Spatial and
//! Spatio-Temporal Point Patterns*, 3rd ed., ch. 5); with `--type-probabilities`, the
//! probability of each class at every cell and the Monte Carlo test of spatial segregation
//! (Diggle, Zheng & Durr 2005).
//!
//! `run` reads as check → read → plan (bandwidth, grid) → per slice: surfaces and tolerance,
//! written as they are made → summary.

pub mod bandwidth;
pub mod binning;
pub mod compare;
pub mod contour;
pub mod convolve;
pub mod estimate;
pub mod input;
pub mod kernel;
pub mod layout;
pub mod mask;
pub mod memory;
pub mod output;
pub mod params;
pub mod plan;
pub mod segregation;
pub mod shards;
pub mod slice;
pub mod surfaces;
pub mod tiles;
pub mod tolerance;
pub mod types;

use serde_json::Value;
use stance_core::error::Result;
use stance_core::host::{InputUse, OutputDecl, Run, Tool, GEOPACKAGE_MEDIA_TYPE};

pub use params::{BandwidthRule, Config, DensityParams, MethodChoice, Scale};
use surfaces::{Context, SliceRef};

/// The density tool.
#[derive(Debug)]
pub struct Density;

impl Tool for Density {
    type Params = DensityParams;
    const ID: &'static str = "density";
    const TITLE: &'static str = "Kernel density surfaces per stance class, their difference and \
        log ratio with tolerance contours";
    const DESCRIPTION: &'static str = "Estimates a kernel intensity surface for each stance \
        class on one grid and one bandwidth (normal-reference rule, Bowman & Azzalini 1997; \
        likelihood cross-validation, Habbema, Hermans & van den Broek 1974; or given; optionally \
        adaptive by Abramson's 1982 square-root law), by linear binning and FFT convolution \
        (Wand 1994) or exact sums, with optional mask and edge correction (Diggle 1985). Writes \
        the difference and square-root difference of two classes, their share, and the log \
        ratio of their normalised densities (Kelsall & Diggle 1995) with per-cell Monte Carlo \
        p-values from random relabelling (Besag & Clifford 1991) and tolerance contours \
        (Hazelton & Davies 2009; Davies & Hazelton 2010) where either class is significantly \
        elevated. With --type-probabilities, the probability of each class at every cell \
        (λ_k/Σλ, one bandwidth chosen by likelihood cross-validation of the type labels), the \
        Monte Carlo test that these probabilities are constant over the region, and per-cell \
        p-values with tolerance contours for each class (Diggle, Zheng & Durr 2005). Optional \
        weights and time slices.";
    const DEFAULT_NAME: &'static str = "density";
    const INPUT: InputUse = InputUse::Required;

    fn outputs() -> Vec<OutputDecl> {
        vec![
            OutputDecl {
                id: "class_surfaces",
                title: "Per-class surfaces",
                description: "Float32 rasters <name>_<class> (oppose, neutral, support): points \
                    per km², or probability density per km² with --scale density.",
                media_type: GEOPACKAGE_MEDIA_TYPE,
            },
            OutputDecl {
                id: "comparisons",
                title: "Comparison surfaces",
                description: "Float32 rasters <name>_diff (A − B), <name>_sqrtdiff (√A − √B), \
                    <name>_share (A/(A+B)), <name>_log_ratio (ln f_A/f_B, the log ratio of the \
                    normalised densities).",
                media_type: GEOPACKAGE_MEDIA_TYPE,
            },
            OutputDecl {
                id: "tolerance",
                title: "Tolerance p-values and contours",
                description: "Float32 rasters <name>_log_ratio_p_upper (upper tail, A elevated) \
                    and <name>_log_ratio_p_lower (lower tail, B elevated); polygon layer \
                    <name>_tolerance with field elevated. Time slices add a suffix such as \
                    _2026_03.",
                media_type: GEOPACKAGE_MEDIA_TYPE,
            },
            OutputDecl {
                id: "type_probabilities",
                title: "Type probabilities and segregation",
                description: "With --type-probabilities: Float32 rasters <name>_prob_<class> \
                    (probability that a record at the cell is of the class), \
                    <name>_prob_<class>_p (Monte Carlo p-value that it is higher than under \
                    constant type probabilities; nodata outside the data's region) and polygon \
                    layer <name>_prob_tolerance with field elevated (the class significantly \
                    likely at --alpha); the test statistic and its p-value in the summary.",
                media_type: GEOPACKAGE_MEDIA_TYPE,
            },
        ]
    }

    fn run(params: &DensityParams, run: &mut Run) -> Result<Value> {
        let config = params.check()?;
        run.progress.phase("reading");
        run.progress.set(0.0);
        let input = run.input()?.to_owned();
        let records = input::read_records(params, &config, run, &input)?;
        let mask = match &params.mask_layer {
            Some(layer) => Some(input::read_mask(run, &input, layer, &records.srs)?),
            None => None,
        };
        run.progress.phase("bandwidth");
        run.progress.set(0.0);
        let plan = plan::plan(&config, run, &records, mask.as_deref())?;
        run.progress.set(0.1);
        let (slices, missing) = slice::group(config.slice, records.times.as_deref(), records.len());
        if missing > 0 {
            run.log(format!(
                "warning: {missing} records have no usable time and are left out of the slices"
            ));
        }
        let types_plan = match config.type_probabilities {
            true => Some(types::plan(&config, run, &records, &plan)?),
            false => None,
        };
        let shards = shards::prepare(params, &config, run)?;
        let tiles = tiles::prepare(params, &config, &plan, run)?;
        if tiles.is_tile() {
            run.progress.phase("tile");
            let data = tiles::compute(&config, &records, &plan, &slices, &tiles, run)?;
            if let Some(summary) = tiles.write(run, &data)? {
                return Ok(summary);
            }
        }
        let context = Context {
            config: &config,
            records: &records,
            plan: &plan,
            slices: slices.len(),
            types: types_plan.as_ref(),
            shards: &shards,
            tiles: &tiles,
        };
        let mut summaries = Vec::with_capacity(slices.len());
        // Time spent in the class estimates alone (for benchmarks; logged with -v).
        let mut compute_s = 0.0;
        for (index, (key, members)) in slices.iter().enumerate() {
            let slice = SliceRef {
                key,
                index,
                members,
            };
            let (summary, seconds) = surfaces::slice_surfaces(&context, run, slice)?;
            summaries.push(summary);
            compute_s += seconds;
            run.progress.set(context.fraction(index, 1.0));
        }
        run.debug(format!("class estimates compute_s: {compute_s:.3}"));
        if let Some(summary) = shards.write_shard(run)? {
            return Ok(summary);
        }
        let mut results = output::summary(&config, &records, &plan, &summaries);
        if let Some(t) = &types_plan {
            results["type_probabilities"] = t.summary();
        }
        Ok(results)
    }
}
