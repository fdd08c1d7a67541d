//! From a finished scan to the cluster table, its layers and the summary: which side each
//! cluster leans to, what lies inside and outside it, its risk ratio and its p-values.

use std::collections::BTreeMap;

use serde_json::{json, Map, Value};
use stance_core::error::Result;
use stance_core::gpkg::stage::{FieldData, FieldDef, FieldKind, GeometryKind, Shape};
use stance_core::host::Run;
use stance_core::stance::Stance;

use crate::analysis::ScanResult;
use crate::clusters::Cluster;
use crate::input::{Data, DataKind};
use crate::models::Side;
use crate::params::{joined, Config, ModelChoice, RecordRoles, Subject};

/// Vertices of a drawn cluster circle.
const CIRCLE_VERTICES: usize = 72;

/// One row of the cluster table.
#[derive(Debug, Clone, PartialEq)]
pub struct ClusterRow {
    /// 1 = most likely.
    pub cluster_no: usize,
    /// The side: a stance class, control classes joined by '+', or high/low (Poisson).
    pub leans_to: String,
    /// Distance of the farthest location inside (m).
    pub radius_m: f64,
    /// Records inside (None for areas).
    pub records_in: Option<u64>,
    /// Per class present: (class, share of the at-risk records inside, share outside).
    pub shares: Vec<(Stance, f64, f64)>,
    /// Observed cases inside (areas).
    pub cases_in: Option<u64>,
    /// Expected cases inside (areas).
    pub expected_in: Option<f64>,
    /// Risk ratio inside against outside (None when not finite).
    pub risk_ratio: Option<f64>,
    /// Log-likelihood ratio.
    pub llr: f64,
    /// Monte Carlo p-value.
    pub p_monte_carlo: Option<f64>,
    /// Gumbel-approximated p-value.
    pub p_gumbel: Option<f64>,
    /// Replicates the p-values rest on.
    pub replicates: usize,
    /// Space-time: the first and last period of the run (labels) and its length.
    pub time: Option<(String, String, usize)>,
}

/// Which columns the cluster table has.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Columns {
    /// Record models: share_in_/share_out_ of these classes.
    pub shares: Vec<Stance>,
    /// cases_in (poisson).
    pub cases_in: bool,
    /// expected_in (poisson, space-time permutation).
    pub expected_in: bool,
    /// period_start, period_end, periods (space-time scans).
    pub time: bool,
}

impl Columns {
    /// The columns of a scan of `data` under `config`.
    pub fn of(config: &Config, data: &Data) -> Self {
        let permutation = config.model == ModelChoice::SpaceTimePermutation;
        let points = matches!(data.kind, DataKind::Points { .. });
        Columns {
            shares: if points && !permutation {
                classes_present(data)
            } else {
                Vec::new()
            },
            cases_in: !points,
            expected_in: !points || permutation,
            time: data.times.is_some(),
        }
    }
}

/// `a / b` when finite.
fn ratio(a: f64, b: f64) -> Option<f64> {
    let r = a / b;
    r.is_finite().then_some(r)
}

/// The classes present among the analysed records, in class order (empty for areas).
pub fn classes_present(data: &Data) -> Vec<Stance> {
    data.class_totals().into_keys().collect()
}

/// The side label of a cluster.
fn leans_to(config: &Config, present: &[Stance], side: Side) -> String {
    match (&config.subject, side) {
        (Subject::Areas(_), Side::High) => "high".into(),
        (Subject::Areas(_), Side::Low) => "low".into(),
        (Subject::Records { roles, .. }, side) => match (roles, side) {
            (RecordRoles::Bernoulli { cases, .. }, Side::High) => cases.label().into(),
            (RecordRoles::Bernoulli { controls, .. }, Side::Low) => joined(controls),
            // The ends of the order among the classes present.
            (RecordRoles::Ordinal { .. }, Side::High) => {
                present.last().map_or("support", |s| s.label()).into()
            }
            (RecordRoles::Ordinal { .. }, Side::Low) => {
                present.first().map_or("oppose", |s| s.label()).into()
            }
            // Read from the shares once they are known (`most_over_represented`).
            (RecordRoles::Multinomial { .. }, _) => String::new(),
            (RecordRoles::Permutation { .. }, _) => "high".into(),
        },
    }
}

