//! The trend fields of `<name>_areas`, the period table `<name>_periods` and the summary of a
//! stance-trend run.

use serde_json::{json, Value};
use stance_core::error::Result;
use stance_core::gpkg::stage::{ExtraColumn, FieldData, FieldDef, FieldKind, GeometryKind, Shape};
use stance_core::host::Run;
use stance_core::stance::Stance;
use stance_core::time::{format_utc, Period};

use crate::params::Config;
use crate::tally::{cases_at_risk, Tally};
use crate::trend::{AreaTrend, TrendClass};
use crate::wilson;

/// The tested areas.
pub struct Tested {
    /// Trend of each area.
    pub trends: Vec<AreaTrend>,
    /// Adjusted p-value of each area (NaN: not tested).
    pub p_adjusted: Vec<f64>,
    /// Class of each area.
    pub classes: Vec<TrendClass>,
}

/// One unit of the period table: its kind, its name and its counts.
pub struct Unit<'a> {
    /// `study_area`, `area` or `cluster`.
    pub kind: &'static str,
    /// `all`, the area id or the cluster number.
    pub name: String,
    /// Counts per period.
    pub counts: &'a [[u64; 3]],
}

fn real(values: impl Iterator<Item = Option<f64>>) -> ExtraColumn {
    ExtraColumn::Real(values.collect())
}

/// The trend fields added to the copy of the area layer, in order.
pub fn area_fields(tested: &Tested) -> Vec<(FieldDef, ExtraColumn)> {
    let tests = || tested.trends.iter().map(|t| t.test.as_ref());
    let mk = |pick: fn(&crate::mann_kendall::MannKendall) -> f64| {
        real(tests().map(move |t| t.map(|(m, _)| pick(m))))
    };
    let sen = |pick: fn(&crate::sen::SenSlope) -> f64| {
        real(tests().map(move |t| t.map(|(_, s)| pick(s))))
    };
    let used = tested.trends.iter().map(|t| Some(t.periods_used as i64));
    let p_adjusted = tested.p_adjusted.iter().map(|p| Some(*p));
    let classes = tested.classes.iter().map(|c| Some(c.label().to_owned()));
    vec![
        (
            FieldDef::new("periods_used", FieldKind::Integer),
            ExtraColumn::Integer(used.collect()),
        ),
        (FieldDef::new("mk_s", FieldKind::Real), mk(|m| m.s)),
        (
            FieldDef::new("mk_variance", FieldKind::Real),
            mk(|m| m.variance),
        ),
        (FieldDef::new("mk_z", FieldKind::Real), mk(|m| m.z)),
        (FieldDef::new("mk_p", FieldKind::Real), mk(|m| m.p)),
        (
            FieldDef::new("p_adjusted", FieldKind::Real),
            real(p_adjusted),
        ),
        (
            FieldDef::new("sen_slope", FieldKind::Real),
            sen(|s| s.slope),
        ),
        (
            FieldDef::new("sen_slope_low", FieldKind::Real),
            sen(|s| s.low),
        ),
        (
            FieldDef::new("sen_slope_high", FieldKind::Real),
            sen(|s| s.high),
        ),
        (
            FieldDef::new("trend", FieldKind::Text),
            ExtraColumn::Text(classes.collect()),
        ),
    ]
}

fn period_fields() -> Vec<FieldDef> {
    let mut fields = vec![
        FieldDef::new("unit_kind", FieldKind::Text),
        FieldDef::new("unit", FieldKind::Text),
        FieldDef::new("period", FieldKind::Text),
        FieldDef::new("period_start", FieldKind::Text),
    ];
    for class in Stance::ALL {
        fields.push(FieldDef::new(
            &format!("count_{}", class.label()),
            FieldKind::Integer,
        ));
    }
    fields.push(FieldDef::new("count_total", FieldKind::Integer));
    for name in ["share", "share_se", "share_low", "share_high"] {
        fields.push(FieldDef::new(name, FieldKind::Real));
    }
    fields
}

