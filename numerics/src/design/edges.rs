//! Edges chosen by expected variance.
//!
//! The input is a symmetric matrix of allowed pairs, each with the variance its
//! edge is expected to have at the standard sampling (a difficulty score in
//! variance units; a missing pair is not an allowed edge). With weights
//! w_e = 1/v_e, the network's ligand covariance is L⁺ (weighted least squares,
//! [`super::laplacian_pinv`]), and a design is A-optimal when it minimises
//! tr(L⁺), the sum of the ligands' variances (Xu 2019, J. Chem. Inf. Model. 59,
//! 4720; the criterion is Kiefer's A-optimality, Kiefer 1959, J. R. Stat. Soc. B
//! 21, 272).
//!
//! [`propose_edges`] starts from the minimum spanning tree of the variances
//! (Kruskal 1956, Proc. Am. Math. Soc. 7, 48), adds the edges that repair the
//! rules (every ligand on a cycle, no two ligands further apart than the path
//! bound), fills the edge budget greedily by the largest drop in tr(L⁺), and then
//! improves the design by Fedorov exchange (Fedorov 1972, *Theory of Optimal
//! Experiments*): swap an edge in for an edge out while the objective falls and
//! the rules hold. Adding edge e changes L⁺ by a rank-one term
//! (Sherman & Morrison 1950, Ann. Math. Stat. 21, 124):
//! L⁺ − w L⁺aaᵀL⁺ / (1 + w aᵀL⁺a), so each candidate costs O(n).

use super::graph::{adjacency, diameter, hops_from, laplacian_pinv, on_cycle};
use super::DesignError;
use nalgebra::DMatrix;
use rand::seq::SliceRandom;
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use serde::{Deserialize, Serialize};

/// The allowed pairs of `n` ligands and each one's expected edge variance.
#[derive(Debug, Clone, PartialEq)]
pub struct Candidates {
    n: usize,
    variance: Vec<f64>,
}

impl Candidates {
    /// No allowed pair yet among `n` ligands.
    pub fn new(n: usize) -> Self {
        Candidates {
            n,
            variance: vec![f64::NAN; n * n],
        }
    }

    /// Allows the pair (a, b) with expected edge variance `variance`.
    ///
    /// # Errors
    /// [`DesignError::Input`] for an index ≥ n, a = b, or a variance that is not
    /// finite and positive.
    ///
    /// # Examples
    /// ```
    /// use legwork_numerics::design::edges::Candidates;
    /// let mut c = Candidates::new(3);
    /// c.allow(0, 2, 0.4).unwrap();
    /// assert_eq!(c.get(2, 0), Some(0.4));
    /// assert_eq!(c.get(0, 1), None);
    /// assert!(c.allow(1, 1, 0.4).is_err());
    /// ```
    pub fn allow(&mut self, a: usize, b: usize, variance: f64) -> Result<(), DesignError> {
        if a >= self.n || b >= self.n || a == b {
            return Err(DesignError::Input(format!(
                "pair ({a}, {b}) is not a pair of two different ligands of {}",
                self.n
            )));
        }
        if !(variance.is_finite() && variance > 0.0) {
            return Err(DesignError::Input(format!(
                "pair ({a}, {b}): expected variance {variance}; it must be finite and > 0"
            )));
        }
        self.variance[a * self.n + b] = variance;
        self.variance[b * self.n + a] = variance;
        Ok(())
    }

    /// The expected variance of the pair, when allowed.
    pub fn get(&self, a: usize, b: usize) -> Option<f64> {
        let v = self.variance[a * self.n + b];
        (!v.is_nan()).then_some(v)
    }

    /// Number of ligands.
    pub fn ligands(&self) -> usize {
        self.n
    }

    /// Every allowed pair (a < b) with its variance, in order.
    pub fn pairs(&self) -> Vec<(usize, usize, f64)> {
        let mut out = Vec::new();
        for a in 0..self.n {
            for b in a + 1..self.n {
                if let Some(v) = self.get(a, b) {
                    out.push((a, b, v));
                }
            }
        }
        out
    }

