//! Parameters of stance-synth and their check into a validated configuration.

use std::path::PathBuf;

use stance_core::error::{Error, Result};

pub use crate::dialect::CsvDialect;
use crate::scenario::ScenarioParams;

/// Parameters of stance-synth.
#[derive(Debug, Clone, clap::Args, serde::Serialize, schemars::JsonSchema)]
#[serde(rename_all = "kebab-case")]
pub struct SynthParams {
    /// Number of records to generate (up to 10,000,000 for benchmarks).
    #[arg(long, value_name = "N", default_value_t = 20_000)]
    pub points: usize,

    /// Also write the records as CSV (lon, lat, stance, labels, time, author, text, quality).
    #[arg(long, value_name = "FILE")]
    pub csv: Option<PathBuf>,

    /// Share of CSV rows given a typical defect (missing or swapped coordinates, label typo,
    /// local time format, blank time), so the import checks have work to do; the GeoPackage
    /// records stay clean.
    #[arg(long, value_name = "SHARE", default_value_t = 0.01)]
    pub csv_defects: f64,

    /// How the --csv export is written: delimiter, character encoding (WHATWG Encoding
    /// Standard), byte-order mark, line ends and decimal separator, or JSON lines (RFC 8259),
    /// as exports from spreadsheets and platforms come.
    #[arg(long, value_enum, value_name = "DIALECT", default_value = "comma-utf8")]
    pub csv_dialect: CsvDialect,
}

/// Most records one run may ask for.
const MAX_POINTS: usize = 50_000_000;

/// Validated parameters.
#[derive(Debug, Clone, PartialEq)]
pub struct SynthConfig {
    /// Size and seed of the scenario.
    pub scenario: ScenarioParams,
    /// The CSV export asked for, with its share of defective rows.
    pub csv: Option<CsvExport>,
}

/// Where and how to write the CSV export.
#[derive(Debug, Clone, PartialEq)]
pub struct CsvExport {
    /// The file asked for (the host stages it next to it and publishes it with the output).
    pub path: PathBuf,
    /// Share of rows given a defect, 0..=1.
    pub defect_share: f64,
    /// Seed the defects are drawn from.
    pub seed: u64,
    /// How the file is written.
    pub dialect: CsvDialect,
}

impl SynthParams {
    /// Checks the parameters once, at the border.
    ///
    /// # Errors
    /// [`Error::BadArgument`] for a share outside 0..=1 or a record count out of range.
    pub fn check(&self, seed: u64) -> Result<SynthConfig> {
        if !(0.0..=1.0).contains(&self.csv_defects) {
            return Err(Error::argument(
                "--csv-defects",
                format!("{} is not a share between 0 and 1", self.csv_defects),
            ));
        }
        if self.csv.is_none() && self.csv_dialect != CsvDialect::default() {
            return Err(Error::argument("--csv-dialect", "needs --csv FILE"));
        }
        if self.points == 0 || self.points > MAX_POINTS {
            return Err(Error::argument(
                "--points",
                format!("{} is out of range; expected 1 to 50,000,000", self.points),
            ));
        }
        Ok(SynthConfig {
            scenario: ScenarioParams {
                points: self.points,
                seed,
            },
            csv: self.csv.as_ref().map(|path| CsvExport {
                path: path.clone(),
                defect_share: self.csv_defects,
                seed,
                dialect: self.csv_dialect,
            }),
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn params(points: usize, csv_defects: f64) -> SynthParams {
        SynthParams {
            points,
            csv: Some(PathBuf::from("r.csv")),
            csv_defects,
            csv_dialect: CsvDialect::default(),
        }
    }

    #[test]
    fn check_refuses_out_of_range_values_and_keeps_the_rest() {
        assert!(params(0, 0.01).check(1).is_err());
        assert!(params(MAX_POINTS + 1, 0.01).check(1).is_err());
        assert!(params(10, -0.1).check(1).is_err());
        assert!(params(10, 1.5).check(1).is_err());
        assert!(params(10, f64::NAN).check(1).is_err());
        let config = params(10, 0.5).check(7).expect("valid");
        assert_eq!(
            config.scenario,
            ScenarioParams {
                points: 10,
                seed: 7
            }
        );
        assert_eq!(
            config.csv,
            Some(CsvExport {
                path: PathBuf::from("r.csv"),
                defect_share: 0.5,
                seed: 7,
                dialect: CsvDialect::CommaUtf8,
            })
        );
    }
}
