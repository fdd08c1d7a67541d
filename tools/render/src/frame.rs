//! Map geometry in pixels: the world → pixel affine transform of a north-up map, the page
//! layout, nice scale-bar lengths and ticks (Heckbert 1990, "Nice numbers for graph labels",
//! Graphics Gems), Liang–Barsky line clipping (1984) and even–odd scanline polygon filling
//! (Foley et al. 1990, Computer Graphics, § 3.6).

/// A rectangle in pixels: `left ≤ x < right`, `top ≤ y < bottom`.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct PixelRect {
    /// First column.
    pub left: i32,
    /// First row.
    pub top: i32,
    /// One past the last column.
    pub right: i32,
    /// One past the last row.
    pub bottom: i32,
}

impl PixelRect {
    /// Width in pixels.
    pub fn width(&self) -> i32 {
        self.right - self.left
    }

    /// Height in pixels.
    pub fn height(&self) -> i32 {
        self.bottom - self.top
    }
}

/// A map extent in the map CRS (metres).
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct Extent {
    /// West.
    pub x_min: f64,
    /// South.
    pub y_min: f64,
    /// East.
    pub x_max: f64,
    /// North.
    pub y_max: f64,
}

impl Extent {
    /// The smallest extent holding every finite point; `None` if there is none or it is a point.
    pub fn of_points(points: impl IntoIterator<Item = (f64, f64)>) -> Option<Extent> {
        let mut e = Extent {
            x_min: f64::INFINITY,
            y_min: f64::INFINITY,
            x_max: f64::NEG_INFINITY,
            y_max: f64::NEG_INFINITY,
        };
        for (x, y) in points {
            if x.is_finite() && y.is_finite() {
                e.x_min = e.x_min.min(x);
                e.y_min = e.y_min.min(y);
                e.x_max = e.x_max.max(x);
                e.y_max = e.y_max.max(y);
            }
        }
        (e.x_max > e.x_min || e.y_max > e.y_min).then_some(e)
    }

    /// The extent grown by `share` of its larger side on every edge.
    pub fn padded(&self, share: f64) -> Extent {
        let pad = share * (self.x_max - self.x_min).max(self.y_max - self.y_min);
        Extent {
            x_min: self.x_min - pad,
            y_min: self.y_min - pad,
            x_max: self.x_max + pad,
            y_max: self.y_max + pad,
        }
    }
}

/// A north-up map: pixel (px, py) = (left + (x − x_min)/m, top + (y_max − y)/m), m metres a
/// pixel. Pixel coordinates are continuous; pixel (i, j) covers [i, i+1) × [j, j+1).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct MapFrame {
    /// The extent shown.
    pub extent: Extent,
    /// Metres per pixel (the same on both axes).
    pub metres_per_px: f64,
    /// The map's rectangle on the page.
    pub rect: PixelRect,
}

impl MapFrame {
    /// World → continuous pixel coordinates.
    pub fn to_px(&self, x: f64, y: f64) -> (f64, f64) {
        (
            f64::from(self.rect.left) + (x - self.extent.x_min) / self.metres_per_px,
            f64::from(self.rect.top) + (self.extent.y_max - y) / self.metres_per_px,
        )
    }

    /// Centre of pixel (`col`, `row`) in world coordinates.
    pub fn pixel_centre(&self, col: i32, row: i32) -> (f64, f64) {
        (
            self.extent.x_min + (f64::from(col - self.rect.left) + 0.5) * self.metres_per_px,
            self.extent.y_max - (f64::from(row - self.rect.top) + 0.5) * self.metres_per_px,
        )
    }
}

/// The page: its size, the map frame and the panels around it.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Layout {
    /// Page width (px).
    pub width: u32,
    /// Page height (px).
    pub height: u32,
    /// The map.
    pub frame: MapFrame,
    /// Scale of text, margins and panels: 1 at 1000 px wide, never below 0.85 so that small
    /// pages stay legible.
    pub scale: f64,
    /// Legend panel right of the map.
    pub legend: PixelRect,
    /// Panel under the map for the scale bar and north arrow.
    pub footer: PixelRect,
}