    fn with_variance(&self, edges: &[(usize, usize)]) -> Vec<(usize, usize, f64)> {
        edges
            .iter()
            .map(|&(a, b)| (a, b, self.get(a, b).expect("edges are allowed pairs")))
            .collect()
    }
}

/// What a proposed network must satisfy.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
pub struct EdgeRules {
    /// Number of edges (the budget, one standard run per edge).
    pub edges: usize,
    /// The most edges on the shortest path between any two ligands.
    pub max_path: usize,
    /// Every ligand on at least one cycle (so that a closure checks it).
    pub every_ligand_in_cycle: bool,
}

/// A proposed network and its expected precision.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct EdgeProposal {
    /// The edges (a < b), in the order they were chosen.
    pub edges: Vec<(usize, usize)>,
    /// Expected sum of the ligands' variances, tr(L⁺).
    pub sum_of_variances: f64,
    /// Expected largest ligand σ (series-mean gauge).
    pub largest_sigma: f64,
    /// Longest shortest path, in edges.
    pub diameter: usize,
    /// Edges the rules needed beyond the spanning tree.
    pub repair_edges: usize,
    /// Exchanges that improved the design.
    pub exchanges: usize,
}

/// The minimum spanning tree of the allowed pairs by expected variance
/// (Kruskal 1956, Proc. Am. Math. Soc. 7, 48), as (a, b) with a < b.
///
/// # Errors
/// [`DesignError::Infeasible`] when the allowed pairs do not connect every ligand.
///
/// # Examples
/// ```
/// use legwork_numerics::design::edges::{minimum_spanning_tree, Candidates};
/// let mut c = Candidates::new(3);
/// c.allow(0, 1, 1.0).unwrap();
/// c.allow(1, 2, 1.0).unwrap();
/// c.allow(0, 2, 5.0).unwrap();
/// assert_eq!(minimum_spanning_tree(&c).unwrap(), vec![(0, 1), (1, 2)]);
/// ```
pub fn minimum_spanning_tree(c: &Candidates) -> Result<Vec<(usize, usize)>, DesignError> {
    let mut pairs = c.pairs();
    pairs.sort_by(|x, y| x.2.total_cmp(&y.2));
    let mut parent: Vec<usize> = (0..c.n).collect();
    fn find(p: &mut [usize], mut x: usize) -> usize {
        while p[x] != x {
            p[x] = p[p[x]];
            x = p[x];
        }
        x
    }
    let mut tree = Vec::new();
    for (a, b, _) in pairs {
        let (ra, rb) = (find(&mut parent, a), find(&mut parent, b));
        if ra != rb {
            parent[ra] = rb;
            tree.push((a, b));
        }
    }
    if tree.len() + 1 != c.n {
        let root = find(&mut parent, 0);
        let cut: Vec<usize> = (0..c.n).filter(|&i| find(&mut parent, i) != root).collect();
        return Err(DesignError::Infeasible(format!(
            "the allowed pairs do not connect every ligand: ligand(s) {} cannot be reached from ligand 0; allow more pairs",
            cut.iter().map(|i| i.to_string()).collect::<Vec<_>>().join(", ")
        )));
    }
    Ok(tree)
}

/// How far `edges` are from the rules: ligands not on a cycle plus pairs further
/// apart than the bound (0 when the rules hold).
fn violation(n: usize, edges: &[(usize, usize)], rules: &EdgeRules) -> usize {
    let mut v = 0;
    if rules.every_ligand_in_cycle {
        v += on_cycle(n, edges).iter().filter(|&&x| !x).count();
    }
    let adj = adjacency(n, edges.iter().copied());
    for s in 0..n {
        v += hops_from(&adj, s)
            .iter()
            .skip(s + 1)
            .filter(|d| d.map_or(true, |d| d > rules.max_path))
            .count();
    }
    v
}

