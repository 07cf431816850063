//! The working fluid.
//!
//! The network model needs only the dynamic viscosity μ (it scales every hydraulic
//! resistance) and the density ρ (for the Reynolds number). Both are constants over the chip:
//! the model is isothermal and Newtonian.

use crate::units::{Density, Viscosity};

/// A Newtonian fluid with constant properties.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Fluid {
    /// Dynamic viscosity μ.
    pub viscosity: Viscosity,
    /// Mass density ρ.
    pub density: Density,
}

impl Fluid {
    /// Water at 20 °C: μ = 1.0016 mPa·s (IAPWS R12-08), ρ = 998.2 kg/m³ (IAPWS-95).
    pub const WATER_20C: Fluid = Fluid {
        viscosity: Viscosity::from_si(1.0016e-3),
        density: Density::from_si(998.2),
    };

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
        Ok(())
    }
}
