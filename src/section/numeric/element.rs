//! P2 elements: the quadratic isoparametric triangle (shape functions, Dunavant quadrature,
//! stiffness and load) and the quadratic wall element along a boundary loop (Gauss–Legendre
//! quadrature, mass matrix, length and integral).

use crate::section::outline::Point;

/// Dunavant (1985) degree-4 rule on the reference triangle: (ξ, η, weight), weights summing
/// to 1 (multiply by the triangle's reference area 1/2).
const QUAD: [(f64, f64, f64); 6] = {
    const A: f64 = 0.445_948_490_915_965;
    const WA: f64 = 0.223_381_589_678_011;
    const B: f64 = 0.091_576_213_509_771;
    const WB: f64 = 0.109_951_743_655_322;
    [
        (A, A, WA),
        (1.0 - 2.0 * A, A, WA),
        (A, 1.0 - 2.0 * A, WA),
        (B, B, WB),
        (1.0 - 2.0 * B, B, WB),
        (B, 1.0 - 2.0 * B, WB),
    ]
};

/// 3-point Gauss–Legendre on [0, 1]: (point, weight).
const GAUSS3: [(f64, f64); 3] = [
    (0.5 - 0.387_298_334_620_741_7, 5.0 / 18.0),
    (0.5, 8.0 / 18.0),
    (0.5 + 0.387_298_334_620_741_7, 5.0 / 18.0),
];

/// P2 shape functions and their (ξ, η) derivatives at a reference point.
fn shape(xi: f64, eta: f64) -> ([f64; 6], [[f64; 2]; 6]) {
    let l1 = 1.0 - xi - eta;
    let (l2, l3) = (xi, eta);
    let n = [
        l1 * (2.0 * l1 - 1.0),
        l2 * (2.0 * l2 - 1.0),
        l3 * (2.0 * l3 - 1.0),
        4.0 * l1 * l2,
        4.0 * l2 * l3,
        4.0 * l3 * l1,
    ];
    // dλ1 = (−1, −1), dλ2 = (1, 0), dλ3 = (0, 1)
    let d = [
        [-(4.0 * l1 - 1.0), -(4.0 * l1 - 1.0)],
        [4.0 * l2 - 1.0, 0.0],
        [0.0, 4.0 * l3 - 1.0],
        [4.0 * (l1 - l2), -4.0 * l2],
        [4.0 * l3, 4.0 * l2],
        [-4.0 * l3, 4.0 * (l1 - l3)],
    ];
    (n, d)
}

/// Physical gradients of the 6 shape functions and |det J| at a reference point.
fn physical(xy: &[Point; 6], xi: f64, eta: f64) -> ([f64; 6], [[f64; 2]; 6], f64) {
    let (n, d) = shape(xi, eta);
    let mut j = [[0.0; 2]; 2]; // j[r][c] = ∂x_r/∂ξ_c
    for k in 0..6 {
        for r in 0..2 {
            for c in 0..2 {
                j[r][c] += xy[k][r] * d[k][c];
            }
        }
    }
    let det = j[0][0] * j[1][1] - j[0][1] * j[1][0];
    let inv = [
        [j[1][1] / det, -j[0][1] / det],
        [-j[1][0] / det, j[0][0] / det],
    ];
    let mut g = [[0.0; 2]; 6];
    for k in 0..6 {
        // ∇_x N = J^{-T} ∇_ξ N
        g[k][0] = inv[0][0] * d[k][0] + inv[1][0] * d[k][1];
        g[k][1] = inv[0][1] * d[k][0] + inv[1][1] * d[k][1];
    }
    (n, g, det.abs())
}

/// The gradient of the P2 function with nodal values `phi` on the triangle `xy` at the
/// reference point (ξ, η).
pub(super) fn gradient(xy: &[Point; 6], phi: &[f64; 6], xi: f64, eta: f64) -> [f64; 2] {
    let (_, g, _) = physical(xy, xi, eta);
    let mut out = [0.0; 2];
    for k in 0..6 {
        out[0] += phi[k] * g[k][0];
        out[1] += phi[k] * g[k][1];
    }
    out
}

/// The Laplacian of the P2 function with nodal values `phi` on the triangle `xy`, taking the
/// triangle as straight-sided (its vertices' affine map; exact off curved walls, where it is
/// constant).
pub(super) fn laplacian(xy: &[Point; 6], phi: &[f64; 6]) -> f64 {
    // ∂ξ_c/∂x_r from the vertices.
    let j = [
        [xy[1][0] - xy[0][0], xy[2][0] - xy[0][0]],
        [xy[1][1] - xy[0][1], xy[2][1] - xy[0][1]],
    ];
    let det = j[0][0] * j[1][1] - j[0][1] * j[1][0];
    if det == 0.0 {
        return 0.0;
    }
    let inv = [
        [j[1][1] / det, -j[0][1] / det],
        [-j[1][0] / det, j[0][0] / det],
    ];
    // M = J⁻¹J⁻ᵀ: Δφ = Σ_cd (∂²φ/∂ξ_c∂ξ_d) M_cd.
    let m = |c: usize, d: usize| inv[c][0] * inv[d][0] + inv[c][1] * inv[d][1];
    let dl = [[-1.0, -1.0], [1.0, 0.0], [0.0, 1.0]];
    // Second derivatives of λ_i(2λ_i − 1) and 4λ_iλ_j in (ξ, η): constants.
    let pairs = [(0, 0), (1, 1), (2, 2), (0, 1), (1, 2), (2, 0)];
    let mut lap = 0.0;
    for (k, &(a, b)) in pairs.iter().enumerate() {
        let scale = if a == b { 2.0 } else { 4.0 };
        for c in 0..2 {
            for d in 0..2 {
                let h = if a == b {
                    scale * 2.0 * dl[a][c] * dl[a][d]
                } else {
                    scale * (dl[a][c] * dl[b][d] + dl[b][c] * dl[a][d])
                };
                lap += phi[k] * h * m(c, d);
            }
        }
    }
    lap
}

