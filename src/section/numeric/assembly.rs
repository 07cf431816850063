//! The global system on one mesh: unknowns (every node off the wall), assembly of the element
//! matrices, the sparse Cholesky solve for φ, the conductance factor K = ∫φ dA, and the wall
//! shear handed over to [`super::wall`].

use super::element::element_matrices;
use super::mesh::Mesh;
use super::{wall, NumericError, Solved};
use crate::section::outline::Point;

/// Which nodes are unknown: wall nodes are fixed at φ = 0, the others numbered in order.
struct Numbering {
    fixed: Vec<bool>,
    /// Unknown index of each free node (usize::MAX for fixed ones).
    unknown: Vec<usize>,
    count: usize,
}

impl Numbering {
    fn of(m: &Mesh) -> Numbering {
        let n = m.nodes.len();
        let mut fixed = vec![false; n];
        for w in &m.walls {
            for &i in w {
                fixed[i] = true;
            }
        }
        let mut unknown = vec![usize::MAX; n];
        let mut count = 0;
        for i in 0..n {
            if !fixed[i] {
                unknown[i] = count;
                count += 1;
            }
        }
        Numbering {
            fixed,
            unknown,
            count,
        }
    }
}

/// The assembled problem.
struct Assembled {
    /// Lower triangle of the free-node stiffness: (row, column) unknown indices and values,
    /// duplicates to be summed.
    positions: Vec<(usize, usize)>,
    entries: Vec<f64>,
    /// Load f_i = ∫ N_i dA of every node.
    load: Vec<f64>,
    /// Full stiffness rows of wall nodes, for the boundary flux: (wall node, other node, value).
    wall_rows: Vec<(usize, usize, f64)>,
    area: f64,
}

fn assemble(m: &Mesh, num: &Numbering) -> Assembled {
    let (fixed, unknown) = (&num.fixed, &num.unknown);
    let mut positions = Vec::with_capacity(m.tris.len() * 21);
    let mut entries = Vec::with_capacity(m.tris.len() * 21);
    let mut load = vec![0.0; m.nodes.len()];
    let mut wall_rows: Vec<(usize, usize, f64)> = Vec::new();
    let mut area = 0.0;
    for t in &m.tris {
        let xy: [Point; 6] = std::array::from_fn(|k| m.nodes[t[k]]);
        let e = element_matrices(&xy);
        for wd in e.area_parts {
            area += wd;
        }
        for a in 0..6 {
            load[t[a]] += e.load[a];
            for b in 0..6 {
                let (ia, ib) = (t[a], t[b]);
                if fixed[ia] {
                    wall_rows.push((ia, ib, e.stiffness[a][b]));
                }
                if !fixed[ia] && !fixed[ib] && unknown[ia] >= unknown[ib] {
                    positions.push((unknown[ia], unknown[ib]));
                    entries.push(e.stiffness[a][b]);
                }
            }
        }
    }
    Assembled {
        positions,
        entries,
        load,
        wall_rows,
        area,
    }
}

/// Solve ∇²φ = −1, φ = 0 on the wall, on mesh `m`.
pub(super) fn solve_on(m: &Mesh) -> Result<Solved, NumericError> {
    let n = m.nodes.len();
    let num = Numbering::of(m);
    let sys = assemble(m, &num);
    let mut x: Vec<f64> = (0..n)
        .filter(|&i| !num.fixed[i])
        .map(|i| sys.load[i])
        .collect();
    crate::solver::solve_spd_positions(num.count, &sys.positions, &sys.entries, &mut x)?;
    let mut phi = vec![0.0; n];
    for i in 0..n {
        if !num.fixed[i] {
            phi[i] = x[num.unknown[i]];
        }
    }
    let k: f64 = (0..n).map(|i| sys.load[i] * phi[i]).sum();
    let wall_shear = wall::consistent_shear(m, &sys.wall_rows, &phi, &sys.load)?;
    Ok(Solved {
        k,
        area: sys.area,
        phi,
        wall_shear,
    })
}
