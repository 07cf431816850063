//! TR-BDF2 for the linear index-1 DAE C·ẋ = −A·x + b(t) of an assembled Kirchhoff system.
//!
//! The method (Bank, Coughran, Fichtner, Grosse, Rose & Smith, IEEE Trans. CAD 4, 1985;
//! analysed by Hosea & Shampine, "Analysis and implementation of TR-BDF2", Appl. Numer. Math.
//! 20, 1996) takes a trapezoidal stage to t + γh and a BDF2 stage to t + h with
//! γ = 2 − √2, so both stages solve with the same matrix M = C + (γh/2)·A: one numeric
//! factorisation per step size on one symbolic analysis. It is L-stable and second order.
//!
//! Local error: the principal error term k·h³·x''' with k = (−3γ² + 4γ − 2)/(12(2 − γ)),
//! x''' estimated from the second divided difference of f = −A·x + b over the three stage
//! points (Bank et al. 1985), then filtered through M⁻¹ as Hosea & Shampine do, which keeps
//! the estimate bounded on stiff and algebraic (C = 0) components. Dense output: the quadratic
//! through the three stage values (third-order local accuracy, like the step).
//!
//! Trapped gas and wells with a level–volume table are nonlinear storages
//! ([`NonlinearStore`]): the stored volume q(x) (Boyle's −k/(x + offset) for a gas,
//! p_abs·V_gas = k; the table's V(h) for a well) replaces C·x in both stages, whose equations
//! are then solved by a simplified Newton iteration on the same matrix M = C_ref + (γh/2)·A
//! (Hairer & Wanner, *Solving Ordinary Differential Equations II*, 2nd ed. 1996, §IV.8:
//! simplified Newton for implicit stages, iterated until the correction is far below the
//! tolerance). C_ref holds the stores' reference compliances at the step where M was
//! factorised (a gas's k/p_abs²; a table well's largest cross-section near its level, see
//! [`NonlinearStore::reference`]); M is factorised again when the step changes or a reference
//! compliance has moved more than [`REFRESH`] from C_ref. The iteration converges to the exact
//! stage solution whatever C_ref is (C_ref only sets how fast: the contraction rate is about
//! |1 − C/C_ref|), so this rule costs factorisations, not accuracy. Without nonlinear stores
//! every stage is linear and solved once.
//!
//! The integrator sees only a pattern, matrix values, a diagonal C and a forcing: it knows
//! nothing of chips. The forcing may switch at breakpoints; the integrator lands on each,
//! evaluates the step that ends there with the values before the switch, and restores
//! consistency of the algebraic unknowns after it.

use crate::level_table::LevelTable;
use crate::solver::{Cholesky, Parallelism, SolverError, SymbolicCholesky, SymmetricPattern};

/// γ = 2 − √2: both stages share the matrix C + (γh/2)·A (Hosea & Shampine 1996).
const GAMMA: f64 = 2.0 - std::f64::consts::SQRT_2;

/// A store's reference compliance may move this far (relative) from the one M was factorised
/// with before M is factorised again.
pub const REFRESH: f64 = 0.2;

/// Simplified Newton iterations per stage before the step is retried shorter.
const NEWTON_ITERATIONS: usize = 12;

/// A stage's Newton iteration stops when its correction is below this fraction of the
/// tolerance (weighted norm; Hairer & Wanner 1996 §IV.8 take 0.01 to 0.1 with a rate estimate,
/// we stop later and need none).
const NEWTON_STOP: f64 = 1e-3;

/// A storage whose stored volume is a nonlinear function q(x) of its unknown.
#[derive(Clone, Debug, PartialEq)]
pub struct NonlinearStore {
    pub unknown: usize,
    pub law: StoreLaw,
}

/// The laws of [`NonlinearStore`].
#[derive(Clone, Debug, PartialEq)]
pub enum StoreLaw {
    /// A trapped gas: with p_abs = x + `offset` its volume is k/p_abs (Boyle), so the liquid it
    /// has taken in is q(x) = −k/(x + offset) + const, and its compliance dq/dx =
    /// k/(x + offset)².
    Gas {
        /// p_abs·V_gas [Pa·m³].
        k: f64,
        /// Absolute pressure minus the unknown [Pa].
        offset: f64,
    },
    /// An open well with a level–volume table: the surface stands h = (x − `empty`)/`rho_g`
    /// above the bottom, so q(x) = V(h) and dq/dx = A(h)/(ρ·g).
    Well {
        table: LevelTable,
        /// The unknown's value with the well just empty: p_gas + ρ·g·bottom [Pa].
        empty: f64,
        /// ρ·g [Pa/m].
        rho_g: f64,
    },
}

