//! Dead ends and series chains eliminated exactly before the sparse factorisation.
//!
//! Most of a chip is dead ends and chains of channels in series. Before the sparse Cholesky
//! factorisation, every unknown with at most two neighbouring unknowns is eliminated in O(1),
//! repeatedly (eliminating one lowers its neighbours' degrees, so trees, ladders and every
//! series–parallel part reduce completely); only what is left (e.g. the inside of a grid) goes
//! to the approximate-minimum-degree ordering and the supernodal factor. This is the
//! minimum-degree rule applied first to the vertices whose elimination creates at most one
//! fill edge (George & Liu, *Computer Solution of Large Sparse Positive Definite Systems*,
//! 1981), which in network terms is the series–parallel reduction of circuit analysis
//! (common practice): a node with one neighbour is a dead end, a node with two is a series
//! joint whose two conductances become one, g₁g₂/(g₁ + g₂), merged in parallel with any
//! existing channel between its neighbours. The ordering, not the arithmetic, dominates a
//! tree's or a ladder's factorisation; done this way it costs O(nodes + channels).
//!
//! Why not plain Schur updates of the assembled matrix: they subtract, a_jj − a_vj²/a_vv, and
//! lose a conductance far smaller than its neighbours' (the assembled diagonal Σg has already
//! rounded it away). The reduction is instead carried on the network form of the matrix —
//! edge conductances w ≥ 0 and each unknown's conductance to the pressure ports s ≥ 0, with
//! the pivot d = s + Σw formed from them — so every update is a sum of positive terms and each
//! reduced value carries a relative error of a few units of rounding, whatever the ratio of
//! the conductances (the idea of Grassmann, Taksar & Heyman 1985, Oper. Res. 33, for Markov
//! chains). The ill-conditioning the assembled system has is still detected: a pivot below
//! ε times the unknown's assembled diagonal is what the full factorisation would have failed
//! on, and is reported as such (the balance checks of the solve work on that matrix too).
//!
//! Symbolic and numeric work are split as in the factorisation itself: [`Plan::new`] decides
//! the elimination order, the fill edges and the reduced pattern (and analyses it) once per
//! topology; [`Plan::factorize`] replays the order on new conductances in a few array passes.
//! Dead ends are peeled first from a 16-byte record per unknown alone (the XORs of its live
//! neighbours' indices and edges name the last one), so a tree never builds neighbour lists;
//! then the unknowns are renumbered in elimination order ([`Plan::renumber`]), because on a
//! network numbered at random (a random tree) the replay and the substitutions would
//! otherwise visit memory at random, and at 10⁶ unknowns that, not the arithmetic, is the
//! cost.
//! Pressures of eliminated unknowns are recovered by back substitution, in reverse order; an
//! unknown that carries no drive and no conductance to a port, between neighbours at equal
//! pressure, takes that pressure exactly (a loop hanging off one node then carries exactly 0).

use super::KirchhoffSystem;
use crate::solver::{Cholesky, Parallelism, SolverError, SymbolicCholesky, SymmetricPattern};

/// No index.
const NONE: u32 = u32::MAX;

/// A series joint is eliminated only when one of its neighbours has at most this many entries
/// in its neighbour list (the check that the two are not already joined scans that list); a
/// joint between two hubs stays in the reduced system instead, which keeps the work O(n).
const SCAN_LIMIT: usize = 64;

/// One elimination: unknown `v`, its neighbours `j`, `k` (or [`NONE`]) through edges `e1`,
/// `e2`, and `e3` the edge between `j` and `k` that receives the series conductance.
#[derive(Clone, Copy, Debug)]
struct Step {
    v: u32,
    j: u32,
    k: u32,
    e1: u32,
    e2: u32,
    e3: u32,
}

