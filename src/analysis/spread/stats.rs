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
//!
//! **Memory.** The buckets of values within [`WINDOW_SIGMAS`] first-order standard deviations
//! of the nominal value (see [`Binning`]) are counted in a dense array fixed when the first
//! value of that sign arrives: 16-bit counts, with a second 32-bit array of carries allocated
//! only when some bucket passes 65 535. Buckets outside the window (tails beyond the
//! linearisation) go to a sparse map. So the memory of a run is set by the model, not by its
//! number of samples. The representation is invisible: two accumulators are equal when their
//! counts per bucket are.

use std::collections::BTreeMap;

/// Relative accuracy of the percentiles (see the module documentation).
pub const RELATIVE_ACCURACY: f64 = 5e-4;

/// Half-width of the dense bucket window, in first-order standard deviations.
pub const WINDOW_SIGMAS: f64 = 8.0;

/// Most buckets of one sign held densely (a window of ±8σ between the floor and 8σ needs
/// about 11 300).
const MAX_DENSE: i64 = 1 << 15;

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
    /// Bucket counts of positive and negative values (by magnitude).
    pub positive: Buckets,
    pub negative: Buckets,
}

/// ln γ with γ = (1 + α)/(1 − α).
fn ln_gamma() -> f64 {
    ((1.0 + RELATIVE_ACCURACY) / (1.0 - RELATIVE_ACCURACY)).ln()
}

/// The bucket of a magnitude m > 0: ⌈ln m / ln γ⌉.
fn key(m: f64) -> i64 {
    (m.ln() / ln_gamma()).ceil() as i64
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

/// How the values of one quantity are stored: its nominal value, fixed-point unit
/// ([`scale_for`]), zero floor ([`floor_for`]) and the dense bucket windows of each sign
/// (keys `lo..hi`), which cover nominal ± [`WINDOW_SIGMAS`]·σ_linear.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Binning {
    pub nominal: f64,
    pub scale: f64,
    pub floor: f64,
    positive: (i64, i64),
    negative: (i64, i64),
}

impl Binning {
    /// The binning of a quantity with this nominal value and first-order standard deviation.
    pub fn new(nominal: f64, std_linear: f64) -> Binning {
        let floor = floor_for(nominal, std_linear);
        let spread = if std_linear.is_finite() && std_linear > 0.0 {
            WINDOW_SIGMAS * std_linear
        } else {
            0.0
        };
        // The keys of magnitudes in [a, b] above the floor (empty when b is below it).
        let window = |a: f64, b: f64| -> (i64, i64) {
            if !(a.is_finite() && b.is_finite()) || b <= floor {
                return (0, 0);
            }
            let lo = key(a.max(floor));
            let hi = (key(b) + 1).min(lo + MAX_DENSE);
            (lo, hi)
        };
        Binning {
            nominal,
            scale: scale_for(nominal, std_linear),
            floor,
            positive: window(nominal - spread, nominal + spread),
            negative: window(-(nominal + spread), -(nominal - spread)),
        }
    }
}

/// Counts per bucket key of one sign: a dense window (see the module documentation) and a
/// sparse map for keys outside it. Equality compares the counts, not the layout.
#[derive(Clone, Debug, Default)]
pub struct Buckets {
    /// Key of `low[0]`.
    lo: i64,
    /// Low 16 bits of the dense counts.
    low: Vec<u16>,
    /// The counts' higher bits (count = low + 2¹⁶·high), allocated at the first carry.
    high: Vec<u32>,
    sparse: BTreeMap<i64, u64>,
}

impl PartialEq for Buckets {
    fn eq(&self, o: &Buckets) -> bool {
        self.counts() == o.counts()
    }
}

impl Buckets {
    /// Buckets holding these (key, count) pairs.
    pub fn from_counts(counts: impl IntoIterator<Item = (i64, u64)>) -> Buckets {
        let mut b = Buckets::default();
        for (k, c) in counts {
            b.bump(k, c);
        }
        b
    }

    fn is_empty(&self) -> bool {
        self.low.is_empty() && self.sparse.is_empty()
    }

