//! The working fluid: constant properties, or a published model evaluated at the chip's
//! temperature.
//!
//! The network model needs only the dynamic viscosity μ (it scales every hydraulic
//! resistance) and the density ρ (for the Reynolds number). Both are constants over the chip:
//! the model is isothermal and Newtonian. A cell suspension is treated as a Newtonian fluid of
//! effective viscosity — adequate for pressure–flow design, not for cell-scale flow.

use crate::units::{Density, Pressure, Temperature, Viscosity};

/// A Newtonian fluid with constant properties, plus the cells it may carry.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Fluid {
    /// Dynamic viscosity μ.
    pub viscosity: Viscosity,
    /// Mass density ρ.
    pub density: Density,
    /// Wall shear stress the carried cells tolerate, if any (a design limit, set by the lab).
    pub shear_limit: Option<Pressure>,
}

impl Fluid {
    /// Water at 20 °C: μ = 1.0016 mPa·s (IAPWS R12-08), ρ = 998.2 kg/m³ (IAPWS-95).
    pub const WATER_20C: Fluid = Fluid {
        viscosity: Viscosity::from_si(1.0016e-3),
        density: Density::from_si(998.2),
        shear_limit: None,
    };

    /// A fluid of constant properties, no cells.
    pub fn constant(viscosity: Viscosity, density: Density) -> Fluid {
        Fluid {
            viscosity,
            density,
            shear_limit: None,
        }
    }

    /// Check the properties are physical; returns the offending field name and reason.
    pub fn check(&self) -> Result<(), (&'static str, String)> {
        let mu = self.viscosity.si();
        if !(mu.is_finite() && mu > 0.0) {
            return Err(("viscosity", format!("must be positive, got {mu} Pa*s")));
        }
        let rho = self.density.si();
        if !(rho.is_finite() && rho > 0.0) {
            return Err(("density", format!("must be positive, got {rho} kg/m^3")));
        }
        if let Some(limit) = self.shear_limit {
            if !(limit.si().is_finite() && limit.si() > 0.0) {
                return Err((
                    "shear_limit",
                    format!("must be a positive stress, got {} Pa", limit.si()),
                ));
            }
        }
        Ok(())
    }
}

/// A model's result outside its published range: the value is still computed, but the
/// designer is told.
#[derive(Clone, Debug, PartialEq)]
pub struct RangeWarning {
    /// The model used outside its range.
    pub model: FluidModelName,
    /// The parameter that is out of range.
    pub parameter: RangeParameter,
    /// Its value (SI: kelvin for a temperature, a plain fraction for a volume fraction).
    pub value: f64,
    /// The range within which the model is published or trusted (SI).
    pub valid: [f64; 2],
}

/// The fluid models that can report a [`RangeWarning`].
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum FluidModelName {
    /// IAPWS R12-08 water viscosity.
    Water,
    /// Cheng (2008) glycerol–water viscosity.
    GlycerolWater,
    /// Einstein's dilute-suspension law.
    Einstein,
    /// Krieger–Dougherty suspension viscosity.
    KriegerDougherty,
}

/// Which parameter of a fluid model is out of range.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum RangeParameter {
    Temperature,
    VolumeFraction,
}

fn celsius(t: Temperature) -> f64 {
    t.si() - 273.15
}

/// Density of liquid water at 0.1 MPa, Kell (1975), J. Chem. Eng. Data 20, 97, eq. for
/// 0–150 °C (coefficients from memory; checked in tests against IAPWS-95 values):
///
///   ρ = (999.83952 + 16.945176 t − 7.9870401e-3 t² − 46.170461e-6 t³ + 105.56302e-9 t⁴
///        − 280.54253e-12 t⁵) / (1 + 16.879850e-3 t),   t in °C, ρ in kg/m³.
pub fn water_density(t: Temperature) -> Density {
    let t = celsius(t);
    let num = 999.839_52 + 16.945_176 * t - 7.987_040_1e-3 * t.powi(2) - 46.170_461e-6 * t.powi(3)
        + 105.563_02e-9 * t.powi(4)
        - 280.542_53e-12 * t.powi(5);
    Density::from_si(num / (1.0 + 16.879_850e-3 * t))
}