/// Multinomial: the class whose share inside is largest against its share outside (ties: the
/// first in class order; a class present inside and absent outside wins), with that ratio.
fn most_over_represented(shares: &[(Stance, f64, f64)]) -> Option<(Stance, Option<f64>)> {
    let mut best: Option<(Stance, f64)> = None;
    for &(class, share_in, share_out) in shares {
        let r = if share_out > 0.0 {
            share_in / share_out
        } else if share_in > 0.0 {
            f64::INFINITY
        } else {
            0.0
        };
        if best.is_none_or(|(_, b)| r > b) {
            best = Some((class, r));
        }
    }
    best.map(|(class, r)| (class, r.is_finite().then_some(r)))
}

/// Records per class inside the cluster (its locations), counted from the records.
fn inside_by_class(data: &Data, scanned: &ScanResult, c: &Cluster) -> BTreeMap<Stance, u64> {
    let mut inside_location = vec![false; scanned.x.len()];
    for &m in &c.members {
        inside_location[m as usize] = true;
    }
    let mut counts = BTreeMap::new();
    if let DataKind::Points { stances, .. } = &data.kind {
        for (i, (s, &l)) in stances.iter().zip(&scanned.of_point).enumerate() {
            if inside_location[l as usize] && in_run(data, c, i) {
                *counts.entry(*s).or_default() += 1;
            }
        }
    }
    counts
}

/// Whether record `i` falls in the cluster's run of periods (always, for a circle).
fn in_run(data: &Data, c: &Cluster, i: usize) -> bool {
    match (&data.times, &c.time) {
        (Some(times), Some(t)) => {
            let p = times.of_record[i] as usize;
            p >= t.first_period && p < t.first_period + t.periods
        }
        _ => true,
    }
}

/// The table row of cluster `c`.
pub fn cluster_row(config: &Config, data: &Data, scanned: &ScanResult, c: &Cluster) -> ClusterRow {
    let totals = data.class_totals();
    let present: Vec<Stance> = totals.keys().copied().collect();
    let w = &c.window;
    let side = leans_to(config, &present, w.side);
    let mut row = ClusterRow {
        cluster_no: c.rank,
        leans_to: side,
        radius_m: w.radius_m,
        records_in: None,
        shares: Vec::new(),
        cases_in: None,
        expected_in: None,
        risk_ratio: None,
        llr: w.llr,
        p_monte_carlo: c.p_value,
        p_gumbel: c.p_value_gumbel,
        replicates: scanned.replicate_max.len(),
        time: data.times.as_ref().zip(c.time).map(|(times, t)| {
            let first = times.first + t.first_period as i64;
            let last = first + t.periods as i64 - 1;
            (
                times.period.label(first),
                times.period.label(last),
                t.periods,
            )
        }),
    };
    if let Some(expected) = c.time.and_then(|t| t.expected) {
        // Observed over expected (Kulldorff et al. 2005).
        row.records_in = Some(u64::from(w.inside[0]));
        row.expected_in = Some(expected);
        row.risk_ratio = ratio(f64::from(w.inside[0]), expected);
        return row;
    }
    match &data.kind {
        DataKind::Areas { .. } => {
            // (O/E) / ((C − O)/(C − E)) (Kulldorff 1997, §5).
            let (o, e) = (f64::from(w.inside[0]), w.size);
            let all = scanned.class_totals[0] as f64;
            row.cases_in = Some(u64::from(w.inside[0]));
            row.expected_in = Some(e);
            row.risk_ratio = ratio(o / e, (all - o) / (all - e));
        }
        DataKind::Points { .. } => {
            let inside = inside_by_class(data, scanned, c);
            let n = w.size.round();
            let rest = scanned.total_weight - n;
            row.records_in = Some(n as u64);
            for (&class, &total) in &totals {
                let k = inside.get(&class).copied().unwrap_or(0) as f64;
                row.shares.push((class, k / n, (total as f64 - k) / rest));
            }
            if let Subject::Records {
                roles: RecordRoles::Multinomial { .. },
                ..
            } = &config.subject
            {
                // The class most over-represented inside, and its ratio of shares.
                if let Some((class, r)) = most_over_represented(&row.shares) {
                    row.leans_to = class.label().into();
                    row.risk_ratio = r;
                }
                return row;
            }
            // The class the risk ratio is about: the cases (Bernoulli) or the end of the
            // order the cluster is shifted toward (ordinal).
            let about = match &config.subject {
                Subject::Records {
                    roles: RecordRoles::Bernoulli { cases, .. },
                    ..
                } => Some(*cases),
                _ if w.side == Side::High => present.last().copied(),
                _ => present.first().copied(),
            };
            row.risk_ratio = row
                .shares
                .iter()
                .find(|s| Some(s.0) == about)
                .and_then(|s| ratio(s.1, s.2));
        }
    }
    row
}

