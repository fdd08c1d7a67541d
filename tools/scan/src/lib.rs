//! stance-scan: circular scan statistics for clusters of stance — Bernoulli on records and
//! Poisson on areas (Kulldorff 1997), ordinal on oppose < neutral < support (Jung, Kulldorff &
//! Klassen 2007), multinomial on the unordered mix of classes (Jung, Kulldorff & Richard 2010)
//! — with Monte Carlo p-values (Dwass 1957) and Gumbel-approximated p-values (Abrams, Kleinman
//! & Kulldorff 2010). With a time field the windows are cylinders, a circle × a run of periods,
//! and the space-time permutation model (Kulldorff, Heffernan, Hartman, Assunção & Mostashari
//! 2005) finds bursts of records from the margins of place and period alone.

pub mod analysis;
pub mod clusters;
pub mod cylinders;
pub mod engine;
pub mod input;
pub mod models;
pub mod output;
pub mod params;
pub mod windows;

use std::time::Instant;

use serde_json::Value;
use stance_core::error::{Error, Result};
use stance_core::host::shard::{Partial, ShardRun};
use stance_core::host::{InputUse, OutputDecl, Run, Tool, GEOPACKAGE_MEDIA_TYPE};

use analysis::{scan_areas, scan_points, scan_space_time, ScanResult, TimedModel, TimedRecords};
use input::{read_areas, read_records, Data, DataKind};
pub use output::circle;
use output::{cluster_row, summary, write_layers, ClusterRow};
pub use params::{Config, DirectionChoice, ModelChoice, ScanParams, Subject};

/// The scan tool.
#[derive(Debug)]
pub struct Scan;

/// Share of the progress bar taken by reading, before the scan.
const READ_SHARE: f64 = 0.05;
/// Share of the progress bar where the scan ends and writing starts.
const SCAN_END: f64 = 0.95;

impl Tool for Scan {
    type Params = ScanParams;
    const ID: &'static str = "scan";
    const TITLE: &'static str = "Scan for circular (or space-time) clusters of stance";
    const DESCRIPTION: &'static str = "Finds circular clusters of stance beyond chance. Circles are centred on every \
        distinct location (or a grid) and grow through the nearest locations up to --max-share of the records; each is \
        scored with a log-likelihood ratio: Bernoulli (the records of --case-class against the other \
        --at-risk-classes; Kulldorff 1997), ordinal (a shift toward support or toward oppose on oppose < neutral < \
        support; Jung, Kulldorff & Klassen 2007), multinomial (any unusual mix of the unordered classes inside against \
        outside; Jung, Kulldorff & Richard 2010) or Poisson (case counts on areas against the population at risk or \
        expected counts; Kulldorff 1997). With --time-field the windows are cylinders: every circle × every run of \
        1 to --max-duration consecutive --period periods; the space-time-permutation model (Kulldorff, Heffernan, \
        Hartman, Assunção & Mostashari 2005) needs no population: it compares the records of a cylinder with those \
        expected from the margins, c(circle)·c(periods)/C, and its relabellings shuffle the records' periods; \
        bernoulli, ordinal and multinomial compare cases and controls inside the cylinder. Sides are named by stance with --toward (bernoulli, ordinal; a multinomial \
        cluster leans to the class most over-represented inside) or as high/low with --direction (poisson). The most likely cluster and secondary clusters sharing no location are \
        compared with the largest ratio of each random relabelling (p = rank/(R+1); Dwass 1957) and with a Gumbel \
        distribution fitted to those maxima (Abrams, Kleinman & Kulldorff 2010). Records are a biased sample of \
        people: a cluster says where the labels differ from the rest of the map, not why.";
    const DEFAULT_NAME: &'static str = "scan";
    const INPUT: InputUse = InputUse::Required;

