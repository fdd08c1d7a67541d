//! Reference checks of the scan maths against stored outside values (no R or Python needed).

use std::sync::atomic::AtomicBool;

use serde_json::Value;
use stance_scan::analysis::{scan_points, PointModel, ScanConfig};
use stance_scan::models::{Direction, Multinomial, Ordinal};

fn reference(name: &str) -> Value {
    let path = std::path::Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("../../tests/reference/data")
        .join(name);
    let text = std::fs::read_to_string(&path).expect("read reference JSON");
    serde_json::from_str(&text).expect("parse reference JSON")
}

fn config(direction: Direction, max_share: f64, replicates: usize, seed: u64) -> ScanConfig {
    ScanConfig {
        direction,
        max_share,
        max_radius_m: None,
        centres_cell_m: None,
        max_clusters: 10,
        report_p: 1.0,
        replicates,
        drawn: 0..replicates,
        given_max: None,
        observed: true,
        seed,
    }
}

fn numbers(v: &Value) -> Vec<f64> {
    v.as_array()
        .expect("array")
        .iter()
        .map(|x| x.as_f64().expect("number"))
        .collect()
}

#[test]
fn humberside_max_llr_matches_brute_force_numpy() {
    // Data: spatstat.data 3.0.0 `humberside` (62 cases, 141 controls, 191 distinct locations),
    // exported by tests/reference/make_scan_data.R. Reference: brute-force NumPy 2.1.3 scan,
    // tests/reference/make_scan.py → tests/reference/data/scan_humberside.json.
    // Tolerance 1e-9 (the issue's): both sum a handful of x·ln x terms of size ≤ 1.1e3, so
    // rounding is ~1e-12.
    let data = reference("humberside.json");
    let x = numbers(&data["x"]);
    let y = numbers(&data["y"]);
    let labels: Vec<u8> = data["marks"]
        .as_array()
        .expect("marks")
        .iter()
        .map(|m| u8::from(m.as_str() == Some("case")))
        .collect();
    let expected = reference("scan_humberside.json");
    for case in expected["scans"].as_array().expect("scans") {
        let direction = match case["direction"].as_str() {
            Some("high") => Direction::High,
            Some("low") => Direction::Low,
            _ => Direction::Both,
        };
        let share = case["max_share"].as_f64().expect("share");
        let result = scan_points(
            &x,
            &y,
            &labels,
            PointModel::Bernoulli,
            &config(direction, share, 0, 1),
            &|_| {},
            &AtomicBool::new(false),
        )
        .expect("scan");
        let top = &result.clusters[0];
        let want = case["max_llr"].as_f64().expect("llr");
        assert!(
            (top.window.llr - want).abs() < 1e-9,
            "{case}: got {}",
            top.window.llr
        );
        let window = &case["window"];
        assert_eq!(
            top.window.size as i64,
            window["records"].as_i64().expect("records")
        );
        assert_eq!(
            i64::from(top.window.inside[0]),
            window["cases"].as_i64().expect("cases")
        );
        // Centres are not compared: several centres reach the same window ratio (e.g. 4 of 4
        // cases), and the two programs break ties in different location orders.
    }
    // The worked example the script also computed: N = 10, C = 4, n = c = 3.
    let w = &expected["worked_example"]["llr"];
    assert!((w.as_f64().expect("llr") - 3.859302442).abs() < 1e-9);
}