/// Trace drop and the vector y = M a of adding an edge of weight w to M = L⁺.
fn add_gain(m: &DMatrix<f64>, a: usize, b: usize, w: f64) -> (f64, f64) {
    let n = m.nrows();
    let mut yy = 0.0;
    for i in 0..n {
        let y = m[(i, b)] - m[(i, a)];
        yy += y * y;
    }
    let r = m[(b, b)] + m[(a, a)] - 2.0 * m[(a, b)];
    (w * yy / (1.0 + w * r), r)
}

/// M + s · y yᵀ with y = M(e_b − e_a), the rank-one update of L⁺ for adding
/// (s = −w / (1 + w r)) or removing (s = w / (1 − w r)) an edge.
fn rank_one(m: &DMatrix<f64>, a: usize, b: usize, s: f64) -> DMatrix<f64> {
    let y = m.column(b) - m.column(a);
    m + (&y * y.transpose()) * s
}

/// Proposes an edge list under `rules` (see the module's documentation for the
/// method). The result is connected, meets the rules, has exactly `rules.edges`
/// edges and no pair twice.
///
/// # Errors
/// [`DesignError::Infeasible`] when the allowed pairs cannot connect the ligands,
/// cannot meet the rules, or need more edges than `rules.edges`;
/// [`DesignError::Input`] for fewer than 3 ligands or more edges than allowed pairs.
///
/// # Examples
/// ```
/// use legwork_numerics::design::edges::{propose_edges, Candidates, EdgeRules};
/// // Four ligands, every pair allowed, 0–1 and 2–3 easy: a ring of four
/// // through the easy pairs.
/// let mut c = Candidates::new(4);
/// for (a, b, v) in [(0, 1, 0.1), (2, 3, 0.1), (0, 2, 1.0), (1, 3, 1.0), (0, 3, 4.0), (1, 2, 4.0)] {
///     c.allow(a, b, v).unwrap();
/// }
/// let rules = EdgeRules { edges: 4, max_path: 3, every_ligand_in_cycle: true };
/// let p = propose_edges(&c, &rules).unwrap();
/// let mut e = p.edges.clone();
/// e.sort();
/// assert_eq!(e, vec![(0, 1), (0, 2), (1, 3), (2, 3)]);
/// ```
pub fn propose_edges(c: &Candidates, rules: &EdgeRules) -> Result<EdgeProposal, DesignError> {
    let n = c.n;
    if n < 3 {
        return Err(DesignError::Input(format!(
            "designing a network needs at least 3 ligands, not {n}"
        )));
    }
    let pairs = c.pairs();
    if rules.edges > pairs.len() {
        return Err(DesignError::Input(format!(
            "{} edges asked for but only {} pairs are allowed; allow more pairs or ask for fewer edges",
            rules.edges,
            pairs.len()
        )));
    }
    let mut edges = minimum_spanning_tree(c)?;
    let tree_len = edges.len();
    let has = |edges: &[(usize, usize)], a: usize, b: usize| edges.contains(&(a, b));

    // Repair the rules, fewest violations first, then the largest trace drop.
    let mut bad = violation(n, &edges, rules);
    while bad > 0 {
        let m = laplacian_pinv(n, &c.with_variance(&edges))?;
        let mut best: Option<(usize, f64, (usize, usize))> = None;
        for &(a, b, v) in &pairs {
            if has(&edges, a, b) {
                continue;
            }
            let mut trial = edges.clone();
            trial.push((a, b));
            let after = violation(n, &trial, rules);
            if after >= bad {
                continue;
            }
            let gain = add_gain(&m, a, b, 1.0 / v).0;
            if best.map_or(true, |(bv, bg, _)| after < bv || (after == bv && gain > bg)) {
                best = Some((after, gain, (a, b)));
            }
        }
        let Some((after, _, e)) = best else {
            let cyc = on_cycle(n, &edges);
            let lonely: Vec<String> = (0..n)
                .filter(|&i| rules.every_ligand_in_cycle && !cyc[i])
                .map(|i| i.to_string())
                .collect();
            return Err(DesignError::Infeasible(format!(
                "no allowed pair brings the network closer to the rules{}; allow more pairs for those ligands or relax the path bound ({})",
                if lonely.is_empty() { String::new() } else { format!(" (not on a cycle: ligand {})", lonely.join(", ")) },
                rules.max_path
            )));
        };
        edges.push(e);
        bad = after;
    }
    let repair_edges = edges.len() - tree_len;
    if edges.len() > rules.edges {
        return Err(DesignError::Infeasible(format!(
            "meeting the rules took {} edges here (a spanning tree of {tree_len} plus {repair_edges} to repair it), more than the {} asked for; ask for {} edges or more",
            edges.len(),
            rules.edges,
            edges.len()
        )));
    }

    // Fill the budget greedily.
    let mut m = laplacian_pinv(n, &c.with_variance(&edges))?;
    while edges.len() < rules.edges {
        let best = pairs
            .iter()
            .filter(|&&(a, b, _)| !has(&edges, a, b))
            .map(|&(a, b, v)| (add_gain(&m, a, b, 1.0 / v), a, b, v))
            .max_by(|x, y| x.0 .0.total_cmp(&y.0 .0))
            .expect("fewer edges than allowed pairs");
        let ((_, r), a, b, v) = best;
        let w = 1.0 / v;
        m = rank_one(&m, a, b, -w / (1.0 + w * r));
        edges.push((a, b));
    }

    // Fedorov exchange.
    let mut exchanges = 0;
    for _pass in 0..200 {
        m = laplacian_pinv(n, &c.with_variance(&edges))?;
        let now = m.trace();
        let mut swaps: Vec<(f64, usize, (usize, usize))> = Vec::new();
        for (k, &(a, b)) in edges.iter().enumerate() {
            let w = 1.0 / c.get(a, b).expect("allowed");
            let r = m[(b, b)] + m[(a, a)] - 2.0 * m[(a, b)];
            if 1.0 - w * r < 1e-9 {
                continue; // a bridge: removing it disconnects the network
            }
            let md = rank_one(&m, a, b, w / (1.0 - w * r));
            let base = md.trace();
            for &(p, q, v) in &pairs {
                if (p, q) == (a, b) || has(&edges, p, q) {
                    continue;
                }
                let after = base - add_gain(&md, p, q, 1.0 / v).0;
                if after < now * (1.0 - 1e-10) {
                    swaps.push((after, k, (p, q)));
                }
            }
        }
        swaps.sort_by(|x, y| x.0.total_cmp(&y.0));
        let chosen = swaps.into_iter().find(|&(_, k, f)| {
            let mut trial = edges.clone();
            trial[k] = f;
            violation(n, &trial, rules) == 0
        });
        match chosen {
            Some((_, k, f)) => {
                edges[k] = f;
                exchanges += 1;
            }
            None => break,
        }
    }
    let m = laplacian_pinv(n, &c.with_variance(&edges))?;
    let adj = adjacency(n, edges.iter().copied());
    Ok(EdgeProposal {
        sum_of_variances: m.trace(),
        largest_sigma: (0..n).map(|i| m[(i, i)]).fold(0.0, f64::max).sqrt(),
        diameter: diameter(&adj).expect("connected"),
        edges,
        repair_edges,
        exchanges,
    })
}

