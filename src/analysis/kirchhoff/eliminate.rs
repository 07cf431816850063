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
//! The symbolic elimination keeps each unknown's live neighbours in a 32-byte record of its
//! own — up to three, exactly: eliminating a neighbour removes it, or puts the fill edge's
//! other end in its place, so the count never grows — and a series joint finds its two
//! neighbours, and whether they are already joined, in records it reads anyway (unknowns with
//! more neighbours spill to shared lists). On a network with fewer than 2.5 neighbours per
//! unknown on average (trees, chains), the dead ends are first peeled from 16-byte records
//! alone (the XORs of the live neighbours' indices and edges name the last one): the visits
//! are random there, and half the bytes stay in cache. The steps are numbered as they are
//! taken — step t eliminates unknown t, and consumes the next edges of the plan's numbering —
//! so the replay and the substitutions walk their arrays nearly in order; on a network
//! numbered at random (a random tree) they would otherwise visit memory at random, and at
//! 10⁶ unknowns that, not the arithmetic, is the cost.
//! Pressures of eliminated unknowns are recovered by back substitution, in reverse order; an
//! unknown that carries no drive and no conductance to a port, between neighbours at equal
//! pressure, takes that pressure exactly (a loop hanging off one node then carries exactly 0).

use super::KirchhoffSystem;
use crate::solver::{Cholesky, Parallelism, SolverError, SymbolicCholesky, SymmetricPattern};

/// No index.
const NONE: u32 = u32::MAX;

/// Tags an unknown in [`Plan::channel_to`] (unknowns and edges stay below 2³¹: a network
/// has fewer than 2³¹ nodes and channels together).
const PORT_SIDE: u32 = 1 << 31;

/// A series joint between two unknowns whose neighbours have both spilled to lists is
/// eliminated only when the shorter list holds at most this many entries (the check that the
/// two are not already joined scans it); a joint between two hubs stays in the reduced
/// system instead, which keeps the work O(n).
const SCAN_LIMIT: usize = 64;

/// The elimination order, fill and reduced system of one topology (see the module
/// documentation).
#[derive(Debug)]
pub(crate) struct Plan {
    n: usize,
    /// Edges, numbered as [`Plan::factorize`] reads them: step t's edges to its neighbours
    /// (none, one or two) follow those of step t − 1, then the edges left between kept
    /// unknowns.
    edges: usize,
    /// Per channel, where its conductance goes: its edge; or, with [`PORT_SIDE`] set, the
    /// unknown at its one end that is not a pressure port; [`NONE`] if both ends are.
    channel_to: Vec<u32>,
    /// Step t eliminates unknown t (the plan's numbering): its neighbours, [`NONE`] where it
    /// has fewer than two (the first is set when the second is).
    neighbours: Vec<[u32; 2]>,
    /// Step t: the edge between its two neighbours that receives the series conductance, or
    /// [`NONE`].
    merge: Vec<u32>,
    /// Unknown of the plan → unknown of the system; the last `n − neighbours.len()` are the
    /// kept unknowns, in their reduced order.
    old_of: Vec<u32>,
    /// Edges left between kept unknowns: (edge, reduced a, reduced b) and their value slots.
    live: Vec<(u32, u32, u32)>,
    live_slot: Vec<usize>,
    diag_slot: Vec<usize>,
    pattern: SymmetricPattern,
    symbolic: Option<SymbolicCholesky>,
}

/// The elimination order as it is decided, in the system's numbering of unknowns and edges;
/// [`Plan::finish`] turns it into the plan's numbering.
struct Order {
    /// Unknown of the system → its step, [`NONE`] while alive.
    new_of: Vec<u32>,
    /// Step → unknown of the system.
    old_of: Vec<u32>,
    /// Edge (pattern slot, then fill edges) → its number in the plan, given when a step
    /// consumes it ([`NONE`] until then).
    edge_new: Vec<u32>,
    consumed: u32,
    /// Per step: the neighbours and the merge edge, in the system's numbering.
    neighbours: Vec<[u32; 2]>,
    merge: Vec<u32>,
}

impl Order {
    fn new(n: usize, edges: usize) -> Order {
        Order {
            new_of: vec![NONE; n],
            old_of: Vec::with_capacity(n),
            edge_new: vec![NONE; edges],
            consumed: 0,
            neighbours: Vec::with_capacity(n),
            merge: Vec::with_capacity(n),
        }
    }