/// The elimination order, fill and reduced system of one topology (see the module
/// documentation).
#[derive(Debug)]
pub(crate) struct Plan {
    n: usize,
    /// Edge slots: an original edge is its slot in the full pattern, fill edges follow.
    edges: usize,
    /// Per channel: its edge, or [`NONE`] when an end is a pressure port.
    channel_edge: Vec<u32>,
    /// Per channel: its two ends' unknowns, [`NONE`] at a pressure port.
    channel_ends: Vec<[u32; 2]>,
    /// In the numbering of [`Plan::renumber`]: step t eliminates unknown t.
    steps: Vec<Step>,
    /// Unknown (numbered as in [`Plan::renumber`]) → unknown of the system; the last
    /// `n − steps.len()` are the kept unknowns, in their reduced order.
    old_of: Vec<u32>,
    /// Edges left between kept unknowns: (edge, reduced a, reduced b) and their value slots.
    live: Vec<(u32, u32, u32)>,
    live_slot: Vec<usize>,
    diag_slot: Vec<usize>,
    pattern: SymmetricPattern,
    symbolic: Option<SymbolicCholesky>,
}

/// Per unknown, everything the elimination of dead ends reads about it in one 16-byte record
/// (one cache line is fetched per visit, not one per array: on a random tree the visits are
/// random, and 10⁶ records stay within a large last-level cache).
#[derive(Clone, Copy, Debug)]
struct Rec {
    /// Live neighbouring unknowns (distinct).
    degree: u32,
    /// XOR of the live neighbours' indices and of their edges' slots: with one live
    /// neighbour left, these name it and its edge without scanning the list.
    xn: u32,
    xe: u32,
    /// 0 = not queued, 1 = queued as a joint, 2 = queued as a dead end.
    queued: u8,
    alive: bool,
}

/// Where an unknown's neighbour list lies in [`Adjacency::pool`]: start, live-or-stale
/// entries, capacity.
#[derive(Clone, Copy, Debug, Default)]
struct List {
    start: usize,
    len: u32,
    cap: u32,
}

/// Growable neighbour lists (neighbour, edge) in one pool, with lazy removal of eliminated
/// neighbours.
struct Adjacency {
    rec: Vec<Rec>,
    /// Empty until series joints are eliminated ([`Adjacency::build_lists`]).
    list: Vec<List>,
    pool: Vec<(u32, u32)>,
}

impl Adjacency {
    /// Neighbour lists of the live unknowns, from the pattern (no fill edge exists yet: only
    /// dead ends, which add none, have been eliminated). Each list has room for two more.
    fn build_lists(&mut self, full: &SymmetricPattern) {
        let mut total = 0usize;
        self.list = self
            .rec
            .iter()
            .map(|r| {
                let cap = if r.alive { r.degree + 2 } else { 0 };
                total += cap as usize;
                List {
                    start: total - cap as usize,
                    len: 0,
                    cap,
                }
            })
            .collect();
        self.pool = vec![(NONE, NONE); total];
        for j in 0..full.dim() {
            if !self.rec[j].alive {
                continue;
            }
            let (first, rows) = full.column(j);
            for (t, &i) in rows.iter().enumerate() {
                if i == j || !self.rec[i].alive {
                    continue;
                }
                let e = (first + t) as u32;
                for (x, y) in [(i, j), (j, i)] {
                    let l = &mut self.list[x];
                    self.pool[l.start + l.len as usize] = (y as u32, e);
                    l.len += 1;
                }
            }
        }
    }

    fn compact(&mut self, v: usize) {
        let List { start, len, .. } = self.list[v];
        let mut w = 0;
        for r in 0..len as usize {
            let entry = self.pool[start + r];
            if self.rec[entry.0 as usize].alive {
                self.pool[start + w] = entry;
                w += 1;
            }
        }
        self.list[v].len = w as u32;
    }

    fn push(&mut self, v: usize, u: u32, e: u32) {
        if self.list[v].len == self.list[v].cap {
            self.compact(v);
        }
        let List { start, len, cap } = self.list[v];
        if len == cap {
            let l = len as usize;
            let cap = 2 * l + 2;
            let new = self.pool.len();
            self.pool.extend_from_within(start..start + l);
            self.pool.resize(new + cap, (NONE, NONE));
            self.list[v].start = new;
            self.list[v].cap = cap as u32;
        }
        let l = &mut self.list[v];
        self.pool[l.start + l.len as usize] = (u, e);
        l.len += 1;
    }