impl NonlinearStore {
    /// Stored volume q(x), up to a constant; `None` when a gas's absolute pressure is not
    /// positive.
    fn stored(&self, x: f64) -> Option<f64> {
        match &self.law {
            StoreLaw::Gas { k, offset } => {
                let p = x + offset;
                (p > 0.0).then(|| -k / p)
            }
            StoreLaw::Well {
                table,
                empty,
                rho_g,
            } => Some(table.volume((x - empty) / rho_g)),
        }
    }

    /// dq/dx at x: a gas's k/(x + offset)², a table well's A(h)/(ρ·g) (the cross-section of
    /// the row interval holding its level; at a row, the interval above).
    fn slope(&self, x: f64) -> f64 {
        match &self.law {
            StoreLaw::Gas { k, offset } => {
                let p = x + offset;
                k / (p * p)
            }
            StoreLaw::Well {
                table,
                empty,
                rho_g,
            } => table.area((x - empty) / rho_g) / rho_g,
        }
    }
}

/// Most stores × unknowns for which the stage iteration keeps M⁻¹ of every store's unit
/// vector (the exact Newton correction, [`Woodbury`]); above it the iteration is the
/// simplified one.
const WOODBURY_LIMIT: usize = 4_000_000;

/// The columns Z = M⁻¹·U of the stores' unit vectors U and S = Uᵀ·Z, for exact Newton
/// corrections on the factor of M = C_ref + s·A: the stage Jacobian is J = M + U·D·Uᵀ with
/// D = diag(q'(y) − C_ref) on the stores only, so by the Sherman–Morrison–Woodbury identity
/// (Hager, "Updating the inverse of a matrix", SIAM Review 31, 1989)
///   J⁻¹·r = v − Z·(I + D·S)⁻¹·D·Uᵀ·v,  v = M⁻¹·r,
/// one extra k×k solve per iteration. A table well's cross-section jumps at its rows, where
/// the simplified iteration (contraction |1 − C/C_ref|) would crawl or diverge; the exact one
/// takes one or two iterations per row crossed.
struct Woodbury {
    /// Z, column-major: column j is M⁻¹·e(store j).
    z: Vec<f64>,
    /// S = Uᵀ·Z, row-major k×k.
    s: Vec<f64>,
}

impl Woodbury {
    fn new(
        factor: &Cholesky<'_>,
        stores: &[NonlinearStore],
        n: usize,
    ) -> Result<Option<Self>, SolverError> {
        let k = stores.len();
        if k == 0 || n.saturating_mul(k) > WOODBURY_LIMIT {
            return Ok(None);
        }
        let mut z = vec![0.0; n * k];
        for (j, st) in stores.iter().enumerate() {
            z[j * n + st.unknown] = 1.0;
        }
        factor.solve_in_place(&mut z)?;
        let mut s = vec![0.0; k * k];
        for (i, si) in stores.iter().enumerate() {
            for j in 0..k {
                s[i * k + j] = z[j * n + si.unknown];
            }
        }
        Ok(Some(Woodbury { z, s }))
    }

    /// v ← J⁻¹·r from v = M⁻¹·r, with d[j] = q'(y) − C_ref at store j; false if I + D·S is
    /// singular.
    fn correct(&self, stores: &[NonlinearStore], d: &[f64], v: &mut [f64]) -> bool {
        let k = stores.len();
        let n = v.len();
        let mut m = vec![0.0; k * k];
        let mut w: Vec<f64> = (0..k).map(|i| d[i] * v[stores[i].unknown]).collect();
        for i in 0..k {
            for j in 0..k {
                m[i * k + j] = d[i] * self.s[i * k + j] + if i == j { 1.0 } else { 0.0 };
            }
        }
        if !solve_dense(&mut m, &mut w, k) {
            return false;
        }
        for (j, wj) in w.iter().enumerate() {
            if *wj != 0.0 {
                let col = &self.z[j * n..(j + 1) * n];
                for (vi, zi) in v.iter_mut().zip(col) {
                    *vi -= wj * zi;
                }
            }
        }
        true
    }
}