    /// Record the elimination of `v`, whose edges `(j, e1)` and `(k, e2)` it consumes (each
    /// [`NONE`] when absent; `j` is set when `k` is), merging into edge `e3`.
    #[inline]
    fn record(&mut self, v: u32, [(j, e1), (k, e2)]: [(u32, u32); 2], e3: u32) {
        self.new_of[v as usize] = self.old_of.len() as u32;
        self.old_of.push(v);
        for e in [e1, e2].into_iter().filter(|&e| e != NONE) {
            self.edge_new[e as usize] = self.consumed;
            self.consumed += 1;
        }
        self.neighbours.push([j, k]);
        self.merge.push(e3);
    }

    /// A new fill edge's number in the system's edge space.
    fn add_fill(&mut self) -> u32 {
        self.edge_new.push(NONE);
        (self.edge_new.len() - 1) as u32
    }
}

/// Per unknown, everything the elimination of dead ends reads about it in one 16-byte record
/// (one cache line is fetched per visit, not one per array: on a random tree the visits are
/// random, and 10⁶ records stay within a large last-level cache).
#[derive(Clone, Copy, Debug)]
struct Rec {
    /// Live neighbouring unknowns (distinct).
    degree: u32,
    /// XOR of the live neighbours' indices and of their edges' slots: with one live
    /// neighbour left, these name it and its edge without scanning the pattern.
    xn: u32,
    xe: u32,
    /// Queued as a dead end.
    queued: bool,
    alive: bool,
}

/// The records of every unknown, from the pattern.
fn records(full: &SymmetricPattern) -> Vec<Rec> {
    let blank = Rec {
        degree: 0,
        xn: 0,
        xe: 0,
        queued: false,
        alive: true,
    };
    let mut rec = vec![blank; full.dim()];
    for j in 0..full.dim() {
        let (first, rows) = full.column(j);
        for (t, &i) in rows.iter().enumerate().skip(1) {
            let e = (first + t) as u32;
            for (x, y) in [(i, j), (j, i)] {
                let r = &mut rec[x];
                r.degree += 1;
                r.xn ^= y as u32;
                r.xe ^= e;
            }
        }
    }
    rec
}

/// Peel the dead ends (repeatedly: a tree goes completely) from the records alone, the
/// lowest first, then each neighbour as it becomes one.
fn peel_dead_ends(rec: &mut [Rec], order: &mut Order) {
    let mut ends: Vec<u32> = (0..rec.len() as u32)
        .rev()
        .filter(|&v| rec[v as usize].degree <= 1)
        .collect();
    for r in rec.iter_mut().filter(|r| r.degree <= 1) {
        r.queued = true;
    }
    while let Some(v) = ends.pop() {
        let rv = rec[v as usize];
        if !rv.alive || rv.degree > 1 {
            continue;
        }
        rec[v as usize].alive = false;
        let nb = if rv.degree == 1 {
            let (j, e) = (rv.xn, rv.xe);
            let r = &mut rec[j as usize];
            r.xn ^= v;
            r.xe ^= e;
            r.degree -= 1;
            if r.degree <= 1 && !r.queued {
                r.queued = true;
                ends.push(j);
            }
            (j, e)
        } else {
            (NONE, NONE)
        };
        order.record(v, [nb, (NONE, NONE)], NONE);
    }
}

/// Neighbours kept in an unknown's own [`Near`] record (more spill to a shared pool).
const INLINE: usize = 3;

/// Per unknown, 32 bytes: its live neighbours and their edges. An unknown with at most
/// [`INLINE`] of them when the records are built keeps them here, exactly (eliminating a
/// neighbour removes it, or replaces it by the fill edge's other end, so the count never
/// grows); one with more keeps them in a list of [`Joints::lists`], where eliminated
/// neighbours are skipped and removed lazily.
#[derive(Clone, Copy, Debug)]
struct Near {
    /// Live neighbours.
    degree: u32,
    /// The spilled list, or [`NONE`] when the neighbours are inline.
    spill: u32,
    nbr: [u32; INLINE],
    edge: [u32; INLINE],
}

impl Near {
    /// The inline slot holding neighbour `u`.
    #[inline]
    fn slot_of(&self, u: u32) -> Option<usize> {
        self.nbr[..self.degree as usize]
            .iter()
            .position(|&x| x == u)
    }
}