    fn entries(&self, v: usize) -> &[(u32, u32)] {
        let List { start, len, .. } = self.list[v];
        &self.pool[start..start + len as usize]
    }

    /// Eliminate the queued unknowns (dead ends, and series joints when `with_joints`: those
    /// need the neighbour lists), queueing neighbours as their degrees fall; each elimination
    /// is recorded in `steps`, fill edges numbered from `edges` on.
    fn eliminate(
        &mut self,
        ends: &mut Vec<u32>,
        joints: &mut Vec<u32>,
        steps: &mut Vec<Step>,
        edges: &mut usize,
        with_joints: bool,
    ) {
        while let Some(v) = ends
            .pop()
            .or_else(|| if with_joints { joints.pop() } else { None })
        {
            let v = v as usize;
            let rv = self.rec[v];
            if !rv.alive || rv.degree > 2 {
                continue;
            }
            let mut nb = [(NONE, NONE); 2];
            let count = rv.degree as usize;
            if count == 1 {
                nb[0] = (rv.xn, rv.xe);
            } else if count == 2 {
                let mut found = 0;
                for &(u, e) in self.entries(v) {
                    if self.rec[u as usize].alive {
                        nb[found] = (u, e);
                        found += 1;
                        if found == 2 {
                            break;
                        }
                    }
                }
            }
            let [(j, e1), (k, e2)] = nb;
            let mut e3 = NONE;
            if count == 2 {
                let (a, b) = if self.list[j as usize].len <= self.list[k as usize].len {
                    (j as usize, k)
                } else {
                    (k as usize, j)
                };
                if self.list[a].len as usize > SCAN_LIMIT {
                    self.compact(a);
                }
                if self.list[a].len as usize > SCAN_LIMIT {
                    self.rec[v].queued = 0;
                    continue;
                }
                e3 = self
                    .entries(a)
                    .iter()
                    .find(|&&(u, _)| u == b && self.rec[u as usize].alive)
                    .map_or(NONE, |&(_, e)| e);
            }
            self.rec[v].alive = false;
            for (u, e) in [(j, e1), (k, e2)].into_iter().filter(|&(u, _)| u != NONE) {
                let r = &mut self.rec[u as usize];
                r.xn ^= v as u32;
                r.xe ^= e;
            }
            if count == 2 && e3 == NONE {
                e3 = *edges as u32;
                *edges += 1;
                self.push(j as usize, k, e3);
                self.push(k as usize, j, e3);
                for (x, y) in [(j, k), (k, j)] {
                    let r = &mut self.rec[x as usize];
                    r.xn ^= y;
                    r.xe ^= e3;
                }
            } else {
                for u in [j, k].into_iter().filter(|&u| u != NONE) {
                    self.rec[u as usize].degree -= 1;
                }
            }
            for u in [j, k].into_iter().filter(|&u| u != NONE) {
                self.enqueue(u as usize, ends, joints);
            }
            steps.push(Step {
                v: v as u32,
                j,
                k,
                e1,
                e2,
                e3,
            });
        }
    }

    /// Queue `u` if it has become a dead end or a series joint.
    fn enqueue(&mut self, u: usize, ends: &mut Vec<u32>, joints: &mut Vec<u32>) {
        let r = &mut self.rec[u];
        if r.degree <= 1 && r.queued != 2 {
            r.queued = 2;
            ends.push(u as u32);
        } else if r.degree == 2 && r.queued == 0 {
            r.queued = 1;
            joints.push(u as u32);
        }
    }
}