/// Solve the dense k×k system m·x = b in place (Gaussian elimination with partial pivoting);
/// false when a pivot vanishes.
fn solve_dense(m: &mut [f64], b: &mut [f64], k: usize) -> bool {
    for c in 0..k {
        let p = (c..k)
            .max_by(|&i, &j| m[i * k + c].abs().total_cmp(&m[j * k + c].abs()))
            .unwrap_or(c);
        if m[p * k + c] == 0.0 || !m[p * k + c].is_finite() {
            return false;
        }
        if p != c {
            for j in 0..k {
                m.swap(p * k + j, c * k + j);
            }
            b.swap(p, c);
        }
        for i in c + 1..k {
            let f = m[i * k + c] / m[c * k + c];
            for j in c..k {
                m[i * k + j] -= f * m[c * k + j];
            }
            b[i] -= f * b[c];
        }
    }
    for c in (0..k).rev() {
        let mut x = b[c];
        for j in c + 1..k {
            x -= m[c * k + j] * b[j];
        }
        b[c] = x / m[c * k + c];
    }
    true
}

/// Why a time integration stopped.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum IntegrationError {
    #[error(transparent)]
    Solver(#[from] SolverError),
    #[error(
        "the step size fell to {step:.3e} s at t = {time:.6e} s without meeting the tolerance; \
         the drives may change faster than the run can follow"
    )]
    StepTooSmall { time: f64, step: f64 },
    #[error("more than {steps} steps were needed to reach the end; shorten the run or loosen the tolerance")]
    TooManySteps { steps: usize },
}

/// The assembled system: `a` are the values of A on `pattern`, `c[u]` the storage of unknown u
/// (zero where the unknown is algebraic), `diag[u]` the slot of u's diagonal entry. The
/// unknowns in `stores` store q(x) instead of c·x ([`NonlinearStore`]; their `c` is ignored).
pub struct LinearDae<'a> {
    pub pattern: &'a SymmetricPattern,
    pub a: &'a [f64],
    pub diag: &'a [usize],
    pub c: &'a [f64],
    pub stores: &'a [NonlinearStore],
}

/// The right-hand side b(t). `before` asks for the value just before `t` when a drive
/// switches exactly at `t` (the step that ends on a breakpoint uses it).
pub trait Forcing {
    fn rhs(&self, t: f64, before: bool, out: &mut [f64]);
    /// Times (sorted) at which b(t) jumps or kinks; steps land on them.
    fn breakpoints(&self) -> Vec<f64>;
}

/// Tolerances and limits.
#[derive(Clone, Copy, Debug)]
pub struct Options {
    /// Relative tolerance on every unknown.
    pub rtol: f64,
    /// Absolute tolerance on every unknown (units of x).
    pub atol: f64,
    /// First step (default: a millionth of the run).
    pub first_step: Option<f64>,
    /// Most accepted steps before giving up.
    pub max_steps: usize,
    /// Time at which the state `x0` is given (a run resumed after a switch of the model).
    pub start: f64,
    /// Longest step [s] (default: no limit).
    pub max_step: f64,
}

impl Default for Options {
    fn default() -> Self {
        Options {
            rtol: 1e-6,
            atol: 1e-6,
            first_step: None,
            max_steps: 1_000_000,
            start: 0.0,
            max_step: f64::INFINITY,
        }
    }
}

/// States at the requested output times, and what it cost.
#[derive(Clone, Debug, Default)]
pub struct Trajectory {
    pub times: Vec<f64>,
    pub states: Vec<Vec<f64>>,
    /// The state at the end of the run (at `end`).
    pub last: Vec<f64>,
    /// Where the run ended: `t_end`, or the time a step callback asked to stop at.
    pub end: f64,
    pub steps: usize,
    pub rejected: usize,
    pub factorizations: usize,
}

/// Accepted step: the three stage values, for dense output and the caller's events.
pub struct Step<'s> {
    pub t0: f64,
    pub h: f64,
    pub x0: &'s [f64],
    pub xg: &'s [f64],
    pub x1: &'s [f64],
}

impl Step<'_> {
    /// Quadratic interpolation through (t0, x0), (t0 + γh, xg), (t0 + h, x1) for unknown `u`.
    pub fn at(&self, u: usize, t: f64) -> f64 {
        let s = (t - self.t0) / self.h;
        let l0 = (s - GAMMA) * (s - 1.0) / GAMMA;
        let l1 = s * (s - 1.0) / (GAMMA * (GAMMA - 1.0));
        let l2 = s * (s - GAMMA) / (1.0 - GAMMA);
        l0 * self.x0[u] + l1 * self.xg[u] + l2 * self.x1[u]
    }
}

