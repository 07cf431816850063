//! Round tick values for scales: steps of 1, 2 or 5 times a power of ten (common practice
//! for axis labelling), on linear and logarithmic scales.

/// The 1-2-5 step that puts at most `max_ticks` ticks in `[lo, hi]` (at least 1 tick wanted).
pub fn step_125(lo: f64, hi: f64, max_ticks: usize) -> f64 {
    let span = (hi - lo).abs();
    if !span.is_finite() || span <= 0.0 {
        return 1.0;
    }
    let wanted = span / max_ticks.max(1) as f64;
    let mut p = 10f64.powf(wanted.log10().floor());
    loop {
        for m in [1.0, 2.0, 5.0] {
            let step = m * p;
            if step >= wanted * (1.0 - 1e-9) {
                return step;
            }
        }
        p *= 10.0;
    }
}

/// Ticks at multiples of a 1-2-5 step inside `[lo, hi]`, at most `max_ticks` of them (and at
/// least two when the interval is not empty). Values are snapped to the step so that 0.30000000000000004
/// prints as 0.3.
pub fn linear(lo: f64, hi: f64, max_ticks: usize) -> Vec<f64> {
    let (lo, hi) = if lo <= hi { (lo, hi) } else { (hi, lo) };
    if !(lo.is_finite() && hi.is_finite()) {
        return Vec::new();
    }
    if hi <= lo {
        return vec![lo];
    }
    let at = |step: f64| -> Vec<f64> {
        let first = (lo / step - 1e-9).ceil() as i64;
        let last = (hi / step + 1e-9).floor() as i64;
        (first..=last)
            .map(|k| snap(k as f64 * step, step))
            .collect()
    };
    let mut step = step_125(lo, hi, max_ticks);
    let mut out = at(step);
    while out.len() > max_ticks.max(2) {
        step = step_125(0.0, step * 1.01, 1);
        out = at(step);
    }
    if out.len() < 2 {
        // A narrow interval between two ticks: the smaller step shows its ends.
        let finer = step_125(lo, hi, 2 * max_ticks.max(2));
        if finer < step {
            out = at(finer);
        }
    }
    out
}

/// Ticks for a logarithmic scale between `lo` and `hi` (both > 0): 1, 2 and 5 × 10^k inside
/// the range; only powers of ten when that gives more than `max_ticks`.
pub fn log_125(lo: f64, hi: f64, max_ticks: usize) -> Vec<f64> {
    let (lo, hi) = if lo <= hi { (lo, hi) } else { (hi, lo) };
    if !(lo > 0.0 && hi.is_finite()) {
        return Vec::new();
    }
    let k0 = lo.log10().floor() as i32 - 1;
    let k1 = hi.log10().ceil() as i32 + 1;
    let inside = |v: &f64| *v >= lo * (1.0 - 1e-9) && *v <= hi * (1.0 + 1e-9);
    let dense: Vec<f64> = (k0..=k1)
        .flat_map(|k| [1.0, 2.0, 5.0].map(|m| decade(m, k)))
        .filter(inside)
        .collect();
    if dense.len() <= max_ticks {
        return dense;
    }
    let decades: Vec<f64> = (k0..=k1).map(|k| decade(1.0, k)).filter(inside).collect();
    if decades.len() <= max_ticks {
        return decades;
    }
    let every = decades.len().div_ceil(max_ticks.max(1));
    decades.into_iter().step_by(every).collect()
}

/// m × 10^k, correctly rounded (a division for negative k, so 0.1 is the double nearest 0.1).
fn decade(m: f64, k: i32) -> f64 {
    if k >= 0 {
        m * 10f64.powi(k)
    } else {
        m / 10f64.powi(-k)
    }
}

/// Round `v` to the nearest multiple of a tenth of `step` in decimal, removing binary noise.
fn snap(v: f64, step: f64) -> f64 {
    let digits = (-(step.log10().floor()) as i32 + 1).clamp(0, 15);
    let scale = 10f64.powi(digits);
    (v * scale).round() / scale
}

#[cfg(test)]
mod tests {
    use super::*;

    fn is_125(step: f64) -> bool {
        let m = step / 10f64.powf(step.log10().floor());
        [1.0, 2.0, 5.0, 10.0].iter().any(|x| (m - x).abs() < 1e-9)
    }

    #[test]
    fn the_issue_range_gets_round_ticks() {
        // The reagent mixer's pressure bar spanned 6.3 … 108 mbar and was ticked at 6.28,
        // 31.7, 57.1: round steps instead.
        let t = linear(6.3, 108.0, 6);
        assert_eq!(t, vec![20.0, 40.0, 60.0, 80.0, 100.0]);
    }

    #[test]
    fn steps_are_1_2_5_and_ticks_stay_inside() {
        for (lo, hi) in [
            (0.0, 1.0),
            (-3.7, 12.2),
            (1e-7, 3.3e-6),
            (0.999, 1.001),
            (-250.0, -10.0),
            (0.0, 7.0),
        ] {
            let t = linear(lo, hi, 6);
            assert!(t.len() >= 2 && t.len() <= 6, "{lo}..{hi}: {t:?}");
            assert!(t.iter().all(|v| *v >= lo - 1e-12 && *v <= hi + 1e-12));
            let step = t[1] - t[0];
            assert!(is_125(step), "{lo}..{hi}: step {step}");
            for w in t.windows(2) {
                assert!(((w[1] - w[0]) - step).abs() <= 1e-9 * step.abs().max(1e-300));
            }
        }
    }

    #[test]
    fn snapping_removes_binary_noise() {
        let t = linear(0.0, 1.0, 11);
        assert_eq!(t[3], 0.3);
        assert_eq!(format!("{}", t[7]), "0.7");
    }

    #[test]
    fn log_ticks_are_1_2_5_per_decade() {
        assert_eq!(log_125(0.3, 30.0, 9), vec![0.5, 1.0, 2.0, 5.0, 10.0, 20.0]);
        // Too many: decades only.
        assert_eq!(
            log_125(1e-3, 1e3, 9),
            vec![1e-3, 1e-2, 0.1, 1.0, 10.0, 100.0, 1000.0]
        );
        assert!(log_125(0.0, 1.0, 5).is_empty());
    }

    #[test]
    fn degenerate_ranges_do_not_loop() {
        assert_eq!(linear(5.0, 5.0, 5), vec![5.0]);
        assert!(linear(f64::NAN, 1.0, 5).is_empty());
        assert_eq!(step_125(0.0, 0.0, 5), 1.0);
    }
}