    fn outputs() -> Vec<OutputDecl> {
        vec![
            OutputDecl {
                id: "clusters",
                title: "Clusters",
                description: "Polygon layer <name>_clusters in the working CRS (circles of 72 vertices), one row per \
                    cluster: cluster_no (1 = most likely), leans_to (the side: a stance class, control classes joined \
                    by '+', or high/low for poisson; multinomial: the class with the largest share inside against \
                    outside), radius_m, records_in (null for poisson); bernoulli, ordinal and \
                    multinomial: share_in_<class> and share_out_<class> for each class present (share of the at-risk records \
                    inside and outside the circle); poisson: cases_in, expected_in; then risk_ratio (inside against \
                    outside; multinomial: share inside over share outside of the leans_to class), llr (log-likelihood ratio), p_monte_carlo, p_gumbel and replicates (how many random \
                    relabellings the p-values rest on). Space-time scans add period_start and period_end (period \
                    labels, e.g. 2026-06) and periods (the run's length) after radius_m, and count records_in \
                    inside the cylinder; space-time-permutation: records_in, expected_in (c(circle)·c(periods)/C) \
                    and risk_ratio = records_in / expected_in (high clusters only).",
                media_type: GEOPACKAGE_MEDIA_TYPE,
            },
            OutputDecl {
                id: "members",
                title: "Cluster members",
                description: "Attribute table <name>_members: feature_id of each input record (poisson: area) inside a \
                    reported cluster (space-time: inside its circle and run of periods), and its cluster_no.",
                media_type: GEOPACKAGE_MEDIA_TYPE,
            },
        ]
    }

    fn run(params: &ScanParams, run: &mut Run) -> Result<Value> {
        let mut config = params.check(run.common.seed)?;
        run.progress.phase("reading");
        let data = read(&config, run)?;
        let shards = ShardRun::prepare(
            &config.sharding,
            config.scan.replicates,
            "stance-scan",
            params,
            run,
        )?;
        config.scan.drawn = shards.drawn();
        config.scan.observed = shards.publishing();
        config.scan.given_max = shards
            .merged()
            .map(|m| m.per_replicate("max"))
            .transpose()?;
        run.progress.set(READ_SHARE);
        let started = Instant::now();
        let scanned = scan(&config, run, &data)?;
        let scan_s = started.elapsed().as_secs_f64();
        run.check_interrupted()?;
        // A shard writes the largest ratio of each of its replicates, nothing else.
        if let Some(summary) = shards.write(run, || {
            let mut partial = Partial::default();
            partial.values("max", &scanned.replicate_max);
            Ok(partial)
        })? {
            return Ok(summary);
        }
        run.progress.phase("writing");
        run.progress.set(SCAN_END);
        let rows: Vec<ClusterRow> = scanned
            .clusters
            .iter()
            .map(|c| cluster_row(&config, &data, &scanned, c))
            .collect();
        log_clusters(run, &scanned, &rows);
        write_layers(run, &config, &data, &scanned, &rows)?;
        let mut results = summary(run, &config, &data, &scanned, &rows);
        results["scan_time_s"] = ((scan_s * 1000.0).round() / 1000.0).into();
        Ok(results)
    }
}

/// Reads the records or the areas the configuration names.
fn read(config: &Config, run: &mut Run) -> Result<Data> {
    let input = run.input()?.to_owned();
    match &config.subject {
        Subject::Records {
            field,
            classes,
            roles,
        } => read_records(run, &input, field, classes, roles, config.time.as_ref()),
        Subject::Areas(fields) => read_areas(run, &input, fields),
    }
}

