//! Linear least squares with linear inequality constraints, solved exactly, with the least
//! change in the directions the objective cannot see.
//!
//! minimise ‖A·x − r‖  subject to  G·x ≥ h,  and among the minimisers the one closest to x₀.
//!
//! Method (Lawson & Hanson, *Solving Least Squares Problems*, 1974; SIAM reprint 1995):
//! - the singular value decomposition A = U·S·Vᵀ (one-sided Jacobi, Hestenes 1958; exact to
//!   rounding for the small dense matrices here) splits x − x₀ = V_r·c + V₀·b into the
//!   directions the objective sees (σ_i > [`RANK_TOL`]·σ₁) and the free ones;
//! - phase 1, problem LSI (ch. 23, §3) by the change of variables z = S_r·c − U_rᵀ·r′, which
//!   makes it a least-distance problem LDP (min ‖z‖ subject to linear inequalities) in (z, ε·b)
//!   with a small weight ε on the free part ([`FREE_WEIGHT`]), solved by NNLS (ch. 23 §4 and
//!   Algorithm NNLS, ch. 23 §3);
//! - phase 2: every minimiser has the same fitted part A·x (the objective is strictly convex
//!   in A·x), so with c fixed the least change is the LDP min ‖b‖ subject to the constraints
//!   (exact: no weight enters).
//!
//! Infeasible constraints are reported, not guessed at.

/// Singular values at or below this fraction of the largest count as zero: those directions
/// are free (the objective cannot see them to 1e-9 relative).
pub const RANK_TOL: f64 = 1e-9;

/// Weight of the free part in phase 1 (only which feasible fit is found depends on it; the
/// answer is fixed exactly by phase 2).
const FREE_WEIGHT: f64 = 1e-6;

/// Result of [`solve`].
#[derive(Clone, Debug, PartialEq)]
pub struct Lsi {
    pub x: Vec<f64>,
    /// Whether the constraints could all be met (otherwise `x` is x₀).
    pub feasible: bool,
    /// Slack G·x − h of every constraint.
    pub slack: Vec<f64>,
    /// The numerical rank of A.
    pub rank: usize,
    /// Orthonormal basis of the free directions (null space of A to [`RANK_TOL`]).
    pub free: Vec<Vec<f64>>,
    /// Singular values of A, largest first, and the matching right singular vectors.
    pub singular_values: Vec<f64>,
    pub directions: Vec<Vec<f64>>,
    /// ‖A·x − r‖.
    pub residual_norm: f64,
}

/// Thin SVD of the m×n matrix `a` (rows) by one-sided Jacobi: (U columns, σ, V columns),
/// sorted by decreasing σ; n columns even when m < n (the extra σ are 0).
#[allow(clippy::needless_range_loop)]
pub fn svd(a: &[Vec<f64>], n: usize) -> (Vec<Vec<f64>>, Vec<f64>, Vec<Vec<f64>>) {
    let m = a.len();
    // Columns of A and of V.
    let mut w: Vec<Vec<f64>> = (0..n).map(|j| (0..m).map(|i| a[i][j]).collect()).collect();
    let mut v: Vec<Vec<f64>> = (0..n)
        .map(|j| (0..n).map(|i| if i == j { 1.0 } else { 0.0 }).collect())
        .collect();
    let dot = |x: &[f64], y: &[f64]| x.iter().zip(y).map(|(a, b)| a * b).sum::<f64>();
    for _sweep in 0..60 {
        let mut rotated = false;
        for p in 0..n {
            for q in p + 1..n {
                let alpha = dot(&w[p], &w[p]);
                let beta = dot(&w[q], &w[q]);
                let gamma = dot(&w[p], &w[q]);
                if gamma == 0.0 || gamma.abs() <= 1e-15 * (alpha * beta).sqrt() {
                    continue;
                }
                rotated = true;
                let zeta = (beta - alpha) / (2.0 * gamma);
                let t = zeta.signum() / (zeta.abs() + (1.0 + zeta * zeta).sqrt());
                let c = 1.0 / (1.0 + t * t).sqrt();
                let s = c * t;
                for k in 0..m {
                    let (x, y) = (w[p][k], w[q][k]);
                    w[p][k] = c * x - s * y;
                    w[q][k] = s * x + c * y;
                }
                for k in 0..n {
                    let (x, y) = (v[p][k], v[q][k]);
                    v[p][k] = c * x - s * y;
                    v[q][k] = s * x + c * y;
                }
            }
        }
        if !rotated {
            break;
        }
    }
    let mut order: Vec<usize> = (0..n).collect();
    let sigma: Vec<f64> = w.iter().map(|c| dot(c, c).sqrt()).collect();
    order.sort_by(|&i, &j| sigma[j].total_cmp(&sigma[i]).then(i.cmp(&j)));
    let u = order
        .iter()
        .map(|&j| {
            if sigma[j] > 0.0 {
                w[j].iter().map(|x| x / sigma[j]).collect()
            } else {
                vec![0.0; m]
            }
        })
        .collect();
    (
        u,
        order.iter().map(|&j| sigma[j]).collect(),
        order.iter().map(|&j| v[j].clone()).collect(),
    )
}