impl Plan {
    /// Decide the elimination for `system` and analyse what is left.
    pub(crate) fn new(system: &KirchhoffSystem, par: Parallelism) -> Result<Plan, SolverError> {
        let n = system.dim();
        let full = system.pattern();
        // Indices are u32; a system beyond that is factorised whole.
        let fits = n < NONE as usize / 2 && full.nnz() < NONE as usize / 2;
        let blank = Rec {
            degree: 0,
            xn: 0,
            xe: 0,
            queued: 0,
            alive: true,
        };
        let mut adj = Adjacency {
            rec: vec![blank; n],
            list: Vec::new(),
            pool: Vec::new(),
        };
        for j in 0..n {
            let (first, rows) = full.column(j);
            for (t, &i) in rows.iter().enumerate().filter(|(_, &i)| i != j) {
                let e = (first + t) as u32;
                for (x, y) in [(i, j), (j, i)] {
                    let r = &mut adj.rec[x];
                    r.degree += 1;
                    r.xn ^= y as u32;
                    r.xe ^= e;
                }
            }
        }
        let mut edges = full.nnz();
        let mut steps = Vec::with_capacity(n);
        let (mut ends, mut joints) = (Vec::new(), Vec::new());
        if fits {
            // Dead ends first, with no neighbour lists: a dead end's count and XORs name its
            // one neighbour. A tree is eliminated completely here.
            ends.extend(
                (0..n as u32)
                    .rev()
                    .filter(|&v| adj.rec[v as usize].degree <= 1),
            );
            for r in adj.rec.iter_mut().filter(|r| r.degree <= 1) {
                r.queued = 2;
            }
            adj.eliminate(&mut ends, &mut joints, &mut steps, &mut edges, false);
            // Then series joints, which need the neighbour lists of what is left.
            if adj.rec.iter().any(|r| r.alive && r.degree == 2) {
                adj.build_lists(full);
                joints.clear();
                for v in (0..n).rev() {
                    if adj.rec[v].alive {
                        adj.rec[v].queued = 0;
                        adj.enqueue(v, &mut ends, &mut joints);
                    }
                }
                adj.eliminate(&mut ends, &mut joints, &mut steps, &mut edges, true);
            }
        }
        // The reduced system: kept unknowns and the edges left between them.
        let kept: Vec<u32> = (0..n as u32)
            .filter(|&v| adj.rec[v as usize].alive)
            .collect();
        let m = kept.len();
        let mut live = Vec::new();
        if m > 0 {
            let mut reduced_of = vec![NONE; n];
            for (r, &v) in kept.iter().enumerate() {
                reduced_of[v as usize] = r as u32;
            }
            if adj.list.is_empty() {
                adj.build_lists(full);
            }
            for (r, &v) in kept.iter().enumerate() {
                for &(u, e) in adj.entries(v as usize) {
                    if adj.rec[u as usize].alive && u > v {
                        live.push((e, r as u32, reduced_of[u as usize]));
                    }
                }
            }
        }
        drop(adj);
        let mut positions: Vec<(usize, usize)> = (0..m).map(|i| (i, i)).collect();
        positions.extend(live.iter().map(|&(_, a, b)| (a as usize, b as usize)));
        let (pattern, slot) = SymmetricPattern::from_positions(m, &positions);
        let symbolic = if m > 0 {
            Some(SymbolicCholesky::analyse(&pattern, par)?)
        } else {
            None
        };
        let mut channel_edge = Vec::with_capacity(system.channels());
        let mut channel_ends = Vec::with_capacity(system.channels());
        let unknown = |node: u32| match system.unknown_of[node as usize] {
            super::NONE => NONE,
            u => u as u32,
        };
        for (&[from, to], s) in system.ends().iter().zip(&system.slots) {
            channel_edge.push(if s.off == super::NONE {
                NONE
            } else {
                s.off as u32
            });
            channel_ends.push([unknown(from), unknown(to)]);
        }
        let mut plan = Plan {
            n,
            edges,
            channel_edge,
            channel_ends,
            steps,
            old_of: kept,
            live_slot: slot[m..].to_vec(),
            diag_slot: slot[..m].to_vec(),
            live,
            pattern,
            symbolic,
        };
        plan.renumber();
        Ok(plan)
    }