/// Where a spilled neighbour list lies in [`Joints::pool`]: start, live-or-stale entries,
/// capacity.
#[derive(Clone, Copy, Debug)]
struct List {
    start: usize,
    len: u32,
    cap: u32,
}

/// Whether two unknowns are joined by an edge.
enum Between {
    Edge(u32),
    Absent,
    /// Both are hubs whose lists are too long to search ([`SCAN_LIMIT`]).
    Unknown,
}

/// The elimination of dead ends and series joints on [`Near`] records.
struct Joints {
    near: Vec<Near>,
    /// Per unknown: alive, and queued as a joint or as a dead end (1 byte: the array stays
    /// in cache).
    state: Vec<u8>,
    lists: Vec<List>,
    pool: Vec<(u32, u32)>,
}

const ALIVE: u8 = 1;
const QUEUED_JOINT: u8 = 2;
const QUEUED_END: u8 = 4;

impl Joints {
    /// The neighbours of every unknown, or of those `rec` has left alive, from the pattern.
    fn new(full: &SymmetricPattern, rec: Option<&[Rec]>) -> Joints {
        let n = full.dim();
        let alive = |v: usize| rec.is_none_or(|r| r[v].alive);
        let blank = Near {
            degree: 0,
            spill: NONE,
            nbr: [NONE; INLINE],
            edge: [NONE; INLINE],
        };
        let mut joints = Joints {
            near: vec![blank; n],
            state: (0..n).map(|v| if alive(v) { ALIVE } else { 0 }).collect(),
            lists: Vec::new(),
            pool: Vec::new(),
        };
        for a in (0..n).filter(|&a| alive(a)) {
            let (first, rows) = full.column(a);
            debug_assert_eq!(rows.first(), Some(&a));
            for (t, &b) in rows.iter().enumerate().skip(1) {
                if alive(b) {
                    let e = (first + t) as u32;
                    joints.push(a as u32, b as u32, e);
                    joints.push(b as u32, a as u32, e);
                }
            }
        }
        joints
    }

    /// Whether a live unknown is a series joint.
    fn any_joint(&self) -> bool {
        let joint = |(r, &st): (&Near, &u8)| st & ALIVE != 0 && r.degree == 2;
        self.near.iter().zip(&self.state).any(joint)
    }

    /// Eliminate the dead ends, the lowest first, then each neighbour as it becomes one.
    fn peel_dead_ends(&mut self, order: &mut Order) {
        let mut ends = Vec::new();
        for v in (0..self.near.len() as u32).rev() {
            if self.near[v as usize].degree <= 1 {
                self.state[v as usize] |= QUEUED_END;
                ends.push(v);
            }
        }
        self.eliminate(&mut ends, &mut Vec::new(), order, false);
    }

    /// Eliminate the dead ends and series joints left, dead ends first.
    fn eliminate_joints(&mut self, order: &mut Order) {
        let (mut ends, mut joints) = (Vec::new(), Vec::new());
        self.queue_all(&mut ends, &mut joints);
        self.eliminate(&mut ends, &mut joints, order, true);
    }

    fn alive(&self, v: u32) -> bool {
        self.state[v as usize] & ALIVE != 0
    }

    /// Add neighbour `u` through edge `e` to `x` (a new neighbour: building, or a fill edge
    /// at a spilled unknown).
    #[inline]
    fn push(&mut self, x: u32, u: u32, e: u32) {
        let r = &mut self.near[x as usize];
        let d = r.degree as usize;
        if r.spill == NONE && d < INLINE {
            r.nbr[d] = u;
            r.edge[d] = e;
            r.degree += 1;
        } else {
            self.push_spilled(x, u, e);
        }
    }

    #[cold]
    fn push_spilled(&mut self, x: u32, u: u32, e: u32) {
        let r = self.near[x as usize];
        if r.spill == NONE {
            // The inline slots are full: the neighbours move to a list of their own.
            let cap = 2 * INLINE + 2;
            self.lists.push(List {
                start: self.pool.len(),
                len: INLINE as u32,
                cap: cap as u32,
            });
            self.pool.extend(r.nbr.into_iter().zip(r.edge));
            self.pool
                .resize(self.pool.len() + cap - INLINE, (NONE, NONE));
            self.near[x as usize].spill = (self.lists.len() - 1) as u32;
        }
        let l = self.near[x as usize].spill as usize;
        if self.lists[l].len == self.lists[l].cap {
            self.compact(l);
        }
        let List { start, len, cap } = self.lists[l];
        if len == cap {
            let cap = 2 * len as usize + 2;
            let new = self.pool.len();
            self.pool.extend_from_within(start..start + len as usize);
            self.pool.resize(new + cap, (NONE, NONE));
            self.lists[l].start = new;
            self.lists[l].cap = cap as u32;
        }
        let l = &mut self.lists[l];
        self.pool[l.start + l.len as usize] = (u, e);
        l.len += 1;
        self.near[x as usize].degree += 1;
    }

