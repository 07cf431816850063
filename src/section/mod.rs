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
//!
//! Layout: [`Shape`] and its checks live in `shape`; each family of shapes has one file with
//! its closed form (where there is one) and its outline (`circular`, `rectangular`,
//! `triangular`, `etched`, `profile`); [`SectionFigures`] in `figures`; [`elliptic_e`] in
//! `special`; the numerical solver in [`numeric`], and the thin-film limit for outlines too
//! thin to mesh in [`thin`].

pub mod numeric;
pub mod outline;

mod circular;
mod etched;
mod figures;
mod profile;
mod rectangular;
mod shape;
mod special;
pub mod thin;
mod triangular;

pub use figures::{SectionFigures, SectionModel};
pub use profile::{ProfileNote, MAX_MESH_POINTS, MIN_PROFILE_POINTS, UNEVEN_GAP_RATIO};
pub use rectangular::rectangle_k_and_shear;
pub use shape::{GeometryKey, Shape, ShapeError};
pub use special::elliptic_e;
