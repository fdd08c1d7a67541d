//! stance-labels: how sure are the labels? Agreement between labellers (Cohen 1960, Cohen 1968,
//! Fleiss 1971, Krippendorff 2004), each labeller against a hand-coded subset, a consensus label
//! per record, agreement per area, and class shares per area corrected for misclassification
//! (Buonaccorsi 2010, ch. 3).

pub mod analysis;
pub mod confusion;
pub mod consensus;
pub mod correct;
pub mod input;
pub mod kappa;
pub mod multi;
pub mod output;
pub mod overlap;
pub mod params;
pub mod subset;

use serde_json::Value;
use stance_core::error::Result;
use stance_core::host::{InputUse, OutputDecl, Run, Tool, GEOPACKAGE_MEDIA_TYPE};

use analysis::{AreaInputs, AreaResult};
use correct::Misclassification;
use input::{Areas, Records};
pub use params::{Config, LabelsParams, WeightingArg};

/// Number of stance classes.
const K: usize = 3;

/// The labels tool.
#[derive(Debug)]
pub struct Labels;

impl Tool for Labels {
    type Params = LabelsParams;
    const ID: &'static str = "labels";
    const TITLE: &'static str =
        "Agreement between labellers, consensus labels and corrected shares";
    const DESCRIPTION: &'static str = "Compares two or more stance label fields of a point layer \
        (e.g. automatic classifiers). Agreement of every pair: Cohen's kappa (Cohen 1960) and weighted \
        kappa for the ordered stances (Cohen 1968; quadratic weights by default, or linear), each with \
        the large-sample standard error of Fleiss, Cohen & Everitt (1969); across all: Fleiss' kappa \
        (Fleiss 1971) and Krippendorff's alpha for ordinal data (Krippendorff 2004). With a hand-coded \
        reference (--reference-field, optionally --reference-flag-field), each labeller's confusion \
        matrix, accuracy and per-class precision, recall and F1 with Wilson (1927) intervals. A \
        consensus label per record: the majority; a tie goes to the class whose labellers are more \
        accurate on the reference, else 'undecided'; its confidence is the share of labellers giving \
        it and, with a reference, its posterior probability under the class-conditional model of \
        Dawid & Skene (1979). With --areas, per area the share of records where all labellers agree \
        and each pair's kappa (at least --min-records records); with --correct-field, the class \
        shares of that labeller corrected for its misclassification by the matrix-inversion \
        estimator with delta-method intervals (Buonaccorsi 2010, ch. 3), projected onto the simplex \
        and flagged where clamping or an ill-conditioned matrix makes the correction unstable. With \
        --compare-layers (e.g. the clusters or tolerance regions found by other runs with each label \
        field), the Jaccard (1912) index of their regions, and per feature its best match in every \
        other layer (optionally only features leaning the same way): found under every labeller, \
        or labeller-specific (matched nowhere).";
    const DEFAULT_NAME: &'static str = "labels";
    const INPUT: InputUse = InputUse::Required;
    const INPUT_DESCRIPTION: &'static str =
        "GeoPackage with the point records (a point layer with \
        two or more label fields); also the default file of the areas.";

    fn outputs() -> Vec<OutputDecl> {
        vec![
            OutputDecl {
                id: "records",
                title: "Records with consensus labels",
                description: "Point layer <name>_records: a copy of the input records (every field, \
                    the stored CRS) with in_reference (when a hand-coded subset is given), \
                    consensus (a class or 'undecided'), consensus_votes, consensus_share, \
                    consensus_posterior, all_agree.",
                media_type: GEOPACKAGE_MEDIA_TYPE,
            },
            OutputDecl {
                id: "areas",
                title: "Areas with agreement and corrected shares",
                description: "Polygon layer <name>_areas (with --areas): a copy of the areas with \
                    count_total, all_agree_share, kappa_<a>_<b> per pair and, with --correct-field, \
                    share_<class>_raw, share_<class>_corrected, share_<class>_lower, \
                    share_<class>_upper, correction_clamped, correction_unstable.",
                media_type: GEOPACKAGE_MEDIA_TYPE,
            },
            OutputDecl {
                id: "clusters",
                title: "Compared clusters and how many labellers find them",
                description: "Polygon layer <name>_clusters (with --compare-layers; working CRS): every \
                    feature of the compared layers with source_layer, source_fid, \
                    best_jaccard_<layer> per compared layer, matched_layers, found_under_all, \
                    labeller_specific.",
                media_type: GEOPACKAGE_MEDIA_TYPE,
            },
        ]
    }