    /// Add `c` to the count of key `k`.
    fn bump(&mut self, k: i64, c: u64) {
        let i = k.wrapping_sub(self.lo);
        if i >= 0 && (i as usize) < self.low.len() {
            let i = i as usize;
            let t = u64::from(self.low[i]) + c;
            self.low[i] = (t & 0xffff) as u16;
            let carry = t >> 16;
            if carry > 0 {
                if self.high.is_empty() {
                    self.high = vec![0; self.low.len()];
                }
                match u32::try_from(carry)
                    .ok()
                    .and_then(|carry| self.high[i].checked_add(carry))
                {
                    Some(h) => self.high[i] = h,
                    None => *self.sparse.entry(k).or_insert(0) += carry << 16,
                }
            }
        } else if c > 0 {
            *self.sparse.entry(k).or_insert(0) += c;
        }
    }

    /// Count one value of key `k`, setting up the dense `window` on the first value.
    fn add(&mut self, k: i64, window: (i64, i64)) {
        if self.low.is_empty() && window.1 > window.0 {
            self.lo = window.0;
            self.low = vec![0; (window.1 - window.0) as usize];
        }
        self.bump(k, 1);
    }

    /// The nonzero (key, count) pairs in increasing key order.
    pub fn counts(&self) -> Vec<(i64, u64)> {
        let dense = (self.low.iter().enumerate())
            .map(|(i, &l)| {
                let h = self.high.get(i).map_or(0, |&h| u64::from(h));
                (self.lo + i as i64, u64::from(l) + (h << 16))
            })
            .filter(|&(_, c)| c > 0);
        let mut out: Vec<(i64, u64)> = Vec::with_capacity(self.low.len() + self.sparse.len());
        let mut sparse = self.sparse.iter().map(|(&k, &c)| (k, c)).peekable();
        for (k, c) in dense {
            while let Some(&(sk, sc)) = sparse.peek() {
                if sk >= k {
                    break;
                }
                out.push((sk, sc));
                sparse.next();
            }
            let extra = match sparse.peek() {
                Some(&(sk, sc)) if sk == k => {
                    sparse.next();
                    sc
                }
                _ => 0,
            };
            out.push((k, c + extra));
        }
        out.extend(sparse);
        out.retain(|&(_, c)| c > 0);
        out
    }

    /// Add the counts of `o`; an empty receiver takes `o` as it is.
    fn absorb(&mut self, o: Buckets) {
        if self.is_empty() {
            *self = o;
        } else {
            for (k, c) in o.counts() {
                self.bump(k, c);
            }
        }
    }
}

impl Accumulator {
    /// Add one value `x` of a quantity binned by `b`; values with |x| at or below the floor
    /// (and non-finite ones) share the bucket of 0 (so a quantity that crosses zero keeps a
    /// bounded number of buckets).
    pub fn add(&mut self, x: f64, b: &Binning) {
        self.count += 1;
        // `as` saturates: a deviation beyond 2²³ scales is clipped, never wrapped.
        let q = ((x - b.nominal) / b.scale * 2f64.powi(FRACTION_BITS)).round() as i64;
        self.sum += i128::from(q);
        let q = i128::from(q).unsigned_abs();
        self.sum_sq.add(q * q);
        if x.abs() <= b.floor || !x.is_finite() {
            self.zeros += 1;
        } else if x > 0.0 {
            self.positive.add(key(x), b.positive);
        } else {
            self.negative.add(key(-x), b.negative);
        }
    }

    /// Combine with another accumulator of the same quantity.
    pub fn merge(&mut self, o: &Accumulator) {
        self.absorb(o.clone());
    }