/// The fields of the cluster layer, in order.
pub fn cluster_fields(columns: &Columns) -> Vec<FieldDef> {
    let mut fields = vec![
        FieldDef::new("cluster_no", FieldKind::Integer),
        FieldDef::new("leans_to", FieldKind::Text),
        FieldDef::new("radius_m", FieldKind::Real),
    ];
    if columns.time {
        fields.push(FieldDef::new("period_start", FieldKind::Text));
        fields.push(FieldDef::new("period_end", FieldKind::Text));
        fields.push(FieldDef::new("periods", FieldKind::Integer));
    }
    fields.push(FieldDef::new("records_in", FieldKind::Integer));
    for class in &columns.shares {
        fields.push(FieldDef::new(
            &format!("share_in_{}", class.label()),
            FieldKind::Real,
        ));
        fields.push(FieldDef::new(
            &format!("share_out_{}", class.label()),
            FieldKind::Real,
        ));
    }
    if columns.cases_in {
        fields.push(FieldDef::new("cases_in", FieldKind::Integer));
    }
    if columns.expected_in {
        fields.push(FieldDef::new("expected_in", FieldKind::Real));
    }
    for (name, kind) in [
        ("risk_ratio", FieldKind::Real),
        ("llr", FieldKind::Real),
        ("p_monte_carlo", FieldKind::Real),
        ("p_gumbel", FieldKind::Real),
        ("replicates", FieldKind::Integer),
    ] {
        fields.push(FieldDef::new(name, kind));
    }
    fields
}

impl ClusterRow {
    /// The row's values, in the order of [`cluster_fields`].
    fn values(&self, columns: &Columns) -> Vec<FieldData<'_>> {
        let int = |v: Option<u64>| v.map_or(FieldData::Null, |v| FieldData::Integer(v as i64));
        let real = |v: Option<f64>| v.map_or(FieldData::Null, FieldData::Real);
        let mut values = vec![
            FieldData::Integer(self.cluster_no as i64),
            FieldData::Text(&self.leans_to),
            FieldData::Real(self.radius_m),
        ];
        if columns.time {
            match &self.time {
                Some((start, end, periods)) => values.extend([
                    FieldData::Text(start),
                    FieldData::Text(end),
                    FieldData::Integer(*periods as i64),
                ]),
                None => values.extend([FieldData::Null, FieldData::Null, FieldData::Null]),
            }
        }
        values.push(int(self.records_in));
        for &(_, share_in, share_out) in &self.shares {
            values.push(real(share_in.is_finite().then_some(share_in)));
            values.push(real(share_out.is_finite().then_some(share_out)));
        }
        if columns.cases_in {
            values.push(int(self.cases_in));
        }
        if columns.expected_in {
            values.push(real(self.expected_in));
        }
        values.extend([
            real(self.risk_ratio),
            FieldData::Real(self.llr),
            real(self.p_monte_carlo),
            real(self.p_gumbel),
            FieldData::Integer(self.replicates as i64),
        ]);
        values
    }

    /// (field name, JSON value) in the order of [`cluster_fields`].
    fn to_pairs(&self, columns: &Columns) -> Vec<(String, Value)> {
        let finite = |v: f64| if v.is_finite() { json!(v) } else { Value::Null };
        let mut pairs: Vec<(String, Value)> = vec![
            ("cluster_no".into(), json!(self.cluster_no)),
            ("leans_to".into(), json!(self.leans_to)),
            ("radius_m".into(), json!(self.radius_m)),
        ];
        if columns.time {
            let (start, end, periods) = match &self.time {
                Some((a, b, n)) => (json!(a), json!(b), json!(n)),
                None => (Value::Null, Value::Null, Value::Null),
            };
            pairs.push(("period_start".into(), start));
            pairs.push(("period_end".into(), end));
            pairs.push(("periods".into(), periods));
        }
        pairs.push(("records_in".into(), json!(self.records_in)));
        for &(class, share_in, share_out) in &self.shares {
            pairs.push((format!("share_in_{class}"), finite(share_in)));
            pairs.push((format!("share_out_{class}"), finite(share_out)));
        }
        if columns.cases_in {
            pairs.push(("cases_in".into(), json!(self.cases_in)));
        }
        if columns.expected_in {
            pairs.push(("expected_in".into(), json!(self.expected_in)));
        }
        pairs.push(("risk_ratio".into(), json!(self.risk_ratio)));
        pairs.push(("llr".into(), json!(self.llr)));
        pairs.push(("p_monte_carlo".into(), json!(self.p_monte_carlo)));
        pairs.push(("p_gumbel".into(), json!(self.p_gumbel)));
        pairs.push(("replicates".into(), json!(self.replicates)));
        pairs
    }

    /// The row as a JSON object whose keys are the layer's field names, in the same order.
    pub fn to_json(&self, columns: &Columns) -> Value {
        Value::Object(self.to_pairs(columns).into_iter().collect::<Map<_, _>>())
    }
}

