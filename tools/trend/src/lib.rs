//! stance-trend: stance records counted per area and calendar period, the share of a class per
//! period with its standard error and Wilson (1927) interval, and per area a trend test of the
//! share over the periods — Mann–Kendall (Mann 1945; Kendall 1975) with tie correction and,
//! optionally, the serial-correlation correction of Hamed & Rao (1998) — with Sen's (1968)
//! slope, a multiple-testing adjustment across areas and a trend class. Also writes the period
//! table of the whole study area, each area and each cluster.

pub mod input;
pub mod mann_kendall;
pub mod output;
pub mod params;
pub mod sen;
pub mod tally;
pub mod trend;
pub mod wilson;

use serde_json::Value;
use stance_core::assign::assign;
use stance_core::error::{Error, Result};
use stance_core::host::{InputUse, OutputDecl, Run, Tool, GEOPACKAGE_MEDIA_TYPE};
use stance_core::multiple::adjust;

use input::{Areas, Clusters, Records};
use output::{Counted, Tested, Unit};
pub use params::{Config, Source, TrendParams};
use tally::{period_range, tally, Tally};

/// The trend tool.
#[derive(Debug)]
pub struct Trend;

impl Tool for Trend {
    type Params = TrendParams;
    const ID: &'static str = "trend";
    const TITLE: &'static str = "Stance shares per area and period with trend tests";
    const DESCRIPTION: &'static str = "Counts the point records of each stance class per area \
        (point in polygon; a point on a shared boundary goes to the first area in the layer's \
        order) and calendar period (UTC day, ISO week, month or quarter of --time-field; records \
        without a usable time are left out and counted), or reads counts per class and period \
        already on the areas (--count-fields, --periods). For the study area, each area and each \
        cluster polygon of --clusters it writes a period table: counts per class, the share of the \
        --case-class records among the --at-risk-classes records with its standard error and \
        Wilson (1927) score interval. Per area, the shares of the periods with at least \
        --min-records records at risk form a series, tested for a monotonic trend by the \
        Mann–Kendall test (Mann 1945; Kendall 1975): the score S, its variance with the correction \
        for ties, Z with the continuity correction and the two-sided p-value; with \
        --autocorrelation the variance is inflated by the significant lags of the autocorrelation \
        of the ranks of the detrended series (Hamed & Rao 1998). Sen's (1968) slope (share per \
        period) comes with its order-statistic confidence interval from the variance of S. The \
        p-values are adjusted across areas (--adjust), and each area gets a trend class: rising or \
        falling (adjusted p below --alpha, by the sign of S), steady, or too few records (fewer \
        than --min-periods usable periods).";
    const DEFAULT_NAME: &'static str = "trend";
    const INPUT: InputUse = InputUse::Required;
    const INPUT_DESCRIPTION: &'static str = "GeoPackage with the point records (a point layer \
        with a stance field and a date-time field), unless the counts are on the areas \
        (--count-fields); also the default file of the areas and the clusters.";

    fn outputs() -> Vec<OutputDecl> {
        vec![
            OutputDecl {
                id: "areas",
                title: "Areas with their trend",
                description: "Polygon layer <name>_areas: a copy of the area layer (its CRS and \
                    fields) with periods_used, mk_s, mk_variance, mk_z, mk_p, p_adjusted, \
                    sen_slope (share per period), sen_slope_low, sen_slope_high and trend \
                    (rising, falling, steady, too few records).",
                media_type: GEOPACKAGE_MEDIA_TYPE,
            },
            OutputDecl {
                id: "periods",
                title: "Period table",
                description: "Attribute table <name>_periods, one row per unit and period from \
                    the first to the last period holding a record: unit_kind (study_area, area, \
                    cluster), unit (all, the area id, the cluster number), period, period_start \
                    (UTC), count_oppose, count_neutral, count_support, count_total, share, \
                    share_se, share_low, share_high (Wilson interval at 1 − alpha).",
                media_type: GEOPACKAGE_MEDIA_TYPE,
            },
        ]
    }

    fn run(params: &TrendParams, run: &mut Run) -> Result<Value> {
        let config = params.check(run.common.layer.is_some())?;
        run.progress.phase("reading");
        let records = match &config.source {
            Source::Records { time_field } => Some(input::read_records(&config, time_field, run)?),
            Source::Fields { .. } => None,
        };
        let areas = input::read_areas(&config, records.as_ref(), run)?;
        let clusters = match &records {
            Some(r) => input::read_clusters(&config, r, run)?,
            None => None,
        };
        run.progress.set(0.3);
        run.progress.phase("counting");
        let counts = match &records {
            Some(r) => count(&config, r, &areas, clusters.as_ref(), run)?,
            None => from_fields(&areas)?,
        };
        run.progress.set(0.6);
        run.progress.phase("testing");
        let tested = test_areas(&config, &counts.areas);
        run.progress.set(0.7);
        run.progress.phase("writing");
        let names = (run.layer_name("areas"), run.layer_name("periods"));
        let fields = output::area_fields(&tested);
        let polygons = &areas.polygons;
        let fids = &polygons.layer.fids;
        run.output().copy_with_fields(
            &polygons.path,
            &polygons.layer.layer,
            &names.0,
            fids,
            &fields,
        )?;
        let units = units(&counts, &areas, clusters.as_ref());
        let rows = output::write_periods(run, &names.1, &config, counts.range, &units)?;
        run.progress.set(1.0);
        run.log(format!(
            "stance-trend: {} areas tested into '{}', {rows} period rows into '{}'",
            fids.len(),
            names.0,
            names.1
        ));
        let counted = Counted {
            records: records.as_ref().map(|r| r.classes.len()),
            without_time: counts.without_time,
            outside_areas: counts.outside_areas,
            study: &counts.study,
            clusters: counts.clusters.len(),
        };
        Ok(output::summary(
            &config,
            &counted,
            &tested,
            (&names.0, &names.1),
        ))
    }
}