/// The matrices of one P2 triangle for ∇²φ = −1.
pub(super) struct ElementMatrices {
    /// Stiffness k_ab = ∫ ∇N_a·∇N_b dA.
    pub(super) stiffness: [[f64; 6]; 6],
    /// Load f_a = ∫ N_a dA.
    pub(super) load: [f64; 6],
    /// |det J|·w/2 at each quadrature point: the element's area, point by point.
    pub(super) area_parts: [f64; 6],
}

/// Stiffness, load and area of the triangle with nodes `xy` (vertices, then edge nodes 01, 12,
/// 20) by the Dunavant rule.
pub(super) fn element_matrices(xy: &[Point; 6]) -> ElementMatrices {
    let mut ke = [[0.0; 6]; 6];
    let mut fe = [0.0; 6];
    let mut area_parts = [0.0; 6];
    for (q, &(xi, eta, w)) in QUAD.iter().enumerate() {
        let (nn, g, det) = physical(xy, xi, eta);
        let wd = 0.5 * w * det;
        area_parts[q] = wd;
        for a in 0..6 {
            fe[a] += nn[a] * wd;
            for b in 0..6 {
                ke[a][b] += (g[a][0] * g[b][0] + g[a][1] * g[b][1]) * wd;
            }
        }
    }
    ElementMatrices {
        stiffness: ke,
        load: fe,
        area_parts,
    }
}

/// Quadratic 1-D shape functions (end 0, middle, end 2) and their derivatives at t ∈ [0, 1].
pub(super) fn edge_shape(t: f64) -> ([f64; 3], [f64; 3]) {
    let nn = [
        (1.0 - t) * (1.0 - 2.0 * t),
        4.0 * t * (1.0 - t),
        t * (2.0 * t - 1.0),
    ];
    let dn = [4.0 * t - 3.0, 4.0 - 8.0 * t, 4.0 * t - 1.0];
    (nn, dn)
}

/// Tangent (dx/dt, dy/dt) of the quadratic curve through `p` for shape derivatives `dn`.
pub(super) fn edge_tangent(p: [Point; 3], dn: [f64; 3]) -> (f64, f64) {
    let dx = dn[0] * p[0][0] + dn[1] * p[1][0] + dn[2] * p[2][0];
    let dy = dn[0] * p[0][1] + dn[1] * p[1][1] + dn[2] * p[2][1];
    (dx, dy)
}

/// Mass matrix m_ab = ∫ N_a N_b ds of the quadratic wall element through `p` (end, middle,
/// end), by 3-point Gauss on the quadratic curve.
pub(super) fn edge_mass(p: [Point; 3]) -> [[f64; 3]; 3] {
    let mut me = [[0.0; 3]; 3];
    for &(s, ws) in &GAUSS3 {
        let (nn, dn) = edge_shape(s);
        let (dx, dy) = edge_tangent(p, dn);
        let jac = (dx * dx + dy * dy).sqrt();
        for a in 0..3 {
            for b in 0..3 {
                me[a][b] += nn[a] * nn[b] * jac * ws;
            }
        }
    }
    me
}

/// Length of a quadratic wall element and the integral of the quadratic interpolant of
/// `value` (by local node 0, 1 = middle, 2) along it, by 3-point Gauss–Legendre.
pub(super) fn wall_element(
    nodes: &[Point],
    ids: [usize; 3],
    value: impl Fn(usize) -> f64,
) -> (f64, f64) {
    let p = [nodes[ids[0]], nodes[ids[1]], nodes[ids[2]]];
    let (mut length, mut integral) = (0.0, 0.0);
    for &(t, wt) in &GAUSS3 {
        let (nn, dn) = edge_shape(t);
        let (dx, dy) = edge_tangent(p, dn);
        let jac = dx.hypot(dy);
        length += jac * wt;
        integral += (nn[0] * value(0) + nn[1] * value(1) + nn[2] * value(2)) * jac * wt;
    }
    (length, integral)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn quadrature_is_exact_to_degree_4() {
        // ∫ ξ^a η^b over the reference triangle = a! b! / (a + b + 2)!.
        let fact = |n: u32| (1..=n).product::<u32>().max(1) as f64;
        for a in 0..=4u32 {
            for b in 0..=(4 - a) {
                let exact = fact(a) * fact(b) / fact(a + b + 2);
                let got: f64 = QUAD
                    .iter()
                    .map(|&(x, y, w)| 0.5 * w * x.powi(a as i32) * y.powi(b as i32))
                    .sum();
                assert!((got - exact).abs() < 1e-14, "{a} {b}: {got} vs {exact}");
            }
        }
    }
}
