//! Graph linear algebra shared by the allocator and the edge designer.

use super::DesignError;
use nalgebra::DMatrix;
use std::collections::VecDeque;

/// The pseudo-inverse L⁺ of the weighted graph Laplacian L = Σₑ wₑ aₑaₑᵀ of a
/// connected network (aₑ = e_b − e_a, wₑ = 1/σₑ²), computed as (L + J/n)⁻¹ − J/n
/// with J the all-ones matrix (exact for a connected graph, whose Laplacian has
/// the constant vector as its only null direction).
///
/// L⁺ is the covariance of the weighted least-squares ligand ΔG in the gauge
/// where they average to zero (the series mean); its trace is the sum of the
/// ligands' variances in that gauge, and equals (1/n) Σ_{i<j} Var(G_j − G_i)
/// (the Kirchhoff index over n; Klein & Randić 1993, J. Math. Chem. 12, 81), so it
/// does not depend on how the offset is fixed.
///
/// `edges` are `(a, b, variance)` with 0-based ligand indices.
///
/// # Errors
/// [`DesignError::Input`] for an index ≥ `n`, a self-loop or a variance that is
/// not finite and positive; [`DesignError::Infeasible`] when the network is not
/// connected.
///
/// # Examples
/// ```
/// use legwork_numerics::design::laplacian_pinv;
/// // Two ligands, one edge of variance 0.5: Var(G_0) = Var(G_1) = 0.5/4.
/// let c = laplacian_pinv(2, &[(0, 1, 0.5)]).unwrap();
/// assert!((c[(0, 0)] - 0.125).abs() < 1e-12);
/// assert!((c[(0, 1)] + 0.125).abs() < 1e-12);
/// ```
pub fn laplacian_pinv(
    n: usize,
    edges: &[(usize, usize, f64)],
) -> Result<DMatrix<f64>, DesignError> {
    check_edges(n, edges)?;
    if !connected(n, edges.iter().map(|e| (e.0, e.1))) {
        return Err(DesignError::Infeasible(format!(
            "the {} edges do not connect all {n} ligands; add edges so that every ligand can be reached",
            edges.len()
        )));
    }
    let nf = n as f64;
    let mut l = DMatrix::<f64>::from_element(n, n, 1.0 / nf);
    for &(a, b, v) in edges {
        let w = 1.0 / v;
        l[(a, a)] += w;
        l[(b, b)] += w;
        l[(a, b)] -= w;
        l[(b, a)] -= w;
    }
    let inv = l
        .cholesky()
        .ok_or_else(|| {
            DesignError::Input(
                "the network's normal matrix is not positive definite (edge variances spanning too many orders of magnitude?); rescale the variances".into(),
            )
        })?
        .inverse();
    Ok(inv.add_scalar(-1.0 / nf))
}

/// The sum of the ligands' variances, tr(L⁺) (see [`laplacian_pinv`]), of a
/// connected network of `n` ligands with edges `(a, b, variance)`.
///
/// # Errors
/// As [`laplacian_pinv`].
///
/// # Examples
/// ```
/// use legwork_numerics::design::sum_of_variances;
/// // A chain 0 − 1 − 2 with unit variances: Var(G1−G0) = Var(G2−G1) = 1 and
/// // Var(G2−G0) = 2, so tr(L⁺) = (1 + 1 + 2)/3.
/// let s = sum_of_variances(3, &[(0, 1, 1.0), (1, 2, 1.0)]).unwrap();
/// assert!((s - 4.0 / 3.0).abs() < 1e-12);
/// ```
pub fn sum_of_variances(n: usize, edges: &[(usize, usize, f64)]) -> Result<f64, DesignError> {
    Ok(laplacian_pinv(n, edges)?.trace())
}

pub(crate) fn check_edges(n: usize, edges: &[(usize, usize, f64)]) -> Result<(), DesignError> {
    if n < 2 {
        return Err(DesignError::Input(format!(
            "a network needs at least 2 ligands, not {n}"
        )));
    }
    for (k, &(a, b, v)) in edges.iter().enumerate() {
        if a >= n || b >= n {
            return Err(DesignError::Input(format!(
                "edge {k} ({a}, {b}) names a ligand index ≥ {n}"
            )));
        }
        if a == b {
            return Err(DesignError::Input(format!(
                "edge {k} joins ligand {a} to itself; remove it"
            )));
        }
        if !(v.is_finite() && v > 0.0) {
            return Err(DesignError::Input(format!(
                "edge {k} ({a}, {b}) has variance {v}; it needs a finite positive variance"
            )));
        }
    }
    Ok(())
}