    /// Drop the entries of eliminated unknowns from spilled list `l`.
    fn compact(&mut self, l: usize) {
        let List { start, len, .. } = self.lists[l];
        let mut w = 0;
        for r in 0..len as usize {
            let entry = self.pool[start + r];
            if self.alive(entry.0) {
                self.pool[start + w] = entry;
                w += 1;
            }
        }
        self.lists[l].len = w as u32;
    }

    /// The entries of spilled list `l` (none for [`NONE`]).
    fn entries(&self, l: u32) -> &[(u32, u32)] {
        if l == NONE {
            return &[];
        }
        let List { start, len, .. } = self.lists[l as usize];
        &self.pool[start..start + len as usize]
    }

    /// The live neighbours of `v`, which has at most two (the smaller first), with their
    /// edges; [`NONE`] pairs where absent.
    #[inline]
    fn pair(&self, v: u32) -> [(u32, u32); 2] {
        let r = &self.near[v as usize];
        let mut nb = [(NONE, NONE); 2];
        if r.spill == NONE {
            for (i, slot) in nb.iter_mut().enumerate().take(r.degree as usize) {
                *slot = (r.nbr[i], r.edge[i]);
            }
        } else {
            let live = self
                .entries(r.spill)
                .iter()
                .filter(|&&(u, _)| self.alive(u));
            for (slot, &entry) in nb.iter_mut().zip(live) {
                *slot = entry;
            }
        }
        if nb[1].0 < nb[0].0 {
            nb.swap(0, 1);
        }
        nb
    }

    /// The edge between live unknowns `j` and `k`, from the list of one that is inline (or
    /// the shorter spilled one).
    #[inline]
    fn between(&mut self, j: u32, k: u32) -> Between {
        let (lj, lk) = (self.near[j as usize].spill, self.near[k as usize].spill);
        if lj == NONE || lk == NONE {
            let (a, b) = if lj == NONE { (j, k) } else { (k, j) };
            let r = &self.near[a as usize];
            return r
                .slot_of(b)
                .map_or(Between::Absent, |i| Between::Edge(r.edge[i]));
        }
        let (l, b) = if self.lists[lj as usize].len <= self.lists[lk as usize].len {
            (lj as usize, k)
        } else {
            (lk as usize, j)
        };
        if self.lists[l].len as usize > SCAN_LIMIT {
            self.compact(l);
        }
        if self.lists[l].len as usize > SCAN_LIMIT {
            return Between::Unknown;
        }
        self.entries(l as u32)
            .iter()
            .find(|&&(u, _)| u == b && self.alive(u))
            .map_or(Between::Absent, |&(_, e)| Between::Edge(e))
    }

    /// Neighbour `v` of `u` is eliminated: forget it, or put `(k, e)` in its place when `k`
    /// is given (a fill edge).
    #[inline]
    fn replace(&mut self, u: u32, v: u32, fill: Option<(u32, u32)>) {
        let r = &mut self.near[u as usize];
        if r.spill != NONE {
            r.degree -= 1;
            if let Some((k, e)) = fill {
                self.push(u, k, e);
            }
            return;
        }
        let Some(i) = r.slot_of(v) else {
            debug_assert!(false, "{v} is not a neighbour of {u}");
            return;
        };
        match fill {
            Some((k, e)) => {
                r.nbr[i] = k;
                r.edge[i] = e;
            }
            None => {
                let last = r.degree as usize - 1;
                r.nbr[i] = r.nbr[last];
                r.edge[i] = r.edge[last];
                r.degree -= 1;
            }
        }
    }

    /// Queue every live unknown that is a dead end or a series joint, the lowest first.
    fn queue_all(&mut self, ends: &mut Vec<u32>, joints: &mut Vec<u32>) {
        for v in (0..self.near.len() as u32).rev() {
            if self.alive(v) {
                self.state[v as usize] = ALIVE;
                self.enqueue(v, ends, joints);
            }
        }
    }

