//! Graph structure of the network: parallel edges, hysteresis, a cycle basis.

use super::solve::NetworkEdge;
use serde::{Deserialize, Serialize};
use std::collections::{BTreeMap, BTreeSet, VecDeque};

/// Closure of one cycle of the basis: the sum of ΔΔG around it, which is zero
/// for exact free energies because G is a state function.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct CycleClosure {
    /// Ligands in the order the cycle visits them (the first is not repeated at the end).
    pub ligands: Vec<String>,
    /// Σ ΔΔG around the cycle, in the campaign unit.
    pub closure: f64,
    /// √Σ σ² of the edges around the cycle.
    pub sigma: f64,
    /// |closure| > 2σ.
    pub flagged: bool,
}

/// An edge run in both directions: forward + reverse should be zero.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Hysteresis {
    /// First ligand of the forward direction.
    pub a: String,
    /// Second ligand of the forward direction.
    pub b: String,
    /// ΔΔG(a → b) (inverse-variance mean when run more than once).
    pub forward: f64,
    /// σ of `forward`.
    pub forward_sigma: f64,
    /// ΔΔG(b → a).
    pub reverse: f64,
    /// σ of `reverse`.
    pub reverse_sigma: f64,
    /// forward + reverse.
    pub hysteresis: f64,
    /// √(σ_f² + σ_r²).
    pub sigma: f64,
    /// |hysteresis| > 2σ.
    pub flagged: bool,
}

/// Inverse-variance mean of (value, σ) pairs.
fn weighted_mean(values: &[(f64, f64)]) -> (f64, f64) {
    let w: f64 = values.iter().map(|v| 1.0 / (v.1 * v.1)).sum();
    let m = values.iter().map(|v| v.0 / (v.1 * v.1)).sum::<f64>() / w;
    (m, (1.0 / w).sqrt())
}

/// Oriented measurements of each unordered pair, keyed by (low, high) ligand index,
/// each value expressed in the direction low → high, plus which original
/// direction it was run in (true: low → high).
type Pairs = BTreeMap<(usize, usize), Vec<(f64, f64, bool)>>;

fn pairs(edges: &[NetworkEdge], index: &BTreeMap<&str, usize>) -> Pairs {
    let mut out: Pairs = BTreeMap::new();
    for e in edges {
        let (a, b) = (index[e.a.as_str()], index[e.b.as_str()]);
        if a < b {
            out.entry((a, b)).or_default().push((e.ddg, e.sigma, true));
        } else {
            out.entry((b, a))
                .or_default()
                .push((-e.ddg, e.sigma, false));
        }
    }
    out
}

/// Hysteresis of every pair run in both directions.
pub(super) fn hysteresis(
    edges: &[NetworkEdge],
    names: &[String],
    index: &BTreeMap<&str, usize>,
) -> Vec<Hysteresis> {
    let mut out = Vec::new();
    for ((lo, hi), runs) in pairs(edges, index) {
        let fwd: Vec<(f64, f64)> = runs.iter().filter(|r| r.2).map(|r| (r.0, r.1)).collect();
        // Reverse runs were stored negated (in the low → high direction); undo that.
        let rev: Vec<(f64, f64)> = runs.iter().filter(|r| !r.2).map(|r| (-r.0, r.1)).collect();
        if fwd.is_empty() || rev.is_empty() {
            continue;
        }
        // Name the direction that was listed first as forward.
        let first_forward = edges
            .iter()
            .find(|e| {
                let (a, b) = (index[e.a.as_str()], index[e.b.as_str()]);
                (a, b) == (lo, hi) || (a, b) == (hi, lo)
            })
            .map(|e| index[e.a.as_str()] == lo)
            .unwrap_or(true);
        let (f, r, a, b) = if first_forward {
            (weighted_mean(&fwd), weighted_mean(&rev), lo, hi)
        } else {
            (weighted_mean(&rev), weighted_mean(&fwd), hi, lo)
        };
        let h = f.0 + r.0;
        let s = f.1.hypot(r.1);
        out.push(Hysteresis {
            a: names[a].clone(),
            b: names[b].clone(),
            forward: f.0,
            forward_sigma: f.1,
            reverse: r.0,
            reverse_sigma: r.1,
            hysteresis: h,
            sigma: s,
            flagged: h.abs() > 2.0 * s,
        });
    }
    out
}

