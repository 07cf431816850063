//! Where nodes and channels go on the chip picture.
//!
//! From the file: the `at:` positions (and channel `path:` points) when every node has one,
//! drawn to scale and unchanged.
//!
//! Otherwise an automatic, schematic layout (not to scale; the picture says so),
//! deterministic for a given file:
//! 1. nodes ordered by pressure (high to low, ties by file order) orient every channel;
//!    layer = longest path from the high-pressure side, so trees come out layered by their
//!    distance from the inlets and flow runs left to right;
//! 2. rungs are straightened: a node joined to a predecessor that runs on beside it (the two
//!    close a four-node cycle, as the rails of a ladder do) moves into that predecessor's
//!    layer when their channel is the steeper side of the cycle (a rung takes a larger
//!    pressure drop than a rail) and the ladder has two cells or more, so the rung is drawn
//!    straight down and the rails stay level;
//! 3. order within a layer by the barycentre of the neighbours (a few sweeps, ties by file
//!    order); heights then relaxed towards the neighbours' mean with one row between nodes
//!    of a layer (isotonic regression), so chains and rails run straight;
//! 4. channels routed orthogonally (Manhattan): straight when level or in one layer; a split
//!    fans out vertically at the splitting node, a merge collects vertically at the merging
//!    node, otherwise a step half-way.

use crate::analysis::SteadyState;
use crate::chip::Chip;
use crate::network::Network;

/// Node positions in drawing units (x right, y down) and channel polylines, each from the
/// channel's `from` node to its `to` node.
#[derive(Clone, Debug, PartialEq)]
pub struct Layout {
    pub nodes: Vec<[f64; 2]>,
    pub channels: Vec<Vec<[f64; 2]>>,
    /// True when the positions came from the chip file (drawn to scale).
    pub from_file: bool,
}

/// Compute the layout (see the module doc).
pub fn layout(chip: &Chip, state: &SteadyState) -> Layout {
    let network = &chip.network;
    let n = network.nodes.len();
    let given = &chip.layout;
    if given.node_at.len() == n && given.node_at.iter().all(Option::is_some) {
        let nodes: Vec<[f64; 2]> = given
            .node_at
            .iter()
            .map(|p| p.map(|p| [p[0], -p[1]]).unwrap_or_default())
            .collect();
        let channels = network
            .channels
            .iter()
            .enumerate()
            .map(|(k, c)| {
                let mut pts = vec![nodes[c.from.0]];
                if let Some(path) = given.channel_path.get(k) {
                    pts.extend(path.iter().map(|p| [p[0], -p[1]]));
                }
                pts.push(nodes[c.to.0]);
                pts
            })
            .collect();
        return Layout {
            nodes,
            channels,
            from_file: true,
        };
    }
    let nodes = automatic(network, &state.solution.pressures);
    let channels = route(network, &nodes);
    Layout {
        nodes,
        channels,
        from_file: false,
    }
}

/// Above this degree a node is not examined for rungs (keeps the pass linear on hubs).
const RUNG_DEGREE: usize = 8;