/// The baseline a proposal is compared with: the minimum spanning tree plus
/// `extra` allowed pairs drawn at random (without repeats) with `seed`.
///
/// # Errors
/// As [`minimum_spanning_tree`]; [`DesignError::Input`] when fewer than `extra`
/// pairs remain outside the tree.
///
/// # Examples
/// ```
/// use legwork_numerics::design::edges::{tree_plus_random, Candidates};
/// let mut c = Candidates::new(3);
/// for (a, b) in [(0, 1), (1, 2), (0, 2)] { c.allow(a, b, 1.0).unwrap(); }
/// assert_eq!(tree_plus_random(&c, 1, 7).unwrap().len(), 3);
/// ```
pub fn tree_plus_random(
    c: &Candidates,
    extra: usize,
    seed: u64,
) -> Result<Vec<(usize, usize)>, DesignError> {
    let mut edges = minimum_spanning_tree(c)?;
    let mut rest: Vec<(usize, usize)> = c
        .pairs()
        .into_iter()
        .map(|(a, b, _)| (a, b))
        .filter(|e| !edges.contains(e))
        .collect();
    if rest.len() < extra {
        return Err(DesignError::Input(format!(
            "only {} allowed pairs remain outside the tree, fewer than the {extra} asked for",
            rest.len()
        )));
    }
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    rest.shuffle(&mut rng);
    edges.extend(rest.into_iter().take(extra));
    Ok(edges)
}