/// Viscosity of liquid water, IAPWS R12-08 (Huber et al. 2009, J. Phys. Chem. Ref. Data 38,
/// 101): μ = μ₀(T̄)·μ₁(T̄, ρ̄) with the critical enhancement μ₂ = 1 (it matters only near the
/// critical point). T̄ = T/647.096 K, ρ̄ = ρ/322 kg/m³, μ in µPa·s before scaling. The density
/// comes from [`water_density`] (Kell 1975) at 0.1 MPa.
///
/// Valid for liquid water at atmospheric pressure, 0–100 °C; IAPWS states an uncertainty of
/// 1 % or better there. Outside 0–100 °C a [`RangeWarning`] is returned with the value.
pub fn water_viscosity(t: Temperature) -> (Viscosity, Option<RangeWarning>) {
    const H0: [f64; 4] = [1.67752, 2.20462, 0.636_656_4, -0.241_605];
    // H[i][j], i = 0..5 (temperature), j = 0..6 (density); IAPWS R12-08 Table 2.
    const H: [[f64; 7]; 6] = [
        [
            5.20094e-1,
            2.22531e-1,
            -2.81378e-1,
            1.61913e-1,
            -3.25372e-2,
            0.0,
            0.0,
        ],
        [
            8.50895e-2,
            9.99115e-1,
            -9.06851e-1,
            2.57399e-1,
            0.0,
            0.0,
            0.0,
        ],
        [-1.08374, 1.88797, -7.72479e-1, 0.0, 0.0, 0.0, 0.0],
        [
            -2.89555e-1,
            1.26613,
            -4.89837e-1,
            0.0,
            6.98452e-2,
            0.0,
            -4.35673e-3,
        ],
        [0.0, 0.0, -2.57040e-1, 0.0, 0.0, 8.72102e-3, 0.0],
        [0.0, 1.20573e-1, 0.0, 0.0, 0.0, 0.0, -5.93264e-4],
    ];
    let tb = t.si() / 647.096;
    let rb = water_density(t).si() / 322.0;
    let mu0 = 100.0 * tb.sqrt()
        / H0.iter()
            .enumerate()
            .map(|(i, h)| h / tb.powi(i as i32))
            .sum::<f64>();
    let mut s = 0.0;
    for (i, row) in H.iter().enumerate() {
        for (j, h) in row.iter().enumerate() {
            s += h * (1.0 / tb - 1.0).powi(i as i32) * (rb - 1.0).powi(j as i32);
        }
    }
    let mu1 = (rb * s).exp();
    let tc = celsius(t);
    let warning = (!(0.0..=100.0).contains(&tc)).then_some(RangeWarning {
        model: FluidModelName::Water,
        parameter: RangeParameter::Temperature,
        value: t.si(),
        valid: [273.15, 373.15],
    });
    (Viscosity::from_si(mu0 * mu1 * 1e-6), warning)
}

/// Viscosity of glycerol–water mixtures, Cheng (2008), Ind. Eng. Chem. Res. 47, 3285:
///
///   μ = μ_w^a · μ_g^(1−a),  a = 1 − C + a_c·b·C(1−C)/(a_c·C + b(1−C)),
///   a_c = 0.705 − 0.0017 T,  b = (4.9 + 0.036 T)·a_c^2.5,
///   μ_w = 1.790 exp[(−1230 − T)T/(36100 + 360T)],  μ_g = 12100 exp[(−1233 + T)T/(9900 + 70T)]
///
/// (μ in mPa·s, T in °C, C the glycerol mass fraction). Cheng states it holds 0–100 °C over
/// the full fraction range, within about 2 % of the data it fits.
pub fn glycerol_water_viscosity(
    mass_fraction: f64,
    t: Temperature,
) -> (Viscosity, Option<RangeWarning>) {
    let tc = celsius(t);
    let c = mass_fraction;
    let mu_w = 1.790 * ((-1230.0 - tc) * tc / (36100.0 + 360.0 * tc)).exp();
    let mu_g = 12100.0 * ((-1233.0 + tc) * tc / (9900.0 + 70.0 * tc)).exp();
    let ac = 0.705 - 0.0017 * tc;
    let b = (4.9 + 0.036 * tc) * ac.powf(2.5);
    let a = 1.0 - c + ac * b * c * (1.0 - c) / (ac * c + b * (1.0 - c));
    let mu = mu_w.powf(a) * mu_g.powf(1.0 - a);
    let warning = (!(0.0..=100.0).contains(&tc)).then_some(RangeWarning {
        model: FluidModelName::GlycerolWater,
        parameter: RangeParameter::Temperature,
        value: t.si(),
        valid: [273.15, 373.15],
    });
    (Viscosity::from_si(mu * 1e-3), warning)
}

