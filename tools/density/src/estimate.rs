//! Kernel intensity on a grid — fixed or Abramson (1982) adaptive bandwidths, binned FFT or exact
//! direct sums, with Diggle's (1985) edge correction: Davies & Baddeley (2018), *Stat. Comput.*
//! 28, 937–956 (bandwidth partitioning for adaptive estimates).

use stance_core::grid::Grid;

use crate::binning::{self, Points};
use crate::convolve::{radius_cells, Convolver, Spectrum};
use crate::kernel::Kernel;

/// Largest Abramson factor λ = (f̃(x_i)/g)^(−1/2) kept; larger ones are trimmed to it, as
/// spatstat's `bw.abram(trim = 5)` does, so isolated points do not get unbounded bandwidths.
pub const ABRAMSON_TRIM: f64 = 5.0;

/// Number of bandwidth groups the adaptive estimate is partitioned into (Davies & Baddeley 2018).
pub const ADAPTIVE_LEVELS: usize = 12;

/// How the sums over points are computed.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Method {
    /// Linear binning and FFT convolution (error bounded in [`binning_error_bound`]).
    Fft,
    /// Exact sums over points at each cell centre within the kernel's support.
    Direct,
}

/// Bandwidths: one for every point, or Abramson levels with a level per point.
#[derive(Debug, Clone)]
pub struct Bandwidths {
    /// Bandwidth (m) of each level.
    pub levels_m: Vec<f64>,
    /// Level of each point (empty when there is a single level).
    pub level_of_point: Vec<u16>,
}

impl Bandwidths {
    /// One bandwidth for every point.
    pub fn fixed(h_m: f64) -> Self {
        Bandwidths {
            levels_m: vec![h_m],
            level_of_point: Vec::new(),
        }
    }

    fn level(&self, i: usize) -> usize {
        if self.levels_m.len() == 1 {
            0
        } else {
            usize::from(self.level_of_point[i])
        }
    }
}

/// Abramson (1982) square-root law: h_i = h · λ_i, λ_i = (f̃(x_i)/g)^(−1/2), g the (weighted)
/// geometric mean of the pilot f̃ at the points; λ trimmed to [`ABRAMSON_TRIM`]. The λ's are
/// grouped into [`ADAPTIVE_LEVELS`] geometric levels between their minimum and maximum and each
/// point takes the nearest level (in log λ).
///
/// `pilot` is the pilot estimate on `grid` (any positive scale), read at the points by bilinear
/// interpolation between cell centres. Abramson (1982), *Ann. Statist.* 10(4), 1217–1223.
pub fn abramson(grid: &Grid, pilot: &[f64], points: &Points<'_>, h_m: f64) -> (Bandwidths, f64) {
    let n = points.x.len();
    let tiny = pilot.iter().cloned().fold(0.0, f64::max) * 1e-12 + f64::MIN_POSITIVE;
    let at_points: Vec<f64> = (0..n)
        .map(|i| bilinear(grid, pilot, points.x[i], points.y[i]).max(tiny))
        .collect();
    let total: f64 = (0..n).map(|i| points.weight(i)).sum();
    let log_g = (0..n)
        .map(|i| points.weight(i) * at_points[i].ln())
        .sum::<f64>()
        / total.max(f64::MIN_POSITIVE);
    let log_lambda: Vec<f64> = at_points
        .iter()
        .map(|f| (-0.5 * (f.ln() - log_g)).min(ABRAMSON_TRIM.ln()))
        .collect();
    let lo = log_lambda.iter().cloned().fold(f64::INFINITY, f64::min);
    let hi = log_lambda.iter().cloned().fold(f64::NEG_INFINITY, f64::max);
    let steps = (ADAPTIVE_LEVELS - 1) as f64;
    let span = (hi - lo).max(1e-12);
    let levels_m = (0..ADAPTIVE_LEVELS)
        .map(|k| h_m * (lo + span * k as f64 / steps).exp())
        .collect();
    let level_of_point = log_lambda
        .iter()
        .map(|l| ((l - lo) / span * steps).round() as u16)
        .collect();
    (
        Bandwidths {
            levels_m,
            level_of_point,
        },
        log_g.exp(),
    )
}

