//! The parameters of stance-render and their check into a validated [`Config`].

use std::path::PathBuf;

use stance_core::error::{Error, Result};

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
    /// An area layer coloured by a field.
    Areas {
        /// Polygon layer.
        layer: String,
        /// Field to colour by.
        field: String,
    },
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
        let subject = match (&self.surface, &self.areas, &self.field) {
            (Some(surface), None, None) => Subject::Surface(surface.clone()),
            (None, Some(layer), Some(field)) => Subject::Areas {
                layer: layer.clone(),
                field: field.clone(),
            },
            (Some(_), Some(_), _) => {
                return Err(Error::argument(
                    "--areas",
                    "draw either --surface or --areas; to outline areas over a surface use --overlay LAYER",
                ))
            }
            (None, Some(_), None) => {
                return Err(Error::argument(
                    "--field",
                    "missing; --areas needs the field to colour by",
                ))
            }
            (Some(_), None, Some(_)) => {
                return Err(Error::argument("--field", "only applies to --areas"))
            }
            (None, None, _) => {
                return Err(Error::argument(
                    "--surface",
                    "missing; give --surface NAME or --areas LAYER --field FIELD",
                ))
            }
        };
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
}