    /// Queue `u` if it has become a dead end or a series joint.
    #[inline]
    fn enqueue(&mut self, u: u32, ends: &mut Vec<u32>, joints: &mut Vec<u32>) {
        let degree = self.near[u as usize].degree;
        let state = &mut self.state[u as usize];
        if degree <= 1 && *state & QUEUED_END == 0 {
            *state |= QUEUED_END;
            ends.push(u);
        } else if degree == 2 && *state & (QUEUED_END | QUEUED_JOINT) == 0 {
            *state |= QUEUED_JOINT;
            joints.push(u);
        }
    }

    /// Eliminate the queued unknowns, dead ends before joints (joints only `with_joints`),
    /// queueing neighbours as their degrees fall; fill edges are numbered on from the
    /// pattern's slots.
    fn eliminate(
        &mut self,
        ends: &mut Vec<u32>,
        joints: &mut Vec<u32>,
        order: &mut Order,
        with_joints: bool,
    ) {
        while let Some(v) = ends
            .pop()
            .or_else(|| if with_joints { joints.pop() } else { None })
        {
            let degree = self.near[v as usize].degree;
            if !self.alive(v) || degree > 2 {
                continue;
            }
            let nb = self.pair(v);
            let [(j, _), (k, _)] = nb;
            let mut e3 = NONE;
            if degree == 2 {
                match self.between(j, k) {
                    Between::Edge(e) => e3 = e,
                    Between::Absent => {}
                    Between::Unknown => {
                        self.state[v as usize] &= !QUEUED_JOINT;
                        continue;
                    }
                }
            }
            self.state[v as usize] = 0;
            if degree == 2 && e3 == NONE {
                e3 = order.add_fill();
                self.replace(j, v, Some((k, e3)));
                self.replace(k, v, Some((j, e3)));
            } else {
                for u in [j, k].into_iter().filter(|&u| u != NONE) {
                    self.replace(u, v, None);
                }
            }
            for u in [j, k].into_iter().filter(|&u| u != NONE) {
                self.enqueue(u, ends, joints);
            }
            order.record(v, nb, e3);
        }
    }

    /// The edges left between live unknowns, as (edge, a, b) with a < b, in the system's
    /// numbering, ordered by a then b (whichever way the elimination started).
    fn live_edges(&self) -> Vec<(u32, u32, u32)> {
        let mut live = Vec::new();
        for (a, r) in (0..).zip(&self.near).filter(|&(a, _)| self.alive(a)) {
            let inline = if r.spill == NONE {
                r.degree as usize
            } else {
                0
            };
            let inline = r.nbr.into_iter().zip(r.edge).take(inline);
            let spilled = self.entries(r.spill).iter().copied();
            let from = live.len();
            for (b, e) in inline.chain(spilled) {
                if b > a && self.alive(b) {
                    live.push((e, a, b));
                }
            }
            live[from..].sort_unstable_by_key(|&(_, _, b)| b);
        }
        live
    }
}

/// The pattern's edges between unknowns that are `alive`, as (edge, a, b) with a < b.
fn pattern_edges(full: &SymmetricPattern, alive: impl Fn(u32) -> bool) -> Vec<(u32, u32, u32)> {
    let mut live = Vec::new();
    for a in (0..full.dim() as u32).filter(|&a| alive(a)) {
        let (first, rows) = full.column(a as usize);
        for (t, &b) in rows.iter().enumerate().skip(1) {
            if alive(b as u32) {
                live.push(((first + t) as u32, a, b as u32));
            }
        }
    }
    live
}

impl Plan {
    /// Decide the elimination for `system` and analyse what is left.
    pub(crate) fn new(system: &KirchhoffSystem, par: Parallelism) -> Result<Plan, SolverError> {
        let (n, edges) = (system.dim(), system.pattern().nnz() - system.dim());
        // 2.5 neighbours or more per unknown on average (ladders, grids): few dead ends, so the
        // neighbour lists are built at once and serve the whole elimination. Fewer (trees,
        // chains): the dead ends are peeled from 16-byte records first, which stay in cache
        // where the visits are random, and lists are built only for what is left. Both take
        // the same steps.
        Self::build(system, par, 4 * edges >= 5 * n)
    }

