//! The parameters of stance-render and their check into a validated [`Config`].

use std::path::PathBuf;

use stance_core::error::{Error, Result};
use stance_core::time::Period;

use crate::classes::Classing;

/// Palette choice for the mapped values.
#[derive(
    Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum, serde::Serialize, schemars::JsonSchema,
)]
#[serde(rename_all = "kebab-case")]
pub enum PaletteChoice {
    /// Diverging when values have both signs or the surface name ends in _diff, _sqrtdiff or
    /// _log_ratio; sequential otherwise.
    Auto,
    /// Crameri's batlow.
    Sequential,
    /// Crameri's vik, centred on zero with symmetric limits.
    Diverging,
}

/// Parameters of stance-render.
#[derive(Debug, Clone, clap::Args, serde::Serialize, schemars::JsonSchema)]
#[serde(rename_all = "kebab-case")]
pub struct RenderParams {
    /// Surface (raster table of the input) to draw as coloured cells.
    #[arg(long, value_name = "NAME")]
    pub surface: Option<String>,

    /// Draw --surface once per time slice (the surfaces <surface>_<period> that stance-density
    /// writes with --time-field and --slice, e.g. --surface density_diff draws
    /// density_diff_2026_03, density_diff_2026_04, …) as small multiples on one colour scale.
    #[arg(long)]
    pub each_period: bool,

    /// With --each-period: the kind of period to draw when the input holds slices of several.
    #[arg(long, value_enum, value_name = "PERIOD")]
    pub period: Option<Period>,

    /// Period table of the input (<name>_periods, one row per unit and period) to draw as a
    /// chart of the share over periods with its interval band (instead of --surface or --areas).
    #[arg(long, value_name = "TABLE")]
    pub periods: Option<String>,

    /// With --periods: a unit to draw beside the whole study area, as UNIT or KIND:UNIT (KIND
    /// area or cluster); repeatable, at most 6 (default: every cluster, the first 6 by number).
    #[arg(long, value_name = "UNIT")]
    pub unit: Vec<String>,

    /// Area (polygon) layer of the input to draw as a choropleth of --field (instead of --surface).
    #[arg(long, value_name = "LAYER")]
    pub areas: Option<String>,

    /// Field of --areas: numeric values are classed, text values drawn as categories (local
    /// Moran cluster types get the toolbox's own colour-blind-safe palette).
    #[arg(long, value_name = "FIELD")]
    pub field: Option<String>,

    /// Draw a numeric --field as categories (e.g. integer codes).
    #[arg(long)]
    pub categorical: bool,

    /// How a numeric --field is cut into classes.
    #[arg(long, value_enum, value_name = "METHOD", default_value_t = Classing::Quantile)]
    pub classing: Classing,

    /// Number of classes for a numeric --field (2–9; ties may give fewer).
    #[arg(long, value_name = "N", default_value_t = 5)]
    pub classes: usize,

    /// PNG file to write (written only when the run succeeds).
    #[arg(long, value_name = "FILE")]
    pub png: PathBuf,

    /// Layer of the input drawn as outlines over the map (polygons, e.g. areas, cluster
    /// circles — drawn by their leans_to side, one legend entry per side —, tolerance
    /// contours) or markers (points); repeatable.
    #[arg(long, value_name = "LAYER")]
    pub overlay: Vec<String>,

    /// Title line (default: the surface or layer and field names).
    #[arg(long, value_name = "TEXT")]
    pub title: Option<String>,

    /// Colour palette of the values.
    #[arg(long, value_enum, value_name = "PALETTE", default_value_t = PaletteChoice::Auto)]
    pub palette: PaletteChoice,

    /// Width of the PNG in pixels (300–8000); the height follows the map's shape.
    #[arg(long, value_name = "PX", default_value_t = 1000)]
    pub width_px: u32,
}

/// What is mapped.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Subject {
    /// A raster surface.
    Surface(String),
    /// Every time slice of a surface, as small multiples.
    Series {
        /// The surface's name without the period (e.g. `density_diff`).
        surface: String,
        /// The kind of period to draw, when given.
        period: Option<Period>,
    },
    /// A chart of share over periods from a period table.
    Chart {
        /// The period table.
        table: String,
        /// The units chosen beside the whole study area (empty: every cluster).
        units: Vec<UnitChoice>,
    },
    /// An area layer coloured by a field.
    Areas {
        /// Polygon layer.
        layer: String,
        /// Field to colour by.
        field: String,
    },
}

/// The kind of a unit in a period table (`unit_kind`).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum UnitKind {
    /// The whole study area (`study_area`, unit `all`).
    StudyArea,
    /// An area (`area`, unit = the area id).
    Area,
    /// A cluster (`cluster`, unit = the cluster number).
    Cluster,
}

impl UnitKind {
    /// The kind as stored in `unit_kind`.
    pub fn as_str(self) -> &'static str {
        match self {
            UnitKind::StudyArea => "study_area",
            UnitKind::Area => "area",
            UnitKind::Cluster => "cluster",
        }
    }

    /// The kind a stored `unit_kind` names.
    pub fn parse(text: &str) -> Option<UnitKind> {
        match text.trim() {
            "study_area" => Some(UnitKind::StudyArea),
            "area" => Some(UnitKind::Area),
            "cluster" => Some(UnitKind::Cluster),
            _ => None,
        }
    }
}

