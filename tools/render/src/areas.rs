//! The map of an area layer coloured by a field: numeric values cut into classes, text values
//! as categories (local Moran cluster types and trend classes in the toolbox's own palettes,
//! others Okabe–Ito).

use std::path::Path;

use serde_json::{json, Value};
use stance_core::error::{Error, Result};

use crate::classes::{breaks, class_label, class_of};
use crate::frame::Extent;
use crate::paint::{paint_area, Scale};
use crate::palette::{
    hot_cold, join_flag, lisa_type, trend_class, Rgb, HOT_COLD, HOT_COLD_COLOURS, JOIN_FLAGS,
    JOIN_FLAG_COLOURS, LISA_COLOURS, LISA_TYPES, MISSING, OKABE_ITO, TREND_CLASSES, TREND_COLOURS,
};
use crate::params::RenderParams;
use crate::projection::FeatureRings;
use crate::scene::{base_scene, choose_diverging, palette_name, Legend, Scene};

/// Colours of the areas, the legend entries and the summary of how they were coloured.
struct Colouring {
    colours: Vec<Rgb>,
    entries: Vec<(Rgb, String)>,
    summary: Value,
}

/// Where the field is: for error messages.
struct FieldAt<'a> {
    input: &'a Path,
    layer: &'a str,
    field: &'a str,
}

impl FieldAt<'_> {
    fn error(&self, message: String) -> Error {
        Error::BadField {
            path: self.input.to_owned(),
            layer: self.layer.to_owned(),
            field: self.field.to_owned(),
            message,
        }
    }
}

/// Numeric values cut into classes by `params.classing`.
fn numeric_colouring(
    params: &RenderParams,
    at: &FieldAt<'_>,
    numbers: &[Option<f64>],
) -> Result<Colouring> {
    let finite: Vec<f64> = numbers.iter().flatten().copied().collect();
    let b = breaks(&finite, params.classes, params.classing);
    if b.len() < 2 {
        return Err(at.error("has no finite numbers to class".into()));
    }
    let (min, max) = (b[0], b[b.len() - 1]);
    let count = b.len() - 1;
    let diverging = choose_diverging(params.palette, "", min, max);
    let scale = Scale::for_range(min, max, diverging);
    let class_colour: Vec<Rgb> = (0..count)
        .map(|i| {
            if diverging {
                scale.map.at(scale.position((b[i] + b[i + 1]) / 2.0))
            } else {
                // Keep off batlow's darkest end so that outlines stay visible.
                let t = if count == 1 {
                    0.5
                } else {
                    i as f64 / (count - 1) as f64
                };
                scale.map.at(0.08 + 0.9 * t)
            }
        })
        .collect();
    let mut counts = vec![0_usize; count];
    let mut colours = Vec::with_capacity(numbers.len());
    let mut missing = 0;
    for v in numbers {
        match v.and_then(|v| class_of(v, &b)) {
            Some(k) => {
                counts[k] += 1;
                colours.push(class_colour[k]);
            }
            None => {
                missing += 1;
                colours.push(MISSING);
            }
        }
    }
    let mut entries: Vec<(Rgb, String)> = (0..count)
        .rev()
        .map(|k| (class_colour[k], class_label(b[k], b[k + 1])))
        .collect();
    if missing > 0 {
        entries.push((MISSING, "no value".into()));
    }
    let classes: Vec<Value> = (0..count)
        .map(|k| {
            json!({
                "lower": b[k], "upper": b[k + 1], "colour": class_colour[k].hex(),
                "areas": counts[k], "label": class_label(b[k], b[k + 1]),
            })
        })
        .collect();
    let summary = json!({
        "areas": at.layer, "field": at.field, "kind": "numeric",
        "classing": params.classing, "value_range": [min, max],
        "palette": palette_name(scale.map), "classes": classes, "areas_without_value": missing,
    });
    Ok(Colouring {
        colours,
        entries,
        summary,
    })
}

/// A fixed set of categories with their own colours and legend order.
struct Scheme {
    /// Name in the summary.
    name: &'static str,
    /// Categories in legend order.
    labels: &'static [&'static str],
    /// Colours, same order.
    colours: &'static [Rgb],
    /// The category a value names.
    index: fn(&str) -> Option<usize>,
}

/// The fixed schemes, tried in order: a field whose every value one of them names is drawn in
/// its colours, with every category in the legend (present or not).
const SCHEMES: [Scheme; 4] = [
    Scheme {
        name: "stance LISA (own design)",
        labels: &LISA_TYPES,
        colours: &LISA_COLOURS,
        index: lisa_type,
    },
    Scheme {
        name: "stance trend (own design)",
        labels: &TREND_CLASSES,
        colours: &TREND_COLOURS,
        index: trend_class,
    },
    Scheme {
        name: "stance hot and cold spots (own design)",
        labels: &HOT_COLD,
        colours: &HOT_COLD_COLOURS,
        index: hot_cold,
    },
    Scheme {
        name: "stance join-count clusters (own design)",
        labels: &JOIN_FLAGS,
        colours: &JOIN_FLAG_COLOURS,
        index: join_flag,
    },
];