/// Minimum-norm least-squares solution of `a`·x ≈ `b` (a: m×n rows), singular values at or
/// below `RANK_TOL`·σ₁ dropped.
fn pinv_solve(a: &[Vec<f64>], n: usize, b: &[f64]) -> Vec<f64> {
    let (u, s, v) = svd(a, n);
    let mut x = vec![0.0; n];
    let top = s.first().copied().unwrap_or(0.0);
    for ((ui, si), vi) in u.iter().zip(&s).zip(&v) {
        if *si <= RANK_TOL * top || *si == 0.0 {
            break;
        }
        let coef = ui.iter().zip(b).map(|(p, q)| p * q).sum::<f64>() / si;
        for (xk, vk) in x.iter_mut().zip(vi) {
            *xk += coef * vk;
        }
    }
    x
}

/// Non-negative least squares, min ‖E·u − f‖ with u ≥ 0 (E given by its m columns of length
/// k): Lawson & Hanson's Algorithm NNLS (1974, ch. 23 §3).
pub fn nnls(cols: &[Vec<f64>], f: &[f64]) -> Vec<f64> {
    let m = cols.len();
    let k = f.len();
    let mut u = vec![0.0; m];
    let mut passive = vec![false; m];
    let norm = cols
        .iter()
        .flat_map(|c| c.iter())
        .fold(0.0f64, |a, v| a.max(v.abs()))
        .max(1e-300);
    let tol = 1e-13 * norm * f.iter().fold(0.0f64, |a, v| a.max(v.abs())).max(1e-300);
    let residual = |u: &[f64]| -> Vec<f64> {
        let mut r = f.to_vec();
        for (c, uj) in cols.iter().zip(u) {
            if *uj != 0.0 {
                for (ri, ci) in r.iter_mut().zip(c) {
                    *ri -= uj * ci;
                }
            }
        }
        r
    };
    let solve_passive = |passive: &[bool]| -> Vec<f64> {
        let idx: Vec<usize> = (0..m).filter(|&j| passive[j]).collect();
        let rows: Vec<Vec<f64>> = (0..k)
            .map(|i| idx.iter().map(|&j| cols[j][i]).collect())
            .collect();
        let z = pinv_solve(&rows, idx.len(), f);
        let mut full = vec![0.0; m];
        for (&j, zj) in idx.iter().zip(z) {
            full[j] = zj;
        }
        full
    };
    for _outer in 0..3 * m + 30 {
        let r = residual(&u);
        let w: Vec<f64> = cols
            .iter()
            .map(|c| c.iter().zip(&r).map(|(a, b)| a * b).sum())
            .collect();
        let Some(t) = (0..m)
            .filter(|&j| !passive[j] && w[j] > tol)
            .max_by(|&i, &j| w[i].total_cmp(&w[j]))
        else {
            break;
        };
        passive[t] = true;
        for _inner in 0..3 * m + 30 {
            let z = solve_passive(&passive);
            if (0..m).filter(|&j| passive[j]).all(|j| z[j] > 0.0) {
                u = z;
                break;
            }
            let mut alpha = f64::INFINITY;
            for j in (0..m).filter(|&j| passive[j] && z[j] <= 0.0) {
                let a = u[j] / (u[j] - z[j]);
                if a < alpha {
                    alpha = a;
                }
            }
            if !alpha.is_finite() {
                alpha = 0.0;
            }
            for j in 0..m {
                u[j] += alpha * (z[j] - u[j]);
                if passive[j] && u[j] <= 1e-15 * (1.0 + z[j].abs()) {
                    passive[j] = false;
                    u[j] = 0.0;
                }
            }
            if !(0..m).any(|j| passive[j]) {
                break;
            }
        }
    }
    u
}

