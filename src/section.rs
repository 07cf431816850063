//! Channel cross-sections and their fully developed laminar (Poiseuille) figures.
//!
//! In a straight channel far from its ends, the axial velocity u(y, z) of a Newtonian fluid
//! solves ∇²u = −G/μ over the cross-section with u = 0 on the wall, G the pressure drop per
//! length. The flow is linear in G/μ: Q = K·G/μ, where the *conductance factor* K [m⁴]
//! depends on the shape alone. Every figure here follows from K, the area A and the wetted
//! perimeter P:
//!
//! - resistance per length  R' = μ/K            [Pa·s/m⁴]
//! - hydraulic diameter     Dh = 4A/P
//! - Fanning f·Re           = A·Dh²/(2K)         (16 for a circle)
//! - mean wall shear / G    = A/P                (force balance, exact for any shape)
//!
//! This module knows nothing of networks or files.

use crate::units::Length;
use std::f64::consts::PI;

/// A cross-section shape with its dimensions (SI inside).
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Shape {
    /// Circular tube (Hagen–Poiseuille).
    Circle { diameter: Length },
    /// Rectangle of any aspect ratio (exact Fourier series).
    Rectangle { width: Length, height: Length },
}

/// Identity of a shape's geometry (kind and exact dimension bits), used to solve each
/// distinct section once per run.
#[derive(Clone, Debug, PartialEq, Eq, Hash)]
pub struct GeometryKey(Vec<u64>);

/// Why a shape's dimensions are not usable: the field and what is wrong.
#[derive(Clone, Debug, PartialEq, thiserror::Error)]
#[error("{field}: {problem}")]
pub struct ShapeError {
    pub field: &'static str,
    pub problem: String,
}

fn positive(field: &'static str, value: Length) -> Result<(), ShapeError> {
    let v = value.si();
    if v.is_finite() && v > 0.0 {
        Ok(())
    } else {
        Err(ShapeError {
            field,
            problem: format!("must be a positive finite length, got {v} m"),
        })
    }
}

impl Shape {
    /// Check that every dimension is positive and finite.
    pub fn check(&self) -> Result<(), ShapeError> {
        match *self {
            Shape::Circle { diameter } => positive("diameter", diameter),
            Shape::Rectangle { width, height } => {
                positive("width", width)?;
                positive("height", height)
            }
        }
    }

    /// A hashable identity of the geometry: equal keys mean the same figures.
    pub fn geometry_key(&self) -> GeometryKey {
        let bits = |l: Length| l.si().to_bits();
        match *self {
            Shape::Circle { diameter } => GeometryKey(vec![0, bits(diameter)]),
            Shape::Rectangle { width, height } => GeometryKey(vec![1, bits(width), bits(height)]),
        }
    }

    /// Short name of the shape kind, as written in chip files.
    pub fn kind(&self) -> &'static str {
        match self {
            Shape::Circle { .. } => "circle",
            Shape::Rectangle { .. } => "rectangle",
        }
    }

    /// Compute the laminar figures. The shape must have passed [`Shape::check`].
    ///
    /// ```
    /// use rillnet::section::Shape;
    /// use rillnet::units::Length;
    /// let tube = Shape::Circle { diameter: Length::from_si(100e-6) };
    /// let f = tube.figures();
    /// assert!((f.f_re() - 16.0).abs() < 1e-12); // Hagen–Poiseuille
    /// ```
    pub fn figures(&self) -> SectionFigures {
        match *self {
            Shape::Circle { diameter } => circle(diameter.si() / 2.0),
            Shape::Rectangle { width, height } => rectangle(width.si(), height.si()),
        }
    }
}

/// Laminar figures of one cross-section, all SI.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct SectionFigures {
    /// Area A [m²].
    pub area: f64,
    /// Wetted perimeter P [m].
    pub perimeter: f64,
    /// Conductance factor K [m⁴]: Q = K·G/μ.
    pub conductance_factor: f64,
    /// Maximum wall shear stress per unit pressure gradient, τ_max/G [m].
    pub max_wall_shear_per_gradient: f64,
}

impl SectionFigures {
    /// Hydraulic diameter Dh = 4A/P [m].
    pub fn hydraulic_diameter(&self) -> f64 {
        4.0 * self.area / self.perimeter
    }

    /// Hydraulic resistance per length R' = μ/K [Pa·s/m⁴] for viscosity μ [Pa·s].
    pub fn resistance_per_length(&self, viscosity: f64) -> f64 {
        viscosity / self.conductance_factor
    }

    /// Fanning friction factor times Reynolds number on Dh: f·Re = A·Dh²/(2K).
    pub fn f_re(&self) -> f64 {
        let dh = self.hydraulic_diameter();
        self.area * dh * dh / (2.0 * self.conductance_factor)
    }

