//! The row kernels of the scan: one location's counts over a block of labellings added to the
//! running sums, portably or with AVX2 / AVX-512F chosen once per scan, the labellings whose sum
//! leaves a band picked out in the same pass, and rows prefetched ahead of their use.

/// One stored count. Rows of locations whose counts fit in a byte are stored as u8, the others
/// as u16 or u32: the scan reads every row of a neighbourhood once per window, so the width of
/// a count is the memory traffic of the scan. Implemented for u8, u16 and u32 only (their size
/// tells them apart in the AVX2 kernel).
pub(super) trait Count: Copy + Default + Send + Sync + 'static {
    /// The largest value the type holds.
    const LARGEST: u64;
    /// `value`, known to be ≤ `LARGEST`.
    fn narrow(value: u32) -> Self;
    /// The count as u32.
    fn widen(self) -> u32;
}

/// `Count` for an unsigned type no wider than u32 (the `as` casts are exact: `narrow` is only
/// given values ≤ `LARGEST`, and widening to u32 is lossless).
macro_rules! count_type {
    ($t:ty) => {
        impl Count for $t {
            const LARGEST: u64 = <$t>::MAX as u64;
            #[inline(always)]
            fn narrow(value: u32) -> Self {
                debug_assert!(u64::from(value) <= Self::LARGEST);
                value as $t
            }
            #[inline(always)]
            fn widen(self) -> u32 {
                u32::from(self)
            }
        }
    };
}

count_type!(u8);
count_type!(u16);
count_type!(u32);