/// Adjacency lists of an undirected graph.
pub(crate) fn adjacency(
    n: usize,
    edges: impl IntoIterator<Item = (usize, usize)>,
) -> Vec<Vec<usize>> {
    let mut adj = vec![Vec::new(); n];
    for (a, b) in edges {
        adj[a].push(b);
        adj[b].push(a);
    }
    adj
}

pub(crate) fn connected(n: usize, edges: impl IntoIterator<Item = (usize, usize)>) -> bool {
    let adj = adjacency(n, edges);
    hops_from(&adj, 0).iter().all(|d| d.is_some())
}

/// Hop distances from `s` (breadth-first search).
pub(crate) fn hops_from(adj: &[Vec<usize>], s: usize) -> Vec<Option<usize>> {
    let mut d = vec![None; adj.len()];
    if adj.is_empty() {
        return d;
    }
    d[s] = Some(0);
    let mut q = VecDeque::from([s]);
    while let Some(u) = q.pop_front() {
        let du = d[u].expect("queued nodes have a distance");
        for &v in &adj[u] {
            if d[v].is_none() {
                d[v] = Some(du + 1);
                q.push_back(v);
            }
        }
    }
    d
}

/// The longest shortest path in hops (`None` when disconnected).
pub(crate) fn diameter(adj: &[Vec<usize>]) -> Option<usize> {
    let mut best = 0;
    for s in 0..adj.len() {
        for d in hops_from(adj, s) {
            best = best.max(d?);
        }
    }
    Some(best)
}

/// Whether each node lies on a cycle, i.e. has an incident edge that is not a
/// bridge. Bridges by Tarjan's low-link depth-first search (Tarjan 1974, Inf.
/// Process. Lett. 2, 160), iteratively; parallel edges are distinct edges.
pub(crate) fn on_cycle(n: usize, edges: &[(usize, usize)]) -> Vec<bool> {
    let mut adj: Vec<Vec<(usize, usize)>> = vec![Vec::new(); n];
    for (k, &(a, b)) in edges.iter().enumerate() {
        adj[a].push((b, k));
        adj[b].push((a, k));
    }
    let mut disc = vec![usize::MAX; n];
    let mut low = vec![0usize; n];
    let mut bridge = vec![false; edges.len()];
    let mut time = 0;
    for root in 0..n {
        if disc[root] != usize::MAX {
            continue;
        }
        // Stack of (node, edge it was entered by, next neighbour index).
        let mut stack: Vec<(usize, usize, usize)> = vec![(root, usize::MAX, 0)];
        disc[root] = time;
        low[root] = time;
        time += 1;
        while let Some(&mut (u, via, ref mut next)) = stack.last_mut() {
            if *next < adj[u].len() {
                let (v, k) = adj[u][*next];
                *next += 1;
                if k == via {
                    continue;
                }
                if disc[v] == usize::MAX {
                    disc[v] = time;
                    low[v] = time;
                    time += 1;
                    stack.push((v, k, 0));
                } else {
                    low[u] = low[u].min(disc[v]);
                }
            } else {
                stack.pop();
                if let Some(&(p, _, _)) = stack.last() {
                    low[p] = low[p].min(low[u]);
                    if low[u] > disc[p] {
                        bridge[via] = true;
                    }
                }
            }
        }
    }
    let mut on = vec![false; n];
    for (k, &(a, b)) in edges.iter().enumerate() {
        if !bridge[k] {
            on[a] = true;
            on[b] = true;
        }
    }
    on
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn bridges_of_two_triangles_joined_by_one_edge() {
        // 0-1-2-0 and 3-4-5-3, joined by 2-3: every node is on a cycle.
        let e = [(0, 1), (1, 2), (2, 0), (3, 4), (4, 5), (5, 3), (2, 3)];
        assert!(on_cycle(6, &e).iter().all(|&x| x));
        // A pendant node 6 is not.
        let mut e2 = e.to_vec();
        e2.push((5, 6));
        let on = on_cycle(7, &e2);
        assert!(!on[6] && on[5]);
        // A path has no cycle; a doubled edge is one.
        assert!(on_cycle(3, &[(0, 1), (1, 2)]).iter().all(|&x| !x));
        assert_eq!(
            on_cycle(3, &[(0, 1), (1, 2), (1, 2)]),
            vec![false, true, true]
        );
    }

    #[test]
    fn diameter_of_a_path_and_a_ring() {
        let path = adjacency(5, [(0, 1), (1, 2), (2, 3), (3, 4)]);
        assert_eq!(diameter(&path), Some(4));
        let ring = adjacency(5, [(0, 1), (1, 2), (2, 3), (3, 4), (4, 0)]);
        assert_eq!(diameter(&ring), Some(2));
        assert_eq!(diameter(&adjacency(3, [(0, 1)])), None);
    }
}