struct Work<'a> {
    dae: &'a LinearDae<'a>,
    symbolic: SymbolicCholesky,
    factorizations: std::cell::Cell<usize>,
}

impl Work<'_> {
    /// Factor C + s·A.
    fn factor(&self, s: f64, c: &[f64]) -> Result<Cholesky<'_>, SolverError> {
        let mut m: Vec<f64> = self.dae.a.iter().map(|v| s * v).collect();
        for (u, &slot) in self.dae.diag.iter().enumerate() {
            m[slot] += c[u];
        }
        self.factorizations.set(self.factorizations.get() + 1);
        self.symbolic.factorize(self.dae.pattern, &m)
    }

    /// f = −A·x + b.
    fn f(&self, x: &[f64], b: &[f64], out: &mut [f64]) {
        self.dae.pattern.multiply(self.dae.a, x, out);
        for (o, bi) in out.iter_mut().zip(b) {
            *o = bi - *o;
        }
    }

    /// The storage diagonal at state x: c, with each nonlinear store's dq/dx at x.
    fn compliances(&self, x: &[f64]) -> Vec<f64> {
        let mut c = self.dae.c.to_vec();
        for g in self.dae.stores {
            c[g.unknown] = g.slope(x[g.unknown]);
        }
        c
    }

    /// Stored volume of every unknown at x into `out` (c·x, q(x) for nonlinear stores); false
    /// when a gas's absolute pressure is not positive.
    fn stored(&self, x: &[f64], out: &mut [f64]) -> bool {
        for (u, o) in out.iter_mut().enumerate() {
            *o = self.dae.c[u] * x[u];
        }
        for g in self.dae.stores {
            match g.stored(x[g.unknown]) {
                Some(q) => out[g.unknown] = q,
                None => return false,
            }
        }
        true
    }

    /// Solve q(y) + s·A·y = rhs for y by simplified Newton with `factor` (M = c_ref + s·A),
    /// from the first iterate already in `y`; false when it does not converge.
    #[allow(clippy::too_many_arguments)]
    fn newton(
        &self,
        m: &Factored<'_>,
        s: f64,
        rhs: &[f64],
        y: &mut [f64],
        options: &Options,
        scratch: &mut [f64],
        ay: &mut [f64],
    ) -> Result<bool, SolverError> {
        let stores = self.dae.stores;
        if stores.is_empty() {
            return Ok(true);
        }
        let mut d = vec![0.0; stores.len()];
        for _ in 0..NEWTON_ITERATIONS {
            if !self.stored(y, scratch) {
                return Ok(false);
            }
            self.dae.pattern.multiply(self.dae.a, y, ay);
            for u in 0..y.len() {
                scratch[u] += s * ay[u] - rhs[u];
            }
            m.factor.solve_in_place(scratch)?;
            if let Some(exact) = &m.exact {
                for (dj, st) in d.iter_mut().zip(stores) {
                    *dj = st.slope(y[st.unknown]) - m.c_ref[st.unknown];
                }
                if d.iter().any(|v| *v != 0.0) && !exact.correct(stores, &d, scratch) {
                    return Ok(false);
                }
            }
            let mut norm = 0.0f64;
            for u in 0..y.len() {
                y[u] -= scratch[u];
                norm = norm.max(scratch[u].abs() / (options.atol + options.rtol * y[u].abs()));
            }
            if !norm.is_finite() {
                return Ok(false);
            }
            if norm <= NEWTON_STOP {
                return Ok(true);
            }
        }
        Ok(false)
    }
}

/// A factor of M = C_ref + s·A for steps of length `h`, with what the stage iteration needs.
struct Factored<'s> {
    h: f64,
    c_ref: Vec<f64>,
    factor: Cholesky<'s>,
    exact: Option<Woodbury>,
}

/// Make the algebraic unknowns consistent with the differential ones at time t by one backward
/// Euler step of length `eta` (tiny): the differential unknowns move by O(eta·ẋ).
fn make_consistent(
    w: &Work<'_>,
    forcing: &dyn Forcing,
    t: f64,
    eta: f64,
    x: &mut [f64],
) -> Result<(), SolverError> {
    let n = x.len();
    let mut b = vec![0.0; n];
    forcing.rhs(t, false, &mut b);
    let c = w.compliances(x);
    let mut rhs: Vec<f64> = (0..n).map(|u| c[u] * x[u] + eta * b[u]).collect();
    let factor = w.factor(eta, &c)?;
    factor.solve_in_place(&mut rhs)?;
    x.copy_from_slice(&rhs);
    Ok(())
}

