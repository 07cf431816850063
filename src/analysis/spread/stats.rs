//! Streaming statistics that merge exactly: whatever the order in which samples are added or
//! partial results combined (threads, shards), the result is the same to the last bit.
//!
//! - Mean and standard deviation: each value is stored as its deviation from the nominal
//!   value in units of `scale`·2⁻⁴⁰ (fixed point, rounded to nearest; a quantum of about 1e-12
//!   of the nominal value), summed as integers: Σq in i128 and Σq² in 256 bits. Integer sums
//!   are associative, so partial sums merge exactly.
//! - Percentiles: a histogram of logarithmic buckets of relative width 2α (the bucket scheme
//!   of DDSketch, Masson, Rim & Lee 2019, Proc. VLDB 12), α = [`RELATIVE_ACCURACY`]: the
//!   nearest-rank percentile of the samples is returned within a relative error α, or within
//!   the floor (see [`floor_for`]) for values nearer to 0 than it. The count of buckets is at
//!   most 2·ln(max/floor)/2α + 1, whatever the number of samples; counts add, so histograms
//!   merge exactly.

use std::collections::BTreeMap;

/// Relative accuracy of the percentiles (see the module documentation).
pub const RELATIVE_ACCURACY: f64 = 5e-4;

/// Fixed-point fraction bits of the deviations.
const FRACTION_BITS: i32 = 40;

/// An unsigned 256-bit sum (hi, lo).
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct Wide {
    pub hi: u128,
    pub lo: u128,
}

impl Wide {
    fn add(&mut self, v: u128) {
        let (lo, carry) = self.lo.overflowing_add(v);
        self.lo = lo;
        self.hi = self.hi.wrapping_add(u128::from(carry));
    }

    fn merge(&mut self, o: &Wide) {
        self.add(o.lo);
        self.hi = self.hi.wrapping_add(o.hi);
    }

    fn to_f64(self) -> f64 {
        self.hi as f64 * 2f64.powi(128) + self.lo as f64
    }
}

/// Streaming, exactly mergeable statistics of one quantity.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Accumulator {
    /// Values added.
    pub count: u64,
    /// Σ q, q the fixed-point deviation from the nominal value.
    pub sum: i128,
    /// Σ q².
    pub sum_sq: Wide,
    /// Values equal to 0.
    pub zeros: u64,
    /// Bucket index → count, for positive and negative values.
    pub positive: BTreeMap<i64, u64>,
    pub negative: BTreeMap<i64, u64>,
}

/// ln γ with γ = (1 + α)/(1 − α).
fn ln_gamma() -> f64 {
    ((1.0 + RELATIVE_ACCURACY) / (1.0 - RELATIVE_ACCURACY)).ln()
}

/// The fixed-point unit of deviations of a quantity with this nominal value and linear
/// standard deviation: |nominal| if nonzero, else the standard deviation, else 1e-30.
pub fn scale_for(nominal: f64, std_linear: f64) -> f64 {
    if nominal != 0.0 && nominal.is_finite() {
        nominal.abs()
    } else if std_linear > 0.0 && std_linear.is_finite() {
        std_linear
    } else {
        1e-30
    }
}

/// The magnitude below which values share the bucket of 0: 1e-4 of max(|nominal|, σ_linear)
/// (or 1e-30 when both are 0).
pub fn floor_for(nominal: f64, std_linear: f64) -> f64 {
    let m = nominal.abs().max(std_linear);
    if m > 0.0 && m.is_finite() {
        1e-4 * m
    } else {
        1e-30
    }
}

impl Accumulator {
    /// Add one value `x` of a quantity with nominal value `nominal` and fixed-point unit
    /// `scale` (see [`scale_for`]); values with |x| below `floor` share the bucket of 0
    /// (so a quantity that crosses zero keeps a bounded number of buckets).
    pub fn add(&mut self, x: f64, nominal: f64, scale: f64, floor: f64) {
        self.count += 1;
        // `as` saturates: a deviation beyond 2²³ scales is clipped, never wrapped.
        let q = ((x - nominal) / scale * 2f64.powi(FRACTION_BITS)).round() as i64;
        self.sum += i128::from(q);
        let q = i128::from(q).unsigned_abs();
        self.sum_sq.add(q * q);
        if x.abs() <= floor || !x.is_finite() {
            self.zeros += 1;
        } else {
            let key = (x.abs().ln() / ln_gamma()).ceil() as i64;
            let map = if x > 0.0 {
                &mut self.positive
            } else {
                &mut self.negative
            };
            *map.entry(key).or_insert(0) += 1;
        }
    }

