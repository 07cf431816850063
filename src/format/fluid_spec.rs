//! `fluid:` in the chip file: constant properties or a named model, optionally carrying cells.

use super::{at, Misplaced, Q};
use crate::fluid::{
    glycerol_water_density, glycerol_water_viscosity, water_density, water_viscosity, Fluid,
    RangeWarning, SuspensionModel,
};
use crate::units::{Density, Pressure, Temperature, Viscosity};
use serde::Deserialize;

/// Which fluid model computes the properties.
#[derive(Debug, Clone, Copy, Default, Deserialize, PartialEq, Eq)]
#[serde(rename_all = "kebab-case")]
pub(crate) enum FluidModel {
    /// `viscosity` and `density` given directly.
    #[default]
    Constant,
    /// Liquid water at `temperature` (IAPWS R12-08 viscosity, Kell 1975 density).
    Water,
    /// Glycerol–water at `glycerol_mass_fraction` and `temperature` (Cheng 2008).
    GlycerolWater,
}

/// `fluid:`.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(crate) struct FluidSpec {
    #[serde(default)]
    pub model: FluidModel,
    #[serde(default)]
    pub viscosity: Option<Q<Viscosity>>,
    #[serde(default)]
    pub density: Option<Q<Density>>,
    #[serde(default)]
    pub temperature: Option<Q<Temperature>>,
    #[serde(default)]
    pub glycerol_mass_fraction: Option<f64>,
    #[serde(default)]
    pub cells: Option<CellsSpec>,
    /// Tolerance of the viscosity (`{viscosity: 3 %}`), for `rillnet spread`.
    #[serde(default)]
    pub tolerance: Option<super::tolerance_spec::ToleranceBlock>,
}

/// How the cells raise the viscosity.
#[derive(Debug, Clone, Copy, Default, Deserialize, PartialEq, Eq)]
#[serde(rename_all = "kebab-case")]
pub(crate) enum SuspensionKind {
    Einstein,
    #[default]
    KriegerDougherty,
}

/// `fluid.cells:` — a suspension on top of the carrier fluid.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(crate) struct CellsSpec {
    /// Volume fraction φ of cells (0 ≤ φ < 1), a plain number.
    pub volume_fraction: f64,
    #[serde(default)]
    pub viscosity_model: SuspensionKind,
    #[serde(default)]
    pub intrinsic_viscosity: Option<f64>,
    #[serde(default)]
    pub max_packing: Option<f64>,
    /// Density of the cells (default: that of the carrier).
    #[serde(default)]
    pub density: Option<Q<Density>>,
    /// Wall shear stress the cells tolerate.
    #[serde(default)]
    pub shear_limit: Option<Q<Pressure>>,
}

impl FluidSpec {
    /// The domain fluid and any model-range warnings.
    pub(super) fn to_fluid(&self) -> Result<(Fluid, Vec<RangeWarning>), Misplaced> {
        let mut warnings = Vec::new();
        let mut note = |w: Option<RangeWarning>| {
            if let Some(w) = w {
                warnings.push(w);
            }
        };
        let need_temperature = |model: &str| {
            self.temperature.map(|t| t.0).ok_or_else(|| {
                at(
                    &["fluid", "model"],
                    format!("model {model} needs 'temperature', e.g. 'temperature: 37 degC'"),
                )
            })
        };
        let refuse = |field: &str, why: &str| -> Result<(), Misplaced> {
            Err(at(&["fluid", field], why.to_string()))
        };
        if self.glycerol_mass_fraction.is_some() && self.model != FluidModel::GlycerolWater {
            refuse(
                "glycerol_mass_fraction",
                "only 'model: glycerol-water' takes a glycerol fraction",
            )?;
        }
        let (mu, rho) = match self.model {
            FluidModel::Constant => {
                if self.temperature.is_some() {
                    refuse(
                        "temperature",
                        "a constant fluid takes no temperature; use 'model: water' or \
                         'model: glycerol-water' to compute properties at a temperature",
                    )?;
                }
                let mu = self.viscosity.ok_or_else(|| {
                    at(
                        &["fluid"],
                        "a constant fluid needs 'viscosity' (e.g. '1.0 mPa*s'), or name a model \
                         ('model: water' with a 'temperature')",
                    )
                })?;
                let rho = self.density.ok_or_else(|| {
                    at(
                        &["fluid"],
                        "a constant fluid needs 'density' (e.g. '998 kg/m^3')",
                    )
                })?;
                (mu.0, rho.0)
            }
            FluidModel::Water => {
                if self.viscosity.is_some() {
                    refuse(
                        "viscosity",
                        "model water computes the viscosity; remove 'viscosity' or the model",
                    )?;
                }
                let t = need_temperature("water")?;
                let (mu, w) = water_viscosity(t);
                note(w);
                (mu, self.density.map_or(water_density(t), |d| d.0))
            }
            FluidModel::GlycerolWater => {
                if self.viscosity.is_some() {
                    refuse("viscosity", "model glycerol-water computes the viscosity; remove 'viscosity' or the model")?;
                }
                let t = need_temperature("glycerol-water")?;
                let c = self.glycerol_mass_fraction.ok_or_else(|| {
                    at(
                        &["fluid", "model"],
                        "model glycerol-water needs 'glycerol_mass_fraction' (0 to 1)",
                    )
                })?;
                if !(c.is_finite() && (0.0..=1.0).contains(&c)) {
                    refuse(
                        "glycerol_mass_fraction",
                        &format!("must be between 0 and 1, got {c}"),
                    )?;
                }
                let (mu, w) = glycerol_water_viscosity(c, t);
                note(w);
                (
                    mu,
                    self.density.map_or(glycerol_water_density(c, t), |d| d.0),
                )
            }
        };
        let mut fluid = Fluid::constant(mu, rho);
        if let Some(cells) = &self.cells {
            let model = match cells.viscosity_model {
                SuspensionKind::Einstein => {
                    if cells.intrinsic_viscosity.is_some() || cells.max_packing.is_some() {
                        refuse(
                            "cells",
                            "intrinsic_viscosity and max_packing belong to viscosity_model: krieger-dougherty",
                        )?;
                    }
                    SuspensionModel::Einstein
                }
                SuspensionKind::KriegerDougherty => SuspensionModel::KriegerDougherty {
                    intrinsic_viscosity: cells.intrinsic_viscosity.unwrap_or(2.5),
                    max_packing: cells.max_packing.unwrap_or(0.64),
                },
            };
            let phi = cells.volume_fraction;
            let (relative, w) = model
                .relative_viscosity(phi)
                .map_err(|e| at(&["fluid", "cells", "volume_fraction"], e))?;
            note(w);
            let rho_cells = cells.density.map_or(rho.si(), |d| d.0.si());
            fluid = Fluid {
                viscosity: Viscosity::from_si(mu.si() * relative),
                density: Density::from_si(rho.si() * (1.0 - phi) + rho_cells * phi),
                shear_limit: cells.shear_limit.map(|q| q.0),
            };
        }
        fluid.check().map_err(|(field, problem)| match field {
            "shear_limit" => at(&["fluid", "cells", "shear_limit"], problem),
            _ => at(&["fluid", field], problem),
        })?;
        Ok((fluid, warnings))
    }
}
