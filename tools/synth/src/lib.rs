//! stance-synth: generates the invented scenario (region, towns, districts, records with planted
//! zones) used by the demo, the tests and the benchmarks.

mod csv_export;
pub mod defects;
pub mod dialect;
pub mod geodesy;
mod output;
pub mod params;
pub mod scenario;

use serde_json::Value;
use stance_core::error::Result;
use stance_core::host::{InputUse, OutputDecl, Run, Tool, GEOPACKAGE_MEDIA_TYPE};

use output::LayerNames;
pub use params::SynthParams;
use scenario::generate;

/// The scenario generator tool.
#[derive(Debug)]
pub struct Synth;

/// Measured: about 200 bytes a record (two strings each) while the scenario is held.
const BYTES_PER_RECORD: u64 = 200;

impl Tool for Synth {
    type Params = SynthParams;
    const ID: &'static str = "synth";
    const TITLE: &'static str =
        "Generate the invented Veldmark scenario: records, towns, districts and planted truth";
    const DESCRIPTION: &'static str = "Writes an invented coastal region (in an empty stretch of ocean, so no real \
        place is implied) with towns, 150-300 districts sharing boundaries (one island, one unpopulated), and \
        geolocated records of stance toward an invented offshore wind-farm levy: spread around towns by \
        population, with smoothly varying stance, planted zones of elevated support and opposition, a share \
        snapped to town centres, nine months of time stamps with a planted burst, two simulated classifier \
        labels with known confusion matrices, prolific authors, duplicates and geocoding-quality levels \
        (exact, street, town, district). The same seed gives the same data.";
    const DEFAULT_NAME: &'static str = "veldmark";
    const INPUT: InputUse = InputUse::None;

    fn outputs() -> Vec<OutputDecl> {
        let declare = |id, title, description, media_type| OutputDecl {
            id,
            title,
            description,
            media_type,
        };
        vec![
            declare(
                "records",
                "Records",
                "Point layer <name>_records (EPSG:4326).",
                GEOPACKAGE_MEDIA_TYPE,
            ),
            declare(
                "districts",
                "Districts",
                "Polygon layer <name>_districts with code, name, population.",
                GEOPACKAGE_MEDIA_TYPE,
            ),
            declare(
                "towns",
                "Towns",
                "Point layer <name>_towns with name and population.",
                GEOPACKAGE_MEDIA_TYPE,
            ),
            declare(
                "truth",
                "Planted truth",
                "Polygon layer <name>_truth: planted zones and the burst as circles.",
                GEOPACKAGE_MEDIA_TYPE,
            ),
            declare(
                "csv",
                "CSV export",
                "With --csv FILE: the records as CSV (or another dialect, --csv-dialect).",
                "text/csv",
            ),
        ]
    }

    fn run(params: &SynthParams, run: &mut Run) -> Result<Value> {
        run.progress.phase("checking");
        let config = params.check(run.common.seed)?;
        let points = config.scenario.points;
        run.guard_memory(
            points as u64 * BYTES_PER_RECORD,
            &format!("{points} records"),
            "ask for fewer --points",
        )?;
        // The CSV is staged beside the output and published with it.
        let csv = match &config.csv {
            Some(export) => Some((run.output().side_file(&export.path)?, export)),
            None => None,
        };

        run.progress.phase("generating");
        let scenario = generate(&config.scenario);
        run.progress.set(0.3);

        let names = LayerNames::new(run);
        output::write_layers(run, &scenario, &names)?;
        let csv_defects = match &csv {
            Some((path, export)) => {
                let report = (&run.progress, run.interrupt());
                csv_export::write(path, export, &scenario.records, report)?
            }
            None => 0,
        };
        run.progress.set(1.0);
        Ok(output::summary(&scenario, &names, csv_defects))
    }
}
