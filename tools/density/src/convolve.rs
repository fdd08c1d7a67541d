//! 2-D linear (non-circular) convolution by zero-padded real FFTs: the binned kernel estimator
//! of Wand (1994), *J. Comput. Graph. Stat.* 3(4), 433–445, §2, computed with realfft/rustfft.

use std::sync::Arc;

use rayon::prelude::*;
use realfft::num_complex::Complex;
use realfft::{ComplexToReal, RealFftPlanner, RealToComplex};
use rustfft::{Fft, FftPlanner};

use crate::kernel::Kernel;

/// The smallest n' ≥ n whose prime factors are all 2, 3, 5 or 7 (sizes rustfft does fastest).
pub fn fast_size(n: usize) -> usize {
    let mut m = n.max(1);
    loop {
        let mut r = m;
        for p in [2, 3, 5, 7] {
            while (r / p) * p == r {
                r /= p;
            }
        }
        if r == 1 {
            return m;
        }
        m += 1;
    }
}

/// A spectrum in the convolver's layout: `pad_cols / 2 + 1` columns of `pad_rows` values each,
/// column-major.
#[derive(Debug, Clone)]
pub struct Spectrum(Vec<Complex<f64>>);

/// Plans for convolving `rows × cols` fields with kernels reaching `radius_cells` cells.
///
/// The field is zero-padded to `pad_rows ≥ rows + radius` and `pad_cols ≥ cols + radius`, so the
/// circular convolution of the padded arrays equals the linear convolution on the grid: an output
/// cell i receives only offsets |i − j| ≤ radius, which never wrap when pad ≥ size + radius.
pub struct Convolver {
    rows: usize,
    cols: usize,
    pad_rows: usize,
    pad_cols: usize,
    radius_cells: usize,
    row_forward: Arc<dyn RealToComplex<f64>>,
    row_inverse: Arc<dyn ComplexToReal<f64>>,
    column_forward: Arc<dyn Fft<f64>>,
    column_inverse: Arc<dyn Fft<f64>>,
}

impl std::fmt::Debug for Convolver {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("Convolver")
            .field("rows", &self.rows)
            .field("cols", &self.cols)
            .field("pad_rows", &self.pad_rows)
            .field("pad_cols", &self.pad_cols)
            .finish()
    }
}

impl Convolver {
    /// Plans for a `rows × cols` field and kernels of half-width `radius_cells`.
    pub fn new(rows: usize, cols: usize, radius_cells: usize) -> Self {
        let pad_rows = fast_size(rows + radius_cells + 1);
        let pad_cols = fast_size((cols + radius_cells + 1).max(2)).next_multiple_of(2);
        let mut real = RealFftPlanner::<f64>::new();
        let mut complex = FftPlanner::<f64>::new();
        Convolver {
            rows,
            cols,
            pad_rows,
            pad_cols,
            radius_cells,
            row_forward: real.plan_fft_forward(pad_cols),
            row_inverse: real.plan_fft_inverse(pad_cols),
            column_forward: complex.plan_fft_forward(pad_rows),
            column_inverse: complex.plan_fft_inverse(pad_rows),
        }
    }

    /// Padded size (rows, cols) of the transforms.
    pub fn padded(&self) -> (usize, usize) {
        (self.pad_rows, self.pad_cols)
    }

    /// Largest kernel half-width (cells) these plans convolve without wrap-around.
    pub fn radius_cells(&self) -> usize {
        self.radius_cells
    }

    fn half(&self) -> usize {
        self.pad_cols / 2 + 1
    }

    /// Forward 2-D transform of a `data_rows × data_cols` real array placed at the top-left of
    /// the padded frame (zero elsewhere).
    fn forward(&self, data: &[f64], data_rows: usize, data_cols: usize) -> Spectrum {
        let half = self.half();
        let pad_cols = self.pad_cols;
        let mut row_spectra = vec![Complex::new(0.0, 0.0); data_rows * half];
        row_spectra.par_chunks_mut(half).enumerate().for_each_init(
            || (vec![0.0; pad_cols], self.row_forward.make_scratch_vec()),
            |(input, scratch), (r, out)| {
                input[..data_cols].copy_from_slice(&data[r * data_cols..(r + 1) * data_cols]);
                input[data_cols..].iter_mut().for_each(|v| *v = 0.0);
                // Lengths match the plan by construction, the only error realfft reports.
                let _ = self.row_forward.process_with_scratch(input, out, scratch);
            },
        );
        let mut spectrum = vec![Complex::new(0.0, 0.0); half * self.pad_rows];
        spectrum
            .par_chunks_mut(self.pad_rows)
            .enumerate()
            .for_each_init(
                || vec![Complex::new(0.0, 0.0); self.column_forward.get_inplace_scratch_len()],
                |scratch, (c, column)| {
                    for r in 0..data_rows {
                        column[r] = row_spectra[r * half + c];
                    }
                    self.column_forward.process_with_scratch(column, scratch);
                },
            );
        Spectrum(spectrum)
    }