    fn build(
        system: &KirchhoffSystem,
        par: Parallelism,
        lists_first: bool,
    ) -> Result<Plan, SolverError> {
        let n = system.dim();
        let full = system.pattern();
        // Indices are u32 with the top bit free (it tags `PORT_SIDE`); fill edges add at most
        // one per unknown. A system beyond that is factorised whole.
        let fits = 2 * full.nnz() < 1 << 31;
        let mut order = Order::new(n, full.nnz());
        let live = if !fits {
            pattern_edges(full, |_| true)
        } else if lists_first {
            let mut near = Joints::new(full, None);
            near.peel_dead_ends(&mut order);
            if near.any_joint() {
                near.eliminate_joints(&mut order);
            }
            near.live_edges()
        } else {
            let mut rec = records(full);
            peel_dead_ends(&mut rec, &mut order);
            if rec.iter().any(|r| r.alive && r.degree == 2) {
                let mut near = Joints::new(full, Some(&rec));
                drop(rec);
                near.eliminate_joints(&mut order);
                near.live_edges()
            } else {
                pattern_edges(full, |v| rec[v as usize].alive)
            }
        };
        Self::finish(system, par, order, live)
    }

    /// Number the kept unknowns after the eliminated ones and the edges left between them
    /// after the consumed ones, map the steps and channels into that numbering, and analyse
    /// the reduced system.
    fn finish(
        system: &KirchhoffSystem,
        par: Parallelism,
        mut order: Order,
        live: Vec<(u32, u32, u32)>,
    ) -> Result<Plan, SolverError> {
        let n = system.dim();
        let steps = order.old_of.len();
        for v in 0..n as u32 {
            if order.new_of[v as usize] == NONE {
                order.new_of[v as usize] = order.old_of.len() as u32;
                order.old_of.push(v);
            }
        }
        let m = n - steps;
        let Order {
            new_of,
            old_of,
            mut edge_new,
            mut consumed,
            mut neighbours,
            mut merge,
        } = order;
        let unknown = |u: u32| if u == NONE { NONE } else { new_of[u as usize] };
        let live: Vec<(u32, u32, u32)> = live
            .into_iter()
            .map(|(e, a, b)| {
                edge_new[e as usize] = consumed;
                consumed += 1;
                (
                    consumed - 1,
                    unknown(a) - steps as u32,
                    unknown(b) - steps as u32,
                )
            })
            .collect();
        for nb in &mut neighbours {
            *nb = nb.map(unknown);
        }
        for e in &mut merge {
            if *e != NONE {
                *e = edge_new[*e as usize];
            }
        }
        let mut positions: Vec<(usize, usize)> = (0..m).map(|i| (i, i)).collect();
        positions.extend(live.iter().map(|&(_, a, b)| (a as usize, b as usize)));
        let (pattern, slot) = SymmetricPattern::from_positions(m, &positions);
        drop(positions);
        let symbolic = if m > 0 {
            Some(SymbolicCholesky::analyse(&pattern, par)?)
        } else {
            None
        };
        let system_unknown = |node: u32| match system.unknown_of[node as usize] {
            super::NONE => NONE,
            u => new_of[u],
        };
        let ends = system.ends();
        let channel_to = (system.off.iter().enumerate())
            .map(|(c, &off)| {
                if off != super::NO_SLOT {
                    return edge_new[off as usize];
                }
                match ends[c].map(system_unknown) {
                    [NONE, NONE] => NONE,
                    [u, NONE] | [NONE, u] => u | PORT_SIDE,
                    _ => unreachable!("a channel between two unknowns has a slot"),
                }
            })
            .collect();
        Ok(Plan {
            n,
            edges: consumed as usize,
            channel_to,
            neighbours,
            merge,
            old_of,
            live_slot: slot[m..].to_vec(),
            diag_slot: slot[..m].to_vec(),
            live,
            pattern,
            symbolic,
        })
    }

    /// The assembled diagonal Σg of each eliminated unknown, from the conductances to the
    /// ports `s` and of the edges `w` before the replay: every edge is consumed by exactly
    /// one step, between its unknown and a neighbour (edges between kept unknowns are not
    /// needed: only eliminated pivots are checked here).
    fn diagonals(&self, w: &[f64], s: &[f64]) -> Vec<f64> {
        let ne = self.neighbours.len();
        let mut diagonal = s[..ne].to_vec();
        let mut next = 0;
        for (t, &[j, k]) in self.neighbours.iter().enumerate() {
            for u in [j, k] {
                if u == NONE {
                    break;
                }
                let we = w[next];
                next += 1;
                diagonal[t] += we;
                if let Some(d) = diagonal.get_mut(u as usize) {
                    *d += we;
                }
            }
        }
        diagonal
    }

