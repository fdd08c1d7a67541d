//! Colouring a map: surface values to colours on a continuous scale (sequential, or diverging
//! centred on zero with symmetric limits, Brewer 1999, "Color use guidelines for data
//! representation"), and surface cells or filled areas to map pixels (nearest cell at each
//! pixel centre).

use stance_core::grid::Grid;

use crate::frame::{fill_rings, MapFrame};
use crate::palette::{ColourMap, Rgb};

/// A continuous colour scale: value v ↦ map((v − low)/(high − low)).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Scale {
    /// The colour map.
    pub map: ColourMap,
    /// Value at the low end.
    pub low: f64,
    /// Value at the high end.
    pub high: f64,
}

impl Scale {
    /// The scale for values in [`min`, `max`]: `diverging` gives symmetric limits ±max|v| so that
    /// zero sits at the centre colour; otherwise the data range. A zero-width range is widened
    /// to ±1 (diverging) or [min − 0.5, min + 0.5] so that every value still has a colour.
    pub fn for_range(min: f64, max: f64, diverging: bool) -> Scale {
        if diverging {
            let mut m = min.abs().max(max.abs());
            if !(m.is_finite() && m > 0.0) {
                m = 1.0;
            }
            Scale {
                map: ColourMap::Vik,
                low: -m,
                high: m,
            }
        } else if max > min {
            Scale {
                map: ColourMap::Batlow,
                low: min,
                high: max,
            }
        } else {
            Scale {
                map: ColourMap::Batlow,
                low: min - 0.5,
                high: min + 0.5,
            }
        }
    }

    /// Position of `value` on the scale, 0 at `low`, 1 at `high` (not clamped).
    pub fn position(&self, value: f64) -> f64 {
        (value - self.low) / (self.high - self.low)
    }

    /// The colour of `value`; `None` for NaN.
    pub fn colour(&self, value: f64) -> Option<Rgb> {
        (!value.is_nan()).then(|| self.map.at(self.position(value)))
    }
}

/// Whether `auto` palette choice is diverging for a surface: both signs present, or a name
/// ending in `_diff`, `_sqrtdiff` or `_log_ratio` (the signed outputs of stance-density).
pub fn auto_diverging(name: &str, min: f64, max: f64) -> bool {
    let lower = name.to_ascii_lowercase();
    (min < 0.0 && max > 0.0)
        || ["_diff", "_sqrtdiff", "_log_ratio"]
            .iter()
            .any(|s| lower.ends_with(s))
}

/// Pixels of the map frame, row-major over its rectangle; `None` = nothing drawn (page white).
#[derive(Debug, Clone)]
pub struct Canvas {
    /// Width (px) of the frame.
    pub width: usize,
    /// Height (px) of the frame.
    pub height: usize,
    /// Colours, row 0 at the top.
    pub pixels: Vec<Option<Rgb>>,
}

impl Canvas {
    /// An empty canvas the size of `frame`.
    pub fn new(frame: &MapFrame) -> Canvas {
        let width = frame.rect.width().max(0) as usize;
        let height = frame.rect.height().max(0) as usize;
        Canvas {
            width,
            height,
            pixels: vec![None; width * height],
        }
    }
}

/// Paints a surface: each pixel takes the colour of the cell under its centre (`colour` of the
/// cell value, `None` for nodata), and stays empty outside the grid.
pub fn paint_surface(
    canvas: &mut Canvas,
    frame: &MapFrame,
    grid: &Grid,
    values: &[f32],
    colour: impl Fn(f64) -> Option<Rgb>,
) {
    let y_max = grid.y_max();
    for row in 0..canvas.height {
        for col in 0..canvas.width {
            let (x, y) =
                frame.pixel_centre(frame.rect.left + col as i32, frame.rect.top + row as i32);
            let c = ((x - grid.x_min) / grid.cell_m).floor();
            let r = ((y_max - y) / grid.cell_m).floor();
            if c < 0.0 || r < 0.0 || c >= grid.cols as f64 || r >= grid.rows as f64 {
                continue;
            }
            let value = values[r as usize * grid.cols + c as usize];
            canvas.pixels[row * canvas.width + col] = colour(f64::from(value));
        }
    }
}