/// Bilinear interpolation of cell-centre `values` at (x, y), clamped at the outer centres.
pub fn bilinear(grid: &Grid, values: &[f64], x: f64, y: f64) -> f64 {
    let (fc, fr) = binning::fractional_index(grid, x, y);
    let fc = fc.clamp(0.0, (grid.cols - 1) as f64);
    let fr = fr.clamp(0.0, (grid.rows - 1) as f64);
    let c0 = (fc.floor() as usize).min(grid.cols.saturating_sub(2));
    let r0 = (fr.floor() as usize).min(grid.rows.saturating_sub(2));
    let c1 = (c0 + 1).min(grid.cols - 1);
    let r1 = (r0 + 1).min(grid.rows - 1);
    let (tc, tr) = (fc - c0 as f64, fr - r0 as f64);
    let v = |r: usize, c: usize| values[r * grid.cols + c];
    (1.0 - tr) * ((1.0 - tc) * v(r0, c0) + tc * v(r0, c1))
        + tr * ((1.0 - tc) * v(r1, c0) + tc * v(r1, c1))
}

/// Bound on |binned − exact| at a cell per unit weight, from linear binning (Wand 1994, §3):
/// the binned estimate replaces K(c − x_i) by its bilinear interpolant between centres.
/// For C² kernels that error is at most (δ²/8)(sup|K_xx| + sup|K_yy|) = (δ²/4)·sup|K_xx|;
/// for the Epanechnikov kernel (slope jumps at d = h) the interpolant is a convex combination
/// of corner values within δ√2, so the error is at most sup|∇K|·δ√2 = 4√2 δ/(π h³).
/// Multiply by the total weight (or the weight within reach of the cell).
pub fn binning_error_bound(kernel: Kernel, h_m: f64, cell_m: f64) -> f64 {
    match kernel.second_derivative_bound(h_m) {
        Some(k2) => cell_m * cell_m / 4.0 * k2,
        None => 4.0 * std::f64::consts::SQRT_2 * cell_m / (std::f64::consts::PI * h_m.powi(3)),
    }
}

/// A ready-to-run estimator on one grid: kernel spectra and edge masses computed once, reused for
/// every class, slice and permutation.
#[derive(Debug)]
pub struct Estimator {
    grid: Grid,
    kernel: Kernel,
    bandwidths: Bandwidths,
    method: Method,
    convolver: Option<Convolver>,
    spectra: Vec<Spectrum>,
    mask: Option<Vec<bool>>,
    edge_mass: Option<Vec<Vec<f64>>>,
}

impl Estimator {
    /// Plans an estimator. `mask` (one flag per cell, true inside) makes cells outside NaN;
    /// with `edge_correct` each level's sum is divided by the kernel mass inside the mask,
    /// e(x) = Σ_{cells c in mask} K_h(x − c) δ² (Diggle 1985, *J. R. Statist. Soc. C* 34, 138–147).
    pub fn new(
        grid: Grid,
        kernel: Kernel,
        bandwidths: Bandwidths,
        method: Method,
        mask: Option<Vec<bool>>,
        edge_correct: bool,
    ) -> Self {
        let h_max = bandwidths.levels_m.iter().cloned().fold(0.0, f64::max);
        let needs_fft = method == Method::Fft || (edge_correct && mask.is_some());
        let (convolver, spectra) = if needs_fft {
            let convolver = Convolver::new(
                grid.rows,
                grid.cols,
                radius_cells(kernel, h_max, grid.cell_m),
            );
            let spectra = bandwidths
                .levels_m
                .iter()
                .map(|h| convolver.kernel_spectrum(kernel, *h, grid.cell_m))
                .collect();
            (Some(convolver), spectra)
        } else {
            (None, Vec::new())
        };
        let edge_mass = match (&mask, &convolver, edge_correct) {
            (Some(mask), Some(convolver), true) => {
                let area = grid.cell_m * grid.cell_m;
                let indicator: Vec<f64> =
                    mask.iter().map(|m| if *m { area } else { 0.0 }).collect();
                let field = convolver.field_spectrum(&indicator);
                Some(
                    spectra
                        .iter()
                        .map(|k| convolver.convolve_sum(&[(&field, k)]))
                        .collect(),
                )
            }
            _ => None,
        };
        Estimator {
            grid,
            kernel,
            bandwidths,
            method,
            convolver,
            spectra,
            mask,
            edge_mass,
        }
    }

