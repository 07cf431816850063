//! Numerical Poisson solution over any cross-section outline.
//!
//! Problem: ∇²φ = −1 in the section, φ = 0 on the wall; then u = (G/μ)·φ, the conductance
//! factor is K = ∫φ dA (Q = K·G/μ) and the wall shear per unit gradient is τ/G = |∂φ/∂n|.
//!
//! Method: quadratic (P2) isoparametric triangles on a constrained-Delaunay quality base mesh
//! (spade; minimum angle 25°) graded towards re-entrant corners, refined adaptively by
//! newest-vertex bisection of the triangles a residual error indicator marks (nested,
//! conforming levels); edge nodes of curved walls placed on the true arc; stiffness and load by
//! the 6-point degree-4 Dunavant rule; the sparse system by faer's Cholesky through
//! [`crate::solver`]. For smooth solutions P2 converges as h⁴ in K and h² in the wall
//! gradient; a corner of interior angle α limits K to h^(2π/α) on uniform meshes, which the
//! adaptive grading overcomes.
//!
//! Error control: each level at least nearly doubles the node count, until the error
//! estimates of K and of the maximum wall shear are within tolerance; see the `refine` module
//! for the estimate (three levels, observed order capped by the element's and the sharpest
//! corner's, safety factor [`SAFETY_FACTOR`]). Measured against closed forms, published tables
//! and independent references on 20 shapes at the default tolerance, the K estimate lay 2.5 to
//! 59 times above the true error. When the node budget runs out first, the result says so
//! ([`NumericSection::converged`] is false) and carries the estimate it reached. An outline too
//! thin for its length to mesh within the budget is refused before meshing
//! ([`NumericError::TooThin`]).
//!
//! Re-entrant corners (interior angle above 180°) make the pointwise wall shear unbounded; the
//! maximum wall shear is taken away from them, outside a disc of radius
//! [`CORNER_EXCLUSION`] × Dh around each, and the corners are listed.
//!
//! Wall shear is the consistent boundary flux: the residual r = A·φ − f at wall nodes is the
//! flux weighted by the wall shape functions, and a 1-D P2 mass solve along each wall loop
//! turns it into a nodal shear distribution (more accurate than differentiating φ).
//!
//! Layout: `mesh` (unit-size frame, meshing and curved walls), `element` (P2 shape functions,
//! quadrature, element matrices, wall elements), `assembly` (global system and solve on one
//! mesh), `wall` (consistent wall flux, largest wall shear, wall samples), `refine` (the
//! refinement loop and its error estimate). This file holds the options, the results and
//! [`solve`].

mod assembly;
mod element;
mod indicator;
mod mesh;
mod refine;
mod wall;

pub use super::outline::Corner;
use super::outline::{Outline, Point};
pub use refine::SAFETY_FACTOR;

/// Radius of the neighbourhood of a re-entrant corner left out of the maximum wall shear, as a
/// fraction of the hydraulic diameter Dh = 4A/P.
pub const CORNER_EXCLUSION: f64 = 0.02;

/// Fraction of the wall length left out of the robust maximum of the wall shear
/// ([`NumericSection::robust_max_wall_shear_per_gradient`]).
pub const ROBUST_EXCLUDED_FRACTION: f64 = 0.01;
use crate::solver::SolverError;

/// Accuracy and effort settings.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct NumericOptions {
    /// Target relative error estimate on the conductance factor (and so the resistance).
    pub tolerance: f64,
    /// Target relative error estimate of the maximum wall shear (wall gradients converge more
    /// slowly than K, so this is looser).
    pub shear_tolerance: f64,
    /// Refinement stops (with a larger estimate reported) beyond this many nodes.
    pub max_nodes: usize,
}

impl Default for NumericOptions {
    fn default() -> Self {
        NumericOptions {
            tolerance: 1e-4,
            shear_tolerance: 1e-3,
            max_nodes: 400_000,
        }
    }
}

/// Why a numerical section could not be solved.
#[derive(Clone, Debug, PartialEq, thiserror::Error)]
pub enum NumericError {
    #[error("the outline could not be meshed: {0}")]
    Mesh(String),
    #[error(
        "the section is too thin for its length to mesh: about {thickness:.3e} m thick \
         (2·area/perimeter) over {length:.3e} m (perimeter/2), which needs about \
         {predicted_nodes} nodes on the coarsest mesh alone (budget {max_nodes}); use a `rectangle` or `plates` shape for a thin slit, or \
         solve a section of less extreme proportions"
    )]
    TooThin {
        thickness: f64,
        length: f64,
        predicted_nodes: usize,
        max_nodes: usize,
    },
    #[error(transparent)]
    Solver(#[from] SolverError),
}