/// Density of glycerol–water mixtures assuming ideal mixing of volumes,
/// 1/ρ = C/ρ_g + (1 − C)/ρ_w, with ρ_g = 1273.3 − 0.6121 T (kg/m³, T in °C; the fit used
/// with Cheng's correlation, from memory) and ρ_w from [`water_density`]. Real mixtures
/// contract by up to about 1 %; density only enters the Reynolds number here.
pub fn glycerol_water_density(mass_fraction: f64, t: Temperature) -> Density {
    let rho_g = 1273.3 - 0.6121 * celsius(t);
    let rho_w = water_density(t).si();
    Density::from_si(1.0 / (mass_fraction / rho_g + (1.0 - mass_fraction) / rho_w))
}

/// How a suspension's viscosity grows with the volume fraction φ of cells.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum SuspensionModel {
    /// Einstein (1906): μ_r = 1 + 2.5φ. Dilute suspensions of rigid spheres, φ ≲ 0.05.
    Einstein,
    /// Krieger & Dougherty (1959), Trans. Soc. Rheol. 3, 137: μ_r = (1 − φ/φ_m)^(−[η]φ_m).
    /// Defaults [η] = 2.5 (rigid spheres), φ_m = 0.64 (random close packing).
    KriegerDougherty {
        intrinsic_viscosity: f64,
        max_packing: f64,
    },
}

impl SuspensionModel {
    /// Krieger–Dougherty with the rigid-sphere defaults.
    pub const KRIEGER_DOUGHERTY: SuspensionModel = SuspensionModel::KriegerDougherty {
        intrinsic_viscosity: 2.5,
        max_packing: 0.64,
    };

