//! Percentiles of a stream of non-negative numbers, with a stated error bound, from a sketch that
//! merges exactly: [`QuantileSketch`].
//!
//! The sketch keeps, per bucket of values, a count and the largest value seen. A bucket is the
//! set of doubles that share their exponent and the top [`MANTISSA_BITS`] bits of their
//! mantissa, so a bucket's largest value is less than `1 + 2^-MANTISSA_BITS` times its smallest
//! (the bucket rule of logarithmic sketches such as HDR histograms and DDSketch, read straight
//! from the bits). Only buckets that hold a value are stored.
//!
//! **Error bound.** [`QuantileSketch::percentile`] returns, for `p` %, the largest value in the
//! bucket that holds the exact nearest-rank percentile `x` (the `⌈p·n/100⌉`-th smallest value).
//! So `x ≤ reported ≤ x · (1 + 2^-12)`: never below the exact value, and at most 0.0245 % above
//! it ([`RELATIVE_ERROR`]). The value 0 has its own bucket and is exact.
//!
//! **Order independence.** Merging adds counts (integers) and takes maxima; neither depends on
//! the order in which values or sketches come, so a sketch filled over chunks, threads or files
//! in any order is the same sketch, and its percentiles are the same to the bit. (A t-digest,
//! whose centroids depend on arrival order, does not have this property.)

use std::collections::HashMap;
use std::hash::{BuildHasherDefault, Hasher};

/// Mantissa bits that a bucket keeps (of the 52 of a double).
pub const MANTISSA_BITS: u32 = 12;

/// Largest relative amount by which a reported percentile exceeds the exact one: `2^-12`.
pub const RELATIVE_ERROR: f64 = 1.0 / (1u64 << MANTISSA_BITS) as f64;

const SHIFT: u32 = 52 - MANTISSA_BITS;

/// A bucket's count and the largest value it has seen.
#[derive(Debug, Clone, Copy, PartialEq)]
struct Bucket {
    count: u64,
    max: f64,
}

/// Hashes a bucket key with one multiplication (keys are not chosen by an adversary; the
/// standard hasher costs more than the rest of [`QuantileSketch::add`]).
#[derive(Default)]
struct KeyHasher(u64);

impl Hasher for KeyHasher {
    fn finish(&self) -> u64 {
        self.0
    }
    fn write(&mut self, bytes: &[u8]) {
        for b in bytes {
            self.0 = (self.0.rotate_left(8) ^ u64::from(*b)).wrapping_mul(0x9E37_79B9_7F4A_7C15);
        }
    }
    fn write_u64(&mut self, k: u64) {
        // Fibonacci hashing; the rotation brings the well-mixed high bits down to where the
        // table takes its index from.
        self.0 = k.wrapping_mul(0x9E37_79B9_7F4A_7C15).rotate_left(26);
    }
}

/// A mergeable percentile sketch of non-negative values (see the module docs for its bound).
/// Buckets are kept unordered and sorted only when a percentile is asked for.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct QuantileSketch {
    n: u64,
    buckets: HashMap<u64, Bucket, BuildHasherDefault<KeyHasher>>,
}

impl QuantileSketch {
    /// An empty sketch.
    pub fn new() -> Self {
        Self::default()
    }

    /// Values added.
    pub fn count(&self) -> u64 {
        self.n
    }

    /// Adds one value. Negative values, −0 and NaN count as 0 (the callers' values are ratios
    /// and shares, never negative); +∞ is kept in a bucket of its own.
    pub fn add(&mut self, value: f64) {
        let v = if value > 0.0 { value } else { 0.0 };
        // For non-negative doubles the bit pattern grows with the value, so the key does too.
        let key = v.to_bits() >> SHIFT;
        self.n += 1;
        self.buckets
            .entry(key)
            .and_modify(|b| {
                b.count += 1;
                b.max = b.max.max(v);
            })
            .or_insert(Bucket { count: 1, max: v });
    }

    /// Adds every value of `other` (same result whatever the order of merges).
    pub fn merge(&mut self, other: &QuantileSketch) {
        self.n += other.n;
        for (k, b) in &other.buckets {
            self.buckets
                .entry(*k)
                .and_modify(|a| {
                    a.count += b.count;
                    a.max = a.max.max(b.max);
                })
                .or_insert(*b);
        }
    }