/// A wall sample: position along the wall and shear per unit gradient there.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct WallSample {
    /// Which loop (0 = outer wall, then holes).
    pub wall: usize,
    /// Arc length from the loop's first node [m].
    pub s: f64,
    pub point: Point,
    /// τ/G [m].
    pub shear_per_gradient: f64,
}

/// The quadratic mesh and the solution on it, for plotting (SI).
#[derive(Clone, Debug, PartialEq)]
pub struct FieldMesh {
    pub nodes: Vec<Point>,
    /// Six node indices per triangle: vertices 0..3, then edge nodes (01, 12, 20).
    pub triangles: Vec<[usize; 6]>,
    /// φ = u·μ/G at each node [m²].
    pub phi: Vec<f64>,
}

/// Result of the numerical solution (SI).
#[derive(Clone, Debug, PartialEq)]
pub struct NumericSection {
    pub area: f64,
    pub perimeter: f64,
    pub conductance_factor: f64,
    /// Largest wall shear per unit gradient τ/G [m], pointwise at the wall, away from
    /// re-entrant corners (see [`CORNER_EXCLUSION`]); the largest over the whole wall when
    /// there are none. On rough walls it is resolution-dependent (it sits on the tip of some
    /// bump, and moves as the mesh resolves the bumps); see
    /// [`Self::robust_max_wall_shear_per_gradient`].
    pub max_wall_shear_per_gradient: f64,
    pub max_shear_at: Point,
    /// Robust maximum of the wall shear per unit gradient τ/G [m]: the level that the wall
    /// shear exceeds on only [`ROBUST_EXCLUDED_FRACTION`] (1 %) of the wall length (its 99th
    /// percentile by wall length), over all walls, the neighbourhoods of re-entrant corners
    /// included, sampled at eight points per wall element. On a rough wall (a measured
    /// profile, every vertex a corner) the pointwise maximum
    /// [`Self::max_wall_shear_per_gradient`] depends on the resolution: on how finely the
    /// profile was sampled, on which corners are re-entrant and so left out, and on the size of
    /// the discs left out (set by Dh, not by the roughness). The robust maximum is a property
    /// of the wall-shear distribution instead; as it includes the high shear next to the
    /// re-entrant corners, it can exceed the pointwise maximum there. No error estimate is
    /// attached to it.
    pub robust_max_wall_shear_per_gradient: f64,
    /// ∮(τ/G) ds / P, which force balance says equals A/P: a consistency check.
    pub mean_wall_shear_per_gradient_from_flux: f64,
    /// Estimated bound on the relative error of K (infinite when fewer than two meshes were
    /// solved).
    pub relative_error_estimate: f64,
    /// Estimated bound on the relative error of the maximum wall shear.
    pub shear_error_estimate: f64,
    /// Whether both estimates are within the requested tolerances, from three nested meshes
    /// each with at least 1.8 times the nodes of the one before. False when the node budget ran
    /// out.
    pub converged: bool,
    /// The tolerances that were asked for (K, maximum wall shear).
    pub requested_tolerance: f64,
    pub requested_shear_tolerance: f64,
    /// Re-entrant corners of the outline (interior angle above 180°), where the pointwise wall
    /// shear is unbounded.
    pub singular_corners: Vec<Corner>,
    /// True when the outline has re-entrant corners: the pointwise maximum of the wall shear
    /// is unbounded, and `max_wall_shear_per_gradient` is the maximum away from them.
    pub max_wall_shear_singular: bool,
    /// Radius around each re-entrant corner left out of the maximum wall shear [m].
    pub corner_exclusion_radius: f64,
    pub wall: Vec<WallSample>,
    pub field: FieldMesh,
    pub refinements: usize,
}

/// The solution on one mesh (in the frame).
struct Solved {
    /// Conductance factor K = ∫φ dA = fᵀφ.
    k: f64,
    area: f64,
    phi: Vec<f64>,
    /// Nodal wall shear per gradient on each wall node.
    wall_shear: std::collections::HashMap<usize, f64>,
}

impl Solved {
    /// Wall shear per gradient at node `i` (0 off the wall).
    fn shear_at(&self, i: usize) -> f64 {
        self.wall_shear.get(&i).copied().unwrap_or(0.0)
    }
}

/// Solve the Poisson problem over `outline` to the requested accuracy.
pub fn solve(outline: &Outline, opts: NumericOptions) -> Result<NumericSection, NumericError> {
    refine::solve_to_tolerance(outline, opts)
}