    fn run(params: &LabelsParams, run: &mut Run) -> Result<Value> {
        let config = params.check()?;
        run.progress.phase("reading");
        let records = input::read_records(&config, run)?;
        let areas = input::read_areas(&config, &records, run)?;
        run.progress.set(0.3);
        run.progress.phase("agreement");
        let agreement = analysis::agreement(&records.labels, K, config.weighting);
        let scores = records
            .reference
            .as_ref()
            .map(|r| analysis::scores(&records.labels, r, K, config.z));
        let consensus = analysis::consensus_all(&records.labels, K, scores.as_deref());
        let correction = config
            .correct
            .zip(scores.as_ref())
            .map(|(j, s)| Misclassification::new(&s[j].matrix));
        if correction.as_ref().is_some_and(|m| m.inverse.is_none()) {
            run.log("stance-labels: the misclassification matrix of --correct-field is singular (or a class has no hand-coded record); no shares are corrected");
        }
        run.progress.set(0.5);
        run.progress.phase("areas");
        let (per_area, outside) = per_area(&config, &records, areas.as_ref(), correction.as_ref());
        run.progress.set(0.7);
        run.progress.phase("writing");
        let name = run.layer_name("records");
        output::write_records(run, &name, &records, &consensus)?;
        let area_name = write_areas(run, &config, areas.as_ref(), &per_area)?;
        let comparison = compare_clusters(&config, &records, run)?;
        run.progress.set(1.0);
        let found = output::Found {
            agreement: &agreement,
            scores: scores.as_deref(),
            consensus: &consensus,
            correction: correction.as_ref(),
            layers: (&name, area_name.as_deref()),
            areas: areas.as_ref(),
            outside,
            comparison,
        };
        run.log(format!(
            "stance-labels: {} records, {} labellers, Fleiss' kappa {:.3}, ordinal alpha {:.3} → '{name}'",
            records.layer.fids.len(),
            config.labels.len(),
            agreement.fleiss,
            agreement.alpha
        ));
        Ok(output::summary(&config, &records, &found))
    }
}

/// The statistics of every area, and the records outside every area.
fn per_area(
    config: &Config,
    records: &Records,
    areas: Option<&Areas>,
    correction: Option<&Misclassification>,
) -> (Vec<AreaResult>, u64) {
    let Some(areas) = areas else {
        return (Vec::new(), 0);
    };
    let layer = &records.layer;
    let area_of: Vec<Option<usize>> =
        stance_core::assign::assign(&areas.layer.polygons, &layer.x, &layer.y)
            .area
            .into_iter()
            .map(|a| a.map(|i| i as usize))
            .collect();
    let outside = area_of.iter().filter(|a| a.is_none()).count() as u64;
    let results = analysis::per_area(AreaInputs {
        labels: &records.labels,
        area_of: &area_of,
        areas: areas.layer.fids.len(),
        k: K,
        min_records: config.min_records,
        correct: config.correct.zip(correction),
    });
    (results, outside)
}

/// The copy of the areas with their fields (None without --areas).
fn write_areas(
    run: &mut Run,
    config: &Config,
    areas: Option<&Areas>,
    results: &[AreaResult],
) -> Result<Option<String>> {
    let Some(areas) = areas else {
        return Ok(None);
    };
    let name = run.layer_name("areas");
    let fields = output::area_fields(config, results);
    run.output().copy_with_fields(
        &areas.path,
        &areas.layer.layer,
        &name,
        &areas.layer.fids,
        &fields,
    )?;
    Ok(Some(name))
}

/// With --compare-layers: the Jaccard comparison, written as `<name>_clusters`; its summary.
fn compare_clusters(config: &Config, records: &Records, run: &mut Run) -> Result<Option<Value>> {
    let Some(layers) = input::read_compared(config, records, run)? else {
        return Ok(None);
    };
    let threshold = config.compare.as_ref().map_or(0.5, |c| c.threshold);
    let polygons: Vec<Vec<geo_types::MultiPolygon<f64>>> =
        layers.iter().map(|l| l.polygons.clone()).collect();
    let side = config.compare.as_ref().and_then(|c| c.side.as_ref());
    let sides: Option<Vec<Vec<Option<String>>>> = side.map(|_| {
        let texts = |l: &stance_core::gpkg::read::PolygonLayer| {
            l.columns.first().map(|c| c.as_texts()).unwrap_or_default()
        };
        layers.iter().map(texts).collect()
    });
    let comparison = overlap::compare(&polygons, sides.as_deref(), threshold);
    let name = run.layer_name("clusters");
    output::write_clusters(run, &name, &layers, &comparison)?;
    Ok(Some(output::comparison_json(&layers, &comparison, &name)))
}