/// Paints one area (its rings already in pixel coordinates) in `colour`, holes left alone.
pub fn paint_area(canvas: &mut Canvas, frame: &MapFrame, rings: &[Vec<(f64, f64)>], colour: Rgb) {
    for (row, start, end) in fill_rings(rings, &frame.rect) {
        let r = (row - frame.rect.top) as usize;
        for col in start..end {
            canvas.pixels[r * canvas.width + (col - frame.rect.left) as usize] = Some(colour);
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::frame::{Extent, PixelRect};

    #[test]
    fn diverging_scales_are_symmetric_about_zero() {
        let s = Scale::for_range(-2.0, 5.0, true);
        assert_eq!((s.low, s.high, s.map), (-5.0, 5.0, ColourMap::Vik));
        assert_eq!(s.position(0.0), 0.5);
        assert_eq!(s.colour(0.0), Some(ColourMap::Vik.at(0.5)));
        assert_eq!(s.colour(5.0), Some(ColourMap::Vik.at(1.0)));
        let flat = Scale::for_range(0.0, 0.0, true);
        assert_eq!((flat.low, flat.high), (-1.0, 1.0));
    }

    #[test]
    fn sequential_scales_span_the_data() {
        let s = Scale::for_range(2.0, 12.0, false);
        assert_eq!(s.position(7.0), 0.5);
        assert_eq!(s.colour(12.0), Some(ColourMap::Batlow.at(1.0)));
        assert_eq!(s.colour(f64::NAN), None);
        let constant = Scale::for_range(3.0, 3.0, false);
        assert_eq!(constant.position(3.0), 0.5);
    }

    #[test]
    fn auto_palette_rule() {
        assert!(auto_diverging("density_diff", 0.0, 3.0));
        assert!(auto_diverging("x_LOG_RATIO", -1.0, -0.5));
        assert!(!auto_diverging("x_logrr", -1.0, -0.5));
        assert!(!auto_diverging("density_log_ratio_p_upper", 0.0, 1.0));
        assert!(auto_diverging("intensity", -1.0, 2.0));
        assert!(!auto_diverging("density_support", 0.0, 3.0));
        assert!(!auto_diverging("difference", -3.0, 0.0));
    }

    #[test]
    fn surface_pixels_take_the_cell_under_their_centre() {
        // A 2 × 2 grid of 100 m cells from (0, 0) on a 4 × 4 px frame: 50 m a pixel.
        let grid = Grid {
            x_min: 0.0,
            y_min: 0.0,
            cell_m: 100.0,
            cols: 2,
            rows: 2,
        };
        let frame = MapFrame {
            extent: Extent {
                x_min: 0.0,
                y_min: 0.0,
                x_max: 200.0,
                y_max: 200.0,
            },
            metres_per_px: 50.0,
            rect: PixelRect {
                left: 5,
                top: 5,
                right: 9,
                bottom: 9,
            },
        };
        // Row 0 is north: values 1, 2 (north), 3, NaN (south).
        let values = [1.0, 2.0, 3.0, f32::NAN];
        let mut canvas = Canvas::new(&frame);
        paint_surface(&mut canvas, &frame, &grid, &values, |v| {
            (!v.is_nan()).then_some(Rgb(v as u8, 0, 0))
        });
        let at = |c: usize, r: usize| canvas.pixels[r * 4 + c];
        assert_eq!(at(0, 0), Some(Rgb(1, 0, 0)));
        assert_eq!(at(3, 1), Some(Rgb(2, 0, 0)));
        assert_eq!(at(1, 3), Some(Rgb(3, 0, 0)));
        assert_eq!(at(3, 3), None);
    }
}