    /// The `p`-th percentile (`p` in 0–100, %), nearest-rank definition: the smallest value
    /// such that at least `p` % of the values are at or below it. Reported as the largest value
    /// of its bucket: `exact ≤ reported ≤ exact · (1 + RELATIVE_ERROR)`. `None` when empty.
    pub fn percentile(&self, p: u32) -> Option<f64> {
        if self.n == 0 {
            return None;
        }
        let p = u128::from(p.min(100));
        // ⌈p·n / 100⌉ in integers, at least 1.
        let rank = ((p * u128::from(self.n)).div_ceil(100)).max(1) as u64;
        let mut keys: Vec<&u64> = self.buckets.keys().collect();
        keys.sort_unstable();
        let mut cum = 0;
        for k in &keys {
            let b = &self.buckets[*k];
            cum += b.count;
            if cum >= rank {
                return Some(b.max);
            }
        }
        // Not reached: the counts sum to n ≥ rank.
        keys.last().map(|k| self.buckets[*k].max)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::{Rng, SeedableRng};

    /// Nearest-rank percentile by sorting (the definition the sketch is checked against).
    fn exact(values: &[f64], p: u32) -> f64 {
        let mut v = values.to_vec();
        v.sort_by(f64::total_cmp);
        let rank = (p as usize * v.len()).div_ceil(100).max(1);
        v[rank - 1]
    }

    fn values(seed: u64, n: usize) -> Vec<f64> {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(seed);
        (0..n)
            .map(|i| match i % 5 {
                0 => 0.0,
                1 => rng.gen::<f64>(),        // shares in [0, 1)
                2 => rng.gen::<f64>() * 3.0,  // ratios
                3 => 1e-9 * rng.gen::<f64>(), // tiny shares
                _ => (rng.gen::<f64>() * 20.0 - 10.0).exp(), // many orders of magnitude
            })
            .collect()
    }

    #[test]
    fn percentiles_are_within_the_bound_of_the_sorted_values() {
        for (seed, n) in [(1, 1), (2, 2), (3, 19), (4, 100), (5, 12_345)] {
            let v = values(seed, n);
            let mut s = QuantileSketch::new();
            v.iter().for_each(|x| s.add(*x));
            assert_eq!(s.count(), n as u64);
            for p in [0, 1, 5, 25, 50, 75, 90, 95, 99, 100] {
                let x = exact(&v, p);
                let got = s.percentile(p).unwrap();
                assert!(got >= x, "n {n} p {p}: {got} < exact {x}");
                assert!(
                    got <= x * (1.0 + RELATIVE_ERROR),
                    "n {n} p {p}: {got} > exact {x} · (1 + 2^-12)"
                );
            }
        }
    }

    #[test]
    fn the_bound_is_reached_but_not_passed() {
        // Two values in one bucket: 1 and the largest double below 1 + 2^-12. The 50th
        // percentile is exactly 1, and the sketch reports the bucket's largest value.
        let top = f64::from_bits((1.0f64 + RELATIVE_ERROR).to_bits() - 1);
        let mut s = QuantileSketch::new();
        s.add(1.0);
        s.add(top);
        assert_eq!(s.percentile(50), Some(top));
        assert!(top / 1.0 - 1.0 < RELATIVE_ERROR);
        // 1 + 2^-12 starts the next bucket.
        s.add(1.0 + RELATIVE_ERROR);
        assert_eq!(s.percentile(100), Some(1.0 + RELATIVE_ERROR));
    }

    #[test]
    fn zero_negative_and_nan_are_zero_and_exact() {
        let mut s = QuantileSketch::new();
        for v in [0.0, -0.0, -3.0, f64::NAN, 2.0] {
            s.add(v);
        }
        assert_eq!(s.percentile(80), Some(0.0));
        assert_eq!(s.percentile(81), Some(2.0));
        assert_eq!(QuantileSketch::new().percentile(95), None);
    }

    #[test]
    fn merging_in_any_order_gives_the_same_sketch() {
        let v = values(7, 5000);
        let mut whole = QuantileSketch::new();
        v.iter().for_each(|x| whole.add(*x));
        // Chunks of different sizes, merged forwards, backwards and pairwise.
        for chunk in [1, 7, 333, 5000] {
            let parts: Vec<QuantileSketch> = v
                .chunks(chunk)
                .map(|c| {
                    let mut s = QuantileSketch::new();
                    c.iter().rev().for_each(|x| s.add(*x));
                    s
                })
                .collect();
            let mut fwd = QuantileSketch::new();
            parts.iter().for_each(|p| fwd.merge(p));
            let mut back = QuantileSketch::new();
            parts.iter().rev().for_each(|p| back.merge(p));
            let mut tree = parts.clone();
            while tree.len() > 1 {
                tree = tree
                    .chunks(2)
                    .map(|pair| {
                        let mut a = pair[0].clone();
                        if let Some(b) = pair.get(1) {
                            a.merge(b);
                        }
                        a
                    })
                    .collect();
            }
            assert_eq!(fwd, whole, "chunk {chunk}");
            assert_eq!(back, whole, "chunk {chunk}");
            assert_eq!(tree[0], whole, "chunk {chunk}");
        }
    }
}