#[test]
fn multinomial_top_window_matches_brute_force_numpy() {
    // Reference: brute-force NumPy 2.1.3 multinomial scan (Jung, Kulldorff & Richard 2010),
    // every window of every centre with the published ratio written with numpy.log,
    // tests/reference/make_scan_multinomial.py → scan_multinomial.json: 300 records on a
    // 30 × 30 integer grid (shared locations, tied distances), three classes, a planted zone.
    // Tolerance 1e-9 (the issue's): ~10 terms of size ≤ 400 in f64, rounding ~1e-12.
    let expected = reference("scan_multinomial.json");
    let x = numbers(&expected["x"]);
    let y = numbers(&expected["y"]);
    let labels: Vec<u8> = numbers(&expected["class"])
        .iter()
        .map(|v| *v as u8)
        .collect();
    for case in expected["scans"].as_array().expect("scans") {
        let mut settings = config(
            Direction::Both,
            case["max_share"].as_f64().expect("share"),
            0,
            1,
        );
        settings.max_radius_m = case["max_radius"].as_f64();
        let result = scan_points(
            &x,
            &y,
            &labels,
            PointModel::Multinomial,
            &settings,
            &|_| {},
            &AtomicBool::new(false),
        )
        .expect("scan");
        let top = &result.clusters[0];
        let want = case["max_llr"].as_f64().expect("llr");
        assert!(
            (top.window.llr - want).abs() < 1e-9,
            "{case}: got {}",
            top.window.llr
        );
        assert_eq!(
            top.window.size as i64,
            case["records"].as_i64().expect("records")
        );
        let inside: Vec<u32> = numbers(&case["inside"]).iter().map(|v| *v as u32).collect();
        assert_eq!(top.window.inside.to_vec(), inside, "{case}");
        assert!((top.window.radius_m - case["radius"].as_f64().expect("radius")).abs() < 1e-12);
        // The same window: its centre is one of the centres reaching the maximum.
        let (cx, cy) = result.centres[top.centre];
        let centres = case["top_centres"].as_array().expect("centres");
        assert!(
            centres.iter().any(|c| numbers(c) == [cx, cy]),
            "centre ({cx}, {cy}) not among {centres:?}"
        );
    }
    let w = &expected["worked_example"];
    let model = Multinomial::new([7, 5, 9]);
    assert!((model.ratio(&[5, 1, 4]) - w["llr"].as_f64().expect("llr")).abs() < 1e-12);
}

#[test]
fn ordinal_ratio_matches_numerical_maximisation() {
    // Reference: SciPy 1.14.1 SLSQP maximisation of Π p_k^c_k q_k^(C_k−c_k) under
    // p_k/q_k monotone (tests/reference/make_scan.py → scan_ordinal.json), an optimiser rather
    // than pooling. Tolerance 1e-6: SLSQP stops at ftol 1e-14 on ln L but a constrained optimum
    // on the boundary (a class with no record inside) is approached only to ~1e-7.
    let expected = reference("scan_ordinal.json");
    for table in expected["tables"].as_array().expect("tables") {
        let inside: Vec<u32> = numbers(&table["inside"])
            .iter()
            .map(|v| *v as u32)
            .collect();
        let totals: Vec<u64> = numbers(&table["totals"])
            .iter()
            .map(|v| *v as u64)
            .collect();
        let totals = [totals[0], totals[1], totals[2]];
        for (direction, key) in [(Direction::High, "llr_high"), (Direction::Low, "llr_low")] {
            let model = Ordinal::new(totals, direction);
            let (got, _) = model.ratio(&inside);
            let want = table[key].as_f64().expect("llr");
            assert!((got - want).abs() < 1e-6, "{table} {key}: got {got}");
        }
    }
}

#[test]
fn random_labels_are_calibrated() {
    // 200 runs with labels assigned at random (30 % cases) on 120 records at 80 fixed random
    // locations, 99 replicates each: the most likely cluster has p < 0.05 in about 5 % of runs.
    // With 200 runs the binomial 99 % interval around 5 % is 1.5 %–9.5 %; the issue asks for
    // 2 %–9 % (4 to 18 runs).
    use rand::{Rng, SeedableRng};
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(2024);
    let sites: Vec<(f64, f64)> = (0..80)
        .map(|_| {
            (
                rng.random::<f64>() * 10_000.0,
                rng.random::<f64>() * 10_000.0,
            )
        })
        .collect();
    let mut significant = 0;
    for run in 0..200u64 {
        let (mut x, mut y, mut labels) = (Vec::new(), Vec::new(), Vec::new());
        for _ in 0..120 {
            let s = sites[rng.random_range(0..sites.len())];
            x.push(s.0);
            y.push(s.1);
            labels.push(u8::from(rng.random::<f64>() < 0.3));
        }
        if labels.iter().all(|&l| l == 0) {
            continue;
        }
        let result = scan_points(
            &x,
            &y,
            &labels,
            PointModel::Bernoulli,
            &config(Direction::High, 0.5, 99, run + 1),
            &|_| {},
            &AtomicBool::new(false),
        )
        .expect("scan");
        if result
            .clusters
            .first()
            .and_then(|c| c.p_value)
            .is_some_and(|p| p < 0.05)
        {
            significant += 1;
        }
    }
    assert!(
        (4..=18).contains(&significant),
        "{significant} of 200 null runs significant"
    );
}