/// A unit asked for with --unit: its value and, when given as KIND:UNIT, its kind.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct UnitChoice {
    /// Area or cluster, when named.
    pub kind: Option<UnitKind>,
    /// The `unit` value.
    pub unit: String,
}

/// The most units drawn beside the whole study area: more lines and bands cannot be told apart.
pub const MAX_UNITS: usize = 6;

/// Parses one --unit value.
fn unit_choice(text: &str) -> Result<UnitChoice> {
    let (kind, unit) = match text.split_once(':') {
        Some((kind, unit)) => match UnitKind::parse(kind) {
            Some(k @ (UnitKind::Area | UnitKind::Cluster)) => (Some(k), unit.trim()),
            _ => {
                return Err(Error::argument(
                    "--unit",
                    format!(
                        "'{text}': unknown kind '{kind}'; expected UNIT, area:UNIT or cluster:UNIT"
                    ),
                ))
            }
        },
        None => (None, text.trim()),
    };
    if unit.is_empty() {
        return Err(Error::argument("--unit", format!("'{text}' names no unit")));
    }
    Ok(UnitChoice {
        kind,
        unit: unit.to_owned(),
    })
}

/// The validated parameters.
#[derive(Debug, Clone)]
pub struct Config {
    /// What is mapped.
    pub subject: Subject,
}

impl RenderParams {
    /// Checks the parameters once, at the border (`layer`: the host's --layer, unused here).
    ///
    /// # Errors
    /// An argument error naming the option and the value.
    pub fn check(&self, layer: Option<&str>) -> Result<Config> {
        let subject = self.subject()?;
        if layer.is_some() {
            return Err(Error::argument(
                "--layer",
                "not used by stance-render; name layers with --surface, --areas and --overlay",
            ));
        }
        if !(2..=9).contains(&self.classes) {
            return Err(Error::argument(
                "--classes",
                format!("{} is out of range; expected 2 to 9", self.classes),
            ));
        }
        if !(300..=8000).contains(&self.width_px) {
            return Err(Error::argument(
                "--width-px",
                format!("{} is out of range; expected 300 to 8000", self.width_px),
            ));
        }
        let is_png = self
            .png
            .extension()
            .is_some_and(|e| e.eq_ignore_ascii_case("png"));
        if !is_png {
            return Err(Error::argument(
                "--png",
                format!("'{}' does not end in .png", self.png.display()),
            ));
        }
        Ok(Config { subject })
    }

    /// What is drawn: exactly one of --surface, --areas and --periods, with the options that
    /// belong to it.
    fn subject(&self) -> Result<Subject> {
        let given = [
            self.surface.is_some(),
            self.areas.is_some(),
            self.periods.is_some(),
        ];
        if given.iter().filter(|g| **g).count() > 1 {
            return Err(Error::argument(
                if self.areas.is_some() { "--areas" } else { "--periods" },
                "draw one of --surface, --areas or --periods; to outline areas over a surface use --overlay LAYER",
            ));
        }
        if self.field.is_some() && self.areas.is_none() {
            return Err(Error::argument("--field", "only applies to --areas"));
        }
        if self.each_period && self.surface.is_none() {
            return Err(Error::argument(
                "--each-period",
                "only applies to --surface",
            ));
        }
        if self.period.is_some() && !self.each_period {
            return Err(Error::argument("--period", "only applies to --each-period"));
        }
        if !self.unit.is_empty() && self.periods.is_none() {
            return Err(Error::argument("--unit", "only applies to --periods"));
        }
        if let Some(table) = &self.periods {
            return self.chart_subject(table);
        }
        match (&self.surface, &self.areas, &self.field) {
            (Some(surface), _, _) if self.each_period => Ok(Subject::Series {
                surface: surface.clone(),
                period: self.period,
            }),
            (Some(surface), _, _) => Ok(Subject::Surface(surface.clone())),
            (None, Some(layer), Some(field)) => Ok(Subject::Areas {
                layer: layer.clone(),
                field: field.clone(),
            }),
            (None, Some(_), None) => Err(Error::argument(
                "--field",
                "missing; --areas needs the field to colour by",
            )),
            (None, None, _) => Err(Error::argument(
                "--surface",
                "missing; give --surface NAME, --areas LAYER --field FIELD or --periods TABLE",
            )),
        }
    }

    /// The chart of a period table and its units.
    fn chart_subject(&self, table: &str) -> Result<Subject> {
        if !self.overlay.is_empty() {
            return Err(Error::argument(
                "--overlay",
                "only applies to maps, not to --periods",
            ));
        }
        if self.unit.len() > MAX_UNITS {
            return Err(Error::argument(
                "--unit",
                format!(
                    "{} units given; a chart tells at most {MAX_UNITS} apart beside the whole study area",
                    self.unit.len()
                ),
            ));
        }
        let units = self
            .unit
            .iter()
            .map(|u| unit_choice(u))
            .collect::<Result<Vec<_>>>()?;
        Ok(Subject::Chart {
            table: table.to_owned(),
            units,
        })
    }
}