    /// Relative viscosity μ_suspension/μ_carrier at volume fraction φ, with a warning when φ
    /// is outside the model's range. `Err` when φ makes the model meaningless.
    pub fn relative_viscosity(self, phi: f64) -> Result<(f64, Option<RangeWarning>), String> {
        if !(phi.is_finite() && (0.0..1.0).contains(&phi)) {
            return Err(format!("the volume fraction must be in [0, 1), got {phi}"));
        }
        match self {
            SuspensionModel::Einstein => {
                let w = (phi > 0.05).then_some(RangeWarning {
                    model: FluidModelName::Einstein,
                    parameter: RangeParameter::VolumeFraction,
                    value: phi,
                    valid: [0.0, 0.05],
                });
                Ok((1.0 + 2.5 * phi, w))
            }
            SuspensionModel::KriegerDougherty {
                intrinsic_viscosity,
                max_packing,
            } => {
                if !(intrinsic_viscosity.is_finite() && intrinsic_viscosity > 0.0) {
                    return Err(format!(
                        "intrinsic_viscosity must be positive, got {intrinsic_viscosity}"
                    ));
                }
                if !(max_packing.is_finite() && max_packing > 0.0 && max_packing <= 1.0) {
                    return Err(format!("max_packing must be in (0, 1], got {max_packing}"));
                }
                if phi >= max_packing {
                    return Err(format!(
                        "volume fraction {phi} reaches max_packing {max_packing}: the suspension would not flow"
                    ));
                }
                // Close to maximum packing the viscosity diverges and the fit is unreliable
                // (common practice: beyond ~90 % of φ_m).
                let w = (phi > 0.9 * max_packing).then_some(RangeWarning {
                    model: FluidModelName::KriegerDougherty,
                    parameter: RangeParameter::VolumeFraction,
                    value: phi,
                    valid: [0.0, 0.9 * max_packing],
                });
                Ok((
                    (1.0 - phi / max_packing).powf(-intrinsic_viscosity * max_packing),
                    w,
                ))
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn degc(t: f64) -> Temperature {
        Temperature::from_si(t + 273.15)
    }

    #[test]
    fn water_viscosity_matches_iapws_table() {
        // IAPWS R12-08 at 0.1 MPa with IAPWS-95 densities (mPa·s). Our density is Kell's fit, so
        // agreement to 1e-4 relative is well inside the formulation's stated 1 % uncertainty.
        let table = [
            (0.0, 1.79176),
            (10.0, 1.30590),
            (20.0, 1.00160),
            (25.0, 0.89002),
            (30.0, 0.79722),
            (37.0, 0.69130),
            (40.0, 0.65273),
            (50.0, 0.54652),
            (60.0, 0.46603),
            (80.0, 0.35405),
        ];
        for (t, mu) in table {
            let (got, w) = water_viscosity(degc(t));
            assert!(w.is_none());
            let rel = (got.si() * 1e3 - mu).abs() / mu;
            assert!(rel < 1e-4, "{t} °C: {} vs {mu} mPa·s", got.si() * 1e3);
        }
        assert!(water_viscosity(degc(120.0)).1.is_some());
    }

    #[test]
    fn water_density_matches_iapws95() {
        // IAPWS-95 at 0.1 MPa (kg/m³): 4 °C 999.975, 20 °C 998.207, 37 °C 993.333,
        // 80 °C 971.79 (from memory of the IAPWS-95 tables).
        for (t, rho) in [
            (4.0, 999.975),
            (20.0, 998.207),
            (37.0, 993.333),
            (80.0, 971.79),
        ] {
            let got = water_density(degc(t)).si();
            assert!((got - rho).abs() < 0.02, "{t} °C: {got} vs {rho}");
        }
    }

    #[test]
    fn glycerol_water_matches_classic_table() {
        // Classic glycerol–water table at 20 °C (mPa·s), which Cheng (2008) fits within ~3 %:
        // 50 % → 6.00, 70 % → 22.5, 90 % → 219, 100 % → 1410.
        for (c, mu) in [(0.5, 6.00), (0.7, 22.5), (0.9, 219.0), (1.0, 1410.0)] {
            let got = glycerol_water_viscosity(c, degc(20.0)).0.si() * 1e3;
            assert!((got - mu).abs() / mu < 0.03, "{c}: {got} vs {mu}");
        }
        // Pure water end: Cheng's μ_w formula, 1.790 exp(...) at 20 °C ≈ 1.0016 (IAPWS) ± 1 %.
        let w = glycerol_water_viscosity(0.0, degc(20.0)).0.si() * 1e3;
        assert!((w - 1.0016).abs() / 1.0016 < 0.01, "{w}");
    }

    #[test]
    fn suspension_models() {
        // Einstein (1906): 1 + 2.5φ.
        let (r, w) = SuspensionModel::Einstein.relative_viscosity(0.02).unwrap();
        assert!((r - 1.05).abs() < 1e-15 && w.is_none());
        assert!(SuspensionModel::Einstein
            .relative_viscosity(0.2)
            .unwrap()
            .1
            .is_some());
        // Krieger & Dougherty (1959) with [η] = 2.5, φm = 0.64: φ = 0.1 → 1.3124,
        // 0.2 → 1.8212, 0.3 → 2.7512 (computed from the formula).
        for (phi, mu_r) in [(0.1, 1.3124), (0.2, 1.8212), (0.3, 2.7512)] {
            let (r, _) = SuspensionModel::KRIEGER_DOUGHERTY
                .relative_viscosity(phi)
                .unwrap();
            assert!((r - mu_r).abs() < 5e-4, "{phi}: {r}");
        }
        // Dilute limit: Krieger–Dougherty tends to Einstein (slope [η] = 2.5 at φ → 0).
        let (r, _) = SuspensionModel::KRIEGER_DOUGHERTY
            .relative_viscosity(1e-6)
            .unwrap();
        assert!(((r - 1.0) / 1e-6 - 2.5).abs() < 1e-5);
        assert!(SuspensionModel::KRIEGER_DOUGHERTY
            .relative_viscosity(0.64)
            .is_err());
        assert!(SuspensionModel::KRIEGER_DOUGHERTY
            .relative_viscosity(0.6)
            .unwrap()
            .1
            .is_some());
    }
}