fn automatic(network: &Network, p: &[f64]) -> Vec<[f64; 2]> {
    let n = network.nodes.len();
    // Order by pressure, high first; ties by file order.
    let mut order: Vec<usize> = (0..n).collect();
    order.sort_by(|&a, &b| p[b].total_cmp(&p[a]).then(a.cmp(&b)));
    let mut rank = vec![0usize; n];
    for (r, &v) in order.iter().enumerate() {
        rank[v] = r;
    }
    // Edges oriented from earlier to later rank: a DAG.
    let mut succ: Vec<Vec<usize>> = vec![Vec::new(); n];
    let mut pred: Vec<Vec<usize>> = vec![Vec::new(); n];
    for c in &network.channels {
        let (a, b) = if rank[c.from.0] < rank[c.to.0] {
            (c.from.0, c.to.0)
        } else {
            (c.to.0, c.from.0)
        };
        if a != b && !succ[a].contains(&b) {
            succ[a].push(b);
            pred[b].push(a);
        }
    }
    // Layers, with rungs straightened (see the module doc).
    let drop = |a: usize, b: usize| p[a] - p[b];
    // The four-node cycles that make u→v a rung, each given by its opposite rung: v runs on
    // to x, which u's other successor y also reaches (u→y→x, u→v→x), u→v dropping more than
    // u→y; or v is reached from w, which shares a predecessor q with u (q→u→v, q→w→v), u→v
    // dropping more than w→v. (The rails of a ladder carry the flow with small drops, its
    // rungs take the large ones.)
    let cycles = |u: usize, v: usize| -> Vec<(usize, usize)> {
        let mut out = Vec::new();
        if pred[v].len() > RUNG_DEGREE || succ[v].len() > RUNG_DEGREE {
            return out;
        }
        if succ[u].len() <= RUNG_DEGREE {
            for &x in &succ[v] {
                if pred[x].len() > RUNG_DEGREE {
                    continue;
                }
                for &y in &pred[x] {
                    if y != v && succ[u].contains(&y) && drop(u, v) > drop(u, y) {
                        out.push((y, x));
                    }
                }
            }
        }
        if pred[u].len() <= RUNG_DEGREE {
            for &w in &pred[v] {
                if w == u || pred[w].len() > RUNG_DEGREE || drop(u, v) <= drop(w, v) {
                    continue;
                }
                for &q in &pred[w] {
                    if pred[u].contains(&q) {
                        out.push((q, w));
                    }
                }
            }
        }
        out
    };
    // A rung belongs to a ladder of two cells or more: it closes two cycles, or the rung
    // opposite it does (a lone split-and-merge stays a diamond).
    let is_rung = |u: usize, v: usize| {
        let c = cycles(u, v);
        c.len() >= 2 || c.iter().any(|&(a, b)| cycles(a, b).len() >= 2)
    };
    let mut layer = vec![0usize; n];
    let mut rung_below = vec![false; n];
    let mut is_rung_end = vec![false; n];
    for &v in &order {
        let base = pred[v].iter().map(|&u| layer[u] + 1).max().unwrap_or(0);
        layer[v] = base;
        for &u in &pred[v] {
            if rung_below[u] {
                continue;
            }
            let others_before = pred[v].iter().all(|&w| w == u || layer[w] < layer[u]);
            if others_before && is_rung(u, v) {
                layer[v] = layer[u];
                rung_below[u] = true;
                is_rung_end[v] = true;
                break;
            }
        }
    }
    let layers = layer.iter().max().map_or(1, |m| m + 1);
    let mut rows: Vec<Vec<usize>> = vec![Vec::new(); layers];
    for v in 0..n {
        rows[layer[v]].push(v);
    }
    // Neighbours in other layers, for ordering and heights.
    let across: Vec<Vec<usize>> = (0..n)
        .map(|v| {
            pred[v]
                .iter()
                .chain(&succ[v])
                .copied()
                .filter(|&w| layer[w] != layer[v])
                .collect()
        })
        .collect();
    let mut y = vec![0.0f64; n];
    let place = |rows: &Vec<Vec<usize>>, y: &mut Vec<f64>| {
        for row in rows {
            let mid = (row.len() as f64 - 1.0) / 2.0;
            for (i, &v) in row.iter().enumerate() {
                y[v] = i as f64 - mid;
            }
        }
    };
    place(&rows, &mut y);
    for sweep in 0..6 {
        let down = sweep % 2 == 0;
        let range: Vec<usize> = if down {
            (1..layers).collect()
        } else {
            (0..layers.saturating_sub(1)).rev().collect()
        };
        for l in range {
            let neigh = |v: usize| if down { &pred[v] } else { &succ[v] };
            let mut keyed: Vec<(f64, usize)> = rows[l]
                .iter()
                .map(|&v| {
                    let ns: Vec<usize> = neigh(v)
                        .iter()
                        .copied()
                        .filter(|&w| layer[w] != l)
                        .collect();
                    let bc = if ns.is_empty() {
                        y[v]
                    } else {
                        ns.iter().map(|&u| y[u]).sum::<f64>() / ns.len() as f64
                    };
                    (bc, v)
                })
                .collect();
            keyed.sort_by(|a, b| a.0.total_cmp(&b.0).then(a.1.cmp(&b.1)));
            rows[l] = keyed.into_iter().map(|(_, v)| v).collect();
        }
        place(&rows, &mut y);
    }
    // A rung's two ends stay next to each other in their layer (the upper one first).
    for row in &mut rows {
        keep_rungs_adjacent(row, &pred, &is_rung_end, &layer);
    }
    place(&rows, &mut y);
    // Heights: relax towards the neighbours' mean, order kept, one row apart.
    for sweep in 0..10 {
        let range: Vec<usize> = if sweep % 2 == 0 {
            (0..layers).collect()
        } else {
            (0..layers).rev().collect()
        };
        for l in range {
            let want: Vec<f64> = rows[l]
                .iter()
                .map(|&v| {
                    let ns = &across[v];
                    if ns.is_empty() {
                        y[v]
                    } else {
                        ns.iter().map(|&u| y[u]).sum::<f64>() / ns.len() as f64
                    }
                })
                .collect();
            for (&v, yv) in rows[l].iter().zip(spaced(&want)) {
                y[v] = yv;
            }
        }
    }
    // Snap to half rows (straight lines stay straight), keeping one row between neighbours.
    for row in &rows {
        let mut last = f64::NEG_INFINITY;
        for &v in row {
            let s = ((y[v] * 2.0).round() / 2.0).max(last + 1.0);
            y[v] = s;
            last = s;
        }
    }
    let top = y.iter().copied().fold(f64::INFINITY, f64::min);
    (0..n)
        .map(|v| {
            [
                layer[v] as f64,
                y[v] - if top.is_finite() { top } else { 0.0 },
            ]
        })
        .collect()
}