/// A fundamental cycle basis: a breadth-first spanning forest of the graph with
/// parallel edges merged (inverse-variance mean); each edge off the forest
/// closes one cycle through the forest.
pub(super) fn cycle_basis(
    edges: &[NetworkEdge],
    names: &[String],
    index: &BTreeMap<&str, usize>,
) -> Vec<CycleClosure> {
    let merged: BTreeMap<(usize, usize), (f64, f64)> = pairs(edges, index)
        .into_iter()
        .map(|(k, runs)| {
            let v: Vec<(f64, f64)> = runs.iter().map(|r| (r.0, r.1)).collect();
            (k, weighted_mean(&v))
        })
        .collect();
    // Oriented value of the merged edge u → v.
    let value = |u: usize, v: usize| -> (f64, f64) {
        if u < v {
            merged[&(u, v)]
        } else {
            let (x, s) = merged[&(v, u)];
            (-x, s)
        }
    };
    let forest = spanning_forest(names.len(), merged.keys().copied());
    merged
        .keys()
        .filter(|k| !forest.tree.contains(k))
        .map(|&(u, v)| {
            let path = forest.cycle_through(u, v);
            let (mut closure, mut var) = (0.0, 0.0);
            for i in 0..path.len() {
                let (d, s) = value(path[i], path[(i + 1) % path.len()]);
                closure += d;
                var += s * s;
            }
            let sigma = var.sqrt();
            CycleClosure {
                ligands: path.iter().map(|&i| names[i].clone()).collect(),
                closure,
                sigma,
                flagged: closure.abs() > 2.0 * sigma,
            }
        })
        .collect()
}

/// A breadth-first spanning forest: each node's parent and depth, and the
/// forest's edges as (low, high) pairs.
struct Forest {
    parent: Vec<Option<usize>>,
    depth: Vec<usize>,
    tree: BTreeSet<(usize, usize)>,
}

fn spanning_forest(n: usize, pairs: impl Iterator<Item = (usize, usize)>) -> Forest {
    let mut adj: Vec<Vec<usize>> = vec![Vec::new(); n];
    for (a, b) in pairs {
        adj[a].push(b);
        adj[b].push(a);
    }
    let mut f = Forest {
        parent: vec![None; n],
        depth: vec![0; n],
        tree: BTreeSet::new(),
    };
    let mut seen = vec![false; n];
    for root in 0..n {
        if seen[root] {
            continue;
        }
        seen[root] = true;
        let mut queue = VecDeque::from([root]);
        while let Some(u) = queue.pop_front() {
            for &v in &adj[u] {
                if !seen[v] {
                    seen[v] = true;
                    f.parent[v] = Some(u);
                    f.depth[v] = f.depth[u] + 1;
                    f.tree.insert((u.min(v), u.max(v)));
                    queue.push_back(v);
                }
            }
        }
    }
    f
}

impl Forest {
    /// The cycle closed by the off-forest edge u – v: the tree path
    /// u → … → lca → … → v (then v → u closes it).
    fn cycle_through(&self, u: usize, v: usize) -> Vec<usize> {
        let (mut x, mut y) = (u, v);
        let (mut up, mut down) = (vec![x], vec![y]);
        while x != y {
            if self.depth[x] >= self.depth[y] {
                x = self.parent[x].expect("same tree");
                up.push(x);
            } else {
                y = self.parent[y].expect("same tree");
                down.push(y);
            }
        }
        down.pop();
        down.reverse();
        up.extend(down);
        up
    }
}