    /// Unknowns eliminated before the factorisation (the rest are factorised by Cholesky).
    pub(crate) fn eliminated(&self) -> usize {
        self.neighbours.len()
    }

    /// Replay the elimination on conductances `g` and factorise what is left. A pivot below ε
    /// times the unknown's assembled diagonal Σg fails as the full factorisation would (see
    /// the module documentation) — leaving out the conductance towards free parts already
    /// eliminated (a pump or dead end with no conductance of its own to a port, which hands
    /// back exactly nothing to the pivot).
    pub(crate) fn factorize(&self, g: &[f64]) -> Result<Eliminated<'_>, SolverError> {
        let mut w = vec![0.0; self.edges];
        let mut s = vec![0.0; self.n];
        for (&to, &gk) in self.channel_to.iter().zip(g) {
            if to & PORT_SIDE == 0 {
                w[to as usize] += gk;
            } else if to != NONE {
                s[(to & !PORT_SIDE) as usize] += gk;
            }
        }
        // Per eliminated unknown: its assembled diagonal less the conductance into free parts
        // already eliminated (see above), what its pivot is held against.
        let mut held = self.diagonals(&w, &s);
        let mut pivots = Vec::with_capacity(self.neighbours.len());
        let mut multipliers = Vec::with_capacity(self.neighbours.len());
        // Step t reads the edges it consumes next in order (see `Plan::edges`).
        let mut next = 0;
        for (t, (&[j, k], &e3)) in self.neighbours.iter().zip(&self.merge).enumerate() {
            let sv = s[t];
            let mut take = |u: u32| {
                if u == NONE {
                    0.0
                } else {
                    next += 1;
                    w[next - 1]
                }
            };
            let (w1, w2) = (take(j), take(k));
            let d = sv + w1 + w2;
            let floor = f64::EPSILON * held[t];
            if d.is_nan() || d <= floor {
                return Err(SolverError::NotPositiveDefinite {
                    pivot: t,
                    n: self.n,
                });
            }
            if sv != 0.0 {
                if j != NONE {
                    s[j as usize] += w1 / d * sv;
                }
                if k != NONE {
                    s[k as usize] += w2 / d * sv;
                }
            } else {
                for (u, wu) in [(j, w1), (k, w2)] {
                    if let Some(h) = held.get_mut(u as usize) {
                        *h -= wu;
                    }
                }
            }
            if e3 != NONE {
                w[e3 as usize] += w1 / d * w2;
            }
            pivots.push(Pivot(if sv == 0.0 { -d } else { d }));
            multipliers.push([w1 / d, w2 / d]);
        }
        let cholesky = match &self.symbolic {
            None => None,
            Some(symbolic) => {
                let mut values = vec![0.0; self.pattern.nnz()];
                let mut sum = s[self.neighbours.len()..].to_vec();
                for (&(e, a, b), &slot) in self.live.iter().zip(&self.live_slot) {
                    let we = w[e as usize];
                    values[slot] -= we;
                    sum[a as usize] += we;
                    sum[b as usize] += we;
                }
                for (&slot, &d) in self.diag_slot.iter().zip(&sum) {
                    values[slot] = d;
                }
                let shift = self.neighbours.len();
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
            pivots,
            multipliers,
            cholesky,
        })
    }
}

/// One eliminated unknown's pivot d = s + w₁ + w₂ > 0, stored negated when the unknown had
/// no conductance to a port (s = 0, a "free" unknown).
#[derive(Clone, Copy, Debug)]
struct Pivot(f64);

impl Pivot {
    fn d(self) -> f64 {
        self.0.abs()
    }

    fn free(self) -> bool {
        self.0 < 0.0
    }
}