/// Least distance programming, min ‖z‖ subject to F·z ≥ k (F rows of length n), by NNLS on
/// [Fᵀ; kᵀ]·u ≈ (0, …, 0, 1) (Lawson & Hanson 1974, ch. 23 §4). `None` when infeasible.
pub fn ldp(f: &[Vec<f64>], k: &[f64], n: usize) -> Option<Vec<f64>> {
    if f.is_empty() {
        return Some(vec![0.0; n]);
    }
    // Scale every constraint to unit size (the LDP is invariant to positive row scaling).
    let scaled: Vec<(Vec<f64>, f64)> = f
        .iter()
        .zip(k)
        .map(|(row, ki)| {
            let s = row
                .iter()
                .map(|v| v * v)
                .sum::<f64>()
                .sqrt()
                .max(ki.abs())
                .max(1e-300);
            (row.iter().map(|v| v / s).collect(), ki / s)
        })
        .collect();
    let cols: Vec<Vec<f64>> = scaled
        .iter()
        .map(|(row, ki)| {
            let mut c = row.clone();
            c.push(*ki);
            c
        })
        .collect();
    let mut target = vec![0.0; n];
    target.push(1.0);
    let u = nnls(&cols, &target);
    let mut r: Vec<f64> = target.iter().map(|t| -t).collect();
    for (c, uj) in cols.iter().zip(&u) {
        for (ri, ci) in r.iter_mut().zip(c) {
            *ri += uj * ci;
        }
    }
    // r = E·u − f; feasible iff r ≠ 0, and then r_{n+1} = −‖r‖² < 0.
    let last = r[n];
    if -last <= 1e-24 {
        return None;
    }
    let z: Vec<f64> = r[..n].iter().map(|v| -v / last).collect();
    let ok = scaled.iter().all(|(row, ki)| {
        row.iter().zip(&z).map(|(a, b)| a * b).sum::<f64>() >= ki - 1e-9 * (1.0 + ki.abs())
    });
    ok.then_some(z)
}

fn mat_vec(a: &[Vec<f64>], x: &[f64]) -> Vec<f64> {
    a.iter()
        .map(|row| row.iter().zip(x).map(|(p, q)| p * q).sum())
        .collect()
}