    /// Rough cost comparison: direct sums cost n·(2R+1)² kernel evaluations per level set, the
    /// FFT path about 10·P·log₂P flops per level for the padded size P.
    pub fn cheaper_method(
        grid: &Grid,
        kernel: Kernel,
        h_max_m: f64,
        levels: usize,
        n: usize,
    ) -> Method {
        let radius = radius_cells(kernel, h_max_m, grid.cell_m) as f64;
        let direct = n as f64 * (2.0 * radius + 1.0).powi(2);
        let padded = (grid.rows as f64 + radius) * (grid.cols as f64 + radius);
        let fft = 10.0 * levels as f64 * padded * padded.log2().max(1.0) + grid.len() as f64;
        if direct < fft {
            Method::Direct
        } else {
            Method::Fft
        }
    }

    /// The grid.
    pub fn grid(&self) -> &Grid {
        &self.grid
    }

    /// The method in use.
    pub fn method(&self) -> Method {
        self.method
    }

    /// The bandwidths.
    pub fn bandwidths(&self) -> &Bandwidths {
        &self.bandwidths
    }

    /// The mask, if any.
    pub fn mask(&self) -> Option<&[bool]> {
        self.mask.as_deref()
    }

    /// Σ_i w_i K_{h_i}(c − x_i) at every cell centre c (per m²), over the points `indices`;
    /// edge-corrected when planned so; NaN outside the mask.
    pub fn sum(&self, points: &Points<'_>, indices: &[usize]) -> Vec<f64> {
        let levels = self.bandwidths.levels_m.len();
        let by_level: Vec<Vec<usize>> = if levels == 1 {
            vec![indices.to_vec()]
        } else {
            let mut groups = vec![Vec::new(); levels];
            for &i in indices {
                groups[self.bandwidths.level(i)].push(i);
            }
            groups
        };
        let mut out = vec![0.0; self.grid.len()];
        match (self.method, &self.convolver) {
            (Method::Fft, Some(convolver)) => {
                if self.edge_mass.is_none() {
                    let fields: Vec<(Spectrum, usize)> = by_level
                        .iter()
                        .enumerate()
                        .filter(|(_, g)| !g.is_empty())
                        .map(|(l, g)| {
                            (
                                convolver
                                    .field_spectrum(&binning::linear_bin(&self.grid, points, g)),
                                l,
                            )
                        })
                        .collect();
                    let terms: Vec<(&Spectrum, &Spectrum)> =
                        fields.iter().map(|(f, l)| (f, &self.spectra[*l])).collect();
                    if !terms.is_empty() {
                        out = convolver.convolve_sum(&terms);
                    }
                } else {
                    for (l, group) in by_level.iter().enumerate() {
                        if group.is_empty() {
                            continue;
                        }
                        let bins = binning::linear_bin(&self.grid, points, group);
                        let level = convolver.convolve(&bins, &self.spectra[l]);
                        self.add_corrected(&mut out, &level, l);
                    }
                }
            }
            _ => {
                for (l, group) in by_level.iter().enumerate() {
                    if group.is_empty() {
                        continue;
                    }
                    let level = direct_sum(
                        &self.grid,
                        self.kernel,
                        self.bandwidths.levels_m[l],
                        points,
                        group,
                    );
                    self.add_corrected(&mut out, &level, l);
                }
            }
        }
        if let Some(mask) = &self.mask {
            for (v, inside) in out.iter_mut().zip(mask) {
                if !*inside {
                    *v = f64::NAN;
                }
            }
        }
        out
    }

    /// [`Estimator::sum`] by exact direct sums on the grid rows `rows` only (a tile of a tiled
    /// run; no edge correction): equal to those rows of `sum` with [`Method::Direct`] bit for
    /// bit. NaN outside the mask.
    pub fn direct_sum_rows(
        &self,
        points: &Points<'_>,
        indices: &[usize],
        rows: std::ops::Range<usize>,
    ) -> Vec<f64> {
        let cols = self.grid.cols;
        let mut out = vec![0.0; rows.len() * cols];
        for (l, h) in self.bandwidths.levels_m.iter().enumerate() {
            let group: Vec<usize> = if self.bandwidths.levels_m.len() == 1 {
                indices.to_vec()
            } else {
                indices
                    .iter()
                    .copied()
                    .filter(|&i| self.bandwidths.level(i) == l)
                    .collect()
            };
            if group.is_empty() {
                continue;
            }
            let level = direct_sum_rows(&self.grid, self.kernel, *h, points, &group, rows.clone());
            for (o, v) in out.iter_mut().zip(&level) {
                *o += v;
            }
        }
        if let Some(mask) = &self.mask {
            let inside = &mask[rows.start * cols..rows.end * cols];
            for (v, inside) in out.iter_mut().zip(inside) {
                if !*inside {
                    *v = f64::NAN;
                }
            }
        }
        out
    }