/// Writes the period table `name`: one row per unit and period, in the order of `units`.
///
/// # Errors
/// Name clashes, SQLite failures.
pub fn write_periods(
    run: &mut Run,
    name: &str,
    config: &Config,
    range: (i64, usize),
    units: &[Unit],
) -> Result<u64> {
    let labels: Vec<(String, String)> = (0..range.1)
        .map(|p| {
            let index = range.0 + p as i64;
            let start = config.period.start_seconds(index).map(format_utc);
            (config.period.label(index), start.unwrap_or_default())
        })
        .collect();
    let rule = &config.rule;
    let mut writer =
        run.output()
            .create_vector(name, GeometryKind::None, None, &period_fields())?;
    for unit in units {
        for (cell, (label, start)) in unit.counts.iter().zip(&labels) {
            let (cases, at_risk) = cases_at_risk(cell, rule.case, &rule.at_risk);
            let share = wilson::share(cases as f64, at_risk as f64, rule.z);
            let number = |f: fn(&wilson::Share) -> f64| {
                share
                    .as_ref()
                    .map_or(FieldData::Null, |s| FieldData::Real(f(s)))
            };
            let count = |c: u64| FieldData::Integer(c as i64);
            writer.add(
                Shape::None,
                &[
                    FieldData::Text(unit.kind),
                    FieldData::Text(&unit.name),
                    FieldData::Text(label),
                    FieldData::Text(start),
                    count(cell[0]),
                    count(cell[1]),
                    count(cell[2]),
                    count(cell.iter().sum()),
                    number(|s| s.share),
                    number(|s| s.se),
                    number(|s| s.low),
                    number(|s| s.high),
                ],
            )?;
        }
    }
    writer.finish()
}

/// What the run read and counted, for the summary.
pub struct Counted<'a> {
    /// Records read (None: counts from fields).
    pub records: Option<usize>,
    /// Records without a usable time (None: counts from fields).
    pub without_time: Option<usize>,
    /// Records with a time outside every area.
    pub outside_areas: u64,
    /// The study-area counts.
    pub study: &'a Tally,
    /// Clusters in the period table.
    pub clusters: usize,
}

/// The summary of the run.
pub fn summary(config: &Config, counted: &Counted, tested: &Tested, layers: (&str, &str)) -> Value {
    let rule = &config.rule;
    let period = config.period;
    let label = |p: usize| period.label(counted.study.first + p as i64);
    let mut classes = serde_json::Map::new();
    for class in TrendClass::ALL {
        let n = tested.classes.iter().filter(|c| **c == class).count();
        classes.insert(class.label().to_owned(), json!(n));
    }
    json!({
        "areas_layer": layers.0,
        "periods_layer": layers.1,
        "period": period_name(period),
        "first_period": label(0),
        "last_period": label(counted.study.periods - 1),
        "periods": counted.study.periods,
        "counts_from": if counted.records.is_some() { "records" } else { "count fields" },
        "records_read": counted.records,
        "records_without_time": counted.without_time,
        "records_outside_areas": counted.outside_areas,
        "case_class": rule.case.label(),
        "at_risk_classes": rule.at_risk.iter().map(|s| s.label()).collect::<Vec<_>>(),
        "min_records": rule.min_records,
        "min_periods": rule.min_periods,
        "alpha": rule.alpha,
        "adjust": config.adjustment,
        "autocorrelation": rule.autocorrelation,
        "areas": tested.classes.len(),
        "clusters": counted.clusters,
        "trend_classes": classes,
        "method": "Mann–Kendall test (Mann 1945; Kendall 1975) with tie-corrected variance and continuity correction; Sen (1968) slope with its order-statistic interval; Wilson (1927) score intervals",
        "autocorrelation_method": rule.autocorrelation.then_some("variance inflated by the significant lags of the ranks' autocorrelation of the detrended series (Hamed & Rao 1998)"),
    })
}

fn period_name(period: Period) -> &'static str {
    match period {
        Period::Day => "day",
        Period::Week => "week",
        Period::Month => "month",
        Period::Quarter => "quarter",
    }
}