/// A circle of `radius` around (`cx`, `cy`) as a closed ring of [`CIRCLE_VERTICES`] vertices.
pub fn circle(cx: f64, cy: f64, radius: f64) -> geo_types::Polygon<f64> {
    let mut ring: Vec<geo_types::Coord<f64>> = (0..CIRCLE_VERTICES)
        .map(|i| {
            let a = std::f64::consts::TAU * i as f64 / CIRCLE_VERTICES as f64;
            geo_types::coord! { x: cx + radius * a.cos(), y: cy + radius * a.sin() }
        })
        .collect();
    ring.push(ring[0]);
    geo_types::Polygon::new(geo_types::LineString::new(ring), Vec::new())
}

/// The circle drawn for a cluster: its radius, or for a window of one location (radius 0)
/// halfway to the next location (every radius up to there gives the same window), or 1 m when
/// none is left out.
fn drawn_circle(scanned: &ScanResult, c: &Cluster) -> geo_types::Polygon<f64> {
    let (cx, cy) = scanned.centres[c.centre];
    let w = &c.window;
    let drawn = if w.radius_m > 0.0 {
        w.radius_m
    } else if w.next_distance_m.is_finite() && w.next_distance_m > 0.0 {
        0.5 * w.next_distance_m
    } else {
        1.0
    };
    circle(cx, cy, drawn)
}

/// Writes `<name>_clusters` (circles with the table) and `<name>_members`.
///
/// # Errors
/// Failures of the staging file.
pub fn write_layers(
    run: &mut Run,
    config: &Config,
    data: &Data,
    scanned: &ScanResult,
    rows: &[ClusterRow],
) -> Result<()> {
    let columns = Columns::of(config, data);
    let fields = cluster_fields(&columns);
    let name = run.layer_name("clusters");
    let mut writer =
        run.output()
            .create_vector(&name, GeometryKind::MultiPolygon, Some(&data.srs), &fields)?;
    for (c, row) in scanned.clusters.iter().zip(rows) {
        let polygon = drawn_circle(scanned, c);
        writer.add(Shape::Polygon(&polygon), &row.values(&columns))?;
    }
    writer.finish()?;
    write_members(run, data, scanned)
}

/// Every analysed record (or area) whose location lies in a reported cluster.
fn write_members(run: &mut Run, data: &Data, scanned: &ScanResult) -> Result<()> {
    // Per location, the clusters holding it (several only for cylinders in other periods).
    let mut clusters_at = vec![Vec::new(); scanned.x.len()];
    for c in &scanned.clusters {
        for &m in &c.members {
            clusters_at[m as usize].push(c);
        }
    }
    let fields = [
        FieldDef::new("feature_id", FieldKind::Integer),
        FieldDef::new("cluster_no", FieldKind::Integer),
    ];
    let name = run.layer_name("members");
    let mut writer = run
        .output()
        .create_vector(&name, GeometryKind::None, None, &fields)?;
    let mut rows: Vec<(usize, i64)> = data
        .fids
        .iter()
        .zip(&scanned.of_point)
        .enumerate()
        .filter_map(|(i, (&fid, &l))| {
            clusters_at[l as usize]
                .iter()
                .find(|c| in_run(data, c, i))
                .map(|c| (c.rank, fid))
        })
        .collect();
    rows.sort_unstable();
    for (no, fid) in rows {
        writer.add(
            Shape::None,
            &[FieldData::Integer(fid), FieldData::Integer(no as i64)],
        )?;
    }
    writer.finish()?;
    Ok(())
}