    /// Mean wall shear per unit gradient, τ_mean/G = A/P [m] (force balance).
    pub fn mean_wall_shear_per_gradient(&self) -> f64 {
        self.area / self.perimeter
    }
}

/// Circle of radius a: K = πa⁴/8 (Hagen–Poiseuille), wall shear τ = G·a/2 everywhere.
fn circle(a: f64) -> SectionFigures {
    SectionFigures {
        area: PI * a * a,
        perimeter: 2.0 * PI * a,
        conductance_factor: PI * a.powi(4) / 8.0,
        max_wall_shear_per_gradient: a / 2.0,
    }
}

/// Σ_{n odd} 1/n⁵ = (1 − 2⁻⁵)·ζ(5), ζ(5) = 1.0369277551433699263 (Abramowitz & Stegun 23.2).
const ODD_INV_FIFTH_POWERS: f64 = 31.0 / 32.0 * 1.036_927_755_143_37;

/// Rectangle w × h with h ≤ w (the function sorts them). The exact series
/// (Bruus, Theoretical Microfluidics 2008, eq. 3.56; Shah & London 1978):
///
///   K = (w h³/12)·[1 − (192 h/(π⁵ w))·Σ_{n odd} tanh(nπw/2h)/n⁵].
///
/// Written as tanh = 1 − (1 − tanh), the sum becomes the closed value
/// Σ 1/n⁵ = (31/32)ζ(5) minus terms that fall like e^{−nπw/h}/n⁵, so it reaches machine
/// precision after a handful of terms for every aspect ratio (the plain series needs
/// thousands of terms for 1e-12).
///
/// The largest wall shear sits at the middle of the long walls. Differentiating the same
/// series at the wall gives τ_max = (4Gh/π²)·Σ_{n odd} [1 − sech(nπw/2h)]/n²; with
/// Σ_{n odd} 1/n² = π²/8 it becomes τ_max/G = h/2 − (4h/π²)·Σ_{n odd} sech(nπw/2h)/n²,
/// again exponentially convergent.
fn rectangle(width: f64, height: f64) -> SectionFigures {
    let (w, h) = if width >= height {
        (width, height)
    } else {
        (height, width)
    };
    let ratio = w / h; // ≥ 1
    let mut tail5 = 0.0; // Σ (1 − tanh x_n)/n⁵
    let mut sech2 = 0.0; // Σ sech(x_n)/n²
    let mut n = 1.0_f64;
    loop {
        let x = n * PI * ratio / 2.0;
        // 1 − tanh x = 2/(e^{2x} + 1); sech x = 2/(e^x + e^{−x}); both underflow to 0 safely.
        let one_minus_tanh = 2.0 / ((2.0 * x).exp() + 1.0);
        let sech = 2.0 / (x.exp() + (-x).exp());
        let t5 = one_minus_tanh / n.powi(5);
        let t2 = sech / (n * n);
        tail5 += t5;
        sech2 += t2;
        if (t5 <= 1e-18 * ODD_INV_FIFTH_POWERS && t2 <= 1e-18) || n > 1.0e4 {
            break;
        }
        n += 2.0;
    }
    let series = ODD_INV_FIFTH_POWERS - tail5;
    let k = w * h.powi(3) / 12.0 * (1.0 - 192.0 * h / (PI.powi(5) * w) * series);
    SectionFigures {
        area: w * h,
        perimeter: 2.0 * (w + h),
        conductance_factor: k,
        max_wall_shear_per_gradient: h / 2.0 - 4.0 * h / (PI * PI) * sech2,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    fn rect(w: f64, h: f64) -> SectionFigures {
        Shape::Rectangle {
            width: Length::from_si(w),
            height: Length::from_si(h),
        }
        .figures()
    }

    /// Plain summation of the series, many terms plus the integral tail estimate; an
    /// independent evaluation of the same closed form to check the rearranged one.
    fn brute_force_k(w: f64, h: f64) -> f64 {
        let mut s = 0.0;
        let mut n = 1.0_f64;
        let n_max = 400_001.0;
        while n <= n_max {
            s += (n * PI * w / (2.0 * h)).tanh() / n.powi(5);
            n += 2.0;
        }
        // Tail Σ_{n odd > N} 1/n⁵ ≈ ∫ dn/(2n⁵) from N+1 = 1/(8 (N+1)⁴).
        s += 1.0 / (8.0 * (n_max + 1.0).powi(4));
        w * h.powi(3) / 12.0 * (1.0 - 192.0 * h / (PI.powi(5) * w) * s)
    }

    #[test]
    fn circle_matches_hagen_poiseuille() {
        // Hagen–Poiseuille: R = 8μL/(πa⁴) (Bruus 2008, ch. 4); f·Re = 16.
        let a = 50e-6;
        let f = Shape::Circle {
            diameter: Length::from_si(2.0 * a),
        }
        .figures();
        let mu = 1.0016e-3;
        assert_relative_eq!(
            f.resistance_per_length(mu),
            8.0 * mu / (PI * a.powi(4)),
            max_relative = 1e-14
        );
        assert_relative_eq!(f.f_re(), 16.0, max_relative = 1e-14);
        assert_relative_eq!(f.hydraulic_diameter(), 2.0 * a, max_relative = 1e-15);
        // Wall shear of a circle is uniform: max = mean = G·a/2.
        assert_relative_eq!(
            f.max_wall_shear_per_gradient,
            f.mean_wall_shear_per_gradient(),
            max_relative = 1e-15
        );
    }

    #[test]
    fn rectangle_series_reaches_1e12() {
        for &(w, h) in &[
            (1.0, 1.0),
            (2.0, 1.0),
            (10.0, 1.0),
            (1.0, 0.3),
            (100.0, 1.0),
        ] {
            let f = rect(w, h);
            assert_relative_eq!(
                f.conductance_factor,
                brute_force_k(w.max(h), w.min(h)),
                max_relative = 1e-12
            );
        }
    }

    #[test]
    fn rectangle_f_re_matches_shah_london() {
        // Shah & London (1978), Laminar Flow Forced Convection in Ducts, rectangular ducts
        // table: f·Re for aspect ratios α = h/w, to the five decimals of the exact series.
        let table = [
            (1.0, 14.22708),
            (0.5, 15.54806),
            (1.0 / 3.0, 17.08967),
            (0.25, 18.23278),
            (0.2, 19.07050),
            (0.125, 20.58464),
            (0.1, 21.16888),
            (0.05, 22.47701),
        ];
        for (alpha, fre) in table {
            let f = rect(1.0, alpha);
            assert!(
                (f.f_re() - fre).abs() < 6e-6,
                "alpha {alpha}: {} vs {fre}",
                f.f_re()
            );
            // Orientation does not matter.
            assert_relative_eq!(rect(alpha, 1.0).f_re(), f.f_re(), max_relative = 1e-14);
        }
        // Parallel-plate limit α → 0: f·Re → 24 (Shah & London 1978).
        assert_relative_eq!(rect(1.0, 1e-5).f_re(), 24.0, max_relative = 1e-4);
    }

    #[test]
    fn rectangle_one_term_approximation_is_a_sanity_bound() {
        // Bruus (2008) one-term approximation R ≈ 12μL/[wh³(1 − 0.630 h/w)]: about 14% high at
        // h = w, about 0.2% at h = w/2, below 0.01% for h ≤ w/3 (compared against the series).
        for &(alpha, tol) in &[(1.0, 0.15), (0.5, 2.5e-3), (1.0 / 3.0, 1e-4), (0.1, 1e-4)] {
            let (w, h) = (1.0, alpha);
            let exact = rect(w, h).resistance_per_length(1.0);
            let approx = 12.0 / (w * h.powi(3) * (1.0 - 0.630 * h / w));
            assert!(
                ((approx - exact) / exact).abs() < tol,
                "alpha {alpha}: approx {approx} exact {exact}"
            );
        }
    }

    #[test]
    fn rectangle_worked_resistance() {
        // Water μ = 1.0016 mPa·s (IAPWS R12-08, 20 °C) in a 100 µm × 50 µm rectangle, L = 1 cm:
        // R = 1.40156e13 Pa·s/m³ computed from the series (Bruus 2008, eq. 3.56).
        let r = rect(100e-6, 50e-6).resistance_per_length(1.0016e-3) * 0.01;
        assert_relative_eq!(r, 1.40156e13, max_relative = 1e-5);
    }

    #[test]
    fn rectangle_max_wall_shear_ratio() {
        // τ_max/τ_mean at the middle of the long wall, from the series for the wall gradient
        // (derived in `rectangle`; values computed from that series).
        for (alpha, ratio) in [
            (1.0, 1.35062),
            (0.5, 1.39509),
            (0.25, 1.24621),
            (0.1, 1.10000),
        ] {
            let f = rect(1.0, alpha);
            let got = f.max_wall_shear_per_gradient / f.mean_wall_shear_per_gradient();
            assert!(
                (got - ratio).abs() < 1e-5,
                "alpha {alpha}: {got} vs {ratio}"
            );
        }
    }

    #[test]
    fn check_rejects_bad_dimensions() {
        for bad in [0.0, -1e-6, f64::NAN, f64::INFINITY] {
            let s = Shape::Rectangle {
                width: Length::from_si(1e-4),
                height: Length::from_si(bad),
            };
            assert_eq!(s.check().unwrap_err().field, "height");
        }
    }
}