/// One suggested extra edge.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ExtraEdge {
    /// Ligand at one end (0-based).
    pub a: usize,
    /// Ligand at the other end.
    pub b: usize,
    /// Its expected variance (from the candidates).
    pub variance: f64,
    /// The largest ligand σ expected once it and the ones before it are run.
    pub largest_sigma_after: f64,
    /// The ligand whose σ is largest before this edge.
    pub worst_before: usize,
}

/// After a run: the `count` allowed pairs that, added one after another, cut the
/// largest ligand σ (series-mean gauge) the most, greedily, with the network's
/// current edges `(a, b, variance)` (as measured) and each candidate's expected
/// variance from `c`. Pairs already run are not suggested again.
///
/// # Errors
/// As [`laplacian_pinv`] for the current network (it must connect all
/// `c.ligands()` ligands).
///
/// # Examples
/// ```
/// use legwork_numerics::design::edges::{extra_edges, Candidates};
/// // A path 0 − 1 − 2 − 3: closing it end to end helps the ends the most.
/// let now = [(0, 1, 1.0), (1, 2, 1.0), (2, 3, 1.0)];
/// let mut c = Candidates::new(4);
/// c.allow(0, 3, 1.0).unwrap();
/// c.allow(0, 2, 1.0).unwrap();
/// let x = extra_edges(&now, &c, 1).unwrap();
/// assert_eq!((x[0].a, x[0].b), (0, 3));
/// ```
pub fn extra_edges(
    current: &[(usize, usize, f64)],
    c: &Candidates,
    count: usize,
) -> Result<Vec<ExtraEdge>, DesignError> {
    let n = c.n;
    let mut m = laplacian_pinv(n, current)?;
    let mut taken: Vec<(usize, usize)> = current
        .iter()
        .map(|&(a, b, _)| (a.min(b), a.max(b)))
        .collect();
    let mut out = Vec::new();
    for _ in 0..count {
        let worst_before = (0..n)
            .max_by(|&i, &j| m[(i, i)].total_cmp(&m[(j, j)]))
            .expect("ligands");
        let mut best: Option<(f64, usize, usize, f64)> = None;
        for (a, b, v) in c.pairs() {
            if taken.contains(&(a, b)) {
                continue;
            }
            let w = 1.0 / v;
            let r = m[(b, b)] + m[(a, a)] - 2.0 * m[(a, b)];
            let s = w / (1.0 + w * r);
            let largest = (0..n)
                .map(|i| {
                    let y = m[(i, b)] - m[(i, a)];
                    m[(i, i)] - s * y * y
                })
                .fold(0.0, f64::max);
            if best.map_or(true, |bb| largest < bb.0) {
                best = Some((largest, a, b, v));
            }
        }
        let Some((largest, a, b, v)) = best else {
            break;
        };
        let w = 1.0 / v;
        let r = m[(b, b)] + m[(a, a)] - 2.0 * m[(a, b)];
        m = rank_one(&m, a, b, -w / (1.0 + w * r));
        taken.push((a, b));
        out.push(ExtraEdge {
            a,
            b,
            variance: v,
            largest_sigma_after: largest.max(0.0).sqrt(),
            worst_before,
        });
    }
    Ok(out)
}