/// The counts of every unit.
struct Counts {
    range: (i64, usize),
    without_time: Option<usize>,
    outside_areas: u64,
    study: Tally,
    areas: Tally,
    clusters: Vec<Tally>,
}

/// Counts the records per period for the study area, each area and each cluster.
fn count(
    config: &Config,
    records: &Records,
    areas: &Areas,
    clusters: Option<&Clusters>,
    run: &Run,
) -> Result<Counts> {
    let period_of: Vec<Option<i64>> = records
        .times
        .iter()
        .map(|t| t.and_then(|t| config.period.index(t)))
        .collect();
    let without_time = Some(period_of.iter().filter(|p| p.is_none()).count());
    let time_field = match &config.source {
        Source::Records { time_field } => time_field.clone(),
        Source::Fields { .. } => String::new(),
    };
    let range = period_range(&period_of).ok_or_else(|| Error::BadField {
        path: run.input().map(|p| p.to_owned()).unwrap_or_default(),
        layer: records.layer.layer.clone(),
        field: time_field,
        message: "no record has a usable date-time (RFC 3339 / ISO 8601 expected)".into(),
    })?;
    let (x, y) = (&records.layer.x, &records.layer.y);
    let classes = &records.classes;
    let study = tally(&period_of, classes, range, 1, |_| Some(0));
    let assigned = assign(&areas.polygons.layer.polygons, x, y);
    run.check_interrupted()?;
    let area_count = areas.polygons.layer.fids.len();
    let by_area = tally(&period_of, classes, range, area_count, |i| {
        assigned.area[i].map(|a| a as usize)
    });
    let outside_areas = (0..period_of.len())
        .filter(|&i| period_of[i].is_some() && assigned.area[i].is_none())
        .count() as u64;
    let mut by_cluster = Vec::new();
    for polygon in clusters.iter().flat_map(|c| &c.polygons.layer.polygons) {
        let inside = assign(std::slice::from_ref(polygon), x, y);
        by_cluster.push(tally(&period_of, classes, range, 1, |i| {
            inside.area[i].map(|_| 0)
        }));
        run.check_interrupted()?;
    }
    Ok(Counts {
        range,
        without_time,
        outside_areas,
        study,
        areas: by_area,
        clusters: by_cluster,
    })
}

/// The counts of `--count-fields`; the study area is the sum of the areas.
fn from_fields(areas: &Areas) -> Result<Counts> {
    let tally = areas
        .counts
        .clone()
        .ok_or_else(|| Error::Failed("count fields were not read".into()))?;
    let mut study = vec![[0u64; 3]; tally.periods];
    for area in &tally.counts {
        for (total, cell) in study.iter_mut().zip(area) {
            for c in 0..3 {
                total[c] += cell[c];
            }
        }
    }
    Ok(Counts {
        range: (tally.first, tally.periods),
        without_time: None,
        outside_areas: 0,
        study: Tally {
            first: tally.first,
            periods: tally.periods,
            counts: vec![study],
        },
        areas: tally,
        clusters: Vec::new(),
    })
}

/// The trend of every area, the adjusted p-values and the classes.
fn test_areas(config: &Config, areas: &Tally) -> Tested {
    let rule = &config.rule;
    let trends: Vec<trend::AreaTrend> = areas
        .counts
        .iter()
        .map(|c| trend::area_trend(c, areas.first, rule))
        .collect();
    let p: Vec<f64> = trends
        .iter()
        .map(|t| t.test.as_ref().map_or(f64::NAN, |(mk, _)| mk.p))
        .collect();
    let p_adjusted = adjust(&p, config.adjustment);
    let classes = trends
        .iter()
        .zip(&p_adjusted)
        .map(|(t, p)| trend::classify(t, *p, rule.alpha))
        .collect();
    Tested {
        trends,
        p_adjusted,
        classes,
    }
}

/// The units of the period table: the study area, each area, each cluster.
fn units<'a>(counts: &'a Counts, areas: &Areas, clusters: Option<&Clusters>) -> Vec<Unit<'a>> {
    let mut units = vec![Unit {
        kind: "study_area",
        name: "all".into(),
        counts: &counts.study.counts[0],
    }];
    units.extend(counts.areas.counts.iter().enumerate().map(|(i, c)| Unit {
        kind: "area",
        name: areas.ids.text(i),
        counts: c,
    }));
    let numbers = clusters.map(|c| c.numbers.as_slice()).unwrap_or_default();
    units.extend(counts.clusters.iter().zip(numbers).map(|(t, n)| Unit {
        kind: "cluster",
        name: n.clone(),
        counts: &t.counts[0],
    }));
    units
}