/// The q-quantile of the replicate maxima (None without replicates).
fn quantile(sorted: &[f64], q: f64) -> Value {
    if sorted.is_empty() {
        return Value::Null;
    }
    let i = ((sorted.len() as f64 * q).ceil() as usize).clamp(1, sorted.len()) - 1;
    json!(sorted[i])
}

/// The run's summary: what was scanned, how, and the cluster table.
pub fn summary(
    run: &Run,
    config: &Config,
    data: &Data,
    scanned: &ScanResult,
    rows: &[ClusterRow],
) -> Value {
    let columns = Columns::of(config, data);
    let mut maxima = scanned.replicate_max.clone();
    maxima.sort_by(f64::total_cmp);
    let mut s = Map::new();
    s.insert("clusters_layer".into(), json!(run.layer_name("clusters")));
    s.insert("members_layer".into(), json!(run.layer_name("members")));
    s.insert("model".into(), json!(config.model.name()));
    match &config.subject {
        Subject::Records { roles, .. } => {
            let mut at_risk = match roles {
                RecordRoles::Bernoulli { cases, controls } => {
                    s.insert("case_class".into(), json!(cases.label()));
                    let mut all = controls.clone();
                    all.push(*cases);
                    all
                }
                RecordRoles::Ordinal { classes } | RecordRoles::Multinomial { classes } => {
                    classes.clone()
                }
                RecordRoles::Permutation {
                    classes,
                    case_class,
                } => {
                    if *case_class {
                        s.insert("case_class".into(), json!(joined(classes)));
                    }
                    classes.clone()
                }
            };
            at_risk.sort();
            let labels: Vec<&str> = at_risk.iter().map(|c| c.label()).collect();
            s.insert("at_risk_classes".into(), json!(labels));
            if !matches!(
                roles,
                RecordRoles::Multinomial { .. } | RecordRoles::Permutation { .. }
            ) {
                s.insert("toward".into(), json!(config.side_asked));
            }
            let by_class: BTreeMap<&str, u64> = data
                .class_totals()
                .into_iter()
                .map(|(k, v)| (k.label(), v))
                .collect();
            s.insert("records_by_class".into(), json!(by_class));
        }
        Subject::Areas(_) => {
            s.insert("direction".into(), json!(config.side_asked));
            s.insert("cases_total".into(), json!(scanned.class_totals[0]));
        }
    }
    s.insert(
        "crs".into(),
        json!(stance_core::gpkg::crs::label(&data.srs)),
    );
    s.insert("features_analysed".into(), json!(data.fids.len()));
    s.insert("features_excluded".into(), json!(data.excluded));
    if let Some(times) = &data.times {
        let last = times.first + times.periods as i64 - 1;
        s.insert("period".into(), json!(times.period));
        s.insert(
            "max_duration".into(),
            json!(crate::max_duration(config, times.periods)),
        );
        s.insert("periods_studied".into(), json!(times.periods));
        s.insert(
            "first_period".into(),
            json!(times.period.label(times.first)),
        );
        s.insert("last_period".into(), json!(times.period.label(last)));
        s.insert("records_without_time".into(), json!(times.without_time));
    }
    s.insert("locations".into(), json!(scanned.x.len()));
    s.insert("centres".into(), json!(scanned.centres.len()));
    s.insert("windows_per_labelling".into(), json!(scanned.windows));
    s.insert("replicates".into(), json!(config.scan.replicates));
    s.insert(
        "replicate_max_llr_95th_percentile".into(),
        quantile(&maxima, 0.95),
    );
    s.insert(
        "replicate_max_llr_99th_percentile".into(),
        quantile(&maxima, 0.99),
    );
    let clusters: Vec<Value> = rows.iter().map(|r| r.to_json(&columns)).collect();
    s.insert("clusters".into(), Value::Array(clusters));
    Value::Object(s)
}