    /// Number the unknowns in elimination order (step t eliminates unknown t; the kept ones
    /// follow, in their reduced order) and the edges in the order the steps first use them,
    /// so that the numeric replay and the substitutions walk their arrays nearly in order;
    /// [`Plan::old_of`] maps back. On input `old_of` holds the kept unknowns.
    fn renumber(&mut self) {
        let kept = std::mem::take(&mut self.old_of);
        let mut new_of = vec![NONE; self.n];
        let mut old_of = Vec::with_capacity(self.n);
        for st in self.steps.iter().map(|st| st.v).chain(kept) {
            new_of[st as usize] = old_of.len() as u32;
            old_of.push(st);
        }
        let mut edge_new = vec![NONE; self.edges];
        let mut next = 0u32;
        let mut number = |e: u32| {
            if e == NONE {
                return NONE;
            }
            let slot = &mut edge_new[e as usize];
            if *slot == NONE {
                *slot = next;
                next += 1;
            }
            *slot
        };
        let unknown = |u: u32| if u == NONE { NONE } else { new_of[u as usize] };
        for (t, st) in self.steps.iter_mut().enumerate() {
            *st = Step {
                v: t as u32,
                j: unknown(st.j),
                k: unknown(st.k),
                e1: number(st.e1),
                e2: number(st.e2),
                e3: number(st.e3),
            };
        }
        for live in &mut self.live {
            live.0 = number(live.0);
        }
        for e in &mut self.channel_edge {
            *e = number(*e);
        }
        for ends in &mut self.channel_ends {
            *ends = ends.map(unknown);
        }
        self.edges = next as usize;
        self.old_of = old_of;
    }

    /// Unknowns eliminated before the factorisation (the rest are factorised by Cholesky).
    pub(crate) fn eliminated(&self) -> usize {
        self.steps.len()
    }

    /// Replay the elimination on conductances `g` and factorise what is left. A pivot below ε
    /// times the unknown's assembled diagonal Σg fails as the full factorisation would (see
    /// the module documentation) — leaving out the conductance towards free parts already
    /// eliminated (a pump or dead end with no conductance of its own to a port, which hands
    /// back exactly nothing to the pivot).
    pub(crate) fn factorize(&self, g: &[f64]) -> Result<Eliminated<'_>, SolverError> {
        let mut w = vec![0.0; self.edges];
        let mut s = vec![0.0; self.n];
        let mut diagonal = vec![0.0; self.n];
        for ((&e, &[a, b]), &gk) in self.channel_edge.iter().zip(&self.channel_ends).zip(g) {
            for u in [a, b].into_iter().filter(|&u| u != NONE) {
                diagonal[u as usize] += gk;
            }
            if e != NONE {
                w[e as usize] += gk;
            } else if a != NONE {
                s[a as usize] += gk;
            } else if b != NONE {
                s[b as usize] += gk;
            }
        }
        let mut numeric = Vec::with_capacity(self.steps.len());
        // Conductance from each unknown into free parts already eliminated (see `factorize`).
        let mut free = vec![0.0; self.n];
        for (t, st) in self.steps.iter().enumerate() {
            let sv = s[st.v as usize];
            let w1 = if st.e1 == NONE {
                0.0
            } else {
                w[st.e1 as usize]
            };
            let w2 = if st.e2 == NONE {
                0.0
            } else {
                w[st.e2 as usize]
            };
            let d = sv + w1 + w2;
            let floor = f64::EPSILON * (diagonal[t] - free[t]);
            if d.is_nan() || d <= floor {
                return Err(SolverError::NotPositiveDefinite {
                    pivot: t,
                    n: self.n,
                });
            }
            if sv != 0.0 {
                if st.j != NONE {
                    s[st.j as usize] += w1 / d * sv;
                }
                if st.k != NONE {
                    s[st.k as usize] += w2 / d * sv;
                }
            } else {
                if st.j != NONE {
                    free[st.j as usize] += w1;
                }
                if st.k != NONE {
                    free[st.k as usize] += w2;
                }
            }
            if st.e3 != NONE {
                w[st.e3 as usize] += w1 / d * w2;
            }
            numeric.push(Pivot {
                signed_d: if sv == 0.0 { -d } else { d },
                m1: w1 / d,
                m2: w2 / d,
            });
        }
        let cholesky = match &self.symbolic {
            None => None,
            Some(symbolic) => {
                let mut values = vec![0.0; self.pattern.nnz()];
                let mut sum = s[self.steps.len()..].to_vec();
                for (&(e, a, b), &slot) in self.live.iter().zip(&self.live_slot) {
                    let we = w[e as usize];
                    values[slot] -= we;
                    sum[a as usize] += we;
                    sum[b as usize] += we;
                }
                for (&slot, &d) in self.diag_slot.iter().zip(&sum) {
                    values[slot] = d;
                }
                let shift = self.steps.len();
                Some(
                    symbolic
                        .factorize(&self.pattern, &values)
                        .map_err(|e| match e {
                            SolverError::NotPositiveDefinite { pivot, .. } => {
                                SolverError::NotPositiveDefinite {
                                    pivot: shift + pivot,
                                    n: self.n,
                                }
                            }
                            other => other,
                        })?,
                )
            }
        };
        Ok(Eliminated {
            plan: self,
            pivots: numeric,
            cholesky,
        })
    }
}

