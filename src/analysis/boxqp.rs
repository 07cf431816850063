//! Bounded linear least squares, solved exactly by a primal active-set method.
//!
//! minimise ½‖A·x − r‖² + ½ε²‖x − x₀‖²  subject to  lo ≤ x ≤ hi
//!
//! The small ridge term ε (relative 1e-7) makes the problem strictly convex, so the answer is
//! unique: among settings that meet the targets equally well, the one closest to the current
//! settings. The active-set method (Nocedal & Wright, Numerical Optimization, 2nd ed., §16.5)
//! moves between faces of the box and terminates after finitely many steps with the exact
//! optimum of the convex quadratic: at most a few times the number of variables for the small
//! problems here (a handful of ports or channels).

/// Result of a bounded least-squares solve.
#[derive(Clone, Debug, PartialEq)]
pub struct BoxLsq {
    pub x: Vec<f64>,
    /// −1 at the lower bound, +1 at the upper bound, 0 free.
    pub active: Vec<i8>,
    /// ‖A·x − r‖.
    pub residual_norm: f64,
    pub iterations: usize,
}

/// Dense SPD solve by Cholesky (n is small). Returns `None` if not positive definite.
#[allow(clippy::needless_range_loop)] // index form mirrors the textbook recurrences
fn cholesky_solve(h: &[Vec<f64>], b: &[f64]) -> Option<Vec<f64>> {
    let n = b.len();
    let mut l = vec![vec![0.0; n]; n];
    for i in 0..n {
        for j in 0..=i {
            let mut s = h[i][j];
            for k in 0..j {
                s -= l[i][k] * l[j][k];
            }
            if i == j {
                if s <= 0.0 {
                    return None;
                }
                l[i][i] = s.sqrt();
            } else {
                l[i][j] = s / l[j][j];
            }
        }
    }
    let mut y = b.to_vec();
    for i in 0..n {
        for k in 0..i {
            y[i] -= l[i][k] * y[k];
        }
        y[i] /= l[i][i];
    }
    for i in (0..n).rev() {
        for k in i + 1..n {
            y[i] -= l[k][i] * y[k];
        }
        y[i] /= l[i][i];
    }
    Some(y)
}