/// Put the lower end of each rung right after its upper end within the row.
fn keep_rungs_adjacent(
    row: &mut Vec<usize>,
    pred: &[Vec<usize>],
    rung_end: &[bool],
    layer: &[usize],
) {
    if !row.iter().any(|&v| rung_end[v]) {
        return;
    }
    let upper = |v: usize| pred[v].iter().copied().find(|&u| layer[u] == layer[v]);
    let mut out = Vec::with_capacity(row.len());
    let mut stack: Vec<usize> = Vec::new();
    for &v in row.iter().filter(|&&v| !rung_end[v] || upper(v).is_none()) {
        stack.push(v);
        while let Some(u) = stack.pop() {
            out.push(u);
            // Children in reverse so that they come out in row order.
            for &c in row.iter().rev() {
                if rung_end[c] && upper(c) == Some(u) {
                    stack.push(c);
                }
            }
        }
    }
    *row = out;
}

/// The heights nearest (least squares) to `want` with y[i+1] ≥ y[i] + 1: isotonic
/// regression of want[i] − i by pooling adjacent violators, then + i.
fn spaced(want: &[f64]) -> Vec<f64> {
    // Blocks of (sum, count).
    let mut blocks: Vec<(f64, usize)> = Vec::with_capacity(want.len());
    for (i, w) in want.iter().enumerate() {
        blocks.push((w - i as f64, 1));
        while blocks.len() >= 2 {
            let (s1, c1) = blocks[blocks.len() - 1];
            let (s0, c0) = blocks[blocks.len() - 2];
            if s0 / c0 as f64 > s1 / c1 as f64 {
                blocks.pop();
                let last = blocks.len() - 1;
                blocks[last] = (s0 + s1, c0 + c1);
            } else {
                break;
            }
        }
    }
    let mut out = Vec::with_capacity(want.len());
    for (s, c) in blocks {
        let m = s / c as f64;
        for _ in 0..c {
            let i = out.len();
            out.push(m + i as f64);
        }
    }
    out
}

/// Orthogonal routes (see the module doc), each from the channel's `from` to its `to`.
fn route(network: &Network, nodes: &[[f64; 2]]) -> Vec<Vec<[f64; 2]>> {
    let n = nodes.len();
    // Channels leaving each node to the right, and arriving from the left.
    let mut fan_out = vec![0usize; n];
    let mut fan_in = vec![0usize; n];
    for c in &network.channels {
        let (a, b) = (nodes[c.from.0], nodes[c.to.0]);
        let (l, r) = if a[0] <= b[0] {
            (c.from.0, c.to.0)
        } else {
            (c.to.0, c.from.0)
        };
        if nodes[l][0] < nodes[r][0] {
            fan_out[l] += 1;
            fan_in[r] += 1;
        }
    }
    network
        .channels
        .iter()
        .map(|c| {
            let (f, t) = (c.from.0, c.to.0);
            let flip = nodes[f][0] > nodes[t][0];
            let (l, r) = if flip { (t, f) } else { (f, t) };
            let (p, q) = (nodes[l], nodes[r]);
            let mut pts = if p[0] == q[0] || p[1] == q[1] {
                vec![p, q]
            } else if fan_out[l] > 1 && fan_out[l] >= fan_in[r] {
                vec![p, [p[0], q[1]], q]
            } else if fan_in[r] > 1 {
                vec![p, [q[0], p[1]], q]
            } else {
                let m = (p[0] + q[0]) / 2.0;
                vec![p, [m, p[1]], [m, q[1]], q]
            };
            if flip {
                pts.reverse();
            }
            pts
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn spacing_keeps_order_and_gap_nearest_to_the_wish() {
        assert_eq!(spaced(&[0.0, 5.0]), vec![0.0, 5.0]);
        // Both want 2: they share it, one row apart, centred on the wish.
        assert_eq!(spaced(&[2.0, 2.0]), vec![1.5, 2.5]);
        let y = spaced(&[3.0, 1.0, 2.0, 10.0]);
        for w in y.windows(2) {
            assert!(w[1] - w[0] >= 1.0 - 1e-12);
        }
        assert_eq!(y[3], 10.0);
    }
}