/// Runs the scan, reporting its progress: counted in replicates when there are any (the observed
/// data and the relabellings are scanned together, so the count is of replicate-equivalents
/// done), as phase "windows" otherwise.
fn scan(config: &Config, run: &mut Run, data: &Data) -> Result<ScanResult> {
    let replicates = config.scan.drawn.len() as u64;
    let locations = data.distinct_locations();
    run.log(format!(
        "stance-scan: {} model, {} {} on {} locations, {} replicates",
        config.model.name(),
        data.fids.len(),
        match data.kind {
            DataKind::Areas { .. } => "areas",
            DataKind::Points { .. } => "records",
        },
        locations,
        replicates
    ));
    let periods = data.times.as_ref().map(|t| t.periods);
    run.guard_memory(
        memory_estimate(config, data.fids.len(), locations, periods),
        &format!(
            "the scan of {} features on {locations} locations",
            data.fids.len()
        ),
        "aggregate the records to fewer distinct locations or lower --max-share",
    )?;
    run.progress.phase(if replicates > 0 {
        "replicates"
    } else {
        "windows"
    });
    let progress = &run.progress;
    let report = |fraction: f64| {
        let overall = READ_SHARE + (SCAN_END - READ_SHARE) * fraction;
        if replicates > 0 {
            let done = ((fraction * replicates as f64).floor() as u64).min(replicates);
            progress.set_counted(overall, done, replicates);
        } else {
            progress.set(overall);
        }
    };
    let stop = run.interrupt().flag();
    let outcome = match (&data.kind, &data.times) {
        (DataKind::Points { labels, model, .. }, Some(times)) => {
            let records = TimedRecords {
                x: &data.x,
                y: &data.y,
                period: &times.of_record,
                periods: times.periods,
                labels,
            };
            let timed = match config.model {
                ModelChoice::SpaceTimePermutation => TimedModel::Permutation,
                _ => TimedModel::Labels(*model),
            };
            let duration = max_duration(config, times.periods);
            scan_space_time(&records, timed, duration, &config.scan, &report, stop)
        }
        (DataKind::Points { labels, model, .. }, None) => scan_points(
            &data.x,
            &data.y,
            labels,
            *model,
            &config.scan,
            &report,
            stop,
        ),
        (DataKind::Areas { cases, expected }, _) => scan_areas(
            &data.x,
            &data.y,
            cases,
            expected,
            &config.scan,
            &report,
            stop,
        ),
    };
    outcome.map_err(|_| Error::Interrupted)
}

/// The peak memory of a scan, estimated before it runs (bytes): a fixed 64 MiB (program, GDAL,
/// buffers); about 52 bytes per feature read (positions, ids, classes and times as read, the
/// locations they map to, and the relabelled copies the worker threads hold; measured at 1, 5
/// and 10 million records); the counts of one block of labellings (a byte per location,
/// labelling and class, at most [`analysis::BLOCK_BYTES`]); for space-time scans each worker's
/// counts per location and period (u32) and every centre's circles (13 bytes per location
/// inside, about `--max-share` of the locations per centre).
pub fn memory_estimate(
    config: &Config,
    features: usize,
    locations: usize,
    periods: Option<usize>,
) -> u64 {
    let width = match config.model {
        ModelChoice::Ordinal | ModelChoice::Multinomial => models::ORDINAL_CLASSES,
        _ => 1,
    } as f64;
    let (features, locations) = (features as f64, locations as f64);
    let labellings = (config.scan.drawn.len() + 1) as f64;
    let threads = rayon::current_num_threads() as f64;
    let mut bytes = 64.0 * 1048576.0 + 52.0 * features;
    match periods {
        None => bytes += (locations * labellings * width).min(analysis::BLOCK_BYTES as f64),
        Some(t) => {
            bytes += threads * locations * t as f64 * width * 4.0;
            bytes += locations * (locations * config.scan.max_share).max(1.0) * 13.0;
        }
    }
    bytes as u64
}

/// The longest run of periods: as asked, or half the `periods` studied (at least 1).
pub fn max_duration(config: &Config, periods: usize) -> usize {
    config
        .time
        .as_ref()
        .and_then(|t| t.max_duration)
        .unwrap_or(periods / 2)
        .clamp(1, periods.max(1))
}

/// One log line per cluster (shown with -v).
fn log_clusters(run: &Run, scanned: &ScanResult, rows: &[ClusterRow]) {
    for (c, row) in scanned.clusters.iter().zip(rows) {
        let (cx, cy) = scanned.centres[c.centre];
        run.log(format!(
            "  cluster {}: leans to {} at ({cx:.0}, {cy:.0}) radius {:.0} m, LLR {:.4}, p {}",
            row.cluster_no,
            row.leans_to,
            row.radius_m,
            row.llr,
            row.p_monte_carlo
                .map_or("n/a".to_owned(), |p| format!("{p:.4}"))
        ));
    }
}