/// Solve min ‖A·x − r‖ subject to G·x ≥ h, with the least change from `x0` in the directions
/// A cannot see (see the module documentation). `a` is m×n by rows, `g` p×n by rows.
pub fn solve(a: &[Vec<f64>], r: &[f64], g: &[Vec<f64>], h: &[f64], x0: &[f64]) -> Lsi {
    let n = x0.len();
    // d = x − x₀: A·d ≈ r′ = r − A·x₀, G·d ≥ h′ = h − G·x₀.
    let ax0 = mat_vec(a, x0);
    let r1: Vec<f64> = r.iter().zip(&ax0).map(|(p, q)| p - q).collect();
    let gx0 = mat_vec(g, x0);
    let h1: Vec<f64> = h.iter().zip(&gx0).map(|(p, q)| p - q).collect();
    let (u, s, v) = svd(a, n);
    let top = s.first().copied().unwrap_or(0.0);
    let rank = s
        .iter()
        .take_while(|&&si| si > RANK_TOL * top && si > 0.0)
        .count();
    let free: Vec<Vec<f64>> = v[rank..].to_vec();
    // Unconstrained fit: c₀ = S_r⁻¹·U_rᵀ·r′ (coordinates on V_r).
    let c0: Vec<f64> = (0..rank)
        .map(|i| u[i].iter().zip(&r1).map(|(p, q)| p * q).sum::<f64>() / s[i])
        .collect();
    let combine = |c: &[f64], b: &[f64]| -> Vec<f64> {
        let mut d = vec![0.0; n];
        for (ci, vi) in c.iter().zip(&v) {
            for (dk, vk) in d.iter_mut().zip(vi) {
                *dk += ci * vk;
            }
        }
        for (bi, vi) in b.iter().zip(&free) {
            for (dk, vk) in d.iter_mut().zip(vi) {
                *dk += bi * vk;
            }
        }
        d
    };
    // Phase 1: variables w = (z, ε·b) with c = S_r⁻¹·z + c₀; G·d ≥ h′ becomes
    // Σ_i (G·v_i/σ_i)·z_i + Σ_j (G·v₀_j/ε)·w_j ≥ h′ − G·V_r·c₀.
    let gv: Vec<Vec<f64>> = g
        .iter()
        .map(|row| {
            v.iter()
                .map(|vi| row.iter().zip(vi).map(|(p, q)| p * q).sum())
                .collect()
        })
        .collect();
    let f1: Vec<Vec<f64>> = gv
        .iter()
        .map(|gvi| {
            (0..n)
                .map(|j| {
                    if j < rank {
                        gvi[j] / s[j]
                    } else {
                        gvi[j] / FREE_WEIGHT
                    }
                })
                .collect()
        })
        .collect();
    let k1: Vec<f64> = gv
        .iter()
        .zip(&h1)
        .map(|(gvi, hi)| hi - (0..rank).map(|j| gvi[j] * c0[j]).sum::<f64>())
        .collect();
    let finish = |d: Vec<f64>, feasible: bool| -> Lsi {
        let x: Vec<f64> = x0.iter().zip(&d).map(|(p, q)| p + q).collect();
        let ax = mat_vec(a, &x);
        let residual_norm = ax
            .iter()
            .zip(r)
            .map(|(p, q)| (p - q) * (p - q))
            .sum::<f64>()
            .sqrt()
            + 0.0; // an empty sum is −0
        let slack = mat_vec(g, &x).iter().zip(h).map(|(p, q)| p - q).collect();
        Lsi {
            x,
            feasible,
            slack,
            rank,
            free: free.clone(),
            singular_values: s.clone(),
            directions: v.clone(),
            residual_norm,
        }
    };
    let Some(w) = ldp(&f1, &k1, n) else {
        return finish(vec![0.0; n], false);
    };
    let c: Vec<f64> = (0..rank).map(|i| w[i] / s[i] + c0[i]).collect();
    let b1: Vec<f64> = (rank..n).map(|j| w[j] / FREE_WEIGHT).collect();
    if rank == n {
        return finish(combine(&c, &[]), true);
    }
    // Phase 2: c fixed; min ‖b‖ subject to G·V₀·b ≥ h′ − G·V_r·c.
    let f2: Vec<Vec<f64>> = gv.iter().map(|gvi| gvi[rank..].to_vec()).collect();
    let k2: Vec<f64> = gv
        .iter()
        .zip(&h1)
        .map(|(gvi, hi)| hi - (0..rank).map(|j| gvi[j] * c[j]).sum::<f64>())
        .collect();
    let b = ldp(&f2, &k2, n - rank).unwrap_or(b1);
    finish(combine(&c, &b), true)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn svd_reconstructs() {
        let a = vec![vec![3.0, 1.0, 2.0], vec![1.0, -1.0, 0.5]];
        let (u, s, v) = svd(&a, 3);
        for i in 0..2 {
            for j in 0..3 {
                let x: f64 = (0..3).map(|k| u[k][i] * s[k] * v[k][j]).sum();
                assert!((x - a[i][j]).abs() < 1e-14);
            }
        }
        assert!(s[2].abs() < 1e-14);
    }

    #[test]
    fn unconstrained_least_squares() {
        // x + y = 3, x − y = 1 → (2, 1).
        let a = vec![vec![1.0, 1.0], vec![1.0, -1.0]];
        let s = solve(&a, &[3.0, 1.0], &[], &[], &[0.0, 0.0]);
        assert!((s.x[0] - 2.0).abs() < 1e-14 && (s.x[1] - 1.0).abs() < 1e-14);
    }

    #[test]
    fn active_bound_and_the_rest_adjusts() {
        // x ≤ 1.5 (−x ≥ −1.5): on the face the fit is y = 1 (minimise (y − 1.5)² + (0.5 − y)²).
        let a = vec![vec![1.0, 1.0], vec![1.0, -1.0]];
        let s = solve(&a, &[3.0, 1.0], &[vec![-1.0, 0.0]], &[-1.5], &[0.0, 0.0]);
        assert!(
            (s.x[0] - 1.5).abs() < 1e-13 && (s.x[1] - 1.0).abs() < 1e-13,
            "{s:?}"
        );
        assert!(s.slack[0].abs() < 1e-13);
    }

    #[test]
    fn free_direction_takes_the_least_change() {
        // Only x + y is seen (= 2): from x₀ = (3, 0) the least change is (2.5, −0.5).
        let a = vec![vec![1.0, 1.0]];
        let s = solve(&a, &[2.0], &[], &[], &[3.0, 0.0]);
        assert_eq!(s.rank, 1);
        assert!(
            (s.x[0] - 2.5).abs() < 1e-14 && (s.x[1] + 0.5).abs() < 1e-14,
            "{s:?}"
        );
        // With y ≥ 0 the least change on the feasible fits is (2, 0).
        let s = solve(&a, &[2.0], &[vec![0.0, 1.0]], &[0.0], &[3.0, 0.0]);
        assert!(
            (s.x[0] - 2.0).abs() < 1e-12 && s.x[1].abs() < 1e-12,
            "{s:?}"
        );
    }

    #[test]
    fn infeasible_constraints_are_reported() {
        let s = solve(
            &[vec![1.0]],
            &[1.0],
            &[vec![1.0], vec![-1.0]],
            &[2.0, -1.0],
            &[0.0],
        );
        assert!(!s.feasible);
    }

    /// Gaussian elimination with partial pivoting; `None` when singular.
    #[allow(clippy::needless_range_loop)] // index form mirrors the textbook recurrences
    fn gauss(mut m: Vec<Vec<f64>>, mut b: Vec<f64>) -> Option<Vec<f64>> {
        let n = b.len();
        for c in 0..n {
            let p = (c..n).max_by(|&i, &j| m[i][c].abs().total_cmp(&m[j][c].abs()))?;
            if m[p][c].abs() < 1e-12 {
                return None;
            }
            m.swap(c, p);
            b.swap(c, p);
            for i in c + 1..n {
                let f = m[i][c] / m[c][c];
                for k in c..n {
                    m[i][k] -= f * m[c][k];
                }
                b[i] -= f * b[c];
            }
        }
        let mut x = vec![0.0; n];
        for i in (0..n).rev() {
            let s: f64 = (i + 1..n).map(|k| m[i][k] * x[k]).sum();
            x[i] = (b[i] - s) / m[i][i];
        }
        Some(x)
    }

    #[test]
    #[allow(clippy::needless_range_loop)]
    fn random_problems_match_active_set_enumeration() {
        // Independent reference: for a full-rank A the optimum is the equality-constrained
        // least-squares solution on some set W of active constraints (KKT; Nocedal & Wright,
        // Numerical Optimization 2006, §16.5). Enumerate every W with |W| ≤ n, solve its KKT
        // system [AᵀA G_Wᵀ; G_W 0], keep the feasible candidates and take the best.
        let mut seed = 0x9E3779B97F4A7C15u64;
        let mut rnd = move || {
            seed ^= seed << 13;
            seed ^= seed >> 7;
            seed ^= seed << 17;
            (seed >> 11) as f64 / (1u64 << 53) as f64 * 2.0 - 1.0
        };
        let n = 3;
        for case in 0..200 {
            let a: Vec<Vec<f64>> = (0..4).map(|_| (0..n).map(|_| rnd()).collect()).collect();
            let r: Vec<f64> = (0..4).map(|_| 3.0 * rnd()).collect();
            let mut g: Vec<Vec<f64>> = Vec::new();
            let mut h: Vec<f64> = Vec::new();
            for j in 0..n {
                let mut e = vec![0.0; n];
                e[j] = 1.0;
                g.push(e.clone());
                h.push(-1.0);
                e[j] = -1.0;
                g.push(e);
                h.push(-1.0);
            }
            for _ in 0..2 {
                g.push((0..n).map(|_| rnd()).collect());
                h.push(-0.3 * rnd().abs()); // x = 0 stays feasible
            }
            let x0: Vec<f64> = (0..n).map(|_| 0.5 * rnd()).collect();
            let got = solve(&a, &r, &g, &h, &x0);
            assert!(got.feasible);
            let obj = |x: &[f64]| -> f64 {
                mat_vec(&a, x)
                    .iter()
                    .zip(&r)
                    .map(|(p, q)| (p - q) * (p - q))
                    .sum()
            };
            let p = g.len();
            let mut best: Option<(f64, Vec<f64>)> = None;
            for mask in 0u32..(1 << p) {
                let w: Vec<usize> = (0..p).filter(|i| mask & (1 << i) != 0).collect();
                if w.len() > n {
                    continue;
                }
                let k = n + w.len();
                let mut m = vec![vec![0.0; k]; k];
                let mut b = vec![0.0; k];
                for i in 0..n {
                    for j in 0..n {
                        m[i][j] = a.iter().map(|row| row[i] * row[j]).sum();
                    }
                    b[i] = a.iter().zip(&r).map(|(row, ri)| row[i] * ri).sum();
                }
                for (c, &wi) in w.iter().enumerate() {
                    for j in 0..n {
                        m[n + c][j] = g[wi][j];
                        m[j][n + c] = g[wi][j];
                    }
                    b[n + c] = h[wi];
                }
                let Some(sol) = gauss(m, b) else { continue };
                let x = &sol[..n];
                let feasible = g.iter().zip(&h).all(|(gi, hi)| {
                    gi.iter().zip(x).map(|(p, q)| p * q).sum::<f64>() >= hi - 1e-12
                });
                if feasible && best.as_ref().is_none_or(|(o, _)| obj(x) < *o) {
                    best = Some((obj(x), x.to_vec()));
                }
            }
            let (o, x) = best.unwrap();
            assert!(
                (obj(&got.x) - o).abs() <= 1e-10 * (1.0 + o),
                "case {case}: objective {} vs {o}",
                obj(&got.x)
            );
            for (p, q) in got.x.iter().zip(&x) {
                assert!((p - q).abs() <= 1e-8, "case {case}: {:?} vs {x:?}", got.x);
            }
        }
    }
}