/// The counts of one location over a block of labellings: narrow (u8) or wide (`W`).
#[derive(Clone, Copy)]
pub(super) enum Row<'a, W> {
    Narrow(&'a [u8]),
    Wide(&'a [W]),
}

impl<'a, W: Count> Row<'a, W> {
    pub(super) fn split_at(self, mid: usize) -> (Self, Self) {
        match self {
            Row::Narrow(r) => {
                let (a, b) = r.split_at(mid);
                (Row::Narrow(a), Row::Narrow(b))
            }
            Row::Wide(r) => {
                let (a, b) = r.split_at(mid);
                (Row::Wide(a), Row::Wide(b))
            }
        }
    }
}

/// The row kernels, with the instruction set chosen once per scan.
#[derive(Debug, Clone, Copy)]
// Elsewhere than on x86-64 only the portable kernels exist.
#[cfg_attr(not(target_arch = "x86_64"), allow(dead_code))]
pub(super) struct Kernels {
    /// Only true when the processor reported AVX2 (set by [`Kernels::detect`] alone).
    pub(super) avx2: bool,
    /// Only true when the processor reported AVX-512F (set by [`Kernels::detect`] alone).
    pub(super) avx512: bool,
}

impl Kernels {
    pub(super) fn detect() -> Self {
        #[cfg(target_arch = "x86_64")]
        let (avx2, avx512) = (
            std::arch::is_x86_feature_detected!("avx2"),
            std::arch::is_x86_feature_detected!("avx512f"),
        );
        #[cfg(not(target_arch = "x86_64"))]
        let (avx2, avx512) = (false, false);
        Kernels { avx2, avx512 }
    }

    /// `acc[i] += row[i]`.
    #[inline(always)]
    pub(super) fn add<W: Count>(self, acc: &mut [u32], row: Row<'_, W>) {
        match row {
            Row::Narrow(r) => self.add_typed(acc, r),
            Row::Wide(r) => self.add_typed(acc, r),
        }
    }

    #[inline(always)]
    fn add_typed<T: Count>(self, acc: &mut [u32], row: &[T]) {
        #[cfg(target_arch = "x86_64")]
        if self.avx2 {
            // SAFETY: `avx2` is only set when the processor supports AVX2.
            unsafe { add_avx2(acc, row) };
            return;
        }
        add_portable(acc, row);
    }

    /// `acc[i] += row[i]`, appending to `out` each `i` whose sum lies outside `[lo, hi]`
    /// (`lo ≤ hi`).
    #[inline(always)]
    pub(super) fn add_outside<W: Count>(
        self,
        acc: &mut [u32],
        row: Row<'_, W>,
        (lo, hi): (u32, u32),
        out: &mut Vec<u32>,
    ) {
        match row {
            Row::Narrow(r) => self.add_outside_typed(acc, r, lo, hi, out),
            Row::Wide(r) => self.add_outside_typed(acc, r, lo, hi, out),
        }
    }

    #[inline(always)]
    fn add_outside_typed<T: Count>(
        self,
        acc: &mut [u32],
        row: &[T],
        lo: u32,
        hi: u32,
        out: &mut Vec<u32>,
    ) {
        #[cfg(target_arch = "x86_64")]
        if self.avx512 {
            // SAFETY: `avx512` is only set when the processor supports AVX-512F.
            unsafe { add_outside_avx512(acc, row, lo, hi, out) };
            return;
        }
        #[cfg(target_arch = "x86_64")]
        if self.avx2 {
            // SAFETY: `avx2` is only set when the processor supports AVX2.
            unsafe { add_outside_avx2(acc, row, lo, hi, out) };
            return;
        }
        add_outside_portable(acc, row, lo, hi, 0, out);
    }
}

#[inline(always)]
fn add_portable<T: Count>(acc: &mut [u32], row: &[T]) {
    for (a, v) in acc.iter_mut().zip(row) {
        *a += v.widen();
    }
}

/// [`Kernels::add_outside`] without explicit vector instructions; positions are offset by
/// `base`.
#[inline(always)]
fn add_outside_portable<T: Count>(
    acc: &mut [u32],
    row: &[T],
    lo: u32,
    hi: u32,
    base: u32,
    out: &mut Vec<u32>,
) {
    // Runtime-length loops, which the compiler vectorises (fixed-length ones it unrolls into
    // scalar code): add the whole row, count the lanes outside the band a stretch at a time,
    // and look lane by lane only in a stretch with a hit.
    const STRETCH: usize = 64;
    add_portable(acc, row);
    // For lo ≤ hi: c ∉ [lo, hi] ⇔ c − lo (wrapping) > hi − lo, one unsigned compare a lane.
    let span = hi - lo;
    for (k, sums) in acc.chunks(STRETCH).enumerate() {
        let hits = sums
            .iter()
            .filter(|sum| sum.wrapping_sub(lo) > span)
            .count();
        if hits > 0 {
            for (j, sum) in sums.iter().enumerate() {
                if sum.wrapping_sub(lo) > span {
                    out.push(base + (k * STRETCH + j) as u32);
                }
            }
        }
    }
}

#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2")]
fn add_avx2<T: Count>(acc: &mut [u32], row: &[T]) {
    add_portable(acc, row);
}

/// [`Kernels::add_outside`] eight lanes at a time, the lanes outside the band read from a
/// compare mask.
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2")]
fn add_outside_avx2<T: Count>(acc: &mut [u32], row: &[T], lo: u32, hi: u32, out: &mut Vec<u32>) {
    use std::arch::x86_64::{
        __m128i, __m256i, _mm256_add_epi32, _mm256_castsi256_ps, _mm256_cmpgt_epi32,
        _mm256_cvtepu16_epi32, _mm256_cvtepu8_epi32, _mm256_loadu_si256, _mm256_movemask_ps,
        _mm256_set1_epi32, _mm256_storeu_si256, _mm256_sub_epi32, _mm256_xor_si256,
        _mm_loadl_epi64, _mm_loadu_si128,
    };
    const LANES: usize = 8;
    let row = &row[..acc.len()];
    let vector_lanes = acc.len() / LANES * LANES;
    let low = _mm256_set1_epi32(lo as i32);
    // x > span unsigned ⇔ (x ⊕ 2³¹) > (span ⊕ 2³¹) signed.
    let sign = _mm256_set1_epi32(i32::MIN);
    let limit = _mm256_set1_epi32(((hi - lo) ^ 0x8000_0000) as i32);
    for k in (0..vector_lanes).step_by(LANES) {
        // SAFETY: k + 8 ≤ acc.len() = row.len(), so the loads read (and the store writes) only
        // inside the slices; all accesses are unaligned. T is u8, u16 or u32 (see `Count`), so
        // its size names the load: 8 bytes, 16 bytes or 32 bytes from `row[k]`.
        let mut mask = unsafe {
            let from = row.as_ptr().add(k);
            let values: __m256i = match std::mem::size_of::<T>() {
                1 => _mm256_cvtepu8_epi32(_mm_loadl_epi64(from.cast::<__m128i>())),
                2 => _mm256_cvtepu16_epi32(_mm_loadu_si128(from.cast::<__m128i>())),
                _ => _mm256_loadu_si256(from.cast::<__m256i>()),
            };
            let slot = acc.as_mut_ptr().add(k).cast::<__m256i>();
            let sums = _mm256_add_epi32(_mm256_loadu_si256(slot), values);
            _mm256_storeu_si256(slot, sums);
            let shifted = _mm256_xor_si256(_mm256_sub_epi32(sums, low), sign);
            let above = _mm256_cmpgt_epi32(shifted, limit);
            _mm256_movemask_ps(_mm256_castsi256_ps(above)) as u32
        };
        while mask != 0 {
            out.push(k as u32 + mask.trailing_zeros());
            mask &= mask - 1;
        }
    }
    add_outside_portable(
        &mut acc[vector_lanes..],
        &row[vector_lanes..],
        lo,
        hi,
        vector_lanes as u32,
        out,
    );
}

/// [`Kernels::add_outside`] sixteen lanes at a time, the lanes outside the band read from an
/// unsigned compare mask.
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx512f")]
fn add_outside_avx512<T: Count>(acc: &mut [u32], row: &[T], lo: u32, hi: u32, out: &mut Vec<u32>) {
    use std::arch::x86_64::{
        __m128i, __m256i, __m512i, _mm256_loadu_si256, _mm512_add_epi32, _mm512_cmpgt_epu32_mask,
        _mm512_cvtepu16_epi32, _mm512_cvtepu8_epi32, _mm512_loadu_si512, _mm512_set1_epi32,
        _mm512_storeu_si512, _mm512_sub_epi32, _mm_loadu_si128,
    };
    const LANES: usize = 16;
    let row = &row[..acc.len()];
    let vector_lanes = acc.len() / LANES * LANES;
    let low = _mm512_set1_epi32(lo as i32);
    let span = _mm512_set1_epi32((hi - lo) as i32);
    for k in (0..vector_lanes).step_by(LANES) {
        // SAFETY: k + 16 ≤ acc.len() = row.len(), so the loads read (and the store writes) only
        // inside the slices; all accesses are unaligned. T is u8, u16 or u32 (see `Count`), so
        // its size names the load: 16, 32 or 64 bytes from `row[k]`.
        let mut mask = unsafe {
            let from = row.as_ptr().add(k);
            let values: __m512i = match std::mem::size_of::<T>() {
                1 => _mm512_cvtepu8_epi32(_mm_loadu_si128(from.cast::<__m128i>())),
                2 => _mm512_cvtepu16_epi32(_mm256_loadu_si256(from.cast::<__m256i>())),
                _ => _mm512_loadu_si512(from.cast::<__m512i>()),
            };
            let slot = acc.as_mut_ptr().add(k).cast::<__m512i>();
            let sums = _mm512_add_epi32(_mm512_loadu_si512(slot), values);
            _mm512_storeu_si512(slot, sums);
            u32::from(_mm512_cmpgt_epu32_mask(_mm512_sub_epi32(sums, low), span))
        };
        while mask != 0 {
            out.push(k as u32 + mask.trailing_zeros());
            mask &= mask - 1;
        }
    }
    add_outside_portable(
        &mut acc[vector_lanes..],
        &row[vector_lanes..],
        lo,
        hi,
        vector_lanes as u32,
        out,
    );
}

/// Asks for the cache lines of `row` ahead of their use (a hint; no effect on results).
#[inline(always)]
pub(super) fn prefetch<W>(row: Row<'_, W>) {
    #[cfg(target_arch = "x86_64")]
    {
        use std::arch::x86_64::{_mm_prefetch, _MM_HINT_T0};
        let (start, bytes) = match row {
            Row::Narrow(r) => (r.as_ptr().cast::<i8>(), std::mem::size_of_val(r)),
            Row::Wide(r) => (r.as_ptr().cast::<i8>(), std::mem::size_of_val(r)),
        };
        for offset in (0..bytes).step_by(64) {
            // SAFETY: a prefetch never faults, and `offset` stays inside `row`.
            unsafe { _mm_prefetch::<_MM_HINT_T0>(start.add(offset)) };
        }
    }
    #[cfg(not(target_arch = "x86_64"))]
    let _ = row;
}

#[cfg(test)]
pub(super) mod tests {
    use super::*;
    use rand::Rng;

    /// Every kernel set this processor can run.
    pub(in crate::engine) fn kernel_sets() -> Vec<Kernels> {
        let found = Kernels::detect();
        let mut sets = vec![Kernels {
            avx2: false,
            avx512: false,
        }];
        if found.avx2 {
            sets.push(Kernels {
                avx2: true,
                avx512: false,
            });
        }
        if found.avx512 {
            sets.push(found);
        }
        sets
    }

    #[test]
    fn row_kernels_agree_with_plain_loops() {
        use rand::SeedableRng;
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(41);
        fn check<T: Count>(kernels: Kernels, rng: &mut rand_chacha::ChaCha8Rng, top: u32) {
            for len in 0..45 {
                let start: Vec<u32> = (0..len).map(|_| rng.random_range(0..40u32)).collect();
                let row: Vec<T> = (0..len)
                    .map(|_| T::narrow(rng.random_range(0..=top)))
                    .collect();
                let sums: Vec<u32> = start.iter().zip(&row).map(|(a, v)| a + v.widen()).collect();
                let mut acc = start.clone();
                kernels.add_typed(&mut acc, &row);
                assert_eq!(acc, sums);
                for (lo, hi) in [(0, 0), (3, 20), (20, 20), (0, u32::MAX), (40, top + 40)] {
                    let mut acc = start.clone();
                    let mut out = Vec::new();
                    kernels.add_outside_typed(&mut acc, &row, lo, hi, &mut out);
                    assert_eq!(acc, sums);
                    let expected: Vec<u32> = (0..len as u32)
                        .filter(|&i| sums[i as usize] < lo || sums[i as usize] > hi)
                        .collect();
                    assert_eq!(out, expected, "{len} {lo} {hi}");
                }
            }
        }
        for kernels in kernel_sets() {
            check::<u8>(kernels, &mut rng, 255);
            check::<u16>(kernels, &mut rng, 65_535);
            check::<u32>(kernels, &mut rng, 1 << 30);
        }
    }
}
