//! [`SectionFigures`]: the laminar figures of one cross-section (area, wetted perimeter,
//! conductance factor, maximum wall shear, error estimate) and the figures derived from them.

use super::numeric::NumericSection;
use super::outline::Point;

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
    /// Relative error estimate of K (0 for closed forms).
    pub relative_error_estimate: f64,
    /// Relative error estimate of the maximum wall shear (0 for closed forms).
    pub shear_error_estimate: f64,
    /// Whether the numerical solution reached the requested tolerances (true for closed forms).
    pub converged: bool,
    /// True when the outline has re-entrant corners (interior angle above 180°): the pointwise
    /// wall shear is unbounded there, and `max_wall_shear_per_gradient` is the maximum away
    /// from them (see [`super::numeric::CORNER_EXCLUSION`]).
    pub max_wall_shear_singular: bool,
    /// Number of re-entrant corners.
    pub singular_corner_count: usize,
    /// The re-entrant corner with the largest interior angle [m] (all of them are listed in
    /// [`NumericSection::singular_corners`]).
    pub singular_corner: Option<Point>,
    /// How the figures were obtained.
    pub model: SectionModel,
}

/// How a section's figures were obtained.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum SectionModel {
    /// A closed form (exact).
    ClosedForm,
    /// The numerical (finite-element) solution.
    Numerical,
    /// The thin-film (lubrication) limit for an outline too thin to mesh (see
    /// [`super::thin`]).
    ThinFilm,
}

impl SectionFigures {
    /// The fields a closed form does not set: exact, converged, no singular corner.
    pub(super) const CLOSED_FORM: SectionFigures = SectionFigures {
        area: 0.0,
        perimeter: 0.0,
        conductance_factor: 0.0,
        max_wall_shear_per_gradient: 0.0,
        relative_error_estimate: 0.0,
        shear_error_estimate: 0.0,
        converged: true,
        max_wall_shear_singular: false,
        singular_corner_count: 0,
        singular_corner: None,
        model: SectionModel::ClosedForm,
    };
}

impl SectionFigures {
    /// Figures of a numerical solution.
    pub fn from_numeric(sol: &NumericSection) -> SectionFigures {
        SectionFigures {
            area: sol.area,
            perimeter: sol.perimeter,
            conductance_factor: sol.conductance_factor,
            max_wall_shear_per_gradient: sol.max_wall_shear_per_gradient,
            relative_error_estimate: sol.relative_error_estimate,
            shear_error_estimate: sol.shear_error_estimate,
            converged: sol.converged,
            max_wall_shear_singular: sol.max_wall_shear_singular,
            singular_corner_count: sol.singular_corners.len(),
            singular_corner: sol
                .singular_corners
                .iter()
                .max_by(|a, b| a.interior_angle.total_cmp(&b.interior_angle))
                .map(|c| c.at),
            model: SectionModel::Numerical,
        }
    }

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