/// Lays out a page `width` px wide for `extent`: title band, map, legend panel to the right,
/// footer below. The map keeps the extent's aspect; its height is held between a quarter and
/// 1.3 times the map width, the extent being widened on the short axis to fill the frame.
pub fn layout(width: u32, extent: Extent) -> Layout {
    let scale = (f64::from(width) / 1000.0).max(0.85);
    let px = |v: f64| (v * scale).round() as i32;
    let (title_h, margin, legend_w, footer_h) = (px(56.0), px(16.0), px(220.0), px(70.0));
    let map_w = (width as i32 - 2 * margin - legend_w).max(50);
    let (dx, dy) = (
        (extent.x_max - extent.x_min).max(f64::MIN_POSITIVE),
        (extent.y_max - extent.y_min).max(f64::MIN_POSITIVE),
    );
    let map_h = ((f64::from(map_w) * dy / dx).round() as i32)
        .clamp(map_w / 4, (f64::from(map_w) * 1.3) as i32)
        .max(50);
    let metres_per_px = (dx / f64::from(map_w)).max(dy / f64::from(map_h));
    // Centre the extent in the frame when the clamp left room on one axis.
    let (cx, cy) = (
        (extent.x_min + extent.x_max) / 2.0,
        (extent.y_min + extent.y_max) / 2.0,
    );
    let (half_w, half_h) = (
        f64::from(map_w) * metres_per_px / 2.0,
        f64::from(map_h) * metres_per_px / 2.0,
    );
    let rect = PixelRect {
        left: margin,
        top: title_h,
        right: margin + map_w,
        bottom: title_h + map_h,
    };
    let height = (rect.bottom + footer_h) as u32;
    Layout {
        width,
        height,
        frame: MapFrame {
            extent: Extent {
                x_min: cx - half_w,
                y_min: cy - half_h,
                x_max: cx + half_w,
                y_max: cy + half_h,
            },
            metres_per_px,
            rect,
        },
        scale,
        legend: PixelRect {
            left: rect.right + margin,
            top: title_h,
            right: width as i32 - margin,
            bottom: rect.bottom,
        },
        footer: PixelRect {
            left: margin,
            top: rect.bottom,
            right: rect.right,
            bottom: height as i32,
        },
    }
}

/// The longest "nice" length 1, 2 or 5 × 10ᵏ metres not above `max_m`; `None` unless
/// `max_m` is finite and positive.
pub fn scale_bar_length_m(max_m: f64) -> Option<f64> {
    if !(max_m.is_finite() && max_m > 0.0) {
        return None;
    }
    let power = 10f64.powf(max_m.log10().floor());
    let leading = max_m / power;
    let nice = if leading >= 5.0 {
        5.0
    } else if leading >= 2.0 {
        2.0
    } else {
        1.0
    };
    Some(nice * power)
}

/// A scale-bar label: metres below 1 km, else kilometres.
pub fn length_label(metres: f64) -> String {
    if metres >= 1000.0 {
        format!("{} km", crate::classes::format_number(metres / 1000.0))
    } else {
        format!("{} m", crate::classes::format_number(metres))
    }
}

/// About `count` nice tick values (step 1, 2 or 5 × 10ᵏ) inside [`low`, `high`] (Heckbert 1990).
pub fn nice_ticks(low: f64, high: f64, count: usize) -> Vec<f64> {
    if !(low.is_finite() && high.is_finite()) || high <= low || count == 0 {
        return if low.is_finite() {
            vec![low]
        } else {
            Vec::new()
        };
    }
    let Some(step) = nice_step((high - low) / count as f64) else {
        return Vec::new();
    };
    let first = (low / step).ceil() as i64;
    let last = (high / step).floor() as i64;
    (first..=last)
        .map(|k| {
            // Divide by an integer for steps below 1 so that 3 × 0.1 prints as 0.3.
            let v = if step < 1.0 {
                k as f64 / (1.0 / step).round()
            } else {
                k as f64 * step
            };
            // Print −0 and 1e-17 as 0.
            if v.abs() < step * 1e-9 {
                0.0
            } else {
                v
            }
        })
        .collect()
}

