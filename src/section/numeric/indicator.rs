//! The local error indicator that drives the adaptive refinement, and the marking.
//!
//! Residual indicator (Babuška & Rheinboldt 1978, "Error estimates for adaptive finite element
//! computations", SIAM J. Numer. Anal. 15; in the form of Verfürth 1996, "A Review of A
//! Posteriori Error Estimation and Adaptive Mesh-Refinement Techniques", Wiley–Teubner, §1.2):
//! for ∇²φ = −1 with φ = 0 on the wall,
//!
//!   η_T² = h_T² ‖1 + Δφ_h‖²_T + ½ Σ_{E ⊂ ∂T, E interior} h_E ‖[∂φ_h/∂n]_E‖²_E,
//!
//! h the longest edge, [·] the jump across an interior edge. Up to constants, Σ η_T² bounds
//! the energy error |φ − φ_h|² from above and each η_T the local error from below, so it tells
//! where to refine; the constants are unknown, and the error estimate of K does not rest on
//! it (see `refine`). Marking is Dörfler's bulk criterion (Dörfler 1996, "A convergent adaptive
//! algorithm for Poisson's equation", SIAM J. Numer. Anal. 33): the fewest triangles whose η²
//! make up the fraction [`BULK`] of the total.

use super::element::{gradient, laplacian};
use super::mesh::Mesh;
use super::Solved;
use std::collections::HashMap;

/// Dörfler's bulk fraction θ.
pub(super) const BULK: f64 = 0.5;

/// 2-point Gauss–Legendre on [0, 1]: exact for the squared jump of a P2 gradient (degree 2).
const GAUSS2: [(f64, f64); 2] = [
    (0.5 - 0.288_675_134_594_812_9, 0.5),
    (0.5 + 0.288_675_134_594_812_9, 0.5),
];

/// Reference coordinates of the point at parameter `s` along local edge `k` (0: vertex 0 to 1,
/// 1: vertex 1 to 2, 2: vertex 2 to 0).
fn on_edge(k: usize, s: f64) -> (f64, f64) {
    match k {
        0 => (s, 0.0),
        1 => (1.0 - s, s),
        _ => (0.0, 1.0 - s),
    }
}

/// η_T² of every triangle of `m` (in the order of `m.tris`).
pub(super) fn indicators(m: &Mesh, s: &Solved) -> Vec<f64> {
    let len = |a: usize, b: usize| {
        let (p, q) = (m.nodes[a], m.nodes[b]);
        (p[0] - q[0]).hypot(p[1] - q[1])
    };
    let mut eta2 = vec![0.0; m.tris.len()];
    // Interior edges: (smaller vertex, larger vertex) → the two (triangle, local edge).
    let mut sides: HashMap<(usize, usize), Vec<(usize, usize)>> = HashMap::new();
    for (ti, t) in m.tris.iter().enumerate() {
        let xy = t.map(|i| m.nodes[i]);
        let phi = t.map(|i| s.phi[i]);
        let h = len(t[0], t[1]).max(len(t[1], t[2])).max(len(t[2], t[0]));
        let area = 0.5
            * ((xy[1][0] - xy[0][0]) * (xy[2][1] - xy[0][1])
                - (xy[2][0] - xy[0][0]) * (xy[1][1] - xy[0][1]))
                .abs();
        let residual = 1.0 + laplacian(&xy, &phi);
        eta2[ti] += h * h * residual * residual * area;
        for k in 0..3 {
            let (a, b) = (t[k], t[(k + 1) % 3]);
            sides.entry((a.min(b), a.max(b))).or_default().push((ti, k));
        }
    }
    for ((a, b), users) in sides {
        let [(t1, k1), (t2, k2)] = users[..] else {
            continue; // a wall edge
        };
        let (pa, pb) = (m.nodes[a], m.nodes[b]);
        let le = len(a, b);
        let normal = [(pb[1] - pa[1]) / le, -(pb[0] - pa[0]) / le];
        let grad_at = |t: usize, k: usize, s_from_a: f64| {
            let tri = &m.tris[t];
            // Parameter along the local edge, which may run from b to a.
            let s_local = if tri[k] == a {
                s_from_a
            } else {
                1.0 - s_from_a
            };
            let (xi, eta) = on_edge(k, s_local);
            gradient(&tri.map(|i| m.nodes[i]), &tri.map(|i| s.phi[i]), xi, eta)
        };
        let mut jump2 = 0.0;
        for &(sg, w) in &GAUSS2 {
            let (g1, g2) = (grad_at(t1, k1, sg), grad_at(t2, k2, sg));
            let j = (g1[0] - g2[0]) * normal[0] + (g1[1] - g2[1]) * normal[1];
            jump2 += w * j * j * le;
        }
        let share = 0.5 * le * jump2;
        eta2[t1] += share;
        eta2[t2] += share;
    }
    eta2
}

/// The triangles to refine: the largest η² first, as few as make up [`BULK`] of Σ η², and at
/// least `at_least` of them.
pub(super) fn mark(eta2: &[f64], at_least: usize) -> Vec<bool> {
    let mut order: Vec<usize> = (0..eta2.len()).collect();
    order.sort_by(|&i, &j| eta2[j].total_cmp(&eta2[i]).then(i.cmp(&j)));
    let total: f64 = eta2.iter().sum();
    let mut marked = vec![false; eta2.len()];
    let mut sum = 0.0;
    for (count, &i) in order.iter().enumerate() {
        if sum >= BULK * total && count >= at_least {
            break;
        }
        marked[i] = true;
        sum += eta2[i];
    }
    marked
}