/// Integrate from x0 at `options.start` to `t_end`, reporting the state at every time in
/// `outputs` (sorted, within [start, t_end]) from the dense output. `on_step` sees every
/// accepted step and may return a time within it at which to stop (the outputs up to that
/// time are reported and `last` is the dense output there), e.g. where a well runs dry.
pub fn integrate(
    dae: &LinearDae<'_>,
    forcing: &dyn Forcing,
    x0: &[f64],
    t_end: f64,
    outputs: &[f64],
    options: Options,
    on_step: &mut dyn FnMut(&Step<'_>) -> Option<f64>,
) -> Result<Trajectory, IntegrationError> {
    let n = x0.len();
    let symbolic = SymbolicCholesky::analyse(dae.pattern, Parallelism::Sequential)?;
    let w = Work {
        dae,
        symbolic,
        factorizations: std::cell::Cell::new(0),
    };
    let mut out = Trajectory::default();
    let mut x = x0.to_vec();
    let start = options.start;
    let eta = 1e-12 * t_end.max(1e-300);
    make_consistent(&w, forcing, start, eta, &mut x)?;
    let mut next_out = 0;
    while next_out < outputs.len() && outputs[next_out] <= start {
        out.times.push(outputs[next_out]);
        out.states.push(x.clone());
        next_out += 1;
    }
    let mut stops: Vec<f64> = forcing
        .breakpoints()
        .into_iter()
        .filter(|&b| b > start && b < t_end)
        .collect();
    stops.push(t_end);
    let mut stop = 0;
    let mut t = start;
    let mut h = options.first_step.unwrap_or(1e-6 * (t_end - start));
    let k = (-3.0 * GAMMA * GAMMA + 4.0 * GAMMA - 2.0) / (12.0 * (2.0 - GAMMA));
    let (mut bn, mut bg, mut b1) = (vec![0.0; n], vec![0.0; n], vec![0.0; n]);
    let (mut fnn, mut fg, mut f1) = (vec![0.0; n], vec![0.0; n], vec![0.0; n]);
    // The factor of M, its step and the storage diagonal C_ref it was made with.
    let mut factored: Option<Factored<'_>> = None;
    let mut xg = vec![0.0; n];
    let mut x1 = vec![0.0; n];
    let mut e = vec![0.0; n];
    let (mut q0, mut qg, mut rhs, mut scratch, mut ay) = (
        vec![0.0; n],
        vec![0.0; n],
        vec![0.0; n],
        vec![0.0; n],
        vec![0.0; n],
    );
    while t < t_end {
        let target = stops[stop];
        let hs = h.min(options.max_step).min(target - t);
        let lands = hs >= target - t;
        let t1 = if lands { target } else { t + hs };
        let hs = t1 - t;
        if hs <= 1e-14 * t_end.max(t) {
            return Err(IntegrationError::StepTooSmall { time: t, step: hs });
        }
        let fresh = |c_ref: &[f64]| {
            dae.stores.iter().all(|g| {
                let c = g.slope(x[g.unknown]);
                (c / c_ref[g.unknown] - 1.0).abs() <= REFRESH
            })
        };
        let m = match factored.take() {
            Some(m) if m.h == hs && fresh(&m.c_ref) => factored.insert(m),
            _ => {
                let c_ref = w.compliances(&x);
                let factor = w.factor(0.5 * GAMMA * hs, &c_ref)?;
                let exact = Woodbury::new(&factor, dae.stores, n)?;
                factored.insert(Factored {
                    h: hs,
                    c_ref,
                    factor,
                    exact,
                })
            }
        };
        let (c_ref, factor) = (&m.c_ref, &m.factor);
        forcing.rhs(t, false, &mut bn);
        forcing.rhs(t + GAMMA * hs, false, &mut bg);
        forcing.rhs(t1, lands && stop + 1 < stops.len(), &mut b1);
        w.f(&x, &bn, &mut fnn);
        let half = 0.5 * GAMMA * hs;
        // Trapezoidal stage: q(xg) + half·A·xg = q(x) + half·(f(x) + b(tg)). The first
        // iterate is one Newton step from xg = x (exact when every storage is linear).
        let mut converged = w.stored(&x, &mut q0);
        for u in 0..n {
            xg[u] = dae.c[u] * x[u] + half * (fnn[u] + bg[u]);
        }
        for g in dae.stores {
            let u = g.unknown;
            xg[u] = c_ref[u] * x[u] + half * (fnn[u] + bg[u]);
        }
        factor.solve_in_place(&mut xg)?;
        if converged && !dae.stores.is_empty() {
            for u in 0..n {
                rhs[u] = q0[u] + half * (fnn[u] + bg[u]);
            }
            converged = w.newton(m, half, &rhs, &mut xg, &options, &mut scratch, &mut ay)?;
        }
        // BDF2 stage: q(x1) + half·A·x1 = a1·q(xg) − a0·q(x) + half·b(t1), from x1 = xg.
        let a1 = 1.0 / (GAMMA * (2.0 - GAMMA));
        let a0 = (1.0 - GAMMA) * (1.0 - GAMMA) * a1;
        for u in 0..n {
            x1[u] = dae.c[u] * (a1 * xg[u] - a0 * x[u]) + half * b1[u];
        }
        if converged && !dae.stores.is_empty() {
            converged = w.stored(&xg, &mut qg);
            for u in 0..n {
                rhs[u] = a1 * qg[u] - a0 * q0[u] + half * b1[u];
            }
            for g in dae.stores {
                let u = g.unknown;
                x1[u] = rhs[u] + c_ref[u] * xg[u] - qg[u];
            }
        }
        factor.solve_in_place(&mut x1)?;
        if converged && !dae.stores.is_empty() {
            converged = w.newton(m, half, &rhs, &mut x1, &options, &mut scratch, &mut ay)?;
        }
        if !converged {
            // The stage equations were not solved: retry shorter with a fresh factor.
            out.rejected += 1;
            factored = None;
            h = 0.5 * hs;
            continue;
        }
        w.f(&xg, &bg, &mut fg);
        w.f(&x1, &b1, &mut f1);
        for u in 0..n {
            e[u] = 2.0
                * k
                * hs
                * (fnn[u] / GAMMA - fg[u] / (GAMMA * (1.0 - GAMMA)) + f1[u] / (1.0 - GAMMA));
        }
        factor.solve_in_place(&mut e)?;
        let norm = (0..n)
            .map(|u| e[u].abs() / (options.atol + options.rtol * x[u].abs().max(x1[u].abs())))
            .fold(0.0, f64::max);
        let grow = if norm == 0.0 {
            5.0
        } else {
            (0.9 * norm.powf(-1.0 / 3.0)).clamp(0.2, 5.0)
        };
        if norm > 1.0 {
            out.rejected += 1;
            h = hs * grow.min(0.9);
            continue;
        }
        out.steps += 1;
        if out.steps > options.max_steps {
            return Err(IntegrationError::TooManySteps {
                steps: options.max_steps,
            });
        }
        let step = Step {
            t0: t,
            h: hs,
            x0: &x,
            xg: &xg,
            x1: &x1,
        };
        let cut = on_step(&step).map(|tc| tc.clamp(t, t1));
        let reach = cut.unwrap_or(t1);
        while next_out < outputs.len() && outputs[next_out] <= reach {
            let to = outputs[next_out];
            out.times.push(to);
            out.states.push((0..n).map(|u| step.at(u, to)).collect());
            next_out += 1;
        }
        if let Some(tc) = cut {
            let xc: Vec<f64> = (0..n).map(|u| step.at(u, tc)).collect();
            out.last = xc;
            out.end = tc;
            out.factorizations = w.factorizations.get();
            return Ok(out);
        }
        x.copy_from_slice(&x1);
        t = t1;
        // Keep the step (and its factor) when the controller would grow it only a little.
        let base = if lands { h.max(hs) } else { hs };
        h = if grow > 1.5 {
            base.max(hs * grow)
        } else if grow >= 1.0 {
            base
        } else {
            hs * grow
        };
        if lands {
            stop += 1;
            if stop < stops.len() {
                factored = None;
                make_consistent(&w, forcing, t, eta, &mut x)?;
            }
        }
    }
    out.last = x;
    out.end = t;
    out.factorizations = w.factorizations.get();
    Ok(out)
}