/// Text values as categories: local Moran cluster types or trend classes when every value is
/// one, else at most seven categories in Okabe–Ito colours.
fn categorical_colouring(at: &FieldAt<'_>, values: &[Option<String>]) -> Result<Colouring> {
    let mut categories: Vec<&str> = values.iter().flatten().map(|v| v.trim()).collect();
    categories.sort_unstable();
    categories.dedup();
    let scheme = SCHEMES
        .iter()
        .find(|s| categories.iter().all(|c| (s.index)(c).is_some()));
    let (labels, palette): (Vec<String>, Vec<Rgb>) = if let Some(scheme) = scheme {
        (
            scheme.labels.iter().map(|s| (*s).to_owned()).collect(),
            scheme.colours.to_vec(),
        )
    } else {
        if categories.len() > OKABE_ITO.len() {
            return Err(at.error(format!(
                "has {} distinct values; a categorical map tells at most {} apart (use a numeric field or fewer categories)",
                categories.len(),
                OKABE_ITO.len()
            )));
        }
        (
            categories.iter().map(|c| (*c).to_owned()).collect(),
            OKABE_ITO[..categories.len()].to_vec(),
        )
    };
    let index = |value: &str| -> Option<usize> {
        match scheme {
            Some(scheme) => (scheme.index)(value),
            None => labels.iter().position(|l| l == value),
        }
    };
    let mut counts = vec![0_usize; labels.len()];
    let mut colours = Vec::with_capacity(values.len());
    let mut missing = 0;
    for v in values {
        match v.as_deref().map(str::trim).and_then(index) {
            Some(k) => {
                counts[k] += 1;
                colours.push(palette[k]);
            }
            None => {
                missing += 1;
                colours.push(MISSING);
            }
        }
    }
    let mut entries: Vec<(Rgb, String)> = palette
        .iter()
        .zip(&labels)
        .map(|(c, l)| (*c, l.clone()))
        .collect();
    if missing > 0 {
        entries.push((MISSING, "no value".into()));
    }
    let classes: Vec<Value> = labels
        .iter()
        .zip(&palette)
        .zip(&counts)
        .map(|((l, c), n)| json!({ "label": l, "colour": c.hex(), "areas": n }))
        .collect();
    let summary = json!({
        "areas": at.layer, "field": at.field, "kind": "categorical",
        "palette": scheme.map_or("Okabe–Ito", |s| s.name),
        "classes": classes, "areas_without_value": missing,
    });
    Ok(Colouring {
        colours,
        entries,
        summary,
    })
}

/// Scene of an area layer coloured by a field; and its part of the summary.
///
/// # Errors
/// A field with no value, nothing to class, too many categories, or no extent.
pub fn areas_scene(
    params: &RenderParams,
    input: &Path,
    (layer, field): (&str, &str),
    rings: &FeatureRings,
    values: &[Option<String>],
) -> Result<(Scene, Value)> {
    let at = FieldAt {
        input,
        layer,
        field,
    };
    if values.iter().all(Option::is_none) {
        return Err(at.error("is NULL in every area; nothing to draw".into()));
    }
    let numbers: Option<Vec<Option<f64>>> = values
        .iter()
        .map(|v| match v {
            None => Some(None),
            Some(text) => text.trim().parse::<f64>().ok().map(Some),
        })
        .collect();
    let colouring = match numbers.filter(|_| !params.categorical) {
        Some(numbers) => numeric_colouring(params, &at, &numbers)?,
        None => categorical_colouring(&at, values)?,
    };
    let extent = Extent::of_points(rings.iter().flatten().flatten().copied())
        .ok_or_else(|| Error::BadLayer {
            path: input.to_owned(),
            layer: layer.to_owned(),
            message: "has no extent (all geometries at one point)".into(),
        })?
        .padded(0.02);
    let legend = Legend::Swatches {
        heading: field.to_owned(),
        entries: colouring.entries,
    };
    let mut scene = base_scene(params, extent, format!("{layer}: {field}"), legend);
    let frame = scene.layout.frame;
    for (feature, colour) in rings.iter().zip(&colouring.colours) {
        let pixel_rings: Vec<Vec<(f64, f64)>> = feature
            .iter()
            .map(|ring| ring.iter().map(|p| frame.to_px(p.0, p.1)).collect())
            .collect();
        paint_area(&mut scene.canvas, &frame, &pixel_rings, *colour);
        scene.area_outlines.extend(pixel_rings);
    }
    scene.note = format!("{} areas", rings.len());
    Ok((scene, colouring.summary))
}
