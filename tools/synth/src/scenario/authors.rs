//! Author ids in one pass: five prolific authors at fixed shares of all records, and ordinary
//! authors who each post one to three consecutive records.

use rand::Rng;
use rand_chacha::ChaCha8Rng;

use super::digits::push_zero_padded;

const AUTHOR_PREFIX: &str = "acct-";
const AUTHOR_DIGITS: usize = 5;
/// Share of all records posted by each prolific author.
const PROLIFIC_SHARES: [f64; 5] = [0.020, 0.017, 0.015, 0.012, 0.010];
/// Cumulative probabilities that an ordinary author posts 1, 2 (the rest: 3) records.
const ORDINARY_POSTS_CUMULATIVE: [f64; 2] = [0.5, 0.8];

/// Five prolific ids (1..=5) at fixed shares, and ordinary ids (6, 7, …) that each post 1–3
/// consecutive records.
pub struct AuthorStream {
    next_ordinary: u64,
    current: u64,
    remaining: u32,
}

impl AuthorStream {
    pub fn new() -> Self {
        Self {
            next_ordinary: PROLIFIC_SHARES.len() as u64 + 1,
            current: 0,
            remaining: 0,
        }
    }

    fn next_id(&mut self, rng: &mut ChaCha8Rng) -> u64 {
        let u: f64 = rng.random();
        let mut cumulative = 0.0;
        for (k, share) in PROLIFIC_SHARES.iter().enumerate() {
            cumulative += share;
            if u < cumulative {
                return k as u64 + 1;
            }
        }
        if self.remaining == 0 {
            self.current = self.next_ordinary;
            self.next_ordinary += 1;
            let v: f64 = rng.random();
            self.remaining = 1 + ORDINARY_POSTS_CUMULATIVE
                .iter()
                .filter(|&&c| v >= c)
                .count() as u32;
        }
        self.remaining -= 1;
        self.current
    }

    /// The next record's author id, such as `acct-00042`.
    pub fn next_author(&mut self, rng: &mut ChaCha8Rng) -> String {
        let mut author = String::with_capacity(AUTHOR_PREFIX.len() + AUTHOR_DIGITS + 2);
        author.push_str(AUTHOR_PREFIX);
        push_zero_padded(&mut author, self.next_id(rng), AUTHOR_DIGITS);
        author
    }
}