/// The nice step (1, 2, 5 × 10ᵏ) nearest above `raw`.
pub fn nice_step(raw: f64) -> Option<f64> {
    if !(raw.is_finite() && raw > 0.0) {
        return None;
    }
    let power = 10f64.powf(raw.log10().floor());
    let leading = raw / power;
    let nice = if leading <= 1.0 {
        1.0
    } else if leading <= 2.0 {
        2.0
    } else if leading <= 5.0 {
        5.0
    } else {
        10.0
    };
    Some(nice * power)
}

/// Clips the segment `a`–`b` to `rect` (continuous pixel coordinates, [left, right] ×
/// [top, bottom]) by Liang & Barsky (1984); `None` when nothing of it is inside.
pub fn clip_segment(a: (f64, f64), b: (f64, f64), rect: &PixelRect) -> Option<[(f64, f64); 2]> {
    let (dx, dy) = (b.0 - a.0, b.1 - a.1);
    let (mut t0, mut t1) = (0.0_f64, 1.0_f64);
    let checks = [
        (-dx, a.0 - f64::from(rect.left)),
        (dx, f64::from(rect.right) - a.0),
        (-dy, a.1 - f64::from(rect.top)),
        (dy, f64::from(rect.bottom) - a.1),
    ];
    for (p, q) in checks {
        if p == 0.0 {
            if q < 0.0 {
                return None;
            }
        } else {
            let r = q / p;
            if p < 0.0 {
                t0 = t0.max(r);
            } else {
                t1 = t1.min(r);
            }
        }
    }
    (t0 <= t1).then_some([
        (a.0 + t0 * dx, a.1 + t0 * dy),
        (a.0 + t1 * dx, a.1 + t1 * dy),
    ])
}

/// Clips a polyline to `rect`: the visible runs, each a polyline of at least two points.
pub fn clip_polyline(points: &[(f64, f64)], rect: &PixelRect) -> Vec<Vec<(f64, f64)>> {
    let mut runs: Vec<Vec<(f64, f64)>> = Vec::new();
    let mut current: Vec<(f64, f64)> = Vec::new();
    for pair in points.windows(2) {
        match clip_segment(pair[0], pair[1], rect) {
            Some([p, q]) => {
                let joined = current
                    .last()
                    .is_some_and(|last| (last.0 - p.0).abs() < 1e-9 && (last.1 - p.1).abs() < 1e-9);
                if !joined && current.len() >= 2 {
                    runs.push(std::mem::take(&mut current));
                }
                if !joined {
                    current.clear();
                    current.push(p);
                }
                current.push(q);
            }
            None => {
                if current.len() >= 2 {
                    runs.push(std::mem::take(&mut current));
                }
                current.clear();
            }
        }
    }
    if current.len() >= 2 {
        runs.push(current);
    }
    runs
}

/// Cuts a polyline into the "on" pieces of a dash pattern (alternating on and off lengths, px,
/// measured along the line and carried over from one segment to the next); the whole line as
/// one piece when `pattern` is empty or has no positive length.
pub fn dash_polyline(points: &[(f64, f64)], pattern: &[f64]) -> Vec<Vec<(f64, f64)>> {
    if pattern.is_empty() || pattern.iter().sum::<f64>() <= 0.0 {
        return vec![points.to_vec()];
    }
    let mut pieces: Vec<Vec<(f64, f64)>> = Vec::new();
    let (mut k, mut left) = (0usize, pattern[0]);
    let mut current: Vec<(f64, f64)> = points.first().map(|p| vec![*p]).unwrap_or_default();
    for pair in points.windows(2) {
        let (a, b) = (pair[0], pair[1]);
        let length = (b.0 - a.0).hypot(b.1 - a.1);
        let mut at = 0.0;
        while length - at >= left {
            at += left;
            let t = at / length;
            let p = (a.0 + t * (b.0 - a.0), a.1 + t * (b.1 - a.1));
            if k % 2 == 0 {
                current.push(p);
                pieces.push(std::mem::take(&mut current));
            } else {
                current = vec![p];
            }
            k = (k + 1) % pattern.len();
            left = pattern[k];
        }
        left -= length - at;
        if k % 2 == 0 {
            current.push(b);
        }
    }
    if k % 2 == 0 && current.len() >= 2 {
        pieces.push(current);
    }
    pieces
}