/// Solve the bounded problem. `a` is m×n (rows), `x0` must lie within the bounds.
pub fn solve(a: &[Vec<f64>], r: &[f64], lo: &[f64], hi: &[f64], x0: &[f64]) -> BoxLsq {
    let n = x0.len();
    // H = AᵀA + ε²I, g = Aᵀr + ε²x₀ (objective ½xᵀHx − gᵀx + const).
    let scale = a
        .iter()
        .flat_map(|row| row.iter())
        .fold(0.0f64, |m, v| m.max(v.abs()))
        .max(1e-300);
    let eps2 = (1e-7 * scale).powi(2);
    let mut h = vec![vec![0.0; n]; n];
    let mut g = vec![0.0; n];
    for (row, ri) in a.iter().zip(r) {
        for i in 0..n {
            g[i] += row[i] * ri;
            for j in 0..n {
                h[i][j] += row[i] * row[j];
            }
        }
    }
    for i in 0..n {
        h[i][i] += eps2;
        g[i] += eps2 * x0[i];
    }
    let mut x: Vec<f64> = (0..n).map(|i| x0[i].clamp(lo[i], hi[i])).collect();
    let mut active: Vec<i8> = (0..n)
        .map(|i| {
            if x[i] <= lo[i] && lo[i] < hi[i] {
                -1
            } else if x[i] >= hi[i] {
                1
            } else {
                0
            }
        })
        .collect();
    let mut iterations = 0;
    // Finite: each step either adds a blocking bound or removes one with a wrong-signed
    // multiplier after reaching a face minimum; the cap only guards against rounding cycles.
    while iterations < 50 * (n + 1) {
        iterations += 1;
        let free: Vec<usize> = (0..n).filter(|&i| active[i] == 0).collect();
        // Minimise over the free variables with the others fixed.
        let mut target = x.clone();
        if !free.is_empty() {
            let hf: Vec<Vec<f64>> = free
                .iter()
                .map(|&i| free.iter().map(|&j| h[i][j]).collect())
                .collect();
            let bf: Vec<f64> = free
                .iter()
                .map(|&i| {
                    g[i] - (0..n)
                        .filter(|j| active[*j] != 0)
                        .map(|j| h[i][j] * x[j])
                        .sum::<f64>()
                })
                .collect();
            let Some(sol) = cholesky_solve(&hf, &bf) else {
                break;
            };
            for (k, &i) in free.iter().enumerate() {
                target[i] = sol[k];
            }
        }
        // Step towards the face minimum, stopping at the first bound met.
        let mut alpha = 1.0;
        let mut blocking = None;
        for &i in &free {
            let d = target[i] - x[i];
            if d < 0.0 && target[i] < lo[i] {
                let a_i = (lo[i] - x[i]) / d;
                if a_i < alpha {
                    alpha = a_i;
                    blocking = Some((i, -1));
                }
            } else if d > 0.0 && target[i] > hi[i] {
                let a_i = (hi[i] - x[i]) / d;
                if a_i < alpha {
                    alpha = a_i;
                    blocking = Some((i, 1));
                }
            }
        }
        for &i in &free {
            x[i] += alpha * (target[i] - x[i]);
        }
        if let Some((i, side)) = blocking {
            x[i] = if side < 0 { lo[i] } else { hi[i] };
            active[i] = side;
            continue;
        }
        // At the face minimum: release the bound whose multiplier has the wrong sign.
        let grad: Vec<f64> = (0..n)
            .map(|i| (0..n).map(|j| h[i][j] * x[j]).sum::<f64>() - g[i])
            .collect();
        let tol = 1e-12 * g.iter().fold(1e-300f64, |m, v| m.max(v.abs()));
        let release = (0..n)
            .filter(|&i| (active[i] == -1 && grad[i] < -tol) || (active[i] == 1 && grad[i] > tol))
            .max_by(|&i, &j| grad[i].abs().total_cmp(&grad[j].abs()));
        match release {
            Some(i) => active[i] = 0,
            None => break,
        }
    }
    let residual_norm = a
        .iter()
        .zip(r)
        .map(|(row, ri)| {
            let v: f64 = row.iter().zip(&x).map(|(aij, xj)| aij * xj).sum::<f64>() - ri;
            v * v
        })
        .sum::<f64>()
        .sqrt();
    BoxLsq {
        x,
        active,
        residual_norm,
        iterations,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn unconstrained_least_squares() {
        // x + y = 3, x − y = 1 → (2, 1).
        let a = vec![vec![1.0, 1.0], vec![1.0, -1.0]];
        let s = solve(&a, &[3.0, 1.0], &[-10.0, -10.0], &[10.0, 10.0], &[0.0, 0.0]);
        assert!((s.x[0] - 2.0).abs() < 1e-9 && (s.x[1] - 1.0).abs() < 1e-9);
        assert_eq!(s.active, vec![0, 0]);
    }

    #[test]
    fn bound_becomes_active_and_the_rest_adjusts() {
        // Same system with x ≤ 1.5: the optimum on the face x = 1.5 minimises
        // (y − 1.5)² + (0.5 − y)² → y = 1; the gradient in x there, 2x − 4 < 0, keeps x at
        // its upper bound.
        let a = vec![vec![1.0, 1.0], vec![1.0, -1.0]];
        let s = solve(&a, &[3.0, 1.0], &[-10.0, -10.0], &[1.5, 10.0], &[0.0, 0.0]);
        assert!(
            (s.x[0] - 1.5).abs() < 1e-12 && (s.x[1] - 1.0).abs() < 1e-6,
            "{:?}",
            s.x
        );
        assert_eq!(s.active, vec![1, 0]);
    }

    #[test]
    fn contradictory_targets_give_the_mean() {
        // x = 1 and x = 3: least squares gives 2 with residual √2.
        let a = vec![vec![1.0], vec![1.0]];
        let s = solve(&a, &[1.0, 3.0], &[-10.0], &[10.0], &[0.0]);
        assert!((s.x[0] - 2.0).abs() < 1e-9);
        assert!((s.residual_norm - 2f64.sqrt()).abs() < 1e-9);
    }
}
