//! Two simulated classifiers: each labels a record by drawing from the row of its confusion
//! matrix for the true stance (the class-conditional noise model of Dawid & Skene 1979).

use rand::Rng;
use rand_chacha::ChaCha8Rng;

/// Classifier A: row = true class (oppose, neutral, support), column = label; rows sum to 1.
pub const CONFUSION_A: [[f64; 3]; 3] = [[0.86, 0.10, 0.04], [0.08, 0.84, 0.08], [0.03, 0.12, 0.85]];
/// Classifier B, noisier than A; same layout.
pub const CONFUSION_B: [[f64; 3]; 3] = [[0.72, 0.20, 0.08], [0.15, 0.68, 0.17], [0.07, 0.23, 0.70]];

/// Label drawn from one confusion row (oppose, neutral, support).
pub fn draw_label(rng: &mut ChaCha8Rng, row: &[f64; 3]) -> i8 {
    let u: f64 = rng.random();
    if u < row[0] {
        -1
    } else if u < row[0] + row[1] {
        0
    } else {
        1
    }
}