/// The numeric elimination for one set of conductances, with the factor of what is left.
#[derive(Debug)]
pub(crate) struct Eliminated<'p> {
    plan: &'p Plan,
    pivots: Vec<Pivot>,
    /// Per step, the multipliers wᵢ/d (apart from the pivots: the forward replay reads only
    /// these).
    multipliers: Vec<[f64; 2]>,
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
        let ne = plan.neighbours.len();
        let columns = rhs.len() / n;
        // Into the plan's numbering (one gather), where the replay walks nearly in order; each
        // unknown is scattered back when the back substitution has found it.
        let mut x = Vec::with_capacity(rhs.len());
        for b in rhs.chunks(n) {
            x.extend(plan.old_of.iter().map(|&v| b[v as usize]));
        }
        for col in x.chunks_mut(n) {
            for (t, (&[j, k], &[m1, m2])) in
                (plan.neighbours.iter().zip(&self.multipliers)).enumerate()
            {
                let bv = col[t];
                if bv != 0.0 {
                    if j != NONE {
                        col[j as usize] += m1 * bv;
                    }
                    if k != NONE {
                        col[k as usize] += m2 * bv;
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
        for (col, b) in x.chunks_mut(n).zip(rhs.chunks_mut(n)) {
            for (&xt, &v) in col[ne..].iter().zip(&plan.old_of[ne..]) {
                b[v as usize] = xt;
            }
            let steps = plan
                .neighbours
                .iter()
                .zip(&self.pivots)
                .zip(&self.multipliers);
            for (t, ((&[j, k], &p), &[m1, m2])) in steps.enumerate().rev() {
                let bv = col[t];
                let xj = if j == NONE { 0.0 } else { col[j as usize] };
                let xk = if k == NONE { xj } else { col[k as usize] };
                let xt = if p.free() && bv == 0.0 && j != NONE && xj == xk {
                    xj
                } else {
                    bv / p.d() + m1 * xj + m2 * if k == NONE { 0.0 } else { xk }
                };
                col[t] = xt;
                b[plan.old_of[t] as usize] = xt;
            }
        }
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::analysis::kirchhoff::testnet::{Chip, Rng};
    use crate::network::{Network, Port};
    use crate::units::Pressure;

    /// A random tree of `n` nodes with `extra` random channels, a hub joined to many of the
    /// nodes (so that neighbour lists spill), and a few pressure ports.
    fn random_network(rng: &mut Rng, n: usize, extra: usize, hub: usize) -> Network {
        let ports: Vec<Port> = (0..n)
            .map(|i| {
                if i == 0 || rng.below(50) == 0 {
                    Port::Pressure(Pressure::from_si(100.0 * i as f64))
                } else {
                    Port::Junction
                }
            })
            .collect();
        let mut chip = Chip::new(ports);
        for i in 1..n {
            chip.join(rng.below(i), i);
        }
        for _ in 0..extra {
            let (i, j) = (rng.below(n), rng.below(n));
            if i != j {
                chip.join(i, j);
            }
        }
        for _ in 0..hub {
            let j = 1 + rng.below(n - 1);
            chip.join(1.min(n - 1), j.max(2).min(n - 1));
        }
        chip.build()
    }

    /// Everything a plan decides, to compare two of them.
    fn decisions(plan: &Plan) -> impl PartialEq + std::fmt::Debug + '_ {
        (
            (&plan.neighbours, &plan.merge, &plan.old_of),
            (&plan.channel_to, &plan.live, plan.edges),
        )
    }

    #[test]
    fn both_ways_of_starting_take_the_same_steps() {
        let mut rng = Rng::new(5);
        let mut seen = [0usize; 2];
        for case in 0..300 {
            let n = 3 + rng.below(60);
            let extra = rng.below(2 * n);
            let hub = if case % 3 == 0 { rng.below(3 * n) } else { 0 };
            let net = random_network(&mut rng, n, extra, hub);
            let system = KirchhoffSystem::new(&net);
            let par = Parallelism::Sequential;
            let (lists, records) = (
                Plan::build(&system, par, true).unwrap(),
                Plan::build(&system, par, false).unwrap(),
            );
            assert_eq!(lists.neighbours, records.neighbours, "case {case}");
            assert_eq!(lists.merge, records.merge, "case {case}");
            assert_eq!(lists.old_of, records.old_of, "case {case}");
            assert_eq!(lists.live, records.live, "case {case}");
            assert_eq!(lists.channel_to, records.channel_to, "case {case}");
            assert_eq!(decisions(&lists), decisions(&records), "case {case}");
            seen[usize::from(lists.eliminated() < system.dim())] += 1;
        }
        // Both fully eliminated systems and systems with a reduced part were met.
        assert!(seen[0] > 20 && seen[1] > 20, "{seen:?}");
    }
}
