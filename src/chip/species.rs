//! Solutes declared in the chip file: a name, a diffusion coefficient, the measure their
//! concentrations are given in, and the concentration of the fluid each port lets in.
//!
//! Data only: the well-mixed transport is solved in `analysis::solutes` on the flows, and
//! `report` writes the values in the measure declared here.

use crate::units::Diffusivity;

/// What a species' concentrations measure (all of one species' ports use the same measure).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Measure {
    /// Amount per volume, SI mol/m³ (given as M, mM, µM, nM, pM, mol/m^3).
    Molar,
    /// Mass per volume, SI kg/m³ (given as mg/mL, µg/mL, ng/mL, g/L, mg/L).
    Mass,
    /// A plain fraction 0..1 of the inlet stream (a dye, a tracer).
    Fraction,
}

/// One declared solute.
#[derive(Clone, Debug, PartialEq)]
pub struct Species {
    pub name: String,
    /// Diffusion coefficient in the carrier fluid [m²/s].
    pub diffusivity: Diffusivity,
    pub measure: Measure,
    /// Per node (indexed like `network.nodes`): the concentration of the fluid that enters
    /// the chip there, in SI of `measure`; 0 where the file gives none.
    pub inlet: Vec<f64>,
}

/// Which solute model a run uses: the chip file's `mixing:` (default well mixed), overridden
/// by `solve --mixing`.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub enum Mixing {
    /// Complete mixing at every junction.
    #[default]
    Well,
    /// Laminar co-flow: a lateral profile across each channel, ordered by the drawing.
    Lateral,
}