    /// Combine with another accumulator of the same quantity.
    pub fn merge(&mut self, o: &Accumulator) {
        self.count += o.count;
        self.sum += o.sum;
        self.sum_sq.merge(&o.sum_sq);
        self.zeros += o.zeros;
        for (k, v) in &o.positive {
            *self.positive.entry(*k).or_insert(0) += v;
        }
        for (k, v) in &o.negative {
            *self.negative.entry(*k).or_insert(0) += v;
        }
    }

    /// Sample mean.
    pub fn mean(&self, nominal: f64, scale: f64) -> f64 {
        if self.count == 0 {
            return f64::NAN;
        }
        nominal + self.sum as f64 / self.count as f64 * scale * 2f64.powi(-FRACTION_BITS)
    }

    /// Sample standard deviation (n − 1 in the denominator).
    pub fn std(&self, scale: f64) -> f64 {
        if self.count < 2 {
            return f64::NAN;
        }
        let n = self.count as f64;
        let s = self.sum as f64;
        let var = ((self.sum_sq.to_f64() - s * s / n) / (n - 1.0)).max(0.0);
        var.sqrt() * scale * 2f64.powi(-FRACTION_BITS)
    }

    /// The nearest-rank `p`-quantile (0 < p < 1): the value of rank ⌈p·n⌉, within a relative
    /// error [`RELATIVE_ACCURACY`].
    pub fn quantile(&self, p: f64) -> f64 {
        if self.count == 0 {
            return f64::NAN;
        }
        let rank = ((p * self.count as f64).ceil() as u64).clamp(1, self.count);
        let gamma = ln_gamma().exp();
        let value = |k: i64| 2.0 * gamma.powf(k as f64) / (gamma + 1.0);
        let mut seen = 0;
        for (k, c) in self.negative.iter().rev() {
            seen += c;
            if seen >= rank {
                return -value(*k);
            }
        }
        seen += self.zeros;
        if seen >= rank {
            return 0.0;
        }
        for (k, c) in &self.positive {
            seen += c;
            if seen >= rank {
                return value(*k);
            }
        }
        f64::NAN
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn merge_is_exact_and_order_free() {
        let xs: Vec<f64> = (0..1000)
            .map(|i| 1.0 + ((i * 7919) % 1000) as f64 * 1e-4 - 0.05)
            .collect();
        let mut one = Accumulator::default();
        xs.iter().for_each(|&x| one.add(x, 1.0, 1.0, 1e-4));
        let mut a = Accumulator::default();
        let mut b = Accumulator::default();
        xs[..300]
            .iter()
            .rev()
            .for_each(|&x| a.add(x, 1.0, 1.0, 1e-4));
        xs[300..].iter().for_each(|&x| b.add(x, 1.0, 1.0, 1e-4));
        b.merge(&a);
        assert_eq!(one, b);
        let mean: f64 = xs.iter().sum::<f64>() / 1000.0;
        assert!((one.mean(1.0, 1.0) - mean).abs() < 1e-11);
        let var = xs.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / 999.0;
        assert!((one.std(1.0) - var.sqrt()).abs() < 1e-9 * var.sqrt());
        // Nearest-rank quantiles of the sorted values, within the stated accuracy.
        let mut sorted = xs.clone();
        sorted.sort_by(f64::total_cmp);
        for p in [0.05, 0.5, 0.95] {
            let exact = sorted[(p * 1000.0_f64).ceil() as usize - 1];
            let q = one.quantile(p);
            assert!(
                (q - exact).abs() <= RELATIVE_ACCURACY * exact * 1.000001,
                "{p}"
            );
        }
    }

    #[test]
    fn negative_values_and_zeros_order() {
        let mut a = Accumulator::default();
        for x in [-2.0, -1.0, 0.0, 1.0, 2.0] {
            a.add(x, 0.0, 1.0, 1e-4);
        }
        assert!((a.quantile(0.2) + 2.0).abs() < 2e-3);
        assert_eq!(a.quantile(0.6), 0.0);
        assert!((a.quantile(1.0) - 2.0).abs() < 2e-3);
    }
}