/// One eliminated unknown's pivot d = s + w₁ + w₂ > 0 and multipliers wᵢ/d, in 24 bytes:
/// the pivot is stored negated when the unknown had no conductance to a port (s = 0, a
/// "free" unknown).
#[derive(Clone, Copy, Debug)]
struct Pivot {
    signed_d: f64,
    m1: f64,
    m2: f64,
}

impl Pivot {
    fn d(self) -> f64 {
        self.signed_d.abs()
    }

    fn free(self) -> bool {
        self.signed_d < 0.0
    }
}

/// The numeric elimination for one set of conductances, with the factor of what is left.
#[derive(Debug)]
pub(crate) struct Eliminated<'p> {
    plan: &'p Plan,
    pivots: Vec<Pivot>,
    cholesky: Option<Cholesky<'p>>,
}

impl Eliminated<'_> {
    /// Solve A·x = b for every column of `rhs` (column-major, n rows each), in place.
    pub(crate) fn solve_in_place(&self, rhs: &mut [f64]) -> Result<(), SolverError> {
        let plan = self.plan;
        let n = plan.n;
        if n == 0 {
            return Ok(());
        }
        let ne = plan.steps.len();
        let columns = rhs.len() / n;
        // Into the plan's numbering (one gather), where the replay walks nearly in order.
        let mut x = Vec::with_capacity(rhs.len());
        for col in rhs.chunks(n) {
            x.extend(plan.old_of.iter().map(|&v| col[v as usize]));
        }
        for col in x.chunks_mut(n) {
            for (t, (st, p)) in plan.steps.iter().zip(&self.pivots).enumerate() {
                let bv = col[t];
                if bv != 0.0 {
                    if st.j != NONE {
                        col[st.j as usize] += p.m1 * bv;
                    }
                    if st.k != NONE {
                        col[st.k as usize] += p.m2 * bv;
                    }
                }
            }
        }
        if let Some(cholesky) = &self.cholesky {
            let m = n - ne;
            let mut y = Vec::with_capacity(m * columns);
            for col in x.chunks(n) {
                y.extend_from_slice(&col[ne..]);
            }
            cholesky.solve_in_place(&mut y)?;
            for (col, ys) in x.chunks_mut(n).zip(y.chunks(m)) {
                col[ne..].copy_from_slice(ys);
            }
        }
        for col in x.chunks_mut(n) {
            for (t, (st, p)) in plan.steps.iter().zip(&self.pivots).enumerate().rev() {
                let bv = col[t];
                let xj = if st.j == NONE {
                    0.0
                } else {
                    col[st.j as usize]
                };
                let xk = if st.k == NONE { xj } else { col[st.k as usize] };
                col[t] = if p.free() && bv == 0.0 && st.j != NONE && xj == xk {
                    xj
                } else {
                    bv / p.d() + p.m1 * xj + p.m2 * if st.k == NONE { 0.0 } else { xk }
                };
            }
        }
        // Back to the system's numbering (one scatter).
        for (col, xs) in rhs.chunks_mut(n).zip(x.chunks(n)) {
            for (&v, &xv) in plan.old_of.iter().zip(xs) {
                col[v as usize] = xv;
            }
        }
        Ok(())
    }
}