/// Pixels of `rect` whose centres lie inside the rings (even–odd rule, so holes stay empty),
/// as runs (row, first column, one past the last column). Rings are in pixel coordinates and
/// need not repeat their first point.
pub fn fill_rings(rings: &[Vec<(f64, f64)>], rect: &PixelRect) -> Vec<(i32, i32, i32)> {
    let (mut y_low, mut y_high) = (f64::INFINITY, f64::NEG_INFINITY);
    for ring in rings {
        for p in ring {
            y_low = y_low.min(p.1);
            y_high = y_high.max(p.1);
        }
    }
    if !y_low.is_finite() {
        return Vec::new();
    }
    let first_row = ((y_low - 0.5).ceil() as i32).max(rect.top);
    let last_row = ((y_high - 0.5).floor() as i32).min(rect.bottom - 1);
    let mut runs = Vec::new();
    let mut crossings: Vec<f64> = Vec::new();
    for row in first_row..=last_row {
        let y = f64::from(row) + 0.5;
        crossings.clear();
        for ring in rings {
            let n = ring.len();
            for i in 0..n {
                let (a, b) = (ring[i], ring[(i + 1) % n]);
                // Half-open in y so a vertex on the scanline counts once.
                if (a.1 <= y) != (b.1 <= y) {
                    crossings.push(a.0 + (y - a.1) / (b.1 - a.1) * (b.0 - a.0));
                }
            }
        }
        crossings.sort_by(f64::total_cmp);
        for pair in crossings.chunks_exact(2) {
            // Pixel i is inside when its centre i + 0.5 lies in [x0, x1).
            let start = ((pair[0] - 0.5).ceil() as i32).max(rect.left);
            let end = ((pair[1] - 0.5).ceil() as i32).min(rect.right);
            if end > start {
                runs.push((row, start, end));
            }
        }
    }
    runs
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_abs_diff_eq;

    fn rect() -> PixelRect {
        PixelRect {
            left: 10,
            top: 20,
            right: 110,
            bottom: 70,
        }
    }

    #[test]
    fn world_to_pixel_by_hand() {
        // 1000 m × 500 m on 100 × 50 px: 10 m a pixel.
        let frame = MapFrame {
            extent: Extent {
                x_min: 5000.0,
                y_min: 2000.0,
                x_max: 6000.0,
                y_max: 2500.0,
            },
            metres_per_px: 10.0,
            rect: rect(),
        };
        assert_eq!(frame.to_px(5000.0, 2500.0), (10.0, 20.0));
        assert_eq!(frame.to_px(6000.0, 2000.0), (110.0, 70.0));
        assert_eq!(frame.to_px(5255.0, 2345.0), (35.5, 35.5));
        assert_eq!(frame.pixel_centre(35, 35), (5255.0, 2345.0));
    }

    #[test]
    fn layout_keeps_the_aspect_and_centres_a_clamped_extent() {
        let square = Extent {
            x_min: 0.0,
            y_min: 0.0,
            x_max: 1000.0,
            y_max: 1000.0,
        };
        let page = layout(1000, square);
        // Map width 1000 − 2·16 − 220 = 748 px; a square extent gives a square map.
        assert_eq!(page.frame.rect.width(), 748);
        assert_eq!(page.frame.rect.height(), 748);
        assert_abs_diff_eq!(page.frame.metres_per_px, 1000.0 / 748.0, epsilon = 1e-12);
        assert_eq!(page.height, 56 + 748 + 70);
        // A 10:1 strip is held at a quarter of the width (187 px) and widened in y.
        let strip = Extent {
            x_min: 0.0,
            y_min: 0.0,
            x_max: 10_000.0,
            y_max: 1000.0,
        };
        let page = layout(1000, strip);
        assert_eq!(page.frame.rect.height(), 187);
        let e = page.frame.extent;
        assert_abs_diff_eq!(e.x_min, 0.0, epsilon = 1e-9);
        assert_abs_diff_eq!((e.y_min + e.y_max) / 2.0, 500.0, epsilon = 1e-9);
        assert!(e.y_max - e.y_min > 1000.0);
    }

    #[test]
    fn scale_bar_lengths_are_round() {
        assert_eq!(scale_bar_length_m(2345.0), Some(2000.0));
        assert_eq!(scale_bar_length_m(999.0), Some(500.0));
        assert_eq!(scale_bar_length_m(1000.0), Some(1000.0));
        assert_eq!(scale_bar_length_m(7.0), Some(5.0));
        assert_eq!(scale_bar_length_m(0.0), None);
        assert_eq!(length_label(500.0), "500 m");
        assert_eq!(length_label(20_000.0), "20 km");
        assert_eq!(length_label(2500.0), "2.5 km");
    }

    #[test]
    fn ticks_are_nice() {
        assert_eq!(nice_ticks(0.0, 10.0, 5), [0.0, 2.0, 4.0, 6.0, 8.0, 10.0]);
        assert_eq!(nice_ticks(-3.2, 3.2, 4), [-2.0, 0.0, 2.0]);
        assert_eq!(nice_ticks(0.13, 0.61, 5), [0.2, 0.3, 0.4, 0.5, 0.6]);
        assert_eq!(nice_ticks(5.0, 5.0, 5), [5.0]);
    }

    #[test]
    fn segments_are_clipped_to_the_rectangle() {
        let r = rect();
        assert_eq!(
            clip_segment((0.0, 30.0), (120.0, 30.0), &r),
            Some([(10.0, 30.0), (110.0, 30.0)])
        );
        assert_eq!(clip_segment((0.0, 0.0), (5.0, 100.0), &r), None);
        assert_eq!(
            clip_segment((20.0, 30.0), (30.0, 40.0), &r),
            Some([(20.0, 30.0), (30.0, 40.0)])
        );
        // In, out, in again: two runs.
        let runs = clip_polyline(&[(20.0, 30.0), (200.0, 30.0), (20.0, 40.0)], &r);
        assert_eq!(runs.len(), 2);
        assert_eq!(runs[0], [(20.0, 30.0), (110.0, 30.0)]);
    }

    #[test]
    fn dashes_follow_the_line_across_its_corners() {
        // An L of two 10 px legs with dashes 4 on, 2 off: on 0–4, 6–10, 12–16 (over the
        // corner at 10: 12 is (10, 2)), 18–20.
        let line = [(0.0, 0.0), (10.0, 0.0), (10.0, 10.0)];
        let pieces = dash_polyline(&line, &[4.0, 2.0]);
        assert_eq!(pieces.len(), 4);
        assert_eq!(pieces[0], [(0.0, 0.0), (4.0, 0.0)]);
        assert_eq!(pieces[1], [(6.0, 0.0), (10.0, 0.0)]);
        assert_eq!(pieces[2], [(10.0, 2.0), (10.0, 6.0)]);
        assert_eq!(pieces[3], [(10.0, 8.0), (10.0, 10.0)]);
        assert_eq!(dash_polyline(&line, &[]), vec![line.to_vec()]);
    }

    #[test]
    fn scanline_fill_respects_holes() {
        let r = PixelRect {
            left: 0,
            top: 0,
            right: 10,
            bottom: 10,
        };
        // A 6 × 6 square from (2, 2) with a 2 × 2 hole at (4, 4).
        let outer = vec![(2.0, 2.0), (8.0, 2.0), (8.0, 8.0), (2.0, 8.0)];
        let hole = vec![(4.0, 4.0), (6.0, 4.0), (6.0, 6.0), (4.0, 6.0)];
        let runs = fill_rings(&[outer, hole], &r);
        let count: i32 = runs.iter().map(|(_, a, b)| b - a).sum();
        assert_eq!(count, 36 - 4);
        assert!(runs.contains(&(4, 2, 4)) && runs.contains(&(4, 6, 8)));
        assert!(runs.contains(&(2, 2, 8)));
        // Clipped to the rectangle.
        let big = vec![(-5.0, -5.0), (50.0, -5.0), (50.0, 50.0), (-5.0, 50.0)];
        let count: i32 = fill_rings(&[big], &r).iter().map(|(_, a, b)| b - a).sum();
        assert_eq!(count, 100);
        assert!(fill_rings(&[], &r).is_empty());
    }
}