    /// Combine with another accumulator of the same quantity, taking it over.
    pub fn absorb(&mut self, o: Accumulator) {
        self.count += o.count;
        self.sum += o.sum;
        self.sum_sq.merge(&o.sum_sq);
        self.zeros += o.zeros;
        self.positive.absorb(o.positive);
        self.negative.absorb(o.negative);
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

    /// The histogram in increasing value order: (bucket value, count), the bucket of 0 as 0.
    /// Each bucket value is within a relative [`RELATIVE_ACCURACY`] of the values it counts.
    pub fn histogram(&self) -> Vec<(f64, u64)> {
        let gamma = ln_gamma().exp();
        let value = |k: i64| 2.0 * gamma.powf(k as f64) / (gamma + 1.0);
        let mut out: Vec<(f64, u64)> = (self.negative.counts().into_iter().rev())
            .map(|(k, c)| (-value(k), c))
            .collect();
        if self.zeros > 0 {
            out.push((0.0, self.zeros));
        }
        out.extend(
            self.positive
                .counts()
                .into_iter()
                .map(|(k, c)| (value(k), c)),
        );
        out
    }

    /// The buckets in increasing value order as (low edge, high edge, count): bucket k of
    /// positive values holds (γ^(k−1), γ^k], mirrored for negative ones; the bucket of 0 is
    /// given as (0, 0, count).
    pub fn bucket_ranges(&self) -> Vec<(f64, f64, u64)> {
        let gamma = ln_gamma().exp();
        let edge = |k: i64| gamma.powf(k as f64);
        let mut out: Vec<(f64, f64, u64)> = (self.negative.counts().into_iter().rev())
            .map(|(k, c)| (-edge(k), -edge(k - 1), c))
            .collect();
        if self.zeros > 0 {
            out.push((0.0, 0.0, self.zeros));
        }
        out.extend((self.positive.counts().into_iter()).map(|(k, c)| (edge(k - 1), edge(k), c)));
        out
    }

    /// The nearest-rank `p`-quantile (0 < p < 1): the value of rank ⌈p·n⌉, within a relative
    /// error [`RELATIVE_ACCURACY`].
    pub fn quantile(&self, p: f64) -> f64 {
        if self.count == 0 {
            return f64::NAN;
        }
        let rank = ((p * self.count as f64).ceil() as u64).clamp(1, self.count);
        let mut seen = 0;
        for (v, c) in self.histogram() {
            seen += c;
            if seen >= rank {
                return v;
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
        let b = Binning::new(1.0, 0.03);
        xs.iter().for_each(|&x| one.add(x, &b));
        let mut a = Accumulator::default();
        let mut b = Accumulator::default();
        xs[..300]
            .iter()
            .rev()
            .for_each(|&x| a.add(x, &Binning::new(1.0, 0.03)));
        // A narrower dense window: the same counts, partly in the sparse map.
        xs[300..]
            .iter()
            .for_each(|&x| b.add(x, &Binning::new(1.0, 0.001)));
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
        let b = Binning::new(0.0, 1.0);
        assert_eq!(b.floor, 1e-4);
        for x in [-2.0, -1.0, 0.0, 1.0, 2.0] {
            a.add(x, &b);
        }
        assert!((a.quantile(0.2) + 2.0).abs() < 2e-3);
        assert_eq!(a.quantile(0.6), 0.0);
        assert!((a.quantile(1.0) - 2.0).abs() < 2e-3);
    }

    /// The same values give the same counts whatever the window, the order and the carries
    /// past 16 bits; the sparse and dense parts interleave in key order.
    #[test]
    fn layout_is_invisible() {
        // 72 000 values of exactly 1, the rest spread, and a few far out.
        let xs: Vec<f64> = (0..80_000)
            .map(|i| match i % 10 {
                0 if i % 5000 == 0 => 4.0,
                0 => 1.0 + ((i * 7919) % 97) as f64 * 1e-3 - 0.05,
                _ => 1.0,
            })
            .collect();
        let mut wide = Accumulator::default();
        let mut narrow = Accumulator::default();
        let mut split = Accumulator::default();
        let mut rest = Accumulator::default();
        for (i, &x) in xs.iter().enumerate() {
            wide.add(x, &Binning::new(1.0, 1.0));
            narrow.add(x, &Binning::new(1.0, 1e-4));
            if i % 3 == 0 {
                split.add(x, &Binning::new(1.0, 0.01));
            } else {
                rest.add(x, &Binning::new(1.0, 0.02));
            }
        }
        // Some bucket has passed 65 535 (carries), and the tails sit outside the windows.
        assert!(!wide.positive.high.is_empty());
        assert!(!narrow.positive.sparse.is_empty());
        split.absorb(rest);
        assert_eq!(wide, narrow);
        assert_eq!(wide, split);
        let counts = wide.positive.counts();
        assert!(counts.windows(2).all(|w| w[0].0 < w[1].0));
        assert_eq!(counts.iter().map(|c| c.1).sum::<u64>(), xs.len() as u64);
        let back = Buckets::from_counts(counts.clone());
        assert_eq!(back.counts(), counts);
    }
}