    /// Spectrum of `kernel` with bandwidth `h_m` sampled at the cell-centre offsets of a grid of
    /// cell `cell_m`, within `radius_cells` (wrapped so that offset 0 sits at index 0).
    pub fn kernel_spectrum(&self, kernel: Kernel, h_m: f64, cell_m: f64) -> Spectrum {
        let radius = self.radius_cells as isize;
        let (pr, pc) = (self.pad_rows as isize, self.pad_cols as isize);
        let mut frame = vec![0.0; self.pad_rows * self.pad_cols];
        for dr in -radius..=radius {
            for dc in -radius..=radius {
                let d2 = ((dr * dr + dc * dc) as f64) * cell_m * cell_m;
                let value = kernel.value(d2, h_m);
                if value != 0.0 {
                    let r = dr.rem_euclid(pr) as usize;
                    let c = dc.rem_euclid(pc) as usize;
                    frame[r * self.pad_cols + c] = value;
                }
            }
        }
        self.forward(&frame, self.pad_rows, self.pad_cols)
    }

    /// Spectrum of a `rows × cols` field (binned weights, a mask indicator…).
    pub fn field_spectrum(&self, field: &[f64]) -> Spectrum {
        self.forward(field, self.rows, self.cols)
    }

    /// Σ over `terms` of field ∗ kernel, back on the `rows × cols` grid.
    pub fn convolve_sum(&self, terms: &[(&Spectrum, &Spectrum)]) -> Vec<f64> {
        let half = self.half();
        let mut product = vec![Complex::new(0.0, 0.0); half * self.pad_rows];
        for (field, kernel) in terms {
            product
                .par_iter_mut()
                .zip(field.0.par_iter().zip(kernel.0.par_iter()))
                .for_each(|(p, (f, k))| *p += f * k);
        }
        product.par_chunks_mut(self.pad_rows).for_each_init(
            || vec![Complex::new(0.0, 0.0); self.column_inverse.get_inplace_scratch_len()],
            |scratch, column| self.column_inverse.process_with_scratch(column, scratch),
        );
        let scale = 1.0 / (self.pad_rows * self.pad_cols) as f64;
        let (cols, pad_rows, pad_cols) = (self.cols, self.pad_rows, self.pad_cols);
        let mut out = vec![0.0; self.rows * self.cols];
        out.par_chunks_mut(cols).enumerate().for_each_init(
            || {
                (
                    vec![Complex::new(0.0, 0.0); half],
                    vec![0.0; pad_cols],
                    self.row_inverse.make_scratch_vec(),
                )
            },
            |(row, real, scratch), (r, out_row)| {
                for c in 0..half {
                    row[c] = product[c * pad_rows + r];
                }
                // The inputs of a real signal's spectrum have zero imaginary parts at DC and
                // Nyquist; round-off leaves ~1e-17 there, which realfft rejects.
                row[0].im = 0.0;
                row[half - 1].im = 0.0;
                let _ = self.row_inverse.process_with_scratch(row, real, scratch);
                for (o, v) in out_row.iter_mut().zip(real.iter()) {
                    *o = v * scale;
                }
            },
        );
        out
    }

    /// field ∗ kernel on the `rows × cols` grid.
    pub fn convolve(&self, field: &[f64], kernel: &Spectrum) -> Vec<f64> {
        let spectrum = self.field_spectrum(field);
        self.convolve_sum(&[(&spectrum, kernel)])
    }
}

/// Half-width in cells of the sampled `kernel` with bandwidth `h_m` on cells of `cell_m`.
pub fn radius_cells(kernel: Kernel, h_m: f64, cell_m: f64) -> usize {
    (kernel.support_m(h_m) / cell_m).ceil() as usize
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Direct linear convolution for comparison.
    fn direct(
        field: &[f64],
        rows: usize,
        cols: usize,
        kernel: Kernel,
        h: f64,
        cell: f64,
    ) -> Vec<f64> {
        let radius = radius_cells(kernel, h, cell) as isize;
        let mut out = vec![0.0; rows * cols];
        for r in 0..rows as isize {
            for c in 0..cols as isize {
                let mut s = 0.0;
                for dr in -radius..=radius {
                    for dc in -radius..=radius {
                        let (rr, cc) = (r - dr, c - dc);
                        if rr >= 0 && cc >= 0 && rr < rows as isize && cc < cols as isize {
                            let d2 = ((dr * dr + dc * dc) as f64) * cell * cell;
                            s += field[(rr * cols as isize + cc) as usize] * kernel.value(d2, h);
                        }
                    }
                }
                out[(r * cols as isize + c) as usize] = s;
            }
        }
        out
    }

    #[test]
    fn fft_convolution_equals_direct_linear_convolution() {
        // Mass in the corners checks that nothing wraps round; tolerance 1e-12 of the maximum is
        // FFT round-off (≈ ε·log₂N) with a wide margin.
        let (rows, cols, cell, h) = (13, 21, 1.0, 4.5);
        let mut field = vec![0.0; rows * cols];
        field[0] = 5.0;
        field[rows * cols - 1] = 3.0;
        field[7 * cols + 10] = 1.0;
        field[12 * cols] = 2.0;
        for kernel in [Kernel::Quartic, Kernel::Gaussian, Kernel::Epanechnikov] {
            let radius = radius_cells(kernel, h, cell);
            let convolver = Convolver::new(rows, cols, radius);
            let spectrum = convolver.kernel_spectrum(kernel, h, cell);
            let got = convolver.convolve(&field, &spectrum);
            let want = direct(&field, rows, cols, kernel, h, cell);
            let max = want.iter().cloned().fold(0.0, f64::max);
            for (g, w) in got.iter().zip(&want) {
                assert!((g - w).abs() <= 1e-12 * max, "{kernel:?}: {g} vs {w}");
            }
        }
    }

    #[test]
    fn fast_sizes() {
        assert_eq!(fast_size(1), 1);
        assert_eq!(fast_size(11), 12);
        assert_eq!(fast_size(1031), 1050);
    }
}
