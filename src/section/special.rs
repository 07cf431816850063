//! Special functions the closed forms need: the complete elliptic integral of the second kind
//! (the perimeter of an ellipse).

use std::f64::consts::PI;

/// Complete elliptic integral of the second kind E(k) by the arithmetic–geometric mean
/// (Abramowitz & Stegun 17.6): E = K·(1 − Σ 2^(n−1) c_n²), K = π/(2·AGM(1, √(1−k²))).
pub fn elliptic_e(k: f64) -> f64 {
    if k >= 1.0 {
        return 1.0; // the degenerate (flat) limit
    }
    let (mut a, mut b) = (1.0f64, (1.0 - k * k).max(0.0).sqrt());
    let mut c = k;
    let mut sum = 0.5 * c * c;
    let mut pow = 0.5;
    for _ in 0..64 {
        if c.abs() < 1e-17 {
            break;
        }
        let an = (a + b) / 2.0;
        let bn = (a * b).sqrt();
        c = (a - b) / 2.0;
        pow *= 2.0;
        sum += pow * c * c;
        a = an;
        b = bn;
    }
    PI / (2.0 * a) * (1.0 - sum)
}