    fn add_corrected(&self, out: &mut [f64], level: &[f64], l: usize) {
        match &self.edge_mass {
            Some(edge) => {
                for ((o, v), e) in out.iter_mut().zip(level).zip(&edge[l]) {
                    // Inside the mask e ≥ K(0)·δ² > 0; outside the value is masked anyway.
                    if *e > 1e-12 {
                        *o += v / e;
                    }
                }
            }
            None => {
                for (o, v) in out.iter_mut().zip(level) {
                    *o += v;
                }
            }
        }
    }
}

/// Exact Σ_i w_i K_h(c − x_i) at every cell centre c (per m²): each point visits the cells
/// within the kernel's support.
pub fn direct_sum(
    grid: &Grid,
    kernel: Kernel,
    h_m: f64,
    points: &Points<'_>,
    indices: &[usize],
) -> Vec<f64> {
    direct_sum_rows(grid, kernel, h_m, points, indices, 0..grid.rows)
}

/// The rows of the grid a point at northing `y` reaches with a kernel reaching `reach` m
/// (empty when none): the rows whose centres lie within `reach` of `y`.
pub fn rows_reached(grid: &Grid, y: f64, reach: f64) -> std::ops::Range<usize> {
    let y_max = grid.y_max();
    let r_lo = (((y_max - y - reach) / grid.cell_m - 0.5).ceil()).max(0.0) as usize;
    let r_hi = ((y_max - y + reach) / grid.cell_m - 0.5).floor();
    if r_hi < 0.0 {
        return 0..0;
    }
    let r_hi = (r_hi as usize).min(grid.rows.saturating_sub(1));
    r_lo..(r_hi + 1).max(r_lo)
}

/// [`direct_sum`] on the grid rows `rows` only (`rows.len() × cols` values): every cell gets
/// the same terms, in the same order and with the same arithmetic, as in the whole grid's sum,
/// so a band of rows equals those rows of [`direct_sum`] bit for bit.
pub fn direct_sum_rows(
    grid: &Grid,
    kernel: Kernel,
    h_m: f64,
    points: &Points<'_>,
    indices: &[usize],
    rows: std::ops::Range<usize>,
) -> Vec<f64> {
    let mut out = vec![0.0; rows.len() * grid.cols];
    if rows.is_empty() {
        return out;
    }
    let reach = kernel.support_m(h_m);
    let y_max = grid.y_max();
    for &i in indices {
        let (x, y, w) = (points.x[i], points.y[i], points.weight(i));
        let c_lo = (((x - reach - grid.x_min) / grid.cell_m - 0.5).ceil()).max(0.0) as usize;
        let c_hi = ((x + reach - grid.x_min) / grid.cell_m - 0.5).floor();
        let r_lo = (((y_max - y - reach) / grid.cell_m - 0.5).ceil()).max(0.0) as usize;
        let r_hi = ((y_max - y + reach) / grid.cell_m - 0.5).floor();
        if c_hi < 0.0 || r_hi < 0.0 {
            continue;
        }
        let c_hi = (c_hi as usize).min(grid.cols.saturating_sub(1));
        let r_hi = (r_hi as usize).min(grid.rows.saturating_sub(1));
        let r_lo = r_lo.max(rows.start);
        let r_hi = r_hi.min(rows.end - 1);
        for r in r_lo..=r_hi {
            let dy = y_max - (r as f64 + 0.5) * grid.cell_m - y;
            let row = (r - rows.start) * grid.cols;
            for c in c_lo..=c_hi {
                let dx = grid.x_min + (c as f64 + 0.5) * grid.cell_m - x;
                out[row + c] += w * kernel.value(dx * dx + dy * dy, h_m);
            }
        }
    }
    out
}
